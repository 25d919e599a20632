"""Light and signals near a mass: deflection, lensing, and the Shapiro delay.

Weak-field, first post-Newtonian formulas: the PPN parameter γ enters as
(1 + γ)/2 relative to general relativity. Deflections come in arcseconds
(`einstein_radius` in milliarcseconds), delays in microseconds.
"""

from __future__ import annotations

import astropy.units as u
import numpy as np

from ...errors import ArgumentError
from ..units import quantity
from ..validity import warn
from . import args as check
from . import register
from .args import Angle, Dimensionless, Length, Mass, Time

TOPIC = "light"

_ARCSEC = np.pi / (180 * 3600)


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
    PPN:       (1 + γ)/2.
    Source:    Einstein 1916, Ann. Phys. 49, 769; Will 2014, Living Rev. Relativ. 17, 4,
               eq. (66) (from memory): 1.7512″ at the solar limb.
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
    Source:    Will 2014, Living Rev. Relativ. 17, 4, eq. (65) (from memory); the same
               expression underlies ERFA's eraLd (IAU SOFA).
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


@register("einstein_radius", TOPIC)
def einstein_radius(M: Mass, d_lens: Length, d_source: Length) -> Angle:
    """Angular Einstein radius of a point-mass lens.

    Formula:   θ_E = √(4 G M / c² · (D_s − D_l) / (D_l D_s))
    Arguments: M  lens mass or GM;  d_lens  distance to the lens D_l;
               d_source  distance to the source D_s (> D_l) (lengths)
    Result:    angle, in mas
    Validity:  point lens, thin-lens approximation, angles ≪ 1 rad; D_s − D_l as the
               lens–source distance (flat space, Galactic distances; for cosmological
               distances use angular-diameter distances and D_ls ≠ D_s − D_l).
    PPN:       deflection scales with (1 + γ)/2, so θ_E with √((1 + γ)/2); GR here.
    Source:    Einstein 1936, Science 84, 506; Schneider, Ehlers & Falco 1992, Gravitational
               Lenses, ch. 2 (from memory); Paczyński 1986, ApJ 304, 1.
    """
    gm = check.gravitational_parameter(M)
    dl = check.length(d_lens, "d_lens")
    ds = check.length(d_source, "d_source")
    if np.any(np.asarray(ds) <= np.asarray(dl)):
        raise ArgumentError("`d_source` must be farther than `d_lens`", "d_source")
    c = check.speed_of_light()
    theta = np.sqrt(4 * gm / c**2 * (ds - dl) / (dl * ds))
    return quantity(theta / (_ARCSEC / 1e3), u.mas)


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
    Validity:  first order in GM/(c² r) (the 1/c⁴ "enhanced" term ~ (GM/c²)²/b matters near
               the limb at the 10 ns level); static mass, positions at the times of emission
               and reception. Navigation-grade light time follows the IERS Conventions
               (2010) ch. 11 and the responsible authority's model.
    PPN:       (1 + γ)/2 relative to general relativity.
    Source:    I. I. Shapiro 1964, Phys. Rev. Lett. 13, 789; Will 2014, Living Rev. Relativ.
               17, 4, eq. (68) (from memory); Reasenberg et al. 1979, ApJ 234, L219.
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
    check.weak_field(gm, 2 * area / sep, "closest approach", c)
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
               ~ b²/r²) and first order in GM/(c² b).
    PPN:       (1 + γ)/2 relative to general relativity.
    Source:    Will 2014, Living Rev. Relativ. 17, 4, eq. (69) (from memory); Bertotti, Iess &
               Tortora 2003, Nature 425, 374.
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
