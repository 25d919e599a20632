"""calc.language.cache and calc.language.serial: the on-disk cache of the analysed grammar and of
parsed sheets is used, holds data only, and is trusted only when it is ours and unchanged."""

from __future__ import annotations

import json
import os
import pickle
import shutil
import stat
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from calc import Sheet
from calc.errors import Source
from calc.language import cache, parse, serial
from calc.language.parse import logical_lines, parse_sheet

DEMO = Path(__file__).resolve().parent.parent / "sheets_demo"
DEMO_TEXTS = {p.name: p.read_text(encoding="utf-8") for p in sorted(DEMO.glob("*.sheet"))}

SHEET = "## orbit\na = 1.5 AU  # semi-major axis\nP = 2 pi sqrt(a^3 / const.GM_sun) in d\n" \
        "m = 1.438 ± 0.001 Msun\ncheck P > 1 d\n"


@pytest.fixture
def folder(tmp_path, monkeypatch) -> Path:
    """A fresh cache folder of this test's own, with the cache on."""
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "xdg"))
    monkeypatch.delenv(cache.SWITCH, raising=False)
    return tmp_path / "xdg" / "relsheet"


@pytest.fixture
def analysed():
    """The grammar is loaded again (from this test's cache folder) on the next parse."""
    parse._parser.cache_clear()
    yield
    parse._parser.cache_clear()


@pytest.fixture
def lark_calls(monkeypatch) -> list[str]:
    """Every call of lark's parser, by start symbol."""
    from lark import Lark

    calls: list[str] = []
    original = Lark.parse

    def counted(self, text, start=None, on_error=None):
        calls.append(start)
        return original(self, text, start=start, on_error=on_error)

    monkeypatch.setattr(Lark, "parse", counted)
    return calls


def statements(text: str):
    parsed = parse_sheet(text, Source("t.sheet", text))
    assert not parsed.errors, [e.render() for e in parsed.errors]
    return parsed.statements


def fresh(text: str):
    """The statements lark's parser gives, without the cache."""
    return parse._parse(text, "sheet", Source("t.sheet", text))


def entries(folder: Path, kind: str = "parse") -> list[Path]:
    return sorted(folder.glob(f"{kind}-*.json"))


# ---- the cache is used -----------------------------------------------------------------------


def test_a_second_parse_of_the_same_text_does_not_call_lark(folder, lark_calls):
    first = statements(SHEET)
    assert lark_calls == ["sheet"]
    assert len(entries(folder)) == 1
    second = statements(SHEET)
    assert lark_calls == ["sheet"], "the second parse went to lark"
    assert second == first


def test_another_text_is_parsed(folder, lark_calls):
    statements(SHEET)
    statements(SHEET + "x = 2\n")
    assert lark_calls == ["sheet", "sheet"]


def test_a_sheet_read_from_the_cache_evaluates_the_same(folder):
    built = Sheet.from_text(SHEET)
    again = Sheet.from_text(SHEET)
    assert [c.name for c in again.cells] == [c.name for c in built.cells]
    assert again["P"] == built["P"]
    assert again.sigma("m") == built.sigma("m")
    assert [r.passed for r in again.checks] == [r.passed for r in built.checks] == [True]


def test_a_text_with_syntax_errors_is_not_cached(folder, lark_calls):
    text = "a = 1\nb = (2 +\nc = 3\n"
    first = parse_sheet(text, Source("t.sheet", text))
    assert first.errors
    assert entries(folder) == []
    second = parse_sheet(text, Source("t.sheet", text))
    assert [e.message for e in second.errors] == [e.message for e in first.errors]


def test_switched_off_nothing_is_written_and_lark_parses_every_time(folder, lark_calls,
                                                                    monkeypatch):
    monkeypatch.setenv(cache.SWITCH, "off")
    statements(SHEET)
    statements(SHEET)
    assert lark_calls == ["sheet", "sheet"]
    assert not folder.exists()


def test_the_folder_and_its_files_are_private(folder):
    statements(SHEET)
    assert stat.S_IMODE(os.stat(folder).st_mode) == 0o700
    for path in folder.iterdir():
        assert stat.S_IMODE(os.stat(path).st_mode) == 0o600, path.name


# ---- entries that are not to be trusted ----------------------------------------------------


def _entry(folder: Path) -> Path:
    (path,) = entries(folder)
    return path


def _entry_of(folder: Path, text: str) -> Path:
    return folder / f"parse-{parse._parse_subject(text)[:32]}.json"


