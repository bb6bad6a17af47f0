"""Replaying counterexample files of an implementation (``verifier replay [--impl]``) and showing
them (``verifier show``): the recorded world goes through the implementation again."""

from __future__ import annotations

from pathlib import Path

from verifier.errors import VerifierError
from verifier.implcheck.interface import Finding, load
from verifier.implcheck.runner import Checker, build_doc
from verifier.world.scenario import world_from_data


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


def fresh_doc(pack, rule, doc: dict, impl: str | None = None, search: tuple = ()):
    """The file an implementation's counterexample should be, recomputed, and its state."""
    onboard, trackside = load_recorded(doc, impl, search)
    world = world_from_data(doc["world"])
    st = Checker(pack, onboard, trackside).state(world)
    if isinstance(st, Finding):
        raise VerifierError(f"{onboard.spec} breaks the interface in the recorded world: {st.message}")
    return build_doc(pack, rule, st, onboard, trackside, bound=doc["bound"]), st
