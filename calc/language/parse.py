"""The parser: grammar loading (analysed once, cached on disk), bracket handling, errors.

``parse_sheet`` turns sheet text into statements. The whole text is parsed in
one LALR pass; only when that fails is the text split into statements and each
parsed alone, so that one bad line is reported without losing the others.

Both the analysed grammar and the statements of a sheet that parsed are cached
on disk as data (:mod:`calc.language.cache`), so an unchanged sheet is read
back without running the parser, and lark is imported only when something
needs parsing.
"""

from __future__ import annotations

import json
import re
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path
from typing import TYPE_CHECKING, Any

from ..errors import InputError, SheetError, SheetSyntaxError, Source, Span, split_lines
from . import cache, serial
from .syntax import RESERVED_WORDS, CellDef, ExpressionLine, NodeBuilder, Statement, token_span

if TYPE_CHECKING:
    from lark import Lark, Token
    from lark.exceptions import UnexpectedInput

    from .lexer import SheetLexer

# Words a reader understands, for the terminals the parser says it expected.
_TERMINAL_WORDS = {
    "NAME": "a name", "DOTTED_NAME": "a name", "NUMBER": "a number", "PERCENT": "a number",
    "LPAR": "`(`", "RPAR": "`)`", "LSQB": "`[`", "RSQB": "`]`", "COMMA": "`,`",
    "EQUAL": "`=`", "PLUS": "`+`", "MINUS": "`-`", "SLASH": "`/`", "_TIMES": "`*`",
    "_POW": "`^`", "IN": "`in`", "_NL": "the end of the line", "$END": "the end of the input",
    "HASH_TEXT": "a comment", "PERCENT_SIGN": "`%`", "CONSTANTS": "`constants`", "PPN": "`ppn`", "PM": "`±`",
    "CHECK": "`check`", "WITHIN": "`within`", "USE": "`use`", "AS": "`as`", "WITH": "`with`",
    "STRING": "a file name in quotes",
    "EQEQ": "`==`", "LE": "`<=`", "GE": "`>=`", "LT": "`<`", "GT": "`>`",
}


def grammar_path() -> Path:
    """The grammar file: inside the installed package, or beside it in a source checkout."""
    here = Path(__file__).resolve().parent.parent  # the calc package
    for candidate in (here / "grammar" / "sheet.lark", here.parent / "grammar" / "sheet.lark"):
        if candidate.is_file():
            return candidate
    raise InputError("the grammar file sheet.lark is missing from this installation",
                     hint="reinstall relsheet")


_START = ["sheet", "expression_input", "prompt_input", "function_input"]

#: Entries of the analysed grammar the cache keeps (other installed versions may want theirs).
_KEEP_TABLES = 4
#: Parsed sheets the cache keeps (the least recently used go first).
_KEEP_PARSES = 256


def _options() -> dict[str, Any]:
    from .lexer import SheetLexer

    return dict(parser="lalr", lexer=SheetLexer, transformer=NodeBuilder(), start=_START,
                maybe_placeholders=True)


@lru_cache(maxsize=1)
def _parser() -> tuple[Lark, SheetLexer]:
    from lark import Lark

    text = grammar_path().read_text(encoding="utf-8")
    store = cache.open_store()
    subject = _tables_subject(text)
    parser = _tables_from_json(cache.load(store, "tables", subject)) if store else None
    if parser is None:
        parser = Lark(text, **_options())
        if store is not None:
            payload = _tables_to_json(parser)
            if payload is not None:
                cache.save(store, "tables", subject, payload, _KEEP_TABLES)
            # analysed grammars of earlier versions were pickled: never to be loaded again
            for old in store.folder.glob("grammar-*.cache"):
                try:
                    old.unlink()
                except OSError:
                    pass
    return parser, parser.parser.lexer


def _tables_subject(grammar: str) -> str:
    import lark

    return cache.digest(b"tables 1", grammar.encode(), lark.__version__.encode())


