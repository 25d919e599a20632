"""`relsheet lsp`: the real server in a subprocess, driven over stdio by pygls's LSP client.

One server serves the whole module (starting one costs the import of astropy); the client
runs on an event loop in a thread of its own, and each test waits for its answers there.
Values are checked against astropy (Kepler's third law with astropy's constants), the
protocol against the LSP 3.17 specification.
"""

from __future__ import annotations

import asyncio
import json
import math
import os
import subprocess
import sys
import threading
from pathlib import Path

import pytest

pytest.importorskip("pygls")

import astropy.constants as const  # noqa: E402
import astropy.units as u  # noqa: E402
from lsprotocol import types as lsp  # noqa: E402
from pygls.lsp.client import LanguageClient  # noqa: E402

from calc.engine.sheet import Sheet  # noqa: E402

ROOT = Path(__file__).resolve().parent.parent

LIB = "## Star\nM = 1.1 Msun\nR = 1.2 Rsun\n"
MAIN = ('use "lib.sheet" as star\n'
        "## Orbit\n"
        "a = 0.05 AU\n"
        "P = orbital_period(star.M, a) in d\n"
        "v = 2 pi a / P in km/s\n"
        "check P > 1 d\n"
        "check P < 1 d\n")


def kepler_period_days(mass_sun: float, a_au: float) -> float:
    """P = 2π √(a³ / GM), with astropy's constants (the outside reference)."""
    a = a_au * u.AU
    return float((2 * math.pi * (a ** 3 / (const.G * mass_sun * const.M_sun)) ** 0.5).to(u.d).value)


class Session:
    """An LSP client on its own event loop thread, talking to `relsheet lsp`."""

    def __init__(self, folder: Path) -> None:
        self.folder = folder
        self.loop = asyncio.new_event_loop()
        self.thread = threading.Thread(target=self.loop.run_forever, daemon=True)
        self.thread.start()
        self.client = LanguageClient("relsheet-tests", "1")
        self.diagnostics: dict[str, list[lsp.Diagnostic]] = {}
        self.published = threading.Condition()
        self.refreshes = 0

        @self.client.feature(lsp.TEXT_DOCUMENT_PUBLISH_DIAGNOSTICS)
        def diagnostics(params: lsp.PublishDiagnosticsParams) -> None:
            with self.published:
                self.diagnostics[params.uri] = params.diagnostics
                self.published.notify_all()

        @self.client.feature(lsp.WORKSPACE_INLAY_HINT_REFRESH)
        def refresh(params: None) -> None:
            self.refreshes += 1

        env = dict(os.environ, PYTHONPATH=str(ROOT))
        self.run(self.client.start_io(sys.executable, "-m", "calc", "lsp", env=env,
                                      cwd=str(folder)))
        self.stderr: list[bytes] = []
        self.loop.call_soon_threadsafe(lambda: self.loop.create_task(self._drain()))

    async def _drain(self) -> None:
        stream = self.client._server.stderr  # noqa: SLF001 - the client keeps the process
        while stream is not None:
            line = await stream.readline()
            if not line:
                return
            self.stderr.append(line)

    def run(self, coroutine, timeout: float = 30):
        return asyncio.run_coroutine_threadsafe(coroutine, self.loop).result(timeout)

    def call(self, function, *args) -> None:
        """A notification (sent from the client's loop)."""
        done = threading.Event()

        def send() -> None:
            function(*args)
            done.set()

        self.loop.call_soon_threadsafe(send)
        assert done.wait(10)

    def uri(self, name: str) -> str:
        return (self.folder / name).as_uri()

    def wait_diagnostics(self, uri: str, until=lambda d: True, timeout: float = 20
                         ) -> list[lsp.Diagnostic]:
        with self.published:
            ok = self.published.wait_for(
                lambda: uri in self.diagnostics and until(self.diagnostics[uri]), timeout)
            assert ok, f"no diagnostics for {uri}: {self.diagnostics.get(uri)}"
            return self.diagnostics[uri]

    def open(self, name: str, text: str, uri: str | None = None) -> str:
        uri = uri or self.uri(name)
        self.call(self.client.text_document_did_open, lsp.DidOpenTextDocumentParams(
            lsp.TextDocumentItem(uri, "relsheet", 1, text)))
        return uri

    def hints(self, uri: str) -> dict[int, str]:
        found = self.run(self.client.text_document_inlay_hint_async(lsp.InlayHintParams(
            lsp.TextDocumentIdentifier(uri),
            lsp.Range(lsp.Position(0, 0), lsp.Position(10_000, 0)))))
        return {h.position.line: h.label for h in found or []}

    def hover(self, uri: str, line: int, character: int) -> str | None:
        found = self.run(self.client.text_document_hover_async(lsp.HoverParams(
            lsp.TextDocumentIdentifier(uri), lsp.Position(line, character))))
        return None if found is None else found.contents.value

    def alive(self) -> bool:
        """The server still answers a request."""
        return self.hover(self.uri("lib.sheet"), 1, 0) is not None


