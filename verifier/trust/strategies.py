"""Hypothesis strategies for worlds inside a pack's scope, with their corners (DESIGN 4.1).

Reusable by users who want to test their own code against the simulator::

    from hypothesis import given
    from verifier.trust.strategies import worlds
    from verifier.run.loader import load_pack

    pack = load_pack("rules/position-report.toml")

    @given(worlds(pack.scope, pack.legs))
    def test_something(world): ...

Every world drawn is inside the scope (``scope_problems`` is empty): the prefix-closed odometry
bound is respected by construction, leg by leg. Plain uniform drawing almost never lands on the
places where implementations differ, so the strategies lean on the corners:

- bounds of every range (balises, Q_LOCACC, train length, antenna, leg distance), zero-length
  legs, single-balise groups, cab changes on the first and the last leg;
- errors at their bounds: ``lrbg.offset = +-locacc``, the detection error at its bound, each
  leg's odometer at the edge of what the reading error bound still allows;
- the wire: the last leg's odometer (or the antenna) chosen so that the estimate, or the
  over-reading bound, lands on a rounding tie ``(n + 1/2) * step``, on ``32766``, ``32766.5``
  or ``32767`` steps of a Q_SCALE step (SUBSET-026 7.5.1.13, 7.5.1.129), or on exactly 0.

With two groups (DESIGN 4.8) G2 is drawn after the rest, most often found at the end of a
redrawn leg. A route (DESIGN 4.10, three groups or more) is drawn differently: the later groups
first, then a plan of which to find at which leg (in route order, at increasing legs), then the
legs one by one, each within the reading error bound of the LRBG current when it starts (the
bound restarts at every hand-over); the leg onto a planned group is solved from where the
antenna is, so the detection holds exactly, and the others move freely, stop within a leg of
the next group, or pass it unseen (to come back onto it running the other way).

:func:`corners` names the corners a given world hits (computed from the world and the simulator,
not from how it was drawn), and :class:`CornerTally` counts them over a run; a route's corners
are :data:`ROUTE_CORNERS`.
"""

from __future__ import annotations

import math
from collections import Counter
from fractions import Fraction

import attrs
from hypothesis import strategies as st

from verifier.lang.scope import Scope
from verifier.lang.vocab import MAX_CODE, Direction, Running
from verifier.world.bounds import distance_range, errors_after, odometer_range
from verifier.world.sim import (Group2, Leg, State, World, advance, handover, known, marks, scope_problems, sign,
                                start)

F = Fraction
STEPS = (F(1, 10), F(1), F(10))      # Q_SCALE steps (SUBSET-026 7.5.1.129)

# Every corner this module aims at, with what it means. A run reports how often each was hit.
CORNERS = {
    "zero-length leg": "some active leg has distance 0",
    "leg distance at scope low": "some leg distance equals world.leg_distance low",
    "leg distance at scope high": "some leg distance equals world.leg_distance high",
    "train length at scope low": "train.length equals world.train_length low",
    "train length at scope high": "train.length equals world.train_length high",
    "antenna at scope low": "train.antenna equals world.antenna low",
    "antenna at scope high": "train.antenna equals its upper limit (scope high or the train length)",
    "locacc at scope low": "lrbg.locacc equals world.locacc low",
    "locacc at scope high": "lrbg.locacc equals world.locacc high",
    "balises at scope high": "lrbg.balises equals world.balises high",
    "single-balise group": "lrbg.balises is 1",
    "passage unknown": "passage.seen is unknown",
    "offset at bound": "|lrbg.offset| equals lrbg.locacc > 0",
    "detection error at bound": "|passage.detect_error| equals the largest value the scope allows",
    "over-reading at bound": "the over-reading after some prefix equals its bound",
    "under-reading at bound": "the under-reading after some prefix equals its bound",
    "rounding tie": "an unrounded distance (d_lrbg or a doubt) is (n + 1/2) steps of some Q_SCALE step",
    "rounding tie at the step used": "an unrounded distance is (n + 1/2) times the step the report used",
    "32766.5 steps": "an unrounded distance is 32766.5 times some Q_SCALE step",
    "32766 steps": "an unrounded distance is exactly 32766 times some Q_SCALE step (largest code)",
    "estimate exactly 0": "est.front is 0",
    "no legs": "legs.count is 0",
    "legs at the bound": "legs.count equals the bound",
    "cab change on the first leg": "legs[1].cab_change",
    "cab change on the last leg": "the last of at least two legs has a cab change",
    "report out of range": "some distance code is 32767 with a known passage",
    # two groups (DESIGN 4.8): counted only over two-group packs' worlds
    "G2 not found": "a second group the train does not detect",
    "G2 becomes the LRBG": "g2.lrbg",
    "G2 facing the other way becomes the LRBG": "g2.lrbg with g2.orientation reverse",
    "G2 found but not used": "g2.found and not g2.lrbg",
    "G2 found outside its window": "g2.found with usable linking and not g2.in_window",
    "single-balise G2 made the LRBG via G1": "an unlinked single-balise G2 is the LRBG, its directions referred to G1 (report.prv_lrbg 1)",
    "single-balise G2 found running towards G1": "an unlinked single-balise G2 is the LRBG with unknown directions (report.two_groups, report.prv_lrbg 0)",
    "both-ways item for a reverse-facing train": "an item valid both ways, of the current LRBG, for a train known to face its reverse direction",
}

