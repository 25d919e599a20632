"""calc.physics.functions.spacetime against published values and reference libraries."""

from __future__ import annotations

import math

import astropy.units as u
import numpy as np
import pytest
from scipy.integrate import quad

from calc.physics.functions import spacetime
from conftest import evaluate, only_error

GM_SUN = 1.3271244e20      # IAU 2015 Resolution B3, nominal (m^3 s^-2)
GM_EARTH = 3.986004e14     # IAU 2015 Resolution B3, nominal
C = 299_792_458.0          # SI definition (exact)
G0 = 9.80665               # standard gravity, CGPM 1901 (exact)


def test_schwarzschild_radius_of_the_sun():
    # 2 GM/c^2 with the IAU 2015 Resolution B3 nominal GM_sun = 1.3271244e20 m^3/s^2 and the
    # exact c: 2.95325 km, written to 5 digits as 2.9533 km -> 2e-5
    assert evaluate("x = schwarzschild_radius(1 Msun)")["x"].to_value(u.km) == \
        pytest.approx(2.9533, rel=2e-5, abs=0)


@pytest.mark.parametrize("r1, r2", [
    (1.5, 3.0), (2.0, 100.0), (1.000001, 1.1),                 # in Schwarzschild radii
    (6.957e8 / 2953.25, 2 * 6.957e8 / 2953.25),                 # one to two solar radii
])
def test_proper_distance_equals_scipy_quad(r1, r2):
    # scipy.integrate.quad of the Schwarzschild radial line element 1/sqrt(1 - rs/r); 1e-10
    # relative: quad is asked for 1e-13, and the closed form's logarithm and square roots of
    # r - rs lose a few digits near rs (r1 = 1.000001 rs)
    rs = 2 * GM_SUN / C**2
    expected, _ = quad(lambda r: 1 / math.sqrt(1 - rs / r), r1 * rs, r2 * rs,
                       epsabs=0, epsrel=1e-13, limit=200)
    got = spacetime.proper_radial_distance(GM_SUN * u.m**3 / u.s**2, r1 * rs * u.m, r2 * rs * u.m)
    assert got.to_value(u.m) == pytest.approx(expected, rel=1e-10, abs=0)


def test_proper_distance_of_one_km_at_a_solar_radius_keeps_precision():
    # 1 km step at R_sun: integrand 1/sqrt(1 - rs/r) nearly constant; quad is exact to ~1e-16
    rs = 2 * GM_SUN / C**2
    r1 = 6.957e8
    expected, _ = quad(lambda r: 1 / math.sqrt(1 - rs / r), r1, r1 + 1000.0, epsabs=0, epsrel=1e-13)
    got = evaluate("x = proper_radial_distance(1 Msun, 1 Rsun, 1 Rsun + 1 km) in m")["x"].value
    assert got == pytest.approx(expected, rel=1e-10, abs=0)
    assert got > 1000.0


def test_proper_distance_reduces_to_coordinate_distance_for_a_tiny_mass():
    # limit r_s -> 0: the spatial metric is flat (common practice)
    got = evaluate("x = proper_radial_distance(1 kg, 1 m, 2 m) in m")["x"].value
    assert got == pytest.approx(1.0, rel=1e-15, abs=0)


def test_pound_rebka_tower():
    # Pound & Rebka 1960, PRL 4, 337: gh/c^2 = 2.46e-15 for h = 22.5 m, g = standard gravity.
    # 3 significant digits given: half a unit of the last digit is 0.2%; the exact
    # Schwarzschild form differs from gh/c^2 by ~h/R = 4e-6.
    radius = math.sqrt(GM_EARTH / G0)
    z = spacetime.gravitational_redshift(GM_EARTH * u.m**3 / u.s**2, radius * u.m,
                                         (radius + 22.5) * u.m)
    assert z.value == pytest.approx(2.46e-15, rel=2.1e-3, abs=0)
    assert z.value == pytest.approx(G0 * 22.5 / C**2, rel=1e-5, abs=0)


