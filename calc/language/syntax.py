"""Statement and expression nodes, and the builder that makes them from the parse.

The nodes are small immutable objects with a :class:`~calc.errors.Span` each. They
say what was written, not what it means: whether ``km`` in ``3 km`` is a unit
or a cell is decided later by :mod:`calc.scope`.

:class:`NodeBuilder` is handed to lark as an inline transformer, so LALR
reductions build nodes directly (no parse tree, no recursion). It only builds
nodes and checks number literals; it never evaluates anything.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, Union

from ..errors import SheetError, SheetSyntaxError, Span

if TYPE_CHECKING:
    from lark import Token

# ---- nodes ------------------------------------------------------------------------


class _Node:
    """What every node shares: its fields are its ``__slots__``; two nodes are equal when they
    are of one type with equal fields; nodes hash and print by their fields.

    Nodes are immutable by convention (nothing assigns a field after construction). They are
    plain slotted classes rather than frozen dataclasses: a sheet makes one per name, number
    and operator, and a plain ``__init__`` costs a third of a frozen one (which sets every
    field through ``object.__setattr__``); the dataclass decorator also took a third of
    relsheet's own import time.
    """

    __slots__: tuple[str, ...] = ()

    def _values(self) -> tuple[Any, ...]:
        return tuple(getattr(self, name) for name in self.__slots__)

    def __eq__(self, other: object) -> bool:
        if other.__class__ is not self.__class__:
            return NotImplemented
        return self._values() == other._values()  # type: ignore[attr-defined]

    def __ne__(self, other: object) -> bool:
        equal = self.__eq__(other)
        return equal if equal is NotImplemented else not equal

    def __hash__(self) -> int:
        return hash((self.__class__, self._values()))

    def __repr__(self) -> str:
        fields = ", ".join(f"{name}={getattr(self, name)!r}" for name in self.__slots__)
        return f"{self.__class__.__qualname__}({fields})"


# ---- expressions --------------------------------------------------------------


class Number(_Node):
    __slots__ = ("value", "text", "span")

    value: float
    text: str
    span: Span

    def __init__(self, value: float, text: str, span: Span) -> None:
        self.value = value
        self.text = text
        self.span = span


class Percent(_Node):
    """``5%``: the number 0.05."""

    __slots__ = ("value", "text", "span")

    value: float
    text: str
    span: Span

    def __init__(self, value: float, text: str, span: Span) -> None:
        self.value = value
        self.text = text
        self.span = span


class Name(_Node):
    __slots__ = ("id", "span")

    id: str
    span: Span

    def __init__(self, id: str, span: Span) -> None:
        self.id = id
        self.span = span


class NamePower(_Node):
    """``s^-2`` inside a unit chain: a name raised to a literal exponent."""

    __slots__ = ("name", "exponent", "span")

    name: Name
    exponent: Expr
    span: Span

    def __init__(self, name: Name, exponent: Expr, span: Span) -> None:
        self.name = name
        self.exponent = exponent
        self.span = span


class Dotted(_Node):
    """``const.c``, ``ns.name``, ``orbit.a``."""

    __slots__ = ("parts", "span")

    parts: tuple[str, ...]
    span: Span

    def __init__(self, parts: tuple[str, ...], span: Span) -> None:
        self.parts = parts
        self.span = span


class Keyword(_Node):
    __slots__ = ("name", "value", "span")

    name: str
    value: Expr
    span: Span

    def __init__(self, name: str, value: Expr, span: Span) -> None:
        self.name = name
        self.value = value
        self.span = span


class Call(_Node):
    __slots__ = ("function", "function_span", "args", "keywords", "span")

    function: str
    function_span: Span
    args: tuple[Expr, ...]
    keywords: tuple[Keyword, ...]
    span: Span

    def __init__(
        self,
        function: str,
        function_span: Span,
        args: tuple[Expr, ...],
        keywords: tuple[Keyword, ...],
        span: Span,
    ) -> None:
        self.function = function
        self.function_span = function_span
        self.args = args
        self.keywords = keywords
        self.span = span


class Group(_Node):
    """A parenthesised expression; kept so the chain rule can see the brackets."""

    __slots__ = ("inner", "span")

    inner: Expr
    span: Span

    def __init__(self, inner: Expr, span: Span) -> None:
        self.inner = inner
        self.span = span


class ArrayLiteral(_Node):
    __slots__ = ("items", "span")

    items: tuple[Expr, ...]
    span: Span

    def __init__(self, items: tuple[Expr, ...], span: Span) -> None:
        self.items = items
        self.span = span


class Chain(_Node):
    """An implicit product: a number, group or array followed by unit-chain items."""

    __slots__ = ("head", "items", "span")

    head: Expr
    items: tuple[Expr, ...]
    span: Span

    def __init__(self, head: Expr, items: tuple[Expr, ...], span: Span) -> None:
        self.head = head
        self.items = items
        self.span = span


class UnitProduct(_Node):
    """Juxtaposed factors in a unit expression after ``in`` (``m s^-2``)."""

    __slots__ = ("factors", "span")

    factors: tuple[Expr, ...]
    span: Span

    def __init__(self, factors: tuple[Expr, ...], span: Span) -> None:
        self.factors = factors
        self.span = span


class PercentUnit(_Node):
    """``%`` written as a unit after ``in``."""

    __slots__ = ("span",)

    span: Span

    def __init__(self, span: Span) -> None:
        self.span = span


class BinaryOp(_Node):
    __slots__ = ("op", "left", "right", "span")

    op: str  # one of + - * /
    left: Expr
    right: Expr
    span: Span

    def __init__(self, op: str, left: Expr, right: Expr, span: Span) -> None:
        self.op = op
        self.left = left
        self.right = right
        self.span = span


class UnaryOp(_Node):
    __slots__ = ("op", "operand", "span")

    op: str  # - or +
    operand: Expr
    span: Span

    def __init__(self, op: str, operand: Expr, span: Span) -> None:
        self.op = op
        self.operand = operand
        self.span = span


class PlusMinus(_Node):
    """``value ± sigma``: a measured input with its standard uncertainty."""

    __slots__ = ("value", "sigma", "span")

    value: Expr
    sigma: Expr
    span: Span

    def __init__(self, value: Expr, sigma: Expr, span: Span) -> None:
        self.value = value
        self.sigma = sigma
        self.span = span


class Power(_Node):
    __slots__ = ("base", "exponent", "span")

    base: Expr
    exponent: Expr
    span: Span

    def __init__(self, base: Expr, exponent: Expr, span: Span) -> None:
        self.base = base
        self.exponent = exponent
        self.span = span


class Text(_Node):
    """``"passes.ecsv"``: quoted text, written only as a call's argument (a file name)."""

    __slots__ = ("value", "span")

    value: str
    span: Span

    def __init__(self, value: str, span: Span) -> None:
        self.value = value
        self.span = span


