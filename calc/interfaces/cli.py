"""The ``relsheet`` command line.

Exit codes: 0 fine; 1 a check failed (verify) or markers are stale
(annotate --stale); 2 the sheet has errors; 64 the command line was used
wrongly; 70 an internal error (a bug: ``--debug`` shows the traceback).
Errors print as ``file:line:col: message``, the line, a caret and a hint;
never a Python traceback unless ``--debug`` is given.
"""

from __future__ import annotations

import argparse
import gc
import os
import sys
import traceback
from typing import Any

from ..errors import InternalError, SheetError, UsageError

EXIT_OK = 0
EXIT_CHECK_FAILED = 1
EXIT_SHEET_ERRORS = 2
EXIT_USAGE = 64
EXIT_INTERNAL = 70


class _Parser(argparse.ArgumentParser):
    """argparse that reports usage errors as :class:`UsageError` (exit 64, not 2)."""

    def error(self, message: str):  # noqa: D102 - argparse API
        raise UsageError(message, hint=f"`{self.prog} --help` shows the usage")


def _sheet_options(command: argparse.ArgumentParser) -> None:
    """Options every command that evaluates sheets takes."""
    command.add_argument("--root", metavar="DIR",
                         help="the folder imported sheets must stay in (default: the sheet's "
                              "folder)")
    command.add_argument("--debug", action="store_true", default=argparse.SUPPRESS,
                         help="show Python tracebacks of internal errors")


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="relsheet",
                     description="Sheets of named quantities with units, for relativistic "
                                 "and celestial-mechanics corrections.")
    parser.add_argument("--debug", action="store_true",
                        help="show Python tracebacks of internal errors")
    commands = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    ev = commands.add_parser("eval", help="evaluate a sheet and print every cell",
                             description="Evaluate a sheet and print every cell.")
    ev.add_argument("file", metavar="FILE", help="the sheet (.sheet)")
    ev.add_argument("--set", dest="overrides", action="append", default=[], metavar="NAME=EXPR",
                    help="give cell NAME the expression EXPR for this run (repeatable)")
    ev.add_argument("--format", choices=["text", "json", "csv", "md"], default="text",
                    help="text for people (default), json for programs, csv, md (Markdown)")
    ev.add_argument("--digits", type=int, default=6, metavar="N",
                    help="significant digits in text output (1-17, default 6)")
    ev.add_argument("--mc", type=int, metavar="N",
                    help="Monte Carlo propagation with N samples (default: first-order)")
    ev.add_argument("--seed", type=int, metavar="S", help="seed of the Monte Carlo draws")
    ev.add_argument("--sigma-budget", metavar="CELL", dest="sigma_budget",
                    help="list each input's share of the uncertainty of CELL")
    ev.add_argument("--rows", type=int, metavar="N",
                    help="print tables as their first and last N rows (default: every row)")
    _sheet_options(ev)
    vf = commands.add_parser("verify", help="run the sheets' checks; exit 1 if any fails",
                             description="Run the `check` lines of each sheet. Prints every "
                                         "failing check with both sides and the tolerance, then "
                                         "`N passed, N failed`. Exit 1 if a check fails, 2 if a "
                                         "sheet has errors.")
    vf.add_argument("files", metavar="FILE", nargs="+", help="sheets (.sheet)")
    _sheet_options(vf)

    an = commands.add_parser("annotate", help="write each cell's result into the file as `#→`",
                             description="Write each cell's result after its line as a trailing "
                                         "`#→ value unit` marker, changing nothing else; "
                                         "atomic. With --stale, write nothing and exit 1 when "
                                         "a marker is out of date.")
    an.add_argument("files", metavar="FILE", nargs="+", help="sheets (.sheet)")
    an.add_argument("--stale", action="store_true",
                    help="only report whether the markers are out of date (exit 1 if so)")
    an.add_argument("--digits", type=int, default=6, metavar="N",
                    help="significant digits of the markers (default 6)")
    an.add_argument("--force", action="store_true", help="replace read-only sheets too")
    _sheet_options(an)

    ex = commands.add_parser("export", help="write a report, a table or LaTeX macros",
                             description="Export the evaluated sheet: a Markdown report, CSV "
                                         "(name,value,sigma,unit), JSON (as eval), or LaTeX "
                                         "macros (siunitx) for papers.")
    ex.add_argument("file", metavar="FILE", help="the sheet (.sheet)")
    ex.add_argument("--to", required=True, choices=["md", "csv", "json", "tex"],
                    help="the format")
    ex.add_argument("-o", dest="output", metavar="OUT", help="write to OUT (default: stdout)")
    ex.add_argument("--force", action="store_true", help="replace a read-only OUT too")
    ex.add_argument("--plots", metavar="DIR",
                    help="also draw the sheet's plots into DIR (see `relsheet plot`)")
    ex.add_argument("--plot-format", dest="plot_format", choices=["png", "svg", "pdf"],
                    default="png", help="the image format of --plots (default png)")
    ex.add_argument("--tables", metavar="DIR",
                    help="also write each table of the sheet as DIR/NAME.csv")
    _sheet_options(ex)

    pl = commands.add_parser("plot", help="draw the sheet's plots into image files",
                             description="Draw each `plot` of the sheet (or the ones named) "
                                         "with matplotlib into DIR/NAME.png (or .svg, .pdf); "
                                         "files are replaced atomically.")
    pl.add_argument("file", metavar="FILE", help="the sheet (.sheet)")
    pl.add_argument("names", metavar="NAME", nargs="*", help="only these plots")
    pl.add_argument("-o", dest="output", metavar="DIR", default=".",
                    help="the folder to write into (default: the current folder)")
    pl.add_argument("--format", choices=["png", "svg", "pdf"], default="png",
                    help="the image format (default png)")
    pl.add_argument("--force", action="store_true", help="replace read-only files too")
    _sheet_options(pl)

    dp = commands.add_parser("deps", help="show which cells a cell uses, or which use it",
                             description="Print the cells CELL depends on as a tree (all cells "
                                         "and their direct inputs without CELL); --users turns "
                                         "it around.")
    dp.add_argument("file", metavar="FILE", help="the sheet (.sheet)")
    dp.add_argument("cell", metavar="CELL", nargs="?", help="a cell name")
    dp.add_argument("--users", action="store_true", help="the cells that use CELL instead")

    df = commands.add_parser("diff", help="compare two evaluations",
                             description="Compare the results of two evaluations: the sheet "
                                         "under two constant sets, at a git revision, or "
                                         "against another file. Only changed cells unless --all.")
    df.add_argument("file", metavar="FILE", help="the sheet (.sheet)")
    df.add_argument("other", metavar="OTHER_FILE", nargs="?", help="a second sheet")
    df.add_argument("--constants", metavar="SETS", help="old constant sets, e.g. codata2014")
    df.add_argument("--against", metavar="SETS", help="new constant sets, e.g. codata2018")
    df.add_argument("--rev", metavar="GITREV", help="compare with the file at a git revision")
    df.add_argument("--all", action="store_true", help="show unchanged cells too")

    wt = commands.add_parser("watch", help="re-evaluate on every save",
                             description="Re-evaluate the sheet whenever it is saved and print "
                                         "the cells that changed. Ctrl-C stops.")
    wt.add_argument("file", metavar="FILE", help="the sheet (.sheet)")
    wt.add_argument("--interval", type=float, default=0.5, metavar="SECONDS",
                    help="how often to look at the file (default 0.5 s)")

    un = commands.add_parser("units", help="look up units by name",
                             description="List the units whose names contain QUERY (all the "
                                         "trade's extras without QUERY), with their physical "
                                         "type and value in SI units.")
    un.add_argument("query", metavar="QUERY", nargs="?", help="part of a unit name")

    rp = commands.add_parser("repl", help="what-if questions on a live sheet",
                             description="An interactive prompt on a sheet: expressions show "
                                         "their value, `name = expr` shows what changes.")
    rp.add_argument("file", metavar="FILE", nargs="?", help="the sheet (.sheet)")

    mp = commands.add_parser("map", help="apply a sheet to every row of a large table",
                             description="Stream a table (Parquet file or folder, ECSV, FITS, "
                                         "CSV) through a sheet whose cell NAME reads "
                                         "read_table(...), chunk by chunk, and write the chosen "
                                         "cells as Parquet columns (σ as NAME_sigma, units in "
                                         "the metadata).")
    mp.add_argument("sheet", metavar="SHEET", help="the sheet (.sheet)")
    mp.add_argument("--table", required=True, metavar="NAME=PATH",
                    help="the table cell NAME (read with read_table) and the table to stream")
    mp.add_argument("--cells", required=True, metavar="CELL[,CELL…]",
                    help="the cells to write as columns")
    mp.add_argument("-o", dest="output", required=True, metavar="OUT",
                    help="the Parquet file to write (a folder with --engine dask)")
    mp.add_argument("--chunk", type=int, default=100_000, metavar="ROWS",
                    help="rows evaluated at once (default 100,000; memory grows with it)")
    mp.add_argument("--engine", choices=["local", "dask"], default="local",
                    help="local (default) or dask (pip install 'relsheet[cluster]')")
    mp.add_argument("--scheduler", metavar="ADDRESS",
                    help="a dask scheduler such as tcp://host:8786 (default: a local cluster "
                         "of 2 worker threads)")
    mp.add_argument("--force", action="store_true", help="replace OUT if it exists")
    _sheet_options(mp)

    fn = commands.add_parser("funcs", help="list the functions, or show one",
                             description="List the functions sheets can call, or show one's "
                                         "arguments, formula, validity, PPN dependence and source.")
    fn.add_argument("names", metavar="NAME", nargs="*", help="function names")
    fn.add_argument("--sheet", metavar="FILE",
                    help="also list the functions a sheet defines (`name(x, y) = …`)")

    commands.add_parser("lsp", help="a language server for editors (LSP over stdio)",
                        description="Serve the Language Server Protocol on stdin and stdout: "
                                    "diagnostics, values as inlay hints, hover, completion, "
                                    "definitions, references, renaming. An editor starts it.")
    return parser


