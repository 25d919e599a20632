"""Constant sets and pinning.

A sheet evaluates under one CODATA edition (physical constants) and one IAU
set (astronomical constants); ``constants codata2018 iau2015`` pins them, and
without that line astropy's configured defaults apply (astropy 8: CODATA 2022
and IAU 2015). The values come from astropy's own constant modules
(``astropy.constants.codata2018`` and so on).

Masses and gravitational parameters are made consistent with the pinned G:
IAU 2015 Resolution B3 fixes the nominal GM of the Sun, Earth and Jupiter, so
the masses are GM / G with G from the pinned CODATA edition (astropy's own
modules use the configured edition's G instead). The IAU 2012 set lists
masses only; its GM values are G · M.
"""

from __future__ import annotations

import importlib
from dataclasses import dataclass
from functools import cache

import astropy
import astropy.units as u

CODATA_SETS = ("codata2014", "codata2018", "codata2022")
IAU_SETS = ("iau2012", "iau2015")

# Bodies whose mass and gravitational parameter are tied by G.
_BODIES = ("sun", "earth", "jup")


@dataclass(frozen=True, slots=True)
class ConstantSelection:
    """The pinned pair of constant sets, e.g. ``ConstantSelection("codata2018", "iau2015")``."""

    codata: str
    iau: str

    @property
    def names(self) -> list[str]:
        return [self.codata, self.iau]

    def __str__(self) -> str:
        return f"{self.codata} + {self.iau}"


@dataclass(frozen=True, slots=True)
class ConstantEntry:
    """A constant's value, its published standard uncertainty, and where it comes from."""

    name: str
    description: str
    quantity: u.Quantity
    uncertainty: float
    reference: str


def default_selection() -> ConstantSelection:
    """astropy's configured constant sets (``astropy.physical_constants`` and friends)."""
    return ConstantSelection(astropy.physical_constants.get(), astropy.astronomical_constants.get())


def _entry(const, quantity: u.Quantity | None = None, reference: str | None = None,
           uncertainty: float | None = None) -> ConstantEntry:
    q = u.Quantity(const.value, const.unit) if quantity is None else quantity
    return ConstantEntry(const.abbrev, const.name, q,
                         const.uncertainty if uncertainty is None else uncertainty,
                         reference or const.reference)


# The IAU time-scale constants. They belong to no CODATA or IAU "set" that astropy
# ships, and they are the same under every pinned selection: the defining ones are
# exact by resolution, L_C is the IERS Conventions value.
TIME_SCALE_CONSTANTS: dict[str, ConstantEntry] = {
    "L_G": ConstantEntry(
        "L_G", "1 − d(TT)/d(TCG): rate of TT below TCG (defining, = W0/c²)",
        u.Quantity(6.969290134e-10), 0.0,
        "IAU 2000 Resolution B1.9 (defining constant); IERS Conventions (2010) Table 1.1"),
    "L_B": ConstantEntry(
        "L_B", "1 − d(TDB)/d(TCB): rate of TDB below TCB (defining)",
        u.Quantity(1.550519768e-8), 0.0,
        "IAU 2006 Resolution B3 (defining constant); IERS Conventions (2010) Table 1.1"),
    "L_C": ConstantEntry(
        "L_C", "average of 1 − d(TCG)/d(TCB) (derived, from a time ephemeris)",
        u.Quantity(1.48082686741e-8), 2e-17,
        "IERS Conventions (2010) Table 1.1 and chapter 10; IAU NSFA current best estimate"),
    "TDB0": ConstantEntry(
        "TDB0", "TDB − TCB offset at 1977 Jan 1.0 TAI at the geocentre (defining)",
        u.Quantity(-6.55e-5, u.s), 0.0,
        "IAU 2006 Resolution B3 (defining constant)"),
    "W0": ConstantEntry(
        "W0", "potential of the geoid used to define L_G = W0/c²",
        u.Quantity(62636856.0, u.m**2 / u.s**2), 0.5,
        "IAU 2000 Resolution B1.9; IERS Conventions (2010) Table 1.1 (± 0.5 m²/s²)"),
}


