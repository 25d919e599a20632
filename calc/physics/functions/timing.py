"""Time and clocks: a binary pulsar's delays, what an orbiting clock gains or loses, Sagnac.

Dates are astropy `Time` objects (any scale; used in TDB); durations are time
quantities. The binary-pulsar delays follow Damour & Deruelle (1986) with the
post-Keplerian parameters general relativity predicts from the two masses (the
functions of the binaries topic compute them); the clock offsets are the
first post-Newtonian proper-time integrals of Ashby (2003) along the two-body
orbits of `orbit_state`.
"""

from __future__ import annotations

from typing import Annotated

import astropy.units as u
import numpy as np

from ...errors import ArgumentError, DomainError
from ..records import Record
from ..units import quantity
from . import args as check
from . import register
from .args import Angle, AngularRate, Date, Dimensionless, Mass, Time
from .binaries import (
    einstein_delay_amplitude,
    orbital_decay_rate,
    periastron_rate,
    shapiro_range,
    shapiro_shape,
)
from .motion import Orbit, State, _positions, orbit_phase, solve_kepler, true_from_eccentric

TOPIC = "timing"

Delays = Annotated[Record, "delays record (roemer, einstein, shapiro, total)"]
#: Earth's nominal rotation rate, WGS-84 / GPS (Ashby 2003, §2); IERS Conventions (2010)
#: Table 1.1 gives 7.292115e−5 rad/s.
EARTH_ROTATION = 7.2921151467e-5          # rad/s
_YEAR_S = 365.25 * 86400.0
_DEG = np.pi / 180
#: The arrival-time inversion stops when no date moves by more than this (s); it
#: contracts by x n / (1 − e) per step (1e−3 for B1913+16).
_INVERSION_STEP = 1e-11
_INVERSION_MAX_ITERATIONS = 100


def _light_seconds(x: u.Quantity) -> float:
    """x as a light-travel time in seconds: a time, or a length (lt-s, a1 sin i) over c."""
    try:
        return check.duration(x, "x")
    except ArgumentError:
        try:
            metres = check.to_value(x, u.m, "x", "a time or a length")
        except ArgumentError:
            raise ArgumentError(f"`x` must be a light-travel time (s) or a length (lsec), "
                                f"got {check.show(x)}", "x") from None
        check.positive(metres, x, "x")
        return metres / check.speed_of_light()


