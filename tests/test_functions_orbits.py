"""calc.physics.functions.orbits against published values and limits."""

from __future__ import annotations

import math

import astropy.units as u
import numpy as np
import pytest
from scipy.optimize import newton

from calc.physics.functions import orbits
from conftest import evaluate, only_error

GM_SUN = 1.3271244e20   # IAU 2015 Resolution B3, nominal
C = 299_792_458.0
AU = 149_597_870_700.0

MERCURY = "a = 0.38709927 AU\ne = 0.20563593\n"   # J2000 mean elements (Standish, JPL; from memory)


def test_mercury_perihelion_advance_per_century():
    # Nobili & Will 1986, Nature 320, 39; Will 2014 LRR 17, 4: 42.98"/century.
    # 4 digits given (±0.005, 1.2e-4); the Keplerian period from GM_sun differs from the
    # sidereal 87.9691 d by Mercury's mass and perturbations (< 1e-4).
    sheet = evaluate(MERCURY + "x = periapsis_rate(1 Msun, a, e)")
    assert sheet["x"].to_value(u.arcsec / u.yr) * 100 == pytest.approx(42.98, rel=2e-4, abs=0)


def test_mercury_perihelion_advance_per_orbit_and_with_the_sidereal_period():
    # 0.1035"/orbit: the 42.98"/century of Nobili & Will 1986 times the sidereal period
    # 87.9691 d over 36525 d (4 digits: 5e-4); and back to "/century with that period
    sheet = evaluate(MERCURY + "x = periapsis_advance(1 Msun, a, e)\n"
                     "y = x / 87.9691 d in arcsec / century")
    assert sheet["x"].to_value(u.arcsec) == pytest.approx(0.1035, rel=5e-4, abs=0)
    assert sheet["y"].value == pytest.approx(42.98, rel=2e-4, abs=0)


def test_semi_major_axis_inverts_orbital_period():
    sheet = evaluate("P = orbital_period(1 Msun, 1.5 AU)\na = semi_major_axis(1 Msun, P)")
    assert sheet["a"].to_value(u.AU) == pytest.approx(1.5, rel=1e-13, abs=0)


def test_earth_year_from_keplers_law():
    # Gaussian year 2 pi / k, k = 0.01720209895: the Astronomical Almanac 2010, "Selected
    # Astronomical Constants" (the au is the length for which k takes this value). 1e-7: the
    # astropy au and GM_sun (IAU 2012/2015) agree with k to about 1e-8.
    assert evaluate("P = orbital_period(1 Msun, 1 AU)")["P"].to_value(u.d) == \
        pytest.approx(2 * math.pi / 0.01720209895, rel=1e-7, abs=0)


def test_vis_viva():
    # circular speed at 1 au, about 29.78 km/s (common practice); at perihelion of e = 0.5
    sheet = evaluate("v = orbital_speed(1 Msun, 1 AU)\np = orbital_speed(1 Msun, 0.5 AU, 1 AU)")
    assert sheet["v"].to_value(u.km / u.s) == pytest.approx(29.7847, rel=1e-5, abs=0)
    assert sheet["p"].to_value(u.km / u.s) == pytest.approx(29.7847 * math.sqrt(3), rel=1e-5, abs=0)


def _j2_acceleration(gm, j2, body_radius):
    """The acceleration of the degree-2 zonal term of the potential, Phi_2 = GM J2 R^2 P2(z/r)
    / r^3 (Kaula 1966, from memory; IERS Conventions 2010 ch. 6 writes the same with
    C20 = -J2), as -grad Phi_2 by a complex step per coordinate (no hand-derived gradient)."""
    def potential(pos):
        r2 = (pos**2).sum(1)
        return gm * j2 * body_radius**2 * (3 * pos[:, 2] ** 2 / r2 - 1) / 2 / r2**1.5

    def accel(r_vec, v_vec):
        h = 1e-20 * np.linalg.norm(r_vec, axis=1)
        out = np.empty_like(r_vec)
        for k in range(3):
            step = np.zeros(r_vec.shape, dtype=complex)
            step[:, k] = 1j * h
            out[:, k] = -potential(r_vec + step).imag / h
        return out
    return accel


