"""Time and clocks (calc.physics.functions.timing): binary-pulsar delays, orbiting clocks, Sagnac;
against closed forms, scipy quadrature and published numbers."""

from __future__ import annotations

import math

import astropy.units as u
import numpy as np
import pytest
from astropy.time import Time
from scipy.integrate import quad
from scipy.optimize import brentq

from calc.errors import ArgumentError
from calc.physics.constants import TIME_SCALE_CONSTANTS
from calc.physics.functions.binaries import (
    einstein_delay_amplitude,
    orbital_decay_rate,
    periastron_rate,
    shapiro_range,
    shapiro_shape,
)
from calc.physics.functions.perturbations import orbit
from calc.physics.functions.spacetime import eccentricity_clock_term
from calc.physics.functions.timing import binary_delays, clock_offset, sagnac_delay
from calc.physics.records import Record

C = 299_792_458.0
GM_EARTH = 3.986004418e14      # IERS Conventions (2010) Table 1.1 (TT-compatible GM of the Earth)

# PSR B1913+16, Weisberg & Huang 2016, ApJ 829, 55 (Table: DD-model fit); masses to 3 decimals.
PB = 0.322997448918 * u.d
X = 2.341776 * u.s
E = 0.6171340
OMEGA = 292.54450 * u.deg
T0 = Time(52144.90097844, format="mjd", scale="tdb")
M1, M2 = 1.438 * u.Msun, 1.390 * u.Msun


def _delays(t, e=E, omega=OMEGA, x=X):
    return binary_delays(t, PB, x, e * u.one, omega, T0, M1, M2)


def _one_orbit(n: int = 200_001):
    return T0 + np.linspace(0, PB.to_value(u.d), n) * u.d


def test_roemer_amplitude_is_x_sqrt_one_minus_e2_cos2_omega():
    # Roemer delay x [sin ω (cos u − e) + √(1−e²) cos ω sin u] = A cos u + B sin u + const with
    # √(A² + B²) = x √(1 − e² cos² ω) (closed form). Over one orbit ω advances by 2πk = 6.5e-5 rad
    # (GR ω̇ of 4.23°/yr), which moves that amplitude by < 1e-5 relative; sampling 200001 dates
    # misses the extremes by (Δu)²/8 < 1e-8: allow 2e-5.
    roemer = _delays(_one_orbit()).fields["roemer"].to_value(u.s)
    w = OMEGA.to_value(u.rad)
    assert np.ptp(roemer) / 2 == pytest.approx(2.341776 * math.sqrt(1 - E**2 * math.cos(w) ** 2),
                                               rel=2e-5, abs=0)


def test_circular_orbit_roemer_amplitude_is_x():
    # e = 0: Δ_R = x sin(ω + u), amplitude x exactly; 200001 samples: (Δu)²/8 = 1e-10
    roemer = _delays(_one_orbit(), e=0.0).fields["roemer"].to_value(u.s)
    assert np.ptp(roemer) / 2 == pytest.approx(2.341776, rel=1e-9, abs=0)


def test_einstein_delay_amplitude_is_gamma_as_published():
    # Δ_E = γ sin u: half its range over an orbit is γ, which for these masses is the published
    # 4.307 ms (Weisberg & Huang 2016; the masses are rounded to 1e-3, so 1e-3 relative)
    einstein = _delays(_one_orbit()).fields["einstein"].to_value(u.s)
    gamma = einstein_delay_amplitude(M1, M2, PB, E * u.one).to_value(u.s)
    assert np.ptp(einstein) / 2 == pytest.approx(gamma, rel=1e-8, abs=0)
    assert np.ptp(einstein) / 2 == pytest.approx(4.307e-3, rel=1e-3, abs=0)


