"""The interactive prompt: what-if questions on a live sheet.

Type an expression to see its value; type `name = expr` to add a cell or
override one (`sys.M_star = …` overrides a cell of an imported sheet) and see
every cell whose value changed (old → new), and nothing else; type a `check`
to judge it now. Commands start with `:` (`:help` lists them). The logic is
in :class:`Session` (pure text in, text out), which survives every error;
:func:`run` wraps it in a prompt_toolkit prompt with completion, highlighting
and history on a terminal, and reads lines as a batch when its input is not a
terminal (a pipe or a file), printing plain text.
"""

from __future__ import annotations

import hashlib
import os
import sys
import traceback
from pathlib import Path

from ..engine.sheet import Sheet
from ..errors import InternalError, SheetError, Source, split_lines
from ..files import cache_folder
from ..language.scope import ppn_cell, ppn_parameter

HELP = """\
expression            show its value (`adv in arcsec / century`)
name = expression     add a cell or override one (`sys.M = …` in an imported sheet);
                      shows what changed (old → new)
check a == b …        judge a check now (`within 1%`, `within 2 sigma`, `<`, `>=` …)
:cells                every cell and its value
:deps NAME            what NAME uses;  :users NAME  what uses NAME
:revert [NAME]        back to the file's definition (all overrides without NAME)
:save [FILE]          save overrides and new cells into the sheet (atomic; other lines
                      kept; result markers brought up to date)
:plot [NAME]          the sheet's plots, or draw one here
:plot NAME save FILE  write it as an image (.png, .svg or .pdf; atomic)
:table [NAME] [ROWS]  the sheet's tables, or print one (ROWS: first and last rows only)
:funcs [NAME…]        the function list, or functions' entries
:help                 this text;  :quit (or Ctrl-D) leave;  Ctrl-C cancels the line"""


def _shown(sheet: Sheet, name: str) -> str:
    """A cell of the sheet (`sys.M_star` for an imported one) as one line of text."""
    from ..outputs.format import cell_text

    namespace, _, inner = name.partition(".")
    if name not in sheet and inner and namespace in sheet.namespaces:
        return _shown(sheet.namespaces[namespace], inner)
    text = cell_text(sheet.cell(name))
    return f"{text}  (solved)" if sheet.solved(name) else text


