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
# A number literal has at most this many digits (fixed here, so the limit does not depend on
# the interpreter's integer-string limit, PYTHONINTMAXSTRDIGITS).
MAX_DIGITS = 1000
# A run of this many operands of one associative operator (and, or, +, *) is rebuilt as a
# balanced tree, so a flat chain of thousands of terms is a tree of depth log2(n) for the
# checker and both evaluators. Shorter runs keep the parser's left-nested shape, so every
# existing pack parses, encodes and hashes as before.
BALANCE_FROM = 16


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


def _check_digits(tok) -> None:
    digits = sum(ch.isdigit() for ch in str(tok))
    if digits > MAX_DIGITS:
        raise ExprSyntaxError(f"number is too long: {digits:,} digits (at most {MAX_DIGITS:,})",
                              tok.start_pos, len(tok))


class _Build(lark.Transformer):
    # Each method receives the children and, through v_args(meta=True), the positions.
    @lark.v_args(meta=True)
    def number(self, meta, children):
        tok = children[0]
        _check_digits(tok)
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
                _check_digits(tok)
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


def _run_op(node):
    """The associative operator of a lark node (``and_``, ``or_``, ``+``, ``*``), or None."""
    if not isinstance(node, lark.Tree):
        return None
    if node.data in ("and_", "or_"):
        return node.data
    if node.data == "binop" and str(node.children[1]) in ("+", "*"):
        return str(node.children[1])
    return None


def _span(x) -> tuple[int, int]:
    if isinstance(x, lark.Token):
        return x.start_pos, x.end_pos
    return x.meta.start_pos, x.meta.end_pos


def _balanced(operands: list, op: str, data: str, token):
    """A balanced tree over ``operands`` (left to right), recursion depth log2(n)."""
    if len(operands) == 1:
        return operands[0]
    mid = len(operands) // 2
    left, right = _balanced(operands[:mid], op, data, token), _balanced(operands[mid:], op, data, token)
    meta = lark.tree.Meta()
    meta.empty = False
    meta.start_pos, meta.end_pos = _span(left)[0], _span(right)[1]
    children = [left, right] if token is None else [left, token, right]
    return lark.Tree(data, children, meta)


def _flatten_runs(tree) -> None:
    """Rebuild, in place and without recursion, every left-nested run of BALANCE_FROM or more
    operands of one associative operator as a balanced tree: ``a and b and c and d`` read
    left to right means the same, and short-circuits in the same order, either way. Runs of
    ``+`` and ``*`` are exact (Fractions, and linear terms for the solver) in any grouping."""
    stack = [tree]
    while stack:
        node = stack.pop()
        if not isinstance(node, lark.Tree):
            continue
        op = _run_op(node)
        if op is not None:
            right, n = [], node
            while _run_op(n) == op:
                right.append(n.children[-1])
                n = n.children[0]
            if len(right) + 1 >= BALANCE_FROM:
                operands = [n] + right[::-1]
                token = None if op in ("and_", "or_") else node.children[1]
                new = _balanced(operands, op, node.data, token)
                node.children = new.children      # the run keeps its own place (its meta)
                stack.extend(operands)
                continue
        stack.extend(node.children)


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
        _flatten_runs(tree)
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
