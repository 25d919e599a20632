"""Light and signals near a mass: deflection, lensing, the Shapiro delay, the solar plasma.

Weak-field, first post-Newtonian formulas: the PPN parameter γ enters as
(1 + γ)/2 relative to general relativity. Deflections come in arcseconds
(`einstein_radius` and `centroid_shift` in milliarcseconds), delays in
microseconds, Doppler observables as the dimensionless y = d(Δt)/dt.

The relativistic and the plasma terms of a radio link near the Sun sit side by
side: `conjunction_delay` and `plasma_delay`, `shapiro_doppler` and
`plasma_doppler`; the plasma terms scale as 1/f² (X band 8.4 GHz, Ka band 32 GHz).
"""

from __future__ import annotations

from typing import Annotated

import astropy.units as u
import numpy as np

from ...errors import ArgumentError
from ..constants import active
from ..units import quantity
from ..validity import warn
from . import args as check
from . import register
from .args import Angle, Dimensionless, Length, Mass, Speed, Time

TOPIC = "light"

_ARCSEC = np.pi / (180 * 3600)
_MAS = u.mas
_ONE = u.dimensionless_unscaled
Frequency = Annotated[u.Quantity, "frequency"]
NumberDensity = Annotated[u.Quantity, "number density (per volume)"]


@register("deflection", TOPIC)
def deflection(M: Mass, b: Length, gamma: Dimensionless | None = None) -> Angle:
    """Total deflection of a light ray passing a mass at impact parameter b.

    Formula:   α = (1 + γ)/2 · 4 G M / (c² b)
    Arguments: M  mass or GM;  b  impact parameter (length, > 0);
               gamma  PPN γ (default: the sheet's `ppn gamma`, else 1)
    Result:    angle, in arcsec
    Validity:  first order in GM/(c² b), ray from and to infinity (source and observer far
               from the mass compared with b); for an observer inside the solar system use
               `deflection_at_elongation`.
    PPN:       (1 + γ)/2: "the bending and delay are proportional to γ + 1" (Bertotti, Iess
               & Tortora 2003, Nature 425, 374).
    Source:    Einstein 1916, Ann. Phys. 49, 769 (from memory: not reachable here), 1.7512″
               at the solar limb (from memory: the paper is not reachable here); for an
               observer at a finite distance it
               agrees with ERFA's eraLd through `deflection_at_elongation`.
    """
    gm = check.gravitational_parameter(M)
    impact = check.length(b, "b")
    g = check.ppn(gamma, "gamma")
    c = check.speed_of_light()
    check.weak_field(gm, impact, "b", c)
    return quantity((1 + g) / 2 * 4 * gm / (c**2 * impact) / _ARCSEC, u.arcsec)


@register("deflection_at_elongation", TOPIC)
def deflection_at_elongation(M: Mass, r_obs: Length, elongation: Angle,
                             gamma: Dimensionless | None = None) -> Angle:
    """Apparent deflection of a star at infinity seen at an elongation from the mass.

    Formula:   δθ = (1 + γ)/2 · (2 G M / (c² r_obs)) · (1 + cos θ) / sin θ
                  = (1 + γ) G M / (c² r_obs) · cot(θ/2)
               θ the elongation (angle between the directions to the mass and to the star)
    Arguments: M  mass or GM;  r_obs  observer's distance from the mass (length);
               elongation  θ (angle, 0 < θ < 180°);  gamma  PPN γ (default: sheet, else 1)
    Result:    angle, in arcsec (the star appears displaced away from the mass)
    Validity:  first order in GM/(c² r_obs); the ray must not pass inside the body: its
               impact parameter is r_obs sin θ. Star at infinity (no parallax term).
    PPN:       (1 + γ)/2.
    Source:    equal within 1e-8 to ERFA's eraLd (the tests), whose documentation gives its
               basis as Klioner 2003, AJ 125, 1580, expr. (70) and the Explanatory
               Supplement (Urban & Seidelmann 2013), expr. (7.63).
    """
    gm = check.gravitational_parameter(M)
    distance = check.length(r_obs, "r_obs")
    theta = check.angle(elongation, "elongation")
    if np.any((np.asarray(theta) <= 0) | (np.asarray(theta) >= np.pi)):
        raise ArgumentError(f"`elongation` must lie strictly between 0 and 180 deg, got "
                            f"{check.show(elongation)}", "elongation")
    g = check.ppn(gamma, "gamma")
    c = check.speed_of_light()
    check.weak_field(gm, distance * np.sin(theta), "r_obs sin(elongation)", c)
    angle = (1 + g) * gm / (c**2 * distance) / np.tan(np.asarray(theta) / 2)
    return quantity(angle / _ARCSEC, u.arcsec)


