"""Parse expression text into the AST with the lark grammar shipped beside this module.

Rule text is parsed, never evaluated as Python: a rule file cannot run code.
"""

from __future__ import annotations

import functools
import re
from fractions import Fraction
from importlib import resources

import lark

from verifier.lang import ast

QUANTIFIERS = ("all", "any", "count", "sum")
_UNIT_SCALE = {"mm": Fraction(1, 1000), "cm": Fraction(1, 100), "m": Fraction(1),
               "km": Fraction(1000), "%": Fraction(1, 100)}
_QUANTITY = re.compile(r"(\d+(?:\.\d+)?|\.\d+)\s*(mm|cm|km|m|%)?$")
# Deeper nesting than this is refused before parsing (LALR itself is not recursive,
# but the checker and both evaluators are).
MAX_DEPTH = 64


class ExprSyntaxError(Exception):
    def __init__(self, message: str, offset: int, length: int = 1):
        super().__init__(message)
        self.message = message
        self.offset = offset
        self.length = length


@functools.cache
def _parser() -> lark.Lark:
    text = resources.files("verifier.lang").joinpath("grammar.lark").read_text()
    return lark.Lark(text, parser="lalr", lexer="basic", propagate_positions=True, maybe_placeholders=False)


def parse_quantity(text: str) -> tuple[Fraction, str | None]:
    """``"5 m"`` -> (5, "m"); ``"5 %"`` -> (1/20, "%"); ``"12"`` -> (12, None)."""
    m = _QUANTITY.match(text.strip())
    if not m:
        raise ValueError(f"not a quantity: {text!r}")
    value = Fraction(m.group(1))
    unit = m.group(2)
    if unit is None:
        return value, None
    value *= _UNIT_SCALE[unit]
    return value, ("%" if unit == "%" else "m")


def _pos(meta_or_tok) -> tuple[int, int]:
    if isinstance(meta_or_tok, lark.Token):
        return meta_or_tok.start_pos, meta_or_tok.end_pos
    return meta_or_tok.start_pos, meta_or_tok.end_pos


class _Build(lark.Transformer):
    # Each method receives the children and, through v_args(meta=True), the positions.
    @lark.v_args(meta=True)
    def number(self, meta, children):
        tok = children[0]
        value, unit = parse_quantity(str(tok))
        if unit is None and "." in str(tok):
            unit = None
        return ast.Num(value, unit, start=tok.start_pos, end=tok.end_pos)

    @lark.v_args(meta=True)
    def true(self, meta, children):
        return ast.BoolLit(True, start=meta.start_pos, end=meta.end_pos)

    @lark.v_args(meta=True)
    def false(self, meta, children):
        return ast.BoolLit(False, start=meta.start_pos, end=meta.end_pos)

    @lark.v_args(meta=True)
    def path(self, meta, children):
        parts = []
        for tok in children:
            if tok.type == "QUANTITY":
                if not str(tok).isdigit():
                    raise ExprSyntaxError(f"a leg number must be a whole number, not {str(tok)!r}",
                                          tok.start_pos, len(tok))
                parts.append(int(tok))
            else:
                parts.append(str(tok))
        return ast.Name(tuple(parts), start=meta.start_pos, end=meta.end_pos)

    @lark.v_args(meta=True)
    def neg(self, meta, children):
        return ast.Unary("-", children[-1], start=meta.start_pos, end=meta.end_pos)

    @lark.v_args(meta=True)
    def not_(self, meta, children):
        return ast.Unary("not", children[0], start=meta.start_pos, end=meta.end_pos)

    @lark.v_args(meta=True)
    def binop(self, meta, children):
        left, op, right = children
        return ast.Binary(str(op), left, right, start=meta.start_pos, end=meta.end_pos)

    def _logic(op):
        @lark.v_args(meta=True)
        def build(self, meta, children):
            left, right = children
            return ast.Binary(op, left, right, start=meta.start_pos, end=meta.end_pos)
        return build

    and_ = _logic("and")
    or_ = _logic("or")
    implies = _logic("implies")

    @lark.v_args(meta=True)
    def chain(self, meta, children):
        operands = tuple(children[0::2])
        ops = tuple(str(t) for t in children[1::2])
        return ast.Chain(ops, operands, start=meta.start_pos, end=meta.end_pos)

    @lark.v_args(meta=True)
    def ifexpr(self, meta, children):
        cond, then, orelse = children
        return ast.IfThen(cond, then, orelse, start=meta.start_pos, end=meta.end_pos)

    @lark.v_args(meta=True)
    def call(self, meta, children):
        name, *args = children
        return ast.Call(str(name), tuple(a for a in args if a is not None),
                        start=meta.start_pos, end=meta.end_pos)

    @lark.v_args(meta=True)
    def quant(self, meta, children):
        kind, var, domain, body = children
        if str(kind) not in QUANTIFIERS:
            raise ExprSyntaxError(
                f"'{kind}(... in ...: ...)' is not a quantifier; use one of "
                + ", ".join(QUANTIFIERS), kind.start_pos, len(kind))
        if str(domain) != "legs":
            raise ExprSyntaxError(f"quantifiers range over 'legs', not '{domain}'",
                                  domain.start_pos, len(domain))
        return ast.Quant(str(kind), str(var), body, start=meta.start_pos, end=meta.end_pos)


