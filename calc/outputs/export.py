"""Machine-readable results: the JSON document of ``relsheet eval --format json``.

Schema (DESIGN §6)::

    {"sheet": "path", "constants": ["codata2022", "iau2015"],
     "cells": [{"name", "line", "value", "unit", "sigma", "error"}, ...],
     "checks": [...]}

``value`` is a number, a list of numbers for arrays, an object of fields
(each ``{"value", "unit"}``) for a record, a list of such objects for an
array of records, or null when the cell failed; infinities, which JSON cannot
write, are the strings "inf"/"-inf".
``sigma`` is the standard uncertainty in the same unit (null without one);
under ``--mc`` value and sigma are the sample mean and standard deviation and
``percentiles`` gives the 16/50/84 % points. ``unit`` is astropy's generic
string of the cell's unit; ``error`` is the
error's ``file:line:col: message`` (and hint), or null; ``warnings`` lists
the validity warnings of the cell (a formula used outside its regime), so
that no program reading the JSON can miss them.
"""

from __future__ import annotations

import json
import math

import numpy as np

from ..engine.cells import Cell
from ..engine.sheet import Sheet
from ..engine.values import Shown, ShownRecord, ShownRecords, ShownValue
from ..physics.units import unit_string
from .format import as_shown, format_magnitude, format_quantity


def _number(x: float):
    x = float(x)
    if math.isinf(x):
        return "inf" if x > 0 else "-inf"
    if math.isnan(x):
        return None
    return x


def json_value(value):
    if np.ndim(value) == 0:
        return _number(value)
    return [_number(v) for v in np.ravel(value)]


def error_text(cell: Cell) -> str | None:
    err = cell.error
    if err is None:
        return None
    text = f"{err.location}: {err.message}"
    return f"{text} (hint: {err.hint})" if err.hint else text


def _leaf(s: Shown) -> dict:
    out = {"value": json_value(s.value), "unit": unit_string(s.unit)}
    if s.sigma is not None:
        out["sigma"] = json_value(s.sigma)
    return out


def record_value(value: ShownValue):
    """A record as an object of fields ``{"value", "unit"}`` (and ``"sigma"`` when uncertain);
    a record list as a list of them."""
    if isinstance(value, ShownRecords):
        return [record_value(item) for item in value.items]
    if isinstance(value, ShownRecord):
        return {name: record_value(q) for name, q in value.fields.items()}
    return _leaf(value)


def cell_record(cell: Cell, sampled: ShownValue | None = None) -> dict:
    sigma = None
    percentiles = None
    unit = None
    if cell.raw is None:
        shown_value = None
    else:
        s = sampled if isinstance(sampled, Shown) and sampled.samples is not None \
            else as_shown(cell.raw)
        if isinstance(s, Shown):
            shown_value, unit = json_value(s.value), unit_string(s.unit)
            if s.sigma is not None:
                sigma = json_value(s.sigma)
            points = s.percentiles()
            if points is not None:
                percentiles = {"16": json_value(points[0]), "50": json_value(points[1]),
                               "84": json_value(points[2])}
        else:
            shown_value = record_value(s)
    record = {
        "name": cell.name,
        "line": cell.line,
        "value": shown_value,
        "unit": unit,
        "sigma": sigma,
        "error": error_text(cell),
        "warnings": list(cell.warnings),
    }
    if percentiles is not None:
        record["percentiles"] = percentiles
    return record


def sheet_record(sheet: Sheet, monte_carlo: dict | None = None,
                 samples: int | None = None) -> dict:
    """The whole evaluation as one JSON-ready object (DESIGN §6)."""
    from .format import check_detail

    sampled = monte_carlo or {}
    record = {
        "sheet": sheet.source.label,
        "constants": sheet.selection.names,
        "cells": [cell_record(c, sampled.get(c.name)) for c in sheet.cells],
        "checks": [{"line": r.line, "text": r.text, "passed": r.passed,
                    "detail": check_detail(r)} for r in sheet.checks],
    }
    if monte_carlo is not None:
        record["monte_carlo"] = {"samples": samples}
    return record


def to_json(sheet: Sheet, monte_carlo: dict | None = None, samples: int | None = None) -> str:
    return json.dumps(sheet_record(sheet, monte_carlo, samples), ensure_ascii=False, indent=2)


# ---- CSV -----------------------------------------------------------------------------


def _number_text(value) -> str:
    if np.ndim(value) == 0:
        return repr(float(value))
    return " ".join(repr(float(v)) for v in np.ravel(value))


def to_csv(sheet: Sheet) -> str:
    """``name,value,sigma,unit`` with a header; record fields as ``name.field`` rows, array
    values as space-separated numbers, failed cells with empty fields."""
    import csv
    import io

    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(["name", "value", "sigma", "unit"])

    def rows(name: str, s: ShownValue) -> None:
        if isinstance(s, ShownRecords):
            for index, item in enumerate(s.items):
                rows(f"{name}[{index}]", item)
        elif isinstance(s, ShownRecord):
            for field, q in s.fields.items():
                rows(f"{name}.{field}", q)
        else:
            sigma = _number_text(s.sigma) if s.sigma is not None else ""
            writer.writerow([name, _number_text(s.value), sigma, unit_string(s.unit)])

    for cell in sheet.cells:
        if cell.raw is None:
            writer.writerow([cell.name, "", "", ""])
        else:
            rows(cell.name, as_shown(cell.raw))
    return buffer.getvalue()


