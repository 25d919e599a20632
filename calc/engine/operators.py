"""Arithmetic operators for value kinds that wrap other values (samples, values on axes).

A kind defines ``_apply(other, operation, reflected)``, which lines the operands up (the
sample axis first; the axes of a grid) and applies ``operation`` to what it wraps; the
operators here are the same for every such kind. ``__array_ufunc__ = None`` makes numpy and
astropy defer to them.
"""

from __future__ import annotations

import operator
from collections.abc import Callable


class WrappedArithmetic:
    """``+ - * / **`` through ``self._apply`` (the power through ``_power``, which a kind may
    replace: samples check their exponent)."""

    __array_ufunc__ = None
    __slots__ = ()

    def _apply(self, other, operation: Callable, reflected: bool = False):
        raise NotImplementedError

    _power: Callable = staticmethod(operator.pow)

    def __add__(self, other):
        return self._apply(other, operator.add)

    def __radd__(self, other):
        return self._apply(other, operator.add, reflected=True)

    def __sub__(self, other):
        return self._apply(other, operator.sub)

    def __rsub__(self, other):
        return self._apply(other, operator.sub, reflected=True)

    def __mul__(self, other):
        return self._apply(other, operator.mul)

    def __rmul__(self, other):
        return self._apply(other, operator.mul, reflected=True)

    def __truediv__(self, other):
        return self._apply(other, operator.truediv)

    def __rtruediv__(self, other):
        return self._apply(other, operator.truediv, reflected=True)

    def __pow__(self, exponent):
        return self._apply(exponent, type(self)._power)

    def __rpow__(self, base):
        return self._apply(base, type(self)._power, reflected=True)

    def __pos__(self):
        return self
