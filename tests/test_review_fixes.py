"""What a practitioner's review of axes, dates and solving found: one test per finding."""

from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import pytest

from calc.engine.grid import Grid
from calc.engine.sheet import Sheet
from calc.outputs.export import to_json, to_tex


def sheet(text: str) -> Sheet:
    return Sheet.from_text(text, "t.sheet")


def error(s: Sheet, name: str) -> str:
    err = s.cell(name).error
    assert err is not None, f"{name} evaluated"
    return err.message


@pytest.mark.parametrize("expr, message", [
    # (min, max, sort, diff, argmin and argmax take dates: tests/test_dates.py)
    ("cumsum(hours)", "cumsum: `x` takes a quantity, not dates"),
    ("gradient(y, hours)", "gradient: `x` takes a quantity, not dates"),
    ("min(hours, 1 s)", "min: `value 1` takes a quantity, not dates"),
    ("interp(t0, hours, y)", "interp: `x_new` takes a quantity, not dates"),
])
def test_functions_of_quantities_refuse_dates_at_the_argument(expr, message):
    s = sheet("t0 = 2031-07-26T06:00:00 TDB\nhours = axis(span(t0, t0 + 2 d, 3))\n"
              "y = (hours - t0) / 1 day\nr = " + expr + "\n")
    assert error(s, "r") == message
    assert s.cell("r").error.hint.startswith("subtract a reference date")


def test_a_what_if_on_a_date_cell():
    s = sheet("t0 = 2031-01-01T00:00:00 TDB\nlater = t0 + 1 d\n")
    s.set("t0", "2031-07-28T00:00:00 TDB")
    assert s.raw("later").isot == "2031-07-29T00:00:00.000"
    with pytest.raises(Exception, match="is a date, the new value is not a date"):
        s.set("t0", "4 kg")


def test_latex_of_dates_is_text():
    s = sheet("t0 = 2031-07-26T06:00:00 TDB ± 2 s\n")
    assert "\\newcommand{\\rsTZero}{\\text{2031-07-26T06:00:00.000 TDB $\\pm$ 2 s}}" in to_tex(s)


def test_diff_of_a_sheet_with_itself_on_axes_changes_nothing(tmp_path):
    path = tmp_path / "g.sheet"
    path.write_text("el = axis([1, 2, 3] deg)\nr = axis([1, 2] AU)\nz = el * r\n")
    done = subprocess.run([sys.executable, "-m", "calc", "diff", str(path), str(path)],
                          capture_output=True, text=True)
    assert "no cell changed" in done.stdout, done.stdout


def test_monte_carlo_through_a_solve_over_an_axis():
    s = sheet("k = 2 ± 0.1\nm = axis([1, 2, 3])\ny = 1\nsolve y * k == m for y\n")
    shown = s.monte_carlo(4000, seed=4)["y"]
    # y = m / k: σ_y = m σ_k / k² (first order), to the few per cent 4000 samples allow
    np.testing.assert_allclose(shown.sigma, np.array([1, 2, 3]) * 0.1 / 4, rtol=0.08)


def test_samples_that_do_not_converge_make_the_unknown_fail_and_the_exit_code_two(tmp_path):
    path = tmp_path / "s.sheet"
    path.write_text("a = 0.1 ± 0.2 m^2\ny = 1 m\nsolve y^2 == a for y\n")
    done = subprocess.run([sys.executable, "-m", "calc", "eval", str(path), "--mc", "500",
                           "--seed", "1"], capture_output=True, text=True)
    assert done.returncode == 2
    assert "Monte Carlo samples did not converge" in done.stdout + done.stderr


def test_a_refused_solve_leaves_no_starting_value():
    s = sheet("w = 1 m\nsolve w^2 == 4 m^2 for w in [0 m, 3 m], w in [0 m, 1 m]\nq = w * 2\n")
    assert error(s, "w") == "`w` is listed twice among the unknowns"
    assert s.cell("q").error is not None


def test_sigma_budget_of_a_value_on_an_axis():
    s = sheet("M = 1.0 ± 0.1 Msun\nax = axis([1, 2])\nva = ax * M\n")
    rows = s.sigma_budget("va")
    assert len(rows) == 1 and rows[0].share == pytest.approx(1.0)


def test_sheet_errors_no_cell_carries_are_in_json():
    s = sheet("a = 1 ± 0.1\nb = 2 ± 0.2\ncorrelation a, b = 1.5\ne = a + b\n")
    errors = json.loads(to_json(s))["errors"]
    assert errors and "from -1 to 1" in errors[0]


def test_a_whole_slice_keeps_its_axis():
    s = sheet("el = axis([1, 2, 3] deg)\nr = axis([1, 2] AU)\nz = el * r\ncol = z[:, 1]\n"
              "m = max(z[:, 1], along = el)\n")
    assert isinstance(s.raw("col"), Grid) and s.raw("col").axes[0].name == "el"
    assert s["m"].value == pytest.approx(6.0)


