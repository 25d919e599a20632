"""Elementary functions: roots, exponentials, trigonometry, reductions and ranges.

Angles and dimensionless numbers convert into each other (radians): ``sin``
takes either, the inverse functions return radians. ``exp``, ``ln`` and
``log10`` need dimensionless arguments. Reductions (``sum``, ``mean``, ``min``,
``max``) collapse an array; ``min`` and ``max`` of several arguments compare
them element by element.
"""

from __future__ import annotations

import astropy.units as u
import numpy as np

from ...errors import ArgumentError
from ..records import is_date
from ..units import quantity, unit_power
from . import args as check
from . import register

TOPIC = "math"
_ONE = u.dimensionless_unscaled


@register("sqrt", TOPIC)
def sqrt(x: u.Quantity) -> u.Quantity:
    """Square root; the unit is raised to the power 1/2 (√(km²) = km)."""
    if check.any_below(x.value, 0):
        raise ArgumentError(f"`x` must not be negative, got {check.show(x)}", "x")
    return quantity(np.sqrt(x.value), unit_power(x.unit, 0.5))


@register("exp", TOPIC)
def exp(x: u.Quantity) -> u.Quantity:
    """e to the power x, for dimensionless x."""
    return quantity(np.exp(check.dimensionless(x, "x")), _ONE)


def _logarithm(x: u.Quantity, fn) -> u.Quantity:
    value = check.dimensionless(x, "x")
    check.positive(value, x, "x")
    return quantity(fn(value), _ONE)


@register("ln", TOPIC)
def ln(x: u.Quantity) -> u.Quantity:
    """Natural logarithm of a positive dimensionless number."""
    return _logarithm(x, np.log)


@register("log10", TOPIC)
def log10(x: u.Quantity) -> u.Quantity:
    """Base-10 logarithm of a positive dimensionless number."""
    return _logarithm(x, np.log10)


@register("sin", TOPIC)
def sin(x: u.Quantity) -> u.Quantity:
    """Sine of an angle (a dimensionless number counts as radians)."""
    return quantity(np.sin(check.angle(x, "x")), _ONE)


@register("cos", TOPIC)
def cos(x: u.Quantity) -> u.Quantity:
    """Cosine of an angle (a dimensionless number counts as radians)."""
    return quantity(np.cos(check.angle(x, "x")), _ONE)


@register("tan", TOPIC)
def tan(x: u.Quantity) -> u.Quantity:
    """Tangent of an angle (a dimensionless number counts as radians)."""
    return quantity(np.tan(check.angle(x, "x")), _ONE)


def _inverse(x: u.Quantity, fn) -> u.Quantity:
    value = check.dimensionless(x, "x")
    if np.any(np.abs(value) > 1):
        raise ArgumentError(f"`x` must lie between -1 and 1, got {check.show(x)}", "x")
    return quantity(fn(value), u.rad)


@register("asin", TOPIC)
def asin(x: u.Quantity) -> u.Quantity:
    """Inverse sine, in radians, of a number between -1 and 1."""
    return _inverse(x, np.arcsin)


@register("acos", TOPIC)
def acos(x: u.Quantity) -> u.Quantity:
    """Inverse cosine, in radians, of a number between -1 and 1."""
    return _inverse(x, np.arccos)


@register("atan", TOPIC)
def atan(x: u.Quantity) -> u.Quantity:
    """Inverse tangent, in radians, of a dimensionless number."""
    return quantity(np.arctan(check.dimensionless(x, "x")), u.rad)


@register("atan2", TOPIC)
def atan2(y: u.Quantity, x: u.Quantity) -> u.Quantity:
    """Angle of the point (x, y), in radians from -π to π; y and x share a dimension."""
    yv, xv = check.same_dimension([y, x], ["y", "x"])
    return quantity(np.arctan2(yv, xv), u.rad)


