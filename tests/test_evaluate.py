"""calc.engine.compile and calc.language.scope: values, the chain rule, and the errors of evaluation."""

from __future__ import annotations

import math

import astropy.units as u
import numpy as np
import pytest

from calc.errors import DomainError, NameResolutionError, UnitError
from conftest import evaluate, only_error


@pytest.mark.parametrize("text, unit, expected", [
    ("x = 1 + 2 * 3", u.dimensionless_unscaled, 7),
    ("x = (1 + 2) * 3", u.dimensionless_unscaled, 9),
    ("x = 2 ^ 3 ^ 2", u.dimensionless_unscaled, 512),     # right associative
    ("x = -2 ^ 2", u.dimensionless_unscaled, -4),          # unary minus below ^
    ("x = 2 ** -1", u.dimensionless_unscaled, 0.5),
    ("x = 10 / 4 / 5", u.dimensionless_unscaled, 0.5),     # left associative
    ("x = 5% * 200", u.dimensionless_unscaled, 10),
    ("x = 3 km / 2 s", u.km / u.s, 1.5),                   # the implicit product binds tighter
    ("x = 9.81 m/s^2", u.m / u.s**2, 9.81),
    ("x = 1.3e20 m^3 s^-2", u.m**3 / u.s**2, 1.3e20),
    ("x = 6.674e-11 m^3 / kg / s^2", u.m**3 / u.kg / u.s**2, 6.674e-11),
    ("x = 1 / s", 1 / u.s, 1),
    ("x = 3 (km / s)", u.km / u.s, 3),
    ("x = (1 + 2) AU", u.AU, 3),
    ("x = 2 pi", u.dimensionless_unscaled, 2 * math.pi),
    ("x = 1 km + 1 m", u.km, 1.001),
    ("x = 1 AU in km", u.km, 149_597_870.7),
    ("x = (4 km^2) ^ 0.5", u.km, 2),
    ("x = 1 \u2212 3", u.dimensionless_unscaled, -2),
])
def test_arithmetic(text, unit, expected):
    value = evaluate(text)["x"]
    assert value.to_value(unit) == pytest.approx(expected, rel=1e-12)


def test_chain_ends_at_a_cell():
    # `3 km / dt` divides 3 km by cell dt (README, "A short tour of the language")
    sheet = evaluate("dt = 2 s\nv = 3 km / dt")
    assert sheet["v"].to_value(u.km / u.s) == 1.5
    sheet = evaluate("n = 4\nx = 3 km n")
    assert sheet["x"].to_value(u.km) == 12


def test_name_both_cell_and_unit_is_refused_with_both_readings():
    sheet = evaluate("a = 2\nx = 2 a\ny = 2 / a\nz = 2 * a")
    err = only_error(sheet, "x")
    assert isinstance(err, NameResolutionError)
    assert err.message == "`a` is both a cell and the unit `annum`"
    assert err.hint == "for the cell write `2 * a`; for the unit write `2 annum`"
    err = only_error(sheet, "y")
    assert err.hint == "for the cell write `2 / (a)`; for the unit write `2 / annum`"
    assert sheet["z"].value == 4  # outside a chain a name is always the cell


@pytest.mark.parametrize("cell, unit", [("d", "day"), ("h", "hour"), ("t", "tonne")])
def test_other_classic_ambiguities(cell, unit):
    err = only_error(evaluate(f"{cell} = 1\nx = 3 {cell}"), "x")
    assert err.message == f"`{cell}` is both a cell and the unit `{unit}`"


def test_unit_that_is_also_a_different_constant_is_refused():
    err = only_error(evaluate("x = 2 G"), "x")
    assert err.message.startswith("`G` is both the unit")
    assert "for the constant write `2 * G`" in err.hint


def test_unit_and_constant_of_the_same_value_are_not_ambiguous():
    assert evaluate("x = 2 au in m")["x"].value == pytest.approx(2 * 149_597_870_700)


def test_unit_outside_a_chain():
    err = only_error(evaluate("x = km"), "x")
    assert err.message == "`km` is a unit, not a value"
    assert err.hint == "write `1 km` for the quantity, or put the number before it"


def test_unknown_name_suggests():
    err = only_error(evaluate("speed = 1\nx = sped * 2"), "x")
    assert err.message == "unknown name `sped`"
    assert err.hint == "did you mean `speed`?"


