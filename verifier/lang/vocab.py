"""The vocabulary of the world model (DESIGN 4): every name a rule may use, its type, and who
may read it. This module is data only; the simulator (:mod:`verifier.world.sim`) and the SMT
encoding (:mod:`verifier.smt.encode`) each give the names their meaning independently.

To add a name: add it here (type, readers, one-line meaning), then give it a value in
``world/sim.py`` and a term in ``smt/encode.py``; the differential tests compare the two.
"""

from __future__ import annotations

import re

import enum

import attrs

from verifier.lang.ast import BOOL, COUNT, DIRECTION, LENGTH, RUNNING


class Direction(enum.Enum):
    """A direction in the LRBG frame; the value is the packet code (SUBSET-026 7.5.1.104-106)."""

    REVERSE = 0
    NOMINAL = 1
    UNKNOWN = 2

    @property
    def word(self) -> str:
        return self.name.lower()


class Running(enum.Enum):
    FORWARD = "forward"
    BACKWARD = "backward"

    @property
    def word(self) -> str:
        return self.value


CONSTANTS = {
    "nominal": (DIRECTION, Direction.NOMINAL),
    "reverse": (DIRECTION, Direction.REVERSE),
    "unknown": (DIRECTION, Direction.UNKNOWN),
    "forward": (RUNNING, Running.FORWARD),
    "backward": (RUNNING, Running.BACKWARD),
}

# Readers: who may read a name inside an [onboard] or [trackside] formula. Rules (given and
# expect) may read everything.
ONBOARD, TRACKSIDE = "onboard", "trackside"
OB, TS, BOTH, NOBODY = frozenset({ONBOARD}), frozenset({TRACKSIDE}), frozenset({ONBOARD, TRACKSIDE}), frozenset()


@attrs.frozen
class Entry:
    name: str
    ty: str
    readers: frozenset
    meaning: str
    kind: str  # input, hidden-input, derived, onboard-output, wire, trackside-output


def _e(name, ty, readers, kind, meaning):
    return Entry(name, ty, readers, meaning, kind)


