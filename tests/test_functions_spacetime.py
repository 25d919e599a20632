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
    # derived from IAU 2015 Resolution B3 (REFERENCES.md): 2.9533 km; 5 digits given -> 2e-5
    assert evaluate("x = schwarzschild_radius(1 Msun)")["x"].to_value(u.km) == \
        pytest.approx(2.9533, rel=2e-5)


@pytest.mark.parametrize("r1, r2", [
    (1.5, 3.0), (2.0, 100.0), (1.000001, 1.1),                 # in Schwarzschild radii
    (6.957e8 / 2953.25, 2 * 6.957e8 / 2953.25),                 # one to two solar radii
])
def test_proper_distance_equals_scipy_quad(r1, r2):
    # scipy.integrate.quad of 1/sqrt(1 - rs/r) (reference library); 1e-10 relative (REFERENCES.md)
    rs = 2 * GM_SUN / C**2
    expected, _ = quad(lambda r: 1 / math.sqrt(1 - rs / r), r1 * rs, r2 * rs,
                       epsabs=0, epsrel=1e-13, limit=200)
    got = spacetime.proper_radial_distance(GM_SUN * u.m**3 / u.s**2, r1 * rs * u.m, r2 * rs * u.m)
    assert got.to_value(u.m) == pytest.approx(expected, rel=1e-10)


def test_proper_distance_of_one_km_at_a_solar_radius_keeps_precision():
    # 1 km step at R_sun: integrand 1/sqrt(1 - rs/r) nearly constant; quad is exact to ~1e-16
    rs = 2 * GM_SUN / C**2
    r1 = 6.957e8
    expected, _ = quad(lambda r: 1 / math.sqrt(1 - rs / r), r1, r1 + 1000.0, epsabs=0, epsrel=1e-13)
    got = evaluate("x = proper_radial_distance(1 Msun, 1 Rsun, 1 Rsun + 1 km) in m")["x"].value
    assert got == pytest.approx(expected, rel=1e-10)
    assert got > 1000.0


def test_proper_distance_reduces_to_coordinate_distance_for_a_tiny_mass():
    # limit r_s -> 0: the spatial metric is flat (common practice)
    got = evaluate("x = proper_radial_distance(1 kg, 1 m, 2 m) in m")["x"].value
    assert got == pytest.approx(1.0, rel=1e-15)


def test_pound_rebka_tower():
    # Pound & Rebka 1960, PRL 4, 337: gh/c^2 = 2.46e-15 for h = 22.5 m, g = standard gravity.
    # 3 significant digits given: half a unit of the last digit is 0.2%; the exact
    # Schwarzschild form differs from gh/c^2 by ~h/R = 4e-6.
    radius = math.sqrt(GM_EARTH / G0)
    z = spacetime.gravitational_redshift(GM_EARTH * u.m**3 / u.s**2, radius * u.m,
                                         (radius + 22.5) * u.m)
    assert z.value == pytest.approx(2.46e-15, rel=2.1e-3)
    assert z.value == pytest.approx(G0 * 22.5 / C**2, rel=1e-5)


def test_redshift_to_infinity_and_weak_field_limit():
    sheet = evaluate("z = gravitational_redshift(1 Msun, 1 Rsun, inf)\n"
                     "w = gravitational_redshift(1 Msun, 10 km, inf)")
    # weak field: GM/(c^2 R) to first order; second order is ~(GM/c^2R)^2 = 4.5e-12 relative
    assert sheet["z"].value == pytest.approx(GM_SUN / (C**2 * 6.957e8), rel=1e-5)
    # exact: 1/sqrt(1 - rs/r) - 1
    rs = 2 * GM_SUN / C**2
    assert sheet["w"].value == pytest.approx(1 / math.sqrt(1 - rs / 1e4) - 1, rel=1e-12)


def test_geoid_clock_rate_constant():
    # IAU 2000 Resolution B1.9: L_G = 6.969290134e-10 = W0/c^2, W0 = 62 636 856.0 m^2/s^2
    # (IERS Conventions 2010, Table 1.1); the ten digits given fix the tolerance.
    assert evaluate("L_G = 62636856.0 m^2/s^2 / c^2")["L_G"].value == \
        pytest.approx(6.969290134e-10, rel=1e-9)


def test_gnss_eccentricity_constant():
    # IS-GPS-200, 20.3.3.3.3.1 (from memory): F = -2 sqrt(GM)/c^2 = -4.442807633e-10 s/sqrt(m)
    # with the WGS 84 GM = 3.986005e14 m^3/s^2; the amplitude is -F e sqrt(a).
    a, e = 26_559_800.0, 0.01
    amp = spacetime.eccentricity_clock_term(3.986005e14 * u.m**3 / u.s**2, a * u.m, e * u.one)
    assert amp.to_value(u.s) / (e * math.sqrt(a)) == pytest.approx(4.442807633e-10, rel=1e-9)


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
    assert amplitude == pytest.approx(1.657e-3, rel=2e-3)   # REFERENCES.md: about 1.657 ms
    ours = evaluate("x = eccentricity_clock_term(const.GM_sun, 1.00000261 AU, 0.01671123)")["x"]
    assert ours.to_value(u.s) == pytest.approx(amplitude, rel=5e-3)


def test_gnss_satellite_clock_terms():
    # Ashby 2003, Living Rev. Relativ. 6, 1 (from memory): the satellite's own velocity term is
    # -7.2 us/day (REFERENCES.md pitfall: -7.1 includes the ground clock's rotation); the net
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
    assert sheet["velocity_term"].value == pytest.approx(-7.2, rel=5e-3)
    assert sheet["net"].value == pytest.approx(38.6, rel=5e-3)


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
    assert sheet["x"].value == pytest.approx(-GM_SUN / (C**2 * 1e4))
    assert sheet.cell("x").warnings == [
        "`r` is 3.39 r_s: this weak-field formula needs `r` ≫ r_s "
        "(its relative error is of order r_s/r)"]
    assert evaluate("x = clock_rate(const.GM_earth, 7000 km)").cell("x").warnings == []


def test_weak_field_formula_inside_the_horizon_is_an_error():
    err = only_error(evaluate("x = clock_rate(1 Msun, 1 km)"), "x")
    assert err.message == ("clock_rate: `r` lies inside the Schwarzschild radius (2.95325 km): "
                           "no weak-field formula applies there")
    assert (err.span.column, err.span.end_column) == (24, 28)
