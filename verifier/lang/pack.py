"""Load a rule pack file: TOML syntax, every key validated, every expression parsed.

The result is a :class:`RawPack` (untyped ASTs with their source places). Typing, name
resolution and observability are done by :mod:`verifier.check.typer`. All problems of a file
are collected and raised together as one :class:`~verifier.errors.PackError`.
"""

from __future__ import annotations

import hashlib
import re
import tomllib
from fractions import Fraction
from pathlib import Path

import attrs

from verifier.errors import Diagnostic, PackError, control_char, suggest
from verifier.lang import ast, vocab
from verifier.lang.parser import ExprSyntaxError, parse, parse_quantity
from verifier.lang.scope import Bound, GroupScope, Scope
from verifier.lang.source import SourceFile, read_regular

SLUG = re.compile(r"[a-z0-9][a-z0-9-]*")     # always fullmatch: "$" also matches before a final "\n"
IDENT = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")
INFO_ID = re.compile(r"[a-z][a-z0-9_]*")
MAX_LEGS = 8
DEFAULT_LEGS = 3
ANY = "any"        # legs = "any": proved for every number of legs where the tool can (DESIGN 4.7)

TABLES = {
    "pack": {"name", "title", "legs", "description"},
    "world": {"balises", "locacc", "train_length", "antenna", "leg_distance", "odometry_over",
              "odometry_under", "detection", "odometry_basis", "detection_in_odometry", "groups", "g2_distance", "g2_side",
              "g2_orientation", "g2_balises", "g2_locacc", "history"},
    "params": None,  # free names
    "let": None,
    "onboard": set(vocab.ONBOARD_OUTPUTS) | set(vocab.INFO_OUTPUTS) | {"q_scale", "rounding"},
    "trackside": set(vocab.TRACKSIDE_OUTPUTS),
    "rule": {"id", "title", "given", "expect", "refs", "legs", "note"},
    "lemma": {"id", "title", "given", "expect", "refs", "note"},
    "implementation": {"onboard", "trackside", "path"},
    "info": {"id", "title", "group", "at", "valid"},
    "group": {"number", "title", "distance", "orientation", "balises", "locacc"},
}
MAX_GROUPS = 8          # a route, and the onboard's list of LRBGs: eight (from memory, DESIGN 4.10)


@attrs.frozen
class RawExpr:
    """A parsed expression with the key it came from (for diagnostics)."""

    text: str
    node: ast.Node
    key: tuple
    default: bool = False


@attrs.frozen
class RawRule:
    id: str
    title: str
    given: RawExpr | None
    expect: RawExpr
    refs: tuple
    note: str
    legs: int | None
    line: int
    index: int
    unbounded: bool | None = None   # legs = "any" (None: as the pack says)
    role: str = "rule"              # or "lemma"


@attrs.frozen
class RawInfo:
    """A trackside information item (DESIGN 4.9)."""

    id: str
    title: str
    group: int
    at: Fraction
    for_nominal: bool
    for_reverse: bool
    line: int

    @property
    def location(self) -> Fraction:
        """Its place in the reference group's frame: counted in the direction of validity (an
        item valid both ways lies on the nominal side)."""
        return -self.at if (self.for_reverse and not self.for_nominal) else self.at


@attrs.frozen
class RawPack:
    path: str
    text: str
    sha256: str
    name: str
    title: str
    description: str
    legs: int
    scope: Scope
    params: dict
    lets: dict
    onboard: dict
    q_scale: str
    rounding: str
    trackside: dict
    rules: tuple
    source: SourceFile = attrs.field(eq=False, repr=False)
    diagnostics: tuple = ()   # errors and warnings of the loading stage
    unbounded: bool = False   # [pack] legs = "any"
    lemmas: tuple = ()        # RawRule with role "lemma", in file order
    implementation: dict = attrs.field(factory=dict)   # [implementation]: onboard, trackside, path
    infos: tuple = ()         # RawInfo, [[info]] in file order


