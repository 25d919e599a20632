"""`solve EQ[, EQ…] for CELL[, CELL…]`: cells whose values make equations hold.

The unknowns' definitions are their starting values. To try a value of the unknowns, the
cells between them and the equations (the *chain*: downstream of an unknown, upstream of an
equation) are run again in a copy of the sheet's values, so a solve evaluates part of the
sheet many times without touching it (the evaluation is re-entrant). The solver works on
numbers in SI, each unknown scaled by its starting value:

- one unknown with a bracket `for x in [lo, hi]`: Brent's method (scipy.optimize.brentq)
  after a scan of the bracket that refuses no root and two roots;
- otherwise, single values: scipy.optimize.root (Powell's hybrid method), then a check of the
  Jacobian (a singular one is an error, the solution would not be unique);
- values on axes (a solve per point) and Monte Carlo samples: Newton's method vectorised over
  every point and sample at once (a batched linear solve per step), with a numerical Jacobian.

Uncertainty: in linear mode by the implicit function theorem, ∂x/∂p = −J⁻¹ ∂F/∂p (the
residuals F evaluated with the inputs' contributions at the solution give ∂F/∂p); under
Monte Carlo each sample is solved (vectorised), and samples that do not converge are counted
and make the unknowns fail with a message saying how many.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import astropy.units as u
import numpy as np

from ..errors import DomainError, NameResolutionError, SheetError, Source, Span, UnitError
from ..language.syntax import ArrayLiteral, CellDef, Dotted, Name, SolveDef
from ..physics.units import conversion_scale, describe
from .grid import Grid
from .run import CellProgram, Env, run_cell
from .samples import Samples
from .uncertain import Uncertain
from .values import nominal

#: Relative size of the residuals (scaled by the equations' sides) that counts as solved.
TOLERANCE = 1e-12
#: Newton steps before a vectorised solve gives up.
MAX_STEPS = 60
#: Points at which a bracket is scanned for sign changes before Brent's method runs.
BRACKET_SCAN = 200


@dataclass
class SolveProgram:
    definition: SolveDef
    source: Source
    unknowns: list[str] = field(default_factory=list)
    bracket: tuple | None = None   # (Code-free lo, hi) Quantities for a single unknown
    sides: list[tuple[CellProgram, CellProgram]] = field(default_factory=list)
    deps: set[str] = field(default_factory=set)
    chain: list[str] = field(default_factory=list)
    error: SheetError | None = None

    @property
    def span(self) -> Span:
        return self.definition.span


def compile_solve(definition: SolveDef, cells, source: Source) -> SolveProgram:
    """The compiled form of a `solve` line; a problem found now is kept as its error."""
    from .compile import compile_cell

    program = SolveProgram(definition, source)
    # the unknowns first, so that a solve refused below leaves them with its error (never
    # with their starting values)
    named = [u.cell.id for u in definition.unknowns if isinstance(u.cell, Name)]
    program.unknowns = [n for n in dict.fromkeys(named) if n in cells.cells]
    try:
        equations, unknowns = definition.equations, definition.unknowns
        duplicates = [n for n in dict.fromkeys(named) if named.count(n) > 1]
        if duplicates:
            raise DomainError(f"`{duplicates[0]}` is listed twice among the unknowns",
                              definition.span)
        if len(equations) != len(unknowns):
            raise DomainError(f"{len(equations)} equation{'s' if len(equations) != 1 else ''} "
                              f"for {len(unknowns)} unknown{'s' if len(unknowns) != 1 else ''}",
                              definition.span,
                              hint="a solve needs as many equations as unknowns")
        for unknown in unknowns:
            if isinstance(unknown.cell, Dotted):
                raise DomainError(f"`{'.'.join(unknown.cell.parts)}` is a cell of another sheet; "
                                  "a solve's unknowns are cells of this one", unknown.span)
            name = unknown.cell.id
            if name not in cells.cells:
                raise NameResolutionError(f"no cell `{name}` to solve for", unknown.cell.span,
                                          hint="define it first: its definition is the "
                                               "starting value")
            if unknown.bracket is not None:
                if len(unknowns) != 1:
                    raise DomainError("a bracket `in [lo, hi]` goes with a single unknown",
                                      unknown.bracket.span)
                program.bracket = _bracket(unknown.bracket, cells, source)
        for k, equation in enumerate(equations):
            pair = []
            for side in (equation.left, equation.right):
                side_def = CellDef(f"equation {k + 1}", equation.span, side, None, None, None,
                                   side.span)
                compiled = compile_cell(side_def, cells.scope, source, inputs=cells.inputs)
                if compiled.error is not None:
                    raise compiled.error
                program.deps |= set(compiled.deps)
                pair.append(compiled)
            program.sides.append((pair[0], pair[1]))
    except SheetError as err:
        program.error = err.located(definition.span, source)
    return program


def _bracket(node, cells, source: Source) -> tuple:
    if not isinstance(node, ArrayLiteral) or len(node.items) != 2:
        raise DomainError("a bracket is two values `[lo, hi]`", node.span)
    values = []
    for item in node.items:
        definition = CellDef("bracket", item.span, item, None, None, None, item.span)
        values.append(nominal(cells.evaluate(definition, source)))
    lo, hi = values
    try:
        scale = conversion_scale(hi.unit, lo.unit)
    except u.UnitConversionError:
        raise UnitError(f"the bracket's ends are {describe(lo.unit)} and {describe(hi.unit)}",
                        node.span) from None
    return lo, (hi.value * scale) * lo.unit


def plan(program: SolveProgram, cells) -> None:
    """Find the chain of cells between the unknowns and the equations, or the error of an
    unknown no equation reaches."""
    if program.error is not None:
        return
    reached = set(program.deps)
    for name in program.deps:
        reached |= cells.graph.upstream(name)
    for name in program.unknowns:
        if name not in reached:
            program.error = DomainError(f"no equation depends on `{name}`", program.span,
                                        hint="each unknown must change some equation",
                                        source=program.source)
            return
    downstream: set[str] = set()
    for name in program.unknowns:
        downstream |= cells.graph.downstream(name)
    program.chain = [n for n in cells.order if n in downstream and n in reached
                     and n not in program.unknowns]
    for name in program.unknowns:
        if name in cells.cycle_members:
            program.error = DomainError(f"`{name}` is on a cycle", program.span,
                                        source=program.source)


# ---- evaluating the residuals ---------------------------------------------------------------


class Problem:
    """The residual function of one solve over a copy of the sheet's values."""

    def __init__(self, program: SolveProgram, cells, env: Env, units: list[u.UnitBase],
                 scales: np.ndarray) -> None:
        self.program = program
        self.cells = cells
        self.env = env
        self.units = units
        self.scales = scales      # each unknown's SI scale (its starting magnitude)
        self.axes: tuple = ()
        self.sampled = 0          # samples count under Monte Carlo, else 0
        self.side_scales: np.ndarray | None = None
        self.evaluations = 0

    def values_of(self, z: np.ndarray) -> list:
        """The unknowns' values for scaled numbers ``z`` (shape (n, *points))."""
        out = []
        for i, unit in enumerate(self.units):
            number = z[i] * self.scales[i]
            if self.sampled:
                value = Samples(u.Quantity(number, unit))
            else:
                value = u.Quantity(number, unit)
            out.append(Grid(value, self.axes) if self.axes else value)
        return out

    def sides(self, z: np.ndarray, env: Env | None = None) -> list[tuple]:
        """(left, right) of each equation with the unknowns at ``z``."""
        self.evaluations += 1
        trial = dict(self.env if env is None else env)
        for name, value in zip(self.program.unknowns, self.values_of(z)):
            trial[name] = value
        for name in self.program.chain:
            trial[name] = run_cell(self.cells.programs[name], trial)
        return [(run_cell(left, trial), run_cell(right, trial))
                for left, right in self.program.sides]

    def residuals(self, z: np.ndarray) -> np.ndarray:
        """(left − right) of each equation in SI, scaled by the size of its sides."""
        rows = []
        for k, (left, right) in enumerate(self.sides(z)):
            lv, rv = _numbers(left, self.program, k), _numbers(right, self.program, k)
            if self.sampled:
                # samples first, then the value's own dimensions, on both sides alike
                width = max(_value_ndim(left, lv), _value_ndim(right, rv))
                lv, rv = _framed(left, lv, width), _framed(right, rv, width)
            try:
                scale = conversion_scale(_unit(right), _unit(left))
            except u.UnitConversionError:
                raise UnitError(f"the sides of equation {k + 1} are {describe(_unit(left))} and "
                                f"{describe(_unit(right))}", self.program.definition.equations[k].span
                                ) from None
            rows.append(lv - rv * scale)
        if self.sampled:
            widest = max(r.ndim for r in rows)
            rows = [_padded(r, widest) for r in rows]
        stacked = np.array(np.broadcast_arrays(*rows))
        if self.side_scales is None:
            size = np.array([np.max(np.abs(r)) if np.size(r) else 1.0 for r in rows])
            lefts = [np.max(np.abs(_numbers(left, self.program, k)))
                     for k, (left, _) in enumerate(self.sides(z))]
            self.side_scales = np.where(np.array(lefts) > 0, np.array(lefts),
                                        np.where(size > 0, size, 1.0))
        shape = (len(rows),) + (1,) * (stacked.ndim - 1)
        return stacked / self.side_scales.reshape(shape)


