"""Truths: what a comparison gives (`x > 3 km`), one per element.

A truth is no number: arithmetic on it is refused with a message that says
what to do instead (`where(…)`, `count(…)`, `any(…)`, `all(…)`, or a mask
`x[x > 3 km]`). Under Monte Carlo a comparison of sampled values is sampled
too, and counts as a number between 0 and 1 (its mean is the probability).
"""

from __future__ import annotations

import numpy as np

from ..errors import DomainError


class Truth:
    """Truth values: a numpy array (or one) of bools."""

    __array_ufunc__ = None
    __slots__ = ("flags",)

    def __init__(self, flags) -> None:
        self.flags = np.asarray(flags, dtype=bool)

    @property
    def shape(self) -> tuple[int, ...]:
        return self.flags.shape

    @property
    def value(self):
        return self.flags

    @property
    def unit(self):
        import astropy.units as u

        return u.dimensionless_unscaled

    def reshaped(self, shape: tuple[int, ...]) -> Truth:
        return Truth(self.flags.reshape(shape))

    def transposed(self, order: tuple[int, ...]) -> Truth:
        return Truth(self.flags.transpose(order))

    def _refuse(self, *_):
        raise DomainError("a comparison gives truths, not numbers",
                          hint="use where(condition, a, b), count(…), any(…), all(…), or a mask "
                               "such as x[x > 3 km]")

    __add__ = __radd__ = __sub__ = __rsub__ = _refuse
    __mul__ = __rmul__ = __truediv__ = __rtruediv__ = __pow__ = __rpow__ = _refuse
    __neg__ = __pos__ = __abs__ = _refuse

    def __repr__(self) -> str:
        return f"<Truth {self.flags}>"
