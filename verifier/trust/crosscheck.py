"""In-run cross-checks of ``verifier check --crosscheck`` (DESIGN 5).

(a) Same obligation, second solver: every rule's exported SMT-LIB obligations
    (:mod:`verifier.smt.export`) are re-solved by cvc5 (:mod:`verifier.smt.second`) and must
    give the same answer as z3's verdict. This checks the solver only: a bug in the shared
    encoding would pass both.
(b) Boundary replay: the solver is asked for several distinct worlds of each rule's ``given``
    near the edge of its ``expect`` (:func:`verifier.smt.concrete.boundary_worlds`); each is
    replayed in the simulator, which must find it in scope, satisfying the given, and agree with
    the encoding on the expect and with the verdict (no failing world for a rule that holds, no
    world at all for a vacuous one). This checks the encoding against the simulator.
(c) Replay of every counterexample and witness, which the engine always does.
(d) For a rule proved for any number of legs (DESIGN 4.7): the induction step at the depth that
    proved it, with the lemmas it used, is exported as SMT-LIB and re-solved by cvc5, which must
    not find a counterexample to induction.

A disagreement turns the rule's verdict into ``error`` (kind ``internal``, exit code 4) with
both answers in the message. An undecided second solver is recorded, never counted as
agreement or disagreement.
"""

from __future__ import annotations

import attrs

from verifier.errors import UsageError
from verifier.run.induct import plan_with_lemmas
from verifier.smt import export, induction, second
from verifier.smt.concrete import boundary_worlds
from verifier.world.scenario import world_from_flat
from verifier.world.sim import State, applies, evaluate, scope_problems

CHECKED = ("holds", "violated", "vacuous")


@attrs.frozen
class RuleCross:
    pack: str
    rule: str
    verdict: str                  # the engine's verdict
    second: dict                  # obligation -> cvc5 answer (sat/unsat/unknown)
    second_expected: dict         # obligation -> the answer the verdict implies
    second_how: dict              # obligation -> {"text": in words, "cases": queries, "options": cvc5 options}
    samples: int                  # boundary worlds replayed
    problems: tuple               # disagreements, as text


@attrs.frozen
class CrossReport:
    checks: tuple                 # which checks ran, in words
    rules: tuple                  # RuleCross
    second_solver: str

    def counts(self) -> dict:
        answers = [(v, self_exp) for r in self.rules for k, v in r.second.items()
                   for self_exp in [r.second_expected[k]]]
        return {
            "rules": len(self.rules),
            "obligations": len(answers),
            "second_agree": sum(1 for a, e in answers if a == e),
            "second_undecided": sum(1 for a, _ in answers if a == "unknown"),
            "second_disagree": sum(1 for a, e in answers if a != "unknown" and a != e),
            "second_split": sum(1 for r in self.rules for h in r.second_how.values() if h["cases"] > 1),
            "boundary_worlds": sum(r.samples for r in self.rules),
            "disagreements": sum(len(r.problems) for r in self.rules),
        }

    def summary(self) -> str:
        c = self.counts()
        return (f"crosscheck: {'; '.join(self.checks)}\n"
                f"crosscheck: {c['rules']} rule{'s' if c['rules'] != 1 else ''}; second solver ({self.second_solver}) agreed on "
                f"{c['second_agree']} of {c['obligations']} obligations ({c['second_split']} divided "
                f"into cases), undecided on "
                f"{c['second_undecided']}, disagreed on {c['second_disagree']}; "
                f"{c['boundary_worlds']} boundary worlds replayed; {c['disagreements']} disagreements")

    def as_json(self) -> dict:
        return {"checks": list(self.checks), "second_solver": self.second_solver,
                "counts": self.counts(),
                "rules": [{"pack": r.pack, "id": r.rule, "verdict": r.verdict, "second": r.second,
                           "second_how": r.second_how,
                           "boundary_worlds": r.samples, "problems": list(r.problems)}
                          for r in self.rules]}


def _second(pack, rule, bound, verdict, timeout) -> tuple[dict, dict, dict, list]:
    texts = export.obligations(pack, rule, bound, verdict)
    want = dict(zip(("violation", "given"), export.STATUS[verdict]))
    got, how, problems = {}, {}, []
    for kind in ("violation", "given"):
        if verdict == "violated" and kind == "given":
            continue           # implied by the violation answer
        ans = second.solve_split(texts[kind], export.case_split(bound),
                                 case_timeout=min(timeout, 20.0), budget=10 * timeout)
        got[kind] = ans.status
        how[kind] = {"text": ans.how() + (f" ({ans.reason})" if ans.reason else ""),
                     "cases": ans.cases, "options": ans.options}
        if ans.status != "unknown" and ans.status != want[kind]:
            problems.append(f"same obligation, second solver: z3 verdict {verdict} means the "
                            f"{kind} obligation is {want[kind]}, {second.version()} says {ans.status}")
    return got, {k: want[k] for k in got}, how, problems


