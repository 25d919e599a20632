"""From nodes to code: each cell is compiled once into a closure over its inputs.

Compiling resolves every name (:mod:`calc.language.scope`), records the cells a
cell uses, folds everything that does not depend on a cell into a constant (so
``9.81 m s^-2`` costs nothing at evaluation time), and wraps each operation so
that a failure names its own place in the source (:mod:`calc.engine.run` holds
the operations). Evaluating a cell is then a call of its closure with the
values of the cells it uses.

A `±` literal compiles to an input that is never folded: it evaluates to a
first-order uncertain value, or to Monte Carlo samples, as the evaluation
context says at run time.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from operator import itemgetter
from typing import cast

import astropy.units as u
import numpy as np

from ..errors import (
    ArgumentError,
    DomainError,
    InputError,
    InputFailedError,
    InternalError,
    NameResolutionError,
    SheetError,
    Source,
    Span,
    UnitError,
)
from ..language.scope import PPN_PARAMETERS, UNIT_SLOT, Scope, ppn_cell
from ..language.syntax import (
    TIME_SCALES,
    ArrayLiteral,
    BinaryOp,
    Call,
    CellDef,
    Chain,
    Compare,
    DateLiteral,
    DayNumber,
    Dotted,
    FunctionDef,
    Group,
    Index,
    Name,
    NamePower,
    Number,
    Percent,
    PercentUnit,
    PlusMinus,
    Power,
    Slice,
    TextLiteral,
    UnaryOp,
    UnitProduct,
)
from ..physics import functions
from ..physics.records import Record, RecordList, is_date
from ..physics.units import (
    close_matches,
    conversion_scale,
    describe,
    did_you_mean,
    quantity,
    unit_product,
    value_in,
)
from .arrays import axis_op, compare_op, index_op
from .context import context
from .grid import Grid
from .run import (
    ADD,
    CONST,
    DIV,
    MUL,
    NEG,
    POW,
    REF,
    SUB,
    CellProgram,
    Code,
    Const,
    Kernel,
    _finite,
    add_op,
    checked,
    field_op,
    finish,
    mul_op,
    neg_op,
    power_op,
    scalar_power,
    unit_range_error,
)
from .samples import Samples, draw
from .uncertain import Input, Uncertain, linear_value, make_inputs
from .values import (
    CONTAINERS,
    all_finite,
    apply_function,
    is_uncertain,
    per_record_point,
    record_points,
)

#: Deepest nesting of operations in one expression (keeps recursion far from Python's limit).
MAX_EXPRESSION_DEPTH = 150

_ONE = u.dimensionless_unscaled


# ---- compiling ----------------------------------------------------------------


class _Deferred:
    """An arithmetic operation whose closure is made on first use.

    Most cells of single quantities run on their scalar kernel (run.py) and never call their
    operations' closures (making them anyway, the benchmark's 2,000-cell sheet took 150 ms to
    build instead of 133, and held 2 MB more). The
    operation keeps what it needs to make its closure (``make(*args)`` applied to its
    operands, as :func:`_lift` does) and makes it, with its operands', the first time it runs.
    A constant operand is kept as its kernel's float and unit only (a literal's Quantity,
    remade from them, is the same to the last bit).
    """

    __slots__ = ("make", "args", "codes", "kernel", "made")

    def __init__(self, make: Callable, args: tuple, codes: tuple, kernel: Kernel) -> None:
        self.make = make
        self.args = args
        if kernel[0] != POW:   # (op, kernel of a, kernel of b): each operand's kernel is there
            codes = tuple(None if type(c) is Const and k[0] == CONST else c
                          for c, k in zip(codes, kernel[1:]))
        self.codes = codes
        self.kernel = kernel
        self.made: Callable | None = None

    def real(self) -> Callable:
        made = self.made
        if made is None:
            # (two threads may both get here: each makes the same closure, and one is kept)
            codes = self.codes
            if self.kernel[0] != POW:
                codes = tuple(Const.literal(k[1], k[2]) if c is None else c
                              for c, k in zip(codes, self.kernel[1:]))
            # an operand is not a constant (or it would have been folded): _lift makes a closure
            made = self.made = cast(Callable, _lift(self.make(*self.args), *codes))
        return made

    def __call__(self, env):
        made = self.made
        return (made if made is not None else self.real())(env)


def _lift(fn, *codes: Code) -> Code:
    """Apply ``fn`` to compiled operands: folded now when all are constants. (A deferred
    operand is made here: its consumer then calls it without the indirection.)"""
    codes = tuple(c.real() if type(c) is _Deferred else c for c in codes)
    if len(codes) == 2:
        a, b = codes
        if isinstance(a, Const):
            av = a.value
            if isinstance(b, Const):
                return Const(fn(av, b.value))
            run_b = b
            return lambda env: fn(av, run_b(env))
        run_a = a
        if isinstance(b, Const):
            bv = b.value
            return lambda env: fn(run_a(env), bv)
        run_b = b
        return lambda env: fn(run_a(env), run_b(env))
    if all(isinstance(c, Const) for c in codes):
        return Const(fn(*(c.value for c in codes)))  # type: ignore[union-attr]
    if len(codes) == 1:
        (only,) = codes
        if isinstance(only, Const):  # pragma: no cover - folded above
            return only
        return lambda env: fn(only(env))
    runners = [(lambda env, v=c.value: v) if isinstance(c, Const) else c for c in codes]
    return lambda env: fn(*(r(env) for r in runners))


def _bare_numbers(node) -> bool:
    """A number, or an array of numbers, written without units."""
    if isinstance(node, (Number, Percent)):
        return True
    return isinstance(node, ArrayLiteral) and bool(node.items) and all(
        isinstance(item, (Number, Percent)) or (
            isinstance(item, UnaryOp) and isinstance(item.operand, (Number, Percent)))
        for item in node.items)


def _leading_number(node):
    """For a unit chain that starts with a number or an array of numbers (`0.001 Msun`,
    `4e-4 deg / yr`, `[0.1, 0.2] AU`): that head and the same expression with 1 in its place;
    None for anything else (a bare number too)."""
    if isinstance(node, Chain) and _bare_numbers(node.head):
        return node.head, Chain(Number(1.0, "1", node.head.span), node.items, node.span)
    if isinstance(node, BinaryOp) and node.op in "*/":
        inner = _leading_number(node.left)
        if inner is not None:
            number, rest = inner
            return number, BinaryOp(node.op, rest, node.right, node.span)
    return None


def _input_code(inputs: tuple[Input, ...], nominal_value: u.Quantity,
                sigma_value: u.Quantity) -> Code:
    """The run-time value of a `±` literal: first-order contributions, or Monte Carlo draws,
    as the evaluation context says."""
    linear = linear_value(inputs, nominal_value, sigma_value)

    def value(env):
        sampling = context().sampling
        if sampling is None:
            return linear
        columns = [sampling.normal(key) for key in inputs]
        return draw(columns[0], nominal_value, sigma_value, columns)

    return value


def _uncertain_array(values, spans) -> Uncertain:
    """An array literal whose items carry uncertainties: one array of contributions per input."""
    unit = values[0].unit
    nominal_values: list[float] = []
    parts: dict[Input, np.ndarray] = {}
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


def _sampled_array(values, spans) -> Samples:
    """Under Monte Carlo: items that are samples (N,) or single values make samples (N, n)."""
    unit = values[0].unit
    count = next(v.count for v in values if isinstance(v, Samples))
    columns = []
    for value, span in zip(values, spans):
        if isinstance(value, Samples) and value.shape != ():
            raise DomainError("arrays hold single values, not arrays", span)
        try:
            scale = conversion_scale(value.unit, unit)
        except u.UnitConversionError:
            raise UnitError(f"array items must share a dimension: {describe(value.unit)} "
                            f"is not {describe(unit)}", span) from None
        column = np.asarray(value.value, dtype=float) * scale
        columns.append(np.broadcast_to(column, (count,)))
    return Samples(quantity(np.stack(columns, axis=1), unit))


def _lengths_error(fname: str, slots, values, span: Span) -> DomainError:
    """numpy could not broadcast the arguments: say which arguments have which lengths."""
    sized = []
    for name, value in zip(slots, values):
        shape = np.shape(getattr(value, "value", value))
        if shape:
            sized.append(f"`{name}` has {shape[-1]}" if len(shape) == 1 else
                         f"`{name}` is {' × '.join(map(str, shape))}")
    listed = ", ".join(sized) if sized else "the arguments"
    return DomainError(f"{fname}: arrays of different lengths ({listed})", span,
                       hint="arrays combine element by element and need the same length")


def _record_list(values, spans) -> RecordList:
    for value, span in zip(values, spans):
        if not isinstance(value, Record):
            raise DomainError("an array of records holds only records", span)
    return RecordList(tuple(values))


def _is_unit_item(node) -> bool:
    return isinstance(node, (Name, NamePower)) or (
        isinstance(node, Power) and isinstance(node.base, Name))


@dataclass
class InputTable:
    """Where a sheet's compiled cells get their uncertain inputs.

    An input written once in a file is one input wherever that file is imported and however
    its other cells are overridden (`use "body.sheet" as p1 with a = …` four times shares the
    body's `M ± σ`), so ``shared`` — one dict for a top sheet and all it imports — keys
    inputs by file, place and value. Under ``constants … uncertain`` each named constant with
    a published uncertainty is one input for all of them. ``prefix`` names inputs of an
    imported sheet with its namespace in σ budgets (`sys.M_star`)."""

    uncertain_constants: bool = False
    prefix: str = ""
    shared: dict = field(default_factory=dict)

    def constant(self, scope: Scope, name: str) -> tuple[Input, ...] | None:
        if not self.uncertain_constants:
            return None
        entry = scope.constants.get(name)
        if entry is None or not entry.uncertainty:
            return None
        key = ("constant", name, scope.selection)
        inputs = self.shared.get(key)
        if inputs is None:
            sigma = u.Quantity(entry.uncertainty, entry.quantity.unit)
            inputs = self.shared[key] = (Input(f"const.{name}", entry.quantity, sigma),)
        return inputs

    def literal(self, source: Source, span: Span, name: str, nominal: u.Quantity,
                sigma: u.Quantity) -> tuple[Input, ...]:
        """The inputs of a `±` literal (none when σ is zero)."""
        if source.path is None:   # typed at a prompt or given to --set: new every time
            return make_inputs(self.prefix + name, nominal, sigma)
        key = ("literal", source.path, span, _fingerprint(nominal), _fingerprint(sigma))
        inputs = self.shared.get(key)
        if inputs is None:
            inputs = self.shared[key] = make_inputs(self.prefix + name, nominal, sigma)
        return inputs


def _fingerprint(q: u.Quantity) -> tuple:
    """A hashable form of a literal's value (the same text evaluates to the same numbers)."""
    return (str(q.unit), np.asarray(q.value, dtype=float).tobytes())


class _Compiler:
    def __init__(self, scope: Scope, source: Source, cell_name: str = "",
                 inputs: InputTable | None = None) -> None:
        self.scope = scope
        self.source = source
        self.cell_name = cell_name
        self.inputs = inputs or InputTable()
        self.inputs_made = 0
        self.deps: dict[str, Span] = {}
        self.looked_up: set[str] = set()
        #: the scalar kernel (run.py) of each compiled code that has one, by the code's id
        self.kernels: dict[int, Kernel] = {}
        #: the parameters of the sheet's functions being expanded, innermost last
        self.bindings: list[dict[str, Code]] = []
        #: the sheet's functions being expanded (a call of one of these again is recursion)
        self.expanding: list[str] = []
        #: the place of the cell in its file (orders the axes a cell opens)
        self.rank = 0.0
        #: arithmetic and numpy-based math functions on finite constants only (see run_cell)
        self.trusted = True

    # -- helpers
    def text(self, start: Span, end: Span | None = None) -> str:
        return self.source.between(start, end)

    def cell_ref(self, name: str, span: Span) -> Code:
        self.deps.setdefault(name, span)
        code = itemgetter(name)
        self.kernels[id(code)] = (REF, name)
        return code

    # -- scalar kernels (run.py): each arithmetic code gets one when its operands have one
    def kernel(self, code: Code) -> Kernel | None:
        if type(code) is Const:
            return code.kernel()
        return self.kernels.get(id(code))

    def arithmetic(self, op: int, make: Callable, args: tuple, a: Code,
                   b: Code | None = None) -> Code:
        """The operation ``make(*args)`` (mul_op, add_op, neg_op, power_op) of ``a`` (and
        ``b``): folded now when its operands are constants; with its scalar kernel when they
        have one, its closure then deferred until something runs it."""
        codes = (a,) if b is None else (a, b)
        if all(type(c) is Const for c in codes):
            return _lift(make(*args), *codes)
        kernel = self.operation_kernel(op, a, b)
        if kernel is None:
            return _lift(make(*args), *codes)
        code = _Deferred(make, args, codes, kernel)
        self.kernels[id(code)] = kernel
        return code

    def operation_kernel(self, op: int, a: Code, b: Code | None) -> Kernel | None:
        """The kernel (op, kernels of a and b) when they both have one."""
        ka = a.kernel() if type(a) is Const else self.kernels.get(id(a))
        if ka is None:
            return None
        if b is None:
            return (op, ka)
        kb = b.kernel() if type(b) is Const else self.kernels.get(id(b))
        if kb is None:
            return None
        return scalar_power(ka, kb) if op == POW else (op, ka, kb)

    def resolved(self, resolved, span: Span) -> Code:
        if resolved.kind == "unit":
            return Const(resolved.unit)
        if resolved.kind == "cell":
            return self.cell_ref(resolved.cell, span)
        inputs = self.inputs.constant(self.scope, resolved.name) if resolved.name \
            else None
        if inputs is not None:
            return _input_code(inputs, resolved.value, inputs[0].sigma)
        if not np.all(np.isfinite(getattr(resolved.value, "value", 0.0))):
            self.trusted = False
        return Const(resolved.value)

    def imported(self, node: Dotted, depth: int) -> Code:
        """`ns.name` (and `ns.name.field`): a cell of an imported sheet."""
        self.trusted = False   # its value's finiteness is the other sheet's to know
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
        code: Code
        if is_uncertain(raw):
            # uncertain: read at run time, so that Monte Carlo sees the imported samples
            def code(env, name=name):
                sampling = context().sampling
                if sampling is None:
                    return sheet.raw(name)
                return sampling.results[sheet][name]
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
        if _bare_numbers(value_node) and leading is not None:
            # `1.438 ± 0.001 Msun`, `1.805 ± 0.0004 deg / yr`, `[1, 2] ± [0.1, 0.2] AU`: the
            # units after the uncertainty belong to both
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
        if is_date(nominal_value):
            return self.uncertain_date(node, nominal_value, sigma_value)
        if isinstance(nominal_value, CONTAINERS) or isinstance(sigma_value, CONTAINERS):
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
            inputs = self.inputs.literal(self.source, node.span, name, nominal_value, sigma_value)
        except DomainError as err:
            raise err.located(node.span) from None
        if not inputs:
            return Const(nominal_value)
        return _input_code(inputs, nominal_value, sigma_value)

    def uncertain_date(self, node: PlusMinus, base, sigma_value) -> Code:
        """`date ± σ`: an exact date and an input of nominal 0 s for its offset."""
        from .dates import UncertainDate, uncertain_date

        made: list[Code] = []

        def make_offset(zero: u.Quantity, seconds: u.Quantity):
            sv = np.asarray(seconds.value)
            if np.any(sv < 0):
                raise DomainError("an uncertainty must not be negative", node.sigma.span)
            self.inputs_made += 1
            name = self.cell_name if self.inputs_made == 1 else \
                f"{self.cell_name} ({self.inputs_made})"
            inputs = self.inputs.literal(self.source, node.span, name, zero, seconds)
            made.append(_input_code(inputs, zero, seconds) if inputs else Const(zero))
            return zero

        uncertain_date(base, sigma_value, make_offset, node.sigma.span)
        offset = made[0]
        if isinstance(offset, Const):
            return Const(base)
        return lambda env: UncertainDate(base, offset(env))

    def exponent_number(self, node, depth: int) -> float:
        code = self.expr(node, depth + 1)
        if not isinstance(code, Const):
            raise UnitError("a unit's exponent must be a number written in the sheet", node.span)
        value = code.value
        if type(value) is not u.Quantity:   # a record, a date, a truth, a unit
            raise UnitError("a unit's exponent must be a number", node.span,
                            hint="write the power as a number, as in `s^-2`")
        try:
            e = value_in(value, _ONE)
        except u.UnitConversionError:
            raise UnitError(f"the exponent must be dimensionless, got {describe(value.unit)}",
                            node.span) from None
        if np.ndim(e) != 0:
            raise UnitError("a unit's exponent must be a single number", node.span)
        if not np.isfinite(e):
            raise UnitError("a unit's exponent must be a finite number", node.span,
                            hint="the exponent here works out as not a number")
        return float(e)

    # -- expressions
    def expr(self, node, depth: int = 0) -> Code:
        if depth > MAX_EXPRESSION_DEPTH:
            raise InputError(f"the expression is nested more than {MAX_EXPRESSION_DEPTH} deep",
                             node.span, hint="split it into several cells")
        kind = type(node)
        if kind is Number or kind is Percent:
            if not np.isfinite(node.value):
                self.trusted = False
            return Const.literal(float(node.value), _ONE)
        if kind is Name:
            if self.bindings and node.id in self.bindings[-1]:
                return self.bindings[-1][node.id]
            self.looked_up.add(node.id)
            return self.resolved(self.scope.plain(node), node.span)
        if kind is BinaryOp:
            if node.op == "/":
                return self.chainable(node, depth, names_lead=False)[0]
            left = self.expr(node.left, depth + 1)
            right = self.expr(node.right, depth + 1)
            if node.op == "*":
                return self.arithmetic(MUL, mul_op, (node.span, False), left, right)
            subtract = node.op == "-"
            return self.arithmetic(SUB if subtract else ADD, add_op, (node.span, subtract),
                                   left, right)
        if kind is Chain:
            return self.chain(node, depth)[0]
        if kind is UnaryOp:
            operand = self.expr(node.operand, depth + 1)
            if node.op == "+":
                return operand
            return self.arithmetic(NEG, neg_op, (node.span,), operand)
        if kind is PlusMinus:
            return self.plus_minus(node, depth)
        if kind is Power:
            base = self.expr(node.base, depth + 1)
            exponent = self.expr(node.exponent, depth + 1)
            return self.arithmetic(POW, power_op, (node.span, node.exponent.span), base, exponent)
        if kind is Group:
            return self.expr(node.inner, depth + 1)
        if kind is Call:
            return self.call(node, depth)
        if kind is ArrayLiteral:
            return self.array(node, depth)
        if kind is Dotted:
            head = node.parts[0]
            failed_use = self.scope.failed_namespaces.get(head)
            if failed_use is not None and head not in self.scope.cell_names:
                self.looked_up.add(head)
                raise InputFailedError(f"`{head}` could not be imported (line {failed_use.line})",
                                       [head], span=node.span)
            if head in self.scope.namespaces and head not in self.scope.cell_names:
                return self.imported(node, depth)
            if head in self.scope.cell_names:
                # fields of a record: `venus.a`, `budget.total` (a field's finiteness was not
                # scanned with its record's: the cell's result is)
                self.trusted = False
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
            return self.arithmetic(POW, power_op, (node.span, node.exponent.span), base, exponent)
        if kind is Compare:
            left = self.expr(node.left, depth + 1)
            right = self.expr(node.right, depth + 1)
            return _lift(compare_op(node.op, node.span, node.right.span), left, right)
        if kind is Index:
            return self.index(node, depth)
        if kind is DateLiteral or kind is DayNumber:
            from .dates import date_literal

            return Const(date_literal(node))
        if kind is Slice:
            raise DomainError("a slice `a:b` stands only inside an index, as in `x[2:5]`",
                              node.span)
        if kind is TextLiteral:
            raise DomainError("text in quotes is a function's argument only, as in "
                              "`ephemeris(\"mars\", t)` or `read_table(\"passes.ecsv\")`",
                              node.span)
        raise NameResolutionError("this is not a value", node.span)

    def index(self, node: Index, depth: int) -> Code:
        """`x[i]`, `x[2:5]`, `x[x > 3 km]`, `grid[0, 2]`."""
        target = self.expr(node.target, depth + 1)
        kinds: list[str] = []
        codes: list[Code] = []
        for item in node.items:
            if isinstance(item, Slice):
                kinds.append("slice")
                codes += [Const(None) if bound is None else self.expr(bound, depth + 1)
                          for bound in (item.start, item.stop)]
            else:
                kinds.append("item")
                codes.append(self.expr(item, depth + 1))
        spans = tuple(item.span for item in node.items)
        return _lift(index_op(tuple(kinds), spans, node.span), target, *codes)

    def chain(self, node: Chain, depth: int) -> tuple[Code, bool]:
        """An implicit product; the chain stays open while its items are units."""
        code = self.expr(node.head, depth + 1)
        is_open = True
        for item in node.items:
            if is_open:
                item_code, is_open = self.chain_item(item, depth, self._juxtaposed(node, item))
            else:
                item_code = self.expr(item, depth + 1)
            if type(code) is Const and type(item_code) is Const \
                    and isinstance(item_code.value, u.UnitBase) and code.number is not None \
                    and code.unit is _ONE:
                # a number and its unit (`1500 km`), folded at once
                code = Const.literal(code.number, unit_product(_ONE, item_code.value))
                continue
            code = self.arithmetic(MUL, mul_op, (node.span, False), code, item_code)
        return code, is_open

    # The two spellings an ambiguous name's hint shows, built only when needed.
    def _juxtaposed(self, chain: Chain, item):
        def spellings() -> tuple[str, str]:
            prefix = self.text(chain.span, item.span)
            return f"{prefix} * {self.text(item.span)}", f"{prefix} {UNIT_SLOT}{self._after_name(item)}"
        return spellings

    def _divided(self, node: BinaryOp):
        def spellings() -> tuple[str, str]:
            prefix = self.text(node.span, node.right.span).rstrip("/ ").rstrip()
            return (f"{prefix} / ({self.text(node.right.span)})",
                    f"{prefix} / {UNIT_SLOT}{self._after_name(node.right)}")
        return spellings

    def _alone(self, node):
        return lambda: (f"1 * {self.text(node.span)}", UNIT_SLOT)

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
        powered = item.name if isinstance(item, NamePower) else \
            item.base if isinstance(item, Power) else None
        if isinstance(powered, Name) and isinstance(item, (NamePower, Power)):
            name = powered
            self.looked_up.add(name.id)
            resolved = self.scope.in_chain(name, spellings)
            if resolved.kind == "unit" and resolved.unit is not None:
                return Const(resolved.unit ** self.exponent_number(item.exponent, depth)), True
            base = self.resolved(resolved, name.span)
            exponent = self.expr(item.exponent, depth + 1)
            return self.arithmetic(POW, power_op, (item.span, item.exponent.span), base,
                                   exponent), False
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
            return self.arithmetic(DIV, mul_op, (node.span, True), left, right), is_open
        if kind is BinaryOp and node.op == "*":
            # `x * 3 km / s` reads as `x * (3 km / s)`: the chain of the right factor stays
            # open, as it would at the start of an expression (the number is the same)
            left = self.expr(node.left, depth + 1)
            right, is_open = self.chainable(node.right, depth + 1, False)
            return self.arithmetic(MUL, mul_op, (node.span, False), left, right), is_open
        if kind is UnaryOp:
            # `-2 km / s`: the minus does not hide the number from the chain
            operand, is_open = self.chainable(node.operand, depth + 1, False)
            if node.op == "+":
                return operand, is_open
            return self.arithmetic(NEG, neg_op, (node.span,), operand), is_open
        return self.expr(node, depth), False

    def call(self, node: Call, depth: int) -> Code:
        if node.function == "read_table":   # a data file: calc/engine/datafiles.py
            from .datafiles import read_table_call  # (imported when a sheet reads a table)

            self.looked_up.add(node.function)
            self.trusted = False
            table = read_table_call(node.function_span, node.args, node.keywords,
                                    node.span, self.source.folder, context().root)
            if self.cell_name and self.cell_name != "_" and not self.bindings:
                # the rows are an axis named after the cell that reads the table
                from .datafiles import on_table_axis

                table = on_table_axis(dict(table.fields), self.cell_name, self.rank)
            return Const(table)
        own = self.scope.functions.get(node.function)
        if own is not None:
            return self.own_function(own, node, depth)
        if node.function == "axis":
            return self.axis(node, depth)
        spec = functions.lookup(node.function)
        self.looked_up.add(node.function)
        if spec is not None and spec.topic != "math":
            self.trusted = False   # only numpy-based math functions report every nan they make
        if spec is None:
            failed_line = self.scope.failed_functions.get(node.function)
            if failed_line is not None:
                raise InputFailedError(f"function `{node.function}` failed: its definition on "
                                       f"line {failed_line} does not parse", [node.function],
                                       span=node.function_span)
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
        along = None
        if "along" in keywords and "along" not in spec.signature.parameters:
            along = self.along(keywords.pop("along"), spec.effect)
        try:
            slots, omitted = spec.plan(len(node.args), tuple(keywords))
        except ArgumentError as err:
            raise err.located(node.span) from None
        values = [*node.args, *(k.value for k in node.keywords)]
        arg_spans = {slot: value.span for slot, value in zip(slots, values)}
        texts = spec.text_parameters
        arg_codes = [self.argument(a, depth, slot in texts, spec.name, slot)
                     for a, slot in zip(node.args, slots)]
        names = list(keywords)
        kw_codes = [self.argument(keywords[k].value, depth, k in texts, spec.name, k)
                    for k in names]
        for parameter in PPN_PARAMETERS:
            # an omitted gamma or beta takes the sheet's `ppn` value (else 1)
            if parameter in omitted:
                self.looked_up.add(ppn_cell(parameter))
                names.append(parameter)
                kw_codes.append(self.resolved(self.scope.ppn(parameter, node.span), node.span))
        slots = (*slots, *names[len(keywords):])
        implementation = spec.implementation
        fname = spec.name
        span = node.span
        npos = len(arg_codes)
        takes_records = spec.record_parameters

        samplewise = spec.samplewise
        effect = spec.effect
        if effect == "reduce" and spec.variadic and npos > 1:
            effect = "elementwise"   # max(a, b): element by element; max(a): the largest

        takes_dates = spec.date_parameters
        on_dates = ON_DATES.get(fname) if npos == 1 and not kw_codes else None

        def apply(*values):
            if on_dates is not None and _exact_dates(values[0]):
                return _of_dates(apply, values[0], on_dates, span)
            for value, pname in zip(values, slots):
                if pname not in takes_dates and _dated(value):
                    raise ArgumentError(f"{fname}: `{pname}` takes a quantity, not dates",
                                        pname, span=arg_spans.get(pname, span),
                                        hint="subtract a reference date first (`t - t0` is a "
                                             "duration), or use mjd(t)")
                if isinstance(value, CONTAINERS) and pname not in takes_records:
                    what = "an array of records" if isinstance(value, RecordList) else "a record"
                    raise ArgumentError(f"{fname}: `{pname}` takes a quantity, not {what}",
                                        pname, span=arg_spans.get(pname, span))
            try:
                if takes_records:
                    points = record_points(values)
                    if points is not None:
                        return per_record_point(
                            lambda *each: apply_function(call, each, samplewise, fname, effect,
                                                         along), values, *points)
                return apply_function(call, values, samplewise, fname, effect, along)
            except SheetError as err:
                raise err.located(span) from None

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
            except ValueError as exc:
                if "broadcast" in str(exc):
                    raise _lengths_error(fname, slots, values, span) from None
                raise DomainError(f"{fname}: {exc}", span) from None
            except (u.UnitsError, TypeError, ZeroDivisionError, OverflowError) as exc:
                raise DomainError(f"{fname}: {exc}", span) from None
            return _finite(result, values, span, f"the result of {fname}")

        return _lift(apply, *arg_codes, *kw_codes)

    def argument(self, node, depth: int, takes_text: bool, function: str, slot: str) -> Code:
        """A library function's argument: a value, or text in quotes where the parameter
        takes a name (`ephemeris("mars", t)`)."""
        if type(node) is TextLiteral:
            if not takes_text:
                raise NameResolutionError(
                    f"{function}: `{slot}` takes a value, not text in quotes", node.span,
                    hint="quoted text names a body or a file (ephemeris(\"mars\", t), "
                         "read_table(\"obs.ecsv\"))")
            return Const(node.text)
        if takes_text:
            raise NameResolutionError(f"{function}: `{slot}` takes a name in quotes", node.span,
                                      hint="for example ephemeris(\"mars\", t)")
        return self.expr(node, depth + 1)

    def along(self, keyword, effect: str) -> str:
        """The axis a reduction runs along: `along = elong` names an axis, not a value."""
        value = keyword.value
        if effect not in ("reduce", "keep", "shorten"):
            raise ArgumentError("`along` goes with functions that run along an axis (sum, mean, "
                                "min, max, argmin, argmax, integral, cumsum, diff, gradient, "
                                "sort, count, any, all, len)", "along", span=keyword.span)
        if not isinstance(value, Name):
            raise ArgumentError("`along` takes the name of an axis, as in `along = days`",
                                "along", span=value.span)
        if value.id not in self.scope.cell_names:
            raise NameResolutionError(f"no axis `{value.id}`: `along` names the cell that made "
                                      "an axis with axis(…)", value.span,
                                      hint=did_you_mean(close_matches(value.id,
                                                                      list(self.scope.cell_names))))
        return value.id

    def axis(self, node: Call, depth: int) -> Code:
        """`axis(values)`: a new dimension named after the cell."""
        self.looked_up.add("axis")
        if node.keywords or len(node.args) != 1:
            raise ArgumentError("axis(values) takes one array of values", "values",
                                span=node.span)
        if self.bindings or not self.cell_name or self.cell_name == "_":
            raise DomainError("an axis is named after its cell: write `name = axis(…)`",
                              node.span)
        values = self.expr(node.args[0], depth + 1)
        return _lift(axis_op(self.cell_name, self.rank, node.span), values)

    def own_function(self, function: FunctionDef, node: Call, depth: int) -> Code:
        """A call of one of the sheet's functions: its body, with the arguments in place of
        its parameters (so units are checked, and values of every kind pass, as if the body
        were written at the call)."""
        name = function.name
        self.looked_up.add(name)
        if name in self.expanding:
            chain = " → ".join([*self.expanding[self.expanding.index(name):], name])
            raise DomainError(f"`{name}` calls itself ({chain}); a sheet's functions cannot "
                              "recurse", node.function_span)
        params = [p for p, _ in function.params]
        signature = f"{name}({', '.join(params)})"
        if len(node.args) > len(params):
            raise ArgumentError(f"{signature} takes {len(params)} argument"
                                f"{'s' if len(params) != 1 else ''}, got {len(node.args)}",
                                "", span=node.span)
        bound: dict[str, Code] = {}
        for param, arg in zip(params, node.args):
            bound[param] = self.expr(arg, depth + 1)
        for keyword in node.keywords:
            if keyword.name not in params:
                raise ArgumentError(f"{signature}: no argument is called `{keyword.name}`", "",
                                    span=keyword.span,
                                    hint=did_you_mean(close_matches(keyword.name, params)))
            if keyword.name in bound:
                raise ArgumentError(f"{signature}: `{keyword.name}` is given twice", "",
                                    span=keyword.span)
            bound[keyword.name] = self.expr(keyword.value, depth + 1)
        missing = [p for p in params if p not in bound]
        if missing:
            raise ArgumentError(f"{signature}: missing {', '.join(f'`{p}`' for p in missing)}",
                                missing[0], span=node.span)
        self.bindings.append(bound)
        self.expanding.append(name)
        call_line = node.span.line
        try:
            code = self.expr(function.body, depth + 1)
        except SheetError as err:
            raise _at_call(err, signature, call_line, function.span.line) from None
        finally:
            self.bindings.pop()
            self.expanding.pop()
        if isinstance(code, Const):
            return code
        body_code = code

        def called(env):
            try:
                return body_code(env)
            except SheetError as err:
                raise _at_call(err, signature, call_line, function.span.line) from None

        return called

    def array(self, node: ArrayLiteral, depth: int) -> Code:
        if not node.items:
            raise DomainError("an array needs at least one value", node.span)
        codes = [self.expr(i, depth + 1) for i in node.items]
        spans = [i.span for i in node.items]

        def build(*values):
            for value, item_span in zip(values, spans):
                if isinstance(value, Grid) or _dated(value) or type(value).__name__ == "Truth":
                    what = "values on an axis" if isinstance(value, Grid) else \
                        "dates" if _dated(value) else "truths"
                    raise DomainError(f"an array `[…]` holds single quantities, not {what}",
                                      item_span, hint="use the value itself, or span(…) and "
                                                      "axis(…) for new arrays")
            if any(isinstance(v, CONTAINERS) for v in values):
                return _record_list(values, spans)
            if any(isinstance(v, Uncertain) for v in values):
                return _uncertain_array(values, spans)
            if any(isinstance(v, Samples) for v in values):
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
                 display_unit: tuple[u.UnitBase, Span] | None = None,
                 inputs: InputTable | None = None) -> CellProgram:
    """Compile a cell; a compile error (unknown name, folded unit mismatch) is kept on it.
    Runs inside an evaluation context (constant subexpressions are computed now).

    ``display_unit`` (unit, span) applies when the definition has no ``in`` of its own.
    """
    compiler = _Compiler(scope, source, definition.name, inputs)
    compiler.rank = definition.span.line + definition.span.column / 1e4
    program = CellProgram(definition, source)
    if definition.syntax_error is not None:
        program.error = definition.syntax_error
        return program
    program.literal = _is_literal(definition.expr, scope)
    evaluation = context()
    before = evaluation.collect_warnings()
    events = evaluation.fp_events
    try:
        _compile_into(program, compiler, definition, display_unit)
    finally:
        program.warnings = evaluation.stop_warnings(before)
    if evaluation.fp_events != events:
        compiler.trusted = False   # a folded constant met a nan, an overflow or 0/0
    program.deps = compiler.deps
    program.looked_up = compiler.looked_up
    program.trusted = compiler.trusted and (program.constant is None
                                            or all_finite(program.constant))
    return program