def test_unit_mismatch_names_both_units_and_types():
    err = only_error(evaluate("x = 1 km + 1 s"), "x")
    assert isinstance(err, UnitError)
    assert err.render() == ("t.sheet:1:5: cannot add `km` (length) and `s` (time)\n"
                            "  x = 1 km + 1 s\n      ^~~~~~~~~~")


def test_impossible_conversion():
    err = only_error(evaluate("x = 1 AU in s"), "x")
    assert err.render() == ("t.sheet:1:13: cannot show `AU` (length) in `s` (time)\n"
                            "  x = 1 AU in s\n              ^\n"
                            "  hint: the cell's dimension is length")


def test_dimensioned_exponent():
    err = only_error(evaluate("t = 2 s\nx = 2 ^ t"), "x")
    assert err.message == "the exponent must be dimensionless, got `s` (time)"
    assert (err.span.line, err.span.column) == (2, 9)


@pytest.mark.parametrize("text, message", [
    ("x = 1e300 * 1e300", "the result overflows: it is larger than a float can hold"),
    ("x = 1 / 0", "division by zero"),
    ("x = 0 * inf", "the result is not a number (nan)"),
    ("x = inf - inf", "the result is not a number (nan)"),
    ("x = (-8) ^ 0.5", "a negative number to a fractional power"),
    ("x = 10 ^ 400", "the power overflows: it is larger than a float can hold"),
])
def test_non_finite_results_are_errors(text, message):
    err = only_error(evaluate(text), "x")
    assert isinstance(err, DomainError)
    assert err.message == message


def test_written_infinity_carries_through():
    sheet = evaluate("r = inf\nx = 1 / r\ny = r * 2")
    assert sheet["x"].value == 0 and sheet["y"].value == math.inf


def test_arrays_elementwise():
    sheet = evaluate("xs = [1, 2, 3] km\nys = xs * 2 + 1 km\nzs = [1 km, 500 m]")
    np.testing.assert_allclose(sheet["ys"].to_value(u.km), [3, 5, 7])
    np.testing.assert_allclose(sheet["zs"].to_value(u.km), [1, 0.5])


def test_array_errors():
    sheet = evaluate("a = [1, 2] km + [1, 2, 3] km\nb = [1 km, 1 s]\nc = []")
    assert only_error(sheet, "a").message == "arrays of different lengths (2 and 3)"
    assert only_error(sheet, "b").message == ("array items must share a dimension: "
                                              "`s` (time) is not `km` (length)")
    assert only_error(sheet, "c").message == "an array needs at least one value"


def test_calls_with_keywords():
    sheet = evaluate("x = span(start = 0 s, stop = 2 s, n = 3)\ny = span(0, n = 2, stop = 1)")
    np.testing.assert_allclose(sheet["x"].to_value(u.s), [0, 1, 2])
    np.testing.assert_allclose(sheet["y"].value, [0, 1])


@pytest.mark.parametrize("text, message", [
    ("x = sqr(4)", "unknown function `sqr`"),
    ("x = sqrt(1, 2)", "sqrt(x): too many arguments"),
    ("x = sqrt(y = 2)", "sqrt(x): no argument is called `y`"),
    ("x = span(0, 1)", "span(start, stop, n): missing a required argument: `n`"),
    ("x = km(2)", "unknown function `km`"),
])
def test_call_errors(text, message):
    assert only_error(evaluate(text), "x").message == message


def test_argument_error_points_at_the_argument():
    err = only_error(evaluate("x = span(0 s, 1 km, 3)"), "x")
    assert err.message == "span: `stop` must have the same dimension as `start` (time), got 1 km"
    assert (err.span.column, err.span.end_column) == (15, 19)


def test_cell_used_as_function():
    err = only_error(evaluate("a = 2\nx = a (1 + 2)"), "x")
    assert err.message == "`a` is a cell, not a function"
    assert err.hint == "write `a * (…)` to multiply"


def test_sheet_never_reaches_python_attributes():
    # names resolve only to cells, units, constants and registered functions
    for text in ("x = __import__(1)", "x = const.__class__", "x = sqrt.__doc__", "x = eval(1)"):
        assert evaluate(text).cell("x").error is not None
