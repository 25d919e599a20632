"""What a name means where it stands: the chain rule.

* In a unit chain (names right after a number, or after ``/`` that follows
  one) a name is a unit. If it is not a unit but a cell or a built-in, the
  chain ends before it. A name that is both a unit and a cell of the sheet is
  ambiguous there and refused, with both readings in the hint; so is a unit
  that is also a built-in constant of a different value (``G``: gauss or the
  gravitational constant).
* Outside a chain a name is a cell of the sheet, else a built-in constant.
* After ``in`` every name is a unit.
* ``const.NAME`` is always the built-in constant.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Literal, NamedTuple

import astropy.units as u

from ..errors import NameResolutionError, Span
from ..physics.constants import ConstantEntry, ConstantSelection, constant_table
from ..physics.units import UnitTable, close_matches, did_you_mean, long_name, unit_table
from .syntax import Name


class Resolved(NamedTuple):
    """A name's meaning: a unit, a cell (by name) or a constant value. (A named tuple: one is
    made for every name a sheet uses, and a tuple is the cheapest immutable record.)"""

    kind: Literal["unit", "cell", "constant"]
    unit: u.UnitBase | None = None
    cell: str | None = None
    value: u.Quantity | None = None
    #: the constant's name, for constants (its uncertainty may apply)
    name: str | None = None


#: Where the unit's name goes in a spelling of the hint (a character no sheet text holds:
#: sheet text is never used as a format string).
UNIT_SLOT = "\x00"

#: Did-you-mean hints for unknown units one sheet gets (each looks through thousands of
#: unit names; a sheet of thousands of unknown names must still be answered quickly).
MAX_SUGGESTIONS = 20

#: The PPN parameters a sheet can set with a `ppn` line.
PPN_PARAMETERS = ("gamma", "beta")
#: A `ppn gamma = …` line defines the cell `ppn.gamma`.
PPN_PREFIX = "ppn."


def ppn_cell(parameter: str) -> str:
    """The cell that holds a PPN parameter: `gamma` → `ppn.gamma`."""
    return PPN_PREFIX + parameter


def ppn_parameter(cell: str) -> str | None:
    """The PPN parameter a cell holds (`ppn.gamma` → `gamma`), or None for other cells."""
    return cell[len(PPN_PREFIX):] if cell.startswith(PPN_PREFIX) else None
_GR_VALUE = u.Quantity(1.0)


class Scope:
    """Resolves names for one sheet: its cell names, units and constants."""

    def __init__(self, cell_names, selection: ConstantSelection,
                 namespaces: dict | None = None, failed_namespaces: dict | None = None) -> None:
        #: the sheet's cell names (a live view: cells added later are seen)
        self.cell_names = cell_names
        #: imported sheets by namespace
        self.namespaces = namespaces or {}
        #: how many more did-you-mean hints for unknown names this sheet may compute
        self.suggestions_left = MAX_SUGGESTIONS
        #: namespaces whose `use` line failed, with the line's span
        self.failed_namespaces: dict = failed_namespaces or {}
        #: the sheet's functions whose definition does not parse, with its line number
        self.failed_functions: dict[str, int] = {}
        self.selection = selection
        self.units: UnitTable = unit_table(selection)
        self.constants: dict[str, ConstantEntry] = constant_table(selection)
        #: the sheet's own functions (`ratio(x, y) = …`) by name
        self.functions: dict = {}

    # -- the three positions
    def in_chain(self, name: Name, spellings: Callable[[], tuple[str, str]]) -> Resolved:
        """A name in a unit chain. ``spellings()`` gives the two ways to write what was
        meant (e.g. ``2 * a`` and ``2 {unit}``) for the hint when the name is ambiguous."""
        refusal = self.units.refusal(name.id)
        if refusal:
            raise NameResolutionError(refusal[0], name.span, hint=refusal[1])
        unit = self.units.lookup(name.id)
        if unit is not None:
            if name.id in self.cell_names:
                cell_hint, unit_hint = spellings()
                spelled = long_name(unit, avoid=set(self.cell_names))
                raise NameResolutionError(
                    f"`{name.id}` is both a cell and the unit `{spelled}`",
                    name.span,
                    hint=f"for the cell write `{cell_hint}`; "
                         f"for the unit write `{unit_hint.replace(UNIT_SLOT, spelled)}`")
            constant = self.constants.get(name.id)
            if constant is not None and not _same_value(unit, constant.quantity):
                cell_hint, unit_hint = spellings()
                spelled = long_name(unit, avoid={name.id})
                raise NameResolutionError(
                    f"`{name.id}` is both the unit `{spelled}` and the constant "
                    f"{name.id} ({constant.description})",
                    name.span,
                    hint=f"for the constant write `{cell_hint}`; "
                         f"for the unit write `{unit_hint.replace(UNIT_SLOT, spelled)}`")
            return Resolved("unit", unit=unit)
        if name.id in self.cell_names:
            return Resolved("cell", cell=name.id)
        constant = self.constants.get(name.id)
        if constant is not None:
            return Resolved("constant", value=constant.quantity, name=name.id)
        raise NameResolutionError(
            f"unknown unit `{name.id}`", name.span,
            hint=self._unit_hint(name.id, with_cells=True))

    def _unit_hint(self, name: str, with_cells: bool = False) -> str | None:
        """A did-you-mean for an unknown unit, while this sheet's budget of suggestions
        lasts (a sheet of thousands of unknown names is answered quickly)."""
        if self.suggestions_left <= 0:
            return None
        self.suggestions_left -= 1
        return did_you_mean(self.units.suggestions(name, self.cell_names if with_cells else ()))

    def plain(self, name: Name) -> Resolved:
        """A name outside a chain: a cell, else a built-in constant."""
        if name.id in self.cell_names:
            return Resolved("cell", cell=name.id)
        constant = self.constants.get(name.id)
        if constant is not None:
            return Resolved("constant", value=constant.quantity, name=name.id)
        if self.units.lookup(name.id) is not None:
            raise NameResolutionError(
                f"`{name.id}` is a unit, not a value", name.span,
                hint=f"write `1 {name.id}` for the quantity, or put the number before it")
        options = close_matches(name.id, [*self.cell_names, *self.constants])
        raise NameResolutionError(f"unknown name `{name.id}`", name.span,
                                  hint=did_you_mean(options))

    def unit(self, name: Name) -> u.UnitBase:
        """A name after ``in``: a unit and nothing else."""
        refusal = self.units.refusal(name.id)
        if refusal:
            raise NameResolutionError(refusal[0], name.span, hint=refusal[1])
        unit = self.units.lookup(name.id)
        if unit is not None:
            return unit
        hint = self._unit_hint(name.id)
        if name.id in self.cell_names:
            hint = f"`{name.id}` is a cell; `in` takes a unit such as `km / s`"
        raise NameResolutionError(f"unknown unit `{name.id}`", name.span, hint=hint)

    def dotted(self, parts: tuple[str, ...], span: Span) -> Resolved:
        """``const.NAME`` (a built-in constant) or ``ppn.gamma`` / ``ppn.beta``."""
        if parts[0] == "ppn":
            return self.ppn(parts[1] if len(parts) == 2 else ".".join(parts[1:]), span)
        return Resolved("constant", value=self.builtin(parts, span), name=parts[-1])

    def ppn(self, parameter: str, span: Span) -> Resolved:
        """A PPN parameter: the sheet's ``ppn`` line, else its general-relativity value 1."""
        if parameter not in PPN_PARAMETERS:
            raise NameResolutionError(
                f"unknown PPN parameter `{parameter}`", span,
                hint=did_you_mean([ppn_cell(p) for p in close_matches(parameter,
                                                                       list(PPN_PARAMETERS))])
                or "relsheet knows the PPN parameters gamma and beta")
        name = ppn_cell(parameter)
        if name in self.cell_names:
            return Resolved("cell", cell=name)
        return Resolved("constant", value=_GR_VALUE)

    def builtin(self, parts: tuple[str, ...], span: Span) -> u.Quantity:
        """``const.NAME``."""
        if parts[0] != "const":
            raise NameResolutionError(
                f"unknown name `{'.'.join(parts)}`", span,
                hint="dotted names reach built-in constants as `const.NAME` "
                     "and PPN parameters as `ppn.gamma`")
        if len(parts) != 2 or parts[1] not in self.constants:
            options = close_matches(parts[-1], list(self.constants))
            raise NameResolutionError(
                f"unknown constant `{'.'.join(parts)}`", span,
                hint=did_you_mean([f"const.{o}" for o in options]))
        return self.constants[parts[1]].quantity


def _same_value(unit: u.UnitBase, value: u.Quantity) -> bool:
    """True when a unit and a constant of the same name denote the same quantity (`au`)."""
    try:
        return abs(u.Quantity(1.0, unit).to_value(value.unit) / value.value - 1.0) < 1e-12
    except (u.UnitConversionError, ZeroDivisionError):
        return False
