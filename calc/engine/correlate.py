"""`correlation a, b = r`: two `±` inputs that are not independent.

The coefficient is stored on the two inputs (:class:`~calc.engine.uncertain.Input`), so linear
propagation uses the covariance r·σa·σb wherever the inputs meet (JCGM 100:2008, eq. 13) and
Monte Carlo draws them jointly (:meth:`~calc.engine.context.Sampling.normal`). The matrix of
every group of correlated inputs must be positive semi-definite: a set of coefficients no
joint distribution can have is an error naming the inputs.
"""

from __future__ import annotations

import astropy.units as u
import numpy as np

from ..errors import DomainError, SheetError, Source, UnitError
from ..language.syntax import CellDef, CorrelationDef, Dotted, Name
from .uncertain import Input, Uncertain


def _input_of(node, cells, namespaces: dict) -> tuple[str, Input]:
    """The one `±` input a cell (or `ns.cell`) is."""
    if isinstance(node, Dotted):
        name = ".".join(node.parts)
        sheet, inner = None, node.parts
        target = namespaces
        for part in inner[:-1]:
            if part not in target:
                raise DomainError(f"no imported sheet `{part}`", node.span)
            sheet = target[part]
            target = sheet.namespaces
        if sheet is None or inner[-1] not in sheet:
            raise DomainError(f"no cell `{name}`", node.span)
        cell = sheet.cell(inner[-1])
    else:
        name = node.id if isinstance(node, Name) else str(node)
        if name not in cells.cells:
            raise DomainError(f"no cell `{name}`", node.span)
        cell = cells.cells[name]
    if cell.error is not None:
        raise DomainError(f"`{name}` failed: {cell.error.message}", node.span)
    raw = cell.raw
    if not isinstance(raw, Uncertain) or len(raw.parts) != 1:
        raise DomainError(f"`{name}` is not a measured input (`value ± σ`)", node.span,
                          hint="a correlation couples two cells written as `value ± sigma`")
    (key,) = raw.parts
    return name, key


def apply(definitions: list[CorrelationDef], cells, namespaces: dict, source: Source,
          touched: list[Input]) -> list[SheetError]:
    """Set the coefficients of every `correlation` line; returns the errors. ``touched`` holds
    the inputs coefficients were set on last time (cleared first, then refilled)."""
    # coefficients are set again each time (a what-if makes a new input, while values computed
    # before it keep the old one: both must carry the coefficient)
    touched.clear()
    errors: list[SheetError] = []
    named: dict[Input, str] = {}
    pairs: set[frozenset] = set()
    for definition in definitions:
        try:
            first, a = _input_of(definition.first, cells, namespaces)
            second, b = _input_of(definition.second, cells, namespaces)
            if a is b:
                raise DomainError(f"`{first}` is correlated with itself", definition.span)
            coefficient = cells.evaluate(CellDef("correlation", definition.span,
                                                 definition.coefficient, None, None, None,
                                                 definition.coefficient.span), source)
            try:
                r = coefficient.to_value(u.dimensionless_unscaled)
            except (u.UnitConversionError, AttributeError):
                raise UnitError("a correlation coefficient is a plain number",
                                definition.coefficient.span) from None
            if np.ndim(r) != 0 or not -1.0 <= float(r) <= 1.0:
                raise DomainError("a correlation coefficient is a single number from -1 to 1",
                                  definition.coefficient.span)
            if frozenset((a, b)) in pairs:
                raise DomainError(f"`{first}` and `{second}` are correlated twice",
                                  definition.span)
            pairs.add(frozenset((a, b)))
            a.correlations[b] = float(r)
            b.correlations[a] = float(r)
            touched += [a, b]
            named[a], named[b] = first, second
        except SheetError as err:
            errors.append(err.located(definition.span, source))
    errors += _semi_definite(named, definitions, source)
    return errors


def groups(inputs) -> list[list[Input]]:
    """The inputs in groups connected by correlations."""
    seen: set[Input] = set()
    out = []
    for start in inputs:
        if start in seen:
            continue
        group, todo = [], [start]
        while todo:
            key = todo.pop()
            if key in seen:
                continue
            seen.add(key)
            group.append(key)
            todo += list(key.correlations)
        out.append(group)
    return out


def matrix(group: list[Input]) -> np.ndarray:
    n = len(group)
    m = np.eye(n)
    for i, a in enumerate(group):
        for j, b in enumerate(group):
            if i != j:
                m[i, j] = a.correlations.get(b, 0.0)
    return m


def _semi_definite(named: dict[Input, str], definitions, source: Source) -> list[SheetError]:
    errors: list[SheetError] = []
    order = {key: index for index, key in enumerate(named)}
    for group in groups(list(named)):
        if len(group) < 3:
            continue   # a pair with |r| ≤ 1 is always a valid correlation matrix
        group.sort(key=lambda key: order.get(key, len(order)))
        if np.linalg.eigvalsh(matrix(group)).min() < -1e-12:
            names = ", ".join(f"`{named.get(k, k.name)}`" for k in group)
            errors.append(DomainError(
                f"the correlations of {names} are impossible together: their matrix is not "
                "positive semi-definite", definitions[-1].span,
                hint="check the coefficients against the fit's covariance matrix",
                source=source))
            for key in group:
                key.correlations.clear()
    return errors
