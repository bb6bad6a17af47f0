"""Plain-text views of one world (``verifier simulate``)."""

from __future__ import annotations

from verifier.check.model import Pack
from verifier.evidence.route import arrivals, group_list, how_words, is_route
from verifier.evidence.story import unknown_code_words, unplaced_words
from verifier.lang.numbers import counted
from verifier.lang.vocab import Direction
from verifier.world.failure import describe_failure, failed_detail
from verifier.world.scenario import fmt
from verifier.world.sim import State, World, applies, evaluate, known, scope_problems


def _m(x) -> str:
    return f"{fmt(x)} m"


def simulate_text(pack: Pack, world: World, legs: int | None = None) -> tuple[str, bool]:
    """The story of one world under one pack, and whether every rule holds in it."""
    st = State(pack, world)
    g = st.get
    out = []
    bound = legs if legs is not None else max(pack.legs, len(world.legs))
    problems = scope_problems(world, pack.scope, bound)
    if problems:
        out.append("warning: this world is outside the pack's scope: " + "; ".join(problems))
    two = world.g2 is not None
    out.append(f"group{' G1' if two else ''}: {counted(world.balises, 'balise')}, {world.read} read, "
               f"{'linked' if world.linked else 'not linked'}, location accuracy {_m(world.locacc)}, "
               f"real reference mark {_m(world.offset)} from its engineered place")
    out.append(f"train: length {_m(world.length)}, antenna {_m(world.antenna)} behind the front")
    seen = (world.direction.word if known(world) else "unknown") if two else g("passage.seen").word
    out.append(f"passage{' over G1' if two else ''}: moving {world.direction.word}, {world.running.word} "
               f"({'front' if world.running.word == 'forward' else 'rear'} first), detection error "
               f"{_m(world.detect_error)}; onboard sees the passage as {seen}")
    if not two:
        for i, (leg, d) in enumerate(zip(world.legs, st.legs), 1):
            out.append(_leg_line(i, leg, d, ""))
    else:
        out += _second_group_lines(st)
    if st.handover.accepted:
        out.append(f"positions below: G{st.handover.group}'s frame (from its mark, positive in its nominal direction)")
    out.append(f"real:      front {_m(g('actual.front'))}, rear {_m(g('actual.rear'))}, orientation "
               f"{g('actual.orientation').word}, last motion {g('actual.motion').word}")
    out.append(f"estimate:  front {_m(g('est.front'))}, orientation {g('est.orientation').word}, "
               f"motion {g('est.motion').word}, travelled {_m(g('est.travelled'))}")
    out.append(f"onboard:   d_lrbg {_m(g('est.d_lrbg'))}, l_doubtover {_m(g('est.l_doubtover'))}, "
               f"l_doubtunder {_m(g('est.l_doubtunder'))}")
    code = lambda n: int(g(f"report.code.{n}"))  # noqa: E731
    out.append(f"report:    Q_SCALE {code('q_scale')} ({_m(g('report.q_scale'))}), D_LRBG {code('d_lrbg')}, "
               f"Q_DIRLRBG {code('q_dirlrbg')}, Q_DLRBG {code('q_dlrbg')}, L_DOUBTOVER {code('l_doubtover')}, "
               f"L_DOUBTUNDER {code('l_doubtunder')}, Q_DIRTRAIN {code('q_dirtrain')}"
               f"{'' if g('report.in_range') else f'; {unknown_code_words(st)}'}")
    for item in pack.infos:
        v = lambda f: st.info_value(item.id, f)  # noqa: E731
        out.append(f"info {item.id}: " + (f"accepted, placed at {_m(v('position'))}" if v("accepted")
                                           else "not accepted") + f"; really at {_m(v('real'))}")
    if g("rbc.placed"):
        out.append(f"trackside: estimated front {_m(g('rbc.est_front'))}, min safe front "
                   f"{_m(g('rbc.min_safe_front'))}, max safe front {_m(g('rbc.max_safe_front'))}, "
                   f"min safe rear {_m(g('rbc.min_safe_rear'))} (the max safe front lies ahead in "
                   f"the train's orientation, {g('report.q_dirlrbg').word})")
    else:
        out.append(f"trackside: the report does not place the train: {unplaced_words(st)}")
    ok = True
    out.append("rules:")
    for rule in pack.rules:
        if len(world.legs) < rule.premise_legs or not applies(rule, st):
            out.append(f"  does not apply  {rule.id}")
            continue
        if evaluate(rule.expect.node, st, {}):
            out.append(f"  holds           {rule.id}")
            continue
        ok = False
        out.append(f"  VIOLATED        {rule.id}: {describe_failure(failed_detail(rule, st))}")
    return "\n".join(out), ok


