"""Checking packs: typed rules -> SMT -> verdict -> replay -> counterexample file.

A verdict is never guessed: a time-out is ``unknown``; a counterexample or witness is replayed
in the simulator before it is reported, and any disagreement between solver and simulator makes
the rule ``error`` (kind ``internal``) with both values shown.
"""

from __future__ import annotations

import contextlib
import time
from pathlib import Path
from typing import Callable

import attrs

from verifier.check.model import Pack, Rule
from verifier.errors import UsageError, WriteError, suggest
from verifier.lang.numbers import counted
from verifier.run import coverage, induct
from verifier.run.executor import ExecutorSpec
from verifier.run.parallel import SharedPool, solve_in_order
from verifier.smt import solve
from verifier.world.failure import describe_failure, failed_detail, implicit_premise
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
    jobs: int = 1                      # --jobs: worker processes (see verifier.run.parallel)
    executor: str = "local"            # --executor: local worker processes, or dask (a cluster)
    scheduler: str | None = None       # --scheduler: a Dask scheduler's address (None: LocalCluster)
    cache: object = None               # a verifier.run.cache.Cache, or None: solve everything
    induction_depth: int = 4           # --induction-depth: deepest step of k-induction tried
    max_legs: int = 12                 # --max-legs: deepest base case tried before "bounded"


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
    # Set when some of the solver's answers came from the cache: the seconds the verdict took
    # when those answers were solved (this run's seconds plus what their original solves
    # took, recorded with the cache entries). None when everything was solved in this run.
    original_seconds: float | None = None
    role: str = "rule"      # or "lemma"
    proof: dict | None = None   # what kind of proof the verdict rests on (see proof_words)
    induction: str | None = None  # the counterexample to induction file, for verdict bounded
    write_error: str = ""   # its evidence file could not be written: the path and the OS's reason
    world: dict | None = attrs.field(default=None, eq=False)   # a violated rule's counterexample world (data)

    @property
    def unbounded(self) -> bool:
        """The verdict is about any number of legs (a proof by induction)."""
        return bool(self.proof) and self.proof.get("kind") == "induction"

    def as_json(self) -> dict:
        out = {"id": self.rule, "verdict": self.verdict, "bound": self.bound,
               "seconds": round(self.seconds, 3), "counterexample": self.counterexample,
               "witness": self.witness, "message": self.message,
               "proof": self.proof, "counterexample_to_induction": self.induction}
        if self.write_error:
            out["write_error"] = self.write_error
        return out


def proof_words(r: RuleResult) -> str:
    """The kind of proof of a result in words: "up to 3 legs", "any number of legs", or for a
    counterexample found by deepening the base case (DESIGN 4.7) "at 7 legs"."""
    n = r.bound
    if r.unbounded:
        return "any number of legs"
    if r.verdict == "violated" and r.proof and "deepened_from" in r.proof:
        return f"at {n} leg{'s' if n != 1 else ''}"
    return f"up to {n} leg{'s' if n != 1 else ''}"


def proof_detail(r: RuleResult) -> str:
    """How an any-number proof was made (depth, base case, lemmas), or "" otherwise."""
    if not r.unbounded:
        return ""
    p = r.proof
    lemmas = p.get("lemmas") or []
    return (f"k-induction at depth {p['depth']} over a base case of up to {counted(p['base_legs'], 'leg')}"
            + (f", with lemma{'s' if len(lemmas) != 1 else ''} {', '.join(lemmas)}" if lemmas else ""))


@attrs.frozen
class PackResult:
    name: str
    path: str
    results: tuple
    scope: dict = attrs.field(factory=dict, eq=False)   # what its verdicts cover (evidence.coverage)


def compare_values(solved_values: dict, st: State) -> list[str]:
    """Names on which the solver's model and the simulator disagree."""
    out = []
    for name, sv in solved_values.items():
        mv = st.get(name)
        mv = mv.word if hasattr(mv, "word") else mv
        if sv != mv:
            show = lambda v: fmt(v) if not isinstance(v, (bool, str)) else v  # noqa: E731
            out.append(f"{name}: solver {show(sv)}, simulator {show(mv)}")
    return out


def _writer(opts: CheckOptions, files):
    """The evidence writer to use: the caller's, which must be given when ``opts.out`` asks for
    files (the run stage writes no file itself: ``verifier.api`` passes one)."""
    if opts.out is not None and files is None:
        raise ValueError("CheckOptions.out is set but no evidence writer was given: call "
                         "verifier.check_packs, or pass files=verifier.evidence.files.Files(out)")
    return files if opts.out is not None else None


