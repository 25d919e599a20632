"""calc.physics.functions.strongfield against direct integration of Schwarzschild geodesics."""

from __future__ import annotations

import math

import astropy.units as u
import numpy as np
import pytest
from scipy.integrate import quad, solve_ivp
from scipy.optimize import minimize_scalar
from scipy.special import ellipk

from calc.physics import functions
from calc.physics.functions import orbits, strongfield
from conftest import evaluate, only_error

GM_SUN = 1.3271244e20      # IAU 2015 Resolution B3, nominal (m^3 s^-2); astropy's default
C = 299_792_458.0          # SI definition (exact)
M_SUN = GM_SUN / C**2      # GM/c^2 of the Sun in metres
SUN = GM_SUN * u.m**3 / u.s**2


# ---- ISCO, photon sphere, shadow ---------------------------------------------------------


def test_isco_is_the_minimum_of_circular_orbit_angular_momentum():
    # Circular Schwarzschild orbits (GM/c^2 = 1) need L^2 = r^2/(r - 3), from dV/dr = 0 for
    # V = (1 - 2/r)(1 + L^2/r^2) (Hartle 2003, Gravity, ch. 9; from memory); the innermost stable
    # one sits at the minimum of L^2(r). scipy.optimize.minimize_scalar to xtol 1e-10: 1e-8.
    found = minimize_scalar(lambda r: r**2 / (r - 3), bounds=(3.5, 20), method="bounded",
                            options={"xatol": 1e-10})
    got = strongfield.isco_radius(SUN).to_value(u.m) / M_SUN
    assert got == pytest.approx(found.x, rel=1e-8, abs=0)
    assert evaluate("x = isco_radius(1 Msun)")["x"].to_value(u.km) == pytest.approx(6 * M_SUN / 1e3, rel=1e-6, abs=0)


def test_photon_sphere_and_shadow_from_the_photon_potential():
    # Null geodesics: (dr/dlambda)^2 = 1/b^2 - (1 - 2/r)/r^2; the photon sphere is the maximum of
    # (1 - 2/r)/r^2 and the critical impact parameter b_c = 1/sqrt(max) (Misner, Thorne & Wheeler
    # 1973, section 25.6; from memory). minimize_scalar to xtol 1e-10: 1e-8.
    found = minimize_scalar(lambda r: -(1 - 2 / r) / r**2, bounds=(2.5, 10), method="bounded",
                            options={"xatol": 1e-10})
    b_c = 1 / math.sqrt(-found.fun)
    assert strongfield.photon_sphere_radius(SUN).to_value(u.m) / M_SUN == pytest.approx(found.x, rel=1e-8, abs=0)
    d = 1e20
    shadow = strongfield.shadow_angle(SUN, d * u.m).to_value(u.rad)
    assert shadow == pytest.approx(2 * b_c * M_SUN / d, rel=1e-8, abs=0)


def test_shadow_of_m87():
    # Event Horizon Telescope Collaboration 2019, ApJL 875, L6 (from memory): M = 6.5e9 Msun at
    # 16.8 Mpc gives theta_g = GM/(c^2 d) = 3.8 uas and a shadow diameter 2 sqrt(27) theta_g.
    # theta_g is given to two digits: 1.5%.
    theta = evaluate("x = shadow_angle(6.5e9 Msun, 16.8 Mpc)")["x"]
    assert theta.to_value(u.uas) == pytest.approx(2 * math.sqrt(27) * 3.8, rel=1.5e-2, abs=0)


def test_shadow_errors_and_warning():
    assert only_error(evaluate("x = shadow_angle(1 Msun, 4 km)"), "x").message == (
        "shadow_angle: `d` = 4 km lies inside the photon sphere (4.42988 km): no shadow is seen from there")
    sheet = evaluate("x = shadow_angle(1 Msun, 100 km)")
    assert "distant-observer diameter" in sheet.cell("x").warnings[0]


# ---- periapsis advance of bound geodesics ---------------------------------------------------