@pytest.mark.parametrize("a_km, e, i_deg", [
    (7000.0, 0.01, 0.5), (7000.0, 0.01, 90.0), (7083.0, 0.001, 98.2), (26600.0, 0.74, 63.4),
    (12000.0, 0.3, 140.0)])
def test_j2_rates_average_the_quadrupole_acceleration(a_km, e, i_deg):
    # node, perigee and their sum against the Gauss average of the J2 acceleration (first order
    # in J2, as the closed forms are): the average converges far below 1e-9; the node at
    # i = 90 deg is zero, so it is compared absolutely against the perigee's scale
    gm, j2, radius = 3.986004418e14, 1.08263e-3, 6378137.0
    a, inc = a_km * 1e3, math.radians(i_deg)
    node, arg = gauss_average(_j2_acceleration(gm, j2, radius), gm, a, e, inc,
                              math.radians(35.0), math.radians(80.0))
    args = (gm * u.m**3 / u.s**2, j2 * u.one, radius * u.m, a * u.m, e * u.one, i_deg * u.deg)
    scale = abs(arg) + abs(node)
    assert orbits.node_rate(*args).to_value(u.rad / u.s) == pytest.approx(node, rel=1e-9, abs=1e-9 * scale)
    assert orbits.perigee_rate(*args).to_value(u.rad / u.s) == pytest.approx(arg, rel=1e-9, abs=1e-9 * scale)
    assert orbits.oblateness_rate(*args).to_value(u.rad / u.s) == \
        pytest.approx(node + arg, rel=1e-9, abs=1e-9 * scale)


def test_lense_thirring_lageos():
    # Ciufolini & Pavlis 2004, Nature 431, 958 (from memory): LAGEOS node, about 31 mas/yr, with
    # a = 12270 km, e = 0.0045 and the Earth's J = 5.86e33 kg m^2/s (from memory). 2%: rounded inputs.
    got = evaluate("x = lense_thirring_node_rate(5.86e33 kg m^2 / s, 12270 km, 0.0045)")["x"]
    assert got.to_value(u.mas / u.yr) == pytest.approx(31.0, rel=2e-2, abs=0)


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
    assert rates[0] == pytest.approx(42.98, rel=1e-3, abs=0)   # Mercury, as above
    assert np.all(np.diff(rates) < 0)


# ---- second edition: J2 node and perigee, Lense–Thirring periapsis, tidal and rotational bulges

# GRS80 defining constants (Moritz 2000, J. Geod. 74, 128; as tabulated by DGFI): a, GM, J2
GRS80 = "GM_e = 3986005e8 m^3 / s^2\nJ2_e = 108263e-8\nR_e = 6378137 m\n"
G_SI = 6.67430e-11   # CODATA 2018 and 2022 alike (astropy's default set)


def test_sun_synchronous_landsat_8():
    # USGS Landsat 8 Data Users Handbook (LSDS-1574) §2: a Sun-synchronous orbit at 705 km at
    # the Equator, 98.9 minutes per orbit; inclination 98.2 deg (USGS Landsat orbit pages).
    # Sun-synchronous: the node turns 360 deg per tropical year of 365.2422 d (common practice).
    # 0.7%: the published inclination has 0.1 deg steps, and d(cos i)/cos i = tan i di = 0.6%
    # for di = 0.05 deg; first-order J2 theory leaves ~J2 (R/a)^2 ~ 1e-3 out.
    sheet = evaluate(GRS80 + "a = R_e + 705 km\n"
                     "w = node_rate(GM_e, J2_e, R_e, a, 0.001, 98.2 deg)\n"
                     "P = orbital_period(GM_e, a) in min")
    assert sheet["w"].to_value(u.deg / u.d) == pytest.approx(360 / 365.2422, rel=7e-3, abs=0)
    # the altitude is read as a − R_e: the Keplerian period then matches the published 98.9 min
    # (3 digits: 5e-4; the J2 change of the period, ~1e-3, is the rest of the 1.5e-3)
    assert sheet["P"].value == pytest.approx(98.9, rel=1.5e-3, abs=0)


