"""Solving backwards, functions of the sheet, correlated inputs (DESIGN §11)."""

from __future__ import annotations

import astropy.units as u
import numpy as np
import pytest
import scipy.optimize

from calc.engine.grid import Grid
from calc.engine.sheet import Sheet


def sheet(text: str) -> Sheet:
    return Sheet.from_text(text, "t.sheet")


def error(s: Sheet, name: str) -> str:
    err = s.cell(name).error
    assert err is not None, f"{name} evaluated: {s.cell(name).raw!r}"
    return err.message


# Weisberg & Huang 2016, ApJ 829, 55, Table 3 (PSR B1913+16): Pb, e, ω̇ and γ as published;
# their masses m1 = 1.438(1), m2 = 1.390(1) M☉ come from the same two post-Keplerian parameters
PULSAR = """Pb = 0.322997448918 d
e = 0.6171340
omdot = 4.226598 ± 0.000005 deg / yr
gam = 4.307 ± 0.004 ms
m1 = 1.4 Msun
m2 = 1.4 Msun
solve periastron_rate(m1, m2, Pb, e) == omdot, einstein_delay_amplitude(m1, m2, Pb, e) == gam for m1, m2
"""


def test_the_masses_of_b1913_16_from_omega_dot_and_gamma():
    s = sheet(PULSAR)
    # published to 3 decimals (±0.001): the solve must land within that rounding
    assert s["m1"].to_value(u.Msun) == pytest.approx(1.438, abs=0.001)
    assert s["m2"].to_value(u.Msun) == pytest.approx(1.390, abs=0.001)
    # and their quoted uncertainties, 0.001 M☉, from the same inputs' errors
    assert s.sigma("m1").to_value(u.Msun) == pytest.approx(0.001, abs=0.0002)
    assert s.solved("m1") and s.solved("m2") and not s.solved("Pb")


def test_linear_sigma_of_a_solved_cell_agrees_with_monte_carlo_and_finite_differences():
    s = sheet(PULSAR)
    linear = s.sigma("m2").to_value(u.Msun)
    sampled = s.monte_carlo(20000, seed=11)["m2"]
    # Monte Carlo with 20 000 samples: σ known to ~0.5 %, the problem is nearly linear
    assert float(sampled.sigma) == pytest.approx(linear, rel=0.03)
    # an independent computation: solve again with γ moved by ±σ and difference (central)
    moved = []
    for shift in (+0.004, -0.004):
        other = sheet(PULSAR.replace("gam = 4.307 ± 0.004 ms", f"gam = {4.307 + shift} ms")
                      .replace("omdot = 4.226598 ± 0.000005 deg / yr", "omdot = 4.226598 deg / yr"))
        moved.append(other["m2"].to_value(u.Msun))
    from_gamma = abs(moved[0] - moved[1]) / 2
    budget = {row.name: row for row in s.sigma_budget("m2")}
    gamma_part = next(row for name, row in budget.items() if name.startswith("gam"))
    assert gamma_part.contribution.to_value(u.Msun) == pytest.approx(from_gamma, rel=1e-4)


def test_a_one_dimensional_solve_agrees_with_brentq():
    s = sheet("x = 1 rad\nsolve cos(x) == x * 1 for x in [0 rad, 1.5 rad]\n")
    # reference: scipy's brentq on the same equation
    expected = scipy.optimize.brentq(lambda x: np.cos(x) - x, 0, 1.5, xtol=1e-15)
    assert s["x"].to_value(u.rad) == pytest.approx(expected, rel=1e-13)


def test_a_solve_over_an_axis_solves_each_point():
    # the mass–mass line of ω̇: for each m1, the m2 that gives the measured ω̇
    s = sheet("Pb = 0.322997448918 d\ne = 0.6171340\nm1 = axis(span(1.3 Msun, 1.5 Msun, 5))\n"
              "m2 = 1.4 Msun\nsolve periastron_rate(m1, m2, Pb, e) == 4.226598 deg / yr for m2\n")
    raw = s.raw("m2")
    assert isinstance(raw, Grid) and raw.axes[0].name == "m1"
    total = (np.linspace(1.3, 1.5, 5) + raw.data.to_value(u.Msun))
    # ω̇ at 1PN depends on the total mass only (Damour & Deruelle 1986; Taylor & Weisberg
    # 1982 eq. 4): every point of the line has the same m1 + m2
    assert np.ptp(total) == pytest.approx(0.0, abs=1e-9)
    assert total[0] == pytest.approx(1.438 + 1.390, abs=0.002)


@pytest.mark.parametrize("text, message", [
    ("x = 1\ny = 2\nsolve x == 3 for x, y\n", "1 equation for 2 unknowns"),
    ("x = 1\ny = 2\nsolve x == 3, x == 4 for x\n", "2 equations for 1 unknown"),
    ("x = 1\ny = 2\nsolve y == 3 for x\n", "no equation depends on `x`"),
    ("x = 1\nsolve x^2 == -1 for x\n", "the solve did not converge"),
    ("x = 1\nsolve x^2 == 4 for x in [3, 5]\n", "no root in the bracket [3, 5]"),
    ("x = 1\nsolve x^2 == 4 for x in [-5, 5]\n", "two roots in the bracket [-5, 5]"),
    ("x = 1\ny = 1\nsolve x + y == 2, 2 x + 2 y == 4 for x, y\n",
     "the equations' Jacobian is singular at the solution"),
    ("x = 1 km\nsolve x == 3 s for x\n", "the sides of equation 1 are"),
    ("x = 1\nsolve q == 3 for q\n", "no cell `q` to solve for"),
])
def test_solve_errors(text, message):
    s = sheet(text)
    errors = [e.message for e in s.all_errors()]
    assert any(message in e for e in errors), errors
    solve_line = text.count("\n")
    assert all(e.span.line == solve_line for e in s.all_errors() if message in e.message)