def main(argv: list[str] | None = None) -> int:
    args_list = sys.argv[1:] if argv is None else argv
    debug = "--debug" in args_list
    try:
        parser = build_parser()
        args, extra = parser.parse_known_args(args_list)
        if extra and args.command == "plot" and not any(e.startswith("-") for e in extra):
            # plot names after the options too (`plot FILE -o DIR NAME`): argparse gives
            # the names list only the words before the first option
            args.names = [*args.names, *extra]
        elif extra:
            parser.parse_args(args_list)   # argparse's own message for what it does not know
        if args.command is None:
            parser.print_help(sys.stderr)
            return EXIT_USAGE
        return _COMMANDS[args.command](args)
    except UsageError as err:
        print(f"relsheet: {err.message}", file=sys.stderr)
        if err.hint:
            print(f"  hint: {err.hint}", file=sys.stderr)
        return EXIT_USAGE
    except InternalError as err:
        print(err.render(), file=sys.stderr)
        if debug and err.__cause__ is not None:
            traceback.print_exception(err.__cause__, file=sys.stderr)
        return EXIT_INTERNAL
    except SheetError as err:
        print(err.render(), file=sys.stderr)
        return EXIT_SHEET_ERRORS
    except KeyboardInterrupt:
        return 130
    except BrokenPipeError:
        return EXIT_OK
    except Exception as exc:  # a bug of ours
        if debug:
            traceback.print_exc()
        else:
            print(f"relsheet: internal error: {type(exc).__name__}: {exc}\n"
                  f"  hint: {InternalError.REPORT}; --debug shows the traceback",
                  file=sys.stderr)
        return EXIT_INTERNAL


