"""`read_table("file")`: ECSV, FITS, VOTable, Parquet and `name [unit]` CSV as records of columns.

The reference for every format is astropy.table itself: each file is written by astropy
(or, for CSV, by hand and read back by astropy's own CSV reader), and the sheet must see the
same numbers in the same units.
"""

from __future__ import annotations

import astropy.units as u
import numpy as np
import pytest
from astropy.table import QTable, Table

from calc import Sheet
from calc.errors import Span

B_AU = np.array([0.61, 0.62, 0.63, 1.25])
T_D = np.array([0.0, 12.5, 25.0, 37.5])
RATIO = np.array([0.5, 0.25, 0.125, 2.0])


def astropy_table() -> QTable:
    return QTable({"b": B_AU * u.AU, "t": T_D * u.d, "ratio": RATIO,
                   "star": ["Orvane", "Orvane", "Orvane", "Orvane"]})


def sheet_reading(folder, file_name: str) -> Sheet:
    path = folder / "t.sheet"
    path.write_text(f'obs = read_table("{file_name}")\nb_km = obs.b in km\nlate = obs.t * 2\n')
    return Sheet.load(path)


@pytest.mark.parametrize("file_name,fmt", [("passes.ecsv", "ascii.ecsv"),
                                           ("passes.fits", "fits"),
                                           ("passes.vot", "votable"),
                                           ("passes.parquet", "parquet")])
def test_formats_written_by_astropy_read_back(tmp_path, file_name, fmt):
    table = astropy_table()
    if fmt == "fits":
        table.remove_column("star")   # FITS text columns are bytes; kept out of the comparison
    table.write(tmp_path / file_name, format=fmt)
    reference = QTable.read(tmp_path / file_name, format=fmt)   # astropy's own reading
    sheet = sheet_reading(tmp_path, file_name)
    assert sheet.all_errors() == []
    record = sheet.raw("obs")
    # numeric columns only, in the file's order; the text column is not a quantity
    assert list(record.fields) == ["b", "t", "ratio"]
    for name in record.fields:
        assert record.field(name).unit == (reference[name].unit or u.dimensionless_unscaled)
        np.testing.assert_array_equal(record.field(name).value, np.asarray(reference[name].value))
    # conversions and arithmetic work column-wise (1 AU = 149 597 870.7 km, IAU 2012 B2)
    np.testing.assert_allclose(sheet["b_km"].value, B_AU * 149_597_870.7, rtol=1e-15)
    assert sheet["late"].unit == u.d


def test_hand_written_csv_matches_astropy_reading(tmp_path):
    text = ("# passes of the probe Tern (invented)\n"
            "star,b [AU],t [d],ratio []\n"
            "Orvane,0.61,0,0.5\n"
            "Orvane,0.62,12.5,0.25\n"
            "Orvane,0.63,25,0.125\n"
            "Orvane,1.25,37.5,2\n")
    (tmp_path / "passes.csv").write_text(text)
    reference = Table.read(tmp_path / "passes.csv", format="ascii.csv", comment="#")
    sheet = sheet_reading(tmp_path, "passes.csv")
    assert sheet.all_errors() == []
    record = sheet.raw("obs")
    assert list(record.fields) == ["b", "t", "ratio"]
    pairs = {"b": ("b [AU]", u.AU), "t": ("t [d]", u.d), "ratio": ("ratio []", u.one)}
    for name, (header, unit) in pairs.items():
        assert record.field(name).unit == unit
        np.testing.assert_array_equal(record.field(name).value, np.asarray(reference[header],
                                                                           dtype=float))


def test_column_without_unit_is_dimensionless_only_when_numeric(tmp_path):
    (tmp_path / "p.csv").write_text("b [AU],w,label\n1,0.5,x\n2,0.25,y\n")
    (tmp_path / "t.sheet").write_text('obs = read_table("p.csv")\n')
    record = Sheet.load(tmp_path / "t.sheet").raw("obs")
    assert list(record.fields) == ["b", "w"]
    assert record.field("w").unit == u.one


# ---- errors: the message, and the place (the file name in the cell's line) ---------------

ERRORS = [
    ("missing.csv", None, "no such data file: missing.csv (looked for missing.csv)"),
    ("p.csv", "b,t\n1,2\n", "p.csv, line 1: the header gives no units"),
    ("p.csv", "b [AU],t [d]\n1,2\n3\n", "p.csv, line 3 (row 2): 1 value for 2 columns"),
    ("p.csv", "b [AU],t [d]\n1,2\n3,x7\n",
     "p.csv, line 3 (row 2), column `t`: `x7` is not a number"),
    ("p.csv", "b [AU],t [d]\n1,2\n3,\n", "p.csv, line 3 (row 2), column `t`: is empty"),
    ("p.csv", "b [AU],n\n1,2\n3,four\n4,5\n",
     "p.csv, line 3 (row 2), column `n`: `four` is not a number"),
    ("p.csv", "b [AUU],t [d]\n1,2\n", "p.csv, column `b`: unknown unit `AUU`"),
    ("p.txt", "b [AU]\n1\n", "p.txt: relsheet reads no tables of this format"),
]


