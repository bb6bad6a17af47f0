"""Check values from outside the project: the published ETCS texts and hand-worked cases.

Each value names its source beside it. The simulator computes in exact Fractions, so the
comparisons are exact.
"""

from __future__ import annotations

from fractions import Fraction as F

import pytest

from conftest import pack_text, rule_toml
from verifier.errors import PackError
from verifier.run.loader import load_pack
from verifier.lang.scope import Scope
from verifier.world.sim import Leg, State, World
from verifier.lang.vocab import Direction, Running

NOM, REV = Direction.NOMINAL, Direction.REVERSE
FWD, BWD = Running.FORWARD, Running.BACKWARD


def _pack(write_pack, onboard="", world=""):
    return load_pack(write_pack(pack_text(rule_toml("r", "true"), onboard=onboard, world=world)))


def test_qualifier_codes_subset026_7():
    # SUBSET-026 7.5.1.104/105/106: 0 reverse, 1 nominal, 2 unknown
    assert (Direction.REVERSE.value, Direction.NOMINAL.value, Direction.UNKNOWN.value) == (0, 1, 2)


def test_special_distance_value_is_15_bit_all_ones():
    # SUBSET-026 7.5.1.13/43/44 (published text): 15-bit fields, 32767 = "unknown or greater than
    # 327.660 km"; that a code above 32766 at a finer step is sent as 32767 is this tool's choice
    # (docs/design.md 4.4), not the clause
    from verifier.lang.vocab import MAX_CODE, UNKNOWN_CODE
    assert UNKNOWN_CODE == 2**15 - 1 == 32767 and MAX_CODE == 32766


def test_q_scale_codes(write_pack):
    # SUBSET-026 7.5.1.129: 0 = 10 cm, 1 = 1 m, 2 = 10 m
    for step, code in (("10 cm", 0), ("1 m", 1), ("10 m", 2)):
        st = State(_pack(write_pack, onboard=f'q_scale = "{step}"'), World())
        assert st.get("report.code.q_scale") == code


def test_subset041_worked_interval_1000_m(write_pack):
    # SUBSET-041 5.3.1.1 (from memory: the published text was not found): 5 m + 5 % of 1000 m
    # = 55 m; the 1 m detection error on top (SUBSET-026 3.6.4.1.1 a, published: the reading
    # amount includes the odometer accuracy and the error in detecting the group's reference,
    # two parts; SUBSET-036 4.2.10.2 1 m, from memory): 56 m. With the 12 m default location
    # accuracy (SUBSET-026 appendix A.3.2, from memory): 68 m, coded 680 at 10 cm and 68 at 1 m
    # (SUBSET-026 7.5.1.43, published: L_DOUBTOVER = over-reading amount + Q_LOCACC).
    world = World(balises=2, read=2, locacc=F(12), antenna=F(2), length=F(200),
                  legs=(Leg(False, FWD, F(1000), F(1000)),))
    for step, code in (("10 cm", 680), ("1 m", 68)):
        st = State(_pack(write_pack, onboard=f'q_scale = "{step}"'), world)
        assert st.get("est.bound_over") == 56
        assert st.get("est.l_doubtover") == 68 and st.get("est.l_doubtunder") == 68
        assert st.get("report.code.l_doubtover") == code


def test_detection_error_inside_the_odometry_bound_only_when_asked(write_pack):
    # [world] detection_in_odometry = true reads SUBSET-041 5.3.1.1 as including the detection
    # error (the reading before issue 16): 55 m and 67 m at 1000 m, as worked above less 1 m.
    world = World(balises=2, read=2, locacc=F(12), antenna=F(2), length=F(200),
                  legs=(Leg(False, FWD, F(1000), F(1000)),))
    inside = _pack(write_pack, onboard='q_scale = "1 m"', world="detection_in_odometry = true")
    st = State(inside, world)
    assert st.get("est.bound_over") == 55 and st.get("est.l_doubtover") == 67
    # the scope: the detection error at its 1 m bound and the odometry at 5 m + 5 % of 1000 m
    # over-reading (odometer 1055 m for 1000 m run) is in scope only with the error on top
    from verifier.world.sim import scope_problems
    edge = World(balises=2, read=2, antenna=F(2), length=F(200), detect_error=F(-1),
                 legs=(Leg(False, FWD, F(1000), F(1055) + F(55, 19)),))
    # E = 1055 + 55/19 m measured: 5 m + 5 % of E = 55 m + 55/19 m of odometer error
    default = _pack(write_pack, onboard='q_scale = "1 m"')
    assert scope_problems(edge, default.scope, 2) == []
    assert any("over-reading" in p for p in scope_problems(edge, inside.scope, 2))


