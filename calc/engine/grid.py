"""Values on named axes, and how values on different axes meet.

``days = axis(span(-10 d, 10 d, 201))`` opens a dimension named after its cell.
A value computed from it lives on that axis: a :class:`Grid` holds the value
(a leaf of any kind: quantity, uncertain value, samples, truths, dates) and
the axes of its trailing value dimensions, in the order the axes were defined
in the sheet. Values on the same axis combine element by element; values on
different axes combine over the grid they span (an outer product): before
two values meet, each is reshaped so that every axis of the other appears as
a dimension of length one (:func:`align`), and numpy's broadcasting does the
rest. A plain array (``[1, 2, 3]``, a ``span`` that is no axis) meets a value
on axes element by element along the one axis of its length.

Axes stay sorted by their rank (the place of their cell in the file), so
aligning a value never transposes it: it only inserts dimensions of length one.
"""

from __future__ import annotations

import itertools
from collections.abc import Callable
from typing import Any, NamedTuple

import numpy as np

from ..errors import DomainError
from .operators import WrappedArithmetic


class Axis(NamedTuple):
    """A named dimension: the cell that opened it, its rank (the cell's place in the file;
    anonymous dimensions made by a reduction come after every named one), its length."""

    name: str | None
    rank: float
    length: int
    token: int = 0   # tells anonymous axes apart

    @property
    def label(self) -> str:
        return self.name if self.name is not None else f"[{self.length}]"


_anonymous = itertools.count(1)


def anonymous_axis(length: int) -> Axis:
    """A dimension of no cell (what a `diff` or a slice leaves of an axis)."""
    return Axis(None, float("inf"), length, next(_anonymous))


def key(axis: Axis) -> tuple:
    """How axes sort: by rank (file order), anonymous ones after the named."""
    return (axis.rank, axis.token, axis.name or "")


class Grid(WrappedArithmetic):
    """A value on named axes: ``data`` (a leaf) whose last ``len(axes)`` value dimensions are
    ``axes``. Operators align the operands' axes and apply to the data."""

    __slots__ = ("data", "axes")

    def __init__(self, data: Any, axes: tuple[Axis, ...]) -> None:
        self.data = data
        self.axes = axes

    @property
    def unit(self):
        return self.data.unit

    @property
    def shape(self) -> tuple[int, ...]:
        return tuple(a.length for a in self.axes)

    @property
    def value(self):
        return self.data.value

    def _apply(self, other, operation: Callable, reflected: bool = False):
        (a, b), axes = align(self, other)
        return wrap(operation(b, a) if reflected else operation(a, b), axes)

    def __neg__(self):
        return Grid(-self.data, self.axes)

    def __repr__(self) -> str:
        return f"<Grid over {', '.join(a.label for a in self.axes)}: {self.data!r}>"


def wrap(data, axes: tuple[Axis, ...]):
    """``data`` on ``axes`` (a value of no axes stays as it is)."""
    if not axes:
        return data
    return Grid(data, axes)


# ---- reshaping leaves ---------------------------------------------------------------------


def value_shape(leaf) -> tuple[int, ...]:
    """The shape of a leaf's own value (samples: without the sample axis)."""
    shape = getattr(leaf, "shape", None)
    if shape is not None:
        return tuple(shape)
    return np.shape(getattr(leaf, "value", leaf))


def reshaped(leaf, shape: tuple[int, ...]):
    """A leaf with its value dimensions reshaped to ``shape`` (same number of elements)."""
    method = getattr(leaf, "reshaped", None)
    if method is not None:
        return method(shape)
    return leaf.reshape(shape)


def transposed(leaf, order: tuple[int, ...]):
    """A leaf with its value dimensions in another order."""
    method = getattr(leaf, "transposed", None)
    if method is not None:
        return method(order)
    return leaf.transpose(order)


# ---- aligning -----------------------------------------------------------------------------


