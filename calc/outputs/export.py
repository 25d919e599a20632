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

import astropy.units as u
import numpy as np

from ..engine.cells import Cell
from ..engine.sheet import Sheet
from ..engine.values import Shown, ShownRecord, ShownRecords, ShownValue, is_record
from ..physics.units import unit_string
from .format import as_shown, format_magnitude, format_quantity, format_with_sigma


def _number(x: float):
    x = float(x)
    if math.isinf(x):
        return "inf" if x > 0 else "-inf"
    if math.isnan(x):
        return None
    return x


class Numbers:
    """An array of numbers on its way into JSON: kept as numpy until it is written, then
    written in pieces (a ten-million-element array never becomes a Python list)."""

    __slots__ = ("values",)

    def __init__(self, values) -> None:
        self.values = np.ravel(np.asarray(values, dtype=float))

    def tolist(self) -> list:
        return [_number(v) for v in self.values]


def json_value(value):
    if np.ndim(value) == 0:
        return _number(value)
    return Numbers(value)


#: Elements written per piece of a long array.
_PIECE = 65536


def _number_pieces(numbers: Numbers):
    """`[1.0, 2.5, "inf", null]` of an array, in pieces."""
    values = numbers.values
    yield "["
    for start in range(0, values.size, _PIECE):
        chunk = values[start:start + _PIECE]
        if np.isfinite(chunk).all():
            text = json.dumps(chunk.tolist())[1:-1]   # the C encoder: shortest exact digits
        else:
            text = ", ".join(json.dumps(_number(v)) for v in chunk)
        yield (", " if start else "") + text
    yield "]"


def json_pieces(value, indent: int = 0):
    """JSON text of a document whose arrays of numbers are :class:`Numbers`, in pieces: the
    layout of ``json.dumps(indent=2)``, each array of numbers on one line."""
    pad, inner = " " * indent, " " * (indent + 2)
    if isinstance(value, Numbers):
        yield from _number_pieces(value)
    elif isinstance(value, dict):
        if not value:
            yield "{}"
            return
        yield "{\n"
        for index, (key, item) in enumerate(value.items()):
            yield f"{inner}{json.dumps(key, ensure_ascii=False)}: "
            yield from json_pieces(item, indent + 2)
            yield ",\n" if index < len(value) - 1 else "\n"
        yield pad + "}"
    elif isinstance(value, list):
        if not value:
            yield "[]"
            return
        yield "[\n"
        for index, item in enumerate(value):
            yield inner
            yield from json_pieces(item, indent + 2)
            yield ",\n" if index < len(value) - 1 else "\n"
        yield pad + "]"
    else:
        yield json.dumps(value, ensure_ascii=False)


def error_text(cell: Cell) -> str | None:
    err = cell.error
    if err is None:
        return None
    text = f"{err.location}: {err.message}"
    return f"{text} (hint: {err.hint})" if err.hint else text


def shown_json(s: Shown):
    """The JSON form of a shown value: numbers; dates as ISO strings with their scale; truths
    as booleans."""
    if s.kind == "date":
        return s.value if isinstance(s.value, str) else [str(t) for t in np.ravel(s.value)]
    if s.kind == "truth":
        return bool(s.value) if np.ndim(s.value) == 0 else [bool(f) for f in np.ravel(s.value)]
    return json_value(s.value)


def _precise_dates(raw, shown_value):
    """Dates in JSON to the nanosecond (the text shows milliseconds)."""
    from ..engine.dates import UncertainDate, iso
    from ..physics.records import is_date

    data = getattr(raw, "data", None) if hasattr(raw, "axes") else None
    value = data if data is not None else raw
    if isinstance(value, UncertainDate):
        value = value.nominal_date()
    if not is_date(value):
        return shown_value
    text = iso(value, 9)
    return text if isinstance(text, str) else list(text)


def _leaf(s: Shown) -> dict:
    out = {"value": shown_json(s), "unit": None if s.kind != "quantity" else unit_string(s.unit)}
    if s.sigma is not None:
        out["sigma"] = json_value(s.sigma)
    if s.axes:
        out["axes"] = list(s.axes)
        out["shape"] = list(np.shape(s.value))
    return out