def test_a_what_if_re_solves():
    s = sheet("a = 4\nx = 1\nsolve x^2 == a for x\ny = x + 1\n")
    assert s["x"].value == pytest.approx(2.0)
    changed = {c.name for c in s.set("a", "9")}
    assert s["x"].value == pytest.approx(3.0) and s["y"].value == pytest.approx(4.0)
    assert {"x", "y"} <= changed


def test_monte_carlo_samples_that_do_not_converge_are_an_error():
    s = sheet("a = 1 ± 2\nx = 1\nsolve x^2 == a for x\n")
    outcome = s.monte_carlo(2000, seed=1)["x"]
    assert "Monte Carlo samples did not converge" in getattr(outcome, "message", "")


# ---- functions of the sheet ------------------------------------------------------------------

def test_a_function_of_the_sheet_checks_units_per_call_and_carries_uncertainty():
    s = sheet("ratio(x, y) = x / (x + y)\na = ratio(1 km, 3 km)\nb = ratio(1 km, 3 s)\n"
              "m = 2 ± 0.2 km\nc = ratio(m, 2 km)\n")
    assert s["a"].value == pytest.approx(0.25)
    assert "cannot add" in error(s, "b")
    # d/dm [m / (m + 2)] = 2 / (m + 2)² = 1/8 per km at m = 2 km; σ = 0.2/8 (GUM eq. 10)
    assert s.sigma("c").value == pytest.approx(0.2 / 8, rel=1e-6)


@pytest.mark.parametrize("text, message", [
    ("f(x) = g(x)\ng(x) = f(x)\na = f(1)\n", "`f` calls itself (f → g → f)"),
    ("f(x, y) = x + y\na = f(1)\n", "f(x, y): missing `y`"),
    ("f(x) = x\na = f(1, 2)\n", "f(x) takes 1 argument, got 2"),
    ("f(x) = x\na = f(z = 1)\n", "f(x): no argument is called `z`"),
    # a definition that does not parse still names its function
    ("f(x) = x * * 2\na = f(3)\n", "function `f` failed: its definition on line 1 does not "
                                   "parse"),
    # lines as the lexer counts them: a form feed in a note ends no line
    ("# a note \x0c page\nf(x) = x * * 2\na = f(3)\n",
     "function `f` failed: its definition on line 2 does not parse"),
])
def test_function_errors(text, message):
    s = sheet(text)
    assert message in error(s, "a")


def test_a_parameter_named_like_a_cell_is_an_error():
    s = sheet("x = 3\nf(x) = 2 * x\n")
    assert any("parameter `x` has the name of a cell" in e.message for e in s.all_errors())


def test_functions_work_over_axes_and_with_keywords():
    s = sheet("sq(v) = v^2\nt = axis([1, 2, 3] s)\nr = sq(v = t)\n")
    np.testing.assert_allclose(s.raw("r").data.value, [1, 4, 9])


# ---- correlated inputs -----------------------------------------------------------------------

def test_correlated_propagation_follows_the_gum_formula():
    s = sheet("a = 10 ± 3 km\nb = 5 ± 4 km\ncorrelation a, b = 0.5\nt = a + b\nd = a - b\n")
    # JCGM 100:2008 eq. 13: u²(a ± b) = u²(a) + u²(b) ± 2 r u(a) u(b)
    assert s.sigma("t").value == pytest.approx(np.sqrt(9 + 16 + 2 * 0.5 * 12), rel=1e-12)
    assert s.sigma("d").value == pytest.approx(np.sqrt(9 + 16 - 2 * 0.5 * 12), rel=1e-12)
    sampled = s.monte_carlo(100000, seed=5)
    assert float(sampled["t"].sigma) == pytest.approx(np.sqrt(37), rel=0.02)
    assert float(sampled["d"].sigma) == pytest.approx(np.sqrt(13), rel=0.02)
    rows = s.sigma_budget("t")
    assert any(row.correlation == 0.5 for row in rows)


@pytest.mark.parametrize("text, message", [
    ("a = 1 ± 1\nb = 2 ± 1\nc = 3 ± 1\ncorrelation a, b = 0.9\ncorrelation a, c = 0.9\n"
     "correlation b, c = -0.9\n", "the correlations of `a`, `b`, `c` are impossible together"),
    ("a = 1 ± 1\nb = 2 ± 1\ncorrelation a, b = 1.5\n", "a single number from -1 to 1"),
    ("a = 1 ± 1\nb = 2\ncorrelation a, b = 0.5\n", "`b` is not a measured input"),
    ("a = 1 ± 1\nb = 2 ± 1\ncorrelation a, b = 0.5 km\n", "a correlation coefficient is a plain number"),
])
def test_correlation_errors(text, message):
    s = sheet(text)
    messages = [e.message for e in s.all_errors()]
    assert any(message in m for m in messages), messages


def test_a_correlation_survives_a_what_if_on_one_of_its_inputs():
    s = sheet("a = 10 ± 3 km\nb = 5 ± 4 km\ncorrelation a, b = 0.5\nt = a + b\n")
    s.set("a", "10 ± 3 km")
    assert s.sigma("t").value == pytest.approx(np.sqrt(37), rel=1e-12)
