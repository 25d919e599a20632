"""Every demo sheet evaluates without errors (the README and the tutorial rely on them)."""

from __future__ import annotations

from pathlib import Path

import pytest

from calc import Sheet

DEMOS = sorted((Path(__file__).resolve().parent.parent / "sheets_demo").glob("*.sheet"))


@pytest.mark.parametrize("path", DEMOS, ids=[p.name for p in DEMOS])
def test_demo_sheet_is_clean(path):
    sheet = Sheet.load(path)
    assert sheet.all_errors() == []
    assert all(c.value is not None for c in sheet.cells)
    assert [c.warnings for c in sheet.cells if c.warnings] == []


def test_there_is_a_demo_per_topic():
    text = " ".join(p.read_text() for p in DEMOS)
    for function in ("clock_rate", "periapsis_budget", "conjunction_delay", "geodetic_rate",
                     "periastron_rate"):
        assert f"{function}(" in text
