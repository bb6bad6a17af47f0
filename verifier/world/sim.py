"""The simulator: the reference semantics of the world model (DESIGN 4), step by step, in exact
rational arithmetic. It imports neither z3 nor :mod:`verifier.smt`; the SMT encoding is written
independently, and each is tested against the other.
"""

from __future__ import annotations

import math
from fractions import Fraction

import attrs

from verifier.check.model import Formula, Pack
from verifier.check.unbounded import STATIC
from verifier.lang import ast
from verifier.lang.numbers import counted, fmt
from verifier.lang.scope import Scope
from verifier.lang.vocab import MAX_CODE, Q_SCALES, UNKNOWN_CODE, Direction, Running

F = Fraction
NOM, REV, UNK = Direction.NOMINAL, Direction.REVERSE, Direction.UNKNOWN
FWD, BWD = Running.FORWARD, Running.BACKWARD
STEPS = (("10 cm", F(1, 10)), ("1 m", F(1)), ("10 m", F(10)))


@attrs.frozen
class Leg:
    cab_change: bool = False
    running: Running = FWD
    distance: Fraction = F(0)
    odometer: Fraction = F(0)


@attrs.frozen
class World:
    """The inputs of DESIGN 4.1: one configuration of group, train, passage and legs."""

    balises: int = 2
    read: int = 2
    linked: bool = False
    locacc: Fraction = F(0)
    offset: Fraction = F(0)
    length: Fraction = F(100)
    antenna: Fraction = F(2)
    direction: Direction = NOM
    running: Running = FWD
    detect_error: Fraction = F(0)
    legs: tuple = ()
    g2: "Group2 | None" = None      # the second group of a two-group pack (DESIGN 4.8)
    later: tuple = ()               # G3 .. GN of a route (DESIGN 4.10), each a Group2
    # the group's directions are referred to the previous LRBG (a single-balise group without
    # linking, the position report based on two groups: SUBSET-026 3.4.2.3.3.2, 7.4.3.2)
    prv: bool = False
    prv_group: int = 1              # the previous LRBG's number when ``prv`` (DESIGN 4.10)

    @property
    def route(self) -> tuple:
        """G2 .. GN (empty with one group)."""
        return () if self.g2 is None else (self.g2,) + self.later


@attrs.frozen
class Group2:
    """The second group of DESIGN 4.8, in G1's frame: where it lies, which way it faces, what
    linking says of it, and whether (and at the end of which leg) the train detects it."""

    distance: Fraction = F(100)     # engineered distance from G1's reference mark to G2's
    side: Direction = NOM           # the way from G1 to G2, in G1's frame
    orientation: Direction = NOM    # G2's nominal direction in G1's frame (nominal: the same way)
    balises: int = 2
    read: int = 2
    linked: bool = False            # linking announced G2: D_LINK, the direction of passage, Q_LOCACC
    locacc: Fraction = F(0)
    offset: Fraction = F(0)         # real reference mark minus engineered, in G2's frame (hidden)
    found: bool = False             # the train detects G2 ...
    at: int = 0                     # ... at the end of this leg (0 when not found)
    detect_error: Fraction = F(0)   # error locating G2's mark, along the movement (hidden)


def sign(d: Direction) -> int:
    return -1 if d is REV else 1


def direction_of(s: int) -> Direction:
    return NOM if s > 0 else REV


def floor_to(x: Fraction, step: Fraction) -> Fraction:
    return math.floor(x / step) * step


def ceil_to(x: Fraction, step: Fraction) -> Fraction:
    return math.ceil(x / step) * step


def round_to(x: Fraction, step: Fraction) -> Fraction:
    """Nearest step, ties up: floor(x/step + 1/2) * step (DESIGN 3.1)."""
    return math.floor(x / step + F(1, 2)) * step


def _m(x) -> str:
    return f"{fmt(x)} m"


def scope_problems(world: World, scope: Scope, bound: int, design: Scope | None = None,
                   journey: int | None = None) -> list[str]:
    """Why ``world`` is outside the scope (an empty list when it is inside). ``design``: the
    pack's own scope when ``scope`` is a real world with a bound moved (``verifier margin``):
    the onboard's expectation window of a second group keeps the pack's bounds. ``journey``:
    the inputs of a route's state (DESIGN 4.7) after that many legs, whose legs are not kept:
    a group found at a leg up to it is not checked against the legs."""
    out = []
    lo, hi = scope.balises
    if not lo <= world.balises <= hi:
        out.append(f"lrbg.balises {world.balises} outside {lo}..{hi}")
    if not 1 <= world.read <= world.balises:
        out.append(f"lrbg.read {world.read} outside 1..lrbg.balises")
    if world.locacc.denominator != 1 or not scope.locacc[0] <= world.locacc <= scope.locacc[1]:
        out.append(f"lrbg.locacc {world.locacc} m not a whole metre in {scope.locacc[0]}..{scope.locacc[1]} m")
    if abs(world.offset) > world.locacc:
        out.append(f"|lrbg.offset| {abs(world.offset)} m above lrbg.locacc")
    for name, value, rng in (("train.length", world.length, scope.train_length),
                             ("train.antenna", world.antenna, scope.antenna)):
        if not rng[0] <= value <= rng[1]:
            out.append(f"{name} {value} m outside {rng[0]}..{rng[1]} m")
    if world.antenna > world.length:
        out.append("train.antenna is longer than the train")
    if world.direction is UNK:
        out.append("passage.direction must be nominal or reverse")
    if abs(world.detect_error) > scope.detection:
        out.append(f"|passage.detect_error| above world.detection {scope.detection} m")
    if len(world.route) != scope.groups - 1:
        out.append(f"the pack has {counted(scope.groups, 'group')}, the world {len(world.route) + 1}")
    if len(world.legs) > bound:
        out.append(f"{counted(len(world.legs), 'leg')}, above the bound {bound}")
    for i, leg in enumerate(world.legs, 1):
        if not scope.leg_distance[0] <= leg.distance <= scope.leg_distance[1]:
            out.append(f"legs[{i}].distance {leg.distance} m outside the scope")
        if leg.odometer < 0:
            out.append(f"legs[{i}].odometer is negative")
    # the prefix-closed reading error bound (DESIGN 4.1); with a relocation, up to the detection
    # of G2 here, then from G2 on (the rest of the world as seen from G2, DESIGN 4.8)
    if world.route and len(world.route) == scope.groups - 1:
        for k in range(2, scope.groups + 1):
            out += _group_problems(world, scope, k, journey)
        found = [(g.at, k) for k, g in enumerate(world.route, 2) if g.found]
        if [k for _, k in sorted(found)] != [k for _, k in found] or len({a for a, _ in found}) != len(found):
            out.append("the route's groups are found in their order, at different legs (DESIGN 4.10)")
        if journey is not None:
            return out + _reading_problems(world.detect_error, (), scope)
        h = handover(world, design or scope)
        if h.accepted:
            for i, stage in enumerate(h.stages):
                end = h.stages[i + 1].start - stage.start if i + 1 < len(h.stages) else len(stage.world.legs)
                problems = _reading_problems(stage.world.detect_error, stage.world.legs[:end], scope)
                out += [p if stage.group == 1 else f"after G{stage.group}: {p}" for p in problems]
            return out
    out += _reading_problems(world.detect_error, world.legs, scope)
    return out


