"""The diagram of a counterexample (SVG), written beside its JSON file and by ``show --svg``.

One horizontal axis: the LRBG frame in metres (positive = the group's nominal direction, to the
right). From top to bottom: the metre scale; the group with its balises numbered by N_PIG and an
arrow for its nominal direction; one row per stage of the train (the detection instant, then the
end of each leg) with the real train as a bar whose active front end carries a black wedge, and
the estimated front as a hollow diamond; the trackside row with the reported interval (min to
max safe front, hatched), the trackside's estimated front and the real front as a thick line;
then the failed part of ``expect`` in words, a magnified inset when the margin that decides the
verdict is under 1 % of the axis, and a legend. Every meaning is carried by a shape or a word,
never by colour alone.

Plain SVG text, no floats: every coordinate is an exact rational rounded to 0.01 px, so the same
file gives byte-identical output.
"""

from __future__ import annotations

import math
import re
from fractions import Fraction
from html import escape
from pathlib import Path

import attrs

from verifier.check.model import Rule
from verifier.errors import visible
from verifier.evidence import cexfile
from verifier.evidence.route import arrivals, is_route, status
from verifier.evidence.story import front_at_detection, interval_words, whole_train_words
from verifier.lang.ast import LENGTH
from verifier.lang.numbers import counted
from verifier.world.failure import comparison_words, failed_detail, m
from verifier.world.scenario import fmt, legs_from_data
from verifier.lang.vocab import Direction
from verifier.world.sim import State, World, advance, detection, start
from verifier.world.sim import known as passage_known

F = Fraction
WIDTH = 960
X0, X1 = 210, 930            # the plot area (left column holds the row labels)
FONT = "DejaVu Sans, Verdana, Arial, sans-serif"
INK, GREY, LIGHT, ACCENT = "#1a1a1a", "#5c5c5c", "#d9d9d9", "#a3001b"
CHAR = F(68, 10)             # rough width of one character at 12 px, for label layout
INSET_SHARE = F(1, 100)      # margins under 1 % of the axis get a magnified inset


def P(v) -> str:
    """A coordinate: exact, rounded to 0.01 px, no float ever."""
    return fmt(round(F(v), 2))


def _t(x, y, text, size=12, anchor="start", weight=None, fill=INK, italic=False) -> str:
    extra = f' font-weight="{weight}"' if weight else ""
    extra += ' font-style="italic"' if italic else ""
    return (f'<text x="{P(x)}" y="{P(y)}" font-size="{size}" text-anchor="{anchor}" '
            f'fill="{fill}"{extra}>{escape(str(text), quote=False)}</text>')


def _nice_step(span: Fraction, target: int = 8) -> Fraction:
    raw = span / target
    k = math.floor(math.log10(raw)) if raw > 0 else 0
    base = F(10) ** k
    for mult in (1, 2, 5, 10):
        if base * mult >= raw:
            return base * mult
    return base * 10  # pragma: no cover


class Axis:
    def __init__(self, values, x0=X0, x1=X1, pad_min=F(1)):
        lo, hi = min(values), max(values)
        span = hi - lo
        pad = max(span * F(6, 100), pad_min)
        lo, hi = lo - pad, hi + pad
        self.step = _nice_step(hi - lo)
        self.lo = math.floor(lo / self.step) * self.step
        self.hi = math.ceil(hi / self.step) * self.step
        self.x0, self.x1 = F(x0), F(x1)

    @property
    def span(self) -> Fraction:
        return self.hi - self.lo

    def x(self, v) -> Fraction:
        return self.x0 + (F(v) - self.lo) * (self.x1 - self.x0) / self.span

    def ticks(self):
        t = self.lo
        while t <= self.hi:
            yield t
            t += self.step


def _label_layout(items, x_min, x_max, gap=8):
    """Place labels (x, text) on levels so that none overlap; returns (x, anchor, level, text)."""
    placed: list = []
    levels: dict = {}
    for x, text in sorted(items, key=lambda it: (it[0], it[1])):
        w = len(text) * CHAR
        left = min(max(x - w / 2, F(x_min)), F(x_max) - w)
        level = 0
        while any(not (left + w + gap <= a or b + gap <= left) for a, b in levels.get(level, [])):
            level += 1
        levels.setdefault(level, []).append((left, left + w))
        placed.append((left + w / 2, level, text))
    return placed


def _sign(d) -> int:
    return -1 if d.word == "reverse" else 1


def _slug(text: str) -> str:
    return re.sub(r"[^a-z0-9]+", "-", text.lower()).strip("-")


