"""calc.physics.functions.orbits against published values and limits."""

from __future__ import annotations

import math

import astropy.units as u
import numpy as np
import pytest

from calc.physics.functions import orbits
from conftest import evaluate, only_error

GM_SUN = 1.3271244e20   # IAU 2015 Resolution B3, nominal
C = 299_792_458.0

MERCURY = "a = 0.38709927 AU\ne = 0.20563593\n"   # J2000 mean elements (Standish, JPL; from memory)


def test_mercury_perihelion_advance_per_century():
    # Nobili & Will 1986, Nature 320, 39; Will 2014 LRR 17, 4: 42.98"/century.
    # 4 digits given (±0.005, 1.2e-4); the Keplerian period from GM_sun differs from the
    # sidereal 87.9691 d by Mercury's mass and perturbations (< 1e-4).
    sheet = evaluate(MERCURY + "x = periapsis_rate(1 Msun, a, e)")
    assert sheet["x"].to_value(u.arcsec / u.yr) * 100 == pytest.approx(42.98, rel=2e-4)


def test_mercury_perihelion_advance_per_orbit_and_with_the_sidereal_period():
    # 0.1035"/orbit (REFERENCES.md, 4 digits: 5e-4); with the sidereal period 87.9691 d
    sheet = evaluate(MERCURY + "x = periapsis_advance(1 Msun, a, e)\n"
                     "y = x / 87.9691 d in arcsec / century")
    assert sheet["x"].to_value(u.arcsec) == pytest.approx(0.1035, rel=5e-4)
    assert sheet["y"].value == pytest.approx(42.98, rel=2e-4)


def test_gr_values_of_ppn_reproduce_general_relativity():
    # gamma = beta = 1 is general relativity: the factor (2 + 2 gamma - beta)/3 is 1
    sheet = evaluate(MERCURY + "x = periapsis_advance(1 Msun, a, e, gamma = 1, beta = 1) in rad\n"
                     "y = periapsis_advance(1 Msun, a, e) in rad")
    a = 0.38709927 * 149_597_870_700
    e = 0.20563593
    gr = 6 * math.pi * GM_SUN / (C**2 * a * (1 - e**2))
    assert sheet["x"].value == pytest.approx(gr, rel=1e-12)
    assert sheet["y"].value == pytest.approx(gr, rel=1e-12)


def test_halving_gammas_contribution_halves_its_excess():
    # the advance is (2 + 2 gamma - beta)/3 of GR: gamma's share is 2 gamma / 3
    sheet = evaluate(MERCURY + "g1 = periapsis_advance(1 Msun, a, e, gamma = 1)\n"
                     "g0 = periapsis_advance(1 Msun, a, e, gamma = 0)\n"
                     "gh = periapsis_advance(1 Msun, a, e, gamma = 0.5)")
    full = (sheet["g1"] - sheet["g0"]).value
    half = (sheet["gh"] - sheet["g0"]).value
    assert half == pytest.approx(full / 2, rel=1e-12)


def test_semi_major_axis_inverts_orbital_period():
    sheet = evaluate("P = orbital_period(1 Msun, 1.5 AU)\na = semi_major_axis(1 Msun, P)")
    assert sheet["a"].to_value(u.AU) == pytest.approx(1.5, rel=1e-13)


def test_earth_year_from_keplers_law():
    # Gaussian year: 2 pi / k with k = 0.01720209895 (IAU 1976; common practice), 365.2568983 d
    assert evaluate("P = orbital_period(1 Msun, 1 AU)")["P"].to_value(u.d) == \
        pytest.approx(2 * math.pi / 0.01720209895, rel=1e-7)


def test_vis_viva():
    # circular speed at 1 au, about 29.78 km/s (common practice); at perihelion of e = 0.5
    sheet = evaluate("v = orbital_speed(1 Msun, 1 AU)\np = orbital_speed(1 Msun, 0.5 AU, 1 AU)")
    assert sheet["v"].to_value(u.km / u.s) == pytest.approx(29.7847, rel=1e-5)
    assert sheet["p"].to_value(u.km / u.s) == pytest.approx(29.7847 * math.sqrt(3), rel=1e-5)