# A route's corners (DESIGN 4.10), counted only over the worlds of packs with three groups or
# more. Kept apart from CORNERS, which a sweep over the shipped and test catalogues must hit
# in full: no pack of those catalogues is a route yet.
ROUTE_CORNERS = {
    "3+ hand-overs": "three later groups or more became the LRBG, one after the other",
    "the list of LRBGs dropped a group": "more groups became the LRBG than [world] history keeps",
    "a group rejected after a hand-over": "a found group did not become the LRBG, judged from a group after G1",
    "a group found outside its window after G2": "a group after G2 found with usable linking and not gK.in_window",
    "a group skipped before a later one is found": "a group not found, and a group after it found",
    "a group passed unseen": "the antenna crossed (or reached) a group's real mark in a leg, and the group is not found",
    "single-balise group after G2 referred to the move": "an unlinked single-balise group after G2 became the LRBG found running away from the LRBG (report.prv_lrbg J)",
    "single-balise group after G2 found running towards the LRBG": "an unlinked single-balise group after G2 became the LRBG found running towards the LRBG (directions unknown)",
    "a hand-over from a group after G1": "a group became the LRBG judged from a current LRBG other than G1",
    "an item referred to a group that has left the list": "an item of a group that was the LRBG and is no longer in the onboard's list",
    "an item referred to the current LRBG's predecessor": "an item of the group lrbg.previous",
    "an item referred to a group that never became the LRBG": "an item of a group not in the journey's LRBGs (not passed yet, passed unseen or rejected)",
}
ALL_CORNERS = {**CORNERS, **ROUTE_CORNERS}


# ---- numbers ---------------------------------------------------------------------------------

def _int(draw, lo: int, hi: int) -> int:
    return draw(st.integers(lo, hi))


def _choice(draw, items):
    return items[draw(st.integers(0, len(items) - 1))]


def draw_between(draw, lo: Fraction, hi: Fraction) -> Fraction:
    """A Fraction in [lo, hi]: a bound, a point of the 1 m or 1 mm grid, or a rational with a
    small denominator (1/3 m and the like, which no decimal writer shows exactly).

    Only integer draws, so that drawing stays cheap (no strategy objects built per draw)."""
    lo, hi = F(lo), F(hi)
    if lo >= hi:
        return lo
    how = _int(draw, 0, 4)
    if how == 0:
        return lo
    if how == 1:
        return hi
    if how == 2 and math.ceil(lo) <= math.floor(hi):
        return F(_int(draw, math.ceil(lo), math.floor(hi)))
    if how == 3:
        return F(_int(draw, math.ceil(lo * 1000), math.floor(hi * 1000)), 1000)
    den = _int(draw, 1, 48)
    a, b = math.ceil(lo * den), math.floor(hi * den)
    return F(_int(draw, a, b), den) if a <= b else lo


@st.composite
def between(draw, lo: Fraction, hi: Fraction) -> Fraction:
    """The strategy form of :func:`draw_between`."""
    return draw_between(draw, lo, hi)


# ---- worlds ----------------------------------------------------------------------------------

def _bool(draw) -> bool:
    return _int(draw, 0, 1) == 1


def _one_of_or(draw, specials, lo, hi):
    """One of the special values (a third of the time), else a value in [lo, hi]."""
    if _int(draw, 0, 2) == 0:
        return _choice(draw, specials)
    return draw_between(draw, lo, hi)