def _leg_stage(title: str, leg, d: dict, known: bool) -> tuple:
    what = ("cab change, then " if leg.cab_change else "") + leg.running.word
    return (title, [f"{what}, moving {d['actual_motion'].word}",
                    f"real {m(leg.distance)}, odometer {m(leg.odometer)}"],
            d["actual_front"], _sign(d["actual_orientation"]), d["est_front"] if known else None)


def render(doc: dict, rule: Rule, st: State) -> str:
    """The SVG text for one counterexample (``doc`` as written by cexfile.build)."""
    w, g = st.world, st.get
    known = g("passage.seen").word != "unknown"
    # the stages: (title, detail lines, real front, orientation sign, est front or None)
    f0, e0 = front_at_detection(st)
    o0 = _sign(w.direction) * (1 if w.running.word == "forward" else -1)
    h = st.handover
    relocated = w.g2 is not None and h.accepted
    if relocated:      # the passage over G1, seen from the current LRBG (DESIGN 4.8, 4.10)
        x2, s2 = h.origin, h.frame          # the current LRBG's mark and frame in G1's frame
        first = start(attrs.evolve(w, legs=(), g2=None, later=()) if isinstance(w, World) else w)
        f0, e0 = s2 * (first.front - x2), s2 * (_sign(w.direction) * first.est_front_passage - x2)
        o0 = s2 * o0
        known = passage_known(w)
    title = "At G1's detection" if w.g2 is not None else "At detection"
    g1_frame, g2_frame = (" (G1's frame)", f" (G{h.group}'s frame)") if relocated else ("", "")
    stages = [(title,
               [f"passed {'G1 ' if relocated else ''}{w.direction.word}{g1_frame}, "
                f"{'front' if w.running.word == 'forward' else 'rear'} first",
                f"faces {'nominal' if o0 > 0 else 'reverse'}{g2_frame}"],
               f0, o0, e0 if known else None)]
    # each LRBG after G1 takes over at the end of a leg; a leg's estimate is drawn when the
    # direction over the LRBG of its time is known (its frame is then the LRBG's, DESIGN 4.3)
    takeover = {s.start: s.group for s in h.stages[1:]}
    seen = {s.group: passage_known(s.world) for s in h.stages[1:]}
    for i, (leg, d, group) in enumerate(st.journey, 1):
        name = f"After leg {i}" + (f": G{takeover[i]} is the LRBG" if i in takeover else "")
        stages.append(_leg_stage(name, leg, d, seen.get(group, known)))
    verdict = f"{doc['pack']['name']} / {rule.id}: violated (up to {counted(doc['bound'], 'leg')})"
    return _draw(doc, rule, st, stages, verdict, f"Counterexample of rule {rule.id}")


def render_induction(doc: dict, rule: Rule, views) -> str:
    """The SVG text for one counterexample to induction (``doc`` as cexfile.build_induction
    writes it; ``views`` the simulator's states s0 .. sk): the train at each state of the path,
    the last state's report."""
    first = views[0]
    known = first.get("passage.seen").word != "unknown"
    n = first.snap.count
    ok = "the rule holds" if len(views) > 1 else ""
    stages = [(f"A state after {n} leg{'s' if n != 1 else ''}",
               [f"{first.snap.cab_changes} cab change{'s' if first.snap.cab_changes != 1 else ''}; {ok}",
                f"faces {first.get('actual.orientation').word}"],
               first.get("actual.front"), first.snap.orientation,
               first.get("est.front") if known else None)]
    legs, _ = legs_from_data(doc["legs"])
    if first.snap.route is not None:
        stages = _route_cti_stages(legs, views, stages[0][1])
    else:
        snap = first.snap
        for i, leg in enumerate(legs, 1):
            snap, d = advance(snap, leg)
            last = i == len(views) - 1
            stages.append(_leg_stage(f"{'Then' if i == 1 else 'And'} leg {n + i}"
                                     + (": rule false" if last else ""), leg, d, known))
    verdict = f"{doc['pack']['name']} / {rule.id}: bounded (holds up to {counted(doc['bound'], 'leg')})"
    note = ("Counterexample to induction: the rule holds at the first state and fails one leg "
            "later, so it is not proved for any number of legs. The first state need not be one "
            "a real run reaches: a lemma that excludes it may complete the proof.")
    return _draw(doc, rule, views[-1], stages, verdict,
                 f"Counterexample to induction of rule {rule.id}", (note,))