@pytest.mark.parametrize("file_name,content,message", ERRORS)
def test_bad_files_are_errors_at_the_file_name(tmp_path, file_name, content, message):
    if content is not None:
        (tmp_path / file_name).write_text(content)
    line = f'x = 2 AU\nobs = read_table("{file_name}")\n'
    (tmp_path / "t.sheet").write_text(line)
    sheet = Sheet.load(tmp_path / "t.sheet")
    err = sheet.cell("obs").error
    assert err is not None
    assert err.message == message
    # the caret stands under the quoted file name on line 2
    assert err.span == Span(2, 18, 2, 18 + len(file_name) + 2)
    assert err.render().startswith(f"{tmp_path / 't.sheet'}:2:18: {message}")
    assert sheet["x"].value == 2   # the other cells go on


def test_unknown_unit_has_did_you_mean(tmp_path):
    (tmp_path / "p.csv").write_text("b [AUU],t [d]\n1,2\n")
    (tmp_path / "t.sheet").write_text('obs = read_table("p.csv")\n')
    err = Sheet.load(tmp_path / "t.sheet").cell("obs").error
    assert err is not None and "`AU`" in (err.hint or "")


def test_unrecognised_unit_in_an_ecsv_file(tmp_path):
    (tmp_path / "p.ecsv").write_text(
        "# %ECSV 1.0\n# ---\n# datatype:\n# - {name: b, unit: kmz, datatype: float64}\n"
        "# schema: astropy-2.0\nb\n1.0\n")
    (tmp_path / "t.sheet").write_text('obs = read_table("p.ecsv")\n')
    err = Sheet.load(tmp_path / "t.sheet").cell("obs").error
    assert err is not None
    assert err.message == "p.ecsv, column `b`: unknown unit `kmz`"
    assert "`km`" in (err.hint or "")


def test_missing_value_in_ecsv_names_the_row(tmp_path):
    table = Table({"b": np.ma.array([1.0, 2.0, 3.0], mask=[False, True, False])})
    table["b"].unit = u.AU
    table.write(tmp_path / "p.ecsv")
    (tmp_path / "t.sheet").write_text('obs = read_table("p.ecsv")\n')
    err = Sheet.load(tmp_path / "t.sheet").cell("obs").error
    assert err is not None and err.message == "p.ecsv, column `b`, row 2: the value is missing"


def test_arguments_of_read_table(tmp_path):
    (tmp_path / "t.sheet").write_text('a = read_table(3)\nb = sqrt("p.csv")\n')
    sheet = Sheet.load(tmp_path / "t.sheet")
    assert sheet.cell("a").error.message == "read_table takes one file name in quotes"
    assert sheet.cell("b").error.message == "sqrt: `x` takes a value, not text in quotes"


def test_paths_stay_inside_the_project_root(tmp_path):
    project = tmp_path / "project"
    (project / "data").mkdir(parents=True)
    (tmp_path / "outside.csv").write_text("b [AU]\n1\n")
    (project / "data" / "p.csv").write_text("b [AU]\n1\n2\n")
    (project / "t.sheet").write_text('inner = read_table("data/p.csv")\n'
                                     'outer = read_table("../outside.csv")\n')
    sheet = Sheet.load(project / "t.sheet")
    assert sheet.cell("inner").error is None
    assert list(sheet.raw("inner").field("b").value) == [1.0, 2.0]
    err = sheet.cell("outer").error
    assert err is not None
    assert err.message.startswith("`../outside.csv` lies outside the project root")
    # a wider --root admits it
    wider = Sheet.load(project / "t.sheet", root=tmp_path)
    assert wider.cell("outer").error is None


def test_a_record_of_columns_refuses_arithmetic(tmp_path):
    (tmp_path / "p.csv").write_text("b [AU]\n1\n")
    (tmp_path / "t.sheet").write_text('obs = read_table("p.csv")\nx = obs * 2\ny = obs.c\n')
    sheet = Sheet.load(tmp_path / "t.sheet")
    assert "is not a number" in sheet.cell("x").error.message
    assert sheet.cell("y").error.message == "the table record `obs` has no field `c`"


def test_a_tables_rows_are_an_axis_named_after_its_cell(tmp_path):
    # DESIGN §9: the columns are arrays on an axis named after the record's cell
    (tmp_path / "obs.csv").write_text("flux [Jy],t [d]\n1.0,1\n3.0,2\n2.0,3\n")
    (tmp_path / "t.sheet").write_text('obs = read_table("obs.csv")\n'
                                      "m = max(obs.flux, along = obs)\n"
                                      "el = axis([1, 2] deg)\ng = obs.flux * el\n")
    sheet = Sheet.load(tmp_path / "t.sheet")
    assert sheet["m"].value == 3.0
    g = sheet.raw("g")
    assert [a.name for a in g.axes] == ["obs", "el"]
    np.testing.assert_allclose(g.data.value, np.outer([1.0, 3.0, 2.0], [1.0, 2.0]))
