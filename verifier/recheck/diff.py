"""``verifier diff OLD NEW``: what an edit of a pack changes (DESIGN 7).

Packs are matched by name, rules (and lemmas: they are part of a pack's meaning) by id. Every
verdict is decided as ``verifier check`` decides it (the same bounds: a rule checked for any
number of legs at its base case, with induction and deepening), and a rule checked for any
number of legs is also edited when a lemma before it is. A rule is

- ``added`` / ``removed``: present on one side only (its verdict on that side is reported);
- ``unchanged``: everything that decides it is the same on both sides: its ``given`` (with the
  implicit premise) and ``expect`` text, the text of every definition in its dependency closure,
  the ``[world]`` scope, the values of the ``params`` its texts name, ``q_scale`` and
  ``rounding`` when it reaches the report, and its bound;
- ``edited``: any of these differs. For an edited rule the old and new verdicts are decided
  (each on its own side, through the cache), and two relations over the *common* scope (worlds
  inside both ``[world]`` scopes, up to the smaller bound), each decided by SMT:
  coverage of the ``given`` parts (same, narrower, wider, different) and the claims
  ``given implies expect`` (equivalent, stronger, weaker, incomparable). For every direction
  that differs a minimal distinguishing world is found by the counterexample ladder and
  replayed in the simulator on both sides, which must confirm it. When the solver leaves a
  question undecided, the two versions' own counterexamples and witnesses are tried in the
  simulator; one that shows the difference decides it (marked not minimal), and the relation
  is then said as far as it is known ("stronger or incomparable"), never guessed.

Section edits (``[world]``, ``[params]``, ``[let]``, ``[onboard]``, ``[trackside]``) are listed
with the rules they reach and those whose verdict they change.

A verdict *changes* when an edited rule's verdict differs between the sides, and when a rule is
added or removed (it goes from or to having no verdict). Exit code: 4 when solver and simulator
disagree, 1 when some verdict changes, 3 when nothing changes but something is unknown or
bounded, else 0
(bad input is 2, raised as an error naming the side).

Nothing is written unless ``out`` is given: then each distinguishing world and each side's
counterexample go to ``out/<pack>/`` (never into ``counterexamples/`` unless asked).
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import attrs

from verifier.about import CAUTION as NOTE
from verifier.about import __version__
from verifier.api import CheckOptions, check_packs
from verifier.check.model import Pack, Rule
from verifier.errors import UsageError, suggest
from verifier.evidence import cexfile
from verifier.run.engine import proof_words
from verifier.run.gitrev import load_side
from verifier.run.induct import base_bound
from verifier.smt import relate
from verifier.smt.smtlib import solver_version
from verifier.world.failure import implicit_premise
from verifier.world.scenario import fmt, world_from_data, world_from_flat, world_to_data
from verifier.world.sim import State, applies, evaluate, scope_problems

FORMAT = "verifier-distinction/1"
COVERAGE = {(False, False): "same", (True, False): "narrower", (False, True): "wider",
            (True, True): "different"}
CLAIM = {(False, False): "equivalent", (True, False): "stronger", (False, True): "weaker",
         (True, True): "incomparable"}
MEANING = {
    ("coverage", "old-only"): "covered by the old given and not by the new one",
    ("coverage", "new-only"): "covered by the new given and not by the old one",
    ("claim", "old-only"): "the old claim holds and the new one fails, a counterexample to the new rule",
    ("claim", "new-only"): "the new claim holds and the old one fails, a counterexample to the old rule",
}
CAUTION = ("This file records a world of the stated model that tells two versions of a rule "
           "apart. The model is not a real train: verdicts support, and never replace, the safety "
           "case under EN 50126/50128/50129, local rules and licensed practice.")


@attrs.frozen
class DiffOptions:
    legs: int | None = None
    rlimit: int | None = None
    timeout: float | None = None
    jobs: int = 1
    cache: object = None            # a verifier.run.cache.Cache, or None
    out: Path | None = None         # where to write worlds and counterexamples (None: nowhere)
    rules: tuple = ()               # rule ids to compare (empty: every rule)
    progress: object = None         # called with a line of text before each slow step, or None
    induction_depth: int = 4        # as verifier check's defaults: the same bounds, the same proofs
    max_legs: int = 12


@attrs.frozen
class SideVerdict:
    verdict: str
    bound: int
    message: str = ""
    kind: str = ""
    world: dict | None = None       # counterexample (violated) or witness (holds), as data
    file: str | None = None
    proof: str = ""                 # as check says it: "up to 3 legs", "any number of legs", ...

    def as_json(self) -> dict:
        return {"verdict": self.verdict, "bound": self.bound, "message": self.message,
                "world": self.world, "file": self.file, "proof": self.proof}


@attrs.frozen
class World:
    """One distinguishing world (or why there is none)."""

    kind: str
    direction: str
    status: str                     # none, found, unknown, error
    doc: dict | None = None         # the file's content (format verifier-distinction/1)
    file: str | None = None
    reason: str = ""

    def as_json(self) -> dict:
        return {"kind": self.kind, "direction": self.direction, "status": self.status,
                "meaning": MEANING[(self.kind, self.direction)], "reason": self.reason,
                "file": self.file, "world": self.doc["world"] if self.doc else None,
                "minimal": self.doc["minimal"] if self.doc else None,
                "outcome": self.doc["outcome"] if self.doc else None}


@attrs.frozen
class RuleDiff:
    id: str
    status: str                     # added, removed, unchanged, edited
    old: SideVerdict | None = None
    new: SideVerdict | None = None
    edits: tuple = ()               # what differs: "expect", "let.x", "world", ...
    bound: int | None = None        # common bound of the relations
    coverage: str | None = None
    claim: str | None = None
    worlds: tuple = ()              # World, for the four questions
    role: str = "rule"              # or "lemma": lemmas are part of a pack's meaning too

    def claim_meaning(self) -> str:
        """The claim relation in words. "Stronger" reads like an improvement, but it only means
        the new version is true in fewer worlds: when the rule's own text was edited, it asks
        more; when only a definition or the design it depends on was edited, the design now
        meets the same rule in fewer worlds, which is the way a design gets worse."""
        own = any(e in ("given", "expect") for e in self.edits)
        others = [e for e in self.edits if e not in ("given", "expect")]
        via = f"after the edit of {', '.join(others)}, " if others and not own else ""
        return {
            "stronger": (f"{via}the new version is true in fewer worlds: "
                         + ("it asks more" if own else "the design meets this rule in fewer worlds")),
            "weaker": (f"{via}the new version is true in more worlds: "
                       + ("it asks less" if own else "the design meets this rule in more worlds")),
            "incomparable": "each version is true in some world where the other is false",
            "stronger or incomparable": ("the new version is false in some world where the old one "
                                         "is true; whether the converse also happens was not decided"),
            "weaker or incomparable": ("the new version is true in some world where the old one is "
                                       "false; whether the converse also happens was not decided"),
        }.get(self.claim or "", "")

    @property
    def verdict_changed(self) -> bool:
        if self.status in ("added", "removed"):
            return True
        return self.status == "edited" and self.old.verdict != self.new.verdict

    def as_json(self) -> dict:
        return {"id": self.id, "role": self.role, "status": self.status,
                "verdict_changed": self.verdict_changed,
                "old": self.old.as_json() if self.old else None,
                "new": self.new.as_json() if self.new else None,
                "edits": list(self.edits), "bound": self.bound, "coverage": self.coverage,
                "claim": self.claim, "claim_meaning": self.claim_meaning() or None,
                "worlds": [w.as_json() for w in self.worlds if w.status != "none"]}


@attrs.frozen
class SectionChange:
    key: str                        # world, params.x, let.x, onboard.x, trackside.x
    change: str                     # added, removed, edited
    old: str | None
    new: str | None
    reaches: tuple                  # ids of rules (on both sides) that depend on it
    changes_verdict: tuple          # those among them whose verdict changes

    def as_json(self) -> dict:
        return attrs.asdict(self, recurse=False) | {"reaches": list(self.reaches),
                                                    "changes_verdict": list(self.changes_verdict)}


@attrs.frozen
class PackDiff:
    name: str
    old_path: str | None
    new_path: str | None
    sections: tuple
    rules: tuple

    def as_json(self) -> dict:
        return {"name": self.name, "old_path": self.old_path, "new_path": self.new_path,
                "sections": [s.as_json() for s in self.sections],
                "rules": [r.as_json() for r in self.rules]}


# ---- what decides a rule, and the sections of a pack ----------------------------------------
def _params_named(texts) -> set:
    out = set()
    for t in texts:
        out.update(re.findall(r"\bparams\.([A-Za-z_][A-Za-z0-9_]*)", t))
    return out


def fingerprint(pack: Pack, rule: Rule, bound: int, legs=None) -> dict:
    """Everything that decides the rule's meaning, by the section key it comes from. For a rule
    checked for any number of legs that includes every lemma of the pack before it (each may
    be assumed by its proof) and that it is checked so."""
    fp = {"given": rule.given.text if rule.given else None, "premise": rule.premise_legs,
          "expect": rule.expect.text, "bound": bound, "world": pack.scope.as_json(),
          "legs": "any" if pack.unbounded_for(rule, legs) else bound}
    if pack.unbounded_for(rule, legs):
        for lemma in pack.lemmas:
            if lemma.id == rule.id:
                break
            fp[f"lemma.{lemma.id}"] = _lemma_text(lemma)
    texts = [rule.expect.text] + ([rule.given.text] if rule.given else [])
    for kind, name in sorted(rule.deps):
        text = pack.definition((kind, name)).text
        fp[f"{kind}.{name}"] = text
        texts.append(text)
    for name in sorted(_params_named(texts)):
        v = pack.params.get(name)
        fp[f"params.{name}"] = fmt(v[1]) if v else None
    if any(kind == "onboard" for kind, _ in rule.deps):
        fp["onboard.q_scale"], fp["onboard.rounding"] = pack.q_scale, pack.rounding
    return fp


def _lemma_text(lemma: Rule) -> str:
    return (f"given {lemma.given.text}; " if lemma.given else "") + f"expect {lemma.expect.text}"


def sections(pack: Pack) -> dict:
    out = {"world": json.dumps(pack.scope.as_json(), sort_keys=True)}
    out.update({f"lemma.{x.id}": _lemma_text(x) for x in pack.lemmas})
    out.update({f"params.{k}": fmt(v[1]) for k, v in pack.params.items()})
    out.update({f"let.{k}": f.text for k, f in pack.lets.items()})
    out.update({f"onboard.{k}": f.text for k, f in pack.onboard.items()})
    out.update({"onboard.q_scale": pack.q_scale, "onboard.rounding": pack.rounding})
    out.update({f"trackside.{k}": f.text for k, f in pack.trackside.items()})
    return out


def _changed_keys(a: dict, b: dict) -> list:
    return sorted(k for k in set(a) | set(b) if a.get(k, _MISSING) != b.get(k, _MISSING))


_MISSING = object()


# ---- verdicts ------------------------------------------------------------------------------
def _verdicts(items, opts: DiffOptions) -> list[SideVerdict]:
    """Each (pack, rule, side) decided exactly as by ``verifier check`` (``engine.check_packs``:
    the same bounds, the pack's lemmas first, induction and deepening for a rule checked for any
    number of legs), each side's rules of a pack in one call."""
    copts = CheckOptions(legs=opts.legs, timeout=opts.timeout, rlimit=opts.rlimit, out=None,
                         jobs=opts.jobs, cache=opts.cache, induction_depth=opts.induction_depth,
                         max_legs=opts.max_legs)
    groups: dict = {}
    for pack, rule, _ in items:
        groups.setdefault(id(pack), (pack, []))[1].append(rule.id)
    results: dict = {}
    for pack, ids in groups.values():
        (pr,) = check_packs([pack], attrs.evolve(copts, rules=tuple(ids)))
        results.update({(id(pack), r.rule): r for r in pr.results})
    out = []
    for pack, rule, side in items:
        res = results[(id(pack), rule.id)]
        world, path = res.witness, None
        if res.verdict == "violated" and res.world is not None:
            world = res.world
            if opts.out is not None:
                doc = cexfile.build(pack, rule, State(pack, world_from_data(world)), verdict="violated",
                                    bound=res.bound, solver=res.solver, minimal=res.minimal)
                target = opts.out / pack.name / f"{rule.id}.{side}.json"
                cexfile.write_atomic(target, cexfile.dumps(doc))
                path = target.as_posix()
        out.append(SideVerdict(res.verdict, res.bound, res.message, res.kind, world, path,
                               proof_words(res)))
    return out