# lark's analysed grammar (its `memo_serialize` form: dicts, lists, tuples, strings, numbers
# and our lexer class) as JSON. Tuples and dicts keyed by integers (parse states) are tagged;
# the lexer class is written as its name and put back by us, never looked up from the data.
_LEXER_NAME = "SheetLexer"
# options lark does not keep in a saved parser (objects given again when loading)
_LOADED_OPTIONS = {"transformer", "lexer", "postlex", "lexer_callbacks", "edit_terminals",
                   "_plugins", "tree_class"}


def _plain(value: Any) -> Any:
    if isinstance(value, dict):
        if all(type(k) is str for k in value):
            return {k: _plain(v) for k, v in value.items()}
        if all(type(k) is int for k in value):
            return {"#int": [[k, _plain(v)] for k, v in value.items()]}
        raise TypeError("a dict with mixed keys")
    if isinstance(value, tuple):
        return {"#tuple": [_plain(v) for v in value]}
    if isinstance(value, list):
        return [_plain(v) for v in value]
    if value is None or type(value) in (str, int, float, bool):
        return value
    raise TypeError(f"cannot store {type(value).__name__}")


def _tagged(obj: dict) -> Any:
    if len(obj) == 1:
        if "#int" in obj:
            return {int(k): v for k, v in obj["#int"]}
        if "#tuple" in obj:
            return tuple(obj["#tuple"])
    return obj


def _tables_to_json(parser: Lark) -> bytes | None:
    from lark.grammar import Rule
    from lark.lexer import TerminalDef

    from .lexer import SheetLexer

    data, memo = parser.memo_serialize([TerminalDef, Rule])
    data["options"] = {k: v for k, v in data["options"].items() if k not in _LOADED_OPTIONS}
    lexer_conf = data["parser"]["lexer_conf"]
    if lexer_conf.get("lexer_type") is not SheetLexer:
        return None
    lexer_conf["lexer_type"] = _LEXER_NAME
    try:
        return json.dumps({"data": _plain(data), "memo": _plain(memo)},
                          separators=(",", ":")).encode("ascii")
    except (TypeError, ValueError):
        return None


def _tables_from_json(payload: bytes | None) -> Lark | None:
    if payload is None:
        return None
    from lark import Lark

    from .lexer import SheetLexer

    try:
        stored = json.loads(payload, object_hook=_tagged)
        data, memo = stored["data"], stored["memo"]
        if data["parser"]["lexer_conf"]["lexer_type"] != _LEXER_NAME:
            return None
        data["parser"]["lexer_conf"]["lexer_type"] = SheetLexer
        data["options"]["lexer"] = SheetLexer
        # lark offers no public loader that skips pickle; its own loader is private
        return Lark._load_from_dict(data, memo, transformer=NodeBuilder())  # noqa: SLF001
    except Exception:  # noqa: BLE001 - any failure means: analyse the grammar again
        return None


@dataclass
class ParsedSheet:
    statements: list[Statement]
    errors: list[SheetError]


def _describe_token(tok: Token) -> str:
    if tok.type == "_NL":
        return "end of line"
    if tok.type == "$END":
        return "end of input"
    return f"`{tok.value}`"


def _expected_words(expected: set[str]) -> str | None:
    words = sorted({_TERMINAL_WORDS.get(t, f"`{t.lower()}`") for t in expected
                    if t != "HASH_TEXT"})
    if not words or len(words) > 4:
        return None
    return "expected " + " or ".join(words)


