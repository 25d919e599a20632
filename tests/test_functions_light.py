"""calc.physics.functions.light against published values and ERFA (pyerfa)."""

from __future__ import annotations

import math

import astropy.units as u
import erfa
import numpy as np
import pytest
from independent import (
    impact_parameter_of,
    newtonian_hyperbola_turn,
    ppn_bending,
    ppn_light_time_excess,
    schwarzschild_light_bending,
)

from calc.physics.functions import light
from conftest import evaluate, only_error

GM_SUN = 1.3271244e20
C = 299_792_458.0
AU = 149_597_870_700.0


def test_deflection_at_the_solar_limb():
    # Will 2014, Living Rev. Relativ. 17, 4: 1.7512" for R = 6.957e8 m (IAU 2015 nominal),
    # 1.7505" for R = 6.96e8 m. The 4th digit is from memory, so one unit of it is allowed.
    sheet = evaluate("a = deflection(1 Msun, 1 Rsun)\nb = deflection(1 Msun, 6.96e8 m)")
    assert sheet["a"].to_value(u.arcsec) == pytest.approx(1.7512, abs=1e-4)
    assert sheet["b"].to_value(u.arcsec) == pytest.approx(1.7505, abs=1e-4)


@pytest.mark.parametrize("closest_approach", [6.957e8, 5e9, 1.5e11, 3e13])
def test_deflection_matches_the_integrated_schwarzschild_geodesic(closest_approach):
    # the null geodesic's orbit integral done by scipy quad (tests/independent.py), exact in
    # GM/(c^2 b); the first-order formula differs from it by the second-order term
    # 15 pi/16 GM/(c^2 b) in relative terms (Epstein & Shapiro 1980, PRD 22, 2947, from memory),
    # so the tolerance is twice that plus quadrature rounding
    b = impact_parameter_of(GM_SUN, closest_approach)
    exact = schwarzschild_light_bending(GM_SUN, closest_approach)
    got = light.deflection(GM_SUN * u.m**3 / u.s**2, b * u.m)
    second_order = 15 * math.pi / 16 * GM_SUN / C**2 / b
    assert got.to_value(u.rad) == pytest.approx(exact, rel=2 * second_order + 1e-9, abs=0)


@pytest.mark.parametrize("elongation_deg", [1, 2, 5, 10, 30, 45, 60, 90, 120, 150, 170, 179])
def test_deflection_at_elongation_matches_erfa_ld(elongation_deg):
    # pyerfa erfa.ld (IAU SOFA/ERFA eraLd; reference library), observer at 1 au, star at
    # infinity (q = p), no limiter. 1e-8 relative: ERFA's Schwarzschild radius rests on a GM_sun
    # 3.1e-10 above the IAU 2015 nominal one, and ERFA works with unit vectors whose rounding
    # (1e-16) is 1e-10 of a 1e-6 rad deflection at 179 deg.
    theta = math.radians(elongation_deg)
    p = np.array([-math.cos(theta), math.sin(theta), 0.0])   # observer -> star
    e = np.array([1.0, 0.0, 0.0])                             # Sun -> observer
    p1 = erfa.ld(1.0, p, p, e, 1.0, 0.0)
    # small angles measured with atan2(|a x b|, a . b), not arccos (arccos near 1 keeps only
    # ~1e-8 rad of resolution: common practice)
    expected = math.atan2(np.linalg.norm(np.cross(p, p1)), np.dot(p, p1))
    got = light.deflection_at_elongation(1 * u.Msun, 1 * u.AU, elongation_deg * u.deg)
    assert got.to_value(u.rad) == pytest.approx(expected, rel=1e-8, abs=0)


def test_schwarzschild_radius_of_the_sun_agrees_with_erfa():
    # ERFA_SRS = 1.97412574336e-8 au (pyerfa erfa.SRS, the Sun's Schwarzschild radius) against
    # relsheet's schwarzschild_radius(1 Msun). 5e-10: ERFA's value rests on GM_sun =
    # 1.32712440041e20 m^3/s^2 (the DE405 value, from memory), 3.1e-10 above the IAU 2015
    # nominal 1.3271244e20 m^3/s^2 (IAU 2015 Resolution B3) that relsheet's Msun carries
    got = evaluate("r = schwarzschild_radius(1 Msun)")["r"]
    assert got.to_value(u.AU) == pytest.approx(erfa.SRS, rel=5e-10, abs=0)


def test_deflection_at_elongation_tends_to_the_limb_formula():
    # small elongation: b = r sin(theta) and cot(theta/2) -> 2/theta, so 4GM/(c^2 b) (limit check)
    sheet = evaluate("x = deflection_at_elongation(1 Msun, 1 AU, 0.3 deg)\n"
                     "y = deflection(1 Msun, 1 AU * sin(0.3 deg))")
    assert sheet["x"].value == pytest.approx(sheet["y"].value, rel=1e-4, abs=0)