def check_bound(pack: Pack, rule: Rule, opts: DiffOptions) -> int:
    """The bound ``verifier check`` decides the rule at (the base case of a rule checked for any
    number of legs)."""
    return base_bound(pack, rule, opts.legs, opts.induction_depth)


# ---- distinguishing worlds -------------------------------------------------------------------
def _outcome(rule: Rule, st: State) -> dict:
    g = applies(rule, st)
    e = bool(evaluate(rule.expect.node, st, {})) if g else None
    return {"given": g, "expect": e, "claim": (not g) or bool(e)}


def confirms(kind: str, direction: str, old: dict, new: dict) -> bool:
    """Whether outcomes on the two sides show the stated difference."""
    key = "given" if kind == "coverage" else "claim"
    a, b = (old, new) if direction == "old-only" else (new, old)
    return bool(a[key]) and not b[key]


def distinction_doc(old_pack, old_rule, new_pack, new_rule, kind, direction, w, bound,
                    minimal) -> dict:
    so, sn = State(old_pack, w), State(new_pack, w)

    def rule_part(pack, rule):
        return {"id": rule.id, "title": rule.title,
                "given": rule.given.text if rule.given else None,
                "implicit_premise": implicit_premise(rule), "expect": rule.expect.text,
                "sha256": cexfile.rule_hashes(pack, rule)}

    return {
        "format": FORMAT, "caution": CAUTION, "kind": kind, "direction": direction,
        "meaning": MEANING[(kind, direction)], "bound": bound, "minimal": minimal,
        "pack": {side: {"name": p.name, "path": p.path, "sha256": p.sha256}
                 for side, p in (("old", old_pack), ("new", new_pack))},
        "rule": {"old": rule_part(old_pack, old_rule), "new": rule_part(new_pack, new_rule)},
        "scope": {"old": old_pack.scope.as_json(), "new": new_pack.scope.as_json()},
        "world": world_to_data(w),
        "outcome": {"old": _outcome(old_rule, so), "new": _outcome(new_rule, sn)},
        "derived": {"old": cexfile.derived_values(so), "new": cexfile.derived_values(sn)},
        "tool": {"verifier": __version__, "solver": solver_version()},
    }