def _advance_by_geodesic_equations(p, e):
    """Independent check: integrate the Schwarzschild geodesic equations in the equatorial
    plane (GM/c^2 = 1) with scipy.integrate.solve_ivp, from periapsis r1 = p/(1+e) to the next
    apoapsis, and double the angle swept. Christoffel symbols of the Schwarzschild metric
    (Hartle 2003, Gravity, ch. 9; from memory); E and L from the turning points, where
    E^2 = (1 - 2/r)(1 + L^2/r^2) holds at both."""
    r1, r2 = p / (1 + e), p / (1 - e)

    def f(r):
        return 1 - 2 / r
    ell2 = (f(r2) - f(r1)) / (f(r1) / r1**2 - f(r2) / r2**2)
    energy = math.sqrt(f(r1) * (1 + ell2 / r1**2))

    def rhs(tau, y):
        t, r, phi, tdot, rdot, phidot = y
        return [tdot, rdot, phidot,
                -2 / (r**2 * f(r)) * tdot * rdot,
                -f(r) / r**2 * tdot**2 + rdot**2 / (r**2 * f(r)) + r * f(r) * phidot**2,
                -2 / r * rdot * phidot]

    def apoapsis(tau, y):
        return y[4]
    apoapsis.direction = -1
    apoapsis.terminal = True
    start = [0.0, r1, 0.0, energy / f(r1), 0.0, math.sqrt(ell2) / r1**2]
    solution = solve_ivp(rhs, (0, 1e12), start, events=apoapsis, rtol=1e-12, atol=1e-12,
                         method="DOP853")
    return 2 * solution.y_events[0][0][2] - 2 * math.pi


@pytest.mark.parametrize("p, e", [(1000.0, 0.2), (100.0, 0.6), (20.0, 0.05), (12.0, 0.5),
                                  (7.05, 0.5), (9.0, 0.9)])
def test_periapsis_advance_equals_integrated_geodesic(p, e):
    # solve_ivp at rtol 1e-12 over one half orbit: the swept angle to ~1e-10, and 2e-9 of the
    # advance for p = 1000 (where it is 0.019 rad); near the separatrix p = 6 + 2e the orbit
    # whirls and the advance reaches several radians.
    a = p / (1 - e**2) * M_SUN
    got = strongfield.periapsis_advance_exact(SUN, a * u.m, e * u.one).to_value(u.rad)
    assert got == pytest.approx(_advance_by_geodesic_equations(p, e), rel=2e-8, abs=0)


@pytest.mark.parametrize("p, e", [(1e8, 0.2), (1e4, 0.9), (50.0, 0.3), (6.3, 0.1), (7.95, 0.95)])
def test_periapsis_advance_equals_darwin_elliptic_form(p, e):
    # Darwin's closed form 4 K(k^2)/sqrt(1 - 6mu + 2mu e) - 2 pi with scipy.special.ellipk
    # (reference library). ellipk is accurate to ~1e-16 relative, so the difference carries
    # ~1e-15 absolute: tolerance 1e-15 rad plus 1e-12 relative (the cancellation against 2 pi
    # limits the reference, not the function, in weak fields).
    mu = 1 / p
    reference = 4 * ellipk(4 * mu * e / (1 - 6 * mu + 2 * mu * e)) / math.sqrt(1 - 6 * mu + 2 * mu * e) - 2 * math.pi
    a = p / (1 - e**2) * M_SUN
    got = strongfield.periapsis_advance_exact(SUN, a * u.m, e * u.one).to_value(u.rad)
    assert got == pytest.approx(reference, rel=1e-12, abs=1e-15)


@pytest.mark.parametrize("mu", [1e-2, 1e-3, 1e-4])
@pytest.mark.parametrize("e", [0.0, 0.5, 0.9])
def test_periapsis_advance_approaches_the_first_order_formula_with_the_second_order_gap(mu, e):
    # Far out the exact advance tends to 6 pi GM/(c^2 p) (orbits.periapsis_advance); the gap is
    # the second-order term (3 pi/2)(18 + e^2) mu^2 (the expansion of Darwin's integral in mu;
    # e.g. D'Eliseo 2011, arXiv:1005.5146; from memory). The third order makes the ratio differ
    # from 1 by about 5 mu (exactly 5 mu for e = 0: the (1 - 6 mu)^(-1/2) series,
    # 1 + 3mu + 27/2 mu^2 + 135/2 mu^3); measured below 6 mu up to e = 0.9: tolerance 7 mu.
    a = 1 / mu / (1 - e**2) * M_SUN
    exact = strongfield.periapsis_advance_exact(SUN, a * u.m, e * u.one).to_value(u.rad)
    first = orbits.periapsis_advance(SUN, a * u.m, e * u.one).to_value(u.rad)
    gap = exact - first
    assert gap / (1.5 * math.pi * (18 + e**2) * mu**2) == pytest.approx(1, abs=7 * mu)


