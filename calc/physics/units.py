"""Units: astropy's registry plus the trade's extras, looked up by name.

Names resolve through a plain dictionary (no string parser on the hot path).
Extras beyond astropy: ``century`` (the Julian century, 36525 d, in which
per-century rates are published). astropy already knows ``AU``, ``Msun``,
``Rsun``, ``Mearth``, ``Rearth``, ``Mjup``, ``mas``, ``uas`` and ``lsec``.
``cy`` is refused: astropy reads it as the cycle, astronomers write it for the
century; so is ``cyr``, astropy's centiyear.

The units built on astronomical constants (solar, terrestrial and jovian
masses, radii, luminosity) follow the sheet's pinned constant sets.
"""

from __future__ import annotations

import difflib
import math
from collections.abc import Set as AbstractSet
from functools import lru_cache

import astropy.units as u
import numpy as np

from .constants import ConstantSelection, constant_table, default_selection

#: The Julian century: 36525 days of 86400 s (common practice; IAU usage for rates).
century = u.def_unit(["century"], 36525 * u.day, doc="Julian century (36525 d)")

#: Parts per million and per billion: fractional frequency offsets, relative errors
#: (common practice; BIPM SI Brochure 9th ed. §5.4.7 accepts them as plain numbers).
ppm = u.def_unit(["ppm"], 1e-6 * u.dimensionless_unscaled, doc="parts per million (1e-6)")
ppb = u.def_unit(["ppb"], 1e-9 * u.dimensionless_unscaled, doc="parts per billion (1e-9)")

EXTRA_UNITS: dict[str, u.UnitBase] = {"century": century, "ppm": ppm, "ppb": ppb}

# SI factors the library's functions convert their results with (IAU usage: the Julian year
# of 365.25 days of 86400 s, the Julian century of 36525 days).
DAY_S = 86400.0
JULIAN_YEAR_S = 365.25 * DAY_S
JULIAN_CENTURY_S = 36525 * DAY_S
ARCSEC_RAD = math.pi / (180 * 3600)
MAS_RAD = ARCSEC_RAD / 1000

#: Names refused in unit position, with the reason and a hint.
REFUSED_UNITS: dict[str, tuple[str, str]] = {
    "cy": ("`cy` is ambiguous: astropy reads it as the cycle (2π rad), "
           "astronomers write it for the century",
           "write `cycle` for the angle or `century` for 36525 days"),
    "cyr": ("`cyr` is ambiguous: astropy reads it as the centiyear (0.01 yr), "
            "a reader may take it for the century",
            "write `century` for 36525 days, or `0.01 yr`"),
}

# Units that astropy derives from astronomical constants, by the constant they stand for.
_CONSTANT_UNITS = {
    "M_sun": u.solMass, "R_sun": u.solRad, "L_sun": u.solLum,
    "M_earth": u.earthMass, "R_earth": u.earthRad,
    "M_jup": u.jupiterMass, "R_jup": u.jupiterRad,
}


class UnitTable:
    """Name → unit for one constant selection."""

    def __init__(self, selection: ConstantSelection) -> None:
        self.selection = selection
        self._registry = u.get_current_unit_registry().registry
        self._index: NameIndex | None = None
        self._overrides: dict[str, u.UnitBase] = dict(EXTRA_UNITS)
        if selection != default_selection():
            constants = constant_table(selection)
            for const_name, astropy_unit in _CONSTANT_UNITS.items():
                value = constants[const_name].quantity
                pinned = u.def_unit(list(astropy_unit.names), value,
                                    doc=f"{astropy_unit.names[0]} under {selection}")
                for alias in astropy_unit.names:
                    self._overrides[alias] = pinned

    def lookup(self, name: str) -> u.UnitBase | None:
        """The unit called ``name``, or None. Refused names are not units (see :meth:`refusal`)."""
        found = self._overrides.get(name)
        if found is not None:
            return found
        if name in REFUSED_UNITS:
            return None
        return self._registry.get(name)

    @staticmethod
    def refusal(name: str) -> tuple[str, str] | None:
        return REFUSED_UNITS.get(name)

    def names(self) -> list[str]:
        return [*self._registry, *self._overrides]

    def suggestions(self, name: str, extra=()) -> list[str]:
        """Up to three unit names (or ``extra`` names) spelled like ``name``."""
        if self._index is None:
            self._index = NameIndex(self.names())
        return close_matches(name, [*self._index.near(name), *NameIndex.filtered(name, extra)])


