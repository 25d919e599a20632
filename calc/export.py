"""Machine-readable results: the JSON document of ``relsheet eval --format json``.

Schema (DESIGN §6)::

    {"sheet": "path", "constants": ["codata2022", "iau2015"],
     "cells": [{"name", "line", "value", "unit", "sigma", "error"}, ...],
     "checks": [...]}

``value`` is a number, a list of numbers for arrays, an object of fields
(each ``{"value", "unit"}``) for a record, a list of such objects for an
array of records, or null when the cell failed; infinities, which JSON cannot
write, are the strings "inf"/"-inf".
``unit`` is astropy's generic string of the cell's unit; ``error`` is the
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


def record_value(value):
    """A record as an object of fields ``{"value", "unit"}``; a record list as a list of them."""
    if isinstance(value, RecordList):
        return [record_value(item) for item in value.items]
    return {name: {"value": json_value(q.value), "unit": unit_string(q.unit)}
            for name, q in value.fields.items()}


def cell_record(cell: Cell) -> dict:
    value = cell.value
    if value is not None and is_record(value):
        shown, unit = record_value(value), None
    else:
        shown = None if value is None else json_value(value.value)
        unit = None if value is None else unit_string(value.unit)
    return {
        "name": cell.name,
        "line": cell.line,
        "value": shown,
        "unit": unit,
        "sigma": None,
        "error": error_text(cell),
        "warnings": list(cell.warnings),
    }


def sheet_record(sheet: Sheet) -> dict:
    return {
        "sheet": sheet.source.label,
        "constants": sheet.selection.names,
        "cells": [cell_record(c) for c in sheet.cells],
        "checks": [],
    }


def to_json(sheet: Sheet) -> str:
    return json.dumps(sheet_record(sheet), ensure_ascii=False, indent=2)
