"""calc.physics.functions.binaries against PSR B1913+16 and Peters' equations."""

from __future__ import annotations

import math

import astropy.units as u
import numpy as np
import pytest
from scipy.integrate import quad, solve_ivp
from scipy.optimize import newton

from calc.physics.functions import binaries
from conftest import evaluate, only_error

# Weisberg & Huang 2016, ApJ 829, 55: PSR B1913+16 (its masses 1.438 and 1.390 Msun, rounded
# there to 3 digits)
HULSE_TAYLOR = "m1 = 1.438 Msun\nm2 = 1.390 Msun\nPb = 0.322997448918 d\necc = 0.6171340\nx = 2.341776 s\n"


@pytest.mark.parametrize("expression, unit, expected, rel", [
    # masses to 3 digits move omega-dot by ~2e-4 and gamma, Pb-dot by ~5e-4: 1e-3 (2e-3 for gamma)
    ("periastron_rate(m1, m2, Pb, ecc)", u.deg / u.yr, 4.226598, 1e-3),
    ("einstein_delay_amplitude(m1, m2, Pb, ecc)", u.ms, 4.307, 2e-3),
    ("orbital_decay_rate(m1, m2, Pb, ecc)", u.one, -2.40263e-12, 1e-3),
])
def test_hulse_taylor_post_keplerian_parameters(expression, unit, expected, rel):
    value = evaluate(HULSE_TAYLOR + f"y = {expression}")["y"]
    assert value.to_value(unit) == pytest.approx(expected, rel=rel, abs=0)


def test_hulse_taylor_shapiro_parameters_are_consistent():
    # r = G m2 / c^3 = T_sun m2 with T_sun = 4.925490947 us (IAU 2015 nominal GM_sun / c^3)
    sheet = evaluate(HULSE_TAYLOR + "r = shapiro_range(m2)\nsin_i = shapiro_shape(m1, m2, Pb, x)")
    assert sheet["r"].to_value(u.us) == pytest.approx(4.925490947 * 1.390, rel=1e-9, abs=0)
    # sin i must be a sine; Weisberg & Huang 2016 do not fit it for B1913+16 (common practice)
    assert 0 < sheet["sin_i"].value < 1


def test_chirp_mass_of_gw150914():
    # Abbott et al. 2016, PRL 116, 061102, Table I (from memory): source-frame masses 36 and
    # 29 Msun, chirp mass 28 Msun; 2 digits given: 2%
    assert evaluate("c = chirp_mass(36 Msun, 29 Msun)")["c"].to_value(u.Msun) == \
        pytest.approx(28, rel=2e-2, abs=0)


@pytest.mark.parametrize("m1, m2", [(1.4, 1.3), (30.0, 3.0), (10.0, 1e-3)])
def test_chirp_mass_is_what_the_frequency_sweep_measures(m1, m2):
    # the chirp mass is read from f and df/dt, M = (c^3/G) [(5/96) pi^(-8/3) f^(-11/3) df/dt]^(3/5)
    # (Abbott et al. 2016, PRL 116, 061102, eq. 1, from memory); df/dt here from Peters 1964's
    # orbital decay da/dt at e = 0 (eq. 5.6, from memory) and f = sqrt(GM/a^3)/pi, with the
    # masses apart (not through the chirp mass). Rounding only: 1e-12.
    gm1, gm2, f = m1 * GM_SUN, m2 * GM_SUN, 20.0
    a = (gm1 + gm2) ** (1 / 3) / (np.pi * f) ** (2 / 3)
    dadt = -64 / 5 * gm1 * gm2 * (gm1 + gm2) / (C**5 * a**3)
    dfdt = -1.5 * f / a * dadt
    measured = C**3 * (5 / 96 * np.pi ** (-8 / 3) * f ** (-11 / 3) * dfdt) ** 0.6 / GM_SUN
    got = evaluate(f"c = chirp_mass({m1} Msun, {m2} Msun)")["c"].to_value(u.Msun)
    assert got == pytest.approx(measured, rel=1e-12, abs=0)


def test_peters_integral_matches_scipy_quad():
    # scipy.integrate.quad (reference library) of Peters 1964 eq. (5.14)'s integral
    def integrand(e):
        return e ** (29 / 19) * (1 + 121 / 304 * e**2) ** (1181 / 2299) / (1 - e**2) ** 1.5
    for e0 in (0.01, 0.3, 0.617134, 0.9, 0.99):
        expected, _ = quad(integrand, 0, e0, epsabs=0, epsrel=1e-12, limit=200)
        assert binaries.peters_integral(e0) == pytest.approx(expected, rel=1e-8, abs=0)