def _compile_into(program: CellProgram, compiler: _Compiler, definition: CellDef,
                  display_unit) -> None:
    try:
        code = compiler.expr(definition.expr)
        if isinstance(definition.unit, Name) and definition.unit.id in TIME_SCALES \
                and definition.unit.id not in compiler.scope.cell_names:
            program.time_scale = definition.unit.id
            program.unit_span = definition.unit.span
        elif definition.unit is not None:
            program.unit = compiler.unit(definition.unit)
            program.unit_span = definition.unit.span
        elif display_unit is not None:
            program.unit, program.unit_span = display_unit
        if isinstance(code, Const):
            program.constant = finish(program, code.value)
            if not all_finite(program.constant):
                again = _Compiler(compiler.scope, compiler.source, definition.name,
                                  compiler.inputs)
                program.constant = checked(
                    lambda: finish(program, _constant(again.expr(definition.expr))))
        else:
            program.run = code
            kernel = compiler.kernel(code)
            program.scalar = kernel if kernel is not None and kernel[0] >= REF else None
    except SheetError as err:
        program.error = err.located(definition.span, compiler.source).kept()
    except (u.UnitScaleError, OverflowError):
        program.error = unit_range_error(definition).located(definition.span, compiler.source)
    except RecursionError:
        program.error = InputError("the expression is nested too deeply", definition.span,
                                   hint="split it into several cells", source=compiler.source)
    except Exception as exc:  # a bug of ours: the cell says so, the others go on
        program.error = InternalError.wrapping(exc, f"compiling `{definition.name}`",
                                               definition.span, compiler.source)