def _reading_problems(d: Fraction, legs, scope: Scope) -> list[str]:
    """The reading error bound at the passage and after every leg (DESIGN 4.1): the odometry
    bound covers the legs' errors and the detection error, or with ``detection_in_odometry =
    false`` (the default) the legs' errors alone, the detection error bounded on its own."""
    out = []
    over, under, measured = max(F(0), -d), max(F(0), d), F(0)
    # the detection error's share that the odometry bound does not carry
    extra_over, extra_under = (F(0), F(0)) if scope.detection_in_odometry else (max(F(0), -d), max(F(0), d))
    for j in range(len(legs) + 1):
        if j:
            leg = legs[j - 1]
            over += max(F(0), leg.odometer - leg.distance)
            under += max(F(0), leg.distance - leg.odometer)
            measured += leg.odometer if scope.odometry_basis == "measured" else leg.distance
        bo = scope.odometry_over.at(measured) + extra_over
        bu = scope.odometry_under.at(measured) + extra_under
        if over > bo:
            out.append(f"over-reading {_m(over)} after {counted(j, 'leg')} exceeds the bound {_m(bo)}")
        if under > bu:
            out.append(f"under-reading {_m(under)} after {counted(j, 'leg')} exceeds the bound {_m(bu)}")
    return out


def _group_problems(world: World, scope: Scope, k: int, journey: int | None = None) -> list[str]:
    """Why later group ``k`` is outside the scope (DESIGN 4.8, 4.10); with ``journey``, of a
    route's state after that many legs (see :func:`scope_problems`)."""
    g, out, gs, n = world.route[k - 2], [], scope.group(k), f"g{k}"
    lo, hi = gs.distance
    if not lo <= g.distance <= hi:
        out.append(f"{n}.distance {g.distance} m outside {lo}..{hi} m")
    sides = {"nominal": {NOM}, "reverse": {REV}, "any": {NOM, REV}}[scope.g2_side]
    if k > 2:
        sides = {world.g2.side}
    for name, v, allowed in ((f"{n}.side", g.side, sides),
                             (f"{n}.orientation", g.orientation,
                              {"same": {NOM}, "opposite": {REV}, "any": {NOM, REV}}[gs.orientation])):
        if v not in allowed:
            out.append(f"{name} {v.word} outside the scope" + (" (a route runs one way: g2.side)" if k > 2 and name.endswith("side") else ""))
    if not gs.balises[0] <= g.balises <= gs.balises[1] or not 1 <= g.read <= g.balises:
        out.append(f"{n}.balises {g.balises} or {n}.read {g.read} outside the scope")
    if g.locacc.denominator != 1 or not gs.locacc[0] <= g.locacc <= gs.locacc[1]:
        out.append(f"{n}.locacc {g.locacc} m not a whole metre in the scope")
    if abs(g.offset) > g.locacc:
        out.append(f"|{n}.offset| above {n}.locacc")
    if abs(g.detect_error) > scope.detection:
        out.append(f"|{n}.detect_error| above world.detection")
    if not g.found:
        if g.at != 0 or g.detect_error != 0:
            out.append(f"a group not found has {n}.at 0 and no detection error")
        return out
    if journey is not None:
        if not 1 <= g.at <= journey:
            out.append(f"{n}.at {g.at} is not a leg of the journey so far (1..{journey})")
        return out
    if not 1 <= g.at <= len(world.legs):
        out.append(f"{n}.at {g.at} is not a leg of the world")
        return out
    snap = start(world)
    for leg in world.legs[:g.at]:
        snap, _ = advance(snap, leg)
    antenna = snap.front - snap.orientation * world.antenna
    mark = marks(world)[k - 1] + sign(g.orientation) * g.offset
    if not world.legs[g.at - 1].distance > max(F(0), g.detect_error):
        out.append(f"G{k} is found at the end of leg {g.at}, which must move the antenna onto it "
                   "(more than 0 m, and more than the detection error)")
    if antenna != mark + snap.motion * g.detect_error:
        out.append(f"G{k} found at the end of leg {g.at}, but the antenna is at {_m(antenna)}, not at G{k}'s "
                   f"mark {_m(mark)} with the detection error")
    return out


@attrs.frozen
class Stage:
    """One LRBG of a journey (DESIGN 4.10): the group, the world as it sees it (its passage and
    every leg after its detection), where it lies and which way its frame points in G1's frame,
    and how many legs from G1's passage came before its detection."""

    group: int
    world: World
    origin: Fraction = F(0)
    frame: int = 1
    start: int = 0


@attrs.frozen
class Handover:
    """What the route's later groups do to a world (DESIGN 4.8, 4.10): every LRBG of the journey
    (G1 first) and, per later group G2 .. GN, what became of it."""

    stages: tuple                 # every LRBG of the journey, G1 first (Stage)
    windows: tuple = ()           # per later group: found inside its expectation window
    lrbgs: tuple = ()             # per later group: became the LRBG
    history: tuple = (1,)         # the onboard's list of LRBGs, oldest first
    links: tuple = ()             # per later group: linking usable for it from the LRBG of its time

    @property
    def accepted(self) -> bool:
        """A later group became the LRBG (the current LRBG is not G1)."""
        return len(self.stages) > 1

    @property
    def current(self) -> World:
        """The world as the current LRBG sees it: its passage and the legs after it."""
        return self.stages[-1].world

    @property
    def frame(self) -> int:
        """The sign of the current LRBG frame's nominal direction in G1's frame."""
        return self.stages[-1].frame

    @property
    def group(self) -> int:
        return self.stages[-1].group

    @property
    def origin(self) -> Fraction:
        return self.stages[-1].origin

    @property
    def previous(self) -> int:
        return self.stages[-2].group if len(self.stages) >= 2 else 0


def marks(world: World) -> list:
    """The engineered mark of every group in G1's frame: [0, x2, x3, ...] (DESIGN 4.10: a route
    runs one way, the way from G1 to G2)."""
    out, x = [F(0)], F(0)
    for g in world.route:
        x += sign(world.g2.side) * g.distance
        out.append(x)
    return out