def _einstein_angle(M, d_lens, d_source, gamma):
    """(θ_E in rad, D_l in m) after checking the arguments."""
    gm = check.gravitational_parameter(M)
    dl = check.length(d_lens, "d_lens")
    ds = check.length(d_source, "d_source")
    if np.any(np.asarray(ds) <= np.asarray(dl)):
        raise ArgumentError("`d_source` must be farther than `d_lens`", "d_source")
    g = check.ppn(gamma, "gamma")
    c = check.speed_of_light()
    return np.sqrt((1 + g) / 2 * 4 * gm / c**2 * (ds - dl) / (dl * ds)), dl


@register("einstein_radius", TOPIC)
def einstein_radius(M: Mass, d_lens: Length, d_source: Length,
                    gamma: Dimensionless | None = None) -> Angle:
    """Angular Einstein radius of a point-mass lens.

    Formula:   θ_E = √((1 + γ)/2 · 4 G M / c² · (D_s − D_l) / (D_l D_s))
    Arguments: M  lens mass or GM;  d_lens  distance to the lens D_l;
               d_source  distance to the source D_s (> D_l) (lengths);
               gamma  PPN γ (default: the sheet's `ppn gamma`, else 1)
    Result:    angle, in mas
    Validity:  point lens, thin-lens approximation, angles ≪ 1 rad; D_s − D_l as the
               lens–source distance (flat space, Galactic distances; for cosmological
               distances use angular-diameter distances and D_ls ≠ D_s − D_l).
    PPN:       the deflection scales with (1 + γ)/2, so θ_E with √((1 + γ)/2).
    Source:    Einstein 1936, Science 84, 506; Schneider, Ehlers & Falco 1992, Gravitational
               Lenses, ch. 2 (from memory: neither was reachable here); Paczyński 1986, ApJ
               304, 1 (abstract read). The tests re-derive the point-lens images from it.
    """
    theta, _ = _einstein_angle(M, d_lens, d_source, gamma)
    return quantity(theta / (_ARCSEC / 1e3), _MAS)


