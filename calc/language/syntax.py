"""Statement and expression nodes, and the builder that makes them from the parse.

The nodes are frozen dataclasses with a :class:`~calc.errors.Span` each. They
say what was written, not what it means: whether ``km`` in ``3 km`` is a unit
or a cell is decided later by :mod:`calc.scope`.

:class:`NodeBuilder` is handed to lark as an inline transformer, so LALR
reductions build nodes directly (no parse tree, no recursion). It only builds
nodes and checks number literals; it never evaluates anything.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Union

from ..errors import SheetSyntaxError, Span

if TYPE_CHECKING:
    from lark import Token

# ---- expressions --------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class Number:
    value: float
    text: str
    span: Span


@dataclass(frozen=True, slots=True)
class Percent:
    """``5%``: the number 0.05."""

    value: float
    text: str
    span: Span


@dataclass(frozen=True, slots=True)
class Name:
    id: str
    span: Span


@dataclass(frozen=True, slots=True)
class NamePower:
    """``s^-2`` inside a unit chain: a name raised to a literal exponent."""

    name: Name
    exponent: Expr
    span: Span


@dataclass(frozen=True, slots=True)
class Dotted:
    """``const.c``, ``ns.name``, ``orbit.a``."""

    parts: tuple[str, ...]
    span: Span


@dataclass(frozen=True, slots=True)
class Keyword:
    name: str
    value: Expr
    span: Span


@dataclass(frozen=True, slots=True)
class Call:
    function: str
    function_span: Span
    args: tuple[Expr, ...]
    keywords: tuple[Keyword, ...]
    span: Span


@dataclass(frozen=True, slots=True)
class Group:
    """A parenthesised expression; kept so the chain rule can see the brackets."""

    inner: Expr
    span: Span


@dataclass(frozen=True, slots=True)
class ArrayLiteral:
    items: tuple[Expr, ...]
    span: Span


@dataclass(frozen=True, slots=True)
class Chain:
    """An implicit product: a number, group or array followed by unit-chain items."""

    head: Expr
    items: tuple[Expr, ...]
    span: Span


@dataclass(frozen=True, slots=True)
class UnitProduct:
    """Juxtaposed factors in a unit expression after ``in`` (``m s^-2``)."""

    factors: tuple[Expr, ...]
    span: Span


@dataclass(frozen=True, slots=True)
class PercentUnit:
    """``%`` written as a unit after ``in``."""

    span: Span


@dataclass(frozen=True, slots=True)
class BinaryOp:
    op: str  # one of + - * /
    left: Expr
    right: Expr
    span: Span


@dataclass(frozen=True, slots=True)
class UnaryOp:
    op: str  # - or +
    operand: Expr
    span: Span


@dataclass(frozen=True, slots=True)
class PlusMinus:
    """``value ± sigma``: a measured input with its standard uncertainty."""

    value: Expr
    sigma: Expr
    span: Span


@dataclass(frozen=True, slots=True)
class Power:
    base: Expr
    exponent: Expr
    span: Span


Expr = Union[
    Number, Percent, Name, NamePower, Dotted, Call, Group, ArrayLiteral, Chain,
    UnitProduct, PercentUnit, BinaryOp, UnaryOp, Power, PlusMinus,
]

# ---- statements ---------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class CellDef:
    """``name = expr [in unit] [# comment] [#= marker]``."""

    name: str
    name_span: Span
    expr: Expr | None
    unit: Expr | None
    comment: str | None
    marker: str | None
    span: Span
    #: set (and ``expr`` None) for a line that names a cell but does not parse
    syntax_error: SheetSyntaxError | None = None


@dataclass(frozen=True, slots=True)
class ConstantsDef:
    """``constants codata2018 iau2015``."""

    sets: tuple[tuple[str, Span], ...]
    span: Span


@dataclass(frozen=True, slots=True)
class PPNDef:
    """``ppn gamma = expr``: the sheet-wide default of a PPN parameter."""

    parameter: str
    parameter_span: Span
    expr: Expr
    comment: str | None
    marker: str | None
    span: Span


@dataclass(frozen=True, slots=True)
class Override:
    name: str
    name_span: Span
    expr: Expr


@dataclass(frozen=True, slots=True)
class UseDef:
    """``use "file.sheet" as ns [with a = …, b = …]``."""

    path: str
    path_span: Span
    namespace: str
    namespace_span: Span
    overrides: tuple[Override, ...]
    span: Span


@dataclass(frozen=True, slots=True)
class CheckDef:
    """``check left OP right [within tolerance]``."""

    left: Expr
    op: str          # == < <= > >=
    right: Expr
    tolerance: Expr | None
    text: str
    span: Span


@dataclass(frozen=True, slots=True)
class Note:
    """``## heading`` or ``# note`` on a line of its own."""

    text: str
    heading: bool
    span: Span


@dataclass(frozen=True, slots=True)
class ExpressionLine:
    """A bare expression (``--set`` values, lines typed at the prompt)."""

    expr: Expr
    unit: Expr | None
    span: Span


Statement = Union[CellDef, UseDef, ConstantsDef, PPNDef, CheckDef, Note]

#: Words that start statements now or in later versions of the language.
RESERVED_WORDS = frozenset({"constants", "use", "check", "ppn", "plot", "in", "const", "within",
                            "as", "with"})

# ---- the builder ----------------------------------------------------------------


def token_span(tok: Token) -> Span:
    return Span(tok.line, tok.column, tok.end_line, tok.end_column)


def split_trailer(text: str) -> tuple[str | None, str | None]:
    """Split a trailing ``# comment  #= marker`` into (comment, marker)."""
    if text.startswith("#="):
        return None, text[2:].strip()
    at = text.find(" #=")
    if at < 0:
        at = text.find("\t#=")
    if at >= 0:
        return text[1:at].strip(), text[at + 3:].strip()
    return text[1:].strip(), None


def parse_number(tok: Token) -> float:
    text = tok.value.rstrip("%").replace("\u2212", "-")
    try:
        value = float(text)
    except ValueError:
        raise SheetSyntaxError(
            f"malformed number `{tok.value}`",
            token_span(tok),
            hint="`_` may only stand between two digits, as in 6.674_30e-11",
        ) from None
    if value == float("inf"):
        raise SheetSyntaxError(f"number `{tok.value}` is too large for a float", token_span(tok))
    return value


def _is_token(item, kind: str) -> bool:
    """Whether a child is a token of ``kind`` (tokens are strings; nodes never are)."""
    return isinstance(item, str) and item.type == kind  # type: ignore[attr-defined]


class NodeBuilder:
    """Turns LALR reductions into nodes. Method names follow grammar rules and aliases.

    lark calls the method named after each rule (or alias) with the rule's children; it needs
    no base class, so this module does not import lark (a sheet read from the parse cache
    never loads it)."""

    # -- atoms
    def number(self, children):
        tok = children[0]
        return Number(parse_number(tok), tok.value, token_span(tok))

    def percent(self, children):
        tok = children[0]
        return Percent(parse_number(tok) / 100.0, tok.value, token_span(tok))

    def percent_unit(self, children):
        return PercentUnit(token_span(children[0]))

    def name(self, children):
        tok = children[0]
        return Name(tok.value, token_span(tok))

    def name_power(self, children):
        tok, exponent = children
        name = Name(tok.value, token_span(tok))
        return NamePower(name, exponent, name.span.to(exponent.span))

    def dotted(self, children):
        tok = children[0]
        return Dotted(tuple(tok.value.split(".")), token_span(tok))

    def group(self, children):
        lpar, inner, rpar = children
        return Group(inner, token_span(lpar).to(token_span(rpar)))

    def unit_group(self, children):
        return self.group(children)

    def array(self, children):
        lsqb, *items, rsqb = children
        items = tuple(i for i in items if i is not None)
        return ArrayLiteral(items, token_span(lsqb).to(token_span(rsqb)))

    def call(self, children):
        tok, _lpar, *args, rpar = children
        positional: list = []
        keywords: list[Keyword] = []
        for arg in args:
            if arg is None:
                continue
            if isinstance(arg, Keyword):
                keywords.append(arg)
            elif keywords:
                raise SheetSyntaxError(
                    "a positional argument follows a keyword argument",
                    arg.span,
                    hint="put positional arguments first, then `name = value` ones",
                )
            else:
                positional.append(arg)
        return Call(tok.value, token_span(tok), tuple(positional), tuple(keywords),
                    token_span(tok).to(token_span(rpar)))

    def keyword_argument(self, children):
        tok, value = children
        return Keyword(tok.value, value, token_span(tok).to(value.span))

    # -- operators
    def _binary(self, op: str, children):
        left, right = children[0], children[-1]
        return BinaryOp(op, left, right, left.span.to(right.span))

    def add(self, children):
        return self._binary("+", children)

    def sub(self, children):
        return self._binary("-", children)

    def mul(self, children):
        return self._binary("*", children)

    def div(self, children):
        return self._binary("/", children)

    def neg(self, children):
        sign, operand = children
        return UnaryOp("-", operand, token_span(sign).to(operand.span))

    def pos(self, children):
        sign, operand = children
        return UnaryOp("+", operand, token_span(sign).to(operand.span))

    def plus_minus(self, children):
        value, _sign, sigma = children
        return PlusMinus(value, sigma, value.span.to(sigma.span))

    def pow(self, children):
        base, exponent = children
        return Power(base, exponent, base.span.to(exponent.span))

    def chain(self, children):
        head, *items = children
        return Chain(head, tuple(items), head.span.to(items[-1].span))

    def unit_product(self, children):
        return UnitProduct(tuple(children), children[0].span.to(children[-1].span))

    # -- statements
    def conversion(self, children):
        return children[0]

    def cell(self, children):
        tok, expr, *rest = children
        unit = None
        comment = marker = None
        end = expr.span
        for item in rest:
            if item is None:
                continue
            if _is_token(item, "HASH_TEXT"):
                comment, marker = split_trailer(item.value)
            else:
                unit = item
                end = item.span
        if tok.value in RESERVED_WORDS:
            raise SheetSyntaxError(
                f"`{tok.value}` is a reserved word and cannot name a cell",
                token_span(tok),
                hint=f"choose another name, such as `{tok.value}_value`",
            )
        return CellDef(tok.value, token_span(tok), expr, unit, comment, marker,
                       token_span(tok).to(end))

    def constants(self, children):
        keyword, *names = children
        sets = tuple((t.value, token_span(t)) for t in names
                     if t is not None and t.type == "NAME")
        last = sets[-1][1] if sets else token_span(keyword)
        return ConstantsDef(sets, token_span(keyword).to(last))

    def ppn(self, children):
        keyword, tok, expr, *rest = children
        comment = marker = None
        for item in rest:
            if _is_token(item, "HASH_TEXT"):
                comment, marker = split_trailer(item.value)
        return PPNDef(tok.value, token_span(tok), expr, comment, marker,
                      token_span(keyword).to(expr.span))

    def override(self, children):
        tok, expr = children
        return Override(tok.value, token_span(tok), expr)

    def use(self, children):
        keyword, path, _as, name, *rest = children
        overrides = tuple(c for c in rest if isinstance(c, Override))
        end = overrides[-1].expr.span if overrides else token_span(name)
        return UseDef(path.value[1:-1], token_span(path), name.value, token_span(name), overrides,
                      token_span(keyword).to(end))

    def check(self, children):
        keyword, left, op, right, *rest = children
        tolerance = None
        for item in rest:
            if item is None or _is_token(item, "WITHIN") or _is_token(item, "HASH_TEXT"):
                continue
            tolerance = item
        end = (tolerance or right).span
        return CheckDef(left, op.value, right, tolerance, "", token_span(keyword).to(end))

    def note(self, children):
        tok = children[0]
        text = tok.value
        heading = text.startswith("##")
        body = text[2:] if heading else text[1:]
        return Note(body.strip(), heading, token_span(tok))

    def sheet(self, children):
        return [c for c in children if c is not None]

    def expression_input(self, children):
        items = [c for c in children if c is not None and not isinstance(c, str)]
        expr = items[0]
        unit = items[1] if len(items) > 1 else None
        return ExpressionLine(expr, unit, expr.span if unit is None else expr.span.to(unit.span))

    def prompt_input(self, children):
        items = [c for c in children if c is not None and not isinstance(c, str)]
        if isinstance(items[0], (CellDef, PPNDef)):
            return items[0]
        return self.expression_input(items)
