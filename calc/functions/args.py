"""Argument checks shared by all functions: dimension and domain, at the boundary.

Each check raises :class:`~calc.errors.ArgumentError` naming the argument, so
the evaluator can point at it: "`b` must be a length, got 3 s".
"""

from __future__ import annotations

import astropy.units as u
import numpy as np

from ..errors import ArgumentError
from ..units import physical_type, value_in

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
