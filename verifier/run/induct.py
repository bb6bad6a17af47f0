"""Rules for any number of legs (DESIGN 4.7): the induction step after the bounded base case,
lemmas first, counterexamples to induction replayed in the simulator and written as files.

A rule checked with ``legs = "any"`` first gets today's bounded verdict up to B legs (the base
case, B >= depth - 1). Only when that holds is the step asked, at depth k = 1, 2, ... up to the
induction depth, strengthened by every lemma of the pack already proved for any number of legs
(lemmas are proved in file order, each with the ones before it). The verdict is then ``holds``
for any number of legs, or ``bounded`` (it holds up to B legs; not proved for any number) with
the counterexample to induction of the deepest step tried, never ``holds`` by default.
"""

from __future__ import annotations

import time
from fractions import Fraction

import attrs

from verifier.check.model import Formula, Pack, Rule
from verifier.check.unbounded import Plan, plan_for, rule_formulas
from verifier.lang.ast import BOOL, BoolLit
from verifier.lang.pack import MAX_LEGS
from verifier.run.cache import induction_key
from verifier.smt import induction, solve
from verifier.smt.solve import DEFAULT_RLIMIT
from verifier.world.scenario import legs_from_flat, snapshot_from_flat
from verifier.world.sim import SnapView, advance, advance_route, applies, evaluate, holds, snapshot_problems

DEFAULT_DEPTH = 4
MAX_DEPTH = 8
DEFAULT_MAX_LEGS = 12     # --max-legs: the deepest base case tried before "bounded"
MAX_MAX_LEGS = 32
DEEPENING_SHARE = 20      # deepening spends at most 1/20 of one check's rlimit in all


@attrs.frozen
class Replayed:
    """A counterexample to induction as the simulator sees it."""

    views: tuple              # SnapView of s0 .. sk
    problems: tuple           # why it is not a counterexample to induction (empty: it is)


def rule_rlimit(rlimit: int | None) -> int:
    """The deterministic budget of one solver check (``--rlimit``, or the default)."""
    if rlimit is not None:
        return rlimit
    return DEFAULT_RLIMIT


def deepening_budget(rlimit: int | None) -> int:
    """What the deepening of one rule's base case may spend in all (z3's deterministic
    resource count): a twentieth of one check's budget (25 M of the default 500 M), so that
    the deepened bound a rule reaches is the same on every machine (the wall-clock
    ``--timeout`` of the rule stays the guard). Measured on the shipped
    automatic-step-stays-in-range (3 December 2026): 4 to 8 legs take 22.6 M and 2.3 s of CPU,
    9 legs 18.8 M more, 11 legs alone 243 M (29 s), 12 legs 166 M (14 s); since the deepened
    checks assume the pack's proved lemmas (5 December 2026), 4 to 12 legs fit in the 25 M."""
    return rule_rlimit(rlimit) // DEEPENING_SHARE


def not_given(rule: Rule) -> Rule:
    """"The given never holds" as a rule of its own: the same given (with its implicit
    premise) and ``expect = false``. Proved for any number of legs, the rule is vacuous for any
    number of legs (DESIGN 4.7)."""
    false = Formula(f"{rule.role} {rule.id} never given", "false", BoolLit(False, ty=BOOL),
                    rule.expect.key)
    return attrs.evolve(rule, expect=false)


def plan_with_lemmas(pack: Pack, rule: Rule, lemmas) -> Plan:
    formulas = rule_formulas(rule)
    for lemma in lemmas:
        formulas += rule_formulas(lemma)
    return plan_for(pack, formulas)


def base_bound(pack: Pack, rule: Rule, legs, depth: int) -> int:
    """The bound of the bounded check: for a rule proved for any number of legs, at least
    depth - 1 (the base case of k-induction) and at least the highest legs[i] it names."""
    bound = pack.bound_for(rule, legs)
    if pack.unbounded_for(rule, legs):
        bound = min(MAX_LEGS, max(bound, depth - 1, rule.premise_legs))
    return bound


def replay(pack: Pack, rule: Rule, lemmas, plan: Plan, cti: dict) -> Replayed:
    """Run a counterexample to induction (solver data: world, state, legs) step by step in the
    simulator (see :func:`replay_states`)."""
    try:
        snap = snapshot_from_flat(cti["world"], cti["state"], plan, cti.get("current"),
                                  pack.scope.history)
    except (KeyError, ValueError, TypeError) as exc:
        return Replayed((), (f"the state cannot be read: {exc}",))
    return replay_states(pack, rule, lemmas, plan, snap, legs_from_flat(cti["legs"]),
                         detections_from_flat(cti["legs"]))