def _is_literal(node, scope: Scope, depth: int = 0) -> bool:
    """A quantity as written: numbers with units (`70 km / s / Mpc`, `-3 m`, `1 ± 0.1 AU`,
    `[1, 2] km`), with no cell, constant, function or arithmetic of quantities."""
    if depth > MAX_EXPRESSION_DEPTH:
        return False
    def unit_item(item) -> bool:
        name = item.name if isinstance(item, NamePower) else item.base if isinstance(
            item, Power) else item
        return isinstance(name, Name) and name.id not in scope.cell_names \
            and scope.units.lookup(name.id) is not None

    kind = type(node)
    if kind in (Number, Percent):
        return True
    if kind is Group:
        return _is_literal(node.inner, scope, depth + 1)
    if kind is UnaryOp:
        return _is_literal(node.operand, scope, depth + 1)
    if kind is Chain:
        return isinstance(node.head, (Number, Percent)) and all(
            _is_unit_item(item) and unit_item(item) for item in node.items)
    if kind is BinaryOp and node.op == "/":
        return _is_literal(node.left, scope, depth + 1) and _is_unit_item(node.right) \
            and unit_item(node.right)
    if kind is PlusMinus:
        return _is_literal(node.value, scope, depth + 1) and \
            _is_literal(node.sigma, scope, depth + 1)
    if kind is ArrayLiteral:
        return all(_is_literal(item, scope, depth + 1) for item in node.items)
    return False