GLOBAL = {e.name: e for e in [
    _e("lrbg.balises", COUNT, OB, "input", "balises in the group (N_TOTAL + 1); with two groups, of the current LRBG (as every lrbg.* and passage.* name)"),
    _e("lrbg.read", COUNT, OB, "input", "balises of the group detected; the reference balise is among them"),
    _e("lrbg.linked", BOOL, OB, "input", "linking announced the group and its direction of passage"),
    _e("lrbg.locacc", LENGTH, BOTH, "input", "location accuracy applied to the group (Q_LOCACC)"),
    _e("lrbg.offset", LENGTH, NOBODY, "hidden-input", "real reference mark minus its engineered location"),
    _e("lrbg.two_groups", BOOL, BOTH, "derived", "a single-balise LRBG whose orientation no linking gave: it has no co-ordinate system and the report is based on two groups, its directions referred to the move from the previous LRBG (SUBSET-026 3.4.2.3.3.1, 3.4.2.3.3.2)"),
    _e("train.length", LENGTH, BOTH, "input", "train length (train data)"),
    _e("train.antenna", LENGTH, BOTH, "input", "distance from the active front end back to the balise antenna"),
    _e("passage.direction", DIRECTION, NOBODY, "hidden-input", "real direction of movement over the group"),
    _e("passage.running", RUNNING, OB, "input", "front end first (forward) or rear first (backward) over the group"),
    _e("passage.detect_error", LENGTH, NOBODY, "hidden-input", "error locating the reference mark (positive: antenna further along than believed)"),
    _e("passage.actual_front", LENGTH, NOBODY, "derived", "real front end at the detection instant"),
    _e("passage.est_front", LENGTH, OB, "derived", "estimated front end at the detection instant (o * antenna; passage frame when the passage is unknown)"),
    _e("passage.seen", DIRECTION, OB, "derived", "passage direction as the onboard knows it (unknown for one unlinked balise)"),
    _e("legs.count", COUNT, OB, "input", "movement legs after the passage"),
    _e("cab_changes", COUNT, OB, "derived", "cab changes over the active legs"),
    _e("actual.front", LENGTH, NOBODY, "derived", "real front end position in the LRBG frame"),
    _e("actual.rear", LENGTH, NOBODY, "derived", "real rear end position"),
    _e("actual.orientation", DIRECTION, NOBODY, "derived", "real train orientation (towards the active cab)"),
    _e("actual.motion", DIRECTION, NOBODY, "derived", "real direction of the last movement"),
    _e("actual.travelled", LENGTH, NOBODY, "derived", "real distance run since the passage"),
    _e("actual.over_reading", LENGTH, NOBODY, "derived", "over-reading so far: max(0, -passage.detect_error) plus each leg's max(0, odometer - distance); the scope bounds it at every leg (DESIGN 4.1)"),
    _e("actual.under_reading", LENGTH, NOBODY, "derived", "under-reading so far: max(0, passage.detect_error) plus each leg's max(0, distance - odometer)"),
    _e("est.front", LENGTH, OB, "derived", "estimated front end (LRBG frame; passage frame when the passage is unknown)"),
    _e("est.front_passage", LENGTH, OB, "derived", "estimated front end in the passage frame (positive = way of the passage)"),
    _e("est.rear", LENGTH, OB, "derived", "estimated rear end (est.front less the length along the estimated orientation)"),
    _e("est.orientation", DIRECTION, OB, "derived", "train orientation as the onboard knows it"),
    _e("est.motion", DIRECTION, OB, "derived", "direction of the last movement as the onboard knows it"),
    _e("est.travelled", LENGTH, OB, "derived", "measured distance since the passage (odometer sum)"),
    _e("est.bound_over", LENGTH, OB, "derived", "over-reading bound at est.travelled: odometry_over.fixed + rate * est.travelled, plus world.detection unless [world] detection_in_odometry = true (DESIGN 4.1)"),
    _e("est.bound_under", LENGTH, OB, "derived", "under-reading bound at est.travelled (with world.detection on top, as est.bound_over)"),
    _e("est.q_dlrbg", DIRECTION, OB, "onboard-output", "onboard formula q_dlrbg, before the wire"),
    _e("est.d_lrbg", LENGTH, OB, "onboard-output", "onboard formula d_lrbg, unrounded"),
    _e("est.q_dirlrbg", DIRECTION, OB, "onboard-output", "onboard formula q_dirlrbg, before the wire"),
    _e("est.q_dirtrain", DIRECTION, OB, "onboard-output", "onboard formula q_dirtrain, before the wire"),
    _e("est.l_doubtover", LENGTH, OB, "onboard-output", "onboard formula l_doubtover, unrounded"),
    _e("est.l_doubtunder", LENGTH, OB, "onboard-output", "onboard formula l_doubtunder, unrounded"),
    _e("report.q_dlrbg", DIRECTION, TS, "wire", "Q_DLRBG as sent"),
    _e("report.q_dirlrbg", DIRECTION, TS, "wire", "Q_DIRLRBG as sent"),
    _e("report.q_dirtrain", DIRECTION, TS, "wire", "Q_DIRTRAIN as sent"),
    _e("report.d_lrbg", LENGTH, NOBODY, "wire", "D_LRBG rounded to the step (a length)"),
    _e("report.l_doubtover", LENGTH, NOBODY, "wire", "L_DOUBTOVER rounded to the step"),
    _e("report.l_doubtunder", LENGTH, NOBODY, "wire", "L_DOUBTUNDER rounded to the step"),
    _e("report.q_scale", LENGTH, TS, "wire", "the distance step used (10 cm, 1 m or 10 m)"),
    _e("report.two_groups", BOOL, TS, "wire", "the report is a position report based on two balise groups (packet 1, SUBSET-026 7.4.3.2): the LRBG is a single-balise group without linking"),
    _e("report.prv_lrbg", COUNT, TS, "wire", "NID_PRVLRBG as a group number: 1 when G1 is the previous LRBG of a report based on two groups with known directions; 0 = none or unknown (3.4.2.3.3.3, 3.4.2.3.3.4)"),
    _e("report.in_range", BOOL, TS, "wire", "all three distance codes are at most 32766"),
    _e("report.code.d_lrbg", COUNT, TS, "wire", "D_LRBG packet integer (32767 = unknown or out of range)"),
    _e("report.code.l_doubtover", COUNT, TS, "wire", "L_DOUBTOVER packet integer"),
    _e("report.code.l_doubtunder", COUNT, TS, "wire", "L_DOUBTUNDER packet integer"),
    _e("report.code.q_dlrbg", COUNT, TS, "wire", "Q_DLRBG code: 0 reverse, 1 nominal, 2 unknown"),
    _e("report.code.q_dirlrbg", COUNT, TS, "wire", "Q_DIRLRBG code"),
    _e("report.code.q_dirtrain", COUNT, TS, "wire", "Q_DIRTRAIN code"),
    _e("report.code.q_scale", COUNT, TS, "wire", "Q_SCALE code: 0 = 10 cm, 1 = 1 m, 2 = 10 m"),
    _e("rbc.d_lrbg", LENGTH, TS, "wire", "D_LRBG as the trackside reads it (code times step)"),
    _e("rbc.l_doubtover", LENGTH, TS, "wire", "L_DOUBTOVER as the trackside reads it"),
    _e("rbc.l_doubtunder", LENGTH, TS, "wire", "L_DOUBTUNDER as the trackside reads it"),
    _e("rbc.placed", BOOL, TS, "wire", "no distance code is 32767 and no qualifier is unknown"),
    _e("rbc.est_front", LENGTH, TS, "trackside-output", "trackside formula est_front"),
    _e("rbc.max_safe_front", LENGTH, TS, "trackside-output", "trackside formula max_safe_front"),
    _e("rbc.min_safe_front", LENGTH, TS, "trackside-output", "trackside formula min_safe_front"),
    _e("rbc.min_safe_rear", LENGTH, TS, "trackside-output", "trackside formula min_safe_rear"),
    # the groups (DESIGN 4.8); g2.* only in packs with [world] groups = 2
    _e("lrbg.group", COUNT, BOTH, "derived", "which group is the LRBG: 1, or 2 after G2 became the LRBG (NID_LRBG)"),
    _e("journey.legs", COUNT, OB, "derived", "legs since the passage over G1 (legs.count counts those since the current LRBG)"),
    _e("g1.balises", COUNT, OB, "input", "balises in the first group G1"),
    _e("g1.read", COUNT, OB, "input", "balises of G1 read"),
    _e("g1.linked", BOOL, OB, "input", "linking announced G1"),
    _e("g1.locacc", LENGTH, BOTH, "input", "Q_LOCACC of G1"),
    _e("g1.offset", LENGTH, NOBODY, "hidden-input", "G1's real reference mark minus its engineered location"),
    # the route (DESIGN 4.10): the onboard's list of LRBGs and what linking gives of the current LRBG
    _e("g1.remembered", BOOL, BOTH, "derived", "G1 is in the onboard's list of LRBGs (the last world.history groups that became the LRBG)"),
    _e("g1.link_position", LENGTH, OB, "derived", "G1's mark in G1's frame: 0 m (the reference of linking)"),
    _e("g1.link_orientation", DIRECTION, OB, "derived", "G1's nominal direction in its own frame: nominal"),
    _e("lrbg.previous", COUNT, BOTH, "derived", "the number of the group that was the LRBG before the current one (0 when none)"),
    _e("lrbg.remembered", COUNT, BOTH, "derived", "how many groups the onboard's list of LRBGs holds (1..world.history)"),
    _e("lrbg.link_position", LENGTH, OB, "derived", "the current LRBG's mark in G1's frame as linking gives it (0 m for G1, and without usable linking)"),
    _e("lrbg.link_orientation", DIRECTION, OB, "derived", "the current LRBG's nominal direction in G1's frame as linking gives it (nominal for G1; unknown without usable linking)"),
]}