def test_shapiro_range_and_shape_on_a_circular_orbit():
    # e = 0: Δ_S = −2r ln(1 − s sin(ω + u)); its range over an orbit is 2r ln((1 + s)/(1 − s))
    # with r = G m2/c³ and s = sin i; the maximum is at superior conjunction, ω + u = 90°, where
    # the Roemer delay x sin(ω + u) is also largest (the pulsar behind its companion).
    record = _delays(_one_orbit(), e=0.0)
    shapiro = record.fields["shapiro"].to_value(u.s)
    r = shapiro_range(M2).to_value(u.s)
    s = shapiro_shape(M1, M2, PB, X).to_value(u.one)
    assert r == pytest.approx(4.925490947e-6 * 1.390, rel=1e-9, abs=0)   # T☉ = GM☉/c³ (IAU 2015 B3)
    assert np.ptp(shapiro) == pytest.approx(2 * r * math.log((1 + s) / (1 - s)), rel=1e-8, abs=0)
    assert abs(int(np.argmax(shapiro)) - int(np.argmax(record.fields["roemer"].value))) <= 2


@pytest.mark.parametrize("start, tolerance", [(400.0, 1e-11), (3650.0, 1e-10)])
def test_delays_follow_the_true_anomaly_form_at_the_inverted_emission_time(start, tolerance):
    # Independent route: from the returned delays, the pulsar's time is T = t − T0 − total;
    # solve Kepler's equation there by brentq, take the true anomaly f from tan(f/2) =
    # √((1+e)/(1−e)) tan(u/2), ω = ω0 + k f, and the geometric forms
    # Δ_R = x (1 − e cos u) sin(ω + f), Δ_E = γ sin u, Δ_S = −2r ln[(1 − e cos u)(1 − s sin(ω + f))].
    # Agreement to 1e-11 s shows both the formulas and the inversion t = T + Δ(T) (float
    # rounding of ~30 s-sized quantities: a few 1e-15 s; the inversion stops below 1e-11 s).
    # Ten years on, T (3e8 s) itself carries eps T = 7e-8 s of rounding, which moves the delays
    # by at most x n × 7e-8 s = 4e-11 s: 1e-10 there.
    dates = T0 + np.linspace(start, start + 1.0, 37) * u.d
    record = _delays(dates)
    total = record.fields["total"].to_value(u.s)
    pb = PB.to_value(u.s)
    k = periastron_rate(M1, M2, PB, E * u.one).to_value(u.rad / u.s) * pb / (2 * math.pi)
    pbdot = orbital_decay_rate(M1, M2, PB, E * u.one).value
    gamma = einstein_delay_amplitude(M1, M2, PB, E * u.one).to_value(u.s)
    r = shapiro_range(M2).to_value(u.s)
    s = shapiro_shape(M1, M2, PB, X).to_value(u.one)
    since = (dates - T0).to_value(u.s)
    for j, t in enumerate(since):
        T = t - total[j]
        phase = T / pb
        M = 2 * math.pi * (phase - 0.5 * pbdot * phase * phase)
        u_ = brentq(lambda v, M=M: v - E * math.sin(v) - M, M - 1, M + 1, xtol=1e-15)
        f = 2 * math.atan(math.sqrt((1 + E) / (1 - E)) * math.tan(u_ / 2))
        f += 2 * math.pi * round((u_ - f) / (2 * math.pi))       # same turn as u
        w = OMEGA.to_value(u.rad) + k * f
        radial = 1 - E * math.cos(u_)
        expected = (2.341776 * radial * math.sin(w + f), gamma * math.sin(u_),
                    -2 * r * math.log(radial * (1 - s * math.sin(w + f))))
        got = [record.fields[key].to_value(u.s)[j] for key in ("roemer", "einstein", "shapiro")]
        assert got == pytest.approx(expected, rel=0, abs=tolerance)


def test_arrival_times_over_years_invert():
    # many dates over ten years: the inversion must stop at the rounding floor of T itself
    # (eps T, 7e-8 s at ten years), not chase an absolute 1e-11 s it cannot reach
    dates = T0 + np.linspace(0, 3652.5, 20001) * u.d
    total = _delays(dates).fields["total"].to_value(u.s)
    # |Δ_R| = x (r/a) |sin(ω + f)| ≤ x (1 + e), |Δ_E| ≤ γ ≈ 4.3 ms, Δ_S of order 1e-5 s
    assert np.all(np.abs(total) < 2.341776 * (1 + E) + 5e-3 + 1e-4)


