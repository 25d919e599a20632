"""Results written back into the sheet as trailing `#= value unit` markers.

Only the markers change: every other byte of the file (line endings, tabs,
Unicode, comments, a missing final newline, a byte-order mark) stays as it
was. An old marker is replaced, markers of consecutive lines are aligned in
one column, and running it twice changes nothing the second time.
"""

from __future__ import annotations

from pathlib import Path

from ..engine.cells import Cell
from ..engine.sheet import Sheet
from .format import cell_text

_BOM = b"\xef\xbb\xbf"


def marker_text(cell: Cell, digits: int = 6) -> str:
    return cell_text(cell, digits)


def _without_marker(rest: str) -> str:
    """The trailing text of a line without its `#=` marker (a comment before it stays)."""
    stripped = rest.lstrip()
    if stripped.startswith("#="):
        return ""
    for at in (rest.find(" #="), rest.find("\t#=")):
        if at >= 0:
            return rest[:at]
    return rest


def annotated_text(sheet: Sheet, text: str, digits: int = 6) -> str:
    """``text`` (the sheet's source) with a fresh marker after every cell."""
    lines = text.splitlines(keepends=True)
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
        keep = (body[:code_end] + _without_marker(body[code_end:])).rstrip()
        markers[index] = (keep, marker_text(cell, digits))
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
                out[i] = f"{keep.ljust(column)}#= {marker}{ending}"
            group = []
    return "".join(out)


def annotate_file(path: str | Path, digits: int = 6, stale_only: bool = False,
                  root: str | Path | None = None):
    """Annotate ``path`` in place (atomically). Returns (sheet, changed line numbers)."""
    from ..files import atomic_write, decode_sheet

    raw = Path(path).read_bytes()
    source = decode_sheet(raw, str(path))
    sheet = Sheet(source, root=root)
    new_text = annotated_text(sheet, source.text, digits)
    old_lines = source.text.splitlines()
    new_lines = new_text.splitlines()
    changed = [i + 1 for i, (a, b) in enumerate(zip(old_lines, new_lines)) if a != b]
    if new_text != source.text and not stale_only:
        data = new_text.encode("utf-8")
        atomic_write(path, _BOM + data if raw.startswith(_BOM) else data)
    return sheet, changed