def _reparsed_and_replaced(folder: Path, lark_calls: list, text: str = SHEET) -> None:
    """The text is parsed by lark again, gives the right statements, and a good entry is back."""
    before = len(lark_calls)
    assert statements(text) == fresh(text)
    assert len(lark_calls) == before + 2  # the cache missed; `fresh` parsed once more
    path = _entry_of(folder, text)
    assert stat.S_IMODE(os.lstat(path).st_mode) == 0o600
    calls = len(lark_calls)
    statements(text)
    assert len(lark_calls) == calls, "the replaced entry is not used"


def test_a_changed_entry_is_ignored_and_replaced(folder, lark_calls):
    statements(SHEET)
    path = _entry(folder)
    data = path.read_bytes()
    # change what the sheet means (a = 1.5 AU becomes 2.5 AU), keeping the JSON valid
    assert b'["n",1.5,"1.5"' in data
    path.write_bytes(data.replace(b'["n",1.5,"1.5"', b'["n",2.5,"1.5"'))
    _reparsed_and_replaced(folder, lark_calls)
    assert statements(SHEET)[1].expr.head.value == 1.5


def test_a_world_writable_entry_is_ignored_and_replaced(folder, lark_calls):
    statements(SHEET)
    os.chmod(_entry(folder), 0o666)
    _reparsed_and_replaced(folder, lark_calls)


def test_an_entry_owned_by_someone_else_is_ignored_and_replaced(folder, lark_calls,
                                                               monkeypatch):
    statements(SHEET)
    path = _entry(folder)
    real_open, real_fstat = os.open, os.fstat
    opened: dict[int, str] = {}

    def remembering_open(name, flags, *args, **kwargs):
        fd = real_open(name, flags, *args, **kwargs)
        opened[fd] = os.fspath(name)
        return fd

    def foreign_fstat(fd):
        info = real_fstat(fd)
        if opened.get(fd) == os.fspath(path):
            fields = list(info)
            fields[stat.ST_UID] = os.getuid() + 1
            return os.stat_result(fields)
        return info

    monkeypatch.setattr(cache.os, "open", remembering_open)
    monkeypatch.setattr(cache.os, "fstat", foreign_fstat)
    before = len(lark_calls)
    assert statements(SHEET) == fresh(SHEET)
    assert len(lark_calls) == before + 2
    monkeypatch.undo()
    # the replacement (written by us) is trusted
    calls = len(lark_calls)
    statements(SHEET)
    assert len(lark_calls) == calls


def test_a_folder_owned_by_someone_else_is_not_used(folder, lark_calls, monkeypatch):
    folder.mkdir(parents=True, mode=0o700)
    real_lstat = os.lstat

    def foreign(path, *args, **kwargs):
        info = real_lstat(path, *args, **kwargs)
        if os.fspath(path) == os.fspath(folder):
            fields = list(info)
            fields[stat.ST_UID] = os.getuid() + 1
            return os.stat_result(fields)
        return info

    monkeypatch.setattr(cache.os, "lstat", foreign)
    statements(SHEET)
    statements(SHEET)
    assert lark_calls == ["sheet", "sheet"]
    assert list(folder.iterdir()) == []  # nothing written into someone else's folder


def test_an_open_folder_is_closed_and_its_entries_no_longer_trusted(folder, lark_calls):
    statements(SHEET)
    os.chmod(folder, 0o777)  # anyone could have read the key and written entries
    _reparsed_and_replaced(folder, lark_calls)
    assert stat.S_IMODE(os.stat(folder).st_mode) == 0o700


def test_a_linked_entry_is_not_followed(folder, lark_calls, tmp_path):
    statements(SHEET)
    path = _entry(folder)
    elsewhere = tmp_path / "elsewhere.json"
    shutil.move(path, elsewhere)
    os.symlink(elsewhere, path)
    _reparsed_and_replaced(folder, lark_calls)
    assert not path.is_symlink()


def test_a_linked_folder_is_not_used(tmp_path, monkeypatch, lark_calls):
    real = tmp_path / "real"
    real.mkdir(mode=0o700)
    (tmp_path / "xdg").mkdir()
    os.symlink(real, tmp_path / "xdg" / "relsheet")
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "xdg"))
    monkeypatch.delenv(cache.SWITCH, raising=False)
    statements(SHEET)
    statements(SHEET)
    assert lark_calls == ["sheet", "sheet"]
    assert list(real.iterdir()) == []


