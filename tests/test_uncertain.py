"""calc.engine.uncertain: first-order propagation (GUM) and Monte Carlo, against analytic results."""

from __future__ import annotations

import json
import math
import subprocess
import sys

import astropy.units as u
import numpy as np
import pytest

from calc import Sheet
from calc.outputs.format import format_measured
from conftest import evaluate, only_error


def sigma(sheet, name):
    return sheet.sigma(name).value


# GUM (JCGM 100:2008) eq. (10) for uncorrelated inputs, eq. (13) with correlations.
def test_sum_and_difference():
    s = evaluate("x = 3 ± 0.3\ny = 4 ± 0.4\na = x + y\nb = x - y")
    assert sigma(s, "a") == pytest.approx(0.5)
    assert sigma(s, "b") == pytest.approx(0.5)


def test_product_quotient_power():
    s = evaluate("x = 3 ± 0.3\ny = 4 ± 0.4\np = x * y\nq = x / y\nw = x ^ 3")
    rel = math.hypot(0.1, 0.1)
    assert sigma(s, "p") == pytest.approx(12 * rel)
    assert sigma(s, "q") == pytest.approx(0.75 * rel)
    assert sigma(s, "w") == pytest.approx(27 * 3 * 0.1)     # relative: n σx/x


def test_shared_inputs_are_one_input():
    # GUM eq. (13): x − x has σ = 0; y = 2x and x·y are fully correlated with x
    s = evaluate("x = 3 ± 0.3\nd = x - x\ny = 2 * x\nz = y - 2 * x\nw = x * y\nr = y / x")
    assert sigma(s, "d") == 0 and sigma(s, "z") == 0 and sigma(s, "r") == 0
    assert sigma(s, "w") == pytest.approx(4 * 3 * 0.3)      # d(2x²)/dx σ = 4x σ


def test_units_after_the_uncertainty_apply_to_both():
    s = evaluate("a = 1.438 ± 0.001 Msun\nb = (1.438 ± 0.001) Msun\nc = 1.438 Msun +/- 1 Mjup")
    assert s["a"].unit == u.Msun and s.sigma("a").to_value(u.Msun) == pytest.approx(0.001)
    assert s.sigma("b").to_value(u.Msun) == pytest.approx(0.001)
    assert s.sigma("c").to_value(u.Mjup) == pytest.approx(1.0)


@pytest.mark.parametrize("text, message", [
    ("x = 1 ± -0.1", "an uncertainty must not be negative"),
    ("x = 1 km ± 1 s", "the uncertainty is `s` (time), the value `km` (length)"),
    ("y = 2\nx = y ± 0.1", "a value with `±` is a measured input: write it in numbers and units, without cells"),
    ("x = [1, 2] ± [0.1, 0.2, 0.3]", "3 uncertainties for 2 values"),
])
def test_bad_uncertainties(text, message):
    assert only_error(evaluate(text), "x").message == message


def test_arrays_hold_independent_inputs():
    s = evaluate("a = [1 ± 0.1, 2 ± 0.2] km\nb = [1, 2] km ± [0.1, 0.2] km\nt = sum(a)\nu2 = sum(b)")
    assert s.sigma("t").to_value(u.km) == pytest.approx(math.hypot(0.1, 0.2))
    assert s.sigma("u2").to_value(u.km) == pytest.approx(math.hypot(0.1, 0.2))


# Propagation through library functions against hand-derived partial derivatives.
def test_through_deflection():
    # α = 4GM/(c² b): σ_α/α = √((σ_M/M)² + (σ_b/b)²)
    s = evaluate("M = 1 ± 0.01 Msun\nb = 2 ± 0.04 Rsun\na = deflection(M, b)")
    assert s.sigma("a").value / s["a"].value == pytest.approx(math.hypot(0.01, 0.02), rel=1e-6)


def test_through_orbital_period():
    # P = 2π √(a³/GM): ∂lnP/∂ln a = 3/2, ∂lnP/∂ln M = −1/2
    s = evaluate("M = 1 ± 0.002 Msun\na = 1 ± 0.001 AU\nP = orbital_period(M, a)")
    assert s.sigma("P").value / s["P"].value == pytest.approx(math.hypot(1.5e-3, 1e-3), rel=1e-6)


