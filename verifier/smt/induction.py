"""Proofs for any number of legs: the induction step of k-induction over the legs (DESIGN 4.7).

The bounded check (:mod:`verifier.smt.solve`) is the base case: the rule holds in every world
of up to B legs. The step asks, at depth k: is there a path of states s0, s1, ..., sk, where
s0 is an arbitrary state after some number of legs (inside the domain of DESIGN 4.7) and each
s(i+1) follows from s(i) by one leg in scope, such that the rule holds at s0 .. s(k-1), every
proved lemma holds at s0 .. sk, and the rule fails at sk? If not (unsat) and B >= k - 1, the
rule holds after any number of legs. If so (sat), the path is a *counterexample to induction*
(not necessarily a reachable world: s0 need not be reachable), minimised by the ladder and
replayed by the simulator.

The state and the leg are those of the bounded encoding (``Encoding._step``, written once);
each state gets its own view (:class:`View`) for vocabulary names, designs and rules, with the
state's accumulators in place of quantifiers over legs. Results leave as plain data.
"""

from __future__ import annotations

import time
from fractions import Fraction

import attrs
import z3

from verifier.check.model import Pack, Rule
from verifier.check.unbounded import STATIC, Plan
from verifier.errors import InternalError
from verifier.lang.ast import BOOL, COUNT, DIRECTION, RUNNING
from verifier.lang.vocab import GLOBAL, LEG
from verifier.smt import export, solve
from verifier.smt.concrete import Evaluator, plain_value
from verifier.smt.encode import OVERRIDE, Terms

_SORT = {"all": "bool", "any": "bool", "count": "int"}


def _sort_of(ty: str) -> str:
    if ty in (BOOL, RUNNING):
        return "bool"
    if ty in (COUNT, DIRECTION):
        return "int"
    return "real"


class View(Terms):
    """Names, designs and rules at one state of a path (a prefix of its own for every
    constant it defines); quantifiers read the state's accumulators."""

    def __init__(self, owner: "Path", S: dict, st: dict, count, prefix: str,
                 static_only: bool = False):
        # the view an accumulator's body is read in keeps the names of unbounded.STATIC only,
        # which are the same at every state (here s0's); the constants its other names define
        # go to a list of their own, left out of the path
        self._setup(owner.pack, owner.ctx, prefix, [] if static_only else owner.constraints)
        self.plan = owner.plan
        self.st = st
        self.static_only = static_only
        self._names(S, st, count)
        self._group_names(S, None, count)
        if static_only:
            self.terms = {k: v for k, v in self.terms.items() if k in STATIC}
            self.constraints = owner.constraints

    def name(self, name: str):
        if self.static_only and name not in self.terms:
            raise KeyError(f"{name} changes with the legs: it cannot be read in an accumulator's body")
        return super().name(name)

    def quantify(self, node, env):
        fam, params = self.plan.use(node)
        cases = [self.expr(p, env) for p in params]
        accs = self.st["accs"]
        vals = fam.valuations
        out = accs[(fam.key, vals[-1])]
        for v in reversed(vals[:-1]):
            cond = z3.And([c == self.value_term(p.ty, x) for c, p, x in zip(cases, fam.params, v)])
            out = z3.If(cond, accs[(fam.key, v)], out)
        return out

    def leg_field(self, i: int, field: str):
        return self.st["frozen"][(i, field)]


