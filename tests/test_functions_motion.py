"""Orbits in time (calc.physics.functions.motion): Kepler's equation, states at dates, geometry,
ephemerides; against scipy, published worked examples, ERFA and a kernel written here."""

from __future__ import annotations

import math
import struct

import astropy.units as u
import erfa
import numpy as np
import pytest
from astropy.time import Time
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

from calc.errors import ArgumentError, DomainError
from calc.physics import functions
from calc.physics.environment import Environment, entered
from calc.physics.functions.motion import (
    elongation,
    ephemeris,
    impact_parameter,
    kepler,
    orbit_state,
)
from calc.physics.functions.perturbations import orbit
from calc.physics.records import Record
from conftest import evaluate, only_error

AU = 149_597_870_700.0
GM_SUN = 1.3271244e20          # IAU 2015 Resolution B3, nominal (what 1 Msun means here)
EPS = np.finfo(float).eps
T0 = Time("2031-04-12T06:30:00", scale="tdb")


def kepler_root(M: float, e: float) -> float:
    """The root of E − e sin E − M by bracketing (|E − M| ≤ e), to the last bits."""
    return brentq(lambda E: E - e * math.sin(E) - M, M - 1.0, M + 1.0, xtol=1e-16, rtol=4 * EPS,
                  maxiter=500)


# ---- Kepler's equation ---------------------------------------------------------------

def test_kepler_equals_a_bracketing_root_finder_within_1e14_rad():
    # scipy brentq per element (reference library). For |M| ≤ π both solutions are limited by
    # the rounding of E − e sin E near the root, eps |E| / (1 − e cos E) ≤ 2e-15 rad even at
    # e = 0.99 (E small where the slope is small), and brentq stops within 4 eps |E|: 1e-14 holds.
    e = np.linspace(0.0, 0.99, 34)[:, None]
    M = np.linspace(-math.pi, math.pi, 61)[None, :]
    E = kepler(M * u.rad, e * u.one).to_value(u.rad)
    assert E.shape == (34, 61)
    reference = np.vectorize(kepler_root)(M, e)
    assert np.max(np.abs(E - reference)) < 1e-14


def test_kepler_keeps_whole_turns_over_minus_two_pi_to_four_pi():
    # Beyond |M| ≤ π the float M itself carries eps |M| of rounding, which Kepler's equation
    # amplifies by dE/dM = 1/(1 − e cos E) (up to 100 at e = 0.99 near periapsis); both the
    # solver (which reduces M by whole turns) and brentq (which evaluates f at |E| ≈ 4π) carry
    # that much: allow 1e-14 + 8 eps max(|M|, 1) / (1 − e cos E).
    e = np.linspace(0.0, 0.99, 23)[:, None]
    M = np.linspace(-2 * math.pi, 4 * math.pi, 181)[None, :]
    E = kepler(M * u.rad, e * u.one).to_value(u.rad)
    reference = np.vectorize(kepler_root)(M, e)
    conditioning = 1 / (1 - e * np.cos(reference))
    allowed = 1e-14 + 8 * EPS * np.maximum(np.abs(M), 1) * conditioning
    assert np.all(np.abs(E - reference) <= allowed)
    # and E stays on the same turn as M: |E − M| ≤ e
    assert np.all(np.abs(E - M) <= e + 1e-15)


def test_kepler_published_worked_examples():
    # Meeus 1998, Astronomical Algorithms, 2nd ed., Example 30.a: e = 0.1, M = 5° → E = 5.554589°
    # (6 decimals printed: ±5e-7°). Vallado 2013, Fundamentals of Astrodynamics and Applications,
    # 4th ed., Example 2-1: e = 0.4, M = 235.4° → E = 220.512074767522° (12 decimals). Both from
    # memory.
    assert kepler(5 * u.deg, 0.1 * u.one).to_value(u.deg) == pytest.approx(5.554589, abs=5e-7)
    assert kepler(235.4 * u.deg, 0.4 * u.one).to_value(u.deg) == pytest.approx(
        220.512074767522, abs=1e-11)


