"""Counterexample files (DESIGN 6): canonical JSON, written atomically, byte-identical for the
same pack and the same tool versions."""

from __future__ import annotations

import hashlib
import json
import os
import tempfile
from fractions import Fraction
from pathlib import Path

from verifier.about import CAUTION as _TOOL_CAUTION
from verifier.about import __version__
from verifier.check.model import Pack, Rule
from verifier.errors import WriteError
from verifier.lang import vocab
from verifier.lang.ast import COUNT
from verifier.world.failure import failed_detail, implicit_premise
from verifier.world.scenario import fmt, snapshot_to_data, world_to_data
from verifier.world.sim import State, World, applies, detection, evaluate

FORMAT = "verifier-counterexample/1"
CAUTION = ("This file records a world of the stated model in which the rule is false. "
           + _TOOL_CAUTION)


def sha256_text(text: str) -> str:
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def plain(value, ty: str | None = None):
    """A value as JSON data: exact rationals as strings, counts and codes as numbers."""
    if isinstance(value, bool):
        return value
    if isinstance(value, (vocab.Direction, vocab.Running)):
        return value.word
    if isinstance(value, Fraction):
        if ty == COUNT and value.denominator == 1:
            return int(value)
        return fmt(value)
    if isinstance(value, int):
        return value
    return value


def rule_hashes(pack: Pack, rule: Rule) -> dict:
    """sha256 of the rule's text and of every definition it depends on."""
    text = f"given: {rule.given.text if rule.given else ''}\nexpect: {rule.expect.text}"
    defs = {}
    for dep in sorted(rule.deps):
        f = pack.definition(dep)
        defs[f"{dep[0]} {dep[1]}"] = sha256_text(f.text)
    defs["pack settings"] = sha256_text(json.dumps(
        {"q_scale": pack.q_scale, "rounding": pack.rounding, "world": pack.scope.as_json(),
         "params": {k: fmt(v[1]) for k, v in sorted(pack.params.items())}}, sort_keys=True))
    return {"text": sha256_text(text), "definitions": defs}


def derived_values(st: State) -> dict:
    out = {}
    groups = st.pack.scope.groups
    for name, entry in sorted(vocab.GLOBAL.items()):
        if entry.kind in ("input", "hidden-input") and name != "legs.count":
            continue
        if (name in vocab.GROUP_NAMES and groups == 1) or vocab.groups_needed(name) > groups:
            continue
        out[name] = plain(st.get(name), entry.ty)
    legs = []
    for leg in st.legs:
        legs.append({k: plain(v, vocab.LEG[k].ty) for k, v in sorted(leg.items())
                     if vocab.LEG[k].kind not in ("input", "hidden-input")})
    out["legs"] = legs
    return out


def failed_part(rule: Rule, st: State) -> dict | None:
    """The failed part as JSON data (DESIGN 6): the item's text and, for a comparison, the
    operator and both sides with their values."""
    d = failed_detail(rule, st)
    if d is None:
        return None
    out = {"text": d["text"]}
    if "op" in d:
        (lt, lv, lty), (rt, rv, rty) = d["left"], d["right"]
        out.update({"operator": d["op"], "left": {"text": lt, "value": plain(lv, lty)},
                    "right": {"text": rt, "value": plain(rv, rty)}})
    else:
        out["value"] = False
    return out


def build(pack: Pack, rule: Rule, st: State, *, verdict: str, bound: int, solver: str,
          minimal: bool) -> dict:
    return {
        "format": FORMAT,
        "caution": CAUTION,
        "pack": {"name": pack.name, "path": pack.path, "sha256": pack.sha256,
                 "q_scale": pack.q_scale, "rounding": pack.rounding},
        "rule": {"id": rule.id, "title": rule.title,
                 "given": rule.given.text if rule.given else None,
                 "implicit_premise": implicit_premise(rule),
                 "expect": rule.expect.text, "refs": list(rule.refs), "line": rule.line,
                 "sha256": rule_hashes(pack, rule)},
        "verdict": verdict,
        "bound": bound,
        "minimal": minimal,
        "scope": pack.scope.as_json(),
        "world": world_to_data(st.world),
        "derived": derived_values(st),
        "failed": failed_part(rule, st),
        "tool": {"verifier": __version__, "solver": solver},
    }


