"""calc.outputs.tables and the table and record parts of calc.outputs.export.

Expected texts are written out by hand: numbers rounded as the GUM says (JCGM 100:2008
§7.2.6: σ to two significant digits, the value to the same place), CSV as RFC 4180 reads it,
Markdown tables as GitHub Flavored Markdown's table extension, LaTeX for siunitx v3 (its
manual: the `S` column, `table-format`, `\\unit`, the unit macros `\\micro`, `\\second`,
`\\degree`, `\\per`, `\\arcsecond`).
"""

from __future__ import annotations

import csv
import io
import json
import re
import shutil
import subprocess
from pathlib import Path

import astropy.units as u
import numpy as np
import pytest

from calc import Sheet
from calc.outputs.export import (
    json_pieces,
    sheet_record,
    siunitx_unit,
    siunitx_unit_text,
    table_csv_files,
    to_markdown,
    to_tex,
)
from calc.outputs.figures import Series, TableSpec
from calc.outputs.tables import (
    table_csv,
    table_latex,
    table_markdown,
    table_record,
    table_text,
)
from calc.physics.units import unit_text

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "sheets_demo"

DATES = ("2031-04-12T06:30:00 TDB", "2031-04-13T06:30:00 TDB", "2031-04-14T06:30:00 TDB")


def small_table(heading: str = "Orvane b near conjunction") -> TableSpec:
    when = Series("t", "d", np.array([0.0, 1.0, 2.0]), texts=DATES)
    days = Series("days", "d", np.array([-1.0, 0.0, 2.5]))
    delay = Series("delay", "us", np.array([150.2549, 98.7, 1234.5]),
                   sigma=np.array([1.2345, 0.05, 0.0]))
    return TableSpec("pass", heading, (when, days, delay), line=3)


# ---- text -------------------------------------------------------------------------------

# 150.2549 ± 1.2345 → σ 1.2 (two digits), value to the tenths: 150.3 ± 1.2;
# 98.7 ± 0.05 → 98.700 ± 0.050; a σ of 0 is an exact value, printed alone.
SMALL_TEXT = """\
table pass · Orvane b near conjunction · 3 rows

t                         days [d]         delay [us]
───────────────────────   ────────   ────────────────
2031-04-12T06:30:00 TDB       -1      150.3   ± 1.2
2031-04-13T06:30:00 TDB        0       98.700 ± 0.050
2031-04-14T06:30:00 TDB        2.5   1234.5"""


def test_text_every_row_aligned_with_sigma_and_dates_as_given():
    assert table_text(small_table()) == SMALL_TEXT


def test_text_lines_up_decimal_points():
    text = table_text(TableSpec("t", "", (Series("x", "m", np.array([1.5, -12.25, 300.0])),)))
    rows = text.splitlines()[4:]
    assert [r.index(".") for r in rows if "." in r] == [rows[0].index(".")] * 2
    assert rows[2].rstrip().endswith("300")   # a whole number stands where its point would


@pytest.mark.parametrize("rows, shown, left_out", [
    (None, list(range(10)), None),
    (20, list(range(10)), None),
    (4, [0, 1, 8, 9], "  ⋮  6 rows left out (rows 3–8)"),
    (5, [0, 1, 2, 8, 9], "  ⋮  5 rows left out (rows 4–8)"),
    (1, [0], "  ⋮  9 rows left out (rows 2–10)"),
])
def test_text_rows_cut_to_first_and_last(rows, shown, left_out):
    spec = TableSpec("n", "", (Series("k", "", np.arange(10.0) * 11),))
    lines = table_text(spec, rows=rows).splitlines()[4:]
    numbers = [int(line) for line in lines if line.strip().isdigit()]
    assert numbers == [11 * k for k in shown]
    cut = [line for line in lines if "left out" in line]
    assert cut == ([left_out] if left_out else [])


def test_text_title_counts_rows():
    assert table_text(small_table(""), rows=2).splitlines()[0] == "table pass · 3 rows"


# ---- CSV --------------------------------------------------------------------------------

SMALL_CSV = """\
t,days [d],delay [us],delay_sigma [us]
2031-04-12T06:30:00 TDB,-1.0,150.2549,1.234
2031-04-13T06:30:00 TDB,0.0,98.7,0.05
2031-04-14T06:30:00 TDB,2.5,1234.5,
"""