def check_rule(pack: Pack, rule: Rule, opts: CheckOptions, presolved=None,
               bound: int | None = None, files=None) -> RuleResult:
    """One rule: solve (or take ``presolved``), replay the world in the simulator, compare.
    ``files`` writes a counterexample (``verifier.evidence.files.Files``: the JSON file and its
    diagram) and says where; it raises ``WriteError`` when it cannot."""
    files = _writer(opts, files)
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
    else:   # solved from SMT-LIB text or taken from the cache (verifier.run.parallel)
        solved, t0 = presolved.solved, t0 - presolved.seconds
    base = dict(pack=pack.name, rule=rule.id, title=rule.title, line=rule.line, bound=bound,
                rlimit=solved.rlimit, checks=solved.checks, solver=solved.solver,
                solver_seconds=solved.solver_seconds,
                premise=implicit_premise(rule), minimal=solved.minimal,
                cached=bool(getattr(presolved, "cached", False)), role=rule.role,
                proof={"kind": "bounded", "legs": bound})

    recorded = getattr(presolved, "recorded", 0.0) if base["cached"] else None

    def result(verdict, **kw):
        seconds = time.monotonic() - t0
        return RuleResult(verdict=verdict, seconds=seconds, **{**base, **kw},
                          original_seconds=None if recorded is None else seconds + recorded)

    if solved.verdict == "vacuous":
        if pack.unbounded_for(rule, opts.legs):   # decided for any number of legs later
            return result("vacuous", message=solved.reason)
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
    disagree = compare_values(solved.smt_values, st)
    if not fires or expect != wanted or disagree:
        what = "counterexample" if solved.verdict == "violated" else "witness"
        msg = (f"simulator and solver disagree on the {what}: simulator says given={fires}, "
               f"expect={expect}")
        if disagree:
            msg += "; " + "; ".join(disagree)
        return result("error", kind="internal", message=msg)
    if solved.verdict == "holds":
        return result("holds", witness=world_to_data(world), message=solved.reason)
    path, unwritten = None, ""
    if files is not None:
        try:    # the file and its diagram, both or neither; a failure does not lose the verdict
            path = files.counterexample(pack, rule, st, bound=bound, solver=solved.solver,
                                        minimal=solved.minimal)
        except WriteError as exc:
            unwritten = str(exc)
    msg = describe_failure(failed_detail(rule, st))
    if not solved.minimal:
        msg += " (not fully minimised: " + solved.reason + ")"
    return result("violated", counterexample=path, message=msg, write_error=unwritten,
                  world=world_to_data(world))


def _vacuity_message(pack: Pack, rule: Rule, bound: int, reason: str, within: str = "") -> str:
    """Say which parts of the given cannot hold (an unsat core over its top-level items, found
    up to ``bound`` legs); ``within`` says how far that is known (default: up to the bound)."""
    within = within or f"up to {bound} leg{'s' if bound != 1 else ''}"
    core = solve.vacuity_core(pack, rule, bound)
    if not core:
        return f"{reason} ({within})"
    if len(core) == 1:
        return f"{reason}: '{core[0]}' is impossible within the scope ({within})"
    return (f"{reason}: " + " and ".join(f"'{c}'" for c in core)
            + f" cannot hold together within the scope ({within})")


def select_rules(pack: Pack, wanted: tuple) -> list[Rule]:
    """The rules (and lemmas) named by --rule, in file order; all rules when none is named."""
    if not wanted:
        return list(pack.rules)
    return [r for r in pack.lemmas + pack.rules if r.id in wanted]


