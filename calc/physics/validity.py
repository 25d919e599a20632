"""Warnings that a result lies outside its formula's validity, attached to the cell.

A function calls :func:`warn` ("r = 3.2 r_s: the weak-field formula needs
r ≫ r_s"); the engine collects the warnings of each cell in the evaluation's
environment while computing it and shows them with the cell's value. A
warning never changes a value.
"""

from __future__ import annotations

from .environment import current


def warn(message: str) -> None:
    """Record a validity warning for the cell being computed (ignored outside a sheet)."""
    current().warn(message)
