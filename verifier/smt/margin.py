"""Margins of a rule that holds (DESIGN 9): its slack, the thresholds of the [world] bounds it
holds up to, and the named assumptions its proof needs.

Every value is found by one-shot checks (as in :mod:`verifier.smt.solve`) whose answers, not
models, decide it: bisection on exact grid points, then an exact check of the value found.
z3's ``Optimize`` was tried for the slack and gave different least values for one rule at 1
and at 2 legs, the larger bound's above the smaller's (it cannot be: the worlds of 1 leg are
among those of 2), so it is not used. A check the budget leaves undecided makes the answer
``unknown``, never a number.
"""

from __future__ import annotations

import math
from fractions import Fraction

import attrs
import z3

from verifier.check.model import Pack, Rule
from verifier.lang import ast
from verifier.lang.ast import COUNT, LENGTH, NUMBER, ZERO
from verifier.lang.scope import VARY, Scope, bound_of, with_bound
from verifier.smt.encode import Encoding
from verifier.smt.solve import (COMPARED, DEFAULT_RLIMIT, Budget, SolverSession, ladder, lemma_facts,
                                read_values, read_world, to_fraction)

LENGTH_GRID = Fraction(1, 1000)     # slacks are found to the millimetre, then checked exactly
NUMBER_GRID = Fraction(1, 1000000)
MAX_CHECKS = 60                     # a search stops (with a range, not a value) after this many
# What the minimisation of a world past a threshold may spend (z3's deterministic units): at an
# odd value such as a rate of 5.0001 % the full ladder took a minute on safe-rear-end at 1 leg;
# the world is then reported as not fully minimised, the same on every machine.
LADDER_BUDGET = 30_000_000


class Undecided(Exception):
    """A check the budget left undecided: the answer is unknown."""


@attrs.frozen
class Slack:
    """How far one comparison of a rule's expect is from failing, over the worlds in scope
    where its given holds."""

    part: str                    # the comparison, as written
    status: str                  # tight, slack, range, equality, unknown
    low: Fraction | None = None  # the least value lies in [low, high]; low == high: exact
    high: Fraction | None = None
    unit: str = "m"
    world: dict | None = None    # a world where the value is ``high``
    values: dict | None = None   # the encoding's values of solve.COMPARED there
    reason: str = ""
    index: int = 0               # which of comparisons(rule) (a chain has one a pair)


@attrs.frozen
class Threshold:
    """How far one [world] bound of the real world may move before the rule fails."""

    key: str
    way: str                      # up or down
    stated: Fraction              # the pack's value
    status: str                   # exact, range, beyond (holds up to the search limit), unknown,
                                  # not_needed (the rule holds whatever the bound is)
    holds_at: Fraction | None = None    # the furthest value at which the rule was shown to hold
    fails_at: Fraction | None = None    # the nearest value at which a violating world was found
    world: dict | None = None     # the (minimal) violating world at fails_at
    values: dict | None = None
    minimal: bool = True
    checks: int = 0
    reason: str = ""


@attrs.frozen
class Core:
    """The named assumptions a proof needs: removing any one of ``needed`` lets a violating world
    in (each checked), and ``not_needed`` can all go together."""

    needed: tuple
    not_needed: tuple
    undecided: tuple = ()         # kept because a check of them was left undecided
    checks: int = 0


class _Asker:
    """One-shot checks of ``given and question`` over fresh sessions of one encoding."""

    def __init__(self, enc, facts: list, rlimit: int, budget: Budget):
        self.enc, self.facts, self.rlimit, self.budget = enc, facts, rlimit, budget
        self.checks = 0

    def ask(self, *question):
        ses = SolverSession(self.enc, self.rlimit, self.budget)
        ses.add(*self.facts)
        r = ses.check(*question)
        self.checks += 1
        if r == z3.unknown:
            raise Undecided(ses.s.reason_unknown() or "budget exhausted")
        return ses.model if r == z3.sat else None


