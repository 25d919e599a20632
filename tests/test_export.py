"""calc.outputs.export: every format parsed back."""

from __future__ import annotations

import csv
import io
import json
import re
import subprocess
import sys

import pytest

from calc import Sheet
from calc.errors import SheetError
from calc.outputs.export import macro_name, to_csv, to_markdown, to_tex

SHEET = """## Pulsar
# masses from a timing fit
m1 = 1.438 ± 0.001 Msun
m2 = 1.390 Msun
Pb = 0.322997448918 day
omega_dot = periastron_rate(m1, m2, Pb, 0.6171340)
share = 17.5%
orbit_b = orbit(1 AU, 0.1)
check omega_dot == 4.2266 deg / yr within 0.1%
"""


@pytest.fixture(scope="module")
def sheet():
    return Sheet.from_text(SHEET, "p.sheet")


def test_csv_round_trip(sheet):
    rows = list(csv.DictReader(io.StringIO(to_csv(sheet))))
    by_name = {r["name"]: r for r in rows}
    assert list(rows[0]) == ["name", "value", "sigma", "unit"]
    assert float(by_name["m1"]["value"]) == 1.438 and float(by_name["m1"]["sigma"]) == 0.001
    assert by_name["m1"]["unit"] == "solMass"
    assert float(by_name["orbit_b.e"]["value"]) == 0.1
    assert float(by_name["omega_dot"]["sigma"]) > 0


def test_json_as_eval(sheet, tmp_path):
    path = tmp_path / "p.sheet"
    path.write_text(SHEET)
    out = subprocess.run([sys.executable, "-m", "calc", "export", str(path), "--to", "json"],
                         capture_output=True, text=True)
    doc = json.loads(out.stdout)
    assert doc["checks"][0]["passed"] is True
    assert [c["name"] for c in doc["cells"]] == [c.name for c in sheet.cells]


def test_markdown_report(sheet):
    text = to_markdown(sheet)
    assert text.startswith("# p.sheet\n\nConstants: codata2022, iau2015")
    assert "## Pulsar" in text and "masses from a timing fit" in text
    assert "| `m1` | 1.4380 ± 0.0010 | solMass |" in text
    assert "## Checks" in text and "passed (line 9)" in text


def test_tex_macros(sheet):
    text = to_tex(sheet)
    macros = dict(re.findall(r"\\newcommand\{(\\rs\w+)\}\{(.*)\}", text))
    # units as siunitx (v3) macros; those it lacks are declared in the file
    assert macros["\\rsMOne"] == "\\qty{1.4380 \\pm 0.0010}{\\solarmass}"
    assert "\\DeclareSIUnit{\\solarmass}{\\ensuremath{M_{\\odot}}}" in text
    assert macros["\\rsOmegaDot"].startswith("\\qty{") and \
        macros["\\rsOmegaDot"].endswith("{\\degree\\per\\year}")
    assert macros["\\rsShare"] == "\\num{0.175}"
    # a record gives one macro per field (orbit_b.a is the 1 AU written in the sheet)
    assert "% orbit_b (orbit): one macro per field" in text
    assert macros["\\rsOrbitBA"] == "\\qty{1}{\\astronomicalunit}"
    assert macros["\\rsOrbitBE"] == "\\num{0.1}"
    assert all(re.fullmatch(r"\\rs[A-Za-z]+", name) for name in macros)


@pytest.mark.parametrize("name, macro", [
    ("adv_rate", "\\rsAdvRate"), ("m1", "\\rsMOne"), ("ppn.gamma", "\\rsPpnGamma"),
    ("ω_dot", "\\rsOmegaDot"), ("P_b", "\\rsPB"), ("x", "\\rsX"),
    # letters with a dot above keep it, spelled (they collided as `\rsAboveB` before)
    ("Ṗb", "\\rsPdotB"), ("Ėb", "\\rsEdotB"), ("P\u0307b", "\\rsPdotB"),
])
def test_macro_names(name, macro):
    assert macro_name(name) == macro


def test_macro_collisions_are_rejected():
    with pytest.raises(SheetError, match="would both be the LaTeX macro"):
        to_tex(Sheet.from_text("p_b = 1\nP_b = 2\npB = 3\n"))


def test_export_to_a_file(tmp_path):
    path = tmp_path / "p.sheet"
    path.write_text(SHEET)
    out = tmp_path / "p.tex"
    result = subprocess.run([sys.executable, "-m", "calc", "export", str(path), "--to", "tex",
                             "-o", str(out)], capture_output=True, text=True)
    assert result.returncode == 0 and out.read_text().startswith("% relsheet:")
