"""Plain-text views of one world (``verifier simulate``)."""

from __future__ import annotations

from verifier.check.model import Pack
from verifier.evidence.cexfile import failed_detail
from verifier.world.scenario import fmt
from verifier.world.sim import State, World, applies, evaluate, scope_problems


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
    out.append(f"group: {world.balises} balise(s), {world.read} read, "
               f"{'linked' if world.linked else 'not linked'}, location accuracy {_m(world.locacc)}, "
               f"real reference mark {_m(world.offset)} from its engineered place")
    out.append(f"train: length {_m(world.length)}, antenna {_m(world.antenna)} behind the front")
    out.append(f"passage: moving {world.direction.word}, {world.running.word} "
               f"({'front' if world.running.word == 'forward' else 'rear'} first), detection error "
               f"{_m(world.detect_error)}; onboard sees the passage as {g('passage.seen').word}")
    for i, (leg, d) in enumerate(zip(world.legs, st.legs), 1):
        out.append(f"leg {i}: {'cab change, then ' if leg.cab_change else ''}{leg.running.word}, "
                   f"real {_m(leg.distance)}, measured {_m(leg.odometer)}; real front {_m(d['actual_front'])}, "
                   f"estimated {_m(d['est_front'])}")
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
               f"{'' if g('report.in_range') else '  (out of range)'}")
    if g("rbc.placed"):
        out.append(f"trackside: estimated front {_m(g('rbc.est_front'))}, safe front interval "
                   f"[{_m(g('rbc.min_safe_front'))}, {_m(g('rbc.max_safe_front'))}], min safe rear "
                   f"{_m(g('rbc.min_safe_rear'))}")
    else:
        out.append("trackside: the report does not place the train (a code is 32767 or a qualifier unknown)")
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
        from verifier.engine import describe_failure
        out.append(f"  VIOLATED        {rule.id}: {describe_failure(failed_detail(rule, st))}")
    return "\n".join(out), ok
