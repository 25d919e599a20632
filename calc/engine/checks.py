"""Checks: expectations written in the sheet, verified on every evaluation.

    check adv == 42.98 arcsec / century within 0.5%     relative
    check adv == 42.98 arcsec / century within 0.01 arcsec / century   absolute
    check omega_dot == 4.2266 deg / yr within 2 sigma   in propagated σ of the difference
    check r_peri > 10 Rsun                              orders: < <= > >=

`within N sigma` uses the first-order σ of the *difference* of the two sides,
so inputs shared by both sides are counted once (GUM eq. 13). `==` without a
tolerance asks for equality after conversion to a common unit. Arrays pass
when every element does.
"""

from __future__ import annotations

from dataclasses import dataclass

import astropy.units as u
import numpy as np

from ..errors import InputFailedError, SheetError, Source, UnitError
from ..language.syntax import CellDef, Chain, CheckDef, Name, Number, Percent
from ..outputs.format import format_quantity
from ..physics.units import describe, unit_string, value_in
from .compile import CellProgram, compile_cell, run_cell
from .uncertain import Uncertain


@dataclass
class CheckResult:
    line: int
    text: str
    passed: bool
    detail: str
    error: SheetError | None = None


@dataclass
class CheckProgram:
    definition: CheckDef
    text: str
    left: CellProgram
    right: CellProgram
    kind: str                      # "exact", "relative", "absolute", "sigma", "order"
    amount: float | None = None    # relative fraction or number of sigmas
    absolute: CellProgram | None = None

    @property
    def deps(self) -> set[str]:
        names = set(self.left.deps) | set(self.right.deps)
        if self.absolute is not None:
            names |= set(self.absolute.deps)
        return names


def _side(expr, name: str, definition: CheckDef) -> CellDef:
    return CellDef(name, definition.span, expr, None, None, None, expr.span)


def compile_check(definition: CheckDef, scope, source: Source) -> CheckProgram:
    line = definition.span.line
    text = source.between(definition.span)
    left = compile_cell(_side(definition.left, f"check {line} (left)", definition), scope, source)
    right = compile_cell(_side(definition.right, f"check {line} (right)", definition), scope,
                         source)
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
    absolute = compile_cell(_side(tol, f"check {line} (tolerance)", definition), scope, source)
    return CheckProgram(definition, text, left, right, "absolute", absolute=absolute)


def _value(program: CellProgram, env: dict, failed: set[str]):
    bad = [d for d in program.deps if d in failed or d not in env]
    if bad:
        raise InputFailedError(f"input `{bad[0]}` failed", bad, span=program.deps[bad[0]],
                               source=program.source)
    if program.error is not None:
        raise program.error
    return run_cell(program, env)


def _show(q) -> str:
    number, unit = format_quantity(q)
    return f"{number} {unit}".strip()


def run_check(program: CheckProgram, env: dict, failed: set[str]) -> CheckResult:
    d = program.definition
    line = d.span.line
    try:
        left = _value(program.left, env, failed)
        right = _value(program.right, env, failed)
        lv, rv = _plain(left), _plain(right)
        try:
            rv_in_left = value_in(rv, lv.unit)
        except u.UnitConversionError:
            raise UnitError(f"the two sides cannot be compared: {describe(lv.unit)} and "
                            f"{describe(rv.unit)}", d.span, source=program.left.source) from None
        a = np.asarray(lv.value, dtype=float)
        b = np.asarray(rv_in_left, dtype=float)
        both = f"{_show(left)} vs {_show(right)}"
        if program.kind == "order":
            ok = {"<": a < b, "<=": a <= b, ">": a > b, ">=": a >= b}[d.op]
            return CheckResult(line, program.text, bool(np.all(ok)), f"{both} ({d.op})")
        gap = np.abs(a - b)
        if program.kind == "exact":
            return CheckResult(line, program.text, bool(np.all(gap == 0)), f"{both} (exactly)")
        if program.kind == "relative":
            allowed = program.amount * np.abs(b)
            rel = np.max(gap / np.where(b == 0, np.inf, np.abs(b)))
            return CheckResult(line, program.text, bool(np.all(gap <= allowed)),
                               f"{both}: differ by {rel * 100:.3g}% (tolerance "
                               f"{program.amount * 100:g}%)")
        if program.kind == "absolute":
            tol = _plain(_value(program.absolute, env, failed))
            try:
                allowed = value_in(tol, lv.unit)
            except u.UnitConversionError:
                raise UnitError(f"the tolerance is {describe(tol.unit)}, the check compares "
                                f"{describe(lv.unit)}", d.tolerance.span,
                                source=program.left.source) from None
            return CheckResult(line, program.text, bool(np.all(gap <= allowed)),
                               f"{both}: differ by {float(np.max(gap)):.4g} {unit_string(lv.unit)} "
                               f"(tolerance {_show(tol)})")
        # sigma: the σ of the difference, correlations included
        difference = left - right if isinstance(left, Uncertain) or isinstance(right, Uncertain) \
            else None
        sigma = 0.0 if difference is None else np.asarray(
            difference.to(lv.unit).sigma_value() if isinstance(difference, Uncertain) else 0.0)
        allowed = program.amount * sigma
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = np.max(np.where(sigma > 0, gap / sigma, np.where(gap == 0, 0.0, np.inf)))
        return CheckResult(line, program.text, bool(np.all(gap <= allowed)),
                           f"{both}: differ by {ratio:.3g} σ (tolerance {program.amount:g} σ; "
                           f"σ of the difference {float(np.max(sigma)):.3g} {unit_string(lv.unit)})")
    except SheetError as err:
        return CheckResult(line, program.text, False, f"error: {err.message}", err)


def _plain(value):
    """The nominal Quantity of a side (records cannot be compared)."""
    if isinstance(value, Uncertain):
        return value.nominal
    if not isinstance(value, u.Quantity):
        raise UnitError("a check compares quantities, not records")
    return value
