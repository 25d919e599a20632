"""Run fuzz inputs through every output path of relsheet, in worker processes with limits.

    python -m fuzz.run --inputs 2000 --seed 1 --jobs 2 [--timeout 2] [--memory 2048]

Each input (:mod:`fuzz.generate`) goes to one of ``--jobs`` long-lived worker processes,
forked from a parent that has imported relsheet once. A worker writes the input's files into
a fresh folder and runs it through the public entry points only:
``calc.interfaces.cli.main([...])`` in-process with stdout and stderr captured (``eval`` as
text, JSON, CSV and Markdown, ``eval --mc``, ``verify``, ``export --to md/csv/json/tex`` to
stdout and to a file, ``annotate`` and its round trip, ``deps``, ``diff`` against itself) and
the prompt's ``calc.interfaces.repl.Session`` with the input's lines.

Limits: every command and every prompt line runs under a CPU-time limit (``--timeout``,
ITIMER_PROF, so a busy shared machine does not fake a hang) and a wall-clock limit
(ITIMER_REAL, ``WALL_FACTOR`` times longer, for work blocked on something); the worker's
address space is capped with RLIMIT_AS (``--memory`` MB above what it maps at start). A worker
that dies, or hangs where no signal reaches it, is killed by the parent's watchdog and
replaced; the input is recorded.

Findings: exit code 70; "internal error" anywhere in the output or in a cell's error; a
Python traceback; a command over the time limit; a MemoryError or a dead worker; an
unexpected exit code; output that is not valid JSON, or a JSON cell with neither value nor
error; ``export --to json`` differing from ``eval --format json``; ``diff`` of a sheet
against itself showing changes; annotate changing bytes outside its markers, writing
invalid UTF-8, not being idempotent, leaving stale markers, or changing what the sheet
evaluates to; temporary files left behind; an exception ending a prompt session.

Findings are grouped into classes (the exception type and the innermost frame in ``calc/``,
or the symptom), each class's smallest input is reduced by deleting lines while the class
still reproduces, confirmed in a fresh worker, and written to ``report.md`` and
``findings.json`` in ``--out``.
"""

from __future__ import annotations

import argparse
import contextlib
import io
import json
import os
import re
import resource
import shutil
import signal
import sys
import tempfile
import time
import traceback
from collections.abc import Callable, Generator
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

if __package__ in (None, ""):  # run as a script: python fuzz/run.py
    sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from fuzz.generate import FuzzInput, generate  # noqa: E402

REPO = Path(__file__).resolve().parent.parent
MAIN = "main.sheet"

#: Every output path, in the order a worker runs them (read-only ones first, the prompt last:
#: annotate and `:save` change the file).
STEPS = ("eval", "eval-json", "eval-csv", "eval-md", "eval-mc", "verify", "export-md",
         "export-csv", "export-json", "export-tex", "export-file", "deps", "diff", "annotate",
         "repl")
#: Run for every input.
CORE_STEPS = ("eval", "eval-json", "annotate", "repl")
#: Without --all-paths each input runs two of these, chosen by its index, so that every
#: path gets an equal share of the inputs.
ROTATING_STEPS = ("eval-csv", "eval-md", "verify", "export-md", "export-csv", "export-json",
                  "export-tex", "export-file", "deps", "diff")
#: The wall-clock limit of one command is this many times the CPU-time limit.
WALL_FACTOR = 4.0
#: Seconds the parent waits beyond a worker's own wall-clock limit before killing it.
GRACE = 5.0
#: A worker is replaced after this many inputs (state that builds up over many sheets would
#: make findings depend on what ran before).
RECYCLE = 400
#: Symptoms without a Python exception: their class is the symptom and the path.
SYMPTOMS = ("unexpected exit code", "stray Python warning", "invalid JSON",
            "JSON cell with neither value nor error",
            "export --to json differs from eval --format json", "diff against itself",
            "annotate changed bytes outside its markers", "annotate wrote invalid UTF-8",
            "annotate not idempotent", "stale markers right after annotate",
            "annotated sheet evaluates differently", "file left behind",
            "export -o file differs from stdout", "export -o file mode ignores the umask")


