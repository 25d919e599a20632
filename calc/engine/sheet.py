"""A sheet: its cells, their values, and recomputation of what a change reaches.

``Sheet.load(path)`` reads, parses, compiles and evaluates a sheet. Every cell
ends with a value or an error; a failing cell does not stop the others, and
cells that use it say which input failed. ``sheet.set(name, "expr")``
recomputes only the cells downstream of ``name`` and returns those whose
value changed.

This is the public API every front end uses (command line, prompt,
completion, exports, comparisons, annotation, the editor server): the pieces
behind it are :mod:`~calc.engine.build` (statements, constants, imports),
:mod:`~calc.engine.cells` (compile, order, propagate),
:mod:`~calc.engine.montecarlo` and :mod:`~calc.engine.budget`. Each sheet owns
an :class:`~calc.engine.context.EvaluationContext` and evaluates only inside
it.
"""

from __future__ import annotations

import gc
import warnings
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np

from ..errors import (
    CycleError,
    InputFailedError,
    InternalError,
    SheetError,
    Source,
    Span,
    UnitError,
    split_lines,
)
from ..files import read_sheet
from ..language.parse import parse_expression, parse_line
from ..language.scope import Scope
from ..language.syntax import CellDef, CheckDef, Expr, PlotDef, TableDef, UseDef
from ..physics.constants import ConstantSelection
from ..physics.units import conversion_scale, physical_type, unit_table, unit_text
from .build import Built, Imports, build, function_errors, import_sheet
from .cells import Cell, Cells
from .checks import CheckResult
from .compile import InputTable
from .context import EvaluationContext, Progress, entered, note_fp_event
from .grid import Grid
from .truth import Truth
from .values import ShownValue, is_record

if TYPE_CHECKING:
    from .budget import BudgetRow
    from .stream import ChunkEvaluator

if TYPE_CHECKING:
    from ..outputs.figures import PlotSpec, TableSpec

#: A set of cell names (spelled here because the method `Sheet.set` hides the builtin in
#: the class body).
Names = set[str]


@contextmanager
def numeric_context() -> Iterator[None]:
    """Floating-point problems become errors we raise ourselves, never stray warnings.

    The cyclic garbage collector pauses meanwhile: building a sheet allocates many
    small objects and no reference cycles, and repeated collections over astropy's
    large unit registry would cost a fifth of the time.
    """
    collecting = gc.isenabled()
    gc.disable()
    try:
        # numpy reports overflows and invalid operations to the evaluation context instead of
        # warning: a cell whose arithmetic met none needs no scan of its result for nan/inf
        with np.errstate(all="call", call=note_fp_event), warnings.catch_warnings():
            warnings.simplefilter("ignore")
            yield
    finally:
        if collecting:
            gc.enable()


def _is_dated(value) -> bool:
    from ..physics.records import is_date
    from .dates import UncertainDate

    if isinstance(value, Grid):
        value = value.data
    return is_date(value) or isinstance(value, UncertainDate)


def _merged(first: list[Cell], second: list[Cell]) -> list[Cell]:
    """Changed cells of two steps, each once."""
    seen = {id(c) for c in first}
    return first + [c for c in second if id(c) not in seen]