def record_value(value: ShownValue):
    """A record as an object of fields ``{"value", "unit"}`` (and ``"sigma"`` when uncertain);
    a record list as a list of them."""
    if isinstance(value, ShownRecords):
        return [record_value(item) for item in value.items]
    if isinstance(value, ShownRecord):
        return {name: record_value(q) for name, q in value.fields.items()}
    return _leaf(value)


def cell_record(cell: Cell, sampled: ShownValue | None = None, solved: bool = False) -> dict:
    sigma = None
    percentiles = None
    unit = None
    axes: dict = {}
    if cell.raw is None:
        shown_value = None
    else:
        s = sampled if isinstance(sampled, Shown) and sampled.samples is not None \
            else as_shown(cell.raw)
        if isinstance(s, Shown):
            shown_value = shown_json(s)
            if s.kind == "date":
                shown_value = _precise_dates(cell.raw, shown_value)
            unit = unit_string(s.unit) if s.kind == "quantity" else None
            if s.axes:
                axes = {"axes": list(s.axes), "shape": list(np.shape(s.value))}
            if s.sigma is not None:
                sigma = json_value(s.sigma)
            points = s.percentiles()
            if points is not None:
                percentiles = {"16": json_value(points[0]), "50": json_value(points[1]),
                               "84": json_value(points[2])}
        else:
            shown_value = record_value(s)
    error = error_text(cell)
    if error is None and sampled is not None and not isinstance(
            sampled, (Shown, ShownRecord, ShownRecords)):
        # failed under Monte Carlo only (a solve whose samples do not converge)
        error = getattr(sampled, "message", str(sampled))
        shown_value, sigma, unit = None, None, None
    record = {
        "name": cell.name,
        "line": cell.line,
        "value": shown_value,
        "unit": unit,
        "sigma": sigma,
        "error": error,
        "warnings": list(cell.warnings),
    }
    if percentiles is not None:
        record["percentiles"] = percentiles
    record.update(axes)
    if solved:
        record["solved"] = True
    return record


def sheet_record(sheet: Sheet, monte_carlo: dict | None = None,
                 samples: int | None = None) -> dict:
    """The whole evaluation as one JSON-ready object (DESIGN §6)."""
    from .format import check_detail

    sampled = monte_carlo or {}
    record: dict[str, object] = {
        "sheet": sheet.source.label,
        "constants": sheet.selection.names,
        "cells": [cell_record(c, sampled.get(c.name), sheet.solved(c.name))
                  for c in sheet.cells],
        "checks": [{"line": r.line, "text": r.text, "passed": r.passed,
                    "detail": check_detail(r)} for r in sheet.checks],
    }
    tables = _sheet_tables(sheet)
    if tables:
        from .tables import table_record

        record["tables"] = [table_record(spec) for spec in tables]
    # errors of the sheet that no cell carries (a refused correlation, a solve line, a table)
    own = {id(c.error) for c in sheet.cells if c.error is not None}
    record["errors"] = [f"{e.location}: {e.message}" + (f" (hint: {e.hint})" if e.hint else "")
                        for e in sheet.all_errors() if id(e) not in own]
    if monte_carlo is not None:
        record["monte_carlo"] = {"samples": samples}
    return record


def to_json(sheet: Sheet, monte_carlo: dict | None = None, samples: int | None = None) -> str:
    return "".join(json_pieces(sheet_record(sheet, monte_carlo, samples)))


# ---- CSV -----------------------------------------------------------------------------


def _number_text(value) -> str:
    if np.ndim(value) == 0:
        return repr(float(value))
    return " ".join(repr(float(v)) for v in np.ravel(value))


def _sigma_text(sigma) -> str:
    """σ to the two significant digits a value is shown with, and two guard digits: the
    float noise of propagation (0.005999999999815677) is not data."""
    rounded = [float(f"{float(s):.4g}") for s in np.ravel(sigma)]
    return " ".join(repr(s) for s in rounded)


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
            sigma = _sigma_text(s.sigma) if s.sigma is not None else ""
            if s.kind != "quantity":
                # dates (ISO with their scale) and truths; several separated by `; `
                texts = shown_json(s)
                text = "; ".join(map(str, texts)) if isinstance(texts, list) else str(texts)
                writer.writerow([name, text, "", ""])
                return
            writer.writerow([name, _number_text(s.value), sigma, unit_string(s.unit)])

    for cell in sheet.cells:
        if cell.raw is None:
            writer.writerow([cell.name, "", "", ""])
        else:
            rows(cell.name, as_shown(cell.raw))
    return buffer.getvalue()