class _Collector:
    def __init__(self, src: SourceFile):
        self.src = src
        self.diags: list[Diagnostic] = []

    def at(self, key: tuple, message: str, offset: int | None = None, length: int = 1,
           severity: str = "error") -> None:
        self.diags.append(self.src.at_key(key, message, severity, offset, length))


def _toml_error(path: str, text: str, exc: tomllib.TOMLDecodeError) -> Diagnostic:
    msg = str(exc)
    m = re.search(r"\(at line (\d+), column (\d+)\)", msg)
    line, col = (int(m.group(1)), int(m.group(2))) if m else (1, 1)
    msg = re.sub(r"\s*\(at line \d+, column \d+\)", "", msg)
    if m is None and "end of document" in msg:
        line = max(1, text.count("\n"))
    lines = text.splitlines()
    src = lines[line - 1] if 0 < line <= len(lines) else None
    return Diagnostic(path, line, col, f"malformed TOML: {msg}", "error", src)


def _long_number(path: str, text: str) -> Diagnostic | None:
    """The first integer literal too long for the interpreter to read (tomllib's ValueError
    names no place), as a diagnostic at the literal."""
    import sys
    limit = sys.get_int_max_str_digits() if hasattr(sys, "get_int_max_str_digits") else 0
    if not limit:
        return None
    for m in re.finditer(r"\d[\d_]*", text):
        digits = len(m.group()) - m.group().count("_")
        if digits > limit:
            line = text.count("\n", 0, m.start()) + 1
            col = m.start() - (text.rfind("\n", 0, m.start()) + 1) + 1
            lines = text.splitlines()
            return Diagnostic(path, line, col, f"number is too long: {digits:,} digits (at most {limit:,})",
                              "error", lines[line - 1] if line <= len(lines) else None, len(m.group()))
    return None


def _length(c: _Collector, key: tuple, value, *, what: str) -> Fraction | None:
    if isinstance(value, bool) or not isinstance(value, (str, int, float)):
        c.at(key, f"{what} must be a length such as \"20 m\"")
        return None
    if isinstance(value, (int, float)):
        if value == 0:
            return Fraction(0)
        c.at(key, f"{what} needs a unit: write \"{value} m\"")
        return None
    try:
        number, unit = parse_quantity(value)
    except ValueError:
        c.at(key, f"{what} must be a length such as \"20 m\", not {value!r}")
        return None
    if unit != "m" and not (unit is None and number == 0):
        c.at(key, f"{what} must be a length (mm, cm, m or km), not {value!r}")
        return None
    return number


def _ratio(c: _Collector, key: tuple, value, *, what: str) -> Fraction | None:
    if isinstance(value, str):
        try:
            number, unit = parse_quantity(value)
        except ValueError:
            number, unit = None, None
        if number is not None and unit in ("%", None):
            return number
    elif isinstance(value, (int, float)) and not isinstance(value, bool):
        return Fraction(str(value))
    c.at(key, f"{what} must be a ratio such as \"5 %\" or 0.05, not {value!r}")
    return None


