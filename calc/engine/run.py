"""Running compiled cells: the operations a compiled cell is made of, and the cell runner.

Each operation is a small closure made once at compile time (it knows its
place in the source, so a failure names it) and called at every evaluation.
Plain Quantities take fast paths on their float values with cached unit
algebra (:mod:`calc.physics.units`); every other kind of value (uncertain,
samples, records) goes through its own operators (:mod:`calc.engine.values`).

Results are not checked for nan and infinity operation by operation: a cell
runs unchecked and is checked once at the end; only a cell whose result is
not finite runs again with checks on, which puts the error on the operation
that produced it (or lets a written `inf` carry through).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import astropy.units as u
import numpy as np

from ..errors import (
    DomainError,
    InputFailedError,
    InternalError,
    NameResolutionError,
    SheetError,
    Source,
    Span,
    UnitError,
)
from ..language.syntax import CellDef
from ..physics.records import Record, RecordList, is_date
from ..physics.units import (
    angle_equivalencies,
    conversion_scale,
    describe,
    is_one,
    physical_type,
    plain_number_unit,
    quantity,
    simplified,
    unit_power,
    unit_product,
    unit_quotient,
    value_in,
)
from . import uncertain
from .context import context
from .dates import UncertainDate
from .grid import Grid
from .grid import align as grid_align
from .grid import wrap as grid_wrap
from .samples import Samples
from .uncertain import Uncertain
from .values import CONTAINERS, all_finite
from .values import describe as describe_value

_ONE = u.dimensionless_unscaled

#: the environment a compiled cell reads its inputs from: cell name → value
Env = dict[str, Any]


class Const:
    """A compiled value known without evaluating any cell.

    A number as written, with or without its unit (``1.0001``, ``1500 km``), is kept as a float
    and a unit (:meth:`literal`), its Quantity made only if something asks for ``value``: in a
    cell that runs on its scalar kernel nothing does (the benchmark's 2,000-cell sheet made
    6,000 Quantities for nothing).
    """

    __slots__ = ("_value", "number", "unit")

    def __init__(self, value) -> None:
        self._value = value
        self.number: float | None = None
        self.unit: u.UnitBase | None = None

    @classmethod
    def literal(cls, number: float, unit: u.UnitBase) -> Const:
        """A single number with its unit (a plain float: what the scalar kernel uses)."""
        made = cls(None)
        made.number = number
        made.unit = unit
        return made

    @property
    def value(self):
        value = self._value
        if value is None and self.number is not None:
            value = self._value = quantity(self.number, self.unit)
        return value

    def kernel(self) -> tuple | None:
        """Its scalar kernel (below), without making the Quantity of a literal."""
        if self.number is not None:
            return (CONST, self.number, self.unit)
        return scalar_constant(self._value)


Code = Callable[[Env], Any] | Const


@dataclass
class CellProgram:
    """A compiled cell: how to compute it, what it uses, and where it came from."""

    definition: CellDef
    source: Source
    run: Callable[[Env], Any] | None = None
    #: the same computation on floats, for plain single quantities (see "scalar kernels")
    scalar: tuple | None = None
    constant: Any = None
    unit: u.UnitBase | None = None
    unit_span: Span | None = None
    #: `t in TDB`: the time scale the cell's dates are shown in
    time_scale: str | None = None
    #: arithmetic and numpy functions only, on finite constants: with no floating-point event
    #: reported while it runs and no non-finite input, its result needs no scan for nan/inf
    trusted: bool = False
    #: the cells it uses, each with the place of its first use
    deps: dict[str, Span] = field(default_factory=dict)
    #: every name it looked up (cells, constants, units, unknown names): a new cell of one of
    #: these names changes its meaning
    looked_up: set[str] = field(default_factory=set)
    error: SheetError | None = None
    #: the expression is a quantity as written (`70 km / s / Mpc`): its unit stays as written
    literal: bool = False
    #: validity warnings raised while compiling (calls folded into constants)
    warnings: list[str] = field(default_factory=list)

    @property
    def name(self) -> str:
        return self.definition.name


def failed_input(program: CellProgram, failed: list[str], source: Source | None = None
                 ) -> InputFailedError:
    """The error of a cell (or check) whose inputs failed: it names the first of them."""
    more = f" (and {len(failed) - 1} more)" if len(failed) > 1 else ""
    return InputFailedError(f"input `{failed[0]}` failed{more}", failed,
                            span=program.deps[failed[0]], source=source or program.source)


# ---- checks of results ---------------------------------------------------------------


def _finite(result, inputs, span: Span, what: str = "the result"):
    """Refuse nan, and an infinity that no infinite input explains (overflow, x/0)."""
    if not context().checking or isinstance(result, u.UnitBase) or isinstance(result, CONTAINERS) \
            or is_date(result) or type(result) is UncertainDate:
        return result
    value = result.value
    if np.ndim(value) == 0:
        if math.isfinite(value):
            return result
    elif np.isfinite(value).all():
        return result
    if np.isnan(value).any():
        raise DomainError(f"{what} is not a number (nan)", span)
    for q in inputs:
        if not isinstance(q, (u.Quantity, Uncertain, Samples)):
            continue
        if not np.isfinite(q.value).all():
            return result  # an infinity written into the sheet (`inf`) carries through
    raise DomainError(f"{what} overflows: it is larger than a float can hold", span,
                      hint="check the magnitudes and units of the inputs")


def _shape_error(x, y, span: Span) -> DomainError:
    return DomainError(
        f"arrays of different lengths ({np.size(_raw(x))} and {np.size(_raw(y))})", span)


def _raw(x):
    return x if isinstance(x, u.UnitBase) else x.value


def _unit_of(x) -> u.UnitBase:
    return x if isinstance(x, u.UnitBase) else x.unit


def _plain(x) -> bool:
    """A plain Quantity with an ordinary unit: eligible for the fast arithmetic below."""
    return type(x) is u.Quantity and isinstance(x.unit, u.UnitBase)


# ---- operations ------------------------------------------------------------------------


def add_op(span: Span, subtract: bool):
    def fail(x, y):
        if subtract:
            message = f"cannot subtract {describe(_unit_of(y))} from {describe(_unit_of(x))}"
        else:
            message = f"cannot add {describe(_unit_of(x))} and {describe(_unit_of(y))}"
        return UnitError(message, span)

    def apply(x, y):
        if isinstance(x, u.UnitBase) or isinstance(y, u.UnitBase):
            raise fail(x, y)
        if not (_plain(x) and _plain(y)):
            if type(x) is Grid or type(y) is Grid:
                return _on_grid(apply, x, y, span)
            if is_date(x) or is_date(y) or type(x) is UncertainDate \
                    or type(y) is UncertainDate:
                from . import dates

                return dates.add(x, y, subtract, span)
        try:
            if _plain(x) and _plain(y):
                # x's unit wins, as in astropy; y is scaled into it
                scale = conversion_scale(y.unit, x.unit)
                yv = y.value if scale == 1.0 else y.value * scale
                result = quantity(x.value - yv if subtract else x.value + yv, x.unit)
            else:
                try:
                    result = x - y if subtract else x + y
                except u.UnitConversionError:
                    # only angles and plain numbers need the equivalency, and enabling it
                    # costs more than most additions (astropy copies its unit registry)
                    with angle_equivalencies():
                        result = x - y if subtract else x + y
        except u.UnitConversionError:
            raise fail(x, y) from None
        except ValueError:
            raise _shape_error(x, y, span) from None
        except SheetError as err:  # a record refuses arithmetic
            raise err.located(span) from None
        return _finite(result, (x, y), span)

    return apply


def _on_grid(operation: Callable, x, y, span: Span):
    """An operation of two values of which one or both are on axes: on their aligned data."""
    try:
        (a, b), axes = grid_align(x, y)
    except SheetError as err:
        raise err.located(span) from None
    return grid_wrap(operation(a, b), axes)


def mul_op(span: Span, divide: bool):
    def apply(x, y):
        if not _plain(x):
            if type(x) is Grid or type(y) is Grid:
                return _on_grid(apply, x, y, span)
            if is_date(x) or is_date(y) or type(x) is UncertainDate or type(y) is UncertainDate:
                from . import dates

                raise dates.refuse_product(x, y, span)
        elif type(y) is Grid:
            return _on_grid(apply, x, y, span)
        elif is_date(y) or type(y) is UncertainDate:
            from . import dates

            raise dates.refuse_product(x, y, span)
        try:
            if _plain(x):
                if _plain(y):
                    if divide:
                        result = quantity(x.value / y.value, unit_quotient(x.unit, y.unit))
                    else:
                        result = quantity(x.value * y.value, unit_product(x.unit, y.unit))
                elif isinstance(y, u.UnitBase):
                    # a unit in a chain: `3 km`, `1 / s`
                    combined = unit_quotient(x.unit, y) if divide else unit_product(x.unit, y)
                    result = quantity(x.value, combined)
                else:
                    result = x / y if divide else x * y
            else:
                result = x / y if divide else x * y
        except ValueError:
            raise _shape_error(x, y, span) from None
        except ZeroDivisionError:
            raise DomainError("division by zero", span) from None
        except SheetError as err:  # a record refuses arithmetic
            raise err.located(span) from None
        if divide and context().checking and not isinstance(y, u.UnitBase) \
                and not isinstance(result, u.UnitBase):
            if np.any(np.asarray(_raw(y)) == 0) and not np.all(np.isfinite(result.value)):
                raise DomainError("division by zero", span)
        return _finite(result, (x, y), span)

    return apply


def neg_op(span: Span):
    def apply(x):
        if _plain(x):
            return quantity(-x.value, x.unit)
        if type(x) is Grid:   # on the data, so that dates on an axis are refused too
            return Grid(apply(x.data), x.axes)
        if is_date(x) or type(x) is UncertainDate:
            from . import dates

            raise dates.refuse_product(x, x, span)
        try:
            return -x
        except SheetError as err:
            raise err.located(span) from None

    return apply


def power_op(span: Span, exponent_span: Span):
    def apply(base, exponent):
        if type(base) is Grid or type(exponent) is Grid:
            try:
                (b, e), axes = grid_align(base, exponent)
            except SheetError as err:
                raise err.located(span) from None
            return grid_wrap(apply(b, e), axes)
        if is_date(base) or is_date(exponent) or type(base) is UncertainDate \
                or type(exponent) is UncertainDate:
            from . import dates

            raise dates.refuse_product(base, exponent, span)
        if isinstance(base, CONTAINERS) or isinstance(exponent, CONTAINERS):
            record = base if isinstance(base, CONTAINERS) else exponent
            raise DomainError(f"{describe_value(record)} is not a number and has no power",
                              span, hint="use one of its fields")
        if isinstance(base, Uncertain) or isinstance(exponent, Uncertain):
            try:
                return _finite(uncertain.power(base, exponent), (base, exponent), span, "the power")
            except SheetError as err:
                raise err.located(span) from None
            except (u.UnitsError, ValueError) as exc:
                raise UnitError(f"cannot raise to this power: {exc}", span) from None
        try:
            e = value_in(exponent, _ONE)
        except u.UnitConversionError:
            raise UnitError(f"the exponent must be dimensionless, got {describe(exponent.unit)}",
                            exponent_span) from None
        if isinstance(base, Samples) or isinstance(exponent, Samples):
            try:
                result = base ** exponent
            except u.UnitsError:
                raise UnitError("a quantity with a unit can be raised only to a single number",
                                exponent_span) from None
            except ValueError:
                raise _shape_error(base, exponent, span) from None
            return _finite(result, (base, exponent), span, "the power")
        try:
            if is_one(base.unit):
                result = quantity(np.power(base.value, e), _ONE)
            else:
                if np.ndim(e) != 0:
                    raise UnitError("a quantity with a unit can be raised only to a single number",
                                    exponent_span)
                p = float(e)
                result = (quantity(np.power(base.value, p), unit_power(base.unit, p))
                          if _plain(base) else base ** p)
        except OverflowError:
            raise DomainError("the power overflows", span) from None
        except ZeroDivisionError:
            raise DomainError("zero to a negative power", span) from None
        except ValueError:
            raise _shape_error(base, exponent, span) from None
        if context().checking and np.isnan(result.value).any() \
                and np.any(np.asarray(base.value) < 0):
            raise DomainError("a negative number to a fractional power", span)
        return _finite(result, (base, exponent), span, "the power")

    return apply


def field_op(parts: tuple[str, ...], span: Span):
    def apply(value):
        for depth, name in enumerate(parts[1:], start=1):
            if not isinstance(value, Record):
                what = "an array of records" if isinstance(value, RecordList) else "a quantity"
                raise NameResolutionError(f"`{'.'.join(parts[:depth])}` is {what}, which has no "
                                          f"field `{name}`", span)
            try:
                value = value.field(name)
            except SheetError as err:
                raise err.located(span) from None
        return value

    return apply


# ---- scalar kernels --------------------------------------------------------------------------
# The arithmetic of a cell whose inputs are plain single quantities, on floats. A kernel
# returns (value, unit): the value a float, the unit found with the cached unit algebra, so
# a cell makes one Quantity at its end instead of one per operation. Each kernel does the
# float operations of the operation above it in the same order, so the result is the same
# to the last bit; whatever it does not handle (a value of another kind, an error to report,
# a result that is not finite) makes it give up (raise one of GIVE_UP), and the cell runs
# through its operations as usual. Kernels are used only while results are not checked
# operation by operation.


class NotScalar(Exception):
    """A kernel met a value that is not a plain single quantity. (Raised as a new instance each
    time: an instance raised again would keep every traceback, and the values in its frames.)"""


#: what a kernel raises to give up (the ordinary operations then say what is wrong, if anything)
GIVE_UP = (NotScalar, ArithmeticError, ValueError, u.UnitsError)
_item = np.ndarray.item  # the float of a 0-d array, far cheaper than Quantity.value
_QUANTITY = u.Quantity

# A kernel is a nested tuple, read by scalar_value: cheaper to make at compile time than a
# tree of closures, which matters as much as its speed, since most cells run once.
#   (CONST, value, unit)       a constant single quantity
#   (UNIT, unit)               a unit written as an operand (`(1 + x) AU`)
#   (REF, name)                a cell
#   (MUL | DIV | ADD | SUB, a, b)
#   (NEG, a)
#   (POW, a, e, p)             a ^ e for a written dimensionless exponent (e as np.float64,
#                              p as float: what power_op computes with)
CONST, UNIT, REF, MUL, DIV, ADD, SUB, NEG, POW = range(9)
Kernel = tuple

def scalar_constant(value) -> Kernel | None:
    """The kernel of a constant: a plain single quantity or a unit; None for anything else."""
    if type(value) is _QUANTITY and value.ndim == 0:
        return (CONST, _item(value), value.unit)
    if isinstance(value, u.UnitBase):
        return (UNIT, value)
    return None


def scalar_power(base: Kernel, exponent: Kernel) -> Kernel | None:
    if exponent[0] != CONST or not is_one(exponent[2]) or base[0] == UNIT:
        return None
    e = np.float64(exponent[1])  # what value_in gives power_op
    return (POW, base, e, float(e))


def scalar_value(kernel: Kernel, env: Env) -> tuple[Any, u.UnitBase]:
    """(value, unit) of a kernel, with the float operations of the operations it stands for
    (mul_op, add_op, neg_op, power_op on plain quantities) in the same order."""
    op = kernel[0]
    if op == REF:
        v = env[kernel[1]]
        if type(v) is not _QUANTITY or v.ndim:
            raise NotScalar
        return _item(v), v.unit
    if op == CONST:
        return kernel[1], kernel[2]
    if op <= DIV:  # MUL, DIV
        left = kernel[1]
        if left[0] == UNIT:
            raise NotScalar  # a unit times a value: astropy's own arithmetic, as in mul_op
        av, au = scalar_value(left, env)
        right = kernel[2]
        if right[0] == UNIT:
            return av, (unit_product(au, right[1]) if op == MUL else unit_quotient(au, right[1]))
        bv, bu = scalar_value(right, env)
        if op == MUL:
            return av * bv, unit_product(au, bu)
        return av / bv, unit_quotient(au, bu)
    if op <= SUB:  # ADD, SUB
        left, right = kernel[1], kernel[2]
        if left[0] == UNIT or right[0] == UNIT:
            raise NotScalar
        xv, xu = scalar_value(left, env)
        yv, yu = scalar_value(right, env)
        scale = conversion_scale(yu, xu)
        if scale != 1.0:
            yv = yv * scale
        return (xv + yv if op == ADD else xv - yv), xu
    if op == NEG:
        v, unit = scalar_value(kernel[1], env)
        return -v, unit
    if op == POW:
        bv, bu = scalar_value(kernel[1], env)
        if is_one(bu):
            return np.power(bv, kernel[2]), _ONE
        p = kernel[3]
        return np.power(bv, p), unit_power(bu, p)
    raise NotScalar


def finish_scalar(program: CellProgram, value, unit: u.UnitBase):
    """:func:`finish` for a kernel's result: the cell's Quantity, or None when the ordinary
    path must run (a conversion that fails, a result that is not finite)."""
    if program.unit is not None:
        try:
            scale = conversion_scale(unit, program.unit)
        except u.UnitConversionError:
            return None
        unit = program.unit
    elif plain_number_unit(unit):
        scale = conversion_scale(unit, _ONE)
        unit = _ONE
    else:
        scale = 1.0
        simpler = None if program.literal else simplified(unit)
        if simpler is not None:   # as normalise does: `AU km` → `AU^2`
            return None
    if scale != 1.0:
        value = value * scale
    if not math.isfinite(value):
        return None
    return quantity(value, unit)


# ---- conversions at the end of a cell ------------------------------------------------------


def convert(value, unit: u.UnitBase, span: Span):
    """A value in ``unit`` (angles and plain numbers interconvert)."""
    try:
        scale = conversion_scale(value.unit, unit)
    except u.UnitConversionError:
        raise UnitError(f"cannot show {describe(value.unit)} in {describe(unit)}", span,
                        hint=f"the cell's dimension is {physical_type(value.unit)}") from None
    return rescaled(value, scale, unit)


def rescaled(value, scale: float, unit: u.UnitBase):
    """A leaf multiplied by ``scale`` and labelled ``unit`` (a value on axes keeps them)."""
    if type(value) is Grid:
        return Grid(rescaled(value.data, scale, unit), value.axes)
    if isinstance(value, Uncertain):
        return value.scaled(scale, unit)
    if isinstance(value, Samples):
        return Samples(quantity(value.data.value * scale, unit))
    return quantity(value.value if scale == 1.0 else value.value * scale, unit)


def normalise(value, simplify: bool = True):
    """Collapse a scaled dimensionless unit (`km / m`) into a plain number and, with
    ``simplify``, a product of several units of one dimension into one of them (`AU s / m`
    → `s`)."""
    unit = value.unit
    if plain_number_unit(unit):
        return rescaled(value, conversion_scale(unit, _ONE), _ONE)
    if simplify:
        simpler = simplified(unit)
        if simpler is not None:
            if plain_number_unit(simpler):
                simpler = _ONE
            scale = conversion_scale(unit, simpler) if simpler.scale == 1 else None
            if scale is not None:
                return rescaled(value, scale, simpler)
            return rescaled(value, simpler.scale, u.Unit(simpler / simpler.scale))
    return value


def finish(program: CellProgram, value):
    """Conversion into the cell's `in` unit, or collapse of scaled dimensionless units."""
    if isinstance(value, u.UnitBase):  # pragma: no cover - the grammar cannot produce it
        raise UnitError("a unit needs a number before it", program.definition.expr_span)
    if program.time_scale is not None:
        from .dates import in_scale

        span = program.unit_span or program.definition.span
        if type(value) is Grid:
            return Grid(in_scale(value.data, program.time_scale, span), value.axes)
        return in_scale(value, program.time_scale, span)
    if is_date(value) or type(value) is UncertainDate \
            or (type(value) is Grid and is_date(value.data)):
        if program.unit is not None and program.definition.unit is not None:
            raise UnitError("a date has no unit; `in` takes a time scale for dates "
                            "(`t in TDB`)", program.unit_span)
        return value
    if isinstance(value, CONTAINERS):
        if program.unit is not None and program.definition.unit is not None:
            raise UnitError("a record has no unit to show it in; convert its fields instead",
                            program.unit_span)
        if isinstance(value, Record):
            return value.labelled(program.name)
        return value
    if program.unit is not None:
        return convert(value, program.unit, program.unit_span or program.definition.span)
    return normalise(value, simplify=not program.literal)


