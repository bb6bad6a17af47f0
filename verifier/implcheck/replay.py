"""Replaying counterexample files of an implementation (``verifier replay [--impl]``) and showing
them (``verifier show``): the recorded world goes through the implementation again."""

from __future__ import annotations

from pathlib import Path

from verifier.errors import UsageError, VerifierError
from verifier.implcheck.interface import Finding, load
from verifier.implcheck.runner import Checker, build_doc
from verifier.world.scenario import world_from_data
from verifier.world.sim import applies, evaluate


def _search_for(recorded: dict, search: tuple) -> tuple:
    """Import paths: those given, then the folder the recorded module was imported from (the
    folder of its file, one level up per package of its dotted name)."""
    module = (recorded or {}).get("module") or ""
    if not module:
        return tuple(search)
    base = Path(module).parent
    for _ in range((recorded or {}).get("spec", "").split(":")[0].count(".")):
        base = base.parent
    return tuple(search) + (str(base),)


def load_recorded(doc: dict, impl: str | None, search: tuple):
    """(onboard, trackside) implementations for a recorded file: ``impl`` if given, else the
    recorded ones."""
    block = doc.get("implementation") or {}
    ob = block.get("onboard") or {}
    onboard = load(impl or ob.get("spec", ""), _search_for(ob, search))
    ts = block.get("trackside")
    trackside = load(ts["spec"], _search_for(ts, search)) if ts else None
    return onboard, trackside


def replay_impl_file(path: Path, doc: dict, pack_path, impl: str | None, search: tuple):
    from verifier.evidence.cexfile import rule_hashes
    from verifier.loader import load_pack
    from verifier.replay import Outcome
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
    if rule_hashes(pack, rule) != doc["rule"].get("sha256"):
        return Outcome(shown, "rule changed", f"rule {rid} or a definition it uses was edited; "
                       f"{onboard.spec} {'still fails' if still else 'passes'} in the recorded world{changed}")
    if still:
        return Outcome(shown, "still violated", f"rule {rid} with {onboard.spec}{changed}")
    return Outcome(shown, "now holds", f"rule {rid}: {onboard.spec} passes in the recorded world{changed}")


def fresh_doc(pack, rule, doc: dict, impl: str | None = None, search: tuple = ()):
    """The file an implementation's counterexample should be, recomputed, and its state."""
    onboard, trackside = load_recorded(doc, impl, search)
    world = world_from_data(doc["world"])
    st = Checker(pack, onboard, trackside).state(world)
    if isinstance(st, Finding):
        raise VerifierError(f"{onboard.spec} breaks the interface in the recorded world: {st.message}")
    return build_doc(pack, rule, st, onboard, trackside, bound=doc["bound"]), st