def test_critical_inclination():
    # The argument of perigee stands still at arccos(1/sqrt(5)) = 63.43 deg (and 116.57 deg),
    # the inclination of the Molniya orbits (common practice); it advances below, regresses above.
    angles = [63.3, 63.4349488, 63.6, 116.5650512]
    sheet = evaluate(GRS80 + "r = perigee_rate(GM_e, J2_e, R_e, 26600 km, 0.74, "
                     f"[{', '.join(map(str, angles))}] deg)\n"
                     "r0 = perigee_rate(GM_e, J2_e, R_e, 26600 km, 0.74, 0 deg)")
    rates, scale = sheet["r"].value, sheet["r0"].value
    assert rates[0] > 0 > rates[2]
    # 1e-8 of the equatorial rate: 7 digits of the angle leave 5 cos 2i di ~ 3e-9 of it
    assert abs(rates[1]) < 1e-8 * scale and abs(rates[3]) < 1e-8 * scale


def test_node_and_perigee_rates_make_the_periapsis_longitude_rate():
    # the longitude of periapsis is Omega + omega, so the rates add (definition)
    sheet = evaluate(GRS80 + "w = node_rate(GM_e, J2_e, R_e, 7500 km, 0.1, 40 deg)\n"
                     "p = perigee_rate(GM_e, J2_e, R_e, 7500 km, 0.1, 40 deg)\n"
                     "t = oblateness_rate(GM_e, J2_e, R_e, 7500 km, 0.1, 40 deg)")
    total = (sheet["w"] + sheet["p"]).to_value(u.rad / u.s)
    assert sheet["t"].to_value(u.rad / u.s) == pytest.approx(total, rel=1e-12, abs=0)


def _kepler(mean_anomaly, e):
    E = newton(lambda E: E - e * np.sin(E) - mean_anomaly, np.full_like(mean_anomaly, np.pi),
               fprime=lambda E: 1 - e * np.cos(E), tol=1e-14, maxiter=200)
    assert np.max(np.abs(E - e * np.sin(E) - mean_anomaly)) < 1e-13
    return E


def gauss_average(accel, gm, a, e, i, node, argp, n=8192):
    """Orbit-averaged (dΩ/dt, dω/dt) in rad/s of a perturbing acceleration accel(r, v), from
    Gauss's planetary equations (Murray & Dermott 1999, §2.9; common practice) sampled at
    evenly spaced mean anomalies (a smooth periodic integrand: the mean converges geometrically).
    """
    E = _kepler(2 * np.pi * (np.arange(n) + 0.5) / n, e)
    f = 2 * np.arctan2(np.sqrt(1 + e) * np.sin(E / 2), np.sqrt(1 - e) * np.cos(E / 2))
    p = a * (1 - e**2)
    r = p / (1 + e * np.cos(f))
    co, so, cw, sw, ci, si = (np.cos(node), np.sin(node), np.cos(argp), np.sin(argp),
                              np.cos(i), np.sin(i))
    P = np.array([co * cw - so * sw * ci, so * cw + co * sw * ci, sw * si])
    Q = np.array([-co * sw - so * cw * ci, -so * sw + co * cw * ci, cw * si])
    W = np.cross(P, Q)
    r_vec = (r * np.cos(f))[:, None] * P + (r * np.sin(f))[:, None] * Q
    v_vec = np.sqrt(gm / p) * ((-np.sin(f))[:, None] * P + (e + np.cos(f))[:, None] * Q)
    radial = r_vec / r[:, None]
    transverse = np.cross(W, radial)
    F = accel(r_vec, v_vec)
    R, T, N = (F * radial).sum(1), (F * transverse).sum(1), F @ W
    h = np.sqrt(gm * p)
    sin_u = np.sin(argp + f)
    node_rate = r * sin_u * N / (h * si)
    arg_rate = (-p * np.cos(f) * R + (p + r) * np.sin(f) * T) / (h * e) - r * sin_u * ci * N / (h * si)
    return node_rate.mean(), arg_rate.mean()


