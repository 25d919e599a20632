"""Comparing evaluations and tracing dependencies: `relsheet diff` and `relsheet deps`."""

from __future__ import annotations

import subprocess
from pathlib import Path

import astropy.units as u
import numpy as np

from ..engine.cells import Cell
from ..engine.sheet import Sheet
from ..engine.values import is_record
from ..errors import InputError, UsageError
from ..files import decode_sheet
from .format import cell_text


def _shown(cell: Cell | None) -> str:
    if cell is None:
        return "—"
    return cell_text(cell)


def _relative(old: Cell | None, new: Cell | None) -> str:
    if old is None or new is None or old.error or new.error or is_record(old.raw) \
            or is_record(new.raw):
        return ""
    old_value, new_value = _plain(old.value), _plain(new.value)
    if old_value is None or new_value is None:   # dates, truths: as shown
        return "0" if _shown(old) == _shown(new) else "changed"
    try:
        a = np.asarray(old_value.to_value(new_value.unit), dtype=float)
    except Exception:
        return "unit changed"
    b = np.asarray(new_value.value, dtype=float)
    if a.shape != b.shape:
        return "shape changed"
    if not np.any(a != b):
        return "0"
    with np.errstate(divide="ignore", invalid="ignore"):
        relative = np.ravel((b - a) / np.abs(a))
    change = relative[np.argmax(np.abs(relative))]   # the largest, with its sign
    if not np.isfinite(change):
        return "from 0"
    return f"{change:+.3g}"


def _plain(value):
    """The numbers of a value (a value on axes: its data); None for dates and truths."""
    data = getattr(value, "data", None)
    if data is not None and hasattr(value, "axes"):
        value = data
    return value if isinstance(value, u.Quantity) else None


def _same(old: Cell | None, new: Cell | None) -> bool:
    return _shown(old) == _shown(new) and _relative(old, new) in ("0", "")


def diff(old: Sheet, new: Sheet, show_all: bool = False,
         labels: tuple[str, str] = ("old", "new")) -> str:
    """A table of cells whose shown values differ (all cells with ``show_all``)."""
    names = list(dict.fromkeys([*old.names(), *new.names()]))
    rows = []
    for name in names:
        a = old.cell(name) if name in old else None
        b = new.cell(name) if name in new else None
        if show_all or not _same(a, b):
            rows.append((name, _shown(a), _shown(b), _relative(a, b)))
    header = f"{labels[0]}  →  {labels[1]}"
    if not rows:
        return f"{header}\nno cell changed"
    widths = [max(len(r[i]) for r in rows + [("cell", labels[0], labels[1], "relative")])
              for i in range(4)]
    lines = [header, "  ".join(t.ljust(w) for t, w in
                               zip(("cell", labels[0], labels[1], "relative"), widths)).rstrip()]
    lines += ["  ".join(t.ljust(w) for t, w in zip(r, widths)).rstrip() for r in rows]
    return "\n".join(lines)


def sheet_at_revision(path: str, revision: str) -> Sheet:
    """The sheet as committed at a git revision (read with `git show`)."""
    if not revision or revision.startswith("-") or any(ch.isspace() or ch == ":"
                                                        for ch in revision):
        raise UsageError(f"`{revision}` is not a git revision",
                         hint="give a commit, a branch or a tag, such as HEAD~1 or v1.0")
    file = Path(path).resolve()
    try:
        top = subprocess.run(["git", "rev-parse", "--show-toplevel"], cwd=file.parent,
                             capture_output=True, text=True, check=True).stdout.strip()
        relative = file.relative_to(Path(top).resolve()).as_posix()
        shown = subprocess.run(["git", "show", "--end-of-options", f"{revision}:{relative}"],
                               cwd=top, capture_output=True, check=True)
    except FileNotFoundError:
        raise InputError("git is not installed: --rev needs it") from None
    except subprocess.CalledProcessError as exc:
        message = (exc.stderr.decode(errors="replace") if isinstance(exc.stderr, bytes)
                   else exc.stderr or "").strip().splitlines()
        raise InputError(f"cannot read {path} at {revision}: "
                         f"{message[-1] if message else 'git failed'}") from None
    return Sheet(decode_sheet(shown.stdout, f"{path}@{revision}"))


def dependency_tree(sheet: Sheet, name: str, users: bool = False) -> str:
    """The cells `name` uses (or, with ``users``, the cells that use it), as an indented tree;
    a cell shown once already is marked instead of repeated. The walk is iterative: chains of
    thousands of cells are fine."""
    lines: list[str] = []
    seen: set[str] = set()
    stack: list[tuple[str, int]] = [(name, 0)]
    while stack:
        node, depth = stack.pop()
        cell = sheet.cell(node)
        mark = "  (above)" if node in seen else ""
        where = f"line {cell.line}" if cell.source is sheet.source else "typed at the prompt"
        lines.append(f"{'  ' * depth}{node}  ({where}){mark}")
        if node in seen:
            continue
        seen.add(node)
        following = sheet.users(node) if users else sheet.uses(node)
        ordered = sorted(following, key=lambda n: sheet.cell(n).line)
        stack.extend((nxt, depth + 1) for nxt in reversed(ordered))
    return "\n".join(lines)


def dependency_table(sheet: Sheet, users: bool = False) -> str:
    arrow = "→" if users else "←"
    lines = []
    for cell in sheet.cells:
        others = sheet.users(cell.name) if users else sheet.uses(cell.name)
        listed = ", ".join(sorted(others, key=lambda n: sheet.cell(n).line)) or "—"
        lines.append(f"{cell.name} {arrow} {listed}")
    return "\n".join(lines)