class Path(Terms):
    """States s0 .. sk of one pack in one context: s0 arbitrary within the domain of DESIGN
    4.7 (or fixed by ``state0``), then ``depth`` legs, each in scope."""

    def __init__(self, pack: Pack, plan: Plan, depth: int, ctx: z3.Context):
        self._setup(pack, ctx, "", [])
        self.plan = plan
        self.K = depth
        self.inputs: dict = {}      # static inputs and leg inputs (as the bounded encoding's)
        self.state_vars: dict = {}  # s0's own constants, by a readable name
        S = self._static()
        first = self._first(S)
        s0 = self._arbitrary(S, first)
        self._passage_bound(S)
        self.S = S
        self.states = [s0]
        self.leg_inputs = []
        self.body_view = View(self, S, s0, s0["count"], "body!", static_only=True)
        st = s0
        for i in range(1, depth + 1):
            cab, fwd = self.boolean(f"legs.{i}.cab_change"), self.boolean(f"legs.{i}.forward")
            dist, odo = self.real(f"legs.{i}.distance"), self.real(f"legs.{i}.odometer")
            self.inputs.update({f"legs.{i}.cab_change": cab, f"legs.{i}.running": fwd,
                                f"legs.{i}.distance": dist, f"legs.{i}.odometer": odo})
            st, _ = self._step(S, st, (cab, fwd, dist, odo), active=z3.BoolVal(True, ctx),
                               index=s0["count"] + i, tag=str(i), plan=plan, view=self.body_view)
            self.states.append(st)
            self.leg_inputs.append((cab, fwd, dist, odo))
        self.views = [View(self, S, st, st["count"], f"s{i}!") for i, st in enumerate(self.states)]
        # for the ladder and the readers of models
        self.terms = {"legs.count": s0["count"], "cab_changes": self.state_vars["cab_changes"]}

    def _arbitrary(self, S: dict, first: dict) -> dict:
        """s0: fresh constants constrained by the domain of DESIGN 4.7 (facts true of every
        state after any number of legs in scope, by construction or by the scope)."""
        sc, C, num, ctx = self.pack.scope, self.constraints, self.num, self.ctx
        v = self.state_vars

        def fresh(name, sort):
            c = {"real": self.real, "int": self.int, "bool": self.boolean}[sort]("state0." + name)
            v[name] = c
            return c

        count, cabs = fresh("legs.count", "int"), fresh("cab_changes", "int")
        o, motion = fresh("actual.orientation", "int"), fresh("actual.motion", "int")
        front, est_p = fresh("actual.front", "real"), fresh("est.front_passage", "real")
        travelled, measured = fresh("actual.travelled", "real"), fresh("est.travelled", "real")
        over, under = fresh("actual.over_reading", "real"), fresh("actual.under_reading", "real")
        det = S["passage.detect_error"]
        basis = measured if sc.odometry_basis == "measured" else travelled
        C += [count >= 0, cabs >= 0, cabs <= count,
              z3.Or(o == 1, o == -1), z3.Or(motion == 1, motion == -1),
              travelled >= 0, measured >= 0,
              over >= self.pos(-det), under >= self.pos(det),
              # the detection error on top of the odometry bound unless counted inside (DESIGN 4.1)
              over <= num(sc.odometry_over.fixed) + num(sc.odometry_over.rate) * basis
              + (num(0) if sc.detection_in_odometry else self.pos(-det)),
              under <= num(sc.odometry_under.fixed) + num(sc.odometry_under.rate) * basis
              + (num(0) if sc.detection_in_odometry else self.pos(det))]
        # the orientation in the passage frame follows from the real one (DESIGN 4.3)
        op = self.define("state0.est.orientation_passage", z3.If(S["passage.direction"] == 1, o, -o), "int")
        accs, at_start = {}, []
        for n, fam in enumerate(self.plan.accumulators):
            for j, val in enumerate(fam.valuations):
                sort = _SORT.get(fam.kind) or ("int" if fam.ty == COUNT else "real")
                a = fresh(f"acc.{n}.{j}", sort)
                accs[(fam.key, val)] = a
                if fam.kind == "count":
                    C += [a >= 0, a <= count]
                empty = {"all": z3.BoolVal(True, ctx), "any": z3.BoolVal(False, ctx),
                         "count": self.ival(0)}.get(fam.kind)
                if empty is None:
                    empty = self.ival(0) if sort == "int" else num(0)
                at_start.append(a == empty)
        frozen = {}
        for i, field in self.plan.frozen:
            frozen[(i, field)] = fresh(f"legs.{i}.{field}", _sort_of(LEG[field].ty))
        for i in sorted({i for i, _ in self.plan.frozen}):
            fields = {f: frozen[(i, f)] for j, f in self.plan.frozen if j == i}
            domain = self._leg_domain(S, i, fields)
            if domain:
                C.append(z3.Implies(count >= i, z3.And(domain)))
        # no leg yet: the state is the one at the detection instant
        C.append(z3.Implies(count == 0, z3.And(
            cabs == 0, o == first["o"], motion == first["motion"], front == first["front"],
            est_p == first["est_p"], travelled == 0, measured == 0, over == first["over"],
            under == first["under"], *at_start)))
        return {"count": count, "o": o, "op": op, "motion": motion, "front": front,
                "est_p": est_p, "over": over, "under": under, "measured": measured,
                "basis": basis, "cabs": [cabs], "travelled": [travelled],
                "accs": accs, "frozen": frozen}

    def _leg_domain(self, S: dict, i: int, f: dict) -> list:
        """What every leg's fields satisfy (a frozen leg i of s0, when it exists)."""
        sc, num, out = self.pack.scope, self.num, []
        if "index" in f:
            out.append(f["index"] == i)
        if "distance" in f:
            out += [f["distance"] >= num(sc.leg_distance[0]), f["distance"] <= num(sc.leg_distance[1])]
        if "odometer" in f:
            out.append(f["odometer"] >= 0)
        for real in ("actual_orientation", "actual_motion"):
            if real in f:
                out.append(z3.Or(f[real] == 1, f[real] == -1))
        for seen, real in (("orientation", "actual_orientation"), ("motion", "actual_motion")):
            if seen in f:
                out.append(z3.Or(f[seen] == 1, f[seen] == -1, f[seen] == 0))
                out.append(z3.Implies(S["known"], f[seen] != 0))
                out.append(z3.Implies(z3.Not(S["known"]), f[seen] == 0))
                if real in f:
                    out.append(z3.Implies(S["known"], f[seen] == f[real]))
        if {"actual_motion", "actual_orientation", "running"} <= set(f):
            out.append(f["actual_motion"] == z3.If(f["running"], f["actual_orientation"],
                                                   -f["actual_orientation"]))
        return out