def test_csv_text():
    assert table_csv(small_table()) == SMALL_CSV


def test_csv_reads_back_the_same_floats():
    rng = np.random.default_rng(7)
    values = rng.normal(size=50) * 10.0 ** rng.integers(-30, 30, size=50)
    spec = TableSpec("r", "", (Series("x", "km / s", values, sigma=np.abs(values) / 7),))
    rows = list(csv.DictReader(io.StringIO(table_csv(spec))))
    assert list(rows[0]) == ["x [km / s]", "x_sigma [km / s]"]
    assert np.array_equal([float(r["x [km / s]"]) for r in rows], values)   # exact
    sigmas = np.array([float(r["x_sigma [km / s]"]) for r in rows])
    assert np.allclose(sigmas, np.abs(values) / 7, rtol=5e-4, atol=0)   # four digits


def test_csv_file_per_table_named_after_it(monkeypatch):
    sheet = Sheet.from_text("x = 1 km\n", "t.sheet")
    monkeypatch.setattr(Sheet, "tables", lambda self: [small_table()], raising=False)
    assert table_csv_files(sheet) == {"pass.csv": SMALL_CSV}


# ---- Markdown ---------------------------------------------------------------------------

SMALL_MARKDOWN = """\
Table `pass`: Orvane b near conjunction

| t | days [d] | delay [us] |
|---|---:|---:|
| 2031-04-12T06:30:00 TDB | -1 | 150.3 ± 1.2 |
| 2031-04-13T06:30:00 TDB | 0 | 98.700 ± 0.050 |
| 2031-04-14T06:30:00 TDB | 2.5 | 1234.5 |"""


def test_markdown_text():
    assert table_markdown(small_table()) == SMALL_MARKDOWN


def test_markdown_escapes_like_the_report():
    spec = TableSpec("x", "<b>bold</b> & co", (Series("a", "m", np.array([1.0]),
                                                        texts=("1|2 <i>",)),))
    text = table_markdown(spec)
    assert "<b>" not in text and "&lt;b&gt;bold&lt;/b&gt; &amp; co" in text
    assert "| 1\\|2 &lt;i&gt; |" in text   # a bar inside a cell does not end it


def test_markdown_report_places_the_table_at_its_line(monkeypatch):
    text = "## Conjunction\nx = 1 km\n# table pass stands here\ny = 2 km\n"
    monkeypatch.setattr(Sheet, "tables", lambda self: [small_table()], raising=False)
    report = to_markdown(Sheet.from_text(text, "t.sheet"))
    assert report.index("| `x` |") < report.index("Table `pass`") < report.index("| `y` |")
    assert SMALL_MARKDOWN in report


# ---- LaTeX ------------------------------------------------------------------------------

SMALL_LATEX = r"""\begin{tabular}{l S[table-format=-1.1] S[table-format=4.3(2)]}
\hline
{t} & {days [\unit{\day}]} & {delay [\unit{\micro\second}]} \\
\hline
2031-04-12T06:30:00 TDB & -1 & 150.3 \pm 1.2 \\
2031-04-13T06:30:00 TDB & 0 & 98.700 \pm 0.050 \\
2031-04-14T06:30:00 TDB & 2.5 & 1234.5 \\
\hline
\end{tabular}"""


def test_latex_text():
    assert table_latex(small_table()) == SMALL_LATEX


# Unit text as the sheet language prints it → siunitx v3 macros (names from its manual; the
# units siunitx lacks are declared by the writer).
@pytest.mark.parametrize("text, macros, declared", [
    ("us", r"\micro\second", {}),
    ("deg / yr", r"\degree\per\year", {"year": "yr"}),
    ("arcsec / century", r"\arcsecond\per\century", {"century": "century"}),
    ("m^2 kg / s", r"\metre\squared\kilo\gram\per\second", {}),
    ("km / Mpc / s", r"\kilo\metre\per\mega\parsec\per\second", {"parsec": "pc"}),
    ("s^-1", r"\per\second", {}),
    ("m^(1/2)", r"\metre\tothe{0.5}", {}),
    ("m^3 / s^2", r"\metre\cubed\per\second\squared", {}),
    ("%", r"\percent", {}),
    ("", "", {}),
    ("solMass", r"\solarmass", {"solarmass": r"\ensuremath{M_{\odot}}"}),
    ("mas / yr", r"\milliarcsecond\per\year", {"milliarcsecond": "mas", "year": "yr"}),
])
def test_unit_text_as_siunitx_macros(text, macros, declared):
    found: dict[str, str] = {}
    assert siunitx_unit_text(text, found) == macros
    assert found == declared