def _draw_legs(draw, scope: Scope, bound: int, detect: F) -> tuple:
    how_many = _int(draw, 0, 2)
    n = 0 if how_many == 0 else bound if how_many == 1 else _int(draw, 0, bound)
    legs: list = []
    dlo, dhi = scope.leg_distance
    near = min(dhi, max(dlo, F(50)))
    for _ in range(n):
        over, under, measured = errors_after(scope, legs, detect)
        k = _int(draw, 0, 2)
        if k == 0:
            dist = _choice(draw, [dlo, dhi])
        elif k == 1:
            dist = draw_between(draw, dlo, near)
        else:
            dist = draw_between(draw, dlo, dhi)
        olo, ohi = odometer_range(scope, over, under, measured, dist)
        how = _int(draw, 0, 3)
        if how == 0 and olo <= dist <= ohi:
            odo = dist              # no error in this leg
        elif how == 1:
            odo = olo               # under-reading at its bound
        elif how == 2:
            odo = ohi               # over-reading at its bound
        else:
            odo = draw_between(draw, olo, ohi)
        legs.append(Leg(cab_change=_bool(draw),
                        running=_choice(draw, [Running.FORWARD, Running.BACKWARD]),
                        distance=dist, odometer=odo))
    return tuple(legs)


def _est_passage(world: World, legs) -> F:
    """The estimate in the passage frame after ``legs`` (DESIGN 4.3), written out here so that
    a target can be solved for; the simulator remains the reference."""
    op = 1 if world.running is Running.FORWARD else -1
    est = op * world.antenna
    for leg in legs:
        if leg.cab_change:
            est -= op * world.length
            op = -op
        est += (op if leg.running is Running.FORWARD else -op) * leg.odometer
    return est


def _target(draw, scope: Scope) -> F:
    """A distance worth hitting: a rounding tie, 32766 / 32766.5 / 32767 steps, or 0."""
    kind = _choice(draw, ["tie", "tie", "32766.5", "32766.5", "32766", "32767", "zero"])
    # beyond 32766 steps only the 10 cm step is within reach of the default scope
    step = _choice(draw, STEPS) if kind == "tie" or _bool(draw) else STEPS[0]
    if kind == "zero":
        return F(0)
    if kind == "tie":
        reach = scope.antenna[1] + scope.train_length[1] + scope.leg_distance[1]
        top = 40 if _bool(draw) else max(0, int(reach / step))
        return (_int(draw, 0, top) + F(1, 2)) * step
    return F(kind) * step


def _aim(draw, scope: Scope, world: World) -> World:
    """Re-draw the last leg so that the estimate (or the travelled measure behind the doubts)
    lands on a target value; the world is left as it was when the target is out of reach."""
    if not world.legs:
        # no legs: est.front is +-antenna; aim the antenna itself at a tie of the 10 cm or 1 m step
        lo, hi = scope.antenna[0], min(scope.antenna[1], world.length)
        step = _choice(draw, STEPS[:2])
        n0 = math.floor(lo / step)
        a = (_int(draw, n0, max(n0, math.floor(hi / step))) + F(1, 2)) * step
        return attrs.evolve(world, antenna=a) if lo <= a <= hi else world
    *first, last = world.legs
    over, under, measured = errors_after(scope, first, world.detect_error)
    if _int(draw, 0, 2):
        # the estimate: |est.front| = target
        target = _target(draw, scope)
        rest = _est_passage(world, first + [attrs.evolve(last, distance=F(0), odometer=F(0))])
        goal = target if _bool(draw) else -target
        odo = abs(goal - rest)
        op = 1 if world.running is Running.FORWARD else -1
        for leg in world.legs:
            if leg.cab_change:
                op = -op
        # the running sense that moves the estimate towards the goal
        running = Running.FORWARD if (goal - rest) * op >= 0 else Running.BACKWARD
    else:
        # the travelled measure: the over-reading bound + locacc on a tie of some step
        ob = scope.odometry_over
        if ob.rate == 0 or scope.odometry_basis != "measured":
            return world
        step = _choice(draw, STEPS)
        base = world.locacc + ob.fixed + ob.rate * measured
        n = math.ceil(base / step - F(1, 2)) + _int(draw, 0, 200)
        odo = ((n + F(1, 2)) * step - base) / ob.rate
        running = last.running
    if odo < 0:
        return world
    dlo, dhi = distance_range(scope, over, under, measured, odo)
    if dlo > dhi:
        return world
    dist = _choice(draw, [dlo, dhi, min(max(odo, dlo), dhi)])
    return attrs.evolve(world, legs=tuple(first) + (attrs.evolve(last, running=running, distance=dist,
                                                                  odometer=odo),))