def _integrated_merger_time(gm1, gm2, pb, e0):
    """Independent check: integrate Peters' coupled da/dt, de/dt (Peters 1964 eqs. 5.6-5.7)."""
    c = 299_792_458.0
    gm = gm1 + gm2
    a0 = (gm * pb**2 / (4 * math.pi**2)) ** (1 / 3)
    beta = 64 / 5 * gm1 * gm2 * gm / c**5

    def rates(t, y):
        a, e = y
        da = -beta / (a**3 * (1 - e**2) ** 3.5) * (1 + 73 / 24 * e**2 + 37 / 96 * e**4)
        de = -19 / 12 * beta * e / (a**4 * (1 - e**2) ** 2.5) * (1 + 121 / 304 * e**2)
        return [da, de]

    def collapsed(t, y):
        return y[0] - 1e-2 * a0
    collapsed.terminal = True
    solution = solve_ivp(rates, (0, 1e18), [a0, e0], events=collapsed, rtol=1e-11, atol=1e-6,
                         method="DOP853")
    return solution.t_events[0][0]


def test_merger_time_matches_direct_integration_of_peters_equations():
    gm_sun = 1.3271244e20
    gm1, gm2, pb = 1.438 * gm_sun, 1.390 * gm_sun, 0.322997448918 * 86400
    direct = _integrated_merger_time(gm1, gm2, pb, 0.6171340)
    ours = evaluate(HULSE_TAYLOR + "t = merger_time(m1, m2, Pb, ecc)")["t"].to_value(u.s)
    # stopping at a = 1e-2 a0 leaves about (1e-2)^4 of the circular time (5e-8 of the
    # total here), below the 1e-6 tolerance
    assert ours == pytest.approx(direct, rel=1e-6, abs=0)


def test_merger_time_hulse_taylor_and_the_circular_pitfall():
    # about 300 Myr for B1913+16 (Weisberg, Nice & Taylor 2010, ApJ 722, 1030; from memory);
    # the circular formula overestimates it about fivefold at e = 0.617 (Peters 1964, Phys.
    # Rev. 136, B1224: emission near periastron shortens the inspiral; from memory)
    sheet = evaluate(HULSE_TAYLOR + "t = merger_time(m1, m2, Pb, ecc) in Myr\n"
                     "t0 = merger_time(m1, m2, Pb, 0) in Myr")
    assert sheet["t"].value == pytest.approx(300, rel=0.02, abs=0)
    assert 4.5 < sheet["t0"].value / sheet["t"].value < 6


def test_merger_time_tends_to_the_circular_formula():
    # Peters 1964: T = a^4/(4 beta) for e = 0; the eccentric branch must join it continuously
    sheet = evaluate(HULSE_TAYLOR + "a = merger_time(m1, m2, Pb, 1e-6)\nb = merger_time(m1, m2, Pb, 0)")
    assert sheet["a"].value == pytest.approx(sheet["b"].value, rel=1e-9, abs=0)


def test_eccentricity_enhancement_factor():
    # Peters & Mathews 1963: f(0.617134) = 11.86 for B1913+16 (from memory); 4 digits: 2e-3
    sheet = evaluate(HULSE_TAYLOR + "a = orbital_decay_rate(m1, m2, Pb, ecc)\n"
                     "b = orbital_decay_rate(m1, m2, Pb, 0)")
    assert (sheet["a"] / sheet["b"]).to_value(u.one) == pytest.approx(11.86, rel=2e-3, abs=0)


def _quadrupole_power_over_binding_energy(gm1, gm2, a, e, samples=4096):
    """Orbit-averaged quadrupole luminosity over the binding energy |E| = G m1 m2/(2a), in 1/s.

    L = G/(5 c^5) <(d3Q/dt3)_jk (d3Q/dt3)_jk>, Q the trace-free mass quadrupole of the reduced
    mass on the Keplerian relative orbit (Landau & Lifshitz, The Classical Theory of Fields,
    §110; Misner, Thorne & Wheeler 1973, eq. 36.1; from memory). d3Q/dt3 from the orbit's
    position, velocity, acceleration -GM r/r^3 and its jerk, sampled at evenly spaced mean
    anomalies (a smooth periodic mean: converges geometrically). Not Peters' closed form."""
    gm = gm1 + gm2
    mean = 2 * np.pi * (np.arange(samples) + 0.5) / samples
    E = newton(lambda E: E - e * np.sin(E) - mean, np.full_like(mean, np.pi),
               fprime=lambda E: 1 - e * np.cos(E), tol=1e-14, maxiter=200)
    assert np.max(np.abs(E - e * np.sin(E) - mean)) < 1e-13
    n = math.sqrt(gm / a**3)
    x = np.stack([a * (np.cos(E) - e), a * math.sqrt(1 - e**2) * np.sin(E), 0 * E], 1)
    edot = n / (1 - e * np.cos(E))
    v = np.stack([-a * np.sin(E) * edot, a * math.sqrt(1 - e**2) * np.cos(E) * edot, 0 * E], 1)
    r = np.linalg.norm(x, axis=1)[:, None]
    acc = -gm * x / r**3
    jerk = -gm * (v / r**3 - 3 * x * (x * v).sum(1)[:, None] / r**5)
    # third derivative of x_j x_k: j x + 3 a v + 3 v a + x j, per unit reduced mass
    third = np.einsum("ij,ik->ijk", jerk, x) + 3 * np.einsum("ij,ik->ijk", acc, v)
    third = third + np.transpose(third, (0, 2, 1))
    trace = np.einsum("ijj->i", third)
    traceless = third - trace[:, None, None] * np.eye(3) / 3
    # G mu^2 / (5 c^5) <...> over G m1 m2/(2a): G cancels, mu = m1 m2/M
    mean_square = (traceless**2).sum((1, 2)).mean()
    return 2 * a * gm1 * gm2 / gm**2 * mean_square / (5 * C**5)


