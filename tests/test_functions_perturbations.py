"""calc.physics.functions.perturbations: Gauss's secular rates against Clemence and Laplace–Lagrange."""

from __future__ import annotations

import math

import astropy.units as u
import pytest
from scipy.integrate import quad

from calc import Sheet
from calc.physics.functions import perturbations
from conftest import evaluate, only_error

# J2000 mean elements (Standish, "Keplerian elements for approximate positions of the major
# planets", JPL, table 1; from memory) and IAU 2009 mass ratios Sun/planet (from memory).
SOLAR_SYSTEM = """\
mercury = orbit(a = 0.38709927 AU, e = 0.20563593, i = 7.00497902 deg, node = 48.33076593 deg, long_peri = 77.45779628 deg)
venus = orbit(0.72333566 AU, 0.00677672, 3.39467605 deg, 76.67984255 deg, long_peri = 131.60246718 deg, m = 1 Msun / 408523.71)
earth = orbit(1.00000261 AU, 0.01671123, -0.00001531 deg, 0 deg, long_peri = 102.93768193 deg, m = 1 Msun / 328900.56)
mars = orbit(1.52371034 AU, 0.09339410, 1.84969142 deg, 49.55953891 deg, long_peri = -23.94362959 deg, m = 1 Msun / 3098708)
jupiter = orbit(5.20288700 AU, 0.04838624, 1.30439695 deg, 100.47390909 deg, long_peri = 14.72847983 deg, m = 1 Msun / 1047.3486)
saturn = orbit(9.53667594 AU, 0.05386179, 2.48599187 deg, 113.66242448 deg, long_peri = 92.59887831 deg, m = 1 Msun / 3497.898)
uranus = orbit(19.18916464 AU, 0.04725744, 0.77263783 deg, 74.01692503 deg, long_peri = 170.95427630 deg, m = 1 Msun / 22902.98)
neptune = orbit(30.06992276 AU, 0.00859048, 1.77004347 deg, 131.78422574 deg, long_peri = 44.96476227 deg, m = 1 Msun / 19412.24)
planets = [venus, earth, mars, jupiter, saturn, uranus, neptune]
"""


def test_mercury_precession_from_the_planets():
    # Clemence 1947, Rev. Mod. Phys. 19, 361: 531.5"/century in total (from memory).
    # First order in the masses by Gauss averaging: within ~1%, as the terms left out are of
    # second order in the planetary masses (Clemence's theory carries them) and the elements
    # here are of epoch J2000, not Clemence's.
    sheet = evaluate(SOLAR_SYSTEM + "budget = periapsis_budget(1 Msun, mercury, planets)\n"
                     "planetary = budget.total - budget.gr")
    assert sheet["planetary"].to_value(u.arcsec / u.yr) * 100 == pytest.approx(531.5, rel=1e-2, abs=0)
    budget = sheet["budget"]
    # Clemence's shares (from memory): Venus 277.9, Earth 90.0, Jupiter 153.6; 1.5% each
    for name, share in (("venus", 277.9), ("earth", 90.0), ("jupiter", 153.6)):
        assert budget.field(name).to_value(u.arcsec / u.yr) * 100 == pytest.approx(share, rel=1.5e-2, abs=0)
    assert budget.field("gr").to_value(u.arcsec / u.yr) * 100 == pytest.approx(42.98, rel=2e-4, abs=0)


def test_the_grid_has_converged():
    # the rectangle rule on a smooth periodic integrand converges geometrically: doubling the
    # default grid changes Venus's share on Mercury by less than 1e-9 relative
    sheet = evaluate(SOLAR_SYSTEM + "a = perturbation_rate(1 Msun, mercury, venus)\n"
                     "b = perturbation_rate(1 Msun, mercury, venus, grid = 512)\n"
                     "c = perturbation_rate(1 Msun, mercury, venus, grid = [128, 64])")
    assert sheet["a"].value == pytest.approx(sheet["b"].value, rel=1e-9, abs=0)
    assert sheet["c"].value == pytest.approx(sheet["b"].value, rel=1e-5, abs=0)


def laplace_coefficient(s: float, j: int, alpha: float) -> float:
    """b_s^(j)(alpha) by scipy quad (Murray & Dermott 1999, eq. 6.67)."""
    value, _ = quad(lambda psi: math.cos(j * psi) / (1 - 2 * alpha * math.cos(psi) + alpha**2) ** s,
                    0, 2 * math.pi, epsabs=0, epsrel=1e-13)
    return value / math.pi