def test_count_of_values_that_are_no_truths_is_refused():
    s = sheet("y = [1, 2] m\nn = count(y)\na = any(y)\n")
    assert error(s, "n").startswith("count: `condition` must be a condition")
    assert error(s, "a").startswith("any: `condition` must be a condition")


def test_checks_of_values_on_axes_and_of_dates():
    s = sheet("t = axis([1, 2, 3] s)\ny = t * 1 m / s\ncheck y < 10 m\ncheck y > 2 m\n"
              "t0 = 2031-01-01 TDB\nt1 = t0 + 1 d\ncheck t1 > t0\n")
    assert [r.passed for r in s.checks] == [True, False, True]
    assert all(r.error is None for r in s.checks)


def test_two_plots_of_the_same_cells_get_two_names():
    s = sheet("t = [1, 2, 3] s\ny = [1, 4, 9] m\nplot y vs t\nplot y vs t log y\n")
    assert [p.name for p in s.plots()] == ["y_vs_t", "y_vs_t_2"]


def test_plot_output_that_is_a_file_is_refused(tmp_path):
    path = tmp_path / "p.sheet"
    path.write_text("t = [1, 2, 3] s\ny = [1, 4, 9] m\nplot y vs t\n")
    target = tmp_path / "afile"
    target.write_text("")
    done = subprocess.run([sys.executable, "-m", "calc", "plot", str(path), "-o", str(target)],
                          capture_output=True, text=True)
    assert done.returncode == 64 and "-o names a folder" in done.stderr


def test_orbit_states_of_an_array_of_orbits_over_an_axis_of_dates():
    s = sheet("aa = axis([1, 2] AU)\no = orbit(a = aa, e = 0.1, t_peri = 2031-01-01 TDB)\n"
              "days = axis(span(2031-01-01 TDB, 2031-03-01 TDB, 3))\n"
              "st = orbit_state(1 Msun, o, days)\nx = st.x\n")
    x = s.raw("x")
    assert isinstance(x, Grid) and [a.name for a in x.axes] == ["aa", "days"]
    # at periapsis (the first date) x = a (1 − e) for each orbit (common practice)
    np.testing.assert_allclose(x.data.value[:, 0], [0.9, 1.8], rtol=1e-12)


def test_the_points_of_integral_and_gradient_name_the_axis():
    s = sheet("el = axis([1, 2, 3] deg)\nr = axis([1, 2] AU)\nz = el^2 * r / 1 deg\n"
              "g = gradient(z, el)\ni = integral(z, el)\n")
    z = np.array([1.0, 4.0, 9.0])[:, None] * np.array([1.0, 2.0])[None, :]
    # reference: numpy's gradient and scipy's trapezoid along the first axis
    import scipy.integrate

    np.testing.assert_allclose(s.raw("g").data.value, np.gradient(z, [1, 2, 3], axis=0))
    np.testing.assert_allclose(s.raw("i").data.value,
                               scipy.integrate.trapezoid(z, [1, 2, 3], axis=0))


def test_an_error_inside_a_sheet_function_names_the_call():
    s = sheet("ratio(x, y) = x / (x + y)\na = ratio(1 km, 2 km)\nbad = ratio(1 km, 3 s)\n")
    assert error(s, "bad").startswith("in ratio(x, y), called on line 3: cannot add")


def test_large_results_are_still_checked_for_nan_and_infinity():
    # the scan for nan/inf is skipped only when numpy reported no overflow, invalid operation
    # or division by zero and every input is finite (common practice: IEEE 754 flags)
    s = sheet("x = span(1, 2, 10000) * 1e200\ny = x * x\nr = inf\ng = span(1, 2, 10000) * r\n"
              "d = span(0, 1, 10000) / span(0, 1, 10000)\nok = span(1, 2, 10000) * 3\n")
    assert "overflows" in error(s, "y")
    assert np.all(np.isinf(s["g"].value))          # a written infinity carries through
    assert "not a number" in error(s, "d") or "division by zero" in error(s, "d")
    assert s["ok"].value[-1] == 6.0
    s.set("r", "2")
    assert np.all(np.isfinite(s["g"].value))
    s.set("r", "inf")
    assert np.all(np.isinf(s["g"].value))


def test_a_nan_field_of_a_record_is_caught():
    # found by the fuzz campaign (seed 21): `(0/0) deg` inside orbit() made a record with a nan
    # inclination that no check saw, and a cell of arithmetic on its fields showed nan
    s = sheet("o = orbit(1.96 AU, 0.21, (0/0) deg, 95 deg)\nb = orbit(1 AU, 0.1)\n"
              "x = b.a - b.a\n")
    assert "not a number" in error(s, "o") or "division by zero" in error(s, "o")
    assert s["x"].value == 0


