"""Binary pulsars: the post-Keplerian parameters general relativity predicts, and merger times.

m1 is the pulsar, m2 the companion; both accept masses or gravitational
parameters. With T_i = G m_i / c³ (T☉ = GM☉/c³ = 4.925490947 µs for one
solar mass) and M = m1 + m2 the formulas below are those of Damour &
Deruelle (1986) as collected in Lorimer & Kramer (2005), §8.4. They are
general relativity's predictions: the PPN factor (2 + 2γ − β)/3 of a test
body does not apply to a binary's ω̇.
"""

from __future__ import annotations

from functools import cache

import astropy.units as u
import numpy as np

from ...errors import ArgumentError
from ..constants import active, active_selection
from ..units import quantity, unit_table
from ..validity import warn
from . import args as check
from . import register
from .args import AngularRate, Dimensionless, Mass, Time

TOPIC = "binaries"

_YEAR_S = 365.25 * 86400.0
_DEG = np.pi / 180


def _times(m1: u.Quantity, m2: u.Quantity) -> tuple[float, float, float]:
    """(T1, T2, T_M): G m / c³ in seconds for the pulsar, the companion and the total."""
    c = check.speed_of_light()
    t1 = check.gravitational_parameter(m1, "m1") / c**3
    t2 = check.gravitational_parameter(m2, "m2") / c**3
    return t1, t2, t1 + t2


def _enhancement(e):
    """Peters–Mathews f(e) = (1 + 73/24 e² + 37/96 e⁴) (1 − e²)^(−7/2)."""
    return (1 + 73 / 24 * e**2 + 37 / 96 * e**4) / (1 - e**2) ** 3.5


@register("periastron_rate", TOPIC)
def periastron_rate(m1: Mass, m2: Mass, Pb: Time, e: Dimensionless) -> AngularRate:
    """Relativistic advance of periastron ω̇ of a binary (general relativity).

    Formula:   ω̇ = 3 (Pb/2π)^(−5/3) (T☉ M)^(2/3) / (1 − e²),  M = m1 + m2
    Arguments: m1, m2  pulsar and companion masses (or GM);  Pb  orbital period (time);
               e  eccentricity (0 ≤ e < 1)
    Result:    angle per time, in deg / yr
    Validity:  first post-Newtonian order (2PN corrections ~ 1e-5 relative for B1913+16).
    PPN:       general relativity only; the test-body factor (2 + 2γ − β)/3 does not apply.
    Source:    Damour & Deruelle 1986, Ann. Inst. Henri Poincaré 44, 263; Lorimer & Kramer
               2005, Handbook of Pulsar Astronomy, eq. (8.49) (from memory); checked against
               Weisberg & Huang 2016, ApJ 829, 55 (4.226598 °/yr).
    """
    _, _, tm = _times(m1, m2)
    pb = check.duration(Pb, "Pb")
    ecc = check.eccentricity(e)
    rate = 3 * (pb / (2 * np.pi)) ** (-5 / 3) * tm ** (2 / 3) / (1 - ecc**2)
    return quantity(rate * _YEAR_S / _DEG, u.deg / u.yr)


@register("einstein_delay_amplitude", TOPIC)
def einstein_delay_amplitude(m1: Mass, m2: Mass, Pb: Time, e: Dimensionless) -> Time:
    """Amplitude γ of the Einstein delay (gravitational redshift plus time dilation).

    Formula:   γ = e (Pb/2π)^(1/3) T☉^(2/3) M^(−4/3) m2 (m1 + 2 m2)
    Arguments: m1, m2  pulsar and companion masses (or GM);  Pb  orbital period (time);
               e  eccentricity (0 ≤ e < 1)
    Result:    time, in s
    Validity:  first post-Newtonian order.
    PPN:       general relativity only.
    Source:    Damour & Deruelle 1986; Lorimer & Kramer 2005, eq. (8.50) (from memory);
               Weisberg & Huang 2016, ApJ 829, 55 (4.307 ms for B1913+16).
    """
    t1, t2, tm = _times(m1, m2)
    pb = check.duration(Pb, "Pb")
    ecc = check.eccentricity(e)
    amplitude = ecc * (pb / (2 * np.pi)) ** (1 / 3) * tm ** (-4 / 3) * t2 * (t1 + 2 * t2)
    return quantity(amplitude, u.s)


