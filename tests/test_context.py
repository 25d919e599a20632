"""The evaluation context: sheets evaluated in one process keep their own state, and nothing
global grows with the number of sheets built."""

from __future__ import annotations

import sys

import astropy.constants as ac
import pytest

from calc import Sheet

# A sheet whose numbers depend on the pinned constants (G through a mass in kg) and on the
# sheet's PPN γ (the deflection scales with (1 + γ)/2).
TEMPLATE = """constants {sets}
ppn gamma = {gamma}
M = 1.98847e30 kg
GM = const.G * M
theta = deflection(M, 1 AU) in uas
M_unc = 1.98847e30 ± 1e26 kg
theta_unc = deflection(M_unc, 1 AU) in uas
"""


def _expected(G: float, gamma: float, mass: float = 1.98847e30) -> float:
    # light deflection (1 + γ)/2 · 4GM/(c²b), Will 2014 Living Rev. Relativity 17, 4, eq. 58
    # (the PPN form; c exact by the SI definition)
    c = 299792458.0
    au = 1.495978707e11          # IAU 2012 Resolution B2 (exact)
    radians = (1 + gamma) / 2 * 4 * G * mass / (c**2 * au)
    return radians * 206264.80624709636e6


def test_two_sheets_alternately_keep_their_constants_and_ppn():
    old = Sheet.from_text(TEMPLATE.format(sets="codata2014 iau2012", gamma="0.5"))
    new = Sheet.from_text(TEMPLATE.format(sets="codata2018 iau2015", gamma="1"))
    G2014, G2018 = ac.codata2014.G.value, ac.codata2018.G.value   # astropy's CODATA tables
    assert G2014 != G2018
    for mass in (1e30, 2e30, 3e30):   # alternate: a what-if on one must not leak into the other
        old.set("M", f"{mass} kg")
        new.set("M", f"{mass} kg")
        assert old["GM"].to_value("m3 / s2") == pytest.approx(G2014 * mass, rel=1e-12)
        assert new["GM"].to_value("m3 / s2") == pytest.approx(G2018 * mass, rel=1e-12)
        assert old["theta"].value == pytest.approx(_expected(G2014, 0.5, mass), rel=1e-12)
        assert new["theta"].value == pytest.approx(_expected(G2018, 1.0, mass), rel=1e-12)


def test_two_sheets_alternately_under_monte_carlo():
    old = Sheet.from_text(TEMPLATE.format(sets="codata2014 iau2012", gamma="0.5"))
    new = Sheet.from_text(TEMPLATE.format(sets="codata2018 iau2015", gamma="1"))
    for _ in range(2):
        mc_old = old.monte_carlo(4000, seed=3)
        mc_new = new.monte_carlo(4000, seed=3)
        # the mean over samples of a function linear in M: the nominal value within a few
        # standard errors (σ/√N, σ relative 5e-5)
        assert mc_old["theta_unc"].value == pytest.approx(
            _expected(ac.codata2014.G.value, 0.5), rel=1e-5)
        assert mc_new["theta_unc"].value == pytest.approx(
            _expected(ac.codata2018.G.value, 1.0), rel=1e-5)
        # and the first-order values did not move
        assert old["theta"].value == pytest.approx(_expected(ac.codata2014.G.value, 0.5),
                                                   rel=1e-9)


def _registries() -> dict[str, int]:
    """The size of every module-level container and function cache in relsheet."""
    sizes = {}
    for name, module in list(sys.modules.items()):
        if not name.startswith("calc"):
            continue
        for attr, value in vars(module).items():
            if isinstance(value, (dict, list, set)):
                sizes[f"{name}.{attr}"] = len(value)
            elif hasattr(value, "cache_info"):
                sizes[f"{name}.{attr}()"] = value.cache_info().currsize
    return sizes


GROWTH_SHEET = """constants codata2018 iau2012
ppn gamma = 1 + 1e-5
a = 1.5 ± 0.1 Msun
b = 3 a / 2 km in 1e3 kg / m
c = deflection(a, 1 Rsun) in arcsec
d = [1, 2, 3] ± 0.1 km
o = orbit(1 AU, 0.1 ± 0.01)
check c == 1.75 arcsec within 10%
"""


def test_building_a_sheet_a_thousand_times_grows_no_registry():
    for _ in range(10):
        Sheet.from_text(GROWTH_SHEET).monte_carlo(20, seed=1)
    after_ten = _registries()
    for index in range(1000):
        sheet = Sheet.from_text(GROWTH_SHEET)
        sheet.set("a", f"1.{index} ± 0.1 Msun")
        if index % 100 == 0:
            sheet.monte_carlo(20, seed=1)
    grown = {k: (after_ten.get(k, 0), n) for k, n in _registries().items()
             if n > after_ten.get(k, 0)}
    assert grown == {}


def test_unit_tables_stay_bounded_with_ever_new_units():
    from calc.physics import units

    for index in range(units.TABLE_LIMIT // 2 + 50):
        # a new scaled unit every time: `in 1.0001 km`, `in 1.0002 km`, …
        Sheet.from_text(f"x = 3 km in {1 + (index + 1) * 1e-6} km\n")
    for table in (units._PRODUCTS, units._QUOTIENTS, units._POWERS, units._SCALES,  # noqa: SLF001
                  units._ONES):  # noqa: SLF001
        assert len(table) <= units.TABLE_LIMIT