@register("shapiro_delay", TOPIC)
def shapiro_delay(M: Mass, r_emit: Length, r_recv: Length, separation: Length,
                  gamma: Dimensionless | None = None) -> Time:
    """One-way Shapiro delay of a signal between two points near a mass.

    Formula:   Δt = (1 + γ) G M / c³ · ln((r1 + r2 + R) / (r1 + r2 − R))
               r1, r2 the distances of emitter and receiver from the mass, R their separation
    Arguments: M  mass or GM;  r_emit, r_recv  distances from the mass (lengths);
               separation  emitter–receiver distance R (length);
               gamma  PPN γ (default: the sheet's `ppn gamma`, else 1)
    Result:    time, in µs (one way; double it for a two-way radar echo)
    Validity:  first order in G M/(c² r); static mass, positions at the times of emission
               and reception. The second-order terms are ordinarily of order m²/b in length
               (m = G M/c², b the ray's closest approach), picoseconds at the Sun, but near
               superior conjunction an enhanced part of order m² R/b² appears (R the
               endpoints' distances; Ashby & Bertotti 2010): in time about
               (1 + γ)² (G M)² (r1 + r2) / (c⁵ b²), some 30 ns one way for a ray at
               b = 1.6 R☉ to a spacecraft with r1 + r2 ≈ 8.4 au. Navigation-grade light time
               follows the IERS Conventions (2010) ch. 11 and the responsible authority's model.
    PPN:       (1 + γ)/2 relative to general relativity.
    Source:    I. I. Shapiro 1964, Phys. Rev. Lett. 13, 789 (from memory: not reachable
               here); near conjunction it reduces to Bertotti, Iess & Tortora 2003, Nature 425,
               374, eq. (1); Ashby & Bertotti 2010, Class. Quantum Grav. 27, 145013 (abstract:
               the enhanced second-order term).
    """
    gm = check.gravitational_parameter(M)
    r1 = check.length(r_emit, "r_emit")
    r2 = check.length(r_recv, "r_recv")
    sep = check.length(separation, "separation")
    total = np.asarray(r1) + np.asarray(r2)
    if np.any(np.asarray(sep) >= total) or np.any(np.asarray(sep) < np.abs(r1 - r2)):
        raise ArgumentError("`separation` must lie between |r_emit − r_recv| and r_emit + r_recv "
                            "(and below the sum, or the ray passes through the mass)",
                            "separation")
    g = check.ppn(gamma, "gamma")
    c = check.speed_of_light()
    # the ray's closest approach, from the triangle, for the weak-field check
    s = (r1 + r2 + sep) / 2
    area = np.sqrt(np.maximum(s * (s - r1) * (s - r2) * (s - sep), 0))
    near, far = np.minimum(r1, r2), np.maximum(r1, r2)
    with np.errstate(divide="ignore", invalid="ignore"):
        height = 2 * area / sep
    # the segment's closest point to the mass: the foot of the perpendicular, or the nearer end
    # when the foot falls outside the segment (both ends on one side, as at inferior conjunction)
    closest = np.where(far**2 >= near**2 + np.asarray(sep) ** 2, near, height)
    check.weak_field(gm, closest, "closest approach", c)
    delay = (1 + g) * gm / c**3 * np.log((total + sep) / (total - sep))
    return quantity(delay * 1e6, u.us)


@register("conjunction_delay", TOPIC)
def conjunction_delay(M: Mass, r_emit: Length, r_recv: Length, b: Length,
                      gamma: Dimensionless | None = None) -> Time:
    """One-way Shapiro delay near superior conjunction, from the ray's impact parameter.

    Formula:   Δt = (1 + γ) G M / c³ · ln(4 r1 r2 / b²)
    Arguments: M  mass or GM;  r_emit, r_recv  distances from the mass r1, r2 (lengths);
               b  impact parameter of the ray (length);  gamma  PPN γ (default: sheet, else 1)
    Result:    time, in µs (one way)
    Validity:  b ≪ r1, r2 (the limit of `shapiro_delay` near conjunction, relative error
               ~ b²/r²) and first order in GM/(c² b); see `shapiro_delay` for the enhanced
               second-order term. Its time derivative is `shapiro_doppler`.
    PPN:       (1 + γ)/2 relative to general relativity.
    Source:    Bertotti, Iess & Tortora 2003, Nature 425, 374, eq. (1) (written there for
               the round trip, twice this).
    """
    gm = check.gravitational_parameter(M)
    r1 = check.length(r_emit, "r_emit")
    r2 = check.length(r_recv, "r_recv")
    impact = check.length(b, "b")
    g = check.ppn(gamma, "gamma")
    c = check.speed_of_light()
    check.weak_field(gm, impact, "b", c)
    if np.any(np.asarray(impact) > 0.1 * np.minimum(r1, r2)):
        warn("`b` is not small compared with r_emit and r_recv: the near-conjunction form "
             "needs b ≪ r (use shapiro_delay)")
    delay = (1 + g) * gm / c**3 * np.log(4 * r1 * r2 / impact**2)
    return quantity(delay * 1e6, u.us)


def _links(two_way: u.Quantity | None, default: int):
    """The number of passes of the signal: 1 (one way) or 2 (`two_way = 1`)."""
    if two_way is None:
        return 1 + default
    value = check.dimensionless(two_way, "two_way")
    if not np.all((np.asarray(value) == 0) | (np.asarray(value) == 1)):
        raise ArgumentError(f"`two_way` must be 1 (a two-way link) or 0 (one way), got "
                            f"{check.show(two_way)}", "two_way")
    return 1 + np.asarray(value, dtype=float) if np.ndim(value) else 1 + float(value)


