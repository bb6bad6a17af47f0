"""The story of a counterexample in plain words (``verifier show``), after checking the file.

A counterexample file is evidence only if it still says what the tool found. So before a word is
written, the recorded world is simulated afresh (the exact simulator of DESIGN 4) under the pack
it was found with, and every recorded value (derived values, the failed part of ``expect``, the
rule's text and hashes, the scope) is compared with the fresh one. A file edited by hand, or
corrupted, is rejected with an error that names the first field at fault and its line in the
file; it is never explained.
"""

from __future__ import annotations

import hashlib
import json
import re
from fractions import Fraction
from pathlib import Path
from typing import Callable

import attrs

from verifier.check.model import Pack, Rule
from verifier.errors import Diagnostic, PackError, VerifierError, visible
from verifier.evidence import cexfile
from verifier.evidence.route import ORDINALS, arrivals, group_list, how_words, is_route, window
from verifier.lang import vocab
from verifier.lang.ast import LENGTH
from verifier.lang.numbers import counted
from verifier.lang.source import read_regular_text
from verifier.lang.vocab import Direction
from verifier.run.loader import load_pack
from verifier.world.failure import failed_detail, m, value_words
from verifier.world.scenario import fmt, world_from_data
from verifier.world.sim import State, applies, evaluate, scope_problems, start

FORMAT_PREFIX = "verifier-counterexample/"
# fields that are compared loosely: the tool that wrote the file and the caution wording may be
# older than this verifier without making the evidence wrong
LOOSE = ("tool", "caution")


@attrs.frozen
class Explained:
    """A counterexample file that passed every check, with its fresh simulation."""

    path: str
    doc: dict
    pack: Pack
    rule: Rule
    state: State = attrs.field(eq=False, repr=False)
    checked: int          # how many recorded values were compared
    text: str


# ---- locating fields in the file -------------------------------------------------------------

_NUM = re.compile(r"-?(?:0|[1-9]\d*)(?:\.\d+)?(?:[eE][-+]?\d+)?")


def field_lines(text: str) -> dict:
    """Where each field of a JSON text starts: path -> (line, column), 1-based. Paths are written
    as in error messages: ``derived.actual.front``, ``world.legs[1].distance`` (arrays from 1,
    like ``legs[i]`` in the rule language)."""
    out: dict = {}
    dec = json.JSONDecoder()

    def where(pos: int) -> tuple:
        line = text.count("\n", 0, pos) + 1
        return line, pos - (text.rfind("\n", 0, pos) + 1) + 1

    def ws(pos: int) -> int:
        while pos < len(text) and text[pos] in " \t\r\n":
            pos += 1
        return pos

    def value(pos: int, path: str) -> int:
        pos = ws(pos)
        ch = text[pos]
        if ch == "{":
            pos = ws(pos + 1)
            if text[pos] == "}":
                return pos + 1
            while True:
                pos = ws(pos)
                key, end = json.decoder.scanstring(text, pos + 1)
                sub = f"{path}.{key}" if path else key
                out.setdefault(sub, where(pos))
                pos = ws(end)
                pos = value(pos + 1, sub)          # skip the colon
                pos = ws(pos)
                if text[pos] == ",":
                    pos += 1
                    continue
                return pos + 1
        if ch == "[":
            pos = ws(pos + 1)
            if text[pos] == "]":
                return pos + 1
            i = 1
            while True:
                pos = ws(pos)
                sub = f"{path}[{i}]"
                out.setdefault(sub, where(pos))
                pos = ws(value(pos, sub))
                if text[pos] == ",":
                    pos += 1
                    i += 1
                    continue
                return pos + 1
        if ch == '"':
            return json.decoder.scanstring(text, pos + 1)[1]
        m = _NUM.match(text, pos)
        if m:
            return m.end()
        for word in ("true", "false", "null"):
            if text.startswith(word, pos):
                return pos + len(word)
        return dec.raw_decode(text, pos)[1]  # pragma: no cover - json.loads accepted the text

    try:
        value(0, "")
    except (IndexError, ValueError):  # pragma: no cover - the text parsed as JSON before
        pass
    return out


