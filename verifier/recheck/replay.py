"""Replaying archived counterexample files against today's packs (``verifier replay``)."""

from __future__ import annotations

import json
from pathlib import Path

import attrs

from verifier.errors import Diagnostic, PackError, UsageError, VerifierError
from verifier.evidence import cexfile, ctistory
from verifier.implcheck.interface import Finding
from verifier.implcheck.replay import load_recorded
from verifier.implcheck.runner import Checker
from verifier.lang.source import read_regular_text
from verifier.run.loader import load_pack
from verifier.world.scenario import world_from_data
from verifier.world.sim import State, applies, evaluate, scope_problems


@attrs.frozen
class Outcome:
    file: str
    status: str      # still violated, now holds, rule changed, rule gone; for counterexamples
                     # to induction: still not inductive, no longer breaks, lemmas changed
    detail: str


def read_counterexample(path: Path) -> dict:
    shown = path.as_posix()
    try:
        doc = json.loads(read_regular_text(path, shown, "the file"))
    except (OSError, json.JSONDecodeError) as exc:
        raise PackError([Diagnostic(shown, getattr(exc, "lineno", 1), getattr(exc, "colno", 1),
                                    f"not a counterexample file: {exc}")]) from None
    fmt = doc.get("format") if isinstance(doc, dict) else None
    if not isinstance(fmt, str) or not fmt.startswith("verifier-counterexample/"):
        raise PackError([Diagnostic(shown, 1, 1, "not a counterexample file: field 'format' is missing or foreign")])
    if fmt != cexfile.FORMAT:
        raise PackError([Diagnostic(shown, 1, 1, f"field 'format' is {fmt!r}; this verifier reads {cexfile.FORMAT!r}")])
    for field in ("pack", "rule", "world", "bound"):
        if field not in doc:
            raise PackError([Diagnostic(shown, 1, 1, f"counterexample file lacks field '{field}'")])
    return doc


def _find(path: Path, recorded: Path):
    """The recorded pack path, relative to where the check ran: from here, then from every
    folder above the file (an archive keeps the checkout's layout)."""
    candidates = [recorded] if recorded.is_absolute() else (
        [Path.cwd() / recorded] + [a / recorded for a in path.resolve().parents])
    return next((c for c in candidates if c.is_file()), None)


def replay_induction(path: Path) -> Outcome:
    """A counterexample to induction against today's pack: ``still not inductive`` when the
    recorded path still breaks the induction step (the rule holds at the first state and fails
    one leg later, every lemma holding), ``no longer breaks it`` otherwise, ``rule changed`` or
    ``rule gone``."""
    shown = path.as_posix()
    doc = ctistory.read_file(path).doc
    recorded = Path(doc["pack"]["path"])
    pack_path = _find(path, recorded)
    if pack_path is None:
        return Outcome(shown, "rule gone", f"pack {recorded.as_posix()} not found")
    pack = load_pack(pack_path, recorded.as_posix())
    rid = doc["rule"]["id"]
    try:
        rule, lemmas, _, _, rep = ctistory.rebuild(pack, doc)
    except ValueError as exc:
        if str(exc).startswith("rule.id"):
            return Outcome(shown, "rule gone", f"pack {pack.name} has no rule '{rid}' any more")
        if str(exc).startswith("lemmas["):     # a lemma it was written with is gone
            return _with_todays_lemmas(shown, pack, doc, rid, [x.id for x in pack.lemmas],
                                       [entry["id"] for entry in doc["lemmas"]])
        return Outcome(shown, "rule changed", f"rule {rid}: the recorded path no longer fits "
                       f"today's pack ({exc})")
    same = cexfile.rule_hashes(pack, rule) == doc["rule"].get("sha256") and all(
        cexfile.rule_hashes(pack, lemma) == entry.get("sha256")
        for lemma, entry in zip(lemmas, doc["lemmas"]))
    still = not rep.problems
    verdict = "still breaks the induction step" if still else "no longer breaks the induction step"
    today = [lemma.id for lemma in pack.lemmas]
    written = [entry["id"] for entry in doc["lemmas"]]
    if same and today != written:
        return _with_todays_lemmas(shown, pack, doc, rid, today, written)
    if not same:
        return Outcome(shown, "rule changed", f"rule {rid}, a lemma or a definition they use was "
                       f"edited; the recorded path {verdict}")
    if still:
        return Outcome(shown, "still not inductive", f"rule {rid}")
    return Outcome(shown, "no longer breaks", f"rule {rid} unchanged, but the recorded path "
                   f"{verdict}: " + "; ".join(rep.problems))


def _with_todays_lemmas(shown: str, pack, doc: dict, rid: str, today: list, written: list) -> Outcome:
    """A counterexample to induction whose pack now has other lemmas: the recorded path judged
    with today's lemmas (every one of them, in file order; replay proves none: check does)."""
    added = [x for x in today if x not in written]
    removed = [x for x in written if x not in today]
    what = "; ".join(part for part in (
        f"added {', '.join(added)}" if added else "", f"removed {', '.join(removed)}" if removed else "",
        "reordered" if not added and not removed else "") if part)
    names = ", ".join(today) or "none"
    head = f"rule {rid}: the pack's lemmas changed since the file was written ({what})"
    try:
        *_, rep = ctistory.rebuild(pack, {**doc, "lemmas": [{"id": x} for x in today]})
    except ValueError as exc:
        return Outcome(shown, "lemmas changed", f"{head}; the recorded state cannot be judged with "
                       f"today's lemmas ({names}: {exc}); run verifier check on the pack")
    if rep.problems:
        return Outcome(shown, "lemmas changed", f"{head}; with today's lemmas ({names}; replay does "
                       "not prove them, verifier check does) the recorded path no longer breaks the "
                       "induction step: " + "; ".join(rep.problems))
    return Outcome(shown, "lemmas changed", f"{head}; with today's lemmas ({names}) the recorded "
                   "path still breaks the induction step")