def _group(draw, balises_range, locacc_range) -> tuple:
    """A group's balises, balises read, Q_LOCACC and real-mark offset, leaning on the corners."""
    blo, bhi = balises_range
    balises = _choice(draw, [blo, bhi]) if _bool(draw) else _int(draw, blo, bhi)
    read = _choice(draw, [1, balises]) if _bool(draw) else _int(draw, 1, balises)
    llo, lhi = int(locacc_range[0]), int(locacc_range[1])
    locacc = F(_choice(draw, [llo, lhi]) if _bool(draw) else _int(draw, llo, lhi))
    offset = _one_of_or(draw, [-locacc, locacc, F(0)], -locacc, locacc)
    return balises, read, locacc, offset


@st.composite
def worlds(draw, scope: Scope = Scope(), bound: int = 3, aim: bool = True) -> World:
    """A world inside ``scope`` with at most ``bound`` legs, leaning on the corners."""
    balises, read, locacc, offset = _group(draw, scope.balises, scope.locacc)
    length = draw_between(draw, max(scope.train_length[0], scope.antenna[0]), scope.train_length[1])
    antenna = draw_between(draw, scope.antenna[0], min(scope.antenna[1], length))
    # |d| <= detection, and the bound at the passage itself: max(0, -d) <= over.fixed, ...
    dneg = min(scope.detection, scope.odometry_over.fixed) if scope.detection_in_odometry else scope.detection
    dpos = min(scope.detection, scope.odometry_under.fixed) if scope.detection_in_odometry else scope.detection
    detect = _one_of_or(draw, [-dneg, dpos, F(0)], -dneg, dpos)
    world = World(
        balises=balises, read=read, linked=_bool(draw), locacc=locacc, offset=offset,
        length=length, antenna=antenna,
        direction=_choice(draw, [Direction.NOMINAL, Direction.REVERSE]),
        running=_choice(draw, [Running.FORWARD, Running.BACKWARD]),
        detect_error=detect, legs=_draw_legs(draw, scope, bound, detect))
    if aim and _bool(draw):
        world = _aim(draw, scope, world)
    if scope.groups == 2:
        world = _second_group(draw, scope, world)
    elif scope.groups >= 3:
        world = _route(draw, scope, world, bound)
    return world


def _second_group(draw, scope: Scope, world: World) -> World:
    """A second group for a world (DESIGN 4.8). Most of the time it is found at the end of some
    leg: that leg is redrawn so that the antenna ends on G2's mark (with the detection error);
    a world that this puts outside the scope (the reading errors after G2 are bounded afresh)
    keeps G2 unfound."""
    dlo, dhi = scope.g2_distance
    distance = _one_of_or(draw, [dlo, dhi], dlo, dhi)
    sides = {"nominal": [Direction.NOMINAL], "reverse": [Direction.REVERSE],
             "any": [Direction.NOMINAL, Direction.REVERSE]}
    side = _choice(draw, sides[scope.g2_side])
    orient = _choice(draw, sides[{"same": "nominal", "opposite": "reverse", "any": "any"}[scope.g2_orientation]])
    balises, read, locacc, offset = _group(draw, scope.g2_balises, scope.g2_locacc)
    g2 = Group2(distance=distance, side=side, orientation=orient, balises=balises, read=read,
                linked=_bool(draw), locacc=locacc, offset=offset)
    unfound = attrs.evolve(world, g2=g2)
    if not world.legs or _int(draw, 0, 3) == 0:
        return unfound
    k = _int(draw, 1, len(world.legs))
    snap = start(world)
    for leg in world.legs[:k - 1]:
        snap, _ = advance(snap, leg)
    leg = world.legs[k - 1]
    o = -snap.orientation if leg.cab_change else snap.orientation
    front = snap.front - snap.orientation * world.length if leg.cab_change else snap.front
    antenna = front - o * world.antenna
    det = _one_of_or(draw, [F(0), scope.detection, -scope.detection], -scope.detection, scope.detection)
    mark = sign(side) * distance + sign(orient) * offset
    for running in (leg.running, Running.BACKWARD if leg.running is Running.FORWARD else Running.FORWARD):
        m = o if running is Running.FORWARD else -o
        dist = m * (mark - antenna) + det      # the antenna ends at mark + m * det
        if not scope.leg_distance[0] <= dist <= scope.leg_distance[1] or not dist > max(F(0), det):
            continue
        over, under, measured = errors_after(scope, world.legs[:k - 1], world.detect_error)
        olo, ohi = odometer_range(scope, over, under, measured, dist)
        odo = _choice(draw, [dist, olo, ohi]) if olo <= dist <= ohi else _choice(draw, [olo, ohi])
        new = attrs.evolve(leg, running=running, distance=dist, odometer=odo)
        # the legs after the detection as drawn, else none (their reading errors may exceed
        # the bounds that restart at G2)
        for after in dict.fromkeys((world.legs[k:], ())):
            found = attrs.evolve(world, legs=world.legs[:k - 1] + (new,) + after,
                                 g2=attrs.evolve(g2, found=True, at=k, detect_error=det))
            if not scope_problems(found, scope, len(found.legs)):
                return found
    return unfound