def table_csv_files(sheet: Sheet) -> dict[str, str]:
    """One CSV per ``table`` statement of the sheet (file name → text): columns
    `name [unit]` and `name_sigma [unit]` (see :func:`calc.outputs.tables.table_csv`). The
    cell CSV of :func:`to_csv` keeps its four columns."""
    from .tables import csv_file_name, table_csv

    return {csv_file_name(spec): table_csv(spec) for spec in _sheet_tables(sheet)}


# ---- Markdown ------------------------------------------------------------------------


def _markdown_value(cell: Cell) -> tuple[str, str]:
    if cell.error is not None:
        return f"**error:** {markdown_text(cell.error.message)}", ""
    return format_quantity(cell.raw)


def markdown_text(text: str) -> str:
    """Sheet text made safe for Markdown (and the HTML it may be rendered to): no raw HTML,
    no line breaks that would start a block of their own; Markdown emphasis stays."""
    text = "".join(" " if ch in "\r\n\v\f\x1c\x1d\x1e\x85\u2028\u2029" else ch for ch in text)
    return text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")


def _code_text(text: str) -> str:
    """Text inside a Markdown code span (shown as written: only a backtick could end it)."""
    return "".join(" " if ch in "\r\n\v\f\x85\u2028\u2029" else ch for ch in text).replace("`", "'")


def markdown_cell_text(text: str) -> str:
    """Text safe inside a Markdown table cell."""
    return markdown_text(text).replace("|", "\\|")


def _record_rows(name: str, value: ShownValue) -> list[tuple[str, str, str]]:
    """(name, value, unit) rows of a record's fields, nested records and lists too."""
    rows: list[tuple[str, str, str]] = []
    if isinstance(value, ShownRecords):
        for index, item in enumerate(value.items):
            rows.append((f"{name}[{index}]", item.label or item.summary(), ""))
            rows += _record_rows(f"{name}[{index}]", item)
    elif isinstance(value, ShownRecord):
        for field, q in value.fields.items():
            if isinstance(q, Shown):
                rows.append((f"{name}.{field}", *format_quantity(q)))
            else:
                rows.append((f"{name}.{field}", q.summary(), ""))
                rows += _record_rows(f"{name}.{field}", q)
    return rows


def to_markdown(sheet: Sheet) -> str:
    """A report: headings, notes as paragraphs, tables of cells (records field by field), the
    checks, the constant sets."""
    from ..language.syntax import Note
    from .format import check_detail
    from .tables import table_markdown

    pending = sorted(_sheet_tables(sheet), key=lambda spec: spec.line)
    lines = [f"# {markdown_text(sheet.source.label)}", "",
             f"Constants: {', '.join(sheet.selection.names)}"
             + (" (with their published uncertainties)" if sheet.uncertain_constants else ""), ""]
    state = "start"   # what the last item left open: "table", "note" (a paragraph) or "start"

    def tables_before(line: int | None) -> None:
        """The sheet's tables that stand before ``line`` (all that are left without one)."""
        nonlocal state
        while pending and (line is None or pending[0].line < line):
            if state != "start":
                lines.append("")
            lines.extend([table_markdown(pending.pop(0)), ""])
            state = "start"

    for item in sheet.items:
        if getattr(item, "source", sheet.source) is sheet.source:
            tables_before(item.line if isinstance(item, Cell) else item.span.line)
        if isinstance(item, Note):
            if state in ("table", "note") and (item.heading or state == "table"):
                lines.append("")
            if item.heading:
                lines += [f"## {markdown_text(item.text)}", ""]
                state = "start"
            else:
                lines.append(markdown_text(item.text))   # consecutive notes: one paragraph
                state = "note"
            continue
        if not isinstance(item, Cell):
            continue   # tables and plots are written after the cells
        if state != "table":
            if state == "note":
                lines.append("")
            lines += ["| cell | value | unit |", "|---|---|---|"]
            state = "table"
        value, unit = _markdown_value(item)
        if sheet.solved(item.name):
            unit = f"{unit} (solved)".strip()
        lines.append(f"| `{item.name}` | {markdown_cell_text(value)} | {markdown_cell_text(unit)} |")
        if item.error is None and is_record(item.raw):
            for name, field_value, field_unit in _record_rows(item.name, as_shown(item.raw)):
                lines.append(f"| `{name}` | {markdown_cell_text(field_value)} | "
                             f"{markdown_cell_text(field_unit)} |")
        for warning in item.warnings:
            lines.append(f"| | *warning: {markdown_cell_text(warning)}* | |")
    if state != "start":
        lines.append("")
        state = "start"
    tables_before(None)
    if sheet.checks:
        lines += ["## Checks", ""]
        for result in sheet.checks:
            mark = "passed" if result.passed else "**FAILED**"
            lines.append(f"- {mark} (line {result.line}): `{_code_text(result.text)}` — "
                         f"{markdown_text(check_detail(result))}")
        lines.append("")
    return "\n".join(lines)


