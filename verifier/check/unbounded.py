"""What a proof for any number of legs needs from typed formulas (DESIGN 4.7).

A proof by induction over the legs evaluates formulas on a *state*: the world after some
unknown number of legs, without the legs themselves. A leg quantifier then cannot run over the
legs; its value is carried in the state as an *accumulator*, updated at each leg. This module
works out, from the typed trees alone, which accumulators a set of formulas needs:

- A quantifier's body may read the leg (``leg.FIELD``) and names that never change with the
  legs (the group, the train, the passage, G1: :data:`STATIC`; an information item's data and
  what of it does not follow the train: :func:`_static_info`). Any other part of the body that
  does not read the leg (``est.orientation``, ``flip(est.orientation)``, a let, another
  quantifier) is a *parameter*: it is only known at the state where the formula is read. A
  parameter must be of a finite type (Bool, Direction, Running); the state then carries one
  accumulator per value of the parameters, and the formula reads the one its parameters select.
- Quantifiers with the same body up to the names of their leg variables and parameters share
  one accumulator, so that a lemma and a design formula that say the same thing mean the same
  value in a state that is otherwise arbitrary.
- ``legs[i].FIELD`` needs a frozen copy of leg i's field in the state.

Both implementations (the simulator and the SMT encoding) read this plan and give it their own
meaning; the plan holds no physics. A formula the plan cannot support gets a reason in words,
and the proof for any number of legs is then not attempted (the bounded verdict stands).
"""

from __future__ import annotations

import itertools

import attrs

from verifier.lang import ast, vocab
from verifier.lang.ast import BOOL, DIRECTION, RUNNING

#: Names whose value does not depend on the legs: inputs of the group, the train and the
#: passage, and what follows from them alone.
STATIC = frozenset(n for n in vocab.GLOBAL if n.split(".")[0] in ("lrbg", "train", "passage", "g1")
                   and vocab.groups_needed(n) == 1)

FINITE = {BOOL: (True, False),
          DIRECTION: (vocab.Direction.NOMINAL, vocab.Direction.REVERSE, vocab.Direction.UNKNOWN),
          RUNNING: (vocab.Running.FORWARD, vocab.Running.BACKWARD)}
MAX_VALUATIONS = 64


@attrs.frozen
class Accumulator:
    """One accumulator family: a quantifier body with its parameters abstracted."""

    key: tuple                 # canonical form (kind, body): the identity of the family
    kind: str                  # all, any, count, sum
    ty: str                    # the quantifier's type (Bool, Count, Length, Number)
    var: str                   # the representative's leg variable
    body: ast.Node             # the representative's body
    params: tuple              # the representative's parameter sub-terms (nodes), in text order
    text: str                  # readable form, parameters as $1, $2, ...
    quant: ast.Quant = attrs.field(eq=False, repr=False, default=None)   # the representative

    @property
    def valuations(self) -> tuple:
        """Every combination of parameter values, in a fixed order."""
        return tuple(itertools.product(*(FINITE[p.ty] for p in self.params)))


@attrs.frozen
class Plan:
    """The accumulators and frozen legs a set of formulas needs, or why it cannot be had."""

    accumulators: tuple = ()   # Accumulator, in order of first appearance
    uses: dict = attrs.field(factory=dict, eq=False)   # Quant node -> (Accumulator, param nodes)
    frozen: tuple = ()         # (i, field) pairs read as legs[i].field, sorted
    unsupported: tuple = ()    # reasons, in words

    def use(self, node: ast.Quant) -> tuple:
        return self.uses[node]


def _reads_leg(node: ast.Node, var: str | None = None) -> bool:
    """Whether a sub-term reads the leg of quantifier variable ``var`` (any leg: None)."""
    for n in ast.walk(node):
        if isinstance(n, ast.Name) and n.ref and n.ref[0] == "leg" and var in (None, n.ref[1]):
            return True
    return False


def _static_let(pack, name: str, seen=()) -> bool:
    if name in seen:
        return False
    return _is_static(pack, pack.lets[name].node, seen + (name,))


#: Fields of an information item (``info.ID.FIELD``) that are its data: they never change.
INFO_DATA = frozenset({"group", "at", "for_nominal", "for_reverse", "location"})


def _static_info(pack, info_id: str, field: str, seen=()) -> bool:
    """Whether ``info.ID.FIELD`` cannot change with the legs: the item's data always; the
    onboard's ``accepted`` and ``position`` when their formula reads only such names; never
    where it really is (``real``, in the current LRBG's frame: a both-ways item lies along the
    train's real orientation, and both implementations read that orientation to place any)."""
    if field in INFO_DATA:
        return True
    if field == "real":
        return False
    dep = ("onboard", f"info_{field}")
    if dep in seen:
        return False
    return _is_static(pack, pack.definition(dep).node, seen + (dep,))


def _is_static(pack, node: ast.Node, seen=()) -> bool:
    """True when the value of a leg-free sub-term cannot change with the legs."""
    for n in ast.walk(node):
        if isinstance(n, ast.Quant):
            return False
        if isinstance(n, ast.Name) and n.ref:
            kind = n.ref[0]
            if kind == "var" and n.ref[1] not in STATIC:
                return False
            if kind == "legat":
                return False
            if kind == "let" and not _static_let(pack, n.ref[1], seen):
                return False
            if kind == "info" and not _static_info(pack, n.ref[1], n.ref[2], seen):
                return False
    return True


