"""Regressions of the hardening pass: what practitioners and a fuzzing campaign broke.

Each test names the defect it guards against; each failed before its fix.
"""

from __future__ import annotations

import os
import stat
import subprocess
import sys
from pathlib import Path

import pytest

from calc import Sheet
from calc.errors import InputError, SheetError, UnitError, UsageError
from calc.interfaces.cli import main
from calc.interfaces.repl import Session, run_batch
from calc.outputs.annotate import annotate_file
from calc.outputs.export import to_csv, to_markdown, to_tex

ROOT = Path(__file__).resolve().parent.parent


def sheet(text: str) -> Sheet:
    return Sheet.from_text(text if text.endswith("\n") else text + "\n", "h.sheet")


# ---- from the practitioners' trial ---------------------------------------------------------


def test_1_stale_markers_see_a_change_in_the_middle_of_an_array(tmp_path):
    path = tmp_path / "a.sheet"
    path.write_text("x = [1, 2, 3, 4, 5, 6, 7, 8] km\ny = 2 * x\n")
    annotate_file(path)
    path.write_text(path.read_text().replace("[1, 2, 3, 4,", "[1, 2, 3, 9,"))
    _, changed = annotate_file(path, stale_only=True)
    assert changed == [1, 2]


def test_3_names_with_combining_marks_are_one_name_in_nfc():
    s = sheet("ω\u0307 = 2 deg / yr\nx = ω\u0307 * 2\nṖb = 3\ny = P\u0307b * 2")
    assert s.ok and s["x"].value == 4 and s["y"].value == 6


def test_4_rounding_noise_is_no_uncertainty():
    s = sheet("M = 1 ± 0.01 Msun\nr = [1, 2, 3, 3125] * M\ns = r / min(r)\nt = max(r) / M")
    assert s.sigma("s") is None or not s.sigma("s").value.any()
    text = subprocess.run([sys.executable, "-m", "calc", "eval", "-"], capture_output=True,
                          text=True).stdout   # (no file: usage only; the next line is the check)
    assert "±" not in _text_of(s, "s") and "±" not in _text_of(s, "t")
    assert text == ""


def _text_of(s: Sheet, name: str) -> str:
    from calc.outputs.format import cell_text

    return cell_text(s.cell(name))


def test_4_csv_sigma_has_no_float_noise():
    csv = to_csv(sheet("a = 2.0 ± 0.1 km\nb = a * 0.03"))
    assert "b,0.06,0.003,km" in csv.splitlines()


def test_6_an_override_keeps_the_dimension():
    s = sheet("omdot = 4.2266 deg / yr\nx = omdot * 2 yr")
    with pytest.raises(UnitError, match="angular frequency.*angle"):
        s.set("omdot", "4.2261 deg")
    assert s["omdot"].unit == "deg / yr"
    s.set("omdot", "4.2261 deg / century")    # the same dimension in another unit is fine


def test_7_markdown_shows_record_fields_and_notes_as_paragraphs():
    text = to_markdown(sheet("# first line of a note\n# second line\no = orbit(1 AU, 0.1)\n"))
    assert "first line of a note\nsecond line\n" in text
    assert "| `o.a` | 1 | AU |" in text and "| `o.e` | 0.1 |  |" in text


def test_8_template_copies_share_their_inputs(tmp_path):
    (tmp_path / "body.sheet").write_text("M = 1.0 ± 0.1 Msun\na = 1 AU\n"
                                         "P = orbital_period(M, a) in d\n")
    top = tmp_path / "top.sheet"
    top.write_text("use \"body.sheet\" as p1 with a = 1 AU\nuse \"body.sheet\" as p2 with a = 2 AU\n"
                   "ratio = p2.P / p1.P\nsum_P = p1.P + p2.P\n")
    s = Sheet.load(top)
    assert s.sigma("ratio") is None or s.sigma("ratio").value == 0   # M cancels
    rows = s.sigma_budget("sum_P")
    assert [r.name for r in rows] == ["p1.M"]                        # one input, with its namespace


def test_9_prompt_revert_says_what_came_back(tmp_path):
    path = tmp_path / "r.sheet"
    path.write_text("a = 2 km\nb = a * 3\n")
    session = Session(path)
    session.handle("a = 5 km")
    assert session.handle(":revert a").splitlines() == ["a = 2 km  (from the file)",
                                                        "b: 15 km → 6 km"]


