"""`use` imports: a realistic multi-sheet project (shared constants, a template used twice)."""

from __future__ import annotations

import pytest

from calc import Sheet
from calc.errors import InputError


@pytest.fixture
def project(tmp_path):
    (tmp_path / "shared").mkdir()
    (tmp_path / "shared" / "constants.sheet").write_text("M_star = 0.92 ± 0.01 Msun\n")
    (tmp_path / "body.sheet").write_text(
        'use "shared/constants.sheet" as k\n'
        "a = 1 AU\ne = 0.1\n"
        "P = orbital_period(k.M_star, a)\n"
        "adv = periapsis_rate(k.M_star, a, e)\n"
        "elements = orbit(a, e)\n")
    (tmp_path / "top.sheet").write_text(
        'use "shared/constants.sheet" as k\n'
        'use "body.sheet" as inner with a = 0.05 AU, e = 0.2\n'
        'use "body.sheet" as outer with a = 0.3 AU\n'
        "ratio = inner.adv / outer.adv\n"
        "P_inner = inner.P in d\n"
        "a_outer = outer.elements.a\n"
        "m = k.M_star\n")
    return tmp_path


def test_namespaces_overrides_and_shared_inputs(project):
    sheet = Sheet.load(project / "top.sheet")
    assert sheet.all_errors() == []
    assert sheet["a_outer"].value == pytest.approx(0.3)
    # adv ∝ M^(3/2) a^(-5/2) / (1 - e^2): the ratio of the two templates
    expected = (0.05 / 0.3) ** -2.5 * (1 - 0.1**2) / (1 - 0.2**2)
    assert sheet["ratio"].value == pytest.approx(expected, rel=1e-12)
    # the shared constants sheet is one evaluation: M_star cancels in the ratio
    assert sheet.sigma("ratio").value < 1e-9 * sheet["ratio"].value
    assert sheet.sigma("m").value == pytest.approx(0.01)
    assert sheet.namespaces["inner"] is not sheet.namespaces["outer"]
    assert sheet.namespaces["k"] is sheet.namespaces["inner"].namespaces["k"]


def test_monte_carlo_across_imports(project):
    sheet = Sheet.load(project / "top.sheet")
    mc = sheet.monte_carlo(2000, seed=3)
    assert mc["P_inner"].sigma > 0
    # M_star cancels in the ratio: every sample the same but for rounding, so exact
    assert mc["ratio"].sigma is None
    assert mc["ratio"].value == pytest.approx(sheet["ratio"].value, rel=1e-12)


@pytest.mark.parametrize("line, message", [
    ('use "missing.sheet" as x', "no such sheet: missing.sheet"),
    ('use "notes.txt" as x', "`notes.txt` is not a sheet: only .sheet files can be imported"),
    ('use "../outside.sheet" as x', "`../outside.sheet` lies outside the project root"),
    ('use "top.sheet" as x', "import cycle: top.sheet → top.sheet"),
])
def test_import_errors(project, line, message):
    (project.parent / "outside.sheet").write_text("a = 1\n")
    (project / "top.sheet").write_text(line + "\n")
    sheet = Sheet.load(project / "top.sheet")
    assert isinstance(sheet.errors[0], InputError)
    assert sheet.errors[0].message.startswith(message)


def test_cycle_through_two_files(project):
    (project / "a.sheet").write_text('use "b.sheet" as b\n')
    (project / "b.sheet").write_text('use "a.sheet" as a\n')
    sheet = Sheet.load(project / "a.sheet")
    assert "import cycle: a.sheet → b.sheet → a.sheet" in " ".join(e.message for e in sheet.errors)


def test_unknown_override_and_unknown_cell(project):
    (project / "top.sheet").write_text('use "body.sheet" as b with q = 1\nx = b.nope\n')
    sheet = Sheet.load(project / "top.sheet")
    assert sheet.errors[0].message == "body.sheet has no cell `q` to override"
    assert sheet.cell("x").error.message == "body.sheet has no cell `nope`" or \
        sheet.cell("x").error.message.endswith("has no cell `nope`")


def test_root_option_allows_a_wider_project(project):
    (project.parent / "outside.sheet").write_text("a = 1\n")
    (project / "top.sheet").write_text('use "../outside.sheet" as o\nx = o.a\n')
    sheet = Sheet.load(project / "top.sheet", root=project.parent)
    assert sheet["x"].value == 1
