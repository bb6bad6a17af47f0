"""Deciding one rule: verdict, witness, and the minimisation ladder of DESIGN 6.

Each rule is checked in a fresh z3 Context with a deterministic resource budget per check
(rlimit) and a wall-clock guard. Results leave this module as plain Python data (Fractions,
ints, bools, words), never as z3 objects.
"""

from __future__ import annotations

import math
import time
from fractions import Fraction

import attrs
import z3

from verifier.check.model import Pack, Rule
from verifier.lang import ast
from verifier.lang.vocab import GLOBAL
from verifier.smt.encode import Encoding

DEFAULT_RLIMIT = 500_000_000     # per solver check; deterministic (about 20 s of z3 work)
DEFAULT_TIMEOUT = 120.0          # seconds per rule; a guard only
GRIDS = (Fraction(1), Fraction(1, 10), Fraction(1, 100), Fraction(1, 1000))
SOLVER = f"z3 {z3.get_version_string()}"


@attrs.frozen
class Solved:
    """What the solver found for one rule (plain data)."""

    verdict: str                      # holds, violated, vacuous, unknown
    world: dict | None = None         # inputs of the minimal counterexample or of the witness
    smt_values: dict | None = None    # the encoding's own values of derived names in that world
    minimal: bool = True              # every ladder step was decided
    reason: str = ""
    rlimit: int = 0
    checks: int = 0
    solver: str = SOLVER
    solver_seconds: float = 0.0       # wall time spent inside z3's check()


# z3 catches SIGINT during a check itself: the check returns unknown with this reason and
# Python never sees the signal. It is turned back into KeyboardInterrupt here, so that Ctrl-C
# stops the run instead of reading as an undecided check (retried by legs, then finished).
INTERRUPTED = "interrupted from keyboard"


def raise_if_interrupted(solver, result) -> None:
    """Raise KeyboardInterrupt if ``result`` of ``solver.check()`` is z3's answer to Ctrl-C."""
    if result == z3.unknown and solver.reason_unknown() == INTERRUPTED:
        raise KeyboardInterrupt


def check(solver, *assumptions):
    """``solver.check(*assumptions)``, with z3's answer to Ctrl-C turned back into
    KeyboardInterrupt: every check outside a session goes through here."""
    result = solver.check(*assumptions)
    raise_if_interrupted(solver, result)
    return result


class Budget:
    def __init__(self, timeout: float):
        self.deadline = time.monotonic() + timeout

    def left_ms(self) -> int:
        return max(1, int((self.deadline - time.monotonic()) * 1000))

    def spent(self) -> bool:
        return time.monotonic() >= self.deadline


def assert_all(s, *groups) -> None:
    """``s.add(*a, *b, ...)`` for Boolean terms of the solver's context, through the C API:
    the same assertions in the same order, without z3's Python coercions (a third of the time
    of a witness check on the two-group packs went to them)."""
    ref, ptr = s.ctx.ref(), s.solver
    for group in groups:
        for c in group:
            z3.z3core.Z3_solver_assert(ref, ptr, c.as_ast())