def handover(world: World, scope: Scope) -> Handover:
    """Which groups become the LRBG, and the world from then on (DESIGN 4.8, 4.10). Each found
    group is judged from the current LRBG: a linked one in its window and passed the announced
    way (SUBSET-026 3.4.4.4.3, 3.4.4.4.7); an unlinked one, or any when linking cannot be used,
    with two balises read (3.4.4.3.2); a single-balise one without usable linking always, its
    directions referred to the move from the current LRBG towards it (the report based on two
    groups, 3.4.2.3.3.1, 3.4.2.3.3.2), or unknown when the train finds it running the other way
    (3.4.2.3.3.4)."""
    stages = [Stage(1, world)]
    windows, lrbgs = [], []
    links = []
    for k, g in enumerate(world.route, 2):
        cur = stages[-1]
        local = g.at - cur.start
        if not g.found or not 1 <= local <= len(cur.world.legs):
            links.append(linking_usable(world, cur, g))
            windows.append(False)
            lrbgs.append(False)
            continue
        snap = start(cur.world)
        for leg in cur.world.legs[:local]:
            snap, _ = advance(snap, leg)
        linking, in_window, view = judge(world, scope, k, cur, snap, cur.world.legs[local - 1])
        links.append(linking)
        windows.append(in_window)
        lrbgs.append(view is not None)
        if view is not None:
            stages.append(attrs.evolve(view, world=attrs.evolve(view.world, legs=cur.world.legs[local:]),
                                       start=g.at))
    history = tuple(st.group for st in stages)[-scope.history:]
    return Handover(tuple(stages), tuple(windows), tuple(lrbgs), history, tuple(links))


def linking_usable(world: World, cur: Stage, g: Group2) -> bool:
    """Whether linking can be used for a later group from the current LRBG (DESIGN 4.10)."""
    return (g.linked and known(world) and known(cur.world)
            and (cur.group == 1 or world.route[cur.group - 2].linked))


def judge(world: World, scope: Scope, k: int, cur: Stage, snap: Snapshot, leg: Leg) -> tuple:
    """Group ``k`` of ``world``, found at the end of ``leg`` (``snap``: the state after it, as
    ``cur``, the current LRBG, sees it): (linking usable, inside its window, the new Stage
    when it becomes the LRBG, else None). The new stage's world has no legs and starts at 0."""
    g = world.route[k - 2]
    linking = linking_usable(world, cur, g)
    e = cur.frame * (marks(world)[k - 1] - cur.origin)  # GK's engineered mark in the current frame
    way = 1 if e > 0 else -1                        # from the current LRBG towards GK
    in_window, prv, frame = False, False, sign(g.orientation)
    if linking:
        est_front = sign(cur.world.direction) * snap.est_front_passage
        est_antenna = est_front - snap.orientation * world.antenna
        u = way * est_antenna                       # estimated distance from the LRBG towards GK
        lo = u - cur.world.locacc - _bound_over(scope, snap.measured)
        hi = u + cur.world.locacc + _bound_under(scope, snap.measured)
        in_window = hi >= abs(e) - g.locacc and lo <= abs(e) + g.locacc
        accepted = in_window and snap.motion == way
    elif g.balises == 1:
        accepted = True
        prv = snap.motion == way
        if prv:
            frame = cur.frame * way
    else:
        accepted = g.read >= 2
    if not accepted:
        return linking, in_window, None
    # the real mark's offset in the new LRBG's frame: its own orientation's, turned when the
    # frame is the move towards it (a group referred to the previous LRBG)
    view = World(balises=g.balises, read=g.read, linked=g.linked and (linking or g.balises > 1),
                 locacc=g.locacc, offset=frame * sign(g.orientation) * g.offset,
                 length=world.length, antenna=world.antenna,
                 direction=direction_of(frame * cur.frame * snap.motion), running=leg.running,
                 detect_error=g.detect_error, prv=prv, prv_group=cur.group)
    return linking, in_window, Stage(k, view, marks(world)[k - 1], frame, 0)


def _bound_over(scope: Scope, measured: Fraction) -> Fraction:
    """The over-reading bound at a measured distance: the odometry's, and the detection error
    on top unless [world] counts it inside (DESIGN 4.1)."""
    return scope.odometry_over.at(measured) + (0 if scope.detection_in_odometry else scope.detection)


def _bound_under(scope: Scope, measured: Fraction) -> Fraction:
    return scope.odometry_under.at(measured) + (0 if scope.detection_in_odometry else scope.detection)


@attrs.frozen(eq=True)
class Snapshot:
    """The world after some legs (DESIGN 4.7): the group, train and passage (``world``, its
    legs unused) and what the legs so far left behind. Signs are +1 (nominal) and -1
    (reverse) in the LRBG frame. ``accumulators`` maps an accumulator family's key to
    {valuation: value}; ``frozen`` maps (i, field) to the value of ``legs[i].field``."""

    world: World
    count: int
    cab_changes: int
    orientation: int          # real train orientation
    motion: int               # real direction of the last movement (of the passage before any leg)
    front: Fraction           # real front end
    est_front_passage: Fraction   # estimated front end in the passage frame
    travelled: Fraction       # real distance run
    measured: Fraction        # odometer sum
    over: Fraction            # over-reading so far (DESIGN 4.1 over_j)
    under: Fraction           # under-reading so far (under_j)
    accumulators: dict = attrs.field(factory=dict, hash=False)
    frozen: dict = attrs.field(factory=dict, hash=False)
    route: "RouteState | None" = None   # a route's state beyond the current LRBG (DESIGN 4.10)


@attrs.frozen
class RouteState:
    """What a state of a route carries beyond the current LRBG's own (DESIGN 4.7, 4.10): the
    route's inputs with every later group's detection so far, the legs since G1's passage,
    which groups became the LRBG or were found in their window, the current LRBG frame in
    G1's, and whether linking was used when the current LRBG was accepted. Read like a
    :class:`Handover` (group, previous, history, windows, lrbgs, frame, origin)."""

    world: World                  # G1's inputs and every later group's (found, at, detect_error so far); no legs
    journey: int = 0              # legs since G1's passage
    lrbgs: tuple = ()             # per later group: became the LRBG so far
    windows: tuple = ()           # per later group: found inside its window so far
    frame: int = 1                # the sign of the current LRBG frame's nominal direction in G1's
    linking: bool = False         # the current LRBG was accepted through linking
    size: int = 8                 # the onboard's list of LRBGs holds this many (world.history)

    @property
    def group(self) -> int:
        return max([k for k, b in enumerate(self.lrbgs, 2) if b], default=1)

    @property
    def previous(self) -> int:
        if self.group == 1:
            return 0
        return max([k for k, b in enumerate(self.lrbgs, 2) if b and k < self.group], default=1)

    @property
    def history(self) -> tuple:
        return ((1,) + tuple(k for k, b in enumerate(self.lrbgs, 2) if b))[-self.size:]

    @property
    def origin(self) -> Fraction:
        return marks(self.world)[self.group - 1]

    @property
    def start(self) -> int:
        """The leg of the journey at whose end the current LRBG was detected (0: G1's passage)."""
        return 0 if self.group == 1 else self.world.route[self.group - 2].at