def detections_from_flat(legs: list) -> tuple:
    """Per leg of a route's path: (the group found at its end, 0 for none; its detection error)."""
    return tuple((int(x.get("found", 0)), Fraction(x.get("detect_error", 0))) for x in legs)


def replay_states(pack: Pack, rule: Rule, lemmas, plan: Plan, snap, legs, detections=()) -> Replayed:
    """From state ``snap``, run ``legs`` in the simulator: the state must be in the domain of
    states, every leg in scope, the rule true at s0 .. s(k-1) and false at sk, every lemma
    true throughout. ``problems`` says what is not so. A route's legs each come with a
    detection (``detections``: the group found at its end, 0 for none, and its error)."""
    problems = [f"s0: {p}" for p in snapshot_problems(snap, pack.scope, plan)]
    views = [SnapView(pack, snap, plan)]
    scope = pack.scope
    for i, leg in enumerate(legs, 1):
        if not scope.leg_distance[0] <= leg.distance <= scope.leg_distance[1] or leg.odometer < 0:
            problems.append(f"leg {i} outside the scope")
        if snap.route is not None:
            found, det = detections[i - 1] if i <= len(detections) else (0, Fraction(0))
            snap, _, wrong = advance_route(snap, leg, found, det, scope, pack, plan)
            problems += wrong
        else:
            snap, _ = advance(snap, leg, pack, plan)
        basis = snap.measured if scope.odometry_basis == "measured" else snap.travelled
        d = 0 if scope.detection_in_odometry else snap.world.detect_error   # on top of the bound (DESIGN 4.1)
        if snap.over > scope.odometry_over.at(basis) + max(0, -d) or snap.under > scope.odometry_under.at(basis) + max(0, d):
            problems.append(f"the reading error after leg {i} exceeds its bound")
        views.append(SnapView(pack, snap, plan))
    try:
        for i, v in enumerate(views):
            for lemma in lemmas:
                if not holds(lemma, v):
                    problems.append(f"lemma {lemma.id} is false at s{i}")
            if i < len(views) - 1 and not holds(rule, v):
                problems.append(f"the rule is false at s{i}, before the last state")
        if holds(rule, views[-1]):
            problems.append(f"the rule holds at s{len(views) - 1}")
    except (KeyError, IndexError, ZeroDivisionError) as exc:
        problems.append(f"the simulator failed: {exc!r}")
    return Replayed(tuple(views), tuple(problems))


def compare_values(pack: Pack, plan: Plan, cti: dict, views, rule: Rule) -> list[str]:
    """Names on which the encoding and the simulator disagree at some state of the path."""
    names = [n for n in solve.COMPARED]
    enc = induction.evaluate_path(pack, plan, cti, names, (rule,))
    if enc is None:
        return ["the encoding rejects the path (outside its domain or scope)"]
    out = []
    for i, (values, view) in enumerate(zip(enc, views)):
        for n in names:
            sv, mv = values[n], view.get(n)
            mv = mv.word if hasattr(mv, "word") else mv
            if sv != mv:
                out.append(f"s{i} {n}: solver {sv}, simulator {mv}")
        for part, want in (("given", applies(rule, view)),
                           ("expect", bool(evaluate(rule.expect.node, view, {})))):
            got = values[f"rule:{rule.id}:{part}"]   # the given with its implicit premise, as applies()
            if got != want:
                out.append(f"s{i} {part}: solver {got}, simulator {want}")
    return out


@attrs.frozen
class Outcome:
    """How the proof for any number of legs went (plain data for the engine)."""

    verdict: str              # holds (any number) or bounded
    proof: dict
    message: str = ""
    cti: dict | None = None   # the solver's counterexample to induction, replayed
    views: tuple = ()
    minimal: bool = True
    seconds: float = 0.0
    error: str = ""           # an internal disagreement (solver and simulator)
    plan: Plan | None = None
    decided: bool = True      # no budget ran out (only decided outcomes are cached)
    cached: bool = False
    recorded: float = 0.0     # from the cache: the seconds the original step took


