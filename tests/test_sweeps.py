"""Axes and grids, array operations, records over arrays, tables and plots (DESIGN §9).

Every array operation is checked against numpy or scipy computing the same thing on the same
data (reference libraries), the broadcasting rules table-driven.
"""

from __future__ import annotations

import astropy.units as u
import numpy as np
import pytest
import scipy.integrate
import scipy.interpolate
import scipy.optimize

from calc.engine.grid import Grid
from calc.engine.sheet import Sheet
from calc.engine.uncertain import Uncertain


def sheet(text: str) -> Sheet:
    return Sheet.from_text(text, "t.sheet")


def values(s: Sheet, name: str) -> np.ndarray:
    raw = s.raw(name)
    if isinstance(raw, Grid):
        raw = raw.data
    if isinstance(raw, Uncertain):
        raw = raw.nominal
    return np.asarray(raw.value)


def error(s: Sheet, name: str) -> str:
    err = s.cell(name).error
    assert err is not None, f"{name} evaluated: {s.cell(name).raw!r}"
    return err.message


X = np.array([-3.0, -1.0, 0.5, 2.0, 4.5])
Y = np.array([10.0, 20.0, 30.0])
HEAD = "x = axis([-3, -1, 0.5, 2, 4.5] km)\ny = axis([10, 20, 30] s)\nplain = [1, 2, 3, 4, 5] km\n"


# ---- broadcasting rules: same axis, different axes, axis against a plain array ---------------

@pytest.mark.parametrize("expr, expected, axes", [
    # same axis: element by element (numpy on the same data)
    ("x * x", X * X, ("x",)),
    # different axes: over the grid they span, in the order the axes were defined
    ("x / y", X[:, None] / Y[None, :], ("x", "y")),
    ("y * x", X[:, None] * Y[None, :], ("x", "y")),
    # an axis meets a plain array of its length element by element
    ("x + plain", X + np.arange(1, 6), ("x",)),
    # a single value broadcasts everywhere
    ("x * 2", X * 2, ("x",)),
])
def test_broadcasting_rules(expr, expected, axes):
    s = sheet(HEAD + f"r = {expr}\n")
    raw = s.raw("r")
    assert isinstance(raw, Grid)
    assert tuple(a.name for a in raw.axes) == axes
    np.testing.assert_allclose(np.asarray(raw.data.value), expected, rtol=1e-15)


@pytest.mark.parametrize("expr, message", [
    ("[1, 2] km + x", "an array of 2 values meets values on `x` (5): no axis has that length"),
    ("axis(y)", "the values are on an axis already"),
])
def test_broadcasting_errors(expr, message):
    s = sheet(HEAD + f"r = {expr}\n")
    assert message in error(s, "r")


def test_mismatched_lengths_of_one_axis_name_are_an_error():
    # a slice of an axis is a plain array of its own length: it cannot meet the whole axis
    s = sheet("x = axis([1, 2, 3] km)\nz = x[0:2] + x\nw = x[1:] - x[:-1]\n")
    assert error(s, "z").startswith("an array of 2 values meets values on `x` (3)")
    np.testing.assert_allclose(values(s, "w"), [1, 1])   # neighbours' differences, as diff


# ---- array operations against numpy and scipy ----------------------------------------------

DATA = np.array([3.0, -1.0, 4.0, 1.5, -5.0, 9.0, 2.0, 6.0])
DATA_TEXT = "[" + ", ".join(str(v) for v in DATA) + "] m"


@pytest.mark.parametrize("expr, reference", [
    ("sum(d)", np.sum(DATA)),
    ("mean(d)", np.mean(DATA)),
    ("max(d)", np.max(DATA)),
    ("min(d)", np.min(DATA)),
    ("argmin(d)", float(np.argmin(DATA))),
    ("argmax(d)", float(np.argmax(DATA))),
    ("count(d > 2 m)", float(np.count_nonzero(DATA > 2))),
    ("any(d > 8 m)", 1.0),
    ("all(d > -6 m)", 1.0),
    ("all(d > 0 m)", 0.0),
    ("len(d)", float(DATA.size)),
    ("cumsum(d)", np.cumsum(DATA)),
    ("diff(d)", np.diff(DATA)),
    ("sort(d)", np.sort(DATA)),
    ("where(d > 2 m, d, 0 m)", np.where(DATA > 2, DATA, 0.0)),
    ("d[3]", DATA[3]),
    ("d[-1]", DATA[-1]),
    ("d[2:5]", DATA[2:5]),
    ("d[:3]", DATA[:3]),
    ("d[5:]", DATA[5:]),
    ("d[d > 2 m]", DATA[DATA > 2]),
    ("d[argmax(d)]", DATA[np.argmax(DATA)]),
])
def test_array_operations_match_numpy(expr, reference):
    # reference: numpy on the same data
    s = sheet(f"d = {DATA_TEXT}\nr = {expr}\n")
    np.testing.assert_allclose(values(s, "r"), reference, rtol=1e-15)