@pytest.mark.parametrize("gamma", [0.0, 0.5, 1.0, 1.3])
def test_deflection_for_any_gamma_matches_the_ppn_metric(gamma):
    # the transverse gradient of the PPN metric's refractive index integrated along the ray by
    # scipy quad (tests/independent.py; metric from Will 2014, Living Rev. Relativ. 17, 4):
    # first order, so agreement to a few GM/(c^2 b) = 2e-6 at the solar limb
    b = 6.957e8
    got = evaluate(f"a = deflection(1 Msun, 1 Rsun, gamma = {gamma})")["a"]
    expected = ppn_bending(GM_SUN, b, gamma)
    assert got.to_value(u.rad) == pytest.approx(expected, rel=5 * GM_SUN / C**2 / b, abs=0)


def test_gamma_zero_is_the_newtonian_corpuscle():
    # gamma = 0 leaves only g_tt: the deflection of a Newtonian particle at speed c (Soldner
    # 1801, from memory), here the turning angle of the hyperbola integrated by scipy quad
    # (tests/independent.py); they agree to second order, (GM/(c^2 b))^2 ~ 5e-12 relative
    got = evaluate("a = deflection(1 Msun, 1 Rsun, gamma = 0)")["a"]
    expected = newtonian_hyperbola_turn(GM_SUN, 6.957e8, C)
    assert got.to_value(u.rad) == pytest.approx(expected, rel=1e-9, abs=0)


def test_earth_mars_radar_echo_near_superior_conjunction():
    # Reasenberg et al. 1979, ApJ 234, L219 (from memory): about 250 us two-way for a ray
    # grazing the Sun on the way to Mars. The round figure and the idealised geometry here
    # (circular orbits at 1 and 1.52 au; it gives 247 us) leave about 1%: 245-250 us.
    r1, r2, b = 1.0 * AU, 1.52 * AU, 6.957e8
    separation = math.sqrt(r1**2 - b**2) + math.sqrt(r2**2 - b**2)
    exact = 2 * light.shapiro_delay(GM_SUN * u.m**3 / u.s**2, r1 * u.m, r2 * u.m, separation * u.m)
    near = 2 * light.conjunction_delay(1 * u.Msun, 1 * u.AU, 1.52 * u.AU, 1 * u.Rsun)
    assert 245 <= exact.to_value(u.us) <= 250
    # the near-conjunction form is the b << r limit of the exact one: relative error ~ b^2/r^2
    assert near.to_value(u.us) == pytest.approx(exact.to_value(u.us), rel=1e-5, abs=0)


@pytest.mark.parametrize("gamma", [0.0, 0.5, 1.0])
@pytest.mark.parametrize("b_over_rsun, r2_au", [(1.0, 1.52), (3.0, 5.2), (30.0, 1.0)])
def test_shapiro_delay_matches_the_ppn_light_time_integral(gamma, b_over_rsun, r2_au):
    # the light time in excess of the straight line's length, integral of (n - 1) dz / c with
    # the PPN metric's index (Will 2014, Living Rev. Relativ. 17, 4), by scipy quad
    # (tests/independent.py). First order in GM/(c^2 r): 1e-5 relative (the integral's own
    # second-order part is below 1e-6 here)
    r1, r2, b = AU, r2_au * AU, b_over_rsun * 6.957e8
    before, after = math.sqrt(r1**2 - b**2), math.sqrt(r2**2 - b**2)
    expected = ppn_light_time_excess(GM_SUN, b, before, after, gamma)
    got = light.shapiro_delay(GM_SUN * u.m**3 / u.s**2, r1 * u.m, r2 * u.m,
                              (before + after) * u.m, gamma=gamma * u.one)
    assert got.to_value(u.s) == pytest.approx(expected, rel=1e-5, abs=0)
    near = light.conjunction_delay(GM_SUN * u.m**3 / u.s**2, r1 * u.m, r2 * u.m, b * u.m,
                                   gamma=gamma * u.one)
    # the near-conjunction form drops terms of order b^2/r^2 (its documented validity), which
    # add to the log's argument: relative error ~ b^2/(r^2 ln(4 r1 r2/b^2))
    assert near.to_value(u.s) == pytest.approx(expected, rel=1e-5 + (b / r1) ** 2, abs=0)


