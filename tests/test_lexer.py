"""calc.language.lexer: the fast lexer yields exactly the tokens lark's own standard lexer yields;
where a statement goes on inside brackets, the tokens of the same statement written on one line
(the one-line forms are written by hand or known to the generator, never re-derived)."""

from __future__ import annotations

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from lark import Lark
from lark.exceptions import UnexpectedCharacters

from calc.errors import SheetError
from calc.language.parse import _parser, grammar_path

# Statements without a line break inside brackets: the fast lexer's tokens, positions included,
# are exactly lark's standard lexer's.
SAMPLES = [
    "## Heading\n# note\nconstants codata2018 iau2015\n",
    "v = 3 km / dt in m / s  # speed  #= 1.5 m / s\n",
    "x = f(1, b = 2) + [1, 2, 3] km ** 2 ^ 3\n\n\n",
    "g = 9.81 m/s^2 in m s^-2\r\ny = 5% * .5e-3 - 6.674_30e-11\n",
    "z = const.c \u00d7 2 \u2212 1 \u00b7 \u03c9\n",
    "in = 3\nconstants = 4\n",
    "\t x = 1\t# tab\n",
]

# Statements that go on inside brackets, each with the same statement written by hand on one
# line (the language: inside brackets a newline or a comment does not end the statement).
CONTINUED = [
    ("x = f(1,\n  b = 2) + [1, 2, 3] km ** 2 ^ 3\n\n\n",
     "x = f(1,   b = 2) + [1, 2, 3] km ** 2 ^ 3\n\n\n"),
    ("y = [1,  # first\n     2,\r\n     3]\n",
     "y = [1,   2,  3]\n"),
    ("z = g((a\n  + b)\n\n  , [c,\n d])\nw = 1\n",
     "z = g((a + b) , [c, d])\nw = 1\n"),
]


@pytest.fixture(scope="module")
def reference():
    # lark's own standard lexer over the same grammar (the reference implementation)
    return Lark(grammar_path().read_text(), parser="lalr", lexer="basic",
                start=["sheet"], maybe_placeholders=True)


def tokens_of(text: str):
    lexer = _parser()[1]
    from lark.lexer import LexerState
    from lark.utils import TextSlice
    return list(lexer.lex(LexerState(TextSlice(text, 0, len(text))), None))


def describe(tokens):
    return [(t.type, str(t), t.line, t.column, t.end_line, t.end_column, t.start_pos, t.end_pos)
            for t in tokens]


def kinds_and_text(tokens):
    return [(t.type, str(t)) for t in tokens]


def assert_joined(reference, text: str, one_line: str) -> None:
    """`text` lexes to the tokens of `one_line` (the same statements with every line break
    inside brackets written as a space), and each token keeps the place lark's standard lexer
    gives it in `text`; the tokens left out are only line breaks and comments."""
    ours = tokens_of(text)
    assert kinds_and_text(ours) == kinds_and_text(reference.lex(one_line))
    raw = describe(reference.lex(text))
    kept = describe(ours)
    position = 0
    for token in kept:   # ours is lark's stream of `text` with some tokens left out
        while raw[position] != token:
            assert raw[position][0] in ("_NL", "HASH_TEXT"), (raw[position], token)
            position += 1
        position += 1
    assert all(t[0] in ("_NL", "HASH_TEXT") for t in raw[position:])


@pytest.mark.parametrize("text", SAMPLES)
def test_same_tokens_as_lark(reference, text):
    assert describe(tokens_of(text)) == describe(reference.lex(text))


@pytest.mark.parametrize("text, one_line", CONTINUED)
def test_line_breaks_inside_brackets_are_joined(reference, text, one_line):
    assert_joined(reference, text, one_line)


def test_the_input_always_ends_with_a_newline():
    # written from the language's rule, not from lark: `x = 1` ends in a newline at 1:6
    last = tokens_of("x = 1")[-1]
    assert (last.type, str(last), last.line, last.column, last.start_pos) == ("_NL", "\n", 1, 6, 5)
    assert [t.type for t in tokens_of("x = 1\n")].count("_NL") == 1


@pytest.mark.parametrize("text, line, column", [
    ("x = (1 +\n 2\n", 1, 5), ("y = [f(1)\n", 1, 5), ("z = ((1)\n", 1, 5),
    ("w = (1]\n", 1, 5),   # a `]` does not close a `(`
])
def test_a_bracket_left_open_is_reported_at_the_bracket(text, line, column):
    with pytest.raises(SheetError, match="is never closed") as info:
        tokens_of(text)
    assert (info.value.span.line, info.value.span.column) == (line, column)


# ---- generated statements -------------------------------------------------------------------
# Pieces that lex on their own; a statement is pieces and bracket groups, and inside a bracket
# group line breaks and comments ("fillers") may stand between pieces. The generator knows where
# it put each filler, so the one-line form (each filler written as a space) is known without
# re-implementing the joining.
PIECES = ["a", "b1", "x", "1.5e3", "2", "+", "-", "*", "/", "^", "**", ",", "=", "%", "\u03c9",
          "in", "const.c", " ", "\t"]
FILLERS = ["\n", "\n\n  ", "  # a note\n", "\r\n", "\n# whole-line note\n"]

_piece = st.sampled_from(PIECES).map(lambda p: (p, p))
_filler = st.sampled_from(FILLERS).map(lambda f: (f, " "))


def _group(inner):
    brackets = st.sampled_from([("(", ")"), ("[", "]")])
    body = st.lists(st.one_of(inner, _filler), max_size=6)
    return st.tuples(brackets, body).map(
        lambda b: (b[0][0] + "".join(t for t, _ in b[1]) + b[0][1],
                   b[0][0] + "".join(o for _, o in b[1]) + b[0][1]))


_element = st.recursive(_piece, _group, max_leaves=12)
_statement = st.lists(_element, min_size=1, max_size=6).map(
    lambda parts: ("".join(t for t, _ in parts) + "\n", "".join(o for _, o in parts) + "\n"))


@settings(max_examples=300, deadline=None)
@given(st.lists(_statement, min_size=1, max_size=3))
def test_generated_statements_with_continued_lines(reference, statements):
    text = "".join(t for t, _ in statements)
    one_line = "".join(o for _, o in statements)
    assert_joined(reference, text, one_line)


@settings(max_examples=200, deadline=None)
@given(st.lists(st.sampled_from(list("ab x1.e_+-*/^,=#%\n\t \u03c9") + ["in", "**", "const.c", "\r\n"]),
                max_size=30).map(lambda parts: "".join(parts) + "\n"))
def test_same_tokens_on_generated_text(reference, text):
    # no brackets here, so nothing is joined: lark's tokens exactly, or its error at its place
    try:
        expected = describe(reference.lex(text))
    except UnexpectedCharacters as err:
        with pytest.raises(UnexpectedCharacters) as ours:
            tokens_of(text)
        assert (ours.value.line, ours.value.column) == (err.line, err.column)
        return
    assert describe(tokens_of(text)) == expected