@pytest.mark.parametrize("e", [0.0, 0.1, 0.6171340, 0.9])
def test_orbital_decay_is_the_energy_balance_of_the_quadrupole_luminosity(e):
    # Pb ∝ a^(3/2) and E = -G m1 m2/(2a), so dPb/dt = -(3/2) Pb L/|E| with L the orbit-averaged
    # quadrupole luminosity computed numerically above (not Peters & Mathews' f(e)). 1e-9:
    # the average converges geometrically (16384 samples suffice at e = 0.9)
    gm1, gm2, pb = 1.438 * GM_SUN, 1.390 * GM_SUN, 0.322997448918 * 86400
    a = ((gm1 + gm2) * (pb / (2 * math.pi)) ** 2) ** (1 / 3)
    expected = -1.5 * pb * _quadrupole_power_over_binding_energy(gm1, gm2, a, e, samples=16384)
    got = binaries.orbital_decay_rate(1.438 * u.Msun, 1.390 * u.Msun, pb * u.s, e * u.one)
    assert got.value == pytest.approx(expected, rel=1e-9, abs=0)


def test_masses_as_gravitational_parameters_give_the_same_result():
    a = evaluate(HULSE_TAYLOR + "y = periastron_rate(m1, m2, Pb, ecc)")["y"]
    b = evaluate(HULSE_TAYLOR + "y = periastron_rate(1.438 * const.GM_sun, 1.390 * const.GM_sun, Pb, ecc)")["y"]
    assert a.value == pytest.approx(b.value, rel=1e-14, abs=0)
    assert np.isfinite(a.value)


# ---- second edition: periastron rate to 2PN ------------------------------------------

GM_SUN = 1.3271244e20      # IAU 2015 Resolution B3, nominal (m^3 s^-2); astropy's default
C = 299_792_458.0          # SI definition (exact)
T_SUN = GM_SUN / C**3

# Kramer et al. 2006, Science 314, 97, Table 1 (from memory): PSR J0737-3039A/B
DOUBLE_PULSAR = ("mA = 1.3381 Msun\nmB = 1.2489 Msun\nPb = 0.10225156248 d\necc = 0.0877775\n"
                 "xA = 1.415032 s\n")


def test_periastron_rate_default_order_and_total_mass():
    # The default is order = 1; order = 2 differs (by 2.3e-5 for B1913+16, from the 2PN
    # coefficients of Damour & Schafer 1988, Nuovo Cimento B 101, 127; from memory).
    sheet = evaluate(HULSE_TAYLOR + "a = periastron_rate(m1, m2, Pb, ecc)\n"
                     "b = periastron_rate(m1, m2, Pb, ecc, order = 1)\n"
                     "c = periastron_rate(m1, m2, Pb, ecc, order = 2)\n"
                     "test_mass = periastron_rate(m1 + m2 - 1e-9 Msun, 1e-9 Msun, Pb, ecc)")
    assert sheet["a"].value == sheet["b"].value
    assert sheet["c"].value / sheet["a"].value - 1 == pytest.approx(2.3e-5, rel=0.05, abs=0)
    # at first order the advance depends on the total mass alone (Robertson 1938, Ann. Math.
    # 39, 101, from memory): the same for a test mass around m1 + m2; rounding only
    assert sheet["test_mass"].value == pytest.approx(sheet["a"].value, rel=1e-12, abs=0)


@pytest.mark.parametrize("e", [0.1, 0.6])
def test_first_order_periastron_rate_is_the_weak_field_schwarzschild_geodesic(e):
    # test-mass limit: the Schwarzschild geodesic integrated below (scipy quad) at p = 1e5
    # GM/c^2, where the 2PN part is ~3e-5 of the advance (it falls as 1/p): 1e-4
    n, k, e_theta = _schwarzschild_orbit(1e5, e)
    pb = 2 * math.pi / n * T_SUN
    got = binaries.periastron_rate(1 * u.Msun, 1e-12 * u.Msun, pb * u.s, e_theta * u.one)
    assert got.to_value(u.rad / u.s) == pytest.approx(k * n / T_SUN, rel=1e-4, abs=0)