def known(world: World) -> bool:
    """Whether the onboard knows the direction of passage (DESIGN 4.3): two balises read,
    linking, or the previous LRBG as the direction reference (DESIGN 4.8)."""
    return world.read >= 2 or world.linked or world.prv


def start(world: World, plan=None) -> Snapshot:
    """The state at the detection instant (DESIGN 4.2): no leg yet."""
    w = world
    s = sign(w.direction)
    o = s if w.running is FWD else -s
    accs = {}
    if plan is not None:
        empty = {"all": True, "any": False, "count": F(0), "sum": F(0)}
        accs = {fam.key: {v: empty[fam.kind] for v in fam.valuations} for fam in plan.accumulators}
    return Snapshot(w, 0, 0, o, s, w.offset + s * w.detect_error + o * w.antenna,
                    (1 if w.running is FWD else -1) * w.antenna, F(0), F(0),
                    max(F(0), -w.detect_error), max(F(0), w.detect_error), accs, {})


def advance(snap: Snapshot, leg: Leg, pack: Pack | None = None, plan=None) -> tuple:
    """One leg (DESIGN 4.2, 4.3): the state after it, and the leg's fields. With a ``plan``
    (:mod:`verifier.check.unbounded`) the accumulators and frozen legs are carried too."""
    w = snap.world
    s = sign(w.direction)
    o = snap.orientation
    op = o * s                    # the orientation in the passage frame
    front, est_p, cab_changes = snap.front, snap.est_front_passage, snap.cab_changes
    if leg.cab_change:
        front -= o * w.length
        o = -o
        est_p -= op * w.length
        op = -op
        cab_changes += 1
    m = o if leg.running is FWD else -o
    mp = op if leg.running is FWD else -op
    front += m * leg.distance
    est_p += mp * leg.odometer
    seen = known(w)
    frame = s if seen else 1
    i = snap.count + 1
    fields = {
        "index": F(i), "cab_change": leg.cab_change, "running": leg.running,
        "distance": leg.distance, "odometer": leg.odometer,
        "orientation": direction_of(o) if seen else UNK,
        "motion": direction_of(m) if seen else UNK,
        "actual_orientation": direction_of(o), "actual_motion": direction_of(m),
        "actual_front": front, "est_front": frame * est_p,
    }
    new = attrs.evolve(snap, count=i, cab_changes=cab_changes, orientation=o, motion=m,
                       front=front, est_front_passage=est_p,
                       travelled=snap.travelled + leg.distance,
                       measured=snap.measured + leg.odometer,
                       over=snap.over + max(F(0), leg.odometer - leg.distance),
                       under=snap.under + max(F(0), leg.distance - leg.odometer))
    if plan is not None:
        view = SnapView(pack, new, plan, static_only=True)
        accs = {}
        for fam in plan.accumulators:
            old = snap.accumulators[fam.key]
            accs[fam.key] = {v: _grow(fam.kind, old[v], view.body_value(fam, fields, v))
                             for v in fam.valuations}
        frozen = dict(snap.frozen)
        for j, field in plan.frozen:
            if j == i:
                frozen[(j, field)] = fields[field]
        new = attrs.evolve(new, accumulators=accs, frozen=frozen)
    return new, fields


def route_start(world: World, scope: Scope, plan=None) -> Snapshot:
    """A route's state at G1's passage (DESIGN 4.10): no group found yet."""
    w = attrs.evolve(world, legs=(), later=tuple(attrs.evolve(g, found=False, at=0, detect_error=F(0))
                                                 for g in world.later),
                     g2=attrs.evolve(world.g2, found=False, at=0, detect_error=F(0)))
    n = len(w.route)
    return attrs.evolve(start(attrs.evolve(w, g2=None, later=()), plan),
                        route=RouteState(w, 0, (False,) * n, (False,) * n, 1, False, scope.history))


def advance_route(snap: Snapshot, leg: Leg, found: int, detect_error: Fraction, scope: Scope,
                  pack: Pack | None = None, plan=None) -> tuple:
    """One leg of a route (DESIGN 4.10) from a state with a :class:`RouteState`: the leg in
    the current LRBG's frame, then group ``found`` (0: none) detected at its end with
    ``detect_error``, judged from the current LRBG and, when accepted, the state restarted at
    its detection. Returns (state, the leg's fields, problems): why the detection cannot
    happen (empty when it can)."""
    rs = snap.route
    new, fields = advance(snap, leg, pack, plan)
    journey = rs.journey + 1
    w, problems = rs.world, []
    rs = attrs.evolve(rs, journey=journey)
    if not found:
        if detect_error:
            problems.append(f"leg {journey}: a detection error without a group found")
        return attrs.evolve(new, route=rs), fields, problems
    n = len(w.route) + 1
    if not 2 <= found <= n:
        return attrs.evolve(new, route=rs), fields, [f"leg {journey}: there is no group G{found} to find"]
    g = w.route[found - 2]
    if g.found:
        problems.append(f"leg {journey}: G{found} was found before")
    if any(x.found for x in w.route[found - 1:]):
        problems.append(f"leg {journey}: a group after G{found} was found before it (DESIGN 4.10)")
    if abs(detect_error) > scope.detection:
        problems.append(f"leg {journey}: |detect_error| above world.detection")
    # the real antenna, in G1's frame, on G{found}'s real mark with the detection error along the movement
    f = rs.frame
    antenna = rs.origin + f * (new.front - new.orientation * w.antenna)
    mark = marks(w)[found - 1] + sign(g.orientation) * g.offset
    if not leg.distance > max(F(0), detect_error):
        problems.append(f"leg {journey} must move the antenna onto G{found} (more than 0 m, and more "
                        "than the detection error)")
    if antenna != mark + f * new.motion * detect_error:
        problems.append(f"leg {journey}: the antenna is at {_m(antenna)}, not at G{found}'s mark "
                        f"{_m(mark)} with the detection error")
    g = attrs.evolve(g, found=True, at=journey, detect_error=detect_error)
    route = list(w.route)
    route[found - 2] = g
    w = attrs.evolve(w, g2=route[0], later=tuple(route[1:]))
    cur = Stage(rs.group, new.world, rs.origin, rs.frame)
    linking, in_window, stage = judge(w, scope, found, cur, new, leg)
    windows = list(rs.windows)
    windows[found - 2] = in_window
    rs = attrs.evolve(rs, world=w, windows=tuple(windows))
    if stage is None:
        return attrs.evolve(new, route=rs), fields, problems
    lrbgs = list(rs.lrbgs)
    lrbgs[found - 2] = True
    rs = attrs.evolve(rs, lrbgs=tuple(lrbgs), frame=stage.frame, linking=linking)
    return attrs.evolve(start(stage.world, plan), route=rs), fields, problems


def detection(before: Snapshot, after: Snapshot) -> tuple:
    """The group a route's leg found at its end, from the states before and after it: (K,
    its detection error), or (0, 0) for none."""
    if before.route is None or after.route is None:
        return 0, F(0)
    for k, (a, b) in enumerate(zip(before.route.world.route, after.route.world.route), 2):
        if b.found and not a.found:
            return k, b.detect_error
    return 0, F(0)