def _route_cti_stages(legs: list, views, lines0: list) -> list:
    """The stages of a route's counterexample to induction (DESIGN 4.10): every state's train
    in the frame of the last state's LRBG, each leg saying which group it found."""
    last = views[-1].snap.route

    def here(v, x):             # a position in v's LRBG frame, in the last one's
        rs = v.snap.route
        return last.frame * (rs.origin + rs.frame * x - last.origin)

    def known(v):
        return v.get("passage.seen").word != "unknown"

    def train(v):
        turn = last.frame * v.snap.route.frame
        return (here(v, v.get("actual.front")), turn * v.snap.orientation,
                here(v, v.get("est.front")) if known(v) else None)

    first = views[0]
    c, n, k0 = first.snap.count, first.snap.route.journey, first.snap.route.group
    stages = [(f"A state {c} leg{'s' if c != 1 else ''} after G{k0}'s detection (the LRBG)",
               lines0, *train(first))]
    for i, (leg, a, b) in enumerate(zip(legs, views, views[1:]), 1):
        k, _ = detection(a.snap, b.snap)
        event = "" if not k else (f": G{k} found, the LRBG now" if b.snap.route.group == k
                                  else f": G{k} found, not taken")
        what = ("cab change, then " if leg.cab_change else "") + leg.running.word
        motion = Direction.NOMINAL if last.frame * b.snap.route.frame * b.snap.motion == 1 else Direction.REVERSE
        stages.append((f"{'Then' if i == 1 else 'And'} leg {n + i}{event}"
                       + ("; rule false" if i == len(views) - 1 else ""),
                       [f"{what}, moving {motion.word}", f"real {m(leg.distance)}, odometer {m(leg.odometer)}"],
                       *train(b)))
    return stages