class Doc:
    """A parsed file with its text, for errors that point at a field."""

    def __init__(self, shown: str, text: str, doc):
        self.shown, self.text, self.doc = shown, text, doc
        self._lines: dict | None = None

    def error(self, field: str, message: str) -> PackError:
        if self._lines is None:
            self._lines = field_lines(self.text)
        probe = field
        while probe and probe not in self._lines:
            probe = re.sub(r"(\[\d+\]|\.[^.\[]*)$", "", probe) if re.search(r"(\[\d+\]|\.)", probe) else ""
        line, col = self._lines.get(probe, (1, 1))
        src = self.text.splitlines()[line - 1] if self.text.splitlines() else None
        return PackError([Diagnostic(self.shown, line, col, f"field '{field}': {message}",
                                     source_line=src, length=len(field.rsplit(".", 1)[-1]) + 2)])


# ---- reading and checking --------------------------------------------------------------------

def read_file(path: Path) -> Doc:
    """Parse a counterexample file and check its format field (not yet its values)."""
    shown = path.as_posix()
    try:
        text = read_regular_text(path, shown, "the file")
    except OSError as exc:
        raise PackError([Diagnostic(shown, 1, 1, f"cannot read the file: {exc}")]) from None
    try:
        doc = json.loads(text)
    except json.JSONDecodeError as exc:
        raise PackError([Diagnostic(shown, exc.lineno, exc.colno,
                                    f"not a counterexample file: not JSON ({exc.msg})")]) from None
    d = Doc(shown, text, doc)
    if not isinstance(doc, dict) or "format" not in doc:
        raise PackError([Diagnostic(shown, 1, 1, "not a counterexample file: it has no field 'format'")])
    fmt_ = doc["format"]
    if not isinstance(fmt_, str) or not fmt_.startswith(FORMAT_PREFIX):
        raise d.error("format", f"{fmt_!r} is not a counterexample format (expected {cexfile.FORMAT!r})")
    version = fmt_[len(FORMAT_PREFIX):]
    mine = int(cexfile.FORMAT[len(FORMAT_PREFIX):])
    if not version.isdigit():
        raise d.error("format", f"{fmt_!r} has no version number (expected {cexfile.FORMAT!r})")
    if int(version) > mine:
        raise d.error("format", f"format version {int(version)} is newer than version {mine}, the "
                                "newest this verifier reads; show it with a newer verifier")
    if int(version) != mine:
        raise d.error("format", f"format version {int(version)} is not read by this verifier "
                                f"(it reads {cexfile.FORMAT!r})")
    require_fields(d, (("pack", dict), ("rule", dict), ("world", dict), ("derived", dict),
                       ("bound", int), ("verdict", str), ("minimal", bool), ("scope", dict),
                       ("tool", dict), ("caution", str)))
    if not isinstance(doc["tool"].get("solver"), str):
        raise d.error("tool.solver", "missing or not a string")
    if doc["verdict"] != "violated":
        raise d.error("verdict", f"is {doc['verdict']!r}; a counterexample file records a violated rule")
    return d


def require_fields(d: Doc, fields) -> None:
    """Each (field, type) must be in the file with that type; then the pack's name, path and
    sha256 and the rule's id must be strings."""
    doc = d.doc
    for field, kind in fields:
        if field not in doc:
            raise d.error(field, "missing from the file")
        if not isinstance(doc[field], kind) or (kind is int and isinstance(doc[field], bool)):
            raise d.error(field, f"must be {'a table' if kind is dict else kind.__name__}, "
                                 f"got {json.dumps(doc[field])}")
    for field in ("name", "path", "sha256"):
        if not isinstance(doc["pack"].get(field), str):
            raise d.error(f"pack.{field}", "missing or not a string")
    if not isinstance(doc["rule"].get("id"), str):
        raise d.error("rule.id", "missing or not a string")


