"""Results written back into the sheet as trailing `#→ value unit` markers.

Only the markers change: every other byte of the file (line endings, tabs,
Unicode, comments, a missing final newline, a byte-order mark) stays as it
was. An old marker is replaced (also one in the `#=` form of earlier
versions, so one run upgrades a sheet), markers of consecutive lines are
aligned in one column, and running it twice changes nothing the second time.

A marker shows what the text report shows; an array too long to show whole
carries a short digest of all its elements at the marker's digits, so that
`annotate --stale` notices a change anywhere in it.
"""

from __future__ import annotations

import hashlib
from pathlib import Path

import numpy as np

from ..engine.cells import Cell
from ..engine.sheet import Sheet
from ..errors import split_lines
from ..language.syntax import marker_at
from .format import ARRAY_PREVIEW, as_shown, cell_text, format_number

_BOM = b"\xef\xbb\xbf"
MARKER = "#→"


def marker_text(cell: Cell, digits: int = 6) -> str:
    """What follows `#→`: the cell's value (or error) as the report shows it, and for a long
    array a digest of every element."""
    text = cell_text(cell, digits)
    # a marker is one line: control characters an error message quotes are written escaped
    text = "".join(ch if ch.isprintable() else repr(ch)[1:-1] for ch in text)
    if cell.error is None:
        digest = array_digest(cell.raw, digits)
        if digest is not None:
            text += f"  (digest {digest})"
    return text


def array_digest(value, digits: int) -> str | None:
    """Six hex digits of SHA-256 over every element (and σ) written with ``digits``
    significant digits, for arrays longer than the text shows; None otherwise."""
    s = as_shown(value)
    values = getattr(s, "value", None)
    if values is None or np.size(values) <= ARRAY_PREVIEW:
        return None
    if getattr(s, "kind", "quantity") != "quantity":   # dates, truths: their texts
        parts = [str(v) for v in np.ravel(values)]
        return hashlib.sha256(" ".join(parts).encode()).hexdigest()[:6]
    parts = [format_number(v, digits) for v in np.ravel(values)]
    sigma = getattr(s, "sigma", None)
    if sigma is not None:
        parts.append("±")
        parts += [format_number(v, digits) for v in np.ravel(np.broadcast_to(sigma, np.shape(values)))]
    return hashlib.sha256(" ".join(parts).encode()).hexdigest()[:6]


def _without_marker(rest: str) -> str:
    """The trailing text of a line without its marker (a comment before it stays)."""
    at = marker_at(rest.lstrip(" \t"))
    if at == 0:
        return ""
    at = marker_at(rest)
    return rest[:at - 1] if at > 0 else rest


def annotated_text(sheet: Sheet, text: str, digits: int = 6) -> str:
    """``text`` (the sheet's source) with a fresh marker after every cell."""
    lines = split_lines(text, keepends=True)
    markers: dict[int, tuple[str, str]] = {}
    for cell in sheet.cells:
        d = cell.definition
        if d.syntax_error is not None or cell.source is not sheet.source:
            continue
        index = d.span.end_line - 1
        if index >= len(lines):
            continue
        body = lines[index].rstrip("\r\n")
        code_end = d.span.end_column - 1
        # only blanks and tabs go before a marker: other characters Python calls white space
        # (U+2029, \x1c…) belong to the line
        keep = (body[:code_end] + _without_marker(body[code_end:])).rstrip(" \t")
        marker = marker_text(cell, digits)
        if cell.error is None and sheet.solved(cell.name):   # an unknown of a `solve` line
            marker += "  (solved)"
        markers[index] = (keep, marker)
    out = list(lines)
    indices = sorted(markers)
    group: list[int] = []
    for position, index in enumerate(indices):
        group.append(index)
        last = position == len(indices) - 1 or indices[position + 1] != index + 1
        if last:
            column = max(len(markers[i][0]) for i in group) + 2
            for i in group:
                keep, marker = markers[i]
                line = lines[i]
                ending = line[len(line.rstrip("\r\n")):]
                out[i] = f"{keep.ljust(column)}{MARKER} {marker}{ending}"
            group = []
    return "".join(out)


def annotate_file(path: str | Path, digits: int = 6, stale_only: bool = False,
                  root: str | Path | None = None, force: bool = False
                  ) -> tuple[Sheet, list[int]]:
    """Annotate ``path`` in place (atomically; refused if the file changed meanwhile).
    Returns (sheet, changed line numbers)."""
    from ..files import MAX_SHEET_BYTES, atomic_write, decode_sheet, read_limited

    raw = read_limited(path, MAX_SHEET_BYTES, "sheet")
    source = decode_sheet(raw, str(path))
    sheet = Sheet(source, root=root)
    new_text = annotated_text(sheet, source.text, digits)
    old_lines = split_lines(source.text)
    new_lines = split_lines(new_text)
    changed = [i + 1 for i, (a, b) in enumerate(zip(old_lines, new_lines)) if a != b]
    if new_text != source.text and not stale_only:
        data = new_text.encode("utf-8")
        atomic_write(path, _BOM + data if raw.startswith(_BOM) else data, expected=raw,
                     force=force)
    return sheet, changed
