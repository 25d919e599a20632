"""Tables (``table NAME: a, b, c``) as text, CSV, Markdown, LaTeX and JSON.

Every writer here takes a :class:`~calc.outputs.figures.TableSpec`: plain numbers with
names and units, never the engine's value kinds. Numbers are printed as every other output
prints them (:mod:`calc.outputs.format`): significant digits for exact values, `value ± σ`
rounded to σ's second significant digit (GUM) for uncertain ones; dates exactly as given.
"""

from __future__ import annotations

import csv
import io
import math

import numpy as np

from .export import Numbers, markdown_cell_text, markdown_text, siunitx_unit_text, tex_number
from .figures import Series, TableSpec
from .format import DEFAULT_DIGITS, format_measured, format_number

# ---- the cells of a column, as text -----------------------------------------------------


def _sigma_at(series: Series, index: int) -> float | None:
    if series.sigma is None:
        return None
    sigma = float(np.ravel(series.sigma)[index])
    return sigma if math.isfinite(sigma) and sigma > 0 else None


def cell_text(series: Series, index: int, digits: int = DEFAULT_DIGITS) -> str:
    """One entry of a column: a date as written, `value ± σ`, or the value alone."""
    if series.texts is not None:
        return series.texts[index]
    value = float(np.ravel(series.values)[index])
    sigma = _sigma_at(series, index)
    return format_measured(value, sigma) if sigma is not None else format_number(value, digits)


def column_label(series: Series) -> str:
    """A column's header: `name [unit]`; a column of dates by its name alone (its entries
    carry their time scale; the days behind them are not what a reader reads)."""
    return series.name if series.texts is not None else series.label


def _row_indices(count: int, rows: int | None) -> tuple[list[int], list[int]]:
    """The rows shown before and after the cut: all of them, or the first and last of
    ``rows`` (the first half rounded up)."""
    if rows is None or count <= rows:
        return list(range(count)), []
    head = (rows + 1) // 2
    tail = rows - head
    return list(range(head)), list(range(count - tail, count))


# ---- text -------------------------------------------------------------------------------


def _split_number(text: str) -> tuple[str, str]:
    """A number's text cut where its digits should line up: before the decimal point, else
    before the exponent, else at its end (`-12.5` → `-12`, `.5`; `3e8` → `3`, `e8`)."""
    for mark in (".", "e"):
        at = text.find(mark)
        if at > 0 and text[at - 1].isdigit():
            return text[:at], text[at:]
    return text, ""


def _aligned(texts: list[str]) -> list[str]:
    """Numbers of one column lined up on their decimal points, and `value ± σ` on the `±`."""
    if not texts:
        return []
    pairs = [t.split(" ± ", 1) if " ± " in t else [t, ""] for t in texts]
    values = [_split_number(v) for v, _ in pairs]
    sigmas = [_split_number(s) for _, s in pairs]
    left = max(len(a) for a, _ in values)
    right = max(len(b) for _, b in values)
    sigma_left = max(len(a) for a, _ in sigmas)
    sigma_right = max(len(b) for _, b in sigmas)
    out = []
    for (a, b), (c, d), (_, s) in zip(values, sigmas, pairs):
        text = a.rjust(left) + b.ljust(right)
        if sigma_left:
            text += (" ± " + c.rjust(sigma_left) + d.ljust(sigma_right)) if s \
                else " " * (3 + sigma_left + sigma_right)
        out.append(text)
    return out


def table_text(spec: TableSpec, rows: int | None = None, digits: int = DEFAULT_DIGITS) -> str:
    """The table for a terminal: a title line (name, heading, row count), a header of
    `name [unit]`, a rule under each header, and every row with numbers lined up on their
    decimal points; dates as written. ``rows`` cuts a long table to its first and last rows
    with a line saying how many were left out."""
    count = spec.rows
    title = f"table {spec.name}" + (f" · {spec.heading}" if spec.heading else "")
    title += f" · {count:,} row{'s' if count != 1 else ''}"
    if not spec.columns:
        return title
    head, tail = _row_indices(count, rows)
    shown = head + tail
    columns = []
    for series in spec.columns:
        entries = [cell_text(series, i, digits) for i in shown]
        body = entries if series.texts is not None else _aligned(entries)
        label = column_label(series)
        width = max([len(label), *(len(e) for e in body)])
        numeric = series.texts is None
        header = label.rjust(width) if numeric else label.ljust(width)
        body = [e.rjust(width) if numeric else e.ljust(width) for e in body]
        columns.append((header, "─" * width, body))
    gap = "   "
    lines = [title, "", gap.join(c[0] for c in columns).rstrip(),
             gap.join(c[1] for c in columns)]
    for row in range(len(head)):
        lines.append(gap.join(c[2][row] for c in columns).rstrip())
    if len(shown) < count:
        left_out = count - len(shown)
        lines.append(f"  ⋮  {left_out:,} row{'s' if left_out != 1 else ''} left out "
                     f"(rows {len(head) + 1:,}–{count - len(tail):,})")
        for row in range(len(head), len(shown)):
            lines.append(gap.join(c[2][row] for c in columns).rstrip())
    return "\n".join(lines)


