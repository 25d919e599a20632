"""Numbers and quantities as text, for terminals and reports.

Numbers use ``digits`` significant digits, drop trailing zeros, and write
exponents the way the sheet language reads them (``2.99792e8``, ``6.674e-11``),
so a printed value can be pasted back into a sheet.
"""

from __future__ import annotations

import astropy.units as u
import numpy as np

from .units import unit_string

DEFAULT_DIGITS = 6
#: Arrays longer than this show their first and last few values.
ARRAY_PREVIEW = 6


def format_number(x: float, digits: int = DEFAULT_DIGITS) -> str:
    x = float(x)
    if x != x:
        return "nan"
    if x in (float("inf"), float("-inf")):
        return "inf" if x > 0 else "-inf"
    text = f"{x:.{digits}g}"
    if "e" in text:
        mantissa, exponent = text.split("e")
        text = f"{mantissa}e{int(exponent)}"
    return text


def format_magnitude(value, digits: int = DEFAULT_DIGITS) -> str:
    """A scalar or an array (``[1, 2, 3, …, 10] (10 values)``)."""
    if np.ndim(value) == 0:
        return format_number(value, digits)
    flat = np.ravel(value)
    if flat.size <= ARRAY_PREVIEW:
        return "[" + ", ".join(format_number(v, digits) for v in flat) + "]"
    head = ", ".join(format_number(v, digits) for v in flat[:3])
    tail = ", ".join(format_number(v, digits) for v in flat[-2:])
    return f"[{head}, …, {tail}] ({flat.size:,} values)"


def format_quantity(q: u.Quantity, digits: int = DEFAULT_DIGITS) -> tuple[str, str]:
    """(number text, unit text) of a quantity."""
    return format_magnitude(q.value, digits), unit_string(q.unit)


def record_rows(value, digits: int = DEFAULT_DIGITS) -> list[tuple[str, str, str]]:
    """(field, number text, unit text) rows of a record; one row per item of a record list."""
    from .records import Record

    if isinstance(value, Record):
        return [(f".{name}", *format_quantity(q, digits)) for name, q in value.fields.items()]
    return [(f"[{i}]", item.label or item.kind, "") for i, item in enumerate(value.items)]


def record_summary(value) -> str:
    from .records import Record

    if isinstance(value, Record):
        return f"({value.kind})"
    return f"(array of {len(value.items)} records)"
