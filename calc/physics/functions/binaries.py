"""Binary pulsars: the post-Keplerian parameters general relativity predicts, kinematic
corrections to the orbital period derivative, and the gravitational-wave inspiral.

m1 is the pulsar, m2 the companion; both accept masses or gravitational
parameters. With T_i = G m_i / c³ (T☉ = GM☉/c³ = 4.925490947 µs for one
solar mass) and M = m1 + m2 the post-Keplerian formulas below are those of
Damour & Deruelle (1986) as collected in Lorimer & Kramer (2005), §8.4. They
are general relativity's predictions: the PPN factor (2 + 2γ − β)/3 of a test
body does not apply to a binary's ω̇, because the bodies' own strong fields
enter (Damour & Esposito-Farèse 1992); only `shapiro_range`, a propagation
effect in the companion's weak field, takes γ.

Sources: "(read)" marks a text read for this entry; "(from memory: …)" one that could not
be read — a book, or a paper whose text is not among the stored copies the team can search
— with the value or equation recalled and checked by the tests against an outside reference.
"""

from __future__ import annotations

from functools import cache
from typing import Annotated

import astropy.units as u
import numpy as np

from ...errors import ArgumentError
from ..constants import active, active_selection
from ..units import quantity, unit_table
from ..validity import warn
from . import args as check
from . import register
from .args import Angle, AngularRate, Dimensionless, Length, Mass, Speed, Time

TOPIC = "binaries"

Frequency = Annotated[u.Quantity, "frequency"]
FrequencyRate = Annotated[u.Quantity, "frequency per time"]
Acceleration = Annotated[u.Quantity, "acceleration"]

_YEAR_S = 365.25 * 86400.0
_DEG = np.pi / 180
_KPC_M = u.kpc.to(u.m)


def _times(m1: u.Quantity, m2: u.Quantity) -> tuple[float, float, float]:
    """(T1, T2, T_M): G m / c³ in seconds for the pulsar, the companion and the total."""
    c = check.speed_of_light()
    t1 = check.gravitational_parameter(m1, "m1") / c**3
    t2 = check.gravitational_parameter(m2, "m2") / c**3
    return t1, t2, t1 + t2


def _enhancement(e):
    """Peters–Mathews f(e) = (1 + 73/24 e² + 37/96 e⁴) (1 − e²)^(−7/2)."""
    return (1 + 73 / 24 * e**2 + 37 / 96 * e**4) / (1 - e**2) ** 3.5


def _order(q: u.Quantity | None) -> int:
    """The post-Newtonian order of `periastron_rate`: 1 (default) or 2."""
    if q is None:
        return 1
    value = check.dimensionless(q, "order")
    if np.ndim(value) != 0 or value not in (1, 2):
        raise ArgumentError(f"`order` must be 1 or 2, got {check.show(q)}", "order")
    return int(value)


def _frequency(q: u.Quantity, name: str = "f"):
    """A positive frequency in Hz."""
    value = check.to_value(q, u.Hz, name, "a frequency")
    check.positive(value, q, name)
    return value