@pytest.mark.parametrize("a_km, e, i_deg, node_deg, argp_deg, gamma", [
    (12270.0, 0.0045, 109.9, 30.0, 200.0, 1.0),   # LAGEOS-like
    (12163.0, 0.014, 52.65, 120.0, 40.0, 1.0),    # LAGEOS II-like
    (8000.0, 0.3, 20.0, 250.0, 300.0, 0.5),       # eccentric, and gamma != 1
])
def test_lense_thirring_rates_average_the_gravitomagnetic_acceleration(a_km, e, i_deg, node_deg,
                                                                        argp_deg, gamma):
    # IERS Conventions (2010) ch. 10, the Lense–Thirring term of a satellite's equation of
    # motion: (1 + gamma) G/(c^2 r^3) [3/r^2 (r x v)(r . J) + v x J], J along the body's axis
    # (z: the equator is the reference plane). Averaged over the orbit with Gauss's
    # equations, it must give both closed forms; 1e-9: the average has converged far below.
    spin = 5.86e33                                   # kg m^2/s (the Earth's, from memory)
    gm, J = 3.986004418e14, np.array([0.0, 0.0, 5.86e33])

    def accel(r_vec, v_vec):
        r = np.linalg.norm(r_vec, axis=1)[:, None]
        term = 3 / r**2 * np.cross(r_vec, v_vec) * (r_vec @ J)[:, None] + np.cross(v_vec, J)
        return (1 + gamma) * G_SI / (C**2 * r**3) * term

    a = a_km * 1e3
    node, arg = gauss_average(accel, gm, a, e, math.radians(i_deg), math.radians(node_deg),
                              math.radians(argp_deg))
    J_q, a_q, e_q, g_q = spin * u.kg * u.m**2 / u.s, a * u.m, e * u.one, gamma * u.one
    got_node = orbits.lense_thirring_node_rate(J_q, a_q, e_q, gamma=g_q)
    got_arg = orbits.lense_thirring_periapsis_rate(J_q, a_q, e_q, i_deg * u.deg, gamma=g_q)
    assert got_node.to_value(u.rad / u.s) == pytest.approx(node, rel=1e-9, abs=0)
    assert got_arg.to_value(u.rad / u.s) == pytest.approx(arg, rel=1e-9, abs=0)


def _ppn_acceleration(gm, gamma, beta):
    """The 1PN relativistic acceleration of a test body about a point mass in PPN form, IERS
    Conventions (2010) eq. (10.12) (Schwarzschild term): GM/(c^2 r^3) [(2(beta + gamma) GM/r
    - gamma v^2) r + 2(1 + gamma)(r . v) v]."""
    def accel(r_vec, v_vec):
        r = np.linalg.norm(r_vec, axis=1)[:, None]
        v2 = (v_vec**2).sum(1)[:, None]
        rv = (r_vec * v_vec).sum(1)[:, None]
        return gm / (C**2 * r**3) * ((2 * (beta + gamma) * gm / r - gamma * v2) * r_vec
                                      + 2 * (1 + gamma) * rv * v_vec)
    return accel


@pytest.mark.parametrize("gamma, beta", [(1.0, 1.0), (0.0, 1.0), (0.5, 1.0), (1.0, 0.0),
                                         (1.0, 2.0), (0.7, 1.3)])
