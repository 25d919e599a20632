"""Run-time operations of arrays: opening an axis, comparisons, indexing, slices and masks.

Each operation is made once at compile time (it knows its place in the source) and applied
at evaluation. They work on every kind of value: plain quantities, uncertain values (a
comparison or a mask reads the nominal values; an index picks the same elements of every
contribution), Monte Carlo samples (the sample axis stays first, untouched), values on named
axes (:mod:`calc.engine.grid`), records of arrays (field by field) and dates.
"""

from __future__ import annotations

import operator
from collections.abc import Callable
from typing import Any

import astropy.units as u
import numpy as np

from ..errors import DomainError, SheetError, Span, UnitError
from ..physics.records import Record, RecordList, is_date
from ..physics.units import conversion_scale, describe
from .grid import Axis, Grid, anonymous_axis, value_shape
from .grid import align as grid_align
from .grid import wrap as grid_wrap
from .samples import Samples
from .truth import Truth
from .uncertain import Uncertain
from .values import central

_COMPARE: dict[str, Callable] = {"<": operator.lt, "<=": operator.le, ">": operator.gt,
                                 ">=": operator.ge, "==": operator.eq}


# ---- axes ---------------------------------------------------------------------------------


def axis_op(name: str, rank: float, span: Span) -> Callable:
    """``axis(values)``: a 1-D array as the values of a new dimension named ``name``."""

    def apply(value):
        if isinstance(value, Grid):
            raise DomainError("the values are on an axis already "
                              f"({', '.join(f'`{a.label}`' for a in value.axes)})", span,
                              hint="an axis is made from a plain array, such as a `span`")
        if isinstance(value, (Record, RecordList)):
            raise DomainError("an axis is made from an array of values, not a record", span,
                              hint="make the axis from one field, e.g. `axis(obs.t)`")
        if isinstance(value, Truth):
            raise DomainError("an axis is made from values, not truths", span)
        shape = value_shape(value)
        if len(shape) != 1:
            what = "a single value" if not shape else f"an array of shape {shape}"
            raise DomainError(f"an axis needs a 1-D array of values, got {what}", span,
                              hint="write e.g. `axis(span(-10 d, 10 d, 201))`")
        return Grid(value, (Axis(name, rank, shape[0]),))

    return apply


# ---- comparisons ----------------------------------------------------------------------------


def compare_op(op: str, span: Span, right_span: Span) -> Callable:
    """``a < b`` (``<= > >= ==``): truths, element by element (over the grid of both)."""
    test = _COMPARE[op]

    def apply(a, b):
        if isinstance(a, Grid) or isinstance(b, Grid):
            try:
                (da, db), axes = grid_align(a, b)
            except SheetError as err:
                raise err.located(span) from None
            return grid_wrap(apply(da, db), axes)
        for side in (a, b):
            if isinstance(side, (Record, RecordList)):
                raise DomainError("a record cannot be compared; compare one of its fields", span)
            if isinstance(side, Truth):
                raise DomainError("truths cannot be compared", span,
                                  hint="combine conditions with where(…), or count them")
        a, b = central(a), central(b)
        if is_date(a) or is_date(b):
            return _compare_dates(a, b, test, span, right_span)
        try:
            scale = conversion_scale(b.unit, a.unit)
        except u.UnitConversionError:
            raise UnitError(f"cannot compare {describe(a.unit)} with {describe(b.unit)}",
                            right_span) from None
        try:
            return Truth(test(np.asarray(a.value), np.asarray(b.value) * scale))
        except ValueError:
            raise DomainError(f"arrays of different lengths ({np.size(a.value)} and "
                              f"{np.size(b.value)}) cannot be compared", span) from None

    return apply


def _compare_dates(a, b, test: Callable, span: Span, right_span: Span) -> Truth:
    if not (is_date(a) and is_date(b)):
        other = b if is_date(a) else a
        raise UnitError(f"a date cannot be compared with {describe(other.unit)}", right_span,
                        hint="compare a date with a date, or a duration (t1 - t0) with a time")
    try:
        return Truth(test(a, b))
    except ValueError:
        raise DomainError("date arrays of different lengths cannot be compared", span) from None


# ---- indexing ------------------------------------------------------------------------------


class _Whole:
    """One index that picks one element (and removes its dimension)."""

    __slots__ = ("index", "span")

    def __init__(self, index: int, span: Span) -> None:
        self.index = index
        self.span = span


def _whole_number(value, span: Span) -> int:
    if isinstance(value, Grid):
        raise DomainError("an index must be a single whole number, not values on an axis", span)
    if isinstance(value, (Uncertain, Samples)):
        raise DomainError("an index must be exact: this one carries an uncertainty", span,
                          hint="index with a number written in the sheet or from argmin/argmax "
                               "of an exact value")
    if isinstance(value, Truth):
        return -1
    try:
        number = np.asarray(value.to_value(u.dimensionless_unscaled))
    except (u.UnitConversionError, AttributeError):
        raise DomainError(f"an index is a plain number, got {describe(value.unit)}",
                          span) from None
    if number.ndim != 0:
        raise DomainError("an index must be a single whole number (or a mask of truths)", span,
                          hint="pick several elements with a slice `x[2:5]` or a mask "
                               "`x[x > 3 km]`")
    if not np.isfinite(number) or float(number) != int(number):
        raise DomainError(f"an index must be a whole number, got {float(number):g}", span)
    return int(number)