def _load_scope(c: _Collector, table: dict, group_tables=()) -> Scope:
    kw = {}
    for name in ("locacc", "train_length", "antenna", "leg_distance", "balises"):
        if name not in table:
            continue
        key = ("world", name)
        value = table[name]
        if not (isinstance(value, list) and len(value) == 2):
            c.at(key, f"world.{name} must be a range [low, high]")
            continue
        if name == "balises":
            if not all(isinstance(v, int) and not isinstance(v, bool) for v in value):
                c.at(key, "world.balises must be whole numbers, such as [1, 8]")
                continue
            lo, hi = value
            if not (1 <= lo <= hi <= 8):
                c.at(key, f"world.balises must lie within 1..8 (N_TOTAL 0..7, SUBSET-026 7.5.1.82), got [{lo}, {hi}]")
                continue
            kw[name] = (lo, hi)
            continue
        lo = _length(c, key, value[0], what=f"world.{name} low")
        hi = _length(c, key, value[1], what=f"world.{name} high")
        if lo is None or hi is None:
            continue
        if lo > hi:
            c.at(key, f"world.{name}: low {lo} m is above high {hi} m")
            continue
        if lo < 0:
            c.at(key, f"world.{name} cannot be negative")
            continue
        if name == "locacc":
            if lo.denominator != 1 or hi.denominator != 1:
                c.at(key, "world.locacc must be whole metres (Q_LOCACC has 1 m steps)")
                continue
            if hi > 63:
                c.at(key, f"world.locacc must lie within 0..63 m (Q_LOCACC, SUBSET-026 7.5.1.115), got {hi} m")
                continue
        if name == "antenna" and lo < 0:
            continue
        if name == "train_length" and lo <= 0:
            c.at(key, "world.train_length must be above 0 m")
            continue
        kw[name] = (lo, hi)
    for name in ("odometry_over", "odometry_under"):
        if name not in table:
            continue
        key = ("world", name)
        value = table[name]
        if not isinstance(value, dict) or set(value) - {"fixed", "rate"}:
            c.at(key, f"world.{name} must be {{ fixed = \"5 m\", rate = \"5 %\" }}")
            continue
        fixed = _length(c, key + ("fixed",), value.get("fixed", "0 m"), what=f"world.{name}.fixed")
        rate = _ratio(c, key + ("rate",), value.get("rate", 0), what=f"world.{name}.rate")
        if fixed is None or rate is None:
            continue
        if fixed < 0 or rate < 0 or rate >= 1:
            c.at(key, f"world.{name} needs fixed >= 0 m and 0 <= rate < 100 %")
            continue
        kw[name] = Bound(fixed, rate)
    if "detection" in table:
        d = _length(c, ("world", "detection"), table["detection"], what="world.detection")
        if d is not None:
            kw["detection"] = d
    if "odometry_basis" in table:
        basis = table["odometry_basis"]
        if basis not in ("measured", "real"):
            c.at(("world", "odometry_basis"), "world.odometry_basis must be \"measured\" or \"real\"")
        else:
            kw["odometry_basis"] = basis
    if "detection_in_odometry" in table:
        inside = table["detection_in_odometry"]
        if not isinstance(inside, bool):
            c.at(("world", "detection_in_odometry"), "world.detection_in_odometry must be true or false")
        else:
            kw["detection_in_odometry"] = inside
    _load_second_group(c, table, kw)
    _load_route(c, table, group_tables, kw)
    scope = Scope(**kw)
    if scope.antenna[0] > scope.train_length[1]:
        c.at(("world", "antenna"), "world.antenna low is longer than the longest train")
    return scope


def _load_second_group(c: _Collector, table: dict, kw: dict) -> None:
    """``groups`` and the second group's ranges (DESIGN 4.8)."""
    g2_keys = [k for k in ("g2_distance", "g2_side", "g2_orientation", "g2_balises", "g2_locacc") if k in table]
    groups = table.get("groups", 1)
    if isinstance(groups, bool) or not isinstance(groups, int) or not 1 <= groups <= MAX_GROUPS:
        c.at(("world", "groups"), f"world.groups must be a whole number 1..{MAX_GROUPS}, got {groups!r}")
        return
    kw["groups"] = groups
    if groups == 1:
        for k in g2_keys:
            c.at(("world", k), f"world.{k} describes the second group: set world.groups = 2")
        return
    given = {f: (("world", f"g2_{f}"), table[f"g2_{f}"]) for f in _GROUP_FIELDS if f"g2_{f}" in table}
    kw.update({f"g2_{f}": v for f, v in _group_fields(c, given, lambda f: f"world.g2_{f}", ranges_only=True).items()})
    if "g2_side" in table:
        v, words = table["g2_side"], ("nominal", "reverse", "any")
        if v not in words:
            c.at(("world", "g2_side"), f"world.g2_side must be one of {', '.join(words)}, got {v!r}"
                 + (suggest(v, words) if isinstance(v, str) else ""))
        else:
            kw["g2_side"] = v


_ORIENTATIONS = ("same", "opposite", "any")
_GROUP_FIELDS = ("distance", "orientation", "balises", "locacc")