def test_kepler_in_a_sheet_and_its_refusals():
    sheet = evaluate("E = kepler(5 deg, 0.1)\nF = kepler([1, 2] rad, 0)")
    assert sheet["E"].unit == u.deg
    assert np.allclose(sheet["F"].to_value(u.rad), [1, 2], rtol=0, atol=1e-15)   # e = 0: E = M
    for text, message in (
        ("x = kepler(1 rad, 1)", "kepler: `e` must be at least 0 and below 1 (an elliptic orbit), got 1"),
        ("x = kepler(1 rad, -0.1)", "kepler: `e` must be at least 0 and below 1 (an elliptic orbit), got -0.1"),
        ("x = kepler(1 s, 0.1)", "kepler: `mean_anomaly` must be an angle, got 1 s"),
    ):
        assert only_error(evaluate(text), "x").message == message


# ---- states at dates -----------------------------------------------------------------

def _vectors(state: Record):
    r = np.array([state.fields[k].to_value(u.m) for k in ("x", "y", "z")])
    v = np.array([state.fields[k].to_value(u.m / u.s) for k in ("vx", "vy", "vz")])
    return r, v


def _eccentric_orbit(**when):
    return orbit(1.3 * u.AU, 0.7 * u.one, 23 * u.deg, 140 * u.deg, arg_peri=-75 * u.deg, **when)


def test_energy_and_angular_momentum_are_conserved_along_an_orbit():
    # Two-body integrals (Murray & Dermott 1999, §2.4): v²/2 − μ/r and |r × v| constant. Each
    # state is computed independently from Kepler's equation, so rounding (1e-16 per operation,
    # a few dozen operations) is all that may move them: 1e-12 relative.
    elements = _eccentric_orbit(t_peri=T0)
    dates = T0 + np.linspace(-400, 900, 2001) * u.d
    state = orbit_state(1 * u.Msun, elements, dates)
    r, v = _vectors(state)
    radius = np.sqrt(np.sum(r * r, axis=0))
    energy = np.sum(v * v, axis=0) / 2 - GM_SUN / radius
    h = np.linalg.norm(np.cross(r.T, v.T), axis=1)
    assert np.ptp(energy) / abs(np.mean(energy)) < 1e-12
    assert np.ptp(h) / np.mean(h) < 1e-12
    # the energy is the vis-viva value −μ/(2a) and r, v fields agree with the components
    assert np.mean(energy) == pytest.approx(-GM_SUN / (2 * 1.3 * AU), rel=1e-12, abs=0)
    assert np.allclose(state.fields["r"].to_value(u.m), radius, rtol=1e-13, atol=0)
    assert np.allclose(state.fields["v"].to_value(u.m / u.s), np.sqrt(np.sum(v * v, axis=0)),
                       rtol=1e-13, atol=0)


@pytest.mark.parametrize("days", [137.0, 1234.5])
def test_positions_agree_with_integrating_the_two_body_problem(days):
    # scipy solve_ivp (DOP853, rtol 1e-13) from the state at one date to another date; the
    # integrator's global error over a few orbits is ~1e-11 relative, so 1e-9 is a real test.
    elements = _eccentric_orbit(t_peri=T0 - 50 * u.d)
    r0, v0 = _vectors(orbit_state(1 * u.Msun, elements, T0))
    r1, v1 = _vectors(orbit_state(1 * u.Msun, elements, T0 + days * u.d))

    def rhs(_, y):
        r = y[:3]
        return np.concatenate([y[3:], -GM_SUN * r / np.linalg.norm(r) ** 3])

    solution = solve_ivp(rhs, (0, days * 86400), np.concatenate([r0, v0]), method="DOP853",
                         rtol=1e-13, atol=1e-6)
    assert np.linalg.norm(solution.y[:3, -1] - r1) / np.linalg.norm(r1) < 1e-9
    assert np.linalg.norm(solution.y[3:, -1] - v1) / np.linalg.norm(v1) < 1e-9


