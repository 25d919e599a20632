"""Monte Carlo samples: a value drawn N times, as one array with the samples first.

Under ``--mc N`` every `±` input evaluates to N draws from its normal
distribution and everything computed from it is a :class:`Samples` value:
one Quantity whose leading axis runs over the samples and whose remaining
axes are the value's own shape (``()`` for a single number, ``(n,)`` for an
array). Arithmetic is vectorised numpy over the whole array. Before two
operands meet, the samples' own axes are padded on the left so that numpy
aligns value axes with value axes and never a value axis with the sample
axis (a scalar's samples, shape (N,), meeting a 3-element array become
(N, 1) and give (N, 3)).

Functions see padded sample arrays as ordinary Quantities (they broadcast);
those registered ``samplewise`` take single values and run once per sample.
"""

from __future__ import annotations

import math
import operator
from collections.abc import Callable
from functools import lru_cache

import astropy.units as u
import numpy as np

from ..physics.units import conversion_scale, quantity, unit_product, unit_quotient
from .operators import WrappedArithmetic


class Samples(WrappedArithmetic):
    """N samples of a value: ``data`` has shape (N, *shape)."""

    __slots__ = ("data",)

    def __init__(self, data: u.Quantity) -> None:
        self.data = data

    @property
    def unit(self) -> u.UnitBase:
        return self.data.unit

    @property
    def count(self) -> int:
        return self.data.shape[0]

    @property
    def shape(self) -> tuple[int, ...]:
        """The shape of one sample (the value's own shape)."""
        return self.data.shape[1:]

    @property
    def value(self):
        return self.data.value

    def padded(self, ndim: int) -> u.Quantity:
        """The data with the value's axes padded on the left to ``ndim`` axes."""
        missing = ndim - len(self.shape)
        if missing <= 0:
            return self.data
        return self.data.reshape((self.count, *([1] * missing), *self.shape))

    def reshaped(self, shape: tuple[int, ...]) -> Samples:
        """The samples with each sample's value in another shape."""
        return Samples(self.data.reshape((self.count, *shape)))

    def transposed(self, order: tuple[int, ...]) -> Samples:
        return Samples(self.data.transpose((0, *(i + 1 for i in order))))

    def to(self, unit: u.UnitBase) -> Samples:
        return Samples(self.data.to(unit))

    # -- arithmetic: numpy over the whole array after aligning the value axes
    def _apply(self, other, operation: Callable, reflected: bool = False):
        a, b = aligned(self, other)
        if reflected:
            a, b = b, a
        direct = _DIRECT.get(operation)
        if direct is not None and _plain(a) and _plain(b):
            result = direct(a, b)
            if result is not None:
                return Samples(result)
        return wrap(operation(a, b))

    @staticmethod
    def _power(base, exponent):
        return _power(base, exponent)

    def __neg__(self):
        return Samples(-self.data)

    def __repr__(self) -> str:
        return f"<Samples {self.count} of shape {self.shape} {self.unit}>"


def _plain(x) -> bool:
    return type(x) is u.Quantity and isinstance(x.unit, u.UnitBase)


def _sum(a: u.Quantity, b: u.Quantity, subtract: bool = False) -> u.Quantity | None:
    """a ± b on the values, b scaled into a's unit as astropy scales it (None: units that
    need astropy's own handling, which then says what is wrong)."""
    try:
        scale = conversion_scale(b.unit, a.unit)
    except u.UnitConversionError:
        return None
    bv = b.value if scale == 1.0 else b.value * scale
    return quantity(a.value - bv if subtract else a.value + bv, a.unit)


#: ``+ - * /`` of two plain quantities on their values, with the unit algebra cached
#: (physics.units): astropy's ufunc machinery costs more than the arithmetic on 10^5 samples
#: of a single number (the same numbers: the same float operations, the same scale).
_DIRECT: dict[Callable, Callable[[u.Quantity, u.Quantity], u.Quantity | None]] = {
    operator.mul: lambda a, b: quantity(a.value * b.value, unit_product(a.unit, b.unit)),
    operator.truediv: lambda a, b: quantity(a.value / b.value, unit_quotient(a.unit, b.unit)),
    operator.add: _sum,
    operator.sub: lambda a, b: _sum(a, b, subtract=True),
}


