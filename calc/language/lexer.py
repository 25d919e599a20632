"""A single-pass lexer for the sheet language, plugged into lark's LALR parser.

lark's own lexers re-run their bookkeeping for every token; this one matches
one master regular expression and tracks lines itself, which makes lexing a
2,000-cell sheet several times faster. The token *patterns* stay in
``grammar/sheet.lark``: they are taken from the grammar's terminal
definitions, and construction fails if the grammar gains a terminal this
lexer does not know. ``tests/test_lexer.py`` checks that the token stream
equals the one lark's standard lexer produces.

Keywords (``in``, ``constants``, …) are reserved everywhere, as the language
reserves them. The lexer also joins lines inside brackets (see :meth:`SheetLexer.lex`).
"""

from __future__ import annotations

import re
import unicodedata

from lark import Token
from lark.exceptions import UnexpectedCharacters
from lark.lexer import Lexer

from ..errors import InputError, SheetSyntaxError, Span

#: Brackets nested deeper than this are refused before they reach the parser.
MAX_BRACKET_DEPTH = 64
#: A statement longer than this many tokens is refused as it is read (an 8 MB line of
#: `1+1+…` would otherwise take the parser a minute and gigabytes); data this size belongs in
#: a table file (`read_table`).
MAX_STATEMENT_TOKENS = 100_000

_CLOSING = {"LPAR": "RPAR", "LSQB": "RSQB"}


def _token(kind: str, value: str, start: int, line: int, column: int, end_line: int,
           end_column: int, end: int) -> Token:
    """A lark Token, filled in directly (its constructor's keyword handling costs three times
    as much, once per token)."""
    tok = str.__new__(Token, value)
    tok.type = kind
    tok.value = value
    tok.start_pos = start
    tok.line = line
    tok.column = column
    tok.end_line = end_line
    tok.end_column = end_column
    tok.end_pos = end
    return tok


def _span(tok: Token) -> Span:
    # lark types a token's place as optional; a token this lexer made always has one
    return Span(tok.line or 0, tok.column or 0, tok.end_line or 0, tok.end_column or 0)

# Terminals matched by their regular expression from the grammar, longest-first where
# one pattern is a prefix of another (PERCENT before NUMBER, DOTTED_NAME before NAME).
_PATTERN_TERMINALS = ("_NL", "HASH_TEXT", "STRING", "DATE", "PERCENT", "NUMBER", "DOTTED_NAME",
                      "NAME")

# Operators that the grammar spells as alternatives under one terminal.
_MULTI = {"^": "_POW", "**": "_POW", "*": "_TIMES", "\u00d7": "_TIMES", "\u00b7": "_TIMES",
          "-": "MINUS", "\u2212": "MINUS", "\u00b1": "PM", "+/-": "PM"}


