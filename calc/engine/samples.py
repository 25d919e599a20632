"""Monte Carlo samples: a value drawn N times, as one array with the samples first.

Under ``--mc N`` every `±` input evaluates to N draws from its normal
distribution and everything computed from it is a :class:`Samples` value:
one Quantity whose leading axis runs over the samples and whose remaining
axes are the value's own shape (``()`` for a single number, ``(n,)`` for an
array). Arithmetic is vectorised numpy over the whole array. Before two
operands meet, the samples' own axes are padded on the left so that numpy
aligns value axes with value axes and never a value axis with the sample
axis (a scalar's samples, shape (N,), meeting a 3-element array become
(N, 1) and give (N, 3)).

Functions see padded sample arrays as ordinary Quantities (they broadcast);
those registered ``samplewise`` take single values and run once per sample.
"""

from __future__ import annotations

from collections.abc import Callable

import astropy.units as u
import numpy as np

from ..physics.units import quantity


class Samples:
    """N samples of a value: ``data`` has shape (N, *shape)."""

    __array_ufunc__ = None  # numpy and astropy defer to the operators below
    __slots__ = ("data",)

    def __init__(self, data: u.Quantity) -> None:
        self.data = data

    @property
    def unit(self) -> u.UnitBase:
        return self.data.unit

    @property
    def count(self) -> int:
        return self.data.shape[0]

    @property
    def shape(self) -> tuple[int, ...]:
        """The shape of one sample (the value's own shape)."""
        return self.data.shape[1:]

    @property
    def value(self):
        return self.data.value

    def padded(self, ndim: int) -> u.Quantity:
        """The data with the value's axes padded on the left to ``ndim`` axes."""
        missing = ndim - len(self.shape)
        if missing <= 0:
            return self.data
        return self.data.reshape((self.count, *([1] * missing), *self.shape))

    def to(self, unit: u.UnitBase) -> Samples:
        return Samples(self.data.to(unit))

    # -- arithmetic: numpy over the whole array after aligning the value axes
    def _apply(self, other, operation: Callable, reflected: bool = False):
        a, b = aligned(self, other)
        return wrap(operation(b, a) if reflected else operation(a, b))

    def __add__(self, other):
        return self._apply(other, lambda a, b: a + b)

    def __radd__(self, other):
        return self._apply(other, lambda a, b: a + b, reflected=True)

    def __sub__(self, other):
        return self._apply(other, lambda a, b: a - b)

    def __rsub__(self, other):
        return self._apply(other, lambda a, b: a - b, reflected=True)

    def __mul__(self, other):
        return self._apply(other, lambda a, b: a * b)

    def __rmul__(self, other):
        return self._apply(other, lambda a, b: a * b, reflected=True)

    def __truediv__(self, other):
        return self._apply(other, lambda a, b: a / b)

    def __rtruediv__(self, other):
        return self._apply(other, lambda a, b: a / b, reflected=True)

    def __pow__(self, exponent):
        return self._apply(exponent, _power)

    def __rpow__(self, base):
        return self._apply(base, _power, reflected=True)

    def __neg__(self):
        return Samples(-self.data)

    def __pos__(self):
        return self

    def __repr__(self) -> str:
        return f"<Samples {self.count} of shape {self.shape} {self.unit}>"


def _power(base, exponent):
    """base ** exponent where either may vary by sample; an exponent that varies needs a
    dimensionless base (a unit cannot be raised to many powers at once)."""
    e = np.asarray(exponent.to_value(u.dimensionless_unscaled)
                   if isinstance(exponent, u.Quantity) else exponent, dtype=float)
    if e.size == 1:
        return base ** float(e.ravel()[0])
    return quantity(np.power(base.to_value(u.dimensionless_unscaled), e))


def value_ndim(value) -> int:
    """How many axes a value has of its own (samples: without the sample axis)."""
    if isinstance(value, Samples):
        return len(value.shape)
    if isinstance(value, u.UnitBase):
        return 0
    return np.ndim(getattr(value, "value", value))


def aligned(a, b) -> tuple:
    """Both operands as Quantities ready for numpy, the samples' value axes padded so that
    they meet the other operand's axes and the sample axis stays first."""
    ndim = max(value_ndim(a), value_ndim(b))
    da = a.padded(ndim) if isinstance(a, Samples) else a
    db = b.padded(ndim) if isinstance(b, Samples) else b
    return da, db


def wrap(result):
    """The result of numpy on sample arrays as Samples (a unit stays a unit)."""
    if isinstance(result, u.UnitBase) or isinstance(result, Samples):
        return result
    return Samples(result)


def draw(normal: np.ndarray, nominal: u.Quantity, sigma: u.Quantity,
         per_element: list[np.ndarray] | None = None) -> Samples:
    """The samples of a `±` literal: nominal + σ·z, one standard-normal column per input."""
    nv = np.asarray(nominal.value, dtype=float)
    sv = np.broadcast_to(np.asarray(sigma.value, dtype=float), nv.shape)
    if nv.ndim == 0:
        return Samples(quantity(nv + sv * normal, nominal.unit))
    z = np.stack(per_element or [], axis=-1).reshape((len(normal), *nv.shape))
    return Samples(quantity(nv + sv * z, nominal.unit))