def union(*groups: tuple[Axis, ...]) -> tuple[Axis, ...]:
    """The axes of several values, each once, in rank order."""
    seen: dict[tuple, Axis] = {}
    for axes in groups:
        for axis in axes:
            ident = (axis.name, axis.token) if axis.name is None else (axis.name,)
            earlier = seen.get(ident)
            if earlier is not None and earlier.length != axis.length:
                raise DomainError(f"axis `{axis.label}` has {earlier.length} values in one operand "
                                  f"and {axis.length} in the other")
            seen[ident] = axis
    return tuple(sorted(seen.values(), key=key))


def _placed(value, axes: tuple[Axis, ...]):
    """A plain (no-axes) array value meeting values on ``axes``: the axis it runs along
    (the one of its length), or None for a single value."""
    shape = value_shape(value)
    if not shape:
        return None
    if len(shape) > 1:
        raise DomainError(f"an array of shape {' × '.join(map(str, shape))} that is on no axis "
                          f"meets values on {', '.join(a.label for a in axes)}",
                          hint="make the dimensions axes with `axis(…)`")
    matching = [a for a in axes if a.length == shape[0]]
    if len(matching) == 1:
        return matching[0]
    if not matching:
        raise DomainError(f"an array of {shape[0]} values meets values on "
                          f"{', '.join(f'`{a.label}` ({a.length})' for a in axes)}: no axis has "
                          f"that length", hint="arrays combine element by element along an axis "
                                               "of the same length")
    raise DomainError(f"an array of {shape[0]} values meets values on several axes of that "
                      f"length ({', '.join(f'`{a.label}`' for a in matching)})",
                      hint="make it an axis of its own, or index the grid")


def expand(value, own: tuple[Axis, ...], axes: tuple[Axis, ...]):
    """``value`` (whose value dimensions are ``own``, a rank-ordered part of ``axes``) with a
    dimension of length one for each of ``axes`` it lacks."""
    if own == axes:
        return value
    shape = tuple(a.length if a in own else 1 for a in axes)
    return reshaped(value, shape)


def align(*values) -> tuple[list, tuple[Axis, ...]]:
    """The values' data, each reshaped to broadcast over the union of their axes, and that
    union. Values on no axis are returned as they are (single values), or placed on the axis
    of their length (plain arrays)."""
    axes = union(*(v.axes for v in values if isinstance(v, Grid)))
    out = []
    for v in values:
        if isinstance(v, Grid):
            out.append(expand(v.data, v.axes, axes))
        elif axes and value_shape(v):
            axis = _placed(v, axes)
            out.append(expand(v, (axis,), axes) if axis is not None else v)
        else:
            out.append(v)
    return out, axes


def move_last(grid: Grid, name: str | None) -> tuple[Any, tuple[Axis, ...], Axis]:
    """The data with axis ``name`` (the last axis when None) moved to the end, the remaining
    axes, and the axis moved."""
    if name is None:
        index = len(grid.axes) - 1
    else:
        names = [a.name for a in grid.axes]
        if name not in names:
            raise DomainError(f"the value is not on the axis `{name}`; its axes are "
                              f"{', '.join(f'`{a.label}`' for a in grid.axes)}")
        index = names.index(name)
    axis = grid.axes[index]
    rest = grid.axes[:index] + grid.axes[index + 1:]
    if index == len(grid.axes) - 1:
        return grid.data, rest, axis
    order = tuple(i for i in range(len(grid.axes)) if i != index) + (index,)
    return transposed(grid.data, order), rest, axis


def put_back(data, rest: tuple[Axis, ...], axis: Axis):
    """The inverse of :func:`move_last` for a result that kept the moved axis (or a new axis
    in its place) last: on the axes in rank order again."""
    axes = tuple(sorted((*rest, axis), key=key))
    index = axes.index(axis)
    if index == len(axes) - 1:
        return wrap(data, axes)
    order = tuple(range(index)) + (len(axes) - 1,) + tuple(range(index, len(axes) - 1))
    return wrap(transposed(data, order), axes)