def test_through_periastron_rate():
    # ω̇ ∝ (m1 + m2)^(2/3) (1 − e²)^(−1): ∂lnω̇/∂m1 = 2/(3M), ∂lnω̇/∂e = 2e/(1 − e²)
    s = evaluate("m1 = 1.438 ± 0.01 Msun\nm2 = 1.390 Msun\nPb = 0.322997448918 day\n"
                 "e = 0.617134 ± 0.001\nw = periastron_rate(m1, m2, Pb, e)")
    mtot, e = 2.828, 0.617134
    expected = math.hypot(2 / (3 * mtot) * 0.01, 2 * e / (1 - e**2) * 0.001)
    assert s.sigma("w").value / s["w"].value == pytest.approx(expected, rel=1e-5)


def test_sigma_budget_shares():
    s = evaluate("x = 10 ± 3\ny = 10 ± 4\nz = x + y")
    rows = s.sigma_budget("z")
    assert [r.name for r in rows] == ["y", "x"]
    assert [r.share for r in rows] == pytest.approx([16 / 25, 9 / 25])


def test_constants_uncertainties_only_on_request():
    # CODATA 2022: G = 6.67430(15)e-11; exact by default
    assert evaluate("x = G").sigma("x") is None
    s = evaluate("constants uncertain\nx = G\ny = G * 2 - G")
    assert s.sigma("x").to_value(u.m**3 / u.kg / u.s**2) == pytest.approx(1.5e-15)
    assert s.sigma("y").value == pytest.approx(s.sigma("x").value)   # one input, used twice


# Monte Carlo.
def test_monte_carlo_of_a_nonlinear_function_matches_the_lognormal():
    # y = exp(x), x ~ N(0, 1): lognormal with median 1 and 16/84% points e^∓1 (analytic);
    # the linear method gives σ = 1 instead. 200,000 samples: percentiles to ~0.5%.
    s = Sheet.from_text("x = 0 ± 1\ny = exp(x)\n")
    assert s.sigma("y").value == pytest.approx(1.0)
    y = s.monte_carlo(200_000, seed=11)["y"]
    assert y.percentiles()[1] == pytest.approx(1.0, rel=1e-2)
    assert y.percentiles()[0] == pytest.approx(math.exp(-1), rel=1e-2)
    assert y.percentiles()[2] == pytest.approx(math.exp(1), rel=1e-2)
    assert y.value == pytest.approx(math.exp(0.5), rel=2e-2)   # e^(1/2): the standard error is 0.3%


def test_monte_carlo_agrees_with_linear_when_nearly_linear():
    # small relative uncertainties: the sample std equals σ within sampling error 1/√(2N)
    s = Sheet.from_text("a = 5 ± 0.01 km\nb = 3 ± 0.02 s\nv = a / b\nP = orbital_period(1 ± 0.001 Msun, a)\n")
    mc = s.monte_carlo(100_000, seed=5)
    for name in ("v", "P"):
        assert mc[name].sigma == pytest.approx(s.sigma(name).value, rel=1.5e-2)
        assert mc[name].value == pytest.approx(s[name].value, rel=1e-4)


def test_monte_carlo_is_reproducible_with_a_seed():
    s = Sheet.from_text("x = 1 ± 0.1\ny = x * x\n")
    assert s.monte_carlo(1000, seed=2)["y"].value == s.monte_carlo(1000, seed=2)["y"].value


def test_monte_carlo_through_single_value_functions_and_records():
    s = Sheet.from_text("t = orbit(1 ± 0.01 AU, 0.1)\np = orbit(3 AU, 0.05, m = 1 Mjup)\n"
                        "r = perturbation_rate(1 Msun, t, p, grid = 32)\nm = merger_time(1.4 Msun, 1.3 Msun, 0.3 ± 0.003 d, 0.3)\n")
    mc = s.monte_carlo(40, seed=1)
    assert mc["r"].value == pytest.approx(s["r"].value, rel=2e-2)
    assert mc["m"].value == pytest.approx(s["m"].value, rel=2e-2)
    assert s.sigma("r").value > 0 and s.sigma("m").value > 0


@pytest.mark.parametrize("value, sigma, text", [
    # GUM 7.2.6 (common practice): σ to two significant digits, the value to the same place
    (1.438, 0.001, "1.4380 ± 0.0010"),
    (42.98, 0.123, "42.98 ± 0.12"),
    (12345.0, 234.0, "12340 ± 230"),
    (4.2266, 0.00999, "4.227 ± 0.010"),
    (1.98e30, 2.1e26, "(1.98000 ± 0.00021) × 1e30"),
    (2.5e-5, 1.2e-7, "(2.500 ± 0.012) × 1e-5"),
    (3.0, 0.0, "3"),
])
def test_display_rounding(value, sigma, text):
    assert format_measured(value, sigma) == text


