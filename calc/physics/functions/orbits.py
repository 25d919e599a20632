"""Orbits: Kepler's third law, vis-viva, and what moves a periapsis or a node.

Each rate comes in the unit of the trade that uses it most (convert with `in`):
periapsis motion of planets in arcseconds per Julian century (solar-system work),
satellite node and perigee rates from J2 in degrees per day (orbit design),
Lense–Thirring rates in milliarcseconds per year (laser-ranged satellites), and
tidal and rotational apsidal rates of exoplanets in degrees per year.
"""

from __future__ import annotations

import astropy.units as u
import numpy as np

from ...errors import ArgumentError
from ..constants import active
from ..units import century, quantity
from ..validity import warn
from . import args as check
from . import register
from .args import Angle, AngularMomentum, AngularRate, Dimensionless, Length, Mass, Speed, Time

TOPIC = "orbits"

_ARCSEC = np.pi / (180 * 3600)
_CENTURY_S = 36525 * 86400.0
_YEAR_S = 365.25 * 86400.0


def _period_s(gm, a):
    return 2 * np.pi * np.sqrt(a**3 / gm)


@register("orbital_period", TOPIC)
def orbital_period(M: Mass, a: Length) -> Time:
    """Orbital period from Kepler's third law, P = 2π √(a³/GM).

    Formula:   P = 2π √(a³ / (G M))
    Arguments: M  mass or GM (for two bodies, the total mass);  a  semi-major axis (length)
    Result:    time, in days
    Validity:  Newtonian two-body problem; relativistic corrections are of order GM/(c² a).
    PPN:       none (Newtonian).
    Source:    Kepler's third law (common practice); checked against the Gaussian year
               2π/k, k = 0.01720209895 (The Astronomical Almanac 2010, Selected Astronomical
               Constants, the definition of the astronomical unit).
    """
    gm = check.gravitational_parameter(M)
    semi = check.length(a, "a")
    return quantity(_period_s(gm, semi) / 86400.0, u.d)


@register("semi_major_axis", TOPIC)
def semi_major_axis(M: Mass, P: Time) -> Length:
    """Semi-major axis from the period, a = (GM P² / 4π²)^(1/3) (inverse of orbital_period).

    Formula:   a = (G M P² / (4π²))^(1/3)
    Arguments: M  mass or GM (for two bodies, the total mass);  P  orbital period (time)
    Result:    length, in AU
    Validity:  Newtonian two-body problem.
    PPN:       none (Newtonian).
    Source:    Kepler's third law (common practice), the inverse of `orbital_period`.
    """
    gm = check.gravitational_parameter(M)
    period = check.duration(P, "P")
    a = np.cbrt(gm * period**2 / (4 * np.pi**2))
    return quantity(a / u.AU.to(u.m), u.AU)


@register("orbital_speed", TOPIC)
def orbital_speed(M: Mass, r: Length, a: Length | None = None) -> Speed:
    """Orbital speed at distance r on an orbit of semi-major axis a (vis-viva).

    Formula:   v = √(G M (2/r − 1/a)); with a omitted, a = r (a circular orbit)
    Arguments: M  mass or GM;  r  distance from the centre (length);
               a  semi-major axis (length, default r)
    Result:    speed, in km/s
    Validity:  Newtonian two-body problem, bound orbits (r ≤ 2a).
    PPN:       none (Newtonian).
    Source:    the vis-viva equation (common practice: energy conservation on a Kepler orbit).
    """
    gm = check.gravitational_parameter(M)
    radius = check.length(r, "r")
    semi = radius if a is None else check.length(a, "a")
    if np.any(np.asarray(radius) > 2 * np.asarray(semi)):
        raise ArgumentError(f"`r` = {check.show(r)} is beyond 2a: a bound orbit never gets there",
                            "r")
    return quantity(np.sqrt(gm * (2 / radius - 1 / semi)) / 1e3, u.km / u.s)