def snapshot_problems(snap: Snapshot, scope: Scope, plan=None) -> list[str]:
    """Why ``snap`` is outside the domain of states (DESIGN 4.7): what every state after any
    number of legs in scope satisfies. Empty when it is inside."""
    w = snap.world
    if snap.route is not None:
        out = _route_problems(snap, scope)
    else:
        out = [p for p in scope_problems(attrs.evolve(w, legs=()), scope, 0)]
    if snap.count < 0 or not 0 <= snap.cab_changes <= snap.count:
        out.append(f"{counted(snap.cab_changes, 'cab change')} in {counted(snap.count, 'leg')}")
    for name, v in (("actual.orientation", snap.orientation), ("actual.motion", snap.motion)):
        if v not in (1, -1):
            out.append(f"{name} must be nominal or reverse")
    if snap.travelled < 0 or snap.measured < 0:
        out.append("a negative distance travelled or measured")
    d = w.detect_error
    if snap.over < max(F(0), -d) or snap.under < max(F(0), d):
        out.append("less reading error than the detection error alone")
    basis = snap.measured if scope.odometry_basis == "measured" else snap.travelled
    extra_over, extra_under = (F(0), F(0)) if scope.detection_in_odometry else (max(F(0), -d), max(F(0), d))
    if snap.over > scope.odometry_over.at(basis) + extra_over:
        out.append(f"over-reading {_m(snap.over)} exceeds the bound {_m(scope.odometry_over.at(basis) + extra_over)}")
    if snap.under > scope.odometry_under.at(basis) + extra_under:
        out.append(f"under-reading {_m(snap.under)} exceeds the bound {_m(scope.odometry_under.at(basis) + extra_under)}")
    if snap.count == 0:
        first = start(w, plan)
        if attrs.evolve(snap, frozen={}) != attrs.evolve(first, frozen={}, route=snap.route):
            out.append("a state with no leg must be the state at the detection instant")
    if plan is not None:
        for fam in plan.accumulators:
            got = snap.accumulators.get(fam.key)
            if got is None or set(got) != set(fam.valuations):
                out.append(f"accumulator {fam.text} is missing or incomplete")
            elif fam.kind == "count" and not all(0 <= x <= snap.count and F(x).denominator == 1
                                                  for x in got.values()):
                out.append(f"accumulator {fam.text} is not a count within 0..legs.count")
        for i, field in plan.frozen:
            if i > snap.count:
                continue
            v = snap.frozen.get((i, field))
            if v is None:
                out.append(f"legs[{i}].{field} is missing")
            elif field == "index" and v != i:
                out.append(f"legs[{i}].index is {v}")
            elif field == "distance" and not scope.leg_distance[0] <= v <= scope.leg_distance[1]:
                out.append(f"legs[{i}].distance {v} m outside the scope")
            elif field == "odometer" and v < 0:
                out.append(f"legs[{i}].odometer is negative")
            elif field in ("orientation", "motion") and (v is UNK) == known(w):
                out.append(f"legs[{i}].{field} is {v.word}, but the passage is "
                           f"{'known' if known(w) else 'unknown'}")
        fr = snap.frozen
        for i in sorted({i for i, _ in plan.frozen if i <= snap.count}):
            for seen, real in (("orientation", "actual_orientation"), ("motion", "actual_motion")):
                if known(w) and (i, seen) in fr and (i, real) in fr and fr[(i, seen)] != fr[(i, real)]:
                    out.append(f"legs[{i}].{seen} differs from legs[{i}].{real} with a known passage")
            keys = [(i, "actual_motion"), (i, "actual_orientation"), (i, "running")]
            if all(k in fr for k in keys):
                o = sign(fr[(i, "actual_orientation")])
                want = direction_of(o if fr[(i, "running")] is FWD else -o)
                if fr[(i, "actual_motion")] is not want:
                    out.append(f"legs[{i}].actual_motion does not follow from its orientation and running")
    return out


def _route_problems(snap: Snapshot, scope: Scope) -> list[str]:
    """Why a route's state is outside the domain of DESIGN 4.7 as 4.10 extends it: the route's
    inputs so far in scope, which groups became the LRBG consistent with those found, and the
    current LRBG's world (``snap.world``) the one its acceptance gives."""
    rs, v = snap.route, snap.world
    w = rs.world
    out = scope_problems(w, scope, 0, journey=rs.journey)
    n = len(w.route)
    if len(rs.lrbgs) != n or len(rs.windows) != n or rs.size != scope.history:
        return out + ["the route's state does not fit the pack's groups or list"]
    for k, g in enumerate(w.route, 2):
        if rs.lrbgs[k - 2] and not g.found:
            out.append(f"G{k} became the LRBG without being found")
        if rs.windows[k - 2] and not (g.found and g.linked and known(w)):
            out.append(f"G{k} was found in a window that linking cannot give")
    if rs.start + snap.count != rs.journey:
        out.append(f"{counted(snap.count, 'leg')} since the current LRBG, detected after leg "
                   f"{rs.start}, in a journey of {counted(rs.journey, 'leg')}")
    if v.legs or v.g2 is not None or v.later:
        out.append("the current LRBG's world has legs or groups of its own")
    k = rs.group
    if k == 1:
        g1 = attrs.evolve(w, legs=(), g2=None, later=())
        if v != g1 or rs.frame != 1 or rs.linking:
            out.append("with G1 the LRBG, the current world must be G1's passage")
        return out
    g = w.route[k - 2]
    frame_of_g = sign(g.orientation)
    want = {"lrbg.balises": g.balises, "lrbg.read": g.read, "lrbg.locacc": g.locacc,
            "passage.detect_error": g.detect_error, "train.length": w.length,
            "train.antenna": w.antenna, "report.prv_lrbg": rs.previous,
            "lrbg.offset": g.offset if rs.frame == frame_of_g else -g.offset,
            "lrbg.linked": g.linked and (rs.linking or g.balises > 1)}
    got = {"lrbg.balises": v.balises, "lrbg.read": v.read, "lrbg.locacc": v.locacc,
           "passage.detect_error": v.detect_error, "train.length": v.length,
           "train.antenna": v.antenna, "report.prv_lrbg": v.prv_group,
           "lrbg.offset": v.offset, "lrbg.linked": v.linked}
    out += [f"the current LRBG G{k}'s {name} is {got[name]}, its acceptance gives {x}"
            for name, x in want.items() if got[name] != x]
    if rs.frame not in (1, -1) or v.direction is UNK:
        out.append("the current LRBG's frame and passage direction must be nominal or reverse")
    if v.prv and not (g.balises == 1 and not rs.linking):
        out.append(f"G{k} is referred to the previous LRBG, but it is not a single balise accepted without linking")
    if not v.prv and rs.frame != frame_of_g:
        out.append(f"G{k}'s frame is not its own orientation, yet it is not referred to the previous LRBG")
    p = rs.previous     # linking was usable from it when linked itself (or G1), its direction known
    prev_linked = p == 1 or w.route[p - 2].linked
    if rs.linking and not prev_linked:
        out.append(f"G{k} was accepted through linking from G{p}, which linking did not announce")
    if not rs.linking and g.linked and known(w) and prev_linked and (p == 1 or w.route[p - 2].read >= 2):
        out.append(f"G{k} was accepted without linking, though linking was usable from G{p}")
    if rs.linking and not (g.linked and known(w) and rs.windows[k - 2]):
        out.append(f"G{k} was accepted through linking outside its window")
    if not rs.linking and not (g.balises == 1 or g.read >= 2):
        out.append(f"G{k} was accepted without linking with one balise of {g.balises} read")
    return out


