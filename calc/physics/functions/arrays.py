"""Array functions: choosing, counting, locating, interpolating, integrating, differencing.

Each works along the last dimension of its first argument; on a grid the engine moves the
reduced axis last (the last axis, or the one named with ``along = axis``), so the functions
here see plain arrays whose last dimension is the one to work along (and, under Monte Carlo,
whose first dimension is the samples). Conditions are truths, what a comparison gives
(``x > 3 km``).

Sources: the trapezoid rule, linear interpolation and central differences are the textbook
forms (Press et al., *Numerical Recipes*, 3rd ed., §4.1 eq. 4.1.11, §3.1, §5.7); numpy's
``trapezoid``, ``interp`` and ``gradient`` compute the same and the tests compare with them.
"""

from __future__ import annotations

import astropy.units as u
import numpy as np

from ...errors import ArgumentError, DomainError
from ..units import conversion_scale, describe, quantity
from . import register

TOPIC = "arrays"
_ONE = u.dimensionless_unscaled


def _flags(condition, name: str) -> np.ndarray:
    # truths (what a comparison gives) hold their flags as an array of bools; numpy arrays and
    # Quantities have a `flags` attribute of another kind
    flags = getattr(condition, "flags", None)
    if not isinstance(flags, np.ndarray) or flags.dtype != bool:
        unit = getattr(condition, "unit", None)
        what = describe(unit) if unit is not None else "a value that is no condition"
        raise ArgumentError(f"`{name}` must be a condition (a comparison such as `x > 3 km`), "
                            f"got {what}", name)
    return flags


def _along(q: u.Quantity, name: str) -> np.ndarray:
    value = np.asarray(q.value)
    if value.ndim == 0:
        raise ArgumentError(f"`{name}` must be an array, got a single value", name)
    return value


def _same_unit(q: u.Quantity, unit: u.UnitBase, name: str, other: str) -> np.ndarray:
    try:
        scale = conversion_scale(q.unit, unit)
    except u.UnitConversionError:
        raise ArgumentError(f"`{name}` must have the dimension of `{other}` ({describe(unit)}), "
                            f"got {describe(q.unit)}", name) from None
    value = np.asarray(q.value)
    return value * scale if scale != 1.0 else value


@register("where", TOPIC)
def where(condition, a: u.Quantity, b: u.Quantity) -> u.Quantity:
    """a where the condition holds, else b (element by element; a and b of one dimension)."""
    flags = _flags(condition, "condition")
    bv = _same_unit(b, a.unit, "b", "a")
    return quantity(np.where(flags, np.asarray(a.value), bv), a.unit)


@register("count", TOPIC, effect="reduce")
def count(condition) -> u.Quantity:
    """How many elements of an array of truths hold (along the last or the named axis)."""
    flags = _flags(condition, "condition")
    return quantity(np.count_nonzero(flags, axis=-1).astype(float) if flags.ndim else
                    float(flags), _ONE)


@register("any", TOPIC, effect="reduce")
def any_of(condition) -> u.Quantity:
    """1 if any element holds, else 0 (along the last or the named axis)."""
    flags = _flags(condition, "condition")
    return quantity(np.any(flags, axis=-1).astype(float), _ONE)


@register("all", TOPIC, effect="reduce")
def all_of(condition) -> u.Quantity:
    """1 if every element holds, else 0 (along the last or the named axis)."""
    flags = _flags(condition, "condition")
    return quantity(np.all(flags, axis=-1).astype(float), _ONE)


@register("argmin", TOPIC, effect="reduce")
def argmin(x: u.Quantity) -> u.Quantity:
    """Index (from 0) of the smallest element along the last or the named axis (of dates:
    the earliest)."""
    return quantity(np.argmin(_along(x, "x"), axis=-1).astype(float), _ONE)


@register("argmax", TOPIC, effect="reduce")
def argmax(x: u.Quantity) -> u.Quantity:
    """Index (from 0) of the largest element along the last or the named axis (of dates:
    the latest)."""
    return quantity(np.argmax(_along(x, "x"), axis=-1).astype(float), _ONE)


@register("len", TOPIC, effect="reduce")
def length(x) -> u.Quantity:
    """Number of elements along the last or the named axis."""
    value = np.asarray(x.value)
    if value.ndim == 0:
        raise ArgumentError("`x` must be an array, got a single value", "x")
    return quantity(np.full(value.shape[:-1], float(value.shape[-1])), _ONE)


@register("sort", TOPIC, effect="keep")
def sort(x: u.Quantity) -> u.Quantity:
    """The elements in increasing order along the last or the named axis (dates: in time
    order)."""
    return quantity(np.sort(_along(x, "x"), axis=-1), x.unit)


@register("cumsum", TOPIC, effect="keep")
def cumsum(x: u.Quantity) -> u.Quantity:
    """Running sum along the last or the named axis (same length)."""
    return quantity(np.cumsum(_along(x, "x"), axis=-1), x.unit)


@register("diff", TOPIC, effect="shorten")
def diff(x: u.Quantity) -> u.Quantity:
    """Differences of neighbours, x[i+1] − x[i] (one element fewer; of dates: the durations
    between them, in days)."""
    value = _along(x, "x")
    if value.shape[-1] < 2:
        raise ArgumentError("`x` needs at least 2 elements", "x")
    return quantity(np.diff(value, axis=-1), x.unit)


