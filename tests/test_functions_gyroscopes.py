"""calc.physics.functions.gyroscopes against the Gravity Probe B predictions."""

from __future__ import annotations

import math

import astropy.units as u
import pytest

from conftest import evaluate

# Gravity Probe B: circular polar orbit of semi-major axis 7027.4 km (read in a mission summary),
# Earth's spin angular momentum J = 5.86e33 kg m^2/s (from memory).
GPB = "r = 7027.4 km\nJ = 5.86e33 kg m^2 / s\n"


def test_geodetic_precession_gravity_probe_b():
    # Everitt et al. 2011, PRL 106, 221101 (read in the abstract): 6606.1 mas/yr predicted. 0.2%: the
    # prediction includes the Earth's oblateness and the exact orbit, not modelled here.
    rate = evaluate(GPB + "x = geodetic_rate(const.GM_earth, r)")["x"]
    assert rate.to_value(u.mas / u.yr) == pytest.approx(6606.1, rel=2e-3, abs=0)


def test_frame_dragging_gravity_probe_b():
    # Everitt et al. 2011 (read in the abstract): 39.2 mas/yr, the drift of a gyroscope pointing at the
    # guide star IM Pegasi (declination 16.84 deg), i.e. the polar-orbit average times cos(dec).
    # 1.5%: J and the orbit radius are rounded.
    rate = evaluate(GPB + "x = frame_dragging_rate(J, r)")["x"].to_value(u.mas / u.yr)
    assert rate * math.cos(math.radians(16.84)) == pytest.approx(39.2, rel=1.5e-2, abs=0)


@pytest.mark.parametrize("r_over_rs", [1e3, 1e5, 1e9])
def test_geodetic_rate_is_the_weak_field_limit_of_the_exact_schwarzschild_one(r_over_rs):
    # exact for a circular geodesic in Schwarzschild: the spin turns by 2 pi (1 - sqrt(1 - 3M/r))
    # per orbit (Hartle 2003, Gravity, §14.1, from memory), the orbit taking 2 pi/sqrt(GM/r^3)
    # in coordinate time; first order in M/r = GM/(c^2 r) it is 3/2 M/r n. They agree to
    # (M/r): the tolerance is 2 M/r + rounding
    from calc.physics.functions import gyroscopes
    gm = 3.986004418e14   # m^3/s^2, the Earth (IERS Conventions 2010, table 1.1)
    rs = 2 * gm / 299_792_458.0**2
    r = r_over_rs * rs
    m_over_r = gm / 299_792_458.0**2 / r
    exact = -math.expm1(0.5 * math.log1p(-3 * m_over_r)) * math.sqrt(gm / r**3)   # rad/s
    got = gyroscopes.geodetic_rate(gm * u.m**3 / u.s**2, r * u.m).to_value(u.rad / u.s)
    assert got == pytest.approx(exact, rel=2 * m_over_r + 1e-12, abs=0)


def test_geodetic_gamma_dependence():
    # PPN: the rate scales as (gamma + 1/2) (Will 2014, Living Rev. Relativ. 17, 4, the PPN
    # geodetic precession; from memory): gamma = 0 leaves a third of the GR value
    sheet = evaluate(GPB + "a = geodetic_rate(const.GM_earth, r)\n"
                     "b = geodetic_rate(const.GM_earth, r, gamma = 0)")
    assert sheet["b"].value == pytest.approx(sheet["a"].value / 3, rel=1e-12, abs=0)


@pytest.mark.parametrize("radius_km", [7027.4, 12270.0, 42164.0])
def test_frame_dragging_is_the_orbit_average_of_the_instantaneous_precession(radius_km):
    # Schiff 1960, PRL 4, 215 (from memory): a gyroscope at r precesses at
    # G/(c^2 r^3) [3 (J . r_hat) r_hat - J]. On a polar circular orbit (J along z, the orbit in
    # the x-z plane) its time average, done here by scipy quad over the orbit (not the closed
    # form G J/(2 c^2 r^3)), lies along J; the component across it averages to zero. 1e-11:
    # quad is asked for 1e-12 on a trigonometric polynomial
    from scipy.integrate import quad

    from calc.physics.functions import gyroscopes
    G, c, spin, r = 6.67430e-11, 299_792_458.0, 5.86e33, radius_km * 1e3   # G: CODATA 2018

    def along_j(phi):
        return G / (c**2 * r**3) * spin * (3 * math.sin(phi) ** 2 - 1)

    def across_j(phi):
        return G / (c**2 * r**3) * spin * 3 * math.sin(phi) * math.cos(phi)

    average = quad(along_j, 0, 2 * math.pi, epsabs=0, epsrel=1e-12)[0] / (2 * math.pi)
    # it integrates to zero: an absolute tolerance on the scale of the average
    across = quad(across_j, 0, 2 * math.pi, epsabs=1e-12 * average, epsrel=0)[0] / (2 * math.pi)
    assert abs(across) < 1e-11 * average
    got = gyroscopes.frame_dragging_rate(spin * u.kg * u.m**2 / u.s, r * u.m).to_value(u.rad / u.s)
    assert got == pytest.approx(average, rel=1e-11, abs=0)


def test_frame_dragging_gamma_dependence():
    # PPN: (1 + gamma + alpha1/4)/2 times the GR value (Will 2014, Living Rev. Relativ. 17, 4;
    # from memory), alpha1 = 0 here: gamma = 0 halves it, and the sheet's `ppn` line reaches it.
    sheet = evaluate(GPB + "a = frame_dragging_rate(J, r)\nb = frame_dragging_rate(J, r, gamma = 0)\n")
    assert sheet["b"].value == pytest.approx(sheet["a"].value / 2, rel=1e-15, abs=0)
    ppn = evaluate("ppn gamma = 0\n" + GPB + "c = frame_dragging_rate(J, r)")
    assert ppn["c"].value == pytest.approx(sheet["b"].value, rel=1e-15, abs=0)


def test_frame_dragging_takes_arrays():
    from calc.physics.functions import gyroscopes
    both = gyroscopes.frame_dragging_rate(5.86e33 * u.kg * u.m**2 / u.s, [7000, 8000] * u.km,
                                          gamma=0.9 * u.one)
    for k, radius in enumerate((7000, 8000)):
        one = gyroscopes.frame_dragging_rate(5.86e33 * u.kg * u.m**2 / u.s, radius * u.km,
                                             gamma=0.9 * u.one)
        assert both[k].value == pytest.approx(one.value, rel=1e-15, abs=0)