def _power(base, exponent):
    """base ** exponent where either may vary by sample; an exponent that varies needs a
    dimensionless base (a unit cannot be raised to many powers at once)."""
    e = np.asarray(exponent.to_value(u.dimensionless_unscaled)
                   if isinstance(exponent, u.Quantity) else exponent, dtype=float)
    if e.size == 1:
        return base ** float(e.ravel()[0])
    return quantity(np.power(base.to_value(u.dimensionless_unscaled), e))


def value_ndim(value) -> int:
    """How many axes a value has of its own (samples: without the sample axis)."""
    if isinstance(value, Samples):
        return len(value.shape)
    if isinstance(value, u.UnitBase):
        return 0
    return np.ndim(getattr(value, "value", value))


def aligned(a, b) -> tuple:
    """Both operands as Quantities ready for numpy, the samples' value axes padded so that
    they meet the other operand's axes and the sample axis stays first."""
    ndim = max(value_ndim(a), value_ndim(b))
    da = a.padded(ndim) if isinstance(a, Samples) else a
    db = b.padded(ndim) if isinstance(b, Samples) else b
    return da, db


def wrap(result):
    """The result of numpy on sample arrays as Samples (a unit stays a unit)."""
    if isinstance(result, u.UnitBase) or isinstance(result, Samples):
        return result
    return Samples(result)


def draw(normal: np.ndarray, nominal: u.Quantity, sigma: u.Quantity,
         per_element: list[np.ndarray] | None = None) -> Samples:
    """The samples of a `±` literal: nominal + σ·z, one standard-normal column per input."""
    nv = np.asarray(nominal.value, dtype=float)
    sv = np.broadcast_to(np.asarray(sigma.value, dtype=float), nv.shape)
    if nv.ndim == 0:
        return Samples(quantity(nv + sv * normal, nominal.unit))
    z = np.stack(per_element or [], axis=-1).reshape((len(normal), *nv.shape))
    return Samples(quantity(nv + sv * z, nominal.unit))


# ---- percentiles ------------------------------------------------------------------------------
# `--mc` shows the 16/50/84 % points of every cell. np.percentile finds them with a partition of
# all the samples at six ranks (about 2 ms for 10^5 samples with numpy 2.4). Here one counting
# pass finds which samples hold the ranks, as in a distribution counting sort (Knuth, TAOCP
# vol. 3, 5.2, algorithm D): every sample is put in one of 4,096 bins of equal width over the
# range where a sorted probe of 2,048 samples places the ranks (samples outside it in the end
# bins). A bin is a monotone function of the value (a subtraction and a multiplication, each
# correctly rounded, then clipping and truncation), so the bins' counts say exactly how many
# samples lie below each bin and which bin holds each rank; only that bin's samples (a few
# dozen) are sorted. A poor probe can only make that bin fuller, never a number wrong. The
# samples of several cells go through together (rows of one array, each row's bins numbered on
# from the last row's), one numpy call per step for all of them.
# The points are then interpolated between the ranks exactly as np.percentile does (method
# "linear", Hyndman & Fan's definition 7): the same numbers to the last bit, which
# :func:`_agrees` checks once per process before the first use.

#: The points `--mc` shows.
POINTS = (16, 50, 84)

#: Below this many samples np.percentile itself is as fast.
_FAST_FROM = 4096

#: Samples in the probe that places the bins.
_PROBE = 2048

#: The bins span the ranks' places in the probe and this many standard deviations of those
#: places (binomial) beyond, so that the ranks fall inside them with near certainty (outside,
#: in an end bin, they are still found, among more samples).
_MARGIN = 4

#: Bins of the counting pass (their numbers fit in 16 bits: a quarter of the memory traffic
#: of 64-bit ones).
_BINS = 4096


def percentiles(data: np.ndarray, points=POINTS, finite: bool = False) -> np.ndarray:
    """``np.percentile(data, points, axis=0)`` (method "linear"), the same numbers, faster for
    many samples: shape (len(points), *data.shape[1:]). ``finite``: the caller knows that no
    sample is nan or infinite (their mean is finite), which saves a pass over them."""
    data = np.asarray(data)
    if data.shape[0] < _FAST_FROM or data.dtype != np.float64 or not _agrees():
        return np.percentile(data, list(points), axis=0)
    if data.ndim == 1:
        return _points(data, points, finite)
    columns = data.reshape(data.shape[0], -1)
    out = np.empty((len(points), columns.shape[1]))
    for j in range(columns.shape[1]):
        out[:, j] = _points(np.ascontiguousarray(columns[:, j]), points, finite)
    return out.reshape((len(points), *data.shape[1:]))