def _relativistic_advance(M, a, e, gamma, beta):
    """(GM, a, advance per orbit in rad) after checking the arguments."""
    gm = check.gravitational_parameter(M)
    semi = check.length(a, "a")
    ecc = check.eccentricity(e)
    g, b = check.ppn(gamma, "gamma"), check.ppn(beta, "beta")
    c = check.speed_of_light()
    check.weak_field(gm, semi * (1 - ecc), "a (1 − e)", c, argument="a")
    advance = (2 + 2 * g - b) / 3 * 6 * np.pi * gm / (c**2 * semi * (1 - ecc**2))
    return gm, semi, advance


@register("periapsis_advance", TOPIC)
def periapsis_advance(M: Mass, a: Length, e: Dimensionless, gamma: Dimensionless | None = None,
                      beta: Dimensionless | None = None) -> Angle:
    """Relativistic advance of the periapsis per orbit of a test body (first post-Newtonian order).

    Formula:   Δϖ = (2 + 2γ − β)/3 · 6π G M / (c² a (1 − e²))
    Arguments: M  mass or GM of the central body;  a  semi-major axis (length);
               e  eccentricity (0 ≤ e < 1);  gamma, beta  PPN parameters (default: the
               sheet's `ppn` values, else 1)
    Result:    angle per orbit, in arcsec
    Validity:  first post-Newtonian order (relative error ~ GM/(c² a)); a test body around a
               non-rotating mass. Not for binary pulsars: their ω̇ depends on both masses
               (use `periastron_rate`, general relativity only).
    PPN:       (2 + 2γ − β)/3, which is 1 in general relativity.
    Source:    Will 2006, Living Rev. Relativ. 9, 3, §3.5, eq. (51) (its first, PPN term);
               Nobili & Will 1986, Nature 320, 39 (abstract: Mercury, 42.98″/century).
    """
    gm, semi, advance = _relativistic_advance(M, a, e, gamma, beta)
    return quantity(advance / _ARCSEC, u.arcsec)


@register("periapsis_rate", TOPIC)
def periapsis_rate(M: Mass, a: Length, e: Dimensionless, gamma: Dimensionless | None = None,
                   beta: Dimensionless | None = None) -> AngularRate:
    """Relativistic periapsis advance per unit time of a test body (first post-Newtonian order).

    Formula:   dϖ/dt = Δϖ / P = (2 + 2γ − β)/3 · 3 (GM)^(3/2) / (c² a^(5/2) (1 − e²))
    Arguments: M  mass or GM;  a  semi-major axis (length);  e  eccentricity (0 ≤ e < 1);
               gamma, beta  PPN parameters (default: the sheet's `ppn` values, else 1)
    Result:    angle per time, in arcsec / century (Julian centuries)
    Validity:  as `periapsis_advance`; the period is the Keplerian one for mass M.
    PPN:       (2 + 2γ − β)/3.
    Source:    Will 2006, Living Rev. Relativ. 9, 3, §3.5, eq. (51), per Keplerian period;
               Nobili & Will 1986, Nature 320, 39 (abstract: 42.98″/century for Mercury).
    """
    gm, semi, advance = _relativistic_advance(M, a, e, gamma, beta)
    per_second = advance / _period_s(gm, semi)
    return quantity(per_second * _CENTURY_S / _ARCSEC, u.arcsec / century)


_DAY_S = 86400.0
_DEG = np.pi / 180


def _inclination(q: u.Quantity, name: str = "i"):
    """An inclination in radians, 0 to 180°."""
    value = check.angle(q, name)
    arr = np.asarray(value)
    if np.any((arr < 0) | (arr > np.pi * (1 + 1e-12))):
        raise ArgumentError(f"`{name}` must lie between 0 and 180 deg, got {check.show(q)}", name)
    return value


def _outside_body(semi, ecc, radius, body: str = "R") -> None:
    """Refuse an orbit whose periapsis a (1 − e) lies inside the body's radius."""
    if np.any(np.asarray(semi) * (1 - np.asarray(ecc)) <= np.asarray(radius)):
        raise ArgumentError(f"the periapsis a (1 − e) lies inside `{body}`: the orbit meets the "
                            "body", "a")


