"""What a physics function may know of the evaluation it runs in.

Library functions are pure functions of Quantities, with three exceptions that
belong to the evaluation rather than to the arguments: the pinned constant
sets (so that `constants codata2018` reaches G inside a function), a sink for
validity warnings (so that a cell can show "r is 3 r_s: …"), and the source of
solar-system ephemerides (the built-in one, or a JPL kernel named by an
`ephemeris` statement).

These live on one object, the current :class:`Environment`, held in one
ContextVar. The engine's evaluation context (``calc.engine.context``) extends
it with what only the engine needs (propagation mode, Monte Carlo draws, the
inputs of one evaluation); the engine enters it around every evaluation, so
two sheets, a solver's inner evaluations or an editor's many files never see
each other's state. Outside any evaluation a default environment applies:
astropy's configured constant sets, the built-in ephemeris, warnings dropped.
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from contextvars import ContextVar
from pathlib import Path
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # constants imports this module; the selection type is only named here
    from .constants import ConstantSelection


class Environment:
    """The part of an evaluation that physics functions read."""

    def __init__(self, selection: ConstantSelection | None = None,
                 ephemeris: Path | None = None) -> None:
        from .constants import default_selection

        #: the pinned CODATA edition and IAU set
        self.selection: ConstantSelection = selection or default_selection()
        #: a JPL kernel (.bsp) chosen by an `ephemeris` statement; None: astropy's built-in one
        self.ephemeris: Path | None = ephemeris
        #: validity warnings of the cell being computed; None while nobody listens
        self.warnings: list[str] | None = None

    def warn(self, message: str) -> None:
        """Note that a result lies outside its formula's regime (said once per cell)."""
        found = self.warnings
        if found is not None and message not in found:
            found.append(message)


_current: ContextVar[Environment | None] = ContextVar("relsheet_environment", default=None)
_default: list[Environment] = []


def current() -> Environment:
    """The environment of the evaluation in progress (a default one outside any)."""
    found = _current.get()
    if found is not None:
        return found
    if not _default:
        _default.append(Environment())
    return _default[0]


@contextmanager
def entered(environment: Environment) -> Iterator[Environment]:
    """Make ``environment`` current for the block (nests; restores the previous one)."""
    token = _current.set(environment)
    try:
        yield environment
    finally:
        _current.reset(token)

