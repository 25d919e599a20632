"""Spacetime around a mass: horizon scale, proper distance, redshift, clock rates.

All functions take the central mass as a mass or a gravitational parameter GM;
internally they work in GM (known far better than G·M for solar-system bodies).

Sources: "(read)" marks a text read for this entry; "(from memory: …)" one that could not
be read — a book, or a paper whose text is not among the stored copies the team can search
— with the value or equation recalled and checked by the tests against an outside reference.
"""

from __future__ import annotations

import astropy.units as u
import numpy as np

from ...errors import ArgumentError
from ..units import quantity
from ..validity import warn
from . import args as check
from . import register
from .args import Angle, Dimensionless, Length, Mass, Speed, Time

TOPIC = "spacetime"


@register("schwarzschild_radius", TOPIC)
def schwarzschild_radius(M: Mass) -> Length:
    """Schwarzschild radius r_s = 2GM/c² of a mass.

    Formula:   r_s = 2 G M / c²
    Arguments: M  mass or gravitational parameter GM
    Result:    length, in km
    Validity:  exact for a static, spherically symmetric, uncharged mass (the Schwarzschild
               solution); for a rotating body it is the scale 2GM/c², not a horizon radius.
    PPN:       none (a property of the metric's mass parameter).
    Source:    K. Schwarzschild 1916, Sitzungsber. Preuss. Akad. Wiss. Berlin, 189;
               Misner, Thorne & Wheeler 1973, Gravitation, ch. 31 (from memory: a book).
    """
    gm = check.gravitational_parameter(M)
    c = check.speed_of_light()
    return quantity(2 * gm / c**2 / 1e3, u.km)


def _horizon(gm, c):
    return 2 * gm / c**2


def _outside(r, rs, q: u.Quantity, name: str) -> None:
    if np.any(np.asarray(r) <= rs):
        raise ArgumentError(f"`{name}` = {check.show(q)} lies inside the Schwarzschild radius "
                            f"({rs / 1e3:.6g} km)", name)


@register("proper_radial_distance", TOPIC)
def proper_radial_distance(M: Mass, r1: Length, r2: Length,
                           gamma: Dimensionless | None = None) -> Length:
    """Proper radial distance between two Schwarzschild radii r1 and r2 (exact in GR).

    Formula:   D = ∫ dr / √(1 − r_s/r) from r1 to r2
                 = [√(r(r − r_s)) + r_s ln(√r + √(r − r_s))] from r1 to r2,
               evaluated as differences that do not cancel (a 1 km step at a solar
               radius keeps full precision); negative when r2 < r1. With γ ≠ 1 the
               first-order PPN difference (γ − 1) GM/c² ln(r2/r1) is added.
    Arguments: M  mass or GM;  r1, r2  radial coordinates (lengths, > r_s): the areal
               radius, circumference/2π;  gamma  PPN γ (default: the sheet's `ppn gamma`,
               else 1)
    Result:    length, in km
    Validity:  exact on a static slice of the Schwarzschild metric, outside the horizon,
               for γ = 1. For γ ≠ 1 only the first order in GM/(c² r) is defined: the PPN
               metric is a weak-field expansion, and its O((GM/c²r)²) spatial terms carry
               no parameter.
    PPN:       the excess over r2 − r1 is γ GM/c² ln(r2/r1) to first order: the PPN spatial
               metric (1 + 2γU/c²) δ_ij in isotropic coordinates gives g_rr = 1 + 2γ GM/(c² r)
               in the areal radius r.
    Source:    Misner, Thorne & Wheeler 1973, Gravitation, §31.2; Hartle 2003, Gravity,
               §9.1 (from memory: books); PPN metric: Will 2014, Living Rev. Relativ. 17, 4,
               §3.2 (from memory: not reachable).
    """
    gm = check.gravitational_parameter(M)
    a = check.length(r1, "r1")
    b = check.length(r2, "r2")
    g = check.ppn(gamma, "gamma")
    c = check.speed_of_light()
    rs = _horizon(gm, c)
    _outside(a, rs, r1, "r1")
    _outside(b, rs, r2, "r2")
    sa, sb = np.sqrt(a), np.sqrt(b)
    ta, tb = np.sqrt(a - rs), np.sqrt(b - rs)
    step = b - a
    # √(b(b−rs)) − √(a(a−rs)) = (b − a)(a + b − rs) / (√(b(b−rs)) + √(a(a−rs)))
    first = step * (a + b - rs) / (sb * tb + sa * ta)
    # rs ln((√b + √(b−rs)) / (√a + √(a−rs))) with the ratio written as 1 + small
    grow = step / (sa + sb) + step / (ta + tb)
    second = rs * np.log1p(grow / (sa + ta))
    distance = first + second
    if np.any(np.asarray(g) != 1):
        # (γ − 1) GM/c² ln(r2/r1), with the logarithm of 1 + (r2 − r1)/r1
        distance = distance + (np.asarray(g) - 1) * gm / c**2 * np.log1p(step / a)
    return quantity(distance / 1e3, u.km)