MAX_TREE_DEPTH = 4 * MAX_DEPTH


def _tree_depth(tree) -> int:
    """Depth of a lark tree, without recursion (if-then-else chains nest without brackets)."""
    best = 0
    stack = [(tree, 1)]
    while stack:
        node, depth = stack.pop()
        best = max(best, depth)
        for child in getattr(node, "children", ()):
            if isinstance(child, lark.Tree):
                stack.append((child, depth + 1))
    return best


def _nesting(text: str) -> int:
    depth = best = 0
    for ch in text:
        if ch == "(":
            depth += 1
            best = max(best, depth)
        elif ch == ")":
            depth -= 1
    return best


_EXPECTED_NAMES = {
    "CMP": "a comparison", "PLUS": "'+'", "MULOP": "'*' or '/'", "QUANTITY": "a number",
    "NAME": "a name", "INDEX": "a leg number", "LPAR": "'('", "RPAR": "')'", "COMMA": "','",
    "COLON": "':'", "DOT": "'.'", "LSQB": "'['", "RSQB": "']'", "MINUS": "'-'",
}


def _describe_expected(expected) -> str:
    names = []
    for term in sorted(expected):
        if term in _EXPECTED_NAMES:
            names.append(_EXPECTED_NAMES[term])
        elif term.isupper() and not term.startswith("__"):
            names.append(repr(term.lower()))
    names = sorted(set(names))
    if not names:
        return ""
    if len(names) > 6:
        names = names[:6] + ["..."]
    return "; expected " + ", ".join(names)


def parse(text: str) -> ast.Node:
    """Parse one expression; raise :class:`ExprSyntaxError` with an offset into ``text``."""
    if not text.strip():
        raise ExprSyntaxError("empty expression", 0)
    if _nesting(text) > MAX_DEPTH:
        raise ExprSyntaxError(f"expression nested deeper than {MAX_DEPTH} levels", 0)
    try:
        tree = _parser().parse(text)
        if _tree_depth(tree) > MAX_TREE_DEPTH:
            raise ExprSyntaxError(f"expression nested deeper than {MAX_DEPTH} levels", 0)
        return _Build().transform(tree)
    except lark.exceptions.VisitError as exc:  # raised inside a transformer method
        if isinstance(exc.orig_exc, ExprSyntaxError):
            raise exc.orig_exc from None
        if isinstance(exc.orig_exc, ValueError):   # a literal beyond Python's integer-string limit
            raise ExprSyntaxError(f"number cannot be read: {exc.orig_exc}", 0) from None
        raise
    except lark.UnexpectedCharacters as exc:
        raise ExprSyntaxError(f"unexpected character {text[exc.pos_in_stream]!r}",
                              exc.pos_in_stream) from None
    except lark.UnexpectedToken as exc:
        tok = exc.token
        if tok.type == "$END":
            raise ExprSyntaxError("the expression ends too early" +
                                  _describe_expected(exc.expected), len(text)) from None
        raise ExprSyntaxError(f"unexpected {str(tok)!r}" + _describe_expected(exc.expected),
                              tok.start_pos or 0, max(1, len(str(tok)))) from None
    except lark.UnexpectedEOF as exc:
        raise ExprSyntaxError("the expression ends too early" +
                              _describe_expected(exc.expected), len(text)) from None
    except RecursionError:
        raise ExprSyntaxError("expression too deeply nested", 0) from None
    except ValueError as exc:   # e.g. a literal beyond Python's integer-string limit
        raise ExprSyntaxError(f"number cannot be read: {exc}", 0) from None