def test_vallado_classical_elements_to_position_and_velocity():
    # Vallado 2013, 4th ed., Example 2-6 (COE2RV, from memory): p = 11067.790 km, e = 0.83285,
    # i = 87.87°, Ω = 227.89°, ω = 53.38°, ν = 92.335°, μ = 398600.4418 km³/s² →
    # r = (6525.368, 6861.532, 6449.119) km, v = (4.902279, 5.533140, −1.975710) km/s.
    # Seven digits printed: 2e-7 relative per component.
    e, nu = 0.83285, math.radians(92.335)
    a = 11067.790 / (1 - e * e)
    E = 2 * math.atan(math.sqrt((1 - e) / (1 + e)) * math.tan(nu / 2))
    M = math.degrees(E - e * math.sin(E))
    elements = orbit(a * u.km, e * u.one, 87.87 * u.deg, 227.89 * u.deg, arg_peri=53.38 * u.deg,
                     mean_anomaly=M * u.deg, epoch=T0)
    state = orbit_state(398600.4418 * u.km**3 / u.s**2, elements, T0)
    r, v = _vectors(state)
    assert np.allclose(r / 1e3, [6525.368, 6861.532, 6449.119], rtol=2e-7, atol=0)
    assert np.allclose(v / 1e3, [4.902279, 5.533140, -1.975710], rtol=2e-7, atol=0)
    assert state.fields["true_anomaly"].to_value(u.deg) == pytest.approx(92.335, abs=1e-9)


def test_mean_anomaly_at_epoch_and_time_of_periapsis_place_the_body_alike():
    # M0 at the epoch is n (epoch − t_peri): the two orbit records describe one motion
    gm, a = GM_SUN, 1.3 * AU
    n = math.sqrt(gm / a**3)
    t_peri = T0 - 100 * u.d
    M0 = math.degrees(n * 100 * 86400)
    by_peri = orbit_state(1 * u.Msun, _eccentric_orbit(t_peri=t_peri), T0 + [0, 40, 400] * u.d)
    by_epoch = orbit_state(1 * u.Msun, _eccentric_orbit(mean_anomaly=M0 * u.deg, epoch=T0),
                           T0 + [0, 40, 400] * u.d)
    for key in ("x", "y", "z", "vx", "vy", "vz"):
        assert np.allclose(by_peri.fields[key].value, by_epoch.fields[key].value, rtol=1e-11,
                           atol=1e-13)


def test_the_body_mass_joins_the_mean_motion():
    # With m given the relative orbit has n² a³ = G(M + m): the period is 2π √(a³/(G(M+m))),
    # so after that time the body is back at periapsis (true anomaly 0) (Murray & Dermott §2.3)
    m = 0.1   # Msun
    period = 2 * math.pi * math.sqrt(AU**3 / (GM_SUN * (1 + m))) / 86400
    elements = orbit(1 * u.AU, 0.3 * u.one, m=m * u.Msun, t_peri=T0)
    f = orbit_state(1 * u.Msun, elements, T0 + period * u.d).fields["true_anomaly"].to_value(u.deg)
    assert min(f, 360 - f) < 1e-6


def test_arrays_of_elements_broadcast_against_dates():
    # a record whose elements are arrays (as a sweep over `a` would make) gives the same states
    # as one record per element
    a = np.array([0.5, 1.0, 2.0])
    fields = dict(_eccentric_orbit(t_peri=T0).fields)
    fields["a"] = a * u.AU
    record = Record("orbit", fields)
    dates = T0 + np.array([[10.0], [200.0]]) * u.d      # 2 × 1 dates against 3 elements
    swept = orbit_state(1 * u.Msun, record, dates)
    assert swept.fields["x"].shape == (2, 3)
    for j, value in enumerate(a):
        one = orbit(value * u.AU, 0.7 * u.one, 23 * u.deg, 140 * u.deg, arg_peri=-75 * u.deg,
                    t_peri=T0)
        single = orbit_state(1 * u.Msun, one, dates[:, 0])
        assert np.allclose(swept.fields["x"].value[:, j], single.fields["x"].value, rtol=1e-14,
                           atol=0)