Expr = Union[
    Number, Percent, Name, NamePower, Dotted, Call, Group, ArrayLiteral, Chain,
    UnitProduct, PercentUnit, BinaryOp, UnaryOp, Power, PlusMinus, Text,
]

# ---- statements ---------------------------------------------------------------


class CellDef(_Node):
    """``name = expr [in unit] [# comment] [#→ marker]``."""

    __slots__ = ("name", "name_span", "expr", "unit", "comment", "marker", "span", "syntax_error")

    name: str
    name_span: Span
    expr: Expr | None
    unit: Expr | None
    comment: str | None
    marker: str | None
    span: Span
    #: set (and ``expr`` None) for a line that names a cell but does not parse: the syntax
    #: error, or the refusal of the input (brackets nested too deep, a statement too long)
    syntax_error: SheetError | None

    def __init__(
        self,
        name: str,
        name_span: Span,
        expr: Expr | None,
        unit: Expr | None,
        comment: str | None,
        marker: str | None,
        span: Span,
        syntax_error: SheetError | None = None,
    ) -> None:
        self.name = name
        self.name_span = name_span
        self.expr = expr
        self.unit = unit
        self.comment = comment
        self.marker = marker
        self.span = span
        self.syntax_error = syntax_error

    @property
    def expr_span(self) -> Span:
        """Where the expression stands (the whole line for a line that does not parse)."""
        return self.expr.span if self.expr is not None else self.span


class ConstantsDef(_Node):
    """``constants codata2018 iau2015``."""

    __slots__ = ("sets", "span")

    sets: tuple[tuple[str, Span], ...]
    span: Span

    def __init__(self, sets: tuple[tuple[str, Span], ...], span: Span) -> None:
        self.sets = sets
        self.span = span


class PPNDef(_Node):
    """``ppn gamma = expr``: the sheet-wide default of a PPN parameter."""

    __slots__ = ("parameter", "parameter_span", "expr", "comment", "marker", "span")

    parameter: str
    parameter_span: Span
    expr: Expr
    comment: str | None
    marker: str | None
    span: Span

    def __init__(
        self,
        parameter: str,
        parameter_span: Span,
        expr: Expr,
        comment: str | None,
        marker: str | None,
        span: Span,
    ) -> None:
        self.parameter = parameter
        self.parameter_span = parameter_span
        self.expr = expr
        self.comment = comment
        self.marker = marker
        self.span = span


