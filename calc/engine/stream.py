"""A sheet evaluated again and again on chunks of a table's rows (`relsheet map`).

The sheet is compiled once. Cells the table does not reach keep the values the sheet gave
them; for each chunk, the table cell's value is replaced by the chunk's columns (a record,
as `read_table` makes) and only the cells between the table and the wanted cells run,
vectorised over the chunk's rows.

A row out of a function's domain makes the whole vectorised evaluation fail; the chunk is
then halved until the failing rows stand alone (a run of at most :data:`ROW_BY_ROW` rows is
tried row by row), those rows get no value (NaN, a null in the output) and their first
errors are kept. Checks are judged per chunk; a check that fails names its first failing
rows the same way.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass, field
from typing import Any

import astropy.units as u
import numpy as np

from ..errors import DomainError, SheetError
from ..language.syntax import Dotted, Name
from ..physics.records import Record
from ..physics.units import conversion_scale, describe
from .cells import Cells
from .checks import run_check
from .context import EvaluationContext, entered
from .datafiles import on_table_axis
from .grid import Grid
from .run import Env, run_cell
from .uncertain import Uncertain
from .values import is_record, nominal, sigma

#: failing runs of rows this short are evaluated row by row instead of halved again
ROW_BY_ROW = 16
#: failing rows whose errors are kept (with their row numbers) for the summary
KEPT_ERRORS = 5
#: rows isolated one by one in a whole run, at most; beyond it a failing run of rows fails as
#: a whole (a sheet that fails on every row should not cost one evaluation a row)
ISOLATION_BUDGET = 20_000


@dataclass
class CheckTally:
    """One `check` line over all chunks."""

    line: int
    text: str
    failed_chunks: int = 0
    #: (row, detail) of the first failing rows
    rows: list[tuple[int, str]] = field(default_factory=list)
    error: str | None = None

    @property
    def passed(self) -> bool:
        return self.failed_chunks == 0 and self.error is None


@dataclass
class ChunkResult:
    """The wanted cells over one chunk: nominal values and σ (NaN where a row failed)."""

    rows: int
    values: dict[str, np.ndarray]
    sigmas: dict[str, np.ndarray]
    failed: np.ndarray
    #: (row within the chunk, message) of the first failing rows
    errors: list[tuple[int, str]]
    checks: dict[int, CheckTally]


def _on_axis(value, axis: str) -> bool:
    """Whether a value (a record: any of its fields) is on the axis named ``axis``."""
    if type(value) is Grid:
        return any(a.name == axis for a in value.axes)
    if isinstance(value, Record):
        return any(_on_axis(field, axis) for field in value.fields.values())
    return False


def _refuse_across_rows(cells: Cells, table: str, name: str) -> None:
    """A cell the table reaches must hold one value a row (it is on the table's axis, as the
    sheet evaluated it on its own small table): a sum, a mean, an element or a count over
    the rows would come out differently in each chunk."""
    cell = cells.cells[name]
    if cell.error is not None:
        return
    if _on_axis(cell.raw, table):
        return
    program = cells.programs[name]
    raise DomainError(f"`{name}` combines rows of the table `{table}` (it is not one value a "
                      "row); `relsheet map` evaluates the rows in chunks, and it would come "
                      "out differently in each", program.definition.span,
                      hint="map the cells that work row by row; a total over all rows needs "
                           "`relsheet eval` of a table that fits in memory",
                      source=program.source)


class ChunkEvaluator:
    """The cells that a table reaches, evaluated once per chunk of rows (see the module).

    Made by :meth:`calc.engine.sheet.Sheet.chunk_evaluator`. ``outputs`` are the cells wanted
    as columns; their units are those the sheet's own evaluation gave them.
    """

    def __init__(self, cells: Cells, context: EvaluationContext, table: str,
                 outputs: list[str]) -> None:
        self.context = context
        self.table = table
        self.outputs = list(outputs)
        reached = cells.graph.downstream(table)
        needed: set[str] = set()
        for name in self.outputs:
            needed |= {name} | cells.graph.upstream(name)
        self.checks = [p for p in cells.check_programs
                       if (set(p.left.deps) | set(p.right.deps) |
                           set(p.absolute.deps if p.absolute else ())) & (reached | {table})]
        for program in self.checks:
            for side in (program.left, program.right, program.absolute):
                if side is not None:
                    for dep in side.deps:
                        needed |= {dep} | cells.graph.upstream(dep)
        self.order = [n for n in cells.order if n in needed and n in reached]
        wanted: set[str] = set()
        for name in self.outputs:
            wanted |= {name} | cells.graph.upstream(name)
        for name in self.order:   # the first offender in evaluation order
            if name in wanted:
                _refuse_across_rows(cells, table, name)
        self.programs = {n: cells.programs[n] for n in self.order}
        self.base: Env = {k: v for k, v in cells.values.items() if k not in reached}
        self.units: dict[str, u.UnitBase] = {}
        self.uncertain: dict[str, bool] = {}
        for name in self.outputs:
            cell = cells.cells[name]
            if cell.error is None and not is_record(cell.raw):
                self.units[name] = nominal(cell.raw).unit
                self.uncertain[name] = sigma(cell.raw) is not None
        self.fields = _fields_used(cells, table, self.order, self.checks)
        span = cells.programs[table].definition.span
        #: the table cell's place in the file, which orders its axis among the others
        self.rank = span.line + span.column / 1e4
        self.isolated = 0

    # -- one evaluation
    def evaluate(self, columns: dict[str, u.Quantity]) -> Env:
        """Every needed cell over the rows of ``columns`` (each a Quantity of one value a
        row); raises the SheetError of the first cell that fails."""
        from .sheet import numeric_context

        with numeric_context(), entered(self.context):
            return self._evaluate(columns)

    def _evaluate(self, columns: dict[str, u.Quantity]) -> Env:
        env = dict(self.base)
        env[self.table] = on_table_axis(columns, self.table, self.rank)
        for name in self.order:
            env[name] = run_cell(self.programs[name], env)
        return env

    # -- a chunk, with failing rows set aside
    def chunk(self, columns: dict[str, u.Quantity], rows: int) -> ChunkResult:
        """The wanted cells and the checks over ``rows`` rows (``columns``: field name →
        Quantity of one value a row); rows that fail are marked, never raised."""
        from .sheet import numeric_context

        with numeric_context(), entered(self.context):
            return self._chunk(columns, rows)

    def _chunk(self, columns: dict[str, u.Quantity], rows: int) -> ChunkResult:
        result = ChunkResult(rows, {n: np.full(rows, np.nan) for n in self.outputs},
                             {n: np.full(rows, np.nan) for n in self.outputs if
                              self.uncertain.get(n)}, np.zeros(rows, dtype=bool), [],
                             {p.definition.span.line: CheckTally(p.definition.span.line, p.text)
                              for p in self.checks})
        for start, stop, env, err in self._runs(columns, 0, rows):
            if env is None:
                result.failed[start:stop] = True
                if len(result.errors) < KEPT_ERRORS and err is not None:
                    result.errors.append((start, err.message))
                continue
            self._store(result, env, start, stop)
            self._judge(result, columns, env, start, stop)
        return result

    def _runs(self, columns, start: int, stop: int
              ) -> Iterator[tuple[int, int, Env | None, SheetError | None]]:
        """(start, stop, env or None, error) for consecutive runs of rows covering the range."""
        todo = [(start, stop)]
        while todo:
            lo, hi = todo.pop()
            try:
                env = self._evaluate(_rows(columns, lo, hi, start, stop))
            except SheetError as err:
                if hi - lo == 1 or self.isolated >= ISOLATION_BUDGET:
                    self.isolated += hi - lo
                    yield lo, hi, None, err
                elif hi - lo <= ROW_BY_ROW:
                    todo.extend((r, r + 1) for r in range(hi - 1, lo - 1, -1))
                else:
                    mid = (lo + hi) // 2
                    todo.extend([(mid, hi), (lo, mid)])
                continue
            yield lo, hi, env, None

    def _store(self, result: ChunkResult, env: Env, start: int, stop: int) -> None:
        for name in self.outputs:
            value = env[name]
            unit = self.units[name]
            nominal_value = nominal(value)
            scale = conversion_scale(nominal_value.unit, unit)
            result.values[name][start:stop] = _per_row(nominal_value.value * scale, stop - start,
                                                       name)
            if name in result.sigmas:
                spread = sigma(value)
                result.sigmas[name][start:stop] = 0.0 if spread is None else _per_row(
                    spread.value * scale, stop - start, name)

    def _judge(self, result: ChunkResult, columns, env: Env, start: int, stop: int) -> None:
        for program in self.checks:
            tally = result.checks[program.definition.span.line]
            judged = run_check(program, env, set())
            if judged.error is not None:
                tally.error = tally.error or judged.error.message
                continue
            if judged.passed:
                continue
            tally.failed_chunks = 1
            # name the first failing rows: halve the run while a half fails (judging the
            # check again on slices of the values already computed)
            todo = [(start, stop)]
            while todo and len(tally.rows) < KEPT_ERRORS:
                lo, hi = todo.pop()
                part = run_check(program, _sliced(env, lo - start, hi - start, stop - start),
                                 set())
                if part.error is not None:
                    continue
                if part.passed:
                    continue
                if hi - lo == 1:
                    tally.rows.append((lo, part.text))
                    continue
                mid = (lo + hi) // 2
                todo.extend([(mid, hi), (lo, mid)])


def _rows(columns: dict[str, u.Quantity], lo: int, hi: int, start: int, stop: int
          ) -> dict[str, u.Quantity]:
    if lo == start and hi == stop:
        return columns
    return {k: v[lo:hi] for k, v in columns.items()}


def _sliced(env: Env, lo: int, hi: int, rows: int) -> Env:
    """The values of an evaluation over ``rows`` rows, cut to rows lo:hi (values that are
    not one a row stay whole)."""
    def cut(value):
        if isinstance(value, Grid):
            axes = tuple(a._replace(length=hi - lo) if a.length == rows else a
                         for a in value.axes)
            return Grid(cut(value.data), axes)
        if isinstance(value, u.Quantity):
            return value[lo:hi] if value.shape == (rows,) else value
        if isinstance(value, Uncertain):
            if value.nominal.shape != (rows,):
                return value
            return Uncertain(value.nominal[lo:hi], {
                k: p[lo:hi] if np.shape(p) == (rows,) else p for k, p in value.parts.items()},
                None if value.noise is None else {
                    k: p[lo:hi] if np.shape(p) == (rows,) else p
                    for k, p in value.noise.items()})
        if isinstance(value, Record):
            return Record(value.kind, {k: cut(v) for k, v in value.fields.items()}, value.label)
        return value

    return {name: cut(value) for name, value in env.items()}


def _per_row(values, rows: int, name: str) -> np.ndarray:
    array = np.asarray(values, dtype=float)
    if array.ndim == 0:
        return np.broadcast_to(array, (rows,))
    if array.shape != (rows,):
        raise SheetError(f"`{name}` has {array.size} values for {rows} rows: relsheet map "
                         "writes cells with one value a row",
                         hint="a cell that reduces over the table (sum, mean, …) cannot be "
                              "a column")
    return array


def _fields_used(cells: Cells, table: str, order: list[str], checks) -> set[str] | None:
    """The columns of the table that the evaluated cells read (`stars.ra`); None when a cell
    uses the table whole (then every column is needed)."""
    used: set[str] = set()
    definitions = [cells.cells[n].definition for n in order]
    for program in checks:
        definitions += [side.definition for side in (program.left, program.right,
                                                     program.absolute) if side is not None]
    stack: list[Any] = [d.expr for d in definitions if d.expr is not None]
    while stack:
        node = stack.pop()
        if isinstance(node, Dotted):
            if node.parts[0] == table:
                used.add(node.parts[1])
            continue
        if isinstance(node, Name):
            if node.id == table:
                return None
            continue
        if isinstance(node, tuple):
            stack.extend(node)
        elif hasattr(node, "span") and hasattr(node, "__slots__"):   # a syntax node
            stack.extend(getattr(node, slot) for slot in node.__slots__)
    return used


def unit_refusal(column: str, found: u.UnitBase, expected: u.UnitBase) -> str | None:
    """Why a column in unit ``found`` cannot stand for one the sheet has in ``expected``."""
    try:
        conversion_scale(found, expected)
    except u.UnitConversionError:
        return (f"column `{column}` is in {describe(found)}; the sheet reads it as "
                f"{describe(expected)}")
    return None