@pytest.fixture(scope="module")
def session(tmp_path_factory):
    folder = tmp_path_factory.mktemp("lsp")
    (folder / "lib.sheet").write_text(LIB)
    (folder / "main.sheet").write_text(MAIN)
    (folder / "data.csv").write_text("t,x\n1,2\n")
    s = Session(folder)
    result = s.run(s.client.initialize_async(lsp.InitializeParams(
        capabilities=lsp.ClientCapabilities(
            workspace=lsp.WorkspaceClientCapabilities(
                inlay_hint=lsp.InlayHintWorkspaceClientCapabilities(refresh_support=True))),
        workspace_folders=[lsp.WorkspaceFolder(folder.as_uri(), "lsp")])))
    s.capabilities = result.capabilities
    s.call(s.client.initialized, lsp.InitializedParams())
    s.open("lib.sheet", LIB)
    s.open("main.sheet", MAIN)
    s.wait_diagnostics(s.uri("main.sheet"))
    yield s
    s.run(s.client.shutdown_async(None))
    s.call(s.client.exit, None)
    s.run(s.client.stop())
    s.loop.call_soon_threadsafe(s.loop.stop)


def test_initialize_announces_the_features(session):
    caps = session.capabilities
    assert caps.hover_provider and caps.inlay_hint_provider and caps.definition_provider
    assert caps.references_provider and caps.rename_provider and caps.document_symbol_provider
    assert list(caps.completion_provider.trigger_characters) == [".", '"', "/"]
    assert "(" in caps.signature_help_provider.trigger_characters
    assert caps.code_action_provider


def test_diagnostics_on_open_show_a_failed_check(session):
    diagnostics = session.wait_diagnostics(session.uri("main.sheet"))
    failed = [d for d in diagnostics if d.code == "check-failed"]
    assert len(failed) == 1 and failed[0].range.start.line == 6  # `check P < 1 d`
    assert failed[0].severity == lsp.DiagnosticSeverity.Warning
    assert not [d for d in diagnostics if d.severity == lsp.DiagnosticSeverity.Error]


def test_inlay_hints_show_values_without_changing_the_file(session):
    hints = session.hints(session.uri("main.sheet"))
    expected = kepler_period_days(1.1, 0.05)
    shown = hints[3]
    assert shown.startswith("→ ") and shown.endswith(" d")
    assert float(shown.split()[1]) == pytest.approx(expected, rel=1e-5)
    assert (session.folder / "main.sheet").read_text() == MAIN


def test_hover_on_a_cell_a_function_a_unit_and_a_constant(session):
    uri = session.uri("main.sheet")
    cell = session.hover(uri, 3, 0)
    assert "**P**" in cell and "dimension: time" in cell and "`a`" in cell
    function = session.hover(uri, 3, 6)
    assert "orbital_period(M, a)" in function and "Formula" in function
    unit = session.hover(uri, 2, 10)
    # 1 au = 149 597 870 700 m exactly (IAU 2012 Resolution B2)
    assert "1 AU = 1.495978707e11 m" in unit and "length" in unit
    imported = session.hover(uri, 3, 24)
    assert "**M**" in imported and "lib.sheet" in imported and "mass" in imported
    consts = session.open("consts.sheet", "g = const.G * 1 kg\n", session.uri("consts.sheet"))
    session.wait_diagnostics(consts)
    constant = session.hover(consts, 0, 11)
    # CODATA 2018 and 2022 both give G = 6.674 30(15) × 10⁻¹¹ m³ kg⁻¹ s⁻²
    assert "constant **G** = 6.6743e-11" in constant and "1.5e-15" in constant
    assert "edition: codata20" in constant and "source: CODATA" in constant