class Session:
    """A sheet under interactive what-if: lines in, text out."""

    def __init__(self, path: str | Path | None = None) -> None:
        self.path = Path(path) if path is not None else None
        self.sheet = Sheet.load(path) if path is not None else Sheet.from_text("", "<repl>")
        self.assigned: dict[str, str] = {}   # cell → the text typed for it, for :save
        #: functions, `solve` and `correlation` lines typed, for :save (after the cells)
        self.statements: list[str] = []
        self.counter = 0
        self.done = False
        #: show Python tracebacks of internal errors (`relsheet --debug repl`)
        self.debug = False

    @property
    def unsaved(self) -> list[str]:
        return [name for name in self.assigned if self.sheet.can_set(name)]

    def handle(self, line: str) -> str:
        """One line typed at the prompt; returns what to print (may be empty). Never raises:
        a bug of ours is reported and the session, with its what-ifs, goes on."""
        try:
            return self._handle(line)
        except SheetError as err:
            return err.render()
        except Exception as exc:  # a bug of ours: say so, keep the session
            text = InternalError.wrapping(exc, "answering the line").render()
            if self.debug:
                text += "\n" + "".join(traceback.format_exception(exc))
            return text

    def _handle(self, line: str) -> str:
        text = line.strip()
        if not text:
            return ""
        if text.startswith(":"):
            return self.command(text[1:].split())
        self.counter += 1
        label = f"<input {self.counter}>"
        from ..language.parse import parse_function_line, parse_prompt_line
        from ..language.scope import PPN_PARAMETERS
        from ..language.syntax import CellDef, CheckDef, CorrelationDef, PPNDef, SolveDef

        parsed = parse_function_line(text, Source(label, text)) or \
            parse_prompt_line(text, Source(label, text))
        if isinstance(parsed, (SolveDef, CorrelationDef)) or type(parsed).__name__ == "FunctionDef":
            changed = self.sheet.add_statement(text, label)
            self.statements.append(text)
            from ..outputs.format import cell_text

            moved = [f"{c.name}: {cell_text(c)}" for c in changed]
            return "\n".join(moved) if moved else "added (:save writes it into the sheet)"
        if isinstance(parsed, PPNDef):
            if parsed.parameter not in PPN_PARAMETERS:
                return (f"unknown PPN parameter `{parsed.parameter}`: relsheet knows "
                        + " and ".join(PPN_PARAMETERS))
            expression = text.split("=", 1)[1].strip()
            return self.assign_text(ppn_cell(parsed.parameter), expression, label)
        if isinstance(parsed, CheckDef):
            from ..outputs.format import check_detail

            result = self.sheet.judge(text, label)
            if result.error is not None:
                return result.error.render()
            return ("passed: " if result.passed else "FAILED: ") + check_detail(result)
        if isinstance(parsed, CellDef):
            return self.assign_text(parsed.name, text.split("=", 1)[1].strip(), label)
        value = self.sheet.evaluate(text, label)
        from ..outputs.format import record_rows, value_text

        rows = record_rows(value)
        fields = [f"  {field}  {number} {unit}".rstrip() for field, number, unit in rows]
        return "\n".join([value_text(value), *fields])

    # -- what-ifs
    def _watched(self, name: str) -> list[str]:
        """The cells a change of ``name`` may move (shown before and after)."""
        sheet = self.sheet
        namespace, _, inner = name.partition(".")
        if name not in sheet and inner and namespace in sheet.namespaces:
            seeing = sheet.cells_seeing(namespace)
            reached = set(seeing).union(*(sheet.downstream(n) for n in seeing))
            return [name, *sorted(reached, key=lambda n: sheet.cell(n).line)]
        if name not in sheet:
            # a new name can change cells that looked it up (a PPN value, a shadowed constant)
            seeing = sheet.cells_seeing(name)
            reached = set(seeing).union(*(sheet.downstream(n) for n in seeing))
        else:
            reached = {name} | sheet.downstream(name)
        return sorted(reached, key=lambda n: sheet.cell(n).line)

    def _changes(self, watched: list[str], before: dict[str, str], checks_before: list[bool],
                 skip: str | None = None) -> list[str]:
        """`cell: old → new` for every watched cell that moved, and the checks that flipped."""
        lines = []
        for name in watched:
            if name == skip or not self.sheet.can_set(name):
                continue
            now = _shown(self.sheet, name)
            old = before.get(name, "—")
            if old != now:
                lines.append(f"{name}: {old} → {now}")
        for was, result in zip(checks_before, self.sheet.checks):
            if was != result.passed:
                state = "passed" if result.passed else "FAILED"
                lines.append(f"check on line {result.line} now {state}: {result.text}")
        return lines

    def assign_text(self, name: str, expression: str, label: str) -> str:
        sheet = self.sheet
        new = not sheet.can_set(name)
        watched = self._watched(name)
        before = {n: _shown(sheet, n) for n in watched if sheet.can_set(n)}
        checks_before = [r.passed for r in sheet.checks]
        sheet.set(name, expression, label=label)
        self.assigned[name] = expression
        lines = []
        if new:
            note = ("the file sets none; general relativity has 1"
                    if ppn_parameter(name) is not None else "new cell")
            lines.append(f"{name} = {_shown(sheet, name)}  ({note})")
        lines += self._changes(watched, before, checks_before, skip=name if new else None)
        if name in sheet:
            error = sheet.cell(name).error
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
        return handler(args)

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
        if args:
            if len(args) != 1:
                raise SheetError(":revert takes one cell name")
            names = [args[0]]
            if args[0] not in self.assigned and not self.sheet.can_set(args[0]):
                self._cell_argument(args, "revert")
        else:
            names = list(self.assigned)
        lines = []
        for name in names:
            if name not in self.assigned:
                lines.append(f"{name} has its file definition already")
                continue
            watched = self._watched(name)
            before = {n: _shown(self.sheet, n) for n in watched if self.sheet.can_set(n)}
            checks_before = [r.passed for r in self.sheet.checks]
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
            lines += self._changes(watched, before, checks_before, skip=name)
        return "\n".join(lines) if lines else "no overrides to revert"

    def cmd_save(self, args) -> str:
        if len(args) > 1:
            raise SheetError(":save takes at most one file name")
        target = Path(args[0]) if args else self.path
        if target is None:
            raise SheetError(":save needs a file name: this session has no sheet file")
        mine = {n: e for n, e in self.assigned.items() if n in self.sheet}
        others = [n for n in self.assigned if n not in mine]
        text = written_text(self.sheet, mine, self.statements)
        from ..files import atomic_write

        expected = None
        if self.path is not None and target.resolve() == self.path.resolve():
            expected = self.sheet.source.text.encode("utf-8")
            original = _original_bytes(self.path)
            if original is not None and original.startswith(b"\xef\xbb\xbf"):
                expected = b"\xef\xbb\xbf" + expected
                text_bytes = b"\xef\xbb\xbf" + text.encode("utf-8")
            else:
                text_bytes = text.encode("utf-8")
        else:
            text_bytes = text.encode("utf-8")
        atomic_write(target, text_bytes, expected=expected)
        count = len(mine) + len(self.statements)
        self.statements = []
        if self.path is None or target.resolve() == self.path.resolve():
            self.path = target
            self.sheet = Sheet.load(target)
            for name in others:        # what-ifs on imported cells stay what-ifs
                self.sheet.set(name, self.assigned[name], label=f"<kept {name}>")
            self.assigned = {n: self.assigned[n] for n in others}
        note = f"; {len(others)} override{'s' if len(others) != 1 else ''} of imported cells " \
               "kept at the prompt only" if others else ""
        return f"saved {target} ({count} change{'s' if count != 1 else ''}){note}"

    def cmd_write(self, args) -> str:
        """The command's name before `:save`."""
        return ":write is now called :save\n" + self.cmd_save(args)

    def _specs(self, kind: str) -> list:
        """The sheet's evaluated ``plot`` or ``table`` statements (none from an engine
        without them)."""
        found = getattr(self.sheet, kind, None)
        return list(found()) if callable(found) else []

    def _spec(self, kind: str, name: str):
        specs = {spec.name: spec for spec in self._specs(kind)}
        if name not in specs:
            from ..physics.units import close_matches, did_you_mean

            what = kind[:-1]
            raise SheetError(f"no {what} `{name}`",
                             hint=did_you_mean(close_matches(name, list(specs)))
                             or (f"the {kind} are {', '.join(specs)}" if specs
                                 else f"the sheet has no `{what}` lines"))
        return specs[name]

    def cmd_plot(self, args) -> str:
        if not args:
            names = [spec.name for spec in self._specs("plots")]
            return ("plots: " + ", ".join(names) + " (:plot NAME draws one)") if names \
                else "the sheet has no `plot` lines"
        spec = self._spec("plots", args[0])
        if len(args) == 1:
            import shutil

            from ..outputs.plot import render_terminal

            size = shutil.get_terminal_size((80, 24))
            drawing = render_terminal(spec, max(40, size.columns - 2),
                                      max(12, min(size.lines - 4, 30)))
            return f"{drawing}\n(:plot {spec.name} save {spec.name}.png writes the image; " \
                   ".svg and .pdf too)"
        if len(args) != 3 or args[1] != "save":
            raise SheetError(":plot takes a plot name, then optionally `save FILE`",
                             hint=f"for example :plot {spec.name} save {spec.name}.png")
        from ..outputs.plot import write_plot

        path = write_plot(spec, Path(args[2]).expanduser())
        return f"saved {path}"

    def cmd_table(self, args) -> str:
        if not args:
            names = [spec.name for spec in self._specs("tables")]
            return ("tables: " + ", ".join(names) + " (:table NAME prints one)") if names \
                else "the sheet has no `table` lines"
        if len(args) > 2 or (len(args) == 2 and not args[1].isdigit()):
            raise SheetError(":table takes a table name and optionally a number of rows")
        from ..outputs.tables import table_text

        rows = int(args[1]) if len(args) == 2 else None
        return table_text(self._spec("tables", args[0]), rows)

    def cmd_funcs(self, args) -> str:
        from ..physics.catalog import entries, listing

        return entries(args) if args else listing()

    def cmd_help(self, args) -> str:
        return HELP

    def cmd_quit(self, args) -> str:
        self.done = True
        return ""


