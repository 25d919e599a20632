"""calc.interfaces.repl: a real PromptSession driven through a pipe, the completer, :save, the lexer."""

from __future__ import annotations

from pathlib import Path

import pytest
from prompt_toolkit.document import Document
from prompt_toolkit.input import create_pipe_input
from prompt_toolkit.output import DummyOutput
from pygments import lex
from pygments.token import Error

from calc import Sheet
from calc.interfaces.completion import SheetCompleter
from calc.interfaces.highlight import SheetLexer
from calc.interfaces.repl import Session, run

DEMOS = sorted((Path(__file__).resolve().parent.parent / "sheets_demo").glob("*.sheet"))
SHEET = "## Binary\nm1 = 1.35 Msun  # the pulsar\nm2 = 1.25 Msun\nPb = 0.41 day\n" \
        "w = periastron_rate(m1, m2, Pb, 0.28)\nunrelated = 5 km\n"


def drive(path, keys: str) -> list[str]:
    """Type ``keys`` into a real prompt_toolkit session and collect what it prints."""
    said: list[str] = []
    with create_pipe_input() as pipe:
        pipe.send_text(keys)
        run(str(path) if path else None, input=pipe, output=DummyOutput(), echo=said.append)
    return said


@pytest.fixture
def sheet_path(tmp_path):
    path = tmp_path / "b.sheet"
    path.write_text(SHEET)
    return path


def test_what_if_prints_only_what_changed(sheet_path):
    said = drive(sheet_path, "m2 = 1.3 Msun\n:quit\n:quit\n")
    answer = said[1].splitlines()
    assert answer[0] == "m2: 1.25 solMass → 1.3 solMass"
    assert answer[1].startswith("w: 1.") and "deg / yr →" in answer[1]
    assert len(answer) == 2                                   # `unrelated` is not shown
    assert said[2].startswith("unsaved changes to m2")        # the first :quit warns


def test_expressions_errors_and_recovery(sheet_path):
    said = drive(sheet_path, "w in arcsec / yr\n1 km +\nm1 * 2\n\x04\x04")
    assert said[1].endswith("arcsec / yr")
    assert said[2].startswith("<input 2>:1:7: unexpected end of line")
    assert said[3] == "2.7 solMass"                           # the session went on


def test_revert(sheet_path):
    session = Session(sheet_path)
    session.handle("m1 = 2 Msun")
    # the revert says what came back: the cell and what moved with it
    assert session.handle(":revert m1").splitlines() == [
        "m1 = 1.35 solMass  (from the file)", "w: 2.0933 deg / yr → 1.80395 deg / yr"]
    assert session.unsaved == []


def test_save_round_trip_keeps_other_lines(sheet_path):
    session = Session(sheet_path)
    session.handle("m2 = 1.3 Msun")
    session.handle("total = m1 + m2")
    assert session.handle(":save") == f"saved {sheet_path} (2 changes)"
    text = sheet_path.read_text()
    assert text == SHEET.replace("m2 = 1.25 Msun", "m2 = 1.3 Msun") + "total = m1 + m2\n"
    assert "# the pulsar" in text
    reloaded = Sheet.load(sheet_path)
    assert reloaded["total"].value == pytest.approx(2.65)
    assert session.unsaved == []


def test_commands(sheet_path):
    session = Session(sheet_path)
    assert session.handle(":deps w").splitlines()[0] == "w  (line 5)"
    assert "m1" in session.handle(":users m1").splitlines()[0]
    assert session.handle(":deps nope").startswith("<sheet>: no cell `nope`")
    assert session.handle(":funcs deflection").startswith("deflection(M, b, gamma=…)")
    assert ":save" in session.handle(":help")
    assert session.handle(":nonsense").startswith("unknown command `:nonsense`")