def _schwarzschild_orbit(p, e):
    """Independent check: a bound Schwarzschild geodesic (GM/c^2 = 1) with turning points
    p/(1 +- e), integrated with scipy.integrate.quad from dr/dtau and dphi/dtau (the energy and
    angular momentum fixed by the turning points). Returns the radial frequency n (per unit
    GM/c^3 of coordinate time), the fractional advance k = dphi/2pi - 1 and e_theta, the
    eccentricity of the angular motion in the Damour-Deruelle parametrisation
    phi = (1 + k) 2 atan(sqrt((1 + e_theta)/(1 - e_theta)) tan(u/2)), read at u = pi/2, where
    r is the mean of the turning points."""
    from scipy.optimize import brentq
    r1, r2 = p / (1 + e), p / (1 - e)

    def f(r):
        return 1 - 2 / r

    ell2 = (f(r2) - f(r1)) / (f(r1) / r1**2 - f(r2) / r2**2)
    energy2 = f(r1) * (1 + ell2 / r1**2)
    mid, half = (r1 + r2) / 2, (r2 - r1) / 2
    # (dr/dtau)^2 = E^2 - f(r)(1 + L^2/r^2) = (1 - E^2)(r - r1)(r2 - r)(r - r3)/r^3, the third
    # root from the product of the roots of the cubic, r1 r2 r3 = 2 L^2/(1 - E^2); with
    # r = mid - half cos(chi) the factor (r - r1)(r2 - r) = half^2 sin^2(chi) cancels exactly.
    r3 = 2 * ell2 / ((1 - energy2) * r1 * r2)

    def integral(rate, upper):
        def integrand(chi):
            r = mid - half * math.cos(chi)
            return rate(r) / math.sqrt((1 - energy2) * (r - r3) / r**3)
        return quad(integrand, 0, upper, epsabs=0, epsrel=1e-13, limit=200)[0]

    def dt(r):
        return math.sqrt(energy2) / f(r)

    def dphi(r):
        return math.sqrt(ell2) / r**2

    n = 2 * math.pi / (2 * integral(dt, math.pi))
    k = 2 * integral(dphi, math.pi) / (2 * math.pi) - 1
    angle = integral(dphi, math.pi / 2) / (1 + k)
    e_theta = brentq(lambda et: 2 * math.atan(math.sqrt((1 + et) / (1 - et))) - angle, 1e-12, 0.999)
    return n, k, e_theta


@pytest.mark.parametrize("heavy_pulsar", [True, False])
@pytest.mark.parametrize("e", [0.1, 0.5])
def test_second_order_periastron_rate_matches_the_exact_schwarzschild_geodesic(heavy_pulsar, e):
    # Test-mass limit of the binary: one mass 1e-12 of the other, so the relative orbit is a
    # Schwarzschild geodesic, integrated independently above (scipy.integrate.quad). The
    # timing model's e_T is e_theta / (1 + delta_theta), delta_theta = beta_O^2 (7/2 X1^2 +
    # 6 X1 X2 + 2 X2^2) (Damour & Deruelle 1986; Taylor & Weisberg 1989, ApJ 345, 434; from
    # memory). At p = 2000 GM/c^2 the 2PN term is ~5e-3 of omega-dot; the 3PN remainder,
    # measured to fall as beta_O^4, is ~2e-5 of it here: tolerance 1e-4. Order 1 must miss by
    # more than 1e-3, or the check would not see the 2PN term.
    n, k, e_theta = _schwarzschild_orbit(2000.0, e)
    x1, x2 = (1.0, 0.0) if heavy_pulsar else (0.0, 1.0)
    beta2 = n ** (2 / 3)
    e_t = e_theta / (1 + beta2 * (3.5 * x1**2 + 6 * x1 * x2 + 2 * x2**2))
    masses = (1.0, 1e-12) if heavy_pulsar else (1e-12, 1.0)
    pb = 2 * math.pi / n * T_SUN
    exact = k * n / T_SUN                                    # rad/s
    args = (masses[0] * u.Msun, masses[1] * u.Msun, pb * u.s, e_t * u.one)
    second = binaries.periastron_rate(*args, order=2 * u.one).to_value(u.rad / u.s)
    first = binaries.periastron_rate(*args).to_value(u.rad / u.s)
    assert second == pytest.approx(exact, rel=1e-4, abs=0)
    assert abs(first / exact - 1) > 1e-3


def test_second_order_term_of_the_double_pulsar():
    # Kramer et al. 2021, Phys. Rev. X 11, 041050 (from memory): the 2PN part of omega-dot of
    # J0737-3039A is 4.39e-4 deg/yr. Masses to four digits and a three-digit value: 1%.
    sheet = evaluate(DOUBLE_PULSAR + "w1 = periastron_rate(mA, mB, Pb, ecc)\n"
                     "w2 = periastron_rate(mA, mB, Pb, ecc, order = 2)")
    assert (sheet["w2"] - sheet["w1"]).to_value(u.deg / u.yr) == pytest.approx(4.39e-4, rel=1e-2, abs=0)


def test_order_must_be_one_or_two():
    err = only_error(evaluate(HULSE_TAYLOR + "w = periastron_rate(m1, m2, Pb, ecc, order = 3)"), "w")
    assert err.message == "periastron_rate: `order` must be 1 or 2, got 3"


# ---- mass function and companion mass ---------------------------------------------