def check_packs(packs: list[Pack], opts: CheckOptions = CheckOptions(),
                progress: Callable | None = None, files=None) -> list[PackResult]:
    """Check every selected rule of every pack, in file order (``files``: see check_rule)."""
    files = _writer(opts, files)
    if opts.rules:
        known = {r.id for p in packs for r in p.rules + p.lemmas}
        missing = [r for r in opts.rules if r not in known]
        if missing:
            raise UsageError(f"no rule with id '{missing[0]}' in the packs given"
                             + suggest(missing[0], known))
    todo = []
    for p in packs:
        chosen = select_rules(p, opts.rules)
        if chosen:   # lemmas first: a rule for any number of legs may need them
            todo += [(p, r) for r in p.lemmas if r not in chosen] + [(p, r) for r in chosen]
    bounds = [induct.base_bound(p, r, opts.legs, opts.induction_depth) for p, r in todo]
    done: list = [None] * len(todo)
    # one pool of workers for both phases, started only if one of them has two rules to solve
    # (on a cluster: one rule to solve)
    spec = ExecutorSpec(opts.executor, opts.jobs, opts.scheduler)
    with SharedPool(spec) if spec.parallel else contextlib.nullcontext() as pool:
        for i, res in _in_phases(packs, todo, bounds, opts, files, progress, pool):
            done[i] = res
    results: dict = {id(p): [] for p in packs}   # by identity: two packs may share a name
    for (pack, _), res in zip(todo, done):
        results[id(pack)].append(res)
    return [PackResult(p.name, p.path, tuple(results[id(p)]),
                       coverage.summary(p, opts.legs, opts.induction_depth,
                                        [r for q, r in todo if q is p], max_legs=opts.max_legs))
            for p in packs]


def _in_phases(packs, todo, bounds, opts: CheckOptions, files, progress, pool):
    """Yield ``(index in todo, result)``: the lemmas first, then the rules, each of which
    assumes the lemmas of its pack proved over all the worlds it covers (solve.lemma_facts:
    the same answers, less work). Under ``--legs K`` the lemmas that k-induction proves for
    any number of legs are proved so first, and every check of their pack assumes them."""
    lemmas: dict = {id(p): [] for p in packs}    # proved for any number of legs, in file order
    proved: dict = {id(p): [] for p in packs}    # every lemma's result, for the rules' checks
    first = _proved_first(packs, todo, opts, pool)
    n = 0
    for phase in (True, False):
        idx = [i for i, (_, r) in enumerate(todo) if (r.role == "lemma") == phase]
        if not idx:
            continue
        assume = [_merge(first[id(todo[i][0])], () if phase else
                         usable_lemmas(proved[id(todo[i][0])], bounds[i])) for i in idx]
        presolved = solve_in_order([todo[i] for i in idx], legs=opts.legs, timeout=opts.timeout,
                                   rlimit=opts.rlimit, witness=opts.witness, jobs=opts.jobs,
                                   cache=opts.cache, bounds=[bounds[i] for i in idx],
                                   assume=assume, pool=pool)
        for i in idx:
            (pack, rule), bound = todo[i], bounds[i]
            n += 1
            if progress:
                progress(n, len(todo), pack, rule, None)
            res = check_rule(pack, rule, opts, next(presolved), bound, files)
            if res.verdict in ("holds", "vacuous") and pack.unbounded_for(rule, opts.legs):
                res = _any_number(pack, rule, res, tuple(lemmas[id(pack)]), bound, opts, files)
            if rule in first[id(pack)] and res.verdict == "holds" and not res.message:
                res = attrs.evolve(res, message=(
                    "proved for any number of legs by k-induction first; this check up to "
                    f"{bound} leg{'s' if bound != 1 else ''} assumes that proof"))
            if phase:
                proved[id(pack)].append((rule, res))
                if res.unbounded:
                    lemmas[id(pack)].append(rule)
            yield i, res
            if progress:
                progress(n, len(todo), pack, rule, res)


def _merge(a: tuple, b: tuple) -> tuple:
    return tuple(a) + tuple(x for x in b if x not in a)


def _proved_first(packs, todo, opts: CheckOptions, pool) -> dict:
    """Under ``--legs K``: per pack, its lemmas that k-induction proves for any number of legs,
    tried where K is above the base case of that proof (there a bounded check of K legs costs
    more than the base case and the step; the envelope lemma of confidence-interval at 8 legs
    ran out of the default budget, its proof for any number of legs took 0.6 s). No file is
    written and nothing is deepened; the proofs go through the cache like any other."""
    found: dict = {id(p): [] for p in packs}
    if isinstance(opts.legs, int):
        base = attrs.evolve(opts, legs=None, out=None, max_legs=0, witness=False)
        todo = [(p, r, induct.base_bound(p, r, None, opts.induction_depth))
                for p, r in todo if r.role == "lemma" and p.unbounded_for(r, None)]
        todo = [t for t in todo if opts.legs > t[2]]
        presolved = solve_in_order([(p, r) for p, r, _ in todo], timeout=opts.timeout,
                                   rlimit=opts.rlimit, witness=False, jobs=opts.jobs,
                                   cache=opts.cache, bounds=[b for _, _, b in todo], pool=pool)
        for pack, rule, bound in todo:
            res = check_rule(pack, rule, base, next(presolved), bound)
            if res.verdict == "holds":
                res = _any_number(pack, rule, res, tuple(found[id(pack)]), bound, base, None)
                if res.verdict == "holds" and res.unbounded:
                    found[id(pack)].append(rule)
    return {k: tuple(v) for k, v in found.items()}


