"""Dates with time scales (DESIGN §10): literals, arithmetic, conversions and their errors.

Scale differences are checked against ERFA called directly (pyerfa), not through the
astropy.time calls the code makes, and against the defining values of the IAU resolutions.
"""

from __future__ import annotations

import json

import astropy.units as u
import erfa
import numpy as np
import pytest

from calc.engine.sheet import Sheet
from calc.outputs.export import to_json


def sheet(text: str) -> Sheet:
    return Sheet.from_text(text, "t.sheet")


def days(s: Sheet, name: str) -> float:
    return float(s.raw(name).to_value(u.d))


def error(s: Sheet, name: str) -> str:
    err = s.cell(name).error
    assert err is not None, f"{name} evaluated"
    return err.message


def test_tt_minus_tai_is_32_184_s_exactly():
    # IAU 1991 Resolution A4 (TT = TAI + 32.184 s)
    s = sheet("a = 2031-04-12T06:30:00 TAI\nb = a in TT\nd = mjd(b) - mjd(a)\n")
    assert s.raw("b").isot == "2031-04-12T06:30:32.184"
    assert float(s.raw("d").value) * 86400 == pytest.approx(32.184, abs=1e-6)


def test_tdb_minus_tt_against_erfa_dtdb_at_twenty_dates():
    # reference: erfa.dtdb (Fairhead & Bretagnon series, as in the IERS Conventions 2010 §10)
    # at the geocentre; astropy's default TDB is geocentric too
    lines, mjds = [], np.linspace(51000, 66000, 20)
    for k, mjd in enumerate(mjds):
        lines.append(f"t{k} = MJD {mjd} TT\nb{k} = t{k} in TDB\nd{k} = mjd(b{k}) - mjd(t{k})\n")
    s = sheet("".join(lines))
    for k, mjd in enumerate(mjds):
        expected = erfa.dtdb(2400000.5, mjd, 0.0, 0.0, 0.0, 0.0)
        # the difference of two MJDs near 6e4 holds ~1e-11 d (1 µs) of float resolution
        assert float(s.raw(f"d{k}").value) * 86400 == pytest.approx(expected, abs=2e-6)


def test_utc_minus_tai_across_the_2016_leap_second():
    # reference: erfa.dat (the leap-second table): TAI − UTC went from 36 s to 37 s at
    # 2017-01-01T00:00:00 UTC
    s = sheet("before = 2016-12-31T23:59:59 UTC\nafter = 2017-01-01T00:00:01 UTC\n"
              "span_utc = after - before\nb = before in TAI\n")
    assert days(s, "span_utc") * 86400 == pytest.approx(3.0, abs=1e-6)   # 2 s + the leap second
    assert erfa.dat(2016, 12, 31, 0.5) == 36.0 and erfa.dat(2017, 1, 1, 0.0) == 37.0
    assert s.raw("b").isot == "2017-01-01T00:00:35.000"


def test_tcg_minus_tt_and_tcb_minus_tdb_grow_at_the_defining_rates():
    # IAU 2000 Resolution B1.9: dTT/dTCG = 1 − L_G, L_G = 6.969290134e-10;
    # IAU 2006 Resolution B3: TDB = TCB − L_B (JD_TCB − T0) 86400 + TDB0, L_B = 1.550519768e-8
    text = ("t0 = MJD 60000 TT\nt1 = MJD 61000 TT\ng0 = t0 in TCG\ng1 = t1 in TCG\n"
            "g = (mjd(g1) - mjd(g0)) * 1 d - (t1 - t0)\n"
            "b0 = MJD 60000 TDB\nb1 = MJD 61000 TDB\nc0 = b0 in TCB\nc1 = b1 in TCB\n"
            "c = (mjd(c1) - mjd(c0)) * 1 d - (b1 - b0)\n")
    s = sheet(text)
    l_g, l_b = 6.969290134e-10, 1.550519768e-8
    tt_span = 1000.0
    # the MJD differences resolve ~1e-11 d of the ~7e-7 d and ~1.6e-5 d: 1e-4 relative
    assert days(s, "g") == pytest.approx(tt_span * l_g / (1 - l_g), rel=1e-4)
    assert days(s, "c") == pytest.approx(tt_span * l_b / (1 - l_b), rel=1e-4)


def test_day_number_literals_agree_with_the_iso_form():
    # MJD = JD − 2400000.5 (IAU 1973); 2031-04-12T06:00 is JD 2463333.75 (from erfa.cal2jd)
    jd0, jd1 = erfa.cal2jd(2031, 4, 12)
    s = sheet(f"a = 2031-04-12T06:00:00 TT\nb = MJD {jd1 + 0.25} TT\nc = JD {jd0 + jd1 + 0.25} TT\n"
              "d1 = a - b\nd2 = a - c\n")
    assert days(s, "d1") == pytest.approx(0.0, abs=1e-9)
    assert days(s, "d2") == pytest.approx(0.0, abs=1e-8)