@pytest.mark.parametrize("cut", [1, 20, 100, -1])
def test_a_truncated_entry_is_ignored(folder, lark_calls, cut):
    statements(SHEET)
    path = _entry(folder)
    data = path.read_bytes()
    path.write_bytes(data[:cut] if cut > 0 else data[:len(data) // 2])
    _reparsed_and_replaced(folder, lark_calls)


def _sign(folder: Path, text: str, payload: bytes) -> None:
    """Write ``payload`` as the entry of ``text`` with a valid digest (as only relsheet can)."""
    store = cache.open_store()
    assert store is not None and store.folder == folder
    subject = parse._parse_subject(text)
    cache.save(store, "parse", subject, payload, keep=10)


@pytest.mark.parametrize("payload", [
    b"{not json",
    b'{"format": 1, "statements": 1, "records": [["n", 1.0, "1", 1, 1, 1, 2]]',  # truncated
    b'{"format": 1, "statements": 1, "records": [["zz", 1]]}',          # an unknown node type
    b'{"format": 1, "statements": 1, "records": [["b", "+", 1, 1, 1, 2]]}',  # children missing
    b'{"format": 1, "statements": 2, "records": [["T", "x", false, 1, 1, 1, 3]]}',  # too few
    b'{"format": 1, "statements": 1, "records": [["a", "x", 1, 1, 1, 2]]}',  # not a statement
    b'{"format": 99, "statements": 0, "records": []}',                  # another layout
    b'[]',
])
def test_a_signed_entry_that_is_not_a_statement_list_is_ignored(folder, lark_calls, payload):
    statements(SHEET)
    _sign(folder, SHEET, payload)
    before = len(lark_calls)
    assert statements(SHEET) == fresh(SHEET)
    assert len(lark_calls) == before + 2


def test_an_entry_stands_only_for_its_own_text(folder, lark_calls):
    other = "x = 3 km\n"
    statements(SHEET)
    statements(other)
    mine, theirs = _entry_of(folder, SHEET), _entry_of(folder, other)
    shutil.copy(theirs, mine)  # a valid entry, under the name of another text
    os.chmod(mine, 0o600)
    _reparsed_and_replaced(folder, lark_calls)


def test_a_cache_folder_copied_from_elsewhere_does_not_verify(folder, lark_calls, tmp_path,
                                                              monkeypatch):
    statements(SHEET)
    # the same key and entries, as a checkout of a committed cache would have them
    copy = tmp_path / "copy" / "relsheet"
    shutil.copytree(folder, copy)
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "copy"))
    before = len(lark_calls)
    statements(SHEET)
    assert len(lark_calls) == before + 1


def test_an_entry_is_signed_with_keyed_blake2b_bound_to_the_key_file(folder):
    """The MAC is BLAKE2b in its keyed mode (RFC 7693 §2.5; hashlib.blake2b with key=, the
    stdlib's implementation, is the reference here), keyed by the key file's bytes bound to
    that file's identity, over the entry's kind, what it stands for and its payload."""
    import hashlib

    statements(SHEET)
    path = _entry(folder)
    header, _, payload = path.read_bytes().partition(b"\n")
    assert header.startswith(b"relsheet-cache 2 ")
    info = os.stat(folder / cache.KEY_FILE)
    identity = f"{info.st_dev}:{info.st_ino}:{info.st_ctime_ns}".encode()
    key = hashlib.blake2b(identity, key=(folder / cache.KEY_FILE).read_bytes(),
                          digest_size=32).digest()
    subject = parse._parse_subject(SHEET)
    assert subject is not None and path.name == f"parse-{subject[:32]}.json"
    mac = hashlib.blake2b(b"parse\0" + subject.encode() + b"\0", key=key)
    mac.update(payload)
    assert header[len(b"relsheet-cache 2 "):] == mac.hexdigest().encode()


