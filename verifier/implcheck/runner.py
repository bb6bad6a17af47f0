"""Checking a user's implementation against a rule pack (``verifier test``, the pytest plugin).

For each rule, worlds come from three sources, in this order:

1. the solver: for every rule of the pack, up to four worlds where its ``expect`` is tight
   (:func:`verifier.smt.concrete.boundary_worlds`) and its witness or counterexample against the
   pack's own design (:func:`verifier.smt.solve.solve_rule`);
2. archived counterexample files of the pack (``counterexamples/<pack>/``, recursively);
3. Hypothesis (:func:`verifier.trust.strategies.worlds`, which leans on the corners), with the
   Hypothesis settings in force.

In each world the implementation computes the report (and the placement), the simulator the
rest (:class:`~verifier.implcheck.state.ImplState`), and the rule is evaluated. The first failing
world of a rule is made minimal: a failure Hypothesis finds is shrunk by Hypothesis; every
failing world is then taken down the order of DESIGN 6 (fewest legs, fewest cab changes, fewest
balises, errors to 0, inputs to their least value on the coarsest grid, Booleans false first),
each step kept only if the implementation still fails the rule there. The result is written as a
counterexample file in the usual format, with the implementation's name and the sha256 of its
module file, and replayed by ``verifier replay --impl``.

A world where the implementation breaks the interface (exception, time-out, wrong return) is a
contract finding of its own, made minimal the same way; it is not counted for or against a rule.
"""

from __future__ import annotations

import contextlib
import json
import math
import time
from fractions import Fraction
from pathlib import Path

import attrs

from verifier.check.model import Pack, Rule
from verifier.errors import UsageError
from verifier.evidence import cexfile, diagram
from verifier.evidence.story import story_text
from verifier.implcheck.interface import (
    DEFAULT_CALL_TIMEOUT,
    Finding,
    Loaded,
    Output,
    call_checked,
    observe,
    packet_of,
    validate_placement,
    validate_report,
)
from verifier.implcheck.state import ImplState, NotReturned
from verifier.lang.vocab import Direction, Running
from verifier.run import coverage
from verifier.run.executor import ExecutorSpec
from verifier.run.parallel import SharedPool, solve_in_order
from verifier.smt import concrete
from verifier.world.bounds import errors_after, odometer_range
from verifier.world.failure import describe_failure, failed_detail
from verifier.world.scenario import world_from_data, world_from_flat, world_to_data
from verifier.world.sim import World, applies, evaluate, holds, scope_problems

F = Fraction
HUNG = 3     # time-outs after which an implementation is taken to hang


@attrs.frozen
class ImplOptions:
    max_examples: int = 200       # Hypothesis examples per rule (the plugin: the profile's)
    seed: int | None = None       # Hypothesis seed; with derandomize the run is repeatable anyway
    derandomize: bool = True
    smt: bool = True              # worlds from the solver
    hypothesis: bool = True       # worlds from Hypothesis
    archive: bool = True          # worlds from archived counterexample files
    archive_dir: Path = Path("counterexamples")
    out: Path | None = Path("counterexamples")
    call_timeout: float = DEFAULT_CALL_TIMEOUT
    legs: int | None = None       # legs of generated worlds (default: the pack's bound; 6 for legs = "any")
    rules: tuple = ()
    settings: object = None       # a hypothesis.settings to use instead of the three above
    cache: object = None          # a verifier.run.cache.Cache for the solver's witnesses, or None
    executor: object = None       # a verifier.run.executor.ExecutorSpec for the solver's witnesses


@attrs.frozen
class RuleOutcome:
    rule: str
    title: str
    line: int
    status: str                   # passed, failed, not checked
    worlds: int                   # worlds in which the rule was evaluated
    sources: dict                 # source -> worlds
    applied: int = 0              # of those, worlds in which its given held
    world: World | None = None    # the minimal failing world
    found_by: str = ""            # which source found the failure
    counterexample: str | None = None
    message: str = ""
    legs_before: int = 0          # legs of the failing world as found (before shrinking)


@attrs.frozen
class ContractFinding:
    kind: str
    message: str
    where: str
    world: World
    file: str | None = None
    found_by: str = ""