@register("binary_delays", TOPIC)
def binary_delays(t: Date, Pb: Time, x: Time, e: Dimensionless, omega: Angle, T0: Date,
                  m1: Mass, m2: Mass) -> Delays:
    """Roemer, Einstein and Shapiro delays of a binary pulsar's pulses at given arrival dates.

    Formula:   (Damour & Deruelle 1986) with T the pulsar's time since T0 and n = 2π/Pb:
               u − e sin u = n [T − ½ (Ṗb/Pb) T²];  A_e(u) the true anomaly;
               ω = ω0 + k A_e(u), k = ω̇/n;
               Δ_R = x [sin ω (cos u − e) + √(1 − e²) cos ω sin u];
               Δ_E = γ sin u;
               Δ_S = −2r ln{1 − e cos u − s [sin ω (cos u − e) + √(1 − e²) cos ω sin u]};
               the arrival date t satisfies t − T0 = T + Δ_R + Δ_E + Δ_S, solved for T by
               iteration (it contracts by about x n/(1 − e) per step).
               γ, r = G m2/c³, s = sin i, ω̇ (so k) and Ṗb are general relativity's values
               for the masses (einstein_delay_amplitude, shapiro_range, shapiro_shape,
               periastron_rate, orbital_decay_rate).
    Arguments: t  arrival dates at the binary's barycentre frame (barycentric arrival times,
               TDB; arrays allowed);  Pb  orbital period at T0 (time);  x  projected
               semi-major axis a1 sin i / c (time, or a length such as 2.34 lsec);
               e  eccentricity;  omega  longitude of periastron ω0 at T0 (angle);
               T0  a date of periastron passage;  m1, m2  pulsar and companion masses (or GM)
    Result:    a record: roemer, einstein, shapiro, total (times, in s)
    Validity:  first post-Newtonian timing formula without the aberration delay Δ_A, the
               orbit's relativistic deformations δ_r, δ_θ (relative size
               ~ (G M n/c³)^(2/3), 1e−6 for B1913+16, microseconds of Roemer delay) and the
               Doppler factor D (absorbed in Pb); ė = ẋ = 0. Pb, x, e, ω0 at T0.
    PPN:       general relativity only (γ, r, s, ω̇, Ṗb from the masses).
    Source:    Damour & Deruelle 1986, Ann. Inst. Henri Poincaré (Phys. Théor.) 44, 263,
               §§4–5: Roemer, Einstein and Shapiro delays and the timing formula (equation
               numbers not checked here, from memory); Taylor & Weisberg 1989, ApJ 345,
               434 (from memory: not reachable here); PSR B1913+16 from Weisberg & Huang 2016, ApJ 829, 55.
    """
    dates = check.date(t, "t")
    start = check.date(T0, "T0")
    if start.ndim:
        raise ArgumentError("`T0` must be a single date, not an array", "T0")
    pb = check.duration(Pb, "Pb")
    light = _light_seconds(x)
    ecc = check.eccentricity(e)
    omega0 = check.angle(omega, "omega")
    x_time = quantity(light, u.s)
    gamma = einstein_delay_amplitude(m1, m2, Pb, e).to_value(u.s)
    r = shapiro_range(m2).to_value(u.s)
    s = shapiro_shape(m1, m2, Pb, x_time).to_value(u.dimensionless_unscaled)
    if np.any(np.asarray(s) >= 1):
        raise ArgumentError("these masses, Pb and x give sin i ≥ 1: no orbit fits them "
                            f"(s = {np.max(s):.6g})", "x")
    omdot = periastron_rate(m1, m2, Pb, e).to_value(u.deg / u.yr) * _DEG / _YEAR_S
    pbdot = orbital_decay_rate(m1, m2, Pb, e).to_value(u.dimensionless_unscaled)
    n = 2 * np.pi / pb
    k = omdot / n
    root = np.sqrt(1 - ecc * ecc)
    since = check.seconds_between(dates, start)

    def delays(T):
        phase = T / pb
        E = solve_kepler(2 * np.pi * (phase - 0.5 * pbdot * phase * phase), ecc)
        w = omega0 + k * true_from_eccentric(E, ecc)
        sin_u, cos_u = np.sin(E), np.cos(E)
        projection = np.sin(w) * (cos_u - ecc) + root * np.cos(w) * sin_u
        roemer = light * projection
        einstein = gamma * sin_u
        shapiro = -2 * r * np.log(1 - ecc * cos_u - s * projection)
        return roemer, einstein, shapiro

    T = since
    # T itself carries float rounding of eps |T| (7 ns after a year): stop at that floor too
    floor = _INVERSION_STEP + 4 * np.finfo(float).eps * np.max(np.abs(since))
    for _ in range(_INVERSION_MAX_ITERATIONS):
        roemer, einstein, shapiro = delays(T)
        updated = since - (roemer + einstein + shapiro)
        moved = np.max(np.abs(updated - T))
        T = updated
        if not moved > floor:
            break
    else:
        raise DomainError("the arrival times could not be inverted to the pulsar's time "
                          "(x n/(1 − e) is too close to 1)")
    roemer, einstein, shapiro = delays(T)
    return Record("delays", {
        "roemer": quantity(roemer, u.s),
        "einstein": quantity(einstein, u.s),
        "shapiro": quantity(shapiro, u.s),
        "total": quantity(roemer + einstein + shapiro, u.s),
    })


