"""Strong field: exact results for the Schwarzschild metric.

Orbits and rays near a non-rotating black hole (or outside any spherical body),
without the weak-field expansion: the innermost stable circular orbit, the photon
sphere, the shadow, the periapsis advance of a bound geodesic and the deflection of
a light ray. These are general relativity's exact results; the PPN formalism is a
weak-field expansion and has no parameter for them (the weak-field functions in
`orbits` and `light` take γ and β).

Sources: "(read)" marks a text read for this entry; "(from memory: …)" one that could not
be read — a book, or a paper whose text is not among the stored copies the team can search
— with the value or equation recalled and checked by the tests against an outside reference.
"""

from __future__ import annotations

from functools import cache

import astropy.units as u
import numpy as np

from ...errors import ArgumentError
from ..units import quantity
from ..validity import warn
from . import args as check
from . import register
from .args import Angle, Dimensionless, Length, Mass

TOPIC = "strongfield"

_ARCSEC = np.pi / (180 * 3600)
_MICROARCSEC = _ARCSEC * 1e-6


def _gravitational_radius(M: u.Quantity) -> float:
    """GM/c² in metres."""
    return check.gravitational_parameter(M) / check.speed_of_light() ** 2


@register("isco_radius", TOPIC)
def isco_radius(M: Mass) -> Length:
    """Radius of the innermost stable circular orbit of a Schwarzschild mass, 6GM/c².

    Formula:   r_isco = 6 G M / c²   (Schwarzschild radial coordinate)
    Arguments: M  mass or gravitational parameter GM
    Result:    length, in km
    Validity:  exact for a test body around a non-rotating, uncharged mass (the Kerr ISCO
               of a spinning hole lies between GM/c² and 9GM/c²).
    PPN:       none: an exact general-relativistic result outside the PPN expansion.
    Source:    Misner, Thorne & Wheeler 1973, Gravitation, §25.5; Hartle 2003, Gravity,
               §9.3 (from memory: books).
    """
    return quantity(6 * _gravitational_radius(M) / 1e3, u.km)


@register("photon_sphere_radius", TOPIC)
def photon_sphere_radius(M: Mass) -> Length:
    """Radius of the photon sphere of a Schwarzschild mass, 3GM/c² (unstable circular light orbits).

    Formula:   r_ph = 3 G M / c²   (Schwarzschild radial coordinate)
    Arguments: M  mass or gravitational parameter GM
    Result:    length, in km
    Validity:  exact for a non-rotating, uncharged mass whose surface lies inside it.
    PPN:       none: an exact general-relativistic result outside the PPN expansion.
    Source:    Misner, Thorne & Wheeler 1973, Gravitation, §25.6 (from memory: a book).
    """
    return quantity(3 * _gravitational_radius(M) / 1e3, u.km)


@register("shadow_angle", TOPIC)
def shadow_angle(M: Mass, d: Length) -> Angle:
    """Angular diameter of a Schwarzschild black hole's shadow seen from far away.

    Formula:   θ_sh = 2 b_c / d = 2√27 G M / (c² d),  b_c = 3√3 GM/c² the critical impact
               parameter of light (rays with b < b_c are captured)
    Arguments: M  mass or GM;  d  distance of the observer (length)
    Result:    angle, in µas: the DIAMETER of the shadow
    Validity:  distant observer (d ≫ GM/c²), non-rotating hole, flat space between; spin
               changes the diameter by at most a few per cent. A static observer at radius
               d sees the angular radius arcsin(√27 GM/(c² d) · √(1 − 2GM/(c² d))).
    PPN:       none: an exact general-relativistic result outside the PPN expansion.
    Source:    Synge 1966, MNRAS 131, 463; Event Horizon Telescope Collaboration 2019, ApJL
               875, L6 (diameter 2√27 θ_g) (from memory: not reachable).
    """
    m = _gravitational_radius(M)
    distance = check.length(d, "d")
    if np.any(np.asarray(distance) <= 3 * m):
        raise ArgumentError(f"`d` = {check.show(d)} lies inside the photon sphere "
                            f"({3 * m / 1e3:.6g} km): no shadow is seen from there", "d")
    if np.any(m / np.asarray(distance) > 1e-3):
        warn("`d` is within 1000 GM/c² of the hole: the distant-observer diameter has a "
             "relative error of order GM/(c² d)")
    return quantity(2 * np.sqrt(27) * m / distance / _MICROARCSEC, u.uas)