@attrs.frozen
class ImplReport:
    pack: str
    path: str
    onboard: Loaded
    trackside: Loaded | None
    rules: tuple
    findings: tuple               # ContractFinding
    calls: int
    seconds: float
    output: Output | None = attrs.field(default=None, eq=False)   # what the implementation printed
    scope: dict = attrs.field(factory=dict, eq=False)   # what "passed" covers (evidence.coverage)

    def exit_code(self) -> int:
        if self.findings or any(r.status == "failed" for r in self.rules):
            return 1
        if any(r.status == "not checked" for r in self.rules):
            return 3
        return 0

    def as_json(self) -> dict:
        return {"pack": self.pack, "path": self.path, "onboard": _loaded_json(self.onboard),
                "trackside": _loaded_json(self.trackside) if self.trackside else None,
                "calls": self.calls, "seconds": round(self.seconds, 3),
                "rules": [{"id": r.rule, "status": r.status, "worlds": r.worlds, "applied": r.applied,
                           "sources": r.sources,
                           "found_by": r.found_by or None, "counterexample": r.counterexample,
                           "message": r.message} for r in self.rules],
                "contract": [{"kind": f.kind, "message": f.message, "where": f.where or None,
                              "file": f.file, "found_by": f.found_by} for f in self.findings],
                "captured_output": (self.output or Output()).as_json(), "scope": self.scope}


def _loaded_json(x: Loaded) -> dict:
    return {"spec": x.spec, "module": x.module_file, "module_sha256": x.module_sha256}


class Checker:
    """Evaluates worlds with an implementation in place, memoising the implementation's calls."""

    def __init__(self, pack: Pack, onboard: Loaded, trackside: Loaded | None = None,
                 call_timeout: float = DEFAULT_CALL_TIMEOUT):
        self.pack, self.onboard, self.trackside = pack, onboard, trackside
        self.timeout = call_timeout
        self.calls = 0
        self.timeouts = 0
        self._hung = None
        self._memo: dict = {}
        self.output = Output()      # what the implementations wrote, at import and in calls
        for loaded in (onboard, trackside):
            self.output.merge(getattr(loaded, "output", None))

    def state(self, world: World):
        """The ImplState of a world, or the Finding of the call that broke the interface. After
        :data:`HUNG` time-outs the implementation is not called again: every further world
        gets the same time-out finding (a hanging implementation would otherwise cost the
        time limit at every world tried)."""
        if world in self._memo:
            return self._memo[world]
        if self.timeouts >= HUNG:
            return self._hung
        self.calls += 1
        report, finding = call_checked(self.onboard, observe(world, self.pack.scope),
                                       validate_report, self.timeout, self.output)
        out = finding
        if finding is None:
            placement = None
            if self.trackside is not None:
                placement, finding = call_checked(self.trackside, packet_of(report, world),
                                                  validate_placement, self.timeout, self.output)
            if finding is not None:
                out = finding
            else:
                st = ImplState(self.pack, world, report, placement, self.trackside is not None)
                if self.trackside is not None and placement is None and st.get("rbc.placed"):
                    out = Finding("missing field", f"{self.trackside.spec} returned no placement for a "
                                  "report that places the train (all codes in range, no qualifier unknown)")
                else:
                    out = st
        if isinstance(out, Finding) and out.kind == "time-out":
            self.timeouts += 1
            self._hung = out
        self._memo[world] = out
        return out

    def outcome(self, rule: Rule, world: World) -> str:
        """pass (the given holds and so does the expect), idle (the given does not hold), fail,
        not returned (the rule reads an output the implementation lacks), or breach (the
        implementation broke the interface in this world)."""
        st = self.state(world)
        if isinstance(st, Finding):
            return "breach"
        try:
            if not applies(rule, st):
                return "idle"
            return "pass" if evaluate(rule.expect.node, st, {}) else "fail"
        except NotReturned:
            return "not returned"


# ---- world sources ----------------------------------------------------------------------------