@register("gravitational_redshift", TOPIC)
def gravitational_redshift(M: Mass, r_emit: Length, r_obs: Length) -> Dimensionless:
    """Redshift z of light sent by a static emitter at r_emit to a static observer at r_obs.

    Formula:   1 + z = √((1 − r_s/r_obs) / (1 − r_s/r_emit)),  r_s = 2GM/c²
               (computed as expm1 of a difference of log1p terms, exact to rounding);
               z > 0 when the emitter sits deeper in the potential. `r_obs` may be `inf`.
               For weak fields z ≈ GM/c² (1/r_emit − 1/r_obs).
    Arguments: M  mass or GM;  r_emit, r_obs  Schwarzschild radial coordinates (> r_s)
    Result:    dimensionless
    Validity:  exact for static observers in the Schwarzschild metric (no motion, no rotation).
    PPN:       none at first order (the redshift tests the equivalence principle, not γ or β).
    Source:    A. Einstein 1911, Ann. Phys. 35, 898; Will 2014, Living Rev. Relativ. 17, 4,
               §2.4 (from memory: not reachable); checked against Pound & Rebka 1960, Phys.
               Rev. Lett. 4, 337.
    """
    gm = check.gravitational_parameter(M)
    re = check.length(r_emit, "r_emit")
    ro = check.length(r_obs, "r_obs", allow_infinite=True)
    rs = _horizon(gm, check.speed_of_light())
    _outside(re, rs, r_emit, "r_emit")
    _outside(ro, rs, r_obs, "r_obs")
    log_ratio = 0.5 * (np.log1p(-rs / ro) - np.log1p(-rs / re))
    return quantity(np.expm1(log_ratio))


def _quadrupole(J2: u.Quantity | None, R: u.Quantity | None, latitude: u.Quantity | None):
    """(J2, R, sin φ) of the central body's quadrupole term, or None when it is left out."""
    given = {"J2": J2 is not None, "R": R is not None}
    if not any(given.values()):
        if latitude is not None:
            raise ArgumentError("`latitude` enters only with the quadrupole term: give `J2` and "
                                "`R` as well", "latitude")
        return None
    for name, present in given.items():
        if not present:
            other = "R" if name == "J2" else "J2"
            raise ArgumentError(f"the quadrupole term needs `{name}` together with `{other}`",
                                name)
    if latitude is None:
        raise ArgumentError("the quadrupole term needs the clock's geocentric `latitude`",
                            "latitude")
    j2 = check.dimensionless(J2, "J2")
    radius = check.length(R, "R")
    phi = check.angle(latitude, "latitude")
    if np.any(np.abs(np.asarray(phi)) > np.pi / 2 * (1 + 1e-12)):
        raise ArgumentError(f"`latitude` must lie between −90 and 90 deg, got "
                            f"{check.show(latitude)}", "latitude")
    return j2, radius, np.sin(phi)