def test_einstein_radius():
    # about 1 mas for a solar mass halfway to 8 kpc (Paczynski 1986, ApJ 304, 1; from memory)
    got = evaluate("x = einstein_radius(1 Msun, 4 kpc, 8 kpc)")["x"]
    assert got.to_value(u.mas) == pytest.approx(1.0, rel=0.02, abs=0)


def test_einstein_radius_is_the_ring_of_the_integrated_geodesic():
    # the ring: a source straight behind the lens (beta = 0) is seen at theta where the thin-lens
    # equation theta D_s = alpha(D_l theta) (D_s - D_l) holds (Schneider, Ehlers & Falco 1992,
    # ch. 2, from memory), alpha from the Schwarzschild geodesic integrated by scipy quad and
    # the root found by brentq: independent of the closed form. At the ring b = D_l theta_E =
    # 6e11 m, GM/(c^2 b) = 2.5e-9: the geodesic's second-order term moves theta_E by half of
    # 15 pi/16 of that (3.6e-9), and closest approach and impact parameter differ by it: 1e-8
    from scipy.optimize import brentq

    pc = 648000 / math.pi * AU
    dl, ds = 4000 * pc, 8000 * pc

    def mismatch(theta):
        b = dl * theta
        return theta * ds - schwarzschild_light_bending(GM_SUN, b) * (ds - dl)

    ring = brentq(mismatch, 1e-10, 1e-7, xtol=1e-22, rtol=1e-13)
    got = evaluate("x = einstein_radius(1 Msun, 4 kpc, 8 kpc)")["x"]
    assert got.to_value(u.rad) == pytest.approx(ring, rel=1e-8, abs=0)


@pytest.mark.parametrize("text, message", [
    ("x = deflection(1 Msun, 3 s)", "deflection: `b` must be a length, got 3 s"),
    ("x = deflection(1 Msun, 0 km)", "deflection: `b` must be positive, got 0 km"),
    ("x = deflection(1 Msun, -1 km)", "deflection: `b` must be positive, got -1 km"),
    ("x = deflection(-1 Msun, 1 Rsun)", "deflection: `M` must be positive, got -1 solMass"),
    ("x = deflection_at_elongation(1 Msun, 1 AU, 0 deg)",
     "deflection_at_elongation: `elongation` must lie strictly between 0 and 180 deg, got 0 deg"),
    ("x = einstein_radius(1 Msun, 8 kpc, 4 kpc)",
     "einstein_radius: `d_source` must be farther than `d_lens`"),
    ("x = shapiro_delay(1 Msun, 1 AU, 1 AU, 3 AU)",
     "shapiro_delay: `separation` must lie between |r_emit − r_recv| and r_emit + r_recv "
     "(and below the sum, or the ray passes through the mass)"),
])
def test_errors(text, message):
    assert only_error(evaluate(text), "x").message == message


def test_grazing_inside_ten_schwarzschild_radii_warns():
    sheet = evaluate("x = deflection(1 Msun, 20 km)")
    assert sheet.cell("x").warnings and "r_s" in sheet.cell("x").warnings[0]


def test_conjunction_form_far_from_conjunction_warns():
    sheet = evaluate("x = conjunction_delay(1 Msun, 1 AU, 1.52 AU, 0.5 AU)")
    assert "near-conjunction form" in sheet.cell("x").warnings[0]


def test_shapiro_delay_with_both_ends_on_one_side_of_the_mass():
    # inferior-conjunction geometry: the closest point of the path is an end, not the foot of
    # the perpendicular; reference: the PPN light-time integral along the same segment
    # (tests/independent.py, by quadrature), with the path from z = d2 to z = d1 beyond the foot
    from independent import ppn_light_time_excess

    from calc.engine.sheet import Sheet

    au = 1.495978707e11
    gm = 1.3271244e20
    r1, r2, sep = 1.0 * au, 0.5 * au, 0.6 * au
    s = (r1 + r2 + sep) / 2
    b = 2 * math.sqrt(s * (s - r1) * (s - r2) * (s - sep)) / sep
    d1, d2 = math.sqrt(r1**2 - b**2), math.sqrt(r2**2 - b**2)
    expected = ppn_light_time_excess(gm, b, -d2, d1, 1.0)
    sheet = Sheet.from_text("x = shapiro_delay(1.3271244e20 m^3 / s^2, 1 AU, 0.5 AU, 0.6 AU) in s\n"
                            "y = shapiro_delay(1.3271244e20 m^3 / s^2, 1 AU, 0.5 AU, 0.5 AU) in s\n")
    # the integral keeps the (GM/c²r)² terms the first-order formula drops: 1e-8 relative
    assert sheet["x"].value == pytest.approx(expected, rel=1e-6)
    # the collinear case (the path points at the mass) is accepted, not refused
    assert sheet.cell("y").error is None