def _group_fields(c: _Collector, given: dict, what, ranges_only: bool) -> dict:
    """The checked scope of one later group (DESIGN 4.8, 4.10): ``given`` maps a field of
    :data:`_GROUP_FIELDS` to (its key, its value); ``what(field)`` names it in messages. A range
    is ``[low, high]``; a ``[[group]]`` table (``ranges_only`` false) may give one value too."""
    out = {}
    for field, (key, v) in given.items():
        name = what(field)
        if field == "orientation":
            if v not in _ORIENTATIONS:
                c.at(key, f"{name} must be one of {', '.join(_ORIENTATIONS)}, got {v!r}"
                     + (suggest(v, _ORIENTATIONS) if isinstance(v, str) else ""))
            else:
                out[field] = v
            continue
        pair = v if isinstance(v, list) else None if ranges_only else [v, v]
        if pair is None or len(pair) != 2:
            c.at(key, f"{name} must be " + ("a range [low, high]" if ranges_only else "a value or a range [low, high]"))
            continue
        if field == "balises":
            if not (all(isinstance(x, int) and not isinstance(x, bool) for x in pair) and 1 <= pair[0] <= pair[1] <= 8):
                c.at(key, f"{name} must lie within 1..8 (SUBSET-026 7.5.1.82), got {v!r}")
            else:
                out[field] = tuple(pair)
            continue
        lo = _length(c, key, pair[0], what=f"{name} low")
        hi = _length(c, key, pair[1], what=f"{name} high")
        if lo is None or hi is None:
            continue
        if lo > hi or lo < 0:
            c.at(key, f"{name} must be a range of lengths from 0 m up, low not above high")
        elif field == "locacc" and (lo.denominator != 1 or hi.denominator != 1 or hi > 63):
            c.at(key, f"{name} must be whole metres within 0..63 m (Q_LOCACC, SUBSET-026 7.5.1.115)")
        elif field == "distance" and lo <= 0:
            c.at(key, f"{name} must be above 0 m (the groups are distinct)")
        else:
            out[field] = (lo, hi)
    return out


def _load_route(c: _Collector, table: dict, raw, kw: dict) -> None:
    """``history`` and the ``[[group]]`` tables of a route (DESIGN 4.10)."""
    groups = kw.get("groups", 1)
    if "history" in table:
        h = table["history"]
        if isinstance(h, bool) or not isinstance(h, int) or not 1 <= h <= MAX_GROUPS:
            c.at(("world", "history"), f"world.history must be a whole number 1..{MAX_GROUPS} (the onboard's list of LRBGs), got {h!r}")
        elif groups == 1:
            c.at(("world", "history"), "world.history is the onboard's list of LRBGs: set world.groups to 2 or more")
        else:
            kw["history"] = h
    if not isinstance(raw, list):
        c.at(("group",), "groups are written as [[group]] tables")
        return
    later = {k: {} for k in range(3, groups + 1)}
    seen = set()
    for i, t in enumerate(raw):
        base = ("group", i)
        if not isinstance(t, dict):
            c.at(base, "a group must be a table")
            continue
        _unknown_keys(c, base, t, TABLES["group"], "[[group]]")
        n = t.get("number")
        if isinstance(n, bool) or not isinstance(n, int) or not 2 <= n <= groups:
            c.at(base + ("number",) if "number" in t else base,
                 f"[[group]] needs a number 2..{groups} (the route's groups after G1; [world] groups = {groups})"
                 if groups >= 2 else "[[group]] describes a group of a route: set [world] groups to 2 or more")
            continue
        if n in seen:
            c.at(base + ("number",), f"group {n} is described twice")
            continue
        seen.add(n)
        if "title" in t:
            if not isinstance(t["title"], str):
                c.at(base + ("title",), "group title must be a string")
            else:
                _plain(c, base + ("title",), t["title"], "the group title")
        given = {f: (base + (f,), t[f]) for f in _GROUP_FIELDS if f in t}
        fields = _group_fields(c, given, lambda f, n=n: f"group {n} {f}", ranges_only=False)
        if n == 2:
            for name, v in fields.items():
                if f"g2_{name}" in table:
                    c.at(base + (name,), f"group 2 {name} is also set by world.g2_{name}: keep one")
                else:
                    kw[f"g2_{name}"] = v
        else:
            later[n] = fields
    if groups >= 3:
        kw["later"] = tuple(GroupScope(**later[k]) for k in range(3, groups + 1))