def replay_distinction(doc: dict, old_pack: Pack, new_pack: Pack) -> bool:
    """Re-evaluate a distinguishing world in the simulator: does it still tell the two
    versions apart as recorded, inside both scopes?"""
    w = world_from_data(doc["world"])
    old_rule, new_rule = old_pack.rule(doc["rule"]["old"]["id"]), new_pack.rule(doc["rule"]["new"]["id"])
    if scope_problems(w, old_pack.scope, doc["bound"]) or scope_problems(w, new_pack.scope, doc["bound"]):
        return False
    return confirms(doc["kind"], doc["direction"], _outcome(old_rule, State(old_pack, w)),
                    _outcome(new_rule, State(new_pack, w)))


# When one question of a relation is undecided, what the other one found still narrows it.
PARTIAL = {("coverage", "old-only"): "narrower or different", ("coverage", "new-only"): "wider or different",
           ("claim", "old-only"): "stronger or incomparable", ("claim", "new-only"): "weaker or incomparable"}


def _seeded(kind, direction, seeds, old_pack, old_rule, new_pack, new_rule, bound):
    """A world from ``seeds`` (the two versions' own counterexamples and witnesses, as data)
    that the simulator confirms as a distinction, or None. Used when the solver leaves the
    question undecided: such a world decides that the distinction exists, though not minimal."""
    for data in seeds:
        w = world_from_data(data)
        if len(w.legs) > bound or scope_problems(w, old_pack.scope, bound) \
                or scope_problems(w, new_pack.scope, bound):
            continue
        if confirms(kind, direction, _outcome(old_rule, State(old_pack, w)),
                    _outcome(new_rule, State(new_pack, w))):
            return w
    return None