def _at_call(err: SheetError, signature: str, call_line: int, body_line: int) -> SheetError:
    """An error inside a sheet's function, saying which call it came from (it stays at the
    function's body, where the operation that failed is written)."""
    import copy

    if call_line == body_line or err.message.startswith(f"in {signature}"):
        return err
    named = copy.copy(err)
    named.message = f"in {signature}, called on line {call_line}: {err.message}"
    return named


#: Functions of one array that also take dates: the dates are given to them as durations
#: since the first date, and what they return is read back as ("date") dates, ("duration")
#: durations in days, or ("index") as it is.
ON_DATES = {"min": "date", "max": "date", "sort": "date", "diff": "duration",
            "argmin": "index", "argmax": "index"}


def _exact_dates(value) -> bool:
    """Dates without an uncertainty (on axes or not)."""
    return is_date(value.data if type(value) is Grid else value)


def _of_dates(apply: Callable, dates, returns: str, span: Span):
    """``apply`` on dates given as seconds since the first of them (astropy's differences of
    dates keep nanoseconds), its result read back as ``returns`` says."""
    from .dates import add

    data = dates.data if type(dates) is Grid else dates
    first = data.ravel()[0] if data.shape else data
    seconds = u.Quantity((data - first).to_value(u.s), u.s)
    result = apply(Grid(seconds, dates.axes) if type(dates) is Grid else seconds)
    if returns == "index":
        return result

    def back(leaf):
        if returns == "duration":
            return leaf.to(u.d)
        return add(first, leaf, False, span)

    return Grid(back(result.data), result.axes) if type(result) is Grid else back(result)


def _dated(value) -> bool:
    """Whether a value is dates (on axes or not, uncertain or not)."""
    if type(value) is Grid:
        value = value.data
    return is_date(value) or type(value).__name__ == "UncertainDate" or (
        type(value) is Samples and is_date(value.data))


def _constant(code: Code):
    if not isinstance(code, Const):  # pragma: no cover - the same expression folded before
        raise DomainError("an expression that folded once did not fold again")
    return code.value
