"""The project's fuzz harness (fuzz/): 2,000 generated inputs through every output path find
no crash, hang or internal error; and the harness reports each kind of defect when one is
injected into its workers, so that it cannot pass silently.

The long campaign is a separate command: `python -m fuzz.run --inputs 100000 --jobs 2`.
"""

from __future__ import annotations

import os
import signal
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
if str(ROOT) not in sys.path:  # `fuzz` is a top-level folder of the repository, not installed
    sys.path.insert(0, str(ROOT))

from fuzz.generate import SOURCE_WEIGHTS, TERMINAL_SAMPLES, FuzzInput, generate  # noqa: E402
from fuzz.run import STEPS, Finding, parse_tracebacks, plan, run_campaign, without_markers  # noqa: E402

#: The CI campaign's seed (any fixed number: the point is that the inputs are the same each run).
SEED = 13
CI_INPUTS = 2000


def _given(main: str, repl: list[str] | None = None) -> FuzzInput:
    return FuzzInput(0, 0, "given", main.encode("utf-8"), {}, list(repl or []), False)


def _summary(campaign) -> str:
    return "\n".join(f"{c.inputs:5} inputs  {c.key}  (first: seed {c.first_input[0]} "
                     f"input {c.first_input[1]}; rerun with `python -m fuzz.run --seed "
                     f"{c.first_input[0]} --start {c.first_input[1]} --inputs 1`)"
                     for c in sorted(campaign.classes.values(), key=lambda c: -c.inputs))


# -- the generator

def test_input_k_of_seed_s_is_always_the_same_text():
    for index in (0, 1, 17, 499):
        assert generate(SEED, index) == generate(SEED, index)
    assert generate(SEED, 1).main != generate(SEED, 2).main
    assert generate(SEED, 1) != generate(SEED + 1, 1)


def test_every_source_and_every_output_path_is_used():
    inputs = [generate(SEED, k) for k in range(CI_INPUTS)]
    assert {i.source for i in inputs} == set(SOURCE_WEIGHTS)
    planned = set().union(*(plan(i, rotate=1) for i in inputs))
    assert planned == set(STEPS)
    assert any(i.files for i in inputs), "no input imports another sheet"
    assert any(any(line.startswith((":save", ":write")) for line in i.repl) for i in inputs)


def test_token_soups_cover_every_terminal_of_the_grammar():
    # the soups must follow the grammar: a terminal added to grammar/sheet.lark without a
    # sample here fails this test
    from lark import Lark

    grammar = Lark((ROOT / "grammar" / "sheet.lark").read_text(encoding="utf-8"),
                   parser="lalr", start=["sheet"])
    samples = {s for values in TERMINAL_SAMPLES.values() for s in values}
    for terminal in grammar.terminals:
        if terminal.pattern.type == "str":
            assert terminal.pattern.value in samples or terminal.name in TERMINAL_SAMPLES, terminal
        elif terminal.name not in grammar.ignore_tokens:
            assert terminal.name in TERMINAL_SAMPLES, terminal


def test_markers_are_removed_and_nothing_else():
    text = b"x = 1 km  #= 1 km\r\ny = 2\t#= old\n# a note #= kept as a note\nz = 3#=x"
    assert without_markers(text) == ["x = 1 km\r", "y = 2", "# a note", "z = 3"]
    assert without_markers("x = 1 km  #→ 1 km\n".encode()) == ["x = 1 km", ""]
    # a line break the lexer does not know is not a marker's business
    assert without_markers(b"x = 1\x0by = 2  #= 2") != without_markers(b"x = 1  #= 1")


# -- the harness finds what is there

def _broken_sqrt() -> None:
    """In the worker: `sqrt` raises KeyError, as a bug in a kernel would."""
    from dataclasses import replace

    from calc.physics.functions import _REGISTRY, lookup

    spec = lookup("sqrt")
    assert spec is not None

    def broken(x):
        raise KeyError("injected")

    _REGISTRY["sqrt"] = replace(spec, implementation=broken)