def _report_warnings(sheet) -> None:
    for cell in sheet.cells:
        for text in cell.warnings:
            span = cell.definition.name_span
            print(f"{cell.source.label}:{span.line}:{span.column}: warning: `{cell.name}`: {text}",
                  file=sys.stderr)


def _exit_code(sheet, monte_carlo: dict | None = None, ok: int = EXIT_OK) -> int:
    """70 when a bug of ours showed up anywhere in the evaluation, else 2 for a sheet with
    errors, else ``ok``."""
    if sheet.internal_errors() or any(isinstance(v, InternalError)
                                      for v in (monte_carlo or {}).values()):
        return EXIT_INTERNAL
    return ok if sheet.ok and not _sampling_errors(sheet, monte_carlo) else EXIT_SHEET_ERRORS


def _sampling_errors(sheet, monte_carlo: dict | None) -> list[SheetError]:
    """Errors of cells that fail under Monte Carlo only (a solve whose samples do not
    converge), not those of cells that failed anyway or only because an input failed."""
    from ..errors import InputFailedError

    found = []
    for name, value in (monte_carlo or {}).items():
        if isinstance(value, SheetError) and not isinstance(value, InputFailedError) \
                and name in sheet and sheet.cell(name).error is None:
            found.append(value)
    return found


def _report(errors: list[SheetError], debug: bool) -> None:
    for err in errors:
        print(err.render(), file=sys.stderr)
        if debug and err.__cause__ is not None:
            traceback.print_exception(err.__cause__, file=sys.stderr)
    if errors:
        count = len(errors)
        print(f"{count} error{'s' if count != 1 else ''}", file=sys.stderr)