def _redshift_by_static_observers(gm: float, r_emit: float, r_obs: float) -> float:
    """z from a chain of static observers (the equivalence principle): between neighbours a
    proper distance dl apart the frequency drops by a dl/c^2, a = GM/(r^2 sqrt(1 - rs/r)) the
    proper acceleration of a static observer and dl = dr/sqrt(1 - rs/r) (Misner, Thorne &
    Wheeler 1973, §25.2 and §38.5, from memory), so ln(1 + z) = ∫ GM/(c^2 r^2 (1 - rs/r)) dr,
    integrated by scipy quad (with r = 1/w, so that r_obs may be infinite)."""
    rs = 2 * gm / C**2
    upper = 0.0 if math.isinf(r_obs) else 1 / r_obs
    value, _ = quad(lambda w: gm / C**2 / (1 - rs * w), upper, 1 / r_emit, epsabs=0, epsrel=1e-13)
    return math.expm1(value)


@pytest.mark.parametrize("r_emit, r_obs", [
    (6.957e8, math.inf), (1e4, math.inf), (3.1e3, 1e5), (6.957e8, 1.5e11), (4e3, 4.5e3)])
def test_redshift_matches_a_chain_of_static_observers(r_emit, r_obs):
    # exact in GR (1 solar mass; r_s = 2953 m): quadrature to 1e-13, so 1e-10 relative
    got = spacetime.gravitational_redshift(GM_SUN * u.m**3 / u.s**2, r_emit * u.m, r_obs * u.m)
    expected = _redshift_by_static_observers(GM_SUN, r_emit, r_obs)
    assert got.value == pytest.approx(expected, rel=1e-10, abs=0)


def test_redshift_at_the_solar_surface():
    # the solar surface-to-infinity redshift, 636 m/s as a Doppler speed (z = 2.12e-6): the
    # value usually quoted for the Sun (from memory); 3 digits -> 1e-3
    z = evaluate("z = gravitational_redshift(1 Msun, 1 Rsun, inf)")["z"]
    assert z.value * C / 1e3 == pytest.approx(0.636, rel=1e-3, abs=0)


def test_geoid_clock_rate_constant():
    # IAU 2000 Resolution B1.9: L_G = 6.969290134e-10 = W0/c^2, W0 = 62 636 856.0 m^2/s^2
    # (IERS Conventions 2010, Table 1.1); the ten digits given fix the tolerance.
    assert evaluate("L_G = 62636856.0 m^2/s^2 / c^2")["L_G"].value == \
        pytest.approx(6.969290134e-10, rel=1e-9, abs=0)


def test_gnss_eccentricity_constant():
    # IS-GPS-200, 20.3.3.3.3.1 (from memory): F = -2 sqrt(GM)/c^2 = -4.442807633e-10 s/sqrt(m)
    # with the WGS 84 GM = 3.986005e14 m^3/s^2; the amplitude is -F e sqrt(a).
    a, e = 26_559_800.0, 0.01
    amp = spacetime.eccentricity_clock_term(3.986005e14 * u.m**3 / u.s**2, a * u.m, e * u.one)
    assert amp.to_value(u.s) / (e * math.sqrt(a)) == pytest.approx(4.442807633e-10, rel=1e-9, abs=0)