@pytest.mark.parametrize("a_au, e", [(0.38709927, 0.20563593), (1.0, 0.6), (5.2, 0.01)])
def test_periapsis_rate_averages_the_ppn_acceleration(gamma, beta, a_au, e):
    # the IERS relativistic acceleration averaged over the orbit with Gauss's equations: the
    # secular rate of the periapsis at first order, for any gamma and beta, without the closed
    # form 6 pi GM/(c^2 a (1 - e^2)) (2 + 2 gamma - beta)/3. It is in the orbit's plane, so the
    # node stays; 1e-9: the average converges far below
    a = a_au * AU
    node, arg = gauss_average(_ppn_acceleration(GM_SUN, gamma, beta), GM_SUN, a, e,
                              0.3, 0.0, 1.0)
    assert abs(node) < 1e-12 * abs(arg)
    gm_q = GM_SUN * u.m**3 / u.s**2
    rate = orbits.periapsis_rate(gm_q, a * u.m, e * u.one, gamma=gamma * u.one, beta=beta * u.one)
    assert rate.to_value(u.rad / u.s) == pytest.approx(arg, rel=1e-9, abs=0)
    # per orbit: the same rate over one Keplerian period 2 pi sqrt(a^3/GM)
    advance = orbits.periapsis_advance(gm_q, a * u.m, e * u.one, gamma=gamma * u.one,
                                       beta=beta * u.one)
    period = 2 * math.pi * math.sqrt(a**3 / GM_SUN)
    assert advance.to_value(u.rad) == pytest.approx(arg * period, rel=1e-9, abs=0)
    # and the sheet without gamma and beta is general relativity
    if gamma == beta == 1.0:
        default = orbits.periapsis_advance(gm_q, a * u.m, e * u.one)
        assert default.to_value(u.rad) == pytest.approx(arg * period, rel=1e-9, abs=0)


def test_lageos_2_perigee():
    # Ciufolini et al. 1998 (LAGEOS II perigee, from memory): about -57 mas/yr, with
    # a = 12163 km, e = 0.014, i = 52.65 deg (from memory). 2%: rounded inputs.
    got = evaluate("x = lense_thirring_periapsis_rate(5.86e33 kg m^2 / s, 12163 km, 0.014, 52.65 deg)")["x"]
    assert got.to_value(u.mas / u.yr) == pytest.approx(-57, rel=2e-2, abs=0)


def test_lense_thirring_rates_follow_the_sheets_ppn_gamma():
    # (1 + gamma)/2 (IERS Conventions 2010 ch. 10: the gravitomagnetic term carries 1 + gamma)
    sheet = evaluate("ppn gamma = 0\n"
                     "n0 = lense_thirring_node_rate(5.86e33 kg m^2 / s, 12270 km, 0.0045)\n"
                     "n1 = lense_thirring_node_rate(5.86e33 kg m^2 / s, 12270 km, 0.0045, gamma = 1)\n"
                     "w0 = lense_thirring_periapsis_rate(5.86e33 kg m^2 / s, 12163 km, 0.014, 52.65 deg)\n"
                     "w1 = lense_thirring_periapsis_rate(5.86e33 kg m^2 / s, 12163 km, 0.014, 52.65 deg, gamma = 1)")
    assert (sheet["n0"] / sheet["n1"]).value == pytest.approx(0.5, rel=1e-12, abs=0)
    assert (sheet["w0"] / sheet["w1"]).value == pytest.approx(0.5, rel=1e-12, abs=0)


# WASP-12b: Hebb et al. 2009, ApJ 693, 1920 (as quoted by Maciejewski et al. 2011, A&A 528,
# A65, §1): M_p = 1.41 M_J, R_p = 1.79 R_J, a = 0.0229 au; P = 1.09 d (Hebb et al. abstract).
WASP12 = "M = 4 * pi^2 * (0.0229 AU)^3 / (G * (1.09 d)^2) in Msun\nm = 1.41 Mjup\nR = 1.79 Rjup\na = 0.0229 AU\n"


