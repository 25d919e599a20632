"""Argument checks shared by all functions: dimension and domain, at the boundary.

Each check raises :class:`~calc.errors.ArgumentError` naming the argument, so
the evaluator can point at it: "`b` must be a length, got 3 s".
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Annotated

import astropy.units as u
import numpy as np

from ...errors import ArgumentError
from ..constants import active
from ..records import is_date
from ..units import is_one, physical_type, value_in
from ..validity import warn

if TYPE_CHECKING:
    from astropy.time import Time as _AstropyTime
else:
    class _AstropyTime:
        """Stands for astropy's Time in annotations at run time: astropy.time loads only when
        a sheet has dates (it costs a tenth of a second at start-up)."""

# Argument and result kinds, for signatures (`relsheet funcs NAME` shows the text).
Mass = Annotated[u.Quantity, "mass or gravitational parameter GM"]
Length = Annotated[u.Quantity, "length"]
Time = Annotated[u.Quantity, "time"]
Speed = Annotated[u.Quantity, "speed"]
Angle = Annotated[u.Quantity, "angle"]
AngularRate = Annotated[u.Quantity, "angle per time"]
AngularMomentum = Annotated[u.Quantity, "angular momentum"]
Dimensionless = Annotated[u.Quantity, "dimensionless"]
#: A date (an instant on a time scale): an astropy Time, scalar or array, in any scale.
Date = Annotated[_AstropyTime, "date"]

#: The largest array ``span`` and ``logspan`` will make (memory guard: 80 MB of floats).
MAX_ARRAY_LENGTH = 10_000_000


def show(q: u.Quantity) -> str:
    """A short rendering of an argument for messages: `3 s`, `[1, 2, …] km`."""
    value = q.value
    if np.ndim(value) == 0:
        text = f"{float(value):.6g}"
    else:
        flat = np.ravel(value)
        text = "[" + ", ".join(f"{v:.4g}" for v in flat[:3]) + (", …]" if flat.size > 3 else "]")
    unit = q.unit.to_string()
    return f"{text} {unit}" if unit else text


def to_value(q: u.Quantity, unit: u.UnitBase, name: str, what: str):
    """``q`` in ``unit`` as a float or array; ``what`` names the dimension ("a length")."""
    try:
        return value_in(q, unit)
    except u.UnitConversionError:
        raise ArgumentError(f"`{name}` must be {what}, got {show(q)}", name) from None


def dimensionless(q: u.Quantity, name: str):
    return to_value(q, u.dimensionless_unscaled, name, "dimensionless")


def angle(q: u.Quantity, name: str):
    """An angle in radians; a dimensionless number is taken as radians."""
    return to_value(q, u.rad, name, "an angle")


def same_dimension(quantities: list[u.Quantity], names: list[str]) -> list:
    """Values of all quantities in the unit of the first; they must share a dimension."""
    unit = quantities[0].unit
    out = []
    for q, name in zip(quantities, names):
        try:
            out.append(value_in(q, unit))
        except u.UnitConversionError:
            raise ArgumentError(
                f"`{name}` must have the same dimension as `{names[0]}` "
                f"({physical_type(unit)}), got {show(q)}",
                name) from None
    return out


def count(q: u.Quantity, name: str, minimum: int = 1, maximum: int = MAX_ARRAY_LENGTH) -> int:
    """A whole number of items (``n`` of ``span``)."""
    value = dimensionless(q, name)
    if np.ndim(value) != 0 or value != int(value):
        raise ArgumentError(f"`{name}` must be a whole number, got {show(q)}", name)
    n = int(value)
    if not minimum <= n <= maximum:
        raise ArgumentError(f"`{name}` must be between {minimum} and {maximum:,}, got {n}", name)
    return n


def scalar(q: u.Quantity, name: str) -> None:
    if np.ndim(q.value) != 0:
        raise ArgumentError(f"`{name}` must be a single value, not an array", name)


def any_below(value, limit: float, inclusive: bool = False) -> bool:
    """Whether any element is below ``limit`` (or at it, if ``inclusive``); fast for scalars."""
    if isinstance(value, np.ndarray) and value.ndim:
        return bool((value <= limit).any() if inclusive else (value < limit).any())
    return bool(value <= limit) if inclusive else bool(value < limit)


def positive(value, q: u.Quantity, name: str, what: str = "positive") -> None:
    if any_below(value, 0, inclusive=True):
        raise ArgumentError(f"`{name}` must be {what}, got {show(q)}", name)


# ---- physical arguments of the domain functions -----------------------------------

GM_UNIT = u.m**3 / u.s**2
ANGULAR_MOMENTUM_UNIT = u.kg * u.m**2 / u.s
# composite units made once: astropy builds a new one (tens of microseconds) at every `/`;
# constants are read with value_in, whose conversion factors are cached
_G_UNIT = GM_UNIT / u.kg
_SPEED_UNIT = u.m / u.s


def gravitational_parameter(M: u.Quantity, name: str = "M"):
    """GM in m³/s² from a mass (kg, Msun, …) or a gravitational parameter; must be positive.

    A mass is multiplied by the pinned G; as astropy's solar and planetary mass units are
    GM/G, ``1 Msun`` gives back the nominal GM☉ exactly.
    """
    try:
        kg = value_in(M, u.kg)
    except u.UnitConversionError:
        try:
            gm = value_in(M, GM_UNIT)
        except u.UnitConversionError:
            raise ArgumentError(
                f"`{name}` must be a mass or a gravitational parameter (m^3 / s^2), got {show(M)}",
                name) from None
    else:
        gm = kg * value_in(active("G"), _G_UNIT)
    positive(gm, M, name)
    return gm


def length(q: u.Quantity, name: str, allow_infinite: bool = False):
    """A positive length in metres; with ``allow_infinite``, a plain `inf` counts as one."""
    if allow_infinite and is_one(q.unit) and np.all(np.isposinf(q.value)):
        return np.inf
    value = to_value(q, u.m, name, "a length")
    positive(value, q, name)
    if not allow_infinite and not np.all(np.isfinite(value)):
        raise ArgumentError(f"`{name}` must be finite, got {show(q)}", name)
    return value


def date(value, name: str) -> _AstropyTime:
    """A date: an astropy Time (any scale, scalar or array); a plain number is refused."""
    if not is_date(value):
        what = show(value) if isinstance(value, u.Quantity) else type(value).__name__
        raise ArgumentError(f"`{name}` must be a date, such as 2031-04-12T06:30 TDB, got {what}",
                            name)
    return value


def seconds_between(t: _AstropyTime, t0: _AstropyTime):
    """t − t0 in seconds of TDB, as floats (an array for array dates).

    Both dates go to TDB (a no-op when they are in it already); the whole and fractional
    parts of the two-part Julian dates are subtracted separately, so a difference of
    decades keeps about 10 ps.
    """
    a, b = t.tdb, t0.tdb
    return ((a.jd1 - b.jd1) + (a.jd2 - b.jd2)) * 86400.0


def duration(q: u.Quantity, name: str):
    """A positive time in seconds."""
    value = to_value(q, u.s, name, "a time")
    positive(value, q, name)
    return value


def speed(q: u.Quantity, name: str):
    value = to_value(q, _SPEED_UNIT, name, "a speed")
    if any_below(value, 0):
        raise ArgumentError(f"`{name}` must not be negative, got {show(q)}", name)
    return value


def eccentricity(q: u.Quantity, name: str = "e"):
    """0 ≤ e < 1: a bound orbit."""
    value = dimensionless(q, name)
    if any_below(value, 0) or not np.all(np.asarray(value) < 1):
        raise ArgumentError(f"`{name}` must be at least 0 and below 1 for a bound orbit, "
                            f"got {show(q)}", name)
    return value


def angular_momentum(q: u.Quantity, name: str = "J"):
    value = to_value(q, ANGULAR_MOMENTUM_UNIT, name, "an angular momentum (kg m^2 / s)")
    positive(value, q, name)
    return value


def ppn(q: u.Quantity | None, name: str):
    """A PPN parameter (γ or β); None means its general-relativity value 1."""
    if q is None:
        return 1.0
    value = dimensionless(q, name)
    return float(value) if np.ndim(value) == 0 else value


def speed_of_light() -> float:
    return value_in(active("c"), _SPEED_UNIT)


def weak_field(gm, r, name: str, c: float, argument: str | None = None) -> None:
    """Refuse a distance inside the Schwarzschild radius; warn within 10 of them.

    ``name`` describes the distance in messages (``r``, ``a (1 − e)``); ``argument`` is the
    parameter to point at when it is not ``name`` itself.
    """
    rs = 2 * gm / c**2
    ratio = np.min(np.asarray(r) / rs)
    if ratio <= 1:
        raise ArgumentError(f"`{name}` lies inside the Schwarzschild radius ({rs / 1e3:.6g} km): "
                            "no weak-field formula applies there", argument or name)
    if ratio < 10:
        warn(f"`{name}` is {ratio:.3g} r_s: this weak-field formula needs `{name}` ≫ r_s "
             f"(its relative error is of order r_s/{name})")