@register("clock_offset", TOPIC)
def clock_offset(M: Mass, orbit: Orbit, t0: Date, t1: Date) -> Time:
    """Proper time minus coordinate time that a clock on a Keplerian orbit accumulates.

    Formula:   dτ/dt − 1 = −GM/(c² r) − v²/(2c²), integrated along the two-body orbit
               (dt = (1 − e cos E) dE/n, ∫dt/r = ΔE/(n a), v² = μ (2/r − 1/a)):
               Δ(τ − t) = −(GM + μ) ΔE/(c² n a) + μ Δt/(2 a c²),  μ = G(M + m).
               For a test clock (no m) this is Ashby's −(3GM/(2ac²)) Δt
               − (2√(GMa) e/c²)(sin E1 − sin E0), the secular rate plus the periodic
               eccentricity term.
    Arguments: M  mass or GM of the central body;  orbit  an orbit record with t_peri, or
               mean_anomaly and epoch (its m, if given, sets the motion through μ);
               t0, t1  dates (arrays allowed)
    Result:    time, in µs (negative: the orbiting clock falls behind)
    Validity:  first post-Newtonian order, Keplerian orbit, the central body's field only
               (no J2, no tides, no other bodies). The coordinate time is that of a frame
               centred on M (for the Earth: TCG; TT runs slower by L_G, so subtract
               L_G Δt for a clock compared with TT).
    PPN:       none at this order (clock rates are set by g00: only β, at the next order).
    Source:    Ashby 2003, Living Rev. Relativity 6, 1, §5 (eccentricity correction) and
               §4 (satellite clock rate) (equation numbers from memory).
    """
    start = check.date(t0, "t0")
    end = check.date(t1, "t1")
    gm = check.gravitational_parameter(M)
    elements, mu, n, E0 = orbit_phase(M, orbit, start)
    _, _, _, E1 = orbit_phase(M, orbit, end)
    c = check.speed_of_light()
    check.weak_field(gm, elements.a * (1 - elements.e), "a (1 − e)", c, argument="orbit")
    elapsed = check.seconds_between(end, start)
    offset = -(gm + mu) * (E1 - E0) / (c**2 * n * elements.a) \
        + mu * elapsed / (2 * elements.a * c**2)
    return quantity(offset * 1e6, u.us)


@register("sagnac_delay", TOPIC)
def sagnac_delay(sender: State, receiver: State, omega: AngularRate | None = None) -> Time:
    """Sagnac term of a signal between two points fixed to a rotating body (Earth-fixed frame).

    Formula:   Δt = 2ω A/c² = ω (x_s y_r − y_s x_r)/c², A = ½ (r_s × r_r)·ẑ the area swept
               by the vector from the rotation axis to the signal, projected onto the
               equatorial plane (positive for a signal travelling eastward)
    Arguments: sender, receiver  state records (x, y, z) in a frame fixed to the body, z
               along its rotation axis (arrays allowed: legs of a path add up);
               omega  rotation rate (angle per time; default the Earth's,
               7.2921151467e−5 rad/s)
    Result:    time, in ns (to add to the light time computed in the rotating frame)
    Validity:  first order in ω r/c; straight signal path. Round the equator, the legs add to
               2ω π R²/c² ≈ 207.4 ns.
    PPN:       none (kinematic).
    Source:    Ashby 2003, Living Rev. Relativity 6, 1, §2 (Sagnac effect; ω_E, WGS-84)
               (equation number from memory); IERS Conventions (2010), ch. 10 (from memory:
               the chapter was not reachable here).
    """
    xs, ys, _ = _positions(sender, "sender")
    xr, yr, _ = _positions(receiver, "receiver")
    rate = EARTH_ROTATION if omega is None else \
        check.to_value(omega, u.rad / u.s, "omega", "an angle per time")
    c = check.speed_of_light()
    delay = rate * (xs * yr - ys * xr) / c**2
    return quantity(delay * 1e9, u.ns)


def _date(t, name: str = "t"):
    from ..records import is_date as _is_date

    if not _is_date(t):
        raise ArgumentError(f"`{name}` must be a date, such as `2031-04-12T06:30 TDB`", name)
    return t


@register("mjd", TOPIC)
def mjd(t: Date) -> u.Quantity:
    """Modified Julian Date of a date in its own time scale (JD − 2400000.5; IAU 1973,
    Resolution of Commission 4)."""
    date = _date(t)
    return u.Quantity(date.mjd, u.dimensionless_unscaled)


@register("jd", TOPIC)
def jd(t: Date) -> u.Quantity:
    """Julian Date of a date in its own time scale."""
    date = _date(t)
    return u.Quantity(date.jd, u.dimensionless_unscaled)