def _sampled(value) -> bool:
    if isinstance(value, Grid):
        value = value.data
    return isinstance(value, Samples)


def _value_ndim(value, numbers: np.ndarray) -> int:
    """How many dimensions a side has of its own (without the sample axis)."""
    return numbers.ndim - 1 if _sampled(value) else numbers.ndim


def _framed(value, numbers: np.ndarray, width: int) -> np.ndarray:
    """A side's numbers as (samples or 1, …, value dimensions) with ``width`` value
    dimensions, so that both sides and every equation broadcast alike."""
    own = _value_ndim(value, numbers)
    if _sampled(value):
        return numbers.reshape(numbers.shape[:1] + (1,) * (width - own) + numbers.shape[1:])
    return numbers.reshape((1,) + (1,) * (width - own) + numbers.shape)


def _padded(values: np.ndarray, ndim: int) -> np.ndarray:
    """Samples (the first axis) with dimensions of length one after it, up to ``ndim``."""
    if values.ndim >= ndim or values.ndim == 0:
        return values
    return values.reshape(values.shape[:1] + (1,) * (ndim - values.ndim) + values.shape[1:])


def _unit(value) -> u.UnitBase:
    return value.unit


def _numbers(value, program: SolveProgram, k: int) -> np.ndarray:
    if isinstance(value, Grid):
        value = value.data
    if isinstance(value, Uncertain):
        value = value.nominal
    if isinstance(value, Samples):
        return np.asarray(value.data.value, dtype=float)
    if not isinstance(value, u.Quantity):
        raise DomainError(f"equation {k + 1}: a side is not a quantity",
                          program.definition.equations[k].span)
    return np.asarray(value.value, dtype=float)


