"""σ budgets: how much of a value's uncertainty each input contributes.

For a first-order uncertain value y with contributions c_i = ∂y/∂x_i · σ_i,
σ_y² = Σ c_i² + 2 Σ_{i<j} r_ij c_i c_j (GUM, JCGM 100:2008, eq. 13). A budget
lists each input's square c_i² as its share of σ_y² and, for each correlated
pair, the joint term 2 r_ij c_i c_j (which may be negative): the shares add
up to one.
"""

from __future__ import annotations

from dataclasses import dataclass

import astropy.units as u
import numpy as np

from ..physics.units import quantity
from .uncertain import Input, Uncertain, budget, joint_terms


@dataclass
class BudgetRow:
    """One line of a σ budget: an input (or a correlated pair), its contribution to the
    value in the value's unit, and its share of σ²."""

    inputs: tuple[Input, ...]
    contribution: u.Quantity
    share: float
    correlation: float | None = None

    @property
    def name(self) -> str:
        return " & ".join(i.name for i in self.inputs)


def rows(value) -> list[BudgetRow]:
    """The budget of an uncertain value, largest share first (empty for an exact value); a
    value on axes has the budget of its elements together."""
    data = getattr(value, "data", None)
    if isinstance(data, Uncertain) and hasattr(value, "axes"):
        value = data
    if not isinstance(value, Uncertain):
        return []
    out = [BudgetRow((key,), quantity(np.abs(value.parts[key]), value.unit), share)
           for key, share in budget(value)]
    for a, b, r, share in joint_terms(value):
        joint = 2 * r * np.asarray(value.parts[a]) * np.asarray(value.parts[b])
        size = np.sqrt(np.abs(joint))
        out.append(BudgetRow((a, b), quantity(size, value.unit), share, r))
    return sorted(out, key=lambda row: -abs(row.share))