class Override(_Node):
    __slots__ = ("name", "name_span", "expr")

    name: str
    name_span: Span
    expr: Expr

    def __init__(self, name: str, name_span: Span, expr: Expr) -> None:
        self.name = name
        self.name_span = name_span
        self.expr = expr


class UseDef(_Node):
    """``use "file.sheet" as ns [with a = …, b = …]``."""

    __slots__ = ("path", "path_span", "namespace", "namespace_span", "overrides", "span")

    path: str
    path_span: Span
    namespace: str
    namespace_span: Span
    overrides: tuple[Override, ...]
    span: Span

    def __init__(
        self,
        path: str,
        path_span: Span,
        namespace: str,
        namespace_span: Span,
        overrides: tuple[Override, ...],
        span: Span,
    ) -> None:
        self.path = path
        self.path_span = path_span
        self.namespace = namespace
        self.namespace_span = namespace_span
        self.overrides = overrides
        self.span = span


class CheckDef(_Node):
    """``check left OP right [within tolerance]``."""

    __slots__ = ("left", "op", "right", "tolerance", "span")

    left: Expr
    op: str          # == < <= > >=
    right: Expr
    tolerance: Expr | None
    span: Span

    def __init__(
        self,
        left: Expr,
        op: str,
        right: Expr,
        tolerance: Expr | None,
        span: Span,
    ) -> None:
        self.left = left
        self.op = op
        self.right = right
        self.tolerance = tolerance
        self.span = span


class Note(_Node):
    """``## heading`` or ``# note`` on a line of its own."""

    __slots__ = ("text", "heading", "span")

    text: str
    heading: bool
    span: Span

    def __init__(self, text: str, heading: bool, span: Span) -> None:
        self.text = text
        self.heading = heading
        self.span = span


class ExpressionLine(_Node):
    """A bare expression (``--set`` values, lines typed at the prompt)."""

    __slots__ = ("expr", "unit", "span")

    expr: Expr
    unit: Expr | None
    span: Span

    def __init__(self, expr: Expr, unit: Expr | None, span: Span) -> None:
        self.expr = expr
        self.unit = unit
        self.span = span


Statement = Union[CellDef, UseDef, ConstantsDef, PPNDef, CheckDef, Note]

#: Words that start statements now or in later versions of the language.
RESERVED_WORDS = frozenset({"constants", "use", "check", "ppn", "plot", "in", "const", "within",
                            "as", "with"})

# ---- the builder ----------------------------------------------------------------


def token_span(tok: Token) -> Span:
    # lark types a token's place as optional; the sheet lexer always fills it in
    return Span(tok.line, tok.column, tok.end_line, tok.end_column)  # type: ignore[arg-type]


#: How a result marker starts (`annotate` writes them); `#=` is the form of earlier versions,
#: still read so that one `annotate` upgrades a sheet.
MARKERS = ("#→", "#=")


def marker_at(text: str) -> int:
    """Where a result marker starts in the trailing text of a line (-1: none). A marker is at
    the start of the text or after white space."""
    best = -1
    for marker in MARKERS:
        if text.startswith(marker):
            return 0
        for space in (" ", "\t"):
            at = text.find(space + marker)
            if at >= 0 and (best < 0 or at + 1 < best):
                best = at + 1
    return best


def split_trailer(text: str) -> tuple[str | None, str | None]:
    """Split a trailing ``# comment  #→ marker`` into (comment, marker)."""
    at = marker_at(text)
    if at == 0:
        return None, text[2:].strip()
    if at > 0:
        return text[1:at].strip(), text[at + 2:].strip()
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

    def dotted_power(self, children):
        tok, exponent = children
        base = Dotted(tuple(tok.value.split(".")), token_span(tok))
        return Power(base, exponent, base.span.to(exponent.span))

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

    def text(self, children):
        (tok,) = children
        return Text(tok.value[1:-1], token_span(tok))

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
        return CheckDef(left, op.value, right, tolerance, token_span(keyword).to(end))

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

    imported_cell = cell

    def prompt_input(self, children):
        items = [c for c in children if c is not None and not isinstance(c, str)]
        if isinstance(items[0], (CellDef, PPNDef, CheckDef)):
            return items[0]
        return self.expression_input(items)