# ---- the solvers ----------------------------------------------------------------------------


def solve_nominal(program: SolveProgram, cells) -> list:
    """Solve with every cell at its nominal value; returns the unknowns' values (each a
    Quantity, or a value on the equations' axes)."""
    env = {k: nominal(v) for k, v in cells.values.items()}
    starts = [_start(cells, name, program) for name in program.unknowns]
    problem = _problem(program, cells, env, starts)
    z0 = np.array([float(s.value) for s in (q.data if isinstance(q, Grid) else q
                                             for q in starts)]) / problem.scales
    first = problem.residuals(z0)
    if first.ndim > 1:
        # the equations hold on axes: one solve per point, vectorised
        problem.axes = _axes_of(problem.sides(z0)) or ()
        z = np.broadcast_to(z0.reshape((-1,) + (1,) * (first.ndim - 1)), first.shape).copy()
        z, ok, residual = newton(problem.residuals, z, program, problem)
        if not ok.all():
            raise DomainError(f"the solve did not converge at {int((~ok).sum())} of {ok.size} "
                              f"points (largest residual {np.nanmax(np.abs(residual)):.3g})",
                              program.span, hint="try other starting values")
        return problem.values_of(z)
    if program.bracket is not None:
        z = _bracketed(problem, program)
    else:
        z = _root(problem, program, z0)
    return problem.values_of(z)


def _start(cells, name: str, program: SolveProgram):
    """An unknown's current value (its starting value, or the last solution)."""
    if name not in cells.values:
        raise DomainError(f"the starting value of `{name}` failed", program.span,
                          hint=f"fix the definition of `{name}`: it is where the solver starts")
    return nominal(cells.values[name])


def _problem(program: SolveProgram, cells, env: Env, starts: list) -> Problem:
    units, scales = [], []
    for name, start in zip(program.unknowns, starts):
        if isinstance(start, Grid):
            start = start.data
        if not isinstance(start, u.Quantity) or np.ndim(start.value) != 0:
            raise DomainError(f"the starting value of `{name}` must be a single quantity",
                              program.span)
        units.append(start.unit)
        scales.append(abs(float(start.value)) or 1.0)
    return Problem(program, cells, env, units, np.array(scales))


def _axes_of(sides: list) -> tuple:
    for left, right in sides:
        for side in (left, right):
            if isinstance(side, Grid):
                return side.axes
    return ()


