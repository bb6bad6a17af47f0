"""Which part of a rule fails in a simulated world, and that part in words: the one line of
every verdict ``violated`` (the check table, the implementation checker, the stories and the
diagrams all say it the same way)."""

from __future__ import annotations

from fractions import Fraction

from verifier.check.model import Rule
from verifier.lang import ast
from verifier.lang.ast import LENGTH
from verifier.lang.numbers import fmt
from verifier.world.sim import State, compare, evaluate


def m(x) -> str:
    """A length in metres, exact."""
    return f"{fmt(Fraction(x))} m"


def value_words(value, ty) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if hasattr(value, "word"):
        return value.word
    if ty == LENGTH:
        return m(value)
    return fmt(Fraction(value))


def _items(node: ast.Node) -> list:
    if isinstance(node, ast.Binary) and node.op == "and":
        return _items(node.left) + _items(node.right)
    return [node]


def failed_detail(rule: Rule, st: State) -> dict | None:
    """The first false item of expect's top-level ``and``; for a comparison (chain) also its
    first false pair: {text, op, left: (text, value, type), right: (...)}; None if expect holds."""
    text = rule.expect.text
    for item in _items(rule.expect.node):
        if evaluate(item, st, {}):
            continue
        out = {"text": text[item.start:item.end]}
        if isinstance(item, ast.Chain):
            for op, a, b in zip(item.ops, item.operands, item.operands[1:]):
                va, vb = evaluate(a, st, {}), evaluate(b, st, {})
                if not compare(op, va, vb):
                    out.update(op=op, left=(text[a.start:a.end], va, a.ty),
                               right=(text[b.start:b.end], vb, b.ty))
                    break
        return out
    return None


def implicit_premise(rule: Rule) -> str | None:
    return f"legs.count >= {rule.premise_legs}" if rule.premise_legs else None


def comparison_words(detail: dict) -> str:
    """A failed comparison (``failed_detail`` with an operator) in words: the comparison as
    written, then the value of each side that is not a literal, with its unit. For example
    "report.q_dirlrbg == nominal is false: report.q_dirlrbg is reverse"."""
    (lt, lv, lty), (rt, rv, rty) = detail["left"], detail["right"]
    values = [f"{t} is {value_words(v, ty)}" for t, v, ty in ((lt, lv, lty), (rt, rv, rty))
              if t.strip() != value_words(v, ty)]
    return f"{lt} {detail['op']} {rt} is false" + (": " + " and ".join(values) if values else "")


def describe_failure(detail: dict | None) -> str:
    """One line on the part of expect that failed (``failed_detail``): the comparison as
    written and the value of each side that is not a literal, with its unit."""
    if not detail:
        return ""
    if "op" not in detail:
        return f"{detail['text']} is false"
    return comparison_words(detail)