def _original_bytes(path: Path) -> bytes | None:
    try:
        return path.read_bytes()
    except OSError:
        return None


def written_text(sheet: Sheet, assigned: dict[str, str], statements: list[str] | None = None
                 ) -> str:
    """The sheet's file text with the typed definitions in place of the file's, new cells after
    the last cell (before checks that follow it), and, when the file carries result markers,
    every marker brought up to date; every other byte stays."""
    from ..language.syntax import marker_at

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
        line_end = starts[span.end_line - 1] + len(lines[span.end_line - 1].rstrip("\r\n"))
        rest = text[end:line_end]
        at = marker_at(rest)
        if at >= 0:   # the old result marker goes with the old definition (a comment stays)
            edits.append((begin, line_end, statement + rest[:at].rstrip(" \t")))
        else:
            edits.append((begin, end, statement))
    for begin, end, replacement in sorted(edits, reverse=True):
        text = text[:begin] + replacement + text[end:]
    appended += list(statements or ())
    if appended:
        text = _insert_after_cells(sheet, text, appended)
    if any(marker_at(line) >= 0 for line in split_lines(sheet.source.text)):
        from ..outputs.annotate import annotated_text

        fresh = Sheet(Source(sheet.source.label, text, sheet.source.path), root=sheet.root)
        text = annotated_text(fresh, text)
    return text


