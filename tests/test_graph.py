"""calc.engine.graph and calc.engine.sheet: order, cycles, duplicates, failed inputs, recomputation."""

from __future__ import annotations

import astropy.units as u
import pytest

from calc import Sheet
from calc.engine.graph import DependencyGraph
from calc.errors import CycleError, DuplicateCellError, InputFailedError, SheetSyntaxError
from conftest import evaluate, only_error


def graph_of(edges: dict[str, list[str]]) -> DependencyGraph:
    g = DependencyGraph()
    for rank, (name, uses) in enumerate(edges.items()):
        g.add(name, uses, rank)
    return g


def test_topological_order_respects_uses_and_file_order():
    order, cycles = graph_of({"c": ["b"], "a": [], "b": ["a"], "d": []}).order()
    assert cycles == []
    assert order.index("a") < order.index("b") < order.index("c")
    assert order == ["a", "b", "c", "d"]


@pytest.mark.parametrize("edges, cycle", [
    ({"a": ["a"]}, ["a", "a"]),
    ({"a": ["b"], "b": ["a"]}, ["a", "b", "a"]),
    ({"x": [], "a": ["b"], "b": ["c"], "c": ["a"]}, ["a", "b", "c", "a"]),
])
def test_cycles_are_whole(edges, cycle):
    order, cycles = graph_of(edges).order()
    assert cycles == [(cycle, set(cycle))]
    assert not set(cycle) & set(order)


def test_downstream_and_upstream():
    g = graph_of({"a": [], "b": ["a"], "c": ["b"], "d": ["a"], "e": []})
    assert g.downstream("a") == {"b", "c", "d"}
    assert g.upstream("c") == {"a", "b"}


def test_cycle_in_a_sheet_reports_the_cycle_and_spares_the_rest():
    sheet = evaluate("a = b + 1\nb = c * 2\nc = a\nd = 5\ne = a + d")
    err = only_error(sheet, "a")
    assert isinstance(err, CycleError)
    assert err.message == "cycle: a → b → c → a"
    assert sheet["d"].value == 5
    assert isinstance(only_error(sheet, "e"), InputFailedError)
    assert len([e for e in sheet.all_errors() if isinstance(e, CycleError)]) == 1  # once a cycle


def test_duplicate_cell_names_both_lines():
    sheet = evaluate("x = 1\ny = x + 1\nx = 2")
    err = only_error(sheet, "x")
    assert isinstance(err, DuplicateCellError)
    assert err.message == "cell `x` is defined twice (lines 1 and 3)"
    assert err.span.line == 3
    assert only_error(sheet, "y").message == "input `x` failed"


def test_failed_input_is_named_and_others_still_evaluate():
    sheet = evaluate("bad = 3 kmz\nuse1 = bad * 2\nuse2 = use1 + 1\nfine = 2 km")
    assert only_error(sheet, "use1").message == "input `bad` failed"
    assert only_error(sheet, "use2").message == "input `use1` failed"
    assert sheet["fine"].to_value(u.km) == 2
    # only the root cause is reported on its own
    assert [e.message for e in sheet.all_errors()] == ["unknown unit `kmz`"]


def _fanout_sheet(n: int = 100, fed: int = 10) -> str:
    lines = ["x0 = 1 km", "y0 = 1 km"]
    lines += [f"x{i} = x{i - 1} + 1 km" for i in range(1, fed)]
    lines += [f"y{i} = y{i - 1} * 2" for i in range(1, n - fed)]
    return "\n".join(lines) + "\n"


def test_set_recomputes_only_downstream_and_returns_what_changed():
    sheet = Sheet.from_text(_fanout_sheet())
    before = sheet.evaluations
    changed = sheet.set("x0", "2 km")
    assert sheet.evaluations - before == 10          # x0 .. x9, nothing of the y chain
    assert [c.name for c in changed] == [f"x{i}" for i in range(10)]
    assert sheet["x9"].to_value(u.km) == 11


def test_set_to_the_same_value_stops_at_once():
    sheet = Sheet.from_text(_fanout_sheet())
    before = sheet.evaluations
    # each spelling of the same 1 km is checked on its own: x0 alone is evaluated, no cell
    # downstream of it is, and nothing is reported as changed
    assert sheet.set("x0", "1000 m in km") == []
    assert sheet.evaluations - before == 1
    assert sheet.set("x0", "1 km") == []
    assert sheet.evaluations - before == 2
    assert sheet["x9"].to_value(u.km) == 10


def test_set_keeps_the_display_unit_and_adds_new_cells():
    sheet = Sheet.from_text("a = 1 AU in km\nb = a * 2\n")
    sheet.set("a", "2 AU")
    assert sheet["a"].unit == u.km and sheet["b"].to_value(u.AU) == pytest.approx(4)
    changed = sheet.set("w", "b / 2")
    assert [c.name for c in changed] == ["w"]


def test_new_cell_shadows_a_builtin_used_elsewhere():
    sheet = Sheet.from_text("x = c * 1 s\n")
    assert sheet["x"].to_value(u.m) == 299_792_458
    changed = sheet.set("c", "3 m / s")
    assert {c.name for c in changed} == {"c", "x"}
    assert sheet["x"].to_value(u.m) == 3


def test_set_can_make_and_break_a_cycle():
    sheet = Sheet.from_text("a = 1\nb = a + 1\nc = b + 1\n")
    sheet.set("a", "c")
    assert isinstance(sheet.cell("a").error, CycleError)
    sheet.set("a", "5")
    assert sheet["c"].value == 7


def test_revert_restores_the_file_definition():
    sheet = Sheet.from_text("a = 1\nb = a + 1\n")
    sheet.set("a", "10")
    changed = sheet.revert("a")
    assert sheet["b"].value == 2 and {c.name for c in changed} == {"a", "b"}


def test_set_with_a_syntax_error_changes_nothing():
    sheet = Sheet.from_text("a = 1\n")
    with pytest.raises(SheetSyntaxError) as info:
        sheet.set("a", "1 +")
    assert info.value.render().startswith("--set a:1:4: unexpected end of line")
    assert sheet["a"].value == 1


def test_python_api():
    sheet = Sheet.load("sheets_demo/orvane_b.sheet")
    assert isinstance(sheet["P_b"], u.Quantity)
    assert [c.name for c in sheet.cells][:3] == ["M_star", "R_star", "GM"]
    with pytest.raises(KeyError):
        sheet["no_such_cell"]
