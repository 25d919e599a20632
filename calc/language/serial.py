"""Parsed statements as plain data (JSON) and back, for the parse cache.

A statement list becomes a flat list of records in post-order (every node's
children before the node), each record a list: a tag naming the node type,
then the node's own scalars (strings, numbers, spans as four integers, counts
of children). Reading walks the records once with a stack, so neither
direction recurses, however deeply an expression nests.

Reading can build only the node types in :data:`_DECODERS` (a fixed table of
the classes in :mod:`calc.language.syntax`), from JSON values: no name in the
data is ever looked up as code. Anything else in the data (an unknown tag, a
record too short, children missing) makes :func:`decode` return None, and the
caller parses the text instead. That data was written by this module and not
changed since is what the cache checks (a keyed digest, :mod:`calc.language.cache`).
"""

from __future__ import annotations

import json
from collections.abc import Callable
from typing import Any

from ..errors import Span
from .syntax import (
    ArrayLiteral,
    BinaryOp,
    Call,
    CellDef,
    Chain,
    CheckDef,
    ConstantsDef,
    Dotted,
    Group,
    Keyword,
    Name,
    NamePower,
    Note,
    Number,
    Override,
    Percent,
    PercentUnit,
    PlusMinus,
    Power,
    PPNDef,
    Statement,
    Text,
    UnaryOp,
    UnitProduct,
    UseDef,
)

#: Bumped whenever the record layout below changes (entries of another layout are not read).
FORMAT = 2

_STATEMENTS = (CellDef, ConstantsDef, PPNDef, UseDef, CheckDef, Note)


class NotEncodable(ValueError):
    """A statement list the cache does not hold (a cell that failed to parse)."""


# ---- writing ----------------------------------------------------------------------------
# Each encoder returns (record, children); the children are written before the record.

def _number(n: Number):
    return ["n", n.value, n.text, *n.span], ()


def _percent(n: Percent):
    return ["p", n.value, n.text, *n.span], ()


def _name(n: Name):
    return ["a", n.id, *n.span], ()


def _name_power(n: NamePower):
    return ["w", *n.span], (n.name, n.exponent)


def _dotted(n: Dotted):
    return ["d", list(n.parts), *n.span], ()


def _text(n: Text):
    return ["s", n.value, *n.span], ()


def _keyword(n: Keyword):
    return ["k", n.name, *n.span], (n.value,)


def _call(n: Call):
    return (["c", n.function, *n.function_span, len(n.args), len(n.keywords), *n.span],
            (*n.args, *n.keywords))


def _group(n: Group):
    return ["g", *n.span], (n.inner,)


def _array(n: ArrayLiteral):
    return ["r", len(n.items), *n.span], n.items


def _chain(n: Chain):
    return ["h", len(n.items), *n.span], (n.head, *n.items)


def _unit_product(n: UnitProduct):
    return ["u", len(n.factors), *n.span], n.factors


def _percent_unit(n: PercentUnit):
    return ["%", *n.span], ()


def _binary(n: BinaryOp):
    return ["b", n.op, *n.span], (n.left, n.right)


def _unary(n: UnaryOp):
    return ["m", n.op, *n.span], (n.operand,)


def _plus_minus(n: PlusMinus):
    return ["pm", *n.span], (n.value, n.sigma)


def _power(n: Power):
    return ["^", *n.span], (n.base, n.exponent)


def _cell(n: CellDef):
    if n.syntax_error is not None or n.expr is None:
        raise NotEncodable("a cell that did not parse")
    has_unit = n.unit is not None
    return (["C", n.name, *n.name_span, int(has_unit), n.comment, n.marker, *n.span],
            (n.expr, n.unit) if has_unit else (n.expr,))


def _constants(n: ConstantsDef):
    return ["K", [[name, *span] for name, span in n.sets], *n.span], ()


def _ppn(n: PPNDef):
    return ["P", n.parameter, *n.parameter_span, n.comment, n.marker, *n.span], (n.expr,)


def _override(n: Override):
    return ["O", n.name, *n.name_span], (n.expr,)


def _use(n: UseDef):
    return (["U", n.path, *n.path_span, n.namespace, *n.namespace_span, len(n.overrides),
             *n.span], n.overrides)


def _check(n: CheckDef):
    has_tolerance = n.tolerance is not None
    return (["Q", n.op, int(has_tolerance), *n.span],
            (n.left, n.right, n.tolerance) if has_tolerance else (n.left, n.right))


def _note(n: Note):
    return ["T", n.text, n.heading, *n.span], ()


_ENCODERS: dict[type, Callable[[Any], tuple[list, tuple]]] = {
    Number: _number, Percent: _percent, Name: _name, NamePower: _name_power, Dotted: _dotted,
    Keyword: _keyword, Call: _call, Group: _group, ArrayLiteral: _array, Chain: _chain,
    UnitProduct: _unit_product, PercentUnit: _percent_unit, BinaryOp: _binary,
    UnaryOp: _unary, PlusMinus: _plus_minus, Power: _power, CellDef: _cell,
    ConstantsDef: _constants, PPNDef: _ppn, Override: _override, UseDef: _use,
    CheckDef: _check, Note: _note, Text: _text,
}