def _grow(kind: str, old, value):
    if kind == "all":
        return old and bool(value)
    if kind == "any":
        return old or bool(value)
    if kind == "count":
        return old + (1 if value else 0)
    return old + value


def snapshot_values(snap: Snapshot, scope: Scope) -> dict:
    """The vocabulary of DESIGN 4 that a state determines (everything but the designs and
    the wire)."""
    w = snap.world
    s = sign(w.direction)
    seen_known = known(w)
    seen = w.direction if seen_known else UNK
    frame = s if seen_known else 1
    o, est_p = snap.orientation, snap.est_front_passage
    op = o * s
    first = start(w)
    return {
        "lrbg.balises": F(w.balises), "lrbg.read": F(w.read), "lrbg.linked": w.linked,
        "lrbg.locacc": w.locacc, "lrbg.offset": w.offset,
        # a single-balise LRBG whose orientation no linking gave: the report based on two
        # groups, its directions referred to the previous LRBG (SUBSET-026 3.4.2.3.3.1, 7.4.3.2)
        "lrbg.two_groups": w.balises == 1 and not w.linked,
        "report.two_groups": w.balises == 1 and not w.linked,
        "report.prv_lrbg": F(w.prv_group if w.prv else 0),
        "train.length": w.length, "train.antenna": w.antenna,
        "passage.direction": w.direction, "passage.running": w.running,
        "passage.detect_error": w.detect_error, "passage.seen": seen,
        "passage.actual_front": first.front,
        "passage.est_front": frame * first.est_front_passage,
        "legs.count": F(snap.count), "cab_changes": F(snap.cab_changes),
        "actual.front": snap.front, "actual.rear": snap.front - o * w.length,
        "actual.orientation": direction_of(o), "actual.motion": direction_of(snap.motion),
        "actual.travelled": snap.travelled,
        "actual.over_reading": snap.over, "actual.under_reading": snap.under,
        "est.front_passage": est_p, "est.front": frame * est_p,
        "est.rear": frame * (est_p - op * w.length),
        "est.orientation": direction_of(o) if seen_known else UNK,
        "est.motion": direction_of(snap.motion) if seen_known else UNK,
        "est.travelled": snap.measured,
        "est.bound_over": _bound_over(scope, snap.measured),
        "est.bound_under": _bound_under(scope, snap.measured),
    }


def group_values(world: World, h: Handover) -> dict:
    """The names of the groups (DESIGN 4.8, 4.10): which is the LRBG, the onboard's list, G1's
    inputs, each later group's and what linking gives of it."""
    out = {"lrbg.group": F(h.group), "journey.legs": F(len(world.legs)),
           "g1.balises": F(world.balises), "g1.read": F(world.read), "g1.linked": world.linked,
           "g1.locacc": world.locacc, "g1.offset": world.offset}
    if not world.route:
        return out
    known1 = known(world)
    xs = marks(world)
    out.update({"g1.remembered": 1 in h.history, "g1.link_position": F(0), "g1.link_orientation": NOM,
                "lrbg.previous": F(h.previous), "lrbg.remembered": F(len(h.history))})
    for k, g in enumerate(world.route, 2):
        linked = g.linked and known1
        n = f"g{k}"
        out.update({
            f"{n}.distance": g.distance, f"{n}.side": g.side, f"{n}.orientation": g.orientation,
            f"{n}.balises": F(g.balises), f"{n}.read": F(g.read), f"{n}.linked": g.linked,
            f"{n}.locacc": g.locacc, f"{n}.offset": g.offset, f"{n}.found": g.found, f"{n}.at": F(g.at),
            f"{n}.detect_error": g.detect_error, f"{n}.in_window": h.windows[k - 2],
            f"{n}.lrbg": h.lrbgs[k - 2],
            f"{n}.link_distance": g.distance if linked else F(0),
            f"{n}.link_side": g.side if linked else UNK,
            f"{n}.link_orientation": g.orientation if linked else UNK,
            f"{n}.remembered": k in h.history,
            f"{n}.link_position": xs[k - 1] if linked else F(0),
        })
    j = h.group
    out["lrbg.link_position"] = out[f"g{j}.link_position"]
    out["lrbg.link_orientation"] = out[f"g{j}.link_orientation"]
    return out