def solver_worlds(pack: Pack, rules, bound: int, *, timeout: float = 10.0, cache=None,
                  executor=None) -> list:
    """(world, source) from the solver for every rule: boundary worlds, then the witness or
    counterexample against the pack's own design (from the verdict cache when it has them);
    duplicates dropped, order fixed. The witnesses are solved on ``executor`` (an
    :class:`~verifier.run.executor.ExecutorSpec`) when it is given, the boundary worlds here."""
    out, seen = [], set()
    spec = executor if executor is not None else ExecutorSpec()
    with SharedPool(spec) if spec.parallel else contextlib.nullcontext() as pool:
        solved_all = solve_in_order([(pack, r) for r in rules], timeout=timeout * 3, cache=cache,
                                    bounds=[bound] * len(rules), jobs=spec.jobs, pool=pool)
        for rule in rules:
            items = []
            try:
                for s in concrete.boundary_worlds(pack, rule, bound, count=4, timeout=timeout):
                    items.append((s.world, "solver boundary"))
            except Exception:  # noqa: BLE001 - a source that fails only gives fewer worlds
                pass
            solved = next(solved_all).solved
            if solved.world is not None:
                items.append((solved.world, "solver witness" if solved.verdict == "holds" else "solver counterexample"))
            for flat, src in items:
                w = world_from_flat(flat)
                if w not in seen:
                    seen.add(w)
                    out.append((w, src))
    return out


def archived_worlds(pack: Pack, root: Path, bound: int) -> list:
    """(world, "archive") from the pack's counterexample files (not counterexamples to
    induction), in path order; files that do not parse, or whose world is outside today's
    scope, are passed over."""
    out = []
    base = Path(root) / pack.name
    if not base.is_dir():
        return out
    for f in sorted(base.rglob("*.json")):
        try:
            doc = json.loads(f.read_text(encoding="utf-8"))
            if not str(doc.get("format", "")).startswith("verifier-counterexample/"):
                continue
            w = world_from_data(doc["world"])
        except (OSError, ValueError, KeyError, TypeError, AttributeError):
            continue
        if not scope_problems(w, pack.scope, max(bound, len(w.legs))):
            out.append((w, "archive"))
    return out


def generation_bound(pack: Pack, rule: Rule | None, legs: int | None) -> int:
    if legs is not None:
        return legs
    if rule is not None and pack.unbounded_for(rule):
        return max(pack.bound_for(rule), 6)
    return pack.bound_for(rule) if rule is not None else pack.legs


# ---- shrinking -------------------------------------------------------------------------------

GRIDS = (F(1), F(1, 10), F(1, 100), F(1, 1000))


def _candidates(value: Fraction, low: Fraction) -> list:
    """Simpler values for a length, simplest first: the low end, then the value rounded down
    on ever finer grids, then halfway towards the low end (as far as twelve halvings)."""
    out = [low]
    for g in GRIDS:
        v = max(low, math.floor(value / g) * g)
        if v not in out and v < value:
            out.append(v)
    v = value
    for _ in range(12):
        v = low + (v - low) / 2
        if v not in out and v < value:
            out.append(v)
    return out


