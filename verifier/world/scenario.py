"""Scenarios: a world's inputs as plain data (the ``world`` part of a counterexample file, or a
hand-written TOML/JSON file for ``verifier simulate``), and exact number formatting."""

from __future__ import annotations

import json
import tomllib
from fractions import Fraction
from pathlib import Path

import attrs

from verifier.errors import Diagnostic, PackError
from verifier.lang.numbers import fmt  # noqa: F401 - re-exported: scenario.fmt is public
from verifier.lang.source import read_regular_text
from verifier.lang.vocab import LEG, Direction, Running
from verifier.world.sim import Group2, Leg, RouteState, Snapshot, World


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
    out = {
        "lrbg": {"balises": w.balises, "read": w.read, "linked": w.linked,
                 "locacc": fmt(w.locacc), "offset": fmt(w.offset)},
        "train": {"length": fmt(w.length), "antenna": fmt(w.antenna)},
        "passage": {"direction": w.direction.word, "running": w.running.word,
                    "detect_error": fmt(w.detect_error)},
        "legs": [{"cab_change": leg.cab_change, "running": leg.running.word,
                  "distance": fmt(leg.distance), "odometer": fmt(leg.odometer)} for leg in w.legs],
    }
    for k, g in enumerate(w.route, 2):
        out[f"g{k}"] = {"distance": fmt(g.distance), "side": g.side.word, "orientation": g.orientation.word,
                        "balises": g.balises, "read": g.read, "linked": g.linked, "locacc": fmt(g.locacc),
                        "offset": fmt(g.offset), "found": g.found, "at": g.at,
                        "detect_error": fmt(g.detect_error)}
    return out


def legs_from_flat(legs: list) -> tuple:
    """Legs from the solver's plain data (cab_change, running word, distance, odometer)."""
    return tuple(Leg(x["cab_change"], Running(x["running"]), x["distance"], x["odometer"]) for x in legs)


def world_from_flat(d: dict) -> World:
    """From the solver's plain inputs (see ``verifier.smt.solve``)."""
    return World(
        balises=d["balises"], read=d["read"], linked=d["linked"], locacc=d["locacc"],
        offset=d["offset"], length=d["length"], antenna=d["antenna"],
        direction=Direction[d["direction"].upper()], running=Running(d["running"]),
        detect_error=d["detect_error"], legs=legs_from_flat(d["legs"]),
        g2=_flat_group(d.get("g2")),
        later=tuple(_flat_group(d[f"g{k}"]) for k in range(3, 9) if d.get(f"g{k}") is not None))


def legs_from_data(legs) -> tuple:
    """The legs of a recorded path (a counterexample to induction's ``legs``) and, on a route,
    each one's detection (the group found at its end, 0 for none, and its error); raises
    ValueError naming the field."""
    if not isinstance(legs, list) or not all(isinstance(x, dict) for x in legs):
        raise ValueError("legs must be a list of tables")
    detections = []
    for i, x in enumerate(legs, 1):
        found = x.get("found", 0)
        if isinstance(found, bool) or not isinstance(found, int):
            raise ValueError(f"legs[{i}].found must be a group number (0: none)")
        detections.append((found, parse_length(x.get("detect_error", "0 m"), f"legs[{i}].detect_error")))
    plain = [{k: v for k, v in x.items() if k not in ("found", "detect_error")} for x in legs]
    return list(world_from_data({"legs": plain}).legs), tuple(detections)


def _flat_group(g: dict | None) -> Group2 | None:
    if g is None:
        return None
    return Group2(distance=g["distance"], side=Direction[g["side"].upper()],
                  orientation=Direction[g["orientation"].upper()], balises=g["balises"],
                  read=g["read"], linked=g["linked"], locacc=g["locacc"], offset=g["offset"],
                  found=g["found"], at=g["at"], detect_error=g["detect_error"])


_KEYS = {"lrbg": {"balises", "read", "linked", "locacc", "offset"},
         "train": {"length", "antenna"},
         "passage": {"direction", "running", "detect_error"}}
_LEG_KEYS = {"cab_change", "running", "distance", "odometer"}


