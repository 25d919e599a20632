"""`relsheet lsp`: a Language Server Protocol server over stdio, for editors.

Open sheets are evaluated on a worker thread, never on the message loop: a
change is queued, and the worker always takes the newest text of a document,
so a burst of keystrokes costs one evaluation, and the results of an
evaluation overtaken by a newer edit are never published. An edit that only
changes the expressions of cells goes through :meth:`Sheet.edit`, which
recomputes what those cells reach; anything else (a line added, a statement
other than a cell) builds the sheet anew. Open sheets that import the edited
one follow (:meth:`Sheet.edit_imported`; a structural change makes them read
the imported file as saved).

What the editor gets: diagnostics (errors with their ranges and hints,
validity warnings, failed checks; an imported sheet's errors on its `use`
line), inlay hints (each cell's value at the end of its line), hover (cells,
functions, units, constants), completion, signature help, definition and
references across imports, renaming a cell, an outline from the `##`
headings, and code actions (write the `#→` markers, take a did-you-mean).

Positions: the engine counts columns in characters from 1; the client in
UTF-16 code units from 0 unless it negotiated another encoding. Every range
crosses that border in :class:`Lines`.

pygls is imported here only: the other commands start without it.
"""

from __future__ import annotations

import logging
import re
import threading
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from lsprotocol import types as lsp
from pygls.exceptions import JsonRpcInvalidParams
from pygls.lsp.server import LanguageServer
from pygls.uris import from_fs_path, to_fs_path

from ..engine.cells import Cell
from ..engine.sheet import Sheet
from ..errors import (
    InputFailedError,
    InternalError,
    SheetError,
    Source,
    Span,
    split_lines,
)
from ..files import MAX_SHEET_BYTES, label_in
from ..language.syntax import RESERVED_WORDS
from ..physics import functions
from ..physics.catalog import entry as function_entry
from ..physics.constants import constant_table
from ..physics.units import physical_type, unit_table, unit_text

SERVER_NAME = "relsheet"
log = logging.getLogger("relsheet.lsp")

#: A sheet's file ends so; `use "…"` completion offers these.
SHEET_SUFFIX = ".sheet"
#: Table files `read_table("…")` completion offers.
TABLE_SUFFIXES = (".csv", ".tsv", ".txt", ".dat", ".parquet", ".fits", ".ecsv")
#: A request waits at most this long for the evaluation of the newest text before it
#: answers from the last finished one.
WAIT_FOR_EVALUATION = 5.0
#: At most this many units are offered for one prefix (astropy knows thousands).
MAX_UNIT_ITEMS = 60

_NAME = r"[^\W\d]\w*"
_TOKEN = re.compile(
    r'(?P<string>"[^"\n]*"?)|(?P<comment>#.*)'
    rf"|(?P<name>{_NAME}(?:\.{_NAME})*\.?)"
    r"|(?P<number>\d[\d_]*(?:\.\d*)?(?:[eE][+-]?\d+)?)|(?P<other>\S)")
_USE_LINE = re.compile(rf'^\s*use\s+"(?P<path>[^"\n]*)"\s+as\s+(?P<ns>{_NAME})')
_CELL_LINE = re.compile(rf"^\s*(?P<name>{_NAME})\s*=(?!=)")
_HEADING = re.compile(r"^\s*##(?!#)\s*(?P<text>.*?)\s*$")
_DID_YOU_MEAN = re.compile(r"did you mean (?P<options>.+?)\?")
_OPEN_STRING = re.compile(r'(?P<call>\buse\s+|\bread_table\s*\(\s*)"(?P<typed>[^"]*)$')


# ---- positions ------------------------------------------------------------------


class Lines:
    """A document's lines as the engine counts them, and the client's position encoding."""

    def __init__(self, text: str, encoding: str = lsp.PositionEncodingKind.Utf16) -> None:
        self.lines = split_lines(text) or [""]
        self.encoding = encoding

    def _units(self, text: str) -> int:
        if self.encoding == lsp.PositionEncodingKind.Utf8:
            return len(text.encode("utf-8", "surrogatepass"))
        if self.encoding == lsp.PositionEncodingKind.Utf32:
            return len(text)
        return len(text.encode("utf-16-le", "surrogatepass")) // 2

    def line(self, index: int) -> str:
        return self.lines[index] if 0 <= index < len(self.lines) else ""

    def position(self, line: int, column: int) -> lsp.Position:
        """The client position of an engine place (line and column from 1)."""
        text = self.line(line - 1)
        return lsp.Position(max(0, line - 1), self._units(text[:max(0, column - 1)]))

    def range(self, span: Span | None) -> lsp.Range:
        if span is None:
            return lsp.Range(lsp.Position(0, 0), lsp.Position(0, 0))
        return lsp.Range(self.position(span.line, span.column),
                         self.position(span.end_line, span.end_column))

    def line_range(self, line: int) -> lsp.Range:
        """The whole of line ``line`` (from 1), its ending left out."""
        return lsp.Range(self.position(line, 1), self.position(line, len(self.line(line - 1)) + 1))

    def column(self, position: lsp.Position) -> int | None:
        """The character index (from 0) of a client position on its line; None past the end."""
        if position.line < 0 or position.line >= len(self.lines) or position.character < 0:
            return None
        text = self.lines[position.line]
        units = 0
        for index, char in enumerate(text):
            if units >= position.character:
                return index
            units += self._units(char)
        return len(text) if units >= position.character else None


# ---- tokens ---------------------------------------------------------------------


@dataclass(frozen=True)
class Token:
    """A word of a line: ``kind`` is name (plain or dotted), string, number or other;
    ``start`` and ``end`` are character indices on the line."""

    kind: str
    text: str
    start: int
    end: int


def tokens(line: str) -> list[Token]:
    """The tokens of one line, a trailing comment left out."""
    found = []
    for match in _TOKEN.finditer(line):
        kind = match.lastgroup or "other"
        if kind == "comment":
            break
        found.append(Token(kind, match.group(), match.start(), match.end()))
    return found


def token_at(line: str, column: int) -> Token | None:
    for tok in tokens(line):
        if tok.start <= column <= tok.end and tok.kind in ("name", "string"):
            return tok
    return None