def test_mass_function_of_the_double_pulsar():
    # Kramer et al. 2006, Table 1 (from memory): f(m) = 0.29096571 Msun for pulsar A. x is given
    # to 7 digits (f goes as x^3: 2e-6); tolerance 3e-6.
    f = evaluate(DOUBLE_PULSAR + "f = mass_function(Pb, xA)")["f"]
    assert f.to_value(u.Msun) == pytest.approx(0.29096571, rel=3e-6, abs=0)


def test_companion_mass_recovers_the_double_pulsar_b():
    # Kramer et al. 2006 (from memory): s = sin i = 0.99974 (+16 -39) and m_B = 1.2489(7) Msun
    # from the post-Keplerian parameters; the mass function with m_A and that inclination must
    # give m_B back within its uncertainty (the spread in s moves m_B by ~4e-4): 1e-3.
    mb = evaluate(DOUBLE_PULSAR + "m = companion_mass(mA, Pb, xA, asin(0.99974))")["m"]
    assert mb.to_value(u.Msun) == pytest.approx(1.2489, rel=1e-3, abs=0)


def test_companion_mass_solves_the_mass_function_equation():
    # scipy.optimize.brentq (reference library) on (m2 sin i)^3 - f (m1 + m2)^2 = 0, over
    # companions from a planet (3e-6 of the pulsar) to ten times the pulsar, at several
    # inclinations, all in one array call. Root to 1e-13 relative (brentq xtol).
    from scipy.optimize import brentq
    gm1 = 1.4 * GM_SUN
    m2 = np.array([3e-6, 0.2, 1.3, 14.0]) * GM_SUN
    inc = np.radians([90.0, 60.0, 30.0, 5.0])
    gm_f = (m2 * np.sin(inc)) ** 3 / (gm1 + m2) ** 2
    got = binaries.companion_mass_from(gm1, gm_f, np.sin(inc))
    for value, f, s in zip(got, gm_f, np.sin(inc)):
        root = brentq(lambda y, f=f, s=s: (y * s) ** 3 - f * (gm1 + y) ** 2, 0, 1e3 * GM_SUN,
                      xtol=1e-30, rtol=1e-14)
        assert value == pytest.approx(root, rel=1e-13, abs=0)


def test_companion_mass_minimum_and_errors():
    sheet = evaluate(DOUBLE_PULSAR + "edge = companion_mass(mA, Pb, xA)\n"
                     "tilted = companion_mass(mA, Pb, xA, 60 deg)\nbad = companion_mass(mA, Pb, xA, 0 deg)")
    assert sheet["edge"].value < sheet["tilted"].value   # i = 90 deg gives the minimum mass
    assert only_error(sheet, "bad").message == (
        "companion_mass: `i` must give sin i > 0 (an orbit seen face-on shows no projected "
        "axis), got 0 deg")


# ---- geodetic spin precession -------------------------------------------------------


def test_geodetic_spin_precession_of_the_double_pulsar_b():
    # Kramer et al. 2006 / Breton et al. 2008, Science 321, 104 (from memory): GR predicts
    # 5.0734(7) deg/yr for pulsar B (it precesses about the orbit of companion A). Masses to
    # four digits move the value by ~5e-5: 2e-4.
    rate = evaluate(DOUBLE_PULSAR + "w = geodetic_spin_rate(mB, mA, Pb, ecc)")["w"]
    assert rate.to_value(u.deg / u.yr) == pytest.approx(5.0734, rel=2e-4, abs=0)


def test_geodetic_spin_precession_of_hulse_taylor():
    # Lorimer 2001, Living Rev. Relativ. 4, 5, on geodetic precession (read): the period of
    # B1913+16 is 297.5 yr, i.e. 360 deg / 1.21 deg/yr: a rate known to three digits (0.4%).
    rate = evaluate(HULSE_TAYLOR + "w = geodetic_spin_rate(m1, m2, Pb, ecc)")["w"]
    assert rate.to_value(u.deg / u.yr) == pytest.approx(360 / 297.5, rel=5e-3, abs=0)


# ---- kinematic terms of the observed period derivative -------------------------------


def test_shklovskii_rate_equals_the_kinematics_of_straight_line_motion():
    # Independent check: a binary moving at v_T across the line of sight at distance d0 has
    # distance D(t) = sqrt(d0^2 + v_T^2 t^2); the Doppler factor 1 + D'(t)/c changes at
    # D''(0)/c. Second difference over +-1 yr of the growth D(t) - d0, written as
    # (v_T t)^2 / (D(t) + d0) so that it does not cancel: truncation ~(v_T t/d0)^2 ~ 5e-13.
    d0, mu_mas_yr, pb = 157.0 * u.pc.to(u.m), 140.9, 5.741046 * 86400
    mu = mu_mas_yr * (u.mas / u.yr).to(u.rad / u.s)
    vt = mu * d0
    h = 3.15576e7

    def growth(t):
        return (vt * t) ** 2 / (math.sqrt(d0**2 + (vt * t) ** 2) + d0)
    second = (growth(h) - 2 * growth(0) + growth(-h)) / h**2
    got = binaries.shklovskii_rate(pb * u.s, mu_mas_yr * u.mas / u.yr, d0 * u.m)
    assert got.value == pytest.approx(pb * second / C, rel=1e-6, abs=0)