def test_x_as_light_seconds_and_refusals():
    dates = T0 + [0.1, 0.2] * u.d
    in_seconds = _delays(dates).fields["total"].value
    in_lsec = _delays(dates, x=2.341776 * u.lsec).fields["total"].value
    assert np.allclose(in_seconds, in_lsec, rtol=1e-14, atol=0)
    with pytest.raises(ArgumentError, match="sin i ≥ 1"):
        _delays(dates, x=20 * u.s)
    with pytest.raises(ArgumentError, match="`T0` must be a date"):
        binary_delays(dates, PB, X, E * u.one, OMEGA, 52144.9 * u.d, M1, M2)


# ---- an orbiting clock -----------------------------------------------------------------

GPS_A = 26_561_750.0    # m, GPS nominal semi-major axis (Ashby 2003, §5)
START = Time("2031-01-01T00:00:00", scale="tdb")


def _gps(e: float):
    return orbit(GPS_A * u.m, e * u.one, 55 * u.deg, 20 * u.deg, arg_peri=70 * u.deg,
                 t_peri=START - 0.13 * u.d)


@pytest.mark.parametrize("days", [0.31, 1.7])
def test_clock_offset_equals_the_quadrature_of_the_clock_rate(days):
    # scipy quad of −GM/(c² r) − v²/(2c²) along orbit_state (the rate of proper time on the
    # orbit); quad at epsrel 1e-13 over a smooth periodic integrand: 1e-10 relative is a
    # real test of the closed form, not of the quadrature.
    elements = _gps(0.02)
    M = GM_EARTH * u.m**3 / u.s**2

    def rate(seconds: float) -> float:
        state = orbit_state(M, elements, START + seconds * u.s)
        r = state.fields["r"].to_value(u.m)
        v = state.fields["v"].to_value(u.m / u.s)
        return -GM_EARTH / (C * C * r) - v * v / (2 * C * C)

    from calc.physics.functions.motion import orbit_state

    span = days * 86400
    pieces = np.linspace(0, span, 9)
    expected = sum(quad(rate, a, b, epsrel=1e-13, epsabs=0, limit=200)[0]
                   for a, b in zip(pieces[:-1], pieces[1:]))
    got = clock_offset(M, elements, START, START + days * u.d).to_value(u.s)
    assert got == pytest.approx(expected, rel=1e-10, abs=0)


def test_gps_clock_rate_against_tt_is_ashbys_net_offset():
    # Ashby 2003, Living Rev. Relativity 6, 1, §5 (from memory): a GPS clock (a = 26561.75 km)
    # gains on TT at the net fractional rate 4.4647e-10 (38.6 µs/day). clock_offset is against
    # the geocentric coordinate time TCG; TT runs slower than TCG by L_G (IAU 2000 B1.9, the
    # constant relsheet ships), so the rate against TT is offset/Δt + L_G. A circular orbit
    # over whole days; 5 digits published: 1e-4 relative.
    elements = _gps(0.0)
    offset = clock_offset(GM_EARTH * u.m**3 / u.s**2, elements, START, START + 10 * u.d)
    rate = offset.to_value(u.s) / (10 * 86400) + TIME_SCALE_CONSTANTS["L_G"].quantity.value
    assert rate == pytest.approx(4.4647e-10, rel=1e-4, abs=0)


def test_the_periodic_clock_term_has_the_eccentricity_amplitude():
    # −(2√(GMa) e/c²) sin E: after removing the secular part, half the range over one orbit is
    # eccentricity_clock_term (spacetime topic; IS-GPS-200 constant). Dense sampling of a
    # sinusoid in E: 1e-7 relative.
    e = 0.02
    elements = _gps(e)
    M = GM_EARTH * u.m**3 / u.s**2
    period = 2 * math.pi * math.sqrt(GPS_A**3 / GM_EARTH)
    dates = START + np.linspace(0, period, 20001) * u.s
    offset = clock_offset(M, elements, START, dates).to_value(u.s)
    secular = -1.5 * GM_EARTH / (GPS_A * C * C) * np.linspace(0, period, 20001)
    amplitude = eccentricity_clock_term(M, GPS_A * u.m, e * u.one).to_value(u.s)
    assert np.ptp(offset - secular) / 2 == pytest.approx(amplitude, rel=1e-7, abs=0)