def holds_at(view: View, rule: Rule):
    """The rule as an implication at one state."""
    return z3.Implies(view.given(rule), view.expect(rule))


@attrs.frozen
class Step:
    """The induction step at one depth (plain data)."""

    depth: int
    status: str                 # proved (unsat), failed (sat: a counterexample to induction), unknown
    cti: dict | None = None     # the minimised counterexample to induction (see read_path)
    minimal: bool = True
    reason: str = ""
    seconds: float = 0.0
    checks: int = 0
    lemmas_used: tuple = ()     # for proved: the lemmas in the solver's unsat core, in file order


def step(pack: Pack, rule: Rule, lemmas: tuple, plan: Plan, depth: int, *,
         rlimit: int = solve.DEFAULT_RLIMIT, timeout: float = solve.DEFAULT_TIMEOUT,
         minimise: bool = True, minimise_budget: int | None = None) -> Step:
    """The induction step of ``rule`` at ``depth``, strengthened by ``lemmas`` (rules already
    proved for any number of legs), in a fresh context. Minimising a counterexample to
    induction spends at most ``minimise_budget`` (default: ``rlimit // MINIMISE_SHARE``)."""
    ctx = z3.Context()
    budget = solve.Budget(timeout)
    t0 = time.perf_counter()
    path = Path(pack, plan, depth, ctx)
    facts = [holds_at(v, rule) for v in path.views[:-1]]
    facts.append(z3.Not(holds_at(path.views[-1], rule)))
    marks = []
    for j, lemma in enumerate(lemmas):
        mark = z3.Bool(f"lemma!{j}", ctx)
        marks.append(mark)
        facts.append(z3.Implies(mark, z3.And([holds_at(v, lemma) for v in path.views])))
    ses = solve.SolverSession(path, rlimit, budget)
    ses.add(*facts)
    r = ses.check(*marks)
    if r == z3.unsat:
        # which lemmas the proof needs: drop each in file order while the step stays proved
        # (decided by the answers alone, so the list does not depend on the solver's cores)
        needed = list(range(len(marks)))
        for j in range(len(marks)):
            trial = [i for i in needed if i != j]
            off = [z3.Not(marks[i]) for i in range(len(marks)) if i not in trial]
            if ses.check(*[marks[i] for i in trial], *off) == z3.unsat:
                needed = trial
        used = tuple(lemmas[i].id for i in needed)
        return Step(depth, "proved", seconds=time.perf_counter() - t0, checks=ses.checks,
                    lemmas_used=used)
    if r == z3.unknown:
        return Step(depth, "unknown", reason=ses.s.reason_unknown() or "budget exhausted",
                    seconds=time.perf_counter() - t0, checks=ses.checks)
    ses.add(*marks)
    first = read_path(ses.model, path)
    if not minimise:
        return Step(depth, "failed", first, False, seconds=time.perf_counter() - t0, checks=ses.checks)
    if minimise_budget is None:
        minimise_budget = rlimit // MINIMISE_SHARE
    decided = _ladder(ses, path, minimise_budget)
    if ses.settle() != z3.sat:
        return Step(depth, "failed", first, False, "minimisation stopped by the budget",
                    time.perf_counter() - t0, ses.checks)
    return Step(depth, "failed", read_path(ses.model, path), decided,
                "" if decided else "minimisation stopped by the budget",
                time.perf_counter() - t0, ses.checks)