# ---- CSV --------------------------------------------------------------------------------


def _sigma_number(sigma: float) -> str:
    """σ to four significant digits: the two a value is shown with and two guard digits (the
    float noise of propagation, 0.005999999999815677, is not data); as the cell CSV writes it."""
    return repr(float(f"{sigma:.4g}"))


def csv_headers(spec: TableSpec) -> list[str]:
    """`name [unit]` per column, and `name_sigma [unit]` after each column that has σ."""
    headers: list[str] = []
    for series in spec.columns:
        headers.append(column_label(series))
        if series.sigma is not None:
            sigma_name = f"{series.name}_sigma"
            headers.append(f"{sigma_name} [{series.unit}]" if series.unit else sigma_name)
    return headers


def table_csv(spec: TableSpec) -> str:
    """One table as CSV: the header row of :func:`csv_headers`, then one row per row of the
    table; values at full precision (`repr`: they read back as the same floats), dates as
    written, an exact value's σ empty."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(csv_headers(spec))
    flats = [(s, np.ravel(s.values), None if s.sigma is None else np.ravel(s.sigma))
             for s in spec.columns]
    for index in range(spec.rows):
        row: list[str] = []
        for series, values, sigmas in flats:
            row.append(series.texts[index] if series.texts is not None
                       else repr(float(values[index])))
            if sigmas is not None:
                sigma = float(sigmas[index])
                row.append(_sigma_number(sigma) if math.isfinite(sigma) and sigma > 0 else "")
        writer.writerow(row)
    return buffer.getvalue()


def csv_file_name(spec: TableSpec) -> str:
    """The file a table's CSV goes to: its name (a sheet name is letters, digits, `_`)."""
    safe = "".join(ch if ch.isalnum() or ch in "_-" else "_" for ch in spec.name)
    return f"{safe or 'table'}.csv"


# ---- Markdown ---------------------------------------------------------------------------


def table_markdown(spec: TableSpec, rows: int | None = None,
                   digits: int = DEFAULT_DIGITS) -> str:
    """A caption line (`Table `name`: heading`) and a Markdown table: header `name [unit]`,
    numbers right-aligned, `value ± σ`, dates as written; text escaped as the rest of the
    Markdown report is."""
    caption = f"Table `{spec.name.replace('`', chr(39))}`"
    if spec.heading:
        caption += f": {markdown_text(spec.heading)}"
    lines = [caption, ""]
    if not spec.columns:
        return "\n".join(lines)
    lines.append("| " + " | ".join(markdown_cell_text(column_label(s)) for s in spec.columns) + " |")
    lines.append("|" + "|".join("---" if s.texts is not None else "---:" for s in spec.columns)
                 + "|")
    head, tail = _row_indices(spec.rows, rows)

    def row(index: int) -> str:
        return "| " + " | ".join(markdown_cell_text(cell_text(s, index, digits))
                                 for s in spec.columns) + " |"

    lines += [row(i) for i in head]
    if len(head) + len(tail) < spec.rows:
        left_out = spec.rows - len(head) - len(tail)
        lines.append("| " + " | ".join(["⋮"] * len(spec.columns)) + " |")
        lines += [row(i) for i in tail]
        lines += ["", f"*{left_out:,} rows left out*"]
    return "\n".join(lines)


# ---- LaTeX ------------------------------------------------------------------------------

_TEX_SPECIAL = {"\\": r"\textbackslash{}", "{": r"\{", "}": r"\}", "#": r"\#", "$": r"\$",
                "%": r"\%", "&": r"\&", "_": r"\_", "^": r"\textasciicircum{}",
                "~": r"\textasciitilde{}"}


