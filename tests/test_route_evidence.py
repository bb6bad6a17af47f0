"""The evidence of a route of groups (DESIGN 4.10): the diagram, the story (``verifier show``) and
the simulate text tell every group, each hand-over (from which LRBG, and how) or rejection, and
the onboard's list after each hand-over.

Every world here is worked by hand: front first over G1 in its nominal direction, the antenna
2 m behind the front, so the antenna is on G1's mark at the detection instant (no offsets, no
detection errors, exact odometry); a leg onto a group runs exactly the distance from the
antenna to that group's mark (the detection physics of DESIGN 4.8). Positions are then checked
in the frame of the LRBG of each leg, computed from the engineered marks by hand."""

from __future__ import annotations

import re
from fractions import Fraction as F
from pathlib import Path
from xml.etree import ElementTree as ET

from conftest import pack_text, rule_toml
from verifier.cli import main
from verifier.evidence import cexfile, diagram
from verifier.evidence.diagram import CHAR
from verifier.evidence.story import story_text
from verifier.evidence.text import simulate_text
from verifier.lang.vocab import Direction, Running
from verifier.run.loader import load_pack
from verifier.world.sim import Group2, Leg, State, World, marks, scope_problems

NOM, REV = Direction.NOMINAL, Direction.REVERSE
SVG = "{http://www.w3.org/2000/svg}"
ITEMS = '''
    [[info]]
    id = "gate"
    group = 1
    at = "900 m"
    valid = "nominal"

    [[info]]
    id = "board"
    group = 3
    at = "150 m"
    valid = "both"
    '''


def _leg(d) -> Leg:
    return Leg(False, Running.FORWARD, F(d), F(d))


def _pack(write_pack, groups: int, history: int = 8, legs: int = 4):
    world = (f'groups = {groups}\nleg_distance = ["0 m", "2 km"]'
             + (f"\nhistory = {history}" if history != 8 else ""))
    extra = ITEMS + '''
    [[group]]
    number = 3
    title = "Wrenfold east"
    distance = ["100 m", "1 km"]
    '''
    return load_pack(write_pack(pack_text(rule_toml("r", "lrbg.group == 1"), name="wrenfold-line",
                                          legs=legs, world=world, extra=extra)))


def _views(pack, w: World) -> tuple:
    """The simulate text, the story and the diagram's texts (and the SVG root) of one world."""
    assert scope_problems(w, pack.scope, pack.legs) == []
    st = State(pack, w)
    rule = pack.rule("r")
    doc = cexfile.build(pack, rule, st, verdict="violated", bound=pack.legs, solver="test", minimal=True)
    svg = diagram.render(doc, rule, st)
    root = ET.fromstring(svg)      # well-formed XML
    story = story_text(doc, pack, rule, st, shown="x.json", checked=1)
    return simulate_text(pack, w)[0], story, root, st


def _texts(root) -> list:
    return ["".join(t.itertext()) for t in root.iter(f"{SVG}text")]


def _no_overlapping_labels(root) -> None:
    """Centred labels on one line of the drawing do not overlap (the width estimate the layout
    uses: CHAR per character)."""
    rows: dict = {}
    for t in root.iter(f"{SVG}text"):
        if t.get("text-anchor") == "middle" and t.get("font-size") in ("10", "11"):
            w = len("".join(t.itertext())) * CHAR
            x = F(t.get("x"))
            rows.setdefault(t.get("y"), []).append((x - w / 2, x + w / 2))
    for spans in rows.values():
        spans.sort()
        for (_, b), (a, _) in zip(spans, spans[1:]):
            assert b <= a