def find_pack(d: Doc, path: Path, pack_path: str | None) -> Pack:
    """The pack the counterexample was found with: --pack, else the recorded path relative to
    the working directory or to a folder above the file; its sha256 must match."""
    recorded = d.doc["pack"]["path"]
    want = d.doc["pack"]["sha256"]
    if pack_path is not None:
        candidates = [Path(pack_path)]
    else:
        rel = Path(recorded)
        candidates = [rel] if rel.is_absolute() else (
            [Path.cwd() / rel] + [a / rel for a in path.resolve().parents])
    seen_other = None
    for c in candidates:
        if not c.is_file():
            continue
        digest = hashlib.sha256(c.read_bytes()).hexdigest()
        if digest != want:
            seen_other = seen_other or c
            continue
        return load_pack(c, recorded)  # the identity is the sha256; keep the recorded name
    if seen_other is not None:
        raise d.error("pack.sha256", f"the pack {seen_other.as_posix()} has changed since this "
                                     "counterexample was written (its sha256 differs); show "
                                     "explains a file only against the pack it was found with "
                                     "(give that version with --pack; `verifier replay` tells "
                                     "whether today's pack still fails)")
    raise d.error("pack.path", f"the pack {recorded} is not found (looked in the working "
                               "directory and the folders above the file); give it with --pack")


def diff_field(path: str, recorded, fresh, out: list) -> None:
    if isinstance(fresh, dict) and isinstance(recorded, dict):
        for key in sorted(set(fresh) | set(recorded)):
            sub = f"{path}.{key}" if path else key
            if key not in recorded and sub.startswith("derived.") and sub[8:] in vocab.ADDED_WITH_ROUTE:
                continue    # a name the model gained with routes (DESIGN 4.10): older files lack it
            if key not in recorded:
                out.append((sub, "missing from the file (the fresh simulation has "
                                 f"{json.dumps(fresh[key])})"))
            elif key not in fresh:
                out.append((sub, "is not a field of a counterexample file"))
            else:
                diff_field(sub, recorded[key], fresh[key], out)
        return
    if isinstance(fresh, list) and isinstance(recorded, list):
        if len(fresh) != len(recorded):
            out.append((path, f"records {len(recorded)} entries; the fresh simulation has {len(fresh)}"))
            return
        for i, (r, f) in enumerate(zip(recorded, fresh), 1):
            diff_field(f"{path}[{i}]", r, f, out)
        return
    if recorded != fresh or type(recorded) is not type(fresh):
        out.append((path, f"records {json.dumps(recorded)} but the recorded world, simulated "
                          f"afresh, gives {json.dumps(fresh)}"))


