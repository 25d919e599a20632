"""Dates: instants with a time scale, as astropy ``Time`` objects.

``2031-04-12T06:30:00 TDB``, ``MJD 62000.25 TT`` and ``JD 2462000.75 TDB`` are dates; a date
without its scale is refused (``2031-04-12`` is never arithmetic). The arithmetic that makes
sense is allowed and nothing else: date − date is a duration (a time quantity, in days),
date ± duration is a date, dates compare with dates. Scale conversions, leap seconds and
TDB − TT come from astropy.time and ERFA with the tables astropy ships: nothing is
downloaded, and a conversion that needs a table outside its range (UT1, UTC before 1960) is an
error rather than an extrapolation.
"""

from __future__ import annotations

import warnings
from typing import Any

import astropy.units as u
import numpy as np

from ..errors import DomainError, SheetError, Span, UnitError
from ..language.syntax import DateLiteral, DayNumber
from ..physics.records import is_date
from ..physics.units import describe

#: the time scales a date may carry (IAU names; astropy's in lower case)
SCALES = ("UTC", "TAI", "TT", "TDB", "TCG", "TCB", "UT1")


def _time_module():
    from astropy.time import Time, TimeDelta
    from astropy.utils import iers

    # the tables astropy ships, never a download: a date beyond them is an error
    iers.conf.auto_download = False
    iers.conf.auto_max_age = None
    return Time, TimeDelta


def _scale(scale: str | None, span: Span, scale_span: Span | None) -> str:
    if scale is None:
        raise UnitError("a date needs its time scale", span,
                        hint="write the scale after it, e.g. `2031-04-12T06:30:00 TDB` "
                             f"({', '.join(SCALES)})")
    if scale not in SCALES:
        raise UnitError(f"unknown time scale `{scale}`", scale_span or span,
                        hint=f"the time scales are {', '.join(SCALES)}")
    return scale.lower()


def date_literal(node: DateLiteral | DayNumber):
    """The date a literal writes."""
    Time, _ = _time_module()
    scale = _scale(node.scale, node.span, node.scale_span)
    needs_tables = scale in _TABLED
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("error" if needs_tables else "ignore")
            if isinstance(node, DayNumber):
                time = Time(node.value, format=node.kind.lower(), scale=scale)
            else:
                time = Time(node.text, format="isot" if "T" in node.text else "iso", scale=scale)
    except ValueError as exc:
        raise DomainError(f"not a valid date: {exc}", node.span) from None
    except Warning as exc:
        raise DomainError(f"the date is outside the range its time scale's tables cover: "
                          f"{exc}", node.span) from None
    if needs_tables:
        checked(lambda: time.tai, node.span)
    return time


#: scales whose conversions need tables (leap seconds, Earth orientation): beyond the tables'
#: range their conversions are errors (ERFA's "dubious year" warning is raised, not ignored)
_TABLED = ("utc", "ut1")


def checked(convert, span: Span, strict: bool = True):
    """Run a conversion of dates; out-of-table dates and astropy's own refusals become errors
    (``strict``: ERFA's warnings too, for scales that need tables)."""
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("error" if strict else "ignore")
            return convert()
    except SheetError:
        raise
    except Warning as exc:
        raise DomainError(f"the date is outside the range of the time-scale tables astropy "
                          f"ships ({exc})", span,
                          hint="UTC is defined from 1960 on; UT1 needs the IERS table's range"
                          ) from None
    except Exception as exc:  # noqa: BLE001 - astropy's IERS range errors and the like
        raise DomainError(f"the time scale conversion failed: {exc}", span) from None


def in_scale(value, scale: str, span: Span):
    """A date (or dates) in another time scale: `t in TDB`."""
    if not is_date(value):
        raise UnitError(f"`in {scale}` converts dates; this is {describe(value.unit)}", span,
                        hint="time scales apply to dates such as `2031-04-12 TDB`")
    target = scale.lower()
    return checked(lambda: getattr(value, target), span,
                   strict=target in _TABLED or value.scale in _TABLED)


def _duration(value, span: Span):
    """A duration to add to a date, as astropy's TimeDelta."""
    _, TimeDelta = _time_module()
    if type(value) is not u.Quantity:
        raise UnitError("only an exact duration can be added to a date", span,
                        hint="add the uncertainty to the result instead, or to the date "
                             "as a number of days")
    try:
        return TimeDelta(value.to(u.s))
    except u.UnitConversionError:
        raise UnitError(f"a date and {describe(value.unit)} cannot be added; only a duration "
                        "can", span) from None


def add(x, y, subtract: bool, span: Span) -> Any:
    """``x ± y`` where at least one side is a date."""
    if is_date(x) and is_date(y):
        if not subtract:
            raise UnitError("two dates cannot be added", span,
                            hint="subtract them for the duration between them, or add a "
                                 "duration to one")
        difference = checked(lambda: x - y, span, strict=_tabled(x, y))
        return u.Quantity(difference.to_value(u.d), u.d)
    if is_date(y):
        if subtract:
            raise UnitError("a date cannot be subtracted from a duration", span,
                            hint="write `date - duration`, or `date - date` for a duration")
        x, y = y, x
    step = _duration(y, span)
    try:
        return checked(lambda: x - step if subtract else x + step, span, strict=_tabled(x))
    except ValueError:
        raise DomainError("arrays of dates and durations of different lengths", span) from None


def _tabled(*dates) -> bool:
    return any(d.scale in _TABLED for d in dates)


def refuse_product(x, y, span: Span) -> DomainError:
    """What `date * …`, `date / …` and powers of dates say."""
    return DomainError("a date cannot be multiplied, divided or raised to a power", span,
                       hint="subtract a reference date first (`t - t0` is a duration), or use "
                            "mjd(t) or jd(t) for a day number")


def iso(value) -> list[str] | str:
    """A date in ISO form with its scale (``2031-04-12T06:30:00.000 TDB``)."""
    scale = value.scale.upper()
    text = np.asarray(value.isot)
    if text.ndim == 0:
        return f"{text.item()} {scale}"
    return [f"{t} {scale}" for t in text.ravel()]


def day_offsets(value, origin=None) -> np.ndarray:
    """Dates as days since ``origin`` (default: the first of them), for plotting and sorting."""
    if origin is None:
        origin = value.ravel()[0] if value.shape else value
    return np.asarray((value - origin).to_value(u.d), dtype=float)