def _expr(c: _Collector, key: tuple, value, *, what: str) -> RawExpr | None:
    if not isinstance(value, str):
        c.at(key, f"{what} must be an expression in a string, not {type(value).__name__}")
        return None
    try:
        node = parse(value)
    except ExprSyntaxError as exc:
        c.at(key, f"in {what}: {exc.message}", offset=exc.offset, length=exc.length)
        return None
    return RawExpr(value, node, key)


def _plain(c: _Collector, key: tuple, value: str, what: str, keep: str = "") -> bool:
    """Refuse control characters in text that is shown (titles, notes, refs): an escape such
    as ESC would drive the terminal of ``verifier show`` and makes JUnit XML and SVG invalid.
    ``keep``: the ones a multi-line text may hold (newline, tab)."""
    ch = control_char(value, keep)
    if ch is None:
        return True
    c.at(key, f"{what} contains the control character U+{ord(ch):04X}: write plain text"
         + (" (newlines and tabs are fine here)" if keep else ""))
    return False


def _unknown_keys(c: _Collector, prefix: tuple, table: dict, allowed: set, where: str) -> None:
    for k in table:
        if k not in allowed:
            c.at(prefix + (k,), f"unknown key '{k}' in {where}" + suggest(k, allowed))


def _design(c: _Collector, table: str, given: dict, outputs, defaults: dict) -> dict:
    """The formulas of an [onboard] or [trackside] table, each output not set taking the
    default design (DESIGN 4.4, 4.5)."""
    out = {}
    for k in outputs:
        if k in given:
            e = _expr(c, (table, k), given[k], what=f"{table} {k}")
            if e:
                out[k] = e
        else:
            out[k] = RawExpr(defaults[k], parse(defaults[k]), (table, k), default=True)
    return out


def read_pack(path: str | Path, display: str | None = None) -> RawPack:
    """Read and syntax-check one pack file. Raises PackError with every problem found."""
    path = Path(path)
    shown = display or path.as_posix()
    data_bytes = read_regular(path, shown, "pack")
    try:
        text = data_bytes.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise PackError([Diagnostic(shown, 1, 1, f"pack is not UTF-8 text (byte {exc.start})")]) from None
    return parse_pack_text(text, shown, hashlib.sha256(data_bytes).hexdigest())


