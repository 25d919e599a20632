"""calc.language.lexer: the fast lexer yields exactly the tokens lark's own standard lexer yields
(after the line joining inside brackets that the language specifies)."""

from __future__ import annotations

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from lark import Lark, Token
from lark.exceptions import UnexpectedCharacters

from calc.errors import SheetError
from calc.language.parse import _parser, grammar_path

SAMPLES = [
    "## Heading\n# note\nconstants codata2018 iau2015\n",
    "v = 3 km / dt in m / s  # speed  #= 1.5 m / s\n",
    "x = f(1,\n  b = 2) + [1, 2, 3] km ** 2 ^ 3\n\n\n",
    "g = 9.81 m/s^2 in m s^-2\r\ny = 5% * .5e-3 - 6.674_30e-11\n",
    "z = const.c \u00d7 2 \u2212 1 \u00b7 ω\n",
    "in = 3\nconstants = 4\n",
    "\t x = 1\t# tab\n",
]


@pytest.fixture(scope="module")
def reference():
    # lark's own standard lexer over the same grammar
    return Lark(grammar_path().read_text(), parser="lalr", lexer="basic",
                start=["sheet"], maybe_placeholders=True)


def tokens_of(text: str):
    lexer = _parser()[1]
    from lark.lexer import LexerState
    from lark.utils import TextSlice
    return list(lexer.lex(LexerState(TextSlice(text, 0, len(text))), None))


def joined(tokens):
    """The reference for our line joining: inside brackets drop newlines and comments, and end
    the input with a newline (what the language specifies)."""
    stack, last = [], None
    for tok in tokens:
        if tok.type in ("LPAR", "LSQB"):
            stack.append(tok.type)
        elif tok.type in ("RPAR", "RSQB"):
            if stack and {"LPAR": "RPAR", "LSQB": "RSQB"}[stack[-1]] == tok.type:
                stack.pop()
        elif stack and tok.type in ("_NL", "HASH_TEXT"):
            continue
        last = tok
        yield tok
    if stack:
        raise SheetError("a bracket is left open")
    if last is not None and last.type != "_NL":
        yield Token("_NL", "\n", start_pos=last.end_pos, line=last.end_line,
                    column=last.end_column, end_line=last.end_line,
                    end_column=last.end_column + 1, end_pos=last.end_pos)


def describe(tokens):
    return [(t.type, str(t), t.line, t.column, t.end_line, t.end_column, t.start_pos, t.end_pos)
            for t in tokens]


@pytest.mark.parametrize("text", SAMPLES)
def test_same_tokens_as_lark(reference, text):
    assert describe(tokens_of(text)) == describe(joined(reference.lex(text)))


@settings(max_examples=200, deadline=None)
@given(st.lists(st.sampled_from(list("ab x1.e_+-*/^()[],=#%\n\t ω") + ["in", "**", "const.c", "\r\n"]),
                max_size=30).map("".join))
def test_same_tokens_on_generated_text(reference, text):
    try:
        expected = describe(joined(reference.lex(text)))
    except UnexpectedCharacters as err:
        with pytest.raises(UnexpectedCharacters) as ours:
            tokens_of(text)
        assert (ours.value.line, ours.value.column) == (err.line, err.column)
        return
    except SheetError:   # a bracket left open: ours reports it too
        with pytest.raises(SheetError, match="is never closed"):
            tokens_of(text)
        return
    assert describe(tokens_of(text)) == expected
