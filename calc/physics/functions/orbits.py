"""Orbits: Kepler's third law, vis-viva, and what moves a periapsis or a node.

Angles of periapsis motion come in arcseconds and rates in arcseconds per
Julian century (the convention of solar-system work); convert with `in`.
"""

from __future__ import annotations

import astropy.units as u
import numpy as np

from ...errors import ArgumentError
from ..constants import active
from ..units import century, quantity
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
    Source:    Murray & Dermott 1999, Solar System Dynamics, eq. (2.22) (from memory).
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
    Source:    Murray & Dermott 1999, Solar System Dynamics, eq. (2.22) (from memory).
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
    Source:    Murray & Dermott 1999, Solar System Dynamics, eq. (2.36) (from memory).
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
    Source:    Will 2014, Living Rev. Relativ. 17, 4, eq. (59) (from memory); Nobili & Will
               1986, Nature 320, 39 (Mercury: 42.98″/century).
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
    Source:    Will 2014, Living Rev. Relativ. 17, 4, eq. (59) (from memory).
    """
    gm, semi, advance = _relativistic_advance(M, a, e, gamma, beta)
    per_second = advance / _period_s(gm, semi)
    return quantity(per_second * _CENTURY_S / _ARCSEC, u.arcsec / century)


def j2_rates(gm, J2, R, a, e, i):
    """Secular (node, argument-of-periapsis) rates in rad/s from the J2 term."""
    n = np.sqrt(gm / a**3)
    p = a * (1 - e**2)
    factor = 1.5 * n * J2 * (R / p) ** 2
    cos_i = np.cos(i)
    node = -factor * cos_i
    argument = 0.5 * factor * (5 * cos_i**2 - 1)
    return node, argument


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
               zonals (J4, …) and J2² terms are neglected.
    PPN:       none (Newtonian).
    Source:    Murray & Dermott 1999, Solar System Dynamics, §6.11; Kaula 1966, Theory of
               Satellite Geodesy, §3.2 (from memory).
    """
    gm = check.gravitational_parameter(M)
    j2 = check.dimensionless(J2, "J2")
    radius = check.length(R, "R")
    semi = check.length(a, "a")
    ecc = check.eccentricity(e)
    inc = 0.0 if i is None else check.angle(i, "i")
    node, argument = j2_rates(gm, j2, radius, semi, ecc, inc)
    return quantity((node + argument) * _CENTURY_S / _ARCSEC, u.arcsec / century)


@register("lense_thirring_node_rate", TOPIC)
def lense_thirring_node_rate(J: AngularMomentum, a: Length, e: Dimensionless) -> AngularRate:
    """Lense–Thirring precession of the node of an orbit about a spinning body.

    Formula:   dΩ/dt = 2 G J / (c² a³ (1 − e²)^(3/2))
    Arguments: J  spin angular momentum of the central body (kg m²/s);
               a  semi-major axis (length);  e  eccentricity (0 ≤ e < 1)
    Result:    angle per time, in mas / yr (Julian years)
    Validity:  first order in G J/c³, orbit-averaged, weak field; independent of the
               inclination.
    PPN:       in the PPN framework multiply by (1 + γ + α1/4)/2 (= 1 in general relativity);
               not applied here.
    Source:    Lense & Thirring 1918, Phys. Z. 19, 156; Ciufolini & Pavlis 2004, Nature 431,
               958 (LAGEOS: about 31 mas/yr) (from memory).
    """
    spin = check.angular_momentum(J)
    semi = check.length(a, "a")
    ecc = check.eccentricity(e)
    c = check.speed_of_light()
    G = active("G").to_value(u.m**3 / (u.kg * u.s**2))
    rate = 2 * G * spin / (c**2 * semi**3 * (1 - ecc**2) ** 1.5)
    return quantity(rate * _YEAR_S / (_ARCSEC / 1e3), u.mas / u.yr)
