"""The verdict cache (``.verifier-cache/``): solver results keyed by what determines them.

A key is the sha256 of a canonical document of everything the rule's obligation is built from.
The document is made by walking the typed pack's own data classes field by field
(:func:`obligation`): every field is in the key unless :data:`LEFT_OUT` names it with the reason
it cannot change the solver's answer. So a field added to ``Pack``, ``Scope``, ``Rule``,
``Formula`` or an ``[[info]]`` item is in the key from the day it exists, and forgetting it is
impossible (a stale ``holds`` once survived an edit of an ``[[info]]`` item that way).
``tests/test_cache_key.py`` edits every key a pack may hold and checks that the key moves.

What is left out, and why:

- cosmetic text (titles, notes, refs, the description) and source places (paths, lines, TOML
  keys): they never reach the encoding;
- the other rules and lemmas of the pack: a rule's obligation does not contain them (an
  induction step's key names the lemmas it assumes, :func:`induction_key`);
- definitions (``let``, onboard, trackside) outside the rule's dependency closure: the worlds
  that satisfy the rule's ``given`` and break its ``expect`` depend only on the closure, so do
  the verdict, the minimal counterexample and the witness. An edit of an onboard or trackside
  formula the rule does not reach leaves its key alone.

Beside the document: the bound, whether a witness is asked for, the tool version, the solver
version and a digest of the whole ``verifier`` package's source (any edit of the tool
invalidates every entry).

A result also carries the encoding's values of every compared name in its world (the report,
the trackside outputs), which the engine checks against the simulator; those do depend on
designs outside the closure. So they are not taken from the cache: on a hit they are computed
again by today's encoding in the cached world (:func:`verifier.smt.concrete.compared_values`),
and a world today's encoding cannot evaluate makes the hit a miss.

Only fully decided results are stored (holds, violated, vacuous, minimised to the end):
``unknown`` and anything cut short by a budget are never cached, because another run with more
time could decide them. What is cached is the solver's answer, not the verdict: a cached world
is replayed in the simulator and the files are written exactly as after a fresh solve. Each
entry also records how many seconds the original solve took (encoding and solving), so that a
report built from the cache can say what the work cost when it was done, beside the replay's
own time (``RuleResult.original_seconds``).

The directory is safe to delete. A file that does not parse, has a foreign format, names another
key or fails its own checksum is ignored with a warning (and overwritten by the next store).
"""

from __future__ import annotations

import functools
import hashlib
import json
import os
import tempfile
from fractions import Fraction
from pathlib import Path

import attrs

from verifier.about import __version__
from verifier.check.model import Formula, Pack, Rule
from verifier.lang.pack import RawInfo
from verifier.smt import smtlib
from verifier.smt.solve import Solved

FORMAT = "verifier-cache/4"   # 3: the key is the canonical obligation document (obligation());
                              # 4: an entry records the seconds its original solve took
DATA_FORMAT = "verifier-cache-data/3"   # other decided answers (the induction step, DESIGN 4.7);
                                        # 3: with the seconds of the original step
DEFAULT_DIR = Path(".verifier-cache")
_VERDICTS = ("holds", "violated", "vacuous")

# Fields of the typed pack's classes that are *not* in the key, each with the reason it cannot
# change a rule's solver result. Everything else is in, including fields added later.
LEFT_OUT = {
    Pack: {
        "path": "where the file lives",
        "text": "the whole file: the key takes its parts one by one",
        "sha256": "the whole file: the key takes its parts one by one",
        "name": "the pack's slug names files, not worlds",
        "title": "cosmetic", "description": "cosmetic", "warnings": "diagnostics",
        "rules": "other rules are not in a rule's obligation (the rule itself is keyed apart)",
        "lemmas": "not in a bounded obligation; the induction key names the lemmas it assumes",
        "implementation": "only `verifier test` reads it",
        "lets": "only the definitions in the rule's closure are keyed",
        "onboard": "only the definitions in the rule's closure are keyed",
        "trackside": "only the definitions in the rule's closure are keyed",
        "onboard_order": "only the definitions in the rule's closure are keyed",
        "trackside_order": "only the definitions in the rule's closure are keyed",
    },
    Rule: {"id": "a name", "title": "cosmetic", "refs": "cosmetic", "note": "cosmetic",
           "line": "a source place"},
    Formula: {"name": "names the rule or definition, not its meaning", "key": "a source place",
              "node": "parsed and typed from the text, under the rest of the key"},
    RawInfo: {"title": "cosmetic", "line": "a source place"},
}


@functools.lru_cache(maxsize=1)
def _versions() -> dict:
    return {"tool": __version__, "solver": smtlib.solver_version(), "source": source_digest()}


def source_digest() -> str:
    """A digest of the source of the whole ``verifier`` package (Python files and the grammar):
    a cached verdict never outlives the code that computed it, whichever module that was."""
    root = Path(__file__).resolve().parent
    h = hashlib.sha256()
    for f in sorted(p for p in root.rglob("*") if p.suffix in (".py", ".lark") and p.is_file()):
        h.update(f.relative_to(root).as_posix().encode() + b"\0")
        h.update(f.read_bytes() + b"\0")
    return h.hexdigest()


