"""calc.physics.records in the language: orbit records, fields, arrays of records, output."""

from __future__ import annotations

import json
import subprocess
import sys

import astropy.units as u
import pytest

from calc import Sheet
from calc.physics.records import Record, RecordList
from conftest import evaluate, only_error

PLANETS = """\
venus = orbit(0.72333566 AU, 0.00677672, 3.39467605 deg, 76.67984255 deg, long_peri = 131.60246718 deg, m = 1 Msun / 408523.71)
earth = orbit(a = 1.00000261 AU, e = 0.01671123, arg_peri = 102.93768193 deg, m = 3.986004e14 m^3/s^2)
pair = [venus, earth]
"""


def test_orbit_record_fields():
    sheet = evaluate(PLANETS + "a = venus.a in km\nw = venus.arg_peri\nlp = earth.long_peri")
    assert isinstance(sheet["venus"], Record) and sheet["venus"].label == "venus"
    assert sheet["a"].to_value(u.AU) == pytest.approx(0.72333566)
    # ω = ϖ − Ω (definition of the longitude of periapsis)
    assert sheet["w"].to_value(u.deg) == pytest.approx(131.60246718 - 76.67984255)
    assert sheet["lp"].to_value(u.deg) == pytest.approx(102.93768193)   # node defaults to 0
    assert isinstance(sheet["pair"], RecordList) and len(sheet["pair"]) == 2


@pytest.mark.parametrize("text, message", [
    ("x = orbit(1 AU, 0.1, long_peri = 10 deg, arg_peri = 5 deg)",
     "orbit: give `long_peri` or `arg_peri`, not both"),
    ("x = orbit(1 AU, 1.0)", "orbit: `e` must be at least 0 and below 1 for a bound orbit, got 1"),
    ("x = orbit(1 s, 0.1)", "orbit: `a` must be a length, got 1 s"),
    ("x = orbit([1, 2] AU, [0.1, 0.2, 0.3])", "orbit: the orbit's elements are arrays of different lengths"),
])
def test_orbit_errors(text, message):
    assert only_error(evaluate(text), "x").message == message


def test_record_misuse_is_a_clear_error():
    sheet = evaluate(PLANETS + "bad = venus + 1\nbad2 = 2 * venus\nbad3 = venus.q\n"
                     "bad4 = sqrt(venus)\nbad5 = pair.a\nbad6 = venus in km\nbad7 = [venus, 1 AU]")
    assert only_error(sheet, "bad").message.startswith("the orbit record `venus` is not a number")
    assert only_error(sheet, "bad2").message.startswith("the orbit record `venus` is not a number")
    err = only_error(sheet, "bad3")
    assert err.message == "the orbit record `venus` has no field `q`"
    assert only_error(sheet, "bad4").message == "sqrt: `x` takes a quantity, not a record"
    assert only_error(sheet, "bad5").message == "`pair` is an array of records, which has no field `a`"
    assert only_error(sheet, "bad6").message == \
        "a record has no unit to show it in; convert its fields instead"
    assert only_error(sheet, "bad7").message == "an array of records holds only records"


def test_set_recomputes_through_fields():
    sheet = Sheet.from_text(PLANETS + "a = venus.a\n")
    changed = {c.name for c in sheet.set("venus", "orbit(0.8 AU, 0.01, m = 1e-6 Msun)")}
    assert changed == {"venus", "pair", "a"}
    assert sheet["a"].to_value(u.AU) == pytest.approx(0.8)


def test_records_in_text_and_json(tmp_path):
    path = tmp_path / "r.sheet"
    path.write_text(PLANETS)
    run = [sys.executable, "-m", "calc", "eval", str(path)]
    text = subprocess.run(run, capture_output=True, text=True)
    assert text.returncode == 0, text.stderr
    assert "  venus         (orbit)" in text.stdout.splitlines()
    assert any(line.startswith("    .a ") for line in text.stdout.splitlines())
    doc = json.loads(subprocess.run(run + ["--format", "json"], capture_output=True, text=True).stdout)
    cells = {c["name"]: c for c in doc["cells"]}
    assert cells["venus"]["unit"] is None
    assert cells["venus"]["value"]["a"] == {"value": pytest.approx(0.72333566), "unit": "AU"}
    assert cells["pair"]["value"][1]["e"]["value"] == pytest.approx(0.01671123)