def test_evaluating_a_cached_sheet_loads_neither_lark_nor_openssl(folder, tmp_path):
    """An unchanged sheet is read back without lark, and its MAC checked without hashlib's
    OpenSSL module (whose loading cost 4–7 ms of a 0.55 s run on the project's machine); a
    sheet that solves nothing, reads no table and asks for no budget or Monte Carlo run loads
    none of the modules that do those."""
    import subprocess
    import sys

    sheet = tmp_path / "s.sheet"
    sheet.write_text(SHEET, encoding="utf-8")
    code = ("import sys; sys.argv = ['relsheet', 'eval', sys.argv[1]]\n"
            "from calc.interfaces import cli\n"
            "try:\n    cli.main()\nexcept SystemExit:\n    pass\n"
            "print(sorted(m for m in sys.modules if m.split('.')[0] in "
            "('lark', '_hashlib', 'hashlib', 'hmac') or m in ('calc.engine.solve', "
            "'calc.engine.montecarlo', 'calc.engine.budget', 'calc.engine.datafiles')))")
    env = dict(os.environ, PYTHONPATH=str(DEMO.parent))
    runs = [subprocess.run([sys.executable, "-c", code, str(sheet)], capture_output=True,
                           text=True, env=env, check=True) for _ in range(2)]
    assert "'lark'" in runs[0].stdout                        # the first run parses
    assert runs[1].stdout.strip().splitlines()[-1] == "[]"   # the second reads the cache


# ---- the analysed grammar ----------------------------------------------------------------------


def _counting_analyses(monkeypatch) -> list[bool]:
    """Every analysis of a grammar text by lark (loading saved tables is not one)."""
    from lark import Lark

    analysed: list[bool] = []
    original = Lark.__init__

    def counting(self, *args, **kwargs):
        analysed.append(True)
        original(self, *args, **kwargs)

    monkeypatch.setattr(Lark, "__init__", counting)
    return analysed


def test_the_grammar_tables_are_json_and_give_the_same_parses(folder, analysed, monkeypatch):
    from lark import Lark

    built, _ = parse._parser()
    (tables,) = entries(folder, "tables")
    header, _, payload = tables.read_bytes().partition(b"\n")
    assert header.startswith(b"relsheet-cache 2 ")
    json.loads(payload)  # data, nothing else
    reference = Lark(parse.grammar_path().read_text(encoding="utf-8"), **parse._options())
    parse._parser.cache_clear()
    analyses = _counting_analyses(monkeypatch)
    loaded, _ = parse._parser()
    assert analyses == [], "the saved tables were not used"
    assert loaded is not built
    for name, text in DEMO_TEXTS.items():
        assert loaded.parse(text, start="sheet") == reference.parse(text, start="sheet"), name


def test_changed_grammar_tables_are_not_used(folder, analysed, monkeypatch):
    parse._parser()
    (tables,) = entries(folder, "tables")
    tables.write_bytes(tables.read_bytes().replace(b'"PLUS"', b'"MINUS"', 1))
    parse._parser.cache_clear()
    analyses = _counting_analyses(monkeypatch)
    parse._parser()
    assert analyses == [True], "the grammar was not analysed again"
    assert fresh("x = 1 + 2\n")[0].expr.op == "+"


class _Planted:
    """A pickle that, once loaded, leaves a mark (as an attacker's payload would run code)."""

    def __init__(self, mark: Path) -> None:
        self.mark = mark

    def __reduce__(self):
        return (Path.touch, (self.mark,))


def test_a_pickled_grammar_cache_is_never_loaded(folder, analysed, tmp_path):
    mark = tmp_path / "ran"
    folder.mkdir(parents=True, mode=0o700)
    for name in ("grammar-0123456789abcdef.cache", "grammar-fedcba9876543210.cache"):
        path = folder / name
        path.write_bytes(b"0" * 64 + b"\n" + pickle.dumps([]) + pickle.dumps(_Planted(mark)))
        os.chmod(path, 0o600)
    parse._parser()
    statements(SHEET)
    assert not mark.exists()
    assert list(folder.glob("grammar-*.cache")) == []


# ---- cached statements equal a fresh parse -------------------------------------------------------


def _statement_chunks() -> list[str]:
    chunks = []
    for text in DEMO_TEXTS.values():
        lines = text.splitlines()
        for first, last in logical_lines(text):
            chunks.append("\n".join(lines[first - 1:last]))
    return chunks


CHUNKS = _statement_chunks()

_NAMES = st.sampled_from(["a", "b2", "mass", "r_p", "ω", "km", "s", "AU", "Msun", "pi", "deg"])
_NUMBERS = st.sampled_from(["1", "2.5", "6.674_30e-11", ".5", "1e3", "42", "0.001"])