# ---- LaTeX ---------------------------------------------------------------------------

_DIGITS = "Zero One Two Three Four Five Six Seven Eight Nine".split()

#: Diacritics by the word a macro name spells them with (`Ṗ` → `Pdot`, `x̄` → `xbar`).
_MARKS = {"DOT ABOVE": "dot", "DIAERESIS": "ddot", "TILDE": "tilde", "CIRCUMFLEX ACCENT": "hat",
          "MACRON": "bar", "ACUTE ACCENT": "acute", "GRAVE ACCENT": "grave", "BREVE": "breve",
          "CARON": "check", "RING ABOVE": "ring", "VECTOR OR CROSS PRODUCT": "vec",
          "COMBINING RIGHT ARROW ABOVE": "vec"}


def _letter_word(ch: str) -> str:
    """A letter, spelled for a macro name: ASCII as itself, Greek and others by their Unicode
    name (`ω` → `omega`), a diacritic after its letter (`Ṗ` → `Pdot`)."""
    import unicodedata

    decomposed = unicodedata.normalize("NFD", ch)
    base, marks = decomposed[0], decomposed[1:]
    if base.isascii():
        word = base
    else:
        name = unicodedata.name(base, "")
        word = name.split()[-1].lower() if name else "x"
        if "CAPITAL" in name:
            word = word.capitalize()
    for mark in marks:
        mark_name = unicodedata.name(mark, "").replace("COMBINING ", "")
        word += _MARKS.get(mark_name, mark_name.split()[-1].lower() if mark_name else "")
    return word


def macro_name(cell_name: str) -> str:
    """The LaTeX macro of a cell: ``\\rs`` and the name in CamelCase, letters only.

    `adv_rate` → ``\\rsAdvRate``, `m1` → ``\\rsMOne``, `ppn.gamma` → ``\\rsPpnGamma``,
    `ω_dot` → ``\\rsOmegaDot`` (other letters by their Unicode name), `Ṗb` → ``\\rsPdotB``
    (a diacritic spelled after its letter), digits spelled out.
    """
    import unicodedata

    parts: list[str] = []
    word = ""
    for ch in unicodedata.normalize("NFC", cell_name):
        if ch.isascii() and ch.isalpha():
            word += ch
            continue
        if unicodedata.category(ch).startswith("M"):   # a combining mark after a letter
            mark = _letter_word("a" + ch)[1:]
            if word:
                word += mark
            elif parts:
                parts[-1] += mark
            continue
        if word:
            parts.append(word)
        word = ""
        if ch.isdigit():
            parts.append(_DIGITS[int(ch)] if ch.isascii() else "")
        elif ch.isalpha():
            parts.append(_letter_word(ch))   # a word of its own: `Ṗb` → Pdot, B
    if word:
        parts.append(word)
    return "\\rs" + "".join(p[:1].upper() + p[1:] for p in parts if p)


