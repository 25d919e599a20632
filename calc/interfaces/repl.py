"""The interactive prompt: what-if questions on a live sheet.

Type an expression to see its value; type `name = expr` to add a cell or
override one and see every downstream cell whose value changed (old → new),
and nothing else. Commands start with `:` (`:help` lists them). The logic is
in :class:`Session` (pure text in, text out); :func:`run` wraps it in a
prompt_toolkit prompt with completion, highlighting and history.
"""

from __future__ import annotations

import hashlib
from pathlib import Path

from ..engine.sheet import Sheet
from ..errors import SheetError, Source, split_lines
from ..files import cache_folder
from ..language.scope import ppn_cell, ppn_parameter

HELP = """\
expression            show its value (`adv in arcsec / century`)
name = expression     add a cell or override one; shows what changed (old → new)
:cells                every cell and its value
:deps NAME            what NAME uses;  :users NAME  what uses NAME
:revert [NAME]        back to the file's definition (all overrides without NAME)
:write [FILE]         save overrides and new cells into the sheet (atomic; other lines kept)
:funcs [NAME]         the function list, or one function's entry
:help                 this text;  :quit (or Ctrl-D) leave;  Ctrl-C cancels the line"""


def _shown(sheet: Sheet, name: str) -> str:
    from ..outputs.format import cell_text

    return cell_text(sheet.cell(name))


class Session:
    """A sheet under interactive what-if: lines in, text out."""

    def __init__(self, path: str | Path | None = None) -> None:
        self.path = Path(path) if path is not None else None
        self.sheet = Sheet.load(path) if path is not None else Sheet.from_text("", "<repl>")
        self.assigned: dict[str, str] = {}   # cell → the text typed for it, for :write
        self.counter = 0
        self.done = False

    @property
    def unsaved(self) -> list[str]:
        return [name for name in self.assigned if name in self.sheet]

    def handle(self, line: str) -> str:
        """One line typed at the prompt; returns what to print (may be empty)."""
        text = line.strip()
        if not text:
            return ""
        if text.startswith(":"):
            return self.command(text[1:].split())
        self.counter += 1
        label = f"<input {self.counter}>"
        from ..language.parse import parse_prompt_line
        from ..language.scope import PPN_PARAMETERS
        from ..language.syntax import CellDef, PPNDef

        try:
            parsed = parse_prompt_line(text, Source(label, text))
        except SheetError as err:
            return err.render()
        if isinstance(parsed, PPNDef):
            if parsed.parameter not in PPN_PARAMETERS:
                return (f"unknown PPN parameter `{parsed.parameter}`: relsheet knows "
                        + " and ".join(PPN_PARAMETERS))
            expression = text.split("=", 1)[1].strip()
            return self.assign_text(ppn_cell(parsed.parameter), expression, label)
        if isinstance(parsed, CellDef):
            return self.assign(parsed, text, label)
        try:
            value = self.sheet.evaluate(text, label)
        except SheetError as err:
            return err.render()
        from ..outputs.format import record_rows, value_text

        rows = record_rows(value)
        fields = [f"  {field}  {number} {unit}".rstrip() for field, number, unit in rows]
        return "\n".join([value_text(value), *fields])

    def assign(self, definition, text: str, label: str) -> str:
        return self.assign_text(definition.name, text.split("=", 1)[1].strip(), label)

    def assign_text(self, name: str, expression: str, label: str) -> str:
        new = name not in self.sheet
        if new:
            # a new name can change cells that looked it up (a PPN value, a shadowed constant)
            seeing = self.sheet.cells_seeing(name)
            reached = set(seeing).union(*(self.sheet.downstream(n) for n in seeing))
        else:
            reached = {name} | self.sheet.downstream(name)
        watched = sorted(reached, key=lambda n: self.sheet.cell(n).line)
        before = {n: _shown(self.sheet, n) for n in watched}
        checks_before = [r.passed for r in self.sheet.checks]
        try:
            changed = self.sheet.set(name, expression, label=label)
        except SheetError as err:
            return err.render()
        self.assigned[name] = expression
        lines = []
        if new:
            note = ("the file sets none; general relativity has 1"
                    if ppn_parameter(name) is not None
                    else "new cell")
            lines.append(f"{name} = {_shown(self.sheet, name)}  ({note})")
        for cell in changed:
            if cell.name == name and new:
                continue
            old = before.get(cell.name, "—")
            now = _shown(self.sheet, cell.name)
            if old != now:
                lines.append(f"{cell.name}: {old} → {now}")
        for was, result in zip(checks_before, self.sheet.checks):
            if was != result.passed:
                state = "passed" if result.passed else "FAILED"
                lines.append(f"check on line {result.line} now {state}: {result.text}")
        error = self.sheet.cell(name).error
        if error is not None:
            lines.append(error.render())
        return "\n".join(lines) if lines else "nothing changed"

    # -- commands
    def command(self, words: list[str]) -> str:
        if not words:
            return "type :help for the commands"
        name, args = words[0], words[1:]
        handler = getattr(self, f"cmd_{name}", None)
        if handler is None:
            from ..physics.units import close_matches, did_you_mean

            known = [m[4:] for m in dir(self) if m.startswith("cmd_")]
            hint = did_you_mean([f":{o}" for o in close_matches(name, known)])
            return f"unknown command `:{name}`" + (f"; {hint}" if hint else "; :help lists them")
        try:
            return handler(args)
        except SheetError as err:
            return err.render()

    def _cell_argument(self, args: list[str], command: str) -> str:
        if len(args) != 1:
            raise SheetError(f":{command} takes one cell name")
        if args[0] not in self.sheet:
            from ..physics.units import close_matches, did_you_mean

            raise SheetError(f"no cell `{args[0]}`",
                             hint=did_you_mean(close_matches(args[0], self.sheet.names())))
        return args[0]

    def cmd_cells(self, args) -> str:
        names = self.sheet.names()
        if not names:
            return "no cells yet"
        width = max(len(n) for n in names)
        return "\n".join(f"{n:<{width}}  {_shown(self.sheet, n)}" for n in names)

    def cmd_deps(self, args) -> str:
        from ..outputs.compare import dependency_tree

        return dependency_tree(self.sheet, self._cell_argument(args, "deps"))

    def cmd_users(self, args) -> str:
        from ..outputs.compare import dependency_tree

        return dependency_tree(self.sheet, self._cell_argument(args, "users"), users=True)

    def cmd_revert(self, args) -> str:
        names = [self._cell_argument(args, "revert")] if args else list(self.assigned)
        lines = []
        for name in names:
            if name not in self.assigned:
                lines.append(f"{name} has its file definition already")
                continue
            try:
                self.sheet.revert(name)
                origin = "from the file"
            except KeyError:
                if ppn_parameter(name) is None:
                    lines.append(f"{name} is not in the file; it stays as typed")
                    continue
                # a PPN value typed at the prompt goes back to general relativity
                self.sheet.set(name, "1", label=f"<revert {name}>")
                origin = "general relativity"
            del self.assigned[name]
            lines.append(f"{name} = {_shown(self.sheet, name)}  ({origin})")
        return "\n".join(lines) if lines else "no overrides to revert"

    def cmd_write(self, args) -> str:
        if len(args) > 1:
            raise SheetError(":write takes at most one file name")
        target = Path(args[0]) if args else self.path
        if target is None:
            raise SheetError(":write needs a file name: this session has no sheet file")
        text = written_text(self.sheet, self.assigned)
        from ..files import atomic_write

        atomic_write(target, text.encode("utf-8"))
        count = len(self.assigned)
        if self.path is None or target.resolve() == self.path.resolve():
            self.path = target
            self.sheet = Sheet.load(target)
            self.assigned = {}
        return f"wrote {target} ({count} change{'s' if count != 1 else ''})"

    def cmd_funcs(self, args) -> str:
        from ..physics.catalog import entry, listing

        return entry(args[0]) if args else listing()

    def cmd_help(self, args) -> str:
        return HELP

    def cmd_quit(self, args) -> str:
        self.done = True
        return ""