def test_oblateness_rate_limits():
    # Kaula 1966 / Murray & Dermott 1999 J2 rates: equatorial orbit 3/2 n J2 (R/p)^2,
    # polar orbit -3/4 n J2 (R/p)^2 (the node does not move)
    gm, j2, r, a, e = 3.986004418e14, 1.08263e-3, 6378137.0, 7_000_000.0, 0.01
    n = math.sqrt(gm / a**3)
    base = n * j2 * (r / (a * (1 - e**2))) ** 2
    for inc, factor in ((0.0, 1.5), (90.0, -0.75)):
        got = orbits.oblateness_rate(gm * u.m**3 / u.s**2, j2 * u.one, r * u.m, a * u.m,
                                     e * u.one, inc * u.deg)
        assert got.to_value(u.rad / u.s) == pytest.approx(factor * base, rel=1e-9)


def test_sun_synchronous_node_rate():
    # Common practice (from memory): a 700 km circular orbit is sun-synchronous at
    # i = 98.19 deg, its node turning 360 deg per tropical year (0.98565 deg/day).
    # J2 = 1.08263e-3, R = 6378.137 km (EGM / WGS 84, from memory). 0.2% for the rounded i.
    gm = 3.986004418e14
    node, _ = orbits.j2_rates(gm, 1.08263e-3, 6378137.0, 7078137.0, 0.0, math.radians(98.19))
    assert math.degrees(node) * 86400 == pytest.approx(360 / 365.2422, rel=2e-3)


def test_lense_thirring_lageos():
    # Ciufolini & Pavlis 2004, Nature 431, 958 (from memory): LAGEOS node, about 31 mas/yr, with
    # a = 12270 km, e = 0.0045 and the Earth's J = 5.86e33 kg m^2/s (from memory). 2%: rounded inputs.
    got = evaluate("x = lense_thirring_node_rate(5.86e33 kg m^2 / s, 12270 km, 0.0045)")["x"]
    assert got.to_value(u.mas / u.yr) == pytest.approx(31.0, rel=2e-2)


@pytest.mark.parametrize("text, message", [
    ("x = periapsis_advance(1 Msun, 1 AU, 1.2)",
     "periapsis_advance: `e` must be at least 0 and below 1 for a bound orbit, got 1.2"),
    ("x = periapsis_advance(1 Msun, 1 AU, -0.1)",
     "periapsis_advance: `e` must be at least 0 and below 1 for a bound orbit, got -0.1"),
    ("x = orbital_period(1 Msun, 3 s)", "orbital_period: `a` must be a length, got 3 s"),
    ("x = orbital_speed(1 Msun, 3 AU, 1 AU)",
     "orbital_speed: `r` = 3 AU is beyond 2a: a bound orbit never gets there"),
    ("x = periapsis_rate(1 Msun, 1 AU, 0.1, gamma = 1 km)",
     "periapsis_rate: `gamma` must be dimensionless, got 1 km"),
    ("x = lense_thirring_node_rate(1 kg, 1 AU, 0)",
     "lense_thirring_node_rate: `J` must be an angular momentum (kg m^2 / s), got 1 kg"),
])
def test_errors(text, message):
    assert only_error(evaluate(text), "x").message == message


def test_arrays_of_semi_major_axes():
    sheet = evaluate("x = periapsis_rate(1 Msun, [0.3871, 0.7233, 1] AU, [0.2056, 0.0068, 0.0167])")
    rates = sheet["x"].to_value(u.arcsec / u.yr) * 100
    assert rates[0] == pytest.approx(42.98, rel=1e-3)   # Mercury, as above
    assert np.all(np.diff(rates) < 0)
