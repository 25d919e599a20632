"""Completion at the interactive prompt: cells, functions (with their signatures), units,
constants, imported cells and the `:` commands."""

from __future__ import annotations

import re

from prompt_toolkit.completion import Completer, Completion

from ..language.scope import PPN_PARAMETERS, ppn_cell
from ..physics import functions
from ..physics.constants import constant_table

_WORD = re.compile(r"[\w.]*$")
_COMMANDS = ["cells", "deps", "users", "revert", "write", "funcs", "help", "quit"]
#: At most this many unit names are offered for one prefix (astropy knows thousands).
MAX_UNITS = 40


class SheetCompleter(Completer):
    def __init__(self, session) -> None:
        self.session = session

    def candidates(self, line: str) -> list[tuple[str, str]]:
        """(text, what it is) for the word before the cursor at the end of ``line``."""
        stripped = line.lstrip()
        if stripped.startswith(":") and " " not in stripped:
            prefix = stripped[1:]
            return [(f":{c}", "command") for c in _COMMANDS if c.startswith(prefix)]
        word = _WORD.search(line).group()
        sheet = self.session.sheet
        if stripped.startswith((":deps", ":users", ":revert")):
            return [(n, "cell") for n in sheet.names() if n.startswith(word)]
        if stripped.startswith(":funcs"):
            return [(f.name, f.summary) for f in functions.all_functions() if f.name.startswith(word)]
        if "." in word:
            head, _, rest = word.rpartition(".")
            if head == "const":
                table = constant_table(sheet.selection)
                return [(f"const.{n}", e.description) for n, e in sorted(table.items())
                        if n.startswith(rest)]
            if head == "ppn":
                return [(ppn_cell(n), "PPN parameter") for n in PPN_PARAMETERS
                        if n.startswith(rest)]
            imported = sheet.namespaces.get(head)
            if imported is not None:
                return [(f"{head}.{n}", f"cell of {imported.source.label}")
                        for n in imported.names() if n.startswith(rest)]
            return []
        if not word:
            return []
        found: list[tuple[str, str]] = []
        found += [(n, "cell") for n in sheet.names() if n.startswith(word)]
        found += [(n, "imported sheet") for n in sheet.namespaces if n.startswith(word)]
        found += [(f.name, f"{f.name}{f.display_signature()} — {f.summary}")
                  for f in functions.all_functions() if f.name.startswith(word)]
        table = constant_table(sheet.selection)
        found += [(n, f"constant: {e.description}") for n, e in sorted(table.items())
                  if n.startswith(word) and n not in sheet.names()]
        units = sorted({n for n in sheet.unit_names() if n.startswith(word)})
        found += [(n, "unit") for n in units[:MAX_UNITS]]
        seen: set[str] = set()
        unique = []
        for text, meta in found:
            if text not in seen:
                seen.add(text)
                unique.append((text, meta))
        return unique

    def get_completions(self, document, complete_event):
        line = document.text_before_cursor
        word = _WORD.search(line).group()
        if line.lstrip().startswith(":") and " " not in line.lstrip():
            word = line.lstrip()
        for text, meta in self.candidates(line):
            yield Completion(text, start_position=-len(word), display_meta=meta)