def _points(x: np.ndarray, points, finite: bool = False) -> np.ndarray:
    """The percentiles of a 1-d float array, as np.percentile computes them."""
    if _plan(x.size, tuple(points)) is None or (not finite and np.isnan(x).any()):
        return np.percentile(x, list(points))           # nan, or an end point: numpy's own way
    return rows_percentiles(x[np.newaxis], points)[0]


class Scratch:
    """Arrays kept for reuse from one call to the next: a large new array costs the zeroing of
    its pages by the kernel each time (a few megabytes: about a millisecond)."""

    def __init__(self) -> None:
        self._arrays: dict[str, np.ndarray] = {}

    def array(self, name: str, shape: tuple[int, ...], dtype) -> np.ndarray:
        """An array of this shape and type, its contents undefined (the same memory as the
        last one of that name when that was as large)."""
        size = math.prod(shape)
        kept = self._arrays.get(name)
        if kept is None or kept.dtype != dtype or kept.size < size:
            kept = self._arrays[name] = np.empty(size, dtype)
        return kept[:size].reshape(shape)


def rows_percentiles(rows: np.ndarray, points=POINTS, scratch: Scratch | None = None
                     ) -> np.ndarray:
    """The percentiles of each row of a (k, n) float64 array without nan, as np.percentile
    finds them for the row alone, shape (k, len(points)); all rows at once, with one numpy
    call per step (n of at least 4,096, and no point at an end: see :func:`can_take_rows`);
    ``scratch`` keeps the working arrays for the next call."""
    plan = _plan(rows.shape[1], tuple(points))
    assert plan is not None, "rows_percentiles of rows it cannot take (can_take_rows)"
    previous_ranks, next_ranks, gamma, upper = plan
    ranks = sorted({*previous_ranks, *next_ranks})
    found = _order_statistics(rows, ranks, scratch or Scratch())
    column = {r: i for i, r in enumerate(ranks)}
    below = found[:, [column[r] for r in previous_ranks]]
    above = found[:, [column[r] for r in next_ranks]]
    # numpy's _lerp: a + (b - a) t, or b - (b - a)(1 - t) from t = 0.5 on (element by element:
    # a row's numbers are those it would have alone)
    difference = above - below
    result = np.add(below, difference * gamma)
    np.subtract(above, difference * (1 - gamma), out=result, where=upper)
    return result


def can_take_rows(n: int, dtype, points=POINTS) -> bool:
    """Whether :func:`rows_percentiles` gives np.percentile's numbers for rows of ``n``."""
    return n >= _FAST_FROM and dtype == np.float64 and _plan(n, tuple(points)) is not None \
        and _agrees()


@lru_cache(maxsize=64)
def _plan(n: int, points: tuple) -> tuple | None:
    """The ranks either side of each point and the interpolation weights, as np.percentile
    finds them for ``n`` values; None when a point falls on an end (numpy's own way then)."""
    q = np.true_divide(np.asarray(points), 100)         # as np.percentile
    virtual = (n - 1) * q                               # numpy's "linear" virtual index
    previous = np.floor(virtual)
    if not ((previous >= 0) & (virtual < n - 1)).all():
        return None
    previous_ranks = previous.astype(np.intp)
    gamma = np.asanyarray(virtual - previous_ranks, dtype=virtual.dtype)
    return (tuple(previous_ranks.tolist()), tuple((previous_ranks + 1).tolist()), gamma,
            gamma >= 0.5)