def test_largest_distance_at_10_cm(write_pack):
    # FACTS (SUBSET-026 7.5.1.13): 32766 x 0.1 m = 3276.6 m is the largest at the 10 cm step
    pack = _pack(write_pack, onboard='q_scale = "10 cm"', world='leg_distance = ["0 m", "5 km"]')
    near = World(antenna=F(2), length=F(100), legs=(Leg(False, FWD, F("3274.6"), F("3274.6")),))
    st = State(pack, near)
    assert st.get("est.d_lrbg") == F("3276.6") and st.get("report.code.d_lrbg") == 32766
    over = World(antenna=F(2), length=F(100), legs=(Leg(False, FWD, F("3274.7"), F("3274.7")),))
    st = State(pack, over)
    assert st.get("report.code.d_lrbg") == 32767 and st.get("rbc.placed") is False
    # auto picks the 1 m step instead
    st = State(_pack(write_pack, world='leg_distance = ["0 m", "5 km"]'), over)
    assert st.get("report.code.q_scale") == 1 and st.get("report.code.d_lrbg") == 3277


def test_safe_ends_subset026_3_6_4_1_5_and_3_6_1_7(write_pack):
    # SUBSET-026 3.6.4.1.5: min safe front = est - L_DOUBTOVER, max = est + L_DOUBTUNDER along the
    # orientation; 3.6.1.7: min safe rear = min safe front - train length.
    pack = _pack(write_pack, onboard='q_scale = "1 m"')
    # nominal, front first, 100 m run, locacc 5 m: doubts 5 + 5 + 5 % of 100 + 1 m detection
    # = 16 m; est front 102 m
    w = World(locacc=F(5), antenna=F(2), length=F(150), legs=(Leg(False, FWD, F(100), F(100)),))
    st = State(pack, w)
    assert st.get("rbc.est_front") == 102
    assert st.get("rbc.min_safe_front") == 86 and st.get("rbc.max_safe_front") == 118
    assert st.get("rbc.min_safe_rear") == 86 - 150
    # the same run in the reverse direction: mirrored in the LRBG frame
    st = State(pack, World(locacc=F(5), antenna=F(2), length=F(150), direction=REV,
                           legs=(Leg(False, FWD, F(100), F(100)),)))
    assert st.get("rbc.est_front") == -102
    assert st.get("rbc.min_safe_front") == -86 and st.get("rbc.max_safe_front") == -118
    assert st.get("rbc.min_safe_rear") == -86 + 150


def test_default_detection_is_subset036_1_m():
    # SUBSET-036 4.2.10.2 (from memory): 1 m balise location accuracy for vital use
    assert Scope().detection == 1
    # SUBSET-041 5.3.1.1 (from memory): 5 m + 5 % each way
    assert Scope().odometry_over.fixed == 5 and Scope().odometry_over.rate == F(1, 20)
    # SUBSET-026 3.6.4.1.1 a) (published): odometer accuracy and detection error are two parts
    # of the reading amount, so the detection error is added on top by default
    assert Scope().detection_in_odometry is False


