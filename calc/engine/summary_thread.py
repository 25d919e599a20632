"""The thread that summarises cells' samples beside a Monte Carlo evaluation.

numpy lets go of the GIL only inside each call, and each call's return on this thread waits for
the GIL that the evaluation holds most of the time; every hand-over of a cell wakes the thread,
which then takes the GIL too. A thread summarising each cell as it came (a score of calls per
cell) slowed the evaluation beside it about as much as it saved (bench P7b), so cells are
handed over :data:`BATCH` at a time and summarised together
(:func:`calc.engine.summaries.summarised_together`). Imported only by a run that asks for the
percentiles.
"""

from __future__ import annotations

import queue
import threading
from concurrent.futures import Future

import numpy as np

from .samples import Scratch, can_take_rows
from .summaries import summarised, summarised_together

#: Cells handed over and summarised together, in one stack (their samples are copied into it):
#: four did best of three to eight tried with bench P7b.
BATCH = 4


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
