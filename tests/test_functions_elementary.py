"""calc.physics.functions.elementary: values against Python's math module and numpy (reference libraries)."""

from __future__ import annotations

import math

import astropy.units as u
import numpy as np
import pytest

from conftest import evaluate, only_error


@pytest.mark.parametrize("expression, expected", [
    ("sqrt(2)", math.sqrt(2)),
    ("exp(1.5)", math.exp(1.5)),
    ("ln(10)", math.log(10)),
    ("log10(2)", math.log10(2)),
    ("sin(30 deg)", 0.5),
    ("cos(pi / 3)", math.cos(math.pi / 3)),
    ("tan(0.3)", math.tan(0.3)),
    ("asin(0.5) in deg", 30.0),
    ("acos(0) in rad", math.pi / 2),
    ("atan(1) in deg", 45.0),
    ("atan2(1 m, -1 m) in deg", 135.0),
    ("hypot(3 m, 4 m, 12 m) in m", 13.0),
    ("abs(-3 km) in km", 3.0),
    ("min(2 km, 300 m) in m", 300.0),
    ("max([1, 7, 3] s) in s", 7.0),
    ("sum([1, 2, 3] km) in km", 6.0),
    ("mean([1, 2, 3, 6]) ", 3.0),
])
def test_scalar_values(expression, expected):
    assert float(evaluate(f"x = {expression}")["x"].value) == pytest.approx(expected, rel=1e-12)


def test_sqrt_halves_unit_powers():
    assert evaluate("x = sqrt(9 km^2)")["x"].to_value(u.km) == pytest.approx(3)


def test_span_and_logspan_match_numpy():
    sheet = evaluate("a = span(1 km, 2 km, 5)\nb = logspan(1 Hz, 1 MHz, 7)")
    np.testing.assert_allclose(sheet["a"].to_value(u.km), np.linspace(1, 2, 5))
    np.testing.assert_allclose(sheet["b"].to_value(u.Hz), np.geomspace(1, 1e6, 7))


def test_elementwise_min_max():
    np.testing.assert_allclose(evaluate("x = max([1, 5] m, [3, 2] m)")["x"].to_value(u.m), [3, 5])


@pytest.mark.parametrize("expression, message", [
    ("sqrt(-1)", "sqrt: `x` must not be negative, got -1"),
    ("ln(0)", "ln: `x` must be positive, got 0"),
    ("exp(1 s)", "exp: `x` must be dimensionless, got 1 s"),
    ("sin(1 km)", "sin: `x` must be an angle, got 1 km"),
    ("asin(2)", "asin: `x` must lie between -1 and 1, got 2"),
    ("span(0, 1, 1.5)", "span: `n` must be a whole number, got 1.5"),
    ("span(0, 1, 1e9)", "span: `n` must be between 2 and 10,000,000, got 1000000000"),
    ("logspan(0, 1, 3)", "logspan: `start` must be positive, got 0"),
    ("hypot(1 m)", "hypot: hypot needs at least two values"),
    ("min(1 m, 1 s)", "min: `value 2` must have the same dimension as `value 1` (length), got 1 s"),
    ("span([1, 2], 3, 3)", "span: `start` must be a single value, not an array"),
])
def test_domain_and_dimension_errors(expression, message):
    assert only_error(evaluate(f"x = {expression}"), "x").message == message
