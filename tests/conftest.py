"""Shared helpers for the test suite."""

from __future__ import annotations

import pytest

from calc import Sheet


def evaluate(text: str, label: str = "t.sheet") -> Sheet:
    """A sheet from text; a final newline is added when missing."""
    return Sheet.from_text(text if text.endswith("\n") else text + "\n", label)


def count_calls(monkeypatch, owner, name: str) -> list[int]:
    """Calls of ``owner.name`` from now on (one entry each), the function still doing its
    work."""
    calls: list[int] = []
    original = getattr(owner, name)

    def counted(*args, **kwargs):
        calls.append(1)
        return original(*args, **kwargs)

    monkeypatch.setattr(owner, name, counted)
    return calls


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


# pytest.approx keeps an absolute tolerance of 1e-12 unless `abs` is given, even when `rel`
# is: every comparison of values below about 1e-10 (rates in rad/s, fractional frequencies,
# G in SI) would pass whatever the code returned. In this suite a tolerance is relative unless
# a test says `abs=` itself.
_approx = pytest.approx


def _relative_approx(expected, rel=None, abs=None, nan_ok=False):
    if abs is None:
        abs = 0.0
        if rel is None:
            rel = 1e-6
    return _approx(expected, rel=rel, abs=abs, nan_ok=nan_ok)


pytest.approx = _relative_approx