@pytest.mark.parametrize("e", [0.01, 0.3, 0.6])
def test_tidal_rate_averages_the_tidal_force(e):
    # The star's tide on the planet: by the definition of the Love number (Love 1911, from
    # memory) the bulge's potential outside the planet is k2 (R/r')^3 times the tidal
    # potential, G M R^2/r^3 P2; at the star this pulls with 3 k2 G M^2 R^5 / r^7, so the
    # relative orbit feels the radial acceleration -3 k2 G M (M + m) R^5 / (m r^7). Its Gauss
    # average must give (15/2) k2 n (R/a)^5 (M/m) f2(e) at every e (1e-9: converged average).
    M, m, R, a, k2 = 1.35 * GM_SUN, 1.41 * 1.26686534e17, 1.79 * 7.1492e7, 0.0229 * AU, 0.44

    def accel(r_vec, v_vec):
        r = np.linalg.norm(r_vec, axis=1)[:, None]
        return -3 * k2 * M * (M + m) * R**5 / (m * r**7) * r_vec / r

    _, arg = gauss_average(accel, M + m, a, e, 0.2, 0.0, 0.0)
    gm_unit = u.m**3 / u.s**2
    got = orbits.tidal_apsidal_rate(M * gm_unit, m * gm_unit, R * u.m, k2 * u.one, a * u.m, e * u.one)
    assert got.to_value(u.rad / u.s) == pytest.approx(arg, rel=1e-9, abs=0)


def test_tidal_bulge_dominates_relativity_for_very_hot_jupiters():
    # Ragozzine & Wolf 2009 (abstract): for very hot Jupiters (a <~ 0.025 au) the planet's
    # tidal bulge dominates the apsidal precession, "exceeding the effects of general
    # relativity ... by more than an order of magnitude". WASP-12b with k2 = 0.44 (the Love
    # number Patra et al. 2017, AJ 154, 4, abstract, infer if the timing is precession).
    sheet = evaluate(WASP12 + "t = tidal_apsidal_rate(M, m, R, 0.44, a, 0.002)\n"
                     "g = periapsis_rate(M + m, a, 0.002) in deg / yr")
    assert (sheet["t"] / sheet["g"]).to_value(u.one) > 10


def test_rotational_rate_is_the_rotational_j2_acting_on_the_orbit():
    # A fluid planet's rotational flattening: J2 = k2 q / 3, q = Omega^2 R^3/(G m) (the
    # Love-number relation; Ragozzine & Wolf 2009). The star then moves in the planet's J2
    # field, the relative orbit with G (M + m): it must equal oblateness_rate at i = 0.
    sheet = evaluate(WASP12 + "P_rot = 1.09 d\nk2 = 0.44\n"
                     "r = rotational_apsidal_rate(M, m, R, k2, P_rot, a, 0.05)\n"
                     "J2 = k2 * (2 * pi / P_rot)^2 * R^3 / (3 * G * m)\n"
                     "o = oblateness_rate(M + m, J2, R, a, 0.05, 0 deg)")
    assert sheet["r"].to_value(u.rad / u.s) == pytest.approx(sheet["o"].to_value(u.rad / u.s), rel=1e-12, abs=0)


def test_synchronous_rotation_adds_a_fifteenth_of_the_tide():
    # with P_rot = P the two formulas' ratio is (M + m)/(15 M) (their definitions: Omega_s = n);
    # the entry's "about 1/15" must hold for a Jupiter around a Sun-like star (1e-12)
    sheet = evaluate(WASP12 + "P = orbital_period(M + m, a)\n"
                     "t = tidal_apsidal_rate(M, m, R, 0.44, a, 0)\n"
                     "r = rotational_apsidal_rate(M, m, R, 0.44, P, a, 0)\nq = r / t")
    M, m = sheet["M"].to_value(u.kg), sheet["m"].to_value(u.kg)
    assert sheet["q"].to_value(u.one) == pytest.approx((M + m) / (15 * M), rel=1e-12, abs=0)