def test_a_three_group_route_hands_over_twice_and_g1_leaves_a_list_of_two(write_pack):
    # G2 300 m on, G3 400 m beyond it facing the other way, both linked; the list holds two
    # LRBGs. Leg 1 (300 m) ends on G2, leg 2 (400 m) on G3 (700 m from G1), leg 3 runs 100 m on.
    pack = _pack(write_pack, 3, history=2)
    w = World(linked=True, legs=(_leg(300), _leg(400), _leg(100)),
              g2=Group2(distance=F(300), linked=True, locacc=F(3), found=True, at=1),
              later=(Group2(distance=F(400), orientation=REV, linked=True, locacc=F(2), found=True, at=2),))
    assert marks(w) == [0, 300, 700]
    text, story, root, st = _views(pack, w)
    assert st.get("lrbg.group") == 3
    # each leg in the frame of its LRBG: after leg 2 the front is 702 m from G1, 402 m from G2;
    # after leg 3 it is 802 m from G1, 102 m beyond G3 on G3's reverse side
    assert "leg 1: forward, real 300 m, measured 300 m; real front 302 m, estimated 302 m (G1's frame)" in text
    assert "leg 2: forward, real 400 m, measured 400 m; real front 402 m, estimated 402 m (G2's frame)" in text
    assert "leg 3: forward, real 100 m, measured 100 m; real front -102 m, estimated -102 m (G3's frame)" in text
    assert "G2 takes over from G1 as the LRBG at the end of leg 1 (inside the window linking announced from G1" in text
    assert "G3 takes over from G2 as the LRBG at the end of leg 2 (inside the window linking announced from G2" in text
    assert "the onboard's list of LRBGs: G1 and G2\n" in text
    assert "the onboard's list of LRBGs: G2 and G3; G1 left it" in text
    assert "positions below: G3's frame" in text
    # G1's gate is not used any more: G1 left the list (DESIGN 4.10)
    assert "info gate: not accepted; really at -200 m" in text

    assert "The third group G3" in story and "its mark lies 400 m from G2's" in story
    # the window from G2, the LRBG when G3 comes: 400 m -/+ G3's 2 m
    assert "from G2, the LRBG when it comes, the onboard expects it 398 m to 402 m ahead" in story
    assert "The antenna reaches G3 and G3 takes over from G2 as the LRBG" in story
    assert "opposite to G1's), and the confidence interval restarts from G3's Q_LOCACC 2 m" in story
    assert "The onboard's list of LRBGs is now G1 and G2." in story
    assert "The onboard's list of LRBGs is now G2 and G3; G1 left it." in story
    assert "After it: real front 402 m, estimated front 402 m (G2's frame)." in story

    texts = _texts(root)
    assert "metres, G3's frame" in texts and "The group (G3, LRBG)" in texts
    # G2 (same way as G1) lies 400 m on G3's nominal side, and points against G3's nominal way
    assert "G2 at 400 m, nominal to the left; in the list" in texts
    assert "G1 at 700 m, nominal to the left; left the list" in texts
    assert "After leg 1: G2 is the LRBG" in texts and "After leg 2: G3 is the LRBG" in texts
    # information of G1 and of G3 is drawn where it really is, in G3's frame
    assert "gate -200 m" in texts and "board -150 m" in texts
    assert "a group not in the onboard's list (left it, rejected, unseen)" in texts
    # G1's two balises are drawn hollow and dashed (and one in the legend); G2's are not
    dashed = [r for r in root.iter(f"{SVG}rect") if r.get("stroke-dasharray") == "3 2"]
    assert len(dashed) == 3
    _no_overlapping_labels(root)


def test_a_rejected_group_and_a_single_balise_referred_to_the_move(write_pack):
    # Nothing linked. G2 (two balises, both read) 300 m on takes over by two balises; G3, 250 m
    # beyond, has one of its two balises read and is rejected; G4, a single balise 200 m beyond
    # G3, is found while moving from G2 towards it: it takes over from G2 (not from G3), its
    # directions referred to that move; the list keeps G1, G2 and G4.
    pack = _pack(write_pack, 4)
    w = World(legs=(_leg(300), _leg(250), _leg(200), _leg(50)),
              g2=Group2(distance=F(300), found=True, at=1),
              later=(Group2(distance=F(250), balises=2, read=1, found=True, at=2),
                     Group2(distance=F(200), balises=1, read=1, found=True, at=3)))
    assert marks(w) == [0, 300, 550, 750]
    text, story, root, st = _views(pack, w)
    assert (st.get("lrbg.group"), st.get("lrbg.previous")) == (4, 2)

    assert "G2 takes over from G1 as the LRBG at the end of leg 1 (two balises read)" in text
    assert ("G3 is found at the end of leg 2 and rejected (one balise of a multi-balise group read, "
            "and no usable linking); the LRBG stays G2") in text
    assert ("G4 takes over from G2 as the LRBG at the end of leg 3 (a single balise, its directions "
            "referred to the move from G2)") in text
    assert "the onboard's list of LRBGs: G1, G2 and G4" in text
    # leg 3 ends 752 m from G1: 452 m from G2; leg 4 ends 802 m from G1: 52 m past G4
    assert "real front 452 m, estimated 452 m (G2's frame)" in text
    assert "real front 52 m, estimated 52 m (G4's frame)" in text
    assert "group G4: mark 200 m from G3's on G1's nominal side" in text

    assert "The antenna reaches G3, which does not become the LRBG (one balise" in story
    assert "the report stays relative to G2." in story
    assert ("G4 takes over from G2 as the LRBG in a position report based on two balise groups" in story
            and "positive in the direction from G2 towards G4" in story)
    assert "The onboard's list of LRBGs is now G1, G2 and G4." in story
    assert "The fourth group G4" in story and "It is found at the end of leg 2; it does not become the LRBG." in story

    texts = _texts(root)
    # G4's frame is the move from G2 (G1's nominal way): G1 750 m behind, G3 200 m behind
    assert "G1 at -750 m, nominal to the right; in the list" in texts
    assert "G2 at -450 m, nominal to the right; in the list" in texts
    assert "G3 at -200 m, nominal to the right; rejected at leg 2" in texts
    assert "After leg 3: G4 is the LRBG" in texts
    # the direction over G4 is known (referred to the move), so leg 4's estimate is drawn
    assert "front = est. 52 m" in texts
    _no_overlapping_labels(root)