def shrink(world: World, fails, scope, bound: int) -> World:
    """Take a failing world down the order of DESIGN 6, keeping each change only when the
    world stays in scope and ``fails`` still holds. Deterministic."""
    def ok(w: World) -> bool:
        return not scope_problems(w, scope, bound) and fails(w)

    def lengths(w: World, get, put, low) -> World:
        for c in _candidates(get(w), low):
            trial = put(w, c)
            if trial != w and ok(trial):
                return trial
        return w

    w = world
    for _ in range(4):
        before = w
        # (1) fewest legs, fewest cab changes, fewest balises; first the shortest prefix that
        # still fails (two cab changes that cancel are dropped together, not one by one)
        for k in range(len(w.legs)):
            trial = attrs.evolve(w, legs=w.legs[:k])
            if ok(trial):
                w = trial
                break
        i = len(w.legs) - 1
        while i >= 0:
            trial = attrs.evolve(w, legs=w.legs[:i] + w.legs[i + 1:])
            if ok(trial):
                w = trial
            i -= 1
        for i, leg in enumerate(w.legs):
            if leg.cab_change:
                trial = attrs.evolve(w, legs=w.legs[:i] + (attrs.evolve(leg, cab_change=False),) + w.legs[i + 1:])
                if ok(trial):
                    w = trial
        for n in range(scope.balises[0], w.balises):
            trial = attrs.evolve(w, balises=n, read=min(w.read, n))
            if ok(trial):
                w = trial
                break
        # (2) errors to 0
        for field in ("offset", "detect_error"):
            trial = attrs.evolve(w, **{field: F(0)})
            if getattr(w, field) != 0 and ok(trial):
                w = trial
        for i, leg in enumerate(w.legs):
            if leg.odometer != leg.distance:
                for exact in (attrs.evolve(leg, odometer=leg.distance), attrs.evolve(leg, distance=leg.odometer)):
                    trial = attrs.evolve(w, legs=w.legs[:i] + (exact,) + w.legs[i + 1:])
                    if ok(trial):
                        w = trial
                        break
        # (3) the other inputs to their least value
        for n in range(1, w.read):
            trial = attrs.evolve(w, read=n)
            if ok(trial):
                w = trial
                break
        w = lengths(w, lambda x: x.locacc, lambda x, c: attrs.evolve(x, locacc=F(math.ceil(c)), offset=max(-F(math.ceil(c)), min(F(math.ceil(c)), x.offset))), scope.locacc[0])
        w = lengths(w, lambda x: x.length, lambda x, c: attrs.evolve(x, length=c), scope.train_length[0])
        w = lengths(w, lambda x: x.antenna, lambda x, c: attrs.evolve(x, antenna=c), scope.antenna[0])
        for i in range(len(w.legs)):
            # a shorter leg: measured exactly if that still fails, else with the same error,
            # else with the same relative error, else at either end of what the reading error
            # bound allows (a failure that needs the error at its bound keeps it there)
            for keep in ("exact", "error", "ratio", "high", "low"):
                def put(x, c, i=i, keep=keep):
                    leg = x.legs[i]
                    if keep in ("high", "low"):
                        over, under, measured = errors_after(scope, x.legs[:i], x.detect_error)
                        lo, hi = odometer_range(scope, over, under, measured, c)
                        odo = hi if keep == "high" else lo
                    else:
                        odo = {"exact": c, "error": c + (leg.odometer - leg.distance),
                               "ratio": leg.odometer * c / leg.distance if leg.distance else c}[keep]
                    return attrs.evolve(x, legs=x.legs[:i] + (attrs.evolve(leg, distance=c, odometer=odo),) + x.legs[i + 1:])
                w = lengths(w, lambda x, i=i: x.legs[i].distance, put, scope.leg_distance[0])
        for i in range(len(w.legs)):
            # an error that could not be 0: its least magnitude
            def put_err(x, c, i=i):
                leg = x.legs[i]
                sign = 1 if leg.odometer >= leg.distance else -1
                return attrs.evolve(x, legs=x.legs[:i] + (attrs.evolve(leg, odometer=leg.distance + sign * c),) + x.legs[i + 1:])
            w = lengths(w, lambda x, i=i: abs(x.legs[i].odometer - x.legs[i].distance), put_err, F(0))
        for field in ("offset", "detect_error"):
            def put_e(x, c, field=field):
                return attrs.evolve(x, **{field: c if getattr(x, field) >= 0 else -c})
            w = lengths(w, lambda x, field=field: abs(getattr(x, field)), put_e, F(0))
        # (4) Booleans false first, enums in declaration order
        for change in ({"linked": False}, {"direction": Direction.NOMINAL}, {"running": Running.FORWARD}):
            trial = attrs.evolve(w, **change)
            if trial != w and ok(trial):
                w = trial
        for i, leg in enumerate(w.legs):
            if leg.running is not Running.FORWARD:
                trial = attrs.evolve(w, legs=w.legs[:i] + (attrs.evolve(leg, running=Running.FORWARD),) + w.legs[i + 1:])
                if ok(trial):
                    w = trial
        if w == before:
            break
    return w


# ---- Hypothesis ------------------------------------------------------------------------------

class _Found(Exception):
    """Raised inside a Hypothesis test when the property fails (Hypothesis then shrinks)."""


