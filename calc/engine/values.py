"""The kinds of value a cell can hold, and what each does.

A cell's value is one of:

* a **quantity** — an astropy Quantity (a plain number is a dimensionless one),
  a single value or an array;
* an **uncertain value** (:class:`~calc.engine.uncertain.Uncertain`) — a nominal
  quantity with first-order contributions per input;
* **samples** (:class:`~calc.engine.samples.Samples`) — a quantity drawn N times
  under Monte Carlo;
* a **record** (:class:`~calc.physics.records.Record`) — named fields, each a
  value of the kinds above (orbit elements, a periapsis budget), or a
  **list of records**.

Quantities, uncertain values and samples are *leaves*; records hold leaves.
This module is the one place that knows the kinds: how a value maps a library
function (uncertain → numerical differentiation, samples → vectorised over
the sample axis or once per sample), how it propagates (its inputs, moved
along one input), how it compares, and how it is shown (:func:`shown`, the
form every output prints from). Arithmetic lives with each kind's operators.
A new kind adds its class, its branch in :func:`_leaf_kind`, and its cases
here.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Union

import astropy.units as u
import numpy as np

from ..errors import ArgumentError, DomainError
from ..physics.records import Record, RecordList, is_date
from ..physics.units import quantity
from . import uncertain
from .context import context
from .dates import UncertainDate
from .grid import Grid, anonymous_axis, expand, move_last, put_back, reshaped, transposed, value_shape
from .grid import align as grid_align
from .grid import key as axis_key
from .grid import union as grid_union
from .grid import wrap as grid_wrap
from .samples import Samples, percentiles, value_ndim
from .summaries import Summary, finite, rounding_free, summarised
from .truth import Truth
from .uncertain import Input, Uncertain

if TYPE_CHECKING:
    from .summary_thread import Summariser

_item = np.ndarray.item  # the float of a 0-d array

Leaf = Union[u.Quantity, Uncertain, Samples, Truth]
Value = Union[u.Quantity, Uncertain, Samples, Truth, Grid, Record, RecordList]
CONTAINERS = (Record, RecordList)
#: values that hold other values: records, lists of records, values on axes
STRUCTURES = (Record, RecordList, Grid)


# ---- walking values -------------------------------------------------------------------


def is_record(value) -> bool:
    """A record or a list of records (values that are not numbers)."""
    return isinstance(value, CONTAINERS)


def leaves(value) -> Iterator:
    """The leaves of a value: itself, the data of a value on axes, or every field of a record
    (of every record of a list)."""
    if isinstance(value, Record):
        for item in value.fields.values():
            yield from leaves(item)
    elif isinstance(value, RecordList):
        for record in value.items:
            yield from leaves(record)
    elif isinstance(value, Grid):
        yield value.data
    else:
        yield value


def map_leaves(function: Callable, value):
    """The same value with every leaf replaced by ``function(leaf)`` (axes kept)."""
    if isinstance(value, Record):
        return Record(value.kind, {k: map_leaves(function, q) for k, q in value.fields.items()},
                      value.label)
    if isinstance(value, RecordList):
        return RecordList(tuple(map_leaves(function, r) for r in value.items))
    if isinstance(value, Grid):
        return Grid(function(value.data), value.axes)
    return function(value)


def zip_leaves(function: Callable, first, second):
    """A value whose leaves are ``function(a, b)`` of the matching leaves of two values of the
    same structure (a result and a result moved along one input)."""
    if isinstance(first, Record):
        return {k: zip_leaves(function, first.fields[k], second.fields[k]) for k in first.fields}
    if isinstance(first, RecordList):
        return [zip_leaves(function, a, b) for a, b in zip(first.items, second.items)]
    if isinstance(first, Grid):
        return zip_leaves(function, first.data, second.data if isinstance(second, Grid)
                          else second)
    return function(first, second)


def axes_of(value) -> tuple:
    """The axes a value is on (none for a single value or a plain array)."""
    if isinstance(value, Grid):
        return value.axes
    if isinstance(value, Record):
        found: tuple = ()
        for item in value.fields.values():
            found = grid_union(found, axes_of(item))
        return found
    return ()


def describe(value) -> str:
    """What a value is, for messages: "a quantity", "the orbit record `venus`", …"""
    if isinstance(value, Record):
        return value.describe()
    if isinstance(value, RecordList):
        return "an array of records"
    if isinstance(value, Grid):
        return describe(value.data) + " on " + ", ".join(f"`{a.label}`" for a in value.axes)
    if isinstance(value, Truth):
        return "a truth"
    return "a quantity"


# ---- uncertainty --------------------------------------------------------------------------


def nominal(value):
    """The value without its uncertainty (records: field by field)."""
    if type(value) is u.Quantity:
        return value
    if isinstance(value, Uncertain):
        return value.nominal
    if isinstance(value, STRUCTURES) and is_uncertain(value):
        return map_leaves(_nominal_leaf, value)
    return value


def _nominal_leaf(leaf):
    return leaf.nominal if isinstance(leaf, Uncertain) else leaf


def is_uncertain(value) -> bool:
    """Whether a value carries first-order contributions (any field of a record)."""
    if isinstance(value, Uncertain):
        return True
    if type(value) is UncertainDate:
        return isinstance(value.offset, Uncertain)
    if isinstance(value, STRUCTURES):
        return any(isinstance(leaf, Uncertain) for leaf in leaves(value))
    return False


def is_sampled(value) -> bool:
    """Whether a value holds Monte Carlo samples (any field of a record)."""
    if isinstance(value, Samples):
        return True
    if isinstance(value, STRUCTURES):
        return any(isinstance(leaf, Samples) for leaf in leaves(value))
    return False


def inputs_of(value) -> dict[Input, Any]:
    """Every input a value depends on (records: any field's)."""
    if isinstance(value, Uncertain):
        return value.parts
    if type(value) is UncertainDate:
        return inputs_of(value.offset)
    out: dict[Input, Any] = {}
    if isinstance(value, STRUCTURES):
        for leaf in leaves(value):
            if isinstance(leaf, Uncertain):
                out.update(leaf.parts)
    return out


def sigma(value) -> u.Quantity | None:
    """The first-order standard uncertainty of a leaf, in its unit; None without one."""
    if isinstance(value, Grid):
        value = value.data
    if type(value) is UncertainDate:
        return sigma(value.offset)
    return value.sigma if isinstance(value, Uncertain) else None


def _moved(leaf, key: Input | None, t: float):
    """A leaf's nominal value moved by t times input ``key``'s contribution."""
    if type(leaf) is UncertainDate:
        offset = leaf.offset
        if not isinstance(offset, Uncertain):
            return leaf.moved(offset.to_value(u.s))
        seconds = offset.nominal.to_value(u.s)
        part = offset.parts.get(key) if key is not None else None
        if part is not None and t != 0.0:
            seconds = seconds + t * np.asarray(part) * offset.nominal.unit.to(u.s)
        return leaf.moved(seconds)
    if not isinstance(leaf, Uncertain):
        return leaf
    part = leaf.parts.get(key) if key is not None else None
    if part is None or t == 0.0:
        return leaf.nominal
    return quantity(leaf.nominal.value + t * np.asarray(part), leaf.nominal.unit)


def _largest_magnitude(x) -> float:
    """max |x| of a number or an array (a single number without numpy's reduction machinery,
    which costs more than the rest of a first-order step through a function of numbers)."""
    a = np.asarray(x)
    if a.ndim == 0:
        return abs(float(a))
    return float(np.max(np.abs(a)))


def _relative_size(value, key: Input) -> float:
    """How large input ``key``'s contribution is relative to the value it moves."""
    largest = 0.0
    for leaf in leaves(value):
        if type(leaf) is UncertainDate and isinstance(leaf.offset, Uncertain) \
                and key in leaf.offset.parts:
            # a date moves by a part of a day (its functions see it in seconds since an epoch)
            part = _largest_magnitude(leaf.offset.parts[key]) * leaf.offset.nominal.unit.to(u.s)
            largest = max(largest, part / 86400.0)
            continue
        if isinstance(leaf, Uncertain) and key in leaf.parts:
            part = _largest_magnitude(leaf.parts[key])
            scale = _largest_magnitude(leaf.nominal.value)
            largest = max(largest, part / scale if scale > 0 else math.inf)
    return largest


def _difference(plus, minus, scale: float):
    """(plus − minus) · scale, leaf by leaf, as plain values in plus's units."""
    def one(a, b):
        if is_date(a) or isinstance(a, Truth):
            return None   # dates and truths carry no contributions (the record's `t` field)
        return (np.asarray(a.value) - np.asarray(b.to_value(a.unit))) * scale

    return zip_leaves(one, plus, minus)


def _assemble(result, parts_by_key: dict):
    """A result with the contributions found by differentiation attached, leaf by leaf, each
    with its error bound (``parts_by_key``: input → (difference, truncation, step))."""
    if isinstance(result, Record):
        fields = {}
        for name, q in result.fields.items():
            fields[name] = _assemble(q, {k: (d[name], trunc, t)
                                         for k, (d, trunc, t) in parts_by_key.items()})
        return Record(result.kind, fields, result.label)
    if isinstance(result, RecordList):
        return RecordList(tuple(_assemble(r, {k: (d[i], trunc, t)
                                              for k, (d, trunc, t) in parts_by_key.items()})
                                for i, r in enumerate(result.items)))
    if is_date(result) or isinstance(result, Truth):
        return result
    magnitude = np.abs(np.asarray(result.value, dtype=float))
    parts = {k: d for k, (d, _, _) in parts_by_key.items()}
    noise = {k: 4 * _EPS * magnitude / t + truncation * np.abs(d)
             for k, (d, truncation, t) in parts_by_key.items()}
    return Uncertain(result, parts, noise)


_EPS = float(np.finfo(float).eps)


# ---- functions over values ------------------------------------------------------------------


def _linear_reduction(reduce: Callable) -> Callable:
    """A reduction that is a linear map (sum, mean): applied to the nominal value and to each
    contribution, it propagates exactly."""
    def exact(x: Uncertain) -> Uncertain:
        nominal_value = reduce(x.nominal)
        return Uncertain(nominal_value, {k: np.asarray(reduce(quantity(np.asarray(p), x.unit)).value)
                                         for k, p in x.parts.items()})
    return exact


def _extreme_element(pick: Callable) -> Callable:
    """min or max of one array: the value is one element, and so are its contributions."""
    def exact(x: Uncertain) -> Uncertain:
        values = np.asarray(x.nominal.value)
        if values.ndim != 1:
            raise LookupError  # element-wise or grids: numerical differentiation instead
        index = int(pick(values))
        return Uncertain(quantity(values[index], x.unit),
                         {k: float(np.asarray(p)[index]) for k, p in x.parts.items()})
    return exact


#: Library functions whose first-order propagation is exact without differentiation
#: (rounding noise of numerical differentiation would otherwise show where contributions
#: cancel exactly, as in r / min(r)).
EXACT_RULES: dict[str, Callable] = {
    "sum": _linear_reduction(lambda q: quantity(np.sum(q.value, axis=-1), q.unit)),
    "mean": _linear_reduction(lambda q: quantity(np.mean(q.value, axis=-1), q.unit)),
    "min": _extreme_element(np.argmin),
    "max": _extreme_element(np.argmax),
}


#: How a function treats the axes of its first argument: element by element (the result is on
#: the union of the arguments' axes), reducing the last (or the named) axis, keeping its length
#: (cumsum, sort, gradient), shortening it (diff), or making an array of no axis (span,
#: crossing).
AXIS_EFFECTS = ("elementwise", "reduce", "keep", "shorten", "plain", "first")


def apply_function(call: Callable, values: tuple, samplewise: bool = False,
                   name: str | None = None, effect: str = "elementwise",
                   along: str | None = None):
    """Call a library function (a pure function of Quantities and records) on values of any
    kind: values on axes are aligned over their grid (and the result put back on it, as
    ``effect`` says), uncertain values go through numerical differentiation (or an exact rule,
    for the functions in :data:`EXACT_RULES`), samples through one vectorised call (or one call
    per sample for functions that take single values only)."""
    if along is not None or any(isinstance(v, Grid) or (isinstance(v, Record) and axes_of(v))
                                for v in values):
        return _over_axes(call, values, samplewise, name, effect, along)
    return _apply_leaves(call, values, samplewise, name,
                         stackable=effect == "elementwise" and not samplewise)


def _over_axes(call: Callable, values: tuple, samplewise: bool, name: str | None,
               effect: str, along: str | None):
    """A function applied to values on axes: aligned, called on the data, put back on axes."""
    if effect in ("reduce", "keep", "shorten") and values:
        first = values[0]
        if not isinstance(first, Grid):
            if along is not None:
                raise DomainError(f"`along = {along}`: the value is on no axis")
            return _apply_leaves(call, values, samplewise, name)
        if along is None and len(values) > 1 and isinstance(values[1], Grid) \
                and len(values[1].axes) == 1 and values[1].axes[0] in first.axes:
            # integral(y, x), gradient(y, x): the points x name the axis to work along
            along = values[1].axes[0].name
        data, rest, axis = move_last(first, along)
        others, axes = _aligned_rest(values[1:], (*rest, axis))
        result = _apply_leaves(call, (data, *others), samplewise, name)
        if effect == "reduce":
            return map_leaves(lambda leaf: grid_wrap(leaf, rest), result) if rest else result
        if effect == "shorten":
            size = value_shape(next(iter(leaves(result))))[-1:]
            new_axis = anonymous_axis(size[0] if size else 0)
            return map_leaves(lambda leaf: put_back(leaf, rest, new_axis), result)
        return map_leaves(lambda leaf: put_back(leaf, rest, axis), result)
    if along is not None:
        raise DomainError(f"`along` goes with reductions (sum, mean, max, integral, …), not "
                          f"with `{name}`")
    if effect == "first":
        # interp(x_new, x, y): the curve (x, y) lies along one axis; the result is where x_new is
        first_axes = axes_of(values[0])
        curve = tuple(_curve(v, name) for v in values[1:])
        result = _apply_leaves(call, (_unwrapped(values[0], first_axes), *curve), samplewise,
                               name)
        return map_leaves(lambda leaf: grid_wrap(leaf, first_axes), result)
    grid_axes = grid_union(*(axes_of(v) for v in values))
    aligned_values = tuple(_unwrapped(v, grid_axes) for v in values)
    result = _apply_leaves(call, aligned_values, samplewise, name)
    if effect == "plain" or not grid_axes:
        return result
    ndim = len(grid_axes)
    return map_leaves(lambda leaf: grid_wrap(leaf, grid_axes)
                      if len(value_shape(leaf)) == ndim else leaf, result)


def record_points(values: tuple) -> tuple[tuple[int, ...], tuple] | None:
    """The points a record argument runs over (its fields are arrays: `orbit(a = span(…))`),
    and their axes; None when every record argument is single."""
    shape: tuple[int, ...] | None = None
    axes: tuple = ()
    for v in values:
        if not isinstance(v, Record):
            continue
        for leaf in v.fields.values():
            if isinstance(leaf, Grid):
                axes = grid_union(axes, leaf.axes)
                leaf = leaf.data
            leaf_shape = tuple(getattr(leaf, "shape", ())) if not isinstance(leaf, Samples) \
                else leaf.shape
            if leaf_shape:
                if shape is not None and shape != leaf_shape:
                    raise DomainError("a record's fields run over points of different shapes")
                shape = leaf_shape
    return None if shape is None else (shape, axes)


def per_record_point(apply: Callable, values: tuple, shape: tuple[int, ...], axes: tuple):
    """A function that takes single records, run once per point of array records: the
    results stacked (one budget per point), on the records' axes."""
    results = []
    for index in np.ndindex(*shape):
        args = tuple(_point_of(v, index, shape) if isinstance(v, Record) else v for v in values)
        results.append(apply(*args))
    stacked = _stacked(results, shape)
    outer = tuple(axes) if axes else tuple(anonymous_axis(n) for n in shape)

    def place(leaf):
        # the points' axes first, then the axes each result had of its own; in rank order
        inner = leaf.axes if isinstance(leaf, Grid) else ()
        data = leaf.data if isinstance(leaf, Grid) else leaf
        if not inner and not axes:
            return data
        combined = outer + tuple(inner)
        order = sorted(range(len(combined)), key=lambda i: axis_key(combined[i]))
        if order != list(range(len(combined))):
            data = transposed(data, tuple(order))
        return grid_wrap(data, tuple(combined[i] for i in order))

    def place_all(value):
        # through records only: a value on axes is placed whole (map_leaves would enter it)
        if isinstance(value, Record):
            return Record(value.kind, {k: place_all(v) for k, v in value.fields.items()},
                          value.label)
        if isinstance(value, RecordList):
            return RecordList(tuple(place_all(r) for r in value.items))
        return place(value)

    return place_all(stacked)


def _point_of(record: Record, index: tuple, shape: tuple):
    fields: dict[str, Any] = {}
    for name, leaf in record.fields.items():
        if isinstance(leaf, Grid):
            leaf = leaf.data
        if isinstance(leaf, Samples):
            fields[name] = Samples(leaf.data[(slice(None),) + index]) if leaf.shape == shape \
                else leaf
        elif isinstance(leaf, Uncertain):
            fields[name] = leaf.indexed(index) if leaf.shape == shape else leaf
        elif tuple(getattr(leaf, "shape", ())) == shape:
            fields[name] = leaf[index]
        else:
            fields[name] = leaf
    return Record(record.kind, fields, record.label)


def _stacked(results: list, shape: tuple):
    first = results[0]
    if isinstance(first, Grid):   # each result on axes of its own: stack the data, keep them
        return Grid(_stacked([r.data for r in results], shape), first.axes)
    if isinstance(first, Record):
        return Record(first.kind, {k: _stacked([r.fields[k] for r in results], shape)
                                   for k in first.fields}, first.label)
    if isinstance(first, Uncertain):
        keys: dict = {}
        for r in results:
            for key in (r.parts if isinstance(r, Uncertain) else {}):
                keys[key] = None
        nominal_values = np.stack([np.asarray(nominal(r).value) for r in results])
        unit = first.unit
        parts = {}
        for key in keys:
            parts[key] = np.stack([np.broadcast_to(np.asarray(r.parts.get(key, 0.0))
                                                   if isinstance(r, Uncertain) else 0.0,
                                                   np.shape(nominal(r).value))
                                   for r in results]).reshape(shape + nominal_values.shape[1:])
        return Uncertain(quantity(nominal_values.reshape(shape + nominal_values.shape[1:]), unit),
                         parts)
    if isinstance(first, Samples):
        data = np.stack([r.data.value for r in results], axis=1)
        return Samples(quantity(data.reshape((data.shape[0],) + shape + data.shape[2:]),
                                first.unit))
    if is_date(first):
        from astropy.time import Time

        scale = first.scale
        jd1 = np.stack([np.asarray(getattr(r, scale).jd1) for r in results])
        jd2 = np.stack([np.asarray(getattr(r, scale).jd2) for r in results])
        return Time(jd1.reshape(shape + jd1.shape[1:]), jd2.reshape(shape + jd2.shape[1:]),
                    format="jd", scale=scale)
    values = np.stack([np.asarray(r.value) for r in results])
    return quantity(values.reshape(shape + values.shape[1:]), first.unit)


def _curve(value, name: str | None):
    """An argument that must be a curve along one axis: its data (1-D)."""
    if isinstance(value, Grid):
        if len(value.axes) != 1:
            raise DomainError(f"{name}: the curve must run along one axis, this one is on "
                              f"{', '.join(f'`{a.label}`' for a in value.axes)}",
                              hint="pick one line of the grid with an index first")
        return value.data
    return value


def _unwrapped(value, axes: tuple):
    """A value as data broadcasting over ``axes``: a value on axes expanded to all of them, a
    plain array placed on the axis of its length, records field by field."""
    if isinstance(value, Grid):
        return expand(value.data, value.axes, axes)
    if isinstance(value, Record):
        return Record(value.kind, {k: _unwrapped(q, axes) for k, q in value.fields.items()},
                      value.label)
    if isinstance(value, RecordList):
        return RecordList(tuple(_unwrapped(r, axes) for r in value.items))
    if axes and value_shape(value):
        (data, _placeholder), _ = grid_align(value, Grid(None, axes))
        return data
    return value


def _aligned_rest(values: tuple, axes: tuple) -> tuple[list, tuple]:
    """Further arguments of a reduction, aligned to the first's axes (the reduced axis last)."""
    out = []
    for v in values:
        if isinstance(v, Grid):
            missing = [a for a in v.axes if a not in axes]
            if missing:
                raise DomainError(f"an argument is on the axis `{missing[0].label}`, which the "
                                  "reduced value is not on")
            shape = tuple(a.length if a in v.axes else 1 for a in axes)
            order = [v.axes.index(a) for a in axes if a in v.axes]
            data = v.data if order == sorted(order) else transposed(v.data, tuple(order))
            out.append(reshaped(data, shape))
        else:
            out.append(v)
    return out, axes


#: Functions that find places or count (an index, a number of elements): they read central
#: values (nominal; the median of Monte Carlo samples), as comparisons do, so that their
#: result is exact and can index an array.
CENTRAL_ONLY = frozenset({"argmin", "argmax", "count", "any", "all", "len"})


def _date_samples(leaf):
    """An uncertain date under Monte Carlo as samples of dates (the functions take dates)."""
    if type(leaf) is UncertainDate and isinstance(leaf.offset, Samples):
        return Samples(leaf.moved(leaf.offset.data.to_value(u.s)))
    return leaf


def central(leaf):
    """What comparisons and index-finding read of a value: nominal values (an uncertain date's
    nominal date); the median of Monte Carlo samples."""
    if isinstance(leaf, Uncertain):
        return leaf.nominal
    if type(leaf) is UncertainDate:
        return leaf.nominal_date()
    if isinstance(leaf, Samples):
        return quantity(np.median(np.asarray(leaf.data.value), axis=0), leaf.unit)
    return leaf


def _apply_leaves(call: Callable, values: tuple, samplewise: bool, name: str | None,
                  stackable: bool = False):
    """A function on values whose axes are settled: uncertain, sampled or plain.
    ``stackable``: the function works element by element, so that single values may be
    given as arrays of several at once."""
    if name in CENTRAL_ONLY:
        return call(*(map_leaves(central, v) for v in values))
    values = tuple(map_leaves(_date_samples, v) for v in values)
    uncertain_args = False
    sampled_args = False
    for v in values:
        kind = type(v)
        if kind is u.Quantity:
            continue
        if kind is Uncertain or (kind in CONTAINERS and is_uncertain(v)) or (
                kind is UncertainDate and isinstance(v.offset, Uncertain)):
            uncertain_args = True
        elif kind is Samples or (kind in CONTAINERS and is_sampled(v)):
            sampled_args = True
        elif kind is Truth:
            continue
    if uncertain_args:
        rule = EXACT_RULES.get(name) if name is not None else None
        if rule is not None and len(values) == 1 and isinstance(values[0], Uncertain) \
                and np.ndim(values[0].nominal.value) >= 1:
            try:
                call(values[0].nominal)   # the function's own argument checks
                return rule(values[0])
            except LookupError:
                pass
        several = _at_once(call) if stackable and all(_single(v) for v in values) else None
        return uncertain.through(call, values, inputs_of=inputs_of, shifted=_shifted,
                                 relative_size=_relative_size, difference=_difference,
                                 assemble=_assemble, several=several)
    if sampled_args:
        return (per_sample if samplewise else vectorised)(call, values)
    return call(*values)


def _shifted(value, key: Input | None, t: float):
    return map_leaves(lambda leaf: _moved(leaf, key, t), value)


def _single(value) -> bool:
    """A single number: a 0-d Quantity, or an uncertain one."""
    kind = type(value)
    if kind is Uncertain:
        value = value.nominal
    elif kind is not u.Quantity:
        return False
    return value.ndim == 0


def _at_once(call: Callable) -> Callable:
    """The central differences of ``call`` at single numbers, all inputs in one call: each
    argument as an array of its moved values (input k's step up, then down, for every k; an
    argument no input moves stays single), moved exactly as :func:`_moved` moves it. Gives
    each input's difference in the unit of ``result`` (the call at the nominal values), or
    None when the call fails or does not give one number per move (the caller then makes
    the moves one by one)."""
    def several(values: tuple, steps: dict, result) -> dict | None:
        keys = list(steps)
        count = 2 * len(keys)
        arguments = []
        for v in values:
            if type(v) is not Uncertain:
                arguments.append(v)
                continue
            nominal = float(v.nominal.value)
            column = np.full(count, nominal)
            for i, key in enumerate(keys):
                part = v.parts.get(key)
                if part is not None:
                    shift = steps[key] * float(part)
                    column[2 * i] = nominal + shift
                    column[2 * i + 1] = nominal - shift
            arguments.append(quantity(column, v.unit))
        try:
            moved = call(*arguments)
        except (ArgumentError, DomainError):
            return None
        if type(moved) is not u.Quantity or moved.shape != (count,) \
                or type(result) is not u.Quantity:
            return None
        try:
            numbers = moved.to_value(result.unit)
        except u.UnitConversionError:
            return None
        return {key: (numbers[2 * i] - numbers[2 * i + 1]) * (1 / (2 * steps[key]))
                for i, key in enumerate(keys)}

    return several


def vectorised(call: Callable, values: tuple):
    """One call with every sample at once: samples become Quantities with the sample axis
    first and their own axes padded to the widest argument (at least one, so that a function
    reducing its argument's last axis never reduces the samples)."""
    ndim = max(1, max((value_ndim(leaf) for v in values for leaf in leaves(v)), default=0))
    scalars_only = all(value_ndim(leaf) == 0 for v in values for leaf in leaves(v))
    count = next(leaf.count for v in values for leaf in leaves(v) if isinstance(leaf, Samples))

    def unwrap(leaf):
        return leaf.padded(ndim) if isinstance(leaf, Samples) else leaf

    result = call(*(map_leaves(unwrap, v) for v in values))

    def wrap(leaf):
        if isinstance(leaf, u.Quantity) and np.ndim(leaf.value) >= 1 and leaf.shape[0] == count:
            if scalars_only and leaf.shape[1:] == (1,):
                leaf = leaf.reshape((count,))
            return Samples(leaf)
        return leaf

    return map_leaves(wrap, result)


#: Most samples a function that takes single values is run for (a Python call each).
MAX_PER_SAMPLE = 100_000


def per_sample(call: Callable, values: tuple):
    """Monte Carlo through a function that takes single values: once per sample, stacked."""
    count = next(leaf.count for v in values for leaf in leaves(v) if isinstance(leaf, Samples))
    if count > MAX_PER_SAMPLE:
        raise DomainError(f"this function runs once per sample; {count:,} samples would take "
                          "too long", hint=f"use --mc {MAX_PER_SAMPLE:,} or fewer")
    sampling = context().sampling
    progress = sampling.progress if sampling is not None else None
    results = []
    for k in range(count):
        results.append(call(*(map_leaves(lambda leaf, k=k: _take(leaf, k), v) for v in values)))
        if progress is not None and k % 256 == 0:
            progress(k, count)
    if progress is not None:
        progress(count, count)
    return _stack(results)


def _take(leaf, k: int):
    if isinstance(leaf, Samples):
        return leaf.data[k]
    return leaf


def _stack(results: list):
    first = results[0]
    if isinstance(first, Record):
        return Record(first.kind, {n: _stack([r.fields[n] for r in results])
                                   for n in first.fields}, first.label)
    if isinstance(first, RecordList):
        return RecordList(tuple(_stack([r.items[i] for r in results])
                                for i in range(len(first.items))))
    return Samples(quantity(np.array([np.asarray(r.to_value(first.unit)) for r in results]),
                            first.unit))


# ---- comparing and checking -------------------------------------------------------------


def same(a, b) -> bool:
    """Whether two values of a cell are the same (propagation stops where nothing changed)."""
    if a is b:
        return True
    if a is None or b is None:
        return False
    if type(a) is u.Quantity and type(b) is u.Quantity and a.ndim == 0 and b.ndim == 0:
        # two single quantities (most cells): what the general case below finds, cheaply
        return a.unit == b.unit and _item(a) == _item(b)
    if isinstance(a, Record) or isinstance(b, Record):
        return isinstance(a, Record) and isinstance(b, Record) and a.kind == b.kind \
            and a.label == b.label and list(a.fields) == list(b.fields) \
            and all(same(x, y) for x, y in zip(a.fields.values(), b.fields.values()))
    if isinstance(a, RecordList) or isinstance(b, RecordList):
        return isinstance(a, RecordList) and isinstance(b, RecordList) \
            and len(a.items) == len(b.items) and all(same(x, y) for x, y in zip(a.items, b.items))
    if isinstance(a, Uncertain) or isinstance(b, Uncertain):
        return isinstance(a, Uncertain) and isinstance(b, Uncertain) \
            and same(a.nominal, b.nominal) and same(a.sigma, b.sigma)
    if isinstance(a, Samples) or isinstance(b, Samples):
        return isinstance(a, Samples) and isinstance(b, Samples) and same(a.data, b.data)
    if isinstance(a, Grid) or isinstance(b, Grid):
        return isinstance(a, Grid) and isinstance(b, Grid) and a.axes == b.axes \
            and same(a.data, b.data)
    if isinstance(a, Truth) or isinstance(b, Truth):
        return isinstance(a, Truth) and isinstance(b, Truth) \
            and bool(np.array_equal(a.flags, b.flags))
    if is_date(a) or is_date(b):
        return is_date(a) and is_date(b) and a.scale == b.scale and a.shape == b.shape \
            and bool(np.all(a == b))
    return a.unit == b.unit and np.shape(a.value) == np.shape(b.value) and \
        bool(np.array_equal(a.value, b.value))


def all_finite(value) -> bool:
    """No nan or infinity in a value (a record: in any field)."""
    kind = type(value)
    if kind is Grid:
        return all_finite(value.data)
    if kind in CONTAINERS:   # a record is finite when every field is
        return all(all_finite(leaf) for leaf in leaves(value))
    if kind is Truth or kind is UncertainDate or is_date(value):
        return True
    if kind is Uncertain:
        value = value.nominal
    v = value.value
    if np.ndim(v) == 0:
        return math.isfinite(v)
    if v.size > 4096 and v.dtype.kind == "f":
        # a sum is finite only if every element is (a finite sum can overflow, never the
        # reverse): one pass without a temporary array of truths; an overflowed sum is
        # looked at element by element
        with np.errstate(all="ignore"):
            if math.isfinite(float(np.add.reduce(v, axis=None))):
                return True
    return bool(np.isfinite(v).all())


# ---- how values are shown ---------------------------------------------------------------


class Shown:
    """A leaf as outputs print it: a value (a number or an array), its σ (or None), its unit;
    under Monte Carlo the sample mean and standard deviation, and the 16/50/84 % points.

    A Monte Carlo run may summarise a cell's samples on a thread beside the evaluation of the
    next cells (:meth:`of_samples`): the value, σ and samples are then read from that summary
    the first time something asks for them."""

    __slots__ = ("_value", "_sigma", "unit", "_samples", "axes", "kind", "_points", "_summary")

    def __init__(self, value: Any, sigma: Any | None, unit: u.UnitBase,
                 samples: np.ndarray | None = None, axes: tuple = (),
                 kind: str = "quantity") -> None:
        self._value = value
        self._sigma = sigma
        self.unit = unit
        self._samples = samples
        #: the axes the value is on, in order (their names, or None for a dimension of no axis)
        self.axes = axes
        #: "quantity", "truth" (true/false values) or "date" (ISO strings with a time scale)
        self.kind = kind
        self._points: np.ndarray | None = None
        #: the summary being found in the background (a Future of a :class:`_Summary`)
        self._summary: Any = None

    @classmethod
    def of_samples(cls, data: np.ndarray, unit: u.UnitBase,
                   summariser: Summariser | None = None) -> Shown:
        """The shown form of samples (``data``: the sample axis first): their mean and
        standard deviation, found by ``summariser`` when given (on its thread, with the
        percentiles if it finds them), else now (the points then when first asked for)."""
        made = cls(None, None, unit)
        if summariser is None:
            made._take(summarised(data))
        else:
            made._summary = summariser.submit(data)
        return made

    def _take(self, summary: Summary) -> None:
        self._value, self._sigma, self._samples, self._points = \
            summary.mean, summary.spread, summary.samples, summary.points

    def _settle(self) -> None:
        """Take the background summary's results (waiting for them if need be)."""
        self._take(self._summary.result())
        self._summary = None

    @property
    def value(self) -> Any:
        if self._summary is not None:
            self._settle()
        return self._value

    @property
    def sigma(self) -> Any | None:
        if self._summary is not None:
            self._settle()
        return self._sigma

    @property
    def samples(self) -> np.ndarray | None:
        if self._summary is not None:
            self._settle()
        return self._samples

    @property
    def uncertain(self) -> bool:
        return self.sigma is not None

    @property
    def size(self) -> int:
        return int(np.size(self.value))

    def percentiles(self) -> np.ndarray | None:
        """The 16/50/84 % points of the samples (None without samples), computed once."""
        samples = self.samples
        if samples is None:
            return None
        if self._points is None:
            self._points = _points_of(samples, finite(self._value))
        return self._points

    def __repr__(self) -> str:
        if self._summary is not None:
            return f"Shown(<being summarised>, {self.unit})"
        return f"Shown({self._value!r}, {self._sigma!r}, {self.unit}, kind={self.kind!r})"


def _points_of(samples: np.ndarray, finite: bool) -> np.ndarray:
    with np.errstate(all="ignore"):   # samples with inf or nan give nan points
        return percentiles(samples, finite=finite)


@dataclass
class ShownRecord:
    kind: str
    label: str | None
    fields: dict[str, Shown | ShownRecord | ShownRecords]

    def summary(self) -> str:
        return f"({self.kind})"


@dataclass
class ShownRecords:
    items: list[ShownRecord]

    def summary(self) -> str:
        return f"(array of {len(self.items)} records)"


ShownValue = Union[Shown, ShownRecord, ShownRecords]


def shown(value, summariser: Summariser | None = None) -> ShownValue:
    """The printable form of a value of any kind. Samples are summarised by ``summariser``
    when given (:meth:`Shown.of_samples`)."""
    if isinstance(value, Grid):
        inner = shown(value.data, summariser)
        names = tuple(a.name for a in value.axes)
        if isinstance(inner, Shown):
            inner.axes = names
        return inner
    if isinstance(value, Truth):
        return Shown(value.flags, None, u.dimensionless_unscaled, kind="truth")
    if type(value).__name__ == "UncertainDate":
        from .dates import iso

        offset = value.offset
        if isinstance(offset, Samples):
            spread = u.Quantity(np.std(offset.data.to_value(u.s), axis=0, ddof=1), u.s)
        else:
            spread = sigma(offset)
        text = iso(value.nominal_date())
        return Shown(text if isinstance(text, str) else np.array(text, dtype=object),
                     None if spread is None else spread.to_value(u.s), u.s, kind="date")
    if is_date(value):
        from .dates import iso

        text = iso(value)
        return Shown(np.array(text, dtype=object).reshape(value.shape) if value.shape
                     else text, None, u.dimensionless_unscaled, kind="date")
    if isinstance(value, Record):
        return ShownRecord(value.kind, value.label,
                           {k: shown(q, summariser) for k, q in value.fields.items()})
    if isinstance(value, RecordList):
        return ShownRecords([shown(r, summariser) for r in value.items])  # type: ignore[misc]
    if isinstance(value, Uncertain):
        return Shown(value.nominal.value, rounding_free(value.nominal.value, value.sigma_value()),
                     value.unit)
    if isinstance(value, Samples):
        return Shown.of_samples(np.asarray(value.data.value), value.unit, summariser)
    if isinstance(value, u.Quantity):
        return Shown(value.value, None, value.unit)
    raise DomainError(f"a value of an unknown kind: {type(value).__name__}")