def parse_pack_text(text: str, shown: str, sha256: str | None = None) -> RawPack:
    if sha256 is None:
        sha256 = hashlib.sha256(text.encode("utf-8")).hexdigest()
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise PackError([_toml_error(shown, text, exc)]) from None
    except (ValueError, RecursionError) as exc:   # e.g. an integer of more than 4300 digits
        raise PackError([_long_number(shown, text) or Diagnostic(shown, 1, 1, f"malformed TOML: {exc}")]) from None
    src = SourceFile(shown, text)
    c = _Collector(src)

    for k, v in data.items():
        if k not in TABLES:
            c.at((k,), f"unknown table '{k}'" + suggest(k, TABLES))
        elif k == "rule":
            if not isinstance(v, list):
                c.at((k,), "rules are written as [[rule]] tables")
        elif k in ("lemma", "info", "group"):
            pass    # checked with the lemmas, the information items and the scope below
        elif not isinstance(v, dict):
            c.at((k,), f"'{k}' must be a table: [{k}]")
    tables = {k: (v if isinstance(v, dict) else {}) for k, v in data.items() if k not in ("rule", "lemma", "info", "group")}

    pack_t = tables.get("pack", {})
    if "pack" not in data:
        c.diags.append(src.diag(1, 1, "missing [pack] table with name and title"))
    _unknown_keys(c, ("pack",), pack_t, TABLES["pack"], "[pack]")
    name = pack_t.get("name", "")
    if "pack" in data:
        if "name" not in pack_t:
            c.at(("pack",), "[pack] needs a name")
        elif not isinstance(name, str) or not SLUG.fullmatch(name):
            c.at(("pack", "name"), f"pack name must be a slug (lower-case letters, digits, '-'), got {name!r}")
        if not isinstance(pack_t.get("title", ""), str) or "title" not in pack_t:
            c.at(("pack",), "[pack] needs a title (a string)")
        else:
            _plain(c, ("pack", "title"), pack_t["title"], "the pack title")
    legs, unbounded = _legs(c, ("pack", "legs"), pack_t.get("legs", DEFAULT_LEGS), "pack")
    legs = DEFAULT_LEGS if legs is None else legs
    description = pack_t.get("description", "")
    if not isinstance(description, str):
        c.at(("pack", "description"), "description must be a string")
        description = ""
    elif not _plain(c, ("pack", "description"), description, "the description", keep="\n\t"):
        description = ""

    _unknown_keys(c, ("world",), tables.get("world", {}), TABLES["world"], "[world]")
    scope = _load_scope(c, tables.get("world", {}), data.get("group", []))

    params = {}
    for k, v in tables.get("params", {}).items():
        key = ("params", k)
        if not IDENT.fullmatch(k):
            c.at(key, f"parameter name '{k}' must be a plain identifier")
            continue
        if isinstance(v, bool):
            c.at(key, "parameters are numbers or lengths, not true/false")
            continue
        if isinstance(v, (int, float)):
            v = str(v)
        e = _expr(c, key, v, what=f"params.{k}")
        if e:
            params[k] = e

    lets = {}
    for k, v in tables.get("let", {}).items():
        key = ("let", k)
        if not IDENT.fullmatch(k):
            c.at(key, f"let name '{k}' must be a plain identifier")
            continue
        if k in vocab.CONSTANTS or k in ("legs", "true", "false") or k in _FUNCTION_WORDS:
            c.at(key, f"let name '{k}' is a reserved word")
            continue
        e = _expr(c, key, v, what=f"let {k}")
        if e:
            lets[k] = e

    ob_t = tables.get("onboard", {})
    _unknown_keys(c, ("onboard",), ob_t, TABLES["onboard"], "[onboard]")
    onboard = _design(c, "onboard", ob_t, vocab.ONBOARD_OUTPUTS, vocab.DEFAULT_ONBOARD)
    infos = _infos(c, src, data.get("info", []), scope, {})
    if infos:     # the item formulas exist only in packs with items (they are mutated, hashed)
        onboard.update(_design(c, "onboard", ob_t, vocab.INFO_OUTPUTS,
                               vocab.DEFAULT_INFO_TWO if scope.groups >= 2 else vocab.DEFAULT_INFO_ONE))
    else:
        for k in vocab.INFO_OUTPUTS:
            if k in ob_t:
                c.at(("onboard", k), f"onboard {k} is evaluated for trackside information items: "
                     "the pack has no [[info]]")
    q_scale = ob_t.get("q_scale", "auto")
    if q_scale not in ("auto", *vocab.Q_SCALES):
        c.at(("onboard", "q_scale"), f"q_scale must be \"10 cm\", \"1 m\", \"10 m\" or \"auto\", got {q_scale!r}")
        q_scale = "auto"
    rounding = ob_t.get("rounding", "widen")
    if rounding not in vocab.ROUNDINGS:
        c.at(("onboard", "rounding"), f"rounding must be one of {', '.join(vocab.ROUNDINGS)}, got {rounding!r}"
             + (suggest(rounding, vocab.ROUNDINGS) if isinstance(rounding, str) else ""))
        rounding = "widen"

    ts_t = tables.get("trackside", {})
    _unknown_keys(c, ("trackside",), ts_t, TABLES["trackside"], "[trackside]")
    trackside = _design(c, "trackside", ts_t, vocab.TRACKSIDE_OUTPUTS, vocab.DEFAULT_TRACKSIDE)

    impl_t = tables.get("implementation", {})
    _unknown_keys(c, ("implementation",), impl_t, TABLES["implementation"], "[implementation]")
    implementation = {}
    for k in ("onboard", "trackside"):
        if k in impl_t:
            v = impl_t[k]
            if not isinstance(v, str) or v.count(":") != 1 or not all(v.split(":")):
                c.at(("implementation", k), f"implementation {k} must be \"module:function\", got {v!r}")
            else:
                implementation[k] = v
    if "path" in impl_t:
        v = impl_t["path"]
        v = [v] if isinstance(v, str) else v
        if not (isinstance(v, list) and all(isinstance(x, str) for x in v)):
            c.at(("implementation", "path"), "implementation path must be a folder or a list of folders "
                 "(relative to the pack file)")
        else:
            base = Path(shown).parent
            implementation["path"] = tuple((base / x).as_posix() for x in v)

    seen_ids: dict[str, tuple] = {}
    raw_rules = data.get("rule", []) if isinstance(data.get("rule", []), list) else []
    if not raw_rules and "pack" in data:
        c.diags.append(src.diag(1, 1, "the pack has no [[rule]]", severity="warning"))
    rules = _rules(c, src, raw_rules, "rule", seen_ids)
    raw_lemmas = data.get("lemma", [])
    if not isinstance(raw_lemmas, list):
        c.at(("lemma",), "lemmas are written as [[lemma]] tables")
        raw_lemmas = []
    lemmas = _rules(c, src, raw_lemmas, "lemma", seen_ids)

    # Errors found so far travel with the pack: the checker adds its own and reports them all.
    return RawPack(shown, text, sha256, name, pack_t.get("title", ""), description, legs, scope,
                   params, lets, onboard, q_scale, rounding, trackside, tuple(rules), src,
                   tuple(c.diags), unbounded, tuple(lemmas), implementation, tuple(infos))