@pytest.mark.parametrize("mu", [1e-8, 1e-10])
@pytest.mark.parametrize("e", [0.0, 0.5])
def test_weak_field_advance_keeps_full_precision(mu, e):
    # Far out the advance is a tiny excess over 2 pi: 6 pi mu + (3 pi/2)(18 + e^2) mu^2 with a
    # third-order remainder below 1e-14 relative at these mu (see above). An evaluation that
    # subtracts 2 pi from the full angle would keep only ~1e-9 of it; require 1e-12.
    a = 1 / mu / (1 - e**2) * M_SUN
    got = strongfield.periapsis_advance_exact(SUN, a * u.m, e * u.one).to_value(u.rad)
    series = 6 * math.pi * mu + 1.5 * math.pi * (18 + e**2) * mu**2
    assert got == pytest.approx(series, rel=1e-12, abs=0)


def test_mercury_exact_advance_equals_the_first_order_formula():
    # Mercury (a = 0.38709927 au, e = 0.20563593; Nobili & Will 1986: 0.1035"/orbit): the exact
    # geodesic differs from first order by (9/2 + e^2/4) GM/(c^2 p) ~ 1.2e-7 relative.
    sheet = evaluate("x = periapsis_advance_exact(1 Msun, 0.38709927 AU, 0.20563593)\n"
                     "y = periapsis_advance(1 Msun, 0.38709927 AU, 0.20563593)")
    assert sheet["x"].value == pytest.approx(sheet["y"].value, rel=2e-7, abs=0)
    assert sheet["x"].to_value(u.arcsec) == pytest.approx(0.1035, rel=1e-3, abs=0)


def test_periapsis_advance_inside_the_separatrix_is_an_error():
    err = only_error(evaluate("x = periapsis_advance_exact(1 Msun, 10 km, 0.5)"), "x")
    assert err.message == ("periapsis_advance_exact: no bound orbit has the turning points a(1 ± e) "
                           "here: a(1 − e²) must exceed (6 + 2e) GM/c² = 10.3364 km (inside that the "
                           "body plunges)")


# ---- deflection of light ---------------------------------------------------------------------


def _deflection_by_quadrature(x):
    """Independent check: alpha = 2 int_0^w0 dw / sqrt(1 - w^2 + 2 x w^3) - pi (w = b/r, x = m/b)
    with scipy.integrate.quad's algebraic-weight rule for the (w0 - w)^(-1/2) endpoint; w0 from
    numpy's cubic root finder. Good to ~1e-13 absolute in alpha."""
    roots = np.roots([2 * x, -1, 0, 1])
    w0 = min(r.real for r in roots if abs(r.imag) < 1e-12 and r.real > 0)

    def smooth(w):
        # 1 - w^2 + 2x w^3 = (w0 - w) [(w0 + w) - 2x (w0^2 + w0 w + w^2)]
        return 1 / math.sqrt((w0 + w) - 2 * x * (w0**2 + w0 * w + w**2))
    integral, _ = quad(smooth, 0, w0, weight="alg", wvar=(0, -0.5), epsabs=0, epsrel=1e-13, limit=500)
    return 2 * integral - math.pi


@pytest.mark.parametrize("b_over_m", [1e3, 100.0, 20.0, 10.0, 6.0, 5.66, 5.65, 5.3, 5.2, 5.197])
def test_deflection_equals_quadrature_of_the_null_geodesic(b_over_m):
    # both branches (Gauss-Legendre beyond r0 = 4 GM/c^2, elliptic inside: b = 5.657 m) against
    # scipy quad; 1e-12 absolute (quad), 1e-11 relative.
    got = strongfield.deflection_exact(SUN, b_over_m * M_SUN * u.m).to_value(u.rad)
    assert got == pytest.approx(_deflection_by_quadrature(1 / b_over_m), rel=1e-11, abs=1e-12)


