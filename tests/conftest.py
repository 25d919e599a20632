"""Shared helpers for the test suite."""

from __future__ import annotations

import pytest

from calc import Sheet


def evaluate(text: str, label: str = "t.sheet") -> Sheet:
    """A sheet from text; a final newline is added when missing."""
    return Sheet.from_text(text if text.endswith("\n") else text + "\n", label)


def only_error(sheet: Sheet, name: str):
    cell = sheet.cell(name)
    assert cell.error is not None, f"{name} = {cell.value} (expected an error)"
    return cell.error


@pytest.fixture(scope="session", autouse=True)
def private_cache(tmp_path_factory):
    """The suite's own cache folder (the analysed grammar, parsed sheets, prompt history), so
    that tests neither read nor fill the user's. `RELSHEET_CACHE=off` runs it without one."""
    with pytest.MonkeyPatch.context() as patch:
        patch.setenv("XDG_CACHE_HOME", str(tmp_path_factory.mktemp("cache")))
        yield


@pytest.fixture
def sheet_of():
    return evaluate
