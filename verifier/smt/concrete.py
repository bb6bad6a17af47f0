"""The SMT encoding evaluated on one concrete world (for differential testing).

The encoding of :mod:`verifier.smt.encode` describes every world of a pack at once. Here its
inputs are fixed to one plain world (the ``world`` data of a scenario, DESIGN 6) and the solver
is asked for the values of every vocabulary name, per-leg field, ``let``, and every rule's
``given`` and ``expect``. The answer is plain data (Fractions, bools, words), so that it can be
compared with the simulator by code that never sees a z3 term.

One :class:`Evaluator` per (pack, bound) encodes everything once and answers each world with a
single solver check under assumptions, so thousands of worlds can be evaluated quickly.
"""

from __future__ import annotations

from fractions import Fraction

import attrs
import z3

from verifier.check.model import Pack
from verifier.lang import ast
from verifier.lang.numbers import counted
from verifier.lang.vocab import GLOBAL, INFO_FIELDS, LEG, info_fields_for, names_for
from verifier.smt import solve
from verifier.smt.encode import Encoding
from verifier.smt.solve import COMPARED, read_world, to_fraction

_DIR_WORD = {1: "nominal", -1: "reverse", 0: "unknown"}


@attrs.frozen
class Concrete:
    """The encoding's values in one world (plain data).

    ``scope_ok`` is False when the encoding's constraints reject the world's inputs (the world
    is outside the scope as the encoding sees it); then everything else is empty. ``unique`` is
    None when uniqueness was not asked, else whether the inputs determine every value.
    """

    scope_ok: bool
    values: dict = {}
    legs: tuple = ()
    lets: dict = {}
    given: dict = {}          # rule id -> bool (with the implicit premise)
    expect: dict = {}         # rule id -> bool
    unique: bool | None = None
    ambiguous: tuple = ()     # names whose value the inputs do not determine


def plain_value(v, ty: str):
    if ty == "Bool":
        return z3.is_true(v)
    if ty == "Running":
        return "forward" if z3.is_true(v) else "backward"
    if ty == "Direction":
        return _DIR_WORD[v.as_long()]
    return to_fraction(v)


def _num(x) -> Fraction:
    return x if isinstance(x, Fraction) else Fraction(str(x))


def group_assumptions(I: dict, n: str, g: dict, ctx) -> list:
    """Assumptions that fix later group ``n``'s inputs ``I`` to plain data ``g`` (as
    :func:`verifier.smt.solve.read_group` gives it)."""
    code = {"nominal": 1, "reverse": -1}

    def real(x):
        return z3.RealVal(str(_num(x)), ctx)

    return [I[f"{n}.distance"] == real(g["distance"]), I[f"{n}.side"] == code[g["side"]],
            I[f"{n}.orientation"] == code[g["orientation"]], I[f"{n}.balises"] == int(g["balises"]),
            I[f"{n}.read"] == int(g["read"]), I[f"{n}.linked"] == z3.BoolVal(bool(g["linked"]), ctx),
            z3.ToReal(I[f"{n}.locacc"]) == real(g["locacc"]), I[f"{n}.offset"] == real(g["offset"]),
            I[f"{n}.found"] == z3.BoolVal(bool(g["found"]), ctx), I[f"{n}.at"] == int(g["at"]),
            I[f"{n}.detect_error"] == real(g["detect_error"])]


