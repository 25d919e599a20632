"""Numbers and quantities as text, for terminals and reports.

Numbers use ``digits`` significant digits, drop trailing zeros, and write
exponents the way the sheet language reads them (``2.99792e8``, ``6.674e-11``),
so a printed value can be pasted back into a sheet.
"""

from __future__ import annotations

import math

import astropy.units as u
import numpy as np

from ..physics.units import unit_string

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


def format_quantity(q, digits: int = DEFAULT_DIGITS) -> tuple[str, str]:
    """(number text, unit text) of a quantity; `value ± σ` when it carries an uncertainty."""
    sigma = getattr(q, "sigma", None)
    if sigma is not None and not isinstance(q, u.Quantity):
        return format_with_sigma(q.nominal.value, q.sigma_value(), digits), unit_string(q.unit)
    return format_magnitude(q.value, digits), unit_string(q.unit)


def format_measured(value: float, sigma: float) -> str:
    """`value ± σ` with σ to two significant digits and the value to the same decimal place
    (GUM, JCGM 100:2008, §7.2.6; common practice). Very large or small values share one
    power of ten: `(1.4380 ± 0.0010)e30`."""
    value, sigma = float(value), float(sigma)
    if not (math.isfinite(value) and math.isfinite(sigma)) or sigma <= 0:
        return format_number(value)
    magnitude = abs(value) if value else sigma
    k = 0 if 1e-3 <= magnitude < 1e6 else math.floor(math.log10(magnitude))
    mv, ms = value / 10**k, sigma / 10**k
    place = math.floor(math.log10(ms)) - 1          # the second significant digit of σ
    if round(ms, -place) >= 10 ** (place + 2):      # σ rounded up to a new power of ten
        place += 1
    decimals = max(0, -place)
    text = f"{round(mv, -place):.{decimals}f} ± {round(ms, -place):.{decimals}f}"
    return f"({text})e{k}" if k else text


def format_point(value: float, sigma: float) -> str:
    """A value rounded as it would be beside σ (for percentiles): `1.008e9`."""
    text = format_measured(value, sigma)
    if " ± " not in text:
        return text
    head, tail = text.split(" ± ")
    if head.startswith("("):
        return head[1:] + tail.split(")")[1]
    return head


def format_with_sigma(value, sigma, digits: int = DEFAULT_DIGITS) -> str:
    if np.ndim(value) == 0:
        return format_measured(value, sigma)
    flat, spread = np.ravel(value), np.ravel(np.broadcast_to(sigma, np.shape(value)))
    items = [format_measured(v, s) for v, s in zip(flat[:ARRAY_PREVIEW], spread[:ARRAY_PREVIEW])]
    more = f", … ({flat.size:,} values)" if flat.size > ARRAY_PREVIEW else ""
    return "[" + ", ".join(items) + more + "]"


def record_rows(value, digits: int = DEFAULT_DIGITS) -> list[tuple[str, str, str]]:
    """(field, number text, unit text) rows of a record; one row per item of a record list."""
    from ..physics.records import Record

    if isinstance(value, Record):
        return [(f".{name}", *format_quantity(q, digits)) for name, q in value.fields.items()]
    return [(f"[{i}]", item.label or item.kind, "") for i, item in enumerate(value.items)]


def record_summary(value) -> str:
    from ..physics.records import Record

    if isinstance(value, Record):
        return f"({value.kind})"
    return f"(array of {len(value.items)} records)"