def encode(statements: list[Statement]) -> bytes:
    """The statements as JSON; raises NotEncodable for a list the cache does not hold."""
    records: list[list] = []
    # (node, None) visits a node; (None, record) writes a record whose children are written
    todo: list[tuple[Any, list | None]] = [(s, None) for s in reversed(statements)]
    while todo:
        node, record = todo.pop()
        if record is not None:
            records.append(record)
            continue
        encoder = _ENCODERS.get(type(node))
        if encoder is None:
            raise NotEncodable(f"no record for {type(node).__name__}")
        record, children = encoder(node)
        todo.append((None, record))
        todo.extend((child, None) for child in reversed(children))
    try:
        text = json.dumps({"format": FORMAT, "statements": len(statements), "records": records},
                          separators=(",", ":"), allow_nan=False)
    except ValueError as exc:  # a number JSON cannot hold
        raise NotEncodable(str(exc)) from None
    return text.encode("ascii")


# ---- reading ----------------------------------------------------------------------------
# Each decoder takes its record and the stack of nodes built so far (its children on top).

_new = tuple.__new__  # a Span from four integers of a record, without the named tuple's checks


def _take(stack: list, count: int) -> tuple:
    if count < 0 or count > len(stack):
        raise IndexError("children missing")
    if count == 0:
        return ()
    items = tuple(stack[-count:])
    del stack[-count:]
    return items


def _d_number(r, s):
    return Number(r[1], r[2], _new(Span, r[3:7]))


def _d_percent(r, s):
    return Percent(r[1], r[2], _new(Span, r[3:7]))


def _d_name(r, s):
    return Name(r[1], _new(Span, r[2:6]))


def _d_name_power(r, s):
    exponent = s.pop()
    name = s.pop()
    if type(name) is not Name:
        raise TypeError("a unit power of something other than a name")
    return NamePower(name, exponent, _new(Span, r[1:5]))


def _d_dotted(r, s):
    return Dotted(tuple(r[1]), _new(Span, r[2:6]))


def _d_text(r, s):
    return Text(r[1], _new(Span, r[2:6]))


def _d_keyword(r, s):
    return Keyword(r[1], s.pop(), _new(Span, r[2:6]))


def _d_call(r, s):
    keywords = _take(s, r[7])
    if any(type(k) is not Keyword for k in keywords):
        raise TypeError("a keyword argument that is not one")
    return Call(r[1], _new(Span, r[2:6]), _take(s, r[6]), keywords, _new(Span, r[8:12]))


def _d_group(r, s):
    return Group(s.pop(), _new(Span, r[1:5]))


def _d_array(r, s):
    return ArrayLiteral(_take(s, r[1]), _new(Span, r[2:6]))


def _d_chain(r, s):
    items = _take(s, r[1])
    return Chain(s.pop(), items, _new(Span, r[2:6]))


def _d_unit_product(r, s):
    return UnitProduct(_take(s, r[1]), _new(Span, r[2:6]))


def _d_percent_unit(r, s):
    return PercentUnit(_new(Span, r[1:5]))


def _d_binary(r, s):
    right = s.pop()
    return BinaryOp(r[1], s.pop(), right, _new(Span, r[2:6]))


def _d_unary(r, s):
    return UnaryOp(r[1], s.pop(), _new(Span, r[2:6]))


def _d_plus_minus(r, s):
    sigma = s.pop()
    return PlusMinus(s.pop(), sigma, _new(Span, r[1:5]))


def _d_power(r, s):
    exponent = s.pop()
    return Power(s.pop(), exponent, _new(Span, r[1:5]))


def _d_cell(r, s):
    unit = s.pop() if r[6] else None
    return CellDef(r[1], _new(Span, r[2:6]), s.pop(), unit, r[7], r[8], _new(Span, r[9:13]))


def _d_constants(r, s):
    return ConstantsDef(tuple((item[0], _new(Span, item[1:5])) for item in r[1]), _new(Span, r[2:6]))


def _d_ppn(r, s):
    return PPNDef(r[1], _new(Span, r[2:6]), s.pop(), r[6], r[7], _new(Span, r[8:12]))


def _d_override(r, s):
    return Override(r[1], _new(Span, r[2:6]), s.pop())


def _d_use(r, s):
    overrides = _take(s, r[11])
    if any(type(o) is not Override for o in overrides):
        raise TypeError("an override that is not one")
    return UseDef(r[1], _new(Span, r[2:6]), r[6], _new(Span, r[7:11]), overrides, _new(Span, r[12:16]))


def _d_check(r, s):
    tolerance = s.pop() if r[2] else None
    right = s.pop()
    return CheckDef(s.pop(), r[1], right, tolerance, _new(Span, r[3:7]))


def _d_note(r, s):
    return Note(r[1], r[2], _new(Span, r[3:7]))


_DECODERS: dict[str, Callable[[list, list], Any]] = {
    "n": _d_number, "p": _d_percent, "a": _d_name, "w": _d_name_power, "d": _d_dotted,
    "k": _d_keyword, "c": _d_call, "g": _d_group, "r": _d_array, "h": _d_chain,
    "u": _d_unit_product, "%": _d_percent_unit, "b": _d_binary, "m": _d_unary,
    "pm": _d_plus_minus, "^": _d_power, "C": _d_cell, "K": _d_constants, "P": _d_ppn,
    "O": _d_override, "U": _d_use, "Q": _d_check, "T": _d_note, "s": _d_text,
}


def decode(data: bytes) -> list[Statement] | None:
    """The statements :func:`encode` wrote, or None for data it did not write."""
    try:
        document = json.loads(data)
        if document.get("format") != FORMAT:
            return None
        stack: list = []
        decoders = _DECODERS
        for record in document["records"]:
            stack.append(decoders[record[0]](record, stack))
        if len(stack) != document["statements"]:
            return None
        if any(type(s) not in _STATEMENTS for s in stack):
            return None
        return stack
    except (ValueError, TypeError, KeyError, IndexError, AttributeError, RecursionError):
        return None