class SolverSession:
    """Budgeted checks over one encoding.

    Every check runs in a new solver (same context) over the base constraints, the facts
    fixed so far and the question asked. z3 answers these one-shot queries with its
    non-incremental engine, which here is orders of magnitude faster than its incremental
    one (a witness check went from 30 s to 0.01 s); it also keeps each answer independent of
    the history of earlier checks.
    """

    def __init__(self, enc: Encoding, rlimit: int, budget: Budget):
        self.enc = enc
        self.rlimit = rlimit
        self.budget = budget
        self.checks = 0
        self.skipped = 0        # questions answered by the model in hand (see witnessed)
        self.used = 0
        self.seconds = 0.0
        self.facts: list = []
        self.s = None
        self.model = None       # a model of the constraints and every fact so far, or None

    def check(self, *assumptions):
        s = z3.Solver(ctx=self.enc.ctx)
        s.set("rlimit", self.rlimit)
        s.set("timeout", self.budget.left_ms())
        assert_all(s, self.enc.constraints, self.facts, assumptions)
        self.checks += 1
        t0 = time.perf_counter()
        r = s.check()
        self.seconds += time.perf_counter() - t0
        raise_if_interrupted(s, r)
        try:
            # the count is kept per context, so the latest value is the total so far
            self.used = max(self.used, int(s.statistics().get_key_value("rlimit count")))
        except z3.Z3Exception:
            pass
        self.s = s
        if r == z3.sat:
            self.model = s.model()      # of the facts and the assumptions: of the facts
        return r

    def witnessed(self, *assumptions) -> bool:
        """Whether the model in hand already satisfies ``assumptions``: then a check of them
        would answer sat, and none is made (the answer, not the model, is what counts)."""
        m = self.model
        if m is None:
            return False
        if all(z3.is_true(m.evaluate(a, model_completion=True)) for a in assumptions):
            self.skipped += 1
            return True
        return False

    def settle(self):
        """sat with the model in hand (no check), else a check of the facts alone."""
        if self.model is not None:
            self.skipped += 1
            return z3.sat
        return self.check()

    def add(self, *c):
        self.facts.extend(c)
        if self.model is not None and not all(
                z3.is_true(self.model.evaluate(x, model_completion=True)) for x in c):
            self.model = None

    def rlimit_used(self) -> int:
        return self.used


def to_fraction(v) -> Fraction:
    if z3.is_int_value(v):
        return Fraction(v.as_long())
    if z3.is_rational_value(v):
        return Fraction(v.numerator_as_long(), v.denominator_as_long())
    if z3.is_algebraic_value(v):  # pragma: no cover - linear problems have rational models
        raise ValueError("irrational model value")
    raise ValueError(f"not a number: {v}")


class _Unknown(Exception):
    pass