def _draw(doc: dict, rule: Rule, st, stages: list, verdict: str, what: str, notes=()) -> str:
    """The diagram over the stages of a train; ``st`` is the last state (its report)."""
    g = st.get
    w = getattr(st, "current", st.world)      # the current LRBG's group (G2 after relocation)
    others = st.other_groups() if hasattr(st, "other_groups") else []
    # a route (DESIGN 4.10) captions every other group with its place in the onboard's list
    route = is_route(st)
    arr = {a.group: a for a in arrivals(st)} if route else {}
    captions = {name: status(st, int(name[1:]), arr) for name, *_ in others} if route else {}
    uid = "d-" + _slug(f"{doc['pack']['name']}-{rule.id}" + ("-induction" if "depth" in doc else ""))
    placed = bool(g("rbc.placed"))

    positions = [F(0), w.offset, -w.locacc, w.locacc] + [o[1] for o in others]
    items = []          # trackside information (DESIGN 4.9): (id, real, where placed or None)
    for item in getattr(st.pack, "infos", ()):
        try:
            real = st.info_value(item.id, "real")
            where = st.info_value(item.id, "position") if st.info_value(item.id, "accepted") else None
        except (KeyError, IndexError):
            continue
        items.append((item.id, real, where))
        positions += [real] + ([where] if where is not None else [])
    for _, _, front, o, est in stages:
        positions += [front, front - o * w.length]
        if est is not None:
            positions.append(est)
    if placed:
        positions += [g("rbc.min_safe_front"), g("rbc.max_safe_front"), g("rbc.est_front"),
                      g("rbc.min_safe_rear")]
    positions += [g("actual.front"), g("actual.rear")]
    axis = Axis(positions)
    X = axis.x

    out: list[str] = []
    add = out.append
    y = F(0)

    # ---- header
    add(f'<defs><pattern id="{uid}-hatch" width="6" height="6" patternUnits="userSpaceOnUse" '
        f'patternTransform="rotate(45)"><line x1="0" y1="0" x2="0" y2="6" stroke="{GREY}" '
        f'stroke-width="1.4"/></pattern></defs>')
    add(_t(16, 26, _clip(verdict, 110), size=16, weight="bold"))
    add(_t(16, 46, _clip(rule.title, 130), size=12, fill=GREY))
    y = F(64)

    # ---- metre scale
    y_axis = y + 22
    add(_t(16, y_axis + 4, "metres, LRBG frame" if not others else
           f"metres, G{st.handover.group}'s frame", size=12, weight="bold"))
    add(f'<line x1="{P(X0)}" y1="{P(y_axis)}" x2="{P(X1)}" y2="{P(y_axis)}" stroke="{INK}" stroke-width="1"/>')
    for t in axis.ticks():
        add(f'<line x1="{P(X(t))}" y1="{P(y_axis - 4)}" x2="{P(X(t))}" y2="{P(y_axis + 4)}" stroke="{INK}" stroke-width="1"/>')
        add(_t(X(t), y_axis - 8, fmt(t), size=11, anchor="middle"))
    y = y_axis + 12

    # ---- the group
    y_grp = y + 26
    lrbg_name = "" if not others else f"G{st.handover.group}, "
    add(_t(16, y_grp - 4, f"The group ({lrbg_name}LRBG)", size=12, weight="bold"))
    add(_t(16, y_grp + 11, f"{w.balises} balise{'s' if w.balises != 1 else ''}, {w.read} read, "
                           f"{'linked' if w.linked else 'not linked'}", size=11))
    add(_t(16, y_grp + 25, f"Q_LOCACC {m(w.locacc)}", size=11))
    x_org = X(0)
    origin_top = y_grp - 14
    # balises: squares numbered by N_PIG, N_PIG 0 at the origin, the others on the nominal side
    pitch = 18
    for n in range(w.balises):
        bx = x_org + n * pitch - 6
        add(f'<rect x="{P(bx)}" y="{P(y_grp - 6)}" width="12" height="12" fill="#ffffff" '
            f'stroke="{INK}" stroke-width="1.4"/>')
        add(_t(bx + 6, y_grp + 4, str(n), size=9, anchor="middle"))
    # the nominal direction: an arrow above the group, from N_PIG 0 towards increasing N_PIG
    ya = y_grp - 15
    ax1 = x_org + max(40, (w.balises - 1) * pitch + 16)
    add(f'<line x1="{P(x_org)}" y1="{P(ya)}" x2="{P(ax1 - 8)}" y2="{P(ya)}" stroke="{INK}" stroke-width="1.6"/>')
    add(f'<path d="M{P(ax1)} {P(ya)} L{P(ax1 - 10)} {P(ya - 5)} L{P(ax1 - 10)} {P(ya + 5)} Z" fill="{INK}"/>')
    if ax1 + 4 + 7 * CHAR < WIDTH - 4:
        add(_t(ax1 + 4, ya + 4, "nominal", size=10))
    else:
        add(_t(x_org - 6, ya + 4, "nominal", size=10, anchor="end"))
    labels = []
    yb = y_grp + 14
    for name, xo, so, nb in others:
        # another group: its balises from its mark, numbered the way its own N_PIG increases;
        # on a route, a group out of the onboard's list has hollow, dashed balises
        xg = X(xo)
        listed = captions.get(name, "in the list") == "in the list"
        style = f'fill="{LIGHT}" stroke="{INK}" stroke-width="1.4"' if listed else \
            f'fill="#ffffff" stroke="{INK}" stroke-width="1.4" stroke-dasharray="3 2"'
        for n in range(nb):
            bx = xg + so * n * pitch - 6
            add(f'<rect x="{P(bx)}" y="{P(y_grp - 6)}" width="12" height="12" {style}/>')
            add(_t(bx + 6, y_grp + 4, str(n), size=9, anchor="middle"))
        ax2 = xg + so * max(40, (nb - 1) * pitch + 16)
        add(f'<line x1="{P(xg)}" y1="{P(ya)}" x2="{P(ax2 - so * 8)}" y2="{P(ya)}" stroke="{INK}" '
            f'stroke-width="1.6" stroke-dasharray="4 2"/>')
        add(f'<path d="M{P(ax2)} {P(ya)} L{P(ax2 - so * 10)} {P(ya - 5)} L{P(ax2 - so * 10)} {P(ya + 5)} Z" fill="{INK}"/>')
        labels.append((xg, f"{name} at {m(xo)}, nominal {'to the right' if so > 0 else 'to the left'}"
                           + (f"; {captions[name]}" if name in captions else "")))
    for iid, real, where in items:
        # an information item: a flag where it really is, a hollow one where the onboard puts it
        xr = X(real)
        add(_flag(xr, y_grp, INK))
        labels.append((xr, f"{iid} {m(real)}"))
        if where is not None and where != real:
            xp = X(where)
            add(_flag(xp, y_grp, "#ffffff"))
            labels.append((xp, f"{iid} placed at {m(where)}"))
    if w.locacc:
        # location accuracy: a bracket from -locacc to +locacc below the balises
        add(f'<path d="M{P(X(-w.locacc))} {P(yb - 5)} V{P(yb)} H{P(X(w.locacc))} V{P(yb - 5)}" '
            f'fill="none" stroke="{GREY}" stroke-width="1.2"/>')
        labels.append((x_org, f"Q_LOCACC ± {m(w.locacc)}"))
    if w.offset:
        xm = X(w.offset)
        add(f'<path d="M{P(xm)} {P(yb)} L{P(xm - 5)} {P(yb + 8)} L{P(xm + 5)} {P(yb + 8)} Z" '
            f'fill="#ffffff" stroke="{INK}" stroke-width="1.2"/>')
        labels.append((xm, f"real mark {m(w.offset)}"))
    deepest = -1
    for lx, level, text in _label_layout(labels, X0 - 10, WIDTH - 4):
        add(_t(lx, yb + 20 + 12 * level, text, size=10, anchor="middle", fill=GREY if text.startswith("Q_") else INK))
        deepest = max(deepest, level)
    y = yb + 20 + 12 * deepest + 16

    # ---- the train, stage by stage
    for title, details, front, o, est in stages:
        y_bar = y + 14
        rear = front - o * w.length
        xa, xb = sorted((X(front), X(rear)))
        add(_t(16, y_bar - 1, title, size=12, weight="bold"))
        for k, line in enumerate(details):
            add(_t(16, y_bar + 13 + 13 * k, line, size=11))
        add(f'<rect x="{P(xa)}" y="{P(y_bar - 6)}" width="{P(max(xb - xa, 1))}" height="12" '
            f'fill="{LIGHT}" stroke="{INK}" stroke-width="1"/>')
        xf = X(front)
        add(f'<path d="M{P(xf)} {P(y_bar)} L{P(xf - o * 11)} {P(y_bar - 8)} L{P(xf - o * 11)} {P(y_bar + 8)} Z" fill="{INK}"/>')
        labels = [(xf, f"front {m(front)}")]
        if est is not None:
            xe = X(est)
            add(_diamond(xe, y_bar - 14))
            if est == front:
                labels = [(xf, f"front = est. {m(front)}")]
            else:
                labels.append((xe, f"est. {m(est)}"))
        levels = _label_layout(labels, X0 - 10, WIDTH - 4)
        deepest = 0
        for lx, level, text in levels:
            add(_t(lx, y_bar + 22 + 13 * level, text, size=11, anchor="middle"))
            deepest = max(deepest, level)
        y = y_bar + max(22 + 13 * deepest, 13 * len(details)) + 18
    y_last_stage = y

    # ---- the trackside row
    y_rep = y + 18
    add(_t(16, y_rep - 1, "Trackside view", size=12, weight="bold"))
    real = g("actual.front")
    if placed:
        lo, hi = g("rbc.min_safe_front"), g("rbc.max_safe_front")
        a, b = X(min(lo, hi)), X(max(lo, hi))
        add(_t(16, y_rep + 13, "reported interval,", size=11))
        add(_t(16, y_rep + 26, "real front", size=11))
        # the orientation the report sends, beside the real one: an orientation error is
        # otherwise invisible in the picture (the interval is drawn along the sent orientation)
        sent, true = g("report.q_dirlrbg").word, g("actual.orientation").word
        add(_t(16, y_rep + 39, f"sent Q_DIRLRBG: {sent}", size=11,
               weight="bold" if sent != true else None))
        add(_t(16, y_rep + 52, f"real orientation: {true}", size=11))
        # the whole train as the trackside places it: min safe rear end to max safe front end,
        # dashed, behind the interval (min safe rear end: SUBSET-026 3.6.1.7, per docs/facts.md)
        rear_safe = g("rbc.min_safe_rear")
        wa, wb = X(min(rear_safe, lo, hi)), X(max(rear_safe, lo, hi))
        add(f'<rect x="{P(wa)}" y="{P(y_rep - 13)}" width="{P(max(wb - wa, 1))}" height="26" '
            f'fill="none" stroke="{INK}" stroke-width="1" stroke-dasharray="5 3"/>')
        add(f'<rect x="{P(a)}" y="{P(y_rep - 9)}" width="{P(max(b - a, 1))}" height="18" '
            f'fill="url(#{uid}-hatch)" stroke="{INK}" stroke-width="1.2"/>')
        for xv in (a, b):
            add(f'<line x1="{P(xv)}" y1="{P(y_rep - 14)}" x2="{P(xv)}" y2="{P(y_rep + 14)}" stroke="{INK}" stroke-width="2"/>')
        xe = X(g("rbc.est_front"))
        add(_diamond(xe, y_rep))
        labels = [(X(lo), f"min safe front {m(lo)}"), (X(hi), f"max safe front {m(hi)}"),
                  (xe, f"est. {m(g('rbc.est_front'))}"), (X(rear_safe), f"min safe rear {m(rear_safe)}")]
    else:
        add(_t(16, y_rep + 13, "no interval,", size=11))     # as the placed row: what is drawn
        add(_t(16, y_rep + 26, "real front", size=11))
        add(_t(X0, y_rep + 4, "The report does not place the train (a code is 32767 or a qualifier "
                              "unknown).", size=11, italic=True))
        labels = []
    xr = X(real)
    add(f'<line x1="{P(xr)}" y1="{P(y_rep - 18)}" x2="{P(xr)}" y2="{P(y_rep + 18)}" '
        f'stroke="{INK}" stroke-width="3"/>')
    add(f'<circle cx="{P(xr)}" cy="{P(y_rep)}" r="4.5" fill="#ffffff" stroke="{INK}" stroke-width="2"/>')
    labels.append((xr, f"real front {m(real)}"))
    real_rear = g("actual.rear")
    xrr = X(real_rear)
    add(f'<line x1="{P(xrr)}" y1="{P(y_rep - 18)}" x2="{P(xrr)}" y2="{P(y_rep + 18)}" '
        f'stroke="{INK}" stroke-width="1.5"/>')
    add(f'<rect x="{P(xrr - 4)}" y="{P(y_rep - 4)}" width="8" height="8" fill="#ffffff" '
        f'stroke="{INK}" stroke-width="1.5"/>')
    labels.append((xrr, f"real rear {m(real_rear)}"))
    deepest = 0
    for lx, level, text in _label_layout(labels, X0 - 10, WIDTH - 4):
        bold = "bold" if text.startswith("real front") else None
        add(_t(lx, y_rep + 30 + 13 * level, text, size=11, anchor="middle", weight=bold))
        deepest = max(deepest, level)
    y = y_rep + 30 + 13 * deepest + 14

    # ---- the verdict in words
    fd = failed_detail(rule, st)
    lines = list(notes)
    if placed:
        lines.append(interval_words(real, g("rbc.min_safe_front"), g("rbc.max_safe_front")))
        whole = whole_train_words(g("actual.rear"), real, g("rbc.min_safe_rear"), g("rbc.max_safe_front"))
        if whole:
            lines.append(whole)
    if fd and "op" in fd:
        lines.append(f"Failed: {comparison_words(fd)}.")
    elif fd:
        lines.append(f"Failed: {fd['text']} is false.")
    k = 0
    for line in lines:
        failed = line.startswith("Failed")
        for part in _wrap(line, 128):
            add(_t(16, y + 14 + 17 * k, part, size=12, weight="bold" if failed else None,
                   fill=ACCENT if failed else INK))
            k += 1
    y = y + 14 + 17 * k

    # ---- the magnified inset
    if fd and "op" in fd:
        (lt, lv, lty), (rt, rv, rty) = fd["left"], fd["right"]
        if LENGTH in (lty, rty) and isinstance(lv, F) and isinstance(rv, F) \
                and abs(lv - rv) < INSET_SHARE * axis.span:
            y = _inset(out, uid, axis, (lt, lv), (rt, rv), fd["op"], y + 10,
                       link=(y_rep if all(v in positions for v in (lv, rv)) else None))

    # ---- legend
    y = _legend(out, uid, y + 16, other=bool(others), items=bool(items),
                unlisted=any(c != "in the list" for c in captions.values()))
    # the origin, dotted, through the group and train rows
    out.insert(0, f'<line x1="{P(x_org)}" y1="{P(origin_top)}" x2="{P(x_org)}" y2="{P(y_last_stage)}" '
                  f'stroke="{GREY}" stroke-width="1" stroke-dasharray="2 3"/>')
    height = y + 12
    desc = f"{what} of pack {doc['pack']['name']}: " + " ".join(lines)
    head = (f'<svg xmlns="http://www.w3.org/2000/svg" class="cex-diagram" id="{uid}" width="{WIDTH}" '
            f'height="{P(height)}" viewBox="0 0 {WIDTH} {P(height)}" role="img" '
            f'aria-labelledby="{uid}-title {uid}-desc" font-family="{FONT}">\n'
            f'<title id="{uid}-title">{escape(verdict, quote=False)}</title>\n'
            f'<desc id="{uid}-desc">{escape(desc, quote=False)}</desc>\n'
            f'<rect x="0" y="0" width="{WIDTH}" height="{P(height)}" fill="#ffffff"/>')
    # control characters from any source (a file name, a title) would make the SVG invalid XML
    return visible(head + "\n" + "\n".join(out) + "\n</svg>\n", keep="\n\t")


