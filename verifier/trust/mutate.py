"""Seeded mutants: how many small design errors do a pack's rules catch?

Each mutant changes one thing in the pack's onboard or trackside design (its own formulas or
the defaults it inherits, DESIGN 4.4 and 4.5): flip a sign, swap over- and under-reading,
drop a term, change a rounding mode or a rounding function, replace the travelled distance by
the displacement, swap a comparison, an if-then-else or a qualifier. The mutant is loaded
through the ordinary checker, then every rule that could notice it (its dependency closure
reads the mutated formula or the wire) is asked whether some world in scope violates it.

- ``killed``: a rule that holds for the original is violated by the mutant;
- ``survived``: no rule is violated;
- ``equivalent``: SMT proves every onboard output, wire value and trackside output equal to the
  original's in every world in scope (not a design error at all; left out of the ratio);
- ``invalid``: the mutant does not load (type or observability error; left out of the ratio);
- ``undecided``: a solver question ran out of budget (counted as surviving, never as killed).

kill ratio = killed / (killed + survived + undecided).
"""

from __future__ import annotations

import contextlib
import re
import time

import attrs

from verifier.check.model import Pack
from verifier.check.typer import check_pack
from verifier.errors import Diagnostic, PackError, TaskLost
from verifier.lang import ast
from verifier.lang.pack import RawExpr, parse_pack_text
from verifier.lang.parser import ExprSyntaxError, parse
from verifier.lang.vocab import GLOBAL
from verifier.run.executor import ExecutorSpec, open_executor
from verifier.run.loader import pack_from_source, pack_source
from verifier.smt.concrete import same_formula, same_outputs, violation_status

# Names swapped by the "swap" mutations, both ways; each pair is readable by the same side.
SWAPS = [("est.bound_over", "est.bound_under", "swap over and under"),
         ("rbc.l_doubtover", "rbc.l_doubtunder", "swap over and under"),
         ("est.l_doubtover", "est.l_doubtunder", "swap over and under"),
         ("report.q_dirlrbg", "report.q_dlrbg", "swap qualifiers"),
         ("est.orientation", "est.motion", "swap orientation and motion"),
         ("rbc.min_safe_front", "rbc.max_safe_front", "swap min and max safe front")]
DISPLACEMENT = {
    "est.travelled": "abs(est.front_passage)",
    "est.bound_over": "(world.odometry_over.fixed + world.odometry_over.rate * abs(est.front_passage))",
    "est.bound_under": "(world.odometry_under.fixed + world.odometry_under.rate * abs(est.front_passage))",
}
CALL_SWAPS = {"floor_to": ("ceil_to", "round_to"), "ceil_to": ("floor_to", "round_to"),
              "round_to": ("floor_to", "ceil_to"), "min": ("max",), "max": ("min",)}
CMP_SWAPS = {"==": "!=", "!=": "==", "<": "<=", "<=": "<", ">": ">=", ">=": ">"}
ROUNDINGS = ("widen", "nearest", "down")


@attrs.frozen
class Mutant:
    target: str          # "onboard l_doubtover", "trackside max_safe_front", "onboard rounding"
    operator: str        # what kind of change
    original: str        # the text changed (a sub-expression, or a setting)
    replacement: str     # what it became
    mutated: str         # the whole mutated formula (or setting)

    @property
    def key(self) -> tuple:
        return (self.target, self.mutated)

    def describe(self) -> str:
        return f"{self.target}: {self.operator}: {self.original!r} -> {self.replacement!r}"


@attrs.frozen
class MutantResult:
    mutant: Mutant
    status: str          # killed, survived, equivalent, invalid, undecided
    by: str = ""         # the killing rule, or why invalid / undecided
    seconds: float = 0.0


STATUSES = ("killed", "survived", "undecided", "equivalent", "invalid")


def _counts(results) -> dict:
    out = dict.fromkeys(STATUSES, 0)
    for r in results:
        out[r.status] += 1
    return out


def _kill_ratio(c: dict) -> float | None:
    """Killed over the mutants that load and are not proved equivalent."""
    denom = c["killed"] + c["survived"] + c["undecided"]
    return c["killed"] / denom if denom else None