def test_kinematic_terms_of_j0437_give_its_observed_period_derivative():
    # Verbiest et al. 2008, ApJ 679, 675: kinematic distance 157.0 +- 2.4 pc (read), from the
    # observed Pb-dot = 3.73(6)e-12 (from memory); mu = 140.9 mas/yr (from memory), Pb = 5.741046 d,
    # l = 253.39 deg, b = -41.96 deg (from memory). GR decay is -4e-16, negligible. The
    # observed value is known to 1.6%: tolerance 2%.
    sheet = evaluate("Pb = 5.741046 d\ndist = 157.0 pc\n"
                     "k = shklovskii_rate(Pb, 140.9 mas/yr, dist) + galactic_rate(Pb, 253.39 deg, -41.96 deg, dist)")
    assert sheet["k"].value == pytest.approx(3.73e-12, rel=2e-2, abs=0)


def _galactic_by_vectors(l_deg, b_deg, d, r0, v0, kz=0.0):
    """Independent check: line-of-sight relative acceleration from explicit vectors.
    Sun at the origin, Galactic centre at (R0, 0, 0); flat rotation curve: a = -v0^2 rho/|rho|^2
    for the pulsar's cylindrical position rho from the axis; the Sun's acceleration points to the
    centre with v0^2/R0; vertical acceleration -Kz toward the plane."""
    lon, lat = np.radians(l_deg), np.radians(b_deg)
    n = np.array([np.cos(lat) * np.cos(lon), np.cos(lat) * np.sin(lon), np.sin(lat)])
    pos = d * n
    rho = np.array([pos[0] - r0, pos[1], 0.0])
    a_psr = -v0**2 * rho / np.dot(rho, rho) + np.array([0, 0, -kz * np.sign(pos[2])])
    a_sun = np.array([v0**2 / r0, 0.0, 0.0])
    return np.dot(n, a_psr - a_sun) / C


@pytest.mark.parametrize("l_deg, b_deg, d_kpc", [
    (49.97, 2.12, 6.54), (253.39, -41.96, 0.157), (0.0, 10.0, 3.0), (180.0, -5.0, 2.0),
    (90.0, 60.0, 1.0), (300.0, 0.0, 15.0)])
def test_galactic_rate_equals_the_vector_geometry(l_deg, b_deg, d_kpc):
    # Damour & Taylor 1991's closed form against the explicit vectors above (rounding only),
    # with the vertical acceleration given as Kz (1e-10 m/s^2) so that both use the same one.
    kpc = u.kpc.to(u.m)
    r0, v0, kz = 8.0 * kpc, 220e3, 1e-10
    pb = 86400.0
    got = binaries.galactic_rate(pb * u.s, l_deg * u.deg, b_deg * u.deg, d_kpc * u.kpc,
                                 R0=8.0 * u.kpc, v0=220 * u.km / u.s, Kz=kz * u.m / u.s**2)
    expected = pb * _galactic_by_vectors(l_deg, b_deg, d_kpc * kpc, r0, v0, kz)
    assert got.value == pytest.approx(expected, rel=1e-10, abs=1e-30)


def test_galactic_defaults_and_vertical_model():
    # Defaults: Reid et al. 2019, ApJ 885, 131 (read): R0 = 8.15 kpc, Theta0 = 236 km/s.
    # Vertical model against the disc surface density it encodes: K_z = 2 pi G Sigma(<|z|), and
    # Kuijken & Gilmore 1991, ApJ 367, L9 (from memory) found Sigma(1.1 kpc) = 71 +- 6 Msun/pc^2:
    # tolerance 8.5% (their uncertainty).
    sheet = evaluate("a = galactic_rate(1 d, 30 deg, 20 deg, 2 kpc)\n"
                     "b = galactic_rate(1 d, 30 deg, 20 deg, 2 kpc, R0 = 8.15 kpc, v0 = 236 km/s)")
    assert sheet["a"].value == sheet["b"].value
    G = 6.6743e-11                                     # CODATA 2018
    sigma = binaries.vertical_acceleration(1.1 * u.kpc.to(u.m)) / (2 * math.pi * G)
    assert sigma / (u.Msun / u.pc**2).to(u.kg / u.m**2) == pytest.approx(71, rel=0.085, abs=0)
    # the Sun itself: no relative acceleration (Damour & Taylor's form vanishes as d -> 0)
    near = evaluate("a = galactic_rate(1 d, 30 deg, 0 deg, 1e-9 pc)")["a"].value
    assert abs(near) < 1e-25