@register("hypot", TOPIC)
def hypot(*values: u.Quantity) -> u.Quantity:
    """√(x² + y² + …) of values sharing a dimension, without overflow."""
    if len(values) < 2:
        raise ArgumentError("hypot needs at least two values")
    names = [f"value {i + 1}" for i in range(len(values))]
    plain = check.same_dimension(list(values), names)
    result = plain[0]
    for v in plain[1:]:
        result = np.hypot(result, v)
    return quantity(result, values[0].unit)


@register("abs", TOPIC)
def absolute(x: u.Quantity) -> u.Quantity:
    """Absolute value."""
    return np.abs(x)


def _reduced(fn, q: u.Quantity) -> u.Quantity:
    """Reduce the last axis of an array (a single value stays as it is); leading axes, such as
    Monte Carlo samples, stay."""
    value = q.value
    if np.ndim(value) == 0:
        return q
    return quantity(fn(value, axis=-1), q.unit)


def _extreme(values: tuple[u.Quantity, ...], reduce, pairwise, what: str) -> u.Quantity:
    if not values:
        raise ArgumentError(f"{what} needs at least one value")
    if len(values) == 1:
        return _reduced(reduce, values[0])
    names = [f"value {i + 1}" for i in range(len(values))]
    plain = check.same_dimension(list(values), names)
    result = plain[0]
    for v in plain[1:]:
        result = pairwise(result, v)
    return quantity(result, values[0].unit)


@register("min", TOPIC, effect="reduce")
def minimum(*values: u.Quantity) -> u.Quantity:
    """Smallest element of an array (of dates: the earliest), or the element-wise smallest
    of several values."""
    return _extreme(values, np.min, np.minimum, "min")


@register("max", TOPIC, effect="reduce")
def maximum(*values: u.Quantity) -> u.Quantity:
    """Largest element of an array (of dates: the latest), or the element-wise largest of
    several values."""
    return _extreme(values, np.max, np.maximum, "max")


@register("sum", TOPIC, effect="reduce")
def total(x: u.Quantity) -> u.Quantity:
    """Sum of the elements of an array."""
    return _reduced(np.sum, x)


@register("mean", TOPIC, effect="reduce")
def mean(x: u.Quantity) -> u.Quantity:
    """Arithmetic mean of the elements of an array."""
    return _reduced(np.mean, x)


@register("span", TOPIC, samplewise=True, effect="plain")
def span(start: u.Quantity, stop: u.Quantity, n: u.Quantity) -> u.Quantity:
    """n evenly spaced values from start to stop, both included (dates too: n dates from
    one date to another, in the first one's time scale)."""
    if is_date(start) or is_date(stop):
        return _date_span(start, stop, n)
    check.scalar(start, "start")
    check.scalar(stop, "stop")
    lo, hi = check.same_dimension([start, stop], ["start", "stop"])
    count = check.count(n, "n", minimum=2)
    return quantity(np.linspace(lo, hi, count), start.unit)


def _date_span(start, stop, n: u.Quantity):
    if not (is_date(start) and is_date(stop)):
        raise ArgumentError("`start` and `stop` must both be dates, or both quantities", "stop")
    if start.shape or stop.shape:
        raise ArgumentError("`start` and `stop` must be single dates", "start")
    count = check.count(n, "n", minimum=2)
    length = (stop - start).to_value(u.s)
    return start + np.linspace(0.0, length, count) * u.s


@register("logspan", TOPIC, samplewise=True, effect="plain")
def logspan(start: u.Quantity, stop: u.Quantity, n: u.Quantity) -> u.Quantity:
    """n values from start to stop in equal ratios (both positive, both included)."""
    check.scalar(start, "start")
    check.scalar(stop, "stop")
    lo, hi = check.same_dimension([start, stop], ["start", "stop"])
    check.positive(lo, start, "start")
    check.positive(hi, stop, "stop")
    count = check.count(n, "n", minimum=2)
    return quantity(np.geomspace(lo, hi, count), start.unit)
