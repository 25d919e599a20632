"""relsheet benchmarks: every figure is a ratio against a baseline run side by side.

    python bench/run.py            # full run
    python bench/run.py --quick    # a short run (CI uses it as a smoke check)
    python bench/run.py --json     # machine-readable output
    python bench/run.py --only P2,P7b   # some figures only (while working on them)

Each figure runs its measurement and its baseline alternately (A B A B …), so
a machine that drifts during the run biases neither side; it reports the
median ratio of the pairs and their spread (lowest and highest pair). Goals
are printed for reading, never asserted: benchmarks are not tests.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import statistics
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from dataclasses import asdict, dataclass, field
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(Path(__file__).resolve().parent))

import workloads  # noqa: E402

DEMO = ROOT / "sheets_demo" / "orvane_b.sheet"
PY = sys.executable


@dataclass
class Figure:
    id: str
    name: str
    goal: float
    ratio: float = float("nan")
    spread: tuple[float, float] = (float("nan"), float("nan"))
    measured: float = float("nan")
    baseline: float = float("nan")
    unit: str = "s"
    pairs: int = 0
    notes: list[str] = field(default_factory=list)

    @property
    def met(self) -> bool:
        return self.ratio <= self.goal


def _summarise(fig: Figure, a: list[float], b: list[float]) -> Figure:
    ratios = [x / y for x, y in zip(a, b)]
    fig.ratio = statistics.median(ratios)
    fig.spread = (min(ratios), max(ratios))
    fig.measured = statistics.median(a)
    fig.baseline = statistics.median(b)
    fig.pairs = len(ratios)
    return fig


#: Runs the measured processes and reports (wall time, peak RSS). Linux keeps a process's
#: peak RSS across exec, so a process forked from this one (large after the in-process
#: figures and the P14 inputs) would report this one's size as its own peak; forked from
#: the launcher, a small Python started first, it reports its own.
_LAUNCHER = r"""
import json, os, subprocess, sys, time
for line in sys.stdin:
    job = json.loads(line)
    start = time.perf_counter()
    proc = subprocess.Popen(job["argv"], cwd=job["cwd"], stdout=subprocess.DEVNULL,
                            stderr=subprocess.PIPE)
    err = proc.stderr.read().decode(errors="replace")
    _, status, usage = os.wait4(proc.pid, 0)
    elapsed = time.perf_counter() - start
    print(json.dumps({"elapsed": elapsed, "maxrss": usage.ru_maxrss,
                      "code": os.waitstatus_to_exitcode(status), "err": err[-500:]}),
          flush=True)
