"""Numbers and quantities as text, for terminals and reports.

Numbers use ``digits`` significant digits, drop trailing zeros, and write
exponents the way the sheet language reads them (``2.99792e8``, ``6.674e-11``),
so a printed value can be pasted back into a sheet. Values of every kind are
printed from their shown form (:func:`calc.engine.values.shown`).
"""

from __future__ import annotations

import math
from decimal import ROUND_HALF_EVEN, Decimal, localcontext

import astropy.units as u
import numpy as np

from ..engine.checks import CheckResult
from ..engine.values import Shown, ShownRecord, ShownRecords, ShownValue, shown
from ..physics.units import unit_string, unit_text

_item = np.ndarray.item  # the float of a 0-d array

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


def _shortest(x: float) -> str:
    """The shortest text that reads back as exactly ``x`` (`1e300`, `0.1`)."""
    text = repr(float(x))
    if "e" in text:
        mantissa, exponent = text.split("e")
        text = f"{mantissa.removesuffix('.0')}e{int(exponent)}"
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


def as_shown(value) -> ShownValue:
    """The shown form of a value of any kind (a shown form stays as it is)."""
    if isinstance(value, (Shown, ShownRecord, ShownRecords)):
        return value
    return shown(value)


def format_quantity(value, digits: int = DEFAULT_DIGITS) -> tuple[str, str]:
    """(number text, unit text) of a value; `value ± σ` when it carries an uncertainty. Both
    are written as the sheet language reads them (a percentage as `5%`)."""
    # `is not`: comparing units with `!=` costs tens of microseconds in astropy 8
    if type(value) is u.Quantity and value.ndim == 0 and value.unit is not u.percent \
            and getattr(value.unit, "name", None) != "percent":
        # a single quantity (most cells), without the general machinery
        return format_number(_item(value), digits), unit_text(value.unit)
    s = as_shown(value)
    if not isinstance(s, Shown):
        return s.summary(), ""
    if s.kind != "quantity":
        text = _listed(s)
        if s.kind == "date" and s.sigma is not None and np.ndim(s.sigma) == 0:
            text += f" ± {format_number(float(s.sigma), 2)} s"
        return text + _on_axes(s), ""
    if s.sigma is not None:
        number = format_with_sigma(s.value, s.sigma)
    else:
        number = format_magnitude(s.value, digits)
    number += _on_axes(s)
    unit = unit_text(s.unit)
    if unit == "%":
        if s.sigma is not None and np.ndim(s.value) == 0:
            return f"({number}) × 1%", ""
        return (f"{number}%" if np.ndim(s.value) == 0 else f"{number} × 1%"), ""
    return number, unit


def _listed(s: Shown) -> str:
    """Dates (ISO with their scale) or truths (`true`, `false`), one or a preview of many."""
    if s.kind == "truth":
        words = ["true" if f else "false" for f in np.ravel(s.value)]
        if np.ndim(s.value) == 0:
            return words[0]
    else:
        if isinstance(s.value, str):
            return s.value
        words = [str(t) for t in np.ravel(s.value)]
    if len(words) <= ARRAY_PREVIEW:
        return "[" + ", ".join(words) + "]"
    return f"[{', '.join(words[:3])}, …, {', '.join(words[-2:])}] ({len(words):,} values)"


def _on_axes(s: Shown) -> str:
    """` on days × elong` for a value on more than one axis (its shape in words)."""
    if len(s.axes) < 2:
        return ""
    return " on " + " × ".join(f"{name or '·'} ({n})"
                               for name, n in zip(s.axes, np.shape(s.value)))


#: Below this σ relative to the value, a float holds no digit of the uncertainty: the value is
#: written with all its digits and σ beside it.
_FLOAT_RESOLUTION = 1e-15


def format_measured(value: float, sigma: float) -> str:
    """`value ± σ` with σ to two significant digits and the value to the same decimal place
    (GUM, JCGM 100:2008, §7.2.6; common practice). Very large or small values share one
    power of ten: `(1.4380 ± 0.0010) × 1e30`. Rounding is decimal (exact for any float,
    subnormal or huge); the text reads back in a sheet."""
    value, sigma = float(value), float(sigma)
    if not (math.isfinite(value) and math.isfinite(sigma)) or sigma <= 0:
        return format_number(value)
    if sigma < abs(value) * _FLOAT_RESOLUTION:
        return f"{_shortest(value)} ± {format_number(sigma, 2)}"
    dv, ds = Decimal(repr(value)), Decimal(repr(sigma))
    with localcontext() as context:
        context.prec = 60
        place = ds.adjusted() - 1                      # the second significant digit of σ
        rounded_sigma = ds.quantize(Decimal(1).scaleb(place), rounding=ROUND_HALF_EVEN)
        if rounded_sigma.adjusted() > place + 1:       # σ rounded up to a new power of ten
            place += 1
            rounded_sigma = ds.quantize(Decimal(1).scaleb(place), rounding=ROUND_HALF_EVEN)
        rounded_value = dv.quantize(Decimal(1).scaleb(place), rounding=ROUND_HALF_EVEN)
        magnitude = abs(rounded_value) if rounded_value else rounded_sigma
        k = 0 if Decimal("1e-3") <= magnitude < Decimal("1e6") else magnitude.adjusted()
        decimals = max(0, k - place)
        mv = rounded_value.scaleb(-k)
        ms = rounded_sigma.scaleb(-k)
        text = f"{mv:.{decimals}f} ± {ms:.{decimals}f}"
    return f"({text}) × 1e{k}" if k else text