def test_command_line_uncertainties(tmp_path):
    path = tmp_path / "u.sheet"
    path.write_text("x = 2.0 ± 0.1 km\ny = 3 ± 0.4 km\nz = x + y\n")
    base = [sys.executable, "-m", "calc", "eval", str(path)]
    text = subprocess.run(base, capture_output=True, text=True)
    assert text.returncode == 0, text.stderr
    assert "  z  5.00 ± 0.41  km" in text.stdout.splitlines()
    budget = subprocess.run(base + ["--sigma-budget", "z"], capture_output=True, text=True)
    # only the budget: y's share is 0.4² / (0.1² + 0.4²) = 94.12 %
    assert budget.stdout.splitlines()[0] == "uncertainty budget of `z`  (σ = 0.412311 km)"
    assert "94.12 %" in budget.stdout and "  z  " not in budget.stdout
    doc = json.loads(subprocess.run(base + ["--format", "json"], capture_output=True, text=True).stdout)
    z = {c["name"]: c for c in doc["cells"]}["z"]
    assert z["sigma"] == pytest.approx(math.hypot(0.1, 0.4)) and z["unit"] == "km"
    mc = json.loads(subprocess.run(base + ["--format", "json", "--mc", "20000", "--seed", "1"],
                                   capture_output=True, text=True).stdout)
    z = {c["name"]: c for c in mc["cells"]}["z"]
    assert z["sigma"] == pytest.approx(math.hypot(0.1, 0.4), rel=3e-2)
    assert set(z["percentiles"]) == {"16", "50", "84"}
    bad = subprocess.run(base + ["--seed", "3"], capture_output=True, text=True)
    assert bad.returncode == 64 and "--seed goes with --mc" in bad.stderr
    assert np.isfinite(z["value"])


def test_power_at_zero_has_a_finite_sensitivity():
    # d(x²)/dx = 2x = 0 at x = 0 (not 0/0)
    s = evaluate("x = 0 ± 0.1\ny = x ^ 2\nz = [0, 1] * (1 ± 0.1)\nw = z ^ 2")
    assert s.sigma("y").value == 0
    assert list(s.sigma("w").value) == pytest.approx([0, 0.2])


def test_units_after_the_uncertainty_may_be_a_quotient():
    s = evaluate("w = 1.8052 ± 0.0004 deg / yr")
    assert s["w"].to_value("deg / yr") == pytest.approx(1.8052)
    assert s.sigma("w").to_value("deg / yr") == pytest.approx(0.0004)


def test_moved_calls_in_one_call_and_one_by_one_at_a_domain_edge(monkeypatch):
    """The central differences of a function of single numbers are taken in one call on
    arrays of the moved arguments; where a moved argument leaves the domain (e = 0 moved
    below 0) the call fails as a whole and the moves are made one by one, one-sided there.
    Both against hand-derived partials: ω̇ ∝ (m1 + m2)^(2/3) (1 − e²)^(−1)."""
    from calc.engine import values

    outcomes: list[bool] = []
    real = values._at_once

    def watched(call):
        several = real(call)

        def counted(*args):
            result = several(*args)
            outcomes.append(result is not None)
            return result
        return counted

    monkeypatch.setattr(values, "_at_once", watched)
    base = "m1 = 1.438 ± 0.01 Msun\nm2 = 1.390 ± 0.02 Msun\nPb = 0.322997448918 day\n"
    mtot = 2.828
    s = evaluate(base + "e = 0.617134 ± 0.001\nw = periastron_rate(m1, m2, Pb, e)")
    e = 0.617134
    expected = math.sqrt((2 / (3 * mtot) * 0.01) ** 2 + (2 / (3 * mtot) * 0.02) ** 2
                         + (2 * e / (1 - e**2) * 0.001) ** 2)
    assert sigma(s, "w") / s["w"].value == pytest.approx(expected, rel=1e-5)
    assert outcomes == [True]
    outcomes.clear()
    # at e = 0 the derivative in e is 0; the step below 0 is refused
    s = evaluate(base + "e = 0 ± 0.001\nw = periastron_rate(m1, m2, Pb, e)")
    expected = math.hypot(2 / (3 * mtot) * 0.01, 2 / (3 * mtot) * 0.02)
    assert sigma(s, "w") / s["w"].value == pytest.approx(expected, rel=1e-5)
    assert outcomes == [False]