@pytest.mark.parametrize("a_target, a_perturber, e_target, e_perturber, dw", [
    (1.0, 1.6, 0.001, 0.0, 0.0),      # external perturber
    (1.6, 1.0, 0.001, 0.0, 0.0),      # internal perturber
    (1.0, 1.6, 0.02, 0.01, 40.0),     # both eccentric: the A_jk term enters
])
def test_small_e_and_i_agree_with_laplace_lagrange(a_target, a_perturber, e_target, e_perturber, dw):
    # Murray & Dermott 1999, ch. 7 (eqs. 7.9-7.10): first-order secular theory for small e, i:
    # dϖ/dt = A_jj + A_jk (e_k/e_j) cos(ϖ_j − ϖ_k), A_jj = n/4 (m/M) α ᾱ b_3/2^(1)(α),
    # A_jk = −n/4 (m/M) α ᾱ b_3/2^(2)(α); ᾱ = α for an outer perturber, 1 for an inner one.
    # Gauss's method is exact in e: the two differ at O(e²), C e² with C up to about 7 (the
    # inner perturber at α = 0.625: 6.5e-6 at e = 0.001, falling fourfold per halving of e,
    # the mark of the neglected order), so 1e-5 at e = 0.001 and 3e-4 at 0.02.
    mass = 1e-3
    sheet = evaluate(f"t = orbit({a_target} AU, {e_target}, long_peri = 0 deg)\n"
                     f"p = orbit({a_perturber} AU, {e_perturber}, long_peri = {dw} deg, m = {mass} Msun)\n"
                     "r = perturbation_rate(1 Msun, t, p) in rad / s")
    n = math.sqrt(1.3271244e20 / (a_target * 149_597_870_700) ** 3)
    alpha = min(a_target, a_perturber) / max(a_target, a_perturber)
    alpha_bar = alpha if a_perturber > a_target else 1.0
    a_jj = n / 4 * mass * alpha * alpha_bar * laplace_coefficient(1.5, 1, alpha)
    a_jk = -n / 4 * mass * alpha * alpha_bar * laplace_coefficient(1.5, 2, alpha)
    expected = a_jj + a_jk * (e_perturber / e_target) * math.cos(math.radians(-dw))
    tolerance = 1e-5 if e_target < 0.01 else 3e-4
    assert sheet["r"].value == pytest.approx(expected, rel=tolerance, abs=0)


def test_budget_terms_and_names():
    sheet = evaluate(SOLAR_SYSTEM + "b = periapsis_budget(1 Msun, mercury, [venus, earth], J2 = 2.2e-7, "
                     "R = 1 Rsun, J = 1.9e41 kg m^2 / s)")
    budget = sheet["b"]
    assert list(budget.fields) == ["venus", "earth", "oblateness", "gr", "lense_thirring", "total"]
    parts = sum(q.to_value(u.arcsec / u.yr) for name, q in budget.fields.items() if name != "total")
    assert budget.field("total").to_value(u.arcsec / u.yr) == pytest.approx(parts, rel=1e-12, abs=0)
    # Lense-Thirring on Mercury's perihelion: about -0.002"/century (Iorio 2005, from memory)
    assert budget.field("lense_thirring").to_value(u.arcsec / u.yr) * 100 == pytest.approx(-0.002, rel=0.1, abs=0)
    without = evaluate(SOLAR_SYSTEM + "b = periapsis_budget(1 Msun, mercury, [venus])")["b"]
    assert list(without.fields) == ["venus", "gr", "total"]   # optional terms absent


def test_budget_uses_the_sheets_ppn():
    sheet = evaluate("ppn gamma = 0\nt = orbit(1 AU, 0.1)\np = orbit(3 AU, 0.0, m = 1e-6 Msun)\n"
                     "b = periapsis_budget(1 Msun, t, [p])\ng = periapsis_rate(1 Msun, 1 AU, 0.1, gamma = 1)")
    # the sheet's `ppn gamma` reaches the budget's GR term: (2 + 2 gamma - beta)/3 with
    # gamma = 0 is a third of GR (that factor itself is checked against a Gauss average of the
    # IERS PPN acceleration in test_functions_orbits.py)
    assert sheet["b"].field("gr").value == pytest.approx(sheet["g"].value / 3, rel=1e-12, abs=0)