def written_text(sheet: Sheet, assigned: dict[str, str]) -> str:
    """The sheet's file text with the typed definitions in place of the file's, and new cells
    appended; every other byte stays."""
    text = sheet.source.text
    lines = split_lines(text, keepends=True)
    starts = [0]
    for line in lines:
        starts.append(starts[-1] + len(line))
    edits = []
    appended = []
    for name, expression in assigned.items():
        parameter = ppn_parameter(name)
        statement = (f"ppn {parameter} = {expression}" if parameter is not None
                     else f"{name} = {expression}")
        original = sheet.file_definition(name)
        if original is None:
            appended.append(statement)
            continue
        span = original.span
        begin = starts[span.line - 1] + span.column - 1
        end = starts[span.end_line - 1] + span.end_column - 1
        edits.append((begin, end, statement))
    for begin, end, replacement in sorted(edits, reverse=True):
        text = text[:begin] + replacement + text[end:]
    if appended:
        if text and not text.endswith(("\n", "\r")):
            text += "\n"
        text += "".join(line + "\n" for line in appended)
    return text


def history_path(sheet_path: Path | None) -> Path:
    """The history file of a sheet folder, kept in the user's cache (not in the project)."""
    folder = (sheet_path.resolve().parent if sheet_path else Path.cwd().resolve())
    key = hashlib.sha256(str(folder).encode()).hexdigest()[:16]
    return cache_folder() / "history" / key


def run(path: str | None = None, input=None, output=None, echo=None) -> int:
    """The prompt loop. ``input``/``output`` are prompt_toolkit objects (tests pass a pipe
    input and a dummy output); ``echo`` receives what would be printed."""
    from prompt_toolkit import PromptSession, print_formatted_text
    from prompt_toolkit.history import FileHistory, InMemoryHistory
    from prompt_toolkit.lexers import PygmentsLexer

    from .completion import SheetCompleter
    from .highlight import SheetLexer

    session = Session(path)
    say = echo or (lambda text: print_formatted_text(text, output=output))
    history = InMemoryHistory()
    if input is None:
        try:
            place = history_path(session.path)
            place.parent.mkdir(parents=True, exist_ok=True)
            history = FileHistory(str(place))
        except OSError:
            pass
    prompt = PromptSession(message=f"{session.path.stem if session.path else 'relsheet'}› ",
                           lexer=PygmentsLexer(SheetLexer), completer=SheetCompleter(session),
                           history=history, input=input, output=output,
                           complete_while_typing=False)
    if session.sheet.all_errors():
        say("\n".join(err.render() for err in session.sheet.all_errors()))
    say(f"{len(session.sheet.names())} cells · :help for the commands")
    warned = False
    while not session.done:
        try:
            line = prompt.prompt()
        except KeyboardInterrupt:
            continue
        except EOFError:
            if session.unsaved and not warned:
                warned = True
                say(f"unsaved changes to {', '.join(session.unsaved)}: :write keeps them; "
                    "Ctrl-D again leaves without saving")
                continue
            break
        answer = session.handle(line)
        if answer:
            say(answer)
        if session.done and session.unsaved and not warned:
            warned = True
            session.done = False
            say(f"unsaved changes to {', '.join(session.unsaved)}: :write keeps them; "
                ":quit again leaves without saving")
    return 0
