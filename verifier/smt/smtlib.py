"""One rule's SMT problem as SMT-LIB text, and solving it from that text.

``export_rule`` encodes a rule in the main process and prints the problem (the world, the
rule's ``given`` and ``expect`` as named Booleans, and every value the engine compares with the
simulator as a named constant) as SMT-LIB text. ``solve_query`` parses that text into a fresh
z3 context and runs the same decision and minimisation ladder as :func:`solve.solve_rule`. The
query and the result are plain data, so a worker process can take the one and return the other
(``verifier check --jobs N``); a serial run solves the very same text the same way, which is
what makes serial and parallel runs give identical results.
"""

from __future__ import annotations

import attrs
import z3

from verifier.check.model import Pack, Rule
from verifier.smt import solve
from verifier.smt.encode import Encoding

GIVEN, EXPECT, VALUE = "rule!given", "rule!expect", "value!"
_SORTS = {"int": z3.Int, "real": z3.Real, "bool": z3.Bool}


@attrs.frozen
class Query:
    """One rule's problem as plain data: SMT-LIB text and the names needed to read models."""

    text: str
    bound: int
    inputs: tuple      # (input name, constant name, sort)
    values: tuple      # (vocabulary name, sort) of the values compared with the simulator


def _sort(c) -> str:
    if z3.is_bool(c):
        return "bool"
    return "int" if z3.is_int(c) else "real"


def export_rule(pack: Pack, rule: Rule, bound: int, assume: tuple = ()) -> Query:
    """Encode ``rule`` of ``pack`` up to ``bound`` legs and print it as SMT-LIB text.

    ``assume``: lemmas already proved over every world this query covers (for any number of
    legs, or up to at least ``bound``); each adds ``given implies expect`` as a fact. Such a
    fact removes no world in scope, so every answer (verdict, minimal world, witness) is the
    one without it; only the solver's work changes (see :func:`solve.lemma_facts`)."""
    ctx = z3.Context()
    enc = Encoding(pack, bound, ctx)
    given, expect = enc.given(rule), enc.expect(rule)
    facts = [z3.Bool(GIVEN, ctx) == given, z3.Bool(EXPECT, ctx) == expect]
    facts += solve.lemma_facts(enc, assume)
    values = []
    for name in solve.COMPARED:
        t = enc.name(name)
        srt = _sort(t)
        facts.append(_SORTS[srt](VALUE + name, ctx) == t)
        values.append((name, srt))
    s = z3.Solver(ctx=ctx)
    s.add(*enc.constraints, *facts)
    inputs = tuple((k, c.decl().name(), _sort(c)) for k, c in enc.inputs.items())
    return Query(s.sexpr(), bound, inputs, tuple(values))


class _Parsed:
    """A parsed query, shaped like an :class:`Encoding` for :func:`solve.decide`."""

    def __init__(self, q: Query):
        self.ctx = z3.Context()
        self.K = q.bound
        self.constraints = list(z3.parse_smt2_string(q.text, ctx=self.ctx))
        self.inputs = {k: _SORTS[srt](name, self.ctx) for k, name, srt in q.inputs}
        self._values = {n: _SORTS[srt](VALUE + n, self.ctx) for n, srt in q.values}
        self.terms = {"legs.count": self.inputs["legs.count"],
                      "cab_changes": self._values["cab_changes"]}

    def name(self, name: str):
        return self._values[name]


def solve_query(q: Query, *, rlimit: int = solve.DEFAULT_RLIMIT,
                timeout: float = solve.DEFAULT_TIMEOUT, witness: bool = True) -> solve.Solved:
    """Decide a query in a fresh context (any process): plain data in, plain data out."""
    budget = solve.Budget(timeout)
    p = _Parsed(q)
    return solve.decide(p, z3.Bool(GIVEN, p.ctx), z3.Bool(EXPECT, p.ctx), rlimit=rlimit,
                        budget=budget, witness=witness)


def solver_version() -> str:
    return solve.SOLVER