def _agm_deviation(m):
    """δ with 1 + δ = AGM(1, √(1 − m)), carried as deviations from 1 (no cancellation).

    K(m) = π / (2 AGM(1, √(1 − m))) (DLMF 19.8.5), so ln(2K/π) = −ln(1 + δ) keeps full
    relative precision even when m is 1e-12. The loop runs over iterations on whole arrays.
    """
    da = np.zeros_like(m)
    db = -m / (1 + np.sqrt(1 - m))              # √(1 − m) − 1
    for _ in range(64):
        da, db = 0.5 * (da + db), np.expm1(0.5 * (np.log1p(da) + np.log1p(db)))
        if np.all(np.abs(da - db) <= 1e-16 * np.abs(da)):
            break
    return 0.5 * (da + db)


@register("periapsis_advance_exact", TOPIC)
def periapsis_advance_exact(M: Mass, a: Length, e: Dimensionless) -> Angle:
    """Periapsis advance per radial period of a bound Schwarzschild geodesic (exact).

    Formula:   with p = a (1 − e²), μ = GM/(c² p), the turning points r = a (1 ± e):
               Δφ = 2 ∫₀^π dχ / √(1 − 2μ (3 + e cos χ)) = 4 K(k²) / √(1 − 6μ + 2μe),
               k² = 4μe / (1 − 6μ + 2μe);  advance = Δφ − 2π
               (K by the arithmetic–geometric mean, written so that nothing cancels)
    Arguments: M  mass or GM of the central body;  a  semi-major axis defined by the turning
               points, r_min = a (1 − e), r_max = a (1 + e) (Schwarzschild radial coordinate);
               e  eccentricity (0 ≤ e < 1)
    Result:    angle per orbit, in arcsec
    Validity:  exact for a test body (mass ≪ M) around a non-rotating mass, when a bound
               orbit with these turning points exists: p > (6 + 2e) GM/c². Far out it tends
               to 6πGM/(c² p) (`periapsis_advance`); the next term is (3π/2)(18 + e²)(GM/c²p)².
    PPN:       none: an exact general-relativistic result outside the PPN expansion (use
               `periapsis_advance` for the first-order PPN form).
    Source:    Darwin 1959, Proc. R. Soc. A 249, 180; Cutler, Kennefick & Poisson 1994,
               Phys. Rev. D 50, 3816 (the separatrix p = (6 + 2e) GM/c²) (from memory: not
               reachable); K(k) = π/(2 AGM(1, k')): DLMF §19.8(i), eq. 19.8.5 (from memory:
               not reachable; the tests compare with scipy.special.ellipk).
    """
    m = _gravitational_radius(M)
    semi = check.length(a, "a")
    ecc = check.eccentricity(e)
    p = semi * (1 - ecc**2)
    mu = m / p
    if np.any(np.asarray(p) <= (6 + 2 * np.asarray(ecc)) * m):
        raise ArgumentError(
            f"no bound orbit has the turning points a(1 ± e) here: a(1 − e²) must exceed "
            f"(6 + 2e) GM/c² = {np.min((6 + 2 * np.asarray(ecc)) * m) / 1e3:.6g} km (inside that "
            "the body plunges)", "a")
    shift = -6 * mu + 2 * mu * ecc                     # D − 1, D = 1 − 6μ + 2μe
    k2 = 4 * mu * ecc / (1 + shift)
    delta = _agm_deviation(np.asarray(k2, dtype=float))
    # Δφ/2π = (2K/π)/√D = 1 / ((1 + δ) √D): its excess over 1 by logarithms
    advance = 2 * np.pi * np.expm1(-np.log1p(delta) - 0.5 * np.log1p(shift))
    return quantity(advance / _ARCSEC, u.arcsec)


@cache
def _legendre(n: int = 64):
    """Gauss–Legendre nodes and weights mapped to [0, 1]."""
    nodes, weights = np.polynomial.legendre.leggauss(n)
    return 0.5 * (nodes + 1), 0.5 * weights


def _deflection_near(eps):
    """α for ε = 2GM/(c² r0) ≤ 1/2 by a quadrature that does not cancel against π.

    With w = b/r = w0 s, the flat-space integral (π/2) is subtracted under the integral
    sign; s = 1 − t² removes the endpoint singularity:
    α = 4ε ∫₀¹ q / (√A √B (√A + √B)) dt,  A = 1 + s, q = 1 + s + s², B = A − ε q.
    The integrand is analytic on [0, 1] with its nearest singularity beyond |Δt| ≈ 0.8.
    """
    t, w = _legendre()
    e = np.asarray(eps, dtype=float)[..., None]
    s = 1 - t**2
    a = 1 + s
    q = 1 + s + s**2
    b = a - e * q
    ra, rb = np.sqrt(a), np.sqrt(b)
    return 4 * np.asarray(eps) * np.sum(w * q / (ra * rb * (ra + rb)), axis=-1)