# The minimisation of a counterexample to induction spends at most this share of one check's
# budget in all (25 M of the default 500 M): deterministic, so where it stops is the same on
# every machine. The shipped automatic-step-stays-in-range's takes 9.0 M (87 checks); without
# its lemma, real-front-inside-interval's ran into the 120 s wall-clock guard instead.
MINIMISE_SHARE = 20


def _ladder(ses, path: Path, budget: int | None = None) -> bool:
    """The ladder of DESIGN 6 over a path: fewest legs before s0, fewest cab changes, fewest
    balises; errors to 0; inputs least on the grid; then s0's own values (least, or least
    magnitude; Booleans false first, directions nominal first); then the inputs' Booleans."""
    V = path.state_vars

    def state(L) -> None:
        for name in ("actual.travelled", "est.travelled", "actual.over_reading", "actual.under_reading"):
            L.least_on_grid(V[name], Fraction(0))
        for name in ("actual.front", "est.front_passage"):
            L.least_magnitude(V[name])
        for name, c in V.items():
            if not name.startswith(("acc.", "legs.")):
                continue
            if z3.is_bool(c):
                L.try_fix(z3.Not(c))
            elif z3.is_int(c) and name.startswith("acc."):
                L.least_int(c, 0)                      # a count
            elif z3.is_int(c):                         # a direction: nominal, reverse, unknown
                L.try_fix(c == 1) or L.try_fix(c == -1) or L.try_fix(c == 0)
            elif name.endswith((".distance", ".odometer")):
                L.least_on_grid(c, Fraction(0))
            else:
                L.least_magnitude(c)
        L.try_fix(V["actual.orientation"] == 1)
        L.try_fix(V["actual.motion"] == 1)

    return solve.ladder(ses, path.inputs, path.K, V["legs.count"], V["cab_changes"], state,
                        budget=budget)