class SheetLexer(Lexer):
    """lark custom lexer (interface 2): ``lex(lexer_state, parser_state)`` yields Tokens."""

    __future_interface__ = 2

    def __init__(self, lexer_conf) -> None:
        by_name = {t.name: t for t in lexer_conf.terminals}
        self.keywords: dict[str, str] = {}
        self.operators: dict[str, str] = {}
        ignored = set(lexer_conf.ignore)
        for term in lexer_conf.terminals:
            if term.name in _PATTERN_TERMINALS or term.name in _MULTI.values() or term.name in ignored:
                continue
            if term.pattern.type != "str":
                raise ValueError(f"the sheet lexer does not know terminal {term.name}")
            value = term.pattern.value
            if re.fullmatch(by_name["NAME"].pattern.to_regexp(), value):
                self.keywords[value] = term.name
            else:
                self.operators[value] = term.name
        for symbol, name in _MULTI.items():
            if name in by_name:
                self.operators[symbol] = name
        missing = [n for n in _PATTERN_TERMINALS if n not in by_name]
        if missing:
            raise ValueError(f"grammar lacks terminals {missing}")
        parts = [f"(?P<{n.lstrip('_') or n}>{by_name[n].pattern.to_regexp()})"
                 for n in _PATTERN_TERMINALS]
        ops = sorted(self.operators, key=len, reverse=True)
        parts.append("(?P<OP>" + "|".join(re.escape(o) for o in ops) + ")")
        space = "|".join(by_name[n].pattern.to_regexp() for n in sorted(ignored))
        # white space before a token is consumed by the same match (half the regex calls); the
        # ignored pattern already takes a whole run, so it is optional, not repeated: a
        # repeated run (`(?:[ ]+)*`) backtracks exponentially when the rest fails
        self.master = re.compile(f"(?:{space})?(?:" + "|".join(parts) + ")")
        self.trailing_space = re.compile(f"(?:{space})?\\Z")
        self.group_names = {n.lstrip("_") or n: n for n in _PATTERN_TERMINALS}
        self.open_brackets: list[Token] = []
        self.last: Token | None = None
        #: the text being lexed starts after this many lines of the file (error recovery
        #: parses statements one by one and keeps the file's line numbers)
        self.line_offset = 0

    def lex(self, lexer_state, parser_state):
        """Tokens of the text. Inside brackets a newline or comment does not end the statement,
        so those tokens are dropped there; brackets nested absurdly deep are refused, one left
        open is reported at the bracket, and the input always ends with a newline."""
        count = 0
        for tok in self._tokens(lexer_state):
            kind = tok.type
            count += 1
            if count > MAX_STATEMENT_TOKENS:
                raise InputError(f"a statement of more than {MAX_STATEMENT_TOKENS:,} tokens",
                                 _span(tok), hint="split it into several cells, or put the "
                                                  "data in a table file (read_table)")
            if kind == "_NL" and not self.open_brackets:
                count = 0
            elif kind == "LPAR" or kind == "LSQB":
                self.open_brackets.append(tok)
                if len(self.open_brackets) > MAX_BRACKET_DEPTH:
                    raise InputError(f"brackets nested more than {MAX_BRACKET_DEPTH} deep",
                                     _span(tok), hint="split the expression into several cells")
            elif kind == "RPAR" or kind == "RSQB":
                stack = self.open_brackets
                if stack and _CLOSING[stack[-1].type] == kind:
                    stack.pop()
            elif self.open_brackets and (kind == "_NL" or kind == "HASH_TEXT"):
                continue
            self.last = tok
            yield tok
        if self.open_brackets:
            opener = self.open_brackets[-1]
            raise SheetSyntaxError(f"`{opener.value}` is never closed", _span(opener),
                                   hint=f"add `{')' if opener.value == '(' else ']'}`; inside brackets a "
                                        "statement goes on to the next line")
        last = self.last
        if last is not None and last.type != "_NL":
            yield Token("_NL", "\n", start_pos=last.end_pos, line=last.end_line,
                        column=last.end_column, end_line=last.end_line,
                        end_column=last.end_column + 1, end_pos=last.end_pos)

    def _tokens(self, lexer_state):
        self.open_brackets = []
        self.last = None
        text_slice = lexer_state.text
        text = text_slice.text
        pos = text_slice.start
        end = text_slice.end
        match = self.master.match
        keywords = self.keywords
        operators = self.operators
        names = self.group_names
        line = 1 + self.line_offset
        line_start = 0
        while pos < end:
            m = match(text, pos, end)
            if m is None:
                if self.trailing_space.match(text, pos, end):
                    return
                bad = pos + len(text[pos:end]) - len(text[pos:end].lstrip(" \t\f"))
                raise UnexpectedCharacters(text, bad, line, bad - line_start + 1,
                                           allowed=None, considered_tokens=None)
            kind = m.lastgroup
            stop = m.end()
            pos = m.start(kind)
            value = m.group(kind)
            column = pos - line_start + 1
            if kind == "OP":
                kind = operators[value]
            else:
                kind = names[kind]
                if kind == "NAME":
                    kind = keywords.get(value, "NAME")
            if kind == "_NL":
                newlines = value.count("\n")
                yield _token(kind, value, pos, line, column, line + newlines,
                             stop - (value.rfind("\n") + pos + 1) + 1, stop)
                line += newlines
                line_start = value.rfind("\n") + pos + 1
            else:
                width = len(value)
                if (kind == "NAME" or kind == "DOTTED_NAME") and not value.isascii():
                    # one spelling of a name: `Ṗ` as one character or as P and a combining dot
                    value = unicodedata.normalize("NFC", value)
                yield _token(kind, value, pos, line, column, line, column + width, stop)
            pos = stop