def test_completion_offers_cells_imports_functions_units_and_files(session):
    uri = session.open("scratch.sheet", 'use "li\nx = orbital_\ny = star.\nz = 3 k\nw = read_table("da\n',
                       session.uri("scratch.sheet"))

    def labels(line: int, character: int) -> list[str]:
        found = session.run(session.client.text_document_completion_async(lsp.CompletionParams(
            lsp.TextDocumentIdentifier(uri), lsp.Position(line, character))))
        items = found.items if isinstance(found, lsp.CompletionList) else found
        return [i.label for i in items]

    session.wait_diagnostics(uri)
    assert labels(0, 7) == ["lib.sheet"]
    assert "orbital_period" in labels(1, 12)
    assert labels(4, 18) == ["data.csv"]
    assert "km" in labels(3, 7)[:5]
    main = session.uri("main.sheet")
    found = session.run(session.client.text_document_completion_async(lsp.CompletionParams(
        lsp.TextDocumentIdentifier(main), lsp.Position(3, 24))))
    assert {i.label for i in found.items} == {"M", "R"}   # after `star.`


def test_signature_help_inside_a_call(session):
    help_ = session.run(session.client.text_document_signature_help_async(lsp.SignatureHelpParams(
        lsp.TextDocumentIdentifier(session.uri("main.sheet")), lsp.Position(3, 27))))
    assert help_.signatures[0].label == "orbital_period(M, a)" and help_.active_parameter == 1


def test_definition_and_references_across_imports(session):
    main, lib = session.uri("main.sheet"), session.uri("lib.sheet")
    found = session.run(session.client.text_document_definition_async(lsp.DefinitionParams(
        lsp.TextDocumentIdentifier(main), lsp.Position(3, 25))))
    assert [(f.uri, f.range.start.line, f.range.start.character) for f in found] == [(lib, 1, 0)]
    refs = session.run(session.client.text_document_references_async(lsp.ReferenceParams(
        context=lsp.ReferenceContext(True), text_document=lsp.TextDocumentIdentifier(lib),
        position=lsp.Position(1, 0))))
    assert {(r.uri, r.range.start.line, r.range.start.character) for r in refs} == \
        {(lib, 1, 0), (main, 3, 24)}


def test_rename_a_cell_and_refuse_a_taken_name_or_a_unit(session):
    lib = session.uri("lib.sheet")

    def rename(name: str):
        return session.run(session.client.text_document_rename_async(lsp.RenameParams(
            lsp.TextDocumentIdentifier(lib), lsp.Position(1, 0), name)))

    edit = rename("M_star")
    assert {uri: [(e.range.start.line, e.range.start.character, e.new_text) for e in edits]
            for uri, edits in edit.changes.items()} == {
        lib: [(1, 0, "M_star")], session.uri("main.sheet"): [(3, 24, "M_star")]}
    for taken in ("R", "km"):
        with pytest.raises(Exception, match="taken|unit"):
            rename(taken)
    assert session.alive()


def test_outline_and_code_actions(session):
    main = session.uri("main.sheet")
    symbols = session.run(session.client.text_document_document_symbol_async(
        lsp.DocumentSymbolParams(lsp.TextDocumentIdentifier(main))))
    assert [(s.name, [c.name for c in s.children]) for s in symbols] == [("Orbit", ["a", "P", "v"])]
    uri = session.open("typo.sheet", "x = 3 kmz\n", session.uri("typo.sheet"))
    errors = session.wait_diagnostics(uri, lambda d: bool(d))
    assert errors[0].range == lsp.Range(lsp.Position(0, 6), lsp.Position(0, 9))
    actions = session.run(session.client.text_document_code_action_async(lsp.CodeActionParams(
        lsp.TextDocumentIdentifier(uri), errors[0].range, lsp.CodeActionContext(errors))))
    fixes = [a for a in actions if a.kind == lsp.CodeActionKind.QuickFix]
    assert fixes[0].edit.changes[uri][0].new_text == "km"
    markers = session.run(session.client.text_document_code_action_async(lsp.CodeActionParams(
        lsp.TextDocumentIdentifier(main), lsp.Range(lsp.Position(0, 0), lsp.Position(0, 0)),
        lsp.CodeActionContext([]))))
    written = [a for a in markers if a.kind == lsp.CodeActionKind.Source][0].edit.changes[main]
    assert any(e.new_text.startswith("a = 0.05 AU") and "#→ 0.05 AU" in e.new_text for e in written)