def _deflection_far(x, w0):
    """α from elliptic integrals (Darwin's closed form), for rays passing within 4 GM/c².

    2x w³ − w² + 1 = 2x (w − e1)(w − e2)(w − e3), e1 > e2 = w0 = b/r0 > 0 > e3;
    α = 4 [K(k²) − F(θ0 | k²)] / √(2x (e1 − e3)) − π,
    k² = (e2 − e3)/(e1 − e3), sin² θ0 = −e3/(e2 − e3).
    """
    from scipy.special import ellipkinc, ellipkm1

    s = 1 / (2 * x) - w0                      # e1 + e3
    prod = -1 / (2 * x * w0)                  # e1 e3
    e1 = s / 2 + np.sqrt(s**2 / 4 - prod)
    e3 = prod / e1
    spread = e1 - e3
    k2 = (w0 - e3) / spread
    theta0 = np.arcsin(np.sqrt(-e3 / (w0 - e3)))
    complete = ellipkm1((e1 - w0) / spread)  # K(k²) from 1 − k², accurate near capture
    return 4 * (complete - ellipkinc(theta0, k2)) / np.sqrt(2 * x * spread) - np.pi


@register("deflection_exact", "light")
def deflection_exact(M: Mass, b: Length) -> Angle:
    """Total deflection of a light ray by a Schwarzschild mass, exact (null geodesic).

    Formula:   α = 2 ∫₀^{u0} du / √(1/b² − u² (1 − 2GM u/c²)) − π,
               u0 = 1/r0, r0 = (2b/√3) cos(⅓ arccos(−3√3 GM/(c² b))) the closest approach.
               Rays passing outside 4GM/c²: Gauss–Legendre quadrature of the integrand
               minus its flat-space value; closer rays: Darwin's elliptic-integral form.
               Weak field: α = 4m/b + (15π/4)(m/b)² + (128/3)(m/b)³ + …, m = GM/c².
    Arguments: M  mass or GM;  b  impact parameter (length): the angular momentum over the
               energy of the ray, L/E, not the distance of closest approach
    Result:    angle, in arcsec (above 2π once the ray winds around the hole)
    Validity:  exact for a ray from and to infinity past a non-rotating mass whose surface
               lies inside r0; b must exceed 3√3 GM/c² (smaller b: the ray is captured).
    PPN:       none: general relativity's exact result. To second order the PPN expansion
               would need γ, β and a second-order parameter the sheet does not carry
               (Epstein & Shapiro 1980); `deflection` gives the first-order PPN form.
    Source:    Darwin 1959, Proc. R. Soc. A 249, 180; Epstein & Shapiro 1980, Phys. Rev. D
               22, 2947; Keeton & Petters 2005, Phys. Rev. D 72, 104006 (series
               coefficients) (from memory: the texts are not reachable; the tests compare
               with scipy quadrature and solve_ivp).
    """
    m = _gravitational_radius(M)
    impact = check.length(b, "b")
    x = m / np.asarray(impact)
    critical = 1 / np.sqrt(27)
    if np.any(x >= critical):
        raise ArgumentError(
            f"`b` = {check.show(b)} is at or below 3√3 GM/c² ({np.sqrt(27) * m / 1e3:.6g} km): "
            "the ray is captured by the black hole and has no deflection", "b")
    w0 = _inverse_closest_approach(x)
    eps = 2 * x * w0                                                          # 2m / r0
    near = np.asarray(eps) <= 0.5
    if np.all(near):
        alpha = _deflection_near(eps)
    else:
        # each branch is evaluated on all elements, the other branch's ones moved into its
        # own domain (r0 = 4m is x = 0.177; x = 0.1 is a harmless stand-in) and discarded
        far_x = np.maximum(x, 0.1)
        alpha = np.where(near, _deflection_near(np.minimum(eps, 0.5)),
                         _deflection_far(far_x, _inverse_closest_approach(far_x)))
    return quantity(alpha / _ARCSEC, u.arcsec)


def _inverse_closest_approach(x):
    """b/r0 for m/b = x: r0 = (2b/√3) cos(⅓ arccos(−3√3 x)), the largest root of
    r³ − b² r + 2 m b² = 0 (trigonometric solution of the cubic)."""
    return np.sqrt(3) / (2 * np.cos(np.arccos(-3 * np.sqrt(3) * x) / 3))
