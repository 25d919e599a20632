"""The text report of `relsheet eval`: headings, aligned name / value / unit, checks in place,
warnings; the σ budget of one cell; the unit list of `relsheet units`."""

from __future__ import annotations

import astropy.units as u

from ..engine.cells import Cell
from ..engine.values import Shown, ShownRecord, ShownRecords, is_record
from ..language.syntax import Note, TableDef
from ..physics.units import physical_type, unit_string, unit_text
from .format import (
    check_detail,
    format_number,
    format_percentiles,
    format_quantity,
    record_rows,
    value_text,
)


def render_text(sheet, digits: int, monte_carlo: dict | None = None,
                samples: int | None = None, rows_shown: int | None = None) -> str:
    """Headings, then aligned name / value / unit; errors inline; each check where it
    stands in the sheet. ``monte_carlo`` (from ``Sheet.monte_carlo``) replaces values by
    their sample statistics."""
    rows: list[tuple] = []
    pending = sorted(sheet.checks, key=lambda r: r.line)

    def checks_before(line: int | None) -> None:
        while pending and (line is None or pending[0].line < line):
            result = pending.pop(0)
            rows.append(("check", "passed" if result.passed else "FAILED", result.text,
                         "" if result.passed else check_detail(result)))

    for item in sheet.items:
        own = getattr(item, "source", sheet.source) is sheet.source
        if own:
            checks_before(item.line if isinstance(item, Cell) else item.span.line)
        if isinstance(item, Cell):
            sampled = (monte_carlo or {}).get(item.name)
            if item.error is not None:
                rows.append(("cell", item.name, f"error: {item.error.message}", ""))
            elif sampled is not None and not isinstance(sampled, (Shown, ShownRecord,
                                                                  ShownRecords)):
                # the cell failed under Monte Carlo (a solve whose samples do not converge)
                rows.append(("cell", item.name, f"error: {getattr(sampled, 'message', sampled)}",
                             ""))
            elif isinstance(sampled, Shown) and sampled.samples is not None:
                number, unit = format_quantity(sampled, digits)
                if sheet.solved(item.name):
                    unit = f"{unit}  (solved)" if unit else "(solved)"
                rows.append(("cell", item.name, number, unit))
                rows.append(("warning", f"16 / 50 / 84 %: {format_percentiles(sampled)}"))
            else:
                number, unit = format_quantity(item.raw, digits)
                if sheet.solved(item.name):
                    unit = f"{unit}  (solved)" if unit else "(solved)"
                rows.append(("cell", item.name, number, unit))
                if isinstance(sampled, (ShownRecord, ShownRecords)):
                    # a record's fields under Monte Carlo: their sample statistics
                    rows += [("field", *row) for row in record_rows(sampled, digits)]
                elif is_record(item.raw):   # only records have fields (a shown form costs)
                    rows += [("field", *row) for row in record_rows(item.raw, digits)]
            rows += [("warning", text) for text in item.warnings]
        elif isinstance(item, Note) and item.heading:
            rows.append(("heading", item.text))
        elif isinstance(item, TableDef) and own:
            spec = next((t for t in sheet.tables() if t.line == item.span.line), None)
            if spec is not None:
                rows.append(("table", spec))
    checks_before(None)
    name_width = max((len(r[1]) + (2 if r[0] == "field" else 0) for r in rows
                      if r[0] in ("cell", "field")), default=0)
    scalars = [len(r[2]) for r in rows
               if r[0] in ("cell", "field") and r[3] and not r[2].startswith("[")]
    value_width = min(24, max(scalars, default=0))
    header = f"{sheet.source.label}  ·  constants {', '.join(sheet.selection.names)}"
    if sheet.uncertain_constants:
        header += " (with their uncertainties)"
    if monte_carlo is not None:
        header += f"  ·  Monte Carlo, {samples or 0:,} samples"
    lines = [header]
    for row in rows:
        if row[0] == "heading":
            lines += ["", row[1]]
        elif row[0] == "check":
            _, outcome, text, detail = row
            lines.append(f"  {outcome:<6}  {text}")
            if detail:
                lines.append(f"          {detail}")
        elif row[0] == "table":
            from .tables import table_text

            lines += ["", *table_text(row[1], rows_shown, digits).splitlines()]
        elif row[0] == "warning":
            label = "" if row[1].startswith("16 / 50 / 84 %") else "warning: "
            lines.append(f"  {'':<{name_width}}  {label}{row[1]}")
        elif row[0] == "field":
            _, name, value, unit = row
            lines.append(f"    {name:<{name_width - 2}}  {value:<{value_width}}  {unit}".rstrip())
        else:
            _, name, value, unit = row
            line = f"  {name:<{name_width}}  {value:<{value_width}}  {unit}" if unit \
                else f"  {name:<{name_width}}  {value}"
            lines.append(line.rstrip())
    return "\n".join(lines)