def _syntax_error(err: UnexpectedInput, text: str, joiner: SheetLexer,
                  offset: int = 0) -> SheetSyntaxError:
    """Translate a lark exception into a message a sheet author can act on."""
    from lark.exceptions import UnexpectedCharacters, UnexpectedEOF

    if isinstance(err, UnexpectedCharacters):
        position = err.pos_in_stream or 0
        ch = text[position] if position < len(text) else ""
        span = Span(err.line, err.column, err.line, err.column + 1)
        return SheetSyntaxError(f"unexpected character `{ch}`", span, hint=_character_hint(ch))
    tok = getattr(err, "token", None)
    if isinstance(err, UnexpectedEOF) or tok is None:
        return SheetSyntaxError("unexpected end of input", None)
    if tok.type == "$END":
        span = Span(err.line, err.column, err.line, err.column + 1)
    else:
        span = token_span(tok)
    opener = joiner.open_brackets[-1] if joiner.open_brackets else None
    if opener is not None and tok.line > opener.line:
        closing = ")" if opener.value == "(" else "]"
        return SheetSyntaxError(
            f"`{opener.value}` is never closed", token_span(opener),
            hint=f"add `{closing}`; inside brackets a statement goes on to the next line")
    expected = set(getattr(err, "expected", ()) or ())
    lines = split_lines(text)
    here = tok.line - offset        # the line in ``text``
    words = lines[here - 1].split(maxsplit=1) if 0 < here <= len(lines) else []
    first_word = words[0] if words else ""
    line_text = lines[here - 1] if 0 < here <= len(lines) else ""
    named = _CELL_START.match(line_text)
    if named and named.group(1) in RESERVED_WORDS:
        column = named.start(1) + 1
        word = named.group(1)
        return SheetSyntaxError(f"`{word}` is a reserved word and cannot name a cell",
                                Span(tok.line, column, tok.line, column + len(word)),
                                hint=f"choose another name, such as `{word}_value`")
    if first_word in _STATEMENT_FORMS and tok.type in ("_NL", "$END", "NAME", "NUMBER", "COLON",
                                                      "EQEQ", "FOR", "VS", "STRING", "IN"):
        return SheetSyntaxError(f"unexpected {_describe_token(tok)} in a `{first_word}` statement",
                                span, hint=f"write it as {_STATEMENT_FORMS[first_word]}")
    if first_word == "check" and tok.value == "=":
        return SheetSyntaxError("a check compares with `==`, not `=`", span,
                                hint="write for example `check M == 1 Msun within 1%`")
    if tok.type == "_NL" and "EQUAL" in expected:
        return SheetSyntaxError("a cell needs `=` and an expression", span,
                                hint="write `name = expression`")
    if tok.type in ("NAME", "NUMBER", "PERCENT") and "EQUAL" in expected:
        return SheetSyntaxError(f"unexpected {_describe_token(tok)}: a cell needs `=` after its name",
                                span, hint="write `name = expression`")
    if tok.type in ("NAME", "NUMBER", "PERCENT", "DOTTED_NAME", "LPAR", "LSQB") \
            and expected & {"PLUS", "SLASH", "_NL"}:
        return SheetSyntaxError(
            f"unexpected {_describe_token(tok)}: two values need an operator between them",
            span, hint="write `*` to multiply; only a name right after a number is read as a unit")
    if tok.type in ("_NL", "$END", "RPAR", "RSQB", "COMMA") and "PERCENT_SIGN" in expected:
        return SheetSyntaxError(f"unexpected {_describe_token(tok)}: a unit is missing after `in`",
                                span, hint="write for example `in km / s`")
    if tok.type in ("_NL", "$END", "RPAR", "RSQB", "COMMA") and "NUMBER" in expected:
        return SheetSyntaxError(f"unexpected {_describe_token(tok)}: an expression is missing", span)
    if tok.type in ("RPAR", "RSQB"):
        return SheetSyntaxError(f"`{tok.value}` closes no open bracket", span)
    if tok.type == "IN":
        # `(a in km) * 2`, `f(x) = x in km`, `max(a in km, b)`
        return SheetSyntaxError("`in` stands at the end of a cell only: it chooses the unit the "
                                "cell's result is shown in", span,
                                hint="move `in …` to the end of the line; inside an expression "
                                     "units convert by themselves")
    return SheetSyntaxError(f"unexpected {_describe_token(tok)}", span,
                            hint=_expected_words(expected))


#: How each statement is written, for the hint of a syntax error in one.
_STATEMENT_FORMS = {
    "table": "`table NAME: cell, cell, …`",
    "plot": "`plot y vs x` (`plot y1, y2 vs x`, `plot z vs x, y`, then `log x`, `log y`)",
    "solve": "`solve f(x) == y for x` (equations joined by `,`, `for x in [lo, hi]`)",
    "correlation": "`correlation a, b = 0.3`",
}


def _character_hint(ch: str) -> str | None:
    return {
        "\u00b0": "write the unit `deg`",
        "\u2032": "write the unit `arcmin`",
        "\u2033": "write the unit `arcsec`",
        "'": "file names go in double quotes: use \"other.sheet\" as ns",
        "$": "cells are named by their names, without `$`",
        "\u2013": "use `-` for minus",
    }.get(ch)


