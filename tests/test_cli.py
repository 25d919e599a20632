"""calc.interfaces.cli through real processes: output formats, exit codes, error reports."""

from __future__ import annotations

import json
import math
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "sheets_demo" / "orvane_b.sheet"


def relsheet(*args: str, cwd: Path = ROOT) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "calc", *args], cwd=cwd,
                          capture_output=True, text=True, timeout=120)


@pytest.fixture
def sheet_file(tmp_path):
    def write(text: str, name: str = "t.sheet") -> Path:
        path = tmp_path / name
        path.write_text(text, encoding="utf-8")
        return path
    return write


def test_eval_text_output(sheet_file):
    path = sheet_file("## Orbit\nlong_name = 2 AU\nv = 3 km / (2 s)\n# a note\nn = 5%\n")
    result = relsheet("eval", str(path))
    assert result.returncode == 0, result.stderr
    assert result.stdout.splitlines() == [
        f"{path}  ·  constants codata2022, iau2015",
        "",
        "Orbit",
        "  long_name  2    AU",
        "  v          1.5  km / s",
        "  n          0.05",
    ]
    assert result.stderr == ""


def test_eval_json_schema(sheet_file):
    path = sheet_file("a = 1 AU in km\nxs = [1, 2] s\nbad = 3 kmz\nr = inf\n")
    result = relsheet("eval", str(path), "--format", "json")
    assert result.returncode == 2
    doc = json.loads(result.stdout)
    assert set(doc) == {"sheet", "constants", "cells", "checks", "errors"}
    assert doc["constants"] == ["codata2022", "iau2015"] and doc["checks"] == []
    cells = {c["name"]: c for c in doc["cells"]}
    assert [c["name"] for c in doc["cells"]] == ["a", "xs", "bad", "r"]   # file order
    for cell in doc["cells"]:
        # the keys README's "Evaluating from the command line" lists for `--format json`
        assert set(cell) == {"name", "line", "value", "unit", "sigma", "error", "warnings"}
        assert cell["sigma"] is None
    assert cells["a"] == {"name": "a", "line": 1, "value": pytest.approx(149_597_870.7),
                          "unit": "km", "sigma": None, "error": None, "warnings": []}
    assert cells["xs"]["value"] == [1.0, 2.0] and cells["xs"]["unit"] == "s"
    assert cells["bad"]["value"] is None
    assert cells["bad"]["error"] == f"{path}:3:9: unknown unit `kmz` (hint: did you mean `km`?)"
    assert cells["r"]["value"] == "inf"


def test_errors_go_to_stderr_with_caret_and_exit_2(sheet_file):
    path = sheet_file("x = 1 km + 2 s\ny = x * 2\n")
    result = relsheet("eval", str(path))
    assert result.returncode == 2
    assert "  x  error: cannot add `km` (length) and `s` (time)" in result.stdout
    assert "  y  error: input `x` failed" in result.stdout
    assert result.stderr == (f"{path}:1:5: cannot add `km` (length) and `s` (time)\n"
                             "  x = 1 km + 2 s\n      ^~~~~~~~~~\n1 error\n")
    assert "Traceback" not in result.stderr


def test_set_overrides_and_digits(sheet_file):
    path = sheet_file("a = 1 AU\nP = 2 pi sqrt(a^3 / const.GM_sun) in d\n")
    result = relsheet("eval", str(path), "--set", "a=1.5 AU", "--digits", "9")
    assert result.returncode == 0, result.stderr
    # Kepler's third law with the IAU 2015 nominal GM_sun and the IAU 2012 au
    period = 2 * math.pi * math.sqrt((1.5 * 149_597_870_700) ** 3 / 1.3271244e20) / 86400
    assert f"  P  {period:.9g}  d" in result.stdout.splitlines()


def test_set_a_ppn_parameter_the_sheet_does_not_declare(sheet_file):
    path = sheet_file("a = deflection(1 Msun, 1 Rsun)\n")
    result = relsheet("eval", str(path), "--set", "ppn.gamma=0")
    assert result.returncode == 0, result.stderr
    # (1 + γ)/2 times the GR value 1.75119 arcsec: Will 2014, Living Rev. Relativ. 17, 4
    assert ["a", "0.875595", "arcsec"] in [line.split() for line in result.stdout.splitlines()]


@pytest.mark.parametrize("args, message", [
    (["eval", "{path}", "--set", "gamma=0"], "relsheet: --set: the sheet has no cell `gamma`"),
    (["eval", "{path}", "--set", "nope=1"], "relsheet: --set: the sheet has no cell `nope`"),
    (["eval", "{path}", "--set", "novalue"], "relsheet: --set takes NAME=EXPR, got `novalue`"),
    (["eval", "{path}", "--digits", "40"], "relsheet: --digits must be between 1 and 17, got 40"),
    (["eval", "{path}", "--format", "xml"], "relsheet: argument --format: invalid choice"),
    (["frobnicate"], "relsheet: argument COMMAND: invalid choice"),
    (["eval"], "relsheet: the following arguments are required: FILE"),
])
def test_usage_errors_exit_64(sheet_file, args, message):
    path = sheet_file("a = 1\n")
    result = relsheet(*[a.format(path=path) for a in args])
    assert result.returncode == 64
    assert result.stderr.startswith(message)


def test_no_command_prints_usage_and_exits_64():
    result = relsheet()
    assert result.returncode == 64 and "usage: relsheet" in result.stderr


def test_bad_set_expression_exits_2(sheet_file):
    path = sheet_file("a = 1\n")
    result = relsheet("eval", str(path), "--set", "a=1 +")
    assert result.returncode == 2
    assert result.stderr.startswith("--set a:1:4: unexpected end of line")


def test_missing_file_exits_2(tmp_path):
    result = relsheet("eval", str(tmp_path / "none.sheet"))
    assert result.returncode == 2
    assert result.stderr.strip() == f"{tmp_path / 'none.sheet'}: no such sheet: {tmp_path / 'none.sheet'}"


def test_invalid_utf8_exits_2(tmp_path):
    path = tmp_path / "bad.sheet"
    path.write_bytes(b"x = \xc3(\n")
    result = relsheet("eval", str(path))
    assert result.returncode == 2
    assert result.stderr.startswith(f"{path}:1:5: invalid UTF-8")


def test_demo_sheet_evaluates_cleanly():
    result = relsheet("eval", str(DEMO), "--format", "json")
    assert result.returncode == 0, result.stderr
    doc = json.loads(result.stdout)
    assert all(c["error"] is None for c in doc["cells"])


def test_console_script_entry_point_is_declared():
    text = (ROOT / "pyproject.toml").read_text()
    assert 'relsheet = "calc.interfaces.cli:run"' in text


def test_units_command():
    listing = relsheet("units")
    assert listing.returncode == 0
    assert any(line.split()[0] == "century" and "3155760000 s" in line
               for line in listing.stdout.splitlines()[1:])   # 36525 d (Julian century)
    search = relsheet("units", "cy")
    assert "refused: `cy` is ambiguous" in search.stdout
    assert relsheet("units", "zzzq").stdout.strip() == "no unit name contains `zzzq`"


def test_eval_csv_and_markdown(sheet_file):
    path = sheet_file("a = 2 km\n")
    assert relsheet("eval", str(path), "--format", "csv").stdout == "name,value,sigma,unit\na,2.0,,km\n"
    assert "| `a` | 2 | km |" in relsheet("eval", str(path), "--format", "md").stdout