def _root(problem: Problem, program: SolveProgram, z0: np.ndarray) -> np.ndarray:
    from scipy.optimize import root

    def f(z):
        return problem.residuals(z)

    try:
        found = root(f, z0, method="hybr", options={"xtol": 1e-13, "maxfev": 400})
    except SheetError:
        raise
    except (ValueError, FloatingPointError) as exc:
        raise DomainError(f"the solver failed: {exc}", program.span) from None
    residual = float(np.max(np.abs(f(found.x))))
    if not residual <= 1e-9:
        raise DomainError(f"the solve did not converge (residual {residual:.3g} after "
                          f"{found.nfev} evaluations)", program.span,
                          hint="try other starting values, or a bracket for one unknown")
    jacobian = _jacobian(f, found.x)
    if not np.all(np.isfinite(jacobian)) or np.linalg.cond(jacobian) > 1e13:
        raise DomainError("the equations' Jacobian is singular at the solution: the unknowns "
                          "are not determined by these equations", program.span,
                          hint="check that each equation brings new information")
    return found.x


def _jacobian(f: Callable, z: np.ndarray) -> np.ndarray:
    n = z.size
    base = f(z)
    jacobian = np.empty((base.size, n))
    for i in range(n):
        step = 1e-7 * max(1.0, abs(z[i]))
        moved = z.copy()
        moved[i] += step
        back = z.copy()
        back[i] -= step
        jacobian[:, i] = (f(moved) - f(back)) / (2 * step)
    return jacobian


def _bracketed(problem: Problem, program: SolveProgram) -> np.ndarray:
    from scipy.optimize import brentq

    lo, hi = program.bracket  # type: ignore[misc]
    unit, scale = problem.units[0], problem.scales[0]
    try:
        a = lo.to_value(unit) / scale
        b = hi.to_value(unit) / scale
    except u.UnitConversionError:
        raise UnitError(f"the bracket is {describe(lo.unit)}, the unknown "
                        f"{describe(unit)}", program.span) from None
    a, b = min(a, b), max(a, b)

    def f(x: float) -> float:
        return float(problem.residuals(np.array([x]))[0])

    grid = np.linspace(a, b, BRACKET_SCAN + 1)
    values = np.array([f(x) for x in grid])
    signs = np.sign(values)
    changes = np.flatnonzero(signs[:-1] * signs[1:] < 0)
    zeros = np.flatnonzero(signs == 0)
    count = len(changes) + len(zeros)
    ends = f"[{lo.to_value(unit):g}, {hi.to_value(unit):g}] {unit.to_string()}"
    if count == 0:
        raise DomainError(f"no root in the bracket {ends}: the equation keeps one sign there "
                          f"(residual from {values.min():.3g} to {values.max():.3g})",
                          program.span, hint="widen the bracket or move it")
    if count > 1:
        places = sorted([grid[i] for i in changes] + [grid[i] for i in zeros])[:2]
        raise DomainError(f"two roots in the bracket {ends} (near "
                          f"{places[0] * scale:g} and {places[1] * scale:g} {unit.to_string()})",
                          program.span, hint="narrow the bracket around the root you want")
    if len(zeros):
        return np.array([grid[zeros[0]]])
    i = changes[0]
    return np.array([brentq(f, grid[i], grid[i + 1], xtol=1e-15, rtol=1e-15, maxiter=200)])