def test_9_prompt_deps_of_typed_cells_and_checks(tmp_path):
    session = Session()
    session.handle("a = 2 km")
    session.handle("b = a * 3")
    assert session.handle(":deps b").splitlines() == ["b  (typed at the prompt)",
                                                      "  a  (typed at the prompt)"]
    assert session.handle("check b > 5 km") == "passed: 6 km vs 5 km (>)"


def test_9_prompt_save_refreshes_markers_and_puts_new_cells_with_the_cells(tmp_path):
    path = tmp_path / "s.sheet"
    path.write_text("a = 2 km\nb = a * 3\ncheck b > 1 km\n")
    annotate_file(path)
    session = Session(path)
    session.handle("a = 5 km")
    session.handle("c = b + 1 km")
    session.handle(":save")
    lines = path.read_text().splitlines()
    assert lines[0].startswith("a = 5 km") and lines[0].endswith("#→ 5 km")
    assert lines[2].startswith("c = b + 1 km") and lines[3] == "check b > 1 km"
    assert annotate_file(path, stale_only=True)[1] == []


def test_9_completion_of_fields_and_common_units_first():
    from calc.interfaces.completion import SheetCompleter

    session = Session()
    session.handle("v = orbit(1 AU, 0.1)")
    completer = SheetCompleter(session)
    assert [t for t, _ in completer.candidates("x = v.")][:2] == ["v.a", "v.e"]
    assert [t for t, _ in completer.candidates("x = 3 y")][0] == "yr"


def test_9_piped_lines_are_answered_as_plain_text(tmp_path):
    path = tmp_path / "p.sheet"
    path.write_text("a = 2 km\n")
    result = subprocess.run([sys.executable, "-m", "calc", "repl", str(path)],
                            input="a * 2\n:quit\n", capture_output=True, text=True)
    assert result.returncode == 0 and result.stdout == "4 km\n"    # no terminal control codes


def test_10_what_ifs_on_imported_cells(tmp_path, capsys):
    (tmp_path / "sys.sheet").write_text("M_star = 0.8 Msun\n")
    top = tmp_path / "w.sheet"
    top.write_text("use \"sys.sheet\" as sys\nP = orbital_period(sys.M_star, 1 AU) in d\n")
    assert main(["eval", str(top), "--set", "sys.M_star=1 Msun"]) == 0
    # Kepler's third law at 1 AU around one solar mass: the Gaussian year, 365.2569 d
    assert "P  365.257  d" in capsys.readouterr().out
    session = Session(top)
    assert "P: 408.37 d → 365.257 d" in session.handle("sys.M_star = 1 Msun")


def test_11_arrays_with_uncertainties_share_the_units_after_them():
    s = sheet("a = [1, 2, 3] ± [0.1, 0.2, 0.3] AU")
    assert s["a"].unit == "AU" and list(s.sigma("a").value) == [0.1, 0.2, 0.3]


def test_12_arrays_of_different_lengths_name_the_arguments():
    err = sheet("a = deflection([1, 2] Msun, [1, 2, 3] Rsun)").cell("a").error
    assert err.message == "deflection: arrays of different lengths (`M` has 2, `b` has 3)"


def test_13_formatting():
    from calc.outputs.report import render_sigma_budget

    s = sheet("x = 1.4e-15 ± 1e-17\ny = x * 2\nt = 1 AU / c\nf = 5 ppm\ng = 3 ppb in ppm")
    assert not render_sigma_budget(s, "y", 6).count(" )")
    assert s["t"].unit == "s"                         # not AU s / m
    assert s["t"].value == pytest.approx(499.004784, rel=1e-8)   # light time of 1 AU (IAU 2012 B2)
    assert s["f"].value == pytest.approx(5e-6) and s["g"].value == pytest.approx(0.003)


def test_13_units_list_in_columns(capsys):
    main(["units"])
    header, *rows = capsys.readouterr().out.splitlines()[1:]
    kind, value = header.index("dimension"), header.index("in SI")
    for row in (r for r in rows if ": refused:" not in r):
        # every row's dimension and value start under their headings
        assert row[kind - 1] == " " and row[kind] != " " and row[value - 1] == " "