# ---- Markdown ------------------------------------------------------------------------


def _markdown_value(cell: Cell) -> tuple[str, str]:
    if cell.error is not None:
        return f"**error:** {cell.error.message}", ""
    return format_quantity(cell.raw)


def _cell_text(text: str) -> str:
    """Text safe inside a Markdown table cell."""
    return text.replace("|", "\\|")


def to_markdown(sheet: Sheet) -> str:
    """A report: headings, notes as text, tables of cells, the checks, the constant sets."""
    from ..language.syntax import Note
    from .format import check_detail

    lines = [f"# {sheet.source.label}", "",
             f"Constants: {', '.join(sheet.selection.names)}"
             + (" (with their published uncertainties)" if sheet.uncertain_constants else ""), ""]
    table_open = False
    for item in sheet.items:
        if isinstance(item, Note):
            if table_open:
                lines.append("")
                table_open = False
            lines += [f"## {item.text}" if item.heading else item.text, ""]
            continue
        if not table_open:
            lines += ["| cell | value | unit |", "|---|---|---|"]
            table_open = True
        value, unit = _markdown_value(item)
        lines.append(f"| `{item.name}` | {_cell_text(value)} | {unit} |")
        for warning in item.warnings:
            lines.append(f"| | *warning: {_cell_text(warning)}* | |")
    if table_open:
        lines.append("")
    if sheet.checks:
        lines += ["## Checks", ""]
        for result in sheet.checks:
            mark = "passed" if result.passed else "**FAILED**"
            lines.append(f"- {mark} (line {result.line}): `{result.text}` — {check_detail(result)}")
        lines.append("")
    return "\n".join(lines)


# ---- LaTeX ---------------------------------------------------------------------------

_DIGITS = "Zero One Two Three Four Five Six Seven Eight Nine".split()


def macro_name(cell_name: str) -> str:
    """The LaTeX macro of a cell: ``\\rs`` and the name in CamelCase, letters only.

    `adv_rate` → ``\\rsAdvRate``, `m1` → ``\\rsMOne``, `ppn.gamma` → ``\\rsPpnGamma``,
    `ω_dot` → ``\\rsOmegaDot`` (other letters by their Unicode name), digits spelled out.
    """
    import unicodedata

    parts: list[str] = []
    word = ""
    for ch in cell_name:
        if ch.isascii() and ch.isalpha():
            word += ch
        elif ch.isdigit():
            if word:
                parts.append(word)
            word = ""
            parts.append(_DIGITS[int(ch)] if ch.isascii() else "")
        elif ch.isalpha():
            if word:
                parts.append(word)
            word = ""
            parts.append(unicodedata.name(ch, "X").split()[-1].lower())
        else:
            if word:
                parts.append(word)
            word = ""
    if word:
        parts.append(word)
    return "\\rs" + "".join(p[:1].upper() + p[1:] for p in parts if p)


def _siunitx_unit(unit) -> str:
    """astropy's generic unit string in siunitx's literal form (`m3 / s2` → `m^3/s^2`)."""
    import re

    text = unit_string(unit)
    if text == "%":
        return "\\percent"
    text = re.sub(r"([A-Za-z])(-?\d+(\.\d+)?)", r"\1^{\2}", text)
    text = text.replace(" / ", "/").replace("(", "").replace(")", "").replace(" ", ".")
    return text


def to_tex(sheet: Sheet) -> str:
    """One ``\\newcommand`` per cell: ``\\qty{value}{unit}`` (siunitx), ``\\num`` when
    dimensionless, ``\\pm`` for uncertainties; arrays and records are left out with a
    comment. Two cells with the same macro name are an error naming both."""
    from ..errors import SheetError

    seen: dict[str, str] = {}
    lines = [f"% relsheet: {sheet.source.label} (constants {', '.join(sheet.selection.names)})",
             "% needs \\usepackage{siunitx}"]
    for cell in sheet.cells:
        name = macro_name(cell.name)
        if name in seen:
            raise SheetError(f"cells `{seen[name]}` and `{cell.name}` would both be the LaTeX "
                             f"macro {name}", cell.definition.name_span,
                             hint="rename one of them", source=cell.source)
        seen[name] = cell.name
        s = as_shown(cell.raw) if cell.raw is not None else None
        if not isinstance(s, Shown) or np.ndim(s.value) != 0:
            what = "failed" if s is None else "is an array" if isinstance(s, Shown) \
                else "is a record"
            lines.append(f"% {cell.name} {what}: no macro")
            continue
        number = format_quantity(s)[0] if s.sigma is not None else format_magnitude(s.value, 6)
        number = number.replace(" ± ", " \\pm ").replace("(", "").replace(")", "")
        unit = _siunitx_unit(s.unit)
        body = f"\\qty{{{number}}}{{{unit}}}" if unit else f"\\num{{{number}}}"
        lines.append(f"\\newcommand{{{name}}}{{{body}}}")
    return "\n".join(lines) + "\n"