def explain_file(path: str | Path, pack_path: str | None = None, pack: Pack | None = None,
                 recompute: Callable | None = None) -> Explained:
    """Read, check and explain one counterexample file. ``pack`` (already loaded, as by
    ``check --report``) or ``pack_path`` (``show --pack``) name the pack; else it is found.
    The file of an implementation's counterexample is rebuilt by ``recompute(pack, rule, doc)
    -> (fresh document, state)``, which runs the implementation again
    (``verifier.implcheck.replay.fresh_doc``, passed by the caller)."""
    path = Path(path)
    d = read_file(path)
    doc = d.doc
    try:
        world = world_from_data(doc["world"])
    except ValueError as exc:
        raise d.error(_world_field(str(exc)), str(exc)) from None
    if pack is None:
        pack = find_pack(d, path, pack_path)
    elif pack.sha256 != doc["pack"]["sha256"]:
        raise d.error("pack.sha256", f"the pack {pack.path} has changed since this "
                                     "counterexample was written (its sha256 differs)")
    try:
        rule = pack.rule(doc["rule"]["id"])
    except KeyError:
        raise d.error("rule.id", f"pack {pack.name} has no rule {doc['rule']['id']!r}") from None
    bound = doc["bound"]
    if not len(world.legs) <= bound <= 8:
        raise d.error("bound", f"is {bound}, but the world has {counted(len(world.legs), 'leg')} (the bound "
                               "must be at least that and at most 8)")
    try:
        if "implementation" in doc:     # a counterexample of a user's implementation
            if recompute is None:
                raise VerifierError("this counterexample was found in an implementation, which "
                                    "must run again to check it (verifier show does)")
            fresh, st = recompute(pack, rule, doc)
        else:
            st = State(pack, world)
            fresh = cexfile.build(pack, rule, st, verdict="violated", bound=bound,
                                  solver=doc["tool"]["solver"], minimal=doc["minimal"])
    except (IndexError, ZeroDivisionError) as exc:
        raise d.error("world", f"the recorded world cannot be simulated under the rule: {exc}") from None
    except VerifierError as exc:
        raise d.error("implementation", str(exc)) from None
    diffs: list = []
    for key in sorted(set(fresh) | set(doc)):
        if key in LOOSE:
            continue
        if key not in fresh:
            diffs.append((key, "is not a field of a counterexample file"))
        else:
            diff_field(key, doc.get(key), fresh[key], diffs)
    if diffs:
        field, message = diffs[0]
        more = f" ({len(diffs) - 1} other field{'s' if len(diffs) > 2 else ''} differ too)" if len(diffs) > 1 else ""
        raise d.error(field, message + "; the file was edited or corrupted after it was written" + more)
    problems = scope_problems(world, pack.scope, bound)
    if problems:
        raise d.error("world", "the recorded world is outside the pack's scope: " + "; ".join(problems))
    if not applies(rule, st):
        raise d.error("world", "the recorded world does not satisfy the rule's given")
    if evaluate(rule.expect.node, st, {}):
        raise d.error("failed", "the recorded world satisfies the rule's expect: it is no counterexample")
    checked = count_leaves({k: v for k, v in fresh.items() if k not in LOOSE})
    text = story_text(doc, pack, rule, st, shown=path.as_posix(), checked=checked)
    return Explained(path.as_posix(), doc, pack, rule, st, checked, text)


def _world_field(message: str) -> str:
    m = re.match(r"(world[\w.\[\]]*)", message)
    return m.group(1).rstrip(".:") if m else "world"


def count_leaves(x) -> int:
    if isinstance(x, dict):
        return sum(count_leaves(v) for v in x.values())
    if isinstance(x, list):
        return sum(count_leaves(v) for v in x) or 1
    return 1


# ---- the story -------------------------------------------------------------------------------

def signed(x) -> str:
    x = Fraction(x)
    return ("+" if x > 0 else "") + m(x)


def unknown_code_words(st) -> str:
    """Why the report's distances are sent as 32767 (unknown), in words: the direction over the
    group is unknown (no qualifier to refer them to), or a distance does not fit the step."""
    g = st.get
    if g("passage.seen").word == "unknown":
        return ("the direction over the group is unknown, one balise read and no linking, so every "
                "distance is sent as 32767 (unknown)")
    step = g("report.q_scale")
    too_long = [k.upper() for k in ("d_lrbg", "l_doubtover", "l_doubtunder")
                if g(f"report.code.{k}") == 32767]
    return (f"{', '.join(too_long)} beyond 32766 steps of {fmt(step)} m, so sent as 32767, "
            "this tool's choice for a distance no step can code")


def unplaced_words(st) -> str:
    """Why the trackside cannot place the train, in words."""
    g = st.get
    if not g("report.in_range"):
        return unknown_code_words(st)
    unknown = [q.upper() for q in ("q_dlrbg", "q_dirlrbg", "q_dirtrain") if g(f"report.{q}").word == "unknown"]
    return f"{', '.join(unknown)} unknown" if unknown else "the report carries no position"


def flip(d: Direction) -> Direction:
    return {Direction.NOMINAL: Direction.REVERSE, Direction.REVERSE: Direction.NOMINAL}.get(d, d)


def _dir_words(d) -> str:
    return {"nominal": "nominal (increasing N_PIG)", "reverse": "reverse (decreasing N_PIG)"}.get(d.word, d.word)