def part_at(tok: Token, column: int) -> tuple[list[str], int]:
    """The parts of a dotted name and the index of the part under ``column``."""
    parts = tok.text.split(".")
    offset = tok.start
    for index, part in enumerate(parts):
        if column <= offset + len(part):
            return parts, index
        offset += len(part) + 1
    return parts, len(parts) - 1


# ---- one open sheet ---------------------------------------------------------------


@dataclass
class OpenSheet:
    """A document the editor has open, and its latest evaluation."""

    uri: str
    path: Path | None
    root: Path | None
    text: str
    version: int
    sheet: Sheet | None = None
    #: why the sheet could not be built at all (too large, a bug of ours)
    failure: SheetError | None = None
    #: the document version the current evaluation is of (-1: none yet)
    evaluated: int = -1
    #: versions this server evaluated without a full rebuild (tests and the benchmark read it)
    incremental: int = 0
    lock: threading.RLock = field(default_factory=threading.RLock)
    settled: threading.Condition = field(init=False)
    #: cell name → (value, error, shown text): formatting a value costs more than a
    #: recomputation, so a cell that kept its value keeps its text
    shown: dict[str, tuple[object, object, str]] = field(default_factory=dict)

    def __post_init__(self) -> None:
        self.settled = threading.Condition(self.lock)

    @property
    def label(self) -> str:
        if self.path is None:
            return self.uri
        return label_in(self.path, self.root) if self.root is not None else self.path.name

    def source(self, text: str) -> Source:
        return Source(self.label, text, self.path)

    def wait(self, timeout: float = WAIT_FOR_EVALUATION) -> None:
        """Until the evaluation is of the newest text (or ``timeout`` passed)."""
        with self.settled:
            self.settled.wait_for(lambda: self.evaluated >= self.version, timeout)


def owns(sheet: Sheet, err: SheetError) -> bool:
    """Whether ``err`` points into ``sheet``'s own file (not an imported one's, not a
    what-if's)."""
    if err.source is None:
        return True
    if err.source is sheet.source:
        return True
    return err.source.label == sheet.source.label and err.source.path == sheet.source.path


def imported_files(sheet: Sheet) -> set[Path]:
    """Every file ``sheet`` imports, directly or not."""
    found: set[Path] = set()
    todo = list(sheet.namespaces.values())
    seen: set[int] = set()
    while todo:
        each = todo.pop()
        if id(each) in seen:
            continue
        seen.add(id(each))
        if each.source.path is not None:
            found.add(each.source.path)
        todo.extend(each.namespaces.values())
    return found


def cell_text(cell: Cell) -> str:
    from ..outputs.format import cell_text as shown

    return shown(cell)


# ---- the documents and their evaluation ---------------------------------------------


class SheetDocuments:
    """The open sheets, evaluated on a worker thread; independent of the transport (the
    server below and the benchmark drive it)."""

    def __init__(self, publish: Any = None) -> None:
        #: called with (document, diagnostics) after each evaluation that is still current
        self.publish = publish
        self.documents: dict[str, OpenSheet] = {}
        self.folders: list[Path] = []
        self.encoding: str = lsp.PositionEncodingKind.Utf16
        self._pending: dict[str, None] = {}
        self._wake = threading.Condition()
        self._stopped = False
        self._worker = threading.Thread(target=self._work, name="relsheet-evaluate", daemon=True)
        self._worker.start()

    # -- the document set
    def root_of(self, path: Path) -> Path:
        """The folder imports must stay in: the workspace folder holding the file, else the
        file's own folder."""
        for folder in sorted(self.folders, key=lambda f: len(f.parts), reverse=True):
            if path.is_relative_to(folder):
                return folder
        return path.parent

    def open(self, uri: str, text: str, version: int) -> OpenSheet:
        path = _path_of(uri)
        doc = OpenSheet(uri, path, self.root_of(path) if path is not None else None, text, version)
        self.documents[uri] = doc
        self.submit(uri)
        return doc

    def change(self, uri: str, text: str, version: int) -> None:
        doc = self.documents.get(uri)
        if doc is None:
            self.open(uri, text, version)
            return
        with doc.lock:
            doc.text, doc.version = text, max(version, doc.version + 1)
        self.submit(uri)

    def close(self, uri: str) -> None:
        self.documents.pop(uri, None)

    def get(self, uri: str, wait: bool = True) -> OpenSheet | None:
        doc = self.documents.get(uri)
        if doc is not None and wait:
            doc.wait()
        return doc

    def lines(self, doc: OpenSheet) -> Lines:
        return Lines(doc.text, self.encoding)

    # -- the worker
    def submit(self, uri: str) -> None:
        with self._wake:
            self._pending[uri] = None
            self._wake.notify()

    def stop(self) -> None:
        with self._wake:
            self._stopped = True
            self._wake.notify()

    def _work(self) -> None:
        while True:
            with self._wake:
                self._wake.wait_for(lambda: self._pending or self._stopped)
                if self._stopped:
                    return
                uri = next(iter(self._pending))
                del self._pending[uri]
            doc = self.documents.get(uri)
            if doc is None:
                continue
            try:
                self.evaluate(doc)
            except Exception:  # a bug of ours: keep serving, say so in the log
                log.exception("evaluating %s", uri)

    def evaluate(self, doc: OpenSheet) -> None:
        """Evaluate the newest text of ``doc``, then the open sheets that import it; publish
        what is still current."""
        with doc.lock:
            text, version = doc.text, doc.version
        self._evaluate_text(doc, text, version)
        if doc.path is not None:
            for other in list(self.documents.values()):
                if other is not doc and other.sheet is not None and \
                        doc.path in imported_files(other.sheet):
                    self._follow_import(other, doc.path, text)

    def _evaluate_text(self, doc: OpenSheet, text: str, version: int) -> None:
        sheet, failure, incremental = doc.sheet, None, False
        if len(text) > MAX_SHEET_BYTES // 4 and len(text.encode("utf-8", "surrogatepass")) > \
                MAX_SHEET_BYTES:
            sheet, failure = None, SheetError(
                f"the sheet is more than {MAX_SHEET_BYTES:,} bytes; relsheet does not evaluate it",
                None, hint="split it into several sheets")
        else:
            changed = None
            if sheet is not None and doc.failure is None:
                with doc.lock:
                    changed = _guarded(lambda: sheet.edit(text), doc)  # type: ignore[union-attr]
            if changed is not None and not isinstance(changed, SheetError):
                incremental = True
            else:
                built = _guarded(lambda: Sheet(doc.source(text), root=doc.root), doc)
                sheet, failure = (None, built) if isinstance(built, SheetError) else (built, None)
        with doc.settled:
            doc.sheet, doc.failure = sheet, failure
            doc.evaluated = version
            doc.incremental += incremental
            current = doc.version == version
            doc.settled.notify_all()
        if current and self.publish is not None:
            self.publish(doc, self.diagnostics(doc))

    def _follow_import(self, doc: OpenSheet, path: Path, text: str) -> None:
        sheet = doc.sheet
        if sheet is None:
            return
        with doc.lock:
            changed = _guarded(lambda: sheet.edit_imported(path, text), doc)
        if changed is None or isinstance(changed, SheetError):
            self._evaluate_text(doc, sheet.source.text, doc.version)
            return
        if self.publish is not None:
            self.publish(doc, self.diagnostics(doc))

    # -- diagnostics
    def diagnostics(self, doc: OpenSheet) -> list[lsp.Diagnostic]:
        lines = self.lines(doc)
        with doc.lock:
            if doc.failure is not None:
                return [_diagnostic(doc.failure, lines, lsp.DiagnosticSeverity.Error)]
            sheet = doc.sheet
            if sheet is None:
                return []
            lines = Lines(sheet.source.text, self.encoding)
            found = [_diagnostic(err, lines, lsp.DiagnosticSeverity.Error)
                     for err in sheet.all_errors() if owns(sheet, err)]
            for cell in sheet.cells:
                if cell.source is not sheet.source:
                    continue
                for warning in cell.warnings:
                    found.append(lsp.Diagnostic(
                        lines.range(cell.definition.name_span), f"`{cell.name}`: {warning}",
                        severity=lsp.DiagnosticSeverity.Warning, source=SERVER_NAME,
                        code="validity"))
            from ..outputs.format import check_detail

            for result in sheet.checks:
                if result.passed or result.error is not None:
                    continue
                found.append(lsp.Diagnostic(
                    _statement_range(lines, result.line), f"check failed: {check_detail(result)}",
                    severity=lsp.DiagnosticSeverity.Warning, source=SERVER_NAME,
                    code="check-failed"))
            return found