def test_orbit_records_refuse_mixed_or_half_timings():
    with pytest.raises(ArgumentError, match="give `t_peri`, or `mean_anomaly` with `epoch`, not both"):
        orbit(1 * u.AU, 0.1 * u.one, t_peri=T0, mean_anomaly=3 * u.deg, epoch=T0)
    with pytest.raises(ArgumentError, match="`mean_anomaly` needs `epoch`"):
        orbit(1 * u.AU, 0.1 * u.one, mean_anomaly=3 * u.deg)
    with pytest.raises(ArgumentError, match="`t_peri` must be a date"):
        orbit(1 * u.AU, 0.1 * u.one, t_peri=3 * u.d)
    untimed = orbit(1 * u.AU, 0.1 * u.one)
    with pytest.raises(ArgumentError, match="has no position in time"):
        orbit_state(1 * u.Msun, untimed, T0)
    with pytest.raises(ArgumentError, match="`t` must be a date"):
        orbit_state(1 * u.Msun, _eccentric_orbit(t_peri=T0), 3 * u.d)


def test_records_with_dates_compare_by_their_instants():
    a, b = _eccentric_orbit(t_peri=T0), _eccentric_orbit(t_peri=T0)
    assert a.same_as(b)
    assert not a.same_as(_eccentric_orbit(t_peri=T0 + 1 * u.s))


# ---- geometry ------------------------------------------------------------------------

def _state(x, y, z, t=T0) -> Record:
    return Record("state", {"x": np.asarray(x, float) * u.AU, "y": np.asarray(y, float) * u.AU,
                            "z": np.asarray(z, float) * u.AU, "t": t})


def test_greatest_elongation_of_an_inner_planet_on_circular_orbits():
    # circular coplanar orbits: the greatest elongation is asin(a_inner / a_outer) (plane
    # geometry; e.g. Venus about 46°). Sampling a synodic period every 0.05 d leaves the maximum
    # within 1e-6 rad of the peak (a quadratic peak sampled densely).
    inner = orbit(0.723 * u.AU, 0 * u.one, t_peri=T0)
    outer = orbit(1.0 * u.AU, 0 * u.one, t_peri=T0)
    dates = T0 + np.arange(0, 600, 0.05) * u.d
    angle = elongation(orbit_state(1 * u.Msun, outer, dates),
                       orbit_state(1 * u.Msun, inner, dates)).to_value(u.rad)
    assert np.max(angle) == pytest.approx(math.asin(0.723), abs=1e-6)


def test_elongation_against_the_law_of_cosines():
    rng = np.random.default_rng(7)
    ro, rt = rng.normal(size=(3, 50)), rng.normal(size=(3, 50)) * 3
    observer, target = _state(*ro), _state(*rt)
    d = np.linalg.norm(rt - ro, axis=0)
    a, b = np.linalg.norm(ro, axis=0), np.linalg.norm(rt, axis=0)
    expected = np.degrees(np.arccos((a * a + d * d - b * b) / (2 * a * d)))
    # arccos loses digits near 0° and 180°; these random triangles stay away from both
    assert np.allclose(elongation(observer, target).to_value(u.deg), expected, rtol=0, atol=1e-9)