@attrs.frozen
class MutationReport:
    pack: str
    path: str
    results: tuple
    seconds: float

    def counts(self) -> dict:
        return _counts(self.results)

    def ratio(self) -> float | None:
        return _kill_ratio(self.counts())

    def as_json(self) -> dict:
        return {"pack": self.pack, "path": self.path, "counts": self.counts(), "ratio": self.ratio(),
                "seconds": round(self.seconds, 1),
                "mutants": [{"target": r.mutant.target, "operator": r.mutant.operator,
                             "original": r.mutant.original, "mutated": r.mutant.mutated,
                             "status": r.status, "by": r.by} for r in self.results]}

    def text(self) -> str:
        c = self.counts()
        ratio = self.ratio()
        lines = [f"pack {self.pack} ({self.path}): {len(self.results)} mutants: {c['killed']} killed, "
                 f"{c['survived']} survived, {c['undecided']} undecided, {c['equivalent']} equivalent, "
                 f"{c['invalid']} invalid; kill ratio "
                 + (f"{100 * ratio:.1f} %" if ratio is not None else "n/a")]
        for r in self.results:
            if r.status in ("survived", "undecided"):
                lines.append(f"  {r.status:<9} {r.mutant.describe()}" + (f" ({r.by})" if r.by else ""))
        return "\n".join(lines)


# ---- generating mutants ---------------------------------------------------------------------------

def _mutations(text: str, node: ast.Node, readers: str, on_top: str = "") -> list[tuple[str, str, str, str]]:
    """(operator, replaced text, replacement, new formula text) for one formula. ``on_top`` is
    the term the onboard's reading bounds carry besides the odometry bound (the detection
    error, DESIGN 4.1), kept in the displacement mutants."""
    out = []

    def span(n):
        return text[n.start:n.end]

    def replace(n, new, operator):
        out.append((operator, span(n), new, text[:n.start] + new + text[n.end:]))

    for n in ast.walk(node):
        if isinstance(n, ast.Binary) and n.op in "+-":
            gap = text[n.left.end:n.right.start]
            k = gap.find(n.op)
            if k >= 0:
                at = n.left.end + k
                flipped = "-" if n.op == "+" else "+"
                new = text[:at] + flipped + text[at + 1:]
                out.append(("flip a sign", span(n), new[n.start:n.end], new))
            replace(n, span(n.left), "drop a term")
            if n.op == "+":
                replace(n, span(n.right), "drop a term")
        elif isinstance(n, ast.Unary) and n.op == "-":
            replace(n, span(n.operand), "flip a sign")
        elif isinstance(n, ast.Unary) and n.op == "not":
            replace(n, f"({span(n.operand)})", "drop a negation")
        elif isinstance(n, ast.Call):
            if n.func == "along":
                replace(n, f"along(flip({span(n.args[0])}), {span(n.args[1])})", "flip a sign")
            elif n.func == "side":
                replace(n, f"side(-({span(n.args[0])}))", "flip a sign")
            elif n.func == "flip":
                replace(n, span(n.args[0]), "drop a flip")
            elif n.func == "abs":
                replace(n, span(n.args[0]), "drop abs")
            for other in CALL_SWAPS.get(n.func, ()):
                op = "change a rounding function" if n.func.endswith("_to") else "swap min and max"
                replace(n, other + span(n)[len(n.func):], op)
        elif isinstance(n, ast.Chain) and len(n.ops) == 1:
            gap = text[n.operands[0].end:n.operands[1].start]
            op = n.ops[0]
            k = gap.find(op)
            if k >= 0:
                at = n.operands[0].end + k
                new = text[:at] + CMP_SWAPS[op] + text[at + len(op):]
                out.append(("change a comparison", span(n), new[n.start:n.end + len(new) - len(text)], new))
        elif isinstance(n, ast.IfThen):
            replace(n, f"if {span(n.cond)} then {span(n.orelse)} else {span(n.then)}", "swap if branches")
        elif isinstance(n, ast.Name) and n.ref == ("item", "remembered"):
            # the onboard's list of LRBGs ignored: information of any group used (DESIGN 4.10)
            replace(n, "true", "ignore the onboard's list")
        elif isinstance(n, ast.Name) and n.ref and n.ref[0] == "var":
            name = n.ref[1]
            for a, b, op in SWAPS:
                if name in (a, b):
                    replace(n, b if name == a else a, op)
            if readers == "onboard" and name in DISPLACEMENT:
                new = DISPLACEMENT[name]
                if on_top and name != "est.travelled":
                    new = new[:-1] + f" + {on_top})"
                replace(n, new, "travelled distance replaced by displacement")
    return out