def _insert_after_cells(sheet: Sheet, text: str, statements: list[str]) -> str:
    """New cells go after the sheet's last cell line (checks and notes after it stay after)."""
    lines = split_lines(text, keepends=True)
    last = max((c.definition.span.end_line for c in sheet.cells if c.source is sheet.source),
               default=len(lines))
    ending = "\r\n" if lines and lines[0].endswith("\r\n") else "\n"
    head = lines[:last]
    if head and not head[-1].endswith("\n"):
        head[-1] += ending
    return "".join(head + [s + ending for s in statements] + lines[last:])


def history_path(sheet_path: Path | None) -> Path:
    """The history file of a sheet folder, kept in the user's cache (not in the project)."""
    folder = (sheet_path.resolve().parent if sheet_path else Path.cwd().resolve())
    key = hashlib.sha256(str(folder).encode()).hexdigest()[:16]
    return cache_folder() / "history" / key


def _private_history(place: Path):
    """The prompt's history, readable by its owner only (folder 0700, file 0600)."""
    from prompt_toolkit.history import FileHistory

    place.parent.mkdir(parents=True, exist_ok=True)
    os.chmod(place.parent, 0o700)
    if not place.exists():
        place.touch(mode=0o600)
    os.chmod(place, 0o600)
    return FileHistory(str(place))


def run_batch(session: Session, lines, write) -> int:
    """Lines from a pipe or a file, answered one by one as plain text (no terminal codes)."""
    for line in lines:
        answer = session.handle(line.rstrip("\n"))
        if answer:
            write(answer + "\n")
        if session.done:
            break
    return 0


def run(path: str | None = None, input=None, output=None, echo=None,
        debug: bool = False) -> int:
    """The prompt loop. ``input``/``output`` are prompt_toolkit objects (tests pass a pipe
    input and a dummy output); ``echo`` receives what would be printed. When standard input
    is not a terminal and no ``input`` is given, the lines are read as a batch."""
    session = Session(path)
    session.debug = debug
    if input is None and not sys.stdin.isatty():
        errors = session.sheet.all_errors()
        if errors:
            sys.stderr.write("\n".join(err.render() for err in errors) + "\n")
        return run_batch(session, sys.stdin, sys.stdout.write)

    from prompt_toolkit import PromptSession, print_formatted_text
    from prompt_toolkit.history import History, InMemoryHistory
    from prompt_toolkit.lexers import PygmentsLexer

    from .completion import SheetCompleter
    from .highlight import SheetLexer

    say = echo or (lambda text: print_formatted_text(text, output=output))
    history: History = InMemoryHistory()
    if input is None:
        try:
            history = _private_history(history_path(session.path))
        except OSError:
            pass
    prompt: PromptSession = PromptSession(
        message=f"{session.path.stem if session.path else 'relsheet'}› ",
        lexer=PygmentsLexer(SheetLexer), completer=SheetCompleter(session), history=history,
        input=input, output=output, complete_while_typing=False)
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
                say(f"unsaved changes to {', '.join(session.unsaved)}: :save keeps them; "
                    "Ctrl-D again leaves without saving")
                continue
            break
        answer = session.handle(line)
        if answer:
            say(answer)
        if session.done and session.unsaved and not warned:
            warned = True
            session.done = False
            say(f"unsaved changes to {', '.join(session.unsaved)}: :save keeps them; "
                ":quit again leaves without saving")
    return 0