class _Steps:
    """The steps of the minimisation ladder (DESIGN 6) over one session. Each step asks one
    incremental question; the answer (not the solver's model) decides the value, so the
    result is the lexicographically least grid point whatever model z3 returns."""

    def __init__(self, ses: SolverSession, budget: int | None = None):
        self.s = ses
        self.budget = budget        # z3 resource units the whole ladder may spend, or None
        self.start = ses.rlimit_used()

    def sat(self, *a) -> bool:
        if self.s.witnessed(*a):
            return True
        full = self.s.rlimit
        if self.budget is not None:
            left = self.budget - (self.s.rlimit_used() - self.start)
            if left <= 0:
                raise _Unknown("the minimisation budget ran out")
            self.s.rlimit = min(full, left)      # one check may not spend past the budget
        try:
            r = self.s.check(*a)
        finally:
            self.s.rlimit = full
        if r == z3.unknown:
            raise _Unknown(self.s.s.reason_unknown())
        return r == z3.sat

    def value_of(self, term) -> Fraction:
        """The value of ``term`` in the model in hand (a model of every fact so far)."""
        return to_fraction(self.s.model.evaluate(term, model_completion=True))

    def try_fix(self, c) -> bool:
        if self.sat(c):
            self.s.add(c)
            return True
        return False

    def try_fix_all(self, cs: list) -> list:
        """``[try_fix(c) for c in cs]``, asked first as one question: if every ``c`` can hold
        together, each one in turn can (the others only add facts that hold in that world), so
        the answers are the same and one check replaces ``len(cs)``."""
        if len(cs) > 1 and self.sat(z3.And(*cs)):
            self.s.add(*cs)
            return [True] * len(cs)
        return [self.try_fix(c) for c in cs]

    def fix_prefix(self, conds: list, tries: int = 2) -> int:
        """Fix the longest leading run of ``conds`` found in at most ``tries`` questions (all of
        them, then half as many, ...) that holds together with the facts; returns its length.

        Each ``c`` is the answer its ladder step gives when ``c`` is satisfiable with the facts
        and every earlier ``c`` (an Int or a Real at its lower bound, an error at 0), so a run
        that holds together is the answer of all its steps at once: the steps that follow see
        a model that already satisfies them and ask nothing."""
        k = len(conds)
        while k > 0 and tries > 0:
            if self.sat(*conds[:k]):
                self.s.add(*conds[:k])
                return k
            k, tries = k // 2, tries - 1
        return 0

    def least_index(self, pred, lo: int, hi: int, seen=None) -> int:
        """The least i in lo..hi with pred(i) satisfiable, given that pred(hi) is (monotone).

        ``seen()`` is the least i whose pred(i) the model in hand satisfies: after each
        satisfiable question the upper end drops to it. The first question is hi - 1 (z3's
        model is often already the least), then bisection. The answer is the same whatever
        models z3 returns; only the number of checks depends on them."""
        first = True
        while lo < hi:
            mid = hi - 1 if first and seen is not None else (lo + hi) // 2
            first = False
            if self.sat(pred(mid)):
                hi = mid if seen is None else max(lo, min(mid, seen()))
            else:
                lo = mid + 1
        return hi

    def least_int(self, term, lo: int) -> None:
        """Fix an Int-valued term to its least feasible value from lo up."""
        assert self.sat()
        top = int(self.value_of(term))
        v = self.least_index(lambda i: term <= i, lo, top, lambda: int(self.value_of(term)))
        self.s.add(term == v)

    def num(self, v: Fraction):
        return z3.RealVal(str(v), self.s.enc.ctx)

    def least_on_grid(self, x, low: Fraction) -> None:
        """Fix a Real to its least feasible value on the coarsest grid that has one.

        Bisection on "some feasible x <= v" (monotone, no integer variables), then an exact
        test of the grid point found (the feasible set need not be closed)."""
        num = self.num
        for g in GRIDS:
            assert self.sat()
            top = math.ceil(self.value_of(x) / g)
            i = self.least_index(lambda j: x <= num(j * g), math.floor(low / g), top,
                                 lambda: math.ceil(self.value_of(x) / g))
            for j in range(i, i + 3):
                if self.try_fix(x == num(j * g)):
                    return
        assert self.sat()
        self.s.add(x == num(self.value_of(x)))

    def least_magnitude(self, x) -> None:
        """Fix a signed value to its least magnitude on the coarsest grid; positive first."""
        num = self.num
        for g in GRIDS:
            assert self.sat()
            top = math.ceil(abs(self.value_of(x)) / g)
            i = self.least_index(lambda j: z3.And(x <= num(j * g), x >= num(-j * g)), 0, top,
                                 lambda: math.ceil(abs(self.value_of(x)) / g))
            for j in range(i, i + 3):
                if self.try_fix(x == num(j * g)) or self.try_fix(x == num(-j * g)):
                    return
        assert self.sat()
        self.s.add(x == num(self.value_of(x)))


def lower_bounds(constraints, terms: dict) -> dict:
    """The constant lower bounds that top-level constraints (or conjunctions of them) put on
    the terms of ``terms`` (a name -> term map): ``x >= c`` and ``c <= x``, by name. These hold
    in every model, so a ladder step may start its search there: the answer is the same and
    the questions below the bound, each a certain ``unsat``, are not asked.

    Read through z3's C API (the Python wrappers took 4 ms for the 139 constraints of a
    two-group encoding, a tenth of a ladder's questions)."""
    C = z3.z3core
    by_id = {t.get_id(): name for name, t in terms.items() if z3.is_const(t)}
    if not by_id:
        return {}
    ref = next(iter(terms.values())).ctx.ref()
    app = z3.Z3_APP_AST

    def kind(a):
        return C.Z3_get_decl_kind(ref, C.Z3_get_app_decl(ref, a))

    lows: dict = {}
    todo = [c.as_ast() for c in constraints]
    while todo:
        a = todo.pop()
        if C.Z3_get_ast_kind(ref, a) != app:
            continue
        k = kind(a)
        if k == z3.Z3_OP_AND:
            todo.extend(C.Z3_get_app_arg(ref, a, i) for i in range(C.Z3_get_app_num_args(ref, a)))
            continue
        if k not in (z3.Z3_OP_GE, z3.Z3_OP_LE) or C.Z3_get_app_num_args(ref, a) != 2:
            continue
        x, v = C.Z3_get_app_arg(ref, a, 0), C.Z3_get_app_arg(ref, a, 1)
        if k == z3.Z3_OP_LE:
            x, v = v, x
        name = by_id.get(C.Z3_get_ast_id(ref, x))
        if name is None or C.Z3_get_ast_kind(ref, v) != z3.Z3_NUMERAL_AST:
            continue
        low = Fraction(C.Z3_get_numeral_string(ref, v))
        lows[name] = max(lows.get(name, low), low)
    return lows


