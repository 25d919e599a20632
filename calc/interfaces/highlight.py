"""Syntax highlighting of the sheet language: a Pygments lexer.

The interactive prompt colours what is typed with it; editors and
documentation tools that use Pygments find it under the name `relsheet`
(registered as a `pygments.lexers` entry point in pyproject.toml).
"""

from __future__ import annotations

from pygments.lexer import RegexLexer, bygroups, words
from pygments.token import (
    Comment,
    Generic,
    Keyword,
    Name,
    Number,
    Operator,
    Punctuation,
    String,
    Text,
    Whitespace,
)

from ..language.syntax import RESERVED_WORDS

_NUMBER = r"(\d[\d_]*(\.[\d_]*)?|\.\d[\d_]*)([eE][+\-\u2212]?\d[\d_]*)?%?"
_NAME = r"[^\W\d][\w\u0300-\u036f\u1ab0-\u1aff\u1dc0-\u1dff\u20d0-\u20ff\ufe20-\ufe2f]*"


class SheetLexer(RegexLexer):
    """Tokens of a relsheet sheet (`.sheet`)."""

    name = "relsheet"
    aliases = ["relsheet", "sheet"]
    filenames = ["*.sheet"]
    mimetypes = ["text/x-relsheet"]

    tokens = {
        "root": [
            (r"^[ \t]*##[^\n]*", Generic.Heading),
            (r"#[→=][^\n]*", Comment.Special),      # a result marker written by annotate
            (r"#[^\n]*", Comment.Single),
            (r'"[^"\n]*"', String),
            (words(tuple(sorted(RESERVED_WORDS | {"sigma", "inf", "pi"})), suffix=r"\b"),
             Keyword),
            (rf"(const|ppn)(\.)({_NAME})", bygroups(Name.Builtin, Punctuation, Name.Constant)),
            (rf"({_NAME})(\s*)(\()", bygroups(Name.Function, Whitespace, Punctuation)),
            (rf"({_NAME})(\.)({_NAME})", bygroups(Name.Namespace, Punctuation, Name.Attribute)),
            (_NUMBER, Number),
            (_NAME, Name),
            (r"\*\*|\+/-|==|<=|>=|[-+*/^=<>%\u00b1\u2212\u00d7\u00b7]", Operator),
            (r"[()\[\],]", Punctuation),
            (r"\s+", Whitespace),
            (r".", Text),
        ],
    }