def test_completion_candidates(sheet_path):
    session = Session(sheet_path)
    completer = SheetCompleter(session)

    def texts(line):
        return [c.text for c in completer.get_completions(Document(line), None)]

    assert texts("x = unrel") == ["unrelated"]
    assert "periastron_rate" in texts("x = periast")
    metas = {c.text: c.display_meta_text for c in completer.get_completions(Document("x = periast"), None)}
    assert metas["periastron_rate"].startswith("periastron_rate(m1, m2, Pb, e")
    assert "const.GM_sun" in texts("x = const.GM")
    assert texts("x = ppn.g") == ["ppn.gamma"]
    assert "Msun" in texts("x = 3 Ms")
    assert texts(":sa") == [":save"]


def test_session_without_a_file():
    session = Session()
    assert session.handle("a = 2 km") == "a = 2 km  (new cell)"
    assert session.handle(":save").startswith("<sheet>: :save needs a file name")


@pytest.mark.parametrize("path", DEMOS, ids=[p.name for p in DEMOS])
def test_lexer_covers_every_demo_sheet(path):
    tokens = list(lex(path.read_text(), SheetLexer()))
    assert not [t for t in tokens if t[0] is Error]
    assert "".join(value for _, value in tokens) == path.read_text()


def test_ppn_at_the_prompt(tmp_path):
    path = tmp_path / "d.sheet"
    path.write_text("a = deflection(1 Msun, 1 Rsun)\n")
    session = Session(path)
    answer = session.handle("ppn gamma = 0").splitlines()
    assert answer[0] == "ppn.gamma = 0  (the file sets none; general relativity has 1)"
    # deflection ∝ (1 + γ)/2: Will 2014, Living Rev. Relativ. 17, 4 (section from memory: 3.4)
    assert answer[1].startswith("a: 1.75119 arcsec → 0.875595 arcsec")
    assert session.handle("ppn alpha = 1").startswith("unknown PPN parameter `alpha`")


def test_revert_ppn_typed_at_the_prompt_returns_to_general_relativity(tmp_path):
    path = tmp_path / "d.sheet"
    path.write_text("a = deflection(1 Msun, 1 Rsun)\n")
    session = Session(path)
    session.handle("ppn gamma = 0")
    assert session.handle(":revert").splitlines() == [
        "ppn.gamma = 1  (general relativity)", "a: 0.875595 arcsec → 1.75119 arcsec"]
    assert session.handle("a") == "1.75119 arcsec"
    session.handle(":save")
    assert "ppn" not in path.read_text()


def test_save_ppn_lines(tmp_path):
    path = tmp_path / "p.sheet"
    path.write_text("ppn beta = 1\na = periapsis_advance(1 Msun, 1 AU, 0.1)\n")
    session = Session(path)
    session.handle("ppn beta = 0.9")
    session.handle("ppn gamma = 1.1")
    session.handle(":save")
    assert path.read_text() == ("ppn beta = 0.9\na = periapsis_advance(1 Msun, 1 AU, 0.1)\n"
                                "ppn gamma = 1.1\n")
    assert Sheet.load(path).ok


def test_functions_solves_and_correlations_typed_at_the_prompt_are_saved(tmp_path):
    from calc.interfaces.completion import SheetCompleter
    from calc.interfaces.repl import Session

    path = tmp_path / "s.sheet"
    path.write_text("a = 4\nx = 1\nm = 2 ± 0.1 km\nn = 3 ± 0.2 km\ny = 1 km\n")
    session = Session(path)
    assert session.handle("twice(v) = v * 2").startswith("added")
    assert session.handle("twice(3)") == "6"
    assert session.handle("solve x^2 == a for x") == "x: 2"
    session.handle("solve y == m + n for y")
    session.handle("correlation m, n = 0.5")
    # JCGM 100:2008 eq. 13: σ(m + n) = √(0.1² + 0.2² + 2·0.5·0.1·0.2) = 0.2646 km
    assert session.handle("y") == "5.00 ± 0.26 km"
    assert "no equation depends on `x`" in session.handle("solve a == 3 for x")
    assert ("twice", "twice(v) — the sheet's function") in SheetCompleter(session).candidates("tw")
    session.handle(":save")
    saved = path.read_text()
    assert saved.endswith("twice(v) = v * 2\nsolve x^2 == a for x\nsolve y == m + n for y\n"
                          "correlation m, n = 0.5\n")