def _later_group(k: int) -> list:
    """The names of group ``k`` of a route (DESIGN 4.8, 4.10): G2's, and each later group's."""
    before = "G1" if k == 2 else f"G{k - 1}"
    return [
        _e(f"g{k}.distance", LENGTH, TS, "input", f"engineered distance from {before}'s reference mark to G{k}'s (line data)"),
        _e(f"g{k}.side", DIRECTION, TS, "input", f"the way from {before} to G{k}, in G1's frame" + ("" if k == 2 else " (a route runs one way: g2.side)")),
        _e(f"g{k}.orientation", DIRECTION, TS, "input", f"G{k}'s nominal direction in G1's frame: nominal = the same way as G1, reverse = opposite"),
        _e(f"g{k}.balises", COUNT, OB, "input", f"balises in G{k}"),
        _e(f"g{k}.read", COUNT, OB, "input", f"balises of G{k} read when it is found"),
        _e(f"g{k}.linked", BOOL, OB, "input", f"linking announced G{k}: D_LINK, the direction of passage and its Q_LOCACC"),
        _e(f"g{k}.locacc", LENGTH, BOTH, "input", f"Q_LOCACC of G{k}"),
        _e(f"g{k}.offset", LENGTH, NOBODY, "hidden-input", f"G{k}'s real reference mark minus its engineered location, in G{k}'s frame"),
        _e(f"g{k}.found", BOOL, OB, "input", f"the train detects G{k} (at the end of leg g{k}.at)"),
        _e(f"g{k}.at", COUNT, OB, "input", f"the leg (counted from G1's passage) at whose end G{k} is detected; 0 when not found"),
        _e(f"g{k}.detect_error", LENGTH, NOBODY, "hidden-input", f"error locating G{k}'s mark, along the movement (positive: the antenna further along than believed)"),
        _e(f"g{k}.in_window", BOOL, OB, "derived", f"a linked G{k} was found inside its expectation window, D_LINK -/+ its Q_LOCACC widened by the estimate's confidence interval (SUBSET-026 3.4.4.4.3)"),
        _e(f"g{k}.lrbg", BOOL, BOTH, "derived", f"G{k} became the LRBG: found and, if linked, in its window and passed the announced way, else read with two balises"),
        _e(f"g{k}.link_distance", LENGTH, OB, "derived", f"D_LINK as linking gives it (g{k}.distance when linked and the passage over G1 is known, else 0 m)"),
        _e(f"g{k}.link_side", DIRECTION, OB, "derived", f"the way to G{k} as linking gives it (unknown without usable linking)"),
        _e(f"g{k}.link_orientation", DIRECTION, OB, "derived", f"G{k}'s orientation in G1's frame as linking gives it (unknown without usable linking)"),
        _e(f"g{k}.remembered", BOOL, BOTH, "derived", f"G{k} is in the onboard's list of LRBGs (DESIGN 4.10)"),
        _e(f"g{k}.link_position", LENGTH, OB, "derived", f"G{k}'s mark in G1's frame as linking gives it: along(g2.side, the linked distances up to G{k}); 0 m without usable linking"),
    ]