#: astropy unit names and the siunitx (v3) macros that write them.
_SIUNITX = {
    "m": r"\metre", "g": r"\gram", "s": r"\second", "K": r"\kelvin", "A": r"\ampere",
    "mol": r"\mole", "cd": r"\candela", "Hz": r"\hertz", "N": r"\newton", "J": r"\joule",
    "W": r"\watt", "Pa": r"\pascal", "C": r"\coulomb", "V": r"\volt", "T": r"\tesla",
    "Ohm": r"\ohm", "rad": r"\radian", "sr": r"\steradian", "deg": r"\degree",
    "arcmin": r"\arcminute", "arcsec": r"\arcsecond", "min": r"\minute", "h": r"\hour",
    "d": r"\day", "t": r"\tonne", "eV": r"\electronvolt", "AU": r"\astronomicalunit",
    "au": r"\astronomicalunit", "%": r"\percent", "L": r"\litre", "l": r"\litre",
    "bar": r"\bar", "u": r"\dalton",
}
#: Units siunitx does not know: declared in the macro file (\DeclareSIUnit), as printed.
_DECLARED = {
    "yr": ("year", "yr"), "century": ("century", "century"), "pc": ("parsec", "pc"),
    "lyr": ("lightyear", "ly"), "lsec": ("lightsecond", "lt-s"),
    # symbols with subscripts are math: siunitx sets units in text mode inside text
    "solMass": ("solarmass", r"\ensuremath{M_{\odot}}"),
    "solRad": ("solarradius", r"\ensuremath{R_{\odot}}"),
    "solLum": ("solarluminosity", r"\ensuremath{L_{\odot}}"),
    "earthMass": ("earthmass", r"\ensuremath{M_{\oplus}}"),
    "earthRad": ("earthradius", r"\ensuremath{R_{\oplus}}"),
    "jupiterMass": ("jupitermass", r"\ensuremath{M_{J}}"),
    "jupiterRad": ("jupiterradius", r"\ensuremath{R_{J}}"),
    "cycle": ("cycle", "cycle"), "ppm": ("ppm", "ppm"),
    "ppb": ("ppb", "ppb"), "mas": ("milliarcsecond", "mas"), "uas": ("microarcsecond", r"\micro as"),
    "Jy": ("jansky", "Jy"), "wk": ("week", "wk"), "fortnight": ("fortnight", "fortnight"),
}
_PREFIXES = {"Y": "yotta", "Z": "zetta", "E": "exa", "P": "peta", "T": "tera", "G": "giga",
             "M": "mega", "k": "kilo", "h": "hecto", "da": "deca", "d": "deci", "c": "centi",
             "m": "milli", "u": "micro", "n": "nano", "p": "pico", "f": "femto", "a": "atto",
             "z": "zepto", "y": "yocto"}
_POWERS = {2: r"\squared", 3: r"\cubed"}


def _siunitx_base(name: str, declared: dict[str, str]) -> str:
    """One unit name (perhaps prefixed: `km`, `us`, `Mpc`) as siunitx macros."""
    if name in _SIUNITX:
        return _SIUNITX[name]
    if name in _DECLARED:
        macro, text = _DECLARED[name]
        declared[macro] = text
        return "\\" + macro
    for prefix in sorted(_PREFIXES, key=len, reverse=True):
        rest = name[len(prefix):]
        if name.startswith(prefix) and rest and (rest in _SIUNITX or rest in _DECLARED):
            return f"\\{_PREFIXES[prefix]}" + _siunitx_base(rest, declared)
    macro = "rsunit" + "".join(c for c in macro_name(name)[3:] if c.isalpha())
    # the name as letters: siunitx sets it upright like any unit (no \\text, which needs amsmath)
    declared[macro] = "".join(c for c in name if c.isalnum())
    return "\\" + macro


def siunitx_unit(unit, declared: dict[str, str]) -> str:
    """A unit as siunitx macros: `\\kilo\\metre\\per\\second`, `\\degree\\per\\year`; units
    siunitx lacks are added to ``declared`` (macro → text) for \\DeclareSIUnit lines."""
    if unit == u.percent:
        return r"\percent"
    bases = getattr(unit, "bases", [unit])
    powers = getattr(unit, "powers", [1])
    factors = [(base.to_string(), float(power)) for base, power in zip(bases, powers)]
    return _siunitx_factors(factors, float(getattr(unit, "scale", 1.0)), declared)


