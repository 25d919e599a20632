"""A sheet: its cells, their values, and recomputation of what a change reaches.

``Sheet.load(path)`` reads, parses, compiles and evaluates a sheet. Every cell
ends with a value or an error; a failing cell does not stop the others, and
cells that use it say which input failed. ``sheet.set(name, "expr")``
recomputes only the cells downstream of ``name`` and returns those whose
value changed.
"""

from __future__ import annotations

import gc
import heapq
import warnings
from contextlib import contextmanager
from pathlib import Path

import astropy.units as u
import numpy as np

from ..errors import (
    CycleError,
    DuplicateCellError,
    InputError,
    InputFailedError,
    NameResolutionError,
    SheetError,
    Source,
    Span,
)
from ..files import read_sheet, resolve_import
from ..language.parse import parse_expression, parse_sheet
from ..language.scope import PPN_PARAMETERS, Scope
from ..language.syntax import CellDef, CheckDef, ConstantsDef, Note, PPNDef, UseDef
from ..physics.constants import UNCERTAIN_FLAG, ConstantSelection, default_selection, parse_selection
from ..physics.environment import _start_warnings, _stop_warnings, _using
from ..physics.records import is_record
from ..physics.units import close_matches, did_you_mean, quantity
from . import uncertain
from .checks import CheckResult, compile_check, run_check
from .compile import CellProgram, compile_cell, run_cell
from .graph import DependencyGraph


class Cell:
    """One cell as evaluated: its definition and either a value or an error."""

    __slots__ = ("definition", "source", "raw", "error", "warnings")

    def __init__(self, definition: CellDef, source: Source) -> None:
        self.definition = definition
        self.source = source
        #: the computed value: a Quantity, a record, or an Uncertain carrying contributions
        self.raw = None
        self.error: SheetError | None = None
        #: validity warnings of the last computation ("r is 3 r_s: …")
        self.warnings: list[str] = []

    @property
    def value(self):
        """The value (the nominal value when it carries an uncertainty)."""
        return uncertain.nominal(self.raw)

    @property
    def sigma(self) -> u.Quantity | None:
        """The standard uncertainty in the value's unit (first-order propagation), or None."""
        raw = self.raw
        return raw.sigma if isinstance(raw, uncertain.Uncertain) else None

    @property
    def name(self) -> str:
        return self.definition.name

    @property
    def line(self) -> int:
        return self.definition.span.line

    def __repr__(self) -> str:
        shown = self.error.message if self.error else self.value
        return f"<Cell {self.name} (line {self.line}): {shown}>"


@contextmanager
def numeric_context():
    """Floating-point problems become errors we raise ourselves, never stray warnings.

    The cyclic garbage collector pauses meanwhile: building a sheet allocates many
    small objects and no reference cycles, and repeated collections over astropy's
    large unit registry would cost a fifth of the time.
    """
    collecting = gc.isenabled()
    gc.disable()
    try:
        with np.errstate(all="ignore"), warnings.catch_warnings():
            warnings.simplefilter("ignore")
            yield
    finally:
        if collecting:
            gc.enable()


