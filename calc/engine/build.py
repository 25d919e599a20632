"""Building a sheet: from its statements to cells, pinned constants and imported sheets.

:func:`build` reads the statements of a parsed sheet in file order: notes and
headings become items, `constants` pins the constant sets (once), `ppn` lines
become the cells ``ppn.gamma`` / ``ppn.beta``, `use` lines evaluate the
sheets they name (each in its own namespace, with its overrides, shared when
imported the same way twice), `check` lines are kept for later, and every
other statement is a cell. A name defined twice is an error on both lines.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

from ..errors import DuplicateCellError, InputError, NameResolutionError, SheetError, Source, Span
from ..files import label_in, read_sheet, resolve_import
from ..language.parse import broken_functions, parse_sheet
from ..language.scope import PPN_PARAMETERS, ppn_cell
from ..language.syntax import (
    CellDef,
    CheckDef,
    ConstantsDef,
    CorrelationDef,
    EphemerisDef,
    FunctionDef,
    Note,
    PlotDef,
    PPNDef,
    SolveDef,
    TableDef,
    UseDef,
)
from ..physics.constants import UNCERTAIN_FLAG, ConstantSelection, default_selection, parse_selection
from ..physics.units import close_matches, did_you_mean
from .cells import Cell

if TYPE_CHECKING:
    from .sheet import Sheet

#: a sheet imported anywhere below the top sheet, by (file, overrides as written)
ImportKey = tuple[Path, tuple[tuple[str, str], ...]]


@dataclass
class Imports:
    """What the imports of one top sheet share: the sheets already evaluated, by file and
    overrides (a file imported twice the same way is one evaluation, so its inputs are
    shared), and the folder imports must stay in."""

    root: Path
    sheets: dict[ImportKey, Sheet] = field(default_factory=dict)
    #: the uncertain inputs of all these sheets (see `compile.InputTable`)
    inputs: dict = field(default_factory=dict)


@dataclass
class Built:
    """A sheet's statements, sorted by what they are."""

    items: list = field(default_factory=list)   # notes, cells, tables and plots in file order
    cells: list[Cell] = field(default_factory=list)
    errors: list[SheetError] = field(default_factory=list)
    fixed_errors: dict[str, SheetError] = field(default_factory=dict)
    selection: ConstantSelection = field(default_factory=default_selection)
    uncertain_constants: bool = False
    namespaces: dict[str, Sheet] = field(default_factory=dict)
    #: namespaces whose `use` line failed (no such file, a cycle, …), by the line's place
    failed_namespaces: dict[str, Span] = field(default_factory=dict)
    check_definitions: list[CheckDef] = field(default_factory=list)
    tables: list[TableDef] = field(default_factory=list)
    plots: list[PlotDef] = field(default_factory=list)
    functions: dict[str, FunctionDef] = field(default_factory=dict)
    #: functions whose definition line does not parse, by name: that line's number
    failed_functions: dict[str, int] = field(default_factory=dict)
    solves: list[SolveDef] = field(default_factory=list)
    correlations: list[CorrelationDef] = field(default_factory=list)
    ephemeris: EphemerisDef | None = None


def build(source: Source, constants: list[str] | None,
          load: Callable[[UseDef, Built], Sheet | None]) -> Built:
    """Sort a sheet's statements; ``load`` evaluates the sheet a `use` line names (or
    records an error on ``Built`` and returns None)."""
    parsed = parse_sheet(source.text, source)
    out = Built()
    on_cells = {id(s.syntax_error) for s in parsed.statements if isinstance(s, CellDef)}
    # a syntax error on a line that names a cell is reported with that cell
    out.errors.extend(e for e in parsed.errors if id(e) not in on_cells)
    out.failed_functions = broken_functions(source.text, parsed.errors)
    pinned: ConstantsDef | None = None
    if constants is not None:
        pinned = ConstantsDef(tuple((w, Span(1, 1, 1, 1)) for w in constants), Span(1, 1, 1, 1))
        _pin(out, pinned, source)
    first: dict[str, Cell] = {}
    for statement in parsed.statements:
        if isinstance(statement, ConstantsDef):
            if constants is not None:
                continue
            if pinned is not None:
                out.errors.append(DuplicateCellError(
                    f"constant sets are pinned twice (lines {pinned.span.line} "
                    f"and {statement.span.line})", statement.span,
                    hint="keep one `constants` line", source=source))
                continue
            pinned = statement
            _pin(out, statement, source)
        elif isinstance(statement, Note):
            out.items.append(statement)
        elif isinstance(statement, CheckDef):
            out.check_definitions.append(statement)
        elif isinstance(statement, TableDef):
            out.tables.append(statement)
            out.items.append(statement)
        elif isinstance(statement, PlotDef):
            out.plots.append(statement)
            out.items.append(statement)
        elif isinstance(statement, FunctionDef):
            if statement.name in out.functions:
                out.errors.append(DuplicateCellError(
                    f"function `{statement.name}` is defined twice (lines "
                    f"{out.functions[statement.name].span.line} and {statement.span.line})",
                    statement.name_span, hint="rename one of them or delete one", source=source))
                continue
            out.functions[statement.name] = statement
        elif isinstance(statement, SolveDef):
            out.solves.append(statement)
        elif isinstance(statement, CorrelationDef):
            out.correlations.append(statement)
        elif isinstance(statement, EphemerisDef):
            if out.ephemeris is not None:
                out.errors.append(DuplicateCellError(
                    f"two `ephemeris` lines (lines {out.ephemeris.span.line} and "
                    f"{statement.span.line})", statement.span, hint="keep one", source=source))
                continue
            out.ephemeris = statement
        elif isinstance(statement, UseDef):
            if statement.namespace in out.namespaces:
                out.errors.append(DuplicateCellError(
                    f"namespace `{statement.namespace}` is imported twice",
                    statement.namespace_span, hint="give each import its own name",
                    source=source))
                continue
            imported = load(statement, out)
            if imported is not None:
                out.namespaces[statement.namespace] = imported
            else:
                out.failed_namespaces[statement.namespace] = statement.span
        else:
            definition = _ppn_cell(statement, out, source) if isinstance(statement, PPNDef) \
                else statement
            if definition is None:
                continue
            cell = Cell(definition, source)
            out.items.append(cell)
            earlier = first.get(definition.name)
            if earlier is None:
                first[definition.name] = cell
                out.cells.append(cell)
                if definition.syntax_error is not None:
                    out.fixed_errors[definition.name] = definition.syntax_error
                continue
            err = DuplicateCellError(
                f"cell `{definition.name}` is defined twice (lines {earlier.line} "
                f"and {cell.line})", definition.name_span,
                hint="rename one of them or delete one", source=source)
            cell.error = err
            out.fixed_errors[definition.name] = err
    for namespace in out.namespaces:
        if namespace in first:
            out.errors.append(NameResolutionError(
                f"`{namespace}` is both a cell and an imported sheet",
                first[namespace].definition.name_span, source=source,
                hint="rename the cell or the namespace"))
    return out


