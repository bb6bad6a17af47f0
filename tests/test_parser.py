"""The expression grammar: precedence, associativity, literals and positions (DESIGN 3.1)."""

from fractions import Fraction

import pytest

from verifier.lang import ast
from verifier.lang.parser import ExprSyntaxError, parse
from verifier.world.scenario import fmt, parse_length


def shape(node):
    if isinstance(node, ast.Binary):
        return f"({shape(node.left)} {node.op} {shape(node.right)})"
    if isinstance(node, ast.Unary):
        return f"({node.op} {shape(node.operand)})"
    if isinstance(node, ast.Chain):
        out = shape(node.operands[0])
        for op, o in zip(node.ops, node.operands[1:]):
            out += f" {op} {shape(o)}"
        return f"[{out}]"
    if isinstance(node, ast.Name):
        return node.dotted
    if isinstance(node, ast.Num):
        return f"{node.value}{node.unit or ''}"
    if isinstance(node, ast.IfThen):
        return f"if {shape(node.cond)} then {shape(node.then)} else {shape(node.orelse)}"
    if isinstance(node, ast.Quant):
        return f"{node.kind}({node.var}: {shape(node.body)})"
    if isinstance(node, ast.Call):
        return f"{node.func}(" + ", ".join(shape(a) for a in node.args) + ")"
    return str(node)


@pytest.mark.parametrize("text,expected", [
    ("a implies b implies c", "(a implies (b implies c))"),       # right-assoc
    ("a or b and c", "(a or (b and c))"),
    ("not a and b", "((not a) and b)"),
    ("a + b * c > d", "[(a + (b * c)) > d]"),
    ("a - b - c", "((a - b) - c)"),
    ("-a - -b", "((- a) - (- b))"),
    ("0 m <= x < 3 km", "[0m <= x < 3000m]"),
    ("legs[2].odometer", "legs[2].odometer"),
    ("5 % * x", "(1/20% * x)"),   # a ratio literal: 5 % is 1/20, unit "%"
    ("30 cm + 12 mm", "(3/10m + 3/250m)"),
    ("if a then 1 else 2", "if a then 1 else 2"),
    ("count(l in legs: l.cab_change) == 2", "[count(l: l.cab_change) == 2]"),
    ("report.in_range", "report.in_range"),    # 'in' is a keyword, 'in_range' a name
])
def test_precedence_and_literals(text, expected):
    assert shape(parse(text)) == expected


def test_positions_are_offsets_into_the_text():
    node = parse("x >= 2 m and lrbg.read > 1")
    right = node.right
    assert (right.start, right.end) == (13, 26)


@pytest.mark.parametrize("text,offset", [("x +", 3), ("(x", 2), ("x $ y", 2), ("legs[1.5].x", 5)])
def test_syntax_errors_carry_an_offset(text, offset):
    with pytest.raises(ExprSyntaxError) as exc:
        parse(text)
    assert exc.value.offset == offset


@pytest.mark.parametrize("value,text", [
    (Fraction(25, 2), "12.5"), (Fraction(13, 44), "13/44"), (Fraction(-1, 8), "-0.125"),
    (Fraction(0), "0"), (Fraction(32766), "32766"), (Fraction(1, 3), "1/3"),
])
def test_exact_number_text(value, text):
    # DESIGN 6: exact rationals as strings ("12.5", "13/44"); checked against Fraction itself
    assert fmt(value) == text and Fraction(text) == value


def test_scenario_lengths():
    assert parse_length("30 cm", "x") == Fraction(3, 10)
    assert parse_length("13/44", "x") == Fraction(13, 44)
    assert parse_length(2, "x") == 2
    with pytest.raises(ValueError):
        parse_length("far", "x")