def _settings(opts: ImplOptions):
    """The Hypothesis settings of a search and its seed (None: Hypothesis chooses)."""
    from hypothesis import HealthCheck, settings
    if opts.settings is not None:       # the user's (pytest plugin): a derandomized profile
        base = opts.settings            # gets a fixed seed per search instead
        derand = base.derandomize
        return settings(base, derandomize=False, deadline=None, print_blob=False,
                        suppress_health_check=list(HealthCheck)), (0 if derand else None)
    s = settings(max_examples=opts.max_examples, derandomize=False, database=None, deadline=None,
                 print_blob=False, suppress_health_check=list(HealthCheck))
    if opts.seed is not None:
        return s, opts.seed
    return s, (0 if opts.derandomize else None)


def hypothesis_search(strategy, predicate, opts: ImplOptions, counter: list, name: str = "") -> World | None:
    """A world of ``strategy`` for which ``predicate`` is true, shrunk by Hypothesis, or None.
    ``predicate`` returns True (found), False, or None (reject this world). A repeatable search
    is seeded from the seed and ``name`` (each rule explores other worlds, the same every run)."""
    import hashlib

    from hypothesis import assume, given
    from hypothesis import seed as seed_dec
    last: list = []
    chosen, seed = _settings(opts)

    @chosen
    @given(strategy)
    def search(world):
        counter[0] += 1
        got = predicate(world)
        assume(got is not None)
        if got:
            last.append(world)
            raise _Found()

    if seed is not None:
        mixed = int(hashlib.sha256(f"{seed}:{name}".encode()).hexdigest()[:12], 16)
        search = seed_dec(mixed)(search)
    from hypothesis.errors import Unsatisfiable
    try:
        search()
    except _Found:
        return last[-1]
    except Unsatisfiable:        # every world rejected (the implementation broke the interface)
        return None
    except BaseExceptionGroup as group:   # noqa: F821 - several failures (Python 3.11+)
        if last and group.subgroup(_Found) is not None:
            return last[-1]
        raise
    return None


# ---- the whole check -------------------------------------------------------------------------

