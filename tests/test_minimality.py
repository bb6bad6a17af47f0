"""Minimal counterexamples (DESIGN 6): re-check the ladder independently of its implementation.

For each demo counterexample, at every step of the ladder no better violating world exists
with the earlier steps fixed. The checks are asked of z3 directly, one question each.
"""

from __future__ import annotations

import json
from fractions import Fraction
from pathlib import Path

import pytest
import z3

from verifier.api import CheckOptions, check_rule
from verifier.run.loader import load_pack
from verifier.smt.encode import Encoding

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "rules" / "demo" / "kestrel-quay.toml"


def _num(ctx, v):
    return z3.RealVal(str(Fraction(v)), ctx)


def _violating(pack, rule, bound):
    ctx = z3.Context()
    enc = Encoding(pack, bound, ctx)
    given, expect = enc.given(rule), enc.expect(rule)   # may add floor definitions
    base = list(enc.constraints) + [given, z3.Not(expect)]

    def sat(*extra):
        s = z3.Solver(ctx=ctx)
        s.add(*base, *extra)
        r = s.check()
        assert r != z3.unknown
        return r == z3.sat
    return enc, ctx, sat


def _grid_of(v: Fraction) -> Fraction:
    for g in (Fraction(1), Fraction(1, 10), Fraction(1, 100), Fraction(1, 1000)):
        if (v / g).denominator == 1:
            return g
    return Fraction(0)


pack = load_pack(DEMO, "rules/demo/kestrel-quay.toml")
violated_ids = ["real-front-inside-interval", "doubt-covers-travelled-distance",
                "rounding-keeps-doubts", "orientation-after-turning-back", "front-stays-on-arrival-side"]


@pytest.mark.parametrize("rid", violated_ids)
def test_each_ladder_step_is_minimal(rid, tmp_path):
    rule = pack.rule(rid)
    res = check_rule(pack, rule, CheckOptions(out=tmp_path))
    assert res.verdict == "violated"
    doc = json.loads(Path(res.counterexample).read_text())
    w = doc["world"]
    bound = doc["bound"]
    enc, ctx, sat = _violating(pack, rule, bound)
    I, T = enc.inputs, enc.terms
    facts = []
    legs = w["legs"]
    # (1) fewest legs, then cab changes, then balises
    for term, value in ((T["legs.count"], len(legs)),
                        (T["cab_changes"], sum(1 for leg in legs if leg["cab_change"])),
                        (I["lrbg.balises"], w["lrbg"]["balises"])):
        assert not sat(*facts, term < value), f"{term} could be below {value}"
        facts.append(term == value)
    # (2) each error to 0 where possible, in order
    errors = [(I["lrbg.offset"], Fraction(w["lrbg"]["offset"])),
              (I["passage.detect_error"], Fraction(w["passage"]["detect_error"]))]
    errors += [(I[f"legs.{i}.odometer"] - I[f"legs.{i}.distance"],
                Fraction(leg["odometer"]) - Fraction(leg["distance"])) for i, leg in enumerate(legs, 1)]
    for term, value in errors:
        if value != 0:
            assert not sat(*facts, term == 0), f"{term} could be 0"
        else:
            facts.append(term == 0)
    # (3) other inputs to their least value on the coarsest grid that has one
    ordered = [(I["lrbg.read"], Fraction(w["lrbg"]["read"])), (I["lrbg.locacc"], Fraction(w["lrbg"]["locacc"])),
               (I["train.length"], Fraction(w["train"]["length"])),
               (I["train.antenna"], Fraction(w["train"]["antenna"]))]
    ordered += [(I[f"legs.{i}.distance"], Fraction(leg["distance"])) for i, leg in enumerate(legs, 1)]
    for term, value in ordered:
        g = _grid_of(value)
        assert g, f"{term} = {value} is on no grid down to 1 mm"
        k = z3.Int(f"k!{term}", ctx)
        on_grid = z3.ToReal(k) * _num(ctx, g) == term
        assert not sat(*facts, on_grid, term < _num(ctx, value)), f"{term} could be below {value}"
        for coarser in (Fraction(1), Fraction(1, 10), Fraction(1, 100)):
            if coarser > g:
                kc = z3.Int(f"kc!{term}!{coarser}", ctx)
                assert not sat(*facts, z3.ToReal(kc) * _num(ctx, coarser) == term), \
                    f"{term} has a point on the coarser {coarser} m grid"
        facts.append(term == _num(ctx, value))
    # (4) Booleans false first, enums in declaration order (nominal, forward first)
    if w["lrbg"]["linked"]:
        assert not sat(*facts, z3.Not(I["lrbg.linked"]))
    facts.append(I["lrbg.linked"] == w["lrbg"]["linked"])
    for i, leg in enumerate(legs, 1):
        if leg["cab_change"]:
            assert not sat(*facts, z3.Not(I[f"legs.{i}.cab_change"]))
        facts.append(I[f"legs.{i}.cab_change"] == leg["cab_change"])
    if w["passage"]["direction"] == "reverse":
        assert not sat(*facts, I["passage.direction"] == 1)
    facts.append(I["passage.direction"] == (1 if w["passage"]["direction"] == "nominal" else -1))
    if w["passage"]["running"] == "backward":
        assert not sat(*facts, I["passage.running"])
    # and the recorded world itself is a violating world
    full = facts + [I["passage.running"] == (w["passage"]["running"] == "forward")]
    full += [I[f"legs.{i}.running"] == (leg["running"] == "forward") for i, leg in enumerate(legs, 1)]
    full += [I[f"legs.{i}.odometer"] == _num(ctx, leg["odometer"]) for i, leg in enumerate(legs, 1)]
    full += [I["lrbg.offset"] == _num(ctx, w["lrbg"]["offset"]),
             I["passage.detect_error"] == _num(ctx, w["passage"]["detect_error"])]
    assert sat(*full)


def test_the_ladder_starts_at_the_scope_bounds_the_constraints_state():
    # kestrel-quay's [world] (rules/demo/kestrel-quay.toml): train_length 40..220 m, antenna
    # 2..12 m. Its encoding states them as top-level bounds, and so does the same problem
    # printed as SMT-LIB text and read back (the path of `verifier check`).
    from verifier.smt import smtlib, solve
    pack = load_pack(DEMO)
    enc = Encoding(pack, 1, z3.Context())
    lows = solve.lower_bounds(enc.constraints, enc.inputs)
    assert lows["train.length"] == 40 and lows["train.antenna"] == 2
    assert lows["lrbg.locacc"] == 1 and lows["legs.count"] == 0     # locacc 1..5 m
    q = smtlib.export_rule(pack, pack.rules[0], 1)
    ctx = z3.Context()
    parsed = list(z3.parse_smt2_string(q.text, ctx=ctx))
    inputs = {k: {"int": z3.Int, "real": z3.Real, "bool": z3.Bool}[srt](name, ctx)
              for k, name, srt in q.inputs}
    again = solve.lower_bounds(parsed, inputs)
    assert again["train.length"] == 40 and again["train.antenna"] == 2