def test_a_change_re_evaluates_the_sheet_and_its_importer(session):
    lib, main = session.uri("lib.sheet"), session.uri("main.sheet")
    refreshes = session.refreshes
    session.call(session.client.text_document_did_change, lsp.DidChangeTextDocumentParams(
        lsp.VersionedTextDocumentIdentifier(2, main),
        [lsp.TextDocumentContentChangePartial(
            lsp.Range(lsp.Position(2, 4), lsp.Position(2, 8)), "0.1")]))
    # the failed check `P < 1 d` now reports the new period
    period = f"{kepler_period_days(1.1, 0.1):.6g} d"
    session.wait_diagnostics(main, lambda d: any(period in x.message for x in d))
    assert float(session.hints(main)[3].split()[1]) == pytest.approx(
        kepler_period_days(1.1, 0.1), rel=1e-5)
    # the imported star's mass changes in the editor: the importer follows, unsaved
    session.call(session.client.text_document_did_change, lsp.DidChangeTextDocumentParams(
        lsp.VersionedTextDocumentIdentifier(2, lib),
        [lsp.TextDocumentContentChangeWholeDocument("## Star\nM = 2.2 Msun\nR = 1.2 Rsun\n")]))
    expected = kepler_period_days(2.2, 0.1)
    for _ in range(100):
        shown = session.hints(main)[3]
        if float(shown.split()[1]) == pytest.approx(expected, rel=1e-5):
            break
        threading.Event().wait(0.05)
    assert float(shown.split()[1]) == pytest.approx(expected, rel=1e-5)
    assert session.refreshes > refreshes


def test_an_error_in_an_imported_sheet_shows_on_the_use_line(session):
    folder = session.folder
    (folder / "broken.sheet").write_text("M = 3 kmz\n")
    uri = session.open("uses.sheet", 'use "broken.sheet" as b\nx = 1 km\n', session.uri("uses.sheet"))
    found = session.wait_diagnostics(uri, lambda d: bool(d))
    assert found[0].range.start.line == 0 and "broken.sheet" in found[0].message
    assert "kmz" in found[0].message