"""
_launcher: subprocess.Popen | None = None


def start_launcher() -> subprocess.Popen:
    """The launcher (started on first use: main starts it before anything grows)."""
    global _launcher
    if _launcher is None:
        _launcher = subprocess.Popen([PY, "-c", _LAUNCHER], stdin=subprocess.PIPE,
                                     stdout=subprocess.PIPE, text=True)
    return _launcher


def run_process(argv: list[str], cwd: Path) -> tuple[float, int]:
    """Wall time (s) and peak resident memory (KiB) of one whole process."""
    launcher = start_launcher()
    assert launcher.stdin is not None and launcher.stdout is not None
    launcher.stdin.write(json.dumps({"argv": [str(a) for a in argv], "cwd": str(cwd)}) + "\n")
    launcher.stdin.flush()
    result = json.loads(launcher.stdout.readline())
    if result["code"] != 0:
        raise RuntimeError(f"{' '.join(map(str, argv))} exited {result['code']}: {result['err']}")
    return result["elapsed"], result["maxrss"]


def paired_processes(a: list[str], b: list[str], repeats: int, cwd: Path):
    run_process(a, cwd), run_process(b, cwd)  # warm caches: disk, grammar, bytecode
    times_a, times_b, mem_a, mem_b = [], [], [], []
    for _ in range(repeats):
        ta, ma = run_process(a, cwd)
        tb, mb = run_process(b, cwd)
        times_a.append(ta)
        times_b.append(tb)
        mem_a.append(ma)
        mem_b.append(mb)
    return times_a, times_b, mem_a, mem_b


def paired_calls(a: Callable[[], object], b: Callable[[], object], repeats: int):
    a(), b()
    times_a, times_b = [], []
    for _ in range(repeats):
        t = time.perf_counter()
        a()
        times_a.append(time.perf_counter() - t)
        t = time.perf_counter()
        b()
        times_b.append(time.perf_counter() - t)
    return times_a, times_b


# ---- the figures ------------------------------------------------------------


def p1_startup(repeats: int) -> Figure:
    fig = Figure("P1", "start-up: `relsheet eval` of the demo sheet vs importing its libraries", 1.3)
    a = [PY, "-m", "calc", "eval", str(DEMO)]
    b = [PY, "-c", "import astropy.units, astropy.constants, numpy, lark"]
    ta, tb, _, _ = paired_processes(a, b, repeats, ROOT)
    return _summarise(fig, ta, tb)


def p2_p5_size(repeats: int, workdir: Path) -> tuple[Figure, Figure]:
    sheet = workdir / "size.sheet"
    script = workdir / "size.py"
    sheet.write_text(workloads.size_sheet(2000))
    script.write_text(workloads.size_script(2000))
    a = [PY, "-m", "calc", "eval", str(sheet)]
    b = [PY, str(script)]
    ta, tb, ma, mb = paired_processes(a, b, repeats, ROOT)
    size = _summarise(Figure("P2", "size: `relsheet eval` of a 2,000-cell sheet vs the same "
                                   "arithmetic as an astropy script", 1.0), ta, tb)
    memory = _summarise(Figure("P5", "memory: peak RSS of P2 vs its baseline", 1.5, unit="KiB"),
                        [float(x) for x in ma], [float(x) for x in mb])
    return size, memory


def p3_incremental(repeats: int) -> Figure:
    from calc import Sheet

    text = workloads.fanout_sheet(2000, fed=20)
    sheet = Sheet.from_text(text)
    values = iter(range(2, 10**9))

    def what_if():
        changed = sheet.set("x0", f"{next(values)} km")
        assert len(changed) == 20, len(changed)

    ta, tb = paired_calls(what_if, lambda: Sheet.from_text(text), repeats)
    return _summarise(Figure("P3", "incremental: `Sheet.set` of an input feeding 1% of 2,000 "
                                   "cells vs a full evaluation", 0.05), ta, tb)


def p4_arrays(repeats: int) -> Figure:
    from calc import Sheet

    ta, tb = paired_calls(lambda: Sheet.from_text(workloads.ARRAY_SHEET)["w"],
                          workloads.array_direct, repeats)
    return _summarise(Figure("P4", "arrays: a 1,000,000-element `span` through four steps vs "
                                   "astropy Quantity arrays", 1.5), ta, tb)


def p6_budget(repeats: int) -> Figure:
    from calc import Sheet

    text = workloads.budget_sheet()
    ta, tb = paired_calls(lambda: Sheet.from_text(text)["budget"], workloads.budget_direct, repeats)
    fig = Figure("P6", "budget: an 8-body periapsis budget in a sheet vs the same numpy "
                       "computation written directly", 1.2)
    fig.notes.append("absolute goal: well under a second")
    return _summarise(fig, ta, tb)


def p7_monte_carlo(repeats: int) -> Figure:
    from calc import Sheet

    samples = 100_000
    uncertain_text = workloads.mc_sheet()
    arrays_text = workloads.mc_sheet(samples)

    def monte_carlo(percentiles: bool):
        # as `eval --mc` asks: with the points when it will print them
        results = Sheet.from_text(uncertain_text).monte_carlo(samples, seed=1,
                                                              points=percentiles)
        assert not any(hasattr(r, "render") for r in results.values()), results
        for summary in results.values():
            # the mean and σ as a report reads them (they may be found on a thread)
            assert summary.sigma is not None, summary
            if percentiles:
                assert summary.percentiles() is not None

    def deterministic():
        sheet = Sheet.from_text(arrays_text)
        assert sheet.ok, sheet.all_errors()

    # as many pairs as the other in-process figures: a run is ~0.2 s, and a median of seven
    # moved by ±0.1 from one run to the next on this 2-core machine
    n = repeats
    ta, tb = paired_calls(lambda: monte_carlo(False), deterministic, n)
    propagation = _summarise(Figure("P7", "Monte Carlo: 100,000 samples through a 50-cell sheet "
                                          "(mean, σ) vs one evaluation on 100,000-element arrays",
                                    2.0), ta, tb)
    ta, tb = paired_calls(lambda: monte_carlo(True), deterministic, n)
    shown = _summarise(Figure("P7b", "the same with the 16/50/84 % points of every cell "
                                     "(as `--mc` prints them)", 1.5), ta, tb)
    return propagation, shown


def p8_what_if(repeats: int) -> Figure:
    import tempfile as _tempfile

    from calc import Sheet
    from calc.interfaces.repl import Session

    text = workloads.size_sheet(500)
    with _tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "w.sheet"
        path.write_text(text)
        session = Session(path)
        values = iter(range(2, 10**9))

        def what_if():
            answer = session.handle(f"c0 = {next(values)} AU")
            assert "→" in answer

        ta, tb = paired_calls(what_if, lambda: Sheet.from_text(text), repeats)
    fig = Figure("P8", "REPL what-if on a 500-cell sheet (every cell downstream) vs a full "
                       "evaluation", 1.0)
    fig.notes.append("absolute goal: under 50 ms")
    return _summarise(fig, ta, tb)


def _peak_memory(call: Callable[[], object]) -> float:
    """Peak bytes numpy and Python allocate during ``call`` (tracemalloc sees numpy's buffers)."""
    import tracemalloc

    tracemalloc.start()
    try:
        call()
        return float(tracemalloc.get_traced_memory()[1])
    finally:
        tracemalloc.stop()


def p9_grid(repeats: int) -> Figure:
    from calc import Sheet

    def sheet():
        return Sheet.from_text(workloads.GRID_SHEET).raw("v")

    ta, tb = paired_calls(sheet, workloads.grid_direct, repeats)
    fig = _summarise(Figure("P9", "grids: a 1,000 × 1,000 grid of two axes through four steps vs "
                                  "astropy Quantity arrays with numpy broadcasting", 1.2), ta, tb)
    memory = _peak_memory(sheet) / _peak_memory(workloads.grid_direct)
    fig.notes.append(f"peak memory {memory:.2f}× the direct computation's (goal ≤ 1.5×)")
    return fig


def p11_time(repeats: int) -> Figure:
    from calc import Sheet

    def sheet():
        s = Sheet.from_text(workloads.TIME_SHEET)
        assert s.ok, s.all_errors()

    ta, tb = paired_calls(sheet, workloads.time_direct, max(2, repeats // 7))
    return _summarise(Figure("P11", "orbits in time: orbit_state and binary_delays over "
                                    "1,000,000 dates vs the same numpy code written directly",
                             1.3), ta, tb)


def p12_solve(repeats: int) -> Figure:
    from calc import Sheet

    def solved():
        results = Sheet.from_text(workloads.SOLVE_SHEET).monte_carlo(10_000, seed=1)
        assert not hasattr(results["pbdot"], "message"), results["pbdot"]

    def given():
        Sheet.from_text(workloads.GIVEN_SHEET).monte_carlo(10_000, seed=1)

    ta, tb = paired_calls(solved, given, max(3, repeats // 3))
    return _summarise(Figure("P12", "solving: --mc 10000 through the two-mass solve vs the same "
                                    "sheet with the masses given", 20.0), ta, tb)


def p13_editor(repeats: int) -> Figure:
    """An editor's keystroke: a didChange that edits one input of a 500-cell sheet (it feeds
    1% of the cells), until the diagnostics are published and the inlay hints refreshed,
    against a whole `relsheet eval` of the sheet in process."""
    import contextlib
    import io
    import tempfile as _tempfile
    import threading

    from calc.interfaces.cli import main as cli_main
    from calc.interfaces.lsp import SheetDocuments, inlay_hints, uri_of

    text = workloads.fanout_sheet(500, fed=5)
    published = threading.Event()
    documents = SheetDocuments(lambda doc, diagnostics: published.set())
    with _tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "edited.sheet"
        path.write_text(text)
        uri = uri_of(path.resolve())
        documents.open(uri, text, 1)
        assert published.wait(60)
        versions = iter(range(2, 10**9))
        doc = documents.get(uri)
        assert doc is not None

        def keystroke():
            version = next(versions)
            published.clear()
            documents.change(uri, text.replace("x0 = 1 km", f"x0 = {version} km"), version)
            assert published.wait(60)
            hints = inlay_hints(documents, doc, 0, 600)
            assert hints[0].label == f"→ {version} km", hints[0].label

        def evaluate():
            with contextlib.redirect_stdout(io.StringIO()):
                assert cli_main(["eval", str(path)]) == 0

        ta, tb = paired_calls(keystroke, evaluate, repeats)
        incremental = doc.incremental
        documents.stop()
    fig = Figure("P13", "editor: a didChange of one input of a 500-cell sheet to published "
                        "diagnostics and inlay hints vs `relsheet eval` of it in process", 0.2)
    fig.notes.append(f"{incremental} of the edits were evaluated incrementally")
    return _summarise(fig, ta, tb)


def p10_plot(repeats: int, workdir: Path) -> Figure:
    sheet = workdir / "plot.sheet"
    sheet.write_text(workloads.plot_sheet())
    ours, direct = workdir / "plot_ours.py", workdir / "plot_direct.py"
    out_a, out_b = workdir / "plots_a", workdir / "plots_b"
    out_a.mkdir()
    out_b.mkdir()
    ours.write_text(workloads.plot_spec_script(str(out_a), str(ROOT)))
    direct.write_text(workloads.plot_direct_script(str(out_b)))
    # the whole command: read the sheet, evaluate it, draw its plot, write the PNG
    a = [PY, "-m", "calc", "plot", str(sheet), "-o", str(out_a), "--force"]
    b = [PY, str(direct)]
    ta, tb, _, _ = paired_processes(a, b, repeats, ROOT)
    fig = Figure("P10", "plot: `relsheet plot` of a 100,000-point line (PNG) vs a script drawing "
                        "the same figure with matplotlib directly", 1.5)
    return _summarise(fig, ta, tb)
def p14_map(repeats: int, workdir: Path, quick: bool) -> list[Figure]:
    """`relsheet map` over 10^7 rows (10^6 with --quick) vs pyarrow + numpy by hand; its
    peak memory at 10^6 and 10^7 rows; the dask engine on a local cluster of 2 worker threads."""
    folder = workdir / "map"
    folder.mkdir()
    (folder / "sample.csv").write_text(workloads.MAP_SAMPLE)
    (folder / "s.sheet").write_text(workloads.MAP_SHEET)
    chunk = 100_000
    sizes = [200_000] if quick else [1_000_000, 10_000_000]
    for rows in sizes:
        workloads.write_map_input(folder / f"in{rows}.parquet", rows)

    def relsheet(rows: int, engine: str = "local") -> list[str]:
        out = folder / (f"out{rows}.parquet" if engine == "local" else f"out{rows}_dask")
        return [PY, "-m", "calc", "map", str(folder / "s.sheet"), "--table",
                f"rows={folder / f'in{rows}.parquet'}", "--cells", workloads.MAP_CELLS, "-o",
                str(out), "--chunk", str(chunk), "--force", "--engine", engine]

    def baseline(rows: int) -> list[str]:
        script = folder / f"baseline{rows}.py"
        script.write_text(workloads.map_script(str(folder / f"in{rows}.parquet"),
                                               str(folder / f"base{rows}.parquet"), chunk))
        return [PY, str(script)]

    top = sizes[-1]
    label = f"{top:,}"
    ta, tb, ma, mb = paired_processes(relsheet(top), baseline(top), repeats, ROOT)
    speed = _summarise(Figure("P14", f"map: {label} rows through a four-cell sheet "
                                     "(`relsheet map`, local) vs pyarrow + numpy by hand", 1.3),
                       ta, tb)
    memory = _summarise(Figure("P14m", "map: peak RSS of P14 vs its baseline", 1.5, unit="KiB"),
                        [float(x) for x in ma], [float(x) for x in mb])
    figures = [speed, memory]
    if not quick:
        small = [run_process(relsheet(1_000_000), ROOT)[1] for _ in range(max(1, repeats // 3))]
        large = [run_process(relsheet(10_000_000), ROOT)[1] for _ in range(max(1, repeats // 3))]
        growth = _summarise(Figure("P14g", "map: peak RSS at 10^7 rows vs at 10^6 (constant "
                                           "memory: ~1)", 1.1, unit="KiB"),
                            [float(x) for x in large], [float(x) for x in small])
        figures.append(growth)
    n = 1 if quick else max(2, repeats // 4)
    ta, tb, _, _ = paired_processes(relsheet(top, "dask"), relsheet(top), n, ROOT)
    figures.append(_summarise(Figure("P14d", "map --engine dask (local cluster of 2 worker threads, "
                                             "start-up included) vs the local engine", 2.0),
                              ta, tb))
    return figures


# ---- output -------------------------------------------------------------------


def render(figures: list[Figure]) -> str:
    rows = [("figure", "ratio", "spread", "goal", "", "measured", "baseline")]
    for f in figures:
        scale, unit = (1e3, "ms") if f.unit == "s" else (1 / 1024, "MiB")
        rows.append((f"{f.id} {f.name}", f"{f.ratio:.3f}", f"{f.spread[0]:.3f}–{f.spread[1]:.3f}",
                     f"≤ {f.goal:g}" if f.goal != float("inf") else "—",
                     ("met" if f.met else "MISSED") if f.goal != float("inf") else "",
                     f"{f.measured * scale:.1f} {unit}", f"{f.baseline * scale:.1f} {unit}"))
    widths = [max(len(r[i]) for r in rows) for i in range(len(rows[0]))]
    return "\n".join("  ".join(c.ljust(w) for c, w in zip(r, widths)).rstrip() for r in rows)


def machine() -> dict:
    return {"python": platform.python_version(), "machine": platform.machine(),
            "cpus": os.cpu_count(), "system": platform.system()}


def compile_bytecode() -> None:
    """Byte-compile calc/ as `pip install` does: the source tree is measured as installed,
    even where PYTHONDONTWRITEBYTECODE keeps Python from caching bytecode itself."""
    import compileall

    compileall.compile_dir(str(ROOT / "calc"), quiet=1)


FIGURES = ["P1", "P2", "P3", "P4", "P5", "P6", "P7", "P7b", "P8", "P9", "P10", "P11", "P12",
           "P13", "P14", "P14m", "P14g", "P14d"]


def _figure_ids(text: str) -> set[str]:
    ids = {part.strip() for part in text.split(",") if part.strip()}
    unknown = ids - set(FIGURES)
    if unknown:
        raise argparse.ArgumentTypeError(f"unknown figures {sorted(unknown)}; "
                                         f"known: {', '.join(FIGURES)}")
    return ids


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="few repetitions (smoke check)")
    parser.add_argument("--json", action="store_true", help="print JSON instead of a table")
    parser.add_argument("--only", metavar="IDS", type=_figure_ids,
                        help="comma-separated figures to run (P1,…,P14; P2 gives P5 too, "
                             "P7 gives P7b too, P14 gives P14m, P14g and P14d)")
    args = parser.parse_args(argv)
    start_launcher()
    process_repeats, call_repeats = (3, 5) if args.quick else (11, 21)
    wanted = args.only or set(FIGURES)
    compile_bytecode()
    figures: list[Figure] = []
    with tempfile.TemporaryDirectory() as tmp:
        if "P1" in wanted:
            figures.append(p1_startup(process_repeats))
        if wanted & {"P2", "P5"}:
            figures += p2_p5_size(process_repeats, Path(tmp))
        if "P3" in wanted:
            figures.append(p3_incremental(call_repeats))
        if "P4" in wanted:
            figures.append(p4_arrays(call_repeats))
        if "P6" in wanted:
            figures.append(p6_budget(call_repeats))
        if wanted & {"P7", "P7b"}:
            figures += p7_monte_carlo(call_repeats)
        if "P8" in wanted:
            figures.append(p8_what_if(call_repeats))
        if "P9" in wanted:
            figures.append(p9_grid(call_repeats))
        if "P11" in wanted:
            figures.append(p11_time(call_repeats))
        if "P12" in wanted:
            figures.append(p12_solve(call_repeats))
        if "P13" in wanted:
            figures.append(p13_editor(call_repeats))
        if "P10" in wanted:
            figures.append(p10_plot(process_repeats, Path(tmp)))
        if wanted & {"P14", "P14m", "P14g", "P14d"}:
            figures += p14_map(process_repeats, Path(tmp), args.quick)
    figures.sort(key=lambda f: FIGURES.index(f.id))
    if args.json:
        rows = []
        for f in figures:
            row = asdict(f) | {"met": f.met}
            if f.goal == float("inf"):   # an informational figure: no goal
                row["goal"], row["met"] = None, None
            rows.append(row)
        print(json.dumps({"machine": machine(), "quick": args.quick, "figures": rows}, indent=2))
    else:
        print(render(figures))
        print(f"\n{'quick run, ' if args.quick else ''}pairs per figure: "
              f"{process_repeats} (processes), {call_repeats} (in-process); "
              f"Python {platform.python_version()} on {os.cpu_count()} CPUs")
    return 0


if __name__ == "__main__":
    sys.exit(main())