# ---- a route of groups (DESIGN 4.10) -----------------------------------------------------------

_SIDES = {"nominal": [Direction.NOMINAL], "reverse": [Direction.REVERSE],
          "any": [Direction.NOMINAL, Direction.REVERSE]}
_ORIENTATIONS = {"same": _SIDES["nominal"], "opposite": _SIDES["reverse"], "any": _SIDES["any"]}
_OTHER = {Running.FORWARD: Running.BACKWARD, Running.BACKWARD: Running.FORWARD}


def _route(draw, scope: Scope, world: World, bound: int) -> World:
    """G2 .. GN for a route pack (groups >= 3), and legs that find some of them.

    The legs drawn for one group are dropped: the reading error bound restarts at every
    hand-over, so the legs are drawn afresh, one by one, each against the bound of the LRBG that
    is current when it starts. A leg that finds a group is derived from where the antenna is
    (as :func:`_second_group` does for G2), so the detection equations hold exactly."""
    side = _choice(draw, _SIDES[scope.g2_side])
    groups = [_later_group(draw, scope, k, side) for k in range(2, scope.groups + 1)]
    n = bound if _int(draw, 0, 2) else _int(draw, 0, bound)
    plan = _route_plan(draw, len(groups), n)
    return _route_legs(draw, scope, attrs.evolve(world, g2=groups[0], later=tuple(groups[1:]), legs=()),
                       n, plan, bound)


def _later_group(draw, scope: Scope, k: int, side: Direction) -> Group2:
    """Group ``k`` of a route, not found yet, inside its [[group]] scope (side: the route's way)."""
    gs = scope.group(k)
    dlo, dhi = gs.distance
    distance = _one_of_or(draw, [dlo, dhi], dlo, dhi)
    orientation = _choice(draw, _ORIENTATIONS[gs.orientation])
    balises, read, locacc, offset = _group(draw, gs.balises, gs.locacc)
    return Group2(distance=distance, side=side, orientation=orientation, balises=balises, read=read,
                  linked=_bool(draw), locacc=locacc, offset=offset)


def _route_plan(draw, count: int, n: int) -> dict:
    """Which of the ``count`` later groups the legs aim to find, and at which of the ``n`` legs:
    {leg: group number}, in route order at strictly increasing legs. A third of the time as
    many groups as the legs allow, the first ones (the worlds with the most hand-overs), else
    each group with odds of two in three (the others are passed unseen, or never reached)."""
    ks = list(range(2, count + 2))
    if _int(draw, 0, 2) == 0:
        wanted = ks[:n]
    else:
        wanted = [k for k in ks if _int(draw, 0, 2)][:n]
    plan, leg = {}, 0
    for i, k in enumerate(wanted):
        # leave a leg for every group still to be found
        leg = _int(draw, leg + 1, n - (len(wanted) - 1 - i))
        plan[leg] = k
    return plan


def _detection_range(scope: Scope) -> tuple:
    """The detection errors a group may have (negative, positive bound): with the detection
    inside the odometry bound, also what that bound allows at the detection itself."""
    if scope.detection_in_odometry:
        return min(scope.detection, scope.odometry_over.fixed), min(scope.detection, scope.odometry_under.fixed)
    return scope.detection, scope.detection


def _route_legs(draw, scope: Scope, world: World, n: int, plan: dict, bound: int) -> World:
    """``n`` legs, drawn one at a time: the leg of ``plan`` finds its group if one leg can reach
    it; any other leg moves freely, or towards the next group to find (stopping short of it, or
    passing it unseen so that the train comes back onto it running the other way)."""
    xs = marks(world)
    route = list(world.route)
    legs: list = []
    snap = start(world)                  # the physical track, in G1's frame
    dneg, dpos = _detection_range(scope)
    for i in range(1, n + 1):
        now = attrs.evolve(world, g2=route[0], later=tuple(route[1:]), legs=tuple(legs))
        cur = handover(now, scope).stages[-1]       # the LRBG whose bound this leg must keep
        errors = errors_after(scope, legs[cur.start:], cur.world.detect_error)
        cab = _bool(draw)
        o = -snap.orientation if cab else snap.orientation
        front = snap.front - snap.orientation * world.length if cab else snap.front
        antenna = front - o * world.antenna
        leg, k = None, plan.get(i)
        if k is not None:
            g = route[k - 2]
            det = _one_of_or(draw, [F(0), -dneg, dpos], -dneg, dpos)
            leg = _onto(draw, scope, cab, o, antenna, xs[k - 1] + sign(g.orientation) * g.offset, det, errors)
            if leg is not None:
                route[k - 2] = attrs.evolve(g, found=True, at=i, detect_error=det)
        if leg is None:
            ahead = [j for j in sorted(plan) if j > i]
            target = None
            if ahead:
                g = route[plan[ahead[0]] - 2]
                target = xs[plan[ahead[0]] - 1] + sign(g.orientation) * g.offset
            leg = _filler(draw, scope, cab, o, antenna, target, errors)
        legs.append(leg)
        snap, _ = advance(snap, leg)
    return _in_scope(attrs.evolve(world, g2=route[0], later=tuple(route[1:]), legs=tuple(legs)), scope, bound)