def mutants(pack: Pack) -> list[Mutant]:
    """Every single-change mutant of the pack's onboard and trackside design, in a fixed order."""
    out: list[Mutant] = []
    for kind, table in (("onboard", pack.onboard), ("trackside", pack.trackside)):
        for name in sorted(table):
            f = table[name]
            on_top = "" if pack.scope.detection_in_odometry else "world.detection"
            for operator, old, rep, new in _mutations(f.text, f.node, kind, on_top):
                out.append(Mutant(f"{kind} {name}", operator, old, rep, new))
    if "l_doubtover" in pack.onboard and "l_doubtunder" in pack.onboard:
        out.append(Mutant("onboard l_doubtover/l_doubtunder", "swap over and under",
                          "l_doubtover, l_doubtunder", "l_doubtunder, l_doubtover",
                          pack.onboard["l_doubtunder"].text + " | " + pack.onboard["l_doubtover"].text))
    for mode in ROUNDINGS:
        if mode != pack.rounding:
            out.append(Mutant("onboard rounding", "change a rounding mode", pack.rounding, mode, mode))
    seen, unique = set(), []
    for m in out:
        if m.key not in seen:
            seen.add(m.key)
            unique.append(m)
    return unique


def build(pack: Pack, m: Mutant) -> Pack:
    """The mutant as a checked pack (raises PackError when it does not load)."""
    raw = parse_pack_text(pack.text, pack.path)
    if m.target == "onboard rounding":
        return check_pack(attrs.evolve(raw, rounding=m.mutated))
    if m.target == "onboard l_doubtover/l_doubtunder":
        ob = dict(raw.onboard)
        ob["l_doubtover"], ob["l_doubtunder"] = ob["l_doubtunder"], ob["l_doubtover"]
        ob = {k: attrs.evolve(v, key=raw.onboard[k].key, default=False) for k, v in ob.items()}
        return check_pack(attrs.evolve(raw, onboard=ob))
    kind, name = m.target.split(" ", 1)
    table = dict(getattr(raw, kind))
    try:
        node = parse(m.mutated)
    except ExprSyntaxError as exc:
        raise PackError([Diagnostic(pack.path, 1, 1, f"mutant does not parse: {exc.message}")]) from None
    table[name] = RawExpr(m.mutated, node, table[name].key, False)
    return check_pack(attrs.evolve(raw, **{kind: table}))


# ---- deciding mutants ---------------------------------------------------------------------------

_OBSERVABLE_PREFIXES = ("report.", "rbc.")


def _relevant(rule, m: Mutant) -> bool:
    if m.target.startswith("onboard rounding") or m.target.startswith("onboard l_doubtover/"):
        return any(k.startswith(_OBSERVABLE_PREFIXES) for k in rule.reads) or any(
            d[0] == "onboard" for d in rule.deps)
    kind, name = m.target.split(" ", 1)
    return (kind, name) in rule.deps


def observable_names(pack: Pack | None = None) -> list[str]:
    """The design outputs and the wire (in every pack), and each information item's onboard
    decisions (DESIGN 4.9)."""
    out = [n for n, e in GLOBAL.items() if e.kind in ("onboard-output", "wire", "trackside-output")]
    for item in (pack.infos if pack is not None else ()):
        out += [f"info.{item.id}.accepted", f"info.{item.id}.position"]
    return out


def baseline(pack: Pack, timeout: float, executor=None) -> dict:
    """The original pack's answer to each rule's violation question (sat = violated), each
    question a task on ``executor`` when one is given (a lost one: ``unknown``, so that rule
    kills nothing)."""
    if executor is None:
        return {r.id: rule_status(pack, r.id, timeout) for r in pack.rules}
    source = pack_source(pack)
    futures = [(r.id, executor.submit(source_rule_status, source, r.id, timeout)) for r in pack.rules]
    out = {}
    for rid, f in futures:
        try:
            out[rid] = executor.outcome(f)
        except TaskLost:
            out[rid] = "unknown"
    return out


def rule_status(pack: Pack, rule_id: str, timeout: float) -> str:
    r = pack.rule(rule_id)
    return violation_status(pack, r, pack.bound_for(r), rlimit=200_000_000, timeout=timeout)


def source_rule_status(source: tuple, rule_id: str, timeout: float) -> str:
    """A worker's task: one rule's violation question on the pack sent as text."""
    return rule_status(pack_from_source(source), rule_id, timeout)