def story_text(doc: dict, pack: Pack, rule: Rule, st: State, *, shown: str, checked: int,
               checked_line: str | None = None) -> str:
    w, g = st.world, st.get
    out: list[str] = []
    add = out.append
    bound = doc["bound"]
    add(f"Counterexample {shown}")
    add(f"  pack {pack.name} ({pack.path}, sha256 {pack.sha256[:16]}...), rule {rule.id} "
        f"(line {rule.line}): violated, for up to {bound} leg{'s' if bound != 1 else ''}"
        + ("; minimal" if doc["minimal"] else "; not fully minimised"))
    add("")
    add(f"The rule: {rule.title}")
    if rule.refs:
        add(f"  cites: {'; '.join(rule.refs)}")
    add(f"  given:  {rule.given.text if rule.given else '(always)'}")
    if rule.premise_legs:
        k = rule.premise_legs
        add(f"  implicit premise: legs.count >= {k}. The rule names legs[{k}], so it only applies "
            f"to worlds with at least {k} leg{'s' if k != 1 else ''}; this premise is part of its given.")
    add(f"  expect: {rule.expect.text}")
    add("")

    two = w.g2 is not None
    add("The first group G1" if two else "The group (LRBG)")
    n = w.balises
    add(f"  {n} balise{'s' if n != 1 else ''} (N_PIG 0{f' to {n - 1}' if n > 1 else ' only'}, "
        f"N_TOTAL {n - 1}), {w.read} read; "
        + ("linked: linking announced the group and its direction of passage."
           if w.linked else "not linked."))
    add(f"  Location accuracy (Q_LOCACC) {m(w.locacc)}. Hidden from the onboard: the real reference "
        f"mark lies {signed(w.offset)} from its engineered location (the origin of the LRBG frame).")
    add("The train")
    add(f"  {m(w.length)} long; its balise antenna is {m(w.antenna)} behind the active front end.")
    add("The passage")
    o0 = w.direction if w.running.word == "forward" else flip(w.direction)
    add(f"  The train moved over the group in the group's {_dir_words(w.direction)} direction, "
        f"{'front end first (running forward)' if w.running.word == 'forward' else 'rear end first (running backward)'}, "
        f"so it faced {o0.word}.")
    seen = g("passage.seen")
    if two and st.handover.accepted:       # passage.* name G2's passage now: say G1's
        seen = w.direction if (w.read >= 2 or w.linked) else Direction.UNKNOWN
    why = ("linking announced it" if w.linked else f"{w.read} balises were read") if seen.word != "unknown" \
        else "only one balise of an unlinked group was read, so the group gives no direction"
    add(f"  The onboard sees the passage as {seen.word}, because {why}.")
    add(f"  Balise detection error {signed(w.detect_error)} (positive: the antenna was further "
        "along than the onboard believed).")
    front0, est0 = front_at_detection(st)
    if two and st.handover.accepted:       # the current LRBG's passage is G2's: G1's from the start
        first = start(attrs.evolve(w, legs=(), g2=None, later=()))
        front0 = first.front
        est0 = (1 if seen is Direction.UNKNOWN else (1 if w.direction.word == "nominal" else -1)) * first.est_front_passage
    add(f"  At the detection instant: real front {m(front0)}, estimated front "
        + (f"{m(est0)}." if seen.word != "unknown" else f"{m(est0)} in the passage frame."))
    route = is_route(st)
    arr = {a.group: a for a in arrivals(st)} if two else {}
    for k in arr:
        _later_group_words(add, st, arr[k], route)
    add("")
    if not w.legs:
        add("No legs: the story ends at the passage.")
    for i, (leg, d, group) in enumerate(st.journey_raw(), 1):
        parts = []
        if leg.cab_change:
            parts.append("at standstill the driver changes cab: the former rear end becomes the "
                         f"front end and the train now faces {d['actual_orientation'].word}; then")
        err = leg.odometer - leg.distance
        reading = ("exact" if err == 0 else f"over-read by {m(err)}" if err > 0 else f"under-read by {m(-err)}")
        parts.append(f"it runs {leg.running.word} ({'front' if leg.running.word == 'forward' else 'rear'} "
                     f"end first), moving {d['actual_motion'].word}: real distance {m(leg.distance)}, "
                     f"measured {m(leg.odometer)} ({reading}).")
        add(f"Leg {i}: " + " ".join(parts))
        add(f"  After it: real front {m(d['actual_front'])}, estimated front {m(d['est_front'])}"
            + (f" (G{group}'s frame)." if two and st.handover.accepted and group != st.handover.group else "."))
        for a in arr.values():
            if a.found and a.at == i:
                (_arrival_words if route else _second_group_arrival)(add, st, a)
    add("")
    add("At the end")
    add(f"  Real:      front {m(g('actual.front'))}, rear {m(g('actual.rear'))}, faces "
        f"{g('actual.orientation').word}, last moved {g('actual.motion').word}, travelled "
        f"{m(g('actual.travelled'))}.")
    add(f"  Estimated: front {m(g('est.front'))}, rear {m(g('est.rear'))}, faces "
        f"{g('est.orientation').word}, last moved {g('est.motion').word}, measured "
        f"{m(g('est.travelled'))}; reading error bounds over {m(g('est.bound_over'))}, "
        f"under {m(g('est.bound_under'))}.")
    add("")
    if doc.get("implementation"):
        spec = doc["implementation"]["onboard"]["spec"]
        add(f"The position report below is the one {spec} returned in this world; the real train and "
            "the estimate above are the simulator's (DESIGN 4.2, 4.3).")
    add("The position report")
    add(f"  As lengths: D_LRBG {m(g('report.d_lrbg'))} on the {g('report.q_dlrbg').word} side, "
        f"L_DOUBTOVER {m(g('report.l_doubtover'))}, L_DOUBTUNDER {m(g('report.l_doubtunder'))}, "
        f"orientation (Q_DIRLRBG) {g('report.q_dirlrbg').word}, movement (Q_DIRTRAIN) "
        f"{g('report.q_dirtrain').word}; step {m(g('report.q_scale'))}, rounding {pack.rounding}.")
    add(f"  Before rounding: d_lrbg {m(g('est.d_lrbg'))}, l_doubtover {m(g('est.l_doubtover'))}, "
        f"l_doubtunder {m(g('est.l_doubtunder'))}.")
    code = lambda k: int(g(f"report.code.{k}"))  # noqa: E731
    add(f"  As packet codes: Q_SCALE {code('q_scale')}, D_LRBG {code('d_lrbg')}, Q_DIRLRBG "
        f"{code('q_dirlrbg')}, Q_DLRBG {code('q_dlrbg')}, L_DOUBTOVER {code('l_doubtover')}, "
        f"L_DOUBTUNDER {code('l_doubtunder')}, Q_DIRTRAIN {code('q_dirtrain')}"
        + ("." if g("report.in_range") else f"; {unknown_code_words(st)}."))
    add("The trackside view")
    if g("rbc.placed"):
        lo, hi = g("rbc.min_safe_front"), g("rbc.max_safe_front")
        add(f"  It reads D_LRBG {m(g('rbc.d_lrbg'))}, L_DOUBTOVER {m(g('rbc.l_doubtover'))}, "
            f"L_DOUBTUNDER {m(g('rbc.l_doubtunder'))} and places the estimated front at "
            f"{m(g('rbc.est_front'))}, the min safe front at {m(lo)}, the max safe front at "
            f"{m(hi)} and the min safe rear at {m(g('rbc.min_safe_rear'))}.")
        add("  " + interval_words(g("actual.front"), lo, hi))
    else:
        add(f"  The report does not place the train, rbc.placed is false: {unplaced_words(st)}.")
    add("")
    add("What failed")
    f = failed_detail(rule, st)
    if f and "op" in f:
        (lt, lv, lty), (rt, rv, rty) = f["left"], f["right"]
        add(f"  The first false part of expect is `{f['text']}`.")
        add(f"  Left side  {lt} = {value_words(lv, lty)}")
        add(f"  Right side {rt} = {value_words(rv, rty)}")
        gap = ""
        if isinstance(lv, Fraction) and isinstance(rv, Fraction):
            gap = f" (they differ by {value_words(abs(lv - rv), lty if lty == LENGTH else rty)})"
        add(f"  so {value_words(lv, lty)} {f['op']} {value_words(rv, rty)} is false{gap}.")
    elif f:
        add(f"  The first false part of expect is `{f['text']}`, which is false in this world.")
    add("")
    add(checked_line or
        f"Checked: all {checked} recorded values agree with a fresh exact simulation of the recorded "
        f"world under {pack.path} (tool that wrote the file: verifier {doc['tool'].get('verifier', '?')}, "
        f"{doc['tool'].get('solver', '?')}).")
    add(f"Caution: {cexfile.CAUTION}")
    # no control character from a file name or a title reaches the terminal
    return visible("\n".join(out), keep="\n\t")