def test_an_internal_error_in_a_kernel_is_reported_on_every_path():
    campaign, _ = run_campaign(inputs=[_given("x = sqrt(4 m^2)\ny = 2 * x\n", ["sqrt(9)", "x"])],
                               jobs=1, all_paths=True, setup=_broken_sqrt)
    found = [c for c in campaign.classes.values() if "KeyError" in c.key]
    assert found, _summary(campaign)
    # the cell's internal error reaches the text, the JSON, the exports, annotate and the prompt
    assert {"eval", "eval-json", "export-tex", "annotate", "repl"} <= set().union(
        *(c.steps for c in found))
    # the class names the innermost frame in calc/ (the call of the function)
    assert all(c.first.frame.startswith("calc/") for c in found), [c.key for c in found]


def _broken_number_format() -> None:
    """In the worker: formatting a number raises KeyError (exit 70 on the text paths)."""
    from calc.outputs import format as fmt

    def broken(x, digits=6):
        raise KeyError("injected")

    fmt.format_number = broken


def test_a_crash_of_the_command_line_is_reported_with_its_frame():
    campaign, _ = run_campaign(inputs=[_given("x = 3 km\n")], jobs=1, steps=["eval"],
                               setup=_broken_number_format)
    assert len(campaign.classes) == 1, _summary(campaign)
    (found,) = campaign.classes.values()
    assert found.kinds == {"exit 70"}
    assert found.first.exc_type == "KeyError"
    assert found.first.frame.startswith("calc/outputs/format.py:")


def _endless_number_format() -> None:
    from calc.outputs import format as fmt

    def endless(x, digits=6):
        while True:
            pass

    fmt.format_number = endless


def test_a_hang_is_reported_and_the_worker_replaced():
    inputs = [_given("x = 3 km\n"), _given("y = 4 s\n")]
    campaign, meta = run_campaign(inputs=inputs, jobs=1, steps=["eval", "eval-json"],
                                  timeout=0.5, setup=_endless_number_format)
    (found,) = campaign.classes.values()
    assert found.key.startswith("hang | calc/outputs/format.py"), found.key
    # both inputs hung: the second ran in a fresh worker after the first was replaced
    assert found.inputs == 2 and meta["inputs"] == 2


def _deaf_endless_number_format() -> None:
    from calc.outputs import format as fmt

    def deaf(x, digits=6):
        signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGPROF, signal.SIGALRM})
        while True:
            pass

    fmt.format_number = deaf


def test_a_hang_no_signal_reaches_is_killed_by_the_parent():
    campaign, meta = run_campaign(inputs=[_given("x = 3 km\n"), _given("y = 1\n")], jobs=1,
                                  steps=["eval"], timeout=0.2, grace=0.5,
                                  setup=_deaf_endless_number_format)
    (found,) = campaign.classes.values()
    assert found.kinds == {"hang (killed)"} and found.inputs == 2
    assert meta["killed_workers"] == 2


def _dying_number_format() -> None:
    from calc.outputs import format as fmt

    def die(x, digits=6):
        os.kill(os.getpid(), signal.SIGKILL)

    fmt.format_number = die


def test_a_worker_that_dies_is_reported():
    campaign, _ = run_campaign(inputs=[_given("x = 3 km\n")], jobs=1, steps=["eval"],
                               setup=_dying_number_format)
    (found,) = campaign.classes.values()
    assert found.key == "worker died | killed by signal 9 | eval", found.key


def _greedy_number_format() -> None:
    from calc.outputs import format as fmt

    def greedy(x, digits=6):
        return str(len(bytearray(8 * 1024 ** 3)))

    fmt.format_number = greedy


def test_running_out_of_memory_is_reported():
    campaign, _ = run_campaign(inputs=[_given("x = 3 km\n")], jobs=1, steps=["eval"],
                               memory_mb=256, setup=_greedy_number_format)
    (found,) = campaign.classes.values()
    assert found.key.startswith("memory | MemoryError | calc/outputs/format.py"), found.key


def _restless_markers() -> None:
    """In the worker: every marker annotate writes is new (as if it could not read its own)."""
    import itertools

    from calc.outputs import annotate

    counter = itertools.count()
    annotate.marker_text = lambda cell, digits=6: f"{next(counter)}"