def unit_range_error(definition: CellDef) -> UnitError:
    # astropy decomposes units into SI with a float scale: Msun^11 overflows it
    return UnitError("a unit's size in SI is outside the range a float can hold",
                     definition.expr_span,
                     hint="rescale the inputs or use fewer powers of large units")


def run_cell(program: CellProgram, env: Env):
    """Evaluate a compiled cell with its inputs in ``env``; raises SheetError."""
    evaluation = context()
    if program.constant is not None:
        if program.trusted:
            evaluation.nonfinite.discard(program.name)
        else:
            evaluation.nonfinite.add(program.name)
        return program.constant
    kernel = program.scalar
    try:
        if kernel is not None and not evaluation.checking:
            try:
                value, unit = scalar_value(kernel, env)
            except GIVE_UP:
                pass
            else:
                result = finish_scalar(program, value, unit)
                if result is not None:
                    evaluation.nonfinite.discard(program.name)
                    return result
        run = program.run
        if run is None:  # pragma: no cover - a program is a constant or has code to run
            raise InternalError(f"cell `{program.name}` has no code to run")
        events = evaluation.fp_events
        value = finish(program, run(env))
        if program.trusted and evaluation.fp_events == events and evaluation.sampling is None \
                and not evaluation.nonfinite.intersection(program.deps):
            # finite inputs and no overflow, invalid operation or division by zero: finite
            evaluation.nonfinite.discard(program.name)
            return value
        if not all_finite(value):
            value = checked(lambda: finish(program, run(env)))
            evaluation.nonfinite.add(program.name)
        else:
            evaluation.nonfinite.discard(program.name)
        return value
    except SheetError as err:
        raise err.located(program.definition.span, program.source) from None
    except (u.UnitScaleError, OverflowError):
        raise unit_range_error(program.definition).located(
            program.definition.span, program.source) from None


def checked(compute: Callable[[], Any]):
    """Run ``compute`` with every operation checking its result."""
    with context().checks_on():
        return compute()