def test_eccentricity_term_of_the_earth_orbit_matches_erfa_tdb_minus_tt():
    # ERFA dtdb (Fairhead & Bretagnon 1990 series; reference library): fit the annual harmonic
    # of TDB-TT over 40 years and compare its amplitude (1.657 ms) with 2 sqrt(GM a) e / c^2.
    # The fit also takes the next terms of the series (semi-annual, Jupiter's and Saturn's
    # synodic periods, Jupiter's year) so that they do not leak into the annual amplitude.
    # Tolerance 0.5%: the series' annual term also holds the Earth-Moon barycentre offset
    # and planetary perturbations of the Earth's orbit, which the Keplerian term leaves out.
    import erfa
    days = np.arange(0.0, 40 * 365.25, 1.0)
    dtdb = erfa.dtdb(2451545.0, days, 0.0, 0.0, 0.0, 0.0)
    annual = 2 * np.pi / 365.259636   # anomalistic year (the series' 6283.0758 rad/millennium)
    periods = [2 * np.pi / annual / 2, 398.88, 378.09, 4332.6]
    columns = [np.ones_like(days), days, np.sin(annual * days), np.cos(annual * days)]
    for period in periods:
        columns += [np.sin(2 * np.pi * days / period), np.cos(2 * np.pi * days / period)]
    coef, *_ = np.linalg.lstsq(np.column_stack(columns), dtdb, rcond=None)
    amplitude = math.hypot(coef[2], coef[3])
    # the series' leading annual term is 1656.67 us (Fairhead & Bretagnon 1990, A&A 229, 240;
    # from memory); the fitted amplitude, 4 digits quoted: 2e-3
    assert amplitude == pytest.approx(1.657e-3, rel=2e-3, abs=0)
    ours = evaluate("x = eccentricity_clock_term(const.GM_sun, 1.00000261 AU, 0.01671123)")["x"]
    assert ours.to_value(u.s) == pytest.approx(amplitude, rel=5e-3, abs=0)


def test_gnss_satellite_clock_terms():
    # Ashby 2003, Living Rev. Relativ. 6, 1 (from memory): the satellite's own velocity term is
    # -7.2 us/day (the often-quoted -7.1 us/day already includes the ground clock's rotation,
    # which this term leaves out); the net
    # satellite-minus-ground rate is +38.6 us/day. Tolerance 0.5% (rounded published values,
    # and the ground clock here ignores J2).
    sheet = evaluate("""
a = 26561.75 km
v = sqrt(const.GM_earth / a)
velocity_term = -v^2 / (2 c^2) * 1 d in us
sat = clock_rate(const.GM_earth, a, v) * 1 d in us
ground = clock_rate(const.GM_earth, const.R_earth, 7.2921150e-5 rad / s * const.R_earth / 1 rad) * 1 d in us
net = sat - ground in us
""")
    assert sheet["velocity_term"].value == pytest.approx(-7.2, rel=5e-3, abs=0)
    assert sheet["net"].value == pytest.approx(38.6, rel=5e-3, abs=0)


@pytest.mark.parametrize("text, message", [
    ("x = schwarzschild_radius(3 s)",
     "schwarzschild_radius: `M` must be a mass or a gravitational parameter (m^3 / s^2), got 3 s"),
    ("x = schwarzschild_radius(-1 Msun)", "schwarzschild_radius: `M` must be positive, got -1 solMass"),
    ("x = proper_radial_distance(1 Msun, 1 km, 10 km)",
     "proper_radial_distance: `r1` = 1 km lies inside the Schwarzschild radius (2.95325 km)"),
    ("x = gravitational_redshift(1 Msun, 1 s, inf)",
     "gravitational_redshift: `r_emit` must be a length, got 1 s"),
    ("x = clock_rate(1 Msun, 0 km)", "clock_rate: `r` must be positive, got 0 km"),
    ("x = eccentricity_clock_term(1 Msun, 1 AU, 1)",
     "eccentricity_clock_term: `e` must be at least 0 and below 1 for a bound orbit, got 1"),
])
def test_errors_name_function_and_argument(text, message):
    assert only_error(evaluate(text), "x").message == message


def test_strong_field_gives_a_warning_not_silence():
    sheet = evaluate("x = clock_rate(1 Msun, 10 km)")
    # the warning's claim: relative error of order r_s/r against the exact static clock rate
    # sqrt(1 - rs/r) - 1 (Schwarzschild g_tt; any GR text)
    rs = 2 * GM_SUN / C**2
    exact = math.sqrt(1 - rs / 1e4) - 1
    assert abs(sheet["x"].value / exact - 1) < rs / 1e4
    assert sheet.cell("x").warnings == [
        "`r` is 3.39 r_s: this weak-field formula needs `r` ≫ r_s "
        "(its relative error is of order r_s/r)"]
    assert evaluate("x = clock_rate(const.GM_earth, 7000 km)").cell("x").warnings == []