def _siunitx_factors(factors: list[tuple[str, float]], scale: float,
                     declared: dict[str, str]) -> str:
    """Unit names with their powers as siunitx macros, the positive powers first."""
    out = []
    for name, power in sorted(factors, key=lambda bp: bp[1] < 0):
        macro = _siunitx_base(name, declared)
        size = abs(power)
        if power < 0:
            macro = r"\per" + macro
        if size != 1:
            macro += _POWERS.get(int(size), f"\\tothe{{{size:g}}}") if float(size).is_integer() \
                else f"\\tothe{{{size:g}}}"
        out.append(macro)
    text = "".join(out)
    return f"{scale:g}{text}" if scale != 1 else text


def siunitx_unit_text(text: str, declared: dict[str, str]) -> str:
    """A unit written as the sheet language prints it (:func:`calc.physics.units.unit_text`:
    `us`, `deg / yr`, `m^2 kg / s`, `s^-1`, `m^(1/2)`, `(1000 m)`, `%`) as siunitx macros:
    `\\micro\\second`, `\\degree\\per\\year`. The table and plot specs carry units as this
    text; a unit name siunitx lacks is declared as :func:`siunitx_unit` does."""
    text = text.strip()
    if not text:
        return ""
    if text == "%":
        return r"\percent"
    scale = 1.0
    if text.startswith("(") and text.endswith(")"):
        number, _, rest = text[1:-1].partition(" ")
        try:
            scale = float(number)
        except ValueError:
            rest = text[1:-1]
        text = rest
    factors: list[tuple[str, float]] = []
    for index, part in enumerate(text.split(" / ")):
        sign = -1.0 if index else 1.0
        for factor in part.split():
            name, _, power_text = factor.partition("^")
            factors.append((name, sign * _power_value(power_text)))
    return _siunitx_factors(factors, scale, declared)


def _power_value(text: str) -> float:
    """`2`, `-1`, `(1/2)`, `0.3333` (a power as unit_text writes it; none is 1)."""
    text = text.strip("()")
    if not text:
        return 1.0
    top, slash, bottom = text.partition("/")
    try:
        return float(top) / float(bottom) if slash else float(top)
    except (ValueError, ZeroDivisionError):
        return 1.0


def _tex_number(s: Shown) -> str:
    """A value (± σ) in siunitx's input form: `1.4380 \\pm 0.0010 e30`."""
    return tex_number(s.value, s.sigma)


def tex_number(value: float, sigma: float | None = None) -> str:
    """A number (± σ, GUM rounding as in text) in siunitx's input form: `4.2266`,
    `1.4380 \\pm 0.0010 e30`. Built from the number alone, never from a unit's printed form
    (a percentage would bring its `× 1%` along)."""
    if sigma is None:
        return format_magnitude(value, 6)
    text = format_with_sigma(value, sigma)
    if " × 1e" in text:
        text, exponent = text.split(" × 1e")
        return text.strip("()").replace(" ± ", r" \pm ") + f" e{exponent}"
    return text.replace(" ± ", r" \pm ")


def tex_comment(text: str) -> str:
    """Text safe on a LaTeX comment line (no line break can end the comment)."""
    return "".join(" " if not ch.isprintable() else ch for ch in text)


def _tex_leaves(path: str, value: ShownValue):
    """(name, shown) of every field of a record, nested records and record lists too:
    `budget.gr`, `orbits[0].a`."""
    if isinstance(value, ShownRecords):
        for index, record in enumerate(value.items):
            yield from _tex_leaves(f"{path}[{index}]", record)
    elif isinstance(value, ShownRecord):
        for field, item in value.fields.items():
            yield from _tex_leaves(f"{path}.{field}", item)
    else:
        yield path, value


