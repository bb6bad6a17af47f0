"""What a route of groups did in one world (DESIGN 4.10), for the evidence that tells it: for
every later group, whether the train found it, which group was the LRBG then, whether it took
over and how, or why it was rejected, and the onboard's list after it. The diagram, the story
and the simulate text all word the same facts, so they are worked out once, here, from the
simulator's hand-over (:func:`verifier.world.sim.handover`)."""

from __future__ import annotations

from fractions import Fraction

import attrs

from verifier.world.sim import State, marks, sign

ORDINALS = ("first", "second", "third", "fourth", "fifth", "sixth", "seventh", "eighth")


@attrs.frozen
class Arrival:
    """One later group GK of the route, as the journey met it."""

    group: int              # K
    found: bool
    at: int                 # the leg at whose end it was found (0: not found)
    before: int             # the LRBG when it was found (or at the end, when it was not)
    linking: bool           # linking was usable for it from that LRBG (DESIGN 4.10)
    accepted: bool
    how: str                # accepted: "window", "two balises", "move", "unknown";
                            # rejected: "outside", "other way", "one balise", "order"; else ""
    history: tuple = ()     # the onboard's list just after it took over (accepted only)
    left: tuple = ()        # the groups that left the list when it took over
    unseen_at: int = 0      # not found: the leg during which the antenna passed its real mark


def is_route(st) -> bool:
    """Whether the evidence tells the route and the onboard's list (DESIGN 4.10): three groups
    or more, or a group that left a list shorter than the journey. A one- or two-group world
    whose list keeps every LRBG is told as before 4.10 (its files keep their bytes)."""
    h = getattr(st, "handover", None)
    if h is None or not st.world.route or not hasattr(h, "stages"):   # a state of DESIGN 4.7 keeps no stages
        return False
    return len(st.world.route) >= 2 or len(h.history) < len(h.stages)


def arrivals(st: State) -> list:
    """Every later group G2 .. GN in route order (see :class:`Arrival`)."""
    w, h = st.world, st.handover
    out = []
    for k, g in enumerate(w.route, 2):
        # groups take over in route order, so the LRBG when GK comes is the last one before it
        cur = [s for s in h.stages if s.group < k][-1]
        linking = h.links[k - 2]
        accepted = h.lrbgs[k - 2]
        if not g.found:
            out.append(Arrival(k, False, 0, cur.group, linking, False, "", (), (), _unseen(st, k)))
            continue
        if not cur.start < g.at <= len(w.legs):      # outside the scope: the simulator ignores it
            out.append(Arrival(k, True, g.at, cur.group, linking, False, "order"))
            continue
        if accepted:
            idx = next(i for i, s in enumerate(h.stages) if s.group == k)
            lists = [tuple(s.group for s in h.stages[:j + 1])[-st.pack.scope.history:]
                     for j in (idx - 1, idx)]
            # a single balise referred to the move is the simulator's own record (Stage.world.prv)
            how = ("window" if linking else "move" if h.stages[idx].world.prv
                   else "unknown" if g.balises == 1 else "two balises")
            left = tuple(x for x in lists[0] if x not in lists[1])
            out.append(Arrival(k, True, g.at, cur.group, linking, True, how, lists[1], left))
        else:
            how = ("outside" if linking and not h.windows[k - 2] else "other way" if linking
                   else "one balise")
            out.append(Arrival(k, True, g.at, cur.group, linking, False, how))
    return out


def _unseen(st: State, k: int) -> int:
    """The first leg during which the real antenna ran over GK's real mark although GK was not
    found (0: it never reached it). Positions in G1's frame; a leg moves one way only, from
    where the antenna stood after the cab change to where the leg ends."""
    w = st.world
    g = w.route[k - 2]
    mark = marks(w)[k - 1] + sign(g.orientation) * g.offset
    stages = {s.group: s for s in st.handover.stages}
    for i, (leg, f, group) in enumerate(st.journey_raw(), 1):
        s = stages[group]
        o, m = sign(f["actual_orientation"]), sign(f["actual_motion"])
        end = s.origin + s.frame * (f["actual_front"] - o * w.antenna)
        begin = end - s.frame * m * leg.distance
        if leg.distance > 0 and min(begin, end) <= mark <= max(begin, end):
            return i
    return 0


def group_list(groups) -> str:
    """The onboard's list in words: "G1, G2 and G3"."""
    names = [f"G{k}" for k in groups]
    return names[0] if len(names) == 1 else ", ".join(names[:-1]) + " and " + names[-1]


def how_words(a: Arrival) -> str:
    """Why GK took over or was rejected, in a few words (DESIGN 4.8, 4.10)."""
    return {
        "window": f"inside the window linking announced from G{a.before}, passed the announced way",
        "two balises": "two balises read",
        "move": f"a single balise, its directions referred to the move from G{a.before}",
        "unknown": f"a single balise found running towards G{a.before}: every direction unknown",
        "outside": f"outside the window linking announced from G{a.before}",
        "other way": f"passed against the way linking announced (from G{a.before} towards it)",
        "one balise": "one balise of a multi-balise group read, and no usable linking",
        "order": "found at no leg after the detection of the LRBG it follows, outside the scope",
    }[a.how]


def status(st: State, k: int, arr: dict) -> str:
    """A group's place in the story, for a caption: in the onboard's list, left it, rejected,
    passed unseen or not reached."""
    h = st.handover
    if k in h.history:
        return "in the list"
    if any(s.group == k for s in h.stages):
        return "left the list"
    a = arr[k]
    if a.found:
        return f"rejected at leg {a.at}"
    return f"passed unseen in leg {a.unseen_at}" if a.unseen_at else "not reached"


def window(st: State, a: Arrival) -> tuple:
    """The expectation window of a linked group from the LRBG it was judged from: the chain of
    linked distances -/+ its Q_LOCACC (DESIGN 4.10)."""
    xs = marks(st.world)
    d = abs(xs[a.group - 1] - xs[a.before - 1])
    g = st.world.route[a.group - 2]
    return Fraction(d - g.locacc), Fraction(d + g.locacc)