def _leg_line(i: int, leg, d: dict, frame: str) -> str:
    return (f"leg {i}: {'cab change, then ' if leg.cab_change else ''}{leg.running.word}, "
            f"real {_m(leg.distance)}, measured {_m(leg.odometer)}; real front {_m(d['actual_front'])}, "
            f"estimated {_m(d['est_front'])}{frame}")


def _second_group_lines(st: State) -> list[str]:
    """The later groups (DESIGN 4.8, 4.10), then every leg of the journey in the frame of the
    group that was the LRBG during it, and each hand-over where it happens."""
    route = is_route(st)
    arr = {a.group: a for a in arrivals(st)}
    out = [_group_line(st, k, arr[k], route) for k in arr]
    for i, (leg, d, group) in enumerate(st.journey_raw(), 1):
        out.append(_leg_line(i, leg, d, f" (G{group}'s frame)"))
        for a in arr.values():
            if a.found and a.at == i:
                out += _arrival_lines(a, route)
    return out


def _group_line(st: State, k: int, a, route: bool) -> str:
    """One later group: where it lies (from the group before it), what it is, what came of it."""
    world, g = st.world, st.world.route[k - 2]
    found = f"found at the end of leg {g.at}" if g.found else "not found"
    if g.found and g.linked and (a.linking if route else known(world)):
        found += ", inside its window" if st.get(f"g{k}.in_window") else ", outside its window"
    if route:
        used = (f"it becomes the LRBG ({how_words(a)})" if a.accepted else
                f"rejected: {how_words(a)}" if g.found else
                f"the train passed it unseen in leg {a.unseen_at}" if a.unseen_at else "")
    else:
        used = ("it becomes the LRBG" if st.handover.accepted else
                "not used: the report stays relative to G1" if g.found else "")
    return (f"group G{k}: mark {_m(g.distance)} from G{k - 1}'s on G1's {g.side.word} side, faces "
            f"{'the same way as G1' if g.orientation is Direction.NOMINAL else 'the other way'}, "
            f"{counted(g.balises, 'balise')}, {g.read} read, {'linked' if g.linked else 'not linked'}, "
            f"location accuracy {_m(g.locacc)}, real reference mark {_m(g.offset)} from its "
            f"engineered place, detection error {_m(g.detect_error)}; {found}"
            + (f"; {used}" if used else ""))


def _arrival_lines(a, route: bool) -> list[str]:
    """What happens where a later group is found: a hand-over (with the list after it on a
    route) or, on a route, a rejection (a two-group world keeps its pre-route wording)."""
    k, i = a.group, a.at
    if not route:
        return ([f"  G{k} becomes the LRBG at the end of leg {i}; the legs after it are counted from G{k}"]
                if a.accepted else [])
    if not a.accepted:
        return [f"  G{k} is found at the end of leg {i} and rejected ({how_words(a)}); the LRBG stays G{a.before}"]
    left = f"; {group_list(a.left)} left it" if a.left else ""
    return [f"  G{k} takes over from G{a.before} as the LRBG at the end of leg {i} ({how_words(a)}); "
            f"the legs after it are counted from G{k}",
            f"  the onboard's list of LRBGs: {group_list(a.history)}{left}"]