for _k in range(2, 9):
    GLOBAL.update({e.name: e for e in _later_group(_k)})

#: The route's names (DESIGN 4.10) that a pack of one group may not use.
_ROUTE = frozenset({"g1.remembered", "g1.link_position", "g1.link_orientation", "lrbg.previous",
                    "lrbg.remembered", "lrbg.link_position", "lrbg.link_orientation"})


def groups_needed(name: str) -> int:
    """The least [world] groups under which a vocabulary name exists."""
    m = re.match(r"g(\d)\.", name)
    if m and int(m.group(1)) >= 2:
        return int(m.group(1))
    return 2 if name in _ROUTE else 1


#: Names the model gained with routes (DESIGN 4.10): a two-group file written before lacks them.
ADDED_WITH_ROUTE = _ROUTE | frozenset(n for n in GLOBAL if n.endswith((".remembered", ".link_position")))

def entry(name: str) -> Entry:
    """The Entry of a name as the checker records reads: vocabulary names, ``leg.F``,
    ``item.F`` (an info formula's item) and ``info.*.F`` (an information item's field)."""
    if name.startswith("leg."):
        return LEG[name[4:]]
    if name.startswith("item."):
        return Entry(name, ITEM[name[5:]][0], OB, ITEM[name[5:]][1], "input")
    if name.startswith("info.*."):
        ty, readers, kind, meaning = INFO_FIELDS[name[7:]]
        return Entry(name, ty, readers, meaning, kind)
    return GLOBAL[name]


def names_for(groups: int) -> list:
    """The vocabulary names a pack with ``groups`` groups may use, in table order."""
    return [n for n in GLOBAL if groups_needed(n) <= groups]


#: Names written into evidence files only for two-group packs (one-group files keep their form).
GROUP_NAMES = frozenset(n for n in GLOBAL if re.match(r"g\d\.|journey\.", n) or n in _ROUTE or n in (
    "lrbg.group", "lrbg.two_groups", "report.two_groups", "report.prv_lrbg"))

