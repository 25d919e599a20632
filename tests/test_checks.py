"""calc.engine.checks and `relsheet verify`: expectations in the sheet."""

from __future__ import annotations

import subprocess
import sys

import pytest

from calc import Sheet
from calc.outputs.format import check_detail
from conftest import evaluate

MERCURY = "a = 0.38709927 AU\ne = 0.20563593\nadv = periapsis_rate(1 Msun, a, e)\n"


@pytest.mark.parametrize("line, passed", [
    # Nobili & Will 1986, Nature 320, 39: 42.98"/century
    ("check adv == 42.98 arcsec / century within 0.5%", True),
    ("check adv == 42.98 arcsec / century within 0.01 arcsec / century", True),
    ("check adv == 42.98 arcsec / century within 0.0001 arcsec / century", False),
    ("check adv == 43.5 arcsec / century within 0.5%", False),
    ("check adv > 40 arcsec / century", True),
    ("check adv <= 40 arcsec / century", False),
    ("check a == 149597870.7 km * 0.38709927", False),   # exact equality is exact
    ("check a == 149597870.7 km * 0.38709927 within 1e-12 AU", True),
])
def test_check_outcomes(line, passed):
    (result,) = evaluate(MERCURY + line).checks
    assert result.passed is passed, check_detail(result)
    assert result.text == line


def test_sigma_checks_use_the_sigma_of_the_difference():
    sheet = evaluate("m = 1.0 ± 0.1\nn = 1.05 ± 0.1\ncheck m == n within 1 sigma\n"
                     "check m == m * 1.01 within 1 sigma")
    independent, shared = sheet.checks
    assert independent.passed                     # 0.05 apart, σ = 0.14
    assert not shared.passed                      # 0.01 apart, σ of the difference only 0.001
    assert "σ of the difference 0.001" in check_detail(shared)


def test_check_errors():
    sheet = evaluate(MERCURY + "check adv == 3 km\ncheck nope == 1\ncheck adv > 1 within 1%")
    assert [r.passed for r in sheet.checks] == [False, False, False]
    assert check_detail(sheet.checks[0]).startswith("error: the two sides cannot be compared")
    assert check_detail(sheet.checks[1]) == "error: unknown name `nope`"
    assert check_detail(sheet.checks[2]) == "error: `within` goes with `==` checks only"
    assert not sheet.ok


def test_checks_follow_set():
    sheet = Sheet.from_text("x = 1 km\ncheck x < 2 km\n")
    assert sheet.checks[0].passed
    sheet.set("x", "3 km")
    assert not sheet.checks[0].passed


def test_verify_exit_codes_and_summary(tmp_path):
    good = tmp_path / "good.sheet"
    good.write_text(MERCURY + "check adv == 42.98 arcsec / century within 0.5%\n")
    bad = tmp_path / "bad.sheet"
    bad.write_text("x = 2 km\ncheck x > 3 km\n")
    broken = tmp_path / "broken.sheet"
    broken.write_text("x = 2 kmz\ncheck x > 1 km\n")
    run = [sys.executable, "-m", "calc", "verify"]
    ok = subprocess.run(run + [str(good)], capture_output=True, text=True)
    assert ok.returncode == 0 and ok.stdout.strip().endswith("1 passed, 0 failed")
    failing = subprocess.run(run + [str(good), str(bad)], capture_output=True, text=True)
    assert failing.returncode == 1
    assert f"{bad}:2: FAILED check x > 3 km\n    2 km vs 3 km (>)" in failing.stdout
    assert failing.stdout.strip().endswith("1 passed, 1 failed")
    errors = subprocess.run(run + [str(broken)], capture_output=True, text=True)
    assert errors.returncode == 2 and "unknown unit `kmz`" in errors.stderr


def test_eval_shows_checks_where_they_stand(tmp_path):
    path = tmp_path / "c.sheet"
    path.write_text("## Size\nx = 2 km\ncheck x > 3 km\n## Later\ny = 1\n")
    out = subprocess.run([sys.executable, "-m", "calc", "eval", str(path)], capture_output=True,
                         text=True).stdout.splitlines()
    assert out[2:6] == ["Size", "  x  2  km", "  FAILED  check x > 3 km", "          2 km vs 3 km (>)"]
    assert out[7] == "Later"