def _sha(text: str) -> str:
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def canonical(value):
    """Plain, ordered JSON data for a value of the typed pack; a type it does not know is an
    error (so a new kind of field cannot slip into the key as an address-bearing repr)."""
    if value is None or isinstance(value, (bool, int, str)):
        return value
    if isinstance(value, Fraction):
        return {"q": f"{value.numerator}/{value.denominator}"}
    if attrs.has(type(value)):
        skip = LEFT_OUT.get(type(value), {})
        return {"class": type(value).__name__,
                **{f.name: canonical(getattr(value, f.name))
                   for f in attrs.fields(type(value)) if f.name not in skip}}
    if isinstance(value, (list, tuple)):
        return [canonical(v) for v in value]
    if isinstance(value, (set, frozenset)):
        return sorted((canonical(v) for v in value), key=lambda v: json.dumps(v, sort_keys=True))
    if isinstance(value, dict):
        return [[canonical(k), canonical(v)] for k, v in
                sorted(value.items(), key=lambda kv: json.dumps(canonical(kv[0]), sort_keys=True))]
    raise TypeError(f"the cache key cannot take a {type(value).__name__}")


def obligation(pack: Pack, rule: Rule) -> dict:
    """The canonical document of what ``rule``'s obligation in ``pack`` is built from."""
    closure = {"let": set(), "onboard": set(), "trackside": set()}
    for kind, name in rule.deps:
        closure[kind].add(name)
    return {
        "pack": canonical(pack),
        "rule": canonical(rule),
        "lets": canonical({n: f for n, f in pack.lets.items() if n in closure["let"]}),
        "onboard": canonical({n: f for n, f in pack.onboard.items() if n in closure["onboard"]}),
        "trackside": canonical({n: f for n, f in pack.trackside.items() if n in closure["trackside"]}),
        "onboard_order": [n for n in pack.onboard_order if n in closure["onboard"]],
        "trackside_order": [n for n in pack.trackside_order if n in closure["trackside"]],
    }


def rule_key(pack: Pack, rule: Rule, bound: int, witness: bool = True) -> str:
    """The cache key of one rule's solver result (see the module docstring)."""
    doc = {"format": FORMAT, "versions": _versions(), "bound": bound, "witness": witness,
           "obligation": obligation(pack, rule)}
    return _sha(json.dumps(doc, sort_keys=True))


def induction_key(pack: Pack, rule: Rule, lemmas, bound: int, depth: int) -> str:
    """The cache key of a rule's induction step (DESIGN 4.7): everything that decides the
    bounded verdict of the rule and of each lemma assumed, the bound and the depth."""
    doc = {"induction": True, "rule": rule_key(pack, rule, bound, False), "depth": depth,
           "lemmas": [[lemma.id, rule_key(pack, lemma, bound, False)] for lemma in lemmas]}
    return _sha(json.dumps(doc, sort_keys=True))


def cacheable(solved, witness: bool) -> bool:
    """Only answers that no budget could change: never unknown, never cut short."""
    if solved.verdict not in _VERDICTS or not solved.minimal:
        return False
    if solved.verdict == "holds" and witness and solved.world is None:
        return False          # the witness search ran out of budget
    return True


# ---- plain data <-> JSON (exact: Fractions tagged, ints and bools kept) -------------------
def _enc(v):
    if isinstance(v, bool) or v is None or isinstance(v, (int, float, str)):
        return v
    if isinstance(v, Fraction):
        return {"q": f"{v.numerator}/{v.denominator}"}
    if isinstance(v, dict):
        return {"d": {k: _enc(x) for k, x in v.items()}}
    if isinstance(v, (list, tuple)):
        return [_enc(x) for x in v]
    raise TypeError(f"cannot cache a {type(v).__name__}")


def _dec(v):
    if isinstance(v, bool) or v is None or isinstance(v, (int, float, str)):
        return v
    if isinstance(v, list):
        return [_dec(x) for x in v]
    if isinstance(v, dict) and set(v) == {"q"} and isinstance(v["q"], str):
        return Fraction(v["q"])
    if isinstance(v, dict) and set(v) == {"d"} and isinstance(v["d"], dict):
        return {str(k): _dec(x) for k, x in v["d"].items()}
    raise ValueError("malformed value")


_TYPES = {"verdict": str, "world": (dict, type(None)), "smt_values": (dict, type(None)),
          "minimal": bool, "reason": str, "rlimit": int, "checks": int, "solver": str}


def _fields() -> dict:
    """The fields of ``Solved`` with the type each must have (plain scalars if not listed)."""
    return {k: _TYPES.get(k, (int, float, str, bool, type(None))) for k in attrs.fields_dict(Solved)}


def _payload(solved, seconds: float) -> dict:
    return {**{k: _enc(getattr(solved, k)) for k in _fields()}, "seconds": float(seconds)}


