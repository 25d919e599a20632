"""calc.physics.constants: constant sets, pinning and shadowing, against published CODATA / IAU values."""

from __future__ import annotations

import astropy.units as u
import pytest

from calc.physics.constants import ConstantSelection, constant_table, default_selection, parse_selection
from conftest import evaluate, only_error


# CODATA recommended values of G for each edition (Mohr et al., Rev. Mod. Phys. 88, 035009 (2016);
# Tiesinga et al., Rev. Mod. Phys. 93, 025010 (2021); CODATA 2022, Mohr et al. (2024)).
@pytest.mark.parametrize("edition, G", [
    ("codata2014", 6.67408e-11),
    ("codata2018", 6.67430e-11),
    ("codata2022", 6.67430e-11),
])
def test_G_per_codata_edition(edition, G):
    sheet = evaluate(f"constants {edition}\nx = G in m^3 kg^-1 s^-2")
    assert sheet["x"].value == pytest.approx(G, rel=1e-12)
    assert sheet.selection.codata == edition


@pytest.mark.parametrize("edition, h", [
    ("codata2014", 6.626070040e-34),   # CODATA 2014 (measured)
    ("codata2018", 6.62607015e-34),    # exact since the 2019 SI redefinition (CODATA 2018)
])
def test_planck_constant_per_edition(edition, h):
    assert evaluate(f"constants {edition}\nx = const.h in J s")["x"].value == pytest.approx(h, rel=1e-12)


def test_speed_of_light_exact():
    # SI definition of the metre (exact; every CODATA edition)
    assert evaluate("x = c")["x"].to_value(u.m / u.s) == 299_792_458


@pytest.mark.parametrize("name, value, unit", [
    ("GM_sun", 1.3271244e20, u.m**3 / u.s**2),    # IAU 2015 Resolution B3, nominal
    ("GM_earth", 3.986004e14, u.m**3 / u.s**2),   # IAU 2015 Resolution B3, nominal
    ("GM_jup", 1.2668653e17, u.m**3 / u.s**2),    # IAU 2015 Resolution B3, nominal
    ("R_sun", 6.957e8, u.m),                      # IAU 2015 Resolution B3, nominal
    ("au", 149_597_870_700, u.m),                 # IAU 2012 Resolution B2
])
def test_iau2015_nominal_values(name, value, unit):
    assert evaluate(f"x = const.{name}")["x"].to_value(unit) == pytest.approx(value, rel=1e-12)


def test_masses_follow_the_pinned_G():
    # M_sun = GM_sun / G with G from the pinned edition (IAU 2015 B3 + CODATA)
    for edition, G in (("codata2014", 6.67408e-11), ("codata2018", 6.67430e-11)):
        sheet = evaluate(f"constants {edition} iau2015\nm = 1 Msun in kg\nk = const.M_sun in kg")
        assert sheet["m"].value == pytest.approx(1.3271244e20 / G, rel=1e-12)
        assert sheet["k"].value == pytest.approx(1.3271244e20 / G, rel=1e-12)


def test_iau2012_gm_is_G_times_mass():
    table = constant_table(ConstantSelection("codata2018", "iau2012"))
    gm = table["GM_sun"].quantity.to_value(u.m**3 / u.s**2)
    assert gm == pytest.approx(6.67430e-11 * table["M_sun"].quantity.to_value(u.kg), rel=1e-12)


def test_default_is_astropy_configuration():
    # astropy 8 defaults: CODATA 2022 and IAU 2015 (astropy documentation)
    assert default_selection() == ConstantSelection("codata2022", "iau2015")
    assert evaluate("x = 1").selection.names == ["codata2022", "iau2015"]


def test_cells_shadow_builtins_and_const_reaches_them():
    sheet = evaluate("e = 0.2\nc = 3 km / s\nG = 2\nx = e * 2\ny = const.c in m/s\nz = const.e in C")
    assert sheet["x"].value == pytest.approx(0.4)
    assert sheet["c"].to_value(u.km / u.s) == 3
    assert sheet["y"].value == 299_792_458
    assert sheet["z"].value == pytest.approx(1.602176634e-19)  # SI 2019 exact elementary charge


@pytest.mark.parametrize("words, problem", [
    (["codata1999"], "unknown constant set `codata1999`"),
    (["codata2014", "codata2018"], "two CODATA editions pinned: `codata2014` and `codata2018`"),
    (["iau2012", "iau2015"], "two IAU sets pinned: `iau2012` and `iau2015`"),
])
def test_bad_pinning(words, problem):
    _, problems = parse_selection(words)
    assert problems[0][1] == problem
    sheet = evaluate("constants " + " ".join(words) + "\nx = 1")
    assert sheet.errors[0].message == problem


def test_pinning_twice_names_both_lines():
    sheet = evaluate("constants codata2018\nx = 1\nconstants codata2014")
    assert sheet.errors[0].message == "constant sets are pinned twice (lines 1 and 3)"


def test_unknown_constant():
    err = only_error(evaluate("x = const.GM_sn"), "x")
    assert err.message == "unknown constant `const.GM_sn`"
    assert err.hint == "did you mean `const.GM_sun` or `const.M_sun`?"
