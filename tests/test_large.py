"""Large sheets: every walk over the graph or a tree is iterative, so a chain of 5,000 cells
(each using the one before) works in every command."""

from __future__ import annotations

import pytest

from calc.interfaces.cli import main

CHAIN = 5000


@pytest.fixture(scope="module")
def chain(tmp_path_factory):
    path = tmp_path_factory.mktemp("large") / "chain.sheet"
    lines = ["c0 = 1 km"] + [f"c{i} = c{i - 1} + 1 km" for i in range(1, CHAIN)]
    lines.append(f"check c{CHAIN - 1} == {CHAIN} km")
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


@pytest.mark.parametrize("argv", [
    ["eval"], ["eval", "--format", "json"], ["eval", "--format", "csv"], ["eval", "--format", "md"],
    ["deps"], ["deps", "CELL"], ["deps", "c0", "--users"], ["export", "--to", "md"],
    ["export", "--to", "tex"], ["export", "--to", "json"], ["export", "--to", "csv"],
    ["verify"], ["annotate"], ["annotate", "--stale"],
])
def test_every_command_works_on_a_long_chain(chain, argv, capsys):
    command, *rest = argv
    rest = [f"c{CHAIN - 1}" if a == "CELL" else a for a in rest]
    assert main([command, str(chain), *rest]) == 0
    out = capsys.readouterr().out
    if command == "deps" and rest and rest[0] != "c0":
        assert out.splitlines()[-1].strip().startswith("c0  (line 1)")
    if command == "eval" and not rest:
        assert f"c{CHAIN - 1}  {CHAIN}  km" in out


def test_diff_of_a_long_chain(chain, tmp_path, capsys):
    other = tmp_path / "other.sheet"
    other.write_text(chain.read_text(encoding="utf-8").replace("c0 = 1 km", "c0 = 2 km"),
                     encoding="utf-8")
    assert main(["diff", str(chain), str(other)]) == 0
    out = capsys.readouterr().out
    assert f"c{CHAIN - 1}" in out and "c0" in out