def _guarded(work, doc: OpenSheet):
    """Run ``work``; a sheet error is returned, a bug of ours becomes an internal error."""
    try:
        return work()
    except SheetError as err:
        return err
    except Exception as exc:
        log.exception("evaluating %s", doc.uri)
        return InternalError.wrapping(exc, f"evaluating {doc.label}")


def _path_of(uri: str) -> Path | None:
    if not uri.startswith("file:"):
        return None
    try:
        fs = to_fs_path(uri)
    except Exception:  # a malformed URI: treat it as a document without a file
        return None
    return Path(fs).resolve() if fs else None


def _statement_range(lines: Lines, line: int) -> lsp.Range:
    text = lines.line(line - 1)
    start = len(text) - len(text.lstrip())
    code = text.split("#", 1)[0].rstrip()
    return lsp.Range(lines.position(line, start + 1), lines.position(line, len(code) + 1))


def _diagnostic(err: SheetError, lines: Lines, severity: lsp.DiagnosticSeverity) -> lsp.Diagnostic:
    message = err.message + (f"\nhint: {err.hint}" if err.hint else "")
    data = None
    suggestions = did_you_mean_options(err)
    if suggestions:
        data = {"replacements": suggestions}
    return lsp.Diagnostic(lines.range(err.span), message, severity=severity, source=SERVER_NAME,
                          code=type(err).__name__, data=data)


def did_you_mean_options(err: SheetError) -> list[str]:
    """The spellings a "did you mean" hint offers (the CLI prints them in the hint)."""
    if not err.hint or err.span is None or err.span.line != err.span.end_line:
        return []
    match = _DID_YOU_MEAN.search(err.hint)
    if match is None:
        return []
    return re.findall(r"`([^`]+)`", match.group("options"))


# ---- what a place in the text names -----------------------------------------------


@dataclass
class Target:
    """A cell of a sheet file: where references and renames point."""

    sheet: Sheet
    name: str


def _use_lines(text: str) -> dict[str, tuple[str, int]]:
    """namespace → (path as written, line from 1) of the `use` lines of a text."""
    found = {}
    for number, line in enumerate(split_lines(text), 1):
        match = _USE_LINE.match(line)
        if match:
            found[match.group("ns")] = (match.group("path"), number)
    return found


def _resolve_target(sheet: Sheet, parts: list[str], index: int) -> Target | None:
    """The cell a (dotted) name under the cursor refers to: `x`, `ns.x`, `ns.inner.x`, a
    record's head `venus` in `venus.a`."""
    current = sheet
    for position, part in enumerate(parts[:index + 1]):
        if position < index and part in current.namespaces:
            current = current.namespaces[part]
            continue
        if part in current:
            return Target(current, part)
        return None
    return None


def _is_keyword_argument(line: str, tok: Token, depth: int) -> bool:
    return depth > 0 and re.match(r"\s*=(?!=)", line[tok.end:]) is not None