def usable_lemmas(proved, bound: int) -> tuple:
    """The lemmas of ``proved`` ((lemma, result) pairs) that hold in every world up to
    ``bound`` legs: proved for any number of legs, or holding (or vacuous: their given never
    holds) up to at least ``bound`` legs. Only these may be assumed by a bounded check."""
    return tuple(lemma for lemma, res in proved
                 if res.verdict in ("holds", "vacuous", "bounded")
                 and (res.unbounded or res.bound >= bound))


class _Saved:
    """What the cache saved a verdict for any number of legs: the recorded seconds of the
    original solves of its cached answers, less this run's time spent replaying them."""

    def __init__(self, base: RuleResult):
        self.any = base.original_seconds is not None
        self.seconds = base.original_seconds - base.seconds if self.any else 0.0

    def add(self, cached: bool, recorded: float, spent: float = 0.0) -> None:
        if cached:
            self.any = True
            self.seconds += max(0.0, recorded - spent)

    def total(self, seconds: float) -> float | None:
        return seconds + self.seconds if self.any else None


def _any_number(pack: Pack, rule: Rule, base: RuleResult, lemmas: tuple, bound: int,
                opts: CheckOptions, files) -> RuleResult:
    """:func:`_steps`, with the original seconds of the answers it took from the cache."""
    saved = _Saved(base)
    res = _steps(pack, rule, base, lemmas, bound, opts, files, saved)
    return attrs.evolve(res, original_seconds=saved.total(res.seconds))


def _steps(pack: Pack, rule: Rule, base: RuleResult, lemmas: tuple, bound: int,
           opts: CheckOptions, files, saved: _Saved) -> RuleResult:
    """After a base case up to ``bound`` legs that holds or is vacuous (DESIGN 4.7): the
    induction step of the rule, or for a vacuous one the step of "the given never holds";
    when that is not proved, the base case deepened (``bound`` + 1, + 2, ... up to
    ``--max-legs``, within the budget, fewest legs first) before the answer is ``bounded``. A
    counterexample found on the way makes the rule ``violated`` at that many legs, solved,
    minimised, replayed and written exactly as by a bounded check at that bound."""
    t0 = time.monotonic() - base.seconds

    def prove(r, b):
        out = induct.prove(pack, r, lemmas, b, depth=opts.induction_depth, rlimit=opts.rlimit,
                           timeout=opts.timeout, cache=opts.cache)
        saved.add(out.cached, out.recorded, out.seconds)
        return out

    def failed(out):
        return attrs.evolve(base, verdict="error", kind="internal", message=out.error,
                            seconds=time.monotonic() - t0, proof=out.proof)

    cached = base.cached
    out = never = None          # the rule's own step; the step of "the given never holds"
    if base.verdict == "vacuous":
        never = prove(induct.not_given(rule), bound)
        cached = cached and never.cached
        if never.error:
            return failed(never)
        if never.verdict == "holds":
            return attrs.evolve(base, proof=never.proof, seconds=time.monotonic() - t0, cached=cached,
                                message=_vacuity_message(pack, rule, bound, base.message,
                                                         "for any number of legs"))
    else:
        out = prove(rule, bound)
        cached = cached and out.cached
        if out.error:
            return failed(out)
        if out.verdict == "holds":
            return attrs.evolve(base, proof=out.proof, seconds=time.monotonic() - t0, cached=cached)

    # deepening: the rule holds (or its given never does) up to `last` legs
    timeout = opts.timeout if opts.timeout is not None else solve.DEFAULT_TIMEOUT
    budget, spent, last, stop, witness = induct.deepening_budget(opts.rlimit), 0, bound, "", base.witness
    for n in range(bound + 1, opts.max_legs + 1):
        left = timeout - (time.monotonic() - t0)
        if left <= 0 or spent >= budget:
            stop = f"the deepening budget ran out before {counted(n, 'leg')}"
            break
        first = out is None            # the given not yet satisfiable: a witness if it now is
        res, pre = _deepened(pack, rule, opts, n, min(induct.rule_rlimit(opts.rlimit), budget - spent),
                             left, first and opts.witness, files, lemmas)
        solved = pre.solved
        spent += solved.rlimit
        cached = cached and pre.cached
        saved.add(pre.cached, pre.recorded)
        if solved.verdict == "vacuous":
            last = n
            continue
        if solved.verdict == "unknown":
            stop = f"the check at {counted(n, 'leg')} ran out of the deepening budget"
            break
        if res.verdict == "violated" and not res.minimal and budget - spent < induct.rule_rlimit(opts.rlimit):
            res, again = _deepened(pack, rule, opts, n, induct.rule_rlimit(opts.rlimit), left, False,
                                   files, lemmas)
            saved.add(again.cached, again.recorded)
        if res.verdict == "violated":
            proof = {"kind": "bounded", "legs": n, "deepened_from": bound}
            step = (out or never).proof.get("induction")
            if step:
                proof["induction"] = step
            return attrs.evolve(res, proof=proof, seconds=time.monotonic() - t0, message=(
                res.message + f" (found by deepening the base case from {counted(bound, 'leg')}, the induction "
                f"step not proved: holds up to {n - 1}, fails at {n})"))
        if res.verdict != "holds":     # an error: said as it is
            return attrs.evolve(res, seconds=time.monotonic() - t0)
        last = n
        if first:                      # the given holds for the first time: the rule's own step
            witness = res.witness
            out = prove(rule, n)
            if out.error:
                return failed(out)
            if out.verdict == "holds":
                return attrs.evolve(base, verdict="holds", bound=n, proof=out.proof, witness=witness,
                                    message="", seconds=time.monotonic() - t0, cached=False)
    else:
        stop = f"--max-legs {opts.max_legs}" if opts.max_legs > bound else ""
    return _bounded(pack, rule, base, lemmas, bound, last, stop, out, never, witness,
                    time.monotonic() - t0, cached, opts, files)