def comparisons(rule: Rule) -> list:
    """The top-level ``and`` items of the expect that are numeric comparisons: (text, left,
    op, right) for every adjacent pair of a chain; non-numeric items are left out."""
    out = []

    def items(node):
        if isinstance(node, ast.Binary) and node.op == "and":
            return items(node.left) + items(node.right)
        return [node]

    text = rule.expect.text
    for node in items(rule.expect.node):
        if not isinstance(node, ast.Chain):
            continue
        ops = node.operands
        if ops[0].ty not in (LENGTH, NUMBER, COUNT, ZERO) and ops[1].ty not in (LENGTH, NUMBER, COUNT, ZERO):
            continue
        for op, a, b in zip(node.ops, ops, ops[1:]):
            if op == "!=":
                continue
            out.append((text[node.start:node.end], a, op, b))
    return out


def _unit(a, b) -> str:
    return "m" if LENGTH in (a.ty, b.ty) else ""


def _grid_floor(x: Fraction, g: Fraction) -> Fraction:
    return math.floor(x / g) * g


def slacks(pack: Pack, rule: Rule, bound: int, *, assume: tuple = (), rlimit: int = DEFAULT_RLIMIT,
           timeout: float = 120.0) -> list[Slack]:
    """The slack of each numeric comparison of ``rule``'s expect (a rule that holds)."""
    out = []
    parts = comparisons(rule)
    if not parts:
        return out
    enc = Encoding(pack, bound, z3.Context())       # one encoding for every part (checks are one-shot)
    for name in COMPARED:
        enc.name(name)
    facts = [enc.given(rule), *lemma_facts(enc, assume)]
    for index, (text, a_node, op, b_node) in enumerate(parts):
        a, b = enc.expr(a_node, {}), enc.expr(b_node, {})
        unit = _unit(a_node, b_node)
        if op == "==":
            out.append(Slack(text, "equality", Fraction(0), Fraction(0), unit,
                             reason="an equality has no slack", index=index))
            continue
        s = (b - a) if op in ("<=", "<") else (a - b)
        if z3.is_int(s):
            s = z3.ToReal(s)
        asker = _Asker(enc, facts, rlimit, Budget(timeout))
        grid = LENGTH_GRID if unit == "m" else NUMBER_GRID
        try:
            out.append(attrs.evolve(_least(asker, enc, s, text, unit, grid), index=index))
        except Undecided as exc:
            out.append(Slack(text, "unknown", unit=unit, reason=str(exc), index=index))
    return out


def _least(asker: _Asker, enc, s, text: str, unit: str, grid: Fraction) -> Slack:
    zero = z3.RealVal(0, enc.ctx)

    def val(model):
        return to_fraction(model.evaluate(s, model_completion=True))

    def found(model, status, low, high):
        return Slack(text, status, low, high, unit, read_world(model, enc),
                     read_values(model, enc, COMPARED))

    m = asker.ask(s <= zero)
    if m is not None:
        if val(m) < 0:      # the rule would be violated: not a rule that holds
            return Slack(text, "unknown", unit=unit, reason="a world violates this part")
        return found(m, "tight", Fraction(0), Fraction(0))
    m = asker.ask()
    if m is None:
        return Slack(text, "unknown", unit=unit, reason="no world satisfies the given")
    best, lo = m, Fraction(0)        # none <= lo; val(best) is attained
    while val(best) - lo > grid and asker.checks < MAX_CHECKS:
        mid = _grid_floor((lo + val(best)) / 2, grid)
        if mid <= lo:
            mid = lo + grid
        if mid >= val(best):
            break
        m2 = asker.ask(s <= z3.RealVal(str(mid), enc.ctx))
        if m2 is None:
            lo = mid
        else:
            best = m2
    # exact: is there anything below the best value found? a few descents settle most cases
    for _ in range(4):
        m2 = asker.ask(s < z3.RealVal(str(val(best)), enc.ctx))
        if m2 is None:
            return found(best, "slack", val(best), val(best))
        best = m2
    # not settled: the least value is in [lo, val(best)], or (a strict comparison, or an
    # infimum that no world reaches) approached without being reached
    return found(best, "range", lo, val(best))


# ---- thresholds -------------------------------------------------------------------------
def _violation(pack: Pack, rule: Rule, bound: int, world: Scope, rlimit: int, budget: Budget):
    """Whether some world of the real world ``world`` satisfies ``given and not expect``."""
    ctx = z3.Context()
    enc = Encoding(pack, bound, ctx, world=world)
    asker = _Asker(enc, [enc.given(rule), z3.Not(enc.expect(rule))], rlimit, budget)
    return asker.ask() is not None