def test_terminus_reversal_worked_by_hand(write_pack):
    # Common practice, worked by hand (docs/facts.md): front first into a terminus over the group in
    # its reverse direction, stop, change cab, leave front first. Train 100 m, antenna 3 m.
    # At the passage the front is at -3 m. Running in x m puts it at -3 - x; after the change of
    # cab the front (the former rear) is at -3 - x + 100.
    pack = _pack(write_pack, onboard='q_scale = "1 m"')
    for run_in, side, front in ((80, NOM, 17), (97, NOM, 0), (120, REV, -23)):
        w = World(antenna=F(3), length=F(100), direction=REV,
                  legs=(Leg(False, FWD, F(run_in), F(run_in)), Leg(True, FWD, F(0), F(0))))
        st = State(pack, w)
        assert st.get("actual.front") == front == st.get("est.front")
        assert st.get("report.q_dlrbg") is side
        assert st.get("report.q_dirlrbg") is NOM and st.get("report.q_dirtrain") is NOM


@pytest.mark.parametrize("line,needle", [
    ('balises = [0, 8]', "1..8"),           # N_TOTAL 0..7: 1 to 8 balises, SUBSET-026 7.5.1.82
    ('balises = [1, 9]', "1..8"),
    ('locacc = ["0 m", "64 m"]', "0..63"),  # Q_LOCACC 6 bits, 0..63 m, SUBSET-026 7.5.1.115
    ('locacc = ["0 m", "2.5 m"]', "whole metres"),
])
def test_scope_outside_encodable_values_is_an_error(write_pack, line, needle):
    with pytest.raises(PackError) as exc:
        _pack(write_pack, world=line)
    assert needle in str(exc.value)


# ---- two groups (DESIGN 4.8, 4.9), worked by hand ----------------------------------------------

TWO = """
[world]
groups = 2
g2_distance = ["100 m", "2 km"]
[onboard]
q_scale = "10 cm"
[[info]]
id = "eoa"
group = 1
at = "1500 m"
valid = "nominal"
[[rule]]
id = "r"
title = "r"
expect = "true"
"""


def _two(write_pack):
    from conftest import pack_text as text
    return load_pack(write_pack(text("", extra=TWO)))


def _relocation_world(g2_orientation, g1_locacc=F(0), g2_locacc=F(4), after=F(100)):
    from verifier.world.sim import Group2
    # G1: two balises passed nominal, front first, antenna 2 m behind the front: the antenna is
    # on G1's mark at the passage. One leg of 300 m brings the antenna onto G2's mark, 300 m on
    # G1's nominal side; then a leg of ``after`` metres, measured exactly.
    return World(balises=2, read=2, locacc=g1_locacc, antenna=F(2), length=F(80),
                 legs=(Leg(False, FWD, F(300), F(300)), Leg(False, FWD, after, after)),
                 g2=Group2(distance=F(300), side=NOM, orientation=g2_orientation, balises=2,
                           read=2, linked=True, locacc=g2_locacc, found=True, at=1))


def test_passing_an_opposite_facing_second_group(write_pack):
    # Worked by hand. G2 faces the other way (its nominal direction is G1's reverse): once it is
    # the LRBG, positions are counted from G2's mark, positive towards G1. The train, moving
    # away from G1, faces G2's reverse direction: Q_DIRLRBG reverse (code 0, SUBSET-026
    # 7.5.1.104), Q_DIRTRAIN reverse; its front is 2 + 100 = 102 m on G2's reverse side:
    # Q_DLRBG 0, D_LRBG 102 m = code 1020 at 10 cm (7.5.1.13, 7.5.1.129). Doubts from G2:
    # Q_LOCACC 4 m + 5 m + 5 % of the 100 m measured since G2 (SUBSET-041 5.3.1.1, from memory)
    # + 1 m detection = 15 m, code 150. The end of authority 1500 m from G1 lies 1200 m from G2, on its reverse side.
    pack = _two(write_pack)
    st = State(pack, _relocation_world(REV))
    assert st.get("g2.in_window") and st.get("g2.lrbg") and st.get("lrbg.group") == 2
    assert st.get("actual.front") == st.get("est.front") == -102
    assert st.get("report.code.q_dirlrbg") == 0 and st.get("report.code.q_dirtrain") == 0
    assert st.get("report.code.q_dlrbg") == 0 and st.get("report.code.d_lrbg") == 1020
    assert st.get("est.l_doubtover") == 15 and st.get("report.code.l_doubtover") == 150
    assert st.info_value("eoa", "real") == -1200 == st.info_value("eoa", "position")
    assert st.info_value("eoa", "accepted")        # the train faces G1's nominal direction
    # the same world with G2 facing G1's way: everything nominal, the front at +102 m
    st = State(pack, _relocation_world(NOM))
    assert st.get("report.code.q_dirlrbg") == 1 and st.get("est.front") == 102
    assert st.info_value("eoa", "real") == 1200