def run_mutants(pack: Pack, *, timeout: float = 20.0, limit: int | None = None,
                progress=None, killed_elsewhere: dict | None = None, jobs: int = 1,
                executor=None) -> MutationReport:
    """Generate and decide every mutant of ``pack`` (or the first ``limit``).

    ``killed_elsewhere`` maps mutant keys already killed by another pack to that pack's name:
    those are not decided again (a catalogue run, where the packs share the default design).
    ``executor`` (an open one, :mod:`verifier.run.executor`) decides each mutant as a task of
    its own; else with ``jobs`` > 1 a pool of that many local worker processes does. Each
    decision is a set of fresh solver contexts, so the verdicts are those of a serial run; only
    which rule is named as the killer may differ (a serial run asks first the rules that killed
    most so far). A mutant whose task is lost is ``undecided``, never killed."""
    t0 = time.monotonic()
    todo = mutants(pack)[:limit] if limit else mutants(pack)
    if executor is None and jobs > 1 and len(todo) > 1:
        with open_executor(ExecutorSpec("local", jobs)) as ex:
            base = baseline(pack, timeout, ex)
            results = _decide_on(ex, pack, todo, base, timeout, killed_elsewhere, progress)
    elif executor is not None:
        base = baseline(pack, timeout, executor)
        results = _decide_on(executor, pack, todo, base, timeout, killed_elsewhere, progress)
    else:
        base = baseline(pack, timeout)
        results = _decide_all(pack, todo, base, timeout, killed_elsewhere, progress)
    return MutationReport(pack.name, pack.path, tuple(results), time.monotonic() - t0)


def decide_mutants(source: tuple, ms: list, base: dict, timeout: float) -> list:
    """A worker's task: a run of mutants of the pack sent as text (:func:`pack_source`), loaded
    once, decided as a serial run decides them (the rules that killed most in the run asked
    first)."""
    return _decide_all(pack_from_source(source), ms, base, timeout, None)


