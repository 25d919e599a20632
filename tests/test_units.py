"""calc.physics.units: the trade's units, refusals, angle handling, and agreement with astropy."""

from __future__ import annotations

import math

import astropy.units as u
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from conftest import evaluate, only_error


# Published definitions of the units the trade uses, with their sources.
@pytest.mark.parametrize("expression, unit, expected, source", [
    ("1 AU", u.m, 149_597_870_700, "IAU 2012 Resolution B2 (exact)"),
    ("1 au", u.m, 149_597_870_700, "IAU 2012 Resolution B2 (exact)"),
    ("1 pc", u.AU, 648_000 / math.pi, "IAU 2015 Resolution B2 (exact)"),
    ("1 yr", u.d, 365.25, "Julian year: common practice, IAU usage"),
    ("1 century", u.d, 36_525, "Julian century: common practice, IAU usage"),
    ("1 century", u.s, 36_525 * 86_400, "Julian century of SI days: common practice"),
    ("1 lsec", u.m, 299_792_458, "light-second from the exact c: SI 2019 / CODATA"),
    ("1 mas", u.arcsec, 1e-3, "milliarcsecond: SI prefix"),
    ("1 uas", u.arcsec, 1e-6, "microarcsecond: SI prefix"),
    ("1 Msun", u.kg, 1.3271244e20 / 6.67430e-11,
     "IAU 2015 Resolution B3 nominal GM_sun over CODATA 2022 G"),
    ("1 Rsun", u.m, 6.957e8, "IAU 2015 Resolution B3 nominal solar radius"),
    ("1 Mearth", u.kg, 3.986004e14 / 6.67430e-11, "IAU 2015 Resolution B3 nominal GM_earth over G"),
    ("1 Rearth", u.m, 6.3781e6, "IAU 2015 Resolution B3 nominal equatorial Earth radius"),
    ("1 Mjup", u.kg, 1.2668653e17 / 6.67430e-11, "IAU 2015 Resolution B3 nominal GM_jup over G"),
    ("180 deg", u.rad, math.pi, "definition of the degree"),
])
def test_unit_definitions(expression, unit, expected, source):
    sheet = evaluate(f"x = {expression}")
    assert sheet["x"].to_value(unit) == pytest.approx(expected, rel=1e-12), source


def test_cy_is_refused_with_both_readings():
    err = only_error(evaluate("x = 2 cy"), "x")
    assert err.message == ("`cy` is ambiguous: astropy reads it as the cycle (2π rad), "
                           "astronomers write it for the century")
    assert err.hint == "write `cycle` for the angle or `century` for 36525 days"
    err = only_error(evaluate("x = 2 arcsec in arcsec / cy"), "x")
    assert err.message.startswith("`cy` is ambiguous")


def test_cyr_is_refused_too():
    # astropy reads `cyr` as the centiyear (c- prefix on yr): 0.01 yr, not a century
    err = only_error(evaluate("x = 2 arcsec / cyr"), "x")
    assert err.message.startswith("`cyr` is ambiguous: astropy reads it as the centiyear")


def test_per_century_rate():
    sheet = evaluate("x = 1 arcsec / yr in arcsec / century")
    assert sheet["x"].value == pytest.approx(100.0)
    assert sheet["x"].unit.to_string() == "arcsec / century"


@pytest.mark.parametrize("text, unit, expected", [
    ("x = 1 rad in deg", u.deg, 180 / math.pi),
    ("x = 0.5 in deg", u.deg, 0.5 * 180 / math.pi),       # dimensionless counts as radians
    ("x = 90 deg in 1", u.dimensionless_unscaled, math.pi / 2),
    ("x = 1 rad + 1", u.rad, 2.0),
    ("x = 2 rad / 1 s in 1 / s", 1 / u.s, 2.0),
])
def test_angles_and_dimensionless_convert(text, unit, expected):
    assert evaluate(text)["x"].to_value(unit) == pytest.approx(expected)


def test_unknown_unit_suggests_close_names():
    err = only_error(evaluate("x = 3 kmz"), "x")
    assert err.message == "unknown unit `kmz`"
    assert err.hint == "did you mean `km`?"


def test_unknown_unit_after_in():
    err = only_error(evaluate("x = 3 km in kmz"), "x")
    assert err.message == "unknown unit `kmz`"
    assert "km" in err.hint


def test_scaled_dimensionless_collapses():
    assert evaluate("r = 3 km / 1 m")["r"].unit == u.dimensionless_unscaled
    assert evaluate("r = 3 km / 1 m")["r"].value == pytest.approx(3000)


def test_percent_unit_after_in():
    assert evaluate("x = 0.25 in %")["x"].to_value(u.percent) == pytest.approx(25)


def test_unit_scale_beyond_float_range_is_a_cell_error():
    # (2e30 kg)^-11 ~ 1e-331 kg^-11 in SI: below the smallest float (common practice: IEEE 754)
    err = only_error(evaluate("x = 1 / Msun^11"), "x")
    assert "outside the range a float can hold" in err.message
    assert err.hint


# Property: the unit algebra of a chain agrees with astropy's own.
_UNITS = ["m", "km", "s", "kg", "AU", "d", "yr", "deg", "arcsec", "W", "J", "Msun", "pc"]


@settings(max_examples=150, deadline=None)
@given(st.lists(st.tuples(st.sampled_from(_UNITS), st.integers(-3, 3).filter(bool),
                          st.booleans()), min_size=1, max_size=4),
       st.floats(1e-6, 1e6))
def test_chain_units_agree_with_astropy(factors, number):
    text = f"{number!r}"
    for name, power, divide in factors:
        piece = f"{name}^{power}" if power != 1 else name
        if divide:
            text += f" / {piece}"
        else:
            text += f" {piece}" if " / " not in text else f" / {name}^{-power}"
    try:
        expected = u.Quantity(number)
        for name, power, divide in factors:
            expected = (expected / getattr(u, name) ** power if divide
                        else expected * getattr(u, name) ** power)
        expected.unit.decompose()
    except (u.UnitScaleError, OverflowError):
        # e.g. Msun^-11: the SI scale underflows a float (astropy 8 raises OverflowError while
        # it builds such a unit, earlier versions UnitScaleError when decomposing it)
        assert "outside the range a float can hold" in only_error(
            evaluate(f"x = {text}"), "x").message
        return
    got = evaluate(f"x = {text}")["x"]
    assert got.unit.is_equivalent(expected.unit)
    assert got.to_value(expected.unit) == pytest.approx(expected.value, rel=1e-12)