def read_path(model, path: Path) -> dict:
    """A path's inputs as plain data: ``world`` (the static inputs, flat as
    ``solve.read_world`` gives them, no legs), ``state`` (s0: every constant of
    :attr:`Path.state_vars` by name) and ``legs`` (the depth's legs, flat)."""
    ev = lambda t: model.evaluate(t, model_completion=True)  # noqa: E731
    I = path.inputs
    world = {
        "balises": ev(I["lrbg.balises"]).as_long(), "read": ev(I["lrbg.read"]).as_long(),
        "linked": z3.is_true(ev(I["lrbg.linked"])),
        "locacc": solve.to_fraction(ev(I["lrbg.locacc"])), "offset": solve.to_fraction(ev(I["lrbg.offset"])),
        "length": solve.to_fraction(ev(I["train.length"])), "antenna": solve.to_fraction(ev(I["train.antenna"])),
        "direction": "nominal" if ev(I["passage.direction"]).as_long() == 1 else "reverse",
        "running": "forward" if z3.is_true(ev(I["passage.running"])) else "backward",
        "detect_error": solve.to_fraction(ev(I["passage.detect_error"])), "legs": [],
    }
    state = {}
    for name, c in path.state_vars.items():
        v = ev(c)
        state[name] = z3.is_true(v) if z3.is_bool(c) else solve.to_fraction(v)
    count = state["legs.count"]
    for name in [n for n in state if n.startswith("legs.") and n != "legs.count"]:
        if int(name.split(".")[1]) > count:   # a leg not run yet: its frozen copy means nothing
            del state[name]
    legs = []
    for cab, fwd, dist, odo in path.leg_inputs:
        legs.append({"cab_change": z3.is_true(ev(cab)),
                     "running": "forward" if z3.is_true(ev(fwd)) else "backward",
                     "distance": solve.to_fraction(ev(dist)), "odometer": solve.to_fraction(ev(odo))})
    return {"world": world, "state": state, "legs": legs}


# ---- one path, concretely (replay comparison and differential tests) --------------------

def _fix(path: Path, data: dict) -> list:
    """Assumptions that fix a path's inputs and s0 to plain data (as :func:`read_path`)."""
    I, V, ctx = path.inputs, path.state_vars, path.ctx

    def real(x):
        return z3.RealVal(str(Fraction(x)), ctx)

    w = data["world"]
    a = [I["lrbg.balises"] == int(w["balises"]), I["lrbg.read"] == int(w["read"]),
         I["lrbg.linked"] == z3.BoolVal(bool(w["linked"]), ctx),
         z3.ToReal(I["lrbg.locacc"]) == real(w["locacc"]), I["lrbg.offset"] == real(w["offset"]),
         I["train.length"] == real(w["length"]), I["train.antenna"] == real(w["antenna"]),
         I["passage.direction"] == {"nominal": 1, "reverse": -1}[w["direction"]],
         I["passage.running"] == z3.BoolVal(w["running"] == "forward", ctx),
         I["passage.detect_error"] == real(w["detect_error"])]
    for name, c in V.items():
        if name not in data["state"]:    # a frozen leg not yet run: free (and never read)
            continue
        x = data["state"][name]
        a.append(c == (z3.BoolVal(bool(x), ctx) if z3.is_bool(c) else
                       (z3.IntVal(int(x), ctx) if z3.is_int(c) else real(x))))
    for (cab, fwd, dist, odo), leg in zip(path.leg_inputs, data["legs"]):
        a += [cab == z3.BoolVal(bool(leg["cab_change"]), ctx),
              fwd == z3.BoolVal(leg["running"] == "forward", ctx),
              dist == real(leg["distance"]), odo == real(leg["odometer"])]
    return a


def evaluate_path(pack: Pack, plan: Plan, data: dict, names, rules=(), *, timeout: float = 30.0):
    """The encoding's values at every state of one path given as plain data: a list (s0 ..
    sk) of {name: value} for ``names`` (vocabulary names), with ``rule:<id>:given`` and
    ``rule:<id>:expect`` for each rule of ``rules``, and every accumulator as
    ``acc:<n>:<j>``; None when the path is outside the domain or the scope."""
    ctx = z3.Context()
    path = Path(pack, plan, len(data["legs"]), ctx)
    wanted = []
    for i, view in enumerate(path.views):
        for n in names:
            wanted.append((i, n, GLOBAL[n].ty, view.name(n)))
        for r in rules:
            wanted.append((i, f"rule:{r.id}:given", "Bool", view.given(r)))
            wanted.append((i, f"rule:{r.id}:expect", "Bool", view.expect(r)))
        for n, fam in enumerate(plan.accumulators):
            for j, val in enumerate(fam.valuations):
                ty = {"all": "Bool", "any": "Bool"}.get(fam.kind, fam.ty)
                wanted.append((i, f"acc:{n}:{j}", ty, path.states[i]["accs"][(fam.key, val)]))
    s = z3.Solver(ctx=ctx)
    s.set("timeout", int(timeout * 1000))
    s.add(*path.constraints, *_fix(path, data))
    r = solve.check(s)
    if r == z3.unsat:
        return None
    if r != z3.sat:
        raise RuntimeError(f"solver gave up on a concrete path: {s.reason_unknown()}")
    m = s.model()
    out = [dict() for _ in path.views]
    for i, key, ty, term in wanted:
        out[i][key] = plain_value(m.evaluate(term, model_completion=True), ty)
    return out