def prove(pack: Pack, rule: Rule, lemmas: tuple, bound: int, *, depth: int = DEFAULT_DEPTH,
          rlimit: int | None = None, timeout: float | None = None, cache=None) -> Outcome:
    """The induction step of a rule whose bounded check up to ``bound`` legs holds. With a
    ``cache`` (:class:`verifier.run.cache.Cache`) a decided outcome is stored, and a stored one is
    used: its counterexample to induction is replayed in the simulator all the same."""
    t0 = time.monotonic()
    key = None
    if cache is not None:
        key = induction_key(pack, rule, lemmas, bound, depth)
        hit = cache.get_data(key)
        if hit is not None:
            out = _confirm(pack, rule, lemmas, plan_with_lemmas(pack, rule, lemmas), hit, t0)
            if out is not None:
                return attrs.evolve(out, cached=True)
            cache.count_as_miss()
    out = _prove(pack, rule, lemmas, bound, depth, rlimit, timeout, t0)
    if key is not None and not out.error and out.decided:
        cache.put_data(key, {"verdict": out.verdict, "proof": out.proof, "message": out.message,
                             "cti": out.cti, "minimal": out.minimal, "seconds": float(out.seconds)})
    return out


def _confirm(pack, rule, lemmas, plan, hit: dict, t0: float):
    """An outcome from the cache, its counterexample to induction replayed; None if that
    fails (then it is solved again)."""
    try:
        cti = hit["cti"]
        base = dict(verdict=hit["verdict"], proof=hit["proof"], message=hit["message"],
                    minimal=hit["minimal"], plan=plan, recorded=float(hit["seconds"]))
    except (KeyError, TypeError, ValueError):
        return None
    if cti is None:
        return Outcome(**base, seconds=time.monotonic() - t0)
    rep = replay(pack, rule, lemmas, plan, cti)
    if rep.problems or compare_values(pack, plan, cti, rep.views, rule):
        return None
    return Outcome(**base, cti=cti, views=rep.views, seconds=time.monotonic() - t0)


def _prove(pack, rule, lemmas, bound, depth, rlimit, timeout, t0) -> Outcome:
    plan = plan_with_lemmas(pack, rule, lemmas)
    ids = [lemma.id for lemma in lemmas]
    base = {"kind": "bounded", "legs": bound}
    if plan.unsupported:
        return Outcome("bounded", {**base, "induction": "not attempted"},
                       "not proved for any number of legs: " + "; ".join(plan.unsupported),
                       seconds=time.monotonic() - t0, plan=plan)
    kw = {}
    if rlimit is not None:
        kw["rlimit"] = rlimit
    if timeout is not None:
        kw["timeout"] = timeout
    last = None
    for k in range(1, min(depth, bound + 1) + 1):
        last = induction.step(pack, rule, lemmas, plan, k, minimise=False, **kw)
        if last.status == "proved":
            return Outcome("holds", {"kind": "induction", "base_legs": bound, "depth": k,
                                     "lemmas": list(last.lemmas_used)},
                           seconds=time.monotonic() - t0, plan=plan)
        if last.status == "unknown":
            return Outcome("bounded", {**base, "induction": f"undecided at depth {k}",
                                       "lemmas": ids},
                           f"not proved for any number of legs: the induction step at depth {k} "
                           f"was left undecided ({last.reason})",
                           seconds=time.monotonic() - t0, plan=plan, decided=False)
    # the counterexample to induction on record is the first one (two consecutive states),
    # minimised by the ladder; the deeper steps only had to fail
    deepest = last.depth
    last = induction.step(pack, rule, lemmas, plan, 1, **kw)
    if last.status != "failed":   # pragma: no cover - the same question answered before
        return Outcome("bounded", base, seconds=time.monotonic() - t0, plan=plan,
                       error=f"the step at depth 1 answered {last.status} when asked again")
    rep = replay(pack, rule, lemmas, plan, last.cti)
    if rep.problems:
        return Outcome("bounded", base, seconds=time.monotonic() - t0, plan=plan,
                       error="the simulator does not confirm the counterexample to induction: "
                             + "; ".join(rep.problems))
    disagree = compare_values(pack, plan, last.cti, rep.views, rule)
    if disagree:
        return Outcome("bounded", base, seconds=time.monotonic() - t0, plan=plan,
                       error="simulator and solver disagree on the counterexample to induction: "
                             + "; ".join(disagree))
    n = last.cti["state"]["legs.count"]
    msg = (f"not proved for any number of legs: from a state after {n} leg{'s' if n != 1 else ''} "
           f"in which the rule held, one more leg breaks it"
           + (f" (with lemma{'s' if len(ids) != 1 else ''} {', '.join(ids)})" if ids else "")
           + (f"; the steps of depth 2 to {deepest} fail too" if deepest > 1 else ""))
    return Outcome("bounded", {**base, "induction": f"fails up to depth {deepest}", "lemmas": ids},
                   msg, last.cti, rep.views, last.minimal, time.monotonic() - t0, plan=plan,
                   decided=last.minimal)