def occurrences(text: str, name: str, own: bool, bound: set[str]
                ) -> Iterator[tuple[int, int, int]]:
    """(line from 1, start, end character index) of every spot in ``text`` that names the
    cell ``name``: in the cell's own file (``own``) the name itself, in a file that imports
    it as one of the namespaces ``bound`` `ns.name` and `use … with name = …`."""
    depth = 0
    namespaces = set(_use_lines(text))
    for number, line in enumerate(split_lines(text), 1):
        use = _USE_LINE.match(line)
        overriding = use is not None and use.group("ns") in bound
        after_with = False
        for tok in tokens(line):
            if tok.kind == "other":
                if tok.text in "([":
                    depth += 1
                elif tok.text in ")]":
                    depth = max(0, depth - 1)
                continue
            if tok.kind != "name":
                continue
            if use is not None:
                if tok.text == "with":
                    after_with = True
                elif overriding and after_with and tok.text == name and \
                        re.match(r"\s*=(?!=)", line[tok.end:]):
                    yield number, tok.start, tok.end
                continue
            parts = tok.text.rstrip(".").split(".")
            if own and parts[0] == name and parts[0] not in namespaces \
                    and not _is_keyword_argument(line, tok, depth):
                yield number, tok.start, tok.start + len(parts[0])
            elif len(parts) >= 2 and parts[0] in bound and parts[1] == name:
                start = tok.start + len(parts[0]) + 1
                yield number, start, start + len(parts[1])


def bound_namespaces(text: str, folder: Path | None, target: Path | None) -> set[str]:
    """The namespaces under which the `use` lines of ``text`` (a file in ``folder``) import
    the file ``target``."""
    if folder is None or target is None:
        return set()
    found = set()
    for namespace, (written, _) in _use_lines(text).items():
        try:
            if (folder / written).resolve() == target:
                found.add(namespace)
        except (OSError, ValueError):
            continue
    return found


# ---- the server ---------------------------------------------------------------------


class SheetServer(LanguageServer):
    def __init__(self) -> None:
        super().__init__(SERVER_NAME, "0.1.0",
                         text_document_sync_kind=lsp.TextDocumentSyncKind.Incremental)
        self.sheets = SheetDocuments(self._publish)
        self.loop: Any = None

    def _publish(self, doc: OpenSheet, diagnostics: list[lsp.Diagnostic]) -> None:
        def send() -> None:
            self.text_document_publish_diagnostics(lsp.PublishDiagnosticsParams(
                doc.uri, diagnostics, version=doc.evaluated))
            capabilities = self.client_capabilities.workspace
            hints = capabilities.inlay_hint if capabilities is not None else None
            if hints is not None and hints.refresh_support:
                self.workspace_inlay_hint_refresh(None)

        if self.loop is not None:
            self.loop.call_soon_threadsafe(send)
        else:
            send()

    def report_server_error(self, error: Exception, source: Any) -> None:
        """A message that is not JSON (bad UTF-8, a broken body): answer a parse error,
        as JSON-RPC asks, and go on reading."""
        log.warning("bad message: %s", error)
        if isinstance(error, (UnicodeDecodeError, ValueError)):
            try:
                writer = self.protocol.writer
                if writer is not None:
                    writer.write(_encoded({
                        "jsonrpc": "2.0", "id": None,
                        "error": {"code": -32700, "message": f"parse error: {error}"}}))
            except Exception:  # the client went away
                pass


def _encoded(message: dict) -> bytes:
    import json

    body = json.dumps(message).encode("utf-8")
    return f"Content-Length: {len(body)}\r\n\r\n".encode("ascii") + body


# ---- answers to requests (each takes the document state, none touches the transport) --------


def hover_text(documents: SheetDocuments, doc: OpenSheet, position: lsp.Position) -> str | None:
    lines = documents.lines(doc)
    column = lines.column(position)
    sheet = doc.sheet
    if column is None or sheet is None:
        return None
    line = lines.line(position.line)
    tok = token_at(line, column)
    if tok is None or tok.kind != "name":
        return None
    parts, index = part_at(tok, column)
    parts = [p for p in parts if p] or parts
    index = min(index, len(parts) - 1)
    word = parts[index]
    if index == 0 and len(parts) > 1 and word in sheet.namespaces:
        imported = sheet.namespaces[word]
        return f"imported sheet `{word}`: {imported.source.label} ({len(imported.names())} cells)"
    target = _resolve_target(sheet, parts, index)
    if target is not None:
        return _cell_hover(target)
    if index == 1 and parts[0] == "const":
        return _constant_hover(sheet, word)
    if index > 0:
        return _field_hover(sheet, parts, index)
    after = line[tok.end:].lstrip()
    spec = functions.lookup(word)
    if spec is not None and (after.startswith("(") or word not in _known_units(sheet)):
        return "```text\n" + function_entry(word, caution=False) + "\n```"
    before = line[:tok.start].rstrip()
    after_number = bool(before) and (before[-1].isdigit() or before[-1] in "%)")
    if not after_number:
        text = _constant_hover(sheet, word)
        if text is not None:
            return text
    return _unit_hover(sheet, word)


def _known_units(sheet: Sheet) -> set[str]:
    return set(sheet.unit_names())


def _cell_hover(target: Target) -> str:
    sheet, name = target.sheet, target.name
    cell = sheet.cell(name)
    out = [f"**{name}** = {cell_text(cell)}"]
    if sheet.source.path is not None and sheet.prefix:
        out[0] += f"  \n(cell of {sheet.source.label})"
    if cell.error is None:
        value = cell.value
        unit = getattr(value, "unit", None)
        facts = []
        if unit is not None:
            facts.append(f"unit: `{unit_text(unit) or '1'}`")
            facts.append(f"dimension: {physical_type(unit)}")
        sigma = cell.sigma
        if sigma is not None:
            from ..outputs.format import value_text

            facts.append(f"σ: {value_text(sigma)}")
        if facts:
            out.append(" · ".join(facts))
    uses = sorted(sheet.uses(name))
    out.append("uses: " + (", ".join(f"`{n}`" for n in uses) if uses else "no other cell"))
    users = sorted(sheet.users(name))
    if users:
        out.append("used by: " + ", ".join(f"`{n}`" for n in users))
    for warning in cell.warnings:
        out.append(f"⚠ {warning}")
    return "\n\n".join(out)


def _field_hover(sheet: Sheet, parts: list[str], index: int) -> str | None:
    from ..outputs.format import record_rows

    head = parts[0]
    if head not in sheet or sheet.cell(head).error is not None:
        return None
    for field_name, number, unit in record_rows(sheet.cell(head).raw):
        if field_name == f".{parts[index]}":
            return f"**{head}.{parts[index]}** = {number} {unit}".rstrip()
    return None