@register("orbital_decay_rate", TOPIC)
def orbital_decay_rate(m1: Mass, m2: Mass, Pb: Time, e: Dimensionless) -> Dimensionless:
    """Rate of change Ṗb of the orbital period from gravitational-wave emission (quadrupole).

    Formula:   Ṗb = −(192π/5) (Pb/2π)^(−5/3) f(e) T☉^(5/3) m1 m2 M^(−1/3),
               f(e) = (1 + 73/24 e² + 37/96 e⁴) (1 − e²)^(−7/2)
    Arguments: m1, m2  pulsar and companion masses (or GM);  Pb  orbital period (time);
               e  eccentricity (0 ≤ e < 1)
    Result:    dimensionless (seconds per second)
    Validity:  quadrupole (2.5 post-Newtonian) order; an observed Ṗb also holds kinematic
               terms (Shklovskii, Galactic acceleration) that must be removed first.
    PPN:       general relativity only.
    Source:    Peters & Mathews 1963, Phys. Rev. 131, 435; Lorimer & Kramer 2005, eq. (8.52)
               (from memory); Weisberg & Huang 2016, ApJ 829, 55 (−2.40263e−12).
    """
    t1, t2, tm = _times(m1, m2)
    pb = check.duration(Pb, "Pb")
    ecc = check.eccentricity(e)
    rate = -192 * np.pi / 5 * (pb / (2 * np.pi)) ** (-5 / 3) * _enhancement(ecc) * t1 * t2 \
        * tm ** (-1 / 3)
    return quantity(rate)


@register("shapiro_range", TOPIC)
def shapiro_range(m2: Mass) -> Time:
    """Range r of the Shapiro delay in a binary: the companion's mass in time units.

    Formula:   r = T☉ m2 = G m2 / c³
    Arguments: m2  companion mass (or GM)
    Result:    time, in s
    Validity:  first post-Newtonian order.
    PPN:       (1 + γ)/2 in the PPN framework; general relativity here.
    Source:    Damour & Deruelle 1986; Lorimer & Kramer 2005, eq. (8.53) (from memory).
    """
    c = check.speed_of_light()
    return quantity(check.gravitational_parameter(m2, "m2") / c**3, u.s)


@register("shapiro_shape", TOPIC)
def shapiro_shape(m1: Mass, m2: Mass, Pb: Time, x: Time) -> Dimensionless:
    """Shape s = sin i of the Shapiro delay, from the masses and the projected semi-major axis.

    Formula:   s = x (Pb/2π)^(−2/3) T☉^(−1/3) M^(2/3) / m2
    Arguments: m1, m2  pulsar and companion masses (or GM);  Pb  orbital period (time);
               x  projected semi-major axis of the pulsar's orbit a1 sin i / c (time, s)
    Result:    dimensionless (sin i); above 1 the masses and x are inconsistent
    Validity:  first post-Newtonian order.
    PPN:       general relativity only.
    Source:    Damour & Deruelle 1986; Lorimer & Kramer 2005, eq. (8.54) (from memory).
    """
    _, t2, tm = _times(m1, m2)
    pb = check.duration(Pb, "Pb")
    projected = check.duration(x, "x")
    s = projected * (pb / (2 * np.pi)) ** (-2 / 3) * tm ** (2 / 3) / t2
    if np.any(np.asarray(s) > 1):
        warn("s = sin i comes out above 1: these masses cannot give this projected axis x")
    return quantity(s)


def _solar_mass_unit() -> u.UnitBase:
    return unit_table(active_selection()).lookup("Msun")