def test_bad_input_gets_an_error_or_nothing_and_the_server_goes_on(session):
    huge = session.open("huge.sheet", "x = 1 km\n" * (10 * 1024 * 1024 // 9 + 1),
                        session.uri("huge.sheet"))
    found = session.wait_diagnostics(huge, lambda d: bool(d))
    assert "bytes" in found[0].message
    assert session.hover(huge, 0, 0) is None
    session.call(session.client.text_document_did_close, lsp.DidCloseTextDocumentParams(
        lsp.TextDocumentIdentifier(huge)))
    session.wait_diagnostics(huge, lambda d: not d)   # closing clears its diagnostics
    # invalid UTF-8 inside a message
    body = b'{"jsonrpc": "2.0", "id": 99999, "method": "textDocument/hover", "params": "\xff\xfe"}'
    session.call(session.client.protocol.writer.write,
                 b"Content-Length: %d\r\n\r\n" % len(body) + body)
    assert session.alive()
    # a document outside any folder, and one that is no file at all
    outside = session.open("", "y = 2 m\nz = y * 2\n", "file:///nonexistent-folder/away.sheet")
    assert list(session.wait_diagnostics(outside)) == []
    assert session.hints(outside)[1] == "→ 4 m"
    untitled = session.open("", "q = 5 s\n", "untitled:Untitled-1")
    assert session.hints(untitled)[0] == "→ 5 s"
    # a position past the end
    assert session.hover(session.uri("main.sheet"), 500, 3) is None
    assert session.hover(session.uri("main.sheet"), 0, 500) is None
    found = session.run(session.client.text_document_completion_async(lsp.CompletionParams(
        lsp.TextDocumentIdentifier(session.uri("main.sheet")), lsp.Position(9999, 9999))))
    assert list(found.items) == []
    # a document the server never saw
    assert session.hover(session.uri("never.sheet"), 0, 0) is None
    assert session.alive()


def test_starting_the_command_line_does_not_load_pygls():
    code = "import sys, calc.interfaces.cli; print(sorted(m for m in sys.modules " \
           "if m.split('.')[0] in ('pygls', 'lsprotocol')))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         env=dict(os.environ, PYTHONPATH=str(ROOT)), check=True)
    assert json.loads(out.stdout.replace("'", '"')) == []


def test_sheet_edit_recomputes_only_what_the_edited_cell_reaches():
    text = "a = 0.05 AU\nb = 7 km\nP = orbital_period(1.1 Msun, a) in d\nc = b * 2\n"
    sheet = Sheet.from_text(text)
    before = sheet.evaluations
    changed = sheet.edit(text.replace("0.05 AU", "0.1 AU"))
    assert [c.name for c in changed] == ["a", "P"]
    assert sheet.evaluations - before == 2
    assert sheet["P"].to_value(u.d) == pytest.approx(kepler_period_days(1.1, 0.1), rel=1e-9)
    assert sheet.edit(text + "d = 1\n") is None            # a new line: structure changed
    assert sheet.edit(text.replace("b = 7 km", "bb = 7 km")) is None   # a renamed cell
    assert sheet.source.text == text.replace("0.05 AU", "0.1 AU")


def test_sheet_edit_imported_follows_an_unsaved_import(tmp_path):
    (tmp_path / "lib.sheet").write_text(LIB)
    (tmp_path / "main.sheet").write_text(MAIN)
    sheet = Sheet.load(tmp_path / "main.sheet")
    changed = sheet.edit_imported((tmp_path / "lib.sheet").resolve(), LIB.replace("1.1", "2.2"))
    assert [c.name for c in changed] == ["P", "v"]
    assert sheet["P"].to_value(u.d) == pytest.approx(kepler_period_days(2.2, 0.05), rel=1e-9)


def test_ranges_count_utf16_code_units(session):
    # LSP 3.17, "Position": characters are UTF-16 code units unless the client negotiated
    # another encoding; 𝑀 (U+1D440) is two of them
    uri = session.open("astral.sheet", "𝑀 = 2 kg\nx = 𝑀 * 3 kmz\n", session.uri("astral.sheet"))
    found = session.wait_diagnostics(uri, lambda d: bool(d))
    assert found[0].range == lsp.Range(lsp.Position(1, 11), lsp.Position(1, 14))
    assert "**𝑀**" in session.hover(uri, 1, 5)


def test_a_newer_edit_supersedes_an_evaluation_under_way():
    from calc.interfaces.lsp import SheetDocuments, inlay_hints

    published: list[int] = []
    documents = SheetDocuments(lambda doc, diagnostics: published.append(doc.evaluated))
    uri = "untitled:typing"
    slow = "".join(f"c{i} = {i} km\n" for i in range(3000))   # a rebuild of some 0.5 s
    try:
        documents.open(uri, "x = 1 km\n", 1)
        for _ in range(500):
            if published:
                break
            threading.Event().wait(0.01)
        assert published == [1]
        documents.change(uri, slow + "x = 2 km\n", 2)
        for _ in range(500):       # until the worker has taken version 2
            if not documents._pending:  # noqa: SLF001 - the test watches the queue
                break
            threading.Event().wait(0.002)
        for version in range(3, 7):
            documents.change(uri, f"x = {version} km\ny = x * 2\n", version)
        doc = documents.get(uri)
        assert doc is not None and doc.evaluated == 6
        for _ in range(500):       # the worker publishes just after it settles
            if 6 in published:
                break
            threading.Event().wait(0.01)
        # version 2 finished after 3 to 6 came in: never shown; 3 to 5 never evaluated
        assert published == [1, 6]
        assert [h.label for h in inlay_hints(documents, doc, 0, 10)] == ["→ 6 km", "→ 12 km"]
    finally:
        documents.stop()