def _constant_hover(sheet: Sheet, name: str) -> str | None:
    table = constant_table(sheet.selection)
    entry = table.get(name)
    if entry is None:
        return None
    from ..outputs.format import value_text

    lines = [f"constant **{name}** = {value_text(entry.quantity)}", entry.description]
    if entry.uncertainty:
        lines.append(f"standard uncertainty: {entry.uncertainty:.3g} {unit_text(entry.quantity.unit)}")
    lines.append(f"edition: {sheet.selection}")
    if entry.reference:
        lines.append(f"source: {entry.reference}")
    return "\n\n".join(lines)


def _unit_hover(sheet: Sheet, name: str) -> str | None:
    unit = unit_table(sheet.selection).lookup(name)
    if unit is None:
        return None
    from ..outputs.format import format_number

    try:
        si = (1 * unit).si
        definition = f"1 {name} = {format_number(float(si.value), 10)} {unit_text(si.unit)}".rstrip()
    except Exception:  # a unit astropy cannot express in SI (logarithmic, …)
        definition = f"`{unit_text(unit)}`"
    return f"unit **{name}**: {definition}\n\ndimension: {physical_type(unit)}"


def inlay_hints(documents: SheetDocuments, doc: OpenSheet, first: int, last: int
                ) -> list[lsp.InlayHint]:
    sheet = doc.sheet
    if sheet is None:
        return []
    lines = Lines(sheet.source.text, documents.encoding)
    hints = []
    for cell in sheet.cells:
        definition = cell.definition
        if cell.source is not sheet.source or definition.syntax_error is not None:
            continue
        line = definition.span.end_line
        if not first <= line - 1 <= last:
            continue
        label = _hint_label(doc, cell)
        end = len(lines.line(line - 1)) + 1
        hints.append(lsp.InlayHint(lines.position(line, end), label, padding_left=True,
                                   kind=None))
    return hints


def _hint_label(doc: OpenSheet, cell: Cell) -> str:
    known = doc.shown.get(cell.name)
    if known is not None and known[0] is cell.raw and known[1] is cell.error:
        return known[2]
    if isinstance(cell.error, InputFailedError):
        label = "→ (input failed)"
    else:
        label = "→ " + cell_text(cell)
    doc.shown[cell.name] = (cell.raw, cell.error, label)
    return label


def _word_before(prefix: str) -> str:
    match = re.search(r"[\w.]*$", prefix)
    return match.group() if match else ""


def completions(documents: SheetDocuments, doc: OpenSheet, position: lsp.Position
                ) -> list[lsp.CompletionItem]:
    lines = documents.lines(doc)
    column = lines.column(position)
    if column is None:
        return []
    prefix = lines.line(position.line)[:column]
    opened = _OPEN_STRING.search(prefix)
    if opened is not None:
        suffixes = (SHEET_SUFFIX,) if opened.group("call").strip() == "use" else TABLE_SUFFIXES
        return _file_items(doc, opened.group("typed"), suffixes)
    if prefix.count('"') % 2 == 1 or "#" in prefix.replace('"#', ""):
        return []
    sheet = doc.sheet
    if sheet is None:
        return []
    word = _word_before(prefix)
    items: list[lsp.CompletionItem] = []
    kind = lsp.CompletionItemKind
    if "." in word:
        head, _, rest = word.rpartition(".")
        if head == "const":
            for name, entry in sorted(constant_table(sheet.selection).items()):
                items.append(lsp.CompletionItem(name, kind=kind.Constant, detail=entry.description))
        elif head == "ppn":
            items += [lsp.CompletionItem(p, kind=kind.Variable, detail="PPN parameter")
                      for p in ("gamma", "beta")]
        else:
            imported = _namespace(sheet, head.split("."))
            if imported is not None:
                for name in imported.names():
                    items.append(lsp.CompletionItem(
                        name, kind=kind.Variable,
                        detail=f"{cell_text(imported.cell(name))} (cell of {imported.source.label})"))
            else:
                items += _field_items(sheet, head)
        return [i for i in items if i.label.startswith(rest)]
    for name in sheet.names():
        items.append(lsp.CompletionItem(name, kind=kind.Variable, detail=cell_text(sheet.cell(name))))
    items += [lsp.CompletionItem(n, kind=kind.Module, detail=f"imported sheet {s.source.label}")
              for n, s in sheet.namespaces.items()]
    for spec in functions.all_functions():
        items.append(lsp.CompletionItem(
            spec.name, kind=kind.Function, detail=f"{spec.name}{spec.display_signature()}",
            documentation=spec.summary))
    own = set(sheet.names())
    items += [lsp.CompletionItem(n, kind=kind.Constant, detail=e.description)
              for n, e in sorted(constant_table(sheet.selection).items()) if n not in own]
    if word:
        from .completion import unit_rank

        every = set(sheet.unit_names())
        units = sorted((n for n in every if n.startswith(word)), key=lambda n: unit_rank(n, every))
        items += [lsp.CompletionItem(n, kind=kind.Unit, detail="unit")
                  for n in units[:MAX_UNIT_ITEMS] if n not in own]
    seen: set[str] = set()
    unique = []
    for item in items:
        if item.label.startswith(word) and item.label not in seen:
            seen.add(item.label)
            unique.append(item)
    return unique


def _namespace(sheet: Sheet, parts: list[str]) -> Sheet | None:
    current: Sheet | None = sheet
    for part in parts:
        if current is None or part not in current.namespaces:
            return None
        current = current.namespaces[part]
    return current


def _field_items(sheet: Sheet, head: str) -> list[lsp.CompletionItem]:
    from ..outputs.format import record_rows

    if head not in sheet or sheet.cell(head).error is not None:
        return []
    return [lsp.CompletionItem(name.lstrip("."), kind=lsp.CompletionItemKind.Field,
                               detail=f"{number} {unit}".rstrip())
            for name, number, unit in record_rows(sheet.cell(head).raw) if name.startswith(".")]