class Session:
    """One implementation against one pack: the seeds and the contract check are done once,
    each rule when it is asked for (``verifier test`` asks for all, the pytest plugin one per
    item)."""

    def __init__(self, pack: Pack, onboard: Loaded, trackside: Loaded | None = None,
                 opts: ImplOptions = ImplOptions(), progress=None):
        from verifier.trust.strategies import worlds as world_strategy
        if pack.scope.groups == 2:
            raise UsageError(f"pack {pack.name} has two groups: the implementation interface "
                             "(docs/implementations.md) observes one group only, so far")
        self.t0 = time.monotonic()
        # where files go, fixed now: the implementation's code may change the working directory
        self.out = None if opts.out is None else (Path(opts.out), Path(opts.out).absolute())
        opts = attrs.evolve(opts, archive_dir=Path(opts.archive_dir).absolute())
        self.pack, self.onboard, self.trackside, self.opts = pack, onboard, trackside, opts
        self.strategy = world_strategy
        self.chk = Checker(pack, onboard, trackside, opts.call_timeout)
        self.rules = [r for r in pack.rules if not opts.rules or r.id in opts.rules]
        self.progress = progress
        self._outcomes: dict = {}
        base = max((pack.bound_for(r) for r in self.rules), default=pack.legs)
        self.seeds: list = []
        if opts.smt:
            if progress:
                progress("asking the solver for boundary worlds and witnesses")
            self.seeds += solver_worlds(pack, self.rules, base, cache=opts.cache,
                                        executor=opts.executor)
        if opts.archive:
            self.seeds += archived_worlds(pack, opts.archive_dir, base)
        self.findings = tuple(self._contract())

    def _breach(self, world) -> Finding | None:
        st = self.chk.state(world)
        return st if isinstance(st, Finding) else None

    def _contract(self) -> list:
        """The first world (seeds, then Hypothesis) where the implementation breaks the
        interface, made minimal."""
        pack, opts = self.pack, self.opts
        gen_bound = max((generation_bound(pack, r, opts.legs) for r in self.rules), default=pack.legs)
        first = next(((w, src) for w, src in self.seeds if self._breach(w) is not None), None)
        if first is None and opts.hypothesis:
            found = hypothesis_search(self.strategy(pack.scope, gen_bound),
                                      lambda w: self._breach(w) is not None, opts, [0], "contract")
            if found is not None:
                first = (found, "hypothesis")
        if first is None:
            return []
        w, src = first
        kind = self._breach(w).kind
        w = shrink(w, lambda x: (b := self._breach(x)) is not None and b.kind == kind, pack.scope,
                   max(gen_bound, len(w.legs)))
        f = self._breach(w)
        return [ContractFinding(f.kind, f.message, f.where, w, found_by=src)]

    def rule(self, rule_id: str) -> RuleOutcome:
        if rule_id not in self._outcomes:
            rule = self.pack.rule(rule_id)
            self._outcomes[rule_id] = _check_rule(self.pack, rule, self.chk, self.seeds, self.opts,
                                                  self.strategy)
        return self._outcomes[rule_id]

    def all(self) -> list:
        out = []
        for n, rule in enumerate(self.rules, 1):
            if self.progress:
                self.progress(f"[{n}/{len(self.rules)}] {rule.id}")
            out.append(self.rule(rule.id))
        return out

    def story(self, outcome: RuleOutcome) -> str:
        """The counterexample of a failed rule in words (as ``verifier show`` tells it)."""
        rule = self.pack.rule(outcome.rule)
        st = self.chk.state(outcome.world)
        doc = build_doc(self.pack, rule, st, self.onboard, self.trackside,
                        bound=max(len(outcome.world.legs), self.pack.bound_for(rule)))
        shown = outcome.counterexample or f"(not written) {self.pack.name}/{rule.id}"
        return story_text(doc, self.pack, rule, st, shown=shown, checked=0,
                          checked_line=f"Checked: computed by {self.onboard.spec} and the exact "
                                       f"simulator in this run, under {self.pack.path}.")

    def report(self) -> ImplReport:
        outcomes = self.all()
        tested = {"generated_legs": max((generation_bound(self.pack, r, self.opts.legs) for r in self.rules),
                                        default=self.pack.legs),
                  "solver_legs": max((self.pack.bound_for(r) for r in self.rules), default=self.pack.legs),
                  "onboard": self.onboard.spec, "trackside": self.trackside.spec if self.trackside else None}
        report = ImplReport(self.pack.name, self.pack.path, self.onboard, self.trackside,
                            tuple(outcomes), self.findings, self.chk.calls, time.monotonic() - self.t0,
                            self.chk.output,
                            coverage.summary(self.pack, rules=self.rules, tested=tested))
        if self.out is not None:
            shown, absolute = self.out
            report = write_files(report, self.pack, self.chk, absolute, shown)
            for r in report.rules:
                if r.counterexample:
                    self._outcomes[r.rule] = r
        return report


def check(pack: Pack, onboard: Loaded, trackside: Loaded | None = None,
          opts: ImplOptions = ImplOptions(), progress=None) -> ImplReport:
    """Every selected rule of ``pack`` against the implementation (see the module docstring)."""
    return Session(pack, onboard, trackside, opts, progress).report()