def test_integral_and_gradient_match_scipy_and_numpy():
    x = np.array([0.0, 0.3, 0.7, 1.6, 2.0, 3.1])
    y = np.sin(x) * 3
    text = (f"x = axis([{', '.join(map(str, x))}] s)\n"
            f"y = [{', '.join(repr(float(v)) for v in y)}] m\n"
            "i = integral(y, x)\ng = gradient(y, x)\n")
    s = sheet(text)
    # reference: scipy's trapezoid rule; numpy's second-order gradient on uneven spacing
    assert values(s, "i") == pytest.approx(scipy.integrate.trapezoid(y, x), rel=1e-14)
    np.testing.assert_allclose(values(s, "g"), np.gradient(y, x), rtol=1e-13)
    assert s.raw("i").unit == u.m * u.s


def test_interp_matches_scipy():
    x = np.array([1.0, 2.0, 4.0, 7.0])
    y = np.array([2.0, -1.0, 5.0, 3.0])
    new = np.array([1.0, 1.5, 3.3, 6.99, 7.0])
    s = sheet(f"x = [{', '.join(map(str, x))}] d\ny = [{', '.join(map(str, y))}] km\n"
              f"n = [{', '.join(map(str, new))}] d\nr = interp(n, x, y)\n")
    # reference: scipy's linear interpolator
    np.testing.assert_allclose(values(s, "r"), scipy.interpolate.interp1d(x, y)(new), rtol=1e-14)


def test_interp_refuses_extrapolation_and_wrong_dimension():
    s = sheet("x = [1, 2, 3] d\ny = [1, 2, 3] km\nr = interp(5 d, x, y)\nq = interp(2 km, x, y)\n")
    assert "goes outside the points' range" in error(s, "r")
    assert "`x_new` must have the dimension of `x`" in error(s, "q")


def test_crossing_matches_a_root_finder_on_the_interpolant():
    t = np.linspace(0, 10, 41)
    y = np.sin(t)
    s = sheet(f"t = axis([{', '.join(repr(float(v)) for v in t)}] d)\n"
              f"y = [{', '.join(repr(float(v)) for v in y)}] us\nc = crossing(y, t, 0.5 us)\n")
    found = values(s, "c")
    # reference: scipy's brentq on scipy's linear interpolant of the same samples
    line = scipy.interpolate.interp1d(t, y - 0.5)
    expected = [scipy.optimize.brentq(line, t[i], t[i + 1])
                for i in range(len(t) - 1) if (y[i] - 0.5) * (y[i + 1] - 0.5) < 0]
    np.testing.assert_allclose(found, expected, rtol=1e-12)


def test_crossing_errors():
    s = sheet("t = [0, 1, 2] d\ny = [1, 2, 3] us\nc = crossing(y, t, 9 us)\n"
              "k = crossing(y, t, 2 km)\n")
    assert error(s, "c") == "crossing: the curve never reaches 9 us (it runs from 1 to 3)"
    assert "`level` must have the dimension of `y`" in error(s, "k")


@pytest.mark.parametrize("expr, message", [
    ("d[8]", "index 8 is out of range for 8 values"),
    ("d[-9]", "index -9 is out of range for 8 values"),
    ("d[1.5]", "an index must be a whole number, got 1.5"),
    ("d[2 m]", "an index is a plain number, got `m` (length)"),
    ("d[d > 100 m]", "the mask selects no element"),
    ("d[[1, 2] m > 0 m]", "a mask of 2 truths for a dimension of 8 values"),
    ("d[5:2]", "the slice picks no element of 8"),
    ("(d > 1 m) + 1", "a comparison gives truths, not numbers"),
    ("d > 1 s", "cannot compare"),
])
def test_index_and_comparison_errors(expr, message):
    s = sheet(f"d = {DATA_TEXT}\nr = {expr}\n")
    assert message in error(s, "r")