def _apply_overrides(sheet, overrides: list[str]) -> None:
    from ..language.scope import PPN_PARAMETERS, ppn_cell
    from ..physics.units import close_matches, did_you_mean

    for item in overrides:
        name, sep, expr = item.partition("=")
        name = name.strip()
        if not sep or not name:
            raise UsageError(f"--set takes NAME=EXPR, got `{item}`", hint="for example --set a=2 AU")
        if not sheet.can_set(name) and name not in [ppn_cell(p) for p in PPN_PARAMETERS]:
            raise UsageError(f"--set: the sheet has no cell `{name}`",
                             hint=did_you_mean(close_matches(name, sheet.names(imported=True))))
        sheet.set(name, expr.strip(), label=f"--set {name}")


def cmd_eval(args) -> int:
    from ..engine.sheet import Sheet

    if not 1 <= args.digits <= 17:
        raise UsageError(f"--digits must be between 1 and 17, got {args.digits}")
    if args.mc is not None and not 2 <= args.mc <= 10_000_000:
        raise UsageError(f"--mc takes between 2 and 10,000,000 samples, got {args.mc}")
    if args.seed is not None and args.mc is None:
        raise UsageError("--seed goes with --mc")
    if args.rows is not None and args.rows < 1:
        raise UsageError(f"--rows takes a number of rows of 1 or more, got {args.rows}")
    sheet = Sheet.load(args.file, root=args.root)
    _apply_overrides(sheet, args.overrides)
    if args.sigma_budget is not None and args.sigma_budget not in sheet:
        from ..physics.units import close_matches, did_you_mean

        raise UsageError(f"--sigma-budget: the sheet has no cell `{args.sigma_budget}`",
                         hint=did_you_mean(close_matches(args.sigma_budget, sheet.names())))
    monte_carlo = None
    if args.mc is not None:
        progress = _Progress()
        try:
            # text and JSON show every cell's 16/50/84 % points
            monte_carlo = sheet.monte_carlo(args.mc, args.seed, progress,
                                            points=args.format in ("text", "json"))
        finally:
            progress.close()
    if args.format == "json":
        from ..outputs.export import json_pieces, sheet_record

        for piece in json_pieces(sheet_record(sheet, monte_carlo, args.mc)):
            sys.stdout.write(piece)
        sys.stdout.write("\n")
    elif args.format in ("csv", "md"):
        if monte_carlo is not None:
            raise UsageError("--mc prints as text or json", hint="add --format json")
        from ..outputs.export import to_csv, to_markdown

        sys.stdout.write((to_csv if args.format == "csv" else to_markdown)(sheet))
    elif args.sigma_budget is not None:
        from ..outputs.report import render_sigma_budget

        print(render_sigma_budget(sheet, args.sigma_budget, args.digits).lstrip("\n"))
    else:
        from ..outputs.report import render_text

        print(render_text(sheet, args.digits, monte_carlo, args.mc, rows_shown=args.rows))
    _report_warnings(sheet)
    _report(sheet.all_errors() + _sampling_errors(sheet, monte_carlo), args.debug)
    return _exit_code(sheet, monte_carlo)