def test_weak_field_formula_inside_the_horizon_is_an_error():
    err = only_error(evaluate("x = clock_rate(1 Msun, 1 km)"), "x")
    assert err.message == ("clock_rate: `r` lies inside the Schwarzschild radius (2.95325 km): "
                           "no weak-field formula applies there")
    assert (err.span.column, err.span.end_column) == (24, 28)


# ---- second edition: the central body's quadrupole in clock_rate ----------------------
# Geodetic Reference System 1980 (Moritz 2000, J. Geodesy 74, 128; values read from the DGFI
# table of GRS80): a, GM, J2, omega and the normal potential U0 on the level ellipsoid.
GRS80 = dict(a=6378137.0, b=6356752.3141, GM=3.986005e14, J2=1.08263e-3, omega=7.292115e-5,
             U0=62636860.850)


def test_quadrupole_clock_rate_on_the_grs80_level_ellipsoid():
    # The level ellipsoid is an equipotential of gravity (gravitation plus rotation), so a
    # clock at rest on it at the equator (moving at omega a) and at the pole must both run at
    # -U0/c^2. The degree-2 model leaves out J4 of the ellipsoid (-2.37e-6, GRS80; from memory):
    # 3/8 |J4| = 8.9e-7 at the equator and |J4| (a/b)^4 = 2.4e-6 at the pole, so the
    # tolerances are 1.2e-6 and 3e-6 (of 7e-10: below 3e-15 absolute).
    g = GRS80
    gm = g["GM"] * u.m**3 / u.s**2
    equator = spacetime.clock_rate(gm, g["a"] * u.m, g["omega"] * g["a"] * u.m / u.s,
                                   J2=g["J2"] * u.one, R=g["a"] * u.m, latitude=0 * u.deg)
    pole = spacetime.clock_rate(gm, g["b"] * u.m, 0 * u.m / u.s, J2=g["J2"] * u.one,
                                R=g["a"] * u.m, latitude=90 * u.deg)
    assert equator.value == pytest.approx(-g["U0"] / C**2, rel=1.2e-6, abs=0)
    assert pole.value == pytest.approx(-g["U0"] / C**2, rel=3e-6, abs=0)
    # without J2 the same clocks disagree by the quadrupole's share, ~5e-13 at the pole
    plain = spacetime.clock_rate(gm, g["b"] * u.m)
    assert abs(plain.value + g["U0"] / C**2) > 1e-13


def test_geoid_clock_rate_from_gm_j2_and_rotation_gives_lg():
    # IAU 2000 Resolution B1.9: L_G = W0/c^2 = 6.969290134e-10, the rate of a geoid clock. From
    # IERS Conventions 2010 Table 1.1 (from memory): GM = 3.986004418e14 m^3/s^2, a_E =
    # 6378136.6 m, J2 = 1.0826359e-3, omega = 7.292115e-5 rad/s. Tolerance 1.2e-6: the J4 term
    # left out, as above (the real geoid's undulations do not change W0 itself).
    sheet = evaluate("""
Re = 6378136.6 m
w = 7.292115e-5 rad / s
x = clock_rate(3.986004418e14 m^3/s^2, Re, w * Re / 1 rad, J2 = 1.0826359e-3, R = Re, latitude = 0 deg)
""")
    assert sheet["x"].value == pytest.approx(-6.969290134e-10, rel=1.2e-6, abs=0)


def test_gps_satellite_clock_offset_against_the_geoid():
    # IS-GPS-200 section 3.3.1.1 (read in a quotation of the specification): satellite clocks
    # are offset by df/f = -4.4647e-10 to run at the rate of geoid clocks, i.e. in orbit they run
    # fast by 4.4647e-10 (38.58 us/day; Ashby 2003 quotes 38.6). Orbit radius 26561.75 km,
    # circular (Ashby 2003, from memory); geoid clock from the quadrupole model at the equator.
    # Five digits given (1.1e-5) and the satellite's own J2 term (~1e-14 periodic, left out):
    # tolerance 3e-5.
    sheet = evaluate("""
orbit = 26561.75 km
sat = clock_rate(3.986004418e14 m^3/s^2, orbit, sqrt(3.986004418e14 m^3/s^2 / orbit))
Re = 6378136.6 m
ground = clock_rate(3.986004418e14 m^3/s^2, Re, 7.292115e-5 rad / s * Re / 1 rad, J2 = 1.0826359e-3, R = Re, latitude = 0 deg)
offset = sat - ground
per_day = offset * 1 d in us
""")
    assert sheet["offset"].value == pytest.approx(4.4647e-10, rel=3e-5, abs=0)
    assert sheet["per_day"].value == pytest.approx(38.6, rel=2e-3, abs=0)