# Per-leg names: leg.FIELD inside a quantifier, legs[i].FIELD outside.
LEG = {e.name: e for e in [
    _e("index", COUNT, OB, "derived", "the leg's number, from 1"),
    _e("cab_change", BOOL, OB, "input", "the active cab changes (at standstill) before this leg"),
    _e("running", RUNNING, OB, "input", "forward or backward relative to the active cab"),
    _e("distance", LENGTH, NOBODY, "hidden-input", "real distance run in the leg"),
    _e("odometer", LENGTH, OB, "input", "distance the odometer measured in the leg"),
    _e("orientation", DIRECTION, OB, "derived", "train orientation during the leg, as the onboard knows it"),
    _e("motion", DIRECTION, OB, "derived", "direction of movement in the leg, as the onboard knows it"),
    _e("actual_orientation", DIRECTION, NOBODY, "derived", "real train orientation during the leg"),
    _e("actual_motion", DIRECTION, NOBODY, "derived", "real direction of movement in the leg"),
    _e("actual_front", LENGTH, NOBODY, "derived", "real front end after the leg"),
    _e("est_front", LENGTH, OB, "derived", "estimated front end after the leg"),
]}

ONBOARD_OUTPUTS = {"q_dlrbg": DIRECTION, "d_lrbg": LENGTH, "q_dirlrbg": DIRECTION,
                   "q_dirtrain": DIRECTION, "l_doubtover": LENGTH, "l_doubtunder": LENGTH}
TRACKSIDE_OUTPUTS = {"est_front": LENGTH, "max_safe_front": LENGTH, "min_safe_front": LENGTH,
                     "min_safe_rear": LENGTH}

# Trackside information items ([[info]], DESIGN 4.9): the onboard design decides, per item,
# whether it applies and where it lies in the frame of the current LRBG. These formulas read
# item.* (the item they are evaluated for) besides the onboard's names.
INFO_OUTPUTS = {"info_accepted": BOOL, "info_position": LENGTH}
ITEM = {
    "group": (COUNT, "the item's reference group (1 or 2)"),
    "at": (LENGTH, "the distance sent, from the reference group in the direction of validity"),
    "for_nominal": (BOOL, "the item applies to a train facing the reference group's nominal direction"),
    "for_reverse": (BOOL, "the item applies to a train facing its reverse direction"),
    "location": (LENGTH, "the item's place in its reference group's frame for a one-way item (at, negative when valid reverse only); a both-ways item lies at `at` in the direction the train faces, and this field holds at"),
    # the item's group as the onboard knows it (DESIGN 4.10; with two groups or more)
    "remembered": (BOOL, "the item's group is in the onboard's list of LRBGs"),
    "link_position": (LENGTH, "the item's group's mark in G1's frame as linking gives it (0 m for G1, and without usable linking)"),
    "link_orientation": (DIRECTION, "the item's group's nominal direction in G1's frame as linking gives it (nominal for G1, unknown without usable linking)"),
}
#: Item fields that exist only with two groups or more, and that change with the world.
ROUTE_ITEM = frozenset({"remembered", "link_position", "link_orientation"})


def info_fields_for(groups: int) -> list:
    """The ``info.ID.FIELD`` fields a pack of ``groups`` groups has, in table order."""
    return [f for f in INFO_FIELDS if groups >= 2 or f not in ROUTE_ITEM]