class Evaluator:
    """The encoding of one pack up to ``bound`` legs, ready to be evaluated world by world."""

    def __init__(self, pack: Pack, bound: int, timeout: float = 20.0):
        self.pack = pack
        self.bound = bound
        self.ctx = z3.Context()
        enc = self.enc = Encoding(pack, bound, self.ctx)
        self.terms: list = []          # (kind, key, type, term)
        for name in names_for(pack.scope.groups):
            self.terms.append(("name", name, GLOBAL[name].ty, enc.name(name)))
        for item in pack.infos:      # trackside information items (DESIGN 4.9)
            for field in info_fields_for(pack.scope.groups):
                ty = INFO_FIELDS[field][0]
                self.terms.append(("name", f"info.{item.id}.{field}", ty, enc.info_term(item.id, field)))
        for i in range(1, bound + 1):
            for field, entry in LEG.items():
                self.terms.append(("leg", (i, field), entry.ty, enc.legs[i - 1][field]))
        for let, formula in pack.lets.items():
            self.terms.append(("let", let, formula.node.ty, enc.definition(("let", let))))
        for rule in pack.rules:
            self.terms.append(("given", rule.id, "Bool", enc.given(rule)))
            self.terms.append(("expect", rule.id, "Bool", enc.expect(rule)))
        # With every input fixed, eliminating the defined constants first (solve-eqs) and then
        # deciding what is left (the floor variables) is about twice as fast as the default
        # incremental solver; the tactics preserve satisfiability and the model converter
        # restores every eliminated constant, so the values are the encoding's own.
        tactic = z3.Then(z3.Tactic("solve-eqs", ctx=self.ctx), z3.Tactic("smt", ctx=self.ctx),
                         ctx=self.ctx)
        self.solver = tactic.solver()
        self.solver.set("timeout", int(timeout * 1000))
        self.solver.add(*enc.constraints)

    def assumptions_for(self, world: dict) -> list:
        I, ctx = self.enc.inputs, self.ctx
        legs = world.get("legs", [])
        if len(legs) > self.bound:
            raise ValueError(f"{counted(len(legs), 'leg')}, above the bound {self.bound}")

        def real(x):
            return z3.RealVal(str(_num(x)), ctx)

        a = [I["lrbg.balises"] == int(world["balises"]), I["lrbg.read"] == int(world["read"]),
             I["lrbg.linked"] == z3.BoolVal(bool(world["linked"]), ctx),
             z3.ToReal(I["lrbg.locacc"]) == real(world["locacc"]),
             I["lrbg.offset"] == real(world["offset"]),
             I["train.length"] == real(world["length"]), I["train.antenna"] == real(world["antenna"]),
             I["passage.direction"] == {"nominal": 1, "reverse": -1}[world["direction"]],
             I["passage.running"] == z3.BoolVal(world["running"] == "forward", ctx),
             I["passage.detect_error"] == real(world["detect_error"]),
             I["legs.count"] == len(legs)]
        for k in range(2, 9):       # the route's later groups (DESIGN 4.8, 4.10)
            g, n = world.get(f"g{k}"), f"g{k}"
            if g is None:
                break
            a += group_assumptions(I, n, g, ctx)
        for i, leg in enumerate(legs, 1):
            a += [I[f"legs.{i}.cab_change"] == z3.BoolVal(bool(leg["cab_change"]), ctx),
                  I[f"legs.{i}.running"] == z3.BoolVal(leg["running"] == "forward", ctx),
                  I[f"legs.{i}.distance"] == real(leg["distance"]),
                  I[f"legs.{i}.odometer"] == real(leg["odometer"])]
        return a

    def evaluate(self, world: dict, *, unique: bool = False) -> Concrete:
        """The encoding's values in ``world`` (the flat form: balises, read, linked, locacc,
        offset, length, antenna, direction, running, detect_error, legs[cab_change, running,
        distance, odometer]; numbers as Fractions or exact text).

        With ``unique``, a second check asks whether any compared value could differ with the
        same inputs (it must not: the encoding is a function of its inputs)."""
        s = self.solver
        assumptions = self.assumptions_for(world)
        s.push()
        try:
            return self._evaluate(world, assumptions, unique)
        finally:
            s.pop()

    def _evaluate(self, world: dict, assumptions: list, unique: bool) -> Concrete:
        s = self.solver
        s.add(*assumptions)
        r = solve.check(s)
        if r == z3.unsat:
            return Concrete(scope_ok=False)
        if r != z3.sat:
            raise RuntimeError(f"solver gave up on a concrete world: {s.reason_unknown()}")
        model = s.model()
        # the legs since the current LRBG (all of them, unless a second group took over)
        count = model.evaluate(self.enc.terms["legs.count"], model_completion=True).as_long()
        values, lets, given, expect = {}, {}, {}, {}
        legs = [dict() for _ in range(count)]
        fixed = []
        for kind, key, ty, term in self.terms:
            if kind == "leg" and key[0] > count:
                continue
            v = model.evaluate(term, model_completion=True)
            fixed.append((kind, key, term, v))
            plain = plain_value(v, ty)
            if kind == "name":
                values[key] = plain
            elif kind == "leg":
                legs[key[0] - 1][key[1]] = plain
            elif kind == "let":
                lets[key] = plain
            elif kind == "given":
                given[key] = plain
            else:
                expect[key] = plain
        is_unique, ambiguous = None, ()
        if unique:
            s.add(z3.Or([t != v for _, _, t, v in fixed]))
            r2 = solve.check(s)
            if r2 == z3.sat:
                m2 = s.model()
                ambiguous = tuple(str(key) for _, key, t, v in fixed
                                  if not m2.evaluate(t == v, model_completion=True))
            if r2 == z3.unknown:
                raise RuntimeError(f"solver gave up on uniqueness: {s.reason_unknown()}")
            is_unique = r2 == z3.unsat
        return Concrete(True, values, tuple(legs), lets, given, expect, is_unique, ambiguous)