def replay_file(path: Path, impl: str | None = None, search: tuple = ()) -> Outcome:
    if ctistory.is_induction_file(path):
        return replay_induction(path)
    shown = path.as_posix()
    try:
        head = json.loads(read_regular_text(path, shown, "the file"))
    except (OSError, PackError, json.JSONDecodeError):
        head = None
    if isinstance(head, dict) and (head.get("format") == "verifier-contract/1" or "implementation" in head):
        pack_path = _find(path, Path(str(head.get("pack", {}).get("path", ""))))
        return replay_impl_file(path, head, pack_path, impl, search)
    doc = read_counterexample(path)
    recorded = Path(doc["pack"]["path"])
    pack_path = _find(path, recorded)
    if pack_path is None:
        return Outcome(shown, "rule gone", f"pack {recorded.as_posix()} not found (looked in the "
                       "working directory and every folder above the file)")
    pack = load_pack(pack_path, recorded.as_posix())
    rid = doc["rule"]["id"]
    try:
        rule = pack.rule(rid)
    except KeyError:
        return Outcome(shown, "rule gone", f"pack {pack.name} has no rule '{rid}' any more")
    try:
        world = world_from_data(doc["world"])
    except ValueError as exc:
        raise PackError([Diagnostic(shown, 1, 1, str(exc))]) from None
    st = State(pack, world)
    still = applies(rule, st) and not evaluate(rule.expect.node, st, {})
    outside = scope_problems(world, pack.scope, max(doc["bound"], len(world.legs)))
    same = cexfile.rule_hashes(pack, rule) == doc["rule"].get("sha256")
    verdict = "still violates it" if still else "no longer violates it"
    if not same:
        extra = " (and the world is now outside the scope)" if outside else ""
        return Outcome(shown, "rule changed", f"rule {rid} or a definition it uses was edited; the recorded world {verdict}{extra}")
    if still:
        return Outcome(shown, "still violated", f"rule {rid}")
    return Outcome(shown, "now holds", f"rule {rid} unchanged, but the recorded world no longer violates it (tool or model changed)")


def replay_impl_file(path: Path, doc: dict, pack_path, impl: str | None, search: tuple) -> Outcome:
    """A counterexample or contract finding of an implementation: the recorded world through
    the implementation (``impl``, else the recorded one) again."""
    shown = path.as_posix()
    if pack_path is None:
        return Outcome(shown, "rule gone", f"pack {doc.get('pack', {}).get('path')} not found")
    pack = load_pack(pack_path, doc["pack"]["path"])
    try:
        onboard, trackside = load_recorded(doc, impl, search)
    except UsageError as exc:
        return Outcome(shown, "impl gone", str(exc))
    recorded = (doc.get("implementation") or {}).get("onboard") or {}
    if onboard.spec != recorded.get("spec"):
        changed = f" (replayed with {onboard.spec}; the file records {recorded.get('spec')})"
    elif onboard.module_sha256 != recorded.get("module_sha256"):
        changed = f" ({onboard.module_file} changed since the file was written)"
    else:
        changed = ""
    try:
        world = world_from_data(doc["world"])
    except (KeyError, ValueError) as exc:
        raise VerifierError(f"{shown}: {exc}") from None
    chk = Checker(pack, onboard, trackside)
    st = chk.state(world)
    if doc.get("format") == "verifier-contract/1":
        if isinstance(st, Finding):
            return Outcome(shown, "still breaks", f"{onboard.spec}: {st.message}{changed}")
        return Outcome(shown, "now keeps it", f"{onboard.spec} returns a valid report in the recorded world{changed}")
    rid = doc["rule"]["id"]
    try:
        rule = pack.rule(rid)
    except KeyError:
        return Outcome(shown, "rule gone", f"pack {pack.name} has no rule '{rid}' any more")
    if isinstance(st, Finding):
        return Outcome(shown, "still breaks", f"{onboard.spec} breaks the interface in the recorded world: {st.message}")
    still = applies(rule, st) and not evaluate(rule.expect.node, st, {})
    if cexfile.rule_hashes(pack, rule) != doc["rule"].get("sha256"):
        return Outcome(shown, "rule changed", f"rule {rid} or a definition it uses was edited; "
                       f"{onboard.spec} {'still fails' if still else 'passes'} in the recorded world{changed}")
    if still:
        return Outcome(shown, "still violated", f"rule {rid} with {onboard.spec}{changed}")
    return Outcome(shown, "now holds", f"rule {rid}: {onboard.spec} passes in the recorded world{changed}")


def replay_paths(paths, impl: str | None = None, search: tuple = ()) -> list[Outcome]:
    """Re-judge every file under ``paths``; counterexamples of an implementation are replayed
    with ``impl`` (module:function) when given, else with the one they record."""
    files = []
    for p in map(Path, paths):
        if p.is_dir():
            files.extend(sorted(q for q in p.rglob("*.json") if q.is_file()))
        elif p.exists():
            files.append(p)
        else:
            raise PackError([Diagnostic(p.as_posix(), 1, 1, "no such file or directory")])
    return [replay_file(f, impl, search) for f in files]
