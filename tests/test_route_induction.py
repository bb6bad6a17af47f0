"""Proofs for any number of legs across hand-overs (DESIGN 4.7 as 4.10 extends it): a route's
state carries the current group, the onboard's list (which groups became the LRBG), every
group's detection so far and the current LRBG's passage.

Soundness first: every state a route reaches is inside both domains (the simulator's and the
encoder's), and from it the encoder's step agrees with the simulator's, value by value, legs
with a hand-over included. Then the verdicts: rules about the list proved for any number of
legs, an envelope rule left bounded with a counterexample to induction that the simulator
replays, `show` tells and `replay` re-judges; and cvc5 on an exported route step.
"""

from __future__ import annotations

import json
from fractions import Fraction as F
from pathlib import Path

import attrs
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as hs

from verifier.api import CheckOptions, check_packs
from verifier.check.unbounded import plan_for, rule_formulas
from verifier.cli import main
from verifier.lang import vocab
from verifier.run.loader import load_pack
from verifier.smt import induction
from verifier.smt.solve import COMPARED
from verifier.trust.differential import flat
from verifier.trust.strategies import pack_worlds
from verifier.world.sim import (SnapView, State, advance_route, holds, route_start,
                                snapshot_problems)

ROOT = Path(__file__).resolve().parent.parent
PACKS = ROOT / "tests" / "packs"
ROUTE_PACKS = [ROOT / "rules" / "route.toml", PACKS / "route-short-list.toml", PACKS / "route-reverse.toml"]
FEW = settings(max_examples=25, deadline=None, database=None, derandomize=True,
               suppress_health_check=list(HealthCheck))


@pytest.fixture(scope="module")
def route_packs():
    return [load_pack(p) for p in ROUTE_PACKS]


def _detections(world) -> dict:
    """Leg number -> (group found at its end, its detection error)."""
    return {g.at: (k, g.detect_error) for k, g in enumerate(world.route, 2) if g.found}


def _run(pack, plan, world, legs):
    """The simulator's route states at G1's passage and after each of ``legs`` legs."""
    snap = route_start(world, pack.scope, plan)
    out = [snap]
    det = _detections(world)
    for i, leg in enumerate(world.legs[:legs], 1):
        k, e = det.get(i, (0, F(0)))
        snap, _, problems = advance_route(snap, leg, k, e, pack.scope, pack, plan)
        assert problems == [], problems
        out.append(snap)
    return out


def _solver_state(snap, plan) -> dict:
    """A simulator route state as the solver's plain data (``induction.read_path``'s naming)."""
    rs = snap.route
    state = {"legs.count": snap.count, "cab_changes": snap.cab_changes,
             "actual.orientation": snap.orientation, "actual.motion": snap.motion,
             "actual.front": snap.front, "est.front_passage": snap.est_front_passage,
             "actual.travelled": snap.travelled, "est.travelled": snap.measured,
             "actual.over_reading": snap.over, "actual.under_reading": snap.under,
             "lrbg.prv": snap.world.prv, "lrbg.linking": rs.linking, "lrbg.frame": rs.frame,
             "passage.direction": 1 if snap.world.direction.word == "nominal" else -1,
             "passage.running": snap.world.running.word == "forward"}
    for k in range(2, len(rs.lrbgs) + 2):
        state[f"g{k}.lrbg"] = rs.lrbgs[k - 2]
        state[f"g{k}.in_window"] = rs.windows[k - 2]
    for n, fam in enumerate(plan.accumulators):
        for j, case in enumerate(fam.valuations):
            state[f"acc.{n}.{j}"] = snap.accumulators[fam.key][case]
    for (i, f), v in snap.frozen.items():
        state[f"legs.{i}.{f}"] = v.value if hasattr(v, "value") and not isinstance(v, bool) else v
    return state


def _plain(v):
    return v.word if hasattr(v, "word") else v


@FEW
@given(hs.data())
def test_the_simulators_route_steps_give_the_bounded_worlds_values(route_packs, data):
    # the simulator two ways: the whole world (State, its hand-overs worked out over all the
    # legs) and the route's state carried leg by leg (advance_route), every name and rule equal
    pack, world = data.draw(pack_worlds(route_packs))
    plan = plan_for(pack, [f for r in pack.rules for f in rule_formulas(r)])
    snaps = _run(pack, plan, world, len(world.legs))
    for snap in snaps:
        assert snapshot_problems(snap, pack.scope, plan) == []     # every reachable state is in the domain
    whole, carried = State(pack, world), SnapView(pack, snaps[-1], plan)
    names = [n for n in vocab.names_for(pack.scope.groups) if vocab.GLOBAL[n].kind not in ("input", "hidden-input")]
    for n in names:
        assert carried.get(n) == whole.get(n), n
    for rule in pack.rules:
        assert holds(rule, carried) == holds(rule, whole), rule.id


@FEW
@given(hs.data())
def test_from_every_reachable_route_state_the_encoders_step_agrees_with_the_simulators(route_packs, data):
    pack, world = data.draw(pack_worlds(route_packs))
    rules = pack.rules[:4]
    plan = plan_for(pack, [f for r in rules for f in rule_formulas(r)])
    j = data.draw(hs.integers(0, len(world.legs)))
    depth = min(2, len(world.legs) - j)
    snaps = _run(pack, plan, world, j + depth)
    s0 = snaps[j]
    flat_world = flat(attrs.evolve(s0.route.world, legs=()))
    det = _detections(world)
    legs = []
    for i in range(j + 1, j + depth + 1):
        leg = flat(attrs.evolve(world, legs=(world.legs[i - 1],)))["legs"][0]
        k, e = det.get(i, (0, F(0)))
        legs.append({**leg, "found": k, "detect_error": e})
    names = [n for n in COMPARED if vocab.groups_needed(n) <= pack.scope.groups] + [
        n for n in vocab.names_for(pack.scope.groups) if n in vocab.GROUP_NAMES]
    path = induction.evaluate_path(pack, plan, {"world": flat_world, "state": _solver_state(s0, plan),
                                                "legs": legs}, names, rules)
    assert path is not None, "the encoder's domain rejects a reachable route state"
    for i, snap in enumerate(snaps[j:]):
        view = SnapView(pack, snap, plan)
        for n in names:
            assert path[i][n] == _plain(view.get(n)), (i, n)
        for rule in rules:
            assert path[i][f"rule:{rule.id}:expect"] == holds(attrs.evolve(rule, given=None), view), (i, rule.id)