class Cache:
    """A directory of cached solver results; counts hits and stores, collects warnings."""

    def __init__(self, root: Path = DEFAULT_DIR, warn=None):
        self.root = Path(root)
        self.warn = warn            # called with each warning as it happens (the CLI prints it)
        self.hits = 0
        self.misses = 0
        self.stored = 0
        self.warnings: list[str] = []

    def _file(self, key: str) -> Path:
        return self.root / key[:2] / f"{key}.json"

    def _warn(self, text: str) -> None:
        self.warnings.append(text)
        if self.warn is not None:
            self.warn(text)

    def _ignore(self, path: Path, why: str):
        self._warn(f"ignoring cache file {path.as_posix()}: {why}")
        self.misses += 1
        return None

    def _read(self, key: str, fmt: str, field: str):
        """The checked payload stored under ``key`` in format ``fmt``, or None."""
        path = self._file(key)
        try:
            raw = path.read_bytes()
        except FileNotFoundError:
            self.misses += 1
            return None
        except OSError as exc:
            return self._ignore(path, f"cannot read it ({exc.strerror or exc})")
        try:
            doc = json.loads(raw.decode("utf-8"))
        except (UnicodeDecodeError, json.JSONDecodeError):
            return self._ignore(path, "not valid JSON (corrupted)")
        if not isinstance(doc, dict) or doc.get("format") != fmt:
            return self._ignore(path, "foreign format")
        if doc.get("key") != key:
            return self._ignore(path, "it records another key")
        payload = doc.get(field)
        if not isinstance(payload, dict) or doc.get("sha256") != _sha(json.dumps(payload, sort_keys=True)):
            return self._ignore(path, "checksum mismatch (corrupted)")
        return path, payload

    def get(self, key: str):
        """The cached result for ``key``, or None (missing, corrupted or foreign)."""
        got = self.lookup(key)
        return None if got is None else got[0]

    def lookup(self, key: str):
        """The cached result for ``key`` and the seconds its original solve took, or None."""
        got = self._read(key, FORMAT, "solved")
        if got is None:
            return None
        path, payload = got
        try:
            fields = _fields()
            if set(payload) != {*fields, "seconds"}:
                raise ValueError("unexpected fields")
            seconds = payload["seconds"]
            if not isinstance(seconds, (int, float)) or isinstance(seconds, bool) or not 0 <= seconds < 1e9:
                raise ValueError("field seconds has the wrong type")
            data = {k: _dec(v) for k, v in payload.items() if k != "seconds"}
            for k, ty in fields.items():
                if not isinstance(data[k], ty) or (ty is int and isinstance(data[k], bool)):
                    raise ValueError(f"field {k} has the wrong type")
            solved = Solved(**data)
        except (ValueError, TypeError, ZeroDivisionError) as exc:
            return self._ignore(path, f"malformed content ({exc})")
        if solved.verdict not in _VERDICTS or not solved.minimal:
            return self._ignore(path, "it records an undecided result")
        self.hits += 1
        return solved, float(seconds)

    def get_data(self, key: str) -> dict | None:
        """Plain data stored by :meth:`put_data` (the outcome of an induction step), or None."""
        got = self._read(key, DATA_FORMAT, "data")
        if got is None:
            return None
        path, payload = got
        try:
            data = _dec(payload)
        except (ValueError, TypeError, ZeroDivisionError) as exc:
            return self._ignore(path, f"malformed content ({exc})")
        if not isinstance(data, dict):
            return self._ignore(path, "malformed content")
        self.hits += 1
        return data

    def count_as_miss(self) -> None:
        """A hit the caller could not use after all (its world no longer evaluates)."""
        self.hits -= 1
        self.misses += 1

    def put(self, key: str, solved, witness: bool = True, seconds: float = 0.0) -> bool:
        """Store a decided result with the ``seconds`` its solve took; undecided ones are
        refused. Returns whether it was stored."""
        if not cacheable(solved, witness):
            return False
        return self._write(key, FORMAT, "solved", _payload(solved, seconds))

    def put_data(self, key: str, data: dict) -> bool:
        """Store plain data (a decided induction outcome: the caller refuses undecided ones)."""
        return self._write(key, DATA_FORMAT, "data", _enc(data))

    def _write(self, key: str, fmt: str, field: str, payload) -> bool:
        doc = {"format": fmt, "key": key, field: payload,
               "sha256": _sha(json.dumps(payload, sort_keys=True))}
        path = self._file(key)
        tmp = None
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
            fd, tmp = tempfile.mkstemp(prefix=f".{key[:8]}.", suffix=".tmp", dir=path.parent)
            with os.fdopen(fd, "w", encoding="utf-8") as fh:
                fh.write(json.dumps(doc, sort_keys=True) + "\n")
            os.replace(tmp, path)
            tmp = None
        except OSError as exc:
            self._warn(f"cannot write the cache under {self.root.as_posix()}: "
                       f"{exc.strerror or exc}")
            return False
        finally:        # an error or a Ctrl-C before the rename leaves no temporary file
            if tmp is not None:
                try:
                    os.unlink(tmp)
                except OSError:
                    pass
        self.stored += 1
        return True
