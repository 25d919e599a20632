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
# all the samples at six ranks (about 2.3 ms for 10^5 samples with numpy 2.4). Here the ranks are
# bracketed first, as in Floyd & Rivest's selection (Comm. ACM 18, 165, 1975): the ranks' places
# in a sorted probe of 2,048 of the samples give bounds that hold each pair of ranks with near
# certainty; one comparison pass counts the samples below a pair's lower bound and picks those
# between its bounds (a few per cent), and only those are partitioned. Whenever a bracket misses
# (possible, never wrong: the count says so), all samples are partitioned as numpy does. The
# points are then interpolated between the ranks exactly as np.percentile does (method "linear",
# Hyndman & Fan's definition 7): the same numbers to the last bit, which :func:`_agrees` checks
# once per process before the first use.

#: The points `--mc` shows.
POINTS = (16, 50, 84)

#: Below this many samples np.percentile itself is as fast.
_FAST_FROM = 4096

#: Samples in the probe that brackets the ranks.
_PROBE = 2048

#: Half the width of a bracket, in standard deviations of a rank's place in the probe. Three
#: missed a bracket in 12 of the 50 cells of bench/workloads.mc_sheet (seed 1): cells computed
#: from the same inputs share one probe, so a probe a little off the middle (3σ, by chance) made
#: every cell derived from it miss, and a miss costs the whole partition (three times the
#: bracketing). Four misses a given bound about once in 30,000 probes.
_MARGIN = 4


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
    plan = _plan(x.size, tuple(points))
    if plan is None or (not finite and np.isnan(x).any()):
        return np.percentile(x, list(points))           # nan, or an end point: numpy's own way
    previous_ranks, next_ranks, gamma, upper = plan
    found = _order_statistics(x, sorted({*previous_ranks, *next_ranks}))
    below = np.array([found[r] for r in previous_ranks])
    above = np.array([found[r] for r in next_ranks])
    # numpy's _lerp: a + (b - a) t, or b - (b - a)(1 - t) from t = 0.5 on
    difference = above - below
    result = np.add(below, difference * gamma)
    np.subtract(above, difference * (1 - gamma), out=result, where=upper)
    return result


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


def _order_statistics(x: np.ndarray, ranks: list[int]) -> dict[int, float]:
    """The values of the given 0-based ranks (sorted) of ``x`` in sorted order (no nan)."""
    n = x.size
    probe = np.sort(x[::max(1, n // _PROBE)])
    m = probe.size
    found: dict[int, float] = {}
    for group in _adjacent(ranks):
        # the place of rank r's value in the probe scatters by sqrt(m p (1 - p)) places
        # around m p (p = r / n; binomial): _MARGIN of those either side, and two for rounding
        share = group[0] / (n - 1)
        margin = int(_MARGIN * math.sqrt(m * share * (1 - share))) + 2
        first = int(share * (m - 1)) - margin
        last = math.ceil(group[-1] / (n - 1) * (m - 1)) + margin
        low = probe[first] if first >= 0 else -np.inf
        high = probe[last] if last < m else np.inf
        inside = x >= low                       # (no nan here: x < low is the rest)
        below = n - int(np.count_nonzero(inside))
        np.logical_and(inside, x <= high, out=inside)
        between = np.compress(inside, x)
        if not (below <= group[0] and group[-1] < below + between.size):
            return _partitioned(x, ranks)       # a bracket missed: the whole partition
        between.partition([r - below for r in group])
        found.update((r, between[r - below]) for r in group)
    return found


def _adjacent(ranks: list[int]) -> list[list[int]]:
    """Sorted ranks in runs of neighbours (a point's ranks either side of it)."""
    groups: list[list[int]] = []
    for r in ranks:
        if groups and r - groups[-1][-1] <= 1:
            groups[-1].append(r)
        else:
            groups.append([r])
    return groups


def _partitioned(x: np.ndarray, ranks: list[int]) -> dict[int, float]:
    work = np.partition(x, ranks)
    return {r: work[r] for r in ranks}


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