def test_annotate_that_is_not_idempotent_is_reported():
    campaign, _ = run_campaign(inputs=[_given("x = 3 km\n")], jobs=1, steps=["annotate"],
                               setup=_restless_markers)
    keys = set(campaign.classes)
    assert "annotate not idempotent | annotate" in keys, keys
    assert "stale markers right after annotate | annotate" in keys, keys


def _line_eating_annotate() -> None:
    """In the worker: annotate drops the line after each cell."""
    from calc.outputs import annotate

    original = annotate.annotated_text

    def eating(sheet, text, digits=6):
        lines = original(sheet, text, digits).split("\n")
        return "\n".join(lines[:1] + lines[2:])

    annotate.annotated_text = eating


def test_annotate_changing_other_bytes_is_reported():
    campaign, _ = run_campaign(inputs=[_given("x = 3 km\n# a note\ny = 2 x\n")], jobs=1,
                               steps=["eval-json", "annotate"], setup=_line_eating_annotate)
    assert "annotate changed bytes outside its markers | annotate" in campaign.classes, \
        _summary(campaign)


def _unsafe_save() -> None:
    """In the worker: the prompt's save raises an OSError it does not handle."""
    from calc.interfaces.repl import Session

    def save(self, args):
        raise IsADirectoryError(21, "Is a directory")

    setattr(Session, "cmd_write", save)  # noqa: B010 - `cmd_save` may not exist yet
    setattr(Session, "cmd_save", save)  # noqa: B010


def test_an_exception_inside_the_prompt_is_reported():
    # the prompt survives a bug of ours (it answers "internal error …"); the harness still
    # reports it, with the exception's type
    campaign, _ = run_campaign(inputs=[_given("x = 3 km\n", ["x = 4 km", ":save saved.sheet",
                                                             ":write saved.sheet"])],
                               jobs=1, steps=["repl"], setup=_unsafe_save)
    (found,) = campaign.classes.values()
    assert found.kinds == {"internal error"}
    assert found.first.exc_type == "IsADirectoryError"


def test_a_chained_traceback_counts_once_with_its_calc_frame():
    calc = ROOT / "calc" / "engine" / "uncertain.py"
    text = (
        "Traceback (most recent call last):\n"
        '  File "/site-packages/astropy/units/core.py", line 522, in _apply_equivalencies\n'
        "astropy.units.errors.UnitConversionError: 'arcmin' and '' are not convertible\n\n"
        "During handling of the above exception, another exception occurred:\n\n"
        "Traceback (most recent call last):\n"
        f'  File "{calc}", line 131, in _add\n'
        "    return Uncertain(...)\n"
        '  File "/site-packages/astropy/units/quantity.py", line 701, in __array_ufunc__\n'
        "astropy.units.errors.UnitConversionError: Can only apply 'subtract' function\n"
        "Traceback (most recent call last):\n"
        '  File "/site-packages/numpy/core.py", line 5, in f\n'
        "KeyError: 'x'\n")
    assert parse_tracebacks(text) == [
        ("UnitConversionError", "calc/engine/uncertain.py:131 in _add",
         "Can only apply 'subtract' function"),
        ("KeyError", "", "'x'")]


def test_a_finding_class_is_the_exception_and_its_frame_or_the_symptom():
    a = Finding("exit 70", "eval", "relsheet eval main.sheet", "KeyError", "calc/x.py:3 in f")
    b = Finding("internal error", "annotate", "relsheet annotate main.sheet", "KeyError",
                "calc/x.py:3 in f")
    assert a.key() == b.key()
    c = Finding("annotate not idempotent", "annotate", "relsheet annotate main.sheet")
    assert c.key() != a.key()


# -- the campaign CI runs

def test_two_thousand_inputs_find_no_crash_hang_or_internal_error(tmp_path):
    # each input runs the core paths (text, JSON, annotate round trip, the prompt) and one of
    # the others in rotation, so that 2,000 inputs stay within about two minutes on two CPUs
    campaign, meta = run_campaign(CI_INPUTS, seed=SEED, jobs=2, rotate=1, out=tmp_path)
    assert meta["inputs"] == CI_INPUTS
    assert not campaign.classes, f"{len(campaign.classes)} crash classes (report in " \
                                 f"{tmp_path / 'report.md'}):\n{_summary(campaign)}"