def _rate(q: u.Quantity, name: str):
    """A signed speed (a rate of change of a length) in m/s."""
    return check.to_value(q, u.m / u.s, name, "a speed (a length per time)")


@register("shapiro_doppler", TOPIC)
def shapiro_doppler(M: Mass, b: Length, b_rate: Speed, gamma: Dimensionless | None = None,
                    two_way: Dimensionless | None = None) -> Dimensionless:
    """Doppler observable of the Shapiro delay near conjunction: y = d(Δt)/dt as b changes.

    Formula:   y = −2 (1 + γ) (G M / c³) (db/dt) / b   one way,
               twice that for a two-way link (the derivative of `conjunction_delay`)
    Arguments: M  mass or GM;  b  impact parameter of the ray (length);  b_rate  db/dt, the
               rate of change of b (a speed, negative while the ray closes in);
               gamma  PPN γ (default: the sheet's `ppn gamma`, else 1);
               two_way  1 for a two-way link (the default), 0 for one way
    Result:    dimensionless y = d(Δt)/dt: negative while b grows (the delay shrinks)
    Validity:  near superior conjunction (b ≪ the distances of both ends from the mass);
               first order in G M/(c² b); db/dt from the geometry of the ends' motion (for
               a spacecraft far beyond the Earth, close to the Earth's orbital speed).
    PPN:       (1 + γ)/2 relative to general relativity.
    Source:    Bertotti, Iess & Tortora 2003, Nature 425, 374, eqs. (1)–(2) (the two-way
               form; the peak near the 2002 conjunction, 6e-10, is checked in the tests);
               Iess et al. 1999, Class. Quantum Grav. 16, 1487 (from memory: not reachable).
    """
    gm = check.gravitational_parameter(M)
    impact = check.length(b, "b")
    rate = _rate(b_rate, "b_rate")
    g = check.ppn(gamma, "gamma")
    links = _links(two_way, default=1)
    c = check.speed_of_light()
    check.weak_field(gm, impact, "b", c)
    return quantity(-links * (1 + g) * gm / c**3 * 2 * rate / impact, _ONE)


# ---- the solar corona's plasma -------------------------------------------------------
#
# Default electron density, from Viking dual-frequency ranging and Doppler phase fluctuation
# near the 1976 conjunction (solar minimum): JPL TDA Progress Report 42-71 (1982), pp. 117–128,
# abstract: N(r) = 2.21e8 r^-6 + 1.55e6 r^-2.3 electrons / cm³, r in solar radii.

CORONA_A = 2.21e14  # electrons / m³, the r^-6 term at one solar radius
CORONA_B = 1.55e12  # electrons / m³, the outer term at one solar radius
CORONA_Q = 2.3      # the outer term's power of R☉/r
_R_SUN = 6.957e8    # m, IAU 2015 nominal: the model's unit of r


def dispersion_constant() -> float:
    """K = e²/(8π² ε0 m_e) in m³/s² (≈ 40.3): n_group − 1 = K N / f² in a cold plasma."""
    e = active("e").to_value(u.C)
    eps0 = active("eps0").to_value(u.F / u.m)
    m_e = active("m_e").to_value(u.kg)
    return e**2 / (8 * np.pi**2 * eps0 * m_e)


def ray_integral(k, b, s):
    """∫₀ˢ (b² + t²)^(−k/2) dt (b, s in units of R☉; s may be inf), by the incomplete beta.

    With t = b tan θ it is b^(1−k) ∫₀^θ cos^(k−2) θ dθ = b^(1−k) · ½ B(½, (k−1)/2) ·
    I_x(½, (k−1)/2), x = sin² θ = s²/(b² + s²); exact for any power k > 1.
    """
    x = 1 / (1 + (b / s) ** 2)
    a = (k - 1) / 2
    # scipy.special loads on first use: a fifth of a second that every other sheet saves
    from scipy.special import beta as beta_function
    from scipy.special import betainc

    return b ** (1 - k) * 0.5 * beta_function(0.5, a) * betainc(0.5, a, x)