def j2_rates(gm, J2, R, a, e, i):
    """Secular (node, argument-of-periapsis) rates in rad/s from the J2 term."""
    n = np.sqrt(gm / a**3)
    p = a * (1 - e**2)
    factor = 1.5 * n * J2 * (R / p) ** 2
    cos_i = np.cos(i)
    node = -factor * cos_i
    argument = 0.5 * factor * (5 * cos_i**2 - 1)
    return node, argument


def _j2_arguments(M, J2, R, a, e, i):
    gm = check.gravitational_parameter(M)
    j2 = check.dimensionless(J2, "J2")
    radius = check.length(R, "R")
    semi = check.length(a, "a")
    ecc = check.eccentricity(e)
    inc = _inclination(i)
    _outside_body(semi, ecc, radius)
    return gm, j2, radius, semi, ecc, inc


@register("oblateness_rate", TOPIC)
def oblateness_rate(M: Mass, J2: Dimensionless, R: Length, a: Length, e: Dimensionless,
                    i: Angle | None = None) -> AngularRate:
    """Secular rate of the longitude of periapsis caused by the central body's oblateness J2.

    Formula:   n = √(GM/a³), p = a (1 − e²), k = (3/2) n J2 (R/p)²
               dΩ/dt = −k cos i,  dω/dt = (k/2)(5 cos² i − 1),
               dϖ/dt = dω/dt + dΩ/dt = (k/2)(5 cos² i − 2 cos i − 1)
    Arguments: M  mass or GM of the central body;  J2  its second zonal harmonic;
               R  the reference radius of J2 (length);  a  semi-major axis (length);
               e  eccentricity;  i  inclination to the body's equator (angle, default 0)
    Result:    angle per time, in arcsec / century
    Validity:  first order in J2, mean (orbit-averaged) elements, no resonances; higher
               zonals (J4, …) and J2² terms are neglected. The periapsis must lie outside R.
    PPN:       none (Newtonian).
    Source:    the sum of `node_rate` and `perigee_rate` (see their entries).
    """
    gm, j2, radius, semi, ecc, inc = _j2_arguments(M, J2, R, a, e,
                                                   u.Quantity(0.0, u.rad) if i is None else i)
    node, argument = j2_rates(gm, j2, radius, semi, ecc, inc)
    return quantity((node + argument) * _CENTURY_S / _ARCSEC, u.arcsec / century)


_J2_SOURCE = """Kaula 1966, Theory of Satellite Geodesy, §3.2 (from memory: the book was
               not reachable here); checked in the tests against the published Sun-synchronous
               orbit of Landsat 8 (705 km at the equator, i = 98.2°: USGS Landsat 8 Data Users
               Handbook, LSDS-1574, §2) and the critical inclination arccos(1/√5) = 63.43°."""


@register("node_rate", TOPIC)
def node_rate(M: Mass, J2: Dimensionless, R: Length, a: Length, e: Dimensionless,
              i: Angle) -> AngularRate:
    """Secular drift of the ascending node Ω caused by the central body's oblateness J2.

    Formula:   n = √(GM/a³), p = a (1 − e²)
               dΩ/dt = −(3/2) n J2 (R/p)² cos i
    Arguments: M  mass or GM of the central body;  J2  its second zonal harmonic
               (dimensionless);  R  the reference (equatorial) radius of J2 (length);
               a  semi-major axis (length);  e  eccentricity (0 ≤ e < 1);
               i  inclination to the body's equator (angle, 0 to 180°)
    Result:    angle per time, in deg / day: negative (regression) for i < 90°; a
               Sun-synchronous orbit has +360° per tropical year (+0.9856 deg / day)
    Validity:  first order in J2, mean elements: the J2² terms and the J2 correction of the
               mean motion change it by about J2 (R/a)² relative (≈ 1e-3 in low Earth
               orbit); J4 and higher zonals, the Sun and Moon, drag are neglected. The
               periapsis must lie outside R.
    PPN:       none (Newtonian).
    Source:    {source}
    """
    gm, j2, radius, semi, ecc, inc = _j2_arguments(M, J2, R, a, e, i)
    node, _ = j2_rates(gm, j2, radius, semi, ecc, inc)
    return quantity(node * _DAY_S / _DEG, u.deg / u.d)