def test_13_funcs_caution_once(capsys):
    main(["funcs", "deflection", "clock_rate"])
    assert capsys.readouterr().out.count("Caution:") == 1


def test_14_chains_after_operators_and_signs():
    s = sheet("x = 2\na = 2 const.c^2\nb = x * 3 km / s\nc = 2 * 3 km / s\nv = -2 km/s\n"
              "w = 2 * -3 km/s")
    assert s.ok
    assert s["b"].to_value("km / s") == 6 and s["v"].to_value("km / s") == -2
    assert s["w"].to_value("km / s") == -6


def test_15_messages():
    s = sheet("ppn gama = 1\ncheck M = 1 Msun\nM = 1 Msun\nx = 1 km\ny = x + 1 s\n"
              "check 1 km == 2 km within 2 sigma\nz = deflection(1 Msun, 1 Rsun, gama = 1)")
    rendered = [e.render() for e in s.all_errors()]
    assert "did you mean `gamma`?" in rendered[0]
    assert "a check compares with `==`, not `=`" in rendered[1]
    assert [e.span.line for e in s.all_errors()] == sorted(e.span.line for e in s.all_errors())
    assert "did you mean `gamma`?" in s.cell("z").error.hint
    from calc.outputs.format import check_detail

    assert "neither side has an uncertainty" in check_detail(s.checks[-1])


def test_15_cells_of_a_failed_import_say_so(tmp_path):
    path = tmp_path / "u.sheet"
    path.write_text("use \"missing.sheet\" as sys\nx = sys.M * 2\n")
    s = Sheet.load(path)
    assert s.cell("x").error.message == "`sys` could not be imported (line 1)"
    assert [e.message for e in s.all_errors()] == [
        "no such sheet: missing.sheet (looked for missing.sheet)"]


def test_16_annotate_takes_several_sheets(tmp_path):
    paths = []
    for name in ("a", "b"):
        path = tmp_path / f"{name}.sheet"
        path.write_text("x = 1 km\n")
        paths.append(str(path))
    assert main(["annotate", *paths]) == 0
    assert all("#→ 1 km" in Path(p).read_text() for p in paths)


# ---- from the fuzzing campaign --------------------------------------------------------------


def test_fuzz_1_white_space_does_not_hang_the_lexer(tmp_path):
    path = tmp_path / "w.sheet"
    path.write_text("x = 1 km" + " " * 40 + "°")
    # exponential backtracking never finished with 40 spaces; the limit is generous
    result = subprocess.run([sys.executable, "-m", "calc", "eval", str(path)],
                            capture_output=True, text=True, timeout=60)
    assert result.returncode == 2 and "unexpected character `°`" in result.stderr


@pytest.mark.parametrize("text, message", [
    ("check [1, 2] < [1, 2, 3]", "the two sides have different lengths (2 and 3)"),
    ("check [1, 2] == [1, 2, 3] within 1%", "the two sides have different lengths (2 and 3)"),
    ("x = 3 / km^(-2)^0.5", "a unit's exponent must be a finite number"),
    ("o = orbit(1 AU, 0.1)\nx = o^2", "is not a number and has no power"),
    ("o = orbit(1 AU, 0.1)\ncheck o > 1", "a check compares quantities, not records"),
    ("x = 1e-320 ± 0.1", None), ("x = 4.9e-324 ± 1", None), ("x = 1e300 ± 1e-30", None),
    ("m = 1 ± 0.1\ncheck atan(4) == m within 2 sigma", None),
])
def test_fuzz_2_no_internal_errors(text, message, tmp_path, capsys):
    path = tmp_path / "f.sheet"
    path.write_text(text + "\n")
    for argv in (["eval"], ["eval", "--format", "json"], ["verify"], ["export", "--to", "tex"],
                 ["export", "--to", "md"], ["annotate"]):
        code = main([argv[0], str(path), *argv[1:]])
        assert code in (0, 1, 2), argv
        out = capsys.readouterr()
        assert "internal error" not in out.out + out.err
        if message is not None and argv == ["eval"]:
            assert message in out.out + out.err


def test_fuzz_2_an_overlong_import_name_is_a_clear_error(tmp_path):
    path = tmp_path / "i.sheet"
    path.write_text(f"use \"{'x' * 300}.sheet\" as x\n")
    s = Sheet.load(path)
    assert s.all_errors() and "File name too long" in s.all_errors()[0].message


