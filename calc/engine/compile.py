"""From nodes to values: each cell is compiled once into a closure over its inputs.

Compiling resolves every name (:mod:`calc.scope`), records the cells a cell
uses, folds everything that does not depend on a cell into a constant (so
``9.81 m s^-2`` costs nothing at evaluation time), and wraps each operation so
that a failure names its own place in the source. Evaluating a cell is then a
call of its closure with the values of the cells it uses.

Values are astropy Quantities (dimensionless ones for plain numbers). Inside
a unit chain a bare astropy unit may appear as an intermediate value; it is
always multiplied into a Quantity before the chain ends.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from operator import itemgetter

import astropy.units as u
import numpy as np

from ..errors import (
    ArgumentError,
    DomainError,
    InputError,
    InputFailedError,
    NameResolutionError,
    SheetError,
    Source,
    Span,
    UnitError,
)
from ..language.scope import PPN_PARAMETERS, Scope
from ..language.syntax import (
    ArrayLiteral,
    BinaryOp,
    Call,
    CellDef,
    Chain,
    Dotted,
    Group,
    Name,
    NamePower,
    Number,
    Percent,
    PercentUnit,
    PlusMinus,
    Power,
    UnaryOp,
    UnitProduct,
)
from ..physics import functions
from ..physics.environment import _start_warnings, _stop_warnings
from ..physics.records import RECORD_TYPES, Record, RecordList
from ..physics.units import (
    angle_equivalencies,
    close_matches,
    conversion_scale,
    describe,
    did_you_mean,
    is_one,
    physical_type,
    plain_number_unit,
    quantity,
    unit_power,
    unit_product,
    unit_quotient,
    value_in,
)
from . import uncertain
from .uncertain import Uncertain

#: Deepest nesting of operations in one expression (keeps recursion far from Python's limit).
MAX_EXPRESSION_DEPTH = 150

_ONE = u.dimensionless_unscaled


class Const:
    """A compiled value known without evaluating any cell."""

    __slots__ = ("value",)

    def __init__(self, value) -> None:
        self.value = value


Code = Callable[[dict], object] | Const


@dataclass
class CellProgram:
    """A compiled cell: how to compute it, what it uses, and where it came from."""

    definition: CellDef
    source: Source
    run: Callable[[dict], u.Quantity] | None = None
    constant: u.Quantity | None = None
    unit: u.UnitBase | None = None
    unit_span: Span | None = None
    deps: dict[str, Span] = field(default_factory=dict)
    looked_up: set[str] = field(default_factory=set)
    error: SheetError | None = None
    #: validity warnings raised while compiling (calls folded into constants)
    warnings: list[str] = field(default_factory=list)

    @property
    def name(self) -> str:
        return self.definition.name


# ---- operations ------------------------------------------------------------


class _Checking:
    """Whether operations check their results for nan and infinity.

    Checking every operation of a million-element array costs as much as the
    arithmetic, so cells run unchecked; only a cell whose result is not finite
    runs again with checks on, which puts the error on the operation that
    produced it (or lets a written `inf` carry through).
    """

    on = False


_checking = _Checking()


def all_finite(value) -> bool:
    if isinstance(value, RECORD_TYPES):
        return True  # each field was checked when the record was made
    v = value.value
    return math.isfinite(v) if np.ndim(v) == 0 else bool(np.isfinite(v).all())


def _finite(result, inputs, span: Span, what: str = "the result"):
    """Refuse nan, and an infinity that no infinite input explains (overflow, x/0)."""
    if not _checking.on or isinstance(result, u.UnitBase):
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
        if not isinstance(q, u.UnitBase) and not np.isfinite(q.value).all():
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
        try:
            if _plain(x) and _plain(y):
                # x's unit wins, as in astropy; y is scaled into it
                scale = conversion_scale(y.unit, x.unit)
                yv = y.value if scale == 1.0 else y.value * scale
                result = quantity(x.value - yv if subtract else x.value + yv, x.unit)
            else:
                with angle_equivalencies():
                    result = x - y if subtract else x + y
        except u.UnitConversionError:
            raise fail(x, y) from None
        except ValueError:
            raise _shape_error(x, y, span) from None
        return _finite(result, (x, y), span)

    return apply


def mul_op(span: Span, divide: bool):
    def apply(x, y):
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
        if divide and _checking.on and not isinstance(y, u.UnitBase) \
                and not isinstance(result, u.UnitBase):
            if np.any(np.asarray(y.value) == 0) and not np.all(np.isfinite(result.value)):
                raise DomainError("division by zero", span)
        return _finite(result, (x, y), span)

    return apply


def neg_op(span: Span):
    def apply(x):
        return quantity(-x.value, x.unit) if _plain(x) else -x

    return apply


def power_op(span: Span, exponent_span: Span):
    def apply(base, exponent):
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
        if _checking.on and np.isnan(result.value).any() and np.any(np.asarray(base.value) < 0):
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


def convert(value: u.Quantity, unit: u.UnitBase, span: Span) -> u.Quantity:
    try:
        if isinstance(value, Uncertain):
            return value.to(unit)
        return quantity(value_in(value, unit), unit)
    except u.UnitConversionError:
        raise UnitError(f"cannot show {describe(value.unit)} in {describe(unit)}", span,
                        hint=f"the cell's dimension is {physical_type(value.unit)}") from None


def normalise(value: u.Quantity) -> u.Quantity:
    """Collapse a scaled dimensionless unit (`km / m`) into a plain number."""
    if plain_number_unit(value.unit):
        if isinstance(value, Uncertain):
            return value.to(_ONE)
        return quantity(value_in(value, _ONE), _ONE)
    return value


# ---- compiling ----------------------------------------------------------------


def _lift(fn, *codes: Code) -> Code:
    """Apply ``fn`` to compiled operands: folded now when all are constants."""
    if len(codes) == 2:
        a, b = codes
        if type(a) is Const and type(b) is Const:
            return Const(fn(a.value, b.value))
        if type(a) is Const:
            av = a.value
            return lambda env: fn(av, b(env))
        if type(b) is Const:
            bv = b.value
            return lambda env: fn(a(env), bv)
        return lambda env: fn(a(env), b(env))
    if all(type(c) is Const for c in codes):
        return Const(fn(*(c.value for c in codes)))
    if len(codes) == 1:
        (a,) = codes
        return lambda env: fn(a(env))
    runners = [(lambda env, v=c.value: v) if isinstance(c, Const) else c for c in codes]
    return lambda env: fn(*(r(env) for r in runners))


def _leading_number(node):
    """For a unit chain that starts with a number (`0.001 Msun`, `4e-4 deg / yr`): that number
    and the same expression with 1 in its place; None for anything else (a bare number too)."""
    if isinstance(node, Chain) and isinstance(node.head, (Number, Percent)):
        return node.head, Chain(Number(1.0, "1", node.head.span), node.items, node.span)
    if isinstance(node, BinaryOp) and node.op in "*/":
        inner = _leading_number(node.left)
        if inner is not None:
            number, rest = inner
            return number, BinaryOp(node.op, rest, node.right, node.span)
    return None


def _input_code(ids: tuple, nominal_value: u.Quantity, sigma_value: u.Quantity):
    value_of = uncertain.mode.value
    return lambda env: value_of(ids, nominal_value, sigma_value)


_NUMBERS: dict[float, u.Quantity] = {}


def _number(value: float) -> u.Quantity:
    """The dimensionless Quantity of a literal; shared, as values are never changed in place."""
    q = _NUMBERS.get(value)
    if q is None:
        q = _NUMBERS[value] = u.Quantity(value)
    return q


def _uncertain_array(values, spans) -> Uncertain:
    """An array literal whose items carry uncertainties: one array of contributions per input."""
    unit = values[0].unit
    nominal_values, parts = [], {}
    for index, (value, span) in enumerate(zip(values, spans)):
        if np.ndim(value.value) != 0:
            raise DomainError("arrays hold single values, not arrays", span)
        try:
            scale = conversion_scale(value.unit, unit)
        except u.UnitConversionError:
            raise UnitError(f"array items must share a dimension: {describe(value.unit)} "
                            f"is not {describe(unit)}", span) from None
        nominal_values.append(float(value.value) * scale)
        for key, part in getattr(value, "parts", {}).items():
            column = parts.setdefault(key, np.zeros(len(values)))
            column[index] += float(part) * scale
    return Uncertain(quantity(np.array(nominal_values), unit), parts)


def _sampled_array(values, spans) -> u.Quantity:
    """Under Monte Carlo: items that are sample columns (N, 1) make an (N, n) array."""
    unit = values[0].unit
    n = uncertain.mode.samples
    columns = []
    for value, span in zip(values, spans):
        try:
            column = np.asarray(value_in(value, unit), dtype=float)
        except u.UnitConversionError:
            raise UnitError(f"array items must share a dimension: {describe(value.unit)} "
                            f"is not {describe(unit)}", span) from None
        columns.append(np.broadcast_to(column.reshape(-1, 1) if column.ndim == 2 else column,
                                       (n, 1)))
    return quantity(np.concatenate(columns, axis=1), unit)


def _record_list(values, spans) -> RecordList:
    for value, span in zip(values, spans):
        if not isinstance(value, Record):
            raise DomainError("an array of records holds only records", span)
    return RecordList(tuple(values))


def _is_unit_item(node) -> bool:
    return isinstance(node, (Name, NamePower)) or (
        isinstance(node, Power) and isinstance(node.base, Name))


class _Compiler:
    def __init__(self, scope: Scope, source: Source, cell_name: str = "") -> None:
        self.scope = scope
        self.source = source
        self.cell_name = cell_name
        self.inputs_made = 0
        self.deps: dict[str, Span] = {}
        self.looked_up: set[str] = set()

    # -- helpers
    def text(self, start: Span, end: Span | None = None) -> str:
        return self.source.between(start, end)

    def cell_ref(self, name: str, span: Span) -> Code:
        self.deps.setdefault(name, span)
        return itemgetter(name)

    def resolved(self, resolved, span: Span) -> Code:
        if resolved.kind == "unit":
            return Const(resolved.unit)
        if resolved.kind == "cell":
            return self.cell_ref(resolved.cell, span)
        ids = self.scope.constant_input(resolved.name) if resolved.name else None
        if ids is not None:
            return _input_code(ids, resolved.value, self.scope.inputs.inputs[ids[0]].sigma)
        return Const(resolved.value)

    def imported(self, node: Dotted, depth: int) -> Code:
        """`ns.name` (and `ns.name.field`): a cell of an imported sheet."""
        namespace, name, *fields = node.parts
        self.looked_up.add(namespace)
        sheet = self.scope.namespaces[namespace]
        if name not in sheet:
            options = close_matches(name, sheet.names())
            raise NameResolutionError(f"{sheet.source.label} has no cell `{name}`", node.span,
                                      hint=did_you_mean([f"{namespace}.{o}" for o in options]))
        cell = sheet.cell(name)
        if cell.error is not None:
            raise InputFailedError(f"`{namespace}.{name}` failed in {sheet.source.label}: "
                                   f"{cell.error.message}", [f"{namespace}.{name}"],
                                   span=node.span)
        raw = cell.raw
        if uncertain.is_uncertain(raw):
            # uncertain: read at run time, so that Monte Carlo sees the imported samples
            values, samples = sheet._values, sheet._mc_values

            def code(env, name=name):
                return samples[name] if uncertain.mode.monte_carlo else values[name]
        else:
            code = Const(raw)
        if fields:
            return _lift(field_op((f"{namespace}.{name}", *fields), node.span), code)
        return code

    def plus_minus(self, node: PlusMinus, depth: int) -> Code:
        """`value ± sigma`: an independent input (never folded, so Monte Carlo can sample it)."""
        value_node, sigma_node = node.value, node.sigma
        scale = None
        leading = _leading_number(sigma_node)
        if isinstance(value_node, (Number, Percent)) and leading is not None:
            # `1.438 ± 0.001 Msun`, `1.805 ± 0.0004 deg / yr`: the units after the
            # uncertainty belong to both numbers
            number, unit_only = leading
            units = self.expr(unit_only, depth + 1)
            if not isinstance(units, Const) or not isinstance(units.value, u.Quantity):
                raise UnitError("write the units after `±` as units only (or put the value "
                                "and its uncertainty in brackets)", sigma_node.span)
            scale = units.value
            sigma_node = number
        value = self.expr(value_node, depth + 1)
        sigma = self.expr(sigma_node, depth + 1)
        if scale is not None and isinstance(value, Const) and isinstance(sigma, Const):
            value, sigma = Const(value.value * scale), Const(sigma.value * scale)
        if not isinstance(value, Const) or not isinstance(sigma, Const) \
                or isinstance(value.value, u.UnitBase) or isinstance(sigma.value, u.UnitBase):
            raise UnitError("a value with `±` is a measured input: write it in numbers and units, "
                            "without cells", node.span)
        nominal_value, sigma_value = value.value, sigma.value
        if isinstance(nominal_value, RECORD_TYPES) or isinstance(sigma_value, RECORD_TYPES):
            raise UnitError("a record cannot carry `±`; give its fields uncertainties", node.span)
        try:
            sigma_value = quantity(value_in(sigma_value, nominal_value.unit), nominal_value.unit)
        except u.UnitConversionError:
            raise UnitError(f"the uncertainty is {describe(sigma_value.unit)}, the value "
                            f"{describe(nominal_value.unit)}", sigma_node.span) from None
        sv, nv = np.asarray(sigma_value.value), np.asarray(nominal_value.value)
        if np.any(sv < 0):
            raise DomainError("an uncertainty must not be negative", sigma_node.span)
        if sv.ndim and sv.shape != nv.shape:
            raise DomainError(f"{sv.size} uncertainties for {nv.size} values", sigma_node.span)
        self.inputs_made += 1
        name = self.cell_name if self.inputs_made == 1 else f"{self.cell_name} ({self.inputs_made})"
        try:
            ids = uncertain.make_input(self.scope.inputs, name, nominal_value, sigma_value)
        except DomainError as err:
            raise err.located(node.span) from None
        if isinstance(ids, u.Quantity):
            return Const(ids)
        return _input_code(ids, nominal_value, sigma_value)

    def exponent_number(self, node, depth: int) -> float:
        code = self.expr(node, depth + 1)
        if not isinstance(code, Const):
            raise UnitError("a unit's exponent must be a number written in the sheet", node.span)
        value = code.value
        try:
            e = value_in(value, _ONE)
        except u.UnitConversionError:
            raise UnitError(f"the exponent must be dimensionless, got {describe(value.unit)}",
                            node.span) from None
        if np.ndim(e) != 0:
            raise UnitError("a unit's exponent must be a single number", node.span)
        return float(e)

    # -- expressions
    def expr(self, node, depth: int = 0) -> Code:
        if depth > MAX_EXPRESSION_DEPTH:
            raise InputError(f"the expression is nested more than {MAX_EXPRESSION_DEPTH} deep",
                             node.span, hint="split it into several cells")
        kind = type(node)
        if kind is Number or kind is Percent:
            return Const(_number(node.value))
        if kind is Name:
            self.looked_up.add(node.id)
            return self.resolved(self.scope.plain(node), node.span)
        if kind is BinaryOp:
            if node.op == "/":
                return self.chainable(node, depth, names_lead=False)[0]
            left = self.expr(node.left, depth + 1)
            right = self.expr(node.right, depth + 1)
            if node.op == "*":
                return _lift(mul_op(node.span, divide=False), left, right)
            return _lift(add_op(node.span, subtract=node.op == "-"), left, right)
        if kind is Chain:
            return self.chain(node, depth)[0]
        if kind is UnaryOp:
            operand = self.expr(node.operand, depth + 1)
            return operand if node.op == "+" else _lift(neg_op(node.span), operand)
        if kind is PlusMinus:
            return self.plus_minus(node, depth)
        if kind is Power:
            base = self.expr(node.base, depth + 1)
            exponent = self.expr(node.exponent, depth + 1)
            return _lift(power_op(node.span, node.exponent.span), base, exponent)
        if kind is Group:
            return self.expr(node.inner, depth + 1)
        if kind is Call:
            return self.call(node, depth)
        if kind is ArrayLiteral:
            return self.array(node, depth)
        if kind is Dotted:
            head = node.parts[0]
            if head in self.scope.namespaces and head not in self.scope.cell_names:
                return self.imported(node, depth)
            if head in self.scope.cell_names:
                # fields of a record: `venus.a`, `budget.total`
                self.looked_up.add(head)
                head_span = Span(node.span.line, node.span.column, node.span.line,
                                 node.span.column + len(head))
                return _lift(field_op(node.parts, node.span), self.cell_ref(head, head_span))
            name = ".".join(node.parts)
            self.looked_up.add(name)
            self.looked_up.add(head)
            return self.resolved(self.scope.dotted(node.parts, node.span), node.span)
        if kind is NamePower:
            base = self.expr(node.name, depth + 1)
            exponent = self.expr(node.exponent, depth + 1)
            return _lift(power_op(node.span, node.exponent.span), base, exponent)
        raise NameResolutionError("this is not a value", node.span)

    def chain(self, node: Chain, depth: int) -> tuple[Code, bool]:
        """An implicit product; the chain stays open while its items are units."""
        code = self.expr(node.head, depth + 1)
        is_open = True
        for item in node.items:
            if is_open:
                item_code, is_open = self.chain_item(item, depth, self._juxtaposed(node, item))
            else:
                item_code = self.expr(item, depth + 1)
            code = _lift(mul_op(node.span, divide=False), code, item_code)
        return code, is_open

    # The two spellings an ambiguous name's hint shows, built only when needed.
    def _juxtaposed(self, chain: Chain, item):
        def spellings() -> tuple[str, str]:
            prefix = self.text(chain.span, item.span)
            return f"{prefix} * {self.text(item.span)}", f"{prefix} {{unit}}{self._after_name(item)}"
        return spellings

    def _divided(self, node: BinaryOp):
        def spellings() -> tuple[str, str]:
            prefix = self.text(node.span, node.right.span).rstrip("/ ").rstrip()
            return (f"{prefix} / ({self.text(node.right.span)})",
                    f"{prefix} / {{unit}}{self._after_name(node.right)}")
        return spellings

    def _alone(self, node):
        return lambda: (f"1 * {self.text(node.span)}", "{unit}")

    def _after_name(self, item) -> str:
        if isinstance(item, NamePower):
            return self.text(item.span)[len(item.name.id):]
        return ""

    def chain_item(self, item, depth: int, spellings) -> tuple[Code, bool]:
        """A name (or name^n, or group) in unit position: a unit keeps the chain open."""
        if isinstance(item, Group):
            inner = item.inner
            while isinstance(inner, Group):
                inner = inner.inner
            if _is_unit_item(inner) or isinstance(inner, (Chain, Number)) or (
                    isinstance(inner, BinaryOp) and inner.op == "/"):
                return self.chainable(inner, depth + 1, names_lead=True)
            # a bracketed value such as `(1 + x)` is a factor; it does not end the chain
            return self.expr(inner, depth + 1), True
        if isinstance(item, (NamePower, Power)) and (
                isinstance(item, NamePower) or isinstance(item.base, Name)):
            name = item.name if isinstance(item, NamePower) else item.base
            self.looked_up.add(name.id)
            resolved = self.scope.in_chain(name, spellings)
            if resolved.kind == "unit":
                return Const(resolved.unit ** self.exponent_number(item.exponent, depth)), True
            base = self.resolved(resolved, name.span)
            exponent = self.expr(item.exponent, depth + 1)
            return _lift(power_op(item.span, item.exponent.span), base, exponent), False
        if isinstance(item, Name):
            self.looked_up.add(item.id)
            resolved = self.scope.in_chain(item, spellings)
            return self.resolved(resolved, item.span), resolved.kind == "unit"
        return self.expr(item, depth + 1), False

    def chainable(self, node, depth: int, names_lead: bool) -> tuple[Code, bool]:
        """Compile ``node`` and say whether a unit chain is still open at its end."""
        if depth > MAX_EXPRESSION_DEPTH:
            return self.expr(node, depth), False
        kind = type(node)
        if kind is Number:
            return self.expr(node, depth), True
        if kind is Chain:
            return self.chain(node, depth)
        if kind is Group and names_lead:
            return self.chainable(node.inner, depth + 1, names_lead)
        if names_lead and _is_unit_item(node):
            return self.chain_item(node, depth, self._alone(node))
        if kind is BinaryOp and node.op == "/":
            left, is_open = self.chainable(node.left, depth + 1, names_lead)
            if is_open and _is_unit_item(node.right):
                right, is_open = self.chain_item(node.right, depth, self._divided(node))
            else:
                right, is_open = self.expr(node.right, depth + 1), False
            return _lift(mul_op(node.span, divide=True), left, right), is_open
        return self.expr(node, depth), False

    def call(self, node: Call, depth: int) -> Code:
        spec = functions.lookup(node.function)
        self.looked_up.add(node.function)
        if spec is None:
            if node.function in self.scope.cell_names:
                raise NameResolutionError(f"`{node.function}` is a cell, not a function",
                                          node.function_span,
                                          hint=f"write `{node.function} * (…)` to multiply")
            if self.scope.units.lookup(node.function) is not None:
                hint = f"`{node.function}` is a unit; to multiply write `{node.function} * (…)`"
            else:
                options = close_matches(node.function, [f.name for f in functions.all_functions()])
                hint = did_you_mean(options) or "the README lists the functions"
            raise NameResolutionError(f"unknown function `{node.function}`", node.function_span,
                                      hint=hint)
        keywords = {k.name: k for k in node.keywords}
        try:
            slots, omitted = spec.plan(len(node.args), tuple(keywords))
        except ArgumentError as err:
            raise err.located(node.span) from None
        values = [*node.args, *(k.value for k in node.keywords)]
        arg_spans = {slot: value.span for slot, value in zip(slots, values)}
        arg_codes = [self.expr(a, depth + 1) for a in node.args]
        names = list(keywords)
        kw_codes = [self.expr(keywords[k].value, depth + 1) for k in names]
        for parameter in PPN_PARAMETERS:
            # an omitted gamma or beta takes the sheet's `ppn` value (else 1)
            if parameter in omitted:
                self.looked_up.add(f"ppn.{parameter}")
                names.append(parameter)
                kw_codes.append(self.resolved(self.scope.ppn(parameter, node.span), node.span))
        slots = (*slots, *names[len(keywords):])
        implementation = spec.implementation
        fname = spec.name
        span = node.span
        npos = len(arg_codes)
        takes_records = spec.record_parameters

        samplewise = spec.samplewise

        def apply(*values):
            for value, pname in zip(values, slots):
                if isinstance(value, RECORD_TYPES) and pname not in takes_records:
                    what = "an array of records" if isinstance(value, RecordList) else "a record"
                    raise ArgumentError(f"{fname}: `{pname}` takes a quantity, not {what}",
                                        pname, span=arg_spans.get(pname, span))
            if any(type(v) is Uncertain or (type(v) is not u.Quantity and uncertain.is_uncertain(v))
                   for v in values):
                return uncertain.through(call, values)
            if samplewise and uncertain.mode.monte_carlo:
                return uncertain.per_sample(call, values)
            return call(*values)

        def call(*values):
            try:
                if names:
                    result = implementation(*values[:npos], **dict(zip(names, values[npos:])))
                else:
                    result = implementation(*values)
            except ArgumentError as err:
                where = arg_spans.get(err.argument, span)
                raise ArgumentError(f"{fname}: {err.message}", err.argument, span=where,
                                    hint=err.hint) from None
            except SheetError as err:
                raise err.located(span) from None
            except (u.UnitsError, ValueError, TypeError, ZeroDivisionError, OverflowError) as exc:
                raise DomainError(f"{fname}: {exc}", span) from None
            return _finite(result, values, span, f"the result of {fname}")

        return _lift(apply, *arg_codes, *kw_codes)

    def array(self, node: ArrayLiteral, depth: int) -> Code:
        if not node.items:
            raise DomainError("an array needs at least one value", node.span)
        codes = [self.expr(i, depth + 1) for i in node.items]
        spans = [i.span for i in node.items]

        def build(*values):
            if any(isinstance(v, RECORD_TYPES) for v in values):
                return _record_list(values, spans)
            if any(isinstance(v, Uncertain) for v in values):
                return _uncertain_array(values, spans)
            if uncertain.mode.monte_carlo and any(np.ndim(v.value) == 2 for v in values):
                return _sampled_array(values, spans)
            unit = values[0].unit
            plain = []
            for value, span in zip(values, spans):
                if np.ndim(value.value) != 0:
                    raise DomainError("arrays hold single values, not arrays", span)
                try:
                    plain.append(value_in(value, unit))
                except u.UnitConversionError:
                    raise UnitError(f"array items must share a dimension: {describe(value.unit)} "
                                    f"is not {describe(unit)}", span) from None
            return u.Quantity(np.array(plain, dtype=float), unit)

        return _lift(build, *codes)

    # -- unit expressions (after `in`)
    def unit(self, node, depth: int = 0) -> u.UnitBase:
        if depth > MAX_EXPRESSION_DEPTH:
            raise InputError("the unit is nested too deeply", node.span)
        kind = type(node)
        if kind is Name:
            return self.scope.unit(node)
        if kind is NamePower or (kind is Power and isinstance(node.base, Name)):
            name = node.name if kind is NamePower else node.base
            return self.scope.unit(name) ** self.exponent_number(node.exponent, depth)
        if kind is BinaryOp and node.op in "*/":
            left = self.unit(node.left, depth + 1)
            right = self.unit(node.right, depth + 1)
            return left * right if node.op == "*" else left / right
        if kind is UnitProduct:
            result = self.unit(node.factors[0], depth + 1)
            for factor in node.factors[1:]:
                result = result * self.unit(factor, depth + 1)
            return result
        if kind is Group:
            return self.unit(node.inner, depth + 1)
        if kind is Number:
            if node.value <= 0:
                raise UnitError("a unit's scale must be positive", node.span)
            return u.Unit(node.value) if node.value != 1 else _ONE
        if kind is PercentUnit:
            return u.percent
        raise UnitError("`in` takes a unit, such as `km / s` or `arcsec / century`", node.span)


def compile_cell(definition: CellDef, scope: Scope, source: Source,
                 display_unit: tuple[u.UnitBase, Span] | None = None) -> CellProgram:
    """Compile a cell; a compile error (unknown name, folded unit mismatch) is kept on it.

    ``display_unit`` (unit, span) applies when the definition has no ``in`` of its own.
    """
    compiler = _Compiler(scope, source, definition.name)
    program = CellProgram(definition, source)
    if definition.syntax_error is not None:
        program.error = definition.syntax_error
        return program
    handle = _start_warnings()
    try:
        _compile_into(program, compiler, definition, scope, source, display_unit)
    finally:
        program.warnings = _stop_warnings(handle)
    program.deps = compiler.deps
    program.looked_up = compiler.looked_up
    return program


def _compile_into(program: CellProgram, compiler: _Compiler, definition: CellDef, scope: Scope,
                  source: Source, display_unit) -> None:
    try:
        code = compiler.expr(definition.expr)
        if definition.unit is not None:
            program.unit = compiler.unit(definition.unit)
            program.unit_span = definition.unit.span
        elif display_unit is not None:
            program.unit, program.unit_span = display_unit
        if isinstance(code, Const):
            program.constant = finish(program, code.value)
            if not all_finite(program.constant):
                program.constant = checked(
                    lambda: finish(program, _Compiler(scope, source, definition.name)
                                   .expr(definition.expr).value))
        else:
            program.run = code
    except SheetError as err:
        program.error = err.located(definition.span, source)
    except (u.UnitScaleError, OverflowError):
        program.error = _unit_range_error(definition).located(definition.span, source)


def _unit_range_error(definition: CellDef) -> UnitError:
    # astropy decomposes units into SI with a float scale: Msun^11 overflows it
    return UnitError("a unit's size in SI is outside the range a float can hold",
                     definition.expr.span,
                     hint="rescale the inputs or use fewer powers of large units")


def finish(program: CellProgram, value) -> u.Quantity:
    """Conversion into the cell's `in` unit, or collapse of scaled dimensionless units."""
    if isinstance(value, u.UnitBase):  # pragma: no cover - the grammar cannot produce it
        raise UnitError("a unit needs a number before it", program.definition.expr.span)
    if isinstance(value, RECORD_TYPES):
        if program.unit is not None and program.definition.unit is not None:
            raise UnitError("a record has no unit to show it in; convert its fields instead",
                            program.unit_span)
        if isinstance(value, Record):
            return value.labelled(program.name)
        return value
    if program.unit is not None:
        return convert(value, program.unit, program.unit_span)
    return normalise(value)


def run_cell(program: CellProgram, env: dict) -> u.Quantity:
    """Evaluate a compiled cell with its inputs in ``env``; raises SheetError."""
    if program.constant is not None:
        return program.constant
    try:
        value = finish(program, program.run(env))
        if not all_finite(value):
            value = checked(lambda: finish(program, program.run(env)))
        return value
    except SheetError as err:
        raise err.located(program.definition.span, program.source) from None
    except (u.UnitScaleError, OverflowError):
        raise _unit_range_error(program.definition).located(
            program.definition.span, program.source) from None


def checked(compute):
    """Run ``compute`` with every operation checking its result."""
    _checking.on = True
    try:
        return compute()
    finally:
        _checking.on = False
