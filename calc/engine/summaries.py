"""What Monte Carlo shows of a cell's samples: mean, standard deviation and percentiles.

``eval --mc`` prints these for every cell; with the percentiles asked for they are found on a
thread beside the evaluation, several cells at a time (:mod:`calc.engine.summary_thread`).
Cells with the same number of samples are then stacked and summarised with one numpy call per
step for all of them (:func:`summarised_together`). Every number is the one numpy gives for
the cell alone (np.mean, np.std with ddof=1, np.percentile), to the last bit.
"""

from __future__ import annotations

import numpy as np

from .samples import POINTS, Scratch, percentiles, rows_percentiles

#: A σ this many float roundings of its value, or fewer, is rounding noise, not an uncertainty:
#: contributions that cancel exactly leave that much behind.
ROUNDING_NOISE = 16 * np.finfo(float).eps

#: numpy 2's np.std takes the mean already found (``mean=``, with the reduced axis kept)
_STD_TAKES_MEAN = int(np.__version__.split(".")[0]) >= 2


def rounding_free(value, sigma):
    """σ with the rounding noise of exact cancellations set to zero; None when nothing is left
    (the value is exact)."""
    sigma = np.asarray(sigma, dtype=float)
    noise = sigma <= ROUNDING_NOISE * np.abs(np.asarray(value, dtype=float))
    if np.all(noise):
        return None
    if np.any(noise):
        sigma = np.where(noise, 0.0, sigma)
    return sigma if sigma.ndim else float(sigma)


def sample_spread(data: np.ndarray, mean, axis: int = 0) -> np.ndarray:
    """``np.std(data, axis=axis, ddof=1)``, the same numbers, given ``np.mean(data, axis)``:
    numpy's standard deviation divides the same sum by the same count for its mean, so the
    mean already found saves numpy a pass over the samples."""
    if _STD_TAKES_MEAN:
        return np.std(data, axis=axis, ddof=1, mean=np.expand_dims(mean, axis))
    return np.std(data, axis=axis, ddof=1)


class Summary:
    """What a cell's samples come to: mean, standard deviation (None when the samples differ
    only by rounding: the value is exact), the samples (None then too), and the points when
    found."""

    __slots__ = ("mean", "spread", "samples", "points")

    def __init__(self, mean, spread, samples: np.ndarray | None,
                 points: np.ndarray | None = None) -> None:
        self.mean = mean
        self.spread = spread
        self.samples = samples
        self.points = points


def finite(mean) -> bool:
    """Whether every sample is finite: their mean is (a nan or an infinite sample makes the
    sum nan or infinite)."""
    return bool(np.isfinite(mean).all())


def summarised(data: np.ndarray, points: bool = False) -> Summary:
    """The summary of one cell's samples (the sample axis first), with their points if asked."""
    with np.errstate(all="ignore"):   # samples with inf or nan give nan mean, σ and points
        mean = np.mean(data, axis=0)
        count = data.shape[0]
        spread = sample_spread(data, mean) if count > 1 else np.zeros(data.shape[1:])
        return _finished(data, mean, spread,
                         (lambda: percentiles(data, finite=finite(mean))) if points else None)


def _finished(data: np.ndarray, mean, spread, points) -> Summary:
    if data.shape[0] > 1 and rounding_free(mean, spread) is None:
        # every sample the same but for rounding (a cell the inputs cancel out of): exact
        return Summary(mean, None, None)
    return Summary(mean, spread, data, points() if points is not None else None)


def summarised_together(stack: np.ndarray, points: bool, scratch: Scratch | None = None
                        ) -> list[Summary]:
    """:func:`summarised` of each row of ``stack`` (k cells' samples of single numbers, one
    row each, finite or not), each call of numpy made once for all rows."""
    scratch = scratch or Scratch()
    with np.errstate(all="ignore"):
        means = np.mean(stack, axis=1)
        spreads = _row_spreads(stack, means, scratch)
        found = None
        if points:
            rows = np.isfinite(means)   # a row with nan or inf: numpy's own way, alone
            found = np.empty((len(stack), len(POINTS)))
            if rows.all():
                found[:] = rows_percentiles(stack, scratch=scratch)
            elif rows.any():
                found[rows] = rows_percentiles(stack[rows], scratch=scratch)
            for row in np.flatnonzero(~rows).tolist():
                found[row] = percentiles(stack[row])
    return [_finished(stack[i], means[i], spreads[i],
                      (lambda i=i: found[i]) if found is not None else None)
            for i in range(len(stack))]


def _row_spreads(stack: np.ndarray, means: np.ndarray, scratch: Scratch) -> np.ndarray:
    """``np.std(stack, axis=1, ddof=1)`` given ``np.mean(stack, axis=1)``, by numpy's own steps
    (numpy/_core/_methods.py, _var and _std: deviations, squared in place, summed, divided by
    n - 1, square root), the deviations in a kept array."""
    deviations = np.subtract(stack, means[:, np.newaxis],
                             out=scratch.array("deviations", stack.shape, np.float64))
    np.square(deviations, out=deviations)
    total = np.add.reduce(deviations, axis=1)
    np.true_divide(total, max(stack.shape[1] - 1, 0), out=total)
    return np.sqrt(total, out=total)