def dumps(doc: dict) -> str:
    return json.dumps(doc, sort_keys=True, indent=2, ensure_ascii=False) + "\n"


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def _why(exc: OSError) -> str:
    return exc.strerror or str(exc)


def _inside(path: Path, root: Path) -> bool:
    return path == root or root in path.parents


def safe_dir(root: Path, folder: Path) -> None:
    """Make ``folder`` (``root`` or a folder below it) without following a symbolic link out of
    ``root``: a link ``root/st -> /elsewhere`` would put the evidence outside the folder the
    user named. ``root`` itself may be, or pass through, a link (the user chose it); a link
    below it that stays inside it is followed."""
    root, folder = Path(root), Path(folder)
    try:
        root.mkdir(parents=True, exist_ok=True)
        real_root = Path(os.path.realpath(root))
        rel = folder.relative_to(root)
    except ValueError:
        raise WriteError(folder, f"not inside {root.as_posix()}") from None
    except OSError as exc:
        raise WriteError(root, _why(exc)) from None
    here = root
    for part in rel.parts:
        here = here / part
        if here.is_symlink():
            real = Path(os.path.realpath(here))
            if not _inside(real, real_root):
                raise WriteError(here, f"a symbolic link to {real.as_posix()}, outside "
                                       f"{root.as_posix()}; not followed")
        try:
            here.mkdir(exist_ok=True)
        except FileExistsError:
            raise WriteError(here, "exists and is not a directory") from None
        except OSError as exc:
            raise WriteError(here, _why(exc)) from None


def write_files(root: Path, files) -> None:
    """Write each (path, text) of ``files`` below ``root`` all or nothing, as far as a file
    system allows: every text goes to a temporary file beside its target first (a full disk
    or a refused folder stops here, and the files of an earlier run are left as they were);
    then each is renamed into place. If a rename fails, the targets already replaced are
    removed, so a counterexample is never left without its diagram or the other way round.
    No reader (or a kill) ever sees half a file. A file gets the permissions an ordinary new
    file would (0666 less the umask), not the owner-only ones of a temporary file:
    counterexamples and reports are meant to be shared. Raises :class:`WriteError`."""
    files = [(Path(p), t) for p, t in files]
    temps: list = []
    try:
        for path, text in files:
            safe_dir(root, path.parent)
            try:
                fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
            except OSError as exc:
                raise WriteError(path, _why(exc)) from None
            temps.append(tmp)
            try:
                os.chmod(tmp, 0o666 & ~_umask())
                with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as fh:
                    fh.write(text)
                    fh.flush()
                    os.fsync(fh.fileno())
            except OSError as exc:
                raise WriteError(path, _why(exc)) from None
        for n, ((path, _), tmp) in enumerate(zip(files, temps)):
            try:
                os.replace(tmp, path)
            except OSError as exc:
                # no half pair: the new files already in place and the old ones not yet
                # replaced go, so that no file is left whose partner is missing or stale
                for other, _ in files:
                    _unlink(other)
                raise WriteError(path, _why(exc)) from None
            temps[n] = None
        temps = []
    finally:
        for tmp in temps:
            if tmp is not None:
                _unlink(Path(tmp))


def _unlink(path: Path) -> None:
    try:
        os.unlink(path)
    except OSError:
        pass


def write_atomic(path: Path, text: str, root: Path | None = None) -> None:
    """Write one file atomically (:func:`write_files`); ``root``: the folder it must stay in
    (default: its own folder)."""
    write_files(Path(root) if root is not None else Path(path).parent, [(path, text)])


def cex_path(out_dir: Path, pack: Pack, rule: Rule) -> Path:
    return out_dir / pack.name / f"{rule.id}.json"


# ---- counterexamples to induction (DESIGN 4.7) -------------------------------------------

INDUCTION_FORMAT = "verifier-induction/1"
INDUCTION_CAUTION = (
    "This file records a counterexample to induction: a path of states of the stated model, "
    "from a state after some legs (not necessarily one a real run reaches) in which the rule "
    "and every proved lemma held, to a state one or more legs later in which the rule is false. "
    "It shows why the rule was not proved for any number of legs; it is not a world in which "
    "the rule is false. " + _TOOL_CAUTION)