@pytest.mark.parametrize("unit", [u.us, u.deg / u.yr, u.km / u.s, u.m ** 2 * u.kg / u.s,
                                  u.solMass, u.mas / u.yr, u.s ** -1, u.AU ** 3 / u.d ** 2,
                                  u.m ** 0.5, u.Hz, u.percent])
def test_unit_text_agrees_with_the_cell_macros(unit):
    """A table header and a cell macro write the same unit the same way."""
    assert siunitx_unit_text(unit_text(unit), {}) == siunitx_unit(unit, {})


def _balanced(text: str) -> bool:
    depth = 0
    for ch in re.sub(r"\\[{}]", "", text):
        depth += {"{": 1, "}": -1}.get(ch, 0)
        if depth < 0:
            return False
    return depth == 0


def test_latex_structure_of_a_larger_table():
    x = np.linspace(-10, 10, 21)
    spec = TableSpec("conj", "", (
        Series("days", "d", x),
        Series("rate", "deg / yr", 1e-7 * (1 + x ** 2), sigma=np.full(21, 3e-9)),
        Series("y_gr", "", np.where(x == 0, np.nan, 1 / (x + 0.5))),
    ))
    text = table_latex(spec)
    lines = text.splitlines()
    assert lines[0].startswith(r"\begin{tabular}{S[") and lines[-1] == r"\end{tabular}"
    body = [line for line in lines if line.endswith(r"\\")]
    assert len(body) == 1 + 21                                 # the header and every row
    assert all(line.count(" & ") == 2 for line in body)        # three columns in each
    assert _balanced(text)
    assert r"{rate [\unit{\degree\per\year}]}" in text and "deg / yr" not in text
    assert r"{y\_gr}" in text                                  # `_` is special in LaTeX
    assert "{---}" in text                                     # nan: text, not a number
    # an exponent and an uncertainty in the model of the column, as siunitx reads it
    assert re.search(r"S\[table-format=\d\.\d\(2\)e-\d\]", lines[0])


@pytest.mark.skipif(shutil.which("pdflatex") is None, reason="pdflatex is not installed")
def test_latex_compiles(tmp_path):
    declared: dict[str, str] = {}
    table = table_latex(small_table(), declared)
    units = "".join(f"\\DeclareSIUnit{{\\{m}}}{{{t}}}\n" for m, t in declared.items())
    (tmp_path / "t.tex").write_text("\\documentclass{article}\n\\usepackage{siunitx}\n" + units
                                    + "\\begin{document}\n" + table + "\n\\end{document}\n")
    done = subprocess.run(["pdflatex", "-interaction=nonstopmode", "t.tex"], cwd=tmp_path,
                          capture_output=True, text=True)
    assert done.returncode == 0, done.stdout[-2000:]


def test_tex_export_has_the_table_as_a_macro(monkeypatch):
    monkeypatch.setattr(Sheet, "tables", lambda self: [small_table()], raising=False)
    text = to_tex(Sheet.from_text("x = 1 km\n", "t.sheet"))
    assert "\\newcommand{\\rsPassTable}{%\n" + SMALL_LATEX + "}" in text
    assert _balanced(text)


# ---- JSON -------------------------------------------------------------------------------


def test_json_table_record():
    record = json.loads("".join(json_pieces(table_record(small_table()))))
    assert record == {
        "name": "pass", "heading": "Orvane b near conjunction", "line": 3, "rows": 3,
        "columns": [
            {"name": "t", "unit": "d", "values": list(DATES), "sigma": None},
            {"name": "days", "unit": "d", "values": [-1.0, 0.0, 2.5], "sigma": None},
            {"name": "delay", "unit": "us", "values": [150.2549, 98.7, 1234.5],
             "sigma": [1.2345, 0.05, 0.0]},
        ]}


