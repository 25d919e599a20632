"""calc.physics.functions.gyroscopes against the Gravity Probe B predictions."""

from __future__ import annotations

import math

import astropy.units as u
import pytest

from conftest import evaluate

# Gravity Probe B: circular polar orbit of semi-major axis 7027.4 km (read in a mission summary),
# Earth's spin angular momentum J = 5.86e33 kg m^2/s (from memory).
GPB = "r = 7027.4 km\nJ = 5.86e33 kg m^2 / s\n"


def test_geodetic_precession_gravity_probe_b():
    # Everitt et al. 2011, PRL 106, 221101 (read in the abstract): 6606.1 mas/yr predicted. 0.2%: the
    # prediction includes the Earth's oblateness and the exact orbit, not modelled here.
    rate = evaluate(GPB + "x = geodetic_rate(const.GM_earth, r)")["x"]
    assert rate.to_value(u.mas / u.yr) == pytest.approx(6606.1, rel=2e-3, abs=0)


def test_frame_dragging_gravity_probe_b():
    # Everitt et al. 2011 (read in the abstract): 39.2 mas/yr, the drift of a gyroscope pointing at the
    # guide star IM Pegasi (declination 16.84 deg), i.e. the polar-orbit average times cos(dec).
    # 1.5%: J and the orbit radius are rounded.
    rate = evaluate(GPB + "x = frame_dragging_rate(J, r)")["x"].to_value(u.mas / u.yr)
    assert rate * math.cos(math.radians(16.84)) == pytest.approx(39.2, rel=1.5e-2, abs=0)


def test_geodetic_gamma_dependence():
    # (gamma + 1/2): gamma = 0 leaves a third of the GR value
    sheet = evaluate(GPB + "a = geodetic_rate(const.GM_earth, r)\n"
                     "b = geodetic_rate(const.GM_earth, r, gamma = 0)")
    assert sheet["b"].value == pytest.approx(sheet["a"].value / 3, rel=1e-6, abs=0)


def test_frame_dragging_gamma_dependence():
    # PPN: (1 + gamma + alpha1/4)/2 times the GR value (Will 2014, Living Rev. Relativ. 17, 4;
    # from memory), alpha1 = 0 here: gamma = 0 halves it, and the sheet's `ppn` line reaches it.
    sheet = evaluate(GPB + "a = frame_dragging_rate(J, r)\nb = frame_dragging_rate(J, r, gamma = 0)\n")
    assert sheet["b"].value == pytest.approx(sheet["a"].value / 2, rel=1e-15, abs=0)
    ppn = evaluate("ppn gamma = 0\n" + GPB + "c = frame_dragging_rate(J, r)")
    assert ppn["c"].value == pytest.approx(sheet["b"].value, rel=1e-15, abs=0)


def test_frame_dragging_takes_arrays():
    from calc.physics.functions import gyroscopes
    both = gyroscopes.frame_dragging_rate(5.86e33 * u.kg * u.m**2 / u.s, [7000, 8000] * u.km,
                                          gamma=0.9 * u.one)
    for k, radius in enumerate((7000, 8000)):
        one = gyroscopes.frame_dragging_rate(5.86e33 * u.kg * u.m**2 / u.s, radius * u.km,
                                             gamma=0.9 * u.one)
        assert both[k].value == pytest.approx(one.value, rel=1e-15, abs=0)
