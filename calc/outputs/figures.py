"""What the engine hands to the table and plot writers: plain numbers with names and units.

The engine evaluates a ``table`` or ``plot`` statement into one of these specs; the writers
(text, CSV, Markdown, LaTeX, JSON, matplotlib, the terminal) read nothing else, so they never
see the engine's value kinds.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np


@dataclass(frozen=True)
class Series:
    """One column of a table, one line of a plot, or one axis of either.

    ``values`` holds floats in ``unit`` (shape ``(n,)`` for a column, a line or an axis;
    ``(n_x, n_y)`` for the colour of a map, indexed like the two axes). Dates are given as
    ``texts`` (ISO strings with their scale) beside ``values`` in days since the first date,
    so that a writer can place them on an axis and print them as written.
    """

    name: str
    #: display text of the unit (``"us"``, ``"deg / yr"``); ``""`` when dimensionless
    unit: str
    values: np.ndarray
    #: one standard uncertainty per value, in ``unit``; ``None`` when the value is exact
    sigma: np.ndarray | None = None
    #: printed form per value when numbers are not how it is read (dates); else ``None``
    texts: tuple[str, ...] | None = None

    @property
    def label(self) -> str:
        """``name [unit]``, as table headers and plot axes show it."""
        return f"{self.name} [{self.unit}]" if self.unit else self.name


@dataclass(frozen=True)
class TableSpec:
    """A ``table NAME: a, b, c`` statement, evaluated: columns of equal length."""

    name: str
    #: the ``##`` heading above the statement, or ``""``
    heading: str
    columns: tuple[Series, ...]
    #: 1-based line of the statement in its file (for messages)
    line: int = 0

    @property
    def rows(self) -> int:
        return len(self.columns[0].values) if self.columns else 0


@dataclass(frozen=True)
class PlotSpec:
    """A ``plot Y[, Y…] vs X[, X2] [log x] [log y]`` statement, evaluated.

    One entry in ``x``: lines of each ``y`` against it (every ``y`` has shape ``(n,)``).
    Two entries: a map; the single ``y`` has shape ``(len(x[0]), len(x[1]))`` and is drawn
    with a colour scale.
    """

    #: a name for files: ``delay_vs_days``
    name: str
    #: the ``##`` heading above the statement (the figure's title), or ``""``
    heading: str
    y: tuple[Series, ...]
    x: tuple[Series, ...]
    log_x: bool = False
    log_y: bool = False
    line: int = 0
    notes: tuple[str, ...] = field(default=())

    @property
    def is_map(self) -> bool:
        return len(self.x) == 2
