"""`relsheet map`: a sheet over a table streamed in chunks, and `Sheet.chunk_evaluator`.

The reference for every streamed result is the same sheet evaluated the ordinary way on
the whole table (`read_table` of the same rows): streaming must change nothing but memory.
Units are read back with astropy.table (its Parquet reader and the metadata we write).
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import astropy.units as u
import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from astropy.table import QTable

from calc import Sheet
from calc.interfaces.cli import main

ROOT = Path(__file__).resolve().parent.parent

SHEET = """\
## Light passing the invented star Orvane at each star's impact parameter
stars = read_table("sample.csv")
M = 0.92 ± 0.01 Msun
shift = deflection(M, stars.b) in mas
tilt = stars.w * 2
check shift < 50 mas
"""


def catalogue(rows: int, seed: int = 1) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(seed)
    return {"b": rng.uniform(0.05, 5.0, rows), "w": rng.uniform(0, 1, rows)}


@pytest.fixture
def project(tmp_path):
    (tmp_path / "sample.csv").write_text("b [AU],w\n0.5,0.1\n1.0,0.2\n")
    (tmp_path / "s.sheet").write_text(SHEET)
    data = catalogue(5000)
    # the big table gives b in km: map converts it into the AU the sheet reads it in
    table = pa.table({"b [km]": data["b"] * 149_597_870.7, "w": data["w"]})
    pq.write_table(table, tmp_path / "big.parquet", row_group_size=1500)
    return tmp_path, data


def run(*argv) -> int:
    return main(["map", *map(str, argv)])


def whole_table_reference(folder: Path, data: dict[str, np.ndarray]) -> Sheet:
    """The same sheet on the same rows, read whole with read_table (no streaming)."""
    rows = "\n".join(f"{float(b)!r},{float(w)!r}" for b, w in zip(data["b"], data["w"]))
    (folder / "whole.csv").write_text("b [AU],w\n" + rows + "\n")
    (folder / "whole.sheet").write_text(SHEET.replace("sample.csv", "whole.csv"))
    return Sheet.load(folder / "whole.sheet")


def test_local_map_equals_whole_table_evaluation(project, capsys):
    folder, data = project
    out = folder / "out.parquet"
    code = run(folder / "s.sheet", "--table", f"stars={folder / 'big.parquet'}",
               "--cells", "shift,tilt", "-o", out, "--chunk", "700")
    printed = capsys.readouterr()
    assert "5,000 rows" in printed.out
    reference = whole_table_reference(folder, data)
    result = QTable.read(out)   # astropy reads the units back from our metadata
    assert result.colnames == ["shift", "shift_sigma", "tilt"]
    assert result["shift"].unit == u.mas and result["tilt"].unit == u.one
    np.testing.assert_allclose(result["shift"].value, reference["shift"].value, rtol=1e-13)
    np.testing.assert_allclose(result["shift_sigma"].value, reference.sigma("shift").value,
                               rtol=1e-9)
    np.testing.assert_array_equal(result["tilt"].value, data["w"] * 2)
    # shifts above 50 mas (b below about 0.06 AU) fail the check, by row
    failing = np.flatnonzero(reference["shift"].value >= 50)
    assert failing.size > 0
    assert code == 1
    assert f"first failing rows: {failing[0]:,}" in printed.out
    metadata = pq.read_schema(out).field("shift").metadata
    assert metadata[b"unit"] == b"mas"


def test_chunk_evaluator_is_public_and_vectorised(tmp_path):
    (tmp_path / "sample.csv").write_text("b [AU],w\n0.5,0.1\n1.0,0.2\n")
    (tmp_path / "s.sheet").write_text(SHEET)
    sheet = Sheet.load(tmp_path / "s.sheet")
    evaluator = sheet.chunk_evaluator("stars", ["shift"])
    b = np.array([1.0, 2.0, 4.0]) * u.AU
    result = evaluator.chunk({"b": b, "w": np.zeros(3) * u.one}, 3)
    # α = 4 G M / (c² b): inversely proportional to b (Einstein 1916, from memory)
    np.testing.assert_allclose(result.values["shift"][0] / result.values["shift"][1:],
                               [2.0, 4.0], rtol=1e-14)
    # only the columns the chosen cells (and the checks the table reaches) read are streamed
    assert evaluator.fields == {"b"}
    assert evaluator.order == ["shift"]
    with pytest.raises(KeyError, match="no cell `shfit`"):
        sheet.chunk_evaluator("stars", ["shfit"])


def test_a_row_out_of_domain_is_null_and_counted(project, capsys):
    folder, data = project
    b = data["b"] * 149_597_870.7
    b[[17, 3210]] = -1.0
    pq.write_table(pa.table({"b [km]": b, "w": data["w"]}), folder / "bad.parquet")
    out = folder / "out.parquet"
    code = run(folder / "s.sheet", "--table", f"stars={folder / 'bad.parquet'}",
               "--cells", "shift", "-o", out, "--chunk", "1000")
    err = capsys.readouterr().err
    assert code == 2
    assert "2 rows failed" in err
    assert "row 17: deflection: `b` must be positive" in err
    assert "row 3,210:" in err
    column = pq.read_table(out).column("shift")
    assert column.null_count == 2
    assert column[17].as_py() is None and column[3210].as_py() is None
    assert column[16].as_py() is not None


@pytest.mark.parametrize("fmt", ["csv", "ecsv", "fits"])
def test_other_formats_stream_the_same(project, fmt, capsys):
    folder, data = project
    table = QTable({"b": data["b"] * u.AU, "w": data["w"]})
    if fmt == "csv":
        path = folder / "big.csv"
        rows = "\n".join(f"{float(b)!r},{float(w)!r}" for b, w in zip(data["b"], data["w"]))
        path.write_text("# the catalogue\nb [AU],w\n" + rows + "\n")
    else:
        path = folder / f"big.{fmt}"
        table.write(path, format="ascii.ecsv" if fmt == "ecsv" else "fits")
    run(folder / "s.sheet", "--table", f"stars={path}", "--cells", "shift", "-o",
        folder / f"{fmt}.parquet", "--chunk", "999")
    run(folder / "s.sheet", "--table", f"stars={folder / 'big.parquet'}", "--cells", "shift",
        "-o", folder / "pq.parquet")
    capsys.readouterr()
    got = pq.read_table(folder / f"{fmt}.parquet").column("shift").to_numpy()
    expected = pq.read_table(folder / "pq.parquet").column("shift").to_numpy()
    np.testing.assert_allclose(got, expected, rtol=1e-14)


# ---- refused before any chunk runs -----------------------------------------------------


def test_refusals(project, capsys):
    folder, _ = project
    sheet, big, out = folder / "s.sheet", folder / "big.parquet", folder / "out.parquet"
    pq.write_table(pa.table({"w": [1.0]}), folder / "no_b.parquet")
    pq.write_table(pa.table({"b [s]": [1.0], "w": [1.0]}), folder / "seconds.parquet")
    (folder / "plain.sheet").write_text("stars = 3 AU\nx = stars * 2\n")
    cases = [
        (["--table", f"stars={folder / 'no_b.parquet'}", "--cells", "shift"], 2,
         f"{folder / 'no_b.parquet'} has no column `b`, which the sheet reads as `stars.b`"),
        (["--table", f"stars={folder / 'seconds.parquet'}", "--cells", "shift"], 2,
         "column `b` is in `s` (time); the sheet reads it as `AU` (length)"),
        (["--table", f"stars={big}", "--cells", "shfit"], 64,
         "the sheet has no cell `shfit`\n  hint: did you mean `shift`?"),
        (["--table", f"starz={big}", "--cells", "shift"], 64, "the sheet has no cell `starz`"),
    ]
    for extra, code, message in cases:
        assert main(["map", str(sheet), *extra, "-o", str(out)]) == code
        assert message in capsys.readouterr().err
        assert not out.exists()
    assert main(["map", str(folder / "plain.sheet"), "--table", f"stars={big}",
                 "--cells", "x", "-o", str(out)]) == 2
    assert "`stars` is not read with read_table" in capsys.readouterr().err
    # a cell that combines the rows (a sum over them) would differ from chunk to chunk
    (folder / "total.sheet").write_text(SHEET + "total = sum(stars.w)\nshare = stars.w / total\n")
    assert main(["map", str(folder / "total.sheet"), "--table", f"stars={big}",
                 "--cells", "share", "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert "total.sheet:7:1: `total` combines rows of the table `stars`" in err
    assert not out.exists()
    out.write_bytes(b"keep")
    assert main(["map", str(sheet), "--table", f"stars={big}", "--cells", "shift",
                 "-o", str(out)]) == 64
    assert "out.parquet exists; nothing written" in capsys.readouterr().err
    assert out.read_bytes() == b"keep"
    assert main(["map", str(sheet), "--table", f"stars={big}", "--cells", "tilt",
                 "-o", str(out), "--force"]) == 1   # the sheet's check still runs, and fails
    assert pq.read_table(out).num_rows == 5000


# ---- bounded memory --------------------------------------------------------------------

def write_pattern(path: Path, rows: int) -> None:
    """``rows`` rows of impact parameters, written a million at a time: random numbers, which
    Parquet cannot encode smaller (a repeating pattern compressed so well that a reader
    holding on to what it read went unnoticed), and ``w`` a repeating pattern."""
    rng = np.random.default_rng(19)
    block = np.linspace(0.1, 5.0, 1000)
    schema = pa.schema([("b [AU]", pa.float64()), ("w", pa.float64())])
    with pq.ParquetWriter(path, schema) as writer:
        pattern = np.tile(block, 1000)
        for _ in range(rows // pattern.size):
            writer.write_table(pa.table({"b [AU]": rng.uniform(0.1, 5.0, pattern.size),
                                         "w": pattern}, schema=schema),
                               row_group_size=50_000)


def peak_of_map(folder: Path, rows: int) -> int:
    """Peak resident memory (KiB) of a `relsheet map` process over ``rows`` rows."""
    write_pattern(folder / f"in{rows}.parquet", rows)
    argv = [sys.executable, "-m", "calc", "map", str(folder / "s.sheet"), "--table",
            f"stars={folder / f'in{rows}.parquet'}", "--cells", "shift", "-o",
            str(folder / f"out{rows}.parquet"), "--chunk", "50000"]
    # Linux keeps a process's peak RSS across exec: a process forked from this one (large
    # after the tests before) would report this one's size as its peak. A small Python
    # launches it instead and reports its peak (KiB, wait4's ru_maxrss).
    launcher = ("import os, subprocess, sys\n"
                "p = subprocess.Popen(sys.argv[1:], stdout=subprocess.DEVNULL)\n"
                "_, status, usage = os.wait4(p.pid, 0)\n"
                "print(os.waitstatus_to_exitcode(status), usage.ru_maxrss)\n")
    done = subprocess.run([sys.executable, "-c", launcher, *argv], capture_output=True,
                          text=True, env={**os.environ, "PYTHONPATH": str(ROOT)})
    code, peak = done.stdout.split()
    assert code == "0", done.stderr
    return int(peak)


def test_peak_memory_does_not_grow_with_rows(tmp_path):
    (tmp_path / "sample.csv").write_text("b [AU],w\n0.5,0.1\n")
    # no check and no σ: the smallest sheet, whose memory is the streaming's own
    (tmp_path / "s.sheet").write_text('stars = read_table("sample.csv")\n'
                                      "shift = deflection(1 Msun, stars.b) in mas\n")
    small, large = peak_of_map(tmp_path, 1_000_000), peak_of_map(tmp_path, 10_000_000)
    assert pq.read_metadata(tmp_path / "out10000000.parquet").num_rows == 10_000_000
    # ten times the rows, the same peak within 10% (the 10^7 rows alone are 160 MB, more
    # than the whole process uses)
    assert large < 1.10 * small, (small, large)


# ---- dask -------------------------------------------------------------------------------


def test_dask_engine_matches_local_row_for_row(project, capsys):
    pytest.importorskip("distributed")
    folder, _ = project
    # a folder of Parquet files: dask partitions it its own way
    (folder / "parts").mkdir()
    whole = pq.read_table(folder / "big.parquet")
    for index, start in enumerate(range(0, whole.num_rows, 1200)):
        pq.write_table(whole.slice(start, 1200), folder / "parts" / f"p{index:02d}.parquet")
    code = run(folder / "s.sheet", "--table", f"stars={folder / 'parts'}", "--cells",
               "shift,tilt", "-o", folder / "dask_out", "--engine", "dask", "--chunk", "500")
    dask_printed = capsys.readouterr().out
    run(folder / "s.sheet", "--table", f"stars={folder / 'parts'}", "--cells", "shift,tilt",
        "-o", folder / "local.parquet")
    local_printed = capsys.readouterr().out
    assert code == 1   # the check fails on some rows, as locally
    from_dask = pq.read_table(folder / "dask_out")
    local = pq.read_table(folder / "local.parquet")
    assert from_dask.column_names == local.column_names
    for name in local.column_names:
        np.testing.assert_array_equal(from_dask.column(name).to_numpy(),
                                      local.column(name).to_numpy())
    assert dask_printed.split("first failing rows:")[1] == \
        local_printed.split("first failing rows:")[1]


def test_dask_partitions_of_one_file_keep_the_row_order(project, capsys, monkeypatch):
    """One file of many row groups, cut into partitions of whole row groups (two groups of
    1,500 rows each here): the partitions' files read back in the input's order."""
    pytest.importorskip("distributed")
    from calc.interfaces import map as mapping

    folder, _ = project
    monkeypatch.setattr(mapping, "PARTITION_ROWS", 3000)
    big = folder / "big.parquet"
    assert pq.ParquetFile(big).metadata.num_row_groups > 2
    run(folder / "s.sheet", "--table", f"stars={big}", "--cells", "shift",
        "-o", folder / "dask_out", "--engine", "dask")
    run(folder / "s.sheet", "--table", f"stars={big}", "--cells", "shift",
        "-o", folder / "local.parquet")
    capsys.readouterr()
    parts = sorted((folder / "dask_out").glob("*.parquet"))
    assert len(parts) == -(-pq.ParquetFile(big).metadata.num_row_groups // 2)
    np.testing.assert_array_equal(pq.read_table(folder / "dask_out").column("shift").to_numpy(),
                                  pq.read_table(folder / "local.parquet").column("shift")
                                  .to_numpy())


# ---- the local engine's reader and writer threads ----------------------------------------


def _leftovers(folder: Path, output: str) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.startswith((output, f".{output}")))


def test_a_bad_value_far_into_a_csv_stops_the_run_cleanly(project, capsys):
    """The reader thread meets a value that is no number after several chunks: the
    command says so (no traceback), exits 2 and leaves no output or temporary file."""
    folder, data = project
    rows = [f"{float(b)!r},{float(w)!r}" for b, w in zip(data["b"], data["w"])]
    rows[4321] = "seven,0.5"
    (folder / "bad.csv").write_text("b [AU],w\n" + "\n".join(rows) + "\n")
    code = run(folder / "s.sheet", "--table", f"stars={folder / 'bad.csv'}", "--cells",
               "shift", "-o", folder / "out.parquet", "--chunk", "500")
    err = capsys.readouterr().err
    assert code == 2
    assert "bad.csv" in err and "seven" in err and "Traceback" not in err
    assert _leftovers(folder, "out.parquet") == []


def test_a_failing_write_stops_the_run_cleanly(project, capsys, monkeypatch):
    """The writer thread's disk fills at the third chunk: the error is the command's
    (exit 2, the file and the reason), the reader and the evaluation stop, nothing is
    left behind."""
    import errno

    folder, _ = project
    real = pq.ParquetWriter.write_batch
    written = []

    def write_batch(self, batch, *args, **kwargs):
        if len(written) == 2:
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
        written.append(batch.num_rows)
        return real(self, batch, *args, **kwargs)

    monkeypatch.setattr(pq.ParquetWriter, "write_batch", write_batch)
    code = run(folder / "s.sheet", "--table", f"stars={folder / 'big.parquet'}", "--cells",
               "shift", "-o", folder / "out.parquet", "--chunk", "500")
    err = capsys.readouterr().err
    assert code == 2
    assert "out.parquet" in err and os.strerror(errno.ENOSPC) in err
    assert "Traceback" not in err
    assert _leftovers(folder, "out.parquet") == []


def test_a_bug_in_evaluation_is_an_internal_error_and_the_threads_stop(project, capsys,
                                                                          monkeypatch):
    """An error of ours in the middle of the run exits 70 and says so, with the reader
    and writer threads ended (the test would hang otherwise) and nothing left behind."""
    import threading

    from calc.engine import stream

    folder, _ = project
    real = stream.ChunkEvaluator.chunk
    calls = []

    def chunk(self, *args, **kwargs):
        calls.append(1)
        if len(calls) == 4:
            raise KeyError("injected")
        return real(self, *args, **kwargs)

    monkeypatch.setattr(stream.ChunkEvaluator, "chunk", chunk)
    code = run(folder / "s.sheet", "--table", f"stars={folder / 'big.parquet'}", "--cells",
               "shift", "-o", folder / "out.parquet", "--chunk", "500")
    err = capsys.readouterr().err
    assert code == 70 and "internal error" in err.lower()
    assert not [t for t in threading.enumerate() if t.name.startswith("relsheet-map")]
    assert _leftovers(folder, "out.parquet") == []
