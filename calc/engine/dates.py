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
    # UT1 (and polar motion) beyond the table's last entry: an error, never an extrapolation
    iers.conf.iers_degraded_accuracy = "error"
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
        detail = str(exc).strip().splitlines()[-1]
        reason = detail.rsplit('"', 2)[-2] if detail.count('"') >= 2 else detail
        raise DomainError(f"not a valid date ({reason})", node.span,
                          hint="write YYYY-MM-DD or YYYY-MM-DDThh:mm:ss with a scale") from None
    except Warning as exc:
        if "dubious year" in str(exc):
            raise DomainError("UTC is not known at this date: leap seconds are announced only "
                              "months ahead, and UTC is defined from 1960 on", node.span,
                              hint="write future and historical dates in TT or TDB") from None
        raise DomainError(f"the date is outside the range its time scale's tables cover: "
                          f"{exc}", node.span) from None
    if needs_tables:
        if scale == "ut1":
            _within_ut1_table(time, node.span)
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
        if "dubious year" in str(exc):
            raise DomainError("UTC is not known at this date: leap seconds are announced only "
                              "months ahead, and UTC is defined from 1960 on", span,
                              hint="write future and historical dates in TT or TDB") from None
        raise DomainError(f"the date is outside the range of the time-scale tables astropy "
                          f"ships ({exc})", span) from None
    except Exception as exc:  # noqa: BLE001 - astropy's IERS range errors and the like
        if "IERS" in type(exc).__name__ or "IERS" in str(exc):
            raise DomainError("UT1 is known only within the IERS table astropy ships; this "
                              "date is outside it", span,
                              hint="use TT or TDB, or a date the table covers") from None
        raise DomainError(f"the time scale conversion failed: {exc}", span) from None


def in_scale(value, scale: str, span: Span):
    """A date (or dates) in another time scale: `t in TDB`."""
    if is_uncertain_date(value):
        return UncertainDate(in_scale(value.base, scale, span), value.offset)
    if not is_date(value):
        raise UnitError(f"`in {scale}` converts dates; this is {describe(value.unit)}", span,
                        hint="time scales apply to dates such as `2031-04-12 TDB`")
    target = scale.lower()
    if "ut1" in (target, value.scale):
        _within_ut1_table(value, span)
    return checked(lambda: getattr(value, target), span,
                   strict=target in _TABLED or value.scale in _TABLED)


def _within_ut1_table(value, span: Span) -> None:
    """UT1 − UTC comes from the IERS table astropy ships: a date outside it is an error
    (astropy would hold the table's last value without a word)."""
    from astropy.utils import iers

    table = iers.earth_orientation_table.get()
    first, last = float(table["MJD"][0].value), float(table["MJD"][-1].value)
    mjd = np.asarray(value.tt.mjd)
    if np.any(mjd < first) or np.any(mjd > last):
        raise DomainError(f"UT1 is known only from MJD {first:.0f} to {last:.0f} (the IERS "
                          "table astropy ships); this date is outside it", span,
                          hint="use TT or TDB, or a date the table covers")


def _duration(value, span: Span):
    """A duration to add to a date, as astropy's TimeDelta."""
    _, TimeDelta = _time_module()
    if type(value) is not u.Quantity:
        raise UnitError("only an exact duration can be added to a date", span,
                        hint="add the uncertainty to the result instead, or to the date "
                             "as a number of days")
    try:
        seconds = value.to(u.s)
    except u.UnitConversionError:
        raise UnitError(f"a date and {describe(value.unit)} cannot be added; only a duration "
                        "can", span) from None
    if not np.all(np.isfinite(seconds.value)):
        # (1e308 d is infinite in seconds: the date would have no day and no time)
        raise DomainError("a duration added to a date must be finite in seconds", span,
                          hint="the largest float is 1.8e308 s (about 2e303 days)")
    return TimeDelta(seconds)


def add(x, y, subtract: bool, span: Span) -> Any:
    """``x ± y`` where at least one side is a date."""
    if is_uncertain_date(x) or is_uncertain_date(y):
        return add_uncertain(x, y, subtract, span)
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
        moved = checked(lambda: x - step if subtract else x + step, span, strict=_tabled(x))
    except ValueError:
        raise DomainError("arrays of dates and durations of different lengths", span) from None
    if not np.all(np.isfinite(moved.jd1 + moved.jd2)):
        # (astropy keeps a date as two doubles of days; a sum far beyond them is nan)
        raise DomainError("the date falls beyond what a time scale can hold", span,
                          hint="keep durations well below 1e300 days")
    return moved


def _tabled(*dates) -> bool:
    return any(d.scale in _TABLED for d in dates)


def refuse_product(x, y, span: Span) -> DomainError:
    """What `date * …`, `date / …` and powers of dates say."""
    return DomainError("a date cannot be multiplied, divided or raised to a power", span,
                       hint="subtract a reference date first (`t - t0` is a duration), or use "
                            "mjd(t) or jd(t) for a day number")


#: The Julian dates ERFA's calendar takes (eraJd2cal: from 4800 BC to JD 1e9).
CALENDAR_JD = (-68569.5, 1e9)