def index_op(kinds: tuple[str, ...], spans: tuple[Span, ...], span: Span) -> Callable:
    """``x[i]``, ``x[i, j]``, ``x[a:b]``, ``x[mask]``: ``kinds`` says what each index item is
    ("item", or "slice"); the values come as (target, *item values), a slice's bounds as two
    values (None where left out)."""

    def apply(target, *values):
        keys: list[Any] = []
        position = 0
        for kind, item_span in zip(kinds, spans):
            if kind == "slice":
                start, stop = values[position], values[position + 1]
                position += 2
                keys.append(slice(None if start is None else _whole_number(start, item_span),
                                  None if stop is None else _whole_number(stop, item_span)))
            else:
                value = values[position]
                position += 1
                if isinstance(value, Grid) and isinstance(value.data, Truth):
                    value = value.data
                if isinstance(value, Truth):
                    keys.append(value)
                else:
                    keys.append(_Whole(_whole_number(value, item_span), item_span))
        return _indexed(target, keys, span)

    return apply


def _indexed(target, keys: list, span: Span):
    if isinstance(target, Record):
        return Record(target.kind, {name: _indexed(v, keys, span)
                                    for name, v in target.fields.items()}, target.label)
    if isinstance(target, RecordList):
        if len(keys) != 1 or not isinstance(keys[0], _Whole):
            raise DomainError("an array of records takes one whole-number index", span)
        index = _checked(keys[0], len(target.items), "records")
        return target.items[index]
    if isinstance(target, Truth):
        raise DomainError("truths cannot be indexed; index the values they came from", span)
    axes: tuple[Axis, ...] = ()
    data = target
    if isinstance(target, Grid):
        axes, data = target.axes, target.data
    shape = value_shape(data)
    if len(keys) > len(shape):
        raise DomainError(f"{len(keys)} indices for a value with {len(shape)} "
                          f"dimension{'s' if len(shape) != 1 else ''}", span,
                          hint="a single value cannot be indexed" if not shape else None)
    numpy_key: list[Any] = []
    new_axes: list[Axis] = []
    for dim, key in enumerate(keys):
        length = shape[dim]
        axis = axes[dim] if axes else None
        if isinstance(key, _Whole):
            numpy_key.append(_checked(key, length, "values"))
        elif isinstance(key, slice):
            picked = range(length)[key]
            if len(picked) == 0:
                raise DomainError(f"the slice picks no element of {length}", span)
            numpy_key.append(key)
            if axis is not None:
                # `:` keeps the whole axis; a part of it is a dimension of its own
                whole = len(picked) == length and (key.step in (None, 1))
                new_axes.append(axis if whole else anonymous_axis(len(picked)))
        else:   # a mask
            flags = key.flags
            if flags.ndim != 1 or flags.shape[0] != length:
                what = (f"a mask over {' × '.join(map(str, flags.shape))} values"
                        if flags.ndim > 1 else f"a mask of {flags.size} truths")
                raise DomainError(f"{what} for a dimension of {length} values", span,
                                  hint="a mask picks along one dimension: index a grid one axis "
                                       "at a time, or use where(…) to keep its shape")
            if not flags.any():
                raise DomainError("the mask selects no element", span,
                                  hint="no value meets the condition")
            numpy_key.append(np.flatnonzero(flags))
            if axis is not None:
                new_axes.append(anonymous_axis(int(flags.sum())))
    new_axes += list(axes[len(keys):]) if axes else []
    picked = _take(data, tuple(numpy_key))
    if len(new_axes) == 1 and new_axes[0].name is None:
        # a slice or mask of a single axis is a plain array of its own length
        # (`x[1:] - x[:-1]` pairs neighbours, as on any array)
        return picked
    return grid_wrap(picked, tuple(new_axes)) if axes else picked


def _checked(key: _Whole, length: int, what: str) -> int:
    if not -length <= key.index < length:
        raise DomainError(f"index {key.index} is out of range for {length} {what}", key.span,
                          hint=f"indices run from 0 to {length - 1} (or from -{length} to -1 "
                               "from the end)")
    return key.index


def _take(data, key: tuple):
    """The elements ``key`` picks of a leaf's own value (samples keep their sample axis)."""
    if len([k for k in key if isinstance(k, np.ndarray)]) > 1:
        # one index array per dimension would pair them up (numpy's rule); pick each in turn
        for dim in reversed(range(len(key))):
            part = tuple(slice(None) for _ in range(dim)) + (key[dim],)
            data = _take(data, part)
        return data
    if isinstance(data, Uncertain):
        return data.indexed(key)
    if isinstance(data, Samples):
        return Samples(data.data[(slice(None),) + key])
    return data[key]
