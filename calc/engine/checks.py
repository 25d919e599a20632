"""Checks: expectations written in the sheet, verified on every evaluation.

    check adv == 42.98 arcsec / century within 0.5%     relative
    check adv == 42.98 arcsec / century within 0.01 arcsec / century   absolute
    check omega_dot == 4.2266 deg / yr within 2 sigma   in propagated σ of the difference
    check r_peri > 10 Rsun                              orders: < <= > >=

`within N sigma` uses the first-order σ of the *difference* of the two sides,
so inputs shared by both sides are counted once (GUM eq. 13). `==` without a
tolerance asks for equality after conversion to a common unit. Arrays pass
when every element does.

A :class:`CheckResult` holds what was compared and found; the outputs turn it
into words (``calc.outputs.format.check_detail``).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import astropy.units as u
import numpy as np

from ..errors import DomainError, SheetError, Source, UnitError
from ..language.scope import Scope
from ..language.syntax import CellDef, Chain, CheckDef, Name, Number, Percent
from ..physics.units import describe, quantity, value_in
from .compile import InputTable, compile_cell
from .grid import Grid
from .grid import align as grid_align
from .run import CellProgram, Env, failed_input, run_cell
from .uncertain import Uncertain
from .values import CONTAINERS, Shown, ShownValue, shown

CheckKind = Literal["exact", "relative", "absolute", "sigma", "order"]


@dataclass
class CheckResult:
    """The outcome of one `check` line."""

    line: int
    text: str
    passed: bool
    kind: CheckKind
    op: str
    left: ShownValue | None = None
    right: ShownValue | None = None
    #: the largest difference of the two sides, in the left side's unit
    gap: float = 0.0
    #: the largest relative difference (relative checks)
    relative: float = 0.0
    #: the tolerance: a fraction (relative) or a number of σ (sigma)
    amount: float = 0.0
    #: the tolerance of an absolute check
    tolerance: ShownValue | None = None
    #: σ of the difference (sigma checks), in the left side's unit; None: neither side has one
    sigma: float | None = None
    #: the largest difference in units of that σ (sigma checks)
    ratio: float = 0.0
    error: SheetError | None = None

    @property
    def unit(self) -> u.UnitBase | None:
        return self.left.unit if isinstance(self.left, Shown) else None


@dataclass
class CheckProgram:
    definition: CheckDef
    text: str
    left: CellProgram
    right: CellProgram
    kind: CheckKind
    amount: float = 0.0
    absolute: CellProgram | None = None


def _side(expr, name: str, definition: CheckDef) -> CellDef:
    return CellDef(name, definition.span, expr, None, None, None, expr.span)


def compile_check(definition: CheckDef, scope: Scope, source: Source,
                  inputs: InputTable | None = None) -> CheckProgram:
    line = definition.span.line
    text = source.between(definition.span)

    def side(expr, name: str) -> CellProgram:
        return compile_cell(_side(expr, f"check {line} ({name})", definition), scope, source,
                            inputs=inputs)

    left, right = side(definition.left, "left"), side(definition.right, "right")
    tol = definition.tolerance
    if definition.op != "==":
        program = CheckProgram(definition, text, left, right, "order")
        if tol is not None:
            program.left.error = UnitError("`within` goes with `==` checks only", tol.span,
                                           source=source)
        return program
    if tol is None:
        return CheckProgram(definition, text, left, right, "exact")
    if isinstance(tol, Percent):
        return CheckProgram(definition, text, left, right, "relative", tol.value)
    if isinstance(tol, Chain) and isinstance(tol.head, Number) and len(tol.items) == 1 \
            and isinstance(tol.items[0], Name) and tol.items[0].id == "sigma":
        return CheckProgram(definition, text, left, right, "sigma", tol.head.value)
    absolute = side(tol, "tolerance")
    return CheckProgram(definition, text, left, right, "absolute", absolute=absolute)


def _value(program: CellProgram, env: Env, failed: set[str]):
    bad = [d for d in program.deps if d in failed or d not in env]
    if bad:
        raise failed_input(program, bad)
    if program.error is not None:
        raise program.error
    return run_cell(program, env)


def run_check(program: CheckProgram, env: Env, failed: set[str]) -> CheckResult:
    d = program.definition
    result = CheckResult(d.span.line, program.text, False, program.kind, d.op,
                         amount=program.amount)
    try:
        left = _value(program.left, env, failed)
        right = _value(program.right, env, failed)
        if isinstance(left, Grid) or isinstance(right, Grid):
            # values on axes: each side's numbers over the grid both span
            (left, right), _axes = grid_align(left, right)
        if _dated(left) or _dated(right):
            return _dates_checked(program, result, left, right)
        lv, rv = _plain(left), _plain(right)
        result.left, result.right = shown(left), shown(right)
        try:
            rv_in_left = value_in(rv, lv.unit)
        except u.UnitConversionError:
            raise UnitError(f"the two sides cannot be compared: {describe(lv.unit)} and "
                            f"{describe(rv.unit)}", d.span, source=program.left.source) from None
        a = np.asarray(lv.value, dtype=float)
        b = np.asarray(rv_in_left, dtype=float)
        try:
            np.broadcast_shapes(a.shape, b.shape)
        except ValueError:
            raise DomainError(f"the two sides have different lengths ({a.size} and {b.size})",
                              d.span, source=program.left.source) from None
        if program.kind == "order":
            ok = {"<": a < b, "<=": a <= b, ">": a > b, ">=": a >= b}[d.op]
            result.passed = bool(np.all(ok))
            return result
        gap = np.abs(a - b)
        result.gap = float(np.max(gap))
        if program.kind == "exact":
            result.passed = bool(np.all(gap == 0))
        elif program.kind == "relative":
            allowed = program.amount * np.abs(b)
            result.relative = float(np.max(gap / np.where(b == 0, np.inf, np.abs(b))))
            result.passed = bool(np.all(gap <= allowed))
        elif program.kind == "absolute":
            assert program.absolute is not None
            tol = _plain(_value(program.absolute, env, failed))
            result.tolerance = shown(tol)
            try:
                allowed = value_in(tol, lv.unit)
            except u.UnitConversionError:
                span = d.tolerance.span if d.tolerance is not None else d.span
                raise UnitError(f"the tolerance is {describe(tol.unit)}, the check compares "
                                f"{describe(lv.unit)}", span,
                                source=program.left.source) from None
            result.passed = bool(np.all(gap <= allowed))
        else:
            # sigma: the σ of the difference, correlations included
            if isinstance(left, Uncertain) or isinstance(right, Uncertain):
                # in the left side's unit (angles and plain numbers interconvert)
                difference = left - (right.to(lv.unit) if isinstance(right, Uncertain)
                                     else quantity(rv_in_left, lv.unit))
                sigma = np.asarray(difference.to(lv.unit).sigma_value()
                                   if isinstance(difference, Uncertain) else 0.0)
                result.sigma = float(np.max(sigma))
            else:
                sigma = np.asarray(0.0)
            with np.errstate(divide="ignore", invalid="ignore"):
                result.ratio = float(np.max(np.where(sigma > 0, gap / sigma,
                                                     np.where(gap == 0, 0.0, np.inf))))
            result.passed = bool(np.all(gap <= program.amount * sigma))
        return result
    except SheetError as err:
        result.passed = False
        result.error = err.located(d.span, program.left.source).kept()
        return result


def _dated(value) -> bool:
    from ..physics.records import is_date

    return is_date(value) or type(value).__name__ == "UncertainDate"


def _dates_checked(program, result, left, right):
    """A check between dates: an order (`check t1 > t0`) or equality (`==`), nominal dates."""
    d = program.definition
    if not (_dated(left) and _dated(right)):
        raise UnitError("a check compares a date with a date (or a duration with a time)",
                        d.span, source=program.left.source)
    if program.kind not in ("order", "exact"):
        raise UnitError("dates are checked in order or for equality; for a tolerance check "
                        "the duration between them: `check t1 - t0 < 2 s`", d.span,
                        source=program.left.source)
    a = left.nominal_date() if type(left).__name__ == "UncertainDate" else left
    b = right.nominal_date() if type(right).__name__ == "UncertainDate" else right
    test = {"<": a < b, "<=": a <= b, ">": a > b, ">=": a >= b, "==": a == b}[d.op]
    result.passed = bool(np.all(test))
    result.left, result.right = shown(left), shown(right)
    return result


def _plain(value):
    """The nominal Quantity of a side (records cannot be compared)."""
    if isinstance(value, Uncertain):
        return value.nominal
    if getattr(value, "flags", None) is not None and not isinstance(value, u.Quantity):
        raise UnitError("a check compares quantities; a comparison inside it gives truths",
                        hint="write the comparison as the check itself, e.g. `check y < 10 m`")
    if isinstance(value, CONTAINERS) or not isinstance(value, u.Quantity):
        raise UnitError("a check compares quantities, not records")
    return value