def test_relocation_with_a_different_location_accuracy(write_pack):
    # Worked by hand: G1 with Q_LOCACC 12 m (the default national value, SUBSET-026 A.3.2) and
    # G2 with 3 m. At G2's detection the doubts restart from G2: 3 m + 5 m + 1 m detection = 9 m
    # (no distance measured since G2 yet); a further 1000 m gives 3 + 5 + 50 + 1 = 59 m, where G1
    # would have given 12 m + 5 m + 5 % of 1300 m + 1 m = 83 m (SUBSET-041 5.3.1.1, from memory).
    pack = _two(write_pack)
    st = State(pack, _relocation_world(NOM, g1_locacc=F(12), g2_locacc=F(3), after=F(0)))
    assert st.get("lrbg.locacc") == 3 and st.get("est.l_doubtover") == 9
    st = State(pack, _relocation_world(NOM, g1_locacc=F(12), g2_locacc=F(3), after=F(1000)))
    assert st.get("est.l_doubtover") == 59 and st.get("est.l_doubtunder") == 59


def _single_g2(g1_read=2, legs=None, at=1, orientation=REV):
    """G1 (two balises, or one read) passed nominal front first; an unlinked single-balise G2
    300 m on G1's nominal side, its engineered orientation ``orientation``."""
    import attrs
    w = _relocation_world(NOM, g2_locacc=F(3))
    legs = legs or w.legs
    return attrs.evolve(w, read=g1_read, legs=legs,
                        g2=attrs.evolve(w.g2, linked=False, balises=1, read=1, orientation=orientation,
                                        locacc=F(3), at=at))


def test_unlinked_single_balise_g2_becomes_the_lrbg_referred_to_g1(write_pack):
    # SUBSET-026 3.4.2.3.3.1 and 3.4.2.3.3.2 (published text): an unlinked single-balise group is
    # reported in a position report based on two balise groups (packet 1, 7.4.3.2), whose
    # direction reference is a move from the previous LRBG towards it: directions that way are
    # "nominal". Worked by hand: G2 lies 300 m on G1's nominal side (its engineered orientation,
    # opposite, does not count); the train finds it running away from G1 and runs 100 m on:
    # front at 2 + 100 = 102 m on the nominal side, facing and moving nominal; doubts G2's 3 m +
    # 5 m + 5 % of 100 m + 1 m = 14 m (code 140 at 10 cm).
    pack = _two(write_pack)
    st = State(pack, _single_g2())
    assert st.get("g2.lrbg") and st.get("lrbg.group") == 2 and st.get("lrbg.two_groups")
    assert st.get("report.two_groups") and st.get("report.prv_lrbg") == 1
    assert st.get("passage.seen") is NOM and st.get("actual.front") == 102 == st.get("est.front")
    assert [st.get(f"report.code.{q}") for q in ("q_dirlrbg", "q_dirtrain", "q_dlrbg")] == [1, 1, 1]
    assert st.get("report.code.d_lrbg") == 1020 and st.get("report.code.l_doubtover") == 140
    # G1's own orientation is not needed: the reference is the move from G1 to G2 (3.4.2.3.3.2)
    st = State(pack, _single_g2(g1_read=1))
    assert st.get("report.prv_lrbg") == 1 and st.get("report.code.q_dirlrbg") == 1
    # a G1 item valid one way is not used: linking gave no place for it from G2, and G2 has no
    # co-ordinate system of its own (3.6.3.1.4, 3.6.3.1.4.2)
    assert not st.info_value("eoa", "accepted")