@lru_cache(maxsize=8)
def unit_table(selection: ConstantSelection) -> UnitTable:
    return UnitTable(selection)


class NameIndex:
    """Names by length, so that a near spelling is looked for only among names of a length
    that could match (difflib's cutoff of 0.75 needs the shorter at least 0.6 of the longer):
    thousands of unit names, looked up for every unknown name, stay quick."""

    def __init__(self, names) -> None:
        self.by_length: dict[int, list[str]] = {}
        for name in set(names):
            self.by_length.setdefault(len(name), []).append(name)

    def near(self, name: str) -> list[str]:
        low, high = math.ceil(0.6 * len(name)), math.floor(len(name) / 0.6)
        found = [n for size in range(low, high + 1) for n in self.by_length.get(size, ())]
        lower = name.lower()
        found += [n for n in self.by_length.get(len(name), ()) if n.lower() == lower]
        return found

    @staticmethod
    def filtered(name: str, names) -> list[str]:
        low, high = 0.6 * len(name), len(name) / 0.6
        return [n for n in names if low <= len(n) <= high]


def close_matches(name: str, candidates) -> list[str]:
    """Up to three near spellings, case-insensitive matches first."""
    pool = set(candidates)
    same_case = [c for c in pool if c.lower() == name.lower() and c != name]
    near = difflib.get_close_matches(name, pool, n=3, cutoff=0.75)
    out: list[str] = []
    for c in same_case + near:
        if c not in out and c != name:
            out.append(c)
    return out[:3]


def did_you_mean(options: list[str]) -> str | None:
    if not options:
        return None
    return "did you mean " + " or ".join(f"`{o}`" for o in options) + "?"


@lru_cache(maxsize=4096)
def unit_string(unit: u.UnitBase) -> str:
    """astropy's generic string of a unit (`""` for dimensionless)."""
    return unit.to_string()


@lru_cache(maxsize=4096)
def unit_text(unit: u.UnitBase) -> str:
    """A unit as the sheet language writes it, so that a printed value reads back: powers with
    `^` (`m^2 kg / s`), each denominator after its own `/` (`km / Mpc / s`), only negative
    powers as such (`s^-1`), a scaled unit in brackets (`(1000 m)`), `%` for percent, and
    nothing for a plain number."""
    if unit is u.dimensionless_unscaled or unit == u.dimensionless_unscaled:
        return ""
    if unit == u.percent:
        return "%"
    bases = getattr(unit, "bases", [unit])
    powers = getattr(unit, "powers", [1])
    above, below = [], []
    for base, power in zip(bases, powers):
        name = base.to_string()
        if power > 0:
            above.append(name + _power_text(power))
        else:
            below.append((name, power))
    if above:
        text = " ".join(above) + "".join(f" / {name}{_power_text(-p)}" for name, p in below)
    else:
        text = " ".join(name + _power_text(p) for name, p in below)
    scale = getattr(unit, "scale", 1.0)
    if scale != 1.0:
        text = f"({scale:.17g} {text})".replace(" )", ")") if text else f"{scale:.17g}"
    return text


def _power_text(power) -> str:
    if power == 1:
        return ""
    if float(power).is_integer():
        return f"^{int(power)}"
    from fractions import Fraction

    fraction = Fraction(power).limit_denominator(12)
    if float(fraction) == float(power):
        return f"^({fraction.numerator}/{fraction.denominator})"
    return f"^{float(power)!r}"


@lru_cache(maxsize=4096)
def physical_type(unit: u.UnitBase) -> str:
    """The dimension of a unit in words: `length`, `angular frequency` (the first of
    astropy's names where it has several), `dimension m^2 kg^3` where it has none."""
    kind = str(unit.physical_type)
    if kind == "unknown":
        base = unit.decompose()
        return f"dimension {unit_text(u.CompositeUnit(1, base.bases, base.powers))}" \
            if base.bases else "dimensionless"
    return kind.split("/")[0]