def test_json_document_lists_tables_only_when_the_sheet_has_some(monkeypatch):
    sheet = Sheet.from_text("x = 1 km\n", "t.sheet")
    assert "tables" not in sheet_record(sheet)
    monkeypatch.setattr(Sheet, "tables", lambda self: [small_table()], raising=False)
    doc = json.loads("".join(json_pieces(sheet_record(sheet))))
    assert [t["name"] for t in doc["tables"]] == ["pass"]


# ---- records (budgets) field by field ---------------------------------------------------


@pytest.fixture(scope="module")
def budget_sheet():
    return Sheet.load(DEMO / "orvane_periapsis.sheet")


def _tex_number(text: str) -> tuple[float, float | None]:
    value, _, sigma = text.partition(r" \pm ")
    return float(value), (float(sigma) if sigma else None)


def test_budget_fields_as_latex_macros(budget_sheet):
    text = to_tex(budget_sheet)
    macros = dict(re.findall(r"\\newcommand\{(\\rs\w+)\}\{(.*)\}", text))
    budget = budget_sheet["budget"]
    assert list(budget.fields) == ["orvane_c", "orvane_d", "orvane_e", "oblateness", "gr",
                                   "lense_thirring", "total"]
    for field, macro in [("orvane_c", "\\rsBudgetOrvaneC"), ("gr", "\\rsBudgetGr"),
                         ("lense_thirring", "\\rsBudgetLenseThirring"),
                         ("total", "\\rsBudgetTotal")]:
        found = re.fullmatch(r"\\qty\{(.*)\}\{\\arcsecond\\per\\century\}", macros[macro])
        assert found, macros[macro]
        number, sigma = _tex_number(found.group(1))
        quantity = budget.fields[field]
        nominal = getattr(quantity, "nominal", quantity).to_value(quantity.unit)
        # the printed number is the field's value, rounded at σ's second digit (GUM)
        assert abs(number - nominal) <= (sigma or abs(nominal) * 1e-5)
    # the relativistic term, computed a second way in the same sheet, prints the same
    assert macros["\\rsBudgetGr"] == macros["\\rsGrFromOrbit"]


def test_percent_macro_has_no_times_sign(budget_sheet):
    macros = dict(re.findall(r"\\newcommand\{(\\rs\w+)\}\{(.*)\}", to_tex(budget_sheet)))
    assert re.fullmatch(r"\\qty\{\d+\.\d+ \\pm \d\.\d+\}\{\\percent\}",
                        macros["\\rsRelativisticShare"])
    assert not any("×" in m for m in macros.values())


def test_budget_fields_in_markdown(budget_sheet):
    text = to_markdown(budget_sheet)
    rows = {line.split(" | ")[0]: line for line in text.splitlines()
            if line.startswith("| `budget")}
    assert set(rows) == {f"| `budget{f}`" for f in
                         ["", ".orvane_c", ".orvane_d", ".orvane_e", ".oblateness", ".gr",
                          ".lense_thirring", ".total"]}
    assert rows["| `budget.gr`"].endswith("| arcsec / century |")
    gr_row = next(line for line in text.splitlines() if line.startswith("| `gr_from_orbit`"))
    assert rows["| `budget.gr`"].split(" | ")[1] == gr_row.split(" | ")[1]


def test_field_macro_never_takes_a_cells_name():
    text = to_tex(Sheet.from_text("o = orbit(1 AU, 0.1)\no_a = 3\n", "t.sheet"))
    assert "\\newcommand{\\rsOA}{\\num{3}}" in text            # the cell keeps its macro
    assert "% o.a would be \\rsOA like o_a: no macro" in text


def test_eval_prints_each_table_where_it_stands(tmp_path, capsys):
    from calc.interfaces.cli import main

    path = tmp_path / "s.sheet"
    path.write_text("x = 1 km\nt = axis([1, 2, 3] d)\nv = x / t\ntable pass: t, v\ny = 2 km\n")
    assert main(["eval", str(path)]) == 0
    out = capsys.readouterr().out
    # the table between the cells before it and after it, every row shown
    assert out.index("  x  ") < out.index("table pass") < out.index("  y  ")
    assert out.count("\n", out.index("table pass"), out.index("  y  ")) >= 5
    assert main(["eval", str(path), "--rows", "2"]) == 0
    assert "⋮  1 row left out (rows 2–2)" in capsys.readouterr().out
    assert main(["eval", str(path), "--rows", "0"]) == 64
