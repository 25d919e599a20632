"""Completion at the interactive prompt: cells, functions (with their signatures), units,
constants, imported cells and the `:` commands."""

from __future__ import annotations

import re

from prompt_toolkit.completion import Completer, Completion

from ..language.scope import PPN_PARAMETERS, ppn_cell
from ..physics import functions
from ..physics.constants import constant_table

_WORD = re.compile(r"[\w.]*$")
_COMMANDS = ["cells", "deps", "users", "revert", "save", "plot", "table", "funcs", "help", "quit"]
#: At most this many unit names are offered for one prefix (astropy knows thousands).
MAX_UNITS = 40


#: Units the trade writes most; they come first among the units a prefix matches (`y` offers
#: `yr` before the yocto-units).
_COMMON_UNITS = ("yr", "d", "s", "h", "min", "day", "year", "km", "m", "AU", "au", "pc", "kpc",
                 "Mpc", "deg", "rad", "arcsec", "mas", "uas", "Msun", "Rsun", "Mearth",
                 "Rearth", "Mjup", "Rjup", "kg", "lsec", "lyr", "century", "Hz", "GHz", "MHz",
                 "us", "ns", "ms", "ppm", "ppb", "cycle")
_PREFIXES = ("y", "z", "a", "f", "p", "n", "u", "m", "c", "d", "da", "h", "k", "M", "G", "T",
             "P", "E", "Z", "Y")


def unit_rank(name: str, names: set[str]) -> tuple:
    """Common units first, then plain names before prefixed ones (`yA` is the yocto-ampere),
    then shorter names."""
    common = name in _COMMON_UNITS
    prefixed = any(name.startswith(p) and name[len(p):] in names for p in _PREFIXES)
    return (not common, _COMMON_UNITS.index(name) if common else 0, prefixed, len(name), name)


def _fields(sheet, name: str) -> list[tuple[str, str]]:
    """The fields of a record cell (`venus.` offers `venus.a`, `venus.e`, …)."""
    from ..engine.values import ShownRecord, shown

    if name not in sheet or sheet.cell(name).error is not None:
        return []
    value = shown(sheet.cell(name).raw)
    if not isinstance(value, ShownRecord):
        return []
    return [(field, f"field of the {value.kind} record") for field in value.fields]


class SheetCompleter(Completer):
    def __init__(self, session) -> None:
        self.session = session

    def candidates(self, line: str) -> list[tuple[str, str]]:
        """(text, what it is) for the word before the cursor at the end of ``line``."""
        stripped = line.lstrip()
        if stripped.startswith(":") and " " not in stripped:
            prefix = stripped[1:]
            return [(f":{c}", "command") for c in _COMMANDS if c.startswith(prefix)]
        found = _WORD.search(line)
        word = found.group() if found is not None else ""
        sheet = self.session.sheet
        if stripped.startswith((":deps", ":users", ":revert")):
            return [(n, "cell") for n in sheet.names() if n.startswith(word)]
        if stripped.startswith((":plot", ":table")):
            kind = "plots" if stripped.startswith(":plot") else "tables"
            specs = getattr(sheet, kind)()
            return [(spec.name, kind[:-1]) for spec in specs if spec.name.startswith(word)]
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
            return [(f"{head}.{field}", meta) for field, meta in _fields(sheet, head)
                    if field.startswith(rest)]
        if not word:
            return []
        offered: list[tuple[str, str]] = []
        offered += [(n, "cell") for n in sheet.names() if n.startswith(word)]
        offered += [(n, "imported sheet") for n in sheet.namespaces if n.startswith(word)]
        offered += [(name, f"{name}({', '.join(p for p, _ in f.params)}) — the sheet's function")
                    for name, f in sheet.functions.items() if name.startswith(word)]
        offered += [(f.name, f"{f.name}{f.display_signature()} — {f.summary}")
                  for f in functions.all_functions() if f.name.startswith(word)]
        table = constant_table(sheet.selection)
        offered += [(n, f"constant: {e.description}") for n, e in sorted(table.items())
                  if n.startswith(word) and n not in sheet.names()]
        every = set(sheet.unit_names())
        units = sorted({n for n in every if n.startswith(word)},
                       key=lambda n: unit_rank(n, every))
        offered += [(n, "unit") for n in units[:MAX_UNITS]]
        seen: set[str] = set()
        unique = []
        for text, meta in offered:
            if text not in seen:
                seen.add(text)
                unique.append((text, meta))
        return unique

    def get_completions(self, document, complete_event):
        line = document.text_before_cursor
        found = _WORD.search(line)
        word = found.group() if found is not None else ""
        if line.lstrip().startswith(":") and " " not in line.lstrip():
            word = line.lstrip()
        for text, meta in self.candidates(line):
            yield Completion(text, start_position=-len(word), display_meta=meta)