def test_a_group_passed_unseen_and_the_next_linked_from_g1(write_pack, tmp_path, capsys):
    # G2 (300 m on) is not found although the antenna runs over it in leg 1, which ends on the
    # linked G3 700 m from G1: G3 is judged from G1, its window 700 m -/+ 5 m. Through
    # `verifier simulate` with a scenario file, as a user would.
    pack = _pack(write_pack, 3, legs=2)
    w = World(linked=True, legs=(_leg(700), _leg(50)),
              g2=Group2(distance=F(300)),
              later=(Group2(distance=F(400), linked=True, locacc=F(5), found=True, at=1),))
    text, story, root, st = _views(pack, w)
    assert st.get("lrbg.group") == 3 and st.get("lrbg.previous") == 1
    assert "not found; the train passed it unseen in leg 1" in text
    assert "G3 takes over from G1 as the LRBG at the end of leg 1 (inside the window linking announced from G1" in text
    assert "the onboard's list of LRBGs: G1 and G3" in text
    assert "It is not found: the train passed it unseen in leg 1." in story
    assert "from G1, the LRBG when it comes, the onboard expects it 695 m to 705 m ahead" in story
    texts = _texts(root)
    assert "G2 at -400 m, nominal to the right; passed unseen in leg 1" in texts
    assert "G1 at -700 m, nominal to the right; in the list" in texts
    _no_overlapping_labels(root)

    scen = tmp_path / "s.toml"
    scen.write_text('[lrbg]\nlinked = true\n[train]\nlength = "100 m"\nantenna = "2 m"\n'
                    '[g2]\ndistance = "300 m"\nside = "nominal"\norientation = "same"\n'
                    '[g3]\ndistance = "400 m"\nside = "nominal"\norientation = "same"\nlinked = true\n'
                    'locacc = "5 m"\nfound = true\nat = 1\n'
                    '[[legs]]\nrunning = "forward"\ndistance = "700 m"\n'
                    '[[legs]]\nrunning = "forward"\ndistance = "50 m"\n')
    assert main(["simulate", str(scen), "--pack", str(pack.path)]) == 1     # lrbg.group is 3
    out = capsys.readouterr().out
    assert "warning" not in out and "passed it unseen in leg 1" in out
    assert "G3 takes over from G1 as the LRBG at the end of leg 1" in out


def test_a_two_group_world_whose_list_holds_one_lrbg_says_g1_left_it(write_pack):
    # history = 1: when G2 takes over, G1 leaves the list, so its items are no longer used and
    # the evidence says so, though the world has only two groups
    text = pack_text(rule_toml("r", "lrbg.group == 1"), name="wrenfold-line",
                     world='groups = 2\nhistory = 1\nleg_distance = ["0 m", "2 km"]')
    pack = load_pack(write_pack(text))
    w = World(linked=True, legs=(_leg(300), _leg(20)),
              g2=Group2(distance=F(300), linked=True, found=True, at=1))
    sim, story, root, _ = _views(pack, w)
    assert "the onboard's list of LRBGs: G2; G1 left it" in sim
    assert "The onboard's list of LRBGs is now G2; G1 left it." in story
    assert "G1 at -300 m, nominal to the right; left the list" in _texts(root)


def test_one_and_two_group_evidence_keeps_its_wording(write_pack):
    # Routes must not leak into the evidence of one- and two-group worlds whose list keeps every
    # LRBG: no captions, no list, the two-group hand-over line and legend as before routes.
    two = load_pack(write_pack(pack_text(rule_toml("r", "lrbg.group == 1"), name="wrenfold-line",
                                         world='groups = 2\nleg_distance = ["0 m", "2 km"]')))
    w = World(linked=True, legs=(_leg(300), _leg(20)),
              g2=Group2(distance=F(300), orientation=REV, linked=True, found=True, at=1))
    sim, story, root, _ = _views(two, w)
    texts = _texts(root)
    assert "  G2 becomes the LRBG at the end of leg 1; the legs after it are counted from G2" in sim
    assert "The second group G2" in story and "The antenna reaches G2 and G2 becomes the LRBG:" in story
    assert "G1 at 300 m, nominal to the left" in texts
    assert "the other group; dashed: its nominal direction" in texts
    one = load_pack(write_pack(pack_text(rule_toml("r", "legs.count == 0")), "one.toml"))
    sim1, story1, root1, _ = _views(one, World(legs=(_leg(100),)))
    for blob in (sim, story, " ".join(texts), sim1, story1, " ".join(_texts(root1))):
        assert not re.search(r"list|takes over|left the|rejected at|unseen", blob)
    assert "The group (LRBG)" in story1 and "metres, LRBG frame" in _texts(root1)
