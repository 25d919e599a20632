"""The cells of one sheet, compiled, ordered and evaluated; and what a change reaches.

:class:`Cells` owns the compiled programs, the dependency graph, the
evaluation order and the values. Every cell ends with a value or an error; a
failing cell does not stop the others, and cells that use it say which input
failed. :meth:`Cells.assign` gives one cell a new expression and evaluates
only the cells downstream of it, stopping where a value did not change.

Everything here runs inside the sheet's evaluation context (the caller
enters it).
"""

from __future__ import annotations

import heapq
from collections.abc import Iterable

import astropy.units as u
import numpy as np

from ..errors import CycleError, DomainError, InternalError, SheetError, Source, Span
from ..language.scope import Scope, ppn_parameter
from ..language.syntax import CellDef, Expr
from ..physics.records import is_date
from .checks import CheckProgram, CheckResult, compile_check, run_check
from .compile import InputTable, compile_cell
from .context import context, memory_budget
from .graph import DependencyGraph
from .run import CellProgram, Env, failed_input, run_cell
from .values import leaves, nominal, same, sigma


class Cell:
    """One cell as evaluated: its definition and either a value or an error."""

    __slots__ = ("definition", "source", "raw", "error", "warnings")

    def __init__(self, definition: CellDef, source: Source) -> None:
        self.definition = definition
        self.source = source
        #: the computed value, of any kind (:mod:`calc.engine.values`)
        self.raw: object = None
        self.error: SheetError | None = None
        #: validity warnings of the last computation ("r is 3 r_s: …")
        self.warnings: list[str] = []

    @property
    def value(self):
        """The value (the nominal value when it carries an uncertainty)."""
        return nominal(self.raw)

    @property
    def sigma(self) -> u.Quantity | None:
        """The standard uncertainty in the value's unit (first-order propagation), or None."""
        return sigma(self.raw)

    @property
    def name(self) -> str:
        return self.definition.name

    @property
    def line(self) -> int:
        return self.definition.span.line

    def __repr__(self) -> str:
        shown = self.error.message if self.error else self.value
        return f"<Cell {self.name} (line {self.line}): {shown}>"


#: Values smaller than this many numbers are never checked against the memory budget.
HELD_LIMIT = 1_000_000


def held_size(value) -> int:
    """How many numbers a value holds: its elements, and as many again per contribution."""
    if type(value) is u.Quantity:   # most cells: no leaves to walk
        return value.size
    total = 0
    for leaf in leaves(value):
        if is_date(leaf):   # its `.value` would format every date as text
            total += 2 * int(np.prod(leaf.shape))
            continue
        size = int(np.size(getattr(leaf, "value", 0)))
        total += size * (1 + len(getattr(leaf, "parts", ())))
    return total


def held_budget() -> int:
    """Numbers a sheet may hold: the memory budget in 8-byte floats, halved for temporaries."""
    return memory_budget() // 16