def describe(unit: u.UnitBase) -> str:
    """`km` (length) -- a unit named with its physical type, for messages."""
    if unit == u.dimensionless_unscaled:
        return "a dimensionless number"
    return f"`{unit_text(unit)}` ({physical_type(unit)})"


def angle_equivalencies():
    """Context in which angles and dimensionless numbers convert into each other (radians)."""
    return u.set_enabled_equivalencies(u.dimensionless_angles())


# ---- cached unit algebra ---------------------------------------------------------
# astropy's unit algebra is exact but costs microseconds per call; a sheet repeats the
# same few unit combinations thousands of times. Keys are object ids; each entry keeps
# its units alive so an id cannot be reused while it is in the table.

# The tables are bounded: a session that builds sheets with ever new units (scaled `in`
# units, pinned constant sets) empties a table when it fills instead of growing it.

_PRODUCTS: dict[tuple[int, int], tuple] = {}
_QUOTIENTS: dict[tuple[int, int], tuple] = {}
_POWERS: dict[tuple[int, float], tuple] = {}
_SCALES: dict[tuple[int, int], tuple] = {}
_ANGLES = u.dimensionless_angles()
#: Entries a unit-algebra table holds at most.
TABLE_LIMIT = 4096


def _remember(table: dict, key, entry: tuple) -> tuple:
    if len(table) >= TABLE_LIMIT:
        table.clear()
    table[key] = entry
    return entry


def unit_product(a: u.UnitBase, b: u.UnitBase) -> u.UnitBase:
    hit = _PRODUCTS.get((id(a), id(b)))
    if hit is None:
        hit = _remember(_PRODUCTS, (id(a), id(b)), (a, b, a * b))
    return hit[2]


def unit_quotient(a: u.UnitBase, b: u.UnitBase) -> u.UnitBase:
    hit = _QUOTIENTS.get((id(a), id(b)))
    if hit is None:
        hit = _remember(_QUOTIENTS, (id(a), id(b)), (a, b, a / b))
    return hit[2]


def unit_power(a: u.UnitBase, p: float) -> u.UnitBase:
    hit = _POWERS.get((id(a), p))
    if hit is None:
        hit = _remember(_POWERS, (id(a), p), (a, a ** p))
    return hit[1]


def conversion_scale(source: u.UnitBase, target: u.UnitBase) -> float:
    """The factor that turns a value in ``source`` into one in ``target``.

    Angles and dimensionless numbers convert into each other (radians).
    Raises ``astropy.units.UnitConversionError`` for incompatible units.
    """
    if source is target:
        return 1.0
    key = (id(source), id(target))
    hit = _SCALES.get(key)
    if hit is None:
        # a failure is remembered by its message: an exception kept in the table would keep its
        # traceback's frames, and everything they hold, alive
        scale: float | str
        try:
            scale = source.to(target)
        except u.UnitConversionError:
            try:
                scale = source.to(target, equivalencies=_ANGLES)
            except u.UnitConversionError as exc:
                scale = str(exc)
            except (u.UnitScaleError, OverflowError, ZeroDivisionError):
                scale = "a unit's size is outside what a float can hold"
        except (u.UnitScaleError, OverflowError, ZeroDivisionError):
            # units so large or small that their SI scale leaves the float range (km^100)
            scale = "a unit's size is outside what a float can hold"
        hit = _remember(_SCALES, key, (source, target, scale))
    scale = hit[2]
    if isinstance(scale, str):
        raise u.UnitConversionError(scale)
    return scale


_ONES: dict[int, tuple] = {}


def is_one(unit: u.UnitBase) -> bool:
    """True for the plain dimensionless unit (astropy's own comparison is slow)."""
    hit = _ONES.get(id(unit))
    if hit is None:
        hit = _remember(_ONES, id(unit), (unit, unit == u.dimensionless_unscaled))
    return hit[1]