@register("clock_rate", TOPIC)
def clock_rate(M: Mass, r: Length, v: Speed | None = None, J2: Dimensionless | None = None,
               R: Length | None = None, latitude: Angle | None = None) -> Dimensionless:
    """Fractional rate dτ/dt − 1 of a clock at distance r moving at speed v (first order).

    Formula:   dτ/dt − 1 = −U/c² − v²/(2 c²),
               U = GM/r · [1 − J2 (R/r)² P2(sin φ)],  P2(x) = (3x² − 1)/2
               (without J2: U = GM/r)
    Arguments: M  mass or GM;  r  distance from the centre (length);
               v  speed in the non-rotating frame of the central mass (default 0; for a
               clock on the rotating Earth, ω r cos φ);  J2, R  the body's second zonal
               harmonic and its reference radius (optional, together);  latitude  the
               clock's geocentric latitude φ (angle; needed with J2)
    Result:    dimensionless (multiply by a day to get the offset per day)
    Validity:  first order in GM/(c² r) and v²/c²; the body's potential to degree 2 (J4
               and higher zonals, tesserals and tides are left out: J4 moves a ground
               clock by about 5e-16). Terms of order 1e-18 and the potential of other
               bodies are neglected. Timekeeping work follows IAU 2000 Resolution B1.9
               and the IERS Conventions (2010), ch. 10, where the full metric and
               potentials are specified.
    PPN:       none at this order (the γ and β terms enter at order 1/c⁴).
    Source:    N. Ashby 2003, Living Rev. Relativ. 6, 1, eq. (13) (read: V = −GM/r [1 −
               J2 (a1/r)² P2(cos θ)], θ the polar angle) and eq. (27) (from memory: the
               stored copy shows its equations as images);
               IERS Conventions 2010 (IERS Technical Note 36), ch. 10.
    """
    gm = check.gravitational_parameter(M)
    radius = check.length(r, "r")
    speed = 0.0 if v is None else check.speed(v, "v")
    quadrupole = _quadrupole(J2, R, latitude)
    c = check.speed_of_light()
    check.weak_field(gm, radius, "r", c)
    if np.max(np.asarray(speed)) > 0.1 * c:
        warn("`v` is above 0.1 c: the v²/(2c²) term is only the first order of the time dilation")
    potential = gm / radius
    if quadrupole is not None:
        j2, body_radius, sin_phi = quadrupole
        if np.any(np.asarray(radius) < 0.9 * np.asarray(body_radius)):
            warn("`r` is well inside `R`: the zonal expansion of the potential holds outside "
                 "the body")
        p2 = (3 * np.asarray(sin_phi) ** 2 - 1) / 2
        potential = potential * (1 - j2 * (body_radius / radius) ** 2 * p2)
    return quantity(-potential / c**2 - np.asarray(speed) ** 2 / (2 * c**2))


@register("eccentricity_clock_term", TOPIC)
def eccentricity_clock_term(M: Mass, a: Length, e: Dimensionless) -> Time:
    """Amplitude 2√(GMa)·e/c² of the periodic relativistic clock term of an eccentric orbit.

    Formula:   Δt_r = −(2/c²) √(GM a) e sin E  (E the eccentric anomaly); this returns the
               amplitude 2 √(GM a) e / c² (the GNSS constant F = −2√GM/c² times e √a)
    Arguments: M  mass or GM of the central body;  a  semi-major axis (length);
               e  eccentricity (0 ≤ e < 1)
    Result:    time, in s
    Validity:  first order in GM/(c² a); Keplerian orbit. For the Earth's orbit about the Sun
               it gives the leading annual term of TDB − TT.
    PPN:       none at this order.
    Source:    IS-GPS-200, §20.3.3.3.3.1; Ashby 2003, Living Rev. Relativ. 6, 1, eq. (44)
               (from memory: the specification is not reachable, Ashby's equations are images
               in the stored copy); Fairhead & Bretagnon 1990, Astron. Astrophys. 229, 240.
    """
    gm = check.gravitational_parameter(M)
    semi = check.length(a, "a")
    ecc = check.eccentricity(e)
    c = check.speed_of_light()
    check.weak_field(gm, semi, "a", c)
    return quantity(2 * np.sqrt(gm * semi) * ecc / c**2, u.s)