def compared_values(evaluator: Evaluator, world: dict) -> dict | None:
    """The encoding's values of the names the engine compares with the simulator
    (:data:`verifier.smt.solve.COMPARED`) in ``world`` (flat form), as a solve would report
    them; None when the encoding rejects the world or cannot evaluate it."""
    try:
        c = evaluator.evaluate(world)
    except (RuntimeError, ValueError, KeyError, z3.Z3Exception):
        return None
    if not c.scope_ok:
        return None
    return {n: c.values[n] for n in COMPARED}


# ---- worlds near a rule's decision boundary (for verifier check --crosscheck) -----------------

@attrs.frozen
class Sample:
    """A world of a rule's given found by the solver, with the encoding's values of given and
    expect in it (plain data) and why it was asked for."""

    world: dict           # flat inputs, as solve.read_world gives them
    given: bool
    expect: bool
    why: str


def _atoms(node, out: list) -> None:
    """Comparisons of the expression tree outside quantifiers, in text order."""
    if isinstance(node, ast.Quant):
        return
    if isinstance(node, ast.Chain):
        out.append(node)
    for child in ast.children(node):
        _atoms(child, out)


def boundary_worlds(pack: Pack, rule, bound: int, *, count: int = 4, timeout: float = 10.0,
                    rlimit: int = 100_000_000) -> list[Sample]:
    """Up to ``count`` distinct worlds of the rule's ``given`` near the edge of its ``expect``.

    Asked for, in order: for each comparison ``a op b`` of the expect (outside quantifiers),
    a world where a == b (on the boundary) and one where a and b differ by at most 1 mm (just
    beside it); then a world where the expect is false and one where it is true. Each world found
    is excluded from the later questions, so the worlds are distinct. A question the solver
    cannot answer within its budget is skipped (no world is invented)."""
    ctx = z3.Context()
    enc = Encoding(pack, bound, ctx)
    given, expect = enc.given(rule), enc.expect(rule)
    questions = []
    atoms: list = []
    _atoms(rule.expect.node, atoms)
    mm = z3.RealVal("1/1000", ctx)
    for atom in atoms[:3]:
        for left, right in zip(atom.operands, atom.operands[1:]):
            a, b = enc.expr(left, {}), enc.expr(right, {})
            text = rule.expect.text[left.start:right.end]
            questions.append((a == b, f"on the boundary of {text}"))
            if z3.is_arith(a):
                d = z3.ToReal(a - b) if z3.is_int(a - b) else a - b
                questions.append((z3.And(d != 0, d <= mm, d >= -mm), f"within 1 mm of the boundary of {text}"))
    questions += [(z3.Not(expect), "expect false"), (expect, "expect true")]
    inputs = list(enc.inputs.values())
    exclude: list = []
    out: list[Sample] = []
    for q, why in questions:
        if len(out) >= count:
            break
        # a one-shot solver per question: z3's non-incremental engine is much faster here
        # (DEVELOPERS.md, solver practice); the worlds found so far are excluded explicitly
        s = z3.Solver(ctx=ctx)
        s.set("rlimit", rlimit)
        s.set("timeout", int(timeout * 1000))
        s.add(*enc.constraints, given, *exclude, q)
        r = solve.check(s)
        if r != z3.sat:
            continue
        m = s.model()
        world = read_world(m, enc)
        g = z3.is_true(m.evaluate(given, model_completion=True))
        e = z3.is_true(m.evaluate(expect, model_completion=True))
        out.append(Sample(world, g, e, why))
        exclude.append(z3.Or([c != m.evaluate(c, model_completion=True) for c in inputs]))
    return out