def test_fuzz_3_every_cell_of_a_cycle_fails():
    s = sheet("a = b\nb = a + c\nc = a\nd = c * 2")
    assert all(s.cell(n).error is not None for n in "abcd")
    assert s.cell("c").error.message.startswith("cycle:")


def test_fuzz_5_the_prompt_survives(tmp_path):
    path = tmp_path / "p.sheet"
    path.write_text("x = 1 +\ny = 2\n")
    session = Session(path)
    session.handle("x = 3")
    session.handle("y = 5")
    answer = session.handle(":revert x")           # the file's x has a syntax error
    assert "internal error" not in answer and answer.startswith("x = error: unexpected")
    assert "cannot write" in session.handle(f":save {tmp_path}")   # a folder
    assert session.handle("y") == "5"              # the session and its what-ifs go on


def test_fuzz_6_sheet_text_is_never_a_format_string():
    s = sheet("a = 2\nx = (2 # {0}\n) a\ny = 2 a # {unit.__class__.__mro__}")
    hints = [s.cell(n).error.hint for n in ("x", "y")]
    assert "__mro__" not in "".join(hints) and "for the unit write" in hints[0]


def test_fuzz_7_monte_carlo_beyond_memory_is_refused(monkeypatch):
    import calc.engine.montecarlo as montecarlo

    monkeypatch.setattr(montecarlo, "memory_budget", lambda: 10_000_000)
    s = sheet("m = 1 ± 0.1 kg\nn = m * 2")
    with pytest.raises(UsageError, match="would need about"):
        s.monte_carlo(10_000_000, seed=1)


def test_fuzz_7_values_beyond_memory_are_refused(monkeypatch):
    import calc.engine.cells as cells

    monkeypatch.setattr(cells, "held_budget", lambda: 3_000_000)
    s = sheet("a = span(0, 1, 2000000)\nb = a * 2\nc = a * 3")
    assert s.cell("a").error is None and s.cell("b").error is not None
    assert "more than fits in the memory" in s.cell("b").error.message


def test_fuzz_7_huge_and_endless_files_are_refused_before_reading(tmp_path):
    sparse = tmp_path / "big.sheet"
    with open(sparse, "wb") as handle:
        handle.truncate(3 * 1024**3)     # 3 GB, sparse: nothing is written to disk
    with pytest.raises(InputError, match="limit"):
        Sheet.load(sparse)
    if Path("/dev/zero").exists():
        with pytest.raises(InputError, match="limit"):
            Sheet.load("/dev/zero")


def test_fuzz_7_deep_import_chains_are_refused(tmp_path):
    for level in range(80):
        (tmp_path / f"s{level}.sheet").write_text(f"use \"s{level + 1}.sheet\" as n\nx = {level}\n")
    (tmp_path / "s80.sheet").write_text("x = 1\n")
    s = Sheet.load(tmp_path / "s0.sheet")
    text = " ".join(e.message for e in s.all_errors())
    assert "nested more than 64 deep" in text


def test_fuzz_7_an_endless_line_is_refused_while_read():
    s = sheet("x = " + " + ".join(["1"] * 200_000) + "\ny = 2")
    assert "more than 100,000 tokens" in s.cell("x").error.message and s["y"].value == 2


def test_fuzz_7_unknown_units_stop_suggesting(monkeypatch):
    from calc.physics import units

    calls = []
    original = units.UnitTable.suggestions
    monkeypatch.setattr(units.UnitTable, "suggestions",
                        lambda self, *a: calls.append(1) or original(self, *a))
    sheet("\n".join(f"x{i} = 3 kmzq{i}" for i in range(300)))
    assert len(calls) <= 20


def test_fuzz_7_json_arrays_are_written_in_pieces():
    from calc.outputs.export import Numbers, json_pieces, sheet_record

    record = sheet_record(sheet("x = span(0, 1, 200000)"))
    assert isinstance(record["cells"][0]["value"], Numbers)
    pieces = list(json_pieces(record))
    assert max(len(p) for p in pieces) < 2_000_000     # no piece holds the whole array