# ---- verdicts and evidence ---------------------------------------------------------------------

PACK = """\
[pack]
name = "route-any"
title = "A route of three groups, checked for any number of legs"
legs = "any"

[world]
groups = 3
history = 2
g2_distance = ["200 m", "2 km"]
g2_side = "nominal"
leg_distance = ["0 m", "3 km"]

[[group]]
number = 3
distance = ["200 m", "2 km"]

[[info]]
id = "g3_eoa"
title = "An end of authority 700 m from G3"
group = 3
at = "700 m"
valid = "nominal"

[[rule]]
id = "the-lrbg-is-the-last-group-accepted"
title = "The report refers to the last group that became the LRBG"
expect = "lrbg.group == (if g3.lrbg then 3 else if g2.lrbg then 2 else 1)"

[[rule]]
id = "the-list-holds-the-lrbg-and-its-predecessor"
title = "The list holds the current LRBG and the one before it"
expect = "(lrbg.group == 3 implies g3.remembered and g2.remembered == g2.lrbg and not (g2.lrbg and g1.remembered)) and lrbg.remembered == (if lrbg.previous == 0 then 1 else 2)"

[[rule]]
id = "a-late-takeover"
title = "True in every world of up to 3 legs, false at 4: G3 the LRBG after a fourth leg"
expect = "g3.lrbg implies journey.legs <= 3"

[[rule]]
id = "end-of-authority-supervised"
title = "While the max safe front end is short of G3's end of authority, so is the real front end"
given = "rbc.placed and info.g3_eoa.accepted and along(report.q_dirlrbg, info.g3_eoa.position - rbc.max_safe_front) >= 0 m"
expect = "along(report.q_dirlrbg, info.g3_eoa.real - actual.front) >= 0 m"
"""


@pytest.fixture(scope="module")
def checked(tmp_path_factory):
    d = tmp_path_factory.mktemp("route-any")
    (d / "route-any.toml").write_text(PACK)
    pack = load_pack(d / "route-any.toml")
    # the step at depth 1 only (deeper steps fail alike; they add time, not evidence)
    res = check_packs([pack], CheckOptions(max_legs=0, induction_depth=1, out=d / "out", jobs=2))[0]
    return d, {r.rule: r for r in res.results}


def test_rules_about_the_list_are_proved_for_any_number_of_legs(checked):
    _, res = checked
    for rid in ("the-lrbg-is-the-last-group-accepted", "the-list-holds-the-lrbg-and-its-predecessor"):
        assert res[rid].verdict == "holds", (rid, res[rid].message)
        assert res[rid].proof["kind"] == "induction"


def test_a_rule_true_up_to_the_bound_and_false_after_a_later_hand_over_is_never_proved(checked, tmp_path):
    # soundness: the rule holds in every world of up to 3 legs (the journey is never longer)
    # and fails at 4 once G3 has taken over; the step must not prove it, and the deepened base
    # case finds the world
    d, res = checked
    assert res["a-late-takeover"].verdict == "bounded"
    pack = load_pack(d / "route-any.toml")
    deeper = check_packs([pack], CheckOptions(max_legs=4, induction_depth=1, rules=("a-late-takeover",),
                                              out=tmp_path))[0]
    (r,) = deeper.results
    assert (r.verdict, r.proof["legs"]) == ("violated", 4), (r.verdict, r.message)


def test_an_envelope_rule_gets_a_replayed_counterexample_to_induction(checked, capsys):
    d, res = checked
    r = res["end-of-authority-supervised"]
    assert r.verdict == "bounded", (r.verdict, r.message)
    cti = d / "out" / "route-any" / "end-of-authority-supervised.induction.json"
    doc = json.loads(cti.read_text())
    route = doc["state"]["route"]
    assert set(route) == {"journey", "became_lrbg", "in_window", "frame", "linking", "current"}
    assert "g3" in doc["world"] and all("found" in leg for leg in doc["legs"])
    assert (cti.with_suffix(".svg")).exists()
    assert main(["show", str(cti), "--pack", str(d / "route-any.toml")]) == 0
    out = capsys.readouterr().out
    assert "The route:" in out and "the LRBG" in out
    assert main(["replay", str(cti)]) == 0
    assert "still not inductive" in capsys.readouterr().out


def test_cvc5_agrees_on_a_route_step(checked):
    from verifier.smt import second
    d, _ = checked
    pack = load_pack(d / "route-any.toml")
    rule = pack.rule("the-list-holds-the-lrbg-and-its-predecessor")
    text = induction.step_obligation(pack, rule, (), plan_for(pack, rule_formulas(rule)), 1)
    assert second.solve_text(text, timeout=60).status == "unsat"
    rule = pack.rule("end-of-authority-supervised")
    text = induction.step_obligation(pack, rule, (), plan_for(pack, rule_formulas(rule)), 1)
    assert second.solve_text(text, timeout=60).status == "sat"
