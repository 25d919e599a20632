"""What astropy.time / ERFA give for the time scales, and relsheet's time-scale constants.

relsheet's dates are astropy Time objects: scale conversions, leap seconds and TDB − TT come
from astropy with the tables it ships (no download). These tests fix the behaviour relsheet
relies on, and check the IAU defining relations with the constants in relsheet's own table
(const.L_G, const.L_B, const.L_C, const.TDB0, const.W0).

Differences of dates are taken from the two-part Julian dates (whole and fraction subtracted
separately): a date carries about 1e-16 d = 1e-11 s of rounding, so 1e-10 s is the floor of
any "exact" comparison below.
"""

from __future__ import annotations

import astropy.units as u
import erfa
import numpy as np
import pytest
from astropy.time import Time

from calc.physics.constants import CODATA_SETS, IAU_SETS, ConstantSelection, constant_table
from conftest import evaluate

T0_JD = 2443144.5003725          # 1977 January 1.0 TAI at the geocentre, as a TT/TCG/TCB JD
DATES = Time("1950-01-01", scale="tt") + np.linspace(0, 100 * 365.25, 20) * u.d


def seconds(a: Time, b: Time) -> np.ndarray:
    return ((a.jd1 - b.jd1) + (a.jd2 - b.jd2)) * 86400.0


def const(name: str):
    return constant_table(ConstantSelection("codata2022", "iau2015"))[name].quantity


def test_tt_minus_tai_is_32_184_s():
    # IAU 1991 Resolution A4, Recommendation IV: TT − TAI = 32.184 s exactly (ERFA TTMTAI)
    tai = Time("1990-01-01", scale="tai") + np.linspace(0, 20000, 11) * u.d
    assert np.all(np.abs(seconds(tai.tt, tai) - 32.184) < 1e-10)


# astropy estimates UT for dtdb's topocentric terms through UTC, which ERFA calls "dubious"
# after the last known leap second; at the geocentre those terms are zero
@pytest.mark.filterwarnings("ignore::erfa.ErfaWarning")
def test_tdb_minus_tt_is_erfas_dtdb_at_the_geocentre():
    # ERFA dtdb (Fairhead & Bretagnon 1990 series) at the geocentre: the topocentric terms
    # vanish there, so the UT argument does not matter. astropy uses the same series; the
    # comparison floor is the date rounding (1e-10 s).
    tt = DATES
    reference = erfa.dtdb(tt.jd1, tt.jd2, 0.0, 0.0, 0.0, 0.0)
    assert np.all(np.abs(seconds(tt.tdb, tt) - reference) < 1e-10)


def test_tdb_minus_tt_annual_amplitude():
    # Fairhead & Bretagnon 1990: the leading term of TDB − TT is 1.657 ms (annual); the other
    # terms add a few tens of µs, so over 4 years the extremes lie within 3% of it
    tt = Time("2020-01-01", scale="tt") + np.linspace(0, 4 * 365.25, 4000) * u.d
    delta = seconds(tt.tdb, tt)
    assert np.ptp(delta) / 2 == pytest.approx(1.657e-3, rel=0.03, abs=0)


def test_leap_second_at_the_end_of_2016():
    # IERS Bulletin C 52: TAI − UTC is 36 s before 2017 January 1 and 37 s from then on; the
    # inserted second 2016-12-31T23:59:60 UTC exists
    before = Time("2016-12-31T23:59:59", scale="utc")
    leap = Time("2016-12-31T23:59:60", scale="utc")
    after = Time("2017-01-01T00:00:00", scale="utc")
    assert before.tai.isot == "2017-01-01T00:00:35.000"
    assert leap.tai.isot == "2017-01-01T00:00:36.000"
    assert after.tai.isot == "2017-01-01T00:00:37.000"
    assert seconds(after.tai, before.tai) == pytest.approx(2.0, abs=1e-10)


def test_tcg_minus_tt_follows_l_g():
    # IAU 2000 Resolution B1.9: TT = TCG − L_G (JD_TCG − T0) × 86400 s, L_G = 6.969290134e-10
    # exactly; L_G from relsheet's constant table
    L_G = const("L_G").value
    tcg = DATES.tcg
    assert np.allclose(seconds(tcg, DATES), L_G * (tcg.jd - T0_JD) * 86400, rtol=0, atol=1e-10)


def test_tcb_minus_tdb_follows_l_b_and_tdb0():
    # IAU 2006 Resolution B3: TDB = TCB − L_B (JD_TCB − T0) × 86400 s + TDB0,
    # L_B = 1.550519768e-8, TDB0 = −6.55e-5 s, from relsheet's constant table. TCB − TDB reaches
    # 40 s here: relative rounding 1e-16 of it and the date floor stay below 1e-9 s.
    L_B, TDB0 = const("L_B").value, const("TDB0").to_value(u.s)
    tdb = DATES.tdb
    tcb = tdb.tcb
    assert np.allclose(seconds(tcb, tdb), L_B * (tcb.jd - T0_JD) * 86400 - TDB0, rtol=0,
                       atol=1e-9)


def test_the_rate_constants_are_consistent():
    # IERS Conventions (2010) ch. 10: 1 − L_B = (1 − L_C)(1 − L_G), i.e. L_B = L_C + L_G − L_C L_G,
    # from which the IAU fixed L_B in 2006 (NSFA note); L_C is known to 2e-17 (its stated
    # uncertainty), so that much is allowed
    L_B, L_C, L_G = (const(n).value for n in ("L_B", "L_C", "L_G"))
    assert abs(L_B - (L_C + L_G - L_C * L_G)) < 2e-17
    # IAU 2000 B1.9: L_G = W0/c² with W0 = 62 636 856.0 m²/s² (10 digits of L_G: 1e-10)
    assert (const("W0") / const("c") ** 2).to_value(u.one) == pytest.approx(L_G, rel=1e-10, abs=0)


@pytest.mark.parametrize("codata", CODATA_SETS)
@pytest.mark.parametrize("iau", IAU_SETS)
def test_time_scale_constants_under_every_pinned_selection(codata, iau):
    sheet = evaluate(f"constants {codata} {iau}\ng = const.L_G\nb = const.L_B\nl = const.L_C\n"
                     "z = const.TDB0 in us\nw = const.W0\nrate = 1 d * const.L_G in us")
    assert sheet["g"].value == 6.969290134e-10
    assert sheet["b"].value == 1.550519768e-8
    assert sheet["l"].value == 1.48082686741e-8
    assert sheet["z"].value == pytest.approx(-65.5, rel=1e-15, abs=0)
    assert sheet["w"].to_value(u.m**2 / u.s**2) == 62636856.0
    # TT loses L_G × 1 day ≈ 60.2 µs a day on TCG (IAU 2000 B1.9)
    assert sheet["rate"].value == pytest.approx(60.21466676, rel=1e-9, abs=0)
    entry = constant_table(ConstantSelection(codata, iau))["L_C"]
    assert entry.uncertainty == 2e-17 and "IERS Conventions (2010)" in entry.reference