@register("perigee_rate", TOPIC)
def perigee_rate(M: Mass, J2: Dimensionless, R: Length, a: Length, e: Dimensionless,
                 i: Angle) -> AngularRate:
    """Secular drift of the argument of periapsis ω caused by the central body's oblateness J2.

    Formula:   n = √(GM/a³), p = a (1 − e²)
               dω/dt = (3/4) n J2 (R/p)² (5 cos² i − 1)
               (zero at the critical inclinations arccos(±1/√5) = 63.43° and 116.57°)
    Arguments: M  mass or GM of the central body;  J2  its second zonal harmonic;
               R  the reference (equatorial) radius of J2 (length);  a  semi-major axis
               (length);  e  eccentricity (0 ≤ e < 1);  i  inclination to the body's
               equator (angle, 0 to 180°)
    Result:    angle per time, in deg / day (the argument of periapsis, measured from the
               node; add `node_rate` for the longitude of periapsis, as `oblateness_rate` does)
    Validity:  as `node_rate`: first order in J2, mean elements; near the critical
               inclination the neglected J2² and J4 terms dominate what is left.
    PPN:       none (Newtonian).
    Source:    {source}
    """
    gm, j2, radius, semi, ecc, inc = _j2_arguments(M, J2, R, a, e, i)
    _, argument = j2_rates(gm, j2, radius, semi, ecc, inc)
    return quantity(argument * _DAY_S / _DEG, u.deg / u.d)


for _fn in (node_rate, perigee_rate):
    _fn.__doc__ = (_fn.__doc__ or "").replace("{source}", _J2_SOURCE)


def lense_thirring_rates(G, J, c, a, e, i, gamma):
    """Orbit-averaged Lense–Thirring (node, argument-of-periapsis) rates in rad/s."""
    scale = (1 + gamma) / 2 * 2 * G * J / (c**2 * a**3 * (1 - e**2) ** 1.5)
    return scale, -3 * scale * np.cos(i)


def _lense_thirring_arguments(J, a, e, gamma):
    spin = check.angular_momentum(J)
    semi = check.length(a, "a")
    ecc = check.eccentricity(e)
    g = check.ppn(gamma, "gamma")
    G = active("G").to_value(u.m**3 / (u.kg * u.s**2))
    return G, spin, check.speed_of_light(), semi, ecc, g


_LT_PPN = """(1 + γ)/2, the factor of the gravitomagnetic term (1 + γ) G/(c² r³) ·
               [3 (r × v)(r · J)/r² + v × J] in the IERS Conventions (2010) ch. 10 satellite
               equation of motion; the preferred-frame term in α1 is not included."""


@register("lense_thirring_node_rate", TOPIC)
def lense_thirring_node_rate(J: AngularMomentum, a: Length, e: Dimensionless,
                             gamma: Dimensionless | None = None) -> AngularRate:
    """Lense–Thirring precession of the node of an orbit about a spinning body.

    Formula:   dΩ/dt = (1 + γ)/2 · 2 G J / (c² a³ (1 − e²)^(3/2))
    Arguments: J  spin angular momentum of the central body (kg m²/s);
               a  semi-major axis (length);  e  eccentricity (0 ≤ e < 1);
               gamma  PPN γ (default: the sheet's `ppn gamma`, else 1)
    Result:    angle per time, in mas / yr (Julian years)
    Validity:  first order in G J/c³, orbit-averaged, weak field; the node on the body's
               equator (the plane normal to J); independent of the inclination.
    PPN:       {ppn}
    Source:    Lense & Thirring 1918, Phys. Z. 19, 156 (from memory: not reachable here);
               re-derived in the tests by averaging the IERS Conventions (2010) ch. 10
               gravitomagnetic acceleration over the orbit with Gauss's equations; LAGEOS,
               about 31 mas/yr (Ciufolini & Pavlis 2004, Nature 431, 958; from memory: not reachable here).
    """
    G, spin, c, semi, ecc, g = _lense_thirring_arguments(J, a, e, gamma)
    node, _ = lense_thirring_rates(G, spin, c, semi, ecc, 0.0, g)
    return quantity(node * _YEAR_S / (_ARCSEC / 1e3), u.mas / u.yr)