def threshold(pack: Pack, rule: Rule, bound: int, key: str, *, rlimit: int = DEFAULT_RLIMIT,
              timeout: float = 120.0) -> Threshold:
    """The furthest value of the real world's bound ``key`` (moved alone, the designs keep the
    pack's values) at which ``rule`` still holds up to ``bound`` legs, to ``VARY[key].grid``,
    with the minimal violating world just past it. Proved lemmas are not assumed: they were
    proved with the pack's bounds."""
    v = VARY[key]
    stated = Fraction(bound_of(pack.scope, key))
    budget = Budget(timeout)
    sign = 1 if v.way == "up" else -1
    checks = 0

    def fails(x: Fraction) -> bool:
        nonlocal checks
        checks += 1
        return _violation(pack, rule, bound, with_bound(pack.scope, key, x), rlimit, budget)

    def done(status, holds_at, fails_at, reason=""):
        if fails_at is None:
            return Threshold(key, v.way, stated, status, holds_at, None, checks=checks, reason=reason)
        enc = Encoding(pack, bound, z3.Context(), world=with_bound(pack.scope, key, fails_at))
        given, expect = enc.given(rule), enc.expect(rule)
        for name in COMPARED:
            enc.name(name)
        ses = SolverSession(enc, rlimit, budget)
        ses.add(given, z3.Not(expect))
        if ses.check() != z3.sat:
            return Threshold(key, v.way, stated, "unknown", holds_at, fails_at, checks=checks + ses.checks,
                             reason="the violating world was lost")
        first = ses.model
        decided = ladder(ses, enc.inputs, enc.K, enc.terms["legs.count"], enc.terms["cab_changes"],
                         budget=LADDER_BUDGET)
        model = ses.model if ses.settle() == z3.sat else first
        return Threshold(key, v.way, stated, status, holds_at, fails_at, read_world(model, enc),
                         read_values(model, enc, COMPARED), decided,
                         checks + ses.checks, reason)

    if v.way == "down" and stated <= v.limit:
        return Threshold(key, v.way, stated, "beyond", stated, None,
                         reason=f"the range already starts at {v.limit}")
    try:
        # A wider real world holds every world of a narrower one, so a violation at a value is
        # one at every value further out: one step past the pack's value (a tight rule fails
        # there), then the end of the search (most bounds do not matter to most rules), then
        # outwards by doubling steps and back by bisection.
        held, step = stated, v.grid
        x = stated + sign * step
        start = max(abs(stated), Fraction(1)) / 8
        end_checked = False
        while True:
            if (v.way == "up" and x >= v.limit) or (v.way == "down" and x <= v.limit):
                x = v.limit
            if x == v.limit and end_checked:
                failed = x
                break
            if fails(x):
                failed = x
                break
            held = x
            if x == v.limit:
                return done("beyond", held, None, "holds up to the end of the search")
            if not end_checked:
                if not fails(v.limit):
                    return done("beyond", v.limit, None, "holds up to the end of the search")
                end_checked = True
            step = start if step == v.grid else step * 2
            x = _snap(stated + sign * step, v.grid, v.way)
        while abs(failed - held) > v.grid and checks < MAX_CHECKS:
            mid = _snap((held + failed) / 2, v.grid, v.way)
            if mid == held or mid == failed:
                break
            if fails(mid):
                failed = mid
            else:
                held = mid
        status = "exact" if abs(failed - held) <= v.grid else "range"
        return done(status, held, failed)
    except Undecided as exc:
        return Threshold(key, v.way, stated, "unknown", checks=checks, reason=str(exc))


def _snap(x: Fraction, g: Fraction, way: str) -> Fraction:
    """A grid point next to ``x`` on the side of the pack's value."""
    k = x / g
    return (math.floor(k) if way == "up" else math.ceil(k)) * g