def _file_items(doc: OpenSheet, typed: str, suffixes: tuple[str, ...]) -> list[lsp.CompletionItem]:
    if doc.path is None:
        return []
    folder_part, _, start = typed.rpartition("/")
    folder = (doc.path.parent / folder_part) if folder_part else doc.path.parent
    items = []
    try:
        entries = sorted(folder.iterdir())[:2000]
    except OSError:
        return []
    for each in entries:
        if each.name.startswith(".") or not each.name.startswith(start):
            continue
        if each.is_dir():
            items.append(lsp.CompletionItem(each.name + "/", kind=lsp.CompletionItemKind.Folder))
        elif each.suffix in suffixes and each != doc.path:
            items.append(lsp.CompletionItem(each.name, kind=lsp.CompletionItemKind.File))
    return items


def signature_help(documents: SheetDocuments, doc: OpenSheet, position: lsp.Position
                   ) -> lsp.SignatureHelp | None:
    lines = documents.lines(doc)
    column = lines.column(position)
    if column is None:
        return None
    first = max(0, position.line - 20)
    text = "\n".join(lines.line(i).split("#", 1)[0] for i in range(first, position.line))
    text = (text + "\n" if text else "") + lines.line(position.line)[:column]
    depth, commas, at = 0, 0, -1
    for index in range(len(text) - 1, -1, -1):
        char = text[index]
        if char in ")]":
            depth += 1
        elif char in "([":
            if depth == 0:
                if char == "(":
                    at = index
                break
            depth -= 1
        elif char == "," and depth == 0:
            commas += 1
    if at < 0:
        return None
    name = _word_before(text[:at].rstrip()).rpartition(".")[2]
    spec = functions.lookup(name)
    if spec is None:
        return None
    parameters = list(spec.signature.parameters)
    active = commas
    typed = text[at + 1:].rsplit(",", 1)[-1]
    keyword = re.match(rf"\s*({_NAME})\s*=(?!=)", typed)
    if keyword is not None and keyword.group(1) in parameters:
        active = parameters.index(keyword.group(1))
    label = f"{spec.name}{spec.display_signature()}"
    info = lsp.SignatureInformation(
        label, documentation=spec.summary,
        parameters=[lsp.ParameterInformation(p) for p in parameters])
    return lsp.SignatureHelp([info], active_signature=0,
                             active_parameter=min(active, max(0, len(parameters) - 1)))


def _target_at(documents: SheetDocuments, doc: OpenSheet, position: lsp.Position
               ) -> tuple[Target | None, Token | None, list[str], int]:
    lines = documents.lines(doc)
    column = lines.column(position)
    sheet = doc.sheet
    if column is None or sheet is None:
        return None, None, [], 0
    tok = token_at(lines.line(position.line), column)
    if tok is None or tok.kind != "name":
        return None, tok, [], 0
    parts, index = part_at(tok, column)
    use = _USE_LINE.match(lines.line(position.line))
    if use is not None and use.group("ns") in sheet.namespaces and \
            re.match(r"\s*=(?!=)", lines.line(position.line)[tok.end:]):
        imported = sheet.namespaces[use.group("ns")]
        return (Target(imported, tok.text) if tok.text in imported else None), tok, parts, index
    return _resolve_target(sheet, parts, index), tok, parts, index


def _location_of_file(path: Path | None) -> lsp.Location | None:
    if path is None:
        return None
    return lsp.Location(uri_of(path), lsp.Range(lsp.Position(0, 0), lsp.Position(0, 0)))


def definition(documents: SheetDocuments, doc: OpenSheet, position: lsp.Position
               ) -> list[lsp.Location]:
    target, tok, parts, index = _target_at(documents, doc, position)
    sheet = doc.sheet
    if sheet is None or tok is None:
        return []
    if tok.kind == "string":
        use = _USE_LINE.match(documents.lines(doc).line(position.line))
        if use is not None and use.group("ns") in sheet.namespaces:
            found = _location_of_file(sheet.namespaces[use.group("ns")].source.path)
            return [found] if found is not None else []
        return []
    if target is None:
        if parts and parts[0] in sheet.namespaces and index == 0:
            found = _location_of_file(sheet.namespaces[parts[0]].source.path)
            return [found] if found is not None else []
        return []
    definition = target.sheet.file_definition(target.name)
    if definition is None:
        return []
    uri = doc.uri if target.sheet is sheet else (
        uri_of(target.sheet.source.path) if target.sheet.source.path is not None else None)
    if uri is None:
        return []
    text = _text_of(documents, target.sheet)
    return [lsp.Location(uri, Lines(text, documents.encoding).range(definition.name_span))]


def _text_of(documents: SheetDocuments, sheet: Sheet) -> str:
    path = sheet.source.path
    for doc in documents.documents.values():
        if doc.path is not None and doc.path == path:
            return doc.text
    return sheet.source.text


def references(documents: SheetDocuments, doc: OpenSheet, position: lsp.Position,
               declaration: bool = True) -> dict[str, list[lsp.Range]]:
    """uri → ranges of every spot naming the cell under the cursor, across the open sheets
    and the sheets beside the cell's file."""
    target, *_ = _target_at(documents, doc, position)
    if target is None:
        return {}
    home = target.sheet.source.path
    home_uri = doc.uri if target.sheet is doc.sheet else (uri_of(home) if home else None)
    if home_uri is None:
        return {}
    texts: dict[str, tuple[str, Path | None]] = {}
    path: Path | None
    if home is not None:
        try:
            beside = sorted(home.parent.glob(f"*{SHEET_SUFFIX}"))[:500]
        except OSError:
            beside = []
        for path in beside:
            try:
                if path.stat().st_size <= MAX_SHEET_BYTES:
                    texts[uri_of(path)] = (path.read_text(encoding="utf-8"), path)
            except (OSError, UnicodeDecodeError):
                continue
    for other in documents.documents.values():
        texts[other.uri] = (other.text, other.path)
    texts.setdefault(home_uri, (_text_of(documents, target.sheet), home))
    definition = target.sheet.file_definition(target.name)
    found: dict[str, list[lsp.Range]] = {}
    for uri, (text, path) in texts.items():
        own = uri == home_uri
        bound = bound_namespaces(text, path.parent if path else None, home)
        if not own and not bound:
            continue
        lines = Lines(text, documents.encoding)
        for line, start, end in occurrences(text, target.name, own, bound):
            if own and not declaration and definition is not None and \
                    (line, start + 1) == (definition.name_span.line, definition.name_span.column):
                continue
            found.setdefault(uri, []).append(lsp.Range(lines.position(line, start + 1),
                                                       lines.position(line, end + 1)))
    return found