def _odometer(draw, scope: Scope, errors: tuple, dist: F) -> F:
    """An odometer reading for a leg of ``dist`` within the bound, leaning on its edges."""
    olo, ohi = odometer_range(scope, *errors, dist)
    how = _int(draw, 0, 3)
    if how == 0 and olo <= dist <= ohi:
        return dist
    if how == 1:
        return olo
    if how == 2:
        return ohi
    return draw_between(draw, olo, ohi)


def _onto(draw, scope: Scope, cab: bool, o: int, antenna: F, mark: F, det: F, errors: tuple) -> Leg | None:
    """The leg that ends with the antenna on ``mark`` plus ``det`` along its movement (DESIGN
    4.8 detection), running either way; None when no leg in the scope does."""
    first = _choice(draw, [Running.FORWARD, Running.BACKWARD])
    for running in (first, _OTHER[first]):
        m = o if running is Running.FORWARD else -o
        dist = m * (mark - antenna) + det
        if scope.leg_distance[0] <= dist <= scope.leg_distance[1] and dist > max(F(0), det):
            return Leg(cab_change=cab, running=running, distance=dist, odometer=_odometer(draw, scope, errors, dist))
    return None


def _filler(draw, scope: Scope, cab: bool, o: int, antenna: F, target, errors: tuple) -> Leg:
    """A leg that finds no group: free, or towards ``target`` (the next group to find), stopping
    within one leg of it or passing it."""
    dlo, dhi = scope.leg_distance
    how = _int(draw, 0, 2) if target is not None else 0
    running = _choice(draw, [Running.FORWARD, Running.BACKWARD])
    lo, hi = F(1), F(0)
    if how:
        towards = 1 if target >= antenna else -1
        running = Running.FORWARD if o == towards else Running.BACKWARD
        gap = abs(target - antenna)
        lo, hi = (max(dlo, gap - dhi), min(dhi, gap)) if how == 1 else (max(dlo, gap), dhi)
    if lo <= hi:
        dist = draw_between(draw, lo, hi)
    else:                                   # free, as one-group legs are drawn
        near = min(dhi, max(dlo, F(50)))
        k = _int(draw, 0, 2)
        dist = _choice(draw, [dlo, dhi]) if k == 0 else draw_between(draw, dlo, near if k == 1 else dhi)
    return Leg(cab_change=cab, running=running, distance=dist, odometer=_odometer(draw, scope, errors, dist))


def _in_scope(world: World, scope: Scope, bound: int) -> World:
    """The world, or (a last resort, which the construction should not need) its longest prefix
    of legs that is inside the scope, the groups found after it unfound."""
    while world.legs and scope_problems(world, scope, bound):
        legs = world.legs[:-1]
        route = [g if g.at <= len(legs) else attrs.evolve(g, found=False, at=0, detect_error=F(0))
                 for g in world.route]
        world = attrs.evolve(world, legs=legs, g2=route[0], later=tuple(route[1:]))
    return world


def pack_worlds(packs, bound: int | None = None) -> st.SearchStrategy:
    """A (pack, world) pair: a pack drawn from ``packs``, then a world in its scope, up to its
    largest bound (the pack's, or any of its rules', or ``bound``)."""
    packs = list(packs)

    @st.composite
    def pair(draw):
        pack = _choice(draw, packs)
        k = bound if bound is not None else largest_bound(pack)
        return pack, draw(worlds(pack.scope, k))
    return pair()


def largest_bound(pack) -> int:
    return max([pack.legs] + [r.legs for r in pack.rules if r.legs is not None])


# ---- corners ---------------------------------------------------------------------------------

def _is_tie(x: F, step: F) -> bool:
    return (x / step - F(1, 2)).denominator == 1