class _Progress:
    """A progress bar on a terminal, shown only once a Monte Carlo run passes one second."""

    def __init__(self) -> None:
        import time

        self._clock = time.monotonic
        self._start = self._clock()
        self._bar: Any = None       # a prompt_toolkit ProgressBar once shown
        self._counter: Any = None   # its counter
        self._total: int | None = None

    def __call__(self, done: int, total: int) -> None:
        if self._bar is None:
            if self._clock() - self._start < 1.0 or not sys.stderr.isatty():
                return
            from prompt_toolkit.shortcuts import ProgressBar

            self._bar = ProgressBar(title="Monte Carlo", file=sys.stderr)
            self._bar.__enter__()
        if total != self._total:
            self._counter = self._bar(label="samples" if total > 1000 else "cells", total=total)
            self._total = total
        self._counter.items_completed = done
        self._bar.invalidate()

    def close(self) -> None:
        if self._bar is not None:
            self._bar.__exit__(None, None, None)


def cmd_verify(args) -> int:
    from ..engine.sheet import Sheet
    from ..outputs.format import check_detail

    passed = failed = 0
    broken = internal = False
    for path in args.files:
        try:
            sheet = Sheet.load(path, root=args.root)
        except SheetError as err:
            print(err.render(), file=sys.stderr)
            broken = True
            continue
        errors = sheet.all_errors()
        internal = internal or bool(sheet.internal_errors())
        if errors:
            broken = True
            _report(errors, args.debug)
        for result in sheet.checks:
            if result.passed:
                passed += 1
                continue
            failed += 1
            print(f"{path}:{result.line}: FAILED {result.text}")
            print(f"    {check_detail(result)}")
        if not sheet.checks:
            print(f"{path}: no checks")
    print(f"{passed} passed, {failed} failed")
    if internal:
        return EXIT_INTERNAL
    if broken:
        return EXIT_SHEET_ERRORS
    return EXIT_CHECK_FAILED if failed else EXIT_OK


def cmd_annotate(args) -> int:
    from ..outputs.annotate import annotate_file

    if not 1 <= args.digits <= 17:
        raise UsageError(f"--digits must be between 1 and 17, got {args.digits}")
    codes = []
    for path in args.files:
        try:
            sheet, changed = annotate_file(path, args.digits, stale_only=args.stale,
                                           root=args.root, force=args.force)
        except InternalError:
            raise
        except SheetError as err:
            print(err.render(), file=sys.stderr)
            codes.append(EXIT_SHEET_ERRORS)
            continue
        _report(sheet.all_errors(), args.debug)
        code = _exit_code(sheet)
        if args.stale and changed:
            lines = ", ".join(map(str, changed[:12])) + (", …" if len(changed) > 12 else "")
            print(f"{path}: markers out of date on line{'s' if len(changed) > 1 else ''} "
                  f"{lines}; run `relsheet annotate {path}`")
            code = max(code, EXIT_CHECK_FAILED) if code != EXIT_OK else EXIT_CHECK_FAILED
        elif changed and not args.stale:
            print(f"{path}: {len(changed)} marker{'s' if len(changed) != 1 else ''} written")
        else:
            print(f"{path}: markers up to date")
        codes.append(code)
    return max(codes, key=_severity)


def _severity(code: int) -> int:
    """Which exit code wins when several sheets end differently: a bug, then errors, then a
    failed check or stale markers."""
    return {EXIT_INTERNAL: 3, EXIT_SHEET_ERRORS: 2, EXIT_CHECK_FAILED: 1}.get(code, 0)


