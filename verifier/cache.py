"""The verdict cache (``.verifier-cache/``): solver results keyed by what determines them.

A key is the sha256 of everything that decides a rule's solver result:

- the rule's ``given`` (with its implicit premise) and ``expect`` text;
- the text of every definition in its dependency closure (``let``, onboard, trackside): the
  worlds that satisfy the rule's ``given`` and break its ``expect`` depend on nothing else, so
  neither do the verdict, the minimal counterexample or the witness. An edit of an onboard or
  trackside formula the rule does not reach leaves its key alone;
- the pack settings (``[world]`` scope, ``[params]`` values, ``q_scale``, ``rounding``);
- the bound and whether a witness is asked for;
- the tool version, the solver version and a digest of the encoder's own source.

A result also carries the encoding's values of every compared name in its world (the report,
the trackside outputs), which the engine checks against the simulator; those do depend on
designs outside the closure. So they are not taken from the cache: on a hit they are computed
again by today's encoding in the cached world (:func:`verifier.smt.concrete.compared_values`),
and a world today's encoding cannot evaluate makes the hit a miss.

Only fully decided results are stored (holds, violated, vacuous, minimised to the end):
``unknown`` and anything cut short by a budget are never cached, because another run with more
time could decide them. What is cached is the solver's answer, not the verdict: a cached world
is replayed in the simulator and the files are written exactly as after a fresh solve.

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

from verifier import __version__
from verifier.check.model import Pack, Rule
from verifier.world.scenario import fmt

FORMAT = "verifier-cache/2"   # 2: designs outside the closure left out of the key
DATA_FORMAT = "verifier-cache-data/1"   # other decided answers (the induction step, DESIGN 4.7)
DEFAULT_DIR = Path(".verifier-cache")
_VERDICTS = ("holds", "violated", "vacuous")


@functools.lru_cache(maxsize=1)
def _versions() -> dict:
    from verifier.smt import smtlib   # the only way into z3
    return {"tool": __version__, "solver": smtlib.solver_version(),
            "encoder": smtlib.encoder_version()}


def _sha(text: str) -> str:
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def rule_key(pack: Pack, rule: Rule, bound: int, witness: bool = True) -> str:
    """The cache key of one rule's solver result (see the module docstring)."""
    defs = {f"{k} {n}": pack.definition((k, n)).text for k, n in sorted(rule.deps)}
    doc = {
        "format": FORMAT,
        "versions": _versions(),
        "bound": bound,
        "witness": witness,
        "given": rule.given.text if rule.given else None,
        "premise_legs": rule.premise_legs,
        "expect": rule.expect.text,
        "definitions": defs,
        "settings": {"q_scale": pack.q_scale, "rounding": pack.rounding,
                     "world": pack.scope.as_json(),
                     "params": {k: [str(v[0]), fmt(v[1])] for k, v in sorted(pack.params.items())}},
    }
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
    import attrs

    from verifier.smt.solve import Solved
    return {k: _TYPES.get(k, (int, float, str, bool, type(None))) for k in attrs.fields_dict(Solved)}


def _payload(solved) -> dict:
    return {k: _enc(getattr(solved, k)) for k in _fields()}


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
        from verifier.smt.solve import Solved
        got = self._read(key, FORMAT, "solved")
        if got is None:
            return None
        path, payload = got
        try:
            fields = _fields()
            if set(payload) != set(fields):
                raise ValueError("unexpected fields")
            data = {k: _dec(v) for k, v in payload.items()}
            for k, ty in fields.items():
                if not isinstance(data[k], ty) or (ty is int and isinstance(data[k], bool)):
                    raise ValueError(f"field {k} has the wrong type")
            solved = Solved(**data)
        except (ValueError, TypeError, ZeroDivisionError) as exc:
            return self._ignore(path, f"malformed content ({exc})")
        if solved.verdict not in _VERDICTS or not solved.minimal:
            return self._ignore(path, "it records an undecided result")
        self.hits += 1
        return solved

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

    def put(self, key: str, solved, witness: bool = True) -> bool:
        """Store a decided result; undecided ones are refused. Returns whether it was stored."""
        if not cacheable(solved, witness):
            return False
        return self._write(key, FORMAT, "solved", _payload(solved))

    def put_data(self, key: str, data: dict) -> bool:
        """Store plain data (a decided induction outcome: the caller refuses undecided ones)."""
        return self._write(key, DATA_FORMAT, "data", _enc(data))

    def _write(self, key: str, fmt: str, field: str, payload) -> bool:
        doc = {"format": fmt, "key": key, field: payload,
               "sha256": _sha(json.dumps(payload, sort_keys=True))}
        path = self._file(key)
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
            fd, tmp = tempfile.mkstemp(prefix=f".{key[:8]}.", suffix=".tmp", dir=path.parent)
            with os.fdopen(fd, "w", encoding="utf-8") as fh:
                fh.write(json.dumps(doc, sort_keys=True) + "\n")
            os.replace(tmp, path)
        except OSError as exc:
            self._warn(f"cannot write the cache under {self.root.as_posix()}: "
                                 f"{exc.strerror or exc}")
            return False
        self.stored += 1
        return True
