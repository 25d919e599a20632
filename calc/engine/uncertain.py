"""First-order (linear) propagation of uncertainties.

Linear propagation (GUM, JCGM 100:2008, §5.1, eqs. 10 and 13) carries with
each value its *contributions*: for every independent uncertain input i, the
sensitivity ∂y/∂x_i times the input's standard uncertainty σ_i, in y's unit.
Then σ_y² = Σ_i c_i² (+ 2 Σ_{i<j} r_ij c_i c_j for correlated inputs), and
shared inputs are handled exactly: in `x − x` the two contributions of x
cancel, and `x * y` with y derived from x is correlated through the common
input. Arithmetic uses exact derivative rules; library functions are
differentiated numerically (central differences along each input's
direction, :func:`through`), so every function propagates without special
code.

Inputs are the `±` literals of a sheet (an array with `±` is one input per
element) and, under ``constants … uncertain``, the named constants with a
published uncertainty. An input is an object; contributions are keyed by the
object itself, so inputs need no registry: they live as long as the values
and programs that mention them.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from typing import Any

import astropy.units as u
import numpy as np

from ..errors import ArgumentError, DomainError
from ..physics.units import conversion_scale, quantity

#: Largest array that may carry `±` (each element is an input of its own).
MAX_UNCERTAIN_ELEMENTS = 1000


class Input:
    """An independent uncertain input: where it is written, its nominal value and σ.

    Compared by identity: the same literal compiled once is one input, however many cells
    and sheets its value reaches.
    """

    __slots__ = ("name", "nominal", "sigma", "correlations")

    def __init__(self, name: str, nominal: u.Quantity, sigma: u.Quantity) -> None:
        self.name = name
        self.nominal = nominal
        self.sigma = sigma
        #: correlation coefficients with other inputs (`correlation a, b = r`), both ways
        self.correlations: dict[Input, float] = {}

    def __repr__(self) -> str:
        return f"<Input {self.name}: {self.nominal} ± {self.sigma}>"


#: contributions (or their error bounds) by input: a float, or an array of the value's shape
Parts = dict[Input, Any]


class Uncertain:
    """A nominal Quantity with its contributions {input: ∂y/∂x_i · σ_i} (in its unit).

    Contributions found by numerical differentiation carry a bound on their error (``noise``):
    where contributions of one input cancel (a ratio of two functions of the same mass), what
    is left below that bound is noise, not uncertainty, and σ leaves it out."""

    __array_ufunc__ = None  # numpy and astropy defer to the operators below
    __slots__ = ("nominal", "parts", "noise")

    def __init__(self, nominal: u.Quantity, parts: Parts, noise: Parts | None = None) -> None:
        self.nominal = nominal
        self.parts = parts
        #: bounds on the error of contributions found by numerical differentiation, by input,
        #: in the value's unit (None: exact arithmetic, rounding only)
        self.noise = noise

    @property
    def unit(self) -> u.UnitBase:
        return self.nominal.unit

    @property
    def value(self):
        return self.nominal.value

    @property
    def shape(self) -> tuple[int, ...]:
        return np.shape(self.nominal.value)

    def significant_parts(self) -> Parts:
        """The contributions, without what is only the noise of numerical differentiation."""
        noise = self.noise
        if not noise:
            return self.parts
        out: Parts = {}
        for key, part in self.parts.items():
            bound = noise.get(key)
            if bound is None:
                out[key] = part
                continue
            kept = np.where(np.abs(part) > bound, part, 0.0)
            if np.any(kept):
                out[key] = kept if np.ndim(kept) else float(kept)
        return out

    def sigma_value(self):
        """σ in the value's unit: the root sum of squares of the contributions, with the
        cross terms of correlated inputs (GUM eq. 13)."""
        parts = self.significant_parts()
        if not parts:
            return np.zeros_like(np.asarray(self.nominal.value, dtype=float))
        # scaled by the largest contribution, so that squares of 1e300 do not overflow
        # parts of a scalar input beside parts of an array one: each on the value's shape
        shape = np.broadcast_shapes(self.shape, *(np.shape(p) for p in parts.values()))
        scale = np.max([np.broadcast_to(np.abs(p), shape) for p in parts.values()], axis=0)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            safe = np.where(scale > 0, scale, 1.0)
            squares = sum(np.square(np.asarray(p) / safe) for p in parts.values())
            for a, part in parts.items():
                for b, r in a.correlations.items():
                    other = parts.get(b)
                    if other is not None:  # each pair twice: 2 r c_a c_b in all
                        squares = squares + r * (np.asarray(part) / safe) * (
                            np.asarray(other) / safe)
            return np.where(scale > 0, np.sqrt(np.maximum(squares, 0.0)) * scale, 0.0)

    @property
    def sigma(self) -> u.Quantity:
        return quantity(self.sigma_value(), self.nominal.unit)

    def reshaped(self, shape: tuple[int, ...]) -> Uncertain:
        """The same value with its elements in another shape (contributions too)."""
        return self._mapped(lambda a: a.reshape(shape))

    def transposed(self, order: tuple[int, ...]) -> Uncertain:
        return self._mapped(lambda a: a.transpose(order))

    def indexed(self, key: tuple) -> Uncertain:
        """The elements ``key`` picks (numpy indexing), with their contributions."""
        return self._mapped(lambda a: a[key])

    def _mapped(self, change: Callable) -> Uncertain:
        def each(part):
            return change(part) if np.ndim(part) else part

        noise = None if self.noise is None else {k: each(n) for k, n in self.noise.items()}
        return Uncertain(change(self.nominal), {k: each(np.asarray(p)) if np.ndim(p) else p
                                                for k, p in self.parts.items()}, noise)

    def to(self, unit: u.UnitBase) -> Uncertain:
        return self.scaled(conversion_scale(self.nominal.unit, unit), unit)

    def scaled(self, scale: float, unit: u.UnitBase) -> Uncertain:
        """The same value times ``scale``, labelled ``unit`` (a conversion)."""
        noise = None if self.noise is None else {k: n * abs(scale) for k, n in self.noise.items()}
        return Uncertain(quantity(self.nominal.value * scale, unit),
                         {k: p * scale for k, p in self.parts.items()}, noise)

    # -- arithmetic (first order)
    def __add__(self, other):
        return _add(self, other, sign=1.0)

    def __radd__(self, other):
        return _add(_lift(other), self, sign=1.0)

    def __sub__(self, other):
        return _add(self, other, sign=-1.0)

    def __rsub__(self, other):
        return _add(_lift(other), self, sign=-1.0)

    def __mul__(self, other):
        return _mul(self, other)

    def __rmul__(self, other):
        return _mul(_lift(other), self)

    def __truediv__(self, other):
        return _div(self, other)

    def __rtruediv__(self, other):
        return _div(_lift(other), self)

    def __neg__(self):
        return Uncertain(-self.nominal, {k: -p for k, p in self.parts.items()}, self.noise)

    def __pos__(self):
        return self

    def __pow__(self, exponent):
        return power(self, exponent)

    def __rpow__(self, base):
        return power(_lift(base), self)

    def __repr__(self) -> str:
        return f"<Uncertain {self.nominal} ± {self.sigma}>"


def _lift(x) -> Uncertain:
    if isinstance(x, Uncertain):
        return x
    if isinstance(x, u.UnitBase):
        return Uncertain(quantity(1.0, x), {})
    return Uncertain(x, {})


def _merge(a: Parts, b: Parts, fa, fb) -> Parts:
    """Contributions fa·a + fb·b (fa, fb scalars or arrays)."""
    out = {k: fa * p for k, p in a.items()}
    for k, p in b.items():
        out[k] = out[k] + fb * p if k in out else fb * p
    return out


#: Most numbers the contributions of one uncertain value may hold (an array of n values with
#: k inputs holds n·k): beyond it first-order propagation is refused in favour of --mc.
MAX_CONTRIBUTIONS = 50_000_000


def _combined(x: Uncertain, y: Uncertain, fa, fb, nominal: u.Quantity) -> Uncertain:
    """fa·x + fb·y as first-order contributions; noise bounds add up in absolute value."""
    inputs = len(x.parts) + len(y.parts)
    if inputs > 1 and np.size(nominal.value) * inputs > MAX_CONTRIBUTIONS:
        raise DomainError(f"{np.size(nominal.value):,} values with {inputs} uncertain inputs "
                          f"are too many for first-order propagation",
                          hint="use Monte Carlo (--mc N), or fewer inputs")
    noise = None
    if x.noise or y.noise:
        noise = _merge(x.noise or {}, y.noise or {}, np.abs(fa), np.abs(fb))
    return Uncertain(nominal, _merge(x.parts, y.parts, fa, fb), noise)


def _add(x, y, sign: float):
    x, y = _lift(x), _lift(y)
    result = x.nominal + y.nominal if sign > 0 else x.nominal - y.nominal
    scale = conversion_scale(y.nominal.unit, result.unit) if y.parts else 1.0
    xs = conversion_scale(x.nominal.unit, result.unit) if x.parts else 1.0
    return _combined(x, y, xs, sign * scale, result)


def _mul(x, y):
    x, y = _lift(x), _lift(y)
    result = x.nominal * y.nominal
    if isinstance(result, u.UnitBase):
        result = quantity(1.0, result)
    return _combined(x, y, np.asarray(y.nominal.value), np.asarray(x.nominal.value), result)


def _div(x, y):
    x, y = _lift(x), _lift(y)
    result = x.nominal / y.nominal
    yv = np.asarray(y.nominal.value)
    return _combined(x, y, 1 / yv, -np.asarray(result.value) / yv, result)


def power(base, exponent):
    """b^e with either uncertain: d(b^e) = b^e (e/b db + ln b de)."""
    b, e = _lift(base), _lift(exponent)
    if e.parts and not b.nominal.unit.physical_type == "dimensionless":
        raise DomainError("an uncertain exponent needs a dimensionless base")
    ev = e.nominal.to_value(u.dimensionless_unscaled)
    if np.ndim(ev) == 0:
        ev = float(ev)
    result = b.nominal ** ev
    rv = np.asarray(result.value)
    bv = np.asarray(b.nominal.value)
    with np.errstate(divide="ignore", invalid="ignore"):
        # p b^(p-1), not p y / b, so that b = 0 with p ≥ 1 stays finite
        factor_b = ev * np.power(bv, np.asarray(ev) - 1) if b.parts else 0.0
        factor_e = rv * np.log(bv) if e.parts else 0.0
    return _combined(b, e, factor_b, factor_e, result)


# ---- inputs ----------------------------------------------------------------------


def make_inputs(name: str, nominal: u.Quantity, sigma: u.Quantity) -> tuple[Input, ...]:
    """The inputs of a `±` literal: one per element (none when σ is zero everywhere)."""
    nv = np.asarray(nominal.value, dtype=float)
    sv = np.broadcast_to(np.asarray(sigma.value, dtype=float), nv.shape)
    if np.any(sv < 0):
        raise DomainError("an uncertainty must not be negative")
    if nv.ndim == 0:
        return () if sv == 0 else (Input(name, nominal, sigma),)
    if nv.size > MAX_UNCERTAIN_ELEMENTS:
        raise DomainError(f"an array with `±` may hold at most {MAX_UNCERTAIN_ELEMENTS} values "
                          "(each is an input of its own)")
    return tuple(Input(f"{name}[{index}]", quantity(nv.flat[index], nominal.unit),
                       quantity(sv.flat[index], nominal.unit)) for index in range(nv.size))


def linear_value(inputs: tuple[Input, ...], nominal: u.Quantity, sigma: u.Quantity) -> Uncertain:
    """The first-order value of a `±` literal: the nominal value with one contribution per
    input (for an array, each element's input moves only that element)."""
    nv = np.asarray(nominal.value, dtype=float)
    sv = np.broadcast_to(np.asarray(sigma.value, dtype=float), nv.shape)
    if nv.ndim == 0:
        return Uncertain(nominal, {inputs[0]: float(sv)})
    parts: Parts = {}
    for index, key in enumerate(inputs):
        part = np.zeros(nv.shape)
        part.flat[index] = sv.flat[index]
        parts[key] = part
    return Uncertain(nominal, parts)


# ---- numerical differentiation through functions ------------------------------------------

#: Central differences move each argument by about this fraction of its size.
STEP = 1e-6


def through(function: Callable, values: tuple, *, inputs_of: Callable, shifted: Callable,
            relative_size: Callable, difference: Callable, assemble: Callable,
            several: Callable | None = None):
    """Call ``function`` on uncertain arguments: the nominal result, and contributions by
    numerical differentiation (central differences; one-sided where the other side leaves the
    domain). The value protocol (:mod:`calc.engine.values`) supplies how each kind is moved and
    compared, so records and arrays of any kind pass through the same code.

    Each contribution comes with a bound on its error (``assemble`` receives (contribution,
    bound)): the rounding of the function values, 4ε|f| over the step, and the truncation
    of the difference, 1e-6 of the contribution for central differences (the step is 1e-6
    of the argument; the error goes with its square) and 1e-3 for one-sided ones.

    ``several``, when given, makes every moved call at once: ``several(values, steps,
    result)`` gives each input's central difference (in ``result``'s unit), or None when
    that call fails; then the calls are made one by one (one-sided near a domain's edge)."""
    nominals = tuple(shifted(v, None, 0.0) for v in values)
    result = function(*nominals)
    keys: dict[Input, None] = {}
    for v in values:
        for key in inputs_of(v):
            keys[key] = None
    steps = {}
    for key in keys:
        relative = max(relative_size(v, key) for v in values)
        steps[key] = STEP / relative if relative and math.isfinite(relative) else STEP
    if several is not None and keys:
        differences = several(values, steps, result)
        if differences is not None:
            return assemble(result, {key: (differences[key], 1e-6, t)
                                     for key, t in steps.items()})
    parts_by_key: dict[Input, Any] = {}
    for key, t in steps.items():
        plus = minus = None
        try:
            plus = function(*(shifted(v, key, t) for v in values))
        except (ArgumentError, DomainError):
            pass
        try:
            minus = function(*(shifted(v, key, -t) for v in values))
        except (ArgumentError, DomainError):
            pass
        if plus is not None and minus is not None:
            parts_by_key[key] = (difference(plus, minus, 1 / (2 * t)), 1e-6, t)
        elif plus is not None:
            parts_by_key[key] = (difference(plus, result, 1 / t), 1e-3, t)
        elif minus is not None:
            parts_by_key[key] = (difference(result, minus, 1 / t), 1e-3, t)
        else:
            raise DomainError("the uncertainty moves this function's arguments out of its domain")
    return assemble(result, parts_by_key)


def budget(value: Uncertain) -> list[tuple[Input, float]]:
    """(input, share of σ²) for an uncertain value, largest share first (correlated inputs
    are listed each with its own square; their joint term is :func:`joint_terms`)."""
    if not value.parts:
        return []
    squares = {k: float(np.sum(np.square(p))) for k, p in value.parts.items()}
    total = float(np.sum(np.square(value.sigma_value())))
    if total == 0:
        return []
    return sorted(((k, s / total) for k, s in squares.items()), key=lambda kv: -kv[1])


def joint_terms(value: Uncertain) -> list[tuple[Input, Input, float, float]]:
    """(a, b, r, share of σ²) of each correlated pair of inputs in a value: the cross term
    2 r c_a c_b of GUM eq. 13, which may be negative."""
    if not value.parts:
        return []
    total = float(np.sum(np.square(value.sigma_value())))
    if total == 0:
        return []
    keys = list(value.parts)
    out = []
    for index, a in enumerate(keys):
        for b in keys[index + 1:]:
            r = a.correlations.get(b)
            if r:
                term = float(np.sum(2 * r * np.asarray(value.parts[a]) * np.asarray(value.parts[b])))
                out.append((a, b, r, term / total))
    return out