def corners(world: World, scope: Scope, bound: int, state: State | None = None) -> set[str]:
    """The corners of :data:`CORNERS` that ``world`` hits (the wire ones need a ``state``)."""
    out = set()
    legs = world.legs
    dlo, dhi = scope.leg_distance
    if any(leg.distance == 0 for leg in legs):
        out.add("zero-length leg")
    if any(leg.distance == dlo for leg in legs):
        out.add("leg distance at scope low")
    if any(leg.distance == dhi for leg in legs):
        out.add("leg distance at scope high")
    for name, value, (lo, hi) in (("train length", world.length, scope.train_length),
                                  ("locacc", world.locacc, scope.locacc)):
        if value == lo:
            out.add(f"{name} at scope low")
        if value == hi:
            out.add(f"{name} at scope high")
    if world.antenna == scope.antenna[0]:
        out.add("antenna at scope low")
    if world.antenna == min(scope.antenna[1], world.length):
        out.add("antenna at scope high")
    if world.balises == scope.balises[1]:
        out.add("balises at scope high")
    if world.balises == 1:
        out.add("single-balise group")
    if world.locacc > 0 and abs(world.offset) == world.locacc:
        out.add("offset at bound")
    d = world.detect_error
    inside = scope.detection_in_odometry
    if (d < 0 and -d == (min(scope.detection, scope.odometry_over.fixed) if inside else scope.detection)) or (
            d > 0 and d == (min(scope.detection, scope.odometry_under.fixed) if inside else scope.detection)):
        out.add("detection error at bound")
    over, under, measured = (max(F(0), -d), max(F(0), d), F(0)) if inside else (F(0), F(0), F(0))
    for j in range(len(legs) + 1):
        if j:
            leg = legs[j - 1]
            over += max(F(0), leg.odometer - leg.distance)
            under += max(F(0), leg.distance - leg.odometer)
            measured += leg.odometer if scope.odometry_basis == "measured" else leg.distance
        if over > 0 and over == scope.odometry_over.at(measured):
            out.add("over-reading at bound")
        if under > 0 and under == scope.odometry_under.at(measured):
            out.add("under-reading at bound")
    if not legs:
        out.add("no legs")
    if len(legs) == bound:
        out.add("legs at the bound")
    if legs and legs[0].cab_change:
        out.add("cab change on the first leg")
    if len(legs) >= 2 and legs[-1].cab_change:
        out.add("cab change on the last leg")
    if state is not None:
        if state.get("passage.seen") is Direction.UNKNOWN:
            out.add("passage unknown")
        if state.get("est.front") == 0:
            out.add("estimate exactly 0")
        xs = [state.get(n) for n in ("est.d_lrbg", "est.l_doubtover", "est.l_doubtunder")]
        used = state.get("report.q_scale")
        for x in xs:
            if any(_is_tie(x, s) for s in STEPS):
                out.add("rounding tie")
            if _is_tie(x, used):
                out.add("rounding tie at the step used")
            if any(x == F(65533, 2) * s for s in STEPS):
                out.add("32766.5 steps")
            if any(x == MAX_CODE * s for s in STEPS):
                out.add("32766 steps")
        if state.get("passage.seen") is not Direction.UNKNOWN and not state.get("report.in_range"):
            out.add("report out of range")
        if world.g2 is not None:
            out |= _two_group_corners(world, state)
        if world.later:
            out |= _route_corners(world, state)
        out |= _item_corners(state)
    return out


def _two_group_corners(world: World, state: State) -> set[str]:
    out = set()
    if not world.g2.found:
        out.add("G2 not found")
    elif state.get("g2.lrbg"):
        out.add("G2 becomes the LRBG")
        if world.g2.orientation is Direction.REVERSE:
            out.add("G2 facing the other way becomes the LRBG")
        if state.get("report.two_groups"):
            out.add("single-balise G2 made the LRBG via G1" if state.get("report.prv_lrbg") == 1
                    else "single-balise G2 found running towards G1")
    else:
        out.add("G2 found but not used")
        if state.get("g2.link_side") is not Direction.UNKNOWN and not state.get("g2.in_window"):
            out.add("G2 found outside its window")
    return out


def _judged_from(h, g: Group2):
    """The stage (the current LRBG) from which a found group is judged: the last LRBG detected
    before it (DESIGN 4.10)."""
    return [s for s in h.stages if s.start < g.at][-1]