def render_sigma_budget(sheet, name: str, digits: int) -> str:
    """Each independent input's share of σ² of one cell, largest first."""
    cell = sheet.cell(name)
    if cell.error is not None:
        return f"\nuncertainty budget of `{name}`: the cell failed ({cell.error.message})"
    rows = sheet.sigma_budget(name)
    if not rows:
        return f"\nuncertainty budget of `{name}`: it depends on no uncertain input"
    sigma = cell.sigma
    lines = ["", f"uncertainty budget of `{name}`  (σ = {value_text(sigma, digits)})"]
    width = max(len(row.name) for row in rows)
    for row in rows:
        contribution = value_text(row.contribution, 2)
        if row.correlation is not None:
            source = f"joint term, correlation {row.correlation:g}"
        else:
            (inp,) = row.inputs
            source = (f"from {format_quantity(inp.nominal, digits)[0]} ± "
                      f"{format_quantity(inp.sigma, 2)[0]} {unit_string(inp.nominal.unit)}")
        lines.append(f"  {row.name:<{width}}  {row.share * 100:6.2f} %   {contribution:<22} "
                     f"{source}".rstrip())
    return "\n".join(lines)


TRADE_UNITS = ["AU", "au", "pc", "lsec", "lyr", "century", "yr", "d", "Msun", "Rsun", "Mearth",
               "Rearth", "Mjup", "Rjup", "mas", "uas", "arcsec", "deg", "rad"]


def render_units(table, query: str | None, refused: dict) -> str:
    """Units matching ``query``: name, physical type, value in SI, in aligned columns;
    refused names explained."""
    names = sorted({n for n in table.names() if query is None or query.lower() in n.lower()})
    if query is None:
        names = TRADE_UNITS
    rows: list[tuple[str, str, str]] = []
    more = 0
    for name in names:
        unit = table.lookup(name)
        if unit is None:
            continue
        if len(rows) >= 200:
            more += 1
            continue
        rows.append((name, physical_type(unit), _si_value(unit)))
    lines = []
    if rows:
        widths = [min(28, max(len(header), *(len(r[i]) for r in rows)))
                  for i, header in enumerate(("name", "dimension"))]
        lines += [f"  {'name':<{widths[0]}}  {'dimension':<{widths[1]}}  in SI"]
        for name, kind, value in rows:
            if len(kind) > widths[1]:
                kind = kind.split("/")[0] + "/…"
            lines.append(f"  {name:<{widths[0]}}  {kind:<{widths[1]}}  {value}".rstrip())
    if more:
        lines.append(f"  … and {more} more; narrow the query")
    for name, (message, hint) in refused.items():
        if query is None or query.lower() in name:
            lines.append(f"  {name}: refused: {message}; {hint}")
    if not lines:
        return f"no unit name contains `{query}`"
    head = "units of the trade (`relsheet units QUERY` searches all of astropy's)" if query is None \
        else f"units whose name contains `{query}`"
    return "\n".join([head, *lines])


def _si_value(unit) -> str:
    """`= 1.495978707e11 m`, or `(SI)` for an SI unit itself."""
    try:
        si = unit.si
    except Exception:  # a unit without an SI form (logarithmic units)
        return ""
    if unit_text(si) == unit_text(unit) and si.scale == 1:
        return "(SI)"
    bare = u.CompositeUnit(1, si.bases, si.powers) if si.bases else None
    number = format_number(si.scale, 10)
    return f"= {number} {unit_text(bare)}".rstrip() if bare is not None else f"= {number}"