def _canon(node: ast.Node, var: str, params: dict):
    """A hashable form of a body without positions, the leg variable written as ``$leg`` and
    each parameter as its number."""
    if id(node) in params:
        return ("$param", params[id(node)])
    if isinstance(node, ast.Name):
        ref = node.ref
        if ref and ref[0] == "leg" and ref[1] == var:
            return ("leg", ref[2])
        return ("name", node.parts, ref)
    if isinstance(node, ast.Num):
        return ("num", node.value, node.unit, node.ty)
    if isinstance(node, ast.BoolLit):
        return ("bool", node.value)
    if isinstance(node, ast.Unary):
        return ("unary", node.op, _canon(node.operand, var, params))
    if isinstance(node, ast.Binary):
        return ("binary", node.op, _canon(node.left, var, params), _canon(node.right, var, params))
    if isinstance(node, ast.Chain):
        return ("chain", node.ops, tuple(_canon(o, var, params) for o in node.operands))
    if isinstance(node, ast.IfThen):
        return ("if", _canon(node.cond, var, params), _canon(node.then, var, params),
                _canon(node.orelse, var, params))
    if isinstance(node, ast.Call):
        return ("call", node.func, tuple(_canon(a, var, params) for a in node.args))
    if isinstance(node, ast.Quant):   # a nested quantifier reading the outer leg: unsupported
        return ("quant", node.kind, node.var, _canon(node.body, var, params))
    raise AssertionError(type(node))


def _text(node: ast.Node, source: str, params: list) -> str:
    """The body's source text with each parameter replaced by $1, $2, ..."""
    out, at = [], node.start
    for i, p in enumerate(params, 1):
        out.append(source[at:p.start])
        out.append(f"${i}")
        at = p.end
    out.append(source[at:node.end])
    return "".join(out)


class _Builder:
    def __init__(self, pack):
        self.pack = pack
        self.families: dict = {}
        self.uses: dict = {}
        self.frozen: set = set()
        self.unsupported: list = []
        self.seen_defs: set = set()

    def formula(self, f, what: str) -> None:
        self.node(f.node, f.text, what, ())

    def definition(self, dep: tuple) -> None:
        if dep in self.seen_defs:
            return
        self.seen_defs.add(dep)
        f = self.pack.definition(dep)
        self.node(f.node, f.text, f.name, ())
        for d in sorted(f.deps):
            self.definition(d)

    def node(self, node: ast.Node, source: str, what: str, outer: tuple) -> None:
        for n in ast.walk(node):
            if isinstance(n, ast.Name) and n.ref and n.ref[0] == "legat":
                self.frozen.add((n.ref[1], n.ref[2]))
            if isinstance(n, ast.Quant) and n not in self.uses:
                self.quant(n, source, what)

    def quant(self, q: ast.Quant, source: str, what: str) -> None:
        params: list = []
        problems: list = []

        def visit(n: ast.Node) -> None:
            if not _reads_leg(n, q.var):
                if _reads_leg(n):
                    problems.append(f"{what}: '{source[q.start:q.end]}' is inside a quantifier "
                                    f"and reads its leg")
                    return
                if _is_static(self.pack, n):
                    return
                if n.ty not in FINITE:
                    problems.append(f"{what}: '{source[n.start:n.end]}' inside "
                                    f"'{source[q.start:q.end]}' changes from leg to leg and is a "
                                    f"{n.ty}, so the state cannot carry one value per case")
                    return
                params.append(n)
                return
            if isinstance(n, ast.Quant):
                problems.append(f"{what}: the quantifier '{source[n.start:n.end]}' reads the leg "
                                f"of an outer quantifier")
                return
            for c in ast.children(n):
                visit(c)

        visit(q.body)
        if problems:
            self.unsupported.extend(problems)
            return
        index = {id(p): i for i, p in enumerate(params)}
        key = (q.kind, q.ty, _canon(q.body, q.var, index))
        fam = self.families.get(key)
        if fam is None:
            n_val = 1
            for p in params:
                n_val *= len(FINITE[p.ty])
            if n_val > MAX_VALUATIONS:
                self.unsupported.append(f"{what}: '{source[q.start:q.end]}' has {n_val} cases of "
                                        f"its parameters (at most {MAX_VALUATIONS})")
                return
            text = f"{q.kind}({q.var} in legs: {_text(q.body, source, params)})"
            fam = Accumulator(key, q.kind, q.ty, q.var, q.body, tuple(params), text, q)
            self.families[key] = fam
        self.uses[q] = (fam, tuple(params))
        # the parameters are read at the state: their own quantifiers need accumulators too
        for p in params:
            self.node(p, source, what, ())
        # names in the body that lead into definitions (static lets) need nothing more


def plan_for(pack, formulas, *, designs: bool = True) -> Plan:
    """The plan for ``formulas`` (typed :class:`~verifier.check.model.Formula` objects with a
    ``name``) and every definition they reach; with ``designs`` also for every onboard and
    trackside formula, so that the report can be computed at each state."""
    b = _Builder(pack)
    for f in formulas:
        if f is None:
            continue
        b.formula(f, f.name)
        for d in sorted(f.deps):
            b.definition(d)
    if designs:
        for n in pack.onboard:
            b.definition(("onboard", n))
        for n in pack.trackside:
            b.definition(("trackside", n))
    return Plan(tuple(b.families.values()), b.uses, tuple(sorted(b.frozen)),
                tuple(dict.fromkeys(b.unsupported)))


def rule_formulas(rule) -> list:
    """A rule's formulas (given, expect) for :func:`plan_for`."""
    return [f for f in (rule.given, rule.expect) if f is not None]