def interval_words(real, lo, hi) -> str:
    a, b = min(lo, hi), max(lo, hi)
    where = "inside"
    if real < a:
        where = f"outside it, {m(a - real)} below its lower end"
    elif real > b:
        where = f"outside it, {m(real - b)} beyond its upper end"
    order = "" if lo <= hi else (" (the report gives the train orientation as reverse (Q_DIRLRBG), "
                                 "so in the LRBG frame the min safe front lies above the max safe "
                                 "front)")
    return f"The real front, at {m(real)}, is {where} [{m(a)}, {m(b)}]{order}."


def whole_train_words(real_rear, real_front, safe_rear, max_front) -> str:
    """A sentence when the real train is not wholly where the trackside places it (min safe
    rear end to max safe front end), else ""."""
    a, b = min(safe_rear, max_front), max(safe_rear, max_front)
    out = [(name, v) for name, v in (("rear", real_rear), ("front", real_front)) if not a <= v <= b]
    if not out:
        return ""
    ends = " and ".join(f"the real {name}, at {m(v)}," for name, v in out)
    verb = "are" if len(out) > 1 else "is"
    return (f"The trackside places the whole train between {m(a)} and {m(b)} (min safe rear to "
            f"max safe front); {ends} {verb} outside it.")


def _later_group_words(add, st: State, a, route: bool) -> None:
    """A later group of DESIGN 4.8 and 4.10 in words: where it lies, what linking says of it,
    and whether it was found; a route also tells the window from the LRBG it was judged from."""
    k = a.group
    g = st.world.route[k - 2]
    add(f"The {ORDINALS[k - 1]} group G{k}")
    add(f"  {g.balises} balise{'s' if g.balises != 1 else ''}, {g.read} read when found; its mark lies "
        f"{m(g.distance)} from G{k - 1}'s on G1's {g.side.word} side, and it faces "
        f"{'the same way as G1' if g.orientation.word == 'nominal' else 'the other way'}; Q_LOCACC "
        f"{m(g.locacc)}; hidden: real mark {signed(g.offset)} from its engineered location, detection "
        f"error {signed(g.detect_error)}.")
    if g.linked and route:
        lo, hi = window(st, a)
        add(f"  Linking announces it: D_LINK {m(g.distance)} from G{k - 1}; "
            + (f"from G{a.before}, the LRBG when it comes, the onboard expects it {m(lo)} to {m(hi)} "
               "ahead (SUBSET-026 3.4.4.4.3)." if a.linking else
               f"the onboard cannot use it (no known direction over G1 or over G{a.before}, or no "
               f"linking of G{a.before})."))
    elif g.linked:
        add(f"  Linking announces it: D_LINK {m(g.distance)}, expectation window {m(g.distance - g.locacc)} "
            f"to {m(g.distance + g.locacc)} (SUBSET-026 3.4.4.4.3)"
            + ("." if st.get(f"g{k}.link_side").word != "unknown" else
               ", but with no known direction over G1 the onboard cannot use it."))
    else:
        add("  Linking does not announce it.")
    window_words = (f"{', inside' if st.get(f'g{k}.in_window') else ', outside'} its window"
                    if g.found and g.linked else "")
    if route and not g.found:
        add("  It is not found" + (f": the train passed it unseen in leg {a.unseen_at}."
                                   if a.unseen_at else "."))
        return
    add(f"  It is {'found at the end of leg ' + str(g.at) if g.found else 'not found'}{window_words}"
        f"; {'it becomes the LRBG' if st.get(f'g{k}.lrbg') else 'it does not become the LRBG'}.")