def test_single_balise_g2_found_running_towards_g1_gives_unknown_directions(write_pack):
    # SUBSET-026 3.4.2.3.3.4 (published): a single group that becomes the LRBG while the train
    # runs opposite to the way it last passed the previous LRBG reports the previous LRBG and
    # every direction as unknown. Worked by hand: the antenna runs 400 m past G2 unseen, then
    # 100 m back and finds G2 running towards G1.
    legs = (Leg(False, FWD, F(400), F(400)), Leg(False, BWD, F(100), F(100)))
    st = State(_two(write_pack), _single_g2(legs=legs, at=2))
    assert st.get("lrbg.group") == 2 and st.get("report.two_groups") and st.get("report.prv_lrbg") == 0
    assert st.get("passage.seen") is Direction.UNKNOWN
    assert [st.get(f"report.code.{q}") for q in ("q_dirlrbg", "q_dirtrain", "q_dlrbg")] == [2, 2, 2]
    assert st.get("report.code.d_lrbg") == 32767 and not st.get("rbc.placed")


BOTH_WAYS = """
[[info]]
id = "marker"
group = 1
at = "60 m"
valid = "both"
"""


def test_both_ways_item_lies_ahead_in_the_direction_the_train_faces(write_pack):
    # SUBSET-026 3.6.3.1.3 (published: only information valid for the train orientation is used)
    # and 3.6.4.2.3 (published: location items are counted in advance of / in rear of the group
    # with regard to the train orientation); that both-ways data is counted the same way is
    # from memory (3.6.3). Worked by hand: a marker 60 m from G1, valid both ways. A train over
    # G1 rear first in G1's nominal direction faces reverse: the marker is at -60 m.
    pack = load_pack(write_pack(pack_text(rule_toml("r", "true"), extra=BOTH_WAYS)))
    facing_reverse = World(running=BWD, antenna=F(2), length=F(100))
    st = State(pack, facing_reverse)
    assert st.get("est.orientation") is REV
    assert st.info_value("marker", "accepted")
    assert st.info_value("marker", "position") == -60 == st.info_value("marker", "real")
    st = State(pack, World(antenna=F(2), length=F(100)))
    assert st.info_value("marker", "position") == 60 == st.info_value("marker", "real")
    # without an orientation (one balise read, unlinked) the item is still used (3.6.3.1.4,
    # published) but the onboard cannot tell on which side: the default puts it at the mark
    st = State(pack, World(balises=1, read=1, running=BWD, antenna=F(2), length=F(100)))
    assert st.info_value("marker", "accepted") and st.info_value("marker", "position") == 0
    assert st.info_value("marker", "real") == -60


def test_distance_to_an_item_as_the_train_is_and_as_the_onboard_believes(write_pack):
    # Worked by hand (issue 16, point 5). The end of authority 1500 m from G1 on its nominal side;
    # the relocation world facing an opposite G2 (see above): the antenna reaches G2 300 m from
    # G1, the front is 2 m ahead of it, 100 m more puts it 402 m from G1 (102 m on G2's reverse
    # side), the estimate too (exact odometry, no offsets). Distance to the EOA along the
    # orientation: 1500 - 402 = 1098 m, as it is and as the onboard believes. From the max safe
    # front end (est + 15 m L_DOUBTUNDER: 4 m + 5 m + 5 % of 100 m + 1 m): 1083 m; from the min
    # safe front end 1113 m (SUBSET-026 3.6.4.1.5, published: the safe ends along the orientation).
    st = State(_two(write_pack), _relocation_world(REV))
    assert st.info_value("eoa", "ahead") == 1098 == st.info_value("eoa", "est_ahead")
    assert st.info_value("eoa", "max_safe_ahead") == 1083 and st.info_value("eoa", "min_safe_ahead") == 1113
    # G2's real mark 3 m off along its own nominal direction (towards G1): found after 297 m run
    # and 300 m measured; the onboard still believes 1098 m remain, really 1101 m do
    import attrs
    w = _relocation_world(REV)
    w = attrs.evolve(w, legs=(Leg(False, FWD, F(297), F(300)), w.legs[1]),
                     g2=attrs.evolve(w.g2, offset=F(3)))
    st = State(_two(write_pack), w)
    assert st.info_value("eoa", "est_ahead") == 1098 and st.info_value("eoa", "ahead") == 1101