def test_impact_parameter_of_a_conjunction_and_beyond_the_segment():
    # a ray from (−1, 0.01, 0) AU to (1.5, 0.01, 0) AU passes the centre at 0.01 AU
    assert impact_parameter(_state(-1, 0.01, 0), _state(1.5, 0.01, 0)).to_value(u.AU) == \
        pytest.approx(0.01, rel=1e-12, abs=0)
    # tilted: the line distance |r_o × d| / |d| (closest point inside the segment)
    ro, rt = np.array([-1.0, 0.2, 0.1]), np.array([1.4, -0.3, 0.05])
    d = rt - ro
    line = np.linalg.norm(np.cross(ro, d)) / np.linalg.norm(d)
    assert impact_parameter(_state(*ro), _state(*rt)).to_value(u.AU) == pytest.approx(line, rel=1e-12, abs=0)
    # both on the same side, the centre behind the observer: the signal never comes closer
    # than the observer itself
    assert impact_parameter(_state(1, 0.01, 0), _state(2, 0.01, 0)).to_value(u.AU) == \
        pytest.approx(math.hypot(1, 0.01), rel=1e-12, abs=0)


def test_geometry_refuses_states_at_different_dates():
    with pytest.raises(ArgumentError, match="states at different dates"):
        elongation(_state(1, 0, 0), _state(0, 1, 0, T0 + 1 * u.min))
    with pytest.raises(ArgumentError, match="must be a state record"):
        impact_parameter(_eccentric_orbit(t_peri=T0), _state(0, 1, 0))


# ---- the built-in ephemeris against ERFA ----------------------------------------------
# astropy's built-in ephemeris is ERFA's epv00 (Earth, Sun), plan94 (planets) and moon98
# (Moon). Their documentation states the accuracy against JPL DE405: epv00 4.6 km rms
# (13.4 km max) barycentric over 1900–2100; plan94 hundreds of km (Mercury, 334 km rms) and
# more. Called directly here, the same series must agree to far below that: origin, axes,
# units and time scale all being right leaves only rounding, so we allow 1 m and 1e-6 m/s.

DATES = Time("2031-04-12", scale="tdb") + np.linspace(-3000, 3000, 13) * u.d


def _erfa_pv(pv):
    return pv["p"].T * AU, pv["v"].T * AU / 86400


def _ours(body, origin):
    state = ephemeris(body, DATES, origin)
    return _vectors(state)


def test_earth_barycentric_and_heliocentric_equal_epv00():
    heliocentric, barycentric = erfa.epv00(DATES.tdb.jd1, DATES.tdb.jd2)
    for origin, pv in (("ssb", barycentric), ("sun", heliocentric)):
        r, v = _ours("earth", origin)
        r_ref, v_ref = _erfa_pv(pv)
        assert np.max(np.abs(r - r_ref)) < 1.0
        assert np.max(np.abs(v - v_ref)) < 1e-6


@pytest.mark.parametrize("body, index", [("mercury", 1), ("mars", 4), ("jupiter", 5),
                                          ("neptune", 8)])
def test_planets_heliocentric_equal_plan94(body, index):
    r, v = _ours(body, "sun")
    r_ref, v_ref = _erfa_pv(erfa.plan94(DATES.tdb.jd1, DATES.tdb.jd2, index))
    assert np.max(np.abs(r - r_ref)) < 1.0
    assert np.max(np.abs(v - v_ref)) < 1e-6


def test_moon_geocentric_equals_moon98():
    r, v = _ours("moon", "earth")
    r_ref, v_ref = _erfa_pv(erfa.moon98(DATES.tdb.jd1, DATES.tdb.jd2))
    assert np.max(np.abs(r - r_ref)) < 1.0
    assert np.max(np.abs(v - v_ref)) < 1e-6


def test_ephemeris_dates_in_another_scale_are_the_same_instants():
    # past dates, where UTC is defined by the leap-second table astropy ships
    tdb = Time("2012-06-30", scale="tdb") + np.linspace(0, 3000, 7) * u.d
    assert np.allclose(_vectors(ephemeris("mars", tdb.utc, "earth"))[0],
                       _vectors(ephemeris("mars", tdb, "earth"))[0], rtol=1e-14, atol=1e-3)