@pytest.mark.parametrize("text, message", [
    ("x = galactic_rate(1 d, 0 deg, 100 deg, 1 kpc)",
     "galactic_rate: `b` must lie between −90 and 90 deg, got 100 deg"),
    ("x = galactic_rate(1 d, 0 deg, 0 deg, 8.15 kpc)",
     "galactic_rate: the pulsar would lie on the Galaxy's rotation axis, where a flat rotation "
     "curve has no finite acceleration"),
    ("mu = 3 mas/yr\nx = shklovskii_rate(1 d, -mu, 1 kpc)",
     "shklovskii_rate: `mu` is the total proper motion and must not be negative, got -3 mas / yr"),
    ("x = shklovskii_rate(1 d, 3 mas, 1 kpc)",
     "shklovskii_rate: `mu` must be an angle per time, got 3 mas"),
    ("x = chirp_rate(1 Msun, 1 Msun, 0 Hz)", "chirp_rate: `f` must be positive, got 0 Hz"),
    ("x = gw_strain(1 Msun, 1 Msun, 3 km, 1 Mpc)", "gw_strain: `f` must be a frequency, got 3 km"),
])
def test_new_binary_errors_name_function_and_argument(text, message):
    assert only_error(evaluate(text), "x").message == message


def test_galactic_rate_warns_far_from_the_plane_and_near_the_centre():
    sheet = evaluate("a = galactic_rate(1 d, 30 deg, 60 deg, 3 kpc)\nb = galactic_rate(1 d, 0 deg, 0 deg, 7 kpc)")
    assert "beyond the range of the vertical acceleration model" in sheet.cell("a").warnings[0]
    assert "does not describe the inner Galaxy" in sheet.cell("b").warnings[0]


# ---- gravitational-wave inspiral -------------------------------------------------------


def test_chirp_rate_follows_from_peters_orbital_decay():
    # Peters 1964 eq. (5.6) at e = 0 (from memory): da/dt = -(64/5) G^3 m1 m2 M / (c^5 a^3);
    # with f = 2 f_orb = sqrt(GM/a^3)/pi, df/dt = -(3/2) (f/a) da/dt. Rounding only: 1e-12.
    gm1, gm2 = 1.4 * GM_SUN, 1.3 * GM_SUN
    f = np.array([1e-3, 10.0, 100.0])
    a = (gm1 + gm2) ** (1 / 3) / (np.pi * f) ** (2 / 3)
    dadt = -64 / 5 * gm1 * gm2 * (gm1 + gm2) / (C**5 * a**3)
    expected = -1.5 * f / a * dadt
    got = binaries.chirp_rate(1.4 * u.Msun, 1.3 * u.Msun, f * u.Hz).to_value(u.Hz / u.s)
    np.testing.assert_allclose(got, expected, rtol=1e-12)


def test_time_to_merger_equals_peters_circular_merger_time():
    # Peters 1964: T = a^4 / (4 beta) for e = 0 (merger_time, checked against solve_ivp above),
    # with Pb = 2/f from gw_frequency's convention. Rounding only: 1e-12.
    sheet = evaluate("f = 0.01 Hz\na = time_to_merger(1.4 Msun, 1.3 Msun, f)\n"
                     "b = merger_time(1.4 Msun, 1.3 Msun, 2 / f, 0)\n"
                     "g = gw_frequency(2 / f)")
    assert sheet["a"].to_value(u.s) == pytest.approx(sheet["b"].to_value(u.s), rel=1e-12, abs=0)
    assert sheet["g"].to_value(u.Hz) == pytest.approx(0.01, rel=1e-15, abs=0)


def test_gw150914_chirp_from_35_to_150_hz():
    # Abbott et al. 2016, PRL 116, 061102 (from memory): detector-frame chirp mass about 30 Msun;
    # "over 0.2 s the signal increases in frequency ... in about 8 cycles from 35 to 150 Hz".
    # Leading order applies early in this band (v/c ~ 0.3 at 150 Hz: corrections ~10-30%);
    # the published numbers have one digit: 30%.
    m = 30 * 2**0.2                     # equal masses with chirp mass 30 Msun
    sheet = evaluate(f"m = {m} Msun\nt1 = time_to_merger(m, m, 35 Hz)\nt2 = time_to_merger(m, m, 150 Hz)\n"
                     "span = t1 - t2\ncycles = 8/5 * (35 Hz * t1 - 150 Hz * t2)")
    assert sheet["span"].to_value(u.s) == pytest.approx(0.2, rel=0.3, abs=0)
    assert sheet["cycles"].value == pytest.approx(8, rel=0.3, abs=0)
    assert sheet.cell("t1").warnings == []