def world_from_data(data, where: str = "world") -> World:
    """Parse a scenario; raise ValueError naming the field at fault."""
    if not isinstance(data, dict):
        raise ValueError(f"{where} must be a table")
    extra = set(data) - set(_KEYS) - {"legs"} - {f"g{k}" for k in range(2, 9)}
    if extra:
        raise ValueError(f"{where}: unknown key '{sorted(extra)[0]}' (keys: lrbg, train, passage, legs, g2 .. g8)")
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
    if "g2" in data:
        kw["g2"] = _group2_from_data(data["g2"], f"{where}.g2", count, flag, word)
    later = []
    for k in range(3, 9):
        if f"g{k}" not in data:
            break
        if "g2" not in data:
            raise ValueError(f"{where}.g{k}: a route's later groups follow G2 (write g2 first)")
        later.append(_group2_from_data(data[f"g{k}"], f"{where}.g{k}", count, flag, word))
    rest = sorted(k for k in data if k.startswith("g") and k[1:].isdigit() and int(k[1:]) > len(later) + 2)
    if rest:
        raise ValueError(f"{where}.{rest[0]}: the route's groups are numbered without a gap from g2")
    kw["later"] = tuple(later)
    return World(**kw)


_G2_KEYS = {"distance", "side", "orientation", "balises", "read", "linked", "locacc", "offset",
            "found", "at", "detect_error"}


def _group2_from_data(t, where: str, count, flag, word) -> Group2:
    if not isinstance(t, dict):
        raise ValueError(f"{where} must be a table")
    bad = set(t) - _G2_KEYS
    if bad:
        raise ValueError(f"{where}: unknown key '{sorted(bad)[0]}' (keys: {', '.join(sorted(_G2_KEYS))})")
    kw: dict = {}
    for key in ("distance", "locacc", "offset", "detect_error"):
        if key in t:
            kw[key] = parse_length(t[key], f"{where}.{key}")
    for key in ("balises", "read", "at"):
        if key in t:
            kw[key] = count(t[key], f"{where}.{key}")
    for key in ("linked", "found"):
        if key in t:
            kw[key] = flag(t[key], f"{where}.{key}")
    for key in ("side", "orientation"):
        if key in t:
            v = t[key]
            if key == "orientation" and v in ("same", "opposite"):     # the pack's [world] words
                v = "nominal" if v == "same" else "reverse"
            kw[key] = word(v, f"{where}.{key}", Direction)
            if kw[key] is Direction.UNKNOWN:
                raise ValueError(f"{where}.{key} must be nominal or reverse"
                                 + (" (or same, opposite)" if key == "orientation" else "")
                                 + ": it is line data, never unknown")
    return Group2(**kw)


def read_scenario(path: str | Path) -> World:
    """A hand-written scenario (TOML or JSON), or the ``world`` of a counterexample file."""
    path = Path(path)
    shown = path.as_posix()
    try:
        text = read_regular_text(path, shown, "scenario")
    except OSError as exc:
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


# ---- states after some legs (DESIGN 4.7): solver data, files, and the simulator's Snapshot ----

_SIGN_WORD = {1: "nominal", -1: "reverse"}
_STATE_LENGTHS = ("actual.front", "est.front_passage", "actual.travelled", "est.travelled",
                  "actual.over_reading", "actual.under_reading")


def _leg_value(field: str, v):
    """A frozen leg field from plain data (bool, number, word) to the simulator's value."""
    ty = LEG[field].ty
    if ty == "Bool":
        return bool(v)
    if ty == "Running":
        if isinstance(v, bool):
            return Running.FORWARD if v else Running.BACKWARD
        return Running(str(v))
    if ty == "Direction":
        if isinstance(v, str):
            return Direction[v.upper()]
        return {1: Direction.NOMINAL, -1: Direction.REVERSE, 0: Direction.UNKNOWN}[int(v)]
    return Fraction(v) if not isinstance(v, str) else parse_length(v, field)