def _ray_slope(k, b, s):
    """d/db of ray_integral(k, b, √(r² − b²)) at fixed r (the end's distance)."""
    ends = np.where(np.isinf(s), 0.0, (b / s) * (b**2 + s**2) ** (-k / 2))
    return -k * b * ray_integral(k + 2, b, s) - ends


def _corona(A, B, q):
    """The density model's terms as (coefficient in m⁻³, power) pairs."""
    terms = []
    for value, name, default in ((A, "A", CORONA_A), (B, "B", CORONA_B)):
        if value is None:
            terms.append(default)
            continue
        density = check.to_value(value, u.m**-3, name, "a number density (per volume, m^-3)")
        if check.any_below(density, 0):
            raise ArgumentError(f"`{name}` must not be negative, got {check.show(value)}", name)
        terms.append(density)
    power = CORONA_Q if q is None else check.dimensionless(q, "q")
    if np.any(np.asarray(power) <= 1):
        raise ArgumentError(f"`q` must be above 1 (the column density diverges otherwise), got "
                            f"{check.show(q)}", "q")
    return ((terms[0], 6.0), (terms[1], power))


def _plasma_ray(f, b, r_emit, r_recv, A, B, q):
    """(f in Hz, b and the ends' distances along the ray in R☉, the model terms)."""
    frequency = check.to_value(f, u.Hz, "f", "a frequency")
    check.positive(frequency, f, "f")
    impact = check.length(b, "b") / _R_SUN
    if np.any(np.asarray(impact) <= 1):
        raise ArgumentError(f"`b` = {check.show(b)} is inside the Sun: the ray is blocked", "b")
    ends = []
    for value, name in ((r_emit, "r_emit"), (r_recv, "r_recv")):
        r = np.inf if value is None else check.length(value, name, allow_infinite=True) / _R_SUN
        if np.any(np.asarray(r) <= np.asarray(impact)):
            raise ArgumentError(f"`{name}` must be farther from the Sun than `b`", name)
        ends.append(np.sqrt(np.asarray(r, dtype=float) ** 2 - np.asarray(impact) ** 2))
    terms = _corona(A, B, q)
    if np.any(np.asarray(impact) < 2):
        warn("`b` is below 2 R☉: the corona model is fitted from about 2 R☉ outward and "
             "is extrapolated there")
    density = sum(coefficient * np.asarray(impact, dtype=float) ** -power
                  for coefficient, power in terms)
    plasma = np.sqrt(2 * dispersion_constant() * density)
    if np.any(np.asarray(frequency) < 10 * plasma):
        warn(f"`f` is within 10 times the plasma frequency at the ray's closest approach "
             f"({np.max(plasma) / 1e6:.3g} MHz): the 1/f² delay is only its first term there")
    return frequency, impact, ends, terms


_CORONA_TEXT = """N(r) = A (R☉/r)⁶ + B (R☉/r)^q electrons per volume, by default
               A = 2.21e8 cm⁻³, B = 1.55e6 cm⁻³, q = 2.3 (fitted to Viking ranging and
               Doppler near the 1976 conjunction, at solar minimum). Column density along
               the straight ray with closest approach b, ends at r_emit and r_recv (on
               either side of the closest approach): ∫ N ds, done in closed form with the
               incomplete beta function. Group delay per unit length K N/(c f²) with
               K = e²/(8π² ε0 m_e) ≈ 40.3 m³/s²."""

_CORONA_VALIDITY = """a mean, spherically symmetric corona: the real one varies by a factor
               of several with the solar cycle (denser at maximum), heliographic latitude
               (streamers, coronal holes) and transients (CMEs), so scale A and B to the
               epoch and direction; fitted from about 2 R☉ to 1 au (warns below 2 R☉).
               First order in (f_p/f)² (warns when f < 10 f_p); straight ray; the Earth's
               ionosphere is not included. Two-way links use one frequency both ways here
               (real up- and downlinks differ by the turnaround ratio)."""