# Per item, as info.ID.FIELD: the item's data (read by both designs), where it really is in the
# current LRBG's frame (hidden), and the onboard's decisions.
INFO_FIELDS = {
    **{k: (ty, BOTH, "input", m) for k, (ty, m) in ITEM.items()},
    "real": (LENGTH, NOBODY, "derived", "where the item really is, in the frame of the current LRBG (from the line data; a both-ways item at `at` from its group along the train's real orientation)"),
    "accepted": (BOOL, NOBODY, "onboard-output", "onboard formula info_accepted for this item"),
    "position": (LENGTH, NOBODY, "onboard-output", "onboard formula info_position for this item: where the onboard places it, current LRBG frame"),
    # what a rule about an item needs (issue 16): the distance from the train to it, along the
    # train orientation (positive: the item is ahead), as it really is and as the onboard believes
    "ahead": (LENGTH, NOBODY, "derived", "distance from the real front end to the item's real place, along the real orientation (positive: ahead)"),
    "est_ahead": (LENGTH, NOBODY, "derived", "distance from the estimated front end to where the onboard places the item (info.ID.position), along est.orientation (nominal when unknown)"),
    "max_safe_ahead": (LENGTH, NOBODY, "derived", "the same from the max safe front end: est_ahead - est.l_doubtunder"),
    "min_safe_ahead": (LENGTH, NOBODY, "derived", "the same from the min safe front end: est_ahead + est.l_doubtover"),
}
#: What the derived item fields read besides the world (for the dependency closure of a rule).
INFO_DEPENDS = {
    "est_ahead": (("onboard", "info_position"),),
    "max_safe_ahead": (("onboard", "info_position"), ("onboard", "l_doubtunder")),
    "min_safe_ahead": (("onboard", "info_position"), ("onboard", "l_doubtover")),
}
# SUBSET-026 3.6.3.1.3: only information valid for the train orientation is used; 3.6.3.1.4:
# without an orientation, information for one direction only is rejected and information for
# both directions is still used. An item valid both ways lies `at` from its group in the
# direction the train faces (3.6.4.2.3: location items are counted along the train
# orientation); without an orientation the onboard cannot tell which side it is on and the
# default puts it at the group's mark (0 m, on neither side).
DEFAULT_INFO_ONE = {
    "info_accepted": "(item.for_nominal and item.for_reverse) or (item.for_nominal and est.orientation == nominal) or (item.for_reverse and est.orientation == reverse)",
    "info_position": ("if item.for_nominal and item.for_reverse then (if est.orientation == unknown then 0 m else along(est.orientation, item.at)) "
                      "else item.location"),
}
# With two groups or more (DESIGN 4.10) an item is used only while its group is in the onboard's
# list of LRBGs; an item of another group of the list is re-referred to the current LRBG through
# the chain of linked distances (both groups' marks in G1's frame, as linking gives them) and
# used only when linking gives both; a group referred to the previous LRBG has no co-ordinate
# system of its own, so its one-way items are rejected (3.6.3.1.4.2).
_SAME = "(item.group == lrbg.group or item.link_orientation == lrbg.link_orientation)"
_REL = f"(if {_SAME} then est.orientation else flip(est.orientation))"
# the item's group mark in the current LRBG's frame (0 m for its own group)
_MARK = ("(if item.group == lrbg.group then 0 m else "
         "along(lrbg.link_orientation, item.link_position - lrbg.link_position))")
DEFAULT_INFO_TWO = {
    "info_accepted": ("item.remembered and (not lrbg.two_groups or (item.for_nominal and item.for_reverse)) and "
                      "(item.group == lrbg.group or (item.link_orientation != unknown and lrbg.link_orientation != unknown)) and "
                      "((item.for_nominal and item.for_reverse) or "
                      f"(item.for_nominal and {_REL} == nominal) or "
                      f"(item.for_reverse and {_REL} == reverse))"),
    # a both-ways item `at` from its group's mark along the train's orientation; a one-way item
    # at its place in its group's frame, turned by the two groups' orientations for another group
    "info_position": ("if item.for_nominal and item.for_reverse and est.orientation == unknown then 0 m "
                      f"else {_MARK} + (if item.for_nominal and item.for_reverse then along(est.orientation, item.at) "
                      f"else along(if {_SAME} then nominal else reverse, item.location))"),
}

# The designs under assessment when a pack does not override them (DESIGN 4.4, 4.5), written
# in the rule language itself so that they are checked, shown and encoded like any formula.
DEFAULT_ONBOARD = {
    "q_dlrbg": "side(est.front)",
    "d_lrbg": "abs(est.front)",
    "q_dirlrbg": "est.orientation",
    "q_dirtrain": "est.motion",
    # SUBSET-026 3.6.4.1.5 and 7.5.1.43/44: over-reading behind, under-reading ahead, along the
    # orientation; a move against the orientation swaps which bound applies.
    "l_doubtover": ("lrbg.locacc"
                    " + (if passage.seen == est.orientation or any(l in legs: l.motion == est.orientation)"
                    " then est.bound_over else 0 m)"
                    " + (if passage.seen == flip(est.orientation) or any(l in legs: l.motion == flip(est.orientation))"
                    " then est.bound_under else 0 m)"),
    "l_doubtunder": ("lrbg.locacc"
                     " + (if passage.seen == est.orientation or any(l in legs: l.motion == est.orientation)"
                     " then est.bound_under else 0 m)"
                     " + (if passage.seen == flip(est.orientation) or any(l in legs: l.motion == flip(est.orientation))"
                     " then est.bound_over else 0 m)"),
}
DEFAULT_TRACKSIDE = {
    "est_front": "along(report.q_dlrbg, rbc.d_lrbg)",
    "max_safe_front": "rbc.est_front + along(report.q_dirlrbg, rbc.l_doubtunder)",
    "min_safe_front": "rbc.est_front - along(report.q_dirlrbg, rbc.l_doubtover)",
    "min_safe_rear": "rbc.min_safe_front - along(report.q_dirlrbg, train.length)",
}