def _parse(text: str, start: str, source: Source, first_line: int = 1):
    """Parse ``text`` from the rule ``start``; ``first_line`` is the file's line number of the
    text's first line (recovery parses statements alone)."""
    parser, joiner = _parser()
    from lark.exceptions import UnexpectedInput

    joiner.line_offset = first_line - 1
    try:
        return parser.parse(text, start=start)
    except UnexpectedInput as err:
        raise _syntax_error(err, text, joiner, first_line - 1).located(source=source) from None
    except SheetError as err:
        raise err.located(source=source) from None
    except RecursionError:
        raise InputError("the expression is nested too deeply", None,
                         hint="split it into several cells", source=source) from None
    finally:
        joiner.line_offset = 0


#: A line that starts a statement (at the start of the line): a cell, a keyword, a note.
_STATEMENT_START = re.compile(r"(#|(check|use|constants|ppn)\b|[^\W\d]\w*\s*=(?!=))")


def logical_lines(text: str, start: int = 1) -> list[tuple[int, int]]:
    """(first, last) physical line numbers of each statement, joining lines inside brackets.

    Used only to recover after a syntax error, from line ``start`` on; a `#` starts a
    comment that runs to the end of the line, and brackets in it do not count. A line that
    begins (at its first column) like a new statement while a bracket is open starts a new
    statement: the one before left its bracket open. One pass over the text.
    """
    lines = split_lines(text)
    spans: list[tuple[int, int]] = []
    depth = 0
    first: int | None = None
    for number in range(start, len(lines) + 1):
        line = lines[number - 1]
        if first is not None and depth > 0 and _STATEMENT_START.match(line):
            spans.append((first, number - 1))
            first, depth = None, 0
        if first is None:
            if not line.strip():
                continue
            first = number
        code = line.split("#", 1)[0]
        depth = max(0, depth + code.count("(") + code.count("[") - code.count(")")
                    - code.count("]"))
        if depth == 0:
            spans.append((first, number))
            first = None
    if first is not None:
        spans.append((first, len(lines)))
    return spans


_CELL_START = re.compile(r"\s*([^\W\d]\w*)\s*=(?!=)")
_FUNCTION_START = re.compile(r"\s*([^\W\d]\w*)\s*\(([^()=]*)\)\s*=(?!=)")


def broken_functions(text: str, errors: list[SheetError]) -> dict[str, int]:
    """The functions named by lines `name(x, y) = …` that do not parse, with their line
    numbers: the calls of them can then say so instead of "unknown function"."""
    lines = split_lines(text)
    named: dict[str, int] = {}
    for error in errors:
        line = error.span.line if error.span is not None else 0
        match = _FUNCTION_START.match(lines[line - 1]) if 0 < line <= len(lines) else None
        if match is not None:
            named.setdefault(match.group(1), line)
    return named


def _broken_cell(line: str, first: int, last: int, lines: list[str], err: SheetError
                 ) -> CellDef | None:
    """A line ``name = …`` that does not parse still defines the cell ``name``, failed,
    so the cells that use it say which input failed instead of "unknown name"."""
    match = _CELL_START.match(line)
    if match is None or match.group(1) in RESERVED_WORDS:
        return None
    column = match.start(1) + 1
    name = match.group(1)
    name_span = Span(first, column, first, column + len(name))
    whole = Span(first, column, last, len(lines[last - 1]) + 1)
    return CellDef(name, name_span, None, None, None, None, whole, syntax_error=err)


@lru_cache(maxsize=1)
def _parse_stamp() -> bytes | None:
    """What parsing depends on besides the text: the grammar, the code that lexes, parses and
    builds nodes, the record layout and lark's version. None when a part cannot be read (no
    parse cache then)."""
    from importlib.util import find_spec

    here = Path(__file__).resolve().parent
    try:
        lark_spec = find_spec("lark")  # its version, without importing it
        if lark_spec is None or lark_spec.origin is None:
            return None
        parts = [grammar_path().read_bytes(), Path(lark_spec.origin).read_bytes()]
        parts += [(here / f"{name}.py").read_bytes()
                  for name in ("lexer", "parse", "syntax", "serial")]
    except (OSError, SheetError, ValueError):
        return None
    parts.append(str(serial.FORMAT).encode())
    return cache.digest(*parts).encode("ascii")