def test_errors_point_at_the_index():
    s = sheet(f"d = {DATA_TEXT}\nr = d[12]\n")
    err = s.cell("r").error
    assert err is not None and err.span is not None
    assert (err.span.line, err.span.column) == (2, 7)


def test_reductions_along_a_named_axis_match_numpy():
    s = sheet(HEAD + "g = x * y\nm = max(g, along = x)\nn = sum(g)\nk = argmax(g, along = x)\n")
    grid = X[:, None] * Y[None, :]
    np.testing.assert_allclose(values(s, "m"), grid.max(axis=0), rtol=1e-15)
    np.testing.assert_allclose(values(s, "n"), grid.sum(axis=1), rtol=1e-15)  # the last axis
    np.testing.assert_allclose(values(s, "k"), grid.argmax(axis=0))
    assert tuple(a.name for a in s.raw("m").axes) == ("y",)


def test_along_names_an_axis():
    s = sheet(HEAD + "g = x * y\nm = max(g, along = q)\nw = sqrt(g, along = x)\n")
    assert error(s, "m").startswith("no axis `q`")
    assert "`along` goes with functions that run along an axis" in error(s, "w")


def test_uncertain_values_on_a_grid_have_the_sigma_of_each_point():
    s = sheet("x = axis([1, 2, 3] km)\nk = 2 ± 0.1\nr = k * x^2\n")
    raw = s.raw("r")
    # reference: first-order propagation by hand, σ(k x²) = x² σk (GUM eq. 10)
    np.testing.assert_allclose(np.asarray(raw.data.sigma_value()), np.array([1, 4, 9]) * 0.1,
                               rtol=1e-12)


def test_monte_carlo_over_an_axis_keeps_the_axis():
    s = sheet("x = axis([1, 2, 3] km)\nk = 2 ± 0.1\nr = k * x\n")
    shown = s.monte_carlo(4000, seed=3)["r"]
    assert shown.axes == ("x",)
    np.testing.assert_allclose(shown.sigma, [0.1, 0.2, 0.3], rtol=0.06)  # 4000 samples: ~2%


# ---- records over arrays -------------------------------------------------------------------

def test_a_budget_over_an_array_of_orbits_equals_one_budget_per_orbit():
    body = ("M = 1 Msun\nhome = orbit(a = 5.2 AU, e = 0.05, m = 1 Mjup)\n")
    swept = sheet(body + "o = orbit(a = [0.4, 0.7, 1.5] AU, e = 0.2)\n"
                  "b = periapsis_budget(M, o, [home])\n")
    for k, a in enumerate((0.4, 0.7, 1.5)):
        single = sheet(body + f"o = orbit(a = {a} AU, e = 0.2)\nb = periapsis_budget(M, o, [home])\n")
        for name in ("gr", "home", "total"):
            got = np.asarray(swept.raw("b").fields[name].value)[k]
            assert got == pytest.approx(float(single.raw("b").fields[name].value), rel=1e-12)


# ---- tables and plots ------------------------------------------------------------------------

def test_a_table_lists_every_row_with_units_and_sigma():
    s = sheet("## Pass\nt = axis([0, 1, 2] d)\nk = 3 ± 0.5 km / d\ndist = k * t\n"
              "table pass: t, dist\n")
    (spec,) = s.tables()
    assert spec.name == "pass" and spec.heading == "Pass" and spec.rows == 3
    assert [c.label for c in spec.columns] == ["t [d]", "dist [km]"]
    np.testing.assert_allclose(spec.columns[1].sigma, [0.0, 0.5, 1.0])


def test_table_and_plot_errors_are_at_their_lines():
    s = sheet("a = [1, 2, 3] s\nb = [1, 2] km\ntable t: a, b\nplot b vs a\nplot q vs a\n")
    errors = {e.span.line: e.message for e in s.all_errors()}
    assert errors[3].startswith("table `t`: its columns have different lengths")
    assert errors[4] == "`b` has 2 values and `a` 3"
    assert errors[5].startswith("no cell `q`")


def test_a_map_needs_a_value_on_both_axes():
    s = sheet(HEAD + "g = x * y\nplot g vs y, x\nplot x vs x, y\n")
    plots = s.plots()
    assert len(plots) == 1 and plots[0].is_map
    # drawn with the first named axis first: the data transposed to (y, x)
    np.testing.assert_allclose(plots[0].y[0].values, (X[:, None] * Y[None, :]).T)
    assert any("is not on two axes" in e.message for e in s.all_errors())