@pytest.mark.parametrize("text, message", [
    ("x = perturbation_rate(1 Msun, orbit(1 AU, 0.1), orbit(2 AU, 0.1))",
     "perturbation_rate: `perturber` needs the body's mass: orbit(…, m = …)"),
    ("x = perturbation_rate(1 Msun, orbit(1 AU, 0), orbit(2 AU, 0.1, m = 1 Mjup))",
     "perturbation_rate: the target's orbit is circular (e < 1e-6): its periapsis is not defined"),
    ("x = perturbation_rate(1 Msun, 1 AU, orbit(2 AU, 0.1, m = 1 Mjup))",
     "perturbation_rate: `target` must be an orbit record, made with orbit(…)"),
    ("x = periapsis_budget(1 Msun, orbit(1 AU, 0.1), [orbit(2 AU, 0.1, m = 1 Mjup)], J2 = 1e-6)",
     "periapsis_budget: give both `J2` and `R` for the oblateness term"),
    ("x = perturbation_rate(1 Msun, orbit(1 AU, 0.1), orbit(2 AU, 0.1, m = 1 Mjup), grid = 8)",
     "perturbation_rate: `grid` must be a whole number of points (at least 16), or two: [target, perturber]"),
])
def test_errors(text, message):
    assert only_error(evaluate(text), "x").message == message


def test_nearly_touching_orbits_warn():
    sheet = evaluate("x = perturbation_rate(1 Msun, orbit(1 AU, 0.3), orbit(1.2 AU, 0.0, m = 1 Mjup))")
    assert any("come within" in w for w in sheet.cell("x").warnings)


def test_kepler_solver():
    # E - e sin E = M to machine precision, up to e = 0.99 (definition)
    import numpy as np
    mean = np.linspace(0, 2 * np.pi, 1001)
    for e in (0.0, 0.3, 0.9, 0.99):
        E = perturbations.eccentric_anomaly(mean, e)
        assert np.max(np.abs(E - e * np.sin(E) - mean)) < 1e-12


def test_an_eight_body_budget_is_quick():
    # "well under a second" is measured in bench/ (P6); here only that it evaluates
    sheet = Sheet.from_text(SOLAR_SYSTEM + "b = periapsis_budget(1 Msun, mercury, planets)\n")
    assert len(sheet["b"].fields) == 9


# ---- second edition: tides, rotation, Lense–Thirring with gamma, the equator warning --------

HOT = """\
star = 1.35 Msun
hot = orbit(0.0229 AU, 0.05, 3 deg, m = 1.41 Mjup)
far = orbit(1 AU, 0.1, 2 deg, m = 1 Mjup)
"""


def test_budget_gains_tides_and_rotation():
    # the fields are the standalone functions' values (rates of omega, which is the rate of
    # the longitude of periapsis for a planet spinning about its orbit normal), and add up
    sheet = evaluate(HOT + "b = periapsis_budget(star, hot, [far], k2 = 0.44, R_planet = 1.79 Rjup, "
                     "P_rot = 1.09 d)\n"
                     "t = tidal_apsidal_rate(star, 1.41 Mjup, 1.79 Rjup, 0.44, 0.0229 AU, 0.05)\n"
                     "r = rotational_apsidal_rate(star, 1.41 Mjup, 1.79 Rjup, 0.44, 1.09 d, 0.0229 AU, 0.05)")
    budget = sheet["b"]
    assert list(budget.fields) == ["far", "gr", "tides", "rotation", "total"]
    assert budget.field("tides").to_value(u.deg / u.yr) == pytest.approx(sheet["t"].to_value(u.deg / u.yr), rel=1e-12, abs=0)
    assert budget.field("rotation").to_value(u.deg / u.yr) == pytest.approx(sheet["r"].to_value(u.deg / u.yr), rel=1e-12, abs=0)
    parts = sum(q.to_value(u.arcsec / u.yr) for name, q in budget.fields.items() if name != "total")
    assert budget.field("total").to_value(u.arcsec / u.yr) == pytest.approx(parts, rel=1e-12, abs=0)
    tides_only = evaluate(HOT + "b = periapsis_budget(star, hot, [far], k2 = 0.44, R_planet = 1.79 Rjup)")["b"]
    assert list(tides_only.fields) == ["far", "gr", "tides", "total"]