# ---- Sagnac ---------------------------------------------------------------------------

R_EQ = 6_378_137.0      # m, WGS-84 / GRS80 equatorial radius (common practice)


def _stations(latitude_deg, longitude_deg, radius=R_EQ) -> Record:
    lat, lon = np.radians(latitude_deg), np.radians(longitude_deg)
    return Record("state", {"x": radius * np.cos(lat) * np.cos(lon) * u.m,
                            "y": radius * np.cos(lat) * np.sin(lon) * u.m,
                            "z": radius * np.sin(lat) * u.m})


def test_sagnac_around_the_equator_is_207_ns():
    # Ashby 2003, §2 (from memory): a signal sent eastward once around the equator is delayed
    # by 2ωπR²/c² ≈ 207.4 ns. 3600 straight legs enclose sin(2π/N)/(2π/N) of the circle's
    # area (1 − 5e-7); the published number has 4 digits: 3e-4.
    lon = np.linspace(0, 360, 3601)
    legs = sagnac_delay(_stations(0, lon[:-1]), _stations(0, lon[1:])).to_value(u.ns)
    assert np.sum(legs) == pytest.approx(207.4, rel=3e-4, abs=0)
    westward = sagnac_delay(_stations(0, lon[1:]), _stations(0, lon[:-1])).to_value(u.ns)
    assert np.sum(westward) == pytest.approx(-np.sum(legs), rel=1e-14, abs=0)


def _light_time_in_the_inertial_frame(a: np.ndarray, b: np.ndarray, omega: float) -> float:
    """Flight time of a signal from Earth-fixed a (at emission, t = 0) to Earth-fixed b, solved
    in the non-rotating frame that coincides with the Earth-fixed one at emission: the receiver
    has turned by omega t about z when the signal arrives, t = |R_z(omega t) b - a| / c
    (the light-time equation; IERS Conventions 2010 ch. 11; fixed-point iteration)."""
    t = np.linalg.norm(b - a) / C
    for _ in range(50):
        angle = omega * t
        turned = np.array([b[0] * math.cos(angle) - b[1] * math.sin(angle),
                           b[0] * math.sin(angle) + b[1] * math.cos(angle), b[2]])
        t = np.linalg.norm(turned - a) / C
    return t


def _position(state: Record) -> np.ndarray:
    return np.array([state.fields[k].to_value(u.m) for k in "xyz"], dtype=float)


@pytest.mark.parametrize("omega", [7.2921151467e-5, 7.2921151467e-5 / 2])
@pytest.mark.parametrize("first, second", [((40.0, -105.0), (48.8, 2.3)), ((-33.9, 18.4), (35.7, 139.7)),
                                           ((10.0, 30.0), (60.0, 30.0)), ((0.0, 0.0), (0.0, 90.0))])
def test_sagnac_is_the_extra_light_time_of_a_turning_receiver(omega, first, second):
    # the Sagnac term is what the light-time equation solved in the inertial frame adds to the
    # Earth-fixed distance over c (Ashby 2003, Living Rev. Relativ. 6, 1, §2, from memory). The
    # two differ at order (omega R/c)^2 |b - a|/c ~ 1e-13 s against a Sagnac term of 1e-7 s
    # (zero along a meridian): 1e-5 relative, 1e-4 ns absolute
    a, b = _stations(*first), _stations(*second)
    extra = _light_time_in_the_inertial_frame(_position(a), _position(b), omega) \
        - np.linalg.norm(_position(b) - _position(a)) / C
    got = sagnac_delay(a, b, omega=omega * u.rad / u.s).to_value(u.ns)
    assert got == pytest.approx(extra * 1e9, rel=1e-5, abs=1e-4)


def test_sagnac_default_rotation_is_the_earths():
    # IERS Conventions (2010) Table 1.1: omega = 7.292115e-5 rad/s (the default, nominal value)
    a, b = _stations(40.0, -105.0), _stations(48.8, 2.3)
    ours = sagnac_delay(a, b).to_value(u.ns)
    assert ours == pytest.approx(sagnac_delay(a, b, omega=7.292115e-5 * u.rad / u.s).to_value(u.ns),
                                 rel=1e-7, abs=0)