@lru_cache(maxsize=4096)
def simplified(unit: u.UnitBase) -> u.UnitBase | None:
    """A simpler unit for a product that mixes units of one dimension (`AU s / m` → `s`,
    `m^3 Msun / kg / s^2` → `m^3 / s^2`), or None when there is nothing to simplify.

    Within each dimension, every unit is converted into the one with the largest power (the
    first written among equals), so the units the sheet chose stay where they can."""
    bases = getattr(unit, "bases", None)
    if not bases or len(bases) < 2:
        return None
    kinds: dict[str, list[tuple[u.UnitBase, float]]] = {}
    for base, power in zip(bases, unit.powers):
        try:
            kind = str(base.physical_type)
        except Exception:  # pragma: no cover - a unit astropy cannot classify
            return None
        kinds.setdefault(kind, []).append((base, power))
    if all(len(members) == 1 for members in kinds.values()):
        return None
    factor = float(unit.scale)
    kept: list[tuple[u.UnitBase, float]] = []
    for members in kinds.values():
        keep = max(members, key=lambda m: m[1])[0]
        total = 0.0
        for base, power in members:
            if base is not keep:
                try:
                    factor *= base.to(keep) ** power
                except u.UnitsError:
                    # one physical type yet no conversion (`mag` and `adu`: both counts of
                    # no dimension to astropy): the product stays as written
                    return None
            total += power
        if total:
            kept.append((keep, total))
    return u.CompositeUnit(factor, [b for b, _ in kept], [p for _, p in kept])


@lru_cache(maxsize=4096)
def plain_number_unit(unit: u.UnitBase) -> bool:
    """True for a scaled dimensionless unit such as `km / m`, which shows better as a number."""
    return unit is not u.dimensionless_unscaled and unit.physical_type == "dimensionless" \
        and unit != u.dimensionless_unscaled


def _slow_quantity(value, unit: u.UnitBase) -> u.Quantity:
    if isinstance(value, np.ndarray):
        return u.Quantity(value, unit, copy=False)
    return u.Quantity(value, unit)


def _fast_quantity(value, unit: u.UnitBase) -> u.Quantity:
    q = np.asarray(value, dtype=float).view(u.Quantity)
    # astropy's own unit setter, not relsheet state; checked at import by _fast_path_works
    q._set_unit(unit)  # noqa: SLF001
    return q


def _fast_path_works() -> bool:
    """astropy's Quantity constructor validates what the evaluator already knows (a float
    value, a unit object) and costs five times a view; the view uses astropy's own
    `_set_unit`, so check once that it still behaves as the public constructor does."""
    try:
        for value, unit in ((1.5, u.km), (np.array([1.0, 2.0]), u.s / u.m)):
            a, b = _fast_quantity(value, unit), _slow_quantity(value, unit)
            if type(a) is not type(b) or a.unit != b.unit or not np.array_equal(a.value, b.value) \
                    or a.shape != b.shape:
                return False
        return True
    except Exception:
        return False


_FAST = _fast_path_works()


def quantity(value, unit: u.UnitBase = u.dimensionless_unscaled) -> u.Quantity:
    """A Quantity around a freshly computed value, without copying an array.

    Values are never changed in place anywhere in relsheet, so sharing is safe.
    """
    if _FAST and isinstance(unit, u.UnitBase) and not isinstance(value, u.Quantity):
        dtype = getattr(value, "dtype", None)
        if dtype is None or dtype.kind == "f":
            return _fast_quantity(value, unit)
    return _slow_quantity(value, unit)


def value_in(q: u.Quantity, unit: u.UnitBase):
    """The value of ``q`` in ``unit`` (angles and dimensionless numbers interconvert)."""
    scale = conversion_scale(q.unit, unit)
    return q.value if scale == 1.0 else q.value * scale


def long_name(unit: u.UnitBase, avoid: AbstractSet[str] = frozenset()) -> str:
    """The longest of a named unit's names that is not in ``avoid`` (``annum`` for ``a``)."""
    names = [n for n in getattr(unit, "names", [unit_string(unit)]) if n not in avoid]
    return max(names, key=len) if names else unit_string(unit)