def _second_group_arrival(add, st: State, a) -> None:
    """G2 found, in a two-group world (the wording from before routes, DESIGN 4.8)."""
    g2 = st.world.g2
    if st.handover.accepted and st.get("report.two_groups"):
        add("  The antenna reaches G2, a single balise without linking, and G2 becomes the LRBG "
            "in a position report based on two balise groups: from here on every position is "
            "counted from G2's mark, "
            + ("positive in the direction from G1 towards G2 (the previous LRBG G1 is the direction "
               "reference)" if st.get("report.prv_lrbg") == 1 else
               "with every direction unknown (the train runs towards G1, against the way it passed G1)")
            + f", and the confidence interval restarts from G2's Q_LOCACC {m(g2.locacc)}.")
    elif st.handover.accepted:
        add(f"  The antenna reaches G2 and G2 becomes the LRBG: from here on every position is "
            f"counted from G2's mark, positive in G2's nominal direction ({'the same as' if g2.orientation.word == 'nominal' else 'opposite to'} G1's), "
            f"and the confidence interval restarts from G2's Q_LOCACC {m(g2.locacc)}.")
    else:
        add("  The antenna reaches G2, which does not become the LRBG (" + (
            "found outside its expectation window" if g2.linked and not st.get("g2.in_window")
            else "passed against the direction linking announced" if g2.linked and st.get("g2.in_window")
            else "not linked and only one balise read") + "): the report stays relative to G1.")