def later_groups(I: dict) -> list:
    """The prefixes of the route's later groups among the inputs: g2, g3, ... (DESIGN 4.10)."""
    return [f"g{k}" for k in range(2, 9) if f"g{k}.distance" in I]


def _inputs_step3(K: int, later) -> list:
    """Step (3) of the ladder, in its documented order: ``(kind, input, least)`` where kind is
    ``int`` (least whole value from ``least`` up) or ``grid`` (least value on the coarsest grid
    that has one)."""
    steps = [("int", "lrbg.read", 1), ("int", "lrbg.locacc", 0), ("grid", "train.length", 0),
             ("grid", "train.antenna", 0)]
    for n in later:
        steps += [("int", f"{n}.read", 1), ("int", f"{n}.locacc", 0), ("grid", f"{n}.distance", 0),
                  ("int", f"{n}.at", 0)]
    return steps + [("grid", f"legs.{i}.distance", 0) for i in range(1, K + 1)]


def _at_bounds(I: dict, steps: list, low, num) -> list:
    """``steps`` (step (3)) as equalities of each input with its lower bound, up to the first
    step whose answer at its bound would not be that bound (a Real bound off the whole-metre
    grid: the step fixes the coarsest grid first)."""
    out = []
    for kind, name, least in steps:
        v = low(name, Fraction(least))
        if kind == "int":
            out.append(I[name] == math.ceil(v))
        elif v.denominator == 1:
            out.append(I[name] == num(v))
        else:
            break
    return out


def run_ladder(ses: SolverSession, enc: Encoding) -> bool:
    """Fix every input by the fixed ladder of DESIGN 6. Returns whether every step was decided."""
    return ladder(ses, enc.inputs, enc.K, enc.terms["legs.count"], enc.terms["cab_changes"])


def ladder(ses: SolverSession, I: dict, K: int, count, cab_changes, more=None,
           budget: int | None = None) -> bool:
    """The ladder of DESIGN 6 over the inputs ``I`` of up to ``K`` legs, with ``count`` and
    ``cab_changes`` the terms its first step minimises; ``more(steps)`` fixes further values
    (a state's, for a counterexample to induction) after the inputs and before the Booleans.
    ``budget``: what the whole ladder may spend in z3's deterministic resource units (None: only
    each check's own rlimit); when it runs out the steps left are not decided, the same on
    every machine. Returns whether every step was decided."""
    L = _Steps(ses, budget)
    lows = lower_bounds(ses.enc.constraints, I)

    def low(name: str, least):
        """Where the search for ``name`` may start: ``least``, or the scope's bound above it."""
        return max(least, lows.get(name, least))

    try:
        # (1) fewest legs, then fewest cab changes, then fewest balises
        L.least_int(count, 0)
        L.least_int(cab_changes, 0)
        L.least_int(I["lrbg.balises"], math.ceil(low("lrbg.balises", 1)))
        later = later_groups(I)                   # the route's later groups (DESIGN 4.8, 4.10): likewise
        for n in later:
            L.least_int(I[f"{n}.balises"], math.ceil(low(f"{n}.balises", 1)))
        # (2) each error to 0 where possible
        errors = [I["lrbg.offset"], I["passage.detect_error"]] + [
            I[f"legs.{i}.odometer"] - I[f"legs.{i}.distance"] for i in range(1, K + 1)]
        for n in later:
            errors += [I[f"{n}.offset"], I[f"{n}.detect_error"]]
        zeroed = L.try_fix_all([e == 0 for e in errors])
        # (3) every other input to its least feasible value, in this documented order; first
        # as many of them as can be at their lower bounds together, in one question
        step3 = _inputs_step3(K, later)
        L.fix_prefix(_at_bounds(I, step3, low, L.num))
        for kind, name, least in step3:
            if kind == "int":
                L.least_int(I[name], math.ceil(low(name, least)))
            else:
                L.least_on_grid(I[name], low(name, Fraction(least)))
        for e, z in zip(errors, zeroed):
            if not z:
                L.least_magnitude(e)
        if more is not None:
            more(L)
        # (4) Booleans false first, enums in declaration order
        first = [z3.Not(I["lrbg.linked"])]
        for n in later:
            first += [z3.Not(I[f"{n}.linked"]), z3.Not(I[f"{n}.found"])] + (
                [I["g2.side"] == 1] if n == "g2" else []) + [I[f"{n}.orientation"] == 1]
        first += [z3.Not(I[f"legs.{i}.cab_change"]) for i in range(1, K + 1)]
        first += [I["passage.direction"] == 1,          # nominal before reverse
                  I["passage.running"]]                  # forward before backward
        first += [I[f"legs.{i}.running"] for i in range(1, K + 1)]
        L.try_fix_all(first)
    except _Unknown:
        return False
    return True