class _Values:
    """Vocabulary values of one state under one pack, computed on demand and memoised:
    the designs (DESIGN 4.4, 4.5) and the wire over what the state determines."""

    pack: Pack
    values: dict
    _memo: dict

    # ---- the position report on the wire (DESIGN 4.4) --------------------------------
    def _rounded(self, step: Fraction) -> tuple:
        d = self.get("est.d_lrbg")
        over = self.get("est.l_doubtover")
        under = self.get("est.l_doubtunder")
        mode = self.pack.rounding
        if mode == "nearest":
            return round_to(d, step), round_to(over, step), round_to(under, step)
        if mode == "down":
            return floor_to(d, step), floor_to(over, step), floor_to(under, step)
        rd = round_to(d, step)
        widen = abs(rd - d)
        return rd, ceil_to(over + widen, step), ceil_to(under + widen, step)

    def _wire(self) -> None:
        v = self.values
        if self.pack.q_scale == "auto":
            chosen = STEPS[-1]
            for name, step in STEPS:
                codes = [x / step for x in self._rounded(step)]
                if all(0 <= c <= MAX_CODE for c in codes):
                    chosen = (name, step)
                    break
        else:
            chosen = (self.pack.q_scale, dict(STEPS)[self.pack.q_scale])
        name, step = chosen
        rounded = self._rounded(step)
        known = v["passage.seen"] is not UNK
        codes = []
        for x in rounded:
            c = x / step
            codes.append(c if known and 0 <= c <= MAX_CODE else F(UNKNOWN_CODE))
        quals = [self.get(f"est.{q}") if known else UNK for q in ("q_dlrbg", "q_dirlrbg", "q_dirtrain")]
        for q, val in zip(("q_dlrbg", "q_dirlrbg", "q_dirtrain"), quals):
            v[f"report.{q}"] = val
            v[f"report.code.{q}"] = F(val.value)
        for k, x, c in zip(("d_lrbg", "l_doubtover", "l_doubtunder"), rounded, codes):
            v[f"report.{k}"] = x
            v[f"report.code.{k}"] = c
            v[f"rbc.{k}"] = c * step
        v["report.q_scale"] = step
        v["report.code.q_scale"] = F(Q_SCALES[name])
        v["report.in_range"] = all(c <= MAX_CODE for c in codes)
        v["rbc.placed"] = v["report.in_range"] and all(q is not UNK for q in quals)

    # ---- names ------------------------------------------------------------------------
    def get(self, name: str):
        if name in self.values:
            return self.values[name]
        if name.startswith("est.") and name[4:] in self.pack.onboard:
            value = self.formula(("onboard", name[4:]))
        elif name.startswith("rbc.") and name[4:] in self.pack.trackside:
            value = self.formula(("trackside", name[4:]))
        elif name.startswith(("report.", "rbc.")):
            self._wire()
            return self.values[name]
        else:
            raise KeyError(name)
        self.values[name] = value
        return value

    def formula(self, dep: tuple):
        if dep not in self._memo:
            self._memo[dep] = None  # cycles are excluded by the checker
            self._memo[dep] = evaluate(self.pack.definition(dep).node, self, {})
        return self._memo[dep]

    def forget(self, dep: tuple) -> None:
        """Drop what ``formula(dep)`` left behind when it raised (a let naming a leg beyond the
        world's legs), so that asking again raises again."""
        self._memo.pop(dep, None)

    def quantify(self, node: ast.Quant, env: dict):
        raise NotImplementedError

    # ---- trackside information items (DESIGN 4.9) -------------------------------------
    def info_value(self, info_id: str, field: str):
        item = self.pack.info(info_id)
        data = item_data(item)
        if self.world.route:        # what the onboard knows of the item's group (DESIGN 4.10)
            n = f"g{item.group}"
            data.update({"remembered": self.get(f"{n}.remembered"),
                         "link_position": self.get(f"{n}.link_position"),
                         "link_orientation": self.get(f"{n}.link_orientation")})
        if field in data:
            return data[field]
        if field == "real":
            return self._info_real(item)
        if field == "ahead":
            return sign(self.get("actual.orientation")) * (self._info_real(item) - self.get("actual.front"))
        if field in ("est_ahead", "max_safe_ahead", "min_safe_ahead"):
            est = sign(self.get("est.orientation")) * (self.info_value(info_id, "position") - self.get("est.front"))
            return {"est_ahead": est, "max_safe_ahead": est - self.get("est.l_doubtunder"),
                    "min_safe_ahead": est + self.get("est.l_doubtover")}[field]
        key = (("onboard", f"info_{field}"), info_id)
        if key not in self._memo:
            self._memo[key] = evaluate(self.pack.definition(key[0]).node, self, {ITEM: data})
        return self._memo[key]

    def _info_real(self, item) -> Fraction:
        """Where the item is, in the current LRBG's frame, from the line data. An item valid
        both ways lies ``at`` from its group in the direction the train really faces
        (SUBSET-026 3.6.3.1.3, 3.6.4.2.3); a one-way item at its place in its group's frame
        (its engineered orientation; DESIGN 4.9, 4.10)."""
        o = sign(self.get("actual.orientation"))       # in the current LRBG's frame
        w = self.world
        if not w.route:
            return o * item.at if item.for_nominal and item.for_reverse else item.location
        h = getattr(self, "handover", None) or Handover((Stage(1, w),))
        f, x0 = h.frame, h.origin                       # the current frame in G1's
        xa = marks(w)[item.group - 1]
        sa = 1 if item.group == 1 else sign(w.route[item.group - 2].orientation)
        if item.for_nominal and item.for_reverse:
            x = xa + f * o * item.at                    # `at` ahead of its group, along the orientation
        else:
            x = xa + sa * item.location
        return f * (x - x0)

    def leg_at(self, index: int, field: str):
        raise NotImplementedError


class State(_Values):
    """Every vocabulary value of one world under one pack: the legs run one by one from the
    detection instant; quantifiers run over the legs."""

    def __init__(self, pack: Pack, world: World):
        self.pack = pack
        self.world = world
        self.values: dict = {}
        self.legs: list[dict] = []
        self._memo: dict = {}
        # with a second group that became the LRBG, the legs and every name of the current LRBG
        # are those of the world as G2 sees it (DESIGN 4.8)
        self.handover = handover(world, pack.scope)
        self.current = self.handover.current
        snap = start(self.current)
        for leg in self.current.legs:
            snap, fields = advance(snap, leg)
            self.legs.append(fields)
        self.values.update(snapshot_values(snap, pack.scope))
        self.values.update(group_values(world, self.handover))

    def journey_raw(self) -> list:
        """Every leg since G1's passage with its fields in the frame of the group that was the
        LRBG during it: [(Leg, fields, group)]."""
        h = self.handover
        if not h.accepted:
            return [(leg, f, 1) for leg, f in zip(self.world.legs, self.legs)]
        out = []
        for i, stage in enumerate(h.stages[:-1]):
            snap = start(stage.world)
            for leg in stage.world.legs[:h.stages[i + 1].start - stage.start]:
                snap, f = advance(snap, leg)
                out.append((leg, f, stage.group))
        return out + [(leg, f, h.group) for leg, f in zip(self.current.legs, self.legs)]

    def _stage(self, group: int) -> Stage:
        return next(s for s in self.handover.stages if s.group == group)

    @property
    def journey(self) -> list:
        """Every leg since G1's passage with its fields in the frame of the current LRBG, and
        the group that was the LRBG during it: [(Leg, fields, group)]. Legs before a relocation
        are seen from the current LRBG (DESIGN 4.8, 4.10); without one this is the legs with
        ``self.legs``."""
        h = self.handover
        if not h.accepted:
            return self.journey_raw()
        out = []
        for leg, f, group in self.journey_raw():
            if group != h.group:    # seen from the current LRBG: positions and directions in its frame
                st = self._stage(group)
                turn = st.frame * h.frame
                f = dict(f)
                for k in ("actual_front", "est_front"):
                    f[k] = h.frame * (st.origin + st.frame * f[k] - h.origin)
                for k in ("orientation", "motion", "actual_orientation", "actual_motion"):
                    if f[k] is not UNK:
                        f[k] = direction_of(turn * sign(f[k]))
            out.append((leg, f, group))
        return out

    def other_groups(self) -> list:
        """Every group that is not the current LRBG, in the current LRBG's frame: [(name,
        position, sign of its nominal direction, balises)]; empty with one group."""
        w, h = self.world, self.handover
        out = []
        for k, x in enumerate(marks(w), 1):
            if k == h.group or not w.route:
                continue
            s = 1 if k == 1 else sign(w.route[k - 2].orientation)
            if k != 1 and any(st.group == k for st in h.stages):
                s = self._stage(k).frame          # a group referred to a move keeps that frame
            out.append((f"G{k}", h.frame * (x - h.origin), h.frame * s,
                        w.balises if k == 1 else w.route[k - 2].balises))
        return out

    def quantify(self, node: ast.Quant, env: dict):
        results = [evaluate(node.body, self, {**env, node.var: leg}) for leg in self.legs]
        return _combine(node.kind, results)

    def leg_at(self, index: int, field: str):
        if index > len(self.legs):
            raise IndexError(f"legs[{index}] read in a world with {counted(len(self.legs), 'leg')}")
        return self.legs[index - 1][field]


