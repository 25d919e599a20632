"""README.md: the quick start is two commands, and CI runs its test command verbatim."""

from __future__ import annotations

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def quick_start_commands() -> list[str]:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    section = text.split("## Quick start", 1)[1]
    block = re.search(r"```sh\n(.*?)```", section, re.S).group(1)
    return [line for line in block.splitlines() if line.strip()]


def test_quick_start_is_two_commands():
    install_and_run, install_and_test = quick_start_commands()
    assert "relsheet eval sheets_demo/" in install_and_run
    assert '".[test]"' in install_and_test and "pytest" in install_and_test


def test_ci_runs_the_readme_test_command():
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    assert quick_start_commands()[1] in ci.splitlines()


def test_readme_demo_sheet_exists():
    sheet = quick_start_commands()[0].rsplit(" ", 1)[1]
    assert (ROOT / sheet).is_file()


def test_function_list_is_generated_from_the_registry():
    from calc.physics.catalog import markdown_table

    text = (ROOT / "README.md").read_text(encoding="utf-8")
    block = text.split("keeps it current -->\n", 1)[1].split("\n<!-- end of functions -->", 1)[0]
    assert block == markdown_table()


def test_readme_has_the_caution():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    caution = text.split("## Caution", 1)[1]
    assert "IERS Conventions" in caution and "IAU" in caution and "engineering authority" in caution


def test_readme_figures_exist_and_are_current():
    # the README embeds figures drawn from the demo sheets; sheets_demo/figures.py --check
    # (run by CI) says whether the numbers behind them changed since they were drawn
    import subprocess
    import sys

    text = (ROOT / "README.md").read_text(encoding="utf-8")
    for name in ("delay_vs_days", "doppler_vs_days"):
        assert f"](sheets_demo/figures/{name}.png)" in text
        assert (ROOT / "sheets_demo" / "figures" / f"{name}.png").stat().st_size > 10_000
    done = subprocess.run([sys.executable, str(ROOT / "sheets_demo" / "figures.py"), "--check"],
                          capture_output=True, text=True, cwd=ROOT)
    assert done.returncode == 0, done.stdout + done.stderr