Q_SCALES = {"10 cm": 0, "1 m": 1, "10 m": 2}  # Q_SCALE codes, SUBSET-026 7.5.1.129
ROUNDINGS = ("widen", "nearest", "down")
MAX_CODE = 32766  # largest valid distance code; 32767 = unknown (SUBSET-026 7.5.1.13)
UNKNOWN_CODE = 32767


def markdown() -> str:
    """docs/vocabulary.md, generated from the tables above (a test keeps the file in step)."""
    def readers(e):
        return ", ".join(sorted(e.readers)) if e.readers else "rules only (hidden)"
    lines = ["# Vocabulary", "",
             "Generated from `verifier/lang/vocab.py` by `python -m verifier.lang.vocab`; do not edit.",
             "Every name may be read by rules (`given`, `expect`, `[let]`). *Readers* says which",
             "design formulas may read it too (`[onboard]`, `[trackside]`); the others carry",
             "truth that equipment cannot know.", "",
             "## Names of one world", "", "| name | type | readers | meaning |", "|---|---|---|---|"]
    for e in GLOBAL.values():
        if groups_needed(e.name) >= 3:
            continue        # G3 .. G8 have G2's names under their own prefix (below)
        lines.append(f"| `{e.name}` | {e.ty} | {readers(e)} | {e.meaning} |")
    lines += ["", "A route of N groups (`[world] groups = N`, DESIGN 4.10) has every `g2.*` name above for",
              "each later group as `g3.*` .. `gN.*`: `gK.distance` from G(K-1)'s mark, `gK.side` equal",
              "to `g2.side`, the rest as for G2.",
              "", "## Per leg", "",
              "Read as `leg.FIELD` inside `all/any/count/sum(leg in legs: ...)` (any variable name),",
              "or as `legs[i].FIELD` (i from 1; implies `legs.count >= i`).", "",
              "| field | type | readers | meaning |", "|---|---|---|---|"]
    for e in LEG.values():
        lines.append(f"| `{e.name}` | {e.ty} | {readers(e)} | {e.meaning} |")
    lines += ["", "## Constants", "",
              "`nominal`, `reverse`, `unknown` (Direction); `forward`, `backward` (Running);",
              "`params.NAME` from `[params]`; `world.balises.low/high`, `world.locacc.low/high`,",
              "`world.train_length.low/high`, `world.antenna.low/high`, `world.leg_distance.low/high`,",
              "`world.odometry_over.fixed/rate`, `world.odometry_under.fixed/rate`, `world.detection`;",
              "with two groups or more also `world.gK_distance.low/high`, `world.gK_locacc.low/high` for",
              "each later group K and `world.history`.",
              "", "## Trackside information items", "",
              "Per `[[info]]` item, as `info.ID.FIELD` (DESIGN 4.9); inside `[onboard] info_accepted`",
              "and `info_position` the item is `item.FIELD` (its data fields).", "",
              "| field | type | readers | meaning |", "|---|---|---|---|"]
    for k, (ty, rd, _kind, meaning) in INFO_FIELDS.items():
        lines.append(f"| `{k}` | {ty} | {', '.join(sorted(rd)) if rd else 'rules only'} | {meaning} |")
    lines += ["", "## Default designs", "", "| output | default formula |", "|---|---|"]
    for k, v in DEFAULT_ONBOARD.items():
        lines.append(f"| `[onboard] {k}` | `{v}` |")
    for k, v in DEFAULT_INFO_ONE.items():
        lines.append(f"| `[onboard] {k}` (one group) | `{v}` |")
    for k, v in DEFAULT_INFO_TWO.items():
        lines.append(f"| `[onboard] {k}` (two groups or more) | `{v}` |")
    for k, v in DEFAULT_TRACKSIDE.items():
        lines.append(f"| `[trackside] {k}` | `{v}` |")
    return "\n".join(lines) + "\n"


if __name__ == "__main__":  # pragma: no cover
    print(markdown(), end="")