def chunk_size(n: int, workers: int) -> int:
    """Mutants a task: about four tasks a worker, at most 8 mutants each. Neighbouring mutants
    mutate the same formula, so a run of them shares its killers; one mutant a task cost 14 %
    more CPU than a serial run (the pack loaded again and no killer known first)."""
    return max(1, min(8, -(-n // (4 * max(1, workers)))))


def _decide_on(ex, pack: Pack, todo, base: dict, timeout: float, killed_elsewhere, progress) -> list:
    """Every mutant of ``todo`` in runs of neighbours, each run a task on ``ex``; the results in
    the order of ``todo``. A run whose task is lost leaves its mutants ``undecided``."""
    source = pack_source(pack)
    left = [i for i, m in enumerate(todo) if not (killed_elsewhere and m.key in killed_elsewhere)]
    k = chunk_size(len(left), getattr(ex, "jobs", 1))
    runs = [left[j:j + k] for j in range(0, len(left), k)]
    futures = [(run, ex.submit(decide_mutants, source, [todo[i] for i in run], base, timeout))
               for run in runs]
    by_index: dict = {}
    done = 0
    for run, future in futures:
        try:
            got = ex.outcome(future)
        except TaskLost as exc:
            got = [MutantResult(todo[i], "undecided", f"no result: {exc}"[:160]) for i in run]
        by_index.update(zip(run, got))
        if progress:
            for i in run:
                done += 1
                progress(done, len(left), todo[i])
    return [by_index[i] if i in by_index else
            MutantResult(m, "killed", f"by pack {killed_elsewhere[m.key]}", 0.0)
            for i, m in enumerate(todo)]


def _decide_all(pack: Pack, todo, base: dict, timeout: float, killed_elsewhere, progress=None) -> list:
    """The verdict of each mutant of ``todo`` (killed, equivalent, survived, invalid, undecided)."""
    names = observable_names(pack)
    results = []
    kills: dict = {}          # rule id -> kills so far (rules that kill often are asked first)
    for i, m in enumerate(todo, 1):
        t1 = time.monotonic()
        if progress:
            progress(i, len(todo), m)
        if killed_elsewhere and m.key in killed_elsewhere:
            results.append(MutantResult(m, "killed", f"by pack {killed_elsewhere[m.key]}", 0.0))
            continue
        try:
            mp = build(pack, m)
        except PackError as exc:
            results.append(MutantResult(m, "invalid", exc.diagnostics[0].message[:160], time.monotonic() - t1))
            continue
        status, by = "survived", ""
        readers = [r for r in pack.rules if _relevant(r, m)]
        rules = sorted((r for r in readers if base[r.id] == "unsat"), key=lambda r: -kills.get(r.id, 0))
        # rules whose question about the original design was left undecided are not asked
        # about the mutant either: a survivor's words must not count them as unbroken
        unasked = [r.id for r in readers if base[r.id] not in ("unsat", "sat")]
        aside = (f"; not asked: {', '.join(unasked)} (undecided for the original design)"
                 if unasked else "")
        undecided = []
        # a world with at most one leg is in scope at every bound: ask cheaply first
        for small in (True, False):
            for r in rules:
                k = pack.bound_for(r)
                if small and k > 1:
                    k = 1
                elif not small and k <= 1:
                    continue
                answer = violation_status(mp, mp.rule(r.id), k, rlimit=200_000_000, timeout=timeout)
                if answer == "sat":
                    status, by = "killed", f"{pack.name}/{r.id}"
                    kills[r.id] = kills.get(r.id, 0) + 1
                    break
                if answer == "unknown" and not small:
                    undecided.append(r.id)
            if status == "killed":
                break
        if status == "survived":
            bound = max([pack.legs] + [r.legs for r in pack.rules if r.legs is not None])
            same = "unknown"
            if " " in m.target and "/" not in m.target and m.target != "onboard rounding":
                kind, name = m.target.split(" ", 1)
                same = same_formula(pack, mp, (kind, name), bound, timeout=timeout)
            if same != "equivalent":
                same = same_outputs(pack, mp, bound, names, timeout=timeout)
            if same == "equivalent":
                status, by = "equivalent", "every output equal in every world in scope (SMT)"
            elif undecided:
                status, by = "undecided", "no answer within the budget from " + ", ".join(undecided)
            elif not readers:
                by = "no rule reads this formula"
            elif not rules:
                by = ("every rule that reads it is already violated by the original design" if not unasked
                      else "no rule that reads it holds for the original design" + aside)
            elif same == "unknown":
                by = "equivalence not decided within the budget" + aside
            else:
                by = ("the outputs differ, but no rule of the pack is violated by the difference" if not unasked
                      else "the outputs differ, but no rule asked is violated by the difference" + aside)
        results.append(MutantResult(m, status, by, time.monotonic() - t1))
    return results


@attrs.frozen
class CatalogueReport:
    """Mutants of several packs, one verdict per distinct mutant (same target and mutated text):
    killed if any pack kills it, equivalent if proved so where it was not killed, invalid if it
    never loads."""

    packs: tuple          # MutationReport
    seconds: float

    def combined(self) -> dict:
        out: dict = {}
        order = {"killed": 0, "survived": 1, "undecided": 2, "equivalent": 3, "invalid": 4}
        for rep in self.packs:
            for r in rep.results:
                have = out.get(r.mutant.key)
                if have is None or order[r.status] < order[have.status]:
                    out[r.mutant.key] = r
        return out

    def counts(self) -> dict:
        return _counts(self.combined().values())

    def ratio(self) -> float | None:
        return _kill_ratio(self.counts())

    def survivors(self) -> list:
        return [r for r in self.combined().values() if r.status in ("survived", "undecided")]

    def as_json(self) -> dict:
        return {"counts": self.counts(), "ratio": self.ratio(), "seconds": round(self.seconds, 1),
                "packs": [p.as_json() for p in self.packs]}


def run_catalogue(packs, *, timeout: float = 20.0, progress=None, jobs: int = 1,
                  executor: ExecutorSpec | None = None) -> CatalogueReport:
    """Mutants of every pack; a mutant killed by an earlier pack is not decided again. One
    executor (``executor``, else ``jobs`` local worker processes) serves every pack."""
    t0 = time.monotonic()
    killed: dict = {}
    reports = []
    spec = executor or ExecutorSpec("local", jobs)
    with open_executor(spec) if spec.parallel else contextlib.nullcontext() as ex:
        for pack in packs:
            rep = run_mutants(pack, timeout=timeout, progress=progress, killed_elsewhere=killed,
                              executor=ex)
            for r in rep.results:
                if r.status == "killed" and r.mutant.key not in killed:
                    killed[r.mutant.key] = pack.name
            reports.append(rep)
    return CatalogueReport(tuple(reports), time.monotonic() - t0)


def slug(text: str) -> str:
    return re.sub(r"[^a-z0-9]+", "-", text.lower()).strip("-")
