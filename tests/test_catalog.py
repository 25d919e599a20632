"""The function registry and `relsheet funcs`: the library's names and signatures, docstrings, listings."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

from calc.physics import functions
from calc.physics.catalog import CAUTION, entry, listing

ROOT = Path(__file__).resolve().parent.parent

# the project's specified names and parameters (README "The function library" lists them);
# periapsis_budget also takes the PPN parameters and perturbation_rate a grid
SPECIFIED_FUNCTIONS = {
    "orbit": ("a", "e", "i", "node", "long_peri", "arg_peri", "m", "t_peri", "mean_anomaly", "epoch"),
    "perturbation_rate": ("M", "target", "perturber", "grid"),
    "periapsis_budget": ("M", "target", "perturbers", "J2", "R", "J", "gamma", "beta", "grid",
                         "k2", "R_planet", "P_rot"),
    "schwarzschild_radius": ("M",), "proper_radial_distance": ("M", "r1", "r2", "gamma"),
    "gravitational_redshift": ("M", "r_emit", "r_obs"),
    "clock_rate": ("M", "r", "v", "J2", "R", "latitude"),
    "eccentricity_clock_term": ("M", "a", "e"), "orbital_period": ("M", "a"),
    "semi_major_axis": ("M", "P"), "orbital_speed": ("M", "r", "a"),
    "periapsis_advance": ("M", "a", "e", "gamma", "beta"),
    "periapsis_rate": ("M", "a", "e", "gamma", "beta"),
    "oblateness_rate": ("M", "J2", "R", "a", "e", "i"),
    "lense_thirring_node_rate": ("J", "a", "e", "gamma"), "deflection": ("M", "b", "gamma"),
    "deflection_at_elongation": ("M", "r_obs", "elongation", "gamma"),
    "einstein_radius": ("M", "d_lens", "d_source", "gamma"),
    "shapiro_delay": ("M", "r_emit", "r_recv", "separation", "gamma"),
    "conjunction_delay": ("M", "r_emit", "r_recv", "b", "gamma"),
    "geodetic_rate": ("M", "r", "gamma"), "frame_dragging_rate": ("J", "r", "gamma"),
    "periastron_rate": ("m1", "m2", "Pb", "e", "order"), "einstein_delay_amplitude": ("m1", "m2", "Pb", "e"),
    "orbital_decay_rate": ("m1", "m2", "Pb", "e"), "shapiro_range": ("m2", "gamma"),
    "shapiro_shape": ("m1", "m2", "Pb", "x"), "chirp_mass": ("m1", "m2"),
    "merger_time": ("m1", "m2", "Pb", "e"),
}
MATH = "sqrt exp ln log10 sin cos tan asin acos atan atan2 hypot abs min max sum mean span logspan"


@pytest.mark.parametrize("name, params", sorted(SPECIFIED_FUNCTIONS.items()))
def test_design_functions_are_registered_with_their_signatures(name, params):
    spec = functions.lookup(name)
    assert spec is not None, name
    assert tuple(spec.signature.parameters) == params


def test_math_functions_are_registered():
    assert all(functions.lookup(n) is not None for n in MATH.split())


@pytest.mark.parametrize("name", sorted(SPECIFIED_FUNCTIONS))
def test_every_domain_docstring_is_a_handbook_entry(name):
    doc = functions.lookup(name).documentation()
    for section in ("Formula:", "Arguments:", "Result:", "Validity:", "PPN:", "Source:"):
        assert section in doc, f"{name} lacks {section}"


def test_listing_has_every_function_and_the_caution():
    text = listing()
    for name in [*SPECIFIED_FUNCTIONS, *MATH.split()]:
        assert f"  {name}(" in text
    assert CAUTION in text and "IERS Conventions" in text


def test_entry_shows_argument_kinds_and_documentation():
    text = entry("deflection")
    assert text.startswith("deflection(M, b, gamma=…)  →  angle")
    assert "  b      length" in text
    assert "(default: the sheet's `ppn gamma`, else 1)" in text
    assert "Source:" in text and CAUTION in text


def test_funcs_command():
    run = [sys.executable, "-m", "calc", "funcs"]
    listing_run = subprocess.run(run, cwd=ROOT, capture_output=True, text=True)
    assert listing_run.returncode == 0 and "merger_time(m1, m2, Pb, e)" in listing_run.stdout
    one = subprocess.run(run + ["merger_time"], cwd=ROOT, capture_output=True, text=True)
    assert one.returncode == 0 and "Peters" in one.stdout
    bad = subprocess.run(run + ["shapiro"], cwd=ROOT, capture_output=True, text=True)
    assert bad.returncode == 64
    assert bad.stderr.startswith("relsheet: no function `shapiro`\n  hint: did you mean")


def test_a_summary_is_the_whole_first_paragraph_and_long_calls_stand_alone():
    """interp's summary runs over two lines of its docstring: the listing and the entry show
    it whole, once, before the arguments; a call too long for the column (periapsis_budget)
    stands on its own line with its summary under the column."""
    spec = functions.lookup("interp")
    assert spec.summary.endswith("is an error, not an extrapolation.")
    assert "extrapolation" not in spec.documentation()
    text = entry("interp", caution=False)
    assert text.count("not an extrapolation") == 1
    assert text.index("not an extrapolation") < text.index("x_new  quantity")
    lines = listing().splitlines()
    at = next(i for i, line in enumerate(lines) if line.startswith("  periapsis_budget("))
    assert lines[at + 1].strip().startswith("Everything that moves a periapsis")
    widths = {line.index(functions.lookup(n).summary[:20])
              for n in ("interp", "clock_rate", "sort") for line in lines
              if line.startswith(f"  {n}(")}
    assert len(widths) == 1
