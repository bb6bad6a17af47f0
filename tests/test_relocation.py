"""Two groups and trackside information (DESIGN 4.8, 4.9): the language, the files, the limits.

The physics of the hand-over is checked against hand-worked values in test_facts.py and, world
by world, between the simulator and the encoding in test_differential.py (its catalogue holds
rules/relocation.toml and tests/packs/two-groups.toml)."""

from __future__ import annotations

import json
from fractions import Fraction as F
from pathlib import Path

import pytest

from conftest import pack_text, rule_toml
from verifier.cli import main
from verifier.api import CheckOptions, check_packs
from verifier.errors import PackError
from verifier.run.loader import load_pack
from verifier.world.scenario import world_from_data, world_to_data
from verifier.world.sim import Group2, Leg, World
from verifier.lang.vocab import Direction, Running

ROOT = Path(__file__).resolve().parent.parent
TWO = 'groups = 2\ng2_distance = ["100 m", "600 m"]\nleg_distance = ["0 m", "800 m"]'


def _errors(write_pack, text) -> str:
    with pytest.raises(PackError) as e:
        load_pack(write_pack(text))
    return "\n".join(d.message for d in e.value.diagnostics)


@pytest.mark.parametrize("world, rules, extra, needle", [
    ('g2_side = "nominal"', rule_toml("r", "true"), "", "set world.groups = 2"),
    ("groups = 9", rule_toml("r", "true"), "", "world.groups must be a whole number 1..8"),
    ("groups = 2\nhistory = 0", rule_toml("r", "true"), "", "world.history must be a whole number 1..8"),
    ("groups = 3", rule_toml("r", "true"), "[[group]]\nnumber = 4", "needs a number 2..3"),
    ("groups = 3", rule_toml("r", "g4.found"), "", "needs a route of 4 groups or more"),
    (TWO + '\ng2_orientation = "sideways"', rule_toml("r", "true"), "", "same, opposite, any"),
    ("", rule_toml("r", "g2.lrbg"), "", "set [world] groups = 2"),
    ("", rule_toml("r", "info.nope.accepted"), "", "the pack has no [[info]]"),
    ("", rule_toml("r", "item.at > 0 m"), "", "elsewhere write info.ID.FIELD"),
    ("", rule_toml("r", "true"), '[[info]]\nid = "x"\ngroup = 2\nat = "5 m"\nvalid = "nominal"', "info group must be 1"),
    ("", rule_toml("r", "true"), '[[info]]\nid = "x"\nat = "5 m"\nvalid = "up"', "nominal, reverse or both"),
    ("", rule_toml("r", "true"), '[onboard]\ninfo_accepted = "true"', "the pack has no [[info]]"),
])
def test_bad_two_group_and_info_input_is_reported(write_pack, world, rules, extra, needle):
    assert needle in _errors(write_pack, pack_text(rules, world=world, extra=extra))


def test_onboard_item_formulas_cannot_read_the_truth(write_pack):
    text = pack_text(rule_toml("r", "true"), extra='''
        [[info]]
        id = "eoa"
        at = "500 m"
        valid = "nominal"
        [onboard]
        info_position = "item.location + actual.front - est.front"
        ''')
    assert "cannot read 'actual.front'" in _errors(write_pack, text)


def test_a_scenario_with_a_second_group_round_trips():
    w = World(legs=(Leg(False, Running.FORWARD, F(300), F(300)),),
              g2=Group2(distance=F(298), orientation=Direction.REVERSE, linked=True, locacc=F(4),
                        offset=F(1, 2), found=True, at=1, detect_error=F(-1, 4)))
    assert world_from_data(json.loads(json.dumps(world_to_data(w)))) == w


def test_two_group_packs_are_proved_across_the_hand_over(write_pack):
    # DESIGN 4.10 "What a proof carries": the induction state carries the current group, so a
    # rule about the hand-over is proved for any number of legs, not left bounded
    text = pack_text(rule_toml("r", "journey.legs == (if g2.lrbg then g2.at else 0) + legs.count"),
                     world=TWO).replace("legs = 2", 'legs = "any"')
    res = check_packs([load_pack(write_pack(text))], CheckOptions(out=None, max_legs=0))[0].results[0]
    assert (res.verdict, res.proof["kind"]) == ("holds", "induction"), res.message


def test_verifier_test_refuses_a_two_group_pack(capsys, monkeypatch):
    monkeypatch.chdir(ROOT)
    assert main(["test", "rules/relocation.toml", "--impl", "kestrel_onboard:report", "--path", "examples"]) == 2
    assert "observes one group only" in capsys.readouterr().err


def test_the_story_and_the_diagram_tell_the_hand_over(capsys, monkeypatch):
    monkeypatch.chdir(ROOT)
    f = "counterexamples/marrow-vale-approach/buffer-stops-placed-where-they-are.json"
    assert main(["show", f]) == 0
    text = capsys.readouterr().out
    assert "The second group G2" in text and "G2 becomes the LRBG" in text
    assert "faces the other way" in text
    svg = Path(f).with_suffix(".svg").read_text()
    assert "G1 at 1200 m, nominal to the left" in svg and "buffers placed at 420 m" in svg
    # the box at G1's passage says which frame each word is in (rear first over G1 nominal:
    # facing G1's reverse direction, which is KQ-2's nominal one)
    assert "passed G1 nominal (G1's frame), rear first" in svg and "faces nominal (G2's frame)" in svg


@pytest.mark.skipif(not __import__("verifier.smt.second", fromlist=["available"]).available(),
                    reason="cvc5 (verifier[crosscheck]) not installed")
