"""The shared catalogue through every stage: parser, checker, encoder + solver, simulator."""

from __future__ import annotations

import pytest

from catalogue import CASES
from conftest import pack_text, rule_toml
from verifier.api import CheckOptions, check_rule
from verifier.lang.parser import parse
from verifier.run.loader import load_pack
from verifier.world.scenario import world_from_data
from verifier.world.sim import State, applies, evaluate, scope_problems


@pytest.mark.parametrize("case", CASES, ids=lambda c: c.id)
def test_parser_accepts_catalogue(case):
    for text in (case.given, case.expect):
        if text:
            node = parse(text)
            assert node.start == 0 and node.end == len(text.rstrip())


@pytest.mark.parametrize("case", CASES, ids=lambda c: c.id)
def test_verdict_matches_hand_worked_value(case, write_pack, tmp_path):
    path = write_pack(pack_text(rule_toml("r", case.expect, case.given), legs=case.legs,
                                world=case.world, onboard=case.onboard))
    pack = load_pack(path)
    result = check_rule(pack, pack.rules[0], CheckOptions(out=tmp_path / "cx"))
    assert result.verdict == case.verdict, (case.why, result.message)
    if case.verdict == "violated":
        # the engine replayed it already; replay again from the file, independently
        import json
        doc = json.loads(open(result.counterexample).read())
        world = world_from_data(doc["world"])
        st = State(pack, world)
        assert scope_problems(world, pack.scope, case.legs) == []
        assert applies(pack.rules[0], st)
        assert evaluate(pack.rules[0].expect.node, st, {}) is False
    if case.verdict == "holds":
        world = world_from_data(result.witness)
        st = State(pack, world)
        assert applies(pack.rules[0], st) and evaluate(pack.rules[0].expect.node, st, {})