def newton(residuals: Callable, z: np.ndarray, program: SolveProgram,
           problem: Problem) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Newton's method on every point (and sample) at once: ``z`` has shape (n, *points);
    returns the solution, which points converged, and the last residuals."""
    n = z.shape[0]
    for _ in range(MAX_STEPS):
        f = residuals(z)
        if np.all(np.abs(f) < TOLERANCE * 10):
            break
        jacobian = np.empty((n, n) + z.shape[1:])
        for i in range(n):
            step = 1e-7 * np.maximum(1.0, np.abs(z[i]))
            moved = z.copy()
            moved[i] = z[i] + step
            jacobian[:, i] = (residuals(moved) - f) / step
        # batched solve: points last → first
        jm = np.moveaxis(jacobian.reshape(n, n, -1), -1, 0)
        fm = np.moveaxis(f.reshape(n, -1), -1, 0)
        with np.errstate(all="ignore"):
            try:
                delta = np.linalg.solve(jm, fm[..., None])[..., 0]
            except np.linalg.LinAlgError:
                delta = np.stack([np.linalg.lstsq(a, b, rcond=None)[0] for a, b in zip(jm, fm)])
        z = z - np.moveaxis(delta, 0, -1).reshape(z.shape)
    f = residuals(z)
    ok = np.all(np.abs(f) < 1e-9, axis=0) & np.all(np.isfinite(z), axis=0)
    return z, ok, f


# ---- uncertainty ------------------------------------------------------------------------------


def with_uncertainty(program: SolveProgram, cells, solution: list) -> list:
    """The solution with the inputs' contributions by the implicit function theorem
    (∂x/∂p = −J⁻¹ ∂F/∂p), for single values; values on axes keep their nominal solution
    per point with contributions likewise per point."""
    env = dict(cells.values)
    if not any(isinstance(v, Uncertain) or (isinstance(v, Grid) and isinstance(v.data, Uncertain))
               for v in env.values()):
        return solution
    starts = [_start(cells, name, program) for name in program.unknowns]
    problem = _problem(program, cells, {k: nominal(v) for k, v in env.items()}, starts)
    axes = next((v.axes for v in solution if isinstance(v, Grid)), ())
    problem.axes = axes
    numbers = [v.data if isinstance(v, Grid) else v for v in solution]
    z = np.array([q.to_value(unit) / s for q, unit, s in zip(numbers, problem.units,
                                                              problem.scales)])
    f0 = problem.residuals(z)   # fixes the side scales at the solution
    n = len(numbers)
    # J per point
    jacobian = np.empty((n, n) + z.shape[1:])
    for i in range(n):
        step = 1e-7 * np.maximum(1.0, np.abs(z[i]))
        moved, back = z.copy(), z.copy()
        moved[i] = z[i] + step
        back[i] = z[i] - step
        jacobian[:, i] = (problem.residuals(moved) - problem.residuals(back)) / (2 * step)
    # ∂F/∂p: the equations' sides evaluated with the inputs' contributions
    problem.env = env
    sides = problem.sides(z, env)
    side_scales = problem.side_scales if problem.side_scales is not None else np.ones(n)
    parts: dict = {}
    for k, (left, right) in enumerate(sides):
        scale_r = conversion_scale(_unit(right), _unit(left))
        for value, sign, factor in ((left, 1.0, 1.0), (right, -1.0, scale_r)):
            data = value.data if isinstance(value, Grid) else value
            if isinstance(data, Uncertain):
                for key, part in data.parts.items():
                    row = parts.setdefault(key, np.zeros((n,) + z.shape[1:]))
                    row[k] = row[k] + sign * factor * np.asarray(part) / side_scales[k]
    del f0
    out = []
    jm = np.moveaxis(jacobian.reshape(n, n, -1), -1, 0)
    inverse = np.linalg.pinv(jm)
    for i, (q, s) in enumerate(zip(numbers, problem.scales)):
        contributions = {}
        for key, row in parts.items():
            rm = np.moveaxis(row.reshape(n, -1), -1, 0)
            dz = -np.einsum("pij,pj->pi", inverse, rm)
            contributions[key] = (dz[:, i] * s).reshape(z.shape[1:]) if z.ndim > 1 \
                else float(dz[0, i] * s)
        value = Uncertain(q, contributions) if contributions else q
        out.append(Grid(value, axes) if axes else value)
    return out


def solve_sampled(program: SolveProgram, cells, env: Env, count: int) -> list:
    """Solve every Monte Carlo sample at once (vectorised Newton from the nominal solution)."""
    current = [_start(cells, name, program) for name in program.unknowns]
    axes = next((v.axes for v in current if isinstance(v, Grid)), ())
    data = [v.data if isinstance(v, Grid) else v for v in current]
    scales = np.array([float(np.max(np.abs(d.value))) or 1.0 for d in data])
    problem = Problem(program, cells, env, [d.unit for d in data], scales)
    problem.sampled = count
    problem.axes = axes
    z0 = np.array([np.asarray(d.value, dtype=float) / sc for d, sc in zip(data, scales)])
    z = np.broadcast_to(z0.reshape((z0.shape[0], 1) + z0.shape[1:]),
                        (z0.shape[0], count) + z0.shape[1:]).copy()
    z, ok, _ = newton(problem.residuals, z, program, problem)
    failed = int((~ok).sum())
    if failed:
        raise DomainError(f"{failed:,} of {ok.size:,} Monte Carlo samples did not converge",
                          program.span, hint="the statistics of the others would be biased; "
                                             "check the inputs' spreads")
    return problem.values_of(z)
