"""Checking packs: typed rules -> SMT -> verdict -> replay -> counterexample file.

A verdict is never guessed: a time-out is ``unknown``; a counterexample or witness is replayed
in the simulator before it is reported, and any disagreement between solver and simulator makes
the rule ``error`` (kind ``internal``) with both values shown.
"""

from __future__ import annotations

import time
from pathlib import Path
from typing import Callable

import attrs

from verifier.check.model import Pack, Rule
from verifier.errors import UsageError, suggest
from verifier.evidence import cexfile, coverage, diagram
from verifier.world.scenario import fmt, world_from_flat, world_to_data
from verifier.world.sim import State, applies, evaluate, scope_problems

VERDICTS = ("holds", "violated", "vacuous", "bounded", "unknown", "error")


@attrs.frozen
class CheckOptions:
    legs: int | str | None = None      # --legs: overrides every rule's bound ("any": DESIGN 4.7)
    rules: tuple = ()                  # --rule: only these rule ids (empty: all)
    timeout: float | None = None       # seconds per rule (wall-clock guard)
    rlimit: int | None = None          # deterministic budget per solver check
    out: Path | None = Path("counterexamples")   # None: write no files
    witness: bool = True
    jobs: int = 1                      # --jobs: worker processes (see verifier.parallel)
    cache: object = None               # a verifier.cache.Cache, or None: solve everything
    induction_depth: int = 4           # --induction-depth: deepest step of k-induction tried


@attrs.frozen
class RuleResult:
    pack: str
    rule: str
    title: str
    line: int
    verdict: str
    bound: int
    seconds: float
    counterexample: str | None = None
    witness: dict | None = None
    message: str = ""
    kind: str = ""          # for verdict error: "input" or "internal"
    minimal: bool = True
    rlimit: int = 0
    checks: int = 0
    solver: str = ""
    premise: str | None = None
    solver_seconds: float = 0.0
    cached: bool = False    # the solver's answer came from .verifier-cache/ (replayed all the same)
    role: str = "rule"      # or "lemma"
    proof: dict | None = None   # what kind of proof the verdict rests on (see proof_words)
    induction: str | None = None  # the counterexample to induction file, for verdict bounded

    @property
    def unbounded(self) -> bool:
        """The verdict is about any number of legs (a proof by induction)."""
        return bool(self.proof) and self.proof.get("kind") == "induction"

    def as_json(self) -> dict:
        return {"id": self.rule, "verdict": self.verdict, "bound": self.bound,
                "seconds": round(self.seconds, 3), "counterexample": self.counterexample,
                "witness": self.witness, "message": self.message,
                "proof": self.proof, "counterexample_to_induction": self.induction}


def proof_words(r: RuleResult) -> str:
    """The kind of proof of a result in words: "up to 3 legs", "any number of legs"."""
    n = r.bound
    bounded = f"up to {n} leg{'s' if n != 1 else ''}"
    if r.unbounded:
        return "any number of legs"
    return bounded


def proof_detail(r: RuleResult) -> str:
    """How an any-number proof was made (depth, base case, lemmas), or "" otherwise."""
    if not r.unbounded:
        return ""
    p = r.proof
    lemmas = p.get("lemmas") or []
    return (f"k-induction at depth {p['depth']} over a base case of up to {p['base_legs']} legs"
            + (f", with lemma{'s' if len(lemmas) != 1 else ''} {', '.join(lemmas)}" if lemmas else ""))


@attrs.frozen
class PackResult:
    name: str
    path: str
    results: tuple
    scope: dict = attrs.field(factory=dict, eq=False)   # what its verdicts cover (evidence.coverage)


def _compare(solved_values: dict, st: State) -> list[str]:
    """Names on which the solver's model and the simulator disagree."""
    out = []
    for name, sv in solved_values.items():
        mv = st.get(name)
        mv = mv.word if hasattr(mv, "word") else mv
        if sv != mv:
            show = lambda v: fmt(v) if not isinstance(v, (bool, str)) else v  # noqa: E731
            out.append(f"{name}: solver {show(sv)}, simulator {show(mv)}")
    return out