_CORONA_SOURCE = """the model: JPL TDA Progress Report 42-71 (1982), pp. 117–128 (abstract:
               the coefficients, and agreement with K-coronameter data at 2 R☉, pulsar
               delays at 10 R☉ and in-situ densities at 1 au); its outer slope r^-2.3 is
               argued in TDA Progress Report 42-41 (1977), pp. 135–145 (abstract). The
               40.3 N/f² delay: ITU-R practice (common practice), here from CODATA
               constants. The ray integral is checked against scipy quadrature."""


@register("plasma_delay", TOPIC)
def plasma_delay(f: Frequency, b: Length, r_emit: Length | None = None,
                 r_recv: Length | None = None, two_way: Dimensionless | None = None,
                 A: NumberDensity | None = None, B: NumberDensity | None = None,
                 q: Dimensionless | None = None) -> Time:
    """Group delay of a radio signal through the solar corona, from a density model.

    Formula:   Δt = K / (c f²) · ∫ N_e ds  (per pass), with
               {model}
    Arguments: f  carrier frequency;  b  the ray's closest approach to the Sun (length);
               r_emit, r_recv  the ends' distances from the Sun (lengths, default inf);
               two_way  0 for one pass (the default), 1 for a round trip at f;
               A, B  the model's densities at 1 R☉ (per volume);  q  its outer power
    Result:    time, in µs: the group (ranging) delay; the carrier phase is advanced by as much
    Validity:  {validity}
    PPN:       none (not gravitational).
    Source:    {source}
    """
    frequency, impact, (s1, s2), terms = _plasma_ray(f, b, r_emit, r_recv, A, B, q)
    column = sum(coefficient * _R_SUN * (ray_integral(power, impact, s1)
                                         + ray_integral(power, impact, s2))
                 for coefficient, power in terms)
    links = _links(two_way, default=0)
    delay = links * dispersion_constant() * column / (check.speed_of_light() * frequency**2)
    return quantity(delay * 1e6, u.us)


@register("plasma_doppler", TOPIC)
def plasma_doppler(f: Frequency, b: Length, b_rate: Speed, r_emit: Length | None = None,
                   r_recv: Length | None = None, two_way: Dimensionless | None = None,
                   A: NumberDensity | None = None, B: NumberDensity | None = None,
                   q: Dimensionless | None = None) -> Dimensionless:
    """Doppler observable of the solar plasma on a carrier: y = d(Δt)/dt as b changes.

    Formula:   y = −K / (c f²) · d(∫ N_e ds)/db · db/dt per pass, the carrier's phase delay
               being −K/(c f²) ∫ N_e ds; with
               {model}
    Arguments: f  carrier frequency;  b  the ray's closest approach to the Sun (length);
               b_rate  db/dt (a speed);  r_emit, r_recv  the ends' distances from the Sun
               (lengths, default inf; held fixed);  two_way  1 for a two-way link (the
               default), 0 for one way;  A, B  the model's densities at 1 R☉;  q  its outer
               power
    Result:    dimensionless y: positive while b grows (the plasma advances the phase, and
               less so farther out), so of the opposite sign to `shapiro_doppler`
    Validity:  {validity}
               The mean model gives the smooth trend only: the plasma's scintillation
               noise on y is often larger.
    PPN:       none (not gravitational).
    Source:    {source}
    """
    frequency, impact, (s1, s2), terms = _plasma_ray(f, b, r_emit, r_recv, A, B, q)
    rate = _rate(b_rate, "b_rate")
    # d/db of the column in m⁻³ (b in R☉ inside the integrals: the R☉ factors cancel)
    slope = sum(coefficient * (_ray_slope(power, impact, s1) + _ray_slope(power, impact, s2))
                for coefficient, power in terms)
    links = _links(two_way, default=1)
    # the carrier's phase delay is −K/(c f²) times the column: it is advanced, not delayed
    y = -links * dispersion_constant() * slope * rate / (check.speed_of_light() * frequency**2)
    return quantity(y, _ONE)