def check_whole_or_by_legs(ses: SolverSession) -> tuple:
    """The session's question as one check; if that is left undecided (budget), asked again for
    each number of legs, fewest first, as separate one-shot checks (the cases cover every world
    in scope, since 0 <= legs.count <= K is a world constraint). Returns ``(result, reason)``:
    on ``sat`` after a split, ``legs.count == k`` (the fewest legs of a satisfying world) is
    added to the session and its last solver holds that case's model; ``reason`` says why for
    ``unknown``, else "".

    Measured on the confidence-interval envelope rules at K = 4: the whole question ran out of
    the default rlimit (500M, 15 s) while the five cases took 0.0 to 10.6 s each (14 s in all)."""
    r = ses.check()
    if r != z3.unknown:
        return r, ""
    if ses.enc.K == 0 or ses.budget.spent():
        return r, ses.s.reason_unknown() or "budget exhausted"
    count = ses.enc.terms["legs.count"]
    for k in range(ses.enc.K + 1):
        r = ses.check(count == k)
        if r == z3.sat:
            ses.add(count == k)      # the least count: every smaller case is unsat
            return r, ""
        if r == z3.unknown:
            return r, f"{ses.s.reason_unknown() or 'budget exhausted'} (case legs.count == {k})"
    return z3.unsat, ""


def read_world(model, enc: Encoding) -> dict:
    """The inputs of a model as plain data, legs beyond legs.count left out."""
    ev = lambda t: model.evaluate(t, model_completion=True)  # noqa: E731
    I = enc.inputs
    count = ev(I["legs.count"]).as_long()
    world = {
        "balises": ev(I["lrbg.balises"]).as_long(),
        "read": ev(I["lrbg.read"]).as_long(),
        "linked": z3.is_true(ev(I["lrbg.linked"])),
        "locacc": to_fraction(ev(I["lrbg.locacc"])),
        "offset": to_fraction(ev(I["lrbg.offset"])),
        "length": to_fraction(ev(I["train.length"])),
        "antenna": to_fraction(ev(I["train.antenna"])),
        "direction": "nominal" if ev(I["passage.direction"]).as_long() == 1 else "reverse",
        "running": "forward" if z3.is_true(ev(I["passage.running"])) else "backward",
        "detect_error": to_fraction(ev(I["passage.detect_error"])),
        "legs": [],
    }
    for n in later_groups(I):
        world[n] = read_group(ev, I, n)
    for i in range(1, count + 1):
        world["legs"].append({
            "cab_change": z3.is_true(ev(I[f"legs.{i}.cab_change"])),
            "running": "forward" if z3.is_true(ev(I[f"legs.{i}.running"])) else "backward",
            "distance": to_fraction(ev(I[f"legs.{i}.distance"])),
            "odometer": to_fraction(ev(I[f"legs.{i}.odometer"])),
        })
    return world