def check_rule(pack: Pack, rule: Rule, opts: CheckOptions, presolved=None,
               bound: int | None = None) -> RuleResult:
    from verifier.smt import solve  # the only way into z3

    if bound is None:
        bound = pack.bound_for(rule, opts.legs)
    t0 = time.monotonic()
    kwargs = {}
    if opts.timeout is not None:
        kwargs["timeout"] = opts.timeout
    if opts.rlimit is not None:
        kwargs["rlimit"] = opts.rlimit
    if presolved is None:
        solved = solve.solve_rule(pack, rule, bound, witness=opts.witness, **kwargs)
    else:   # solved from SMT-LIB text or taken from the cache (verifier.parallel)
        solved, t0 = presolved.solved, t0 - presolved.seconds
    base = dict(pack=pack.name, rule=rule.id, title=rule.title, line=rule.line, bound=bound,
                rlimit=solved.rlimit, checks=solved.checks, solver=solved.solver,
                solver_seconds=solved.solver_seconds,
                premise=cexfile.implicit_premise(rule), minimal=solved.minimal,
                cached=bool(getattr(presolved, "cached", False)), role=rule.role,
                proof={"kind": "bounded", "legs": bound})

    def result(verdict, **kw):
        return RuleResult(verdict=verdict, seconds=time.monotonic() - t0, **{**base, **kw})

    if solved.verdict == "vacuous":
        return result("vacuous", message=_vacuity_message(pack, rule, bound, solved.reason))
    if solved.verdict == "unknown" or solved.world is None:
        return result(solved.verdict, message=solved.reason)

    # replay in the simulator, which must agree
    world = world_from_flat(solved.world)
    st = State(pack, world)
    problems = scope_problems(world, pack.scope, bound)
    if problems:
        return result("error", kind="internal",
                      message="the solver's world is outside the scope: " + "; ".join(problems))
    try:
        fires = applies(rule, st)
        expect = bool(evaluate(rule.expect.node, st, {}))
    except Exception as exc:  # noqa: BLE001 - reported, never hidden
        return result("error", kind="internal", message=f"the simulator failed: {exc!r}")
    wanted = solved.verdict == "holds"
    disagree = _compare(solved.smt_values, st)
    if not fires or expect != wanted or disagree:
        what = "counterexample" if solved.verdict == "violated" else "witness"
        msg = (f"simulator and solver disagree on the {what}: simulator says given={fires}, "
               f"expect={expect}")
        if disagree:
            msg += "; " + "; ".join(disagree)
        return result("error", kind="internal", message=msg)
    if solved.verdict == "holds":
        return result("holds", witness=world_to_data(world), message=solved.reason)
    path = None
    if opts.out is not None:
        doc = cexfile.build(pack, rule, st, verdict="violated", bound=bound, solver=solved.solver,
                            minimal=solved.minimal)
        target = cexfile.cex_path(opts.out, pack, rule)
        cexfile.write_atomic(target, cexfile.dumps(doc))
        diagram.write_beside(target, doc, rule, st)
        path = target.as_posix()
    msg = describe_failure(cexfile.failed_detail(rule, st))
    if not solved.minimal:
        msg += " (not fully minimised: " + solved.reason + ")"
    return result("violated", counterexample=path, message=msg)


def _vacuity_message(pack: Pack, rule: Rule, bound: int, reason: str) -> str:
    """Say which parts of the given cannot hold (an unsat core over its top-level items)."""
    from verifier.smt import solve
    core = solve.vacuity_core(pack, rule, bound)
    if not core:
        return reason
    if len(core) == 1:
        return f"{reason}: '{core[0]}' is impossible within the scope (up to {bound} legs)"
    return (f"{reason}: " + " and ".join(f"'{c}'" for c in core)
            + f" cannot hold together within the scope (up to {bound} legs)")


def describe_failure(detail: dict | None) -> str:
    """One line on the part of expect that failed (``cexfile.failed_detail``): the comparison
    as written and the value of each side that is not a literal, with its unit."""
    from verifier.evidence.story import comparison_words
    if not detail:
        return ""
    if "op" not in detail:
        return f"{detail['text']} is false"
    return comparison_words(detail)