def _parse_subject(text: str) -> str | None:
    stamp = _parse_stamp()
    if stamp is None:
        return None
    return cache.digest(b"parse 1", stamp, text.encode("utf-8", "surrogatepass"))


def cached_statements(text: str) -> list[Statement] | None:
    """The statements of ``text`` from the parse cache, or None (not cached, cache off)."""
    store = cache.open_store()
    subject = _parse_subject(text) if store is not None else None
    if subject is None:
        return None
    payload = cache.load(store, "parse", subject)
    return serial.decode(payload) if payload is not None else None


def _remember(text: str, statements: list[Statement]) -> None:
    store = cache.open_store()
    subject = _parse_subject(text) if store is not None else None
    if subject is None:
        return
    try:
        payload = serial.encode(statements)
    except (serial.NotEncodable, RecursionError):
        return
    cache.save(store, "parse", subject, payload, _KEEP_PARSES)


def parse_sheet(text: str, source: Source) -> ParsedSheet:
    """Parse a whole sheet; syntax errors are collected statement by statement (in time
    linear in the size of the text). A sheet that parsed before is read back from the parse
    cache."""
    cached = cached_statements(text)
    if cached is not None:
        return ParsedSheet(cached, [])
    try:
        parsed = _parse(text, "sheet", source)
    except SheetError:
        pass
    else:
        _remember(text, parsed)
        return ParsedSheet(parsed, [])
    lines = split_lines(text)
    statements: list[Statement] = []
    errors: list[SheetError] = []
    for first, last in logical_lines(text):
        chunk = "\n".join(lines[first - 1:last]) + "\n"
        try:
            statements.extend(_parse(chunk, "sheet", source, first))
        except SheetError as err:
            if last > first and err.span is not None and err.span.line == first \
                    and "never closed" in err.message:
                # a bracket left open: the lines after it are statements of their own
                err = SheetSyntaxError(err.message, err.span, hint=err.hint, source=source)
                rest = [(n, n) for n in range(first + 1, last + 1) if lines[n - 1].strip()]
                _record(statements, errors, lines, first, first, err)
                for line_no, _ in rest:
                    try:
                        statements.extend(_parse(lines[line_no - 1] + "\n", "sheet", source,
                                                 line_no))
                    except SheetError as inner:
                        _record(statements, errors, lines, line_no, line_no, inner)
                continue
            _record(statements, errors, lines, first, last, err)
    return ParsedSheet(statements, errors)


def _record(statements: list, errors: list, lines: list[str], first: int, last: int,
            err: SheetError) -> None:
    broken = _broken_cell(lines[first - 1], first, last, lines, err)
    if broken is not None:
        statements.append(broken)
    errors.append(err)


def parse_line(text: str, source: Source, line: int) -> list[Statement]:
    """Parse one physical line of a sheet that stands at ``line`` of its file (the statements
    keep the file's line numbers); raises SheetError when it is not a whole statement."""
    return _parse(text + "\n", "sheet", source, line)


def parse_expression(text: str, source: Source) -> ExpressionLine:
    """Parse one expression with an optional ``in unit`` (the right side of ``--set``)."""
    return _parse(text, "expression_input", source)


def parse_prompt_line(text: str, source: Source):
    """Parse a line typed at the prompt: a :class:`CellDef` or an :class:`ExpressionLine`."""
    return _parse(text, "prompt_input", source)


#: A line typed at the prompt that defines a function: `name(params) = …`.
_FUNCTION_LINE = re.compile(r"\s*[^\W\d]\w*\s*\(\s*([^\W\d]\w*\s*(,\s*[^\W\d]\w*\s*)*)?\)\s*=(?!=)")


def parse_function_line(text: str, source: Source):
    """Parse a line typed at the prompt that defines a function (``f(x) = …``); None when the
    line is not one (the prompt then reads it with :func:`parse_prompt_line`)."""
    if not _FUNCTION_LINE.match(text):
        return None
    return _parse(text, "function_input", source)
