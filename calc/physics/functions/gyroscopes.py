"""Gyroscopes in orbit: geodetic (de Sitter) and frame-dragging (Schiff) precession.

Rates come in milliarcseconds per Julian year, the unit gyroscope experiments report.

Sources: "(read)" marks a text read for this entry; "(from memory: …)" one that could not
be read — a book, or a paper whose text is not among the stored copies the team can search
— with the value or equation recalled and checked by the tests against an outside reference.
"""

from __future__ import annotations

import astropy.units as u
import numpy as np

from ..constants import active
from ..units import quantity
from . import args as check
from . import register
from .args import AngularMomentum, AngularRate, Dimensionless, Length, Mass

TOPIC = "gyroscopes"

_MAS = np.pi / (180 * 3600 * 1000)
_YEAR_S = 365.25 * 86400.0


@register("geodetic_rate", TOPIC)
def geodetic_rate(M: Mass, r: Length, gamma: Dimensionless | None = None) -> AngularRate:
    """Geodetic (de Sitter) precession of a gyroscope on a circular orbit.

    Formula:   Ω_G = (γ + 1/2) (G M)^(3/2) / (c² r^(5/2))   (3/2 · GM/(c² r) · n in GR)
    Arguments: M  mass or GM of the central body;  r  orbital radius (length);
               gamma  PPN γ (default: the sheet's `ppn gamma`, else 1)
    Result:    angle per time, in mas / yr; the precession axis is the orbit normal
    Validity:  circular orbit, first post-Newtonian order, non-rotating spherical body
               (the body's oblateness changes it at the 1e-3 level near the Earth).
    PPN:       (1 + 2γ)/3 relative to general relativity.
    Source:    W. de Sitter 1916, MNRAS 77, 155; L. I. Schiff 1960, Phys. Rev. Lett. 4, 215;
               Everitt et al. 2011, Phys. Rev. Lett. 106, 221101 (read in the abstract:
               6606.1 mas/yr predicted for Gravity Probe B).
    """
    gm = check.gravitational_parameter(M)
    radius = check.length(r, "r")
    g = check.ppn(gamma, "gamma")
    c = check.speed_of_light()
    check.weak_field(gm, radius, "r", c)
    rate = (g + 0.5) * gm**1.5 / (c**2 * radius**2.5)
    return quantity(rate * _YEAR_S / _MAS, u.mas / u.yr)


@register("frame_dragging_rate", TOPIC)
def frame_dragging_rate(J: AngularMomentum, r: Length,
                        gamma: Dimensionless | None = None) -> AngularRate:
    """Frame-dragging (Schiff) precession of a gyroscope, averaged over a polar circular orbit.

    Formula:   Ω = (1 + γ)/2 · G/(c² r³) · [3 (J·r̂) r̂ − J], averaged over a polar orbit:
               (1 + γ)/2 · G J / (2 c² r³), along the body's spin axis
    Arguments: J  spin angular momentum of the central body (kg m²/s);  r  orbital radius;
               gamma  PPN γ (default: the sheet's `ppn gamma`, else 1)
    Result:    angle per time, in mas / yr. A gyroscope whose spin makes an angle δ with the
               body's equatorial plane drifts at this rate times cos δ.
    Validity:  polar circular orbit, first order in G J/c³, weak field.
    PPN:       (1 + γ + α1/4)/2 relative to general relativity; α1 (a preferred-frame
               parameter the sheet does not carry) is taken as 0, leaving (1 + γ)/2.
    Source:    L. I. Schiff 1960, Phys. Rev. Lett. 4, 215; Will 2014, Living Rev. Relativ.
               17, 4, §4.1 (the PPN factor; from memory: not reachable); Everitt et al.
               2011, Phys. Rev. Lett. 106, 221101 (read in the abstract: 39.2 mas/yr
               predicted for Gravity Probe B).
    """
    spin = check.angular_momentum(J)
    radius = check.length(r, "r")
    g = check.ppn(gamma, "gamma")
    c = check.speed_of_light()
    G = active("G").to_value(u.m**3 / (u.kg * u.s**2))
    rate = (1 + g) / 2 * G * spin / (2 * c**2 * radius**3)
    return quantity(rate * _YEAR_S / _MAS, u.mas / u.yr)