def bounded_accumulators(enc, plan: Plan) -> dict:
    """The value of every accumulator of ``plan`` in a bounded encoding, by its own
    quantifiers over the legs (for comparing the two): {(n, j): term}."""
    out = {}
    for n, fam in enumerate(plan.accumulators):
        rep = fam.quant
        for j, val in enumerate(fam.valuations):
            over = {id(p): enc.value_term(p.ty, x) for p, x in zip(fam.params, val)}
            out[(n, j)] = enc.expr(rep, {OVERRIDE: over})
    return out



def bounded_state(pack: Pack, plan: Plan, world: dict, *, timeout: float = 30.0) -> dict:
    """The state after all the legs of one world (flat, as ``solve.read_world`` gives it),
    computed by the *bounded* encoding with its own quantifiers over the legs, in the naming of
    :func:`read_path` (``state`` part). For comparing the step with the bounded encoding."""
    n = len(world["legs"])
    ev = Evaluator(pack, n, timeout)
    enc = ev.enc
    accs = bounded_accumulators(enc, plan)
    wanted = {"legs.count": enc.terms["legs.count"], "cab_changes": enc.terms["cab_changes"],
              "actual.orientation": enc.terms["actual.orientation"],
              "actual.motion": enc.terms["actual.motion"]}
    for k in ("actual.front", "est.front_passage", "actual.travelled", "est.travelled",
              "actual.over_reading", "actual.under_reading"):
        wanted[k] = enc.terms[k]
    for (i, j), t in accs.items():
        wanted[f"acc.{i}.{j}"] = t
    for i, f in plan.frozen:
        if i <= n:
            wanted[f"legs.{i}.{f}"] = enc.legs[i - 1][f]
    s = ev.solver
    s.push()
    try:
        s.add(*ev.assumptions_for(world))
        if solve.check(s) != z3.sat:
            raise ValueError("the bounded encoding rejects the world")
        m = s.model()
        out = {}
        for k, t in wanted.items():
            v = m.evaluate(t, model_completion=True)
            out[k] = z3.is_true(v) if z3.is_bool(t) else solve.to_fraction(v)
        return out
    finally:
        s.pop()


def step_obligation(pack: Pack, rule: Rule, lemmas: tuple, plan: Plan, depth: int) -> str:
    """The induction step at ``depth`` as a portable SMT-LIB 2.6 script for another solver:
    ``unsat`` means the step is proved (the rule holds for any number of legs, given its base
    case), ``sat`` that a counterexample to induction exists. The lemmas are asserted."""
    ctx = z3.Context()
    path = Path(pack, plan, depth, ctx)
    facts = [holds_at(v, rule) for v in path.views[:-1]]
    facts.append(z3.Not(holds_at(path.views[-1], rule)))
    facts += [holds_at(v, lemma) for lemma in lemmas for v in path.views]
    s = z3.Solver(ctx=ctx)
    s.add(*path.constraints, *facts)
    body = [export.show(export.portable_term(e)) for e in export.parse_sexprs(s.sexpr())]
    head = [f"; verifier: induction step of depth {depth} of {rule.role} '{rule.id}' of pack "
            f"'{pack.name}' ({pack.path}), lemmas: {', '.join(x.id for x in lemmas) or 'none'}",
            "; unsat: no counterexample to induction (the step is proved)",
            "(set-info :smt-lib-version 2.6)", f"(set-logic {export.LOGIC})"]
    text = "\n".join(head + body + ["(check-sat)", "(exit)", ""])
    bad = export.nonstandard(text)
    if bad:
        raise InternalError(f"the induction step of {rule.id} is not portable SMT-LIB: {', '.join(bad)}")
    return text