@register("lense_thirring_periapsis_rate", TOPIC)
def lense_thirring_periapsis_rate(J: AngularMomentum, a: Length, e: Dimensionless, i: Angle,
                                  gamma: Dimensionless | None = None) -> AngularRate:
    """Lense–Thirring precession of the argument of periapsis of an orbit about a spinning body.

    Formula:   dω/dt = −(1 + γ)/2 · 6 G J cos i / (c² a³ (1 − e²)^(3/2));
               with the node's rate, the longitude of periapsis ϖ = Ω + ω moves at
               (1 + γ)/2 · 2 G J (1 − 3 cos i) / (c² a³ (1 − e²)^(3/2))
    Arguments: J  spin angular momentum of the central body (kg m²/s);
               a  semi-major axis (length);  e  eccentricity (0 ≤ e < 1);
               i  inclination to the body's equator (angle, 0 to 180°);
               gamma  PPN γ (default: the sheet's `ppn gamma`, else 1)
    Result:    angle per time, in mas / yr (Julian years); the argument of periapsis
               (measured from the node), not the longitude
    Validity:  first order in G J/c³, orbit-averaged, weak field; i measured from the
               equator of the spinning body (not from the ecliptic); J along its
               symmetry axis. For e → 0 the periapsis, and so this rate, is not observable.
    PPN:       {ppn}
    Source:    Lense & Thirring 1918, Phys. Z. 19, 156 (from memory: not reachable here);
               re-derived in the tests by averaging the IERS Conventions (2010) ch. 10
               gravitomagnetic acceleration over the orbit with Gauss's equations.
    """
    G, spin, c, semi, ecc, g = _lense_thirring_arguments(J, a, e, gamma)
    inc = _inclination(i)
    _, argument = lense_thirring_rates(G, spin, c, semi, ecc, inc, g)
    return quantity(argument * _YEAR_S / (_ARCSEC / 1e3), u.mas / u.yr)


for _fn in (lense_thirring_node_rate, lense_thirring_periapsis_rate):
    _fn.__doc__ = (_fn.__doc__ or "").replace("{ppn}", _LT_PPN)


# ---- apsidal motion from the planet's tidal and rotational bulges ------------------

def tidal_apsidal(gm_star, gm_planet, R, k2, a, e):
    """dω/dt in rad/s from the planet's tidal bulge (see `tidal_apsidal_rate`)."""
    n = np.sqrt((gm_star + gm_planet) / a**3)
    e2 = e**2
    f2 = (1 + 1.5 * e2 + e2**2 / 8) / (1 - e2) ** 5
    return 7.5 * k2 * n * (R / a) ** 5 * (gm_star / gm_planet) * f2


def rotational_apsidal(gm_star, gm_planet, R, k2, spin_period, a, e):
    """dω/dt in rad/s from the planet's rotational bulge (see `rotational_apsidal_rate`)."""
    n = np.sqrt((gm_star + gm_planet) / a**3)
    spin = 2 * np.pi / spin_period
    g2 = 1 / (1 - e**2) ** 2
    return 0.5 * k2 * (R / a) ** 5 * spin**2 * a**3 / gm_planet * n * g2


def love_number(q: u.Quantity, name: str = "k2"):
    """A tidal Love number: dimensionless, not negative; above 3/2 gets a warning."""
    value = check.dimensionless(q, name)
    if check.any_below(value, 0):
        raise ArgumentError(f"`{name}` must not be negative, got {check.show(q)}", name)
    if np.any(np.asarray(value) > 1.5):
        warn(f"`{name}` is above 3/2, the Love number of a homogeneous fluid body (the "
             "largest a body in hydrostatic equilibrium can have): is it the Love number?")
    return value


def _bulge_arguments(M, m, R, k2, a, e):
    gm_star = check.gravitational_parameter(M)
    gm_planet = check.gravitational_parameter(m, "m")
    radius = check.length(R, "R")
    love = love_number(k2)
    semi = check.length(a, "a")
    ecc = check.eccentricity(e)
    _outside_body(semi, ecc, radius)
    return gm_star, gm_planet, radius, love, semi, ecc