def _wrap(text: str, n: int) -> list:
    words, lines, cur = text.split(" "), [], ""
    for word in words:
        if cur and len(cur) + 1 + len(word) > n:
            lines.append(cur)
            cur = "  " + word
        else:
            cur = f"{cur} {word}" if cur else word
    return lines + [cur]


def _clip(text: str, n: int) -> str:
    return text if len(text) <= n else text[: n - 3] + "..."


def _diamond(x, y, r=5) -> str:
    return (f'<path d="M{P(x)} {P(y - r)} L{P(x + r)} {P(y)} L{P(x)} {P(y + r)} L{P(x - r)} {P(y)} Z" '
            f'fill="#ffffff" stroke="{INK}" stroke-width="1.6"/>')


def _inset(out, uid, axis: Axis, left, right, op, y, link):
    """A box with its own scale around the two sides of the deciding comparison."""
    (lt, lv), (rt, rv) = left, right
    mid = (lv + rv) / 2
    half = max(abs(lv - rv) * 2, F(5, 1000))
    sub = Axis([mid - half, mid + half], x0=X0 + 40, x1=X1 - 40, pad_min=F(0))
    box_top = y
    body: list = []
    ya = box_top + 52
    body.append(f'<line x1="{P(sub.x0)}" y1="{P(ya)}" x2="{P(sub.x1)}" y2="{P(ya)}" stroke="{INK}" stroke-width="1"/>')
    for t in sub.ticks():
        body.append(f'<line x1="{P(sub.x(t))}" y1="{P(ya - 3)}" x2="{P(sub.x(t))}" y2="{P(ya + 3)}" stroke="{INK}" stroke-width="1"/>')
        body.append(_t(sub.x(t), ya + 16, fmt(t), size=10, anchor="middle", fill=GREY))
    xl, xr = sub.x(lv), sub.x(rv)
    for xv in (xl, xr):
        body.append(f'<line x1="{P(xv)}" y1="{P(ya - 22)}" x2="{P(xv)}" y2="{P(ya + 6)}" stroke="{INK}" stroke-width="2.5"/>')
    if xl != xr:
        a, b = sorted((xl, xr))
        yy = ya - 14
        body.append(f'<line x1="{P(a + 7)}" y1="{P(yy)}" x2="{P(b - 7)}" y2="{P(yy)}" stroke="{INK}" stroke-width="1.2"/>')
        body.append(f'<path d="M{P(a + 1)} {P(yy)} L{P(a + 8)} {P(yy - 4)} L{P(a + 8)} {P(yy + 4)} Z" fill="{INK}"/>')
        body.append(f'<path d="M{P(b - 1)} {P(yy)} L{P(b - 8)} {P(yy - 4)} L{P(b - 8)} {P(yy + 4)} Z" fill="{INK}"/>')
        body.append(_t((a + b) / 2, yy - 6, m(abs(lv - rv)), size=11, anchor="middle", weight="bold"))
    labels = [(xl, f"{lt} = {m(lv)}"), (xr, f"{rt} = {m(rv)}")] if xl != xr else [(xl, f"{lt} = {rt} = {m(lv)}")]
    deepest = 0
    for lx, level, text in _label_layout(labels, X0 + 4, X1 - 4):
        body.append(_t(lx, ya + 32 + 13 * level, text, size=11, anchor="middle"))
        deepest = max(deepest, level)
    h = 52 + 32 + 13 * deepest + 12
    out.append(f'<rect x="{P(X0)}" y="{P(box_top)}" width="{P(X1 - X0)}" height="{P(h)}" fill="#ffffff" '
               f'stroke="{INK}" stroke-width="1" stroke-dasharray="5 3"/>')
    out.extend(body)
    out.append(_t(16, box_top + 16, "Magnified", size=12, weight="bold"))
    out.append(_t(16, box_top + 30, f"the deciding margin, {m(abs(lv - rv))},", size=11))
    out.append(_t(16, box_top + 43, "is under 1 % of the axis", size=11))
    out.append(_t(X0 + 8, box_top + 16, f"required: {lt} {op} {rt}; found {m(lv)} and {m(rv)}", size=11))
    if link is not None:
        out.append(_t(16, box_top + 56, "(dashed frame above)", size=11, fill=GREY))
        xa = axis.x(mid) - 7
        out.append(f'<rect x="{P(xa)}" y="{P(link - 18)}" width="14" height="36" fill="none" '
                   f'stroke="{INK}" stroke-width="1" stroke-dasharray="3 2"/>')
    return box_top + h