def cmd_export(args) -> int:
    from ..engine.sheet import Sheet
    from ..files import atomic_write
    from ..outputs import export

    sheet = Sheet.load(args.file, root=args.root)
    writer = {"md": export.to_markdown, "csv": export.to_csv, "json": export.to_json,
              "tex": export.to_tex}[args.to]
    text = writer(sheet)
    if not text.endswith("\n"):
        text += "\n"
    if args.output:
        atomic_write(args.output, text.encode("utf-8"), force=args.force)
    else:
        sys.stdout.write(text)
    if args.tables:
        from pathlib import Path

        folder = Path(args.tables)
        folder.mkdir(parents=True, exist_ok=True)
        for name, table in export.table_csv_files(sheet).items():
            atomic_write(folder / name, table.encode("utf-8"), force=args.force)
            print(folder / name, file=sys.stderr)
    if args.plots:
        for path in _draw_plots(sheet, [], args.plots, args.plot_format, args.force):
            print(path, file=sys.stderr)
    _report(sheet.all_errors(), args.debug)
    return _exit_code(sheet)


def _draw_plots(sheet, names: list[str], folder: str, fmt: str, force: bool) -> list:
    """Draw the sheet's plots (those named, or all) into ``folder``; the paths written."""
    plots = getattr(sheet, "plots", None)
    specs = list(plots()) if callable(plots) else []
    if names:
        known = {spec.name: spec for spec in specs}
        for name in names:
            if name not in known:
                from ..physics.units import close_matches, did_you_mean

                raise UsageError(f"the sheet has no plot `{name}`",
                                 hint=did_you_mean(close_matches(name, list(known)))
                                 or (f"its plots are {', '.join(known)}" if known
                                     else "it has no `plot` lines"))
        specs = [known[name] for name in names]
    if not specs:
        print(f"{sheet.source.label}: no plots to draw", file=sys.stderr)
        return []
    from pathlib import Path

    from ..outputs.plot import write_plots

    target = Path(folder)
    if target.exists() and not target.is_dir():
        raise UsageError(f"-o {folder}: a file of that name is there; -o names a folder",
                         hint="give a folder for the figures (it is made if missing)")
    try:
        return write_plots(specs, folder, fmt, force=force)
    except OSError as exc:
        raise UsageError(f"cannot write the figures into {folder}: {exc.strerror or exc}",
                         hint="give a folder you can write to") from None


def cmd_plot(args) -> int:
    from ..engine.sheet import Sheet

    sheet = Sheet.load(args.file, root=args.root)
    for path in _draw_plots(sheet, args.names, args.output, args.format, args.force):
        print(path)
    _report(sheet.all_errors(), args.debug)
    return _exit_code(sheet)


def cmd_deps(args) -> int:
    from ..engine.sheet import Sheet
    from ..outputs.compare import dependency_table, dependency_tree

    sheet = Sheet.load(args.file)
    if args.cell is None:
        print(dependency_table(sheet, args.users))
        return EXIT_OK
    if args.cell not in sheet:
        from ..physics.units import close_matches, did_you_mean

        raise UsageError(f"the sheet has no cell `{args.cell}`",
                         hint=did_you_mean(close_matches(args.cell, sheet.names())))
    print(dependency_tree(sheet, args.cell, args.users))
    return EXIT_OK


def cmd_diff(args) -> int:
    from ..engine.sheet import Sheet
    from ..outputs.compare import diff, sheet_at_revision

    modes = sum(x is not None for x in (args.other, args.rev)) + bool(args.constants or args.against)
    if modes != 1:
        raise UsageError("diff compares one way: OTHER_FILE, --rev GITREV, or "
                         "--constants SETS --against SETS")
    if args.constants or args.against:
        if not (args.constants and args.against):
            raise UsageError("--constants and --against go together")
        old = Sheet.load(args.file, constants=args.constants.replace(",", " ").split())
        new = Sheet.load(args.file, constants=args.against.replace(",", " ").split())
        labels = (args.constants, args.against)
    elif args.rev is not None:
        old = sheet_at_revision(args.file, args.rev)
        new = Sheet.load(args.file)
        labels = (args.rev, "working copy")
    else:
        old, new = Sheet.load(args.file), Sheet.load(args.other)
        labels = (args.file, args.other)
    print(diff(old, new, args.all, labels))
    _report([*old.errors, *new.errors], False)
    return EXIT_OK if not (old.errors or new.errors) else EXIT_SHEET_ERRORS