class Sheet:
    """A parsed and evaluated sheet. Build with :meth:`load` or :meth:`from_text`."""

    def __init__(self, source: Source, constants: list[str] | None = None,
                 root: str | Path | None = None, *, imports: Imports | None = None,
                 chain: tuple[Path, ...] = (), prefix: str = "") -> None:
        """``constants`` (words of a `constants` line) replaces the sheet's own pinning;
        ``root`` is the folder imports must stay in (default: this sheet's folder). An
        imported sheet is made with the ``imports`` of its top sheet, the ``chain`` of files
        that led to it, and the ``prefix`` of its namespace (`sys.`)."""
        self.source = source
        self.prefix = prefix
        here = source.path if source.path is not None else (
            None if source.folder is None else Path(source.label).resolve())
        if imports is None:
            top = Path(root).resolve() if root is not None else (
                here.parent if here is not None else Path.cwd().resolve())
            imports = Imports(top)
        self.imports = imports
        self.chain = chain or ((here,) if here is not None else ())
        self.context = EvaluationContext()
        self.context.root = imports.root
        with numeric_context():
            try:
                self._build(constants)
            except SheetError:
                raise
            except RecursionError as exc:
                raise InternalError.wrapping(exc, "building the sheet", source=source) from exc

    @property
    def root(self) -> Path:
        """The folder imported sheets must stay in."""
        return self.imports.root

    # -- construction
    @classmethod
    def load(cls, path: str | Path, constants: list[str] | None = None,
             root: str | Path | None = None) -> Sheet:
        """Read and evaluate a sheet file. Raises InputError if it cannot be read."""
        return cls(read_sheet(path), constants, root)

    @classmethod
    def from_text(cls, text: str, label: str = "<text>") -> Sheet:
        return cls(Source(label, text))

    def _import(self, use: UseDef, built: Built) -> Sheet | None:
        def make(source: Source, chain: tuple[Path, ...]) -> Sheet:
            return Sheet(source, imports=self.imports, chain=chain,
                         prefix=f"{self.prefix}{use.namespace}.")

        return import_sheet(use, self.source, self.chain, self.imports, make, built.errors)

    def _build(self, constants: list[str] | None) -> None:
        built = build(self.source, constants, self._import)
        #: notes, cells, tables and plots in file order
        self.items: list = built.items
        self.errors: list[SheetError] = built.errors
        #: imported sheets by namespace (`use "x.sheet" as ns`)
        self.namespaces: dict[str, Sheet] = built.namespaces
        self.selection: ConstantSelection = built.selection
        #: `constants … uncertain`: named constants carry their published uncertainties
        self.uncertain_constants = built.uncertain_constants
        self.context.selection = built.selection
        if built.ephemeris is not None:
            self._use_kernel(built.ephemeris)
        scope = Scope([c.name for c in built.cells], self.selection,
                      namespaces=self.namespaces, failed_namespaces=built.failed_namespaces)
        #: the sheet's own functions (`ratio(x, y) = …`) by name
        self.functions = built.functions
        scope.functions = built.functions
        scope.failed_functions = built.failed_functions
        self.errors += function_errors(built, self.source)
        self._cells = Cells(scope, InputTable(self.uncertain_constants, self.prefix,
                                              self.imports.inputs))
        for cell in built.cells:
            self._cells.add(cell)
        self._cells.fixed_errors.update(built.fixed_errors)
        scope.cell_names = self._cells.cells.keys()
        self._cells.correlations = built.correlations
        with entered(self.context):
            self._cells.compile_all(built.check_definitions, self.source, built.solves)

    def _use_kernel(self, statement) -> None:
        """`ephemeris "FILE.bsp"`: a JPL kernel beside the sheet, inside the project root."""
        from ..errors import InputError

        here = self.source.path.parent if self.source.path is not None else Path.cwd()
        try:
            path = (here / statement.path).resolve()
            path.relative_to(self.root)
        except ValueError:
            self.errors.append(InputError(
                f"the kernel `{statement.path}` lies outside the project root", statement.path_span,
                hint="keep kernels below the top sheet's folder, or pass --root",
                source=self.source))
            return
        if not path.is_file():
            self.errors.append(InputError(
                f"no kernel file `{statement.path}`", statement.path_span,
                hint="a JPL SPK kernel (.bsp), e.g. de440s.bsp from JPL's public archive",
                source=self.source))
            return
        try:
            from jplephem.spk import SPK

            SPK.open(str(path)).close()
        except Exception as exc:  # noqa: BLE001 - jplephem's refusals of a file are of any kind
            self.errors.append(InputError(
                f"`{statement.path}` cannot be read as a JPL SPK kernel ({exc})",
                statement.path_span, hint="name a .bsp kernel file", source=self.source))
            return
        self.context.ephemeris = path

    # -- what-ifs
    def set(self, name: str, text: str, label: str | None = None) -> list[Cell]:
        """Give cell ``name`` the expression ``text`` (a new cell if there is none).

        Recomputes only what depends on it and returns the cells whose value or
        error changed, in evaluation order. A syntax error in ``text`` raises
        :class:`~calc.errors.SheetSyntaxError` and changes nothing.
        """
        source = Source(label or f"--set {name}", text)
        namespace, _, inner = name.partition(".")
        if inner and namespace in self.namespaces and name not in self:
            # a cell of an imported sheet: that sheet re-evaluates with the override, then every
            # sheet that imports it (this one among them) refreshes the cells that read it
            imported = self.namespaces[namespace]
            imported.set(inner, text, label)
            return self._refresh_importers_of(imported)
        with numeric_context(), entered(self.context):
            line = parse_expression(text, source)
            self._same_dimension(name, line, source)
            changed = self._cells.assign(name, line.expr, line.unit, source)
            self._cells.correlate(self.source)
            changed = _merged(changed, self._cells.resolve())
            self._cells.run_checks()
            return changed

    def _refresh_importers_of(self, changed: Sheet) -> list[Cell]:
        """After ``changed`` (a sheet imported somewhere below this one) took an override:
        recompile and recompute, in every sheet from the imports up to this one, the cells
        that read a namespace bound to a sheet that changed; returns this sheet's changed
        cells."""
        from .montecarlo import imports_first

        moved = {id(changed)}
        mine: list[Cell] = []
        for each in imports_first(self):
            if id(each) in moved:
                continue
            namespaces = [ns for ns, sheet in each.namespaces.items() if id(sheet) in moved]
            if not namespaces:
                continue
            cells = each.engine
            with numeric_context(), entered(each.context):
                forced: set[str] = set()
                for namespace in namespaces:
                    for name in cells.seeing(namespace):
                        cells.recompile(name)
                        forced.add(name)
                if cells.reorder():
                    forced |= set(cells.cells)
                changed_cells = cells.propagate(forced)
                cells.run_checks()
            if changed_cells:
                moved.add(id(each))
            if each is self:
                mine = changed_cells
        return mine

    def _same_dimension(self, name: str, line, source: Source) -> None:
        """An override keeps a cell's dimension: `--set omdot=4.2 deg` where the sheet has
        deg / yr is refused at the override, naming the dimension the sheet expects."""
        cell = self._cells.cells.get(name)
        if cell is None or cell.error is not None or is_record(cell.raw):
            return
        definition = CellDef(name, Span(1, 1, 1, 1 + len(name)), line.expr, line.unit, None,
                             None, line.span)
        try:
            new = self._cells.evaluate(definition, source)
        except SheetError:
            return  # the cell will show the error of its new expression
        if is_record(new) or is_record(cell.raw):
            return
        old_date, new_date = _is_dated(cell.raw), _is_dated(new)
        if old_date or new_date:
            if old_date != new_date:
                raise UnitError(f"`{name}` is a {'date' if old_date else 'quantity'}, the new "
                                f"value {'a date' if new_date else 'is not a date'}",
                                line.expr.span, hint="give a value of the same kind",
                                source=source)
            return
        if isinstance(cell.raw, Grid) or isinstance(new, Grid) or isinstance(new, Truth):
            return
        old_unit, new_unit = cell.raw.unit, new.unit  # type: ignore[attr-defined]
        try:
            conversion_scale(new_unit, old_unit)
        except u.UnitConversionError:
            raise UnitError(
                f"`{name}` has the dimension {physical_type(old_unit)} ({unit_text(old_unit)}), "
                f"the new value {physical_type(new_unit)}" + (
                    f" ({unit_text(new_unit)})" if unit_text(new_unit) else ""),
                line.expr.span, hint=f"give a value in {unit_text(old_unit) or 'plain numbers'}",
                source=source) from None

    def edit(self, text: str) -> list[Cell] | None:
        """Take ``text`` as the new content of this sheet's file (an editor's buffer) when it
        differs from the current one only inside lines that each define one cell: those
        cells take their new definitions and only what they reach is recomputed. Returns the
        cells whose value or error changed, in evaluation order; None (and nothing changed)
        when the structure changed (a line added or removed, a statement other than a
        one-line cell edited, a renamed cell, a line that does not parse): the caller
        builds the sheet anew then."""
        old_lines, new_lines = split_lines(self.source.text), split_lines(text)
        if len(old_lines) != len(new_lines):
            return None
        edited = [n for n, (a, b) in enumerate(zip(old_lines, new_lines), 1) if a != b]
        if not edited:
            return [] if text == self.source.text else None
        cells = self._cells
        by_line = {c.definition.span.line: c for c in self.cells if c.source is self.source}
        source = Source(self.source.label, text, self.source.path)
        definitions: list[CellDef] = []
        for number in edited:
            cell = by_line.get(number)
            if cell is None or cells.cells.get(cell.name) is not cell:
                return None
            old = cell.definition
            if old.span.end_line != number or old.syntax_error is not None:
                return None
            try:
                statements = parse_line(new_lines[number - 1], source, number)
            except SheetError:
                return None
            if len(statements) != 1 or not isinstance(statements[0], CellDef):
                return None
            new = statements[0]
            if new.name != old.name or new.name_span != old.name_span:
                return None
            definitions.append(new)
        with numeric_context(), entered(self.context):
            forced: set[str] = set()
            structural = False
            for definition in definitions:
                name = definition.name
                cell = cells.cells[name]
                cell.definition = definition
                cells.original[name] = definition
                program = cells.compile(definition, source)
                cells.programs[name] = program
                cells.fixed_errors.pop(name, None)
                structural = cells.graph.set_uses(name, program.deps) or structural
                forced.add(name)
            for item in self.items:
                if isinstance(item, Cell) and item.source is self.source:
                    item.source = source
            self.source = source
            if structural:
                forced |= cells.reorder()
            changed = cells.propagate(forced)
            cells.run_checks()
            return changed

    def edit_imported(self, path: Path, text: str) -> list[Cell] | None:
        """Give every sheet imported (directly or not) from the file ``path`` the new
        content ``text`` by :meth:`edit`, then recompute the cells of the sheets above it
        that read it. Returns this sheet's changed cells; None when an edit was structural
        (the caller builds this sheet anew)."""
        from .montecarlo import imports_first

        found = [each for each in imports_first(self)
                 if each is not self and each.source.path == path]
        changed: list[Cell] = []
        for imported in found:
            if imported.edit(text) is None:
                return None
            changed += self._refresh_importers_of(imported)
        return changed

    def override(self, name: str, expr: Expr, source: Source) -> list[Cell]:
        """Give cell ``name`` an expression already parsed (a `use … with` override)."""
        with numeric_context(), entered(self.context):
            changed = self._cells.assign(name, expr, None, source)
            self._cells.correlate(self.source)
            changed = _merged(changed, self._cells.resolve())
            self._cells.run_checks()
            return changed

    def revert(self, name: str) -> list[Cell]:
        """Give cell ``name`` back the definition it has in the file (KeyError if the file
        has none); `ns.name` reverts a cell of an imported sheet."""
        namespace, _, inner = name.partition(".")
        if inner and namespace in self.namespaces and name not in self:
            imported = self.namespaces[namespace]
            imported.revert(inner)
            return self._refresh_importers_of(imported)
        definition = self._cells.original.get(name)
        if definition is None:
            raise KeyError(name)
        if definition.syntax_error is not None:   # the file's line does not parse: its error
            with numeric_context(), entered(self.context):
                changed = self._cells.restore(definition, self.source)
                self._cells.run_checks()
                return changed
        expr = definition.expr
        if expr is None:  # pragma: no cover - broken definitions were restored above
            raise KeyError(name)
        with numeric_context(), entered(self.context):
            changed = self._cells.assign(name, expr, definition.unit, self.source,
                                         definition.span)
            self._cells.correlate(self.source)
            changed = _merged(changed, self._cells.resolve())
            self._cells.run_checks()
            return changed

    def judge(self, text: str, label: str = "<check>") -> CheckResult:
        """Judge a `check` line (typed at a prompt) against the current values, without
        adding it to the sheet. Raises SheetError when it does not parse."""
        from ..language.parse import parse_prompt_line
        from .checks import compile_check, run_check

        source = Source(label, text)
        with numeric_context(), entered(self.context):
            definition = parse_prompt_line(text, source)
            if not isinstance(definition, CheckDef):
                raise UnitError("not a check: write `check a == b within 1%` or an order "
                                "such as `check a < b`", Span(1, 1, 1, len(text) + 1),
                                source=source)
            program = compile_check(definition, self._cells.scope, source, self._cells.inputs)
            failed = {n for n, c in self._cells.cells.items() if c.error is not None}
            return run_check(program, self._cells.values, failed)

    def add_statement(self, text: str, label: str = "<statement>") -> list[Cell]:
        """Add a function (`f(x) = …`), a `solve` or a `correlation` line typed at a prompt,
        as if it stood at the end of the file; returns the cells that changed. Raises
        SheetError for a line that does not parse or that the sheet refuses."""
        from ..language.parse import parse_function_line, parse_prompt_line
        from ..language.syntax import CorrelationDef, FunctionDef, SolveDef
        from .build import function_errors

        source = Source(label, text)
        with numeric_context(), entered(self.context):
            statement = parse_function_line(text, source) or parse_prompt_line(text, source)
            cells = self._cells
            if isinstance(statement, FunctionDef):
                trial = Built(cells=self.cells, functions={statement.name: statement})
                refused = function_errors(trial, source)
                if refused:
                    raise refused[0]
                self.functions[statement.name] = statement
                forced = set(cells.seeing(statement.name))
                for name in forced:
                    cells.recompile(name)
                forced |= cells.reorder()
                changed = cells.propagate(forced)
            elif isinstance(statement, SolveDef):
                from .solve import compile_solve, plan

                program = compile_solve(statement, cells, source)
                plan(program, cells)
                if program.error is not None:
                    raise program.error
                cells.solves.append(program)
                changed = cells.resolve()
                failed = [cells.solved.get(n) for n in program.unknowns
                          if isinstance(cells.solved.get(n), SheetError)]
                if failed:
                    cells.solves.remove(program)
                    for n in program.unknowns:
                        cells.solved.pop(n, None)
                    cells.propagate(set(program.unknowns))
                    raise failed[0]  # type: ignore[misc]
            elif isinstance(statement, CorrelationDef):
                cells.correlations.append(statement)
                cells.correlate(source)
                if cells.correlation_errors:
                    cells.correlations.remove(statement)
                    error = cells.correlation_errors[-1]
                    cells.correlate(self.source)
                    raise error
                changed = []
            else:
                raise UnitError("not a function, `solve` or `correlation` line",
                                Span(1, 1, 1, len(text) + 1), source=source)
            cells.run_checks()
            return changed

    def file_definition(self, name: str) -> CellDef | None:
        """The definition cell ``name`` has in the file (None for a cell added since)."""
        return self._cells.original.get(name)

    def cells_seeing(self, name: str) -> list[str]:
        """The cells whose meaning would change if a cell called ``name`` appeared (they use
        a constant, unit or unknown name of that spelling)."""
        return self._cells.seeing(name)

    def evaluate(self, text: str, label: str = "<expression>"):
        """The value of an expression (with an optional `in unit`) in this sheet's scope,
        without adding a cell. Raises SheetError. Returns the raw value (it may be uncertain)."""
        source = Source(label, text)
        with numeric_context(), entered(self.context):
            line = parse_expression(text, source)
            definition = CellDef("_", Span(1, 1, 1, 2), line.expr, line.unit, None, None,
                                 line.span)
            return self._cells.evaluate(definition, source)

    # -- a table's rows, chunk by chunk (`relsheet map`)
    def chunk_evaluator(self, table: str, cells: list[str]) -> ChunkEvaluator:
        """The cells ``cells`` as a function of the rows of the table cell ``table`` (a cell
        that reads `read_table`), for streaming a table far larger than memory.

        The sheet stays compiled as it is; each call of the evaluator's ``chunk(columns,
        rows)`` replaces the table's value by ``columns`` (name → Quantity, one value a
        row) and runs only the cells between the table and ``cells`` (and the checks that
        the table reaches), vectorised over the rows. See :mod:`calc.engine.stream`.
        """
        from .stream import ChunkEvaluator

        for name in (table, *cells):
            self.cell(name)   # KeyError naming the cell when there is none
        return ChunkEvaluator(self._cells, self.context, table, cells)

    # -- uncertainties
    def sigma(self, name: str) -> u.Quantity | None:
        """The standard uncertainty of cell ``name`` (first order), or None if it has none."""
        cell = self.cell(name)
        if cell.error is not None:
            raise cell.error
        return cell.sigma

    def sigma_budget(self, name: str) -> list[BudgetRow]:
        """Each independent input's contribution to cell ``name`` and its share of σ²,
        largest first; correlated pairs add a row for their joint term."""
        cell = self.cell(name)
        if cell.error is not None:
            raise cell.error
        from . import budget  # (imported when asked: most runs make no σ budget)

        with entered(self.context):
            return budget.rows(cell.raw)

    def monte_carlo(self, samples: int, seed: int | None = None,
                    progress: Progress | None = None, points: bool = False
                    ) -> dict[str, ShownValue | SheetError]:
        """Evaluate every cell with its inputs drawn from their distributions, ``samples`` at
        once; returns per cell its shown form (sample mean, standard deviation, percentiles),
        or the error. ``points``: the percentiles of every cell will be asked for (they are
        then found beside the evaluation, in a thread)."""
        from . import montecarlo  # (imported when asked: most runs are linear)

        with numeric_context():
            return montecarlo.run(self, samples, seed, progress, points)

    # -- access
    @property
    def cells(self) -> list[Cell]:
        """All cells in file order (a second definition of a name included, with its error)."""
        return [item for item in self.items if isinstance(item, Cell)]

    @property
    def checks(self) -> list[CheckResult]:
        """Results of the sheet's `check` lines, in file order."""
        return self._cells.checks

    def solved(self, name: str) -> bool:
        """Whether cell ``name`` is an unknown of a `solve` line that holds its solution."""
        outcome = self._cells.solved.get(name)
        return outcome is not None and not isinstance(outcome, SheetError)

    @property
    def evaluations(self) -> int:
        """How many cell evaluations this sheet has run (a measure of recomputation)."""
        return self._cells.evaluations

    @property
    def order(self) -> list[str]:
        """The cells in evaluation order (cells on a cycle are not in it)."""
        return self._cells.order

    @property
    def engine(self) -> Cells:
        """The compiled cells (for the engine's own modules: Monte Carlo, solving)."""
        return self._cells

    def cell(self, name: str) -> Cell:
        try:
            return self._cells.cells[name]
        except KeyError:
            raise KeyError(f"no cell `{name}` in {self.source.label}") from None

    def __contains__(self, name: str) -> bool:
        return name in self._cells.cells

    def __getitem__(self, name: str) -> u.Quantity:
        """The value of cell ``name`` as an astropy Quantity; raises the cell's error if it failed."""
        cell = self.cell(name)
        if cell.error is not None:
            raise cell.error
        return cell.value

    def raw(self, name: str):
        """The value of cell ``name`` of whatever kind: an uncertain value (nominal,
        contributions, ``.sigma``) when it carries an uncertainty, a record, a quantity."""
        cell = self.cell(name)
        if cell.error is not None:
            raise cell.error
        return cell.raw

    def names(self, imported: bool = False) -> list[str]:
        """The cell names, in file order; with ``imported``, the imported sheets' cells too
        (`sys.M_star`)."""
        names = list(self._cells.cells)
        if imported:
            for namespace, sheet in self.namespaces.items():
                names += [f"{namespace}.{n}" for n in sheet.names(imported=True)]
        return names

    def can_set(self, name: str) -> bool:
        """Whether ``name`` is a cell a what-if can change: one of this sheet's, or one of an
        imported sheet's (`sys.M_star`)."""
        if name in self:
            return True
        namespace, _, inner = name.partition(".")
        return bool(inner) and namespace in self.namespaces and \
            self.namespaces[namespace].can_set(inner)

    def unit_names(self) -> list[str]:
        """Every unit name a cell of this sheet can use."""
        return unit_table(self.selection).names()

    def downstream(self, name: str) -> Names:
        """Every cell that depends on cell ``name``, directly or not."""
        return self._cells.graph.downstream(name)

    def upstream(self, name: str) -> Names:
        """Every cell that cell ``name`` depends on, directly or not."""
        return self._cells.graph.upstream(name)

    def uses(self, name: str) -> Names:
        """The cells that cell ``name`` uses directly."""
        return set(self._cells.graph.uses.get(name, ()))

    def users(self, name: str) -> Names:
        """The cells that use cell ``name`` directly."""
        return set(self._cells.graph.users.get(name, ()))

    def all_errors(self) -> list[SheetError]:
        """Errors worth reporting on their own, in file order: the sheet's, and each failing
        cell's own (not those that only say an input failed)."""
        found = list(self.errors) + list(self._cells.correlation_errors)
        # a solve refused before its unknowns were known: no cell carries its error
        found += [p.error for p in self._cells.solves if p.error is not None and not p.unknowns]
        reported_cycles: set[tuple[str, ...]] = set()
        for cell in self.cells:
            err = cell.error
            if err is None or isinstance(err, InputFailedError):
                continue
            if isinstance(err, CycleError):
                key = tuple(sorted(set(err.cycle)))
                if key in reported_cycles:
                    continue
                reported_cycles.add(key)
            found.append(err)
        for result in self.checks:
            if result.error is not None and not isinstance(result.error, InputFailedError):
                found.append(result.error)
        found += [e for e in self.figure_errors() if not isinstance(e, InputFailedError)]
        return sorted(found, key=self._position_of)

    def _position_of(self, err: SheetError) -> tuple[int, int]:
        """Where an error stands in this sheet's file (errors of no place first)."""
        if err.span is None or err.source is not self.source:
            return (0, 0)
        return (err.span.line, err.span.column)

    def internal_errors(self) -> list[InternalError]:
        """Bugs of relsheet's own met while evaluating this sheet (and its imports)."""
        found = [e for e in self.all_errors() if isinstance(e, InternalError)]
        for imported in self.namespaces.values():
            found += [e for e in imported.internal_errors() if e not in found]
        return found

    # -- tables and plots
    def _figures(self):
        from . import figures

        key = self._cells.evaluations
        cached = getattr(self, "_figures_cache", None)
        if cached is None or cached[0] != key:
            with numeric_context(), entered(self.context):
                cached = (key, figures.evaluate(self.items, figures.lookup_in(self), self.source))
            self._figures_cache = cached
        return cached[1]

    def tables(self) -> list[TableSpec]:
        """The sheet's `table` statements, evaluated (those that fail are in
        :meth:`figure_errors`)."""
        return self._figures()[0]

    def plots(self) -> list[PlotSpec]:
        """The sheet's `plot` statements, evaluated (those that fail are in
        :meth:`figure_errors`)."""
        return self._figures()[1]

    def figure_errors(self) -> list[SheetError]:
        """Why a table or plot of the sheet cannot be made, one error per statement."""
        if not any(isinstance(i, (TableDef, PlotDef)) for i in self.items):
            return []
        return self._figures()[2]

    @property
    def ok(self) -> bool:
        """No errors anywhere (a failing check is not an error; see :attr:`checks`)."""
        return not self.errors and not self._cells.correlation_errors \
            and not any(p.error is not None for p in self._cells.solves) \
            and all(c.error is None for c in self.cells) \
            and all(r.error is None for r in self.checks) and not self.figure_errors()