def test_unknown_bodies_and_origins_get_a_hint():
    with pytest.raises(ArgumentError, match=r'no body called "marz".*did you mean `mars`'):
        ephemeris("marz", DATES)
    with pytest.raises(ArgumentError, match="`origin`"):
        ephemeris("mars", DATES, "jupiter")
    assert functions.lookup("ephemeris").documentation().count("epv00") >= 1


# ---- a JPL kernel written here ----------------------------------------------------------
# No .bsp ships with astropy or jplephem, and nothing may be downloaded, so the test writes a
# small SPK file (DAF, type 2 Chebyshev segments) itself: the Earth–Moon barycentre about the
# solar-system barycentre (0 → 3), the Earth about it (3 → 399) and the Sun (0 → 10), each a
# Chebyshev series whose value the test computes with numpy alone.

J2000 = 2451545.0
SPAN = (J2000 + 11000.0, J2000 + 11064.0)        # 64 days, two 32-day records


def _coefficients(seed: int, records: int, degree: int = 6) -> np.ndarray:
    rng = np.random.default_rng(seed)
    scale = 10.0 ** -np.arange(degree + 1)            # decreasing, like a real fit
    return rng.normal(size=(records, 3, degree + 1)) * scale * 1e7   # km


def _write_spk(path, segments) -> None:
    """A little-endian DAF/SPK file with type 2 segments (center, target, coefficients)."""
    from jplephem.daf import FTPSTR as ftpstr

    record = bytearray(1024)
    struct.pack_into("<8sII60sIII8s", record, 0, b"DAF/SPK ", 2, 6, b"relsheet test".ljust(60),
                     2, 2, 0, b"LTL-IEEE")
    record[699:699 + len(ftpstr)] = ftpstr
    summaries, names, words = bytearray(1024), bytearray(b" " * 1024), []
    first_word = 3 * 128 + 1
    entries = []
    for centre, target, coefficients in segments:
        n, _, size = coefficients.shape
        interval = (SPAN[1] - SPAN[0]) * 86400 / n
        start = (SPAN[0] - J2000) * 86400
        data = []
        for k in range(n):
            data += [start + (k + 0.5) * interval, interval / 2, *coefficients[k].ravel()]
        data += [start, interval, 2 + 3 * size, n]
        begin = first_word + len(words)
        words += data
        entries.append((start, start + n * interval, target, centre, 1, 2, begin,
                        begin + len(data) - 1))
    struct.pack_into("<ddd", summaries, 0, 0.0, 0.0, len(entries))
    for k, entry in enumerate(entries):
        struct.pack_into("<ddiiiiii", summaries, 24 + 40 * k, *entry)
    free = first_word + len(words)
    struct.pack_into("<I", record, 84, free)            # FREE: the first unused word
    with open(path, "wb") as f:
        f.write(record)
        f.write(summaries)
        f.write(names)
        f.write(np.asarray(words, "<f8").tobytes())


