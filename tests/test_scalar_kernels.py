"""calc.engine.run's scalar kernels: cells of plain single quantities computed on floats give
exactly what the operations on Quantities give (the kernels are an optimisation, never another
answer). The reference is the ordinary evaluation, itself checked against published values
throughout the suite; here both paths must agree to the last bit, unit and error included."""

from __future__ import annotations

import gc
import weakref

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from calc import Sheet
from calc.engine import run
from calc.engine.values import Shown, shown
from conftest import count_calls


def _without_kernels(monkeypatch) -> None:
    def give_up(kernel, env):
        raise run.NotScalar()

    monkeypatch.setattr(run, "scalar_value", give_up)


def _outcome(sheet: Sheet, name: str):
    cell = sheet.cell(name)
    if cell.error is not None:
        return ("error", cell.error.message)
    form = shown(cell.raw)
    if not isinstance(form, Shown):
        return ("record", repr(form))
    sigma = None if form.sigma is None else np.asarray(form.sigma).tolist()
    return ("value", np.asarray(form.value).tolist(), sigma, form.unit.to_string(),
            type(cell.raw).__name__)


def _both(text: str, monkeypatch) -> tuple[dict, dict]:
    fast = Sheet.from_text(text)
    with monkeypatch.context() as patch:
        _without_kernels(patch)
        slow = Sheet.from_text(text)
    names = fast.names()
    return ({n: _outcome(fast, n) for n in names}, {n: _outcome(slow, n) for n in names})


def test_kernels_run_for_arithmetic_cells(monkeypatch):
    calls = count_calls(monkeypatch, run, "scalar_value")
    sheet = Sheet.from_text("a = 1 AU\nb = a * 1.0001 + 1500 km\nc = -(b / 2 s)^2 in km^2 / s^2\n")
    assert calls, "no cell ran on floats"
    # 1 AU = 149 597 870.7 km (IAU 2012 Resolution B2)
    b = (149_597_870.7 * 1.0001 + 1500) * 1e3
    assert sheet["c"].value == pytest.approx(-((b / 2) ** 2) / 1e6, rel=1e-15)


def test_operations_are_made_only_when_something_runs_them(monkeypatch):
    """A cell that runs on its kernel never needs its operations' closures, so none are made;
    when its input becomes uncertain, they are made and give the propagated value."""
    from calc.engine import compile as compiler

    made = count_calls(monkeypatch, compiler, "mul_op")
    made += count_calls(monkeypatch, compiler, "add_op")
    sheet = Sheet.from_text("a = 1 AU\nb = a * 1.0001 + 1500 km\n")
    assert made == [], "closures were made for a cell that ran on floats"
    sheet.set("a", "1 ± 0.001 AU")
    assert made, "the uncertain input did not run the operations"
    b = sheet.raw("b")
    # 1 AU = 149 597 870.7 km (IAU 2012 Resolution B2); σ scales by the factor 1.0001
    assert b.nominal.to_value("km") == pytest.approx(149_597_870.7 * 1.0001 + 1500, rel=1e-15)
    assert b.sigma.to_value("km") == pytest.approx(149_597_870.7e-3 * 1.0001, rel=1e-12)


@pytest.mark.parametrize("text", [
    "a = 3 km\nb = a / 0 s\n",                        # division by zero: the ordinary error
    "a = 3 km\nb = a + 2 s\n",                        # dimensions that do not add
    "a = -8\nb = a^0.5\n",                            # a negative number to a fractional power
    "a = 1e300 km\nb = a * a * a\n",                  # overflow
    "a = 2 km\nb = a in s\n",                         # a conversion that fails
    "a = [1, 2] km\nb = a * 2 + 1 m\n",               # arrays: not single quantities
    "a = 1 ± 0.1 km\nb = a * 2 + 1 m\n",              # uncertain inputs
    "a = orbit(1 AU, 0.1)\nb = a.a * 2\n",            # a record's field
    "a = 3 km\nb = 5 km / a in %\n",                  # a scaled dimensionless unit, shown in %
    "a = 90 deg\nb = a + 1 rad\nc = (1 + a / 1 rad) km\n",
    "a = 7\nb = a^2 + (a / 3)^0.5 - a^-1\nc = (3 km / 2 m)^1.5\n",  # dimensionless powers
    "a = 7 km\nb = a^2 / (a / 3 s)^0.5 in km^1.5 s^0.5\n",
])
def test_kernels_agree_with_the_operations(text, monkeypatch):
    fast, slow = _both(text, monkeypatch)
    assert fast == slow


_UNITS = ["km", "m", "s", "AU", "deg", "rad", "Msun", "kg", "d", "pc", ""]
_VALUES = st.sampled_from(["1", "2.5", "0.1", "3e8", "6.674_30e-11", "1e-300", "7", "1e200",
                           "0", "0.3333333333333333"])


def _expression(names: list[str]):
    leaf = st.one_of(st.sampled_from(names),
                     st.tuples(_VALUES, st.sampled_from(_UNITS)).map(lambda t: " ".join(t).strip()))

    def extend(inner):
        return st.one_of(
            st.tuples(inner, st.sampled_from([" + ", " - ", " * ", " / "]), inner).map("".join),
            inner.map(lambda e: f"-({e})"),
            st.tuples(inner, st.sampled_from(["2", "3", "-1", "0.5", "-2"])).map(
                lambda t: f"({t[0]})^{t[1]}"),
            st.tuples(inner, st.sampled_from(["km", "s", "AU", "deg"])).map(
                lambda t: f"({t[0]}) {t[1]}"),
        )

    return st.recursive(leaf, extend, max_leaves=6)


@st.composite
def _sheets(draw):
    lines = []
    names: list[str] = []
    for i in range(draw(st.integers(1, 3))):
        value = draw(_VALUES)
        unit = draw(st.sampled_from(_UNITS))
        lines.append(f"x{i} = {value} {unit}".rstrip())
        names.append(f"x{i}")
    for i in range(draw(st.integers(1, 5))):
        expr = draw(_expression(names))
        shown = draw(st.sampled_from(["", " in km", " in s", " in deg", " in %", " in AU / d"]))
        lines.append(f"y{i} = {expr}{shown}")
        names.append(f"y{i}")
    return "\n".join(lines) + "\n"


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(_sheets())
def test_kernels_agree_with_the_operations_on_generated_sheets(monkeypatch, text):
    fast, slow = _both(text, monkeypatch)
    assert fast == slow, text


def test_a_what_if_agrees_too(monkeypatch):
    text = "a = 2 AU\nb = a * 3 + 1 km\nc = (b / 1 d)^2 in km^2 / s^2\n"
    fast = Sheet.from_text(text)
    fast.set("a", "5 pc")
    with monkeypatch.context() as patch:
        _without_kernels(patch)
        slow = Sheet.from_text(text)
        slow.set("a", "5 pc")
    assert [_outcome(fast, n) for n in "abc"] == [_outcome(slow, n) for n in "abc"]


def test_a_kernel_giving_up_keeps_no_values_alive():
    # the kernels give up on arrays; what they raised must not hold on to the values it met
    sheet = Sheet.from_text("x = [1, 2, 3] km\ny = x * 2 + 1 m\nz = -y\n")
    assert sheet["z"][2].value == pytest.approx(-6.001)
    value = weakref.ref(sheet.cell("x").raw)
    del sheet
    gc.collect()
    assert value() is None