def _route_corners(world: World, state: State) -> set[str]:
    h, out = state.handover, set()
    lrbgs = [s.group for s in h.stages]
    if len(lrbgs) >= 4:
        out.add("3+ hand-overs")
    if len(lrbgs) > len(h.history):
        out.add("the list of LRBGs dropped a group")
    if len(lrbgs) >= 3:         # each LRBG is judged from the one before it
        out.add("a hand-over from a group after G1")
    found = [g.found for g in world.route]
    for k, g in enumerate(world.route, 2):
        if not g.found:
            if any(found[k - 1:]):
                out.add("a group skipped before a later one is found")
            if _passed(world, k):
                out.add("a group passed unseen")
            continue
        cur = _judged_from(h, g)
        usable = (g.linked and known(world) and known(cur.world)
                  and (cur.group == 1 or world.route[cur.group - 2].linked))
        if not h.lrbgs[k - 2] and cur.group != 1:
            out.add("a group rejected after a hand-over")
        if k >= 3 and usable and not h.windows[k - 2]:
            out.add("a group found outside its window after G2")
        if k >= 3 and h.lrbgs[k - 2] and g.balises == 1 and not usable:
            prv = next(s for s in h.stages if s.group == k).world.prv
            out.add("single-balise group after G2 referred to the move" if prv
                    else "single-balise group after G2 found running towards the LRBG")
    for item in state.pack.infos:
        if item.group in lrbgs and item.group not in h.history:
            out.add("an item referred to a group that has left the list")
        if h.previous and item.group == h.previous:
            out.add("an item referred to the current LRBG's predecessor")
        if item.group not in lrbgs:
            out.add("an item referred to a group that never became the LRBG")
    return out


def _passed(world: World, k: int) -> bool:
    """Whether the antenna crossed or reached group ``k``'s real mark in some leg (G1's frame)."""
    g = world.route[k - 2]
    mark = marks(world)[k - 1] + sign(g.orientation) * g.offset
    snap = start(world)
    for leg in world.legs:
        before = snap.front - (-snap.orientation if leg.cab_change else snap.orientation) * world.antenna
        if leg.cab_change:
            before -= snap.orientation * world.length
        snap, _ = advance(snap, leg)
        after = snap.front - snap.orientation * world.antenna
        if leg.distance > 0 and min(before, after) <= mark <= max(before, after):
            return True
    return False


def _item_corners(state: State) -> set[str]:
    out = set()
    group = state.get("lrbg.group")
    if state.get("est.orientation") is Direction.REVERSE and any(
            i.for_nominal and i.for_reverse and i.group == group for i in state.pack.infos):
        out.add("both-ways item for a reverse-facing train")
    return out


class CornerTally:
    """How often each corner was hit over a run (plain counts, printable)."""

    def __init__(self):
        self.counts: Counter = Counter()
        self.worlds = 0

    def add(self, hit) -> None:
        self.worlds += 1
        self.counts.update(hit)

    def merge(self, other: "CornerTally") -> None:
        self.worlds += other.worlds
        self.counts.update(other.counts)

    def missed(self, names=CORNERS) -> list[str]:
        return [c for c in names if not self.counts[c]]

    def as_json(self) -> dict:
        return {"worlds": self.worlds, "corners": {c: self.counts[c] for c in ALL_CORNERS}}

    def as_text(self) -> str:
        lines = [f"{self.worlds} worlds; corner hits:"]
        for c in ALL_CORNERS:
            n = self.counts[c]
            share = 100 * n / self.worlds if self.worlds else 0
            lines.append(f"  {n:7d} {share:5.1f} %  {c}")
        return "\n".join(lines)


# ---- profiles --------------------------------------------------------------------------------

# How much the validation suite runs (VERIFIER_PROFILE=ci by default, or thorough). The "ci"
# numbers keep the differential, fuzz and mutation tests within a few minutes on 2 cores; the
# "thorough" run is for releases and its last result is recorded in docs/validation.md.
PROFILES = {
    "ci": {"worlds": 15_000, "fuzz": 10_000, "seed": 20_260_101, "workers": 2},
    "thorough": {"worlds": 100_000, "fuzz": 50_000, "seed": None, "workers": 2},
}


def profile(name: str | None = None) -> dict:
    """The settings of a validation profile (``VERIFIER_PROFILE``, default ``ci``), also
    registered as a Hypothesis settings profile of the same name."""
    import os

    from hypothesis import HealthCheck, settings
    name = name or os.environ.get("VERIFIER_PROFILE", "ci")
    if name not in PROFILES:
        raise ValueError(f"VERIFIER_PROFILE must be one of {', '.join(PROFILES)}, got {name!r}")
    for key, p in PROFILES.items():
        settings.register_profile(
            key, max_examples=p["worlds"], deadline=None, database=None,
            derandomize=p["seed"] is not None, suppress_health_check=list(HealthCheck),
            print_blob=True)
    return {"name": name, **PROFILES[name]}
