"""The expression AST: frozen attrs nodes with character offsets into their source text.

The parser builds these nodes untyped (``ty`` is None); the checker returns copies with
``ty`` set and names resolved (``Name.ref``). Both the simulator and the SMT encoder walk
the same typed tree, each with its own semantics.
"""

from __future__ import annotations

import operator
from fractions import Fraction

import attrs

# Types of the expression language (DESIGN 3.1). ZERO is the type of the literal 0,
# which adapts to every numeric type.
BOOL, COUNT, NUMBER, LENGTH, DIRECTION, RUNNING, ZERO = (
    "Bool", "Count", "Number", "Length", "Direction", "Running", "Zero")
NUMERIC = frozenset({COUNT, NUMBER, LENGTH, ZERO})

# The comparison operators of the language. Python's operators apply to exact Fractions in
# the simulator and build terms in the encoder, so both sides use this one table.
COMPARISONS = {"==": operator.eq, "!=": operator.ne, "<": operator.lt, "<=": operator.le,
               ">": operator.gt, ">=": operator.ge}


@attrs.frozen
class Node:
    start: int = attrs.field(kw_only=True, default=0)
    end: int = attrs.field(kw_only=True, default=0)
    ty: str | None = attrs.field(kw_only=True, default=None, eq=False)


@attrs.frozen
class Num(Node):
    value: Fraction
    unit: str | None  # "m" for a length, "%" for a ratio already divided by 100, None


@attrs.frozen
class BoolLit(Node):
    value: bool


@attrs.frozen
class Name(Node):
    """A dotted path such as ``lrbg.read``, ``legs[2].distance`` or ``leg.odometer``.

    ``parts`` holds strings and, for ``[i]``, ints. After checking, ``ref`` says what the
    name denotes (see :mod:`verifier.check.typer`).
    """

    parts: tuple
    ref: tuple | None = attrs.field(default=None, eq=False)

    @property
    def dotted(self) -> str:
        out = ""
        for p in self.parts:
            out += f"[{p}]" if isinstance(p, int) else ("." + p if out else p)
        return out


@attrs.frozen
class Unary(Node):
    op: str  # "-" or "not"
    operand: Node


@attrs.frozen
class Binary(Node):
    op: str  # + - * / and or implies
    left: Node
    right: Node


@attrs.frozen
class Chain(Node):
    """``a < b <= c``: ops[i] relates operands[i] and operands[i + 1]."""

    ops: tuple
    operands: tuple


@attrs.frozen
class IfThen(Node):
    cond: Node
    then: Node
    orelse: Node


@attrs.frozen
class Call(Node):
    func: str
    args: tuple


@attrs.frozen
class Quant(Node):
    kind: str  # all, any, count, sum
    var: str
    body: Node


def children(node: Node) -> tuple:
    """The direct sub-expressions of a node, in text order."""
    if isinstance(node, Unary):
        return (node.operand,)
    if isinstance(node, Binary):
        return (node.left, node.right)
    if isinstance(node, Chain):
        return node.operands
    if isinstance(node, IfThen):
        return (node.cond, node.then, node.orelse)
    if isinstance(node, Call):
        return node.args
    if isinstance(node, Quant):
        return (node.body,)
    return ()


def walk(node: Node):
    """Every node of the tree, parents before children."""
    yield node
    for child in children(node):
        yield from walk(child)