def cmd_watch(args) -> int:
    import time
    from pathlib import Path

    from ..engine.sheet import Sheet
    from ..outputs.compare import diff
    from ..outputs.report import render_text

    gc.enable()  # a long session (see `run`)
    path = Path(args.file)
    sheet = Sheet.load(path)
    print(render_text(sheet, 6), flush=True)
    _report(sheet.all_errors(), False)

    def stamp():
        try:
            info = path.stat()
            return info.st_mtime_ns, info.st_size
        except OSError:
            return None

    seen = stamp()
    while True:
        time.sleep(max(0.05, args.interval))
        now = stamp()
        if now == seen or now is None:
            continue
        seen = now
        try:
            fresh = Sheet.load(path)
        except SheetError as err:
            print(err.render(), file=sys.stderr, flush=True)
            continue
        print(f"\n{time.strftime('%H:%M:%S')}  {path}", flush=True)
        print(diff(sheet, fresh, labels=("before", "after")), flush=True)
        _report(fresh.all_errors(), False)
        sheet = fresh


def cmd_units(args) -> int:
    from ..outputs.report import render_units
    from ..physics.constants import default_selection
    from ..physics.units import REFUSED_UNITS, unit_table

    print(render_units(unit_table(default_selection()), args.query, REFUSED_UNITS))
    return EXIT_OK


def cmd_repl(args) -> int:
    from .repl import run

    gc.enable()  # a long session (see `run`)
    return run(args.file, debug=getattr(args, "debug", False))


def cmd_map(args) -> int:
    from .map import cmd_map as run_map

    gc.enable()  # a long run (see `run`): chunk after chunk must not pile up cycles
    return run_map(args)


def cmd_funcs(args) -> int:
    from ..engine.sheet import Sheet
    from ..physics.catalog import entries, listing

    own = ""
    if args.sheet:
        sheet = Sheet.load(args.sheet)
        own = sheet_functions(sheet, [n for n in args.names if n in sheet.functions])
        if args.names:
            wanted = [n for n in args.names if n not in sheet.functions]
            mine = [n for n in args.names if n in sheet.functions]
            print((own if mine else "") + ("\n\n" if mine and wanted else "")
                  + (entries(wanted) if wanted else ""))
            return EXIT_OK
    print((own + "\n\n" if own else "") + (entries(args.names) if args.names else listing()))
    return EXIT_OK


def sheet_functions(sheet, names: list[str] | None = None) -> str:
    """The functions a sheet defines (those of ``names``, or all), as written, with their
    lines."""
    if not sheet.functions:
        return f"{sheet.source.label} defines no functions"
    lines = [f"Functions of {sheet.source.label}"]
    for function in sheet.functions.values():
        if names and function.name not in names:
            continue
        params = ", ".join(name for name, _ in function.params)
        body = sheet.source.between(function.body.span)
        lines.append(f"  {function.name}({params}) = {body}    (line {function.span.line})")
    return "\n".join(lines)

def cmd_lsp(args) -> int:
    from .lsp import serve

    gc.enable()  # a long session (see `run`)
    return serve()


_COMMANDS = {"eval": cmd_eval, "verify": cmd_verify, "annotate": cmd_annotate,
             "export": cmd_export, "deps": cmd_deps, "diff": cmd_diff, "watch": cmd_watch,
             "units": cmd_units, "repl": cmd_repl, "funcs": cmd_funcs, "lsp": cmd_lsp,
             "plot": cmd_plot, "map": cmd_map}


def run() -> None:
    """Console-script entry point.

    Leaves through ``os._exit`` once the output is flushed: tearing down astropy's
    modules and the sheet's objects at interpreter exit costs a third of a short
    run and does nothing a finished command needs. For the same reason the cyclic
    garbage collector is off (its passes over astropy's import-time objects and the
    sheet cost a tenth of a run and free nothing a command would reuse); the
    long-running commands (`watch`, `repl`) turn it back on.
    """
    gc.disable()
    code = main()
    try:
        sys.stdout.flush()
        sys.stderr.flush()
    except BrokenPipeError:
        pass
    os._exit(code)