def _relations(old_pack, old_rule, new_pack, new_rule, bound, opts, seeds=()) -> tuple:
    kw = {}
    if opts.rlimit is not None:
        kw["rlimit"] = opts.rlimit
    if opts.timeout is not None:
        kw["timeout"] = opts.timeout
    found = relate.relate(old_pack, old_rule, new_pack, new_rule, bound, **kw)
    worlds = []
    for d in found:
        seeded = None
        if d.status == "unknown":
            seeded = _seeded(d.kind, d.direction, seeds, old_pack, old_rule, new_pack, new_rule, bound)
            if seeded is not None:
                d = attrs.evolve(d, status="found", world=None, minimal=False,
                                 reason=f"the solver did not decide this question ({d.reason}); "
                                        "this world is one version's own counterexample or witness, "
                                        "confirmed by the simulator, not minimised")
        if d.status != "found":
            worlds.append(World(d.kind, d.direction, d.status, reason=d.reason))
            continue
        w = seeded if seeded is not None else world_from_flat(d.world)
        doc = distinction_doc(old_pack, old_rule, new_pack, new_rule, d.kind, d.direction, w,
                              bound, d.minimal)
        ok = confirms(d.kind, d.direction, doc["outcome"]["old"], doc["outcome"]["new"])
        problems = scope_problems(w, old_pack.scope, bound) + scope_problems(w, new_pack.scope, bound)
        if not ok or problems:
            worlds.append(World(d.kind, d.direction, "error", doc, reason=(
                "the simulator does not confirm the solver's world: "
                + ("; ".join(problems) or json.dumps(doc["outcome"], sort_keys=True)))))
            continue
        path = None
        if opts.out is not None:
            target = opts.out / new_pack.name / f"{new_rule.id}.{d.kind}-{d.direction}.json"
            cexfile.write_atomic(target, cexfile.dumps(doc))
            path = target.as_posix()
        worlds.append(World(d.kind, d.direction, "found", doc, path, d.reason))

    def word(kind, table):
        ws = [w for w in worlds if w.kind == kind]
        if any(w.status == "error" for w in ws):
            return "error"
        if any(w.status == "unknown" for w in ws):
            known = [w for w in ws if w.status == "found"]
            return PARTIAL[(kind, known[0].direction)] if known else "unknown"
        return table[tuple(w.status == "found" for w in ws)]
    return word("coverage", COVERAGE), word("claim", CLAIM), tuple(worlds)