def moved_by(pack: Pack, bound: int, key: str) -> frozenset | None:
    """The named assumptions (see :func:`core`) whose constraints change when the real world's
    bound ``key`` moves, found by encoding the pack's world (every compared value, so the whole
    world is built; the named constraints are the world's, whatever the rule) at the pack's
    value and at another and comparing the constraints; None when a constraint that is not named
    changes too (then no core can say the bound does not matter)."""
    v = VARY[key]
    stated = Fraction(bound_of(pack.scope, key))
    other = stated + v.grid if v.way == "up" or stated - v.grid < v.limit else stated - v.grid
    if other == stated:
        return None
    texts = []
    for scope in (pack.scope, with_bound(pack.scope, key, other)):
        enc = Encoding(pack, bound, z3.Context(), world=scope)
        for name in COMPARED:
            enc.name(name)
        tracked = {c.get_id() for cs in enc.named.values() for c in cs}
        texts.append(({n: [c.sexpr() for c in cs] for n, cs in enc.named.items()},
                      [c.sexpr() for c in enc.constraints if c.get_id() not in tracked]))
    (named_a, base_a), (named_b, base_b) = texts
    if base_a != base_b or set(named_a) != set(named_b):
        return None
    return frozenset(n for n in named_a if named_a[n] != named_b[n])


def not_needed(key: str, stated: Fraction, way: str, names) -> Threshold:
    """The threshold of a bound whose constraints the proof does not need (all of ``names``
    can go together and the rule still holds): it holds whatever the bound is."""
    return Threshold(key, way, stated, "not_needed",
                     reason="the proof does not need " + ", ".join(sorted(names)))


# ---- the assumptions a proof needs ------------------------------------------------------
def core(pack: Pack, rule: Rule, bound: int, *, rlimit: int = DEFAULT_RLIMIT,
         timeout: float = 120.0) -> Core:
    """The named assumptions (each [world] bound, each design formula the rule reads) that the
    proof of ``rule`` up to ``bound`` legs needs: deletion in a fixed order (drop one, ask
    again; it stays out if the rule still holds), so the answer depends on the solver's
    answers only. Every one left is needed: without it alone a violating world exists."""
    ctx = z3.Context()
    enc = Encoding(pack, bound, ctx)
    given, expect = enc.given(rule), enc.expect(rule)
    names = sorted(enc.named, key=lambda n: (not n.startswith("world."), n))
    tracked = {c.get_id() for cs in enc.named.values() for c in cs}
    base = [c for c in enc.constraints if c.get_id() not in tracked]
    budget = Budget(timeout)
    checks = 0

    def holds(kept) -> bool | None:
        nonlocal checks
        checks += 1
        s = SolverSession(_Bare(enc, base), rlimit, budget)
        r = s.check(given, z3.Not(expect), *[c for n in kept for c in enc.named[n]])
        return None if r == z3.unknown else r == z3.unsat

    kept, dropped, undecided = list(names), [], []
    for n in names:
        trial = [k for k in kept if k != n]
        h = holds(trial)
        if h is None:
            undecided.append(n)
        elif h:
            kept, dropped = trial, dropped + [n]
    return Core(tuple(k for k in kept if k not in undecided), tuple(dropped), tuple(undecided), checks)


@attrs.frozen
class _Bare:
    """An encoding's context and constraints without its tracked assumptions (for a session)."""

    enc: object
    constraints: list

    @property
    def ctx(self):
        return self.enc.ctx


def needed_alone(pack: Pack, rule: Rule, bound: int, name: str, *, rlimit: int = DEFAULT_RLIMIT,
                 timeout: float = 60.0) -> bool | None:
    """Whether a violating world exists with every assumption but ``name`` (one solve)."""
    found = world_without(pack, rule, bound, name, rlimit=rlimit, timeout=timeout)
    return None if found is None else found is not False


def world_without(pack: Pack, rule: Rule, bound: int, name: str, *, rlimit: int = DEFAULT_RLIMIT,
                  timeout: float = 60.0):
    """A violating world (inputs as plain data) with every assumption but ``name``; False if
    there is none, None if the check is undecided."""
    ctx = z3.Context()
    enc = Encoding(pack, bound, ctx)
    given, expect = enc.given(rule), enc.expect(rule)
    drop = {c.get_id() for c in enc.named[name]}
    kept = [c for c in enc.constraints if c.get_id() not in drop]
    s = SolverSession(_Bare(enc, kept), rlimit, Budget(timeout))
    r = s.check(given, z3.Not(expect))
    if r == z3.unknown:
        return None
    return read_world(s.model, enc) if r == z3.sat else False
