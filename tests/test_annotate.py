"""calc.outputs.annotate and atomic writes: markers, byte-exact round trips, interrupted writes."""

from __future__ import annotations

import os
import subprocess
import sys

import pytest

from calc.errors import InputError
from calc.files import atomic_write
from calc.outputs.annotate import annotate_file


def run(*args):
    return subprocess.run([sys.executable, "-m", "calc", *args], capture_output=True, text=True)


def test_markers_are_written_aligned_and_idempotent(tmp_path):
    path = tmp_path / "a.sheet"
    path.write_text("## Orbit\na = 1 AU\nperiod = orbital_period(1 Msun, a) in d  # Kepler\n\nx = 2\n")
    annotate_file(path)
    lines = path.read_text().splitlines()
    assert lines[0] == "## Orbit" and lines[3] == "" and lines[4] == "x = 2  #→ 2"
    assert lines[1].startswith("a = 1 AU ") and lines[1].endswith("#→ 1 AU")
    assert lines[2].startswith("period = orbital_period(1 Msun, a) in d  # Kepler  ")
    assert lines[2].endswith("#→ 365.257 d")   # the Gaussian year, as in test_functions_orbits
    # markers of consecutive lines share a column, two spaces after the longest line
    assert lines[1].index("#→") == lines[2].index("#→") == len("period = orbital_period(1 Msun, a) in d  # Kepler") + 2
    once = path.read_bytes()
    annotate_file(path)
    assert path.read_bytes() == once


@pytest.mark.parametrize("content", [
    b"a = 1 km\r\nb = a * 2\r\n",                         # CRLF
    b"\ta = 1 km\t# tab\nb = a * 2",                      # tabs, no final newline
    "ω = 2 rad  # Greek\nβ2 = ω * 3\n".encode(),          # Unicode
    b"\xef\xbb\xbfa = 1 km\n",                           # byte-order mark
    b"a = 1 km  #= 99 km\nb = a * 2   #= stale\n",         # stale markers
    b"f = [1,\n  2] km\n",                                # a statement over two lines
])
def test_only_markers_change(tmp_path, content):
    path = tmp_path / "r.sheet"
    path.write_bytes(content)
    annotate_file(path)
    after = path.read_bytes()
    strip = [line.split(b"#=")[0].rstrip() for line in content.splitlines()]
    assert [line.split("#→".encode())[0].rstrip() for line in after.splitlines()] == strip
    assert after.count(b"\r\n") == content.count(b"\r\n")
    assert after.endswith(b"\n") == content.endswith(b"\n")
    assert after.startswith(b"\xef\xbb\xbf") == content.startswith(b"\xef\xbb\xbf")
    assert "#→ ".encode() in after and b"#=" not in after   # old markers are upgraded
    annotate_file(path)
    assert path.read_bytes() == after


def test_annotated_sheet_still_evaluates(tmp_path):
    path = tmp_path / "s.sheet"
    path.write_text("a = 2 km\nb = a * 3 in m\n")
    annotate_file(path)
    result = run("eval", str(path), "--format", "json")
    assert result.returncode == 0 and '"value": 6000.0' in result.stdout


def test_stale_reports_and_writes_nothing(tmp_path):
    path = tmp_path / "s.sheet"
    path.write_text("a = 2 km\n")
    before = path.read_bytes()
    stale = run("annotate", str(path), "--stale")
    assert stale.returncode == 1 and "markers out of date on line 1" in stale.stdout
    assert path.read_bytes() == before
    assert run("annotate", str(path)).returncode == 0
    assert run("annotate", str(path), "--stale").returncode == 0
    path.write_text(path.read_text().replace("a = 2 km", "a = 5 km"))
    assert run("annotate", str(path), "--stale").returncode == 1


def test_interrupted_write_leaves_the_original(tmp_path, monkeypatch):
    # a failure between writing the temporary file and the rename
    path = tmp_path / "s.sheet"
    path.write_text("a = 2 km\n")

    def broken_replace(src, dst):
        raise OSError("disk unplugged")

    monkeypatch.setattr(os, "replace", broken_replace)
    with pytest.raises(InputError, match="disk unplugged"):
        atomic_write(path, b"half")
    assert path.read_text() == "a = 2 km\n"
    assert [p.name for p in tmp_path.iterdir()] == ["s.sheet"]   # no temporary left