def _pin(out: Built, statement: ConstantsDef, source: Source) -> None:
    words = [name for name, _ in statement.sets]
    out.uncertain_constants = UNCERTAIN_FLAG in words
    selection, problems = parse_selection(words)
    for index, message, hint in problems:
        out.errors.append(NameResolutionError(message, statement.sets[index][1], hint=hint,
                                              source=source))
    out.selection = selection


def _ppn_cell(statement: PPNDef, out: Built, source: Source) -> CellDef | None:
    """A `ppn gamma = …` line becomes the cell `ppn.gamma`, which calls use by default."""
    if statement.parameter not in PPN_PARAMETERS:
        out.errors.append(NameResolutionError(
            f"unknown PPN parameter `{statement.parameter}`", statement.parameter_span,
            hint=did_you_mean(close_matches(statement.parameter, list(PPN_PARAMETERS)))
            or "relsheet knows the PPN parameters gamma and beta", source=source))
        return None
    return CellDef(ppn_cell(statement.parameter), statement.parameter_span, statement.expr,
                   None, statement.comment, statement.marker, statement.span)


def import_sheet(use: UseDef, source: Source, chain: tuple[Path, ...], imports: Imports,
                 make: Callable[[Source, tuple[Path, ...]], Sheet],
                 errors: list[SheetError]) -> Sheet | None:
    """Evaluate the sheet a `use` line names, in its own namespace, with its overrides.
    Problems become errors at the `use` line; the sheet is returned even when it has errors
    of its own (its cells say which)."""
    try:
        path = resolve_import(source.folder, use.path, imports.root, chain, use.path_span)
        key = (path, tuple((o.name, source.between(o.expr.span)) for o in use.overrides))
        imported = imports.sheets.get(key)
        if imported is not None:
            return imported
        imported = make(read_sheet(path, label_in(path, imports.root)), (*chain, path))
        imports.sheets[key] = imported
    except SheetError as err:
        errors.append(err.located(use.span, source))
        return None
    for override in use.overrides:
        if override.name not in imported:
            errors.append(NameResolutionError(
                f"{use.path} has no cell `{override.name}` to override",
                override.name_span, source=source,
                hint=did_you_mean(close_matches(override.name, imported.names()))))
            continue
        imported.override(override.name, override.expr, source)
    problems = imported.all_errors()
    if problems:
        first = problems[0]
        errors.append(InputError(
            f"{use.path} has {len(problems)} error{'s' if len(problems) > 1 else ''}; the "
            f"first: {first.location}: {first.message}", use.path_span, source=source))
    return imported


def function_errors(built: Built, source: Source) -> list[SheetError]:
    """What is wrong with the sheet's functions as written: a parameter named like a cell
    (inside the body it would hide the cell), a parameter given twice, a function named like
    a cell or a library function."""
    from ..physics import functions as library

    errors: list[SheetError] = []
    cell_names = {c.name for c in built.cells}
    for function in built.functions.values():
        if function.name in cell_names:
            errors.append(DuplicateCellError(
                f"`{function.name}` names both a cell and a function", function.name_span,
                hint="rename one of them", source=source))
        elif library.lookup(function.name) is not None or function.name == "axis":
            errors.append(DuplicateCellError(
                f"`{function.name}` is a library function; a sheet's function needs a name of "
                "its own", function.name_span, hint=f"call it e.g. `my_{function.name}`",
                source=source))
        seen: set[str] = set()
        for name, span in function.params:
            if name in seen:
                errors.append(InputError(f"{function.name}: parameter `{name}` is listed twice",
                                         span, source=source))
            elif name in cell_names:
                errors.append(InputError(
                    f"{function.name}: parameter `{name}` has the name of a cell", span,
                    hint=f"inside the function it would hide the cell `{name}`; rename the "
                         "parameter", source=source))
            seen.add(name)
    return errors