def test_the_encoding_agrees_on_the_hand_worked_relocations(write_pack):
    from verifier.trust.differential import compare, flat, simulate
    from verifier.smt.concrete import Evaluator
    pack = _two(write_pack)
    ev = Evaluator(pack, 2)
    back = (Leg(False, FWD, F(400), F(400)), Leg(False, BWD, F(100), F(100)))
    import attrs
    off = _relocation_world(REV)
    off = attrs.evolve(off, legs=(Leg(False, FWD, F(297), F(300)), off.legs[1]), g2=attrs.evolve(off.g2, offset=F(3)))
    for w in (_relocation_world(REV), off, _relocation_world(NOM, F(12), F(3), F(1000)), _single_g2(),
              _single_g2(g1_read=1), _single_g2(legs=back, at=2)):
        assert compare(simulate(pack, w), ev.evaluate(flat(w))) == []
    one = load_pack(write_pack(pack_text(rule_toml("r", "true"), extra=BOTH_WAYS), name="b.toml"))
    ev = Evaluator(one, 2)
    for w in (World(running=BWD, antenna=F(2), length=F(100)),
              World(balises=1, read=1, running=BWD, antenna=F(2), length=F(100))):
        assert compare(simulate(one, w), ev.evaluate(flat(w))) == []


# ---- margins (DESIGN 9) of the shipped confidence-interval pack, worked by hand ---------------
# One leg (the pack's rules are proved for any number of legs; a margin is found up to a bound,
# here 1 leg to stay quick). Each threshold's first failing world is replayed in the simulator:
# inside the real world's scope with the bound moved, outside the pack's own, the rule false.

def _shipped(rule_id):
    from pathlib import Path
    pack = load_pack(Path(__file__).parent.parent / "rules" / "confidence-interval.toml")
    return pack, next(r for r in pack.rules if r.id == rule_id)


def _past_threshold_replays(pack, rule, t):
    from verifier.lang.scope import with_bound
    from verifier.world.scenario import world_from_flat
    from verifier.world.sim import applies, evaluate, scope_problems
    world = world_from_flat(t.world)
    assert scope_problems(world, with_bound(pack.scope, t.key, t.fails_at), 1) == []
    assert scope_problems(world, pack.scope, 1) != []
    st = State(pack, world)
    assert applies(rule, st) and not evaluate(rule.expect.node, st, {})
    return world


@pytest.mark.parametrize("key, stated, source", [
    # the design's own over- and under-reading rates: the doubts are Q_LOCACC + 5 m + 5 % of the
    # measured distance + the detection error (SUBSET-041 5.3.1.1, from memory; the pack keeps the
    # default [world] odometry bounds). A real rate r > 5 % lets the reading error exceed the doubt
    # by (r - 5 %) x the measured distance, which nothing hides when the doubts and D_LRBG fall on
    # the 10 cm step (the widening is then 0): the first grid point past 5 % already fails.
    ("odometry_over.rate", F(1, 20), "the design's 5 %"),
    ("odometry_under.rate", F(1, 20), "the design's 5 %"),
    # the fixed part, 5 m (same source): a real fixed part of 5 m + 1 mm exceeds the doubt by 1 mm
    ("odometry_over.fixed", F(5), "the design's 5 m"),
    # the detection error, world.detection = 1 m (SUBSET-036 4.2.10.2, from memory): the doubt
    # carries the design's 1 m; a real detection error of 1.001 m moves the real front 1 mm
    # further than the doubt covers
    ("detection", F(1), "world.detection"),
])
def test_margin_thresholds_are_the_designs_own_figures(key, stated, source):
    from verifier.lang.scope import VARY
    from verifier.smt.margin import threshold
    pack, rule = _shipped("real-front-inside-interval")
    t = threshold(pack, rule, 1, key)
    assert t.status == "exact", (source, t)
    assert t.holds_at == stated, source
    assert t.fails_at == stated + VARY[key].grid, source
    _past_threshold_replays(pack, rule, t)