def _deepened(pack: Pack, rule: Rule, opts: CheckOptions, n: int, rlimit: int, timeout: float,
              witness: bool, files, lemmas: tuple):
    """The bounded check of ``rule`` up to ``n`` legs, through the cache as any other (assuming
    ``lemmas``, proved for any number of legs): the engine's result (None when the solver's
    answer is vacuous or unknown) and the answer."""
    pre = next(solve_in_order([(pack, rule)], timeout=timeout, rlimit=rlimit, witness=witness,
                              cache=opts.cache, bounds=[n], assume=[lemmas]))
    if pre.solved.verdict in ("vacuous", "unknown"):
        return None, pre
    deep = attrs.evolve(opts, witness=witness, rlimit=rlimit, timeout=timeout)
    return check_rule(pack, rule, deep, pre, n, files), pre


def _bounded(pack, rule, base, lemmas, bound, last, stop, out, never, witness, seconds, cached,
             opts, files) -> RuleResult:
    """The verdict ``bounded`` after deepening: it holds up to ``last`` legs, with the
    counterexample to induction of the rule's own step written beside the counterexamples."""
    notes = [f"the base case deepened from {counted(bound, 'leg')}"] if last > bound else []
    if stop and last < opts.max_legs:
        notes.append(stop)
    within = f" ({'; '.join(notes)})" if notes else ""
    if out is None:             # the given never held up to `last` legs
        if never.cti is not None:
            k = never.cti["state"]["legs.count"]
            step = (f"not proved for any number of legs: from a state after {k} "
                    f"leg{'s' if k != 1 else ''} in which it did not hold, one more leg makes it hold")
        else:
            step = never.message
        message = f"{_vacuity_message(pack, rule, last, base.message)}{within}; that it never holds is {step}"
        proof = {**never.proof, "legs": last}
        if last > bound:
            proof["deepened_from"] = bound
        return attrs.evolve(base, verdict="bounded", bound=last, proof=proof, seconds=seconds,
                            message=message, cached=cached, witness=None)
    proof = {**out.proof, "legs": last}
    if last > bound:
        proof["deepened_from"] = bound
    path = None
    unwritten = ""
    if out.cti is not None and files is not None:
        try:
            path = files.induction(pack, rule, lemmas, out, last, base.solver)
        except WriteError as exc:
            unwritten = str(exc)
    message = out.message + f"; holds up to {counted(last, 'leg')}{within}"
    return attrs.evolve(base, verdict="bounded", bound=last, proof=proof, seconds=seconds,
                        message=message, induction=path, minimal=out.minimal, cached=cached,
                        witness=witness, write_error=unwritten)


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