@register("chirp_mass", TOPIC)
def chirp_mass(m1: Mass, m2: Mass) -> Mass:
    """Chirp mass (m1 m2)^(3/5) / (m1 + m2)^(1/5), which sets the gravitational-wave phase.

    Formula:   𝓜 = (m1 m2)^(3/5) / (m1 + m2)^(1/5)
    Arguments: m1, m2  component masses (or GM)
    Result:    mass, in Msun
    Validity:  exact definition (leading-order inspiral).
    PPN:       general relativity only.
    Source:    Peters & Mathews 1963, Phys. Rev. 131, 435; Cutler & Flanagan 1994, Phys. Rev.
               D 49, 2658 (from memory).
    """
    gm1 = check.gravitational_parameter(m1, "m1")
    gm2 = check.gravitational_parameter(m2, "m2")
    gm_chirp = (gm1 * gm2) ** 0.6 / (gm1 + gm2) ** 0.2
    gm_sun = active("GM_sun").to_value(check.GM_UNIT)
    unit = _solar_mass_unit()
    # Msun is GM☉/G, so the chirp GM over GM☉ is the chirp mass in Msun
    return quantity(gm_chirp / gm_sun, unit)


@cache
def _legendre(n: int = 256):
    return np.polynomial.legendre.leggauss(n)


def peters_integral(e0: float) -> float:
    """I(e0) = ∫₀^e0 e^(29/19) (1 + 121/304 e²)^(1181/2299) (1 − e²)^(−3/2) de.

    With e = e0 u^(19/48) the factor e^(29/19) de becomes e0^(48/19) (19/48) du, leaving a
    smooth integrand on [0, 1] for 256-point Gauss–Legendre quadrature.
    """
    nodes, weights = _legendre()
    t = 0.5 * (nodes + 1)
    e = e0 * t ** (19 / 48)
    g = (1 + 121 / 304 * e**2) ** (1181 / 2299) / (1 - e**2) ** 1.5
    return e0 ** (48 / 19) * 19 / 48 * 0.5 * float(np.dot(weights, g))


@register("merger_time", TOPIC, samplewise=True)
def merger_time(m1: Mass, m2: Mass, Pb: Time, e: Dimensionless) -> Time:
    """Time to coalescence by gravitational-wave emission (Peters 1964), eccentric orbits included.

    Formula:   a0 = (G M Pb² / 4π²)^(1/3),  β = (64/5) G³ m1 m2 M / c⁵.
               Circular: T = a0⁴ / (4 β).
               Eccentric: Peters' coupled da/dt, de/dt give a(e) = c0 e^(12/19) (1 − e²)^(−1)
               (1 + 121/304 e²)^(870/2299), with c0 fixed by (a0, e0); integrating dt = de/ė
               along it gives T = (12/19) c0⁴/β · ∫₀^e0 e^(29/19) (1 + 121/304 e²)^(1181/2299)
               (1 − e²)^(−3/2) de, evaluated by Gauss–Legendre quadrature.
    Arguments: m1, m2  masses (or GM);  Pb  orbital period now (time);  e  eccentricity now
    Result:    time, in yr (Julian)
    Validity:  quadrupole order, orbit-averaged (adiabatic inspiral); the last orbits before
               contact are not modelled. The circular formula alone is wrong by a factor of
               five at e ≈ 0.6.
    PPN:       general relativity only.
    Source:    P. C. Peters 1964, Phys. Rev. 136, B1224, eqs. (5.6), (5.7), (5.11), (5.14)
               (from memory).
    """
    gm1 = check.gravitational_parameter(m1, "m1")
    gm2 = check.gravitational_parameter(m2, "m2")
    pb = check.duration(Pb, "Pb")
    e0 = check.eccentricity(e)
    if np.ndim(e0) or np.ndim(pb) or np.ndim(gm1) or np.ndim(gm2):
        raise ArgumentError("takes single values, not arrays")
    c = check.speed_of_light()
    gm = gm1 + gm2
    a0 = np.cbrt(gm * pb**2 / (4 * np.pi**2))
    beta = 64 / 5 * gm1 * gm2 * gm / c**5
    if e0 < 1e-8:
        seconds = a0**4 / (4 * beta)
    else:
        if e0 > 0.999:
            warn("`e` above 0.999: the quadrature of Peters' integral loses accuracy")
        c0 = a0 * (1 - e0**2) / e0 ** (12 / 19) * (1 + 121 / 304 * e0**2) ** (-870 / 2299)
        seconds = 12 / 19 * c0**4 / beta * peters_integral(float(e0))
    return quantity(seconds / _YEAR_S, u.yr)