def test_a_records_fields_under_monte_carlo_show_their_samples():
    """Under --mc a record's fields show their sample mean and σ, as cells do: `o.a` is the
    input `a` itself, so its row reads as `a`'s (0.999 ± 0.099 here, not the first-order
    1.00 ± 0.10)."""
    from calc.outputs.report import render_text

    s = Sheet.from_text("a = 1 ± 0.1 AU\no = orbit(a, 0.3 ± 0.05)\n")
    text = render_text(s, 6, s.monte_carlo(20_000, seed=1), 20_000)
    rows = {line.split()[0]: line.split()[1:4] for line in text.splitlines()[1:] if line.strip()}
    assert rows["a"] == rows[".a"]
    assert rows[".a"] != ["1.00", "±", "0.10"]


def test_monte_carlo_of_a_cell_the_inputs_cancel_out_of_is_exact():
    """m / m is 1 in every sample but for rounding: exact, as in first order (a σ of a few
    float roundings of the value is no uncertainty); so is a solve whose inputs are exact."""
    s = Sheet.from_text("m = 1 ± 0.1 kg\nr = m / m\nz = [1, 2] * m / m\na = 2 km\nx = 1 km\n"
                        "solve x^2 == a * 1 km for x in [0.1 km, 10 km]\n")
    mc = s.monte_carlo(1000, seed=2)
    for name in ("r", "z", "x"):
        assert mc[name].sigma is None and mc[name].samples is None, name
    assert mc["r"].value == pytest.approx(1.0, rel=1e-15)
    assert mc["x"].value == pytest.approx(math.sqrt(2), rel=1e-12)   # √2 km
    assert mc["m"].sigma == pytest.approx(0.1, rel=0.1)


def test_monte_carlo_samples_a_solve_whose_chain_reads_an_uncertain_input():
    """`solve y == a for x` with y = x · m: m is read through the chain cell y, not by the
    solve line itself; the solution x = a / m is still sampled (its median is a / median m)."""
    s = Sheet.from_text("m = 2 ± 0.2\nx = 1 km\ny = x * m\na = 4 km\n"
                        "solve y == a for x in [0.1 km, 10 km]\n")
    mc = s.monte_carlo(4000, seed=1)
    assert mc["x"].samples is not None
    np.testing.assert_allclose(mc["x"].samples, 4.0 / mc["m"].samples, rtol=1e-9)


@pytest.mark.parametrize("shape", [(50_000,), (20_000, 3), (5_000, 2, 2), (2,)])
def test_the_sample_spread_is_numpys_standard_deviation(shape):
    """The σ `--mc` shows is np.std(ddof=1) of the samples to the last bit (numpy is the
    reference), though it reuses the mean found for the shown value; with an infinite and a
    nan sample as numpy gives them."""
    from calc.engine.summaries import sample_spread

    rng = np.random.default_rng(5)
    data = np.exp(rng.standard_normal(shape)) * 3.7e11
    assert np.array_equal(sample_spread(data, np.mean(data, axis=0)),
                          np.std(data, axis=0, ddof=1))
    if data.size > 10:
        odd = data.copy()
        odd.flat[3], odd.flat[-2] = np.inf, np.nan
        with np.errstate(all="ignore"):
            assert np.array_equal(sample_spread(odd, np.mean(odd, axis=0)),
                                  np.std(odd, axis=0, ddof=1), equal_nan=True)


@pytest.mark.parametrize("other", [
    lambda rng: u.Quantity(rng.normal(3, 0.1, 4000), u.km),          # samples and samples
    lambda rng: u.Quantity(2.5, u.AU),                               # a number: scaled to km
    lambda rng: u.Quantity(rng.normal(3, 0.1, 4000), u.s),           # another unit
    lambda rng: u.Quantity(rng.normal(3, 0.1, (4000, 3)), u.m),      # samples of an array
])
def test_arithmetic_on_samples_gives_astropys_numbers(other):
    """+ − × ÷ of samples give the values and unit astropy's own Quantity arithmetic gives,
    to the last bit (astropy is the reference); units that do not add are refused as before."""
    from calc.engine.samples import Samples

    rng = np.random.default_rng(9)
    a = u.Quantity(rng.normal(7, 0.3, 4000), u.km)
    b = other(rng)
    wrapped = Samples(b) if b.ndim else b
    a_aligned = a.reshape((-1, 1)) if b.ndim == 2 else a    # a number's samples meet an array's
    for name in ("__mul__", "__truediv__", "__add__", "__sub__", "__rmul__", "__rsub__"):
        try:
            expected = getattr(a_aligned, name)(b)
        except u.UnitConversionError:
            with pytest.raises(u.UnitConversionError):
                getattr(Samples(a), name)(wrapped)
            continue
        got = getattr(Samples(a), name)(wrapped).data
        assert got.unit == expected.unit, name
        assert np.array_equal(got.value, expected.value), name
