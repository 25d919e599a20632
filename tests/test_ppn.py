"""The `ppn` directive: sheet-wide PPN defaults that every call omitting gamma/beta uses."""

from __future__ import annotations

import astropy.units as u
import pytest
from independent import GM_SUN, ppn_bending

from calc import Sheet
from calc.errors import DuplicateCellError, NameResolutionError
from conftest import evaluate, only_error

SHEET = """\
ppn gamma = 1 + 2.1e-5
gr = deflection(1 Msun, 1 Rsun, gamma = 1)
ours = deflection(1 Msun, 1 Rsun)
light_only = conjunction_delay(1 Msun, 1 AU, 1 AU, 1 Rsun)
newtonian = orbital_period(1 Msun, 1 AU)
g = ppn.gamma
"""


def test_ppn_line_sets_the_default_and_keywords_override_it():
    sheet = evaluate(SHEET)
    # gamma - 1 = 2.1e-5 (the Cassini central value, Bertotti, Iess & Tortora 2003, Nature 425,
    # 374). The expected ratio is that of the PPN-metric ray integrals (tests/independent.py,
    # scipy quad) for the two gammas; their second-order parts cancel in the ratio, and
    # quadrature leaves 1e-10 each, so 1e-9 resolves the 1.05e-5 effect to 1e-4 of itself
    expected = ppn_bending(GM_SUN, 6.957e8, 1 + 2.1e-5) / ppn_bending(GM_SUN, 6.957e8, 1.0)
    assert expected == pytest.approx(1 + 1.05e-5, rel=1e-8)   # the integral sees the effect
    assert (sheet["ours"] / sheet["gr"]).value == pytest.approx(expected, rel=1e-9, abs=0)
    assert sheet["g"].value == pytest.approx(1 + 2.1e-5)
    assert sheet.cell("ppn.gamma").line == 1


def test_without_a_ppn_line_general_relativity_applies():
    sheet = evaluate("a = deflection(1 Msun, 1 Rsun)\nb = deflection(1 Msun, 1 Rsun, gamma = 1)\n"
                     "g = ppn.gamma\nbeta = ppn.beta")
    assert sheet["a"].value == sheet["b"].value
    assert sheet["g"].value == 1 and sheet["beta"].value == 1


def test_what_if_on_gamma_recomputes_only_its_users():
    sheet = Sheet.from_text(SHEET)
    changed = {c.name for c in sheet.set("ppn.gamma", "1")}
    assert changed == {"ppn.gamma", "ours", "light_only", "g"}
    assert sheet["ours"].value == sheet["gr"].value


def test_ppn_beta_enters_the_periapsis_advance():
    sheet = evaluate("ppn beta = 0.5\nx = periapsis_advance(1 Msun, 1 AU, 0)\n"
                     "y = periapsis_advance(1 Msun, 1 AU, 0, beta = 1)")
    # (2 + 2 gamma - beta)/3 (Will 2014, Living Rev. Relativ. 17, 4; checked against a Gauss
    # average of the IERS PPN acceleration in test_functions_orbits.py): 3.5/3 against 1
    assert (sheet["x"] / sheet["y"]).value == pytest.approx(3.5 / 3)


def test_ppn_errors():
    sheet = evaluate("ppn alpha1 = 0\nppn gamma = 1 km\nx = deflection(1 Msun, 1 Rsun)")
    assert isinstance(sheet.errors[0], NameResolutionError)
    assert sheet.errors[0].message == "unknown PPN parameter `alpha1`"
    assert only_error(sheet, "ppn.gamma").message.startswith("cannot show `km` (length)")
    assert only_error(sheet, "x").message == "input `ppn.gamma` failed"
    twice = evaluate("ppn gamma = 1\nppn gamma = 1.1")
    assert isinstance(twice.cell("ppn.gamma").error, DuplicateCellError)


def test_set_ppn_from_the_command_line(tmp_path):
    import subprocess
    import sys
    path = tmp_path / "p.sheet"
    path.write_text(SHEET)
    result = subprocess.run([sys.executable, "-m", "calc", "eval", str(path), "--set",
                             "ppn.gamma=0", "--format", "json"], capture_output=True, text=True)
    assert result.returncode == 0, result.stderr
    import json
    cells = {c["name"]: c for c in json.loads(result.stdout)["cells"]}
    assert cells["ours"]["value"] == pytest.approx(cells["gr"]["value"] / 2)
    assert u.Unit(cells["ours"]["unit"]) == u.arcsec


def test_set_ppn_on_a_sheet_without_a_ppn_line():
    sheet = Sheet.from_text("a = deflection(1 Msun, 1 Rsun)\n")
    gr = sheet["a"].value
    changed = {c.name for c in sheet.set("ppn.gamma", "0")}
    assert changed == {"ppn.gamma", "a"}
    assert sheet["a"].value == pytest.approx(gr / 2)   # (1 + gamma)/2