def select_rules(pack: Pack, wanted: tuple) -> list[Rule]:
    """The rules (and lemmas) named by --rule, in file order; all rules when none is named."""
    if not wanted:
        return list(pack.rules)
    return [r for r in pack.lemmas + pack.rules if r.id in wanted]


def check_packs(packs: list[Pack], opts: CheckOptions = CheckOptions(),
                progress: Callable | None = None) -> list[PackResult]:
    """Check every selected rule of every pack, in file order."""
    if opts.rules:
        known = {r.id for p in packs for r in p.rules + p.lemmas}
        missing = [r for r in opts.rules if r not in known]
        if missing:
            raise UsageError(f"no rule with id '{missing[0]}' in the packs given"
                             + suggest(missing[0], known))
    from verifier.induct import base_bound
    todo = []
    for p in packs:
        chosen = select_rules(p, opts.rules)
        if chosen:   # lemmas first: a rule for any number of legs may need them
            todo += [(p, r) for r in p.lemmas if r not in chosen] + [(p, r) for r in chosen]
    bounds = [base_bound(p, r, opts.legs, opts.induction_depth) for p, r in todo]
    results: dict = {id(p): [] for p in packs}   # by identity: two packs may share a name
    lemmas: dict = {id(p): [] for p in packs}    # proved for any number of legs, in file order
    from verifier.parallel import solve_in_order
    presolved = solve_in_order(todo, legs=opts.legs, timeout=opts.timeout, rlimit=opts.rlimit,
                               witness=opts.witness, jobs=opts.jobs, cache=opts.cache,
                               bounds=bounds)
    for n, ((pack, rule), bound) in enumerate(zip(todo, bounds), 1):
        if progress:
            progress(n, len(todo), pack, rule, None)
        res = check_rule(pack, rule, opts, next(presolved), bound)
        if res.verdict == "holds" and pack.unbounded_for(rule, opts.legs):
            res = _any_number(pack, rule, res, tuple(lemmas[id(pack)]), bound, opts)
        if rule.role == "lemma" and res.unbounded:
            lemmas[id(pack)].append(rule)
        results[id(pack)].append(res)
        if progress:
            progress(n, len(todo), pack, rule, res)
    return [PackResult(p.name, p.path, tuple(results[id(p)]),
                       coverage.summary(p, opts.legs, opts.induction_depth,
                                        [r for q, r in todo if q is p]))
            for p in packs]


def _any_number(pack: Pack, rule: Rule, base: RuleResult, lemmas: tuple, bound: int,
                opts: CheckOptions) -> RuleResult:
    """The induction step after a bounded check that holds (DESIGN 4.7)."""
    from verifier import induct
    out = induct.prove(pack, rule, lemmas, bound, depth=opts.induction_depth,
                       rlimit=opts.rlimit, timeout=opts.timeout, cache=opts.cache)
    seconds = base.seconds + out.seconds
    base = attrs.evolve(base, cached=base.cached and out.cached)
    if out.error:
        return attrs.evolve(base, verdict="error", kind="internal", message=out.error,
                            seconds=seconds, proof=out.proof)
    if out.verdict == "holds":
        return attrs.evolve(base, proof=out.proof, seconds=seconds)
    path = None
    if out.cti is not None and opts.out is not None:
        path = cexfile.write_induction(opts.out, pack, rule, lemmas, out, bound, base.solver)
    return attrs.evolve(base, verdict="bounded", proof=out.proof, seconds=seconds,
                        message=out.message, induction=path, minimal=out.minimal)


def exit_code(results: list[PackResult], input_errors: bool) -> int:
    """DESIGN 5: 4 internal, 2 bad input, 1 violated or vacuous, 3 unknown or bounded (not
    proved for any number of legs), else 0."""
    verdicts = [r for p in results for r in p.results]
    if any(r.verdict == "error" and r.kind == "internal" for r in verdicts):
        return 4
    if input_errors or any(r.verdict == "error" for r in verdicts):
        return 2
    if any(r.verdict in ("violated", "vacuous") for r in verdicts):
        return 1
    if any(r.verdict in ("unknown", "bounded") for r in verdicts):
        return 3
    return 0
