"""Monte Carlo propagation: every cell evaluated once with all its samples at once.

``--mc N`` re-runs the compiled cells with every `±` input drawn N times from
its normal distribution (jointly, for correlated inputs), on the leading
axis of the arrays, so the whole evaluation is vectorised numpy
(:mod:`calc.engine.samples`). Imported sheets run first, each once, in the
same :class:`~calc.engine.context.Sampling`, so an input they share with the
importing sheet is drawn once; each runs under its own pinned constants.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from ..errors import InternalError, SheetError, UsageError
from .context import Progress, Sampling, entered, memory_budget
from .run import Env, failed_input, run_cell
from .values import ShownValue, is_uncertain, leaves, shown

if TYPE_CHECKING:
    from .sheet import Sheet
    from .summary_thread import Summariser

#: Largest number of samples × values a run may hold at once (8 bytes each: 2 GB).
MAX_SAMPLE_VALUES = 250_000_000


def imports_first(sheet: Sheet) -> list[Sheet]:
    """The sheet and every sheet it imports, each once, every import before its importer
    (an iterative depth-first walk: import chains may be deep)."""
    order: list[Sheet] = []
    seen: set[int] = set()
    stack: list[tuple[Sheet, bool]] = [(sheet, False)]
    while stack:
        current, expanded = stack.pop()
        if expanded:
            order.append(current)
            continue
        if id(current) in seen:
            continue
        seen.add(id(current))
        stack.append((current, True))
        for imported in reversed(list(current.namespaces.values())):
            if id(imported) not in seen:
                stack.append((imported, False))
    return order


def run(sheet, samples: int, seed: int | None, progress: Progress | None = None,
        points: bool = False) -> dict[str, ShownValue | SheetError]:
    """Per cell of ``sheet``: its shown form under Monte Carlo (sample mean and standard
    deviation, percentiles on request; cells that depend on no input as they are), or its
    error. ``points``: the percentiles will be asked for; each cell's mean, σ and
    percentiles are then found on a thread beside the evaluation as its samples are ready."""
    _check_memory(sheet, samples)
    sampling = Sampling(samples, seed, progress)
    out: dict[str, ShownValue | SheetError] = {}
    # with the points asked for, each cell's samples are summarised on a thread as they are
    # ready (numpy's reductions and selection run without the GIL, beside the evaluation of
    # the next cells). Without them the mean and σ are found here: handing them to a thread
    # cost more than it saved (bench P7)
    summariser = None
    if points:
        from .summary_thread import Summariser

        summariser = Summariser(points=True)
    try:
        for each in imports_first(sheet):
            env, out = _evaluate(each, sampling, progress if each is sheet else None,
                                 summariser if each is sheet else None)
            sampling.results[each] = env
    finally:
        if summariser is not None:
            summariser.close()   # what is queued still runs; Shown waits for it
    return out


def _check_memory(sheet, samples: int) -> None:
    """Refuse a run whose samples would not fit: every cell of every sheet holds ``samples``
    copies of its value, and an operation needs room for its operands and its result."""
    values = 0
    for each in imports_first(sheet):
        for cell in each.engine.cells.values():
            if is_uncertain(cell.raw):   # only cells that depend on an input hold samples
                values += sum(int(np.size(getattr(leaf, "value", 0)))
                              for leaf in leaves(cell.raw))
    needed = samples * max(values, 1) * 8 * 2
    budget = memory_budget()
    if needed > budget:
        largest = max(2, budget // (max(values, 1) * 8 * 2))
        raise UsageError(f"--mc {samples:,} would need about {needed / 1e9:.1f} GB for the "
                         f"samples of {values:,} values; about {budget / 1e9:.1f} GB is free",
                         hint=f"use --mc {largest:,} or fewer")


def _evaluate(sheet, sampling: Sampling, progress: Progress | None,
              summariser: Summariser | None = None
              ) -> tuple[Env, dict[str, ShownValue | SheetError]]:
    """One pass over a sheet's cells in order, with its inputs drawn."""
    cells = sheet.engine
    env: Env = {}
    out: dict[str, ShownValue | SheetError] = {}
    with entered(sheet.context.sampled(sampling)):
        for index, name in enumerate(cells.order):
            cell = cells.cells[name]
            if cell.error is not None:
                out[name] = cell.error
                continue
            program = cells.programs[name]
            failed = [d for d in program.deps if d not in env]
            if failed:
                out[name] = failed_input(program, failed)
                continue
            try:
                value = run_cell(program, env)
            except SheetError as err:
                out[name] = err.kept()
                continue
            except Exception as exc:  # a bug of ours
                out[name] = InternalError.wrapping(exc, f"sampling `{name}`",
                                                   cell.definition.span, program.source)
                continue
            env[name] = value
            out[name] = shown(value, summariser)
            if progress is not None:
                progress(index + 1, len(cells.order))
        if cells.solves:
            _solve_samples(cells, env, out, sampling.samples)
    return env, out


def _solve_samples(cells, env: Env, out: dict, count: int) -> None:
    """Each `solve` per sample (vectorised), then the cells its unknowns reach, again."""
    from .solve import solve_sampled

    for program in cells.solves:
        unknowns = program.unknowns
        if program.error is not None or any(isinstance(cells.solved.get(n), SheetError)
                                            for n in unknowns):
            continue
        solutions = [cells.cells[name].raw for name in unknowns]
        try:
            if any(is_uncertain(value) for value in solutions):
                values = solve_sampled(program, cells, env, count)
            else:
                # a solution that no uncertain input moves (to first order, through every
                # cell the equations read) is exact: solving each sample again would only
                # add the solver's rounding, ~1e-16, as a spread
                values = solutions
        except SheetError as err:
            located = err.located(program.span, program.source).kept()
            for name in unknowns:
                out[name] = located
                env.pop(name, None)
            values = None
        except Exception as exc:  # a bug of ours
            error = InternalError.wrapping(exc, "solving samples", program.span, program.source)
            for name in unknowns:
                out[name] = error
                env.pop(name, None)
            values = None
        if values is not None:
            for name, value in zip(unknowns, values):
                env[name] = value
                out[name] = shown(value)
        reached: set[str] = set()
        for name in unknowns:
            reached |= cells.graph.downstream(name)
        for name in cells.order:
            if name not in reached or name in unknowns or cells.cells[name].error is not None:
                continue
            program_of = cells.programs[name]
            failed = [d for d in program_of.deps if d not in env]
            if failed:
                out[name] = failed_input(program_of, failed)
                env.pop(name, None)
                continue
            try:
                value = run_cell(program_of, env)
            except SheetError as err:
                out[name] = err.kept()
                env.pop(name, None)
                continue
            env[name] = value
            out[name] = shown(value)