def _combine(kind: str, results: list):
    if kind == "all":
        return all(results)
    if kind == "any":
        return any(results)
    if kind == "count":
        return F(sum(1 for r in results if r))
    return sum(results, F(0))


class SnapView(_Values):
    """Every vocabulary value at a state of DESIGN 4.7, without the legs that led there:
    quantifiers read the state's accumulators, ``legs[i]`` its frozen legs. With
    ``static_only`` only names that do not change with the legs may be read (the view an
    accumulator's body is evaluated in)."""

    def __init__(self, pack: Pack, snap: Snapshot, plan, static_only: bool = False):
        self.pack = pack
        self.snap = snap
        self.plan = plan
        self.values = snapshot_values(snap, pack.scope)
        rs = snap.route
        if rs is None:
            self.world = snap.world
            self.values.update(group_values(snap.world, Handover((Stage(1, snap.world),))))
            self.values["journey.legs"] = F(snap.count)
        else:                   # a route's state: the groups' names from what it carries (DESIGN 4.10)
            self.world = rs.world
            self.current = snap.world       # the current LRBG's passage, as State.current
            self.handover = rs
            self.values.update(group_values(rs.world, rs))
            self.values["journey.legs"] = F(rs.journey)
        if static_only:
            self.values = {k: v for k, v in self.values.items() if k in STATIC}
        self.static_only = static_only
        self._memo: dict = {}

    def get(self, name: str):
        if self.static_only and name not in self.values:
            raise KeyError(f"{name} changes with the legs: it cannot be read in an accumulator's body")
        return super().get(name)

    def quantify(self, node: ast.Quant, env: dict):
        fam, params = self.plan.use(node)
        case = tuple(evaluate(p, self, env) for p in params)
        return self.snap.accumulators[fam.key][case]

    def leg_at(self, index: int, field: str):
        if index > self.snap.count:
            raise IndexError(f"legs[{index}] read in a state after {counted(self.snap.count, 'leg')}")
        return self.snap.frozen[(index, field)]

    def body_value(self, fam, fields: dict, case: tuple):
        """An accumulator's body for one leg and one value of its parameters."""
        over = {id(p): v for p, v in zip(fam.params, case)}
        return evaluate(fam.body, self, {fam.var: fields, OVERRIDE: over})


OVERRIDE = "$override"   # env key: sub-terms replaced by given values (accumulator parameters)
ITEM = "$item"           # env key: the information item an info_* formula is evaluated for


def item_data(item) -> dict:
    """The item.* values of an information item."""
    return {"group": F(item.group), "at": item.at, "for_nominal": item.for_nominal,
            "for_reverse": item.for_reverse, "location": item.location}


def evaluate(node: ast.Node, st: _Values, env: dict):
    """The value of a typed expression in a state; ``env`` binds quantifier variables to the
    fields of a leg (and :data:`OVERRIDE` to values that replace given sub-terms, by
    identity)."""
    over = env.get(OVERRIDE)
    if over is not None and id(node) in over:
        return over[id(node)]
    if isinstance(node, ast.Num):
        return node.value
    if isinstance(node, ast.BoolLit):
        return node.value
    if isinstance(node, ast.Name):
        kind = node.ref[0]
        if kind == "var":
            return st.get(node.ref[1])
        if kind == "num" or kind == "const":
            return node.ref[1]
        if kind == "let":
            return st.formula(("let", node.ref[1]))
        if kind == "leg":
            return env[node.ref[1]][node.ref[2]]
        if kind == "legat":
            return st.leg_at(node.ref[1], node.ref[2])
        if kind == "item":
            return env[ITEM][node.ref[1]]
        if kind == "info":
            return st.info_value(node.ref[1], node.ref[2])
        raise AssertionError(node.ref)
    if isinstance(node, ast.Unary):
        x = evaluate(node.operand, st, env)
        return (not x) if node.op == "not" else -x
    if isinstance(node, ast.Binary):
        op = node.op
        if op == "and":
            return evaluate(node.left, st, env) and evaluate(node.right, st, env)
        if op == "or":
            return evaluate(node.left, st, env) or evaluate(node.right, st, env)
        if op == "implies":
            return (not evaluate(node.left, st, env)) or evaluate(node.right, st, env)
        a, b = evaluate(node.left, st, env), evaluate(node.right, st, env)
        if op == "+":
            return a + b
        if op == "-":
            return a - b
        if op == "*":
            return a * b
        return F(a) / b
    if isinstance(node, ast.Chain):
        vals = [evaluate(o, st, env) for o in node.operands]
        return all(compare(op, a, b) for op, a, b in zip(node.ops, vals, vals[1:]))
    if isinstance(node, ast.IfThen):
        if evaluate(node.cond, st, env):
            return evaluate(node.then, st, env)
        return evaluate(node.orelse, st, env)
    if isinstance(node, ast.Call):
        args = [evaluate(a, st, env) for a in node.args]
        f = node.func
        if f == "abs":
            return abs(args[0])
        if f == "min":
            return min(args)
        if f == "max":
            return max(args)
        if f == "flip":
            return {NOM: REV, REV: NOM, UNK: UNK}[args[0]]
        if f == "side":
            return NOM if args[0] >= 0 else REV
        if f == "along":
            return -args[1] if args[0] is REV else args[1]
        return {"floor_to": floor_to, "ceil_to": ceil_to, "round_to": round_to}[f](F(args[0]), F(args[1]))
    if isinstance(node, ast.Quant):
        return st.quantify(node, env)
    raise AssertionError(type(node))


def compare(op: str, a, b) -> bool:
    return bool(ast.COMPARISONS[op](a, b))


def applies(rule, st: _Values) -> bool:
    """Whether a rule's given (with its implicit premise on legs[i]) holds in a state."""
    if rule.premise_legs > st.get("legs.count"):
        return False
    return rule.given is None or bool(evaluate(rule.given.node, st, {}))


def holds(rule, st: _Values) -> bool:
    """The rule as an implication in this state: not applicable, or expect true."""
    return (not applies(rule, st)) or bool(evaluate(rule.expect.node, st, {}))


def formula_value(formula: Formula, st: _Values):
    return evaluate(formula.node, st, {})