def violation_status(pack: Pack, rule, bound: int, *, rlimit: int = 20_000_000,
                     timeout: float = 5.0) -> str:
    """One solver question, without minimisation or replay: is there a world in scope where
    the rule's given holds and its expect does not? ``sat``, ``unsat`` or ``unknown``.
    (For fuzzing the encoder cheaply; verdicts come from :mod:`verifier.run.engine`.)"""
    ctx = z3.Context()
    enc = Encoding(pack, bound, ctx)
    given, expect = enc.given(rule), enc.expect(rule)
    s = z3.Solver(ctx=ctx)
    s.set("rlimit", rlimit)
    s.set("timeout", int(timeout * 1000))
    s.add(*enc.constraints)
    s.add(given, z3.Not(expect))
    return str(solve.check(s))


def same_outputs(original: Pack, mutant: Pack, bound: int, names, *, rlimit: int = 50_000_000,
                 timeout: float = 20.0) -> str:
    """Whether two versions of a pack give the same value to every name of ``names`` in every
    world in scope up to ``bound`` legs: ``equivalent`` (proved), ``different`` (a world
    tells them apart) or ``unknown``. Both are encoded over one set of inputs."""
    ctx = z3.Context()
    a = Encoding(original, bound, ctx)
    b = Encoding(mutant, bound, ctx, prefix="mutant!")
    differ = [a.name(n) != b.name(n) for n in names]
    s = z3.Solver(ctx=ctx)
    s.set("rlimit", rlimit)
    s.set("timeout", int(timeout * 1000))
    s.add(*a.constraints, *b.constraints)
    s.add(z3.Or(differ))
    r = solve.check(s)
    return {"unsat": "equivalent", "sat": "different"}.get(str(r), "unknown")


def same_formula(original: Pack, mutant: Pack, dep: tuple, bound: int, *,
                 rlimit: int = 50_000_000, timeout: float = 10.0) -> str:
    """Whether one design formula (``("onboard", name)`` or ``("trackside", name)``) has the
    same value in both versions of a pack in every world in scope: ``equivalent``,
    ``different`` or ``unknown``. Cheaper than :func:`same_outputs`, and sufficient for it
    when that formula is the only change."""
    ctx = z3.Context()
    a = Encoding(original, bound, ctx)
    b = Encoding(mutant, bound, ctx, prefix="mutant!")
    if dep[0] == "onboard" and dep[1].startswith("info_"):    # evaluated per item (DESIGN 4.9)
        field = dep[1][len("info_"):]
        differ = [a.info_term(i.id, field) != b.info_term(i.id, field) for i in original.infos]
    else:
        differ = [a.definition(dep) != b.definition(dep)]
    s = z3.Solver(ctx=ctx)
    s.set("rlimit", rlimit)
    s.set("timeout", int(timeout * 1000))
    s.add(*a.constraints, *b.constraints)
    s.add(z3.Or(differ) if differ else z3.BoolVal(False, ctx))
    return {"unsat": "equivalent", "sat": "different"}.get(str(solve.check(s)), "unknown")
