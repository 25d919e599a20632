"""Records: named fields of quantities (orbit elements, periapsis budgets) and lists of them.

A field may also hold a date (an astropy Time: an orbit's t_peri, a state's t).

A record is a value of a cell like a quantity is, but it is no number: its
fields are read with `.` (`venus.a`, `budget.total`) and functions that
expect records take it whole. Arithmetic on a record is an error that says
so. A record remembers the cell it was stored in (its label), so a budget
over `[venus, earth]` can name its terms after those cells.
"""

from __future__ import annotations

import sys

import astropy.units as u
import numpy as np
from astropy.units import Quantity

from ..errors import DomainError, NameResolutionError
from .units import close_matches, did_you_mean


class Record:
    """An ordered, immutable set of named quantities."""

    # numpy and astropy defer to our reflected operators, which refuse arithmetic
    __array_ufunc__ = None
    __slots__ = ("kind", "fields", "label")

    def __init__(self, kind: str, fields: dict[str, u.Quantity], label: str | None = None):
        self.kind = kind
        self.fields = dict(fields)
        self.label = label

    def field(self, name: str) -> u.Quantity:
        try:
            return self.fields[name]
        except KeyError:
            options = close_matches(name, list(self.fields))
            hint = did_you_mean(options) or f"its fields are {', '.join(self.fields)}"
            raise NameResolutionError(f"{self.describe()} has no field `{name}`",
                                      hint=hint) from None

    def labelled(self, label: str) -> Record:
        return self if self.label == label else Record(self.kind, self.fields, label)

    def describe(self) -> str:
        return f"the {self.kind} record" + (f" `{self.label}`" if self.label else "")

    def same_as(self, other) -> bool:
        if not isinstance(other, Record) or other.kind != self.kind:
            return False
        if list(other.fields) != list(self.fields):
            return False
        return all(_same_field(a, b) for a, b in zip(self.fields.values(), other.fields.values()))

    def _refuse(self, *_):
        raise DomainError(f"{self.describe()} is not a number; use its fields, "
                          f"such as `{self.label or 'x'}.{next(iter(self.fields), 'a')}`")

    __add__ = __radd__ = __sub__ = __rsub__ = _refuse
    __mul__ = __rmul__ = __truediv__ = __rtruediv__ = __pow__ = __rpow__ = _refuse
    __neg__ = __pos__ = __abs__ = _refuse

    def __repr__(self) -> str:
        inner = ", ".join(f"{k}={v}" for k, v in self.fields.items())
        return f"<{self.kind} {self.label or ''}({inner})>"


def _same_field(a, b) -> bool:
    """Equal quantities (same unit and values), or equal dates (same scale and instants)."""
    if is_date(a) or is_date(b):
        return is_date(a) and is_date(b) and a.scale == b.scale \
            and a.shape == b.shape and bool(np.all(a.jd1 == b.jd1) and np.all(a.jd2 == b.jd2))
    return a.unit == b.unit and np.array_equal(a.value, b.value)


class RecordList:
    """An array of records, as written `[venus, earth, mars]`."""

    __array_ufunc__ = None
    __slots__ = ("items",)

    def __init__(self, items: tuple[Record, ...]):
        self.items = tuple(items)

    def same_as(self, other) -> bool:
        return isinstance(other, RecordList) and len(other.items) == len(self.items) and all(
            a.same_as(b) and a.label == b.label for a, b in zip(self.items, other.items))

    def _refuse(self, *_):
        raise DomainError("an array of records is not a number")

    __add__ = __radd__ = __sub__ = __rsub__ = _refuse
    __mul__ = __rmul__ = __truediv__ = __rtruediv__ = __pow__ = __rpow__ = _refuse
    __neg__ = __pos__ = __abs__ = _refuse

    def __len__(self) -> int:
        return len(self.items)

    def __repr__(self) -> str:
        return "[" + ", ".join(r.label or r.kind for r in self.items) + "]"


RECORD_TYPES = (Record, RecordList)

#: kinds of value that are never dates (checked first: most values are quantities)
_NEVER_DATES = frozenset({Quantity, Record, RecordList, float, int, str, type(None)})


def is_record(value) -> bool:
    return isinstance(value, RECORD_TYPES)


def is_date(value) -> bool:
    """Whether a value is a date (an astropy Time). astropy.time is imported only by sheets
    that use dates, so a value cannot be one while the module is not loaded."""
    if type(value) in _NEVER_DATES:   # the common case, without astropy's slower isinstance
        return False
    module = sys.modules.get("astropy.time")
    return module is not None and isinstance(value, module.Time)