def _expressions():
    atoms = st.one_of(
        _NUMBERS, _NUMBERS.map(lambda n: f"{n}%"), _NAMES,
        st.sampled_from(["const.c", "const.GM_sun", "venus.a"]),
        st.tuples(_NUMBERS, st.lists(_NAMES, min_size=1, max_size=3)).map(
            lambda t: f"{t[0]} {' '.join(t[1])}"),
        st.tuples(_NUMBERS, _NAMES, st.sampled_from(["2", "-2", "0.5"])).map(
            lambda t: f"{t[0]} {t[1]}^{t[2]}"),
    )

    def extend(inner):
        return st.one_of(
            st.tuples(inner, st.sampled_from([" + ", " - ", " * ", " / ", " × ", " − "]),
                      inner).map("".join),
            inner.map(lambda e: f"({e})"),
            inner.map(lambda e: f"-{e}"),
            st.tuples(inner, st.sampled_from(["2", "-1", "0.5"])).map(lambda t: f"({t[0]})^{t[1]}"),
            st.lists(inner, min_size=1, max_size=3).map(lambda es: f"[{', '.join(es)}]"),
            st.tuples(st.sampled_from(["sqrt", "orbit", "f"]), st.lists(inner, max_size=3),
                      st.lists(st.tuples(_NAMES, inner), max_size=2)).map(
                lambda t: f"{t[0]}({', '.join([*t[1], *(f'{k} = {v}' for k, v in t[2])])})"),
            st.tuples(_NUMBERS, _NUMBERS, _NAMES).map(lambda t: f"{t[0]} ± {t[1]} {t[2]}"),
        )

    return st.recursive(atoms, extend, max_leaves=8)


def _statements():
    cell = st.tuples(_NAMES, _expressions(),
                     st.sampled_from(["", " in km", " in m s^-2", " in %", " in (km / s)"]),
                     st.sampled_from(["", "  # note", "  # note  #= 3 km", "  #= 1"])).map(
        lambda t: f"x_{t[0]} = {t[1]}{t[2]}{t[3]}")
    return st.one_of(
        cell, cell, cell,
        st.sampled_from(["## a heading", "# a note", "constants codata2018 iau2015",
                         "ppn gamma = 1 + 2e-5", 'use "body.sheet" as venus with a = 0.7 AU',
                         "check x_a == 3 km within 1%", "check x_a < x_b", ""]),
        st.tuples(_expressions(), st.sampled_from(["==", "<=", ">"]), _expressions()).map(
            lambda t: f"check {t[0]} {t[1]} {t[2]}"),
    )


@settings(max_examples=150, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(st.one_of(
    st.lists(st.sampled_from(CHUNKS), min_size=1, max_size=12),
    st.lists(_statements(), min_size=1, max_size=10),
).map(lambda lines: "\n".join(lines) + "\n"))
def test_cached_statements_equal_a_fresh_parse(folder, text):
    try:
        expected = fresh(text)
    except Exception:
        return  # only texts that parse are cached
    first = statements(text)
    assert first == expected
    again = parse.cached_statements(text)
    assert again == expected
    # the records round-trip on their own too (nodes, spans, numbers exactly)
    assert serial.decode(serial.encode(expected)) == expected


@pytest.mark.parametrize("name", sorted(DEMO_TEXTS))
def test_demo_sheets_from_the_cache_equal_a_fresh_parse(folder, name):
    text = DEMO_TEXTS[name]
    expected = fresh(text)
    assert statements(text) == expected
    assert parse.cached_statements(text) == expected


def _same_tree(a, b) -> bool:
    """Node-by-node equality without recursion (the nodes' own == recurses)."""
    todo = [(a, b)]
    while todo:
        x, y = todo.pop()
        if type(x) is not type(y):
            return False
        if isinstance(x, (list, tuple)) and not hasattr(x, "_fields"):
            if len(x) != len(y):
                return False
            todo.extend(zip(x, y))
        elif hasattr(x, "__slots__") and not isinstance(x, tuple):
            todo.extend((getattr(x, name), getattr(y, name)) for name in x.__slots__)
        elif x != y:
            return False
    return True


def test_deeply_nested_expressions_are_written_and_read_without_recursion(folder):
    text = "x = " + " + ".join(["1"] * 3000) + "\n"
    expected = fresh(text)
    assert _same_tree(statements(text), expected)
    assert _same_tree(parse.cached_statements(text), expected)


def test_the_cache_keeps_a_bounded_number_of_entries(folder, monkeypatch):
    monkeypatch.setattr(parse, "_KEEP_PARSES", 5)
    for i in range(12):
        statements(f"x = {i}\n")
    assert len(entries(folder)) == 5
    assert parse.cached_statements("x = 11\n") is not None  # the newest survive