def test_cvc5_agrees_on_a_relocation_rule(capsys, monkeypatch):
    # the two-group report and the both-ways placement (issue 16) among them
    monkeypatch.chdir(ROOT)
    code = main(["check", "rules/relocation.toml", "--rule", "relocation-makes-g2-the-lrbg",
                 "--rule", "group-outside-its-window-is-rejected",
                 "--rule", "unlinked-single-balise-becomes-the-lrbg-by-two-groups",
                 "--rule", "both-ways-item-on-the-side-the-train-faces", "--crosscheck", "--no-files",
                 "--no-cache", "--json"])
    doc = json.loads(capsys.readouterr().out)
    assert code == 0
    c = doc["crosscheck"]["counts"]
    assert c["second_disagree"] == 0 and c["disagreements"] == 0 and c["second_agree"] >= 6


def test_an_item_the_onboard_rejects_leaves_the_trackside_view_drawn(write_pack):
    # Worked by hand: front first over G1 (nominal, two balises), one leg of 300 m onto a linked
    # G2 that faces the same way; the train faces nominal, so an item valid for G1's reverse
    # direction only is not accepted (SUBSET-026 3.6.3.1.3, published: only information valid
    # for the train orientation is taken into account) while the report is placed. The
    # drawing must still show the trackside's interval (a rejected item once hid it).
    from xml.etree import ElementTree as ET
    from verifier.evidence import cexfile, diagram
    from verifier.world.sim import State
    text = pack_text(rule_toml("r", "info.limit.accepted"), world=TWO, extra='''
        [[info]]
        id = "limit"
        group = 1
        at = "400 m"
        valid = "reverse"
        ''')
    pack = load_pack(write_pack(text))
    w = World(balises=2, read=2, antenna=F(2), length=F(80),
              legs=(Leg(False, Running.FORWARD, F(300), F(300)),),
              g2=Group2(distance=F(300), side=Direction.NOMINAL, orientation=Direction.NOMINAL,
                        balises=2, read=2, linked=True, locacc=F(4), found=True, at=1))
    st = State(pack, w)
    assert st.get("g2.lrbg") and st.get("rbc.placed") and not st.info_value("limit", "accepted")
    # the item lies 400 m on G1's reverse side: 700 m on G2's reverse side
    assert st.info_value("limit", "real") == -700
    rule = pack.rule("r")
    doc = cexfile.build(pack, rule, st, verdict="violated", bound=2, solver="test", minimal=True)
    texts = ["".join(t.itertext()) for t in ET.fromstring(diagram.render(doc, rule, st)).iter(
        "{http://www.w3.org/2000/svg}text")]
    assert "reported interval," in texts and "limit -700 m" in texts
    assert any(t.startswith("The real front, at ") for t in texts)
    assert not any("placed at" in t for t in texts)
    assert "information item where it really is" in texts
    assert "the other group; dashed: its nominal direction" in texts


def test_simulate_tells_the_journey_over_both_groups(write_pack, tmp_path, capsys):
    # Worked by hand (as in test_facts.py): front first over G1 nominal, antenna 2 m behind the
    # front, on G1's mark at the passage; 300 m onto G2 (300 m on, facing the other way), then
    # 100 m more. Leg 1 ends with the front at 302 m in G1's frame; after leg 2 the front is
    # 402 m from G1, i.e. 102 m on G2's reverse side: -102 m in G2's frame. The end of authority
    # 1500 m from G1 lies 1200 m beyond G2, on its reverse side: -1200 m.
    pack = write_pack(pack_text(rule_toml("r", "true"), world=TWO, extra='''
        [[info]]
        id = "eoa"
        at = "1500 m"
        valid = "nominal"
        '''))
    scen = tmp_path / "s.toml"
    scen.write_text('[lrbg]\nlinked = true\n[train]\nlength = "80 m"\nantenna = "2 m"\n'
                    '[g2]\ndistance = "300 m"\nside = "nominal"\norientation = "opposite"\n'
                    'linked = true\nlocacc = "4 m"\nfound = true\nat = 1\n'
                    '[[legs]]\nrunning = "forward"\ndistance = "300 m"\n'
                    '[[legs]]\nrunning = "forward"\ndistance = "100 m"\n')
    assert main(["simulate", str(scen), "--pack", str(pack)]) == 0
    out = capsys.readouterr().out
    assert "warning" not in out
    assert "passage over G1: moving nominal, forward (front first)" in out
    assert "faces the other way" in out and "found at the end of leg 1, inside its window; it becomes the LRBG" in out
    assert "leg 1: forward, real 300 m, measured 300 m; real front 302 m, estimated 302 m (G1's frame)" in out
    assert "G2 becomes the LRBG at the end of leg 1" in out
    assert "leg 2: forward, real 100 m, measured 100 m; real front -102 m, estimated -102 m (G2's frame)" in out
    assert "info eoa: accepted, placed at -1200 m; really at -1200 m" in out
    scen.write_text(scen.read_text().replace('"opposite"', '"unknown"'))
    assert main(["simulate", str(scen), "--pack", str(pack)]) == 2
    assert "never unknown" in capsys.readouterr().err


def test_an_onboard_formula_reading_line_data_is_pointed_to_linking(write_pack):
    text = pack_text(rule_toml("r", "true"), world=TWO, extra='''
        [[info]]
        id = "eoa"
        at = "500 m"
        valid = "nominal"
        [onboard]
        info_position = "item.location - g2.distance"
        ''')
    assert ("cannot read 'g2.distance' (readable only by the trackside; the onboard knows it "
            "from linking as 'g2.link_distance')") in _errors(write_pack, text)