def _abscissa(x: u.Quantity, n: int, name: str = "x") -> np.ndarray:
    """The sample points as the 1-D array (of ``n`` values) they are along the last axis."""
    value = np.asarray(x.value)
    if value.size != n or value.shape[-1:] != (n,):
        raise ArgumentError(f"`{name}` must be the {n} points the values are given at, got "
                            f"{value.size} value{'s' if value.size != 1 else ''}", name)
    return value.reshape(n)


@register("integral", TOPIC, effect="reduce")
def integral(y: u.Quantity, x: u.Quantity) -> u.Quantity:
    """∫ y dx by the trapezoid rule along the last or the named axis (x: the sample points)."""
    yv = _along(y, "y")
    n = yv.shape[-1]
    if n < 2:
        raise ArgumentError("`y` needs at least 2 points to integrate", "y")
    xv = _abscissa(x, n)
    dx = np.diff(xv)
    return quantity(np.sum(0.5 * (yv[..., 1:] + yv[..., :-1]) * dx, axis=-1), y.unit * x.unit)


@register("gradient", TOPIC, effect="keep")
def gradient(y: u.Quantity, x: u.Quantity) -> u.Quantity:
    """dy/dx at each point: central differences inside (second order on uneven spacing),
    one-sided at both ends."""
    yv = _along(y, "y")
    n = yv.shape[-1]
    if n < 2:
        raise ArgumentError("`y` needs at least 2 points", "y")
    xv = _abscissa(x, n)
    if np.any(np.diff(xv) == 0):
        raise ArgumentError("`x` has two equal points: the slope between them is undefined", "x")
    return quantity(np.gradient(yv, xv, axis=-1), y.unit / x.unit)


def _increasing(xv: np.ndarray, name: str) -> np.ndarray:
    steps = np.diff(xv)
    if np.all(steps > 0):
        return xv
    if np.all(steps < 0):
        return xv
    raise ArgumentError(f"`{name}` must increase (or decrease) steadily", name)


@register("interp", TOPIC, effect="first")
def interp(x_new: u.Quantity, x: u.Quantity, y: u.Quantity) -> u.Quantity:
    """y at x_new by linear interpolation of the points (x, y); x_new outside x's range is an
    error, not an extrapolation."""
    xv = np.asarray(x.value)
    if xv.ndim != 1 or xv.size < 2:
        raise ArgumentError("`x` must be an array of at least 2 points", "x")
    yv = np.asarray(y.value)
    if yv.shape[-1:] != xv.shape:
        raise ArgumentError(f"`y` must have one value per point of `x` ({xv.size}), got "
                            f"{yv.shape[-1] if yv.ndim else 1}", "y")
    new = _same_unit(x_new, x.unit, "x_new", "x")
    xv = _increasing(xv, "x")
    if xv[0] > xv[-1]:
        xv, yv = xv[::-1], yv[..., ::-1]
    lo, hi = xv[0], xv[-1]
    if np.any(new < lo) or np.any(new > hi):
        raise DomainError(f"interp: `x_new` goes outside the points' range [{lo:g}, {hi:g}] "
                          f"{x.unit.to_string()}", hint="interp does not extrapolate")
    index = np.clip(np.searchsorted(xv, new, side="right") - 1, 0, xv.size - 2)
    t = (new - xv[index]) / (xv[index + 1] - xv[index])
    if yv.ndim == 1:
        result = yv[index] * (1 - t) + yv[index + 1] * t
    else:
        # leading dimensions of y (Monte Carlo samples) stay in front
        result = yv[..., index] * (1 - t) + yv[..., index + 1] * t
    return quantity(result, y.unit)


@register("crossing", TOPIC, samplewise=True, effect="plain")
def crossing(y: u.Quantity, x: u.Quantity, level: u.Quantity) -> u.Quantity:
    """Every x where the sampled curve y(x) crosses ``level`` (linear between samples), in
    increasing order of x; a curve that never reaches the level is an error."""
    yv = np.asarray(y.value)
    xv = np.asarray(x.value)
    if yv.ndim != 1:
        raise ArgumentError("`y` must be a curve: values along one axis", "y")
    if xv.shape != yv.shape:
        raise ArgumentError(f"`x` must have one point per value of `y` ({yv.size}), got "
                            f"{xv.size}", "x")
    if np.size(level.value) != 1:
        raise ArgumentError("`level` must be a single value", "level")
    c = float(np.ravel(_same_unit(level, y.unit, "level", "y"))[0])
    d = yv - c
    on = np.flatnonzero(d == 0)
    between = np.flatnonzero(d[:-1] * d[1:] < 0)
    t = d[between] / (d[between] - d[between + 1])
    found = np.concatenate([xv[on], xv[between] + t * (xv[between + 1] - xv[between])])
    if found.size == 0:
        raise DomainError(f"crossing: the curve never reaches {c:g} {y.unit.to_string()} "
                          f"(it runs from {np.min(yv):g} to {np.max(yv):g})")
    return quantity(np.sort(found), x.unit)