@cache
def constant_table(selection: ConstantSelection) -> dict[str, ConstantEntry]:
    """Every constant of the selection by its astropy name (``c``, ``G``, ``GM_sun``, ...)."""
    codata = importlib.import_module(f"astropy.constants.{selection.codata}")
    iau = importlib.import_module(f"astropy.constants.{selection.iau}")
    table: dict[str, ConstantEntry] = {}
    for module in (codata, iau):
        for name, const in vars(module).items():
            if isinstance(const, astropy.constants.Constant) and name == const.abbrev:
                table[name] = _entry(const)
    G = table["G"]
    for body in _BODIES:
        mass_name, gm_name = f"M_{body}", f"GM_{body}"
        if gm_name in table:
            gm = table[gm_name]
            mass = (gm.quantity / G.quantity).to(u.kg)
            rel = G.uncertainty / G.quantity.value
            table[mass_name] = ConstantEntry(
                mass_name, table[mass_name].description if mass_name in table else mass_name,
                mass, rel * mass.value, f"{gm.reference} + {G.reference}")
        elif mass_name in table:
            mass = table[mass_name]
            gm = (G.quantity * mass.quantity).to(u.m**3 / u.s**2)
            rel = (G.uncertainty / G.quantity.value) + mass.uncertainty / mass.quantity.value
            table[gm_name] = ConstantEntry(gm_name, f"{mass.description} times G", gm,
                                           rel * gm.value, f"{mass.reference} + {G.reference}")
    table.update(TIME_SCALE_CONSTANTS)
    table["pi"] = ConstantEntry("pi", "pi", u.Quantity(3.141592653589793), 0.0, "mathematics")
    table["inf"] = ConstantEntry("inf", "infinity", u.Quantity(float("inf")), 0.0, "mathematics")
    return table


#: The word of a ``constants`` line that turns on the constants' published uncertainties.
UNCERTAIN_FLAG = "uncertain"


def parse_selection(names: list[str]) -> tuple[ConstantSelection, list[tuple[int, str, str]]]:
    """Turn the words of a ``constants`` line into a selection.

    Returns the selection and a list of problems ``(index, message, hint)``
    for words that name no set or a second set of the same kind. The word
    ``uncertain`` (see :data:`UNCERTAIN_FLAG`) is not a set and is skipped here.
    """
    default = default_selection()
    codata = iau = None
    problems: list[tuple[int, str, str]] = []
    known = ", ".join(CODATA_SETS + IAU_SETS)
    for index, word in enumerate(names):
        if word == UNCERTAIN_FLAG:
            continue
        if word in CODATA_SETS:
            if codata is not None:
                problems.append((index, f"two CODATA editions pinned: `{codata}` and `{word}`",
                                 "pin one CODATA edition and one IAU set"))
            codata = word
        elif word in IAU_SETS:
            if iau is not None:
                problems.append((index, f"two IAU sets pinned: `{iau}` and `{word}`",
                                 "pin one CODATA edition and one IAU set"))
            iau = word
        else:
            problems.append((index, f"unknown constant set `{word}`",
                             f"known sets: {known}; `{UNCERTAIN_FLAG}` uses their uncertainties"))
    return ConstantSelection(codata or default.codata, iau or default.iau), problems


# ---- the selection in force while a sheet evaluates -------------------------------
# Library functions read G (and c) through these, so that a sheet's `constants` line
# reaches them; outside a sheet astropy's defaults apply.


def active_selection() -> ConstantSelection:
    """The selection in force: the evaluating sheet's, else astropy's defaults."""
    return current().selection


def active(name: str) -> u.Quantity:
    """The constant ``name`` (``G``, ``c``, ...) of the selection in force."""
    return constant_table(active_selection())[name].quantity


# The environment module needs the selection types above; imported last to break the cycle.
from .environment import current  # noqa: E402