def plan(inp: FuzzInput, all_paths: bool = False, rotate: int = 2) -> list[str]:
    """The steps an input runs: all of them, or the core ones and ``rotate`` (1 or 2) of the
    others, chosen by the input's index so that each gets an equal share."""
    if all_paths:
        chosen = set(STEPS)
    else:
        n = len(ROTATING_STEPS)
        first = inp.index % n
        second = (first + 1 + (inp.index // n) % (n - 1)) % n
        chosen = set(CORE_STEPS) | {ROTATING_STEPS[i] for i in (first, second)[:max(1, rotate)]}
    if inp.mc:
        chosen.add("eval-mc")
    else:
        chosen.discard("eval-mc")
    return [s for s in STEPS if s in chosen]


# ---------------------------------------------------------------------------------------
# findings

@dataclass
class Finding:
    """One observation of a defect on one input."""

    kind: str               # "exit 70", "internal error", "hang", a symptom, …
    step: str               # the output path (a name in STEPS)
    command: str            # what ran: `relsheet eval main.sheet`, `repl> x = 1`, …
    exc_type: str = ""
    frame: str = ""         # innermost frame in calc/: `calc/outputs/format.py:71 in f`
    detail: str = ""        # the message, one line
    output: str = ""        # an excerpt of what was printed
    seconds: float = 0.0

    @property
    def category(self) -> str:
        if self.kind in ("hang", "hang (killed)"):
            return "hang"
        if self.kind == "worker died":
            return "worker died"
        if self.exc_type == "MemoryError":
            return "memory"
        if self.kind in SYMPTOMS:
            return self.kind
        return "exception"

    def key(self) -> str:
        """The crash class: the exception type and the innermost calc/ frame, or the symptom
        (with the path, since one symptom on two paths is two defects)."""
        category = self.category
        if category == "hang":
            frame = self.frame.split(":", 1)[0] + " in " + self.frame.rsplit(" in ", 1)[-1] \
                if self.frame else self.step
            return f"hang | {frame}"
        if category == "worker died":
            return f"worker died | {self.detail} | {self.step}"
        if category in ("exception", "memory"):
            return f"{category} | {self.exc_type or '?'} | {self.frame or self.kind + ' ' + self.step}"
        if category == "unexpected exit code":
            return f"{category} | {self.detail} | {self.step}"
        if category == "stray Python warning":
            return f"{category} | {self.exc_type} | {self.frame}"
        return f"{category} | {self.step}"


# ---------------------------------------------------------------------------------------
# the worker

class StepTimeout(BaseException):
    """Raised by the interval timers; a BaseException so that no `except Exception` in the
    code under test swallows it."""


def _on_timer(signum, frame) -> None:
    raise StepTimeout("cpu" if signum == signal.SIGPROF else "wall")


_CALC_DIR: Path | None = None


def _calc_dir() -> Path:
    global _CALC_DIR
    if _CALC_DIR is None:
        import calc

        _CALC_DIR = Path(calc.__file__).resolve().parent
    return _CALC_DIR


def _frame_text(filename: str, line: int | None, name: str) -> str | None:
    """`calc/x/y.py:12 in f` for a frame in calc/, else None."""
    try:
        relative = Path(filename).resolve().relative_to(_calc_dir().parent)
    except ValueError:
        return None
    if not relative.parts or relative.parts[0] != "calc":
        return None
    return f"{relative.as_posix()}:{line} in {name}"


def innermost_calc_frame(tb) -> str:
    for frame in reversed(traceback.extract_tb(tb)):
        text = _frame_text(frame.filename, frame.lineno, frame.name)
        if text:
            return text
    return ""


_FRAME_LINE = re.compile(r'^\s*File "(.+)", line (\d+), in (.+)$')
_WARNING_LINE = re.compile(r"^(\S.*?):(\d+): (\w*Warning): (.*)$", re.M)


_CHAINED = ("During handling of the above exception, another exception occurred:",
            "The above exception was the direct cause of the following exception:")


def parse_tracebacks(text: str) -> list[tuple[str, str, str]]:
    """(exception type, innermost calc/ frame, message) of every exception printed in text.

    A chain (`During handling of the above exception…`, `The above exception was the direct
    cause…`) counts once, as its last exception; its frame is the innermost calc/ frame of
    that exception's traceback, or else of the nearest exception before it in the chain."""
    found: list[tuple[str, str, str]] = []
    lines = text.splitlines()
    i = 0
    chain_frame = ""
    while i < len(lines):
        if lines[i].strip() != "Traceback (most recent call last):":
            i += 1
            continue
        frame = ""
        i += 1
        while i < len(lines) and (lines[i].startswith(" ") or not lines[i].strip()):
            m = _FRAME_LINE.match(lines[i])
            if m:
                shown = _frame_text(m.group(1), int(m.group(2)), m.group(3))
                if shown:
                    frame = shown
            i += 1
        if i >= len(lines):
            break
        head, _, message = lines[i].partition(":")
        exc_type = head.strip().rsplit(".", 1)[-1]
        frame = frame or chain_frame
        following = next((line.strip() for line in lines[i + 1:] if line.strip()), "")
        if following in _CHAINED:
            chain_frame = frame
        else:
            found.append((exc_type, frame, message.strip()[:300]))
            chain_frame = ""
        i += 1
    return found


def _reject_constant(name: str):
    raise ValueError(f"{name} is not JSON")


@dataclass
class Options:
    timeout: float = 2.0
    memory_mb: int = 2048
    workdir_base: str = ""
    all_paths: bool = False
    rotate: int = 2
    #: seconds the parent waits beyond a command's wall-clock limit before killing the worker
    grace: float = GRACE
    #: called in each worker once it has started (tests inject faults with it)
    setup: Callable[[], None] | None = None
    #: build the command line's argparse parser once per worker (see _cache_parser)
    cache_parser: bool = True


class _Run:
    """One input in a worker: its folder, the findings so far, outputs to compare."""

    def __init__(self, inp: FuzzInput, folder: Path, timeout: float) -> None:
        self.inp = inp
        self.folder = folder
        self.timeout = timeout
        self.findings: list[Finding] = []
        self.outputs: dict[str, str] = {}
        self.step = ""
        self.command = ""
        self.status = None          # shared array: [operation start (monotonic), step number]
        self.allowed: set[str] = set()
        self.input_text = (inp.main + b"".join(v or b"" for v in inp.files.values())) \
            .decode("utf-8", errors="replace") + "\n".join(inp.repl)
        self.cpu: dict[str, float] = {}

    # -- limits
    @contextlib.contextmanager
    def limited(self, timeout: float | None = None):
        limit = timeout or self.timeout
        if self.status is not None:
            self.status[0] = time.monotonic()
            self.status[2] = limit * WALL_FACTOR
        signal.setitimer(signal.ITIMER_PROF, limit)
        signal.setitimer(signal.ITIMER_REAL, limit * WALL_FACTOR)
        try:
            yield
        finally:
            signal.setitimer(signal.ITIMER_PROF, 0)
            signal.setitimer(signal.ITIMER_REAL, 0)
            if self.status is not None:
                self.status[0] = 0.0

    def add(self, kind: str, **fields: Any) -> Finding:
        finding = Finding(kind, self.step, self.command, **fields)
        self.findings.append(finding)
        return finding

    # -- the command line
    def cli(self, argv: list[str], expect: set[int], check_text: bool = True
            ) -> tuple[int, str, str]:
        from calc.interfaces import cli

        self.command = "relsheet " + " ".join(argv)
        out, err = io.StringIO(), io.StringIO()
        with self.limited(), contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            rc = cli.main(list(argv))
        stdout, stderr = out.getvalue(), err.getvalue()
        if check_text:
            self.check_output(argv, rc, stdout, stderr, expect)
        return rc, stdout, stderr

    def check_output(self, argv: list[str], rc: int, stdout: str, stderr: str,
                     expect: set[int]) -> None:
        text = stdout + "\n" + stderr
        excerpt = _excerpt(stderr if stderr.strip() else stdout)
        internal = "internal error" in text and "internal error" not in self.input_text
        if rc == 70 or internal:
            kind = "exit 70" if rc == 70 else "internal error"
            causes = self.diagnose(argv)
            if not causes:
                message = next((line for line in text.splitlines() if "internal error" in line), "")
                causes = [(_type_in(message), "", message.strip()[:300])]
            for exc_type, frame, message in causes:
                self.add(kind, exc_type=exc_type, frame=frame, detail=message, output=excerpt)
        elif rc not in expect:
            self.add("unexpected exit code", detail=f"exit {rc}", output=excerpt)
        if "Traceback (most recent call last)" in text:
            for exc_type, frame, message in parse_tracebacks(text) or [("", "", "")]:
                self.add("traceback in output", exc_type=exc_type, frame=frame, detail=message,
                         output=excerpt)
        self.check_warnings(stderr)

    def check_warnings(self, stderr: str) -> None:
        """Python warnings printed on stderr (the code under test should turn floating-point
        trouble into its own errors, never print stray warnings)."""
        for m in _WARNING_LINE.finditer(stderr):
            where = _frame_text(m.group(1), int(m.group(2)), "") or \
                f"{Path(m.group(1)).name}:{m.group(2)}"
            self.add("stray Python warning", exc_type=m.group(3),
                     frame=where.removesuffix(" in "), detail=m.group(4)[:300])

    def diagnose(self, argv: list[str]) -> list[tuple[str, str, str]]:
        """The tracebacks behind an internal error: the same command again with --debug (one
        that writes nothing), then `eval --debug`, which prints the cause of a cell's internal
        error."""
        command = argv[0]
        if command == "annotate":
            again = ["annotate", "--stale", MAIN]
        elif command == "export":
            again = [a for a in argv if a not in ("-o", "out.tex")]
        elif command in ("deps", "diff", "verify"):
            again = ["eval", argv[1] if len(argv) > 1 else MAIN]
        else:
            again = list(argv)
        found: list[tuple[str, str, str]] = []
        command = self.command
        try:
            for attempt in (again, ["eval", again[1] if len(again) > 1 else MAIN]):
                _, stdout, stderr = self.cli(["--debug", *attempt], set(), check_text=False)
                found = parse_tracebacks(stdout + "\n" + stderr)
                if found:
                    break
        finally:
            self.command = command
        return list(dict.fromkeys(found))

    # -- files
    def listing(self) -> set[str]:
        names = set()
        for root, dirs, files in os.walk(self.folder):
            for name in files + dirs:
                names.add(os.path.relpath(os.path.join(root, name), self.folder))
        return names


def _type_in(message: str) -> str:
    m = re.search(r"internal error[^:]*:\s*([A-Za-z_][\w.]*)", message)
    return m.group(1).rsplit(".", 1)[-1] if m else ""


def _excerpt(text: str, limit: int = 1500) -> str:
    return text if len(text) <= limit else text[:limit] + f"\n… ({len(text):,} characters)"


# -- the steps

def _step_eval(run: _Run) -> None:
    run.cli(["eval", MAIN], {0, 2})


def _step_eval_json(run: _Run) -> None:
    rc, stdout, _ = run.cli(["eval", MAIN, "--format", "json"], {0, 2})
    run.outputs["json"] = stdout
    if stdout.strip():
        _check_json(run, stdout)


def _check_json(run: _Run, text: str) -> dict | None:
    try:
        doc = json.loads(text, parse_constant=_reject_constant)
    except ValueError as exc:
        run.add("invalid JSON", detail=str(exc)[:300], output=_excerpt(text))
        return None
    for cell in doc.get("cells", []) if isinstance(doc, dict) else []:
        if isinstance(cell, dict) and cell.get("value") is None and cell.get("error") is None:
            run.add("JSON cell with neither value nor error", detail=f"cell `{cell.get('name')}`",
                    output=_excerpt(json.dumps(cell, ensure_ascii=False)))
            break
    return doc


def _step_eval_csv(run: _Run) -> None:
    run.cli(["eval", MAIN, "--format", "csv"], {0, 2})


def _step_eval_md(run: _Run) -> None:
    run.cli(["eval", MAIN, "--format", "md"], {0, 2})


def _step_eval_mc(run: _Run) -> None:
    run.cli(["eval", MAIN, "--mc", "64", "--seed", "1"], {0, 2})


def _step_verify(run: _Run) -> None:
    run.cli(["verify", MAIN], {0, 1, 2})


def _export(fmt: str) -> Callable[[_Run], None]:
    def step(run: _Run) -> None:
        rc, stdout, _ = run.cli(["export", MAIN, "--to", fmt], {0, 2})
        run.outputs[fmt] = stdout
        if fmt == "json" and rc in (0, 2) and "json" in run.outputs:
            if stdout.strip() != run.outputs["json"].strip():
                run.add("export --to json differs from eval --format json",
                        output=_excerpt(stdout))
    return step


def _step_export_file(run: _Run) -> None:
    run.allowed.add("out.tex")
    rc, _, _ = run.cli(["export", MAIN, "--to", "tex", "-o", "out.tex"], {0, 2})
    target = run.folder / "out.tex"
    if rc != 0 or not target.exists():
        return
    written = target.read_bytes()
    _, stdout, _ = run.cli(["export", MAIN, "--to", "tex"], {0, 2})
    expected = stdout if stdout.endswith("\n") else stdout + "\n"
    if written != expected.encode("utf-8"):
        run.add("export -o file differs from stdout", detail=f"{len(written)} bytes written, "
                f"{len(expected.encode())} expected")
    run.command = "relsheet export main.sheet --to tex -o out.tex"
    umask = os.umask(0)
    os.umask(umask)
    mode = target.stat().st_mode & 0o777
    if mode != 0o666 & ~umask:
        run.add("export -o file mode ignores the umask",
                detail=f"mode {mode:o}, umask {umask:o} gives {0o666 & ~umask:o}")


def _step_deps(run: _Run) -> None:
    run.cli(["deps", MAIN], {0, 2})


def _step_diff(run: _Run) -> None:
    rc, stdout, _ = run.cli(["diff", MAIN, MAIN], {0, 2})
    if stdout.strip() and "no cell changed" not in stdout:
        run.add("diff against itself", detail="cells differ from themselves",
                output=_excerpt(stdout))


_MARKER = re.compile(r"#[→=]")


def without_markers(data: bytes) -> list[str]:
    """The file's lines (split at \\n only) with every result marker (`#→`, or `#=` of earlier
    versions) and the blanks before it removed: what annotate must leave as it was."""
    text = data.decode("utf-8", errors="surrogateescape")
    if text.startswith("\ufeff"):
        text = text[1:]
    out = []
    for piece in text.split("\n"):
        ending = "\r" if piece.endswith("\r") else ""
        body = piece[:-1] if ending else piece
        found = _MARKER.search(body)
        if found is not None:
            body = body[:found.start()]
        out.append(body.rstrip(" \t\f") + ending)
    return out


def _step_annotate(run: _Run) -> None:
    path = run.folder / MAIN
    original = path.read_bytes()
    if "json" not in run.outputs:
        _step_eval_json(run)
    rc, _, _ = run.cli(["annotate", MAIN], {0, 2})
    first = path.read_bytes()
    if first != original:
        body = first[3:] if first.startswith(b"\xef\xbb\xbf") else first
        try:
            body.decode("utf-8")
        except UnicodeDecodeError as exc:
            run.add("annotate wrote invalid UTF-8", detail=str(exc)[:200])
            return
        before, after = without_markers(original), without_markers(first)
        if before != after or original.startswith(b"\xef\xbb\xbf") != first.startswith(b"\xef\xbb\xbf"):
            where = next((i for i, (a, b) in enumerate(zip(before, after)) if a != b),
                         min(len(before), len(after)))
            run.add("annotate changed bytes outside its markers",
                    detail=f"line {where + 1}: {before[where:where + 1]!r} became "
                           f"{after[where:where + 1]!r} ({len(before)} lines before, "
                           f"{len(after)} after)")
    run.cli(["annotate", MAIN], {0, 2})
    second = path.read_bytes()
    if second != first:
        run.add("annotate not idempotent", detail=_first_difference(first, second))
    rc, stdout, _ = run.cli(["annotate", "--stale", MAIN], {0, 1, 2})
    if rc == 1:
        run.add("stale markers right after annotate", detail=stdout.strip()[:300])
    if first != original and run.outputs.get("json", "").strip():
        _, stdout, _ = run.cli(["eval", MAIN, "--format", "json"], {0, 2})
        if not _same_json(run.outputs["json"], stdout):
            run.add("annotated sheet evaluates differently",
                    detail=_json_difference(run.outputs["json"], stdout))


def _first_difference(a: bytes, b: bytes) -> str:
    la, lb = a.split(b"\n"), b.split(b"\n")
    for i, (x, y) in enumerate(zip(la, lb)):
        if x != y:
            at = next((j for j, (p, q) in enumerate(zip(x, y)) if p != q), min(len(x), len(y)))
            start = max(0, at - 40)
            return f"line {i + 1}, byte {at + 1}: …{x[start:at + 80]!r} became …{y[start:at + 80]!r}"
    return f"{len(la)} lines became {len(lb)}"


def _same_json(a: str, b: str) -> bool:
    try:
        return json.loads(a) == json.loads(b)
    except ValueError:
        return a == b


def _json_difference(a: str, b: str) -> str:
    try:
        cells_a = {c["name"]: c for c in json.loads(a).get("cells", [])}
        cells_b = {c["name"]: c for c in json.loads(b).get("cells", [])}
    except (ValueError, KeyError, TypeError, AttributeError):
        return "the JSON documents differ"
    for name in dict.fromkeys([*cells_a, *cells_b]):
        if cells_a.get(name) != cells_b.get(name):
            return f"cell `{name}`: {json.dumps(cells_a.get(name), ensure_ascii=False)[:200]} → " \
                   f"{json.dumps(cells_b.get(name), ensure_ascii=False)[:200]}"
    return "the checks differ"


_SAVE = re.compile(r"^:(?:save|write)\s+(\S+)\s*$")


def _step_repl(run: _Run) -> None:
    from calc.errors import SheetError
    from calc.interfaces.repl import Session

    run.command = f"Session({MAIN!r})"
    # annotate may have written an error's text into the file: the prompt shows file lines
    run.input_text += (run.folder / MAIN).read_bytes().decode("utf-8", errors="replace")
    try:
        with run.limited():
            session = Session(MAIN)
    except SheetError:
        return  # the prompt refuses a sheet it cannot read, as the command line does
    except Exception as exc:
        run.add("exception ends the prompt", exc_type=type(exc).__name__,
                frame=innermost_calc_frame(exc.__traceback__), detail=str(exc)[:300])
        return
    for line in run.inp.repl:
        run.command = f"repl> {line}"
        m = _SAVE.match(line.strip())
        if m:
            run.allowed.add(os.path.normpath(m.group(1)))
        out, err = io.StringIO(), io.StringIO()
        try:
            with run.limited(), contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
                answer = session.handle(line)
        except Exception as exc:
            run.add("exception ends the prompt", exc_type=type(exc).__name__,
                    frame=innermost_calc_frame(exc.__traceback__), detail=str(exc)[:300])
            return
        run.check_warnings(err.getvalue())
        if out.getvalue().strip() or err.getvalue().strip():
            answer = f"{answer}\n{out.getvalue()}\n{err.getvalue()}" if isinstance(answer, str) else answer
        if not isinstance(answer, str):
            run.add("exception ends the prompt", exc_type="TypeError",
                    detail=f"handle returned {type(answer).__name__}")
            return
        # an internal error the session's cells carry is ours even when the sheet's text
        # already holds those words (annotate may have written a cell's error into a marker)
        causes = _session_causes(session) if "internal error" in answer else []
        internal = bool(causes) or ("internal error" in answer
                                    and "internal error" not in run.input_text)
        if internal or "Traceback (most recent call last)" in answer:
            causes = causes or \
                [(_type_in(answer), "", next((x for x in answer.splitlines() if "internal" in x),
                                             answer[:200]))]
            for exc_type, frame, message in causes:
                run.add("internal error", exc_type=exc_type, frame=frame, detail=message,
                        output=_excerpt(answer))
        if session.done:
            break
    saved = run.folder / "saved.sheet"
    if saved.is_file():
        run.step = "repl"
        run.cli(["eval", "saved.sheet", "--format", "json"], {0, 2})


def _session_causes(session) -> list[tuple[str, str, str]]:
    """Exceptions behind the prompt's cells' internal errors (the error's ``__cause__``)."""
    found = []
    sheets = [session.sheet, *getattr(session.sheet, "namespaces", {}).values()]
    for sheet in sheets:
        for cell in sheet.cells:
            err = cell.error
            cause = getattr(err, "__cause__", None)
            if cause is not None and "internal error" in err.message:
                found.append((type(cause).__name__, innermost_calc_frame(cause.__traceback__),
                              str(cause)[:300]))
    return list(dict.fromkeys(found))


STEP_FUNCTIONS: dict[str, Callable[[_Run], None]] = {
    "eval": _step_eval, "eval-json": _step_eval_json, "eval-csv": _step_eval_csv,
    "eval-md": _step_eval_md, "eval-mc": _step_eval_mc, "verify": _step_verify,
    "export-md": _export("md"), "export-csv": _export("csv"), "export-json": _export("json"),
    "export-tex": _export("tex"), "export-file": _step_export_file, "deps": _step_deps,
    "diff": _step_diff, "annotate": _step_annotate, "repl": _step_repl,
}


def _write_files(folder: Path, inp: FuzzInput) -> None:
    for name, data in inp.files.items():
        target = folder / name
        if data is None:
            target.mkdir(parents=True, exist_ok=True)
        else:
            target.parent.mkdir(parents=True, exist_ok=True)
            target.write_bytes(data)
    (folder / MAIN).write_bytes(inp.main)


def run_input(inp: FuzzInput, steps: list[str], options: Options, status=None,
              timeout: float | None = None) -> dict:
    """Run one input through ``steps`` in a fresh folder (inside a worker). Returns the
    findings, the CPU time of each step, and whether the worker must be replaced."""
    folder = Path(tempfile.mkdtemp(prefix="in-", dir=options.workdir_base or None))
    run = _Run(inp, folder, timeout or options.timeout)
    run.status = status
    dirty = False
    home = os.getcwd()
    try:
        _write_files(folder, inp)
        os.chdir(folder)
        known = run.listing()
        for number, step in enumerate(steps):
            run.step = step
            if status is not None:
                status[1] = number
            started = time.process_time()
            try:
                STEP_FUNCTIONS[step](run)
            except StepTimeout as timer:
                spent = time.process_time() - started
                frame = innermost_calc_frame(timer.__traceback__)
                limit = f"{run.timeout:g} s CPU" if timer.args[0] == "cpu" else \
                    f"{run.timeout * WALL_FACTOR:g} s wall clock"
                run.add("hang", frame=frame, detail=f"stopped at the limit of {limit}",
                        seconds=round(spent, 2))
                dirty = True
                break
            except MemoryError as exc:
                run.add("memory", exc_type="MemoryError",
                        frame=innermost_calc_frame(exc.__traceback__), detail="MemoryError")
                dirty = True
                break
            except Exception as exc:  # escaped the entry point, or the harness failed
                frame = innermost_calc_frame(exc.__traceback__)
                run.add("uncaught exception" if frame else "harness error",
                        exc_type=type(exc).__name__, frame=frame,
                        detail=f"{exc}"[:300], output=traceback.format_exc()[-1500:])
            finally:
                run.cpu[step] = run.cpu.get(step, 0.0) + time.process_time() - started
            now = run.listing()
            extra = sorted(n for n in now - known - run.allowed
                           if not any(n.startswith(a + os.sep) for a in run.allowed))
            if extra:
                run.command = f"(files after {step})"
                run.add("file left behind", detail=", ".join(extra)[:300])
            known = now | known
    finally:
        os.chdir(home)
        shutil.rmtree(folder, ignore_errors=True)
    return {"findings": [asdict(f) for f in run.findings], "cpu": run.cpu, "dirty": dirty,
            "input": inp if run.findings else None}


def _cache_parser() -> None:
    """Build ``calc.interfaces.cli``'s argparse parser once in this worker.

    ``cli.main`` builds its parser on every call (4-5 ms, as much as evaluating a small sheet,
    and about 40 % of the harness's time when each input runs ten commands). The parser is
    the same every time and ``parse_args`` makes a fresh namespace per call, so building it
    once changes nothing the harness observes."""
    import functools

    from calc.interfaces import cli

    if not hasattr(cli.build_parser, "cache_info"):
        cli.build_parser = functools.lru_cache(maxsize=1)(cli.build_parser)


def _address_space() -> int:
    with open("/proc/self/status") as status:
        for line in status:
            if line.startswith("VmSize:"):
                return int(line.split()[1]) * 1024
    return 0


def _worker_main(conn, status, options: Options, inherited: list[int]) -> None:
    """A worker: limits, then tasks from the pipe until told to stop (or until the parent is
    gone: the parent's ends of the pipes, inherited through fork, are closed first, so that a
    parent that dies leaves the worker reading the end of its pipe)."""
    for fd in inherited:
        try:
            os.close(fd)
        except OSError:
            pass
    # keep stray output of the code under test off the terminal
    log = os.open(os.path.join(options.workdir_base, "workers.log"),
                  os.O_WRONLY | os.O_CREAT | os.O_APPEND, 0o600)
    os.dup2(log, 1)
    os.dup2(log, 2)
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    # every warning a user would see, every time (not once per process: workers are long-lived)
    import warnings

    warnings.resetwarnings()
    warnings.simplefilter("always")
    for quiet in (DeprecationWarning, PendingDeprecationWarning, ImportWarning, ResourceWarning):
        warnings.filterwarnings("ignore", category=quiet)
    signal.signal(signal.SIGPROF, _on_timer)
    signal.signal(signal.SIGALRM, _on_timer)
    if options.memory_mb > 0:
        limit = _address_space() + options.memory_mb * 1024 * 1024
        _, hard = resource.getrlimit(resource.RLIMIT_AS)
        if hard != resource.RLIM_INFINITY:
            limit = min(limit, hard)
        resource.setrlimit(resource.RLIMIT_AS, (limit, hard))
    if options.cache_parser:
        _cache_parser()
    if options.setup is not None:
        options.setup()
    done = 0
    while True:
        try:
            message = conn.recv()
        except EOFError:
            return
        if message is None:
            return
        task_id, task = message
        inp = task.get("input") or generate(task["seed"], task["index"])
        steps = task.get("steps") or plan(inp, options.all_paths, options.rotate)
        try:
            result = run_input(inp, steps, options, status, task.get("timeout"))
        except BaseException as exc:  # the harness itself failed: say so, and leave
            result = {"findings": [asdict(Finding("harness error", "", "", type(exc).__name__,
                                                  "", str(exc)[:300],
                                                  traceback.format_exc()[-1500:]))],
                      "cpu": {}, "dirty": True, "input": inp}
        done += 1
        result["steps"] = steps
        result["retire"] = result["dirty"] or done >= RECYCLE
        conn.send((task_id, result))
        if result["retire"]:
            return


# ---------------------------------------------------------------------------------------
# the pool

@dataclass
class Task:
    seed: int = 0
    index: int = 0
    input: FuzzInput | None = None
    steps: list[str] | None = None
    timeout: float | None = None
    fresh: bool = False
    #: called with the result (a dict, see run_input)
    done: Callable[[dict], None] = lambda result: None


class _Worker:
    def __init__(self, context, options: Options, others: list[int]) -> None:
        self.conn, child = context.Pipe()
        self.status = context.RawArray("d", 3)
        inherited = [self.conn.fileno(), *others]
        self.process = context.Process(target=_worker_main,
                                       args=(child, self.status, options, inherited), daemon=True)
        self.process.start()
        child.close()
        self.task: Task | None = None
        self.steps: list[str] = []
        self.used = 0

    def stop(self, kill: bool = False) -> None:
        if kill and self.process.is_alive():
            self.process.kill()
        else:
            try:
                self.conn.send(None)
            except (OSError, ValueError):
                pass
        self.process.join(5)
        if self.process.is_alive():
            self.process.kill()
            self.process.join(5)
        self.conn.close()


class Pool:
    """``jobs`` forked workers fed from a task source; the parent watches for hangs and
    deaths and replaces such workers."""

    def __init__(self, jobs: int, options: Options) -> None:
        import multiprocessing

        self.context = multiprocessing.get_context("fork")
        self.options = options
        self.workers: list[_Worker] = []
        for _ in range(jobs):
            self.workers.append(self._new())
        self.next_id = 0
        self.killed = 0

    def close(self) -> None:
        for worker in self.workers:
            worker.stop()

    def _new(self) -> _Worker:
        return _Worker(self.context, self.options, [w.conn.fileno() for w in self.workers])

    def _replace(self, worker: _Worker, kill: bool) -> _Worker:
        place = self.workers.index(worker)
        worker.stop(kill=kill)
        del self.workers[place]
        fresh = self._new()
        self.workers.insert(place, fresh)
        return fresh

    def run(self, next_task: Callable[[], Task | None], more: Callable[[], bool]) -> None:
        """Run tasks from ``next_task()`` (None: nothing to give right now) until ``more()``
        is false and no task is running."""
        from multiprocessing.connection import wait

        while True:
            for worker in list(self.workers):
                if worker.task is None:
                    task = next_task()
                    if task is None:
                        break
                    if task.fresh and worker.used:
                        worker = self._replace(worker, kill=False)
                    self._assign(worker, task)
            busy = [w for w in self.workers if w.task is not None]
            if not busy:
                if not more():
                    return
                time.sleep(0.01)
                continue
            ready = wait([w.conn for w in busy], timeout=0.25)
            for worker in busy:
                if worker.conn in ready:
                    self._collect(worker)
            self._watch()

    def _assign(self, worker: _Worker, task: Task) -> None:
        self.next_id += 1
        worker.task = task
        worker.used += 1
        worker.status[0] = 0.0
        worker.status[1] = 0
        payload = {"seed": task.seed, "index": task.index, "input": task.input,
                   "steps": task.steps, "timeout": task.timeout}
        worker.conn.send((self.next_id, payload))

    def _collect(self, worker: _Worker) -> None:
        task = worker.task
        assert task is not None
        try:
            _, result = worker.conn.recv()
        except (EOFError, OSError):
            worker.process.join(1)
            code = worker.process.exitcode
            reason = f"killed by signal {-code}" if code is not None and code < 0 else f"exit {code}"
            result = self._lost(worker, "worker died", reason)
            self._replace(worker, kill=True)
            task.done(result)
            return
        worker.task = None
        if result.get("retire"):
            self._replace(worker, kill=False)
        task.done(result)

    def _watch(self) -> None:
        now = time.monotonic()
        for worker in list(self.workers):
            task = worker.task
            if task is None:
                continue
            started, limit = worker.status[0], worker.status[2]
            grace = self.options.grace
            if started > 0 and now - started > limit + grace:
                result = self._lost(worker, "hang (killed)",
                                    f"no answer {limit + grace:.0f} s after the command started")
                self.killed += 1
                self._replace(worker, kill=True)
                task.done(result)
            elif not worker.process.is_alive() and not worker.conn.poll():
                code = worker.process.exitcode
                result = self._lost(worker, "worker died", f"exit {code}")
                self._replace(worker, kill=True)
                task.done(result)

    def _lost(self, worker: _Worker, kind: str, detail: str) -> dict:
        task = worker.task
        assert task is not None
        inp = task.input or generate(task.seed, task.index)
        steps = task.steps or plan(inp, self.options.all_paths, self.options.rotate)
        step = steps[min(int(worker.status[1]), len(steps) - 1)] if steps else ""
        worker.task = None
        finding = Finding(kind, step, f"(step {step})", detail=detail)
        return {"findings": [asdict(finding)], "cpu": {}, "dirty": True, "input": inp,
                "steps": steps}


# ---------------------------------------------------------------------------------------
# classes, minimisation, the report

@dataclass
class CrashClass:
    key: str
    first: Finding
    count: int = 0
    inputs: int = 0
    steps: set[str] = field(default_factory=set)
    kinds: set[str] = field(default_factory=set)
    first_input: tuple[int, int, str] = (0, 0, "")
    smallest: FuzzInput | None = None
    minimal: FuzzInput | None = None
    minimal_finding: Finding | None = None
    reproduced_fresh: bool | None = None
    measured: str = ""


class Campaign:
    """Collects results into crash classes."""

    def __init__(self) -> None:
        self.classes: dict[str, CrashClass] = {}
        self.inputs = 0
        self.inputs_with_findings = 0
        self.cpu: dict[str, float] = {}
        self.step_counts: dict[str, int] = {}
        #: CPU seconds spent on inputs that hung (each costs up to the time limit)
        self.hang_cpu = 0.0

    def add(self, result: dict) -> None:
        self.inputs += 1
        for step, seconds in result.get("cpu", {}).items():
            self.cpu[step] = self.cpu.get(step, 0.0) + seconds
            self.step_counts[step] = self.step_counts.get(step, 0) + 1
        findings = [Finding(**f) for f in result["findings"]]
        if findings:
            self.inputs_with_findings += 1
        if any(f.category == "hang" for f in findings):
            self.hang_cpu += sum(result.get("cpu", {}).values())
        inp: FuzzInput | None = result.get("input")
        seen: set[str] = set()
        for finding in findings:
            key = finding.key()
            cls = self.classes.get(key)
            if cls is None:
                cls = self.classes[key] = CrashClass(key, finding)
                if inp is not None:
                    cls.first_input = (inp.seed, inp.index, inp.source)
            cls.count += 1
            cls.steps.add(finding.step)
            cls.kinds.add(finding.kind)
            if key not in seen:
                cls.inputs += 1
                seen.add(key)
                if inp is not None and (cls.smallest is None or inp.size() < cls.smallest.size()):
                    cls.smallest = inp
                    cls.first = finding


def _pieces(data: bytes) -> list[bytes]:
    return data.splitlines(keepends=True) if b"\n" not in data else \
        [p for p in re.split(rb"(?<=\n)", data) if p]


#: a reduction in progress: yields (candidate, steps), receives whether it reproduced
Reduction = Generator[tuple[FuzzInput, list[str]], bool, FuzzInput]


def _ddmin(items: list, test: Callable[[list], FuzzInput]) -> Generator[FuzzInput, bool, list]:
    """Delta debugging over a list (as a generator: yields candidates, receives whether each
    still reproduces); returns the reduced list through StopIteration."""
    n = 2
    while len(items) >= 1:
        chunk = max(1, -(-len(items) // n))
        reduced = False
        for start in range(0, len(items), chunk):
            candidate = items[:start] + items[start + chunk:]
            if (yield test(candidate)):
                items = candidate
                n = max(n - 1, 2)
                reduced = True
                break
        if not reduced:
            if chunk == 1:
                break
            n = min(len(items), n * 2)
    return items


def _reduce(items: list, build: Callable[[list], FuzzInput], steps: list[str]) -> Reduction:
    """Delta debugging of one list of pieces, relayed to the caller: yields (candidate,
    steps), receives whether it reproduces; returns the reduced input."""
    gen = _ddmin(items, build)
    try:
        candidate = next(gen)
        while True:
            ok = yield candidate, steps
            candidate = gen.send(ok)
    except StopIteration as stop:
        return build(stop.value)


def _with_file(base: FuzzInput, name: str) -> Callable[[list], FuzzInput]:
    from dataclasses import replace

    def build(pieces: list) -> FuzzInput:
        return replace(base, files={**base.files, name: b"".join(pieces)})
    return build


def _minimiser(inp: FuzzInput, step: str) -> Reduction:
    """Yields (candidate input, steps) and receives whether the class still reproduces;
    returns the smallest input found. Deletes lines of the sheet, then files beside it, lines
    of those files, and prompt lines (only the failing path runs)."""
    from dataclasses import replace

    steps = [step]
    current = yield from _reduce(_pieces(inp.main),
                                 lambda pieces: replace(inp, main=b"".join(pieces)), steps)
    if len(current.main) <= 4000:
        # then words (each with the blanks after it), for what one line still holds
        base = current

        def with_words(words: list) -> FuzzInput:
            return replace(base, main=b"".join(words))
        current = yield from _reduce([w for w in re.split(rb"(?<=[ \t])(?=[^ \t])", current.main) if w],
                                     with_words, steps)
    for name in list(current.files):
        trial = replace(current, files={k: v for k, v in current.files.items() if k != name})
        if (yield trial, steps):
            current = trial
    for name, body in list(current.files.items()):
        if body:
            current = yield from _reduce(_pieces(body), _with_file(current, name), steps)
    if step == "repl" and current.repl:
        base = current

        def with_repl(lines: list) -> FuzzInput:
            return replace(base, repl=list(lines))
        current = yield from _reduce(list(current.repl), with_repl, steps)
    elif current.repl:
        current = replace(current, repl=[])
    return current


def minimise(pool: Pool, campaign: Campaign, options: Options, budget: float,
             log: Callable[[str], None], hang_trials: int = 25) -> None:
    """Reduce each class's smallest input, two classes at a time (one per worker), then
    confirm each in a fresh worker and measure hangs with a long limit."""
    deadline = time.monotonic() + budget
    queue = [c for c in campaign.classes.values()
             if c.smallest is not None and c.first.step in STEP_FUNCTIONS]
    queue.sort(key=lambda c: ("hang" in c.key, c.smallest.size() if c.smallest else 0))
    active: list[dict] = []
    waiting: list[Task] = []

    def start(cls: CrashClass) -> None:
        assert cls.smallest is not None
        state: dict = {"cls": cls, "trials": 0, "best": cls.smallest, "pending": False}
        limit = hang_trials if cls.key.startswith("hang") else 250
        state["limit"] = limit
        state["gen"] = _minimiser(cls.smallest, cls.first.step)
        try:
            candidate, steps = next(state["gen"])
        except StopIteration:
            return
        active.append(state)
        submit(state, candidate, steps)

    def submit(state: dict, candidate: FuzzInput, steps: list[str]) -> None:
        state["candidate"] = candidate
        state["trials"] += 1

        def done(result: dict, state=state, candidate=candidate) -> None:
            keys = {Finding(**f).key() for f in result["findings"]}
            ok = state["cls"].key in keys
            if ok and candidate.size() <= state["best"].size():
                state["best"] = candidate
                state["finding"] = next(Finding(**f) for f in result["findings"]
                                        if Finding(**f).key() == state["cls"].key)
            advance(state, ok)

        waiting.append(Task(input=candidate, steps=steps, done=done))

    def advance(state: dict, ok: bool) -> None:
        out_of_budget = state["trials"] >= state["limit"] or time.monotonic() > deadline
        try:
            if out_of_budget:
                raise StopIteration(state["best"])
            candidate, steps = state["gen"].send(ok)
        except StopIteration as stop:
            cls = state["cls"]
            best = stop.value if isinstance(stop.value, FuzzInput) else state["best"]
            if best.size() > state["best"].size():
                best = state["best"]
            cls.minimal = best
            cls.minimal_finding = state.get("finding", cls.first)
            active.remove(state)
            log(f"  reduced {cls.key[:90]}: {cls.smallest.size() if cls.smallest else 0} → "
                f"{best.size()} bytes in {state['trials']} runs")
            return
        submit(state, candidate, steps)

    def next_task() -> Task | None:
        while len(active) < len(pool.workers) and queue and not waiting:
            start(queue.pop(0))
        return waiting.pop(0) if waiting else None

    pool.run(next_task, lambda: bool(active or queue or waiting))

    # confirm in fresh workers; measure hangs with a long limit
    confirm: list[Task] = []
    for cls in campaign.classes.values():
        if cls.minimal is None:
            continue
        hang = cls.key.startswith("hang")

        def done(result: dict, cls=cls, hang=hang) -> None:
            found = [Finding(**f) for f in result["findings"]]
            cls.reproduced_fresh = any(f.key() == cls.key for f in found)
            if hang:
                if any(f.category == "hang" for f in found):
                    cls.measured = "still running after 30 s CPU"
                else:
                    cls.measured = f"finishes in {sum(result.get('cpu', {}).values()):.1f} s CPU"

        confirm.append(Task(input=cls.minimal, steps=[cls.first.step], fresh=True,
                            timeout=30.0 if hang else None, done=done))
    pending = list(confirm)
    pool.run(lambda: pending.pop(0) if pending else None, lambda: bool(pending))
    # a hang re-measured with a long limit is no longer a hang finding of its own class:
    # confirm that it reproduces at the normal limit
    for cls in campaign.classes.values():
        if cls.key.startswith("hang") and cls.minimal is not None and cls.measured.startswith("finishes"):
            cls.reproduced_fresh = None


def _sheet_text(inp: FuzzInput | None, limit: int = 4000) -> str:
    if inp is None:
        return ""
    text = inp.main.decode("utf-8", errors="backslashreplace")
    return text if len(text) <= limit else text[:limit] + f"\n… ({len(text):,} characters)"


def _visible(text: str) -> str:
    """Control characters and odd line breaks spelled out, so a reader sees them."""
    out = []
    for ch in text:
        if ch == "\n" or ch == "\t" or (ch >= " " and ch not in "\x7f\x85\u2028\u2029\ufeff"
                                        and not 0x80 <= ord(ch) < 0xa0):
            out.append(ch)
        else:
            out.append(f"\\x{ord(ch):02x}" if ord(ch) < 0x100 else f"\\u{ord(ch):04x}")
    return "".join(out)


def write_report(campaign: Campaign, out: Path, meta: dict) -> tuple[Path, Path]:
    out.mkdir(parents=True, exist_ok=True)
    classes = sorted(campaign.classes.values(), key=lambda c: (-c.inputs, c.key))
    data: dict[str, Any] = {"run": meta, "classes": []}
    lines = ["# relsheet fuzz report", ""]
    lines.append(f"{campaign.inputs:,} inputs (seed {meta['seed']}, from {meta['start']}), "
                 f"{meta['jobs']} jobs, {meta['elapsed']:.0f} s, "
                 f"{meta['throughput']:.1f} inputs/s; limits {meta['timeout']:g} s CPU per "
                 f"command, {meta['memory_mb']} MB address space above start. "
                 f"{len(classes)} crash classes on {campaign.inputs_with_findings:,} inputs.")
    lines.append("")
    lines.append(f"Worker CPU: {meta['cpu_seconds']:.0f} s in all, "
                 f"{1000 * meta['cpu_seconds'] / max(1, campaign.inputs):.0f} ms an input; "
                 f"{meta['cpu_seconds_in_hangs']:.0f} s of it on inputs that hung.")
    lines.append("")
    if meta.get("cpu_per_step"):
        lines.append("CPU per step (mean ms): " + ", ".join(
            f"{k} {v:.0f}" for k, v in meta["cpu_per_step"].items()))
        lines.append("")
    for number, cls in enumerate(classes, 1):
        shown = cls.minimal_finding or cls.first
        minimal = cls.minimal or cls.smallest
        entry = {"key": cls.key, "category": shown.category, "kinds": sorted(cls.kinds),
                 "steps": sorted(cls.steps), "inputs": cls.inputs, "findings": cls.count,
                 "exc_type": shown.exc_type, "frame": shown.frame, "detail": shown.detail,
                 "command": shown.command, "output": shown.output,
                 "first_input": {"seed": cls.first_input[0], "index": cls.first_input[1],
                                 "source": cls.first_input[2]},
                 "minimal": minimal.to_json() if minimal else None,
                 "reproduced_in_fresh_worker": cls.reproduced_fresh,
                 "measured": cls.measured}
        data["classes"].append(entry)
        lines.append(f"## {number}. {cls.key}")
        lines.append("")
        lines.append(f"- seen on {cls.inputs:,} inputs ({cls.count:,} times); kinds: "
                     f"{', '.join(sorted(cls.kinds))}; paths: {', '.join(sorted(cls.steps))}")
        if shown.exc_type or shown.frame:
            lines.append(f"- exception: `{shown.exc_type}` at `{shown.frame or '?'}`")
        if shown.detail:
            lines.append(f"- detail: {_visible(shown.detail)}")
        lines.append(f"- command: `{_visible(shown.command)}`")
        lines.append(f"- first: seed {cls.first_input[0]} input {cls.first_input[1]} "
                     f"({cls.first_input[2]})")
        if cls.reproduced_fresh is not None:
            lines.append(f"- reproduces in a fresh worker: {'yes' if cls.reproduced_fresh else 'NO'}")
        if cls.measured:
            lines.append(f"- with a 30 s limit: {cls.measured}")
        if minimal is not None:
            lines.append("- smallest input (main.sheet):")
            lines.append("")
            lines.append("```")
            lines.append(_visible(_sheet_text(minimal)).rstrip("\n"))
            lines.append("```")
            for name, body in minimal.files.items():
                lines.append(f"  beside it: `{name}`" + (" (a folder)" if body is None else
                                                          f" ({len(body)} bytes)"))
            if shown.step == "repl" and minimal.repl:
                lines.append("  prompt lines: " + "; ".join(f"`{_visible(x)}`" for x in minimal.repl))
        if shown.output:
            lines.append("- output:")
            lines.append("")
            lines.append("```")
            lines.append(_visible(shown.output).rstrip("\n")[:1500])
            lines.append("```")
        lines.append("")
    report = out / "report.md"
    report.write_text("\n".join(lines), encoding="utf-8")
    findings = out / "findings.json"
    findings.write_text(json.dumps(data, indent=1, ensure_ascii=False), encoding="utf-8")
    return report, findings


_WARM_SHEET = """x = 1.0 ± 0.1 km
y = orbit(1 AU, 0.1)
z = sqrt(x^2) in m
w = 3 kmz / s
u = nope + 1
v = deflection(1 Msun, 3 s)
t = (1 +
check z > 1 m
check z == 1 km within 2 sigma
"""


def _warm_up(base: str) -> None:
    """Exercise relsheet once in the parent (every demo sheet, every output path, the error
    paths), so that forked workers start with modules imported and caches filled: first-use
    costs would otherwise land on whichever input comes first in each worker."""
    import warnings

    from calc.interfaces import cli, repl

    # the parser (a sheet found in the parse cache never loads it, so a worker's first new
    # sheet would pay for it) and modules relsheet imports on first use of a function
    from calc.language import parse as _parse_module
    from fuzz.generate import demo_sheets

    _parse_module._parser()  # noqa: SLF001 - warming the cache the workers inherit
    # modules relsheet imports on first use of a function (a second or more of CPU each)
    for module in ("scipy.special", "scipy.integrate", "scipy.optimize", "astropy.time",
                   "astropy.coordinates", "jplephem.spk"):
        try:
            __import__(module)
        except ImportError:
            pass
    folder = tempfile.mkdtemp(prefix="warm-", dir=base)
    home = os.getcwd()
    try:
        for name, data in demo_sheets().items():
            (Path(folder) / name).write_bytes(data)
        (Path(folder) / MAIN).write_text(_WARM_SHEET, encoding="utf-8")
        os.chdir(folder)
        with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()), \
                warnings.catch_warnings():
            warnings.simplefilter("ignore")
            for name in sorted(demo_sheets()):
                cli.main(["eval", name])
            for argv in (["eval", MAIN, "--format", "json"], ["eval", MAIN, "--format", "csv"],
                         ["eval", MAIN, "--format", "md"], ["eval", MAIN, "--mc", "20"],
                         ["verify", MAIN], ["export", MAIN, "--to", "tex"],
                         ["export", MAIN, "--to", "md"], ["deps", MAIN], ["diff", MAIN, MAIN],
                         ["annotate", MAIN], ["annotate", "--stale", MAIN]):
                cli.main(argv)
            session = repl.Session(MAIN)
            for line in ("x * 2", "x = 2 km", ":cells", ":deps z", ":revert", "1 +", "q = kmz"):
                session.handle(line)
    finally:
        os.chdir(home)
        shutil.rmtree(folder, ignore_errors=True)


def run_campaign(count: int = 0, seed: int = 1, jobs: int = 2, timeout: float = 2.0,
                 memory_mb: int = 2048, start: int = 0, inputs: list[FuzzInput] | None = None,
                 all_paths: bool = False, rotate: int = 2, steps: list[str] | None = None,
                 minimise_budget: float = 0.0, time_budget: float | None = None,
                 out: Path | None = None, log: Callable[[str], None] = lambda s: None,
                 setup: Callable[[], None] | None = None, grace: float = GRACE,
                 hang_trials: int = 25) -> tuple[Campaign, dict]:
    """Run ``count`` generated inputs (or the given ``inputs``); returns the campaign (its
    crash classes) and the run's figures. Writes the report when ``out`` is given."""
    # on tmpfs when there is one: annotate and export fsync every write, which on a disk
    # costs more than the command itself and tests nothing the harness looks at
    shm = "/dev/shm" if os.access("/dev/shm", os.W_OK) else None
    base = tempfile.mkdtemp(prefix="relsheet-fuzz-", dir=shm)
    options = Options(timeout=timeout, memory_mb=memory_mb, workdir_base=base,
                      all_paths=all_paths, rotate=rotate, grace=grace, setup=setup)
    campaign = Campaign()
    began = time.monotonic()
    _warm_up(base)
    # what the warm-up made (astropy's registries, relsheet's modules) lives as long as the
    # workers: out of the collector's way, so that its passes do not stall an input
    import gc

    gc.collect()
    gc.freeze()
    pool = Pool(jobs, options)
    given = list(inputs or [])
    indices = iter(range(start, start + count))
    state = {"issued": 0, "finished": 0, "stopped": False}
    last_log = [time.monotonic()]

    def done(result: dict) -> None:
        state["finished"] += 1
        campaign.add(result)
        now = time.monotonic()
        if now - last_log[0] > 30:
            last_log[0] = now
            rate = state["finished"] / (now - began)
            log(f"  {state['finished']:,} inputs, {rate:.1f}/s, {len(campaign.classes)} classes")

    def next_task() -> Task | None:
        if time_budget is not None and time.monotonic() - began > time_budget:
            state["stopped"] = True
            return None
        if given:
            inp = given.pop(0)
            state["issued"] += 1
            return Task(input=inp, steps=steps, done=done)
        index = next(indices, None)
        if index is None:
            return None
        state["issued"] += 1
        return Task(seed=seed, index=index, steps=steps, done=done)

    try:
        pool.run(next_task, lambda: False)
        elapsed = time.monotonic() - began
        if minimise_budget > 0 and campaign.classes:
            log(f"reducing {len(campaign.classes)} classes")
            minimise(pool, campaign, options, minimise_budget, log, hang_trials)
    finally:
        pool.close()
        shutil.rmtree(base, ignore_errors=True)
    meta = {"seed": seed, "start": start, "inputs": campaign.inputs, "jobs": jobs,
            "timeout": timeout, "memory_mb": memory_mb, "elapsed": elapsed,
            "throughput": campaign.inputs / elapsed if elapsed else 0.0,
            "all_paths": all_paths, "rotate": rotate, "stopped_by_time_budget": state["stopped"],
            "killed_workers": pool.killed,
            "cpu_seconds": sum(campaign.cpu.values()), "cpu_seconds_in_hangs": campaign.hang_cpu,
            "cpu_per_step": {k: 1000 * v / campaign.step_counts[k]
                             for k, v in sorted(campaign.cpu.items())},
            "step_counts": dict(sorted(campaign.step_counts.items())),
            "classes": len(campaign.classes)}
    if out is not None:
        write_report(campaign, out, meta)
    return campaign, meta


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m fuzz.run", description=__doc__.split("\n\n")[0])
    parser.add_argument("--inputs", type=int, default=2000, metavar="N", help="how many inputs")
    parser.add_argument("--seed", type=int, default=1, metavar="S", help="the seed")
    parser.add_argument("--start", type=int, default=0, metavar="K",
                        help="the index of the first input (to rerun one: --start K --inputs 1)")
    parser.add_argument("--jobs", type=int, default=2, metavar="J", help="worker processes")
    parser.add_argument("--timeout", type=float, default=2.0, metavar="SECONDS",
                        help="CPU-time limit of one command or prompt line (default 2)")
    parser.add_argument("--memory", type=int, default=2048, metavar="MB",
                        help="address space a worker may map beyond its start (default 2048)")
    parser.add_argument("--all-paths", action="store_true",
                        help="every output path for every input (default: the core paths and "
                             "two of the others, in rotation)")
    parser.add_argument("--rotate", type=int, default=2, choices=[1, 2], metavar="N",
                        help="how many of the other paths each input runs (1 or 2; default 2)")
    parser.add_argument("--time-budget", type=float, metavar="SECONDS",
                        help="stop issuing inputs after this long")
    parser.add_argument("--minimise", type=float, default=600.0, metavar="SECONDS",
                        help="time for reducing the classes' inputs (0: none; default 600)")
    parser.add_argument("--out", type=Path, default=REPO / "fuzz" / "out", metavar="DIR",
                        help="where report.md and findings.json go (default fuzz/out)")
    args = parser.parse_args(argv)

    def log(text: str) -> None:
        print(text, file=sys.stderr, flush=True)

    log(f"fuzzing: {args.inputs:,} inputs from seed {args.seed} (first {args.start}), "
        f"{args.jobs} jobs")
    campaign, meta = run_campaign(args.inputs, args.seed, args.jobs, args.timeout, args.memory,
                                  args.start, all_paths=args.all_paths, rotate=args.rotate,
                                  minimise_budget=args.minimise, time_budget=args.time_budget,
                                  out=args.out, log=log)
    log(f"{meta['inputs']:,} inputs in {meta['elapsed']:.0f} s ({meta['throughput']:.1f}/s): "
        f"{len(campaign.classes)} crash classes; report in {args.out / 'report.md'}")
    for cls in sorted(campaign.classes.values(), key=lambda c: -c.inputs):
        log(f"  {cls.inputs:6,}  {cls.key}")
    return 1 if campaign.classes else 0


if __name__ == "__main__":
    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
    os.environ.setdefault("OMP_NUM_THREADS", "1")
    sys.exit(main())