@pytest.mark.parametrize("text, message", [
    ("x = node_rate(1 Mearth, 1e-3, 6378 km, 7000 km, 0, 190 deg)",
     "node_rate: `i` must lie between 0 and 180 deg, got 190 deg"),
    ("x = perigee_rate(1 Mearth, 1e-3, 6378 km, 7000 km, 0.2, 10 deg)",
     "perigee_rate: the periapsis a (1 − e) lies inside `R`: the orbit meets the body"),
    ("x = node_rate(1 Mearth, 1e-3, 6378 km, 7000 km, 0)",
     "node_rate(M, J2, R, a, e, i): missing a required argument: `i`"),
    ("x = lense_thirring_periapsis_rate(5.86e33 kg m^2 / s, 12163 km, 0.014, 1 km)",
     "lense_thirring_periapsis_rate: `i` must be an angle, got 1 km"),
    ("x = tidal_apsidal_rate(1 Msun, 1 Mjup, 1 Rjup, -0.1, 0.02 AU, 0)",
     "tidal_apsidal_rate: `k2` must not be negative, got -0.1"),
    ("x = tidal_apsidal_rate(1 Msun, 1 Mjup, 1 Rjup, 0.3, 0.0001 AU, 0)",
     "tidal_apsidal_rate: the periapsis a (1 − e) lies inside `R`: the orbit meets the body"),
    ("x = rotational_apsidal_rate(1 Msun, 1 Mjup, 1 Rjup, 0.3, 10 km, 0.02 AU, 0)",
     "rotational_apsidal_rate: `P_rot` must be a time, got 10 km"),
    ("x = rotational_apsidal_rate(1 Msun, -1 Mjup, 1 Rjup, 0.3, 1 d, 0.02 AU, 0)",
     "rotational_apsidal_rate: `m` must be positive, got -1 jupiterMass"),
])
def test_second_edition_errors(text, message):
    assert only_error(evaluate(text), "x").message == message


def test_a_love_number_above_the_fluid_limit_warns():
    sheet = evaluate("x = tidal_apsidal_rate(1 Msun, 1 Mjup, 1 Rjup, 2, 0.02 AU, 0)")
    assert any("3/2" in w for w in sheet.cell("x").warnings)


SECOND_EDITION = {
    "node_rate": "node_rate(GM_e, J2_e, R_e, {a}, 0.01, 98 deg)",
    "perigee_rate": "perigee_rate(GM_e, J2_e, R_e, {a}, 0.01, 98 deg)",
    "lense_thirring_periapsis_rate": "lense_thirring_periapsis_rate(5.86e33 kg m^2 / s, {a}, 0.01, 52 deg)",
    "lense_thirring_node_rate": "lense_thirring_node_rate(5.86e33 kg m^2 / s, {a}, 0.01)",
    "tidal_apsidal_rate": "tidal_apsidal_rate(1.3 Msun, 1.4 Mjup, 1.8 Rjup, 0.4, {a} * 500, 0.01)",
    "rotational_apsidal_rate": "rotational_apsidal_rate(1.3 Msun, 1.4 Mjup, 1.8 Rjup, 0.4, 1 d, {a} * 500, 0.01)",
}


@pytest.mark.parametrize("name", sorted(SECOND_EDITION))
def test_second_edition_functions_take_arrays(name):
    # two semi-major axes in, two results out, each equal to the call with that one value
    call = SECOND_EDITION[name]
    sheet = evaluate(GRS80 + "x = " + call.format(a="[7000, 12000] km") + "\n"
                     "y0 = " + call.format(a="7000 km") + "\ny1 = " + call.format(a="12000 km"))
    values = sheet["x"].value
    assert values.shape == (2,)
    assert values[0] == pytest.approx(sheet["y0"].to_value(sheet["x"].unit), rel=1e-14, abs=0)
    assert values[1] == pytest.approx(sheet["y1"].to_value(sheet["x"].unit), rel=1e-14, abs=0)


@pytest.mark.parametrize("name", sorted(SECOND_EDITION))
def test_second_edition_entries_are_handbook_entries(name):
    from calc.physics import functions
    doc = functions.lookup(name).documentation()
    for section in ("Formula:", "Arguments:", "Result:", "Validity:", "PPN:", "Source:"):
        assert section in doc, f"{name} lacks {section}"
    assert "{" not in doc   # the shared paragraphs were filled in