def format_point(value: float, sigma: float) -> str:
    """A value rounded as it would be beside σ (for percentiles): `1.008e9`."""
    text = format_measured(value, sigma)
    if " ± " not in text:
        return text
    head, tail = text.split(" ± ")
    if head.startswith("("):
        return head[1:] + tail.split(")")[1].replace(" × 1", "")
    return head


def format_with_sigma(value, sigma) -> str:
    """`value ± σ` of a number or of each element of an array (GUM rounding, σ decides the
    digits)."""
    if np.ndim(value) == 0:
        return format_measured(value, sigma)
    flat, spread = np.ravel(value), np.ravel(np.broadcast_to(sigma, np.shape(value)))
    items = [format_measured(v, s) for v, s in zip(flat[:ARRAY_PREVIEW], spread[:ARRAY_PREVIEW])]
    more = f", … ({flat.size:,} values)" if flat.size > ARRAY_PREVIEW else ""
    return "[" + ", ".join(items) + more + "]"


def format_percentiles(s: Shown) -> str | None:
    """`16 / 50 / 84 %` points of a sampled value, each rounded as it would be beside σ."""
    points = s.percentiles()
    if points is None or s.sigma is None:
        return None
    if np.ndim(s.value) == 0:
        return " / ".join(format_point(q, s.sigma) for q in points)
    return " / ".join(
        "[" + ", ".join(format_point(v, e) for v, e in
                        zip(np.ravel(q)[:ARRAY_PREVIEW], np.ravel(s.sigma)[:ARRAY_PREVIEW])) + "]"
        for q in points)


def record_rows(value, digits: int = DEFAULT_DIGITS) -> list[tuple[str, str, str]]:
    """(field, number text, unit text) rows of a record; one row per item of a record list."""
    s = as_shown(value)
    if isinstance(s, ShownRecord):
        return [(f".{name}", *format_quantity(q, digits)) for name, q in s.fields.items()]
    if isinstance(s, ShownRecords):
        return [(f"[{i}]", item.label or item.kind, "") for i, item in enumerate(s.items)]
    return []


def value_text(value, digits: int = DEFAULT_DIGITS) -> str:
    """A value as one line of text: `1.5 ± 0.2 km`, `(orbit)`, `[1, 2, 3] s`."""
    number, unit = format_quantity(value, digits)
    return f"{number} {unit}".strip()


def cell_text(cell, digits: int = DEFAULT_DIGITS) -> str:
    """A cell as one line of text: its value, or `error: message`."""
    if cell.error is not None:
        return f"error: {cell.error.message}"
    return value_text(cell.raw, digits)


def check_detail(result: CheckResult) -> str:
    """What a check compared and found, in words: `42.98 arcsec / century vs 43 … (tolerance
    0.5%)`."""
    if result.error is not None:
        return f"error: {result.error.message}"
    both = f"{value_text(result.left)} vs {value_text(result.right)}"
    unit = unit_string(result.unit) if result.unit is not None else ""
    if result.kind == "order":
        return f"{both} ({result.op})"
    if result.kind == "exact":
        return f"{both} (exactly)"
    if result.kind == "relative":
        return (f"{both}: differ by {result.relative * 100:.3g}% (tolerance "
                f"{result.amount * 100:g}%)")
    if result.kind == "absolute":
        return (f"{both}: differ by {result.gap:.4g} {unit} (tolerance "
                f"{value_text(result.tolerance)})")
    if result.sigma is None:
        return (f"{both}: neither side has an uncertainty, so `within {result.amount:g} sigma` "
                "asks for equality" + ("" if result.passed else
                                       f" (they differ by {result.gap:.4g} {unit})".replace(" )", ")")))
    return (f"{both}: differ by {result.ratio:.3g} σ (tolerance {result.amount:g} σ; "
            f"σ of the difference {result.sigma:.3g} {unit})".replace(" )", ")"))