@pytest.mark.parametrize("expr, message", [
    ("t + t", "two dates cannot be added"),
    ("t * 2", "a date cannot be multiplied, divided or raised to a power"),
    ("-t", "a date cannot be multiplied, divided or raised to a power"),
    ("t > 3 d", "a date cannot be compared with `d` (time)"),
    ("t + 3 km", "a date and `km` (length) cannot be added; only a duration can"),
    ("3 d - t", "a date cannot be subtracted from a duration"),
    ("2031-04-12", "a date needs its time scale"),
    ("2031-04-12 XYZ", "unknown time scale `XYZ`"),
    ("2031-02-30 TT", "not a valid date"),
    ("1950-01-01 UTC", "UTC is not known at this date"),
    ("2031-01-01 UTC", "UTC is not known at this date"),
    ("t in km", "a date has no unit; `in` takes a time scale for dates (`t in TDB`)"),
])
def test_arithmetic_that_makes_no_sense_is_an_error(expr, message):
    s = sheet(f"t = 2031-04-12T06:30:00 TDB\nr = {expr}\n")
    assert message in error(s, "r")


def test_date_without_scale_has_a_hint():
    s = sheet("t = 2031-04-12\n")
    err = s.cell("t").error
    assert err is not None and "TDB" in (err.hint or "")


def test_a_span_of_dates_on_an_axis_and_masks_of_dates():
    s = sheet("t0 = 2031-04-12 TDB\npass = axis(span(t0, t0 + 2 d, 5))\n"
              "late = pass[pass > t0 + 1 d]\nn = count(pass > t0 + 1 d)\n")
    # common practice: five dates 12 h apart, the last two after the first day
    assert [str(t) for t in s.raw("pass").data.isot] == [
        "2031-04-12T00:00:00.000", "2031-04-12T12:00:00.000", "2031-04-13T00:00:00.000",
        "2031-04-13T12:00:00.000", "2031-04-14T00:00:00.000"]
    assert float(s.raw("n").value) == 2
    assert len(s.raw("late")) == 2


def test_dates_print_in_iso_form_with_their_scale_in_text_and_json():
    s = sheet("t = MJD 62000.25 TT\n")
    data = json.loads(to_json(s))
    cell = next(c for c in data["cells"] if c["name"] == "t")
    assert cell["value"] == "2028-08-17T06:00:00.000000000 TT"   # to the nanosecond
    from calc.outputs.format import cell_text

    assert cell_text(s.cell("t")) == "2028-08-17T06:00:00.000 TT"   # text: milliseconds


def test_uncertain_dates_propagate():
    s = sheet("t0 = 2031-04-12T06:30:00 TDB ± 2 s\nt1 = 2031-04-12T07:30:00 TDB ± 3 s\n"
              "dt = t1 - t0 in s\nlater = t0 + 10 d\n"
              "planet = orbit(a = 1 AU, e = 0.1, t_peri = 2031-01-01 TDB)\n"
              "st = orbit_state(1 Msun, planet, t0)\nx = st.x in km\nvx = st.vx in km / s\n")
    # GUM (JCGM 100:2008) eq. 10 for independent inputs: σ(t1 − t0) = √(2² + 3²) s
    assert s["dt"].value == pytest.approx(3600.0, rel=1e-12)
    assert s.sigma("dt").value == pytest.approx(np.sqrt(13), rel=1e-6)
    # a position at an uncertain date: σx = |dx/dt| σt = |vx| · 2 s (first order)
    assert s.sigma("x").value == pytest.approx(abs(s["vx"].value) * 2, rel=1e-4)
    from calc.outputs.format import cell_text
    assert cell_text(s.cell("later")) == "2031-04-22T06:30:00.000 TDB ± 2 s"
    sampled = s.monte_carlo(20000, seed=2)
    assert float(sampled["dt"].sigma) == pytest.approx(np.sqrt(13), rel=0.03)


def test_min_max_sort_diff_and_argmax_of_dates():
    """Arrays of dates through the functions of one array: min, max and sort give dates,
    diff durations, argmin and argmax places; on an axis too. diff across the 2016 leap second
    counts it (erfa.dat: TAI − UTC from 36 s to 37 s at 2017-01-01T00:00:00 UTC)."""
    s = sheet("t0 = 2031-07-26T06:00:00 TT\nt1 = t0 + 1 day\nhours = axis(span(t0, t1, 5))\n"
              "last = max(hours)\ndown = span(t1, t0, 5)\nup = sort(down)\ngaps = diff(up)\n"
              "i = argmax(down)\nfirst = min(down)\n"
              "a = 2016-12-31T23:59:58 UTC\nb = 2017-01-01T00:00:01 UTC\nleap = diff(span(a, b, 2))\n")
    assert s.raw("last").isot == "2031-07-27T06:00:00.000" and s.raw("last").scale == "tt"
    assert s.raw("first").isot == "2031-07-26T06:00:00.000"
    assert list(s.raw("up").isot) == list(s.raw("down").isot[::-1])
    np.testing.assert_allclose(s.raw("gaps").to_value(u.h), [6, 6, 6, 6], rtol=1e-12)
    assert int(s["i"].value) == 0
    assert s.raw("leap").to_value(u.s) == pytest.approx([4.0], abs=1e-6)   # 3 s + the leap second
    assert erfa.dat(2016, 12, 31, 0.5) == 36.0 and erfa.dat(2017, 1, 1, 0.0) == 37.0