def test_gw_strain_equals_the_quadrupole_formula_on_a_circular_orbit():
    # Quadrupole formula (Einstein 1918; Misner, Thorne & Wheeler 1973, eq. 36.47; from memory):
    # for a wave along z, h+ = (G/(c^4 d)) (I''_xx - I''_yy), hx = (2G/(c^4 d)) I''_xy, with I the
    # mass quadrupole of the reduced mass on the relative orbit. Here I'' comes from numpy second
    # differences of the sampled orbit (step 1e-3 of a period: truncation ~1e-5), tolerance 1e-4.
    gm1, gm2, f, d = 10 * GM_SUN, 5 * GM_SUN, 20.0, 1e24
    G = 6.6743e-11
    m_reduced = gm1 * gm2 / (gm1 + gm2) / G
    omega = np.pi * f                                 # orbital angular frequency
    a = ((gm1 + gm2) / omega**2) ** (1 / 3)
    t = np.linspace(0, 2 / f, 2001)
    x, y = a * np.cos(omega * t), a * np.sin(omega * t)
    step = t[1] - t[0]
    ixx, iyy, ixy = m_reduced * x * x, m_reduced * y * y, m_reduced * x * y

    def second(series):
        return (series[2:] - 2 * series[1:-1] + series[:-2]) / step**2
    h_plus = G / (C**4 * d) * (second(ixx) - second(iyy))
    h_cross = 2 * G / (C**4 * d) * second(ixy)
    got = binaries.gw_strain(10 * u.Msun, 5 * u.Msun, f * u.Hz, d * u.m).value
    assert np.max(np.abs(h_plus)) == pytest.approx(got, rel=1e-4, abs=0)
    assert np.max(np.abs(h_cross)) == pytest.approx(got, rel=1e-4, abs=0)


def test_inspiral_functions_warn_beyond_the_innermost_stable_orbit():
    sheet = evaluate("x = chirp_rate(30 Msun, 30 Msun, 300 Hz)")
    assert "innermost stable orbit" in sheet.cell("x").warnings[0]


# ---- PPN: the Shapiro range takes gamma ------------------------------------------------


def test_shapiro_range_takes_gamma_like_the_light_delay():
    # The delay of a signal passing a mass goes as (1 + gamma) G m / c^3 (Will 2014, Living Rev.
    # Relativ. 17, 4; from memory): the range's gamma factor must match light.shapiro_delay's,
    # and the sheet's `ppn gamma` line must reach it.
    sheet = evaluate("ppn gamma = 0.5\nr = shapiro_range(1.39 Msun)\nr1 = shapiro_range(1.39 Msun, gamma = 1)\n"
                     "s = shapiro_delay(1 Msun, 1 AU, 1 AU, 1 AU)\ns1 = shapiro_delay(1 Msun, 1 AU, 1 AU, 1 AU, gamma = 1)")
    assert sheet["r"].value / sheet["r1"].value == pytest.approx(sheet["s"].value / sheet["s1"].value, rel=1e-14, abs=0)
    assert sheet["r"].value / sheet["r1"].value == pytest.approx(0.75, rel=1e-14, abs=0)


# ---- arrays in, arrays out ---------------------------------------------------------------

_MSUN = u.Msun


@pytest.mark.parametrize("function, args, kwargs, index", [
    (binaries.periastron_rate, [1.438 * _MSUN, 1.39 * _MSUN, 0.3229974 * u.d, 0.617 * u.one], {"order": 2 * u.one}, 3),
    (binaries.mass_function, [0.1022515 * u.d, 1.415032 * u.s], {}, 1),
    (binaries.companion_mass, [1.3381 * _MSUN, 0.1022515 * u.d, 1.415032 * u.s], {"i": 60 * u.deg}, 0),
    (binaries.geodetic_spin_rate, [1.2489 * _MSUN, 1.3381 * _MSUN, 0.1022515 * u.d, 0.0877775 * u.one], {}, 2),
    (binaries.shklovskii_rate, [5.741 * u.d, 140.9 * u.mas / u.yr, 157 * u.pc], {}, 2),
    (binaries.galactic_rate, [5.741 * u.d, 253.39 * u.deg, -41.96 * u.deg, 157 * u.pc], {}, 1),
    (binaries.gw_frequency, [0.1022515 * u.d], {}, 0),
    (binaries.chirp_rate, [1.4 * _MSUN, 1.3 * _MSUN, 30 * u.Hz], {}, 2),
    (binaries.time_to_merger, [1.4 * _MSUN, 1.3 * _MSUN, 30 * u.Hz], {}, 0),
    (binaries.gw_strain, [1.4 * _MSUN, 1.3 * _MSUN, 30 * u.Hz, 40 * u.Mpc], {}, 3),
    (binaries.shapiro_range, [1.39 * _MSUN], {"gamma": 0.9 * u.one}, 0),
])
def test_new_binary_functions_take_arrays(function, args, kwargs, index):
    # a 2-element array in one argument gives the two values of two scalar calls
    values = [args[index] * 0.9, args[index] * 1.1]
    array_args = list(args)
    array_args[index] = u.Quantity(values)
    together = function(*array_args, **kwargs)
    assert together.shape == (2,)
    for k, value in enumerate(values):
        single = list(args)
        single[index] = value
        assert together[k].value == pytest.approx(function(*single, **kwargs).value, rel=1e-14, abs=0)


@pytest.mark.parametrize("name", ["mass_function", "companion_mass", "geodetic_spin_rate",
                                  "shklovskii_rate", "galactic_rate", "gw_frequency", "chirp_rate",
                                  "time_to_merger", "gw_strain"])
def test_new_binary_docstrings_are_handbook_entries(name):
    from calc.physics import functions
    doc = functions.lookup(name).documentation()
    for section in ("Formula:", "Arguments:", "Result:", "Validity:", "PPN:", "Source:"):
        assert section in doc, f"{name} lacks {section}"