def _julian_date(jd: float, scale: str) -> str:
    """A date outside the calendar as a Julian date (in powers of ten where a day's
    fraction no longer shows)."""
    return f"JD {jd:.6f} {scale}" if abs(jd) < 1e15 else f"JD {jd:.9e} {scale}"


def iso(value, precision: int = 3) -> list[str] | str:
    """A date in ISO form with its scale (``2031-04-12T06:30:00.000 TDB``); ``precision``
    digits of the second (9 in JSON: nanoseconds)."""
    scale = value.scale.upper()
    jd = np.asarray(value.jd)

    def julian_dates() -> list[str] | str:
        if jd.ndim == 0:
            return _julian_date(float(jd), scale)
        return [_julian_date(float(j), scale) for j in jd.ravel()]

    if not np.all((jd >= CALENDAR_JD[0]) & (jd <= CALENDAR_JD[1])):
        # outside ERFA's calendar (eraJd2cal; beyond it eraD2dtf writes nonsense, or fails)
        return julian_dates()
    if precision != value.precision:
        value = value.copy()
        value.precision = precision
    try:
        text = np.asarray(value.isot)
    except Exception:  # noqa: BLE001 - ERFA cannot write years outside its calendar range
        return julian_dates()
    if text.ndim == 0:
        return f"{text.item()} {scale}"
    return [f"{t} {scale}" for t in text.ravel()]


def day_offsets(value, origin=None) -> np.ndarray:
    """Dates as days since ``origin`` (default: the first of them), for plotting and sorting."""
    if origin is None:
        origin = value.ravel()[0] if value.shape else value
    return np.asarray((value - origin).to_value(u.d), dtype=float)


class UncertainDate:
    """A date with a standard uncertainty (`2031-04-12T06:30 TDB ± 2 s`): an exact ``base``
    date and an uncertain ``offset`` in seconds (first order: nominal 0 s and the inputs'
    contributions; under Monte Carlo: samples). Arithmetic moves the offset, so a duration
    between two uncertain dates carries both their uncertainties."""

    __array_ufunc__ = None
    __slots__ = ("base", "offset")

    def __init__(self, base, offset) -> None:
        self.base = base
        self.offset = offset

    @property
    def shape(self) -> tuple[int, ...]:
        return tuple(self.base.shape)

    @property
    def scale(self) -> str:
        return self.base.scale

    def nominal_date(self):
        """The date at the offset's nominal value (its sample mean under Monte Carlo)."""
        from .samples import Samples
        from .uncertain import Uncertain

        offset = self.offset
        if isinstance(offset, Uncertain):
            seconds = offset.nominal.to_value(u.s)
        elif isinstance(offset, Samples):
            seconds = np.mean(offset.data.to_value(u.s), axis=0)
        else:
            seconds = offset.to_value(u.s)
        return self.base + seconds * u.s

    def moved(self, seconds):
        """The exact date ``seconds`` after the base (numerical differentiation, samples)."""
        return self.base + np.asarray(seconds) * u.s

    def __repr__(self) -> str:
        return f"<UncertainDate {self.base} + {self.offset!r}>"


def is_uncertain_date(value) -> bool:
    return type(value) is UncertainDate


def uncertain_date(base, sigma, make_offset, span: Span) -> UncertainDate:
    """`date ± σ`: the offset is an input of nominal 0 s and standard uncertainty σ."""
    try:
        seconds = sigma.to(u.s)
    except (u.UnitConversionError, AttributeError):
        raise UnitError(f"the uncertainty of a date is a duration, got {describe(sigma.unit)}",
                        span) from None
    return UncertainDate(base, make_offset(u.Quantity(np.zeros(base.shape), u.s), seconds))


def add_uncertain(x, y, subtract: bool, span: Span):
    """Arithmetic with an uncertain date on one side (or both)."""
    x_date = is_uncertain_date(x) or is_date(x)
    y_date = is_uncertain_date(y) or is_date(y)
    if x_date and y_date:
        if not subtract:
            raise UnitError("two dates cannot be added", span,
                            hint="subtract them for the duration between them, or add a "
                                 "duration to one")
        base_x, offset_x = (x.base, x.offset) if is_uncertain_date(x) else (x, 0 * u.s)
        base_y, offset_y = (y.base, y.offset) if is_uncertain_date(y) else (y, 0 * u.s)
        return ((add(base_x, base_y, True, span) + offset_x) - offset_y).to(u.d)
    if y_date:
        if subtract:
            raise UnitError("a date cannot be subtracted from a duration", span,
                            hint="write `date - duration`, or `date - date` for a duration")
        x, y = y, x
    step = _as_seconds(y, span)
    return UncertainDate(x.base, x.offset - step if subtract else x.offset + step)


def _as_seconds(value, span: Span):
    try:
        return value.to(u.s)
    except (u.UnitConversionError, AttributeError):
        raise UnitError(f"a date and {describe(getattr(value, 'unit', u.one))} cannot be added; "
                        "only a duration can", span) from None
