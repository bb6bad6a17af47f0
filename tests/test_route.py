"""A route of groups (DESIGN 4.10) against cases worked by hand, in both implementations.

The line of the cases: G1's mark at 0 m; G2 500 m on, facing the same way; G3 800 m beyond G2
(1300 m from G1), facing the other way. Every group has two balises, both read, Q_LOCACC 0 m,
no offset, linked; the train is 100 m long with its antenna 2 m behind the front and passes G1
front first in G1's nominal direction; odometry exact, no detection error. The numbers below
are worked from the text of the standard and the design, not read from the tool:

- SUBSET-026 3.4.4.4.3 (published): a linked group is expected at D_LINK -/+ Q_LOCACC; with
  exact odometry and Q_LOCACC 0 m the antenna is on the mark when the group is found, so each
  is found inside its window and passed the announced way, and becomes the LRBG.
- SUBSET-026 3.6.1.3 (published) names the onboard's list of LRBGs; its length (here
  `history = 2`) and the rejection of information referred to a group no longer in it
  (3.6.2.2.2 c) are from memory (docs/facts.md).
- The report after G3: the train faces G1's nominal direction, which is G3's reverse; its front
  is at 1302 + 100 = 1402 m in G1's frame, 102 m on G3's reverse side (3.4.2.2.2, 7.5.1.104,
  7.5.1.106: codes 0 reverse, 1 nominal).
- The doubts after G3 (SUBSET-026 3.6.4.1.1, 3.6.4.1.3, 7.5.1.43/44; odometry 5 m + 5 % from
  memory of SUBSET-041 5.3.1.1, detection 1 m on top, DESIGN 4.1): Q_LOCACC 0 m + 5 m + 5 % of
  100 m + 1 m = 11 m each way.
"""

from __future__ import annotations

from fractions import Fraction as F

import pytest

from verifier.cli import main
from verifier.lang.vocab import Direction, Running
from verifier.run.loader import load_pack
from verifier.smt.concrete import Evaluator
from verifier.trust.differential import flat
from verifier.world.sim import Group2, Leg, State, World, scope_problems

from conftest import ROOT

NOM, REV = Direction.NOMINAL, Direction.REVERSE

PACK = """
[pack]
name = "hand-worked-route"
title = "A route of three groups worked by hand"
legs = 3

[world]
groups = 3
history = 2
g2_distance = ["500 m", "500 m"]
g2_side = "nominal"
locacc = ["0 m", "0 m"]

[[group]]
number = 3
distance = "800 m"
orientation = "opposite"

[[info]]
id = "limit"
group = 1
at = "900 m"
valid = "nominal"

[[info]]
id = "marker"
group = 2
at = "150 m"
valid = "both"

[[info]]
id = "stop"
group = 3
at = "400 m"
valid = "reverse"

[[rule]]
id = "r"
title = "placeholder"
expect = "true"
"""


def _group(distance, orientation, found, at) -> Group2:
    return Group2(distance=F(distance), side=NOM, orientation=orientation, balises=2, read=2,
                  linked=True, locacc=F(0), offset=F(0), found=found, at=at, detect_error=F(0))


def _world(g2_found: bool) -> World:
    if g2_found:      # onto G2 (500 m), onto G3 (800 m), then 100 m on
        legs = (Leg(False, Running.FORWARD, F(500), F(500)), Leg(False, Running.FORWARD, F(800), F(800)),
                Leg(False, Running.FORWARD, F(100), F(100)))
        g2, g3 = _group(500, NOM, True, 1), _group(800, REV, True, 2)
    else:             # G2 passed unseen: straight onto G3 (1300 m), then 100 m on
        legs = (Leg(False, Running.FORWARD, F(1300), F(1300)), Leg(False, Running.FORWARD, F(100), F(100)))
        g2, g3 = _group(500, NOM, False, 0), _group(800, REV, True, 1)
    return World(balises=2, read=2, linked=True, locacc=F(0), offset=F(0), length=F(100),
                 antenna=F(2), direction=NOM, running=Running.FORWARD, detect_error=F(0),
                 legs=legs, g2=g2, later=(g3,))


@pytest.fixture(scope="module")
def pack(tmp_path_factory):
    path = tmp_path_factory.mktemp("route") / "hand-worked-route.toml"
    path.write_text(PACK)
    return load_pack(path)


@pytest.fixture(scope="module")
def encoding(pack):
    return Evaluator(pack, 3)


# (name, value after two hand-overs, value with G2 passed unseen); see the module docstring
CASES = [
    ("lrbg.group", F(3), F(3)),
    ("lrbg.previous", F(2), F(1)),
    ("lrbg.remembered", F(2), F(2)),
    ("g1.remembered", False, True),          # a list of two: G1 left it at the third LRBG
    ("g2.remembered", True, False),           # never the LRBG: never in the list
    ("g3.remembered", True, True),
    ("legs.count", F(1), F(1)),
    ("journey.legs", F(3), F(2)),
    ("actual.front", F(-102), F(-102)),
    ("report.q_dlrbg", REV, REV),
    ("report.q_dirlrbg", REV, REV),
    ("report.q_dirtrain", REV, REV),
    ("report.code.q_dirlrbg", F(0), F(0)),
    ("est.d_lrbg", F(102), F(102)),
    ("est.l_doubtover", F(11), F(11)),
    ("est.l_doubtunder", F(11), F(11)),
    ("g3.link_position", F(1300), F(1300)),
    ("lrbg.link_orientation", REV, REV),
    # G1's speed limit: rejected once G1 left the list; with G2 unseen G1 is still in it, and
    # the limit (900 m in G1's frame) lies 1300 - 900 = 400 m from G3 on G3's nominal side
    ("info.limit.accepted", False, True),
    ("info.limit.real", F(400), F(400)),
    # G2's both-ways marker: 150 m from G2 the way the train faces: 650 m in G1's frame, so
    # 1300 - 650 = 650 m from G3 on its nominal side; not usable once G2 never was the LRBG
    ("info.marker.accepted", True, False),
    ("info.marker.real", F(650), F(650)),
    # G3's stop marker for trains facing G3's reverse way: 400 m on G3's reverse side, 298 m
    # ahead of the real front (1700 m against 1402 m in G1's frame)
    ("info.stop.accepted", True, True),
    ("info.stop.position", F(-400), F(-400)),
    ("info.stop.ahead", F(298), F(298)),
]


