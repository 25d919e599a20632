"""What Monte Carlo shows of a cell's samples: mean, standard deviation and percentiles.

``eval --mc`` prints these for every cell. With the percentiles asked for they are found on
one thread beside the evaluation (:class:`Summariser`), several cells at a time: numpy lets go
of the GIL only inside each call, and each call's return waits for the GIL that the evaluation
holds most of the time, so a thread making a score of calls per cell slowed the evaluation
beside it about as much as it saved (bench P7b). Cells with the same number of samples are
stacked and summarised with one call per step for all of them. Every number is the one numpy
gives for the cell alone (np.mean, np.std with ddof=1, np.percentile), to the last bit.
"""

from __future__ import annotations

import queue
import threading
from concurrent.futures import Future

import numpy as np

from .samples import POINTS, Scratch, can_take_rows, percentiles, rows_percentiles

#: A σ this many float roundings of its value, or fewer, is rounding noise, not an uncertainty:
#: contributions that cancel exactly leave that much behind.
ROUNDING_NOISE = 16 * np.finfo(float).eps

#: Cells handed over and summarised together, in one stack (their samples are copied into it):
#: four did best of three to eight tried with bench P7b.
BATCH = 4

#: numpy 2's np.std takes the mean already found (``mean=``, with the reduced axis kept)
_STD_TAKES_MEAN = np.lib.NumpyVersion(np.__version__) >= "2.0.0"


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


class _Pending(Future):
    """A summary to come; asking for it first has its batch summarised, whole or not."""

    def __init__(self, summariser: Summariser) -> None:
        super().__init__()
        self._summariser = summariser

    def result(self, timeout=None):
        if not self.done():
            self._summariser.flush()
        return super().result(timeout)


class Summariser:
    """A thread that summarises cells' samples as the evaluation hands them over,
    :data:`BATCH` at a time (fewer at the end of the run, or when a summary is asked for
    before then). Cells are handed over a batch at a time too: every hand-over wakes the
    thread, and a thread waking takes the GIL from the evaluation."""

    def __init__(self, points: bool) -> None:
        self.points = points
        self._scratch = Scratch()
        self._gathered: list = []
        self._lock = threading.Lock()
        self._queue: queue.SimpleQueue = queue.SimpleQueue()
        self._thread = threading.Thread(target=self._work, name="relsheet-summaries",
                                        daemon=True)
        self._thread.start()

    def submit(self, data: np.ndarray) -> Future:
        """The summary of ``data`` (the sample axis first), to come."""
        future = _Pending(self)
        with self._lock:
            self._gathered.append((data, future))
            if len(self._gathered) >= BATCH:
                self._hand_over()
        return future

    def flush(self) -> None:
        """Hand over what is gathered without waiting for a whole batch."""
        with self._lock:
            self._hand_over()

    def close(self) -> None:
        """No more cells: the thread summarises what is handed over, then ends."""
        self.flush()
        self._queue.put(None)

    def _hand_over(self) -> None:
        if self._gathered:
            self._queue.put(self._gathered)
            self._gathered = []

    def _work(self) -> None:
        while True:
            batch = self._queue.get()
            if batch is None:
                return
            self._summarise(batch)

    def _summarise(self, batch: list) -> None:
        """Stack the cells that can be stacked (samples of single numbers, of one length, in
        floats); summarise the rest one by one."""
        stackable = [(data, future) for data, future in batch
                     if data.ndim == 1 and can_take_rows(data.shape[0], data.dtype)]
        stacked = {id(future) for _, future in stackable}
        alone = [(data, future) for data, future in batch if id(future) not in stacked]
        try:
            if len(stackable) > 1 and len({data.shape for data, _ in stackable}) == 1:
                arrays = [data for data, _ in stackable]
                stack = np.stack(arrays, out=self._scratch.array(
                    "stack", (len(arrays), *arrays[0].shape), np.float64))
                for (data, future), summary in zip(stackable, summarised_together(
                        stack, self.points, self._scratch)):
                    if summary.samples is not None:
                        summary.samples = data      # the cell's own array, not the stack's row
                    future.set_result(summary)
            else:
                alone = batch
            for data, future in alone:
                future.set_result(summarised(data, self.points))
        except BaseException as exc:  # noqa: BLE001 - the reader of the summary raises it
            for _, future in batch:
                if not future.done():
                    future.set_exception(exc)