def _infos(c: _Collector, src: SourceFile, raw, scope: Scope, seen: dict) -> list:
    """The [[info]] tables: id, group, at (a length), valid (nominal, reverse, both)."""
    if not isinstance(raw, list):
        c.at(("info",), "trackside information items are written as [[info]] tables")
        return []
    out = []
    for i, t in enumerate(raw):
        base = ("info", i)
        if not isinstance(t, dict):
            c.at(base, "an info item must be a table")
            continue
        _unknown_keys(c, base, t, TABLES["info"], "[[info]]")
        ok = True
        for req in ("id", "at", "valid"):
            if req not in t:
                c.at(base, f"info item is missing '{req}'")
                ok = False
        iid = t.get("id", "")
        if "id" in t and (not isinstance(iid, str) or not INFO_ID.fullmatch(iid)):
            c.at(base + ("id",), f"info id must be a name (lower-case letters, digits, '_'), got {iid!r}")
            ok = False
        elif iid in seen:
            c.at(base + ("id",), f"duplicate info id '{iid}'")
            ok = False
        if isinstance(iid, str):
            seen[iid] = i
        group = t.get("group", 1)
        if isinstance(group, bool) or not isinstance(group, int) or not 1 <= group <= scope.groups:
            c.at(base + ("group",), (f"info group must be 1..{scope.groups}" if scope.groups > 1 else "info group must be 1")
                 + f", got {group!r}" + ("" if scope.groups > 1 else " (another group needs [world] groups = 2 or more)"))
            ok = False
        at = _length(c, base + ("at",), t["at"], what="info at") if "at" in t else None
        if at is None or at < 0:
            if at is not None:
                c.at(base + ("at",), "info at is a distance: 0 m or more")
            ok = False
        valid = t.get("valid")
        if valid not in ("nominal", "reverse", "both"):
            c.at(base + ("valid",), f"info valid must be nominal, reverse or both, got {valid!r}")
            ok = False
        title = t.get("title", iid)
        if "title" in t and not isinstance(title, str):
            c.at(base + ("title",), "info title must be a string")
            ok = False
        elif "title" in t and not _plain(c, base + ("title",), title, "the info title"):
            ok = False
        place = src.places.get(base)
        if ok:
            out.append(RawInfo(iid, str(title), group, at, valid in ("nominal", "both"),
                               valid in ("reverse", "both"), place.line if place else 1))
    return out