def _check_rule(pack, rule, chk: Checker, seeds, opts, world_strategy) -> RuleOutcome:
    bound = generation_bound(pack, rule, opts.legs)
    sources: dict = {}
    missing = None
    failing = None
    applied = [0]          # worlds in which the rule's given held
    for w, src in seeds:
        if len(w.legs) > bound or scope_problems(w, pack.scope, bound):
            continue
        got = chk.outcome(rule, w)
        if got == "breach":
            continue
        if got == "not returned":
            missing = w
            break
        sources[src] = sources.get(src, 0) + 1
        applied[0] += got != "idle"
        if got == "fail":
            failing = (w, src)
            break
    if missing is None and failing is None and opts.hypothesis:
        counter = [0]

        lacking: list = []

        def fails(w):
            got = chk.outcome(rule, w)
            if got == "not returned":
                lacking.append(w)
                return True          # stop: the rule cannot be checked on this implementation
            if got == "breach":
                return None
            applied[0] += got != "idle"
            return got == "fail"

        found = hypothesis_search(world_strategy(pack.scope, bound), fails, opts, counter,
                                  f"{pack.name}/{rule.id}")
        sources["hypothesis"] = counter[0] - len(lacking)
        if lacking:
            missing = lacking[0]
        elif found is not None:
            failing = (found, "hypothesis")
    total = sum(sources.values())
    base = dict(rule=rule.id, title=rule.title, line=rule.line, worlds=total, sources=sources,
                applied=applied[0])
    if failing is None and missing is None and total == 0:
        return RuleOutcome(status="not checked", message="in no world tried did the implementation "
                           "return a valid report (see the contract findings)", **base)
    if failing is None and missing is None and applied[0] == 0:
        return RuleOutcome(status="not checked", message=f"its given held in none of the {total} "
                           "worlds tried (more examples, or the solver's worlds, may reach it)", **base)
    if missing is not None:
        try:
            chk.state(missing).get  # noqa: B018 - the state exists; say what it lacks
            holds(rule, chk.state(missing))
            why = ""
        except NotReturned as exc:
            why = str(exc.args[0])
        return RuleOutcome(status="not checked", message=f"the rule reads {why}", **base)
    if failing is None:
        return RuleOutcome(status="passed", **base)
    w, src = failing
    legs_before = len(w.legs)
    w = shrink(w, lambda x: chk.outcome(rule, x) == "fail", pack.scope, max(bound, len(w.legs)))
    msg = describe_failure(failed_detail(rule, chk.state(w)))
    return RuleOutcome(status="failed", world=w, found_by=src, message=msg, legs_before=legs_before, **base)


def _slug(spec: str) -> str:
    return spec.replace(":", ".").replace("/", "-")


def impl_dir(out: Path, pack: Pack, onboard: Loaded) -> Path:
    return Path(out) / pack.name / "impl" / _slug(onboard.spec)


def implementation_block(onboard: Loaded, trackside: Loaded | None) -> dict:
    """What a counterexample file records of the implementation that failed."""
    return {"onboard": _loaded_json(onboard),
            "trackside": _loaded_json(trackside) if trackside is not None else None}


def write_files(report: ImplReport, pack: Pack, chk: Checker, out: Path, shown: Path | None = None) -> ImplReport:
    """Counterexample files (the usual format, with the implementation) and contract findings,
    written under ``out`` and named in the report as under ``shown`` (the same folder as the
    user spelt it; default ``out``)."""
    folder = impl_dir(out, pack, report.onboard)
    named = impl_dir(shown if shown is not None else out, pack, report.onboard)
    rules = []
    for r in report.rules:
        if r.status != "failed":
            rules.append(r)
            continue
        rule = pack.rule(r.rule)
        st = chk.state(r.world)
        doc = build_doc(pack, rule, st, report.onboard, report.trackside,
                        bound=max(len(r.world.legs), pack.bound_for(rule)))
        target = folder / f"{rule.id}.json"
        cexfile.write_atomic(target, cexfile.dumps(doc))
        diagram.write_beside(target, doc, rule, st)
        rules.append(attrs.evolve(r, counterexample=(named / target.name).as_posix()))
    findings = []
    for f in report.findings:
        doc = {"format": "verifier-contract/1", "caution": cexfile.CAUTION,
               "pack": {"name": pack.name, "path": pack.path, "sha256": pack.sha256},
               "implementation": implementation_block(report.onboard, report.trackside),
               "finding": {"kind": f.kind, "message": f.message, "where": f.where or None},
               "world": world_to_data(f.world)}
        target = folder / f"contract-{f.kind.replace(' ', '-')}.json"
        cexfile.write_atomic(target, cexfile.dumps(doc))
        findings.append(attrs.evolve(f, file=(named / target.name).as_posix()))
    return attrs.evolve(report, rules=tuple(rules), findings=tuple(findings))


def build_doc(pack, rule, st, onboard: Loaded, trackside: Loaded | None, *, bound: int) -> dict:
    """A counterexample file of an implementation: the usual contents (DESIGN 6) computed with
    the implementation in place, and which implementation it was."""
    doc = cexfile.build(pack, rule, st, verdict="violated", bound=bound,
                        solver="implementation check", minimal=True)
    doc["implementation"] = implementation_block(onboard, trackside)
    return doc


def describe_sources(sources: dict) -> str:
    parts = [f"{n} from {k}" for k, n in sorted(sources.items()) if n]
    return ", ".join(parts) if parts else "none"


