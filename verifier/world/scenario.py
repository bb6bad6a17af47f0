"""Scenarios: a world's inputs as plain data (the ``world`` part of a counterexample file, or a
hand-written TOML/JSON file for ``verifier simulate``), and exact number formatting."""

from __future__ import annotations

import json
import tomllib
from fractions import Fraction
from pathlib import Path

from verifier.errors import Diagnostic, PackError
from verifier.world.numbers import fmt  # noqa: F401 - re-exported: scenario.fmt is public
from verifier.world.sim import Leg, World
from verifier.world.vocab import Direction, Running


def parse_length(value, where: str) -> Fraction:
    """A length in metres from a scenario: ``"12.5"``, ``"13/44"``, ``"12.5 m"``, ``"30 cm"``,
    or a TOML/JSON number."""
    if isinstance(value, bool):
        raise ValueError(f"{where}: expected a length, got {value!r}")
    if isinstance(value, int):
        return Fraction(value)
    if isinstance(value, float):
        return Fraction(str(value))
    if isinstance(value, str):
        text = value.strip()
        scale = Fraction(1)
        for unit, factor in (("mm", Fraction(1, 1000)), ("cm", Fraction(1, 100)),
                             ("km", Fraction(1000)), ("m", Fraction(1))):
            if text.endswith(unit):
                text, scale = text[: -len(unit)].strip(), factor
                break
        try:
            return Fraction(text) * scale
        except (ValueError, ZeroDivisionError):
            pass
    raise ValueError(f"{where}: expected a length such as \"12.5\" or \"12.5 m\", got {value!r}")


def world_to_data(w: World) -> dict:
    return {
        "lrbg": {"balises": w.balises, "read": w.read, "linked": w.linked,
                 "locacc": fmt(w.locacc), "offset": fmt(w.offset)},
        "train": {"length": fmt(w.length), "antenna": fmt(w.antenna)},
        "passage": {"direction": w.direction.word, "running": w.running.word,
                    "detect_error": fmt(w.detect_error)},
        "legs": [{"cab_change": leg.cab_change, "running": leg.running.word,
                  "distance": fmt(leg.distance), "odometer": fmt(leg.odometer)} for leg in w.legs],
    }


def world_from_flat(d: dict) -> World:
    """From the solver's plain inputs (see ``verifier.smt.solve``)."""
    return World(
        balises=d["balises"], read=d["read"], linked=d["linked"], locacc=d["locacc"],
        offset=d["offset"], length=d["length"], antenna=d["antenna"],
        direction=Direction[d["direction"].upper()], running=Running(d["running"]),
        detect_error=d["detect_error"],
        legs=tuple(Leg(x["cab_change"], Running(x["running"]), x["distance"], x["odometer"])
                   for x in d["legs"]))


_KEYS = {"lrbg": {"balises", "read", "linked", "locacc", "offset"},
         "train": {"length", "antenna"},
         "passage": {"direction", "running", "detect_error"}}
_LEG_KEYS = {"cab_change", "running", "distance", "odometer"}


def world_from_data(data, where: str = "world") -> World:
    """Parse a scenario; raise ValueError naming the field at fault."""
    if not isinstance(data, dict):
        raise ValueError(f"{where} must be a table")
    extra = set(data) - set(_KEYS) - {"legs"}
    if extra:
        raise ValueError(f"{where}: unknown key '{sorted(extra)[0]}' (keys: lrbg, train, passage, legs)")
    kw: dict = {}
    for table, keys in _KEYS.items():
        t = data.get(table, {})
        if not isinstance(t, dict):
            raise ValueError(f"{where}.{table} must be a table")
        bad = set(t) - keys
        if bad:
            raise ValueError(f"{where}.{table}: unknown key '{sorted(bad)[0]}' (keys: {', '.join(sorted(keys))})")
    lrbg, train, passage = (data.get(k, {}) for k in ("lrbg", "train", "passage"))

    def count(v, name):
        if isinstance(v, bool) or not isinstance(v, int):
            raise ValueError(f"{where}.{name} must be a whole number, got {v!r}")
        return v

    def flag(v, name):
        if not isinstance(v, bool):
            raise ValueError(f"{where}.{name} must be true or false, got {v!r}")
        return v

    def word(v, name, enum):
        try:
            return enum[str(v).upper()] if enum is Direction else enum(str(v))
        except (KeyError, ValueError):
            raise ValueError(f"{where}.{name} must be one of "
                             + ", ".join(m.word for m in enum) + f", got {v!r}") from None

    if "balises" in lrbg:
        kw["balises"] = count(lrbg["balises"], "lrbg.balises")
    if "read" in lrbg:
        kw["read"] = count(lrbg["read"], "lrbg.read")
    if "linked" in lrbg:
        kw["linked"] = flag(lrbg["linked"], "lrbg.linked")
    for key, name in (("locacc", "lrbg.locacc"), ("offset", "lrbg.offset")):
        if key in lrbg:
            kw[key] = parse_length(lrbg[key], f"{where}.{name}")
    for key in ("length", "antenna"):
        if key in train:
            kw[key] = parse_length(train[key], f"{where}.train.{key}")
    if "direction" in passage:
        kw["direction"] = word(passage["direction"], "passage.direction", Direction)
    if "running" in passage:
        kw["running"] = word(passage["running"], "passage.running", Running)
    if "detect_error" in passage:
        kw["detect_error"] = parse_length(passage["detect_error"], f"{where}.passage.detect_error")
    legs = data.get("legs", [])
    if not isinstance(legs, list):
        raise ValueError(f"{where}.legs must be a list of tables")
    out = []
    for i, leg in enumerate(legs, 1):
        lw = f"{where}.legs[{i}]"
        if not isinstance(leg, dict):
            raise ValueError(f"{lw} must be a table")
        bad = set(leg) - _LEG_KEYS
        if bad:
            raise ValueError(f"{lw}: unknown key '{sorted(bad)[0]}' (keys: {', '.join(sorted(_LEG_KEYS))})")
        distance = parse_length(leg.get("distance", 0), f"{lw}.distance")
        out.append(Leg(
            cab_change=flag(leg.get("cab_change", False), f"legs[{i}].cab_change"),
            running=word(leg.get("running", "forward"), f"legs[{i}].running", Running),
            distance=distance,
            odometer=parse_length(leg.get("odometer", leg.get("distance", 0)), f"{lw}.odometer")))
    kw["legs"] = tuple(out)
    return World(**kw)


def read_scenario(path: str | Path) -> World:
    """A hand-written scenario (TOML or JSON), or the ``world`` of a counterexample file."""
    path = Path(path)
    shown = path.as_posix()
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise PackError([Diagnostic(shown, 1, 1, f"cannot read scenario: {exc}")]) from None
    try:
        if path.suffix.lower() == ".json":
            data = json.loads(text)
        else:
            data = tomllib.loads(text)
    except (json.JSONDecodeError, tomllib.TOMLDecodeError) as exc:
        raise PackError([Diagnostic(shown, getattr(exc, "lineno", 1), getattr(exc, "colno", 1),
                                    f"malformed scenario: {exc}")]) from None
    if isinstance(data, dict) and "world" in data and "format" in data:
        data = data["world"]
    elif isinstance(data, dict) and "world" in data and len(data) == 1:
        data = data["world"]
    try:
        return world_from_data(data)
    except ValueError as exc:
        raise PackError([Diagnostic(shown, 1, 1, str(exc))]) from None