def read_group(ev, I: dict, n: str) -> dict:
    """Later group ``n`` (g2 .. g8) of a model as plain data; ``ev`` evaluates a term."""
    g = {k: ev(I[f"{n}.{k}"]) for k in ("distance", "side", "orientation", "balises", "read",
                                        "linked", "locacc", "offset", "found", "at", "detect_error")}
    word = {1: "nominal", -1: "reverse"}
    return {"distance": to_fraction(g["distance"]), "side": word[g["side"].as_long()],
            "orientation": word[g["orientation"].as_long()], "balises": g["balises"].as_long(),
            "read": g["read"].as_long(), "linked": z3.is_true(g["linked"]),
            "locacc": to_fraction(g["locacc"]), "offset": to_fraction(g["offset"]),
            "found": z3.is_true(g["found"]), "at": g["at"].as_long(),
            "detect_error": to_fraction(g["detect_error"])}


_DIR_WORD = {1: "nominal", -1: "reverse", 0: "unknown"}


def read_values(model, enc: Encoding, names) -> dict:
    """The encoding's value of each vocabulary name in a model, as plain data."""
    out = {}
    for name in names:
        term = enc.name(name)
        v = model.evaluate(term, model_completion=True)
        ty = GLOBAL[name].ty
        if ty == "Bool":
            out[name] = z3.is_true(v)
        elif ty == "Running":
            out[name] = "forward" if z3.is_true(v) else "backward"
        elif ty == "Direction":
            out[name] = _DIR_WORD[v.as_long()]
        else:
            out[name] = to_fraction(v)
    return out


# The derived names compared between the encoding and the simulator after each solve.
COMPARED = ("passage.seen", "passage.actual_front", "passage.est_front", "cab_changes", "actual.front", "actual.rear", "actual.orientation",
            "actual.motion", "actual.travelled", "est.front", "est.rear", "est.orientation", "est.motion",
            "est.travelled", "est.d_lrbg", "est.l_doubtover", "est.l_doubtunder",
            "report.q_dlrbg", "report.q_dirlrbg", "report.q_dirtrain", "report.d_lrbg",
            "report.l_doubtover", "report.l_doubtunder", "report.q_scale", "report.in_range",
            "report.code.d_lrbg", "report.code.l_doubtover", "report.code.l_doubtunder",
            "rbc.placed", "rbc.est_front", "rbc.max_safe_front", "rbc.min_safe_front",
            "rbc.min_safe_rear")


def lemma_facts(enc: Encoding, lemmas) -> list:
    """``given implies expect`` of each lemma over ``enc``: facts to add to a bounded question
    when the lemmas are already proved over every world it covers.

    A proved lemma is true in every world in scope, so the facts remove none of them: the
    violating worlds, the worlds of the given, and so the verdict, the minimal counterexample
    and the witness are exactly those of the question without them. What changes is z3's
    work: the envelope rules of confidence-interval at 3 legs took 1.2 to 3.9 s each without
    the reading-error lemma and 0.07 to 0.21 s with it. Only the engine decides which lemmas
    are proved (``verifier.run.engine``); a lemma that is not must never come here."""
    return [z3.Implies(enc.given(lemma), enc.expect(lemma)) for lemma in lemmas]


def solve_rule(pack: Pack, rule: Rule, bound: int, *, rlimit: int = DEFAULT_RLIMIT,
               timeout: float = DEFAULT_TIMEOUT, witness: bool = True,
               assume: tuple = ()) -> Solved:
    """Decide one rule up to ``bound`` legs in a fresh context (``assume``: proved lemmas, see
    :func:`lemma_facts`)."""
    ctx = z3.Context()
    budget = Budget(timeout)
    enc = Encoding(pack, bound, ctx)
    given = enc.given(rule)
    expect = enc.expect(rule)
    for name in COMPARED:
        enc.name(name)
    enc.constraints.extend(lemma_facts(enc, assume))
    return decide(enc, given, expect, rlimit=rlimit, budget=budget, witness=witness)


