"""calc.outputs.compare: diff and deps; the watch command."""

from __future__ import annotations

import subprocess
import sys
import time

from calc import Sheet
from calc.outputs.compare import dependency_table, dependency_tree, diff

SHEET = "M = 1 Msun\na = 1 AU\nP = orbital_period(M, a)\nm = M in kg\nv = orbital_speed(M, a)\n"


def run(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "calc", *args], capture_output=True, text=True,
                          cwd=cwd)


def test_diff_of_two_sheets_shows_changed_cells_only():
    old = Sheet.from_text("a = 1 AU\nb = a * 2\nc = 5\n")
    new = Sheet.from_text("a = 1.5 AU\nb = a * 2\nc = 5\nd = 1\n")
    rows = [line.split() for line in diff(old, new).splitlines()[2:]]
    assert rows == [["a", "1", "AU", "1.5", "AU", "+0.5"], ["b", "2", "AU", "3", "AU", "+0.5"],
                    ["d", "—", "1"]]
    assert any(line.startswith("c ") for line in diff(old, new, show_all=True).splitlines())


def test_diff_under_two_constant_sets(tmp_path):
    # CODATA 2014 G = 6.67408e-11, 2018 G = 6.67430e-11: masses in kg move by 3.3e-5
    path = tmp_path / "s.sheet"
    path.write_text(SHEET)
    result = run("diff", str(path), "--constants", "codata2014", "--against", "codata2018")
    assert result.returncode == 0, result.stderr
    lines = result.stdout.splitlines()
    assert lines[0] == "codata2014  →  codata2018"
    # M_sun in kg is GM_sun / G: the larger 2018 G makes it 3.3e-5 smaller
    assert any(line.startswith("m ") and "-3.3e-05" in line for line in lines)
    assert not any(line.startswith("P ") for line in lines)   # GM fixed: the period is the same


def test_diff_against_a_git_revision(tmp_path):
    subprocess.run(["git", "init", "-q"], cwd=tmp_path, check=True)
    path = tmp_path / "s.sheet"
    path.write_text("a = 1 AU\n")
    subprocess.run(["git", "add", "s.sheet"], cwd=tmp_path, check=True)
    subprocess.run(["git", "-c", "user.name=t", "-c", "user.email=t@t", "commit", "-qm", "x"],
                   cwd=tmp_path, check=True)
    path.write_text("a = 2 AU\n")
    result = run("diff", str(path), "--rev", "HEAD")
    assert result.returncode == 0, result.stderr
    assert ["a", "1", "AU", "2", "AU", "+1"] in [line.split() for line in result.stdout.splitlines()]
    missing = run("diff", str(path), "--rev", "nosuchrev")
    assert missing.returncode == 2 and "cannot read" in missing.stderr


def test_diff_usage():
    assert run("diff", "x.sheet").returncode == 64
    assert run("diff", "x.sheet", "--constants", "codata2014").returncode == 64


def test_deps_tree_and_table():
    sheet = Sheet.from_text(SHEET)
    assert dependency_tree(sheet, "P").splitlines() == ["P  (line 3)", "  M  (line 1)", "  a  (line 2)"]
    assert dependency_tree(sheet, "M", users=True).splitlines()[1:] == [
        "  P  (line 3)", "  m  (line 4)", "  v  (line 5)"]
    assert "v ← M, a" in dependency_table(sheet)
    assert "M → P, m, v" in dependency_table(sheet, users=True)


def test_watch_prints_what_changed(tmp_path):
    path = tmp_path / "w.sheet"
    path.write_text("a = 1 AU\nb = a * 2\n")
    proc = subprocess.Popen([sys.executable, "-m", "calc", "watch", str(path), "--interval", "0.05"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        deadline = time.time() + 30
        seen = ""
        while "b  2  AU" not in seen and time.time() < deadline:
            seen += proc.stdout.readline()
        time.sleep(0.3)
        path.write_text("a = 3 AU\nb = a * 2\n")
        while "6 AU" not in seen and time.time() < deadline:
            seen += proc.stdout.readline()
        assert ["a", "1", "AU", "3", "AU", "+2"] in [line.split() for line in seen.splitlines()]
    finally:
        proc.terminate()
        proc.wait(timeout=10)