def test_fuzz_8_data_safety(tmp_path):
    from calc.files import atomic_write

    path = tmp_path / "s.sheet"
    path.write_text("a = 1 km\n")
    # a temporary file a killed run left behind goes at the next write
    (tmp_path / ".s.sheet.relsheet-999999-abc.tmp").write_text("half")
    atomic_write(path, b"a = 2 km\n")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["s.sheet"]
    # read-only: refused unless forced
    path.chmod(0o444)
    with pytest.raises(InputError, match="read-only"):
        atomic_write(path, b"a = 3 km\n")
    assert path.read_text() == "a = 2 km\n"
    atomic_write(path, b"a = 3 km\n", force=True)
    path.chmod(0o644)
    # a symbolic link is written through, and stays a link
    link = tmp_path / "link.sheet"
    link.symlink_to(path)
    atomic_write(link, b"a = 4 km\n")
    assert link.is_symlink() and path.read_text() == "a = 4 km\n"
    # a file changed by someone else meanwhile is not overwritten
    with pytest.raises(InputError, match="changed on disk"):
        atomic_write(path, b"a = 5 km\n", expected=b"a = 1 km\n")
    assert path.read_text() == "a = 4 km\n"
    # a new file gets what the umask allows; a folder is a clear error
    fresh = tmp_path / "new.md"
    mask = os.umask(0o022)
    try:
        atomic_write(fresh, b"x")
    finally:
        os.umask(mask)
    assert stat.S_IMODE(fresh.stat().st_mode) == 0o644
    with pytest.raises(InputError, match="it is a folder"):
        atomic_write(tmp_path, b"x")


def test_fuzz_8_export_to_a_folder_is_a_clear_error(tmp_path, capsys):
    path = tmp_path / "e.sheet"
    path.write_text("a = 1 km\n")
    assert main(["export", str(path), "--to", "md", "-o", str(tmp_path)]) == 2
    assert "it is a folder" in capsys.readouterr().err


@pytest.mark.parametrize("breaker", ["\x0b", "\x0c", "\x1c", "\x85", "\u2028", "\u2029"])
def test_fuzz_9_one_definition_of_a_line(tmp_path, breaker):
    path = tmp_path / "l.sheet"
    original = f"a = 1 km  # note{breaker}more\nb = a * 2\n"
    path.write_text(original, encoding="utf-8")
    annotate_file(path)
    text = path.read_text(encoding="utf-8")
    assert breaker in text                                # the character is kept
    assert text.split("\n")[1].startswith("b = a * 2") and "#→ 2 km" in text.split("\n")[1]


def test_fuzz_10_git_revisions_cannot_be_options(tmp_path, capsys):
    path = tmp_path / "g.sheet"
    path.write_text("a = 1 km\n")
    target = tmp_path / "written.txt"
    assert main(["diff", str(path), f"--rev=--output={target}"]) == 64
    assert not target.exists()


def test_fuzz_10_exports_escape_sheet_text(tmp_path):
    s = Sheet.from_text("# <script>alert(1)</script>\na = 1 km\n", "x\n\\immediate\\write18{ls}.sheet")
    assert "<script>" not in to_markdown(s)
    tex = to_tex(s)
    assert not any(line.startswith("\\immediate") for line in tex.splitlines())


def test_fuzz_10_history_is_private(tmp_path, monkeypatch):
    from calc.interfaces import repl

    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path))
    place = repl.history_path(None)
    repl._private_history(place)   # noqa: SLF001 - the function under test
    assert stat.S_IMODE(place.stat().st_mode) == 0o600
    assert stat.S_IMODE(place.parent.stat().st_mode) == 0o700


def test_fuzz_10_messages_name_files_relative_to_the_root(tmp_path):
    (tmp_path / "bad.sheet").write_text("M = 1 kmz\n")
    top = tmp_path / "top.sheet"
    top.write_text("use \"bad.sheet\" as b\nx = b.M * 2\n")
    s = Sheet.load(top)
    assert str(tmp_path) not in s.all_errors()[0].message
    assert str(tmp_path) not in s.cell("x").error.message


def test_batch_mode_survives_bad_lines(tmp_path):
    session = Session()
    out: list[str] = []
    run_batch(session, ["a = 2 km\n", "a +\n", "a * 2\n"], out.append)
    assert out[-1] == "4 km\n" and "unexpected" in out[1]


def test_sheet_error_is_the_base_of_all_refusals():
    assert issubclass(UsageError, SheetError) and issubclass(InputError, SheetError)