def snapshot_from_flat(world: dict, state: dict, plan, current: dict | None = None,
                       history: int = 8):
    """The simulator's state from the solver's plain data (``verifier.smt.induction``):
    ``world`` flat as a counterexample's inputs, ``state`` keyed by the solver's names
    (``acc.N.J`` for accumulator family N, case J; ``legs.I.FIELD`` for frozen legs). A
    route's state (DESIGN 4.10) also has ``current``, the current LRBG's passage as the solver
    derived it, and the list's size ``history``."""
    accs = {}
    for n, fam in enumerate(plan.accumulators):
        accs[fam.key] = {}
        for j, case in enumerate(fam.valuations):
            v = state[f"acc.{n}.{j}"]
            accs[fam.key][case] = bool(v) if fam.kind in ("all", "any") else Fraction(v)
    frozen = {(i, f): _leg_value(f, state[f"legs.{i}.{f}"]) for i, f in plan.frozen
              if f"legs.{i}.{f}" in state}
    full = world_from_flat(world)
    route = None
    view = full
    if full.route:
        route, view = _route_from_flat(full, state, current, history)
    return Snapshot(view, int(state["legs.count"]), int(state["cab_changes"]),
                    int(state["actual.orientation"]), int(state["actual.motion"]),
                    *(Fraction(state[k]) for k in _STATE_LENGTHS), accs, frozen, route)


def _route_from_flat(full: World, state: dict, current: dict, history: int) -> tuple:
    """A route's state and the current LRBG's world from the solver's plain data."""
    n = len(full.route)
    lrbgs = tuple(bool(state[f"g{k}.lrbg"]) for k in range(2, n + 2))
    windows = tuple(bool(state[f"g{k}.in_window"]) for k in range(2, n + 2))
    rs = RouteState(attrs.evolve(full, legs=()), 0, lrbgs, windows, int(state["lrbg.frame"]),
                    bool(state["lrbg.linking"]), history)
    rs = attrs.evolve(rs, journey=rs.start + int(state["legs.count"]))
    c = current
    view = World(balises=int(c["lrbg.balises"]), read=int(c["lrbg.read"]), linked=bool(c["lrbg.linked"]),
                 locacc=Fraction(c["lrbg.locacc"]), offset=Fraction(c["lrbg.offset"]),
                 length=full.length, antenna=full.antenna,
                 direction={1: Direction.NOMINAL, -1: Direction.REVERSE}.get(int(c["passage.direction"]), Direction.UNKNOWN),
                 running=Running.FORWARD if c["passage.running"] else Running.BACKWARD,
                 detect_error=Fraction(c["passage.detect_error"]), prv=bool(c["prv"]),
                 prv_group=int(c["prv_group"]))
    return rs, view


def _word(v) -> object:
    if isinstance(v, (Direction, Running)):
        return v.word
    if isinstance(v, bool):
        return v
    if isinstance(v, Fraction):
        return fmt(v)
    return v


def snapshot_to_data(snap, plan) -> dict:
    """A state as file data: the legs so far, the real and estimated positions, the
    accumulators by their readable form, the frozen legs."""
    out = {"legs.count": snap.count, "cab_changes": snap.cab_changes,
           "actual.orientation": _SIGN_WORD[snap.orientation],
           "actual.motion": _SIGN_WORD[snap.motion]}
    for k in _STATE_LENGTHS:
        out[k] = fmt(getattr(snap, _FIELD[k]))
    accs = []
    for fam in plan.accumulators:
        cases = []
        for case in fam.valuations:
            v = snap.accumulators[fam.key][case]
            value = v if isinstance(v, bool) else (int(v) if fam.kind == "count" else fmt(v))
            cases.append({"case": [_word(x) for x in case], "value": value})
        accs.append({"of": fam.text, "cases": cases})
    out["accumulators"] = accs
    frozen: dict = {}
    for (i, f), v in sorted(snap.frozen.items()):
        frozen.setdefault(str(i), {})[f] = int(v) if f == "index" else _word(v)
    out["legs"] = frozen
    rs = snap.route
    if rs is not None:          # a route's state (DESIGN 4.10): what it carries beyond the LRBG's
        v = snap.world
        out["route"] = {
            "journey": rs.journey,
            "became_lrbg": [k for k, b in enumerate(rs.lrbgs, 2) if b],
            "in_window": [k for k, b in enumerate(rs.windows, 2) if b],
            "frame": _SIGN_WORD[rs.frame], "linking": rs.linking,
            "current": {"lrbg": {"balises": v.balises, "read": v.read, "linked": v.linked,
                                 "locacc": fmt(v.locacc), "offset": fmt(v.offset)},
                        "passage": {"direction": v.direction.word, "running": v.running.word,
                                    "detect_error": fmt(v.detect_error)},
                        "referred_to_previous": v.prv, "previous": v.prv_group}}
    return out


_FIELD = {"actual.front": "front", "est.front_passage": "est_front_passage",
          "actual.travelled": "travelled", "est.travelled": "measured",
          "actual.over_reading": "over", "actual.under_reading": "under"}


