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
from verifier.smt.concrete import Evaluator, group_assumptions, plain_value
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
        # which are the same at every state of the current LRBG (here the state before the
        # leg); the constants its other names define go to a list of their own, left out of
        # the path
        self._setup(owner.pack, owner.ctx, prefix, [] if static_only else owner.constraints)
        self.plan = owner.plan
        self.st = st
        self.static_only = static_only
        self._names(S, st, count)
        R = st.get("route")
        if R is None:
            self._group_names(S, None, count)
        else:               # a route's state: which group is the LRBG, the list (DESIGN 4.10)
            cur = R["cur"]
            self.known_first = owner.known_first
            self._route = {"marks": owner.marks, "frame": cur["frame"], "origin": cur["origin"],
                           "group": cur["group"], "previous": cur["previous"]}
            Gs = [{**G, **g} for G, g in zip(owner.Gs, R["groups"])]
            self._group_names(owner.S, Gs, R["journey"])
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
        self.S = S
        self.route = pack.scope.groups >= 2
        self.Gs, self.marks, self.detections = [], [], []
        if self.route:              # a route (DESIGN 4.10): the later groups' static inputs
            self.Gs = [self._group_static(k, {}) for k in range(2, pack.scope.groups + 1)]
            self._route = {"marks": [self.num(0)]}
            self._marks(self.Gs)
            self.marks = self._route["marks"]
            R = self._route_state(S)
            s0 = self._arbitrary(R["cur"]["S"], R["first"])
            self._route_domain(s0, R)
        else:
            s0 = self._arbitrary(S, first)
        self._passage_bound(S)
        self.states = [s0]
        self.leg_inputs = []
        if not self.route:
            self.body_view = View(self, S, s0, s0["count"], "body!", static_only=True)
        st = s0
        for i in range(1, depth + 1):
            cab, fwd = self.boolean(f"legs.{i}.cab_change"), self.boolean(f"legs.{i}.forward")
            dist, odo = self.real(f"legs.{i}.distance"), self.real(f"legs.{i}.odometer")
            self.inputs.update({f"legs.{i}.cab_change": cab, f"legs.{i}.running": fwd,
                                f"legs.{i}.distance": dist, f"legs.{i}.odometer": odo})
            if self.route:
                st = self._route_leg(st, (cab, fwd, dist, odo), i)
            else:
                st, _ = self._step(S, st, (cab, fwd, dist, odo), active=z3.BoolVal(True, ctx),
                                   index=s0["count"] + i, tag=str(i), plan=plan, view=self.body_view)
            self.states.append(st)
            self.leg_inputs.append((cab, fwd, dist, odo))
        self.views = [View(self, self._current_S(st), st, st["count"], f"s{i}!")
                      for i, st in enumerate(self.states)]
        # for the ladder and the readers of models
        self.terms = {"legs.count": s0["count"], "cab_changes": self.state_vars["cab_changes"]}

    def _state_var(self, name: str, sort: str):
        """A constant of s0, by a readable name."""
        c = {"real": self.real, "int": self.int, "bool": self.boolean}[sort]("state0." + name)
        self.state_vars[name] = c
        return c

    def _current_S(self, st: dict) -> dict:
        """The passage of the LRBG current at a state (G1's without a route)."""
        return st["route"]["cur"]["S"] if self.route else self.S

    # ---- a route's state (DESIGN 4.7 as 4.10 extends it) -----------------------------------
    def _route_state(self, S1: dict) -> dict:
        """s0's route: per later group whether it was found (at which leg of the journey, with
        what detection error), became the LRBG or was found in its window; the current LRBG
        (the last group that became the LRBG) with its passage, frame and how it was accepted.
        The domain: what the bounded encoding's hand-overs give by construction."""
        C, ctx, fresh = self.constraints, self.ctx, self._state_var
        sc = self.pack.scope
        N = sc.groups
        groups = []
        for k, G in enumerate(self.Gs, 2):
            n = f"g{k}"
            # whether it was found, where and how, are inputs of the route as far as it has come
            # (read and fixed as the bounded world's); whether it became the LRBG, the state's
            g = {"found": self.boolean(f"state0.{n}.found"), "at": self.int(f"state0.{n}.at"),
                 "detect_error": self.real(f"state0.{n}.detect_error"),
                 "lrbg": fresh(f"{n}.lrbg", "bool"), "in_window": fresh(f"{n}.in_window", "bool")}
            self.inputs.update({f"{n}.{f}": g[f] for f in ("found", "at", "detect_error")})
            self.bounded("world.detection", g["detect_error"] >= -self.num(sc.detection),
                         g["detect_error"] <= self.num(sc.detection))
            C += [z3.Implies(z3.Not(g["found"]), z3.And(g["at"] == 0, g["detect_error"] == 0)),
                  z3.Implies(g["found"], g["at"] >= 1),
                  z3.Implies(g["lrbg"], g["found"]),
                  z3.Implies(g["in_window"], z3.And(g["found"], G["linked"], self.known_first))]
            for h in groups:                        # found in route order, at different legs
                C.append(z3.Implies(z3.And(g["found"], h["found"]), h["at"] < g["at"]))
            groups.append(g)
        # the current LRBG: the last group that became the LRBG; the one before it
        group, previous = self.ival(1), self.ival(0)
        for k, g in enumerate(groups, 2):
            before = group
            group = z3.If(g["lrbg"], k, group)
            previous = z3.If(g["lrbg"], before, previous)
        group = self.define("state0.lrbg.group", group, "int")
        previous = self.define("state0.lrbg.previous", previous, "int")
        prv, linking = fresh("lrbg.prv", "bool"), fresh("lrbg.linking", "bool")
        frame, direction = fresh("lrbg.frame", "int"), fresh("passage.direction", "int")
        running = fresh("passage.running", "bool")
        C += [z3.Or(frame == 1, frame == -1), z3.Or(direction == 1, direction == -1),
              z3.Implies(group == 1, z3.And(z3.Not(prv), z3.Not(linking), frame == 1))]

        def pick(of_g1, of_group):
            out = of_g1
            for k in range(2, N + 1):
                out = z3.If(group == k, of_group(k, self.Gs[k - 2], groups[k - 2]), out)
            return out

        for k, G in enumerate(self.Gs, 2):
            g = groups[k - 2]
            # linking was usable from the previous LRBG when it is linked itself (or G1) and the
            # direction over it known: surely so with two balises read (DESIGN 4.10)
            prev_linked = z3.Or(previous == 1, *[z3.And(previous == j, H["linked"])
                                                  for j, H in enumerate(self.Gs[:k - 2], 2)])
            prev_sure = z3.Or(previous == 1, *[z3.And(previous == j, H["linked"], H["read"] >= 2)
                                                for j, H in enumerate(self.Gs[:k - 2], 2)])
            C.append(z3.Implies(group == k, z3.And(
                z3.Implies(linking, prev_linked),
                z3.Implies(z3.And(G["linked"], self.known_first, prev_sure), linking),
                z3.Implies(prv, z3.And(G["balises"] == 1, z3.Not(linking))),
                z3.Implies(z3.Not(prv), frame == G["orientation"]),
                z3.Implies(linking, z3.And(G["linked"], self.known_first, g["in_window"])),
                z3.Implies(z3.Not(linking), z3.Or(G["balises"] == 1, G["read"] >= 2)))))
        S = {"lrbg.balises": pick(S1["lrbg.balises"], lambda k, G, g: G["balises"]),
             "lrbg.read": pick(S1["lrbg.read"], lambda k, G, g: G["read"]),
             "lrbg.linked": pick(S1["lrbg.linked"], lambda k, G, g: z3.And(G["linked"], z3.Or(linking, G["balises"] >= 2))),
             "prv": prv, "prv_group": z3.If(group == 1, 1, previous),
             "lrbg.locacc": pick(S1["lrbg.locacc"], lambda k, G, g: z3.ToReal(G["locacc"])),
             "lrbg.offset": pick(S1["lrbg.offset"], lambda k, G, g: z3.If(frame == G["orientation"], G["offset"], -G["offset"])),
             "train.length": S1["train.length"], "train.antenna": S1["train.antenna"],
             "passage.direction": z3.If(group == 1, S1["passage.direction"], direction),
             "passage.running": z3.If(group == 1, S1["passage.running"], running),
             "passage.detect_error": pick(S1["passage.detect_error"], lambda k, G, g: g["detect_error"])}
        S = {key: self.define(f"state0.{key}", v, "bool" if key in ("lrbg.linked", "prv", "passage.running")
                              else "int" if key in ("lrbg.balises", "lrbg.read", "prv_group", "passage.direction")
                              else "real") for key, v in S.items()}
        first = self._first(S, tag="s0.")
        at = pick(self.ival(0), lambda k, G, g: g["at"])
        cur = {"S": S, "start": at, "origin": pick(self.num(0), lambda k, G, g: self.marks[k - 1]),
               "frame": frame, "group": group, "previous": previous,
               "linked": pick(z3.BoolVal(True, ctx), lambda k, G, g: G["linked"])}
        return {"cur": cur, "first": first, "groups": groups}

    def _route_domain(self, s0: dict, R: dict) -> None:
        """The journey of s0: the legs since the current LRBG after those before its detection;
        every group found within it."""
        journey = self.define("state0.journey.legs", s0["count"] + R["cur"]["start"], "int")
        for g in R["groups"]:
            self.constraints.append(g["at"] <= journey)
        s0["route"] = {"cur": R["cur"], "groups": R["groups"], "journey": journey}

    def _route_leg(self, st: dict, leg: tuple, i: int) -> dict:
        """One leg of a route from state ``st`` (DESIGN 4.10, as the bounded encoding's pass):
        the leg in the current LRBG's frame, the group found at its end (``legs.i.found``, 0
        for none; later than every group found so far) judged from the current LRBG, the
        state restarted at its detection when it becomes the LRBG."""
        C, ctx, num = self.constraints, self.ctx, self.num
        R, sc = st["route"], self.pack.scope
        cur = R["cur"]
        found, det = self.int(f"legs.{i}.found"), self.real(f"legs.{i}.detect_error")
        self.inputs.update({f"legs.{i}.found": found, f"legs.{i}.detect_error": det})
        self.detections.append((found, det))
        C += [found >= 0, found <= sc.groups, found != 1, z3.Implies(found == 0, det == 0)]
        self.bounded("world.detection", det >= -num(sc.detection), det <= num(sc.detection))
        body = View(self, cur["S"], st, st["count"], f"body{i}!", static_only=True)
        new, _ = self._step(cur["S"], st, leg, active=z3.BoolVal(True, ctx), index=st["count"] + 1,
                            tag=str(i), plan=self.plan, view=body)
        journey = R["journey"] + 1
        real = {"front": cur["origin"] + self.along(cur["frame"], new["front"]),
                "o": self.along(cur["frame"], new["o"]), "motion": self.along(cur["frame"], new["motion"])}
        events, groups = [], []
        for k, (G, g) in enumerate(zip(self.Gs, R["groups"]), 2):
            here = found == k
            C.append(z3.Implies(here, z3.And([z3.Not(h["found"]) for h in R["groups"][k - 2:]])))
            Gd = {**G, "detect_error": det}
            self._detected(k, Gd, here, real, leg, self.S["train.antenna"])
            ok, window, S_k = self._judge(k, Gd, cur, new, leg[1], i)
            events.append((z3.And(here, ok), k, S_k))
            groups.append({"found": z3.Or(g["found"], here), "at": z3.If(here, journey, g["at"]),
                           "detect_error": z3.If(here, det, g["detect_error"]),
                           "lrbg": z3.Or(g["lrbg"], z3.And(here, ok)),
                           "in_window": z3.Or(g["in_window"], z3.And(here, window))})
        nxt, merged = self._restart(cur, new, events, i)
        reset = nxt["reset"]
        # _restart counts legs of the bounded pass; on a path the current LRBG starts at the journey's leg
        nxt["start"] = z3.If(reset, journey, cur["start"])
        merged["count"] = z3.If(reset, self.ival(0), new["count"])
        # the legs since the current LRBG start again: every accumulator empty (DESIGN 4.10)
        kinds = {f.key: f.kind for f in self.plan.accumulators}
        empty = {"all": z3.BoolVal(True, ctx), "any": z3.BoolVal(False, ctx)}
        merged["accs"] = {}
        for (key, v), a in new["accs"].items():
            e = empty.get(kinds[key], self.ival(0) if z3.is_int(a) else num(0))
            merged["accs"][(key, v)] = z3.If(reset, e, a)
        merged["route"] = {"cur": nxt, "groups": groups, "journey": journey}
        return merged

    def _arbitrary(self, S: dict, first: dict) -> dict:
        """s0: fresh constants constrained by the domain of DESIGN 4.7 (facts true of every
        state after any number of legs in scope, by construction or by the scope)."""
        sc, C, num, ctx = self.pack.scope, self.constraints, self.num, self.ctx
        fresh = self._state_var

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
        if path.route:      # no group found on the path where possible; then the route's state
            for found, det in path.detections:
                L.try_fix(found == 0)
                L.least_magnitude(det)
            for name in ("lrbg.frame", "passage.direction"):
                L.try_fix(V[name] == 1)
            for name, c in V.items():
                if z3.is_bool(c) and name.startswith(("g", "lrbg.", "passage.")):
                    L.try_fix(z3.Not(c) if name != "passage.running" else c)

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
    for n in solve.later_groups(I):       # a route's later groups, detections so far included
        world[n] = solve.read_group(ev, I, n)
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
    out = {"world": world, "state": state, "legs": legs}
    if path.route:
        for leg, (found, det) in zip(legs, path.detections):
            leg["found"] = ev(found).as_long()
            leg["detect_error"] = solve.to_fraction(ev(det))
        # the current LRBG's passage as the encoding derives it (the simulator checks it)
        S = path.states[0]["route"]["cur"]["S"]
        cur = {}
        for key in ("lrbg.balises", "lrbg.read", "lrbg.linked", "lrbg.locacc", "lrbg.offset",
                    "passage.direction", "passage.running", "passage.detect_error", "prv", "prv_group"):
            v = ev(S[key])
            cur[key] = z3.is_true(v) if z3.is_bool(v) else solve.to_fraction(v)
        out["current"] = cur
    return out


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
    for (found, det), leg in zip(path.detections, data["legs"]):
        a += [found == int(leg.get("found", 0)), det == real(leg.get("detect_error", 0))]
    for n in solve.later_groups(I):
        a += group_assumptions(I, n, w[n], ctx)
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