def rename(documents: SheetDocuments, doc: OpenSheet, position: lsp.Position, new_name: str
           ) -> lsp.WorkspaceEdit | None:
    target, *_ = _target_at(documents, doc, position)
    if target is None:
        raise JsonRpcInvalidParams("there is no cell here to rename")
    refusal = rename_refusal(target, new_name)
    if refusal is not None:
        raise JsonRpcInvalidParams(refusal)
    places = references(documents, doc, position)
    return lsp.WorkspaceEdit(changes={uri: [lsp.TextEdit(r, new_name) for r in ranges]
                                      for uri, ranges in places.items()})


def rename_refusal(target: Target, new_name: str) -> str | None:
    """Why ``target``'s cell cannot take the name ``new_name`` (None: it can)."""
    sheet = target.sheet
    if target.name.startswith("ppn."):
        return "a PPN parameter keeps its name"
    if not re.fullmatch(_NAME, new_name):
        return f"`{new_name}` is not a cell name (letters, digits and _, not starting with a digit)"
    if new_name in RESERVED_WORDS:
        return f"`{new_name}` is a word of the sheet language"
    if new_name in sheet or new_name in sheet.namespaces:
        return f"`{new_name}` is taken: the sheet already has a cell or import of that name"
    if unit_table(sheet.selection).lookup(new_name) is not None:
        return f"`{new_name}` is a unit; a cell of that name would make `2 {new_name}` ambiguous"
    if functions.lookup(new_name) is not None:
        return f"`{new_name}` is a function"
    seeing = sheet.cells_seeing(new_name)
    if seeing:
        return (f"cells already use `{new_name}` (as a constant or unit): "
                + ", ".join(f"`{n}`" for n in seeing[:5]))
    return None


def document_symbols(documents: SheetDocuments, doc: OpenSheet) -> list[lsp.DocumentSymbol]:
    sheet = doc.sheet
    text = sheet.source.text if sheet is not None else doc.text
    lines = Lines(text, documents.encoding)
    cells: dict[int, tuple[str, str, Span, Span]] = {}
    if sheet is not None:
        for cell in sheet.cells:
            if cell.source is sheet.source:
                d = cell.definition
                cells[d.span.line] = (cell.name, cell_text(cell), d.span, d.name_span)
    top: list[lsp.DocumentSymbol] = []
    section: lsp.DocumentSymbol | None = None
    for number, line in enumerate(lines.lines, 1):
        heading = _HEADING.match(line)
        if heading is not None:
            section = lsp.DocumentSymbol(
                heading.group("text") or "(heading)", lsp.SymbolKind.Namespace,
                lines.line_range(number), lines.line_range(number), children=[])
            top.append(section)
            continue
        found = cells.get(number)
        if found is None:
            continue
        name, shown, span, name_span = found
        symbol = lsp.DocumentSymbol(
            name, lsp.SymbolKind.Variable,
            lsp.Range(lines.position(span.line, 1), lines.line_range(span.end_line).end),
            lines.range(name_span), detail=shown)
        if section is not None:
            section.children.append(symbol)  # type: ignore[union-attr]
            section.range = lsp.Range(section.range.start, symbol.range.end)
        else:
            top.append(symbol)
    return top


def code_actions(documents: SheetDocuments, doc: OpenSheet, wanted: lsp.Range
                 ) -> list[lsp.CodeAction]:
    sheet = doc.sheet
    if sheet is None or sheet.source.text != doc.text:
        return []
    lines = Lines(doc.text, documents.encoding)
    actions = []
    for err in sheet.all_errors():
        if not owns(sheet, err) or err.span is None:
            continue
        first, last = err.span.line - 1, err.span.end_line - 1
        if last < wanted.start.line or first > wanted.end.line:
            continue
        for index, option in enumerate(did_you_mean_options(err)):
            where = lines.range(err.span)
            actions.append(lsp.CodeAction(
                f"Change to `{option}`", kind=lsp.CodeActionKind.QuickFix,
                diagnostics=[_diagnostic(err, lines, lsp.DiagnosticSeverity.Error)],
                is_preferred=index == 0,
                edit=lsp.WorkspaceEdit(changes={doc.uri: [lsp.TextEdit(where, option)]})))
    from ..outputs.annotate import annotated_text

    fresh = split_lines(annotated_text(sheet, doc.text))
    edits = [lsp.TextEdit(lines.line_range(number), new)
             for number, (old, new) in enumerate(zip(lines.lines, fresh), 1) if old != new]
    if edits:
        actions.append(lsp.CodeAction(
            "Write each cell's value as a `#→` marker", kind=lsp.CodeActionKind.Source,
            edit=lsp.WorkspaceEdit(changes={doc.uri: edits})))
    return actions


# ---- wiring ---------------------------------------------------------------------------