def state_values(view) -> dict:
    """Every derived vocabulary value at one state (a simulator view without legs)."""
    out = {}
    for name, entry in sorted(vocab.GLOBAL.items()):
        if entry.kind in ("input", "hidden-input") and name != "legs.count":
            continue
        if vocab.groups_needed(name) > view.pack.scope.groups or (
                name in vocab.GROUP_NAMES and view.snap.route is None):   # one group: as before routes
            continue
        out[name] = plain(view.get(name), entry.ty)
    return out


def induction_path(out_dir: Path, pack: Pack, rule: Rule) -> Path:
    return out_dir / pack.name / f"{rule.id}.induction.json"


# what a verdict means for an earlier file of each kind, when that file is no longer evidence of it
_NOW = {"holds": "now holds", "vacuous": "is now vacuous", "bounded": "is now bounded",
        "violated": "is now violated", "unknown": "was not decided in this run (unknown)"}


def stale_files(out_dir: Path, packs, results) -> list:
    """Files under ``out_dir`` from an earlier run that the verdicts of this run do not back:
    a counterexample whose rule is not violated now, a counterexample to induction whose rule
    is not bounded now. Each as (path, rule id, the verdict in words)."""
    out = []
    for pack, pr in zip(packs, results):
        for r in pr.results:
            rule = pack.rule(r.rule)
            for path, kind in ((cex_path(out_dir, pack, rule), "violated"),
                               (induction_path(out_dir, pack, rule), "bounded")):
                if r.verdict != kind and r.verdict != "error" and path.exists():
                    out.append((path, r.rule, _NOW[r.verdict]))
    return out


def build_induction(pack: Pack, rule: Rule, lemmas, views, plan, legs, *, bound: int,
                    minimal: bool, solver: str) -> dict:
    """The file of a counterexample to induction: the rule, the lemmas assumed, the first
    state, the legs after it (the simulator's), and every state's values (``views``, the
    simulator's states s0 .. sk) with the rule's and lemmas' truth."""
    first = views[0].snap
    legs = [world_to_data(World(legs=(leg,)))["legs"][0] for leg in legs]
    if first.route is not None:     # a route's leg: the group found at its end (DESIGN 4.10)
        for leg, a, b in zip(legs, views, views[1:]):
            k, det = detection(a.snap, b.snap)
            leg.update({"found": k, "detect_error": fmt(det)})
    states = []
    for v in views:
        states.append({"derived": state_values(v),
                       "rule": {"given": applies(rule, v), "expect": bool(evaluate(rule.expect.node, v, {}))},
                       "lemmas": {lemma.id: bool(not applies(lemma, v) or evaluate(lemma.expect.node, v, {}))
                                  for lemma in lemmas}})
    world = world_to_data(views[0].world)      # a route's: G1's and every group's so far
    del world["legs"]
    return {
        "format": INDUCTION_FORMAT,
        "caution": INDUCTION_CAUTION,
        "pack": {"name": pack.name, "path": pack.path, "sha256": pack.sha256,
                 "q_scale": pack.q_scale, "rounding": pack.rounding},
        "rule": {"id": rule.id, "title": rule.title, "role": rule.role,
                 "given": rule.given.text if rule.given else None,
                 "implicit_premise": implicit_premise(rule),
                 "expect": rule.expect.text, "refs": list(rule.refs), "line": rule.line,
                 "sha256": rule_hashes(pack, rule)},
        "lemmas": [{"id": lemma.id, "given": lemma.given.text if lemma.given else None,
                    "expect": lemma.expect.text, "sha256": rule_hashes(pack, lemma)}
                   for lemma in lemmas],
        "verdict": "bounded",
        "bound": bound,
        "depth": len(views) - 1,
        "minimal": minimal,
        "scope": pack.scope.as_json(),
        "world": world,
        "state": snapshot_to_data(first, plan),
        "legs": legs,
        "states": states,
        "failed": failed_part(rule, views[-1]),
        "tool": {"verifier": __version__, "solver": solver},
    }