def snapshot_from_data(data, world: World, plan, where: str = "state", history: int = 8):
    """A state from file data (``snapshot_to_data``); raise ValueError naming the field. A
    route's state (``world`` with later groups) needs the list's size ``history``."""
    if not isinstance(data, dict):
        raise ValueError(f"{where} must be a table")

    def need(key):
        if key not in data:
            raise ValueError(f"{where} lacks '{key}'")
        return data[key]

    def sign_of(key):
        v = need(key)
        if v not in _SIGN_WORD.values():
            raise ValueError(f"{where}.{key} must be nominal or reverse, got {v!r}")
        return 1 if v == "nominal" else -1

    def whole(key):
        v = need(key)
        if isinstance(v, bool) or not isinstance(v, int):
            raise ValueError(f"{where}.{key} must be a whole number, got {v!r}")
        return v

    lengths = [parse_length(need(k), f"{where}.{k}") for k in _STATE_LENGTHS]
    by_text = {}
    for a in need("accumulators"):
        if not isinstance(a, dict) or "of" not in a or "cases" not in a:
            raise ValueError(f"{where}.accumulators: each needs 'of' and 'cases'")
        by_text[a["of"]] = a["cases"]
    accs = {}
    for fam in plan.accumulators:
        if fam.text not in by_text:
            raise ValueError(f"{where}.accumulators lacks {fam.text}")
        cases = {tuple(c["case"]): c["value"] for c in by_text[fam.text]}
        accs[fam.key] = {}
        for case in fam.valuations:
            v = cases.get(tuple(_word(x) for x in case))
            if v is None:
                raise ValueError(f"{where}.accumulators: {fam.text} lacks the case {[_word(x) for x in case]}")
            accs[fam.key][case] = bool(v) if fam.kind in ("all", "any") else (
                Fraction(v) if not isinstance(v, str) else parse_length(v, fam.text))
    frozen = {}
    legs = data.get("legs", {})
    for i, f in plan.frozen:
        leg = legs.get(str(i), {})
        if f in leg:
            frozen[(i, f)] = _leg_value(f, leg[f])
    route, view = None, world
    if world.route:
        route, view = _route_from_data(need("route"), world, history, where)
    return Snapshot(view, whole("legs.count"), whole("cab_changes"), sign_of("actual.orientation"),
                    sign_of("actual.motion"), *lengths, accs, frozen, route)


def _route_from_data(r, world: World, history: int, where: str) -> tuple:
    """A route's state and the current LRBG's world from file data (``snapshot_to_data``)."""
    where = f"{where}.route"
    if not isinstance(r, dict):
        raise ValueError(f"{where} must be a table")
    for key in ("journey", "became_lrbg", "in_window", "frame", "linking", "current"):
        if key not in r:
            raise ValueError(f"{where} lacks '{key}'")
    n = len(world.route)
    groups = range(2, n + 2)
    for key in ("became_lrbg", "in_window"):
        if not isinstance(r[key], list) or not all(isinstance(k, int) and k in groups for k in r[key]):
            raise ValueError(f"{where}.{key} must list group numbers 2..{n + 1}")
    if isinstance(r["journey"], bool) or not isinstance(r["journey"], int):
        raise ValueError(f"{where}.journey must be a whole number")
    if r["frame"] not in _SIGN_WORD.values() or not isinstance(r["linking"], bool):
        raise ValueError(f"{where}: frame must be nominal or reverse, linking true or false")
    c = r["current"]
    if not isinstance(c, dict) or not isinstance(c.get("referred_to_previous"), bool) or \
            isinstance(c.get("previous"), bool) or not isinstance(c.get("previous"), int):
        raise ValueError(f"{where}.current needs lrbg, passage, referred_to_previous and previous")
    g1 = world_from_data({"lrbg": c.get("lrbg", {}), "passage": c.get("passage", {})}, f"{where}.current")
    view = attrs.evolve(g1, length=world.length, antenna=world.antenna,
                        prv=c["referred_to_previous"], prv_group=c["previous"])
    rs = RouteState(attrs.evolve(world, legs=()), r["journey"],
                    tuple(k in r["became_lrbg"] for k in groups), tuple(k in r["in_window"] for k in groups),
                    1 if r["frame"] == "nominal" else -1, r["linking"], history)
    return rs, view