def build_server() -> SheetServer:
    """The server with every feature registered (not started)."""
    server = SheetServer()
    sheets = server.sheets

    def document(uri: str) -> OpenSheet | None:
        return sheets.get(uri)

    @server.feature(lsp.INITIALIZED)
    def initialized(ls: SheetServer, params: lsp.InitializedParams) -> None:
        import asyncio

        ls.loop = asyncio.get_running_loop()
        encoding = ls.workspace.position_encoding
        sheets.encoding = encoding or lsp.PositionEncodingKind.Utf16
        for folder in ls.workspace.folders.values():
            path = _path_of(folder.uri)
            if path is not None:
                sheets.folders.append(path)
        root = ls.workspace.root_path
        if root and not sheets.folders:
            sheets.folders.append(Path(root).resolve())

    @server.feature(lsp.TEXT_DOCUMENT_DID_OPEN)
    def did_open(ls: SheetServer, params: lsp.DidOpenTextDocumentParams) -> None:
        item = params.text_document
        sheets.open(item.uri, item.text, item.version)

    @server.feature(lsp.TEXT_DOCUMENT_DID_CHANGE)
    def did_change(ls: SheetServer, params: lsp.DidChangeTextDocumentParams) -> None:
        uri = params.text_document.uri
        text = ls.workspace.get_text_document(uri).source
        sheets.change(uri, text, params.text_document.version)

    @server.feature(lsp.TEXT_DOCUMENT_DID_SAVE, lsp.SaveOptions(include_text=False))
    def did_save(ls: SheetServer, params: lsp.DidSaveTextDocumentParams) -> None:
        sheets.submit(params.text_document.uri)

    @server.feature(lsp.TEXT_DOCUMENT_DID_CLOSE)
    def did_close(ls: SheetServer, params: lsp.DidCloseTextDocumentParams) -> None:
        sheets.close(params.text_document.uri)
        # a closed sheet's problems leave the editor's list with it
        ls.text_document_publish_diagnostics(lsp.PublishDiagnosticsParams(
            params.text_document.uri, []))

    @server.feature(lsp.TEXT_DOCUMENT_HOVER)
    @server.thread()
    def hover(ls: SheetServer, params: lsp.HoverParams) -> lsp.Hover | None:
        doc = document(params.text_document.uri)
        if doc is None:
            return None
        with doc.lock:
            text = hover_text(sheets, doc, params.position)
        if text is None:
            return None
        return lsp.Hover(lsp.MarkupContent(lsp.MarkupKind.Markdown, text))

    @server.feature(lsp.TEXT_DOCUMENT_INLAY_HINT, lsp.InlayHintOptions(resolve_provider=False))
    @server.thread()
    def inlay_hint(ls: SheetServer, params: lsp.InlayHintParams) -> list[lsp.InlayHint]:
        doc = document(params.text_document.uri)
        if doc is None:
            return []
        with doc.lock:
            return inlay_hints(sheets, doc, params.range.start.line, params.range.end.line)

    @server.feature(lsp.TEXT_DOCUMENT_COMPLETION,
                    lsp.CompletionOptions(trigger_characters=[".", '"', "/"]))
    @server.thread()
    def completion(ls: SheetServer, params: lsp.CompletionParams) -> lsp.CompletionList:
        doc = document(params.text_document.uri)
        if doc is None:
            return lsp.CompletionList(False, [])
        with doc.lock:
            return lsp.CompletionList(False, completions(sheets, doc, params.position))

    @server.feature(lsp.TEXT_DOCUMENT_SIGNATURE_HELP,
                    lsp.SignatureHelpOptions(trigger_characters=["(", ","]))
    @server.thread()
    def signature(ls: SheetServer, params: lsp.SignatureHelpParams) -> lsp.SignatureHelp | None:
        doc = sheets.get(params.text_document.uri, wait=False)
        if doc is None:
            return None
        return signature_help(sheets, doc, params.position)

    @server.feature(lsp.TEXT_DOCUMENT_DEFINITION)
    @server.thread()
    def goto_definition(ls: SheetServer, params: lsp.DefinitionParams) -> list[lsp.Location]:
        doc = document(params.text_document.uri)
        if doc is None:
            return []
        with doc.lock:
            return definition(sheets, doc, params.position)

    @server.feature(lsp.TEXT_DOCUMENT_REFERENCES)
    @server.thread()
    def find_references(ls: SheetServer, params: lsp.ReferenceParams) -> list[lsp.Location]:
        doc = document(params.text_document.uri)
        if doc is None:
            return []
        with doc.lock:
            found = references(sheets, doc, params.position,
                               params.context.include_declaration)
        return [lsp.Location(uri, r) for uri, ranges in found.items() for r in ranges]

    @server.feature(lsp.TEXT_DOCUMENT_PREPARE_RENAME)
    @server.thread()
    def prepare_rename(ls: SheetServer, params: lsp.PrepareRenameParams) -> lsp.Range | None:
        doc = document(params.text_document.uri)
        if doc is None:
            return None
        with doc.lock:
            target, tok, parts, index = _target_at(sheets, doc, params.position)
            if target is None or tok is None or target.name.startswith("ppn."):
                return None
            lines = sheets.lines(doc)
            start = tok.start + sum(len(p) + 1 for p in parts[:index])
            return lsp.Range(lines.position(params.position.line + 1, start + 1),
                             lines.position(params.position.line + 1,
                                            start + len(parts[index]) + 1))

    @server.feature(lsp.TEXT_DOCUMENT_RENAME)
    @server.thread()
    def rename_cell(ls: SheetServer, params: lsp.RenameParams) -> lsp.WorkspaceEdit | None:
        doc = document(params.text_document.uri)
        if doc is None:
            return None
        with doc.lock:
            return rename(sheets, doc, params.position, params.new_name)

    @server.feature(lsp.TEXT_DOCUMENT_DOCUMENT_SYMBOL)
    @server.thread()
    def symbols(ls: SheetServer, params: lsp.DocumentSymbolParams) -> list[lsp.DocumentSymbol]:
        doc = document(params.text_document.uri)
        if doc is None:
            return []
        with doc.lock:
            return document_symbols(sheets, doc)

    @server.feature(lsp.TEXT_DOCUMENT_CODE_ACTION, lsp.CodeActionOptions(
        code_action_kinds=[lsp.CodeActionKind.QuickFix, lsp.CodeActionKind.Source]))
    @server.thread()
    def actions(ls: SheetServer, params: lsp.CodeActionParams) -> list[lsp.CodeAction]:
        doc = document(params.text_document.uri)
        if doc is None:
            return []
        with doc.lock:
            return code_actions(sheets, doc, params.range)

    return server


def serve() -> int:
    """Run the server on stdin and stdout until the client says exit."""
    server = build_server()
    try:
        server.start_io()
    finally:
        server.sheets.stop()
    return 0


def uri_of(path: Path) -> str:
    return from_fs_path(str(path)) or path.as_uri()
