"""Tables and plots of a sheet, evaluated into the plain specs the writers read
(:mod:`calc.outputs.figures`).

A ``table NAME: a, b, c`` lists cells on the same axis (a record's fields become columns
`s.x`, `s.y`, …); a ``plot Y[, Y…] vs X`` draws lines of values along one axis, and
``plot Z vs X, Y`` a map of a value on two axes. What cannot be drawn or listed (a cell that
failed, columns of different lengths, a value on other axes than the plot's) is an error at
the statement's line.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import replace

import astropy.units as u
import numpy as np

from ..errors import DomainError, InputFailedError, NameResolutionError, SheetError, Source, Span
from ..language.syntax import Name, Note, PlotDef, TableDef
from ..outputs.figures import PlotSpec, Series, TableSpec
from ..physics.records import Record, RecordList, is_date
from ..physics.units import (
    close_matches,
    conversion_scale,
    describe,
    did_you_mean,
    unit_text,
)
from .grid import Grid
from .samples import Samples
from .truth import Truth
from .uncertain import Uncertain

#: (name as written, value) of the cells a statement names
Lookup = Callable[[str, Span], object]


def _name(node) -> str:
    return node.id if isinstance(node, Name) else ".".join(node.parts)


def _series(name: str, value, span: Span) -> tuple[Series, tuple]:
    """One column or line: the value's numbers, σ, unit; and its axes' names."""
    axes: tuple = ()
    if isinstance(value, Grid):
        axes = tuple(a.name for a in value.axes)
        value = value.data
    if is_date(value):
        from .dates import day_offsets, iso

        texts = iso(value)
        return Series(name, "", day_offsets(value), None,
                      tuple(texts) if isinstance(texts, list) else (texts,)), axes
    if isinstance(value, Truth):
        return Series(name, "", value.flags.astype(float), None), axes
    if isinstance(value, (Record, RecordList)):
        raise DomainError(f"`{name}` is a record; name its fields (`{name}.x`)", span)
    sigma = None
    if isinstance(value, Uncertain):
        sigma = np.asarray(value.sigma_value(), dtype=float)
        value = value.nominal
    elif isinstance(value, Samples):
        data = np.asarray(value.data.value, dtype=float)
        sigma = np.std(data, axis=0, ddof=1)
        value = value.data.mean(axis=0)
    numbers = np.asarray(value.value, dtype=float)
    if sigma is not None:
        sigma = np.broadcast_to(sigma, numbers.shape).copy()
    return Series(name, unit_text(value.unit), numbers, sigma), axes


def _columns(name: str, value, span: Span) -> list[tuple[Series, tuple]]:
    """A cell as table columns: a record gives one per field."""
    if isinstance(value, Record):
        out = []
        for field, item in value.fields.items():
            out += _columns(f"{name}.{field}", item, span)
        return out
    return [_series(name, value, span)]


def table_spec(definition: TableDef, lookup: Lookup, heading: str) -> TableSpec:
    columns: list[Series] = []
    for node in definition.cells:
        name = _name(node)
        for series, _axes in _columns(name, lookup(name, node.span), node.span):
            if series.values.ndim > 1:
                raise DomainError(f"`{series.name}` is on more than one axis; a table lists "
                                  "values along one axis", node.span,
                                  hint="index the grid to one line first, or plot it as a map")
            columns.append(series)
    lengths = {c.name: c.values.size for c in columns}
    counts = set(lengths.values()) - {1}
    if len(counts) > 1:
        listed = ", ".join(f"`{n}` {k}" for n, k in lengths.items())
        raise DomainError(f"table `{definition.name}`: its columns have different lengths "
                          f"({listed})", definition.span,
                          hint="a table lists cells on the same axis")
    rows = counts.pop() if counts else 1
    columns = [c if c.values.size == rows else _repeated(c, rows) for c in columns]
    return TableSpec(definition.name, heading, tuple(columns), definition.span.line)


def _repeated(series: Series, rows: int) -> Series:
    """A single value in a table of many rows: the same on each row."""
    values = np.repeat(np.ravel(series.values), rows)
    sigma = None if series.sigma is None else np.repeat(np.ravel(series.sigma), rows)
    texts = None if series.texts is None else series.texts * rows
    return Series(series.name, series.unit, values, sigma, texts)


def _dated(value) -> bool:
    return is_date(value.data if isinstance(value, Grid) else value)


def _unit(value) -> u.UnitBase | None:
    """The unit a value is plotted in (None for dates and truths)."""
    if isinstance(value, Grid):
        value = value.data
    if isinstance(value, Uncertain):
        value = value.nominal
    elif isinstance(value, Samples):
        value = value.data
    return value.unit if isinstance(value, u.Quantity) else None


def _kind(value) -> str:
    """What a line is, in words, for a message."""
    unit = _unit(value)
    if unit is not None:
        return describe(unit)
    return "dates" if _dated(value) else "true/false values"


def _on_one_axis(ys: list, values: list, nodes) -> list:
    """Lines that share the y axis, in the first one's unit (a line of another kind of
    quantity is refused: one axis has one scale)."""
    first, first_unit = ys[0][0], _unit(values[0])
    out = [ys[0]]
    for (y, axes), value, node in zip(ys[1:], values[1:], nodes[1:]):
        unit = _unit(value)
        if unit == first_unit:
            out.append((y, axes))
            continue
        try:
            scale = conversion_scale(unit, first_unit) if unit is not None and \
                first_unit is not None else None
        except u.UnitConversionError:
            scale = None
        if scale is None:
            raise DomainError(f"`{y.name}` is {_kind(value)} and `{first.name}` "
                              f"{_kind(values[0])}: one y axis cannot show both", node.span,
                              hint="plot them in two plots")
        out.append((replace(y, unit=first.unit, values=y.values * scale,
                            sigma=None if y.sigma is None else y.sigma * scale), axes))
    return out


def plot_spec(definition: PlotDef, lookup: Lookup, heading: str) -> PlotSpec:
    xs = [_series(_name(n), lookup(_name(n), n.span), n.span) for n in definition.xs]
    y_values = [lookup(_name(n), n.span) for n in definition.ys]
    ys = [_series(_name(n), v, n.span) for n, v in zip(definition.ys, y_values)]
    y_names = "_".join(_name(n) for n in definition.ys)
    x_names = "_".join(_name(n) for n in definition.xs)
    file_name = f"{y_names}_vs_{x_names}".replace(".", "_")
    for (x, _), node in zip(xs, definition.xs):
        if x.values.ndim != 1:
            raise DomainError(f"`{x.name}` must be one array of values to plot against", node.span)
    if len(xs) == 1:
        (x, _), = xs
        for (y, axes), node in zip(ys, definition.ys):
            if y.values.ndim != 1:
                raise DomainError(f"`{y.name}` is on {len(axes)} axes "
                                  f"({', '.join(str(a) for a in axes)}); a line needs one",
                                  node.span, hint=f"plot it as a map: `plot {y.name} vs "
                                                  f"{', '.join(str(a) for a in axes)}`")
            if y.values.size != x.values.size:
                raise DomainError(f"`{y.name}` has {y.values.size} values and `{x.name}` "
                                  f"{x.values.size}", node.span,
                                  hint="plot values against the axis they were computed on")
        if len(ys) > 1:
            ys = _on_one_axis(ys, y_values, definition.ys)
    else:
        if len(ys) != 1:
            raise DomainError("a map shows one value over two axes", definition.span,
                              hint="write one plot per value")
        (x1, _), (x2, _) = xs
        (z, axes), = ys
        wanted = (x1.name, x2.name)
        if z.values.ndim != 2:
            raise DomainError(f"`{z.name}` is not on two axes; a map needs a value on "
                              f"`{x1.name}` and `{x2.name}`", definition.ys[0].span)
        if axes == wanted[::-1]:
            z = Series(z.name, z.unit, z.values.T, None if z.sigma is None else z.sigma.T)
        elif axes != wanted:
            raise DomainError(f"`{z.name}` is on {', '.join(f'`{a}`' for a in axes)}, not on "
                              f"`{x1.name}` and `{x2.name}`", definition.ys[0].span)
        ys = [(z, axes)]
    if definition.log_x and np.any(xs[0][0].values <= 0):
        raise DomainError("`log x` needs positive values on the x axis", definition.span)
    if definition.log_y:
        values = xs[1][0].values if len(xs) == 2 else np.concatenate([y.values for y, _ in ys])
        if np.any(values <= 0):
            raise DomainError("`log y` needs positive values on the y axis", definition.span)
    return PlotSpec(file_name, heading, tuple(y for y, _ in ys), tuple(x for x, _ in xs),
                    definition.log_x, definition.log_y, definition.span.line)


def evaluate(items: list, lookup: Lookup, source: Source
             ) -> tuple[list[TableSpec], list[PlotSpec], list[SheetError]]:
    """Every table and plot of a sheet (items in file order), and the errors of those that
    cannot be made."""
    tables: list[TableSpec] = []
    plots: list[PlotSpec] = []
    errors: list[SheetError] = []
    heading = ""
    for item in items:
        if isinstance(item, Note) and item.heading:
            heading = item.text
            continue
        try:
            if isinstance(item, TableDef):
                tables.append(table_spec(item, lookup, heading))
            elif isinstance(item, PlotDef):
                spec = plot_spec(item, lookup, heading)
                taken = {p.name for p in plots}
                if spec.name in taken:   # `plot y vs t` twice (say once with `log y`)
                    number = 2
                    while f"{spec.name}_{number}" in taken:
                        number += 1
                    spec = replace(spec, name=f"{spec.name}_{number}")
                plots.append(spec)
        except SheetError as err:
            errors.append(err.located(item.span, source))
    return tables, plots, errors


def lookup_in(sheet) -> Lookup:
    """How a statement of ``sheet`` reads a cell (`ns.name` of an imported sheet too)."""

    def lookup(name: str, span: Span):
        target, inner = sheet, name
        while "." in inner and inner not in target:
            namespace, _, rest = inner.partition(".")
            if namespace not in target.namespaces:
                break
            target, inner = target.namespaces[namespace], rest
        if inner not in target:
            head, _, field = inner.partition(".")
            if field and head in target:
                value = target.raw(head)
                for part in field.split("."):
                    if not isinstance(value, Record) or part not in value.fields:
                        raise NameResolutionError(f"`{head}` has no field `{part}`", span)
                    value = value.fields[part]
                return value
            raise NameResolutionError(f"no cell `{name}`", span,
                                      hint=did_you_mean(close_matches(name, sheet.names())))
        cell = target.cell(inner)
        if cell.error is not None:
            raise InputFailedError(f"`{name}` failed: {cell.error.message}", [name], span=span)
        return cell.raw

    return lookup