def _arrival_words(add, st: State, a) -> None:
    """A later group found on a route (DESIGN 4.10): it takes over from the LRBG of the time, and
    how, with the onboard's list after it; or it is rejected, and why."""
    k, j = a.group, a.before
    g = st.world.route[k - 2]
    if not a.accepted:
        add(f"  The antenna reaches G{k}, which does not become the LRBG ({how_words(a)}): the report "
            f"stays relative to G{j}.")
        return
    if a.how in ("move", "unknown"):
        frame = (f"positive in the direction from G{j} towards G{k} (the previous LRBG G{j} is the "
                 "direction reference)" if a.how == "move" else
                 f"with every direction unknown (the train runs towards G{j}, against the way from "
                 f"G{j} to G{k})")
        add(f"  The antenna reaches G{k}, a single balise without usable linking, and G{k} takes over "
            f"from G{j} as the LRBG in a position report based on two balise groups: from here on "
            f"every position is counted from G{k}'s mark, {frame}, and the confidence interval "
            f"restarts from G{k}'s Q_LOCACC {m(g.locacc)}.")
    else:
        add(f"  The antenna reaches G{k} and G{k} takes over from G{j} as the LRBG ({how_words(a)}): "
            f"from here on every position is counted from G{k}'s mark, positive in G{k}'s nominal "
            f"direction ({'the same as' if g.orientation.word == 'nominal' else 'opposite to'} G1's), "
            f"and the confidence interval restarts from G{k}'s Q_LOCACC {m(g.locacc)}.")
    add(f"  The onboard's list of LRBGs is now {group_list(a.history)}"
        + (f"; {group_list(a.left)} left it." if a.left else "."))


def front_at_detection(st: State) -> tuple:
    """Real and estimated front at the detection instant (DESIGN 4.2, 4.3)."""
    return st.get("passage.actual_front"), st.get("passage.est_front")