class Cells:
    """The compiled cells of one sheet, their order and their values."""

    def __init__(self, scope: Scope, inputs: InputTable) -> None:
        self.scope = scope
        self.inputs = inputs
        self.cells: dict[str, Cell] = {}
        #: definitions as the file has them (for revert and for saving what-ifs)
        self.original: dict[str, CellDef] = {}
        #: errors that no evaluation changes (a syntax error, a second definition)
        self.fixed_errors: dict[str, SheetError] = {}
        self.programs: dict[str, CellProgram] = {}
        #: cell name → value, the environment compiled cells read
        self.values: Env = {}
        self.graph = DependencyGraph()
        self.order: list[str] = []
        self.position: dict[str, int] = {}
        self.cycle_members: set[str] = set()
        self.check_programs: list[CheckProgram] = []
        self.checks: list[CheckResult] = []
        #: how many cell evaluations ran (tests count recomputation with it)
        self.evaluations = 0
        #: numbers the values computed so far hold (contributions of uncertain values too)
        self.held = 0
        #: the sheet's `solve` lines, compiled
        self.solves: list = []
        #: unknowns of a solve: the solved value, or the solve's error
        self.solved: dict[str, object] = {}
        #: the sheet's `correlation` lines, the inputs they set coefficients on, their errors
        self.correlations: list = []
        self.correlated: list = []
        self.correlation_errors: list[SheetError] = []

    # -- building
    def add(self, cell: Cell) -> None:
        self.cells[cell.name] = cell
        self.original[cell.name] = cell.definition

    def compile(self, definition: CellDef, source: Source,
                keep: tuple[u.UnitBase, Span] | None = None) -> CellProgram:
        if ppn_parameter(definition.name) is not None:
            # a PPN parameter is a plain number
            keep = (u.dimensionless_unscaled, definition.expr_span)
        return compile_cell(definition, self.scope, source, display_unit=keep,
                            inputs=self.inputs)

    def compile_all(self, check_definitions: Iterable, source: Source,
                    solve_definitions: Iterable = ()) -> None:
        """Compile every cell and check, order them, and evaluate everything once (then the
        solves, and what their unknowns reach)."""
        for rank, (name, cell) in enumerate(self.cells.items()):
            program = self.compile(cell.definition, cell.source)
            self.programs[name] = program
            self.graph.add(name, program.deps, rank)
        self.reorder()
        for name in self.order:
            self.compute(name)
        self.correlate(source)
        self.solves = []
        solve_definitions = list(solve_definitions)
        if solve_definitions:
            from .solve import compile_solve, plan  # (imported only by a sheet that solves)

            self.solves = [compile_solve(d, self, source) for d in solve_definitions]
            for program in self.solves:
                plan(program, self)
        self.resolve()
        self.check_programs = [compile_check(d, self.scope, source, self.inputs)
                               for d in check_definitions]
        self.run_checks()

    def reorder(self) -> set[str]:
        """Recompute the order and cycles; returns cells whose cycle membership changed.
        Every cell on a cycle gets the cycle's error; cells behind a cycle fail as inputs."""
        order, cycles = self.graph.order()
        self.order = order
        self.position = {name: i for i, name in enumerate(order)}
        members: set[str] = set()
        for path, component in cycles:
            text = " → ".join(path)
            for name in component:
                members.add(name)
                cell = self.cells[name]
                cell.raw = None
                cell.error = CycleError(
                    f"cycle: {text}", path, span=cell.definition.name_span,
                    hint="a cell cannot depend on itself, directly or through other cells",
                    source=cell.source)
        changed = members ^ self.cycle_members
        self.cycle_members = members
        return changed

    # -- evaluation
    def compute(self, name: str) -> None:
        cell = self.cells[name]
        program = self.programs[name]
        self.evaluations += 1
        cell.raw = None
        self.values.pop(name, None)
        fixed = self.fixed_errors.get(name)
        if fixed is not None:
            cell.error = fixed
            return
        if program.error is not None:
            cell.error = program.error
            return
        if name in self.solved:
            outcome = self.solved[name]
            if isinstance(outcome, SheetError):
                cell.error = outcome
            else:
                cell.error = None
                cell.raw = outcome
                self.values[name] = outcome
            return
        failed = [d for d in program.deps if self.cells[d].error is not None
                  or d not in self.values]
        if failed:
            cell.error = failed_input(program, failed)
            return
        cell.warnings = list(program.warnings)
        evaluation = context()
        before = evaluation.collect_warnings()
        try:
            value = run_cell(program, self.values)
        except SheetError as err:
            cell.error = err.kept()
            return
        except Exception as exc:  # a bug of ours: keep the sheet going, say so plainly
            cell.error = InternalError.wrapping(exc, f"computing `{name}`",
                                                cell.definition.span, program.source)
            return
        finally:
            found = evaluation.stop_warnings(before)
        cell.warnings.extend(w for w in found if w not in cell.warnings)
        size = held_size(value)
        if size > HELD_LIMIT and self.held + size > held_budget():
            cell.error = DomainError(
                f"`{name}` would make the sheet hold {(self.held + size) / 1e6:,.0f} million "
                f"numbers, more than fits in the memory free now", cell.definition.span,
                hint="use fewer or shorter arrays (`relsheet map` streams tables in chunks)",
                source=cell.source)
            return
        self.held += size
        cell.error = None
        cell.raw = value
        self.values[name] = value

    def correlate(self, source: Source) -> None:
        """Set the coefficients of the `correlation` lines on the inputs they name (again
        after a what-if, whose new input would not carry them)."""
        if not self.correlations and not self.correlated:
            return
        from .correlate import apply

        self.correlation_errors = apply(self.correlations, self, self.scope.namespaces, source,
                                        self.correlated)

    def resolve(self) -> list[Cell]:
        """Run every solve from its unknowns' current values, and what they reach; returns the
        cells that changed."""
        if not self.solves:
            return []
        from .solve import solve_nominal, with_uncertainty

        forced: set[str] = set()
        for program in self.solves:
            unknowns = [n for n in getattr(program, "unknowns", ())]
            if program.error is not None:
                for name in unknowns:
                    self.solved[name] = program.error
                forced |= set(unknowns)
                continue
            failed = [n for n in {*program.deps, *unknowns}
                      if self.cells[n].error is not None and n not in self.solved]
            if failed:
                error: SheetError = DomainError(f"the solve cannot run: `{failed[0]}` failed",
                                                program.span, source=program.source)
                for name in unknowns:
                    self.solved[name] = error
                forced |= set(unknowns)
                continue
            try:
                solution = with_uncertainty(program, self, solve_nominal(program, self))
            except SheetError as err:
                outcome: list = [err.located(program.span, program.source).kept()] * len(unknowns)
            except Exception as exc:  # a bug of ours
                outcome = [InternalError.wrapping(exc, "solving", program.span,
                                                  program.source)] * len(unknowns)
            else:
                outcome = solution
            for name, value in zip(unknowns, outcome):
                self.solved[name] = value
            forced |= set(unknowns)
        return self.propagate(forced) if forced else []

    def run_checks(self) -> None:
        failed = {n for n, c in self.cells.items() if c.error is not None}
        results = []
        for program in self.check_programs:
            try:
                results.append(run_check(program, self.values, failed))
            except Exception as exc:  # a bug of ours
                result = CheckResult(program.definition.span.line, program.text, False,
                                     program.kind, program.definition.op)
                result.error = InternalError.wrapping(exc, "judging a check",
                                                      program.definition.span,
                                                      program.left.source)
                results.append(result)
        self.checks = results

    # -- what-ifs
    def assign(self, name: str, expr: Expr, unit: Expr | None, source: Source,
               definition_span: Span | None = None) -> list[Cell]:
        """Give cell ``name`` a new expression (a new cell when there is none) and evaluate
        what it reaches; returns the cells whose value or error changed, in order."""
        old_cell = self.cells.get(name)
        forced: set[str] = {name}
        if old_cell is None:
            span = Span(1, 1, 1, 1 + len(name))
            definition = CellDef(name, span, expr, unit, None, None, expr.span)
            cell = Cell(definition, source)
            self.cells[name] = cell
            # cells that looked this name up (as a constant, unit or unknown) now see a cell
            for other in self.seeing(name):
                self.recompile(other)
                forced.add(other)
            program = self.compile(definition, source)
            self.programs[name] = program
            self.graph.add(name, program.deps, len(self.cells))
            structural = True
        else:
            previous = self.programs[name]
            definition = CellDef(name, old_cell.definition.name_span, expr, unit,
                                 None, None, definition_span or expr.span)
            old_cell.definition = definition
            old_cell.source = source
            # an override without `in` keeps the unit the sheet shows the cell in
            keep = (previous.unit, expr.span) if unit is None and previous.unit is not None \
                else None
            program = self.compile(definition, source, keep)
            self.programs[name] = program
            self.fixed_errors.pop(name, None)
            structural = self.graph.set_uses(name, program.deps)
        if structural:
            forced |= self.reorder()
        return self.propagate(forced)

    def restore(self, definition: CellDef, source: Source) -> list[Cell]:
        """Give a cell back a definition of the file that does not parse (its syntax error)."""
        name = definition.name
        cell = self.cells[name]
        cell.definition, cell.source = definition, source
        error = definition.syntax_error
        if error is None:  # pragma: no cover - only broken definitions come here
            raise ValueError("restore takes a definition that does not parse")
        self.fixed_errors[name] = error
        program = CellProgram(definition, source, error=error)
        self.programs[name] = program
        forced = {name}
        if self.graph.set_uses(name, program.deps):
            forced |= self.reorder()
        return self.propagate(forced)

    def seeing(self, name: str) -> list[str]:
        """Cells whose meaning changes when a cell called ``name`` appears (they looked the
        name up as a constant, a unit or an unknown name)."""
        return [other for other, program in self.programs.items()
                if name in program.looked_up and other != name]

    def recompile(self, name: str) -> None:
        cell = self.cells[name]
        program = self.compile(cell.definition, cell.source)
        self.programs[name] = program
        self.graph.set_uses(name, program.deps)

    def propagate(self, forced: set[str]) -> list[Cell]:
        """Evaluate ``forced`` cells and, while values change, the cells that use them."""
        heap: list[tuple[int, str]] = []
        queued: set[str] = set()
        changed: list[Cell] = []

        def enqueue(names: Iterable[str]) -> None:
            # a cell on a cycle has no place in the order: it changed, and so may its users
            todo = list(names)
            while todo:
                n = todo.pop()
                if n in queued:
                    continue
                queued.add(n)
                if n in self.cycle_members:
                    changed.append(self.cells[n])
                    todo.extend(self.graph.users.get(n, ()))
                else:
                    heapq.heappush(heap, (self.position[n], n))

        enqueue(forced)
        while heap:
            _, n = heapq.heappop(heap)
            cell = self.cells[n]
            before_value, before_error = cell.raw, cell.error
            self.compute(n)
            if not same(before_value, cell.raw) or _error_text(before_error) != \
                    _error_text(cell.error):
                changed.append(cell)
                enqueue(self.graph.users.get(n, ()))
        changed.sort(key=lambda c: self.position.get(c.name, -1))
        return changed

    def evaluate(self, definition: CellDef, source: Source):
        """The value of an expression in this sheet's scope, without adding a cell."""
        program = compile_cell(definition, self.scope, source,
                               inputs=self.inputs)
        if program.error is not None:
            raise program.error
        failed = [d for d in program.deps if self.cells[d].error is not None]
        if failed:
            raise failed_input(program, failed, source)
        return run_cell(program, self.values)


def _error_text(err: SheetError | None) -> str | None:
    return None if err is None else err.message