# ---- the diff --------------------------------------------------------------------------------
def diff_packs(old_packs: list[Pack], new_packs: list[Pack], opts: DiffOptions = DiffOptions(),
               single: bool = False) -> list[PackDiff]:
    """Compare two sides. ``single``: each side is one pack file, so the names must match."""
    olds, news = {p.name: p for p in old_packs}, {p.name: p for p in new_packs}
    if single and len(old_packs) == 1 and len(new_packs) == 1 and set(olds) != set(news):
        raise UsageError(f"OLD is pack {old_packs[0].name!r} ({old_packs[0].path}) but NEW is pack "
                         f"{new_packs[0].name!r} ({new_packs[0].path}): a diff compares two "
                         f"versions of one pack")
    names = [p.name for p in old_packs] + [p.name for p in new_packs if p.name not in olds]
    # what needs a verdict: every rule of an added/removed pack or rule, every edited rule
    plan, items = [], []
    for name in names:
        op, np_ = olds.get(name), news.get(name)
        ids = [r.id for r in op.lemmas + op.rules] if op else []
        ids += [r.id for r in np_.lemmas + np_.rules if r.id not in ids] if np_ else []
        if opts.rules:
            ids = [rid for rid in ids if rid in opts.rules]
        for rid in ids:
            orule = _rule(op, rid)
            nrule = _rule(np_, rid)
            if orule and nrule:
                ob, nb = check_bound(op, orule, opts), check_bound(np_, nrule, opts)
                edits = tuple(_changed_keys(fingerprint(op, orule, ob, opts.legs),
                                            fingerprint(np_, nrule, nb, opts.legs)))
                status = "edited" if edits else "unchanged"
            else:
                status, edits = ("removed" if orule else "added"), ()
            plan.append((name, rid, status, edits))
            if status != "unchanged":
                if orule:
                    items.append((op, orule, "old"))
                if nrule:
                    items.append((np_, nrule, "new"))
    if opts.rules:
        known = {r.id for p in old_packs + new_packs for r in p.rules + p.lemmas}
        missing = [r for r in opts.rules if r not in known]
        if missing:
            raise UsageError(f"no rule with id '{missing[0]}' on either side" + suggest(missing[0], known))
    if opts.progress and items:
        opts.progress(f"diff: deciding {len(items)} verdict{'s' if len(items) != 1 else ''}")
    verdicts = dict(zip([(p.name, r.id, s) for p, r, s in items], _verdicts(items, opts)))
    n_edited, k_edited = sum(1 for p in plan if p[2] == "edited"), 0
    out = []
    for name in names:
        op, np_ = olds.get(name), news.get(name)
        rules = []
        for pname, rid, status, edits in plan:
            if pname != name:
                continue
            old_v, new_v = verdicts.get((name, rid, "old")), verdicts.get((name, rid, "new"))
            role = (_rule(op, rid) or _rule(np_, rid)).role
            if status != "edited":
                rules.append(RuleDiff(rid, status, old_v, new_v, edits, role=role))
                continue
            orule, nrule = op.rule(rid), np_.rule(rid)
            bound = min(check_bound(op, orule, opts), check_bound(np_, nrule, opts))
            k_edited += 1
            if opts.progress:
                opts.progress(f"diff: [{k_edited}/{n_edited}] relating the two versions of "
                              f"{name}/{rid} (coverage and claim, up to {bound} leg{'s' if bound != 1 else ''})")
            seeds = [v.world for v in (old_v, new_v) if v is not None and v.world is not None]
            cov, claim, worlds = _relations(op, orule, np_, nrule, bound, opts, seeds)
            rules.append(RuleDiff(rid, status, old_v, new_v, edits, bound, cov, claim, worlds, role))
        secs = []
        if op and np_:
            so, sn = sections(op), sections(np_)
            for key in _changed_keys(so, sn):
                change = "added" if key not in so else "removed" if key not in sn else "edited"
                reach = tuple(r.id for r in rules if r.status == "edited" and key in r.edits)
                moved = tuple(r.id for r in rules if r.id in reach and r.verdict_changed)
                secs.append(SectionChange(key, change, so.get(key), sn.get(key), reach, moved))
        out.append(PackDiff(name, op.path if op else None, np_.path if np_ else None,
                            tuple(secs), tuple(rules)))
    return out