@pytest.mark.parametrize("call, message", [
    ("periapsis_budget(star, hot, [far], k2 = 0.44)",
     "periapsis_budget: give both `k2` and `R_planet` for the tidal term"),
    ("periapsis_budget(star, hot, [far], P_rot = 1 d)",
     "periapsis_budget: `P_rot` needs `k2` and `R_planet` too: the rotational bulge's size depends on them"),
    ("periapsis_budget(star, orbit(0.0229 AU, 0.05), [far], k2 = 0.44, R_planet = 1.79 Rjup)",
     "periapsis_budget: `target` needs the body's mass: orbit(…, m = …)"),
    ("periapsis_budget(star, hot, [far], k2 = 0.44, R_planet = 0.03 AU)",
     "periapsis_budget: the target's periapsis lies inside `R_planet`"),
])
def test_budget_tide_errors(call, message):
    assert only_error(evaluate(HOT + "x = " + call), "x").message == message


def test_budget_lense_thirring_follows_ppn_gamma():
    # the gravitomagnetic term carries (1 + gamma)/2 (IERS Conventions 2010 ch. 10), the GR term
    # (2 + 2 gamma - beta)/3 (Will 2006, LRR 9, 3, eq. 51): with gamma = 0, a half and a third
    text = ("t = orbit(0.4 AU, 0.2, 3 deg)\np = orbit(3 AU, 0.0, 1 deg, m = 1e-6 Msun)\n"
            "b = periapsis_budget(1 Msun, t, [p], J = 1.9e41 kg m^2 / s)\n")
    gr_world = evaluate(text)["b"]
    scalar = evaluate("ppn gamma = 0\n" + text)["b"]
    assert (scalar.field("lense_thirring") / gr_world.field("lense_thirring")).value == pytest.approx(0.5, rel=1e-12, abs=0)
    assert (scalar.field("gr") / gr_world.field("gr")).value == pytest.approx(1 / 3, rel=1e-12, abs=0)


def test_budget_lense_thirring_is_node_plus_periapsis():
    # the budget's Lense–Thirring field is the longitude rate: node + argument of periapsis
    sheet = evaluate("t = orbit(0.4 AU, 0.2, 30 deg)\np = orbit(3 AU, 0.0, 1 deg, m = 1e-6 Msun)\n"
                     "b = periapsis_budget(1 Msun, t, [p], J = 1.9e41 kg m^2 / s)\n"
                     "n = lense_thirring_node_rate(1.9e41 kg m^2 / s, 0.4 AU, 0.2)\n"
                     "w = lense_thirring_periapsis_rate(1.9e41 kg m^2 / s, 0.4 AU, 0.2, 30 deg)")
    expected = (sheet["n"] + sheet["w"]).to_value(u.rad / u.s)
    assert sheet["b"].field("lense_thirring").to_value(u.rad / u.s) == pytest.approx(expected, rel=1e-12, abs=0)


def test_budget_warns_when_the_inclination_looks_ecliptic():
    # Mercury's tabulated elements are ecliptic (the Earth's orbit has i ~ 0): J2 and
    # Lense–Thirring need the inclination to the Sun's equator
    sheet = evaluate(SOLAR_SYSTEM + "b = periapsis_budget(1 Msun, mercury, [venus, earth], J2 = 2.2e-7, R = 1 Rsun)\n"
                     "c = periapsis_budget(1 Msun, mercury, [venus, earth])\n"
                     "d = periapsis_budget(1 Msun, orbit(0.4 AU, 0.2), [venus], J = 1.9e41 kg m^2 / s)\n"
                     "f = periapsis_budget(1 Msun, mercury, [venus], J = 1.9e41 kg m^2 / s)")
    assert any("equator" in w and "reference plane" in w for w in sheet.cell("b").warnings)
    assert not sheet.cell("c").warnings          # no J2, no J: the inclination does not enter
    assert any("inclination is 0" in w for w in sheet.cell("d").warnings)
    assert not sheet.cell("f").warnings          # nothing suggests an ecliptic frame


def test_budget_with_tides_takes_uncertain_inputs():
    # an uncertain k2 gives an uncertain tides field with k2's relative spread (the term is
    # linear in k2); 1e-6: linear propagation of a linear term is exact up to rounding
    sheet = evaluate(HOT + "b = periapsis_budget(star, hot, [far], k2 = 0.44 ± 0.11, R_planet = 1.79 Rjup)\n"
                     "t = b.tides")
    assert (sheet.sigma("t") / sheet["t"]).to_value(u.one) == pytest.approx(0.25, rel=1e-6, abs=0)