for _fn in (plasma_delay, plasma_doppler):
    _fn.__doc__ = ((_fn.__doc__ or "").replace("{model}", _CORONA_TEXT)
                   .replace("{validity}", _CORONA_VALIDITY).replace("{source}", _CORONA_SOURCE))


# ---- microlensing by a point mass --------------------------------------------------------

def _separation(q: u.Quantity, name: str = "u", allow_zero: bool = False):
    value = check.dimensionless(q, name)
    if check.any_below(value, 0, inclusive=not allow_zero):
        what = "at least 0" if allow_zero else "positive (the magnification diverges at 0)"
        raise ArgumentError(f"`{name}` must be {what}, got {check.show(q)}", name)
    return value


@register("magnification", TOPIC)
def magnification(u: Dimensionless) -> Dimensionless:
    """Total magnification of a point source by a point-mass lens (both images).

    Formula:   A(u) = (u² + 2) / (u √(u² + 4)),  u = lens–source angular separation / θ_E
    Arguments: u  the separation in Einstein radii (dimensionless, > 0)
    Result:    dimensionless magnification (≥ 1; 3/√5 ≈ 1.342 at u = 1)
    Validity:  point source, single point lens, no blending; a finite source matters when u
               is comparable to its angular radius over θ_E (the peak is then finite).
    PPN:       none (u is already in units of θ_E, which carries γ).
    Source:    Paczyński 1986, ApJ 304, 1 (abstract read; the formula from memory: the paper's
               text was not reachable here). The tests re-derive it from the point-lens
               equation β = θ − θ_E²/θ and its images.
    """
    x = _separation(u)
    return quantity((x**2 + 2) / (x * np.sqrt(x**2 + 4)), _ONE)


@register("einstein_crossing_time", TOPIC)
def einstein_crossing_time(M: Mass, d_lens: Length, d_source: Length, v: Speed,
                           gamma: Dimensionless | None = None) -> Time:
    """Einstein radius crossing time of a microlensing event, t_E = θ_E D_l / v.

    Formula:   t_E = θ_E D_l / v,  θ_E as in `einstein_radius`
    Arguments: M  lens mass or GM;  d_lens, d_source  distances D_l < D_s (lengths);
               v  the relative transverse speed of lens and source projected to the lens
               plane (speed, > 0);  gamma  PPN γ (default: the sheet's `ppn gamma`, else 1)
    Result:    time, in days (the time to cross one Einstein radius, not the diameter)
    Validity:  as `einstein_radius`; uniform rectilinear relative motion (no parallax or
               orbital motion of the lens or source during the event).
    PPN:       through θ_E: √((1 + γ)/2).
    Source:    Paczyński 1986, ApJ 304, 1 (abstract: halo lenses give time scales from two
               hours to two years; the definition from memory).
    """
    theta, dl = _einstein_angle(M, d_lens, d_source, gamma)
    speed = check.speed(v, "v")
    check.positive(speed, v, "v")
    return quantity(theta * dl / speed / 86400.0, u.d)


@register("centroid_shift", TOPIC)
def centroid_shift(u: Dimensionless, theta_E: Angle) -> Angle:
    """Shift of the light centroid of a microlensed point source from its true position.

    Formula:   δθ = u θ_E / (u² + 2), away from the lens; largest at u = √2, θ_E/(2√2)
    Arguments: u  the lens–source separation in Einstein radii (dimensionless, ≥ 0);
               theta_E  the Einstein radius (angle; see `einstein_radius`)
    Result:    angle, in mas
    Validity:  point source, point lens, and a dark lens (light from the lens moves the
               centroid toward it); the images unresolved. It falls off as θ_E/u, far slower
               than the magnification's excess.
    PPN:       none beyond θ_E.
    Source:    Walker 1995, ApJ 453, 37; Dominik & Sahu 2000, ApJ 534, 213 (from memory:
               neither was reachable here). The tests re-derive it from the point-lens images.
    """
    x = _separation(u, allow_zero=True)
    theta = check.angle(theta_E, "theta_E")
    check.positive(theta, theta_E, "theta_E")
    return quantity(x * theta / (x**2 + 2) / (_ARCSEC / 1e3), _MAS)