def _legs(c: _Collector, key: tuple, value, what: str) -> tuple:
    """A ``legs`` value: a whole number 0..MAX_LEGS, or "any". Returns (bound, unbounded);
    (None, False) after an error."""
    if value == ANY:
        return None, True
    if isinstance(value, bool) or not isinstance(value, int) or not (0 <= value <= MAX_LEGS):
        hint = ' (write legs = "any" for every number of legs)' if isinstance(value, str) else ""
        c.at(key, f"{what} legs must be a whole number 0..{MAX_LEGS} or \"any\", got {value!r}{hint}")
        return None, False
    return value, False


def _rules(c: _Collector, src: SourceFile, raw: list, table: str, seen_ids: dict) -> list:
    """The [[rule]] or [[lemma]] tables. Ids are unique across both (they name files)."""
    out = []
    for i, r in enumerate(raw):
        base = (table, i)
        if not isinstance(r, dict):
            c.at(base, f"a {table} must be a table")
            continue
        _unknown_keys(c, base, r, TABLES[table], f"[[{table}]]")
        ok = True
        for req in ("id", "title", "expect") if table == "rule" else ("id", "expect"):
            if req not in r:
                c.at(base, f"{table} is missing '{req}'")
                ok = False
        rid = r.get("id", f"#{i + 1}")
        if "id" in r and (not isinstance(rid, str) or not SLUG.fullmatch(rid)):
            c.at(base + ("id",), f"{table} id must be a slug (lower-case letters, digits, '-'), got {rid!r}")
            ok = False
        elif isinstance(rid, str) and rid in seen_ids:
            first = src.places.get(seen_ids[rid])
            where = f"line {first.line}" if first else f"{seen_ids[rid][0]} {seen_ids[rid][1] + 1}"
            what = "rule id" if table == seen_ids[rid][0] == "rule" else "id"
            c.at(base + ("id",), f"duplicate {what} '{rid}' (first used at {where})")
            ok = False
        elif isinstance(rid, str):
            seen_ids[rid] = base
        title = r.get("title", rid if table == "lemma" else "")
        if not isinstance(title, str):
            c.at(base + ("title",), "title must be a string")
            ok = False
        elif not _plain(c, base + ("title",), title, f"the title of {table} {rid}"):
            ok = False
        given = _expr(c, base + ("given",), r["given"], what=f"{table} {rid} given") if "given" in r else None
        if "given" in r and given is None:
            ok = False
        expect = _expr(c, base + ("expect",), r["expect"], what=f"{table} {rid} expect") if "expect" in r else None
        refs = r.get("refs", [])
        if not (isinstance(refs, list) and all(isinstance(x, str) for x in refs)):
            c.at(base + ("refs",), "refs must be a list of strings")
            refs = []
        elif not all(_plain(c, base + ("refs",), x, f"a ref of {table} {rid}") for x in refs):
            ok = False
        note = r.get("note", "")
        if not isinstance(note, str):
            c.at(base + ("note",), "note must be a string")
            note = ""
        elif not _plain(c, base + ("note",), note, f"the note of {table} {rid}", keep="\n\t"):
            ok = False
        rlegs, unbounded = None, (True if table == "lemma" else None)
        if "legs" in r:
            rlegs, unbounded = _legs(c, base + ("legs",), r["legs"], table)
            if rlegs is None and not unbounded:
                ok = False
        place = src.places.get(base)
        if ok and expect is not None:
            out.append(RawRule(rid, title, given, expect, tuple(refs), note, rlegs,
                               place.line if place else 1, i, unbounded, table))
    return out


_FUNCTION_WORDS = {"abs", "min", "max", "flip", "side", "along", "floor_to", "ceil_to",
                   "round_to", "all", "any", "count", "sum", "if", "then", "else", "and",
                   "or", "not", "implies", "in"}