def _second_step(pack, rule, proof: dict, timeout, got, want, how, problems) -> None:
    """(d): the induction step that proved a rule, re-solved by cvc5."""
    lemmas = tuple(pack.rule(x) for x in proof.get("lemmas", ()))
    plan = plan_with_lemmas(pack, rule, lemmas)
    text = induction.step_obligation(pack, rule, lemmas, plan, proof["depth"])
    ans = second.solve_text(text, timeout=min(timeout, 60.0))
    got["induction"], want["induction"] = ans.status, "unsat"
    how["induction"] = {"text": ans.how() + (f" ({ans.reason})" if ans.reason else ""),
                        "cases": ans.cases, "options": ans.options}
    if ans.status == "sat":
        problems.append(f"induction step of depth {proof['depth']}: z3 proved it, "
                        f"{second.version()} finds a counterexample to induction")


def _boundary(pack, rule, bound, verdict, count, timeout) -> tuple[int, list]:
    samples = boundary_worlds(pack, rule, bound, count=count, timeout=timeout)
    problems = []
    for s in samples:
        world = world_from_flat(s.world)
        where = f"boundary world ({s.why})"
        if verdict == "vacuous":
            problems.append(f"{where}: the verdict is vacuous but the solver found a world of the given")
        outside = scope_problems(world, pack.scope, bound)
        if outside:
            problems.append(f"{where} is outside the scope for the simulator: {'; '.join(outside)}")
            continue
        st = State(pack, world)
        try:
            fires = applies(rule, st)
            value = bool(evaluate(rule.expect.node, st, {})) if fires else None
        except Exception as exc:  # noqa: BLE001 - reported, never hidden
            problems.append(f"{where}: the simulator failed: {exc!r}")
            continue
        if not fires:
            problems.append(f"{where}: solver says the given holds, simulator says it does not")
        elif value != s.expect:
            problems.append(f"{where}: solver says expect is {s.expect}, simulator says {value}")
        elif verdict == "holds" and not value:
            problems.append(f"{where}: the verdict is holds but the simulator finds expect false")
    return len(samples), problems


def crosscheck_results(packs, results, opts, *, boundary: int = 4, second_timeout: float | None = None):
    """Run the cross-checks on the results of ``check_packs``; return the results (a rule with
    a disagreement becomes ``error``, kind ``internal``) and a :class:`CrossReport`."""
    if not second.available():
        raise UsageError("--crosscheck needs cvc5: pip install 'verifier[crosscheck]'")
    timeout = second_timeout or (opts.timeout if opts.timeout else 60.0)
    new_results, crosses = [], []
    # results come in the order of the packs; two versions of a pack may share a name
    for pack, pr in zip(packs, results):
        assert pack.name == pr.name
        rules = []
        for r in pr.results:
            if r.verdict not in CHECKED:
                rules.append(r)
                continue
            rule = pack.rule(r.rule)
            got, want, how, problems = _second(pack, rule, r.bound, r.verdict, timeout)
            if r.unbounded:
                _second_step(pack, rule, r.proof, timeout, got, want, how, problems)
            n, more = _boundary(pack, rule, r.bound, r.verdict, boundary, min(timeout, 20.0))
            problems += more
            crosses.append(RuleCross(pack.name, rule.id, r.verdict, got, want, how, n, tuple(problems)))
            if problems:
                r = attrs.evolve(r, verdict="error", kind="internal",
                                 message=f"cross-check failed (verdict was {r.verdict}): " + "; ".join(problems))
            rules.append(r)
        new_results.append(attrs.evolve(pr, results=tuple(rules)))
    checks = (f"(a) same obligation, second solver: {second.version()} re-solved the exported SMT-LIB "
              "(an obligation it cannot decide whole is divided into cases that cover every world)",
              f"(b) up to {boundary} boundary worlds per rule replayed in the simulator",
              "(c) every counterexample and witness replayed in the simulator (as on every check)",
              f"(d) every induction step that proved a rule for any number of legs re-solved by {second.version()}")
    return new_results, CrossReport(checks, tuple(crosses), second.version())