def decide(enc, given, expect, *, rlimit: int = DEFAULT_RLIMIT, budget: Budget | None = None,
           witness: bool = True) -> Solved:
    """The verdict, witness and minimal world of ``given and not expect`` over ``enc``.

    ``enc`` is an :class:`Encoding` or anything with its ``ctx``, ``K``, ``constraints``,
    ``inputs``, ``terms["legs.count"]``, ``terms["cab_changes"]`` and ``name()`` (for
    example a problem parsed back from SMT-LIB text, see :mod:`verifier.smt.smtlib`)."""
    budget = budget or Budget(DEFAULT_TIMEOUT)
    # Two solvers: the first asks for a violation in one non-incremental check (z3's fastest
    # mode here); the second decides vacuity and finds the witness.
    ses = SolverSession(enc, rlimit, budget)
    ses.add(given, z3.Not(expect))
    checks = rl = 0
    secs = 0.0

    def finish(verdict, *, world=None, values=None, minimal=True, reason="", last=ses):
        return Solved(verdict, world, values, minimal, reason, max(rl, last.rlimit_used()),
                      checks + last.checks, SOLVER, secs + last.seconds)

    r, why = check_whole_or_by_legs(ses)
    if r == z3.sat:
        # keep the first violating world: if the budget runs out while minimising, it is still
        # a counterexample (reported as not minimal, and replayed like any other)
        first = ses.model
        first_world, first_values = read_world(first, enc), read_values(first, enc, COMPARED)
        decided = run_ladder(ses, enc)
        if ses.settle() != z3.sat:   # the budget ran out on the final question
            return finish("violated", world=first_world, values=first_values, minimal=False,
                          reason="minimisation stopped by the budget")
        model = ses.model
        return finish("violated", world=read_world(model, enc),
                      values=read_values(model, enc, COMPARED), minimal=decided,
                      reason="" if decided else "minimisation stopped by the budget")
    if r == z3.unknown:
        return finish("unknown", reason=why)
    checks, rl, secs = ses.checks, ses.rlimit_used(), ses.seconds
    wit = SolverSession(enc, rlimit, budget)
    wit.add(given)
    r, why = check_whole_or_by_legs(wit)
    if r == z3.unknown:
        return finish("unknown", reason=f"given: {why}", last=wit)
    if r == z3.unsat:
        return finish("vacuous", reason="no world in scope satisfies the given", last=wit)
    if not witness:
        return finish("holds", last=wit)
    wit.add(expect)
    if wit.settle() != z3.sat:
        return finish("holds", reason="no witness found within the budget", last=wit)
    decided = run_ladder(wit, enc)
    if wit.settle() != z3.sat:  # pragma: no cover
        return finish("holds", reason="witness lost", last=wit)
    model = wit.model
    return finish("holds", world=read_world(model, enc), values=read_values(model, enc, COMPARED),
                  minimal=decided, last=wit)


def _and_items(node) -> list:
    if isinstance(node, ast.Binary) and node.op == "and":
        return _and_items(node.left) + _and_items(node.right)
    return [node]


def vacuity_core(pack: Pack, rule: Rule, bound: int, *, rlimit: int = DEFAULT_RLIMIT,
                 timeout: float = 10.0) -> list[str] | None:
    """For a vacuous rule: the parts of its given (top-level ``and`` items, and the implicit
    premise) that together cannot hold in the scope, as text; None if that is not decided."""
    ctx = z3.Context()
    enc = Encoding(pack, bound, ctx)
    items = []
    if rule.premise_legs:
        items.append((f"legs.count >= {rule.premise_legs} (implicit, from legs[{rule.premise_legs}])",
                      enc.terms["legs.count"] >= rule.premise_legs))
    if rule.given is not None:
        for node in _and_items(rule.given.node):
            items.append((rule.given.text[node.start:node.end], enc.expr(node, {})))
    s = z3.Solver(ctx=ctx)
    s.set("rlimit", rlimit)
    s.set("timeout", int(timeout * 1000))
    s.add(*enc.constraints)
    marks = []
    for i, (_, term) in enumerate(items):
        mark = z3.Bool(f"given!{i}", ctx)
        s.add(z3.Implies(mark, term))
        marks.append(mark)
    r = s.check(*marks)
    raise_if_interrupted(s, r)
    if r != z3.unsat:
        return None
    core = {str(c) for c in s.unsat_core()}
    return [text for (text, _), mark in zip(items, marks) if str(mark) in core]