def test_margin_leg_distance_threshold_of_the_automatic_step():
    # automatic-step-stays-in-range at 1 leg: D_LRBG is coded at the 10 m step as
    # floor(D_LRBG / 10 + 1/2) <= 32766 (SUBSET-026 7.5.1.13, 7.5.1.129; rounding to the nearest,
    # docs/design.md 4.4), i.e. D_LRBG < 327,665 m. The estimate is furthest from the group after a
    # change of cab at the start of the leg: the front moves to the other cab, train length 1000 m
    # less the antenna's 2 m ([world] defaults of the pack), 998 m, then the measured distance E.
    # The over-reading bound (5 m + 5 % of E; the detection error has a bound of its own) gives
    # E - L <= 5 + E / 20, so E <= (L + 5) / 0.95. Fails when 998 + (L + 5) / 0.95 >= 327,665:
    # L >= 0.95 x 326,667 - 5 = 310,328.65 m. Worked with fractions:
    limit = F(95, 100) * (F(327665) - (F(1000) - F(2))) - 5
    assert limit == F("310328.65")
    from verifier.smt.margin import threshold
    pack, rule = _shipped("automatic-step-stays-in-range")
    t = threshold(pack, rule, 1, "leg_distance.high")
    assert (t.status, t.fails_at, t.holds_at) == ("exact", limit, limit - F(1, 1000))
    world = _past_threshold_replays(pack, rule, t)
    assert world.legs[0].cab_change and world.length == 1000 and world.antenna == 2


def test_margin_slack_of_the_10_cm_rounding_is_approached_not_reached():
    # rounding-at-10-cm: a doubt grows by w + (ceil(x + w) - (x + w)) in the widened rounding
    # (docs/design.md 4.4): w <= 5 cm (D_LRBG rounded to the nearest 10 cm) plus less than one
    # 10 cm step, so less than 15 cm, by as little as one likes: the slack 15 cm - growth has no
    # least value, 0 is approached and never reached.
    from verifier.smt.margin import slacks
    pack, rule = _shipped("rounding-at-10-cm")
    for s in slacks(pack, rule, 1):
        assert s.status == "range" and s.low == 0 and 0 < s.high <= F(1, 1000)


def test_margin_envelope_is_tight():
    # real-front-inside-interval: a world in which the reading error equals the doubt and the
    # doubts fall on the step puts the real front exactly on a safe end: slack 0 m (tight)
    from verifier.smt.margin import slacks
    pack, rule = _shipped("real-front-inside-interval")
    assert [s.status for s in slacks(pack, rule, 1)] == ["tight", "tight"]


def test_margin_slack_of_the_automatic_step_is_15_cm():
    # automatic-step-is-the-finest at 1 leg: the 1 m step is used only when something does not fit
    # at 10 cm. D_LRBG fits at 10 cm while floor(10 x D_LRBG + 1/2) <= 32766 (SUBSET-026 7.5.1.13
    # and 7.5.1.129; rounding to the nearest, docs/design.md 4.4), i.e. D_LRBG < 3276.65 m. The
    # doubts cannot be what does not fit at 1 leg: at most 63 m Q_LOCACC + 5 m + 5 % of a measured
    # distance under 12 km / 0.95 + 1 m, far below 3276.5 m. So max(...) is at least 3276.65 m,
    # reached with D_LRBG = 3276.65 m exactly: the slack of "> 3276.5 m" is 0.15 m, reached.
    assert F(63) + 5 + F(1, 20) * (F(12000) + 5) / F(95, 100) + 1 < F("3276.5")
    from verifier.smt.margin import slacks
    pack, rule = _shipped("automatic-step-is-the-finest")
    (s,) = slacks(pack, rule, 1)
    assert (s.status, s.low, s.high) == ("slack", F("0.15"), F("0.15"))