def _tex_macro(s: Shown, declared: dict[str, str]) -> str:
    if s.kind == "date":   # a date as written, in text (ISO with its scale, escaped)
        text = s.value if isinstance(s.value, str) else str(s.value)
        if s.sigma is not None:
            text += f" ± {float(s.sigma):.2g} s"
        safe = tex_comment(text).replace("±", "$\\pm$")
        return "\\text{" + safe + "}"
    if s.kind == "truth":
        return "\\text{" + ("true" if bool(s.value) else "false") + "}"
    number = _tex_number(s)
    unit = siunitx_unit(s.unit, declared) if s.unit != u.dimensionless_unscaled else ""
    return f"\\qty{{{number}}}{{{unit}}}" if unit else f"\\num{{{number}}}"


def to_tex(sheet: Sheet) -> str:
    """One ``\\newcommand`` per cell: ``\\qty{value}{unit}`` (siunitx, units as its macros),
    ``\\num`` when dimensionless, ``\\pm`` for uncertainties; a record gives one macro per
    field (`budget.gr` → ``\\rsBudgetGr``); arrays are left out with a comment; each table
    of the sheet is a ``tabular`` in a macro of its own (`conjunction` →
    ``\\rsConjunctionTable``). Two names with the same macro name are an error naming both."""
    from ..errors import SheetError

    seen: dict[str, str] = {}
    declared: dict[str, str] = {}
    body: list[str] = []

    for cell in sheet.cells:   # cells first: a record's field never takes a cell's macro
        macro = macro_name(cell.name)
        if macro in seen:
            raise SheetError(f"cells `{seen[macro]}` and `{cell.name}` would both be the LaTeX "
                             f"macro {macro}", cell.definition.name_span,
                             hint="rename one of them", source=cell.source)
        seen[macro] = cell.name
    for cell in sheet.cells:
        name = macro_name(cell.name)
        s = as_shown(cell.raw) if cell.raw is not None else None
        if isinstance(s, (ShownRecord, ShownRecords)):
            body.append(f"% {tex_comment(cell.name)} {tex_comment(s.summary())}: "
                        "one macro per field")
            for path, leaf in _tex_leaves(cell.name, s):
                name = macro_name(path)
                if name in seen:
                    body.append(f"% {tex_comment(path)} would be {name} like "
                                f"{tex_comment(seen[name])}: no macro")
                elif isinstance(leaf, Shown) and np.ndim(leaf.value) == 0:
                    seen[name] = path
                    body.append(f"\\newcommand{{{name}}}{{{_tex_macro(leaf, declared)}}}")
                else:
                    body.append(f"% {tex_comment(path)} is an array: no macro")
            continue
        if not isinstance(s, Shown) or np.ndim(s.value) != 0:
            what = "failed" if s is None else "is an array"
            body.append(f"% {tex_comment(cell.name)} {what}: no macro")
            continue
        if sheet.solved(cell.name):
            body.append(f"% {tex_comment(cell.name)}: solved (an unknown of a `solve` line)")
        body.append(f"\\newcommand{{{name}}}{{{_tex_macro(s, declared)}}}")
    for spec in _sheet_tables(sheet):
        from .tables import table_latex

        macro = macro_name(f"{spec.name}_table")
        if macro in seen:
            from ..errors import Span

            where = Span(spec.line, 1, spec.line, 1) if spec.line else None
            raise SheetError(f"`{seen[macro]}` and table `{spec.name}` would both be the LaTeX "
                             f"macro {macro}", where, hint="rename one of them",
                             source=sheet.source)
        seen[macro] = f"table {spec.name}"
        body.append(f"% table {tex_comment(spec.name)}"
                    + (f": {tex_comment(spec.heading)}" if spec.heading else ""))
        body.append(f"\\newcommand{{{macro}}}{{%\n{table_latex(spec, declared)}}}")
    lines = [f"% relsheet: {tex_comment(sheet.source.label)} "
             f"(constants {', '.join(sheet.selection.names)})",
             "% needs \\usepackage{siunitx} (version 3)"]
    lines += [f"\\DeclareSIUnit{{\\{macro}}}{{{text}}}" for macro, text in sorted(declared.items())]
    return "\n".join(lines + body) + "\n"


def _sheet_tables(sheet) -> list:
    """The sheet's evaluated ``table`` statements (TableSpec), or none from an engine that
    has no tables yet."""
    tables = getattr(sheet, "tables", None)
    return list(tables()) if callable(tables) else []