def tex_text(text: str) -> str:
    """Plain text safe in a LaTeX document (the ten special characters escaped, no line
    breaks)."""
    text = "".join(" " if not ch.isprintable() else ch for ch in text)
    return "".join(_TEX_SPECIAL.get(ch, ch) for ch in text)


def _format_model(numbers: list[str]) -> str:
    """siunitx's `table-format` for a column of numbers in its input form (`-12.345`,
    `1.4380 \\pm 0.0010 e30`): the widest sign, integer, decimal, uncertainty and exponent
    parts, so the column lines up on the decimal marker and reserves the right width."""
    sign = integer = decimals = uncertainty = exponent = 0
    exponent_sign = False
    for text in numbers:
        number, _, sigma = text.partition(r" \pm ")
        number = number.strip()
        power = ""
        if " e" in sigma:
            sigma, power = sigma.split(" e")
        elif "e" in number:
            number, power = number.split("e")
        if number.startswith("-"):
            sign, number = 1, number[1:]
        whole, _, fraction = number.partition(".")
        integer, decimals = max(integer, len(whole)), max(decimals, len(fraction))
        if sigma:
            digits = sigma.strip().replace(".", "").lstrip("0") or "0"
            uncertainty = max(uncertainty, len(digits))
        if power:
            exponent_sign = exponent_sign or power.startswith("-")
            exponent = max(exponent, len(power.lstrip("+-")))
    model = ("-" if sign else "") + f"{max(integer, 1)}.{decimals}"
    if uncertainty:
        model += f"({uncertainty})"
    if exponent:
        model += "e" + ("-" if exponent_sign else "") + str(exponent)
    return model


def table_latex(spec: TableSpec, declared: dict[str, str] | None = None) -> str:
    """A ``tabular`` with one siunitx ``S`` column per numeric column (aligned on the decimal
    marker, `table-format` from the column's widest number), dates in ``l`` columns, headers
    `name [unit]` with the unit as siunitx macros (`\\micro\\second`, `\\degree\\per\\year`);
    units siunitx lacks are added to ``declared`` for \\DeclareSIUnit lines. Needs siunitx
    (version 3)."""
    declared = {} if declared is None else declared
    specs, headers, columns = [], [], []
    for series in spec.columns:
        if series.texts is not None:
            cells = [tex_text(t) for t in series.texts]
            specs.append("l")
        else:
            values = np.ravel(series.values)
            cells = []
            for index, value in enumerate(values):
                if not math.isfinite(float(value)):
                    cells.append("{" + ("---" if math.isnan(value) else
                                        ("$+\\infty$" if value > 0 else "$-\\infty$")) + "}")
                else:
                    cells.append(tex_number(float(value), _sigma_at(series, index)))
            numbers = [c for c in cells if not c.startswith("{")]
            specs.append(f"S[table-format={_format_model(numbers)}]" if numbers else "c")
        name = tex_text(series.name)
        unit = siunitx_unit_text(series.unit, declared) if series.texts is None else ""
        headers.append("{" + (f"{name} [\\unit{{{unit}}}]" if unit else name) + "}")
        columns.append(cells)
    lines = [f"\\begin{{tabular}}{{{' '.join(specs)}}}", "\\hline",
             " & ".join(headers) + " \\\\", "\\hline"]
    for index in range(spec.rows):
        lines.append(" & ".join(column[index] for column in columns) + " \\\\")
    lines += ["\\hline", "\\end{tabular}"]
    return "\n".join(lines)


# ---- JSON -------------------------------------------------------------------------------


def table_record(spec: TableSpec) -> dict:
    """A table as a JSON-ready object: ``{"name", "heading", "line", "rows", "columns":
    [{"name", "unit", "values", "sigma"}]}``; ``values`` are numbers (or the dates as written),
    ``sigma`` numbers or null; arrays stay numpy until written (:class:`Numbers`)."""
    columns = []
    for series in spec.columns:
        column: dict[str, object] = {"name": series.name, "unit": series.unit}
        column["values"] = list(series.texts) if series.texts is not None \
            else Numbers(series.values)
        column["sigma"] = Numbers(series.sigma) if series.sigma is not None else None
        columns.append(column)
    return {"name": spec.name, "heading": spec.heading, "line": spec.line, "rows": spec.rows,
            "columns": columns}