@register("periastron_rate", TOPIC)
def periastron_rate(m1: Mass, m2: Mass, Pb: Time, e: Dimensionless,
                    order: Dimensionless | None = None) -> AngularRate:
    """Relativistic advance of periastron ω̇ of a binary (general relativity), 1PN or 2PN.

    Formula:   order 1:  ω̇ = 3 (Pb/2π)^(−5/3) (T☉ M)^(2/3) / (1 − e²),  M = m1 + m2
               order 2:  ω̇ = n k,  k = 3 β² / (1 − e²) · [1 + f_O β²],
                         β = (T☉ M n)^(1/3), n = 2π/Pb, X_i = m_i / M,
                         f_O = (39/4 X1² + 27/4 X2² + 15 X1 X2) / (1 − e²)
                               − (13/4 X1² + 1/4 X2² + 13/3 X1 X2)
    Arguments: m1, m2  pulsar and companion masses (or GM);  Pb  orbital period (time);
               e  eccentricity (0 ≤ e < 1), the "time eccentricity" e_T of the
               Damour–Deruelle timing model;  order  1 (default) or 2
    Result:    angle per time, in deg / yr
    Validity:  order 1: first post-Newtonian order (the 2PN term is 2.6e-5 of ω̇ for
               J0737−3039A, 2.3e-5 for B1913+16). Order 2 adds the second post-Newtonian
               term of the orbit; the spin–orbit (Lense–Thirring) contribution, which is
               of the same size for the double pulsar, depends on the pulsars' moments of
               inertia and is not included. f_O is not symmetric in the masses because e_T
               is the eccentricity of the Damour–Deruelle model for pulsar 1.
    PPN:       general relativity only; the test-body factor (2 + 2γ − β)/3 does not apply.
    Source:    Damour & Deruelle 1986, Ann. Inst. Henri Poincaré 44, 263; Lorimer & Kramer
               2005, Handbook of Pulsar Astronomy, eq. (8.49) (from memory: a book); checked against
               Weisberg & Huang 2016, ApJ 829, 55 (4.226598 °/yr). 2PN: Damour & Schäfer
               1988, Nuovo Cimento B 101, 127, eqs. (5.19)–(5.23) (from memory: the paper's
               text is not reachable); the tests check it against the exact Schwarzschild
               geodesic in the test-mass limit.
    """
    t1, t2, tm = _times(m1, m2)
    pb = check.duration(Pb, "Pb")
    ecc = check.eccentricity(e)
    level = _order(order)
    rate = 3 * (pb / (2 * np.pi)) ** (-5 / 3) * tm ** (2 / 3) / (1 - ecc**2)
    if level == 2:
        x1, x2 = t1 / tm, t2 / tm
        beta2 = (tm * 2 * np.pi / pb) ** (2 / 3)
        f_o = (39 / 4 * x1**2 + 27 / 4 * x2**2 + 15 * x1 * x2) / (1 - ecc**2) \
            - (13 / 4 * x1**2 + 1 / 4 * x2**2 + 13 / 3 * x1 * x2)
        rate = rate * (1 + f_o * beta2)
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
    Source:    Damour & Deruelle 1986; Lorimer & Kramer 2005, eq. (8.50) (from memory: a book);
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
               (from memory: a book, and a paper not reachable); Weisberg & Huang 2016,
               ApJ 829, 55 (−2.40263e−12; read in the abstract: masses 1.438 and 1.390 Msun).
    """
    t1, t2, tm = _times(m1, m2)
    pb = check.duration(Pb, "Pb")
    ecc = check.eccentricity(e)
    rate = -192 * np.pi / 5 * (pb / (2 * np.pi)) ** (-5 / 3) * _enhancement(ecc) * t1 * t2 \
        * tm ** (-1 / 3)
    return quantity(rate)


@register("shapiro_range", TOPIC)
def shapiro_range(m2: Mass, gamma: Dimensionless | None = None) -> Time:
    """Range r of the Shapiro delay in a binary: the companion's mass in time units.

    Formula:   r = (1 + γ)/2 · T☉ m2 = (1 + γ)/2 · G m2 / c³
    Arguments: m2  companion mass (or GM);  gamma  PPN γ (default: the sheet's
               `ppn gamma`, else 1)
    Result:    time, in s
    Validity:  first post-Newtonian order; the pulsar's signal passes through the
               companion's weak field (the delay is −2 r ln(1 − e cos u − s[…])).
    PPN:       (1 + γ)/2: the delay of a signal passing a mass m is (1 + γ) G m / c³
               times the logarithm, as in `shapiro_delay`; general relativity gives
               r = T☉ m2. (For strongly self-gravitating bodies in a scalar-tensor
               theory the companion's effective coupling also changes; not modelled.)
    Source:    Damour & Deruelle 1986; Lorimer & Kramer 2005, eq. (8.53) (from memory: a
               book); PPN form of the delay: Will 2014, Living Rev. Relativ. 17, 4, §3.3 (from
               memory: not reachable).
    """
    c = check.speed_of_light()
    g = check.ppn(gamma, "gamma")
    return quantity((1 + g) / 2 * check.gravitational_parameter(m2, "m2") / c**3, u.s)


@register("shapiro_shape", TOPIC)
def shapiro_shape(m1: Mass, m2: Mass, Pb: Time, x: Time) -> Dimensionless:
    """Shape s = sin i of the Shapiro delay, from the masses and the projected semi-major axis.

    Formula:   s = x (Pb/2π)^(−2/3) T☉^(−1/3) M^(2/3) / m2
    Arguments: m1, m2  pulsar and companion masses (or GM);  Pb  orbital period (time);
               x  projected semi-major axis of the pulsar's orbit a1 sin i / c (time, s)
    Result:    dimensionless (sin i); above 1 the masses and x are inconsistent
    Validity:  first post-Newtonian order.
    PPN:       general relativity only.
    Source:    Damour & Deruelle 1986; Lorimer & Kramer 2005, eq. (8.54) (from memory: a book).
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
               D 49, 2658 (from memory: not reachable); Abbott et al. 2016, Phys. Rev. D 93,
               122004 (read in the abstract: chirp mass ~30 Msun in the detector frame).
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
               (from memory: not reachable; the tests integrate eqs. (5.6)–(5.7) directly).
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


# ---- the mass function and the companion's mass -----------------------------------


def _gm_sun() -> float:
    return active("GM_sun").to_value(check.GM_UNIT)


@register("mass_function", TOPIC)
def mass_function(Pb: Time, x: Time) -> Mass:
    """Mass function f = (m2 sin i)³ / (m1 + m2)² from the orbital period and projected axis.

    Formula:   f = 4π² (a1 sin i)³ / (G Pb²) = 4π² (x c)³ / (G Pb²) = (m2 sin i)³ / M²
    Arguments: Pb  orbital period (time);  x  projected semi-major axis of the pulsar's
               orbit a1 sin i / c (time, light-seconds)
    Result:    mass, in Msun: a lower limit on the companion's mass
    Validity:  Kepler's third law for the pulsar's orbit about the centre of mass
               (Newtonian; relativistic corrections are of order GM/(c² a)).
    PPN:       none (Newtonian).
    Source:    Lorimer 2008, Living Rev. Relativ. 11, 8, §4.4, eq. (11) (read; the equation
               itself is an image in the stored copy: its form is the standard one of
               spectroscopic binaries); Lorimer & Kramer 2005, eq. (8.34) (from memory: a
               book).
    """
    pb = check.duration(Pb, "Pb")
    projected = check.duration(x, "x")
    c = check.speed_of_light()
    gm_f = 4 * np.pi**2 * (projected * c) ** 3 / pb**2
    # Msun is GM☉/G, so GM_f over GM☉ is the mass function in Msun
    return quantity(gm_f / _gm_sun(), _solar_mass_unit())


def companion_mass_from(gm1, gm_f, sin_i):
    """The root m2 > 0 of (m2 sin i)³ = f (m1 + m2)², all in GM units, for arrays.

    With Y = m2/m1 and K = (f / (m1 sin³ i))^(1/3) the equation reads
    φ(Y) = Y − K (1 + Y)^(2/3) = 0. φ is convex and rises through its single positive
    root (φ' ≥ 1/3 there), so Newton's method started to the right of the root falls
    monotonically onto it; Y0 = max(2K, 8K³) lies to the right because (1 + Y)^(2/3)
    ≤ 1 + Y^(2/3). The loop runs over iterations, each on whole arrays.
    """
    k = np.cbrt(gm_f / (gm1 * sin_i**3))
    y = np.maximum(2 * k, 8 * k**3)
    for _ in range(200):
        third = np.cbrt(1 + y)
        phi = y - k * third**2
        step = phi / (1 - 2 / 3 * k / third)
        y = y - step
        if np.all(np.abs(step) <= 4e-16 * y):
            break
    return y * gm1


@register("companion_mass", TOPIC)
def companion_mass(m1: Mass, Pb: Time, x: Time, i: Angle | None = None) -> Mass:
    """Companion mass m2 from the mass function, the pulsar's mass and the inclination.

    Formula:   solves (m2 sin i)³ / (m1 + m2)² = f,  f = 4π² (x c)³ / (G Pb²), for m2 > 0
               (a cubic with one positive root, found by a monotone Newton iteration)
    Arguments: m1  pulsar mass (or GM);  Pb  orbital period (time);
               x  projected semi-major axis a1 sin i / c (time);
               i  orbital inclination (angle, default 90°: the minimum companion mass)
    Result:    mass, in Msun
    Validity:  Newtonian Kepler orbit, as `mass_function`. With i = 60° the value is the
               median companion mass for randomly oriented orbits.
    PPN:       none (Newtonian).
    Source:    Lorimer 2008, Living Rev. Relativ. 11, 8, §4.4 (read: minimum companion mass
               for i = 90°, the mass function solved for m2).
    """
    gm1 = check.gravitational_parameter(m1, "m1")
    pb = check.duration(Pb, "Pb")
    projected = check.duration(x, "x")
    sin_i = 1.0 if i is None else np.sin(check.angle(i, "i"))
    if np.any(np.asarray(sin_i) <= 1e-12):
        raise ArgumentError(f"`i` must give sin i > 0 (an orbit seen face-on shows no "
                            f"projected axis), got {check.show(i)}", "i")
    c = check.speed_of_light()
    gm_f = 4 * np.pi**2 * (projected * c) ** 3 / pb**2
    return quantity(companion_mass_from(gm1, gm_f, sin_i) / _gm_sun(), _solar_mass_unit())


# ---- spin precession ----------------------------------------------------------------


@register("geodetic_spin_rate", TOPIC)
def geodetic_spin_rate(m1: Mass, m2: Mass, Pb: Time, e: Dimensionless) -> AngularRate:
    """Relativistic (geodetic) precession rate of the pulsar's spin axis in a binary.

    Formula:   Ω_p = (2π/Pb)^(5/3) T☉^(2/3) m2 (4 m1 + 3 m2) / (2 M^(4/3)) / (1 − e²)
    Arguments: m1  mass of the precessing pulsar;  m2  companion mass (or GM);
               Pb  orbital period (time);  e  eccentricity (0 ≤ e < 1)
    Result:    angle per time, in deg / yr; the spin precesses about the orbital
               angular momentum (the rate of the other body: swap m1 and m2)
    Validity:  first post-Newtonian order, orbit-averaged (Barker & O'Connell's
               spin–orbit precession).
    PPN:       general relativity only (for a test gyroscope the factor is (1 + 2γ)/3;
               for a binary of compact bodies no PPN form applies).
    Source:    Barker & O'Connell 1975, Phys. Rev. D 12, 329; Lorimer 2001, Living Rev.
               Relativ. 4, 5, on geodetic precession (read: the B1913+16 period, 297.5 yr;
               the equation itself is an image in the stored copy); Kramer & Wex 2009, Class.
               Quantum Grav. 26, 073001, eq. (15) (from memory: not reachable).
    """
    t1, t2, tm = _times(m1, m2)
    pb = check.duration(Pb, "Pb")
    ecc = check.eccentricity(e)
    n = 2 * np.pi / pb
    rate = n ** (5 / 3) * tm ** (2 / 3) * (t2 / tm) * (4 * t1 + 3 * t2) / (2 * tm) / (1 - ecc**2)
    return quantity(rate * _YEAR_S / _DEG, u.deg / u.yr)


# ---- kinematic contributions to the observed orbital period derivative -------------


@register("shklovskii_rate", TOPIC)
def shklovskii_rate(Pb: Time, mu: AngularRate, d: Length) -> Dimensionless:
    """Apparent orbital period derivative Ṗb from the binary's proper motion (Shklovskii).

    Formula:   Ṗb = Pb μ² d / c   (the transverse motion turns into a growing radial
               velocity v_T²/d = μ² d)
    Arguments: Pb  orbital period (time);  mu  total proper motion (angle per time);
               d  distance (length)
    Result:    dimensionless (seconds per second), positive: it lengthens the period
    Validity:  exact to first order in (v_T t / d); applies to any period (spin or orbit).
    PPN:       none (kinematics).
    Source:    Shklovskii 1970, Sov. Astron. 13, 562; Damour & Taylor 1991, ApJ 366, 501
               (from memory: not reachable); the kinematic distance of PSR J0437−4715 from this effect:
               Verbiest et al. 2008, ApJ 679, 675 (read: D_k = 157.0 ± 2.4 pc).
    """
    pb = check.duration(Pb, "Pb")
    rate = check.to_value(mu, u.rad / u.s, "mu", "an angle per time")
    if check.any_below(rate, 0):
        raise ArgumentError(f"`mu` is the total proper motion and must not be negative, "
                            f"got {check.show(mu)}", "mu")
    distance = check.length(d, "d")
    c = check.speed_of_light()
    return quantity(pb * np.asarray(rate) ** 2 * distance / c)


#: Distance of the Sun from the Galactic centre and circular speed there: Reid et al. 2019,
#: ApJ 885, 131 (read in the abstract: R0 = 8.15 ± 0.15 kpc, Θ0 = 236 ± 7 km/s).
GALACTIC_R0_KPC = 8.15
GALACTIC_V0_KMS = 236.0


def vertical_acceleration(z_m):
    """Holmberg & Flynn 2004 K_z(z) in m/s² for a height z in metres (magnitude, toward the plane).

    K_z / (1e-9 cm s⁻²) = 2.27 z_kpc + 3.68 (1 − exp(−4.31 z_kpc)), z_kpc = |z| in kpc.
    """
    z_kpc = np.abs(z_m) / _KPC_M
    return (2.27 * z_kpc + 3.68 * (1 - np.exp(-4.31 * z_kpc))) * 1e-11


@register("galactic_rate", TOPIC)
def galactic_rate(Pb: Time, l: Angle, b: Angle, d: Length, R0: Length | None = None,  # noqa: E741
                  v0: Speed | None = None, Kz: Acceleration | None = None) -> Dimensionless:
    """Apparent orbital period derivative Ṗb from the Galaxy's differential acceleration.

    Formula:   Ṗb/Pb = n·(a_psr − a_sun)/c
                     = −(v0²/(c R0)) (cos l + β/(sin² l + β²)) cos b − K_z |sin b| / c,
               β = (d/R0) cos b − cos l   (flat rotation curve: a = v0²/R toward the axis);
               K_z = (2.27 z + 3.68 (1 − e^(−4.31 z))) × 1e-9 cm s⁻², z = |d sin b| in kpc
    Arguments: Pb  orbital period (time);  l, b  Galactic longitude and latitude (angles);
               d  distance (length);  R0  the Sun's distance from the Galactic centre
               (default 8.15 kpc);  v0  circular speed of the Galaxy at the Sun (default
               236 km/s);  Kz  vertical acceleration at the pulsar (default: the model above)
    Result:    dimensionless (seconds per second); subtract it (and `shklovskii_rate`) from
               an observed Ṗb before comparing with `orbital_decay_rate`
    Validity:  axisymmetric Galaxy with a flat rotation curve, Sun in the plane; the
               vertical model holds for |z| ≲ 1.5 kpc near the solar circle. Spiral arms,
               the bar and local masses add errors of a few per cent of the planar term.
    PPN:       none (Newtonian dynamics of the Galaxy).
    Source:    planar term: Damour & Taylor 1991, ApJ 366, 501, eq. (2.12) (from memory: not
               reachable; the tests check it against the vector geometry); vertical term:
               Holmberg & Flynn 2004, MNRAS 352, 440, as used by Lazaridis et al. 2009, MNRAS
               400, 805 (from memory: neither text is reachable);
               defaults R0, v0: Reid et al. 2019, ApJ 885, 131 (read).
    """
    pb = check.duration(Pb, "Pb")
    lon = check.angle(l, "l")
    lat = check.angle(b, "b")
    if np.any(np.abs(np.asarray(lat)) > np.pi / 2 * (1 + 1e-12)):
        raise ArgumentError(f"`b` must lie between −90 and 90 deg, got {check.show(b)}", "b")
    distance = check.length(d, "d")
    r0 = GALACTIC_R0_KPC * _KPC_M if R0 is None else check.length(R0, "R0")
    speed = GALACTIC_V0_KMS * 1e3 if v0 is None else check.speed(v0, "v0")
    c = check.speed_of_light()
    cos_b, sin_l = np.cos(lat), np.sin(lon)
    beta = distance / r0 * cos_b - np.cos(lon)
    radius2 = sin_l**2 + beta**2          # (pulsar's distance from the axis / R0)²
    if np.any(radius2 == 0):
        raise ArgumentError("the pulsar would lie on the Galaxy's rotation axis, where a flat "
                            "rotation curve has no finite acceleration", "d")
    if np.any(np.sqrt(radius2) < 0.5):
        warn("the pulsar lies within R0/2 of the Galactic axis: a flat rotation curve "
             "does not describe the inner Galaxy")
    planar = -speed**2 / (c * r0) * (np.cos(lon) + beta / radius2) * cos_b
    z = distance * np.sin(lat)
    if Kz is None:
        if np.any(np.abs(z) > 1.5 * _KPC_M):
            warn("the pulsar lies more than 1.5 kpc from the Galactic plane, beyond the range "
                 "of the vertical acceleration model")
        kz = vertical_acceleration(z)
    else:
        kz = check.to_value(Kz, u.m / u.s**2, "Kz", "an acceleration")
    vertical = -np.asarray(kz) * np.abs(np.sin(lat)) / c
    return quantity(pb * (planar + vertical))


# ---- the gravitational-wave inspiral (leading, quadrupole order) --------------------


def _chirp_time(m1: u.Quantity, m2: u.Quantity) -> tuple[float, float]:
    """(G𝓜/c³, G M/c³) in seconds."""
    t1, t2, tm = _times(m1, m2)
    return (t1 * t2) ** 0.6 / tm**0.2, tm


def _inspiral_check(tm, f) -> None:
    """Warn above the gravitational-wave frequency of the Schwarzschild ISCO of mass M."""
    f_isco = 1 / (6**1.5 * np.pi * tm)
    if np.any(np.asarray(f) > f_isco):
        warn("`f` is above the gravitational-wave frequency of the innermost stable orbit "
             "(c³/(6^(3/2) π G M)): the leading-order inspiral no longer describes the merger")


@register("gw_frequency", TOPIC)
def gw_frequency(Pb: Time) -> Frequency:
    """Gravitational-wave frequency of a circular binary's dominant (quadrupole) harmonic.

    Formula:   f = 2 / Pb
    Arguments: Pb  orbital period (time)
    Result:    frequency, in Hz
    Validity:  circular orbit; an eccentric binary radiates at all harmonics n/Pb.
    PPN:       none (general relativity's quadrupole radiation).
    Source:    Peters & Mathews 1963, Phys. Rev. 131, 435 (from memory: not reachable);
               Abbott et al. 2016, Phys. Rev. Lett. 116, 061102 (the chirp analysed at twice
               the orbital frequency; from memory: the text is not reachable).
    """
    return quantity(2 / check.duration(Pb, "Pb"), u.Hz)


@register("chirp_rate", TOPIC)
def chirp_rate(m1: Mass, m2: Mass, f: Frequency) -> FrequencyRate:
    """Rate of change ḟ of the gravitational-wave frequency of a circular inspiral.

    Formula:   ḟ = (96/5) π^(8/3) (G𝓜/c³)^(5/3) f^(11/3),  𝓜 = (m1 m2)^(3/5)/M^(1/5)
    Arguments: m1, m2  component masses (or GM);  f  gravitational-wave frequency (> 0)
    Result:    frequency per time, in Hz / s
    Validity:  leading (quadrupole) order, circular orbit: the relative error is of order
               (π G M f / c³)^(2/3) (about 0.1 near 100 Hz for tens of solar masses).
               Masses in the detector frame ((1 + z) times the source masses).
    PPN:       general relativity only.
    Source:    Abbott et al. 2016, Phys. Rev. Lett. 116, 061102, eq. (1) (from memory: the
               text is not reachable); follows from Peters 1964, Phys. Rev. 136, B1224,
               eq. (5.6) with e = 0 (the tests check that).
    """
    tc, tm = _chirp_time(m1, m2)
    freq = _frequency(f)
    _inspiral_check(tm, freq)
    rate = 96 / 5 * np.pi ** (8 / 3) * tc ** (5 / 3) * np.asarray(freq) ** (11 / 3)
    return quantity(rate, u.Hz / u.s)


@register("time_to_merger", TOPIC)
def time_to_merger(m1: Mass, m2: Mass, f: Frequency) -> Time:
    """Time left until coalescence of a circular inspiral seen at gravitational-wave frequency f.

    Formula:   τ = (5/256) (G𝓜/c³)^(−5/3) (π f)^(−8/3) = (3/8) f / ḟ
    Arguments: m1, m2  component masses (or GM);  f  gravitational-wave frequency (> 0)
    Result:    time, in s
    Validity:  leading (quadrupole) order, circular orbit, point masses; the same as
               `merger_time` with Pb = 2/f and e = 0. Post-Newtonian corrections shorten
               or lengthen it by a relative amount of order (π G M f / c³)^(2/3).
    PPN:       general relativity only.
    Source:    Peters 1964, Phys. Rev. 136, B1224, eqs. (5.6), (5.10); Cutler & Flanagan
               1994, Phys. Rev. D 49, 2658 (from memory: neither text is reachable).
    """
    tc, tm = _chirp_time(m1, m2)
    freq = _frequency(f)
    _inspiral_check(tm, freq)
    tau = 5 / 256 * tc ** (-5 / 3) * (np.pi * np.asarray(freq)) ** (-8 / 3)
    return quantity(tau, u.s)


@register("gw_strain", TOPIC)
def gw_strain(m1: Mass, m2: Mass, f: Frequency, d: Length) -> Dimensionless:
    """Strain amplitude h0 of a circular binary's gravitational waves, optimally oriented.

    Formula:   h0 = 4 (G𝓜)^(5/3) (π f)^(2/3) / (c⁴ d),  𝓜 the chirp mass
    Arguments: m1, m2  component masses (or GM);  f  gravitational-wave frequency (> 0);
               d  distance (length; for cosmological sources the luminosity distance,
               with detector-frame masses)
    Result:    dimensionless: the amplitude of h+ and h× for a source seen face-on; a
               detector sees it multiplied by its antenna pattern (at most 1)
    Validity:  leading (quadrupole) order, circular orbit, far zone (d ≫ wavelength).
    PPN:       general relativity only.
    Source:    quadrupole formula h_ij = (2G/(c⁴ d)) d²I_ij/dt² (Einstein 1918; Peters &
               Mathews 1963, Phys. Rev. 131, 435) applied to a circular orbit (from memory:
               not reachable; the tests check it against the quadrupole formula).
    """
    tc, tm = _chirp_time(m1, m2)
    freq = _frequency(f)
    distance = check.length(d, "d")
    _inspiral_check(tm, freq)
    c = check.speed_of_light()
    h0 = 4 * c * tc ** (5 / 3) * (np.pi * np.asarray(freq)) ** (2 / 3) / distance
    return quantity(h0)