def _rule(pack: Pack | None, rid: str) -> Rule | None:
    if pack is None:
        return None
    try:
        return pack.rule(rid)
    except KeyError:
        return None


def diff_specs(old: str, new: str, opts: DiffOptions = DiffOptions()) -> list[PackDiff]:
    old_packs, new_packs = load_side(old, "OLD"), load_side(new, "NEW")
    single = not Path(old).is_dir() and not Path(new).is_dir() and len(old_packs) == len(new_packs) == 1
    return diff_packs(old_packs, new_packs, opts, single=single)


def exit_code(diffs: list[PackDiff]) -> int:
    rules = [r for d in diffs for r in d.rules]
    sides = [v for r in rules for v in (r.old, r.new) if v is not None]
    worlds = [w for r in rules for w in r.worlds]
    if any(v.verdict == "error" and v.kind == "internal" for v in sides) or \
            any(w.status == "error" for w in worlds):
        return 4
    if any(v.verdict == "error" for v in sides):
        return 2
    if any(r.verdict_changed for r in rules):
        return 1
    if any(v.verdict in ("unknown", "bounded") for v in sides) or any(w.status == "unknown" for w in worlds):
        return 3
    return 0


# ---- output --------------------------------------------------------------------------------
def as_json(diffs: list[PackDiff], old: str, new: str) -> dict:
    rules = [r for d in diffs for r in d.rules]
    counts = {s: sum(1 for r in rules if r.status == s)
              for s in ("edited", "added", "removed", "unchanged")}
    counts["verdict_changed"] = sum(1 for r in rules if r.verdict_changed)
    return {"old": old, "new": new, "packs": [d.as_json() for d in diffs], "summary": counts,
            "exit": exit_code(diffs)}


