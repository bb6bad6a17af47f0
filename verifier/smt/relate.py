"""Comparing two versions of one rule by SMT (``verifier diff``, DESIGN 7).

Both versions are encoded in one context over one set of world inputs: the old pack's derived
constants are prefixed ``old!``, the new pack's ``new!``, and the world constraints of both
packs are asserted, so every world considered is in the *common* scope (inside both packs'
``[world]``, up to the smaller bound). Four questions are asked, each a one-shot satisfiability
check (asked again per number of legs, fewest first, when the whole is left undecided); a
satisfiable one is minimised by the same ladder as a counterexample (DESIGN 6):

- coverage ``old-only``: old given and not new given;  ``new-only``: the converse;
- claim ``old-only``: old claim (given implies expect) true and new claim false (the new rule
  is violated there, so the new claim is not implied by the old); ``new-only``: the converse.

Results are plain data.
"""

from __future__ import annotations

import attrs
import z3

from verifier.check.model import Pack, Rule
from verifier.smt import solve
from verifier.smt.encode import Encoding

QUESTIONS = (("coverage", "old-only"), ("coverage", "new-only"),
             ("claim", "old-only"), ("claim", "new-only"))


@attrs.frozen
class Distinction:
    kind: str           # coverage or claim
    direction: str      # old-only or new-only: which side's formula is true there
    status: str         # none (no such world), found, unknown
    world: dict | None = None     # flat world (as solve.read_world), minimal by the ladder
    minimal: bool = True
    reason: str = ""


class _Both:
    """Two encodings over one set of inputs, shaped like an Encoding for the ladder."""

    def __init__(self, old: Encoding, new: Encoding):
        self.ctx, self.K = old.ctx, old.K
        self.constraints = old.constraints + new.constraints
        self.inputs = old.inputs
        self.terms = {"legs.count": old.terms["legs.count"], "cab_changes": old.terms["cab_changes"]}


def relate(old_pack: Pack, old_rule: Rule, new_pack: Pack, new_rule: Rule, bound: int, *,
           rlimit: int = solve.DEFAULT_RLIMIT, timeout: float = solve.DEFAULT_TIMEOUT) -> tuple:
    """The four distinctions of QUESTIONS, in that order."""
    ctx = z3.Context()
    eo = Encoding(old_pack, bound, ctx, prefix="old!")
    en = Encoding(new_pack, bound, ctx, prefix="new!")
    go, gn = eo.given(old_rule), en.given(new_rule)
    co, cn = z3.Implies(go, eo.expect(old_rule)), z3.Implies(gn, en.expect(new_rule))
    both = _Both(eo, en)    # after encoding the rules: that adds the definitions they use
    facts = {("coverage", "old-only"): z3.And(go, z3.Not(gn)),
             ("coverage", "new-only"): z3.And(gn, z3.Not(go)),
             ("claim", "old-only"): z3.And(co, z3.Not(cn)),
             ("claim", "new-only"): z3.And(cn, z3.Not(co))}
    out = []
    for kind, direction in QUESTIONS:
        budget = solve.Budget(timeout)
        ses = solve.SolverSession(both, rlimit, budget)
        ses.add(facts[(kind, direction)])
        r, why = solve.check_whole_or_by_legs(ses)
        if r == z3.unsat:
            out.append(Distinction(kind, direction, "none"))
            continue
        if r == z3.unknown:
            out.append(Distinction(kind, direction, "unknown", reason=why))
            continue
        decided = solve.run_ladder(ses, both)
        if ses.settle() != z3.sat:   # pragma: no cover - the ladder only adds satisfiable facts
            out.append(Distinction(kind, direction, "unknown", reason="minimisation lost the world"))
            continue
        out.append(Distinction(kind, direction, "found", solve.read_world(ses.model, both),
                               decided, "" if decided else "minimisation stopped by the budget"))
    return tuple(out)
