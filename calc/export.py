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

from .records import RecordList, is_record
from .sheet import Cell, Sheet
from .uncertain import Summary, Uncertain
from .units import unit_string


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


def _field(q) -> dict:
    out = {"value": json_value(q.value), "unit": unit_string(q.unit)}
    if isinstance(q, Uncertain):
        out["sigma"] = json_value(q.sigma_value())
    return out


def record_value(value):
    """A record as an object of fields ``{"value", "unit"}`` (and ``"sigma"`` when uncertain);
    a record list as a list of them."""
    if isinstance(value, RecordList):
        return [record_value(item) for item in value.items]
    return {name: _field(q) for name, q in value.fields.items()}


def cell_record(cell: Cell, summary=None) -> dict:
    raw = cell.raw
    sigma = None
    percentiles = None
    if raw is not None and is_record(raw):
        shown, unit = record_value(raw), None
    elif summary is not None:
        shown, unit = json_value(summary.mean), unit_string(summary.unit)
        sigma = json_value(summary.std)
        percentiles = {"16": json_value(summary.p16), "50": json_value(summary.p50),
                       "84": json_value(summary.p84)}
    else:
        shown = None if raw is None else json_value(raw.value)
        unit = None if raw is None else unit_string(raw.unit)
        if isinstance(raw, Uncertain):
            sigma = json_value(raw.sigma_value())
    record = {
        "name": cell.name,
        "line": cell.line,
        "value": shown,
        "unit": unit,
        "sigma": sigma,
        "error": error_text(cell),
        "warnings": list(cell.warnings),
    }
    if percentiles is not None:
        record["percentiles"] = percentiles
    return record


def sheet_record(sheet: Sheet, monte_carlo: dict | None = None) -> dict:
    summaries = monte_carlo or {}
    cells = []
    for c in sheet.cells:
        summary = summaries.get(c.name)
        cells.append(cell_record(c, summary if isinstance(summary, Summary) else None))
    record = {
        "sheet": sheet.source.label,
        "constants": sheet.selection.names,
        "cells": cells,
        "checks": [{"line": r.line, "text": r.text, "passed": r.passed, "detail": r.detail}
                   for r in sheet.checks],
    }
    if monte_carlo is not None:
        record["monte_carlo"] = {"samples": sheet_samples(monte_carlo)}
    return record


def sheet_samples(monte_carlo: dict) -> int | None:
    return monte_carlo.get("__samples__") if monte_carlo else None


def to_json(sheet: Sheet, monte_carlo: dict | None = None) -> str:
    return json.dumps(sheet_record(sheet, monte_carlo), ensure_ascii=False, indent=2)