def _chebyshev(coefficients, jd):
    """Position (km) and velocity (km/s) of one segment at Julian dates, numpy only."""
    n = coefficients.shape[0]
    interval = (SPAN[1] - SPAN[0]) / n
    index = np.minimum(((jd - SPAN[0]) // interval).astype(int), n - 1)
    s = 2 * (jd - SPAN[0] - (index + 0.5) * interval) / interval
    position = np.array([[np.polynomial.chebyshev.chebval(s[j], coefficients[index[j], c])
                          for j in range(len(jd))] for c in range(3)])
    velocity = np.array([[np.polynomial.chebyshev.chebval(
        s[j], np.polynomial.chebyshev.chebder(coefficients[index[j], c]))
        for j in range(len(jd))] for c in range(3)]) * 2 / (interval * 86400)
    return position, velocity


@pytest.fixture
def kernel(tmp_path):
    segments = [(0, 3, _coefficients(1, 2)), (3, 399, _coefficients(2, 2) * 1e-3),
                (0, 10, _coefficients(3, 2) * 1e-2)]
    path = tmp_path / "small.bsp"
    _write_spk(path, segments)
    return path, {pair[:2]: pair[2] for pair in segments}


def test_a_kernel_named_by_the_sheet_is_read_through_jplephem(kernel):
    pytest.importorskip("jplephem")
    path, segments = kernel
    dates = Time(np.linspace(SPAN[0] + 0.3, SPAN[1] - 0.3, 9), format="jd", scale="tdb")
    jd = dates.jd
    emb, earth, sun = (_chebyshev(segments[k], jd) for k in ((0, 3), (3, 399), (0, 10)))
    with entered(Environment(ephemeris=path)):
        barycentric = _vectors(ephemeris("earth", dates))
        heliocentric = _vectors(ephemeris("earth", dates, origin="sun"))
    # km → m; the kernel holds the numbers, so only rounding separates the two (1e-6 m, 1e-12 m/s)
    assert np.allclose(barycentric[0], (emb[0] + earth[0]) * 1e3, rtol=1e-13, atol=1e-6)
    assert np.allclose(barycentric[1], (emb[1] + earth[1]) * 1e3, rtol=1e-12, atol=1e-12)
    assert np.allclose(heliocentric[0], (emb[0] + earth[0] - sun[0]) * 1e3, rtol=1e-13, atol=1e-6)


def test_kernel_problems_are_clear_errors(kernel, tmp_path):
    pytest.importorskip("jplephem")
    path, _ = kernel
    outside = Time(SPAN[1] + 40, format="jd", scale="tdb")
    with entered(Environment(ephemeris=path)):
        with pytest.raises(DomainError, match="outside the kernel small.bsp, which covers"):
            ephemeris("earth", outside)
        with pytest.raises(ArgumentError, match='no body called "mars"'):
            ephemeris("mars", Time(SPAN[0] + 1, format="jd", scale="tdb"))
    with entered(Environment(ephemeris=tmp_path / "missing.bsp")):
        with pytest.raises(DomainError, match="does not exist"):
            ephemeris("earth", T0)
    junk = tmp_path / "junk.bsp"
    junk.write_bytes(b"not a kernel" * 200)
    with entered(Environment(ephemeris=junk)):
        with pytest.raises(DomainError, match="cannot be read as a JPL SPK file"):
            ephemeris("earth", T0)


# ---- registry: the specified time functions' names and handbook entries -----------------------------------

SPECIFIED_TIME_FUNCTIONS = {
    "kepler": ("mean_anomaly", "e"), "orbit_state": ("M", "orbit", "t"),
    "elongation": ("observer", "target"), "impact_parameter": ("observer", "target"),
    "ephemeris": ("body", "t", "origin"),
    "binary_delays": ("t", "Pb", "x", "e", "omega", "T0", "m1", "m2"),
    "clock_offset": ("M", "orbit", "t0", "t1"),
    # the specification writes sagnac_delay(from, to, omega); `from` is a Python keyword
    "sagnac_delay": ("sender", "receiver", "omega"),
}


@pytest.mark.parametrize("name, params", sorted(SPECIFIED_TIME_FUNCTIONS.items()))
def test_time_functions_are_registered_as_handbook_entries(name, params):
    spec = functions.lookup(name)
    assert spec is not None and tuple(spec.signature.parameters) == params
    doc = spec.documentation()
    for section in ("Formula:", "Arguments:", "Result:", "Validity:", "PPN:", "Source:"):
        assert section in doc, f"{name} lacks {section}"
    kinds = spec.argument_kinds()
    assert all(kinds.get(p) == "date" for p in params if p in ("t", "t0", "t1", "T0"))
