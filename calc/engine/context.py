"""The state of one evaluation, in one object.

Everything that used to be ambient — whether inputs evaluate to first-order
contributions or to Monte Carlo samples, the random generator and the draws
made so far, whether operations check their results, the validity warnings
being collected, the pinned constant sets — lives on an
:class:`EvaluationContext`. Evaluation receives it from the one ContextVar of
:mod:`calc.physics.environment` (which the context extends, so that library
functions see the pinned constants and the warning sink through the same
object). A sheet owns its context; entering it is what "evaluating this sheet"
means, so two sheets, a solver's inner evaluations or an editor's many files
can be evaluated in one process without seeing each other's state. Nothing
here is global, and nothing grows with the number of sheets built.

A Monte Carlo run shares one :class:`Sampling` between the contexts of the
sheets it evaluates (a sheet and the sheets it imports, each with its own
pinned constants), so an input shared through imports is drawn once.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING, cast

import numpy as np

from ..physics.constants import ConstantSelection
from ..physics.environment import Environment, current, entered

if TYPE_CHECKING:
    from .uncertain import Input

#: progress(done, total), called during long Monte Carlo loops
Progress = Callable[[int, int], None]


def memory_budget() -> int:
    """Bytes an evaluation may plan to hold: half the memory available now (Linux's
    MemAvailable; else a quarter of the physical memory; else 2 GB), and no more than half of
    an address-space limit the process runs under."""
    budget = 2 * 1024**3
    try:
        with open("/proc/meminfo", encoding="ascii") as info:
            for line in info:
                if line.startswith("MemAvailable:"):
                    budget = int(line.split()[1]) * 1024 // 2
                    break
    except OSError:
        try:
            import os

            budget = os.sysconf("SC_PHYS_PAGES") * os.sysconf("SC_PAGE_SIZE") // 4
        except (ValueError, OSError, AttributeError):
            pass
    try:
        import resource

        limit = resource.getrlimit(resource.RLIMIT_AS)[0]
        if limit != resource.RLIM_INFINITY:
            budget = min(budget, limit // 2)
    except (ImportError, OSError, ValueError):
        pass
    return budget


class Sampling:
    """One Monte Carlo run: the number of samples, the generator, the draws so far, and each
    sheet's sampled values (so that an importing sheet reads its imports' samples)."""

    def __init__(self, samples: int, seed: int | None, progress: Progress | None = None) -> None:
        self.samples = samples
        self.rng = np.random.default_rng(seed)
        self.progress = progress
        #: standard-normal draws per input, made on first use and shared by every sheet of the run
        self.drawn: dict[Input, np.ndarray] = {}
        #: sampled values by sheet (keyed by the sheet object) and cell name
        self.results: dict[object, dict[str, object]] = {}

    def normal(self, key: Input) -> np.ndarray:
        """The standard-normal draws of input ``key`` (the same array every time it is asked)."""
        draws = self.drawn.get(key)
        if draws is None:
            if key.correlations:
                self._draw_jointly(key)
                return self.drawn[key]
            draws = self.drawn[key] = self.rng.standard_normal(self.samples)
        return draws

    def _draw_jointly(self, key: Input) -> None:
        """Standard-normal draws of every input correlated with ``key`` (directly or not),
        with their correlation matrix: z = L n, L L^T = R (eigen-decomposition, so a
        semi-definite matrix works too)."""
        from .correlate import groups, matrix

        (group,) = groups([key])
        values, vectors = np.linalg.eigh(matrix(group))
        root = vectors * np.sqrt(np.clip(values, 0.0, None))
        independent = self.rng.standard_normal((len(group), self.samples))
        joint = root @ independent
        for member, row in zip(group, joint):
            self.drawn[member] = row


class EvaluationContext(Environment):
    """Everything one evaluation needs besides the compiled cells."""

    def __init__(self, selection: ConstantSelection | None = None,
                 ephemeris: Path | None = None, sampling: Sampling | None = None) -> None:
        super().__init__(selection, ephemeris)
        #: None: first-order (linear) propagation; else the Monte Carlo run in progress
        self.sampling = sampling
        #: operations check their results for nan/inf (only while a failing cell re-runs)
        self.checking = False
        #: floating-point events (overflow, invalid, division by zero) numpy reported so far
        self.fp_events = 0
        #: cells whose value holds nan or infinity (a written `inf` that carries through)
        self.nonfinite: set[str] = set()
        #: the folder data files (`read_table`) must stay in: the sheet's project root
        self.root: Path | None = None

    @property
    def monte_carlo(self) -> bool:
        return self.sampling is not None

    @property
    def samples(self) -> int:
        """The number of Monte Carlo samples (only meaningful under Monte Carlo)."""
        return self.sampling.samples if self.sampling is not None else 0

    def sampled(self, sampling: Sampling) -> EvaluationContext:
        """A context like this one (same constants and ephemeris) for a Monte Carlo run."""
        return EvaluationContext(self.selection, self.ephemeris, sampling)

    # -- validity warnings of one cell
    def collect_warnings(self) -> list[str] | None:
        """Start collecting the warnings of a cell; returns what was being collected before
        (give it to :meth:`stop_warnings`)."""
        before = self.warnings
        self.warnings = []
        return before

    def stop_warnings(self, before: list[str] | None) -> list[str]:
        found = self.warnings or []
        self.warnings = before
        return found

    @contextmanager
    def checks_on(self) -> Iterator[None]:
        """Every operation checks its result while the block runs."""
        before = self.checking
        self.checking = True
        try:
            yield
        finally:
            self.checking = before


def context() -> EvaluationContext:
    """The evaluation in progress. Engine code runs only inside one (see :func:`entered`)."""
    return cast(EvaluationContext, current())


__all__ = ["EvaluationContext", "Sampling", "context", "entered"]


def note_fp_event(kind: str, flag: int) -> None:
    """numpy's report of a floating-point event (errstate "call"): counted in the context in
    force, so a cell knows whether its arithmetic met an overflow or an invalid operation."""
    evaluation = current()
    if isinstance(evaluation, EvaluationContext):
        evaluation.fp_events += 1
