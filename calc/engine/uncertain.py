"""Uncertainties: first-order (linear) propagation, and Monte Carlo.

Linear propagation (GUM, JCGM 100:2008, §5.1, eqs. 10 and 13) carries with
each value its *contributions*: for every independent uncertain input i, the
sensitivity ∂y/∂x_i times the input's standard uncertainty σ_i, in y's unit.
Then σ_y² = Σ_i c_i², and shared inputs are handled exactly: in `x − x` the
two contributions of x cancel, and `x * y` with y derived from x is
correlated through the common input. Arithmetic uses exact derivative rules;
library functions are differentiated numerically (central differences along
each input's direction), so every function propagates without special code.

Monte Carlo (``--mc N``) re-evaluates the sheet with every input drawn from its
normal distribution: N samples at once, on a leading axis of the arrays, so
the evaluation is vectorised numpy; functions that cannot take sample arrays
run once per sample.

Inputs are the `±` literals of the sheet (an array with `±` is one input per
element) and, under ``constants … uncertain``, the named constants with a
published uncertainty.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, field

import astropy.units as u
import numpy as np

from ..errors import ArgumentError, DomainError
from ..physics.records import Record, RecordList
from ..physics.units import conversion_scale, quantity

#: Largest array that may carry `±` (each element is an input of its own).
MAX_UNCERTAIN_ELEMENTS = 1000


class Uncertain:
    """A nominal Quantity with its contributions {input id: ∂y/∂x_i · σ_i} (in its unit)."""

    __array_ufunc__ = None  # numpy and astropy defer to the operators below
    __slots__ = ("nominal", "parts")

    def __init__(self, nominal: u.Quantity, parts: dict[int, object]) -> None:
        self.nominal = nominal
        self.parts = parts

    @property
    def unit(self) -> u.UnitBase:
        return self.nominal.unit

    @property
    def value(self):
        return self.nominal.value

    def sigma_value(self):
        if not self.parts:
            return np.zeros_like(np.asarray(self.nominal.value, dtype=float))
        squares = sum(np.square(p) for p in self.parts.values())
        return np.sqrt(squares)

    @property
    def sigma(self) -> u.Quantity:
        return quantity(self.sigma_value(), self.nominal.unit)

    def to(self, unit: u.UnitBase) -> Uncertain:
        scale = conversion_scale(self.nominal.unit, unit)
        return Uncertain(quantity(self.nominal.value * scale, unit),
                         {k: p * scale for k, p in self.parts.items()})

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
        return Uncertain(-self.nominal, {k: -p for k, p in self.parts.items()})

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


def _merge(a: dict, b: dict, fa, fb) -> dict:
    """Contributions fa·a + fb·b (fa, fb scalars or arrays)."""
    out = {k: fa * p for k, p in a.items()}
    for k, p in b.items():
        out[k] = out[k] + fb * p if k in out else fb * p
    return out


def _add(x, y, sign: float):
    x, y = _lift(x), _lift(y)
    result = x.nominal + y.nominal if sign > 0 else x.nominal - y.nominal
    scale = conversion_scale(y.nominal.unit, result.unit) if y.parts else 1.0
    xs = conversion_scale(x.nominal.unit, result.unit) if x.parts else 1.0
    return Uncertain(result, _merge(x.parts, y.parts, xs, sign * scale))


def _mul(x, y):
    x, y = _lift(x), _lift(y)
    result = x.nominal * y.nominal
    if isinstance(result, u.UnitBase):
        result = quantity(1.0, result)
    return Uncertain(result, _merge(x.parts, y.parts, np.asarray(y.nominal.value),
                                    np.asarray(x.nominal.value)))


def _div(x, y):
    x, y = _lift(x), _lift(y)
    result = x.nominal / y.nominal
    yv = np.asarray(y.nominal.value)
    return Uncertain(result, _merge(x.parts, y.parts, 1 / yv, -np.asarray(result.value) / yv))


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
    parts = _merge(b.parts, e.parts, factor_b, factor_e)
    return Uncertain(result, parts)


# ---- inputs ----------------------------------------------------------------------


@dataclass
class Input:
    """An independent uncertain input: where it is written, its nominal value and σ."""

    name: str
    nominal: u.Quantity
    sigma: u.Quantity


#: Every input made in this process, by id: ids are unique across sheets, so values
#: imported from one sheet into another keep their inputs apart (and shared ones shared).
_ALL_INPUTS: dict[int, Input] = {}
_ids = itertools.count(1)


def input_info(key: int) -> Input:
    return _ALL_INPUTS[key]


@dataclass
class InputRegistry:
    """The inputs one sheet made."""

    inputs: dict[int, Input] = field(default_factory=dict)

    def new(self, name: str, nominal: u.Quantity, sigma: u.Quantity) -> int:
        key = next(_ids)
        self.inputs[key] = _ALL_INPUTS[key] = Input(name, nominal, sigma)
        return key


def make_input(registry: InputRegistry, name: str, nominal: u.Quantity, sigma: u.Quantity):
    """The value of a `±` literal: an Uncertain with one contribution per element."""
    nv = np.asarray(nominal.value, dtype=float)
    sv = np.broadcast_to(np.asarray(sigma.value, dtype=float), nv.shape)
    if np.any(sv < 0):
        raise DomainError("an uncertainty must not be negative")
    if nv.ndim == 0:
        if sv == 0:
            return nominal
        return (registry.new(name, nominal, sigma),)
    if nv.size > MAX_UNCERTAIN_ELEMENTS:
        raise DomainError(f"an array with `±` may hold at most {MAX_UNCERTAIN_ELEMENTS} values "
                          "(each is an input of its own)")
    ids = []
    for index in range(nv.size):
        ids.append(registry.new(f"{name}[{index}]", quantity(nv.flat[index], nominal.unit),
                                quantity(sv.flat[index], nominal.unit)))
    return tuple(ids)


class Mode:
    """How inputs evaluate: linear (contributions) or Monte Carlo (samples)."""

    def __init__(self) -> None:
        self.samples: int | None = None
        self.rng: np.random.Generator | None = None
        self.drawn: dict[int, np.ndarray] = {}
        #: called as progress(done, total) during long per-sample loops
        self.progress = None

    def start_monte_carlo(self, samples: int, seed: int | None, progress=None) -> None:
        self.samples = samples
        self.rng = np.random.default_rng(seed)
        self.drawn = {}
        self.progress = progress

    def stop_monte_carlo(self) -> None:
        self.samples = self.rng = self.progress = None
        self.drawn = {}

    @property
    def monte_carlo(self) -> bool:
        return self.samples is not None

    def value(self, ids: tuple[int, ...], nominal: u.Quantity, sigma: u.Quantity):
        nv = np.asarray(nominal.value, dtype=float)
        sv = np.broadcast_to(np.asarray(sigma.value, dtype=float), nv.shape)
        if not self.monte_carlo:
            if nv.ndim == 0:
                return Uncertain(nominal, {ids[0]: float(sv)})
            parts = {}
            for index, key in enumerate(ids):
                part = np.zeros(nv.shape)
                part.flat[index] = sv.flat[index]
                parts[key] = part
            return Uncertain(nominal, parts)
        z = np.stack([self._normal(key) for key in ids], axis=-1)  # (N, elements)
        if nv.ndim == 0:
            return quantity(nv + sv * z[:, :1], nominal.unit)   # (N, 1)
        return quantity(nv + sv * z.reshape((self.samples, *nv.shape)), nominal.unit)

    def _normal(self, key: int) -> np.ndarray:
        draws = self.drawn.get(key)
        if draws is None:
            draws = self.drawn[key] = self.rng.standard_normal(self.samples)
        return draws


#: The mode in force (one evaluation at a time; sheets switch it around Monte Carlo runs).
mode = Mode()


# ---- values of any kind -------------------------------------------------------------


def is_uncertain(value) -> bool:
    if isinstance(value, Uncertain):
        return True
    if isinstance(value, Record):
        return any(isinstance(q, Uncertain) for q in value.fields.values())
    if isinstance(value, RecordList):
        return any(is_uncertain(r) for r in value.items)
    return False


def nominal(value):
    if isinstance(value, Uncertain):
        return value.nominal
    if isinstance(value, Record) and is_uncertain(value):
        return Record(value.kind, {k: nominal(q) for k, q in value.fields.items()}, value.label)
    if isinstance(value, RecordList) and is_uncertain(value):
        return RecordList(tuple(nominal(r) for r in value.items))
    return value


def contributions(value) -> dict[int, object]:
    """All inputs a value depends on (for records: any field's)."""
    if isinstance(value, Uncertain):
        return value.parts
    out: dict[int, object] = {}
    if isinstance(value, Record):
        for q in value.fields.values():
            out.update(contributions(q))
    elif isinstance(value, RecordList):
        for r in value.items:
            out.update(contributions(r))
    return out


def _shifted(value, key: int, t: float):
    """The value moved by t times input ``key``'s contribution."""
    if isinstance(value, Uncertain):
        part = value.parts.get(key)
        if part is None:
            return value.nominal
        return quantity(value.nominal.value + t * np.asarray(part), value.nominal.unit)
    if isinstance(value, Record):
        return Record(value.kind, {k: _shifted(q, key, t) for k, q in value.fields.items()},
                      value.label)
    if isinstance(value, RecordList):
        return RecordList(tuple(_shifted(r, key, t) for r in value.items))
    return value


def _relative_size(value, key: int) -> float:
    """How large input ``key``'s contribution is relative to the value it moves."""
    if isinstance(value, Uncertain) and key in value.parts:
        part = np.max(np.abs(value.parts[key]))
        scale = np.max(np.abs(value.nominal.value))
        return part / scale if scale > 0 else math.inf
    if isinstance(value, Record):
        return max((_relative_size(q, key) for q in value.fields.values()), default=0.0)
    if isinstance(value, RecordList):
        return max((_relative_size(r, key) for r in value.items), default=0.0)
    return 0.0


def _difference(plus, minus, scale: float):
    """(plus − minus) · scale, for quantities and records alike."""
    if isinstance(plus, Record):
        return {k: _difference(plus.fields[k], minus.fields[k], scale) for k in plus.fields}
    return (np.asarray(plus.value) - np.asarray(minus.to_value(plus.unit))) * scale


def _assemble(result, parts_by_key: dict[int, object]):
    if isinstance(result, Record):
        fields = {}
        for name, q in result.fields.items():
            fields[name] = Uncertain(q, {k: d[name] for k, d in parts_by_key.items()})
        return Record(result.kind, fields, result.label)
    return Uncertain(result, parts_by_key)


#: Central differences move each argument by about this fraction of its size.
STEP = 1e-6


def through(function, values: tuple):
    """Call ``function`` on uncertain arguments: nominal result, contributions by numerical
    differentiation (central differences; one-sided where the other side leaves the domain)."""
    nominals = tuple(nominal(v) for v in values)
    result = function(*nominals)
    if isinstance(result, RecordList):
        raise DomainError("uncertainties cannot pass through a function that returns records")
    keys: dict[int, None] = {}
    for v in values:
        for key in contributions(v):
            keys[key] = None
    parts_by_key: dict[int, object] = {}
    for key in keys:
        relative = max(_relative_size(v, key) for v in values)
        t = STEP / relative if relative and math.isfinite(relative) else STEP
        plus = minus = None
        try:
            plus = function(*(_shifted(v, key, t) for v in values))
        except (ArgumentError, DomainError):
            pass
        try:
            minus = function(*(_shifted(v, key, -t) for v in values))
        except (ArgumentError, DomainError):
            pass
        if plus is not None and minus is not None:
            parts_by_key[key] = _difference(plus, minus, 1 / (2 * t))
        elif plus is not None:
            parts_by_key[key] = _difference(plus, result, 1 / t)
        elif minus is not None:
            parts_by_key[key] = _difference(result, minus, 1 / t)
        else:
            raise DomainError("the uncertainty moves this function's arguments out of its domain")
    return _assemble(result, parts_by_key)


def _is_samples(value) -> bool:
    return isinstance(value, u.Quantity) and np.ndim(value.value) == 2 \
        and value.shape[0] == mode.samples


def _take(value, k: int):
    if _is_samples(value):
        row = value.value[k]
        return quantity(row[0] if row.shape == (1,) else row, value.unit)
    if isinstance(value, Record):
        return Record(value.kind, {n: _take(q, k) for n, q in value.fields.items()}, value.label)
    if isinstance(value, RecordList):
        return RecordList(tuple(_take(r, k) for r in value.items))
    return value


def _stack(results: list):
    first = results[0]
    if isinstance(first, Record):
        return Record(first.kind, {n: _stack([r.fields[n] for r in results])
                                   for n in first.fields}, first.label)
    values = np.array([np.asarray(r.to_value(first.unit)) for r in results])
    if values.ndim == 1:
        values = values[:, None]
    return quantity(values, first.unit)


def per_sample(function, values: tuple):
    """Monte Carlo through a function that takes single values: once per sample, stacked."""
    def sampled(v) -> bool:
        if isinstance(v, Record):
            return any(_is_samples(q) for q in v.fields.values())
        if isinstance(v, RecordList):
            return any(sampled(r) for r in v.items)
        return _is_samples(v)

    if not any(sampled(v) for v in values):
        return function(*values)
    results = []
    for k in range(mode.samples):
        results.append(function(*(_take(v, k) for v in values)))
        if mode.progress is not None and k % 256 == 0:
            mode.progress(k, mode.samples)
    if mode.progress is not None:
        mode.progress(mode.samples, mode.samples)
    return _stack(results)


# ---- results ------------------------------------------------------------------------


def budget(value) -> list[tuple[int, float]]:
    """(input id, share of σ²) for a scalar uncertain value, largest share first."""
    if not isinstance(value, Uncertain) or not value.parts:
        return []
    squares = {k: float(np.sum(np.square(p))) for k, p in value.parts.items()}
    total = sum(squares.values())
    if total == 0:
        return []
    return sorted(((k, s / total) for k, s in squares.items()), key=lambda kv: -kv[1])


class Summary:
    """Monte Carlo statistics of one cell, in its unit: mean and standard deviation at once,
    the 16/50/84 % points when first asked for (a partition of the samples each)."""

    def __init__(self, values: np.ndarray, unit: u.UnitBase) -> None:
        self.values = values
        self.unit = unit
        self.mean = np.mean(values, axis=0)
        self.std = np.std(values, axis=0, ddof=1)
        self._points = None

    def _percentiles(self):
        if self._points is None:
            self._points = np.percentile(self.values, [16, 50, 84], axis=0)
        return self._points

    @property
    def p16(self):
        return self._percentiles()[0]

    @property
    def p50(self):
        return self._percentiles()[1]

    @property
    def p84(self):
        return self._percentiles()[2]


def summarise(samples: u.Quantity) -> Summary:
    """Mean, standard deviation and 16/50/84 percentiles over the sample axis."""
    values = np.asarray(samples.value)
    if values.ndim == 2 and values.shape[1] == 1:
        values = values[:, 0]
    return Summary(values, samples.unit)