class Sheet:
    """A parsed and evaluated sheet. Build with :meth:`load` or :meth:`from_text`."""

    def __init__(self, source: Source, constants: list[str] | None = None,
                 root: str | Path | None = None, _chain: tuple[Path, ...] = (),
                 _imports: dict | None = None) -> None:
        """``constants`` (words of a `constants` line) replaces the sheet's own pinning;
        ``root`` is the folder imports must stay in (default: this sheet's folder)."""
        self.source = source
        self._constants_override = constants
        here = Path(source.label).resolve() if not source.label.startswith("<") else None
        self.root = Path(root).resolve() if root is not None else (
            here.parent if here is not None else Path.cwd().resolve())
        self._chain = _chain or ((here,) if here is not None else ())
        #: imported sheets by namespace (`use "x.sheet" as ns`)
        self.namespaces: dict[str, Sheet] = {}
        self._mc_values: dict = {}
        self._mc_session = None
        #: sheets imported anywhere below the top sheet, by (file, overrides): a file
        #: imported twice the same way is one evaluation, so its inputs are shared
        self._import_cache: dict = _imports if _imports is not None else {}
        self.items: list[Note | Cell] = []
        self.errors: list[SheetError] = []
        self.selection: ConstantSelection = default_selection()
        #: `constants … uncertain`: named constants carry their published uncertainties
        self.uncertain_constants = False
        self.evaluations = 0
        self._cells: dict[str, Cell] = {}
        self._fixed_errors: dict[str, SheetError] = {}
        self._programs: dict[str, CellProgram] = {}
        self._values: dict[str, u.Quantity] = {}
        self._graph = DependencyGraph()
        self._position: dict[str, int] = {}
        self._cycle_members: set[str] = set()
        self._original: dict[str, CellDef] = {}
        self._check_defs: list[CheckDef] = []
        self._check_programs: list = []
        #: results of the sheet's `check` lines, in file order
        self.checks: list[CheckResult] = []
        with numeric_context():
            self._build()

    # -- construction
    @classmethod
    def load(cls, path: str | Path, constants: list[str] | None = None,
             root: str | Path | None = None) -> Sheet:
        """Read and evaluate a sheet file. Raises InputError if it cannot be read."""
        return cls(read_sheet(path), constants, root)

    @classmethod
    def from_text(cls, text: str, label: str = "<text>") -> Sheet:
        return cls(Source(label, text))

    def _build(self) -> None:
        parsed = parse_sheet(self.source.text, self.source)
        on_cells = {id(s.syntax_error) for s in parsed.statements if isinstance(s, CellDef)}
        # a syntax error on a line that names a cell is reported with that cell
        self.errors.extend(e for e in parsed.errors if id(e) not in on_cells)
        pinned: ConstantsDef | None = None
        if self._constants_override is not None:
            words = self._constants_override
            pinned = ConstantsDef(tuple((w, Span(1, 1, 1, 1)) for w in words), Span(1, 1, 1, 1))
            self._pin(pinned)
        for statement in parsed.statements:
            if isinstance(statement, ConstantsDef):
                if self._constants_override is not None:
                    continue
                if pinned is not None:
                    self.errors.append(DuplicateCellError(
                        f"constant sets are pinned twice (lines {pinned.span.line} "
                        f"and {statement.span.line})", statement.span,
                        hint="keep one `constants` line", source=self.source))
                    continue
                pinned = statement
                self._pin(statement)
            elif isinstance(statement, Note):
                self.items.append(statement)
            elif isinstance(statement, CheckDef):
                self._check_defs.append(statement)
            elif isinstance(statement, UseDef):
                self._import(statement)
            else:
                if isinstance(statement, PPNDef):
                    statement = self._ppn_cell(statement)
                    if statement is None:
                        continue
                cell = Cell(statement, self.source)
                self.items.append(cell)
                first = self._cells.get(statement.name)
                if first is None:
                    self._cells[statement.name] = cell
                    self._original[statement.name] = statement
                    if statement.syntax_error is not None:
                        self._fixed_errors[statement.name] = statement.syntax_error
                    continue
                err = DuplicateCellError(
                    f"cell `{statement.name}` is defined twice (lines {first.line} "
                    f"and {cell.line})", statement.name_span,
                    hint="rename one of them or delete one", source=self.source)
                cell.error = err
                self._fixed_errors[statement.name] = err
        self.inputs = uncertain.InputRegistry()
        for namespace in self.namespaces:
            if namespace in self._cells:
                self.errors.append(NameResolutionError(
                    f"`{namespace}` is both a cell and an imported sheet",
                    self._cells[namespace].definition.name_span, source=self.source,
                    hint="rename the cell or the namespace"))
        self._scope = Scope(self._cells.keys(), self.selection, self.inputs,
                            uncertain_constants=self.uncertain_constants,
                            namespaces=self.namespaces)
        with _using(self.selection):
            for rank, (name, cell) in enumerate(self._cells.items()):
                program = self._compile(cell.definition, self.source)
                self._programs[name] = program
                self._graph.add(name, program.deps, rank)
            self._reorder()
            for name in self._order:
                self._compute(name)
            self._check_programs = [compile_check(d, self._scope, self.source)
                                    for d in self._check_defs]
            self._run_checks()

    def _run_checks(self) -> None:
        failed = {n for n, c in self._cells.items() if c.error is not None}
        self.checks = [run_check(p, self._values, failed) for p in self._check_programs]

    def _compile(self, definition: CellDef, source: Source, keep=None) -> CellProgram:
        if definition.name.startswith("ppn."):
            # a PPN parameter is a plain number
            keep = (u.dimensionless_unscaled, definition.expr.span)
        return compile_cell(definition, self._scope, source, display_unit=keep)

    def _import(self, use: UseDef) -> None:
        """Evaluate the sheet a `use` line names, in its own namespace, with its overrides."""
        if use.namespace in self.namespaces:
            self.errors.append(DuplicateCellError(
                f"namespace `{use.namespace}` is imported twice", use.namespace_span,
                hint="give each import its own name", source=self.source))
            return
        try:
            path = resolve_import(self.source.label, use.path, self.root, self._chain,
                                  use.path_span)
            key = (path, tuple((o.name, self.source.between(o.expr.span)) for o in use.overrides))
            imported = self._import_cache.get(key)
            if imported is not None:
                self.namespaces[use.namespace] = imported
                return
            imported = Sheet(read_sheet(path), root=self.root, _chain=(*self._chain, path),
                             _imports=self._import_cache)
            self._import_cache[key] = imported
        except SheetError as err:
            self.errors.append(err.located(use.span, self.source))
            return
        with numeric_context(), _using(imported.selection):
            for override in use.overrides:
                if override.name not in imported:
                    self.errors.append(NameResolutionError(
                        f"{use.path} has no cell `{override.name}` to override",
                        override.name_span, source=self.source,
                        hint=did_you_mean(close_matches(override.name, imported.names()))))
                    continue
                imported._assign(override.name, override.expr, None, self.source)
            imported._run_checks()
        problems = imported.all_errors()
        if problems:
            first = problems[0]
            self.errors.append(InputError(
                f"{use.path} has {len(problems)} error{'s' if len(problems) > 1 else ''}; the "
                f"first: {first.location}: {first.message}", use.path_span, source=self.source))
        self.namespaces[use.namespace] = imported

    def _ppn_cell(self, statement: PPNDef) -> CellDef | None:
        """A `ppn gamma = …` line becomes the cell `ppn.gamma`, which calls use by default."""
        if statement.parameter not in PPN_PARAMETERS:
            self.errors.append(NameResolutionError(
                f"unknown PPN parameter `{statement.parameter}`", statement.parameter_span,
                hint="relsheet knows the PPN parameters gamma and beta", source=self.source))
            return None
        return CellDef(f"ppn.{statement.parameter}", statement.parameter_span, statement.expr,
                       None, statement.comment, statement.marker, statement.span)

    def _pin(self, statement: ConstantsDef) -> None:
        words = [name for name, _ in statement.sets]
        self.uncertain_constants = UNCERTAIN_FLAG in words
        selection, problems = parse_selection(words)
        for index, message, hint in problems:
            self.errors.append(NameResolutionError(message, statement.sets[index][1], hint=hint,
                                                   source=self.source))
        self.selection = selection

    def _reorder(self) -> set[str]:
        """Recompute the order and cycles; returns cells whose cycle membership changed."""
        order, cycles = self._graph.order()
        self._order = order
        self._position = {name: i for i, name in enumerate(order)}
        members: set[str] = set()
        for path in cycles:
            text = " → ".join(path)
            for name in set(path):
                members.add(name)
                cell = self._cells[name]
                cell.raw = None
                cell.error = CycleError(
                    f"cycle: {text}", path, span=cell.definition.name_span,
                    hint="a cell cannot depend on itself, directly or through other cells",
                    source=cell.source)
        changed = members ^ self._cycle_members
        self._cycle_members = members
        return changed

    # -- evaluation
    def _compute(self, name: str) -> None:
        cell = self._cells[name]
        program = self._programs[name]
        self.evaluations += 1
        cell.raw = None
        self._values.pop(name, None)
        fixed = self._fixed_errors.get(name)
        if fixed is not None:
            cell.error = fixed
            return
        if program.error is not None:
            cell.error = program.error
            return
        failed = [d for d in program.deps if self._cells[d].error is not None]
        if failed:
            more = f" (and {len(failed) - 1} more)" if len(failed) > 1 else ""
            cell.error = InputFailedError(f"input `{failed[0]}` failed{more}", failed,
                                          span=program.deps[failed[0]], source=program.source)
            return
        cell.warnings = list(program.warnings)
        handle = _start_warnings()
        try:
            value = run_cell(program, self._values)
        except SheetError as err:
            cell.error = err
            return
        except Exception as exc:  # a bug of ours: keep the sheet going, say so plainly
            err = SheetError(f"internal error while computing `{name}`: {type(exc).__name__}: {exc}",
                             cell.definition.span, hint="please report this; --debug shows details",
                             source=program.source)
            err.__cause__ = exc
            cell.error = err
            return
        finally:
            found = _stop_warnings(handle)
        cell.warnings.extend(w for w in found if w not in cell.warnings)
        cell.error = None
        cell.raw = value
        self._values[name] = value

    def set(self, name: str, text: str, label: str | None = None) -> list[Cell]:
        """Give cell ``name`` the expression ``text`` (a new cell if there is none).

        Recomputes only what depends on it and returns the cells whose value or
        error changed, in evaluation order. A syntax error in ``text`` raises
        :class:`~calc.errors.SheetSyntaxError` and changes nothing.
        """
        source = Source(label or f"--set {name}", text)
        with numeric_context(), _using(self.selection):
            line = parse_expression(text, source)
            changed = self._assign(name, line.expr, line.unit, source)
            self._run_checks()
            return changed

    def _assign(self, name: str, expr, unit, source: Source) -> list[Cell]:
        old_cell = self._cells.get(name)
        forced: set[str] = {name}
        if old_cell is None:
            span = Span(1, 1, 1, 1 + len(name))
            definition = CellDef(name, span, expr, unit, None, None, expr.span)
            cell = Cell(definition, source)
            self._cells[name] = cell
            self.items.append(cell)
            # cells that looked this name up (as a constant, unit or unknown) now see a cell
            for other, program in list(self._programs.items()):
                if name in program.looked_up:
                    self._recompile(other)
                    forced.add(other)
            program = self._compile(definition, source)
            self._programs[name] = program
            self._graph.add(name, program.deps, len(self._cells))
            structural = True
        else:
            previous = self._programs[name]
            definition = CellDef(name, old_cell.definition.name_span, expr, unit,
                                 None, None, expr.span)
            old_cell.definition = definition
            old_cell.source = source
            # an override without `in` keeps the unit the sheet shows the cell in
            keep = (previous.unit, expr.span) if unit is None and previous.unit is not None else None
            program = self._compile(definition, source, keep)
            self._programs[name] = program
            self._fixed_errors.pop(name, None)
            structural = self._graph.set_uses(name, program.deps)
        if structural:
            for moved in self._reorder():
                forced.add(moved)
        return self._propagate(forced)

    def _recompile(self, name: str) -> None:
        cell = self._cells[name]
        program = self._compile(cell.definition, cell.source)
        self._programs[name] = program
        self._graph.set_uses(name, program.deps)

    def _propagate(self, forced: set[str]) -> list[Cell]:
        """Evaluate ``forced`` cells and, while values change, the cells that use them."""
        heap: list[tuple[int, str]] = []
        queued: set[str] = set()
        changed: list[Cell] = []

        def push(n: str) -> None:
            if n not in queued:
                queued.add(n)
                if n in self._cycle_members:
                    changed.append(self._cells[n])
                    for user in self._graph.users.get(n, ()):
                        push(user)
                else:
                    heapq.heappush(heap, (self._position[n], n))

        for n in forced:
            push(n)
        while heap:
            _, n = heapq.heappop(heap)
            cell = self._cells[n]
            before_value, before_error = cell.raw, cell.error
            self._compute(n)
            if not _same(before_value, cell.raw) or _error_text(before_error) != _error_text(cell.error):
                changed.append(cell)
                for user in self._graph.users.get(n, ()):
                    push(user)
        changed.sort(key=lambda c: self._position.get(c.name, -1))
        return changed

    def revert(self, name: str) -> list[Cell]:
        """Give cell ``name`` back the definition it has in the file."""
        definition = self._original.get(name)
        if definition is None:
            raise KeyError(name)
        with numeric_context(), _using(self.selection):
            changed = self._assign(name, definition.expr, definition.unit, self.source)
            self._run_checks()
            return changed

    # -- uncertainties
    def sigma(self, name: str) -> u.Quantity | None:
        """The standard uncertainty of cell ``name`` (first order), or None if it has none."""
        cell = self.cell(name)
        if cell.error is not None:
            raise cell.error
        return cell.sigma

    def sigma_budget(self, name: str) -> list[tuple[uncertain.Input, u.Quantity, float]]:
        """Each independent input's contribution to cell ``name`` and its share of σ²,
        largest first."""
        cell = self.cell(name)
        if cell.error is not None:
            raise cell.error
        raw = cell.raw
        rows = []
        for key, share in uncertain.budget(raw):
            part = raw.parts[key]
            rows.append((uncertain.input_info(key), quantity(np.abs(part), raw.unit), share))
        return rows

    def monte_carlo(self, samples: int, seed: int | None = None, progress=None
                    ) -> dict[str, uncertain.Summary | SheetError | object]:
        """Evaluate every cell with its inputs drawn from their distributions, ``samples`` at
        once; returns per cell a Summary (quantities), the value itself (records and cells
        that depend on no input), or the error."""
        with numeric_context(), _using(self.selection):
            uncertain.mode.start_monte_carlo(samples, seed, progress)
            try:
                return self._monte_carlo_run(samples, progress)[1]
            finally:
                uncertain.mode.stop_monte_carlo()

    def _monte_carlo_run(self, samples: int, progress) -> tuple[dict, dict]:
        """One Monte Carlo pass (inside a started mode): imported sheets first, so that
        inputs they share with this sheet are drawn once."""
        for imported in self.namespaces.values():
            if imported._mc_session is uncertain.mode.drawn:
                continue  # a sheet imported along two paths runs once
            with _using(imported.selection):
                values = imported._monte_carlo_run(samples, None)[0]
            imported._mc_values.clear()
            imported._mc_values.update(values)
            imported._mc_session = uncertain.mode.drawn
        env: dict = {}
        out: dict = {}
        for index, name in enumerate(self._order):
            cell = self._cells[name]
            if cell.error is not None:
                out[name] = cell.error
                continue
            program = self._programs[name]
            failed = [d for d in program.deps if d not in env]
            if failed:
                out[name] = InputFailedError(f"input `{failed[0]}` failed", failed,
                                             span=program.deps[failed[0]],
                                             source=program.source)
                continue
            try:
                value = run_cell(program, env)
            except SheetError as err:
                out[name] = err
                continue
            env[name] = value
            is_samples = isinstance(value, u.Quantity) and np.ndim(value.value) == 2 \
                and value.shape[0] == samples
            out[name] = uncertain.summarise(value) if is_samples else value
            if progress is not None:
                progress(index + 1, len(self._order))
        return env, out

    # -- access
    @property
    def cells(self) -> list[Cell]:
        """All cells in file order (a second definition of a name included, with its error)."""
        return [item for item in self.items if isinstance(item, Cell)]

    def cell(self, name: str) -> Cell:
        try:
            return self._cells[name]
        except KeyError:
            raise KeyError(f"no cell `{name}` in {self.source.label}") from None

    def __contains__(self, name: str) -> bool:
        return name in self._cells

    def __getitem__(self, name: str) -> u.Quantity:
        """The value of cell ``name`` as an astropy Quantity; raises the cell's error if it failed."""
        cell = self.cell(name)
        if cell.error is not None:
            raise cell.error
        return cell.value

    def uncertain(self, name: str):
        """The raw value of cell ``name``: an :class:`~calc.uncertain.Uncertain` when it
        carries an uncertainty (nominal, contributions, ``.sigma``), else the value."""
        cell = self.cell(name)
        if cell.error is not None:
            raise cell.error
        return cell.raw

    def names(self) -> list[str]:
        return list(self._cells)

    def downstream(self, name: str) -> set[str]:
        """Every cell that depends on cell ``name``, directly or not."""
        return self._graph.downstream(name)

    def evaluate(self, text: str, label: str = "<expression>"):
        """The value of an expression (with an optional `in unit`) in this sheet's scope,
        without adding a cell. Raises SheetError. Returns the raw value (it may be uncertain)."""
        source = Source(label, text)
        with numeric_context(), _using(self.selection):
            line = parse_expression(text, source)
            definition = CellDef("_", Span(1, 1, 1, 2), line.expr, line.unit, None, None,
                                 line.span)
            program = compile_cell(definition, self._scope, source)
            if program.error is not None:
                raise program.error
            failed = [d for d in program.deps if self._cells[d].error is not None]
            if failed:
                raise InputFailedError(f"input `{failed[0]}` failed", failed,
                                       span=program.deps[failed[0]], source=source)
            return run_cell(program, self._values)

    def uses(self, name: str) -> set[str]:
        """The cells that cell ``name`` uses directly."""
        return set(self._graph.uses.get(name, ()))

    def users(self, name: str) -> set[str]:
        """The cells that use cell ``name`` directly."""
        return set(self._graph.users.get(name, ()))

    def all_errors(self) -> list[SheetError]:
        """Errors worth reporting on their own: the sheet's, and each failing cell's
        own (not those that only say an input failed)."""
        found = list(self.errors)
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
        return found

    @property
    def ok(self) -> bool:
        """No errors anywhere (a failing check is not an error; see :attr:`checks`)."""
        return not self.errors and all(c.error is None for c in self.cells) \
            and all(r.error is None for r in self.checks)


def _same(a, b) -> bool:
    if a is b:
        return True
    if a is None or b is None:
        return False
    if is_record(a) or is_record(b):
        return is_record(a) and a.same_as(b)
    if isinstance(a, uncertain.Uncertain) or isinstance(b, uncertain.Uncertain):
        return isinstance(a, uncertain.Uncertain) and isinstance(b, uncertain.Uncertain) \
            and _same(a.nominal, b.nominal) and _same(a.sigma, b.sigma)
    return a.unit == b.unit and np.shape(a.value) == np.shape(b.value) and \
        bool(np.array_equal(a.value, b.value))


def _error_text(err: SheetError | None) -> str | None:
    return None if err is None else err.message