_RW09 = """Ragozzine & Wolf 2009, ApJ 698, 1778 (abstract read: k2 is twice the
               apsidal-motion constant; the planet's tidal bulge dominates the apsidal motion
               of very hot Jupiters)"""


@register("tidal_apsidal_rate", TOPIC)
def tidal_apsidal_rate(M: Mass, m: Mass, R: Length, k2: Dimensionless, a: Length,
                       e: Dimensionless) -> AngularRate:
    """Apsidal precession of a close planet's orbit caused by the tide the star raises on it.

    Formula:   n = √(G (M + m)/a³),  f2(e) = (1 + 3e²/2 + e⁴/8) / (1 − e²)⁵
               dω/dt = (15/2) k2 n (R/a)⁵ (M/m) f2(e)
    Arguments: M  the star's mass or GM;  m  the planet's mass or GM;  R  the planet's
               radius (length);  k2  the planet's tidal Love number (dimensionless; twice
               the apsidal-motion constant);  a  semi-major axis (length);  e  eccentricity
    Result:    angle per time, in deg / yr; prograde (the periapsis advances)
    Validity:  the planet's equilibrium tide, first order in k2 (R/a)⁵, a fluid planet;
               the tide the planet raises on the star adds a term of the same form with
               M ↔ m and the star's R and k2; dynamical tides and a planet near its Roche
               limit are beyond it. The periapsis must lie outside R.
    PPN:       none (Newtonian).
    Source:    {rw09}, eqs. (6)–(7) as reproduced in later work (the paper's full text was
               not reachable here); Sterne 1939, MNRAS 99, 451 (from memory: not reachable here). The 15/2 and
               f2(e) are re-derived in the tests by averaging the tidal force over the orbit.
    """
    args = _bulge_arguments(M, m, R, k2, a, e)
    return quantity(tidal_apsidal(*args) * _YEAR_S / _DEG, u.deg / u.yr)


@register("rotational_apsidal_rate", TOPIC)
def rotational_apsidal_rate(M: Mass, m: Mass, R: Length, k2: Dimensionless, P_rot: Time,
                            a: Length, e: Dimensionless) -> AngularRate:
    """Apsidal precession of a close planet's orbit caused by the planet's rotational flattening.

    Formula:   n = √(G (M + m)/a³),  Ω_s = 2π/P_rot,  g2(e) = (1 − e²)⁻²
               dω/dt = (k2/2) (R/a)⁵ (Ω_s² a³/(G m)) n g2(e)
               — the planet's rotational J2 = k2 Ω_s² R³/(3 G m) acting on the relative orbit
    Arguments: M  the star's mass or GM;  m  the planet's mass or GM;  R  the planet's
               radius (length);  k2  its tidal Love number (dimensionless);  P_rot  its
               rotation period (time; P_rot = the orbital period for a synchronous planet);
               a  semi-major axis (length);  e  eccentricity
    Result:    angle per time, in deg / yr; prograde
    Validity:  spin along the orbit normal (zero obliquity), first order in the flattening,
               a fluid planet whose rotational response has the same k2 as its tidal one.
               For a synchronous planet it is about 1/15 of `tidal_apsidal_rate`.
    PPN:       none (Newtonian).
    Source:    {rw09}, eqs. (10)–(11) as reproduced in later work (the paper's full text was
               not reachable here). Checked in the tests against `oblateness_rate` with
               J2 = k2 Ω_s² R³/(3 G m).
    """
    gm_star, gm_planet, radius, love, semi, ecc = _bulge_arguments(M, m, R, k2, a, e)
    period = check.duration(P_rot, "P_rot")
    rate = rotational_apsidal(gm_star, gm_planet, radius, love, period, semi, ecc)
    return quantity(rate * _YEAR_S / _DEG, u.deg / u.yr)


for _fn in (tidal_apsidal_rate, rotational_apsidal_rate):
    _fn.__doc__ = (_fn.__doc__ or "").replace("{rw09}", _RW09)