@pytest.mark.parametrize("g2_found", [True, False], ids=["two-hand-overs", "g2-unseen"])
def test_a_route_worked_by_hand_in_the_simulator_and_the_encoding(pack, encoding, g2_found):
    world = _world(g2_found)
    assert scope_problems(world, pack.scope, 3) == []
    st = State(pack, world)
    got = encoding.evaluate(flat(world))
    for name, two, unseen in CASES:
        want = two if g2_found else unseen
        sim = st.info_value(*name.split(".")[1:]) if name.startswith("info.") else st.get(name)
        assert sim == want, (name, "simulator", sim, want)
        assert got.values[name] == _plain(want), (name, "encoding", got.values[name], want)
    # the default design places every accepted item where it really is (orientation known)
    for item in ("limit", "marker", "stop"):
        if st.info_value(item, "accepted"):
            assert st.info_value(item, "position") == st.info_value(item, "real"), item


def _plain(v):
    from verifier.trust.differential import plain
    return plain(v)


def test_history_of_one_keeps_only_the_current_lrbg(pack, tmp_path):
    path = tmp_path / "short.toml"
    path.write_text(PACK.replace("history = 2", "history = 1"))
    short = load_pack(path)
    st = State(short, _world(True))
    assert [st.get(f"g{k}.remembered") for k in (1, 2, 3)] == [False, False, True]
    assert not st.info_value("marker", "accepted") and st.info_value("stop", "accepted")


@pytest.mark.skipif(not __import__("verifier.smt.second", fromlist=["available"]).available(),
                    reason="cvc5 (verifier[crosscheck]) not installed")
def test_cvc5_agrees_on_route_rules(capsys, tmp_path):
    # the list of the shipped route pack, proved by z3 and by cvc5: the base case, its witness
    # and the induction step across hand-overs (three obligations); four rules with the
    # re-referral agreed too when measured (8 obligations, 38 s). The pack's lemma is left out:
    # the rule's step does not need it, and cvc5 on the lemma's own base case alone takes 5 min.
    import json
    text = (ROOT / "rules" / "route.toml").read_text()
    start = text.index("[[lemma]]")
    (tmp_path / "route.toml").write_text(text[:start] + text[text.index("[[rule]]", start):])
    code = main(["check", str(tmp_path / "route.toml"), "--rule", "information-of-a-group-that-left-the-list-is-rejected",
                 "--crosscheck", "--no-files", "--no-cache", "--json"])
    doc = json.loads(capsys.readouterr().out)
    assert code == 0
    c = doc["crosscheck"]["counts"]
    assert c["second_disagree"] == 0 and c["disagreements"] == 0 and c["second_agree"] >= 3


# Seeded mistakes in the route's part of the default design (DESIGN 4.10), each with the rule of
# rules/route.toml that must refute it: (formula, operator, replaced text, rule).
ROUTE_MUTANTS = [
    ("onboard info_accepted", "ignore the onboard's list", "item.remembered",
     "information-of-a-group-that-left-the-list-is-rejected"),
    ("onboard info_position", "drop a term", "item.link_position - lrbg.link_position",
     "one-way-items-are-placed-where-they-are"),
    ("onboard info_position", "flip a sign", "along(lrbg.link_orientation, item.link_position - lrbg.link_position)",
     "one-way-items-are-placed-where-they-are"),
    ("onboard info_position", "change a comparison", "item.link_orientation == lrbg.link_orientation",
     "one-way-items-are-placed-where-they-are"),
    ("onboard info_accepted", "change a comparison", "item.link_orientation == lrbg.link_orientation",
     "one-way-information-applies-to-the-orientation"),
]


@pytest.mark.parametrize("target, operator, original, rule", ROUTE_MUTANTS,
                         ids=[f"{m[0].split()[1]}-{m[1].replace(' ', '-')}" for m in ROUTE_MUTANTS])
def test_the_route_pack_refutes_mistakes_in_the_re_referral(target, operator, original, rule):
    from verifier.smt.concrete import violation_status
    from verifier.trust.mutate import build, mutants
    pack = load_pack(ROOT / "rules" / "route.toml")
    found = [m for m in mutants(pack) if (m.target, m.operator, m.original) == (target, operator, original)]
    assert found, "the mutation operator no longer produces this mutant"
    original_status = violation_status(pack, pack.rule(rule), 2, rlimit=200_000_000, timeout=30)
    mutant = build(pack, found[0])
    mutant_status = violation_status(mutant, mutant.rule(rule), 2, rlimit=200_000_000, timeout=30)
    assert (original_status, mutant_status) == ("unsat", "sat")