def test_a_scalar_input_beside_an_array_input_has_a_sigma_per_element():
    # found by the fuzz campaign (seed 21): contributions of different shapes
    s = sheet("y = 30 ± 0.01 + gravitational_redshift(2.5 kg, 30 ± 0.01 AU, [1.4, 2] au)\n")
    np.testing.assert_allclose(s.sigma("y").value, [0.01, 0.01], rtol=1e-6)


def test_a_marker_escapes_control_characters_an_error_quotes():
    from calc.outputs.annotate import marker_text

    s = sheet("x = 1 km\r2\n")
    for cell in s.cells:
        assert "\r" not in marker_text(cell)


def test_fuzz_seed_22_findings():
    # a constant folded to nan beside an uncertain input; an array literal of values on an axis
    s = sheet("km = ((0.92 ± 1e-5)) (0/0)\nt0 = 2031-07-26T06:00:00 TDB\n"
              "hours = axis(span(t0, t0 + 10 d, 241))\nb = [hours]\nc = [t0, t0 + 1 d]\n")
    assert error(s, "km")
    assert error(s, "b") == "an array `[…]` holds single quantities, not values on an axis"
    assert error(s, "c") == "an array `[…]` holds single quantities, not dates"


def test_minus_dates_on_an_axis_is_refused():
    # found by the fuzz campaign (seed 24)
    s = sheet("t0 = 2031-07-26T06:00:00 TDB\nhours = axis(span(t0, t0 + 1 d, 3))\nm = -hours\n"
              "k = -axis([1, 2] s)\n")
    assert error(s, "m").startswith("a date cannot be multiplied, divided or raised")
    np.testing.assert_allclose(s.raw("k").data.value, [-1, -2])


def test_fuzz_seed_31_a_power_of_a_large_unit_in_a_single_value_cell():
    # found by the fuzz campaign (seed 31): cells of single values run a fast path of their
    # own, whose unit step met astropy's overflow (Msun^11 ~ 1e331 kg^11 in SI, beyond a
    # float: IEEE 754, common practice) as an internal error; so did a check of such a power
    s = sheet("m = 1 Msun\nd = m ^ 11\nx = 2.5 Mjup\ny = x ** 36525\n"
              "check x ** 36525 >= 2.867 arcsec / century\n")
    for name in ("d", "y"):
        assert error(s, name) == "a unit's size in SI is outside the range a float can hold"
        assert not s.internal_errors()
    (check,) = s.checks
    assert check.error is not None and "outside the range a float can hold" in check.error.message


def test_fuzz_seed_31_dates_far_beyond_any_calendar(tmp_path):
    # found by the fuzz campaign (seed 31): `t0 + 1e308 d` (infinite in seconds) and
    # `t0 + 1e303 d` (astropy's two doubles of days overflow: nan) made dates that printed as
    # nonsense with a stray RuntimeWarning from ERFA's eraD2dtf; now they are errors, and a
    # date outside ERFA's calendar (eraJd2cal: JD −68569.5 to 1e9) prints as a Julian date
    s = sheet("t0 = 2031-07-26T06:00:00 TDB\nhours = axis(span(t0, t0 + 1e308 d, 241))\n"
              "h = t0 + 1e303 d\nfar = t0 + 1e12 d\nm = MJD 1e303 TT\n")
    assert error(s, "hours") == "a duration added to a date must be finite in seconds"
    assert error(s, "h") == "the date falls beyond what a time scale can hold"
    path = tmp_path / "far.sheet"
    path.write_text("t0 = 2031-07-26T06:00:00 TDB\nfar = t0 + 1e12 d\nm = MJD 1e303 TT\n")
    done = subprocess.run([sys.executable, "-m", "calc", "eval", str(path)],
                          capture_output=True, text=True)
    assert done.returncode == 0, done.stderr
    assert "JD 1000002463073.750000 TDB" in done.stdout
    assert "JD 1.000000000e+303 TT" in done.stdout
    assert "Warning" not in done.stderr


def test_fuzz_seed_31_a_record_as_a_units_exponent():
    # found by the fuzz campaign (seed 31): `0.92 / s ^ orbit(…)` read the record as the
    # unit's exponent and failed inside the compiler (exit 70)
    s = sheet("y = 0.92 / s ^ orbit(1 AU, 0.1)\nz = 3 m^2 / s ** orbit(30 pc, 0.1)\n"
              "w = 3 s^(1 < 2)\n")
    for name in ("y", "z", "w"):
        assert error(s, name) == "a unit's exponent must be a number"
    assert not s.internal_errors()


def test_fuzz_seed_31_a_product_of_units_of_one_unknown_kind():
    # found by the fuzz campaign (seed 31): `mag adu` — astropy gives both the physical type
    # "unknown", so the simplification of a product of one kind tried to convert one into
    # the other and failed inside the compiler; the product stays as written
    s = sheet("x = 36525 mag adu * 1.\ny = 3 mag adu\n")
    assert not s.all_errors()
    assert s["y"].value == 3
    assert {str(b) for b in s["y"].unit.bases} == {"mag", "adu"}