def _flag(x, y_grp, fill: str) -> str:
    return (f'<path d="M{P(x)} {P(y_grp + 8)} V{P(y_grp - 12)} L{P(x + 9)} {P(y_grp - 8)} L{P(x)} {P(y_grp - 4)}" '
            f'fill="{fill}" stroke="{INK}" stroke-width="1.2"/>')


def _legend(out, uid, y, other: bool = False, items: bool = False, unlisted: bool = False):
    """The legend; the shapes of a second group, of a group out of the onboard's list and of
    information items only where they are drawn (a one-group drawing keeps its legend, and its
    files their bytes)."""
    out.append(_t(16, y + 12, "Legend", size=12, weight="bold"))
    shapes = [
        ("bar", "real train (rear to front); black wedge = active front end"),
        ("diamond", "estimated front (onboard, or trackside in the last row)"),
        ("hatch", "reported interval: min safe front to max safe front"),
        ("real", "real front at the end"),
        ("whole", "trackside's whole train: min safe rear to max safe front"),
        ("rear", "real rear at the end"),
        ("balise", "balise, numbered by N_PIG (spacing not to scale)"),
        ("arrow", "the group's nominal direction (N_PIG increasing)"),
        ("origin", "origin: engineered location of balise N_PIG 0"),
    ]
    if other:
        shapes += [("other", "the other group; dashed: its nominal direction" if not unlisted else
                    "a group in the onboard's list; dashed: its direction")]
    if unlisted:
        shapes += [("unlisted", "a group not in the onboard's list (left it, rejected, unseen)")]
    if items:
        shapes += [("flag", "information item where it really is"),
                   ("hollow", "information item where the onboard places it")]
    col_w = (X1 - X0) // 2
    for k, (shape, text) in enumerate(shapes):
        cx = X0 + (k % 2) * col_w
        cy = y + 12 + (k // 2) * 20
        if shape == "bar":
            out.append(f'<rect x="{cx}" y="{cy - 6}" width="34" height="12" fill="{LIGHT}" stroke="{INK}"/>')
            out.append(f'<path d="M{cx + 34} {cy} L{cx + 23} {cy - 8} L{cx + 23} {cy + 8} Z" fill="{INK}"/>')
        elif shape == "diamond":
            out.append(_diamond(cx + 17, cy))
        elif shape == "hatch":
            out.append(f'<rect x="{cx}" y="{cy - 8}" width="34" height="16" fill="url(#{uid}-hatch)" stroke="{INK}" stroke-width="1.2"/>')
        elif shape == "real":
            out.append(f'<line x1="{cx + 17}" y1="{cy - 9}" x2="{cx + 17}" y2="{cy + 9}" stroke="{INK}" stroke-width="3"/>')
            out.append(f'<circle cx="{cx + 17}" cy="{cy}" r="4.5" fill="#ffffff" stroke="{INK}" stroke-width="2"/>')
        elif shape == "rear":
            out.append(f'<line x1="{cx + 17}" y1="{cy - 9}" x2="{cx + 17}" y2="{cy + 9}" stroke="{INK}" stroke-width="1.5"/>')
            out.append(f'<rect x="{cx + 13}" y="{cy - 4}" width="8" height="8" fill="#ffffff" stroke="{INK}" stroke-width="1.5"/>')
        elif shape == "whole":
            out.append(f'<rect x="{cx}" y="{cy - 9}" width="34" height="18" fill="none" stroke="{INK}" stroke-dasharray="5 3"/>')
        elif shape == "balise":
            out.append(f'<rect x="{cx + 11}" y="{cy - 6}" width="12" height="12" fill="#ffffff" stroke="{INK}" stroke-width="1.4"/>')
            out.append(_t(cx + 17, cy + 4, "0", size=9, anchor="middle"))
        elif shape == "arrow":
            out.append(f'<line x1="{cx}" y1="{cy}" x2="{cx + 26}" y2="{cy}" stroke="{INK}" stroke-width="1.6"/>')
            out.append(f'<path d="M{cx + 34} {cy} L{cx + 24} {cy - 5} L{cx + 24} {cy + 5} Z" fill="{INK}"/>')
        elif shape == "other":
            out.append(f'<rect x="{cx + 1}" y="{cy - 6}" width="12" height="12" fill="{LIGHT}" stroke="{INK}" stroke-width="1.4"/>')
            out.append(f'<line x1="{cx + 16}" y1="{cy}" x2="{cx + 27}" y2="{cy}" stroke="{INK}" stroke-width="1.6" stroke-dasharray="4 2"/>')
            out.append(f'<path d="M{cx + 34} {cy} L{cx + 26} {cy - 5} L{cx + 26} {cy + 5} Z" fill="{INK}"/>')
        elif shape == "unlisted":
            out.append(f'<rect x="{cx + 1}" y="{cy - 6}" width="12" height="12" fill="#ffffff" stroke="{INK}" '
                       f'stroke-width="1.4" stroke-dasharray="3 2"/>')
        elif shape in ("flag", "hollow"):
            out.append(_flag(cx + 14, cy + 2, INK if shape == "flag" else "#ffffff"))
        else:
            out.append(f'<line x1="{cx + 17}" y1="{cy - 9}" x2="{cx + 17}" y2="{cy + 9}" stroke="{GREY}" stroke-dasharray="2 3"/>')
        out.append(_t(cx + 44, cy + 4, text, size=11))
    return y + 12 + ((len(shapes) + 1) // 2) * 20


def svg_path(json_path: Path) -> Path:
    return json_path.with_suffix(".svg")


def write_induction_beside(json_path: Path, doc: dict, rule: Rule, views) -> Path:
    """Write the diagram of a counterexample to induction next to its file."""
    target = svg_path(Path(json_path))
    cexfile.write_atomic(target, render_induction(doc, rule, views))
    return target


def write_beside(json_path: Path, doc: dict, rule: Rule, st: State) -> Path:
    """Write the diagram next to its counterexample file (same name, .svg)."""
    target = svg_path(Path(json_path))
    cexfile.write_atomic(target, render(doc, rule, st))
    return target