def _order_statistics(rows: np.ndarray, ranks: list[int], scratch: Scratch) -> np.ndarray:
    """The values of the given 0-based ranks (sorted) of each row of ``rows`` (k, n) in sorted
    order (no nan), shape (k, len(ranks))."""
    k, n = rows.shape
    probe = np.sort(rows[:, ::max(1, n // _PROBE)], axis=1)
    m = probe.shape[1]
    low = probe[:, max(_probe_place(ranks[0], n, m, -1), 0)]
    high = probe[:, min(_probe_place(ranks[-1], n, m, +1), m - 1)]
    found = np.empty((k, len(ranks)))
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        scale = (_BINS - 1) / (high - low)
        binned = np.isfinite(low) & np.isfinite(scale) & (scale > 0)
        for row in np.flatnonzero(~binned).tolist():
            # the ranks' neighbourhood is one value, or infinite: the whole partition
            found[row] = _partitioned(rows[row], ranks)
        if not binned.any():
            return found
        if not binned.all():
            rows, low, scale = rows[binned], low[binned], scale[binned]
        position = np.subtract(rows, low[:, np.newaxis],
                               out=scratch.array("position", rows.shape, np.float64))
        np.multiply(position, scale[:, np.newaxis], out=position)
        np.clip(position, 0.0, _BINS - 1.0, out=position)
    count = len(rows)
    # each row's bins numbered on from the last row's: one count and one look-up serve all
    bins = scratch.array("bins", rows.shape, np.intp)
    np.copyto(bins, position, casting="unsafe")         # truncation, as astype does
    if count > 1:
        bins += np.arange(0, count * _BINS, _BINS)[:, np.newaxis]
    up_to = np.cumsum(np.bincount(bins.ravel(), minlength=count * _BINS).reshape(count, _BINS),
                      axis=1)                            # a row's samples in its bins 0 … b
    groups = _adjacent(ranks)
    # the bin of rank r: the first whose count up to it exceeds r; the counts of row i, raised
    # by i n, make one rising sequence to search
    rising = (up_to + np.arange(0, count * n, n)[:, np.newaxis]).ravel()
    lifted = np.arange(0, count * n, n)[:, np.newaxis]
    first = np.searchsorted(rising, lifted + [g[0] for g in groups], side="right")
    last = np.searchsorted(rising, lifted + [g[-1] for g in groups], side="right")
    below = np.where(first % _BINS > 0, rising[first - 1] - lifted, 0)
    wanted = np.zeros(count * _BINS, dtype=bool)
    for start, stop in zip(first.ravel().tolist(), last.ravel().tolist()):
        wanted[start:stop + 1] = True
    chosen = wanted.take(bins, out=scratch.array("chosen", rows.shape, np.bool_))
    where = bins[chosen]
    values = rows[chosen]
    order = np.lexsort((values, where))         # by bin, then by value: sorted by value
    values = values[order]
    starts = np.searchsorted(where[order], first)           # where each group's samples start
    columns = {r: i for i, r in enumerate(ranks)}
    picked = np.empty((count, len(ranks)))
    for g, group in enumerate(groups):
        for r in group:
            picked[:, columns[r]] = values[starts[:, g] + (r - below[:, g])]
    if count == k:
        return picked
    found[binned] = picked
    return found


def _probe_place(rank: int, n: int, m: int, side: int) -> int:
    """Where rank ``rank`` of ``n`` samples falls in a sorted probe of ``m`` of them, moved
    ``_MARGIN`` standard deviations (and two for rounding) to one ``side``: the place
    scatters binomially, by sqrt(m p (1 - p)) around m p (p = rank / n)."""
    share = rank / (n - 1)
    margin = int(_MARGIN * math.sqrt(m * share * (1 - share))) + 2
    return (int(share * (m - 1)) if side < 0 else math.ceil(share * (m - 1))) + side * margin


def _adjacent(ranks: list[int]) -> list[list[int]]:
    """Sorted ranks in runs of neighbours (a point's ranks either side of it)."""
    groups: list[list[int]] = []
    for r in ranks:
        if groups and r - groups[-1][-1] <= 1:
            groups[-1].append(r)
        else:
            groups.append([r])
    return groups


def _partitioned(x: np.ndarray, ranks: list[int]) -> np.ndarray:
    return np.partition(x, ranks)[ranks]


_AGREES: list[bool] = []


def _agrees() -> bool:
    """Whether :func:`_points` gives np.percentile's numbers with this numpy (checked once)."""
    if not _AGREES:
        rng = np.random.default_rng(20260101)
        trials = [rng.standard_normal(_FAST_FROM + 17), np.exp(rng.standard_normal(10_001)),
                  np.round(rng.standard_normal(6000), 1),          # many equal values
                  np.concatenate([rng.standard_normal(5000), [np.inf, -np.inf]])]
        try:
            ok = all(np.array_equal(_points(t, POINTS), np.percentile(t, list(POINTS)))
                     for t in trials)
        except Exception:  # noqa: BLE001 - any surprise means: use numpy's own
            ok = False
        _AGREES.append(ok)
    return _AGREES[0]
