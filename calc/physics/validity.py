"""Warnings that a result lies outside its formula's validity, attached to the cell.

A function calls :func:`warn` ("r = 3.2 r_s: the weak-field formula needs
r ≫ r_s"); the sheet collects the warnings of each cell while computing it
and shows them with the cell's value. A warning never changes a value.
"""

from __future__ import annotations

from contextlib import contextmanager
from contextvars import ContextVar

_collector: ContextVar[list[str] | None] = ContextVar("relsheet_warnings", default=None)


def warn(message: str) -> None:
    """Record a validity warning for the cell being computed (ignored outside a sheet)."""
    found = _collector.get()
    if found is not None and message not in found:
        found.append(message)


@contextmanager
def collecting():
    """Collect the warnings raised inside the block into the list it yields."""
    found: list[str] = []
    token = _collector.set(found)
    try:
        yield found
    finally:
        _collector.reset(token)


def start() -> tuple:
    """Begin collecting (a cheaper form of :func:`collecting` for hot paths)."""
    found: list[str] = []
    return found, _collector.set(found)


def stop(handle: tuple) -> list[str]:
    found, token = handle
    _collector.reset(token)
    return found