def test_deflection_equals_integrated_binet_equation():
    # Independent of both: the orbit equation of light, u'' + u = 3 u^2 (GM/c^2 = 1; from the
    # null geodesic equations, Hartle 2003 ch. 9; from memory), integrated with solve_ivp from
    # u = 0, u' = 1/b at phi = 0 until u returns to 0: alpha = phi_end - pi. rtol 1e-12.
    for b in (30.0, 8.0):
        def rhs(phi, y):
            return [y[1], 3 * y[0] ** 2 - y[0]]

        def out(phi, y):
            return y[0]
        out.direction = -1
        out.terminal = True
        solution = solve_ivp(rhs, (0, 20), [0.0, 1 / b], events=out, rtol=1e-12, atol=1e-15,
                             method="DOP853", first_step=1e-6)
        alpha = solution.t_events[0][0] - math.pi
        got = strongfield.deflection_exact(SUN, b * M_SUN * u.m).to_value(u.rad)
        assert got == pytest.approx(alpha, rel=1e-9, abs=0)


@pytest.mark.parametrize("x", [1e-3, 1e-4, 2.12e-6])
def test_deflection_weak_field_expansion(x):
    # Second order: 4m/b + 15 pi m^2/(4 b^2) (Epstein & Shapiro 1980; Keeton & Petters 2005; the
    # brief's check, from memory). The remainder is the third-order term 128/3 (m/b)^3 (Keeton &
    # Petters 2005; from memory): require it within 1% + the fourth order (3465 pi/64 x^4, i.e.
    # 4x relative) and float rounding (4e-16 of alpha) at the solar limb (x = 2.12e-6).
    alpha = strongfield.deflection_exact(SUN, M_SUN / x * u.m).to_value(u.rad)
    remainder = alpha - (4 * x + 15 * math.pi / 4 * x**2)
    third = 128 / 3 * x**3
    assert remainder == pytest.approx(third, rel=1e-2 + 4 * x, abs=4e-16 * alpha)


def test_deflection_at_the_solar_limb_matches_first_order():
    # At the solar limb the exact deflection exceeds 4GM/(c^2 b) (deflection with gamma = 1) by
    # 15 pi/16 m/b ~ 6e-6 relative; 1.7512" (Will 2014; the first-order value).
    sheet = evaluate("x = deflection_exact(1 Msun, 1 Rsun)\ny = deflection(1 Msun, 1 Rsun, gamma = 1)")
    assert sheet["x"].value == pytest.approx(sheet["y"].value, rel=1e-5, abs=0)
    assert sheet["x"].value > sheet["y"].value


def test_captured_ray_is_an_error():
    for text in ("x = deflection_exact(1 Msun, 7 km)", "x = deflection_exact(1 Msun, 5.196 * const.GM_sun / c^2)"):
        err = only_error(evaluate(text), "x")
        assert err.message.startswith("deflection_exact: `b` = ")
        assert err.message.endswith("is at or below 3√3 GM/c² (7.67277 km): the ray is captured by "
                                    "the black hole and has no deflection")


def test_deflection_exact_is_listed_with_light():
    assert functions.lookup("deflection_exact").topic == "light"
    for name in ("isco_radius", "photon_sphere_radius", "shadow_angle", "periapsis_advance_exact"):
        assert functions.lookup(name).topic == "strongfield"


# ---- arrays and handbook entries -------------------------------------------------------------


@pytest.mark.parametrize("function, args, index", [
    (strongfield.isco_radius, [1 * u.Msun], 0),
    (strongfield.photon_sphere_radius, [1 * u.Msun], 0),
    (strongfield.shadow_angle, [6.5e9 * u.Msun, 16.8 * u.Mpc], 1),
    (strongfield.periapsis_advance_exact, [1 * u.Msun, 100 * u.km, 0.3 * u.one], 1),
    (strongfield.deflection_exact, [1 * u.Msun, 9 * u.km], 1),        # 8.1 km / 9.9 km: both branches
    (strongfield.deflection_exact, [1 * u.Msun, 1 * u.Rsun], 1),
])
def test_strong_field_functions_take_arrays(function, args, index):
    values = [args[index] * 0.9, args[index] * 1.1]
    array_args = list(args)
    array_args[index] = u.Quantity(values)
    together = function(*array_args)
    assert together.shape == (2,)
    for k, value in enumerate(values):
        single = list(args)
        single[index] = value
        assert together[k].value == pytest.approx(function(*single).value, rel=1e-14, abs=0)


@pytest.mark.parametrize("name", ["isco_radius", "photon_sphere_radius", "shadow_angle",
                                  "periapsis_advance_exact", "deflection_exact"])
def test_strong_field_docstrings_are_handbook_entries(name):
    doc = functions.lookup(name).documentation()
    for section in ("Formula:", "Arguments:", "Result:", "Validity:", "PPN:", "Source:"):
        assert section in doc, f"{name} lacks {section}"