@pytest.mark.parametrize("text, message", [
    ("x = clock_rate(const.GM_earth, 7000 km, J2 = 1e-3)",
     "clock_rate: the quadrupole term needs `R` together with `J2`"),
    ("x = clock_rate(const.GM_earth, 7000 km, J2 = 1e-3, R = 6378 km)",
     "clock_rate: the quadrupole term needs the clock's geocentric `latitude`"),
    ("x = clock_rate(const.GM_earth, 7000 km, latitude = 10 deg)",
     "clock_rate: `latitude` enters only with the quadrupole term: give `J2` and `R` as well"),
    ("x = clock_rate(const.GM_earth, 7000 km, J2 = 1e-3, R = 6378 km, latitude = 100 deg)",
     "clock_rate: `latitude` must lie between −90 and 90 deg, got 100 deg"),
])
def test_quadrupole_argument_errors(text, message):
    assert only_error(evaluate(text), "x").message == message


def test_quadrupole_clock_rate_takes_arrays():
    # two latitudes in one call equal two scalar calls
    gm = 3.986004418e14 * u.m**3 / u.s**2
    kwargs = dict(J2=1.0826359e-3 * u.one, R=6378136.6 * u.m)
    both = spacetime.clock_rate(gm, 6.37e6 * u.m, 400 * u.m / u.s, latitude=[10, 70] * u.deg, **kwargs)
    for k, lat in enumerate((10, 70)):
        one = spacetime.clock_rate(gm, 6.37e6 * u.m, 400 * u.m / u.s, latitude=lat * u.deg, **kwargs)
        assert both[k].value == pytest.approx(one.value, rel=1e-15, abs=0)


# ---- PPN: proper_radial_distance takes gamma --------------------------------------------


def test_proper_distance_with_gamma_follows_the_ppn_metric():
    # PPN spatial metric (1 + 2 gamma U/c^2) delta_ij (Will 2014, Living Rev. Relativ. 17, 4; from
    # memory) gives, in the areal radius, dD = (1 + gamma GM/(c^2 r) + O(m^2/r^2)) dr. scipy quad
    # of that first-order integrand from 1 to 2 solar radii: the neglected second order is
    # (3/2)(GM/c^2)^2 (1/r1 - 1/r2) ~ 1e-3 m of 7e8 m; tolerance 1e-11 relative (0.007 m).
    rs = 2 * GM_SUN / C**2
    r1, r2 = 6.957e8, 2 * 6.957e8
    for gamma in (0.0, 0.5, 1.0):
        first_order, _ = quad(lambda r, g=gamma: 1 + g * rs / (2 * r), r1, r2, epsabs=0, epsrel=1e-13)
        got = spacetime.proper_radial_distance(GM_SUN * u.m**3 / u.s**2, r1 * u.m, r2 * u.m,
                                               gamma=gamma * u.one).to_value(u.m)
        assert got == pytest.approx(first_order, rel=1e-11, abs=0)


def test_the_ppn_line_reaches_proper_distance():
    sheet = evaluate("ppn gamma = 0\na = proper_radial_distance(1 Msun, 1 Rsun, 2 Rsun) in m\n"
                     "b = proper_radial_distance(1 Msun, 1 Rsun, 2 Rsun, gamma = 1) in m")
    # the excess over the coordinate difference, GM/c^2 ln 2 = 1023 m in GR, vanishes for gamma = 0
    assert sheet["b"].value - sheet["a"].value == pytest.approx(GM_SUN / C**2 * math.log(2), rel=1e-6, abs=0)