def _world_line(doc: dict) -> str:
    w = doc["world"]
    legs = "; ".join(f"{'cab change, ' if x['cab_change'] else ''}{x['running']} "
                     f"{x['distance']} m (odometer {x['odometer']} m)" for x in w["legs"]) or "none"
    return (f"balises {w['lrbg']['balises']} read {w['lrbg']['read']}"
            f"{' linked' if w['lrbg']['linked'] else ''} locacc {w['lrbg']['locacc']} m offset "
            f"{w['lrbg']['offset']} m; train {w['train']['length']} m antenna "
            f"{w['train']['antenna']} m; passage {w['passage']['direction']} "
            f"{w['passage']['running']} detect_error {w['passage']['detect_error']} m; legs: {legs}")


def table(diffs: list[PackDiff], old: str, new: str) -> str:
    lines = [f"diff OLD {old} -> NEW {new}"]
    for d in diffs:
        where = f"OLD {d.old_path or '(absent)'}, NEW {d.new_path or '(absent)'}"
        lines.append(f"pack {d.name} ({where})")
        for s in d.sections:
            moved = f"; changes the verdict of {', '.join(s.changes_verdict)}" if s.changes_verdict else ""
            reach = f"reaches {', '.join(s.reaches)}" if s.reaches else "reaches no rule"
            lines.append(f"  section {s.change:<8} {s.key}: {reach}{moved}")
        width = max((len(r.id) + (6 if r.role == "lemma" else 0) for r in d.rules), default=10)
        for r in d.rules:
            ov = f"{r.old.verdict} ({r.old.proof})" if r.old and r.old.proof else r.old.verdict if r.old else "-"
            nv = f"{r.new.verdict} ({r.new.proof})" if r.new and r.new.proof else r.new.verdict if r.new else "-"
            name = f"lemma {r.id}" if r.role == "lemma" else r.id
            head = f"  {r.status:<9} {name:<{width}}"
            if r.status == "unchanged":
                lines.append(head)
                continue
            head += f"  {ov} -> {nv}"
            if r.status == "edited":
                head += (f"  coverage {r.coverage}  claim {r.claim}  "
                         f"(common scope, up to {r.bound} leg{'s' if r.bound != 1 else ''})")
            lines.append(head)
            if r.edits:
                lines.append(f"            edited: {', '.join(r.edits)}")
            if r.status == "edited" and r.claim_meaning():
                lines.append(f"            claim {r.claim}: {r.claim_meaning()}")
            for side, v in (("old", r.old), ("new", r.new)):
                if v is None or not r.verdict_changed:
                    continue
                what = {"violated": "counterexample", "holds": "proved; witness"}.get(v.verdict)
                if what and v.world:
                    lines.append(f"            {side} {v.verdict}: {what}: "
                                 f"{_world_line({'world': v.world})}" + (f" ({v.file})" if v.file else ""))
                elif v.message:
                    lines.append(f"            {side} {v.verdict}: {v.message}")
            for w in r.worlds:
                if w.status == "none":
                    continue
                text = _world_line(w.doc) if w.doc and w.status == "found" else w.reason
                if w.doc and w.status == "found" and not w.doc.get("minimal", True):
                    text += " [not minimal: " + (w.reason or "the budget ran out") + "]"
                lines.append(f"            {w.kind} {w.direction} ({MEANING[(w.kind, w.direction)]}): "
                             f"{text}" + (f" ({w.file})" if w.file else ""))
    summary = as_json(diffs, old, new)["summary"]
    lines.append("summary: " + ", ".join(f"{summary[k]} {k}" for k in
                                        ("edited", "added", "removed", "unchanged"))
                 + f"; {summary['verdict_changed']} change verdict")
    lines.append(f"note: {NOTE}")
    return "\n".join(lines)
