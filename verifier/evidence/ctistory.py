"""A counterexample to induction in words (``verifier show`` on a ``.induction.json`` file),
after checking the file the way :mod:`verifier.evidence.story` checks a counterexample: the
recorded first state and legs are run afresh in the simulator under the pack and lemmas they
were found with, every recorded value is compared, and only a file that still says what the
tool found is explained.
"""

from __future__ import annotations

import json
from pathlib import Path

import attrs

from verifier.check.model import Pack, Rule
from verifier.errors import Diagnostic, PackError
from verifier.evidence import cexfile
from verifier.evidence.story import LOOSE, Doc, count_leaves, diff_field, find_pack, require_fields
from verifier.lang.numbers import counted
from verifier.lang.source import read_regular_text
from verifier.run.induct import plan_with_lemmas, replay_states
from verifier.world.failure import comparison_words, failed_detail, m
from verifier.world.scenario import legs_from_data, snapshot_from_data, world_from_data
from verifier.world.sim import detection

PREFIX = "verifier-induction/"


@attrs.frozen
class ExplainedInduction:
    path: str
    doc: dict
    pack: Pack
    rule: Rule
    lemmas: tuple
    views: tuple = attrs.field(eq=False, repr=False)
    checked: int
    text: str


def is_induction_file(path: Path) -> bool:
    """Whether a JSON file claims to be a counterexample to induction (by its format field)."""
    try:
        doc = json.loads(read_regular_text(path, Path(path).as_posix(), "the file"))
    except (OSError, PackError, json.JSONDecodeError):
        return False
    return isinstance(doc, dict) and isinstance(doc.get("format"), str) and doc["format"].startswith(PREFIX)


def read_file(path: Path) -> Doc:
    shown = path.as_posix()
    try:
        text = read_regular_text(path, shown, "the file")
        doc = json.loads(text)
    except (OSError, json.JSONDecodeError) as exc:
        raise PackError([Diagnostic(shown, 1, 1, f"cannot read the file: {exc}")]) from None
    d = Doc(shown, text, doc)
    if not isinstance(doc, dict) or doc.get("format") != cexfile.INDUCTION_FORMAT:
        raise d.error("format", f"{doc.get('format') if isinstance(doc, dict) else None!r} is not "
                                f"read by this verifier (it reads {cexfile.INDUCTION_FORMAT!r})")
    require_fields(d, (("pack", dict), ("rule", dict), ("lemmas", list), ("world", dict),
                       ("state", dict), ("legs", list), ("states", list), ("bound", int),
                       ("depth", int), ("minimal", bool), ("tool", dict), ("caution", str)))
    if not all(isinstance(x, dict) and isinstance(x.get("id"), str) for x in doc["lemmas"]):
        raise d.error("lemmas", "each lemma needs an id")
    return d


def rebuild(pack: Pack, doc: dict, d: Doc | None = None):
    """The rule, the lemmas, the plan and the simulator's states of a recorded file; raises
    PackError (through ``d``) or ValueError when they cannot be had."""

    def fail(field, message):
        if d is None:
            raise ValueError(f"{field}: {message}")
        raise d.error(field, message)

    try:
        rule = pack.rule(doc["rule"]["id"])
    except KeyError:
        fail("rule.id", f"pack {pack.name} has no rule {doc['rule']['id']!r}")
    lemmas = []
    for i, entry in enumerate(doc["lemmas"], 1):
        try:
            lemmas.append(pack.rule(entry["id"]))
        except KeyError:
            fail(f"lemmas[{i}].id", f"pack {pack.name} has no lemma {entry['id']!r}")
    plan = plan_with_lemmas(pack, rule, lemmas)
    try:
        world = world_from_data(doc["world"])
        snap = snapshot_from_data(doc["state"], world, plan, history=pack.scope.history)
        legs, detections = legs_from_data(doc["legs"])
    except ValueError as exc:
        fail("state", str(exc))
    rep = replay_states(pack, rule, tuple(lemmas), plan, snap, legs, detections)
    return rule, tuple(lemmas), plan, legs, rep


def explain_file(path: str | Path, pack_path: str | None = None, pack: Pack | None = None) -> ExplainedInduction:
    path = Path(path)
    d = read_file(path)
    doc = d.doc
    if pack is None:
        pack = find_pack(d, path, pack_path)
    rule, lemmas, plan, legs, rep = rebuild(pack, doc, d)
    if rep.problems:
        raise d.error("states", "the recorded path is no counterexample to induction: "
                                + "; ".join(rep.problems))
    fresh = cexfile.build_induction(pack, rule, lemmas, rep.views, plan, legs, bound=doc["bound"],
                                    minimal=doc["minimal"], solver=doc["tool"].get("solver", ""))
    diffs: list = []
    for key in sorted(set(fresh) | set(doc)):
        if key in LOOSE:
            continue
        if key not in fresh:
            diffs.append((key, "is not a field of a counterexample to induction"))
        else:
            diff_field(key, doc.get(key), fresh[key], diffs)
    if diffs:
        field, message = diffs[0]
        raise d.error(field, message + "; the file was edited or corrupted after it was written")
    checked = count_leaves({k: v for k, v in fresh.items() if k not in LOOSE})
    text = story_text(doc, pack, rule, lemmas, rep.views, legs, shown=path.as_posix(), checked=checked)
    return ExplainedInduction(path.as_posix(), doc, pack, rule, lemmas, rep.views, checked, text)


def _state_words(v) -> str:
    g = v.get
    known = g("passage.seen").word != "unknown"
    return (f"real front {m(g('actual.front'))}, facing {g('actual.orientation').word}, last moved "
            f"{g('actual.motion').word}; run {m(g('actual.travelled'))}, measured "
            f"{m(g('est.travelled'))} (over-read {m(g('actual.over_reading'))}, under-read "
            f"{m(g('actual.under_reading'))} so far); estimated front "
            f"{m(g('est.front'))}{'' if known else ' (passage frame)'}")


def _report_words(v) -> str:
    g = v.get
    code = lambda k: int(g(f"report.code.{k}"))  # noqa: E731
    return (f"D_LRBG {m(g('est.d_lrbg'))} before rounding, code {code('d_lrbg')} at step "
            f"{m(g('report.q_scale'))}; L_DOUBTOVER code {code('l_doubtover')}, L_DOUBTUNDER code "
            f"{code('l_doubtunder')}; Q_DIRLRBG {g('report.q_dirlrbg').word}, Q_DLRBG "
            f"{g('report.q_dlrbg').word}, Q_DIRTRAIN {g('report.q_dirtrain').word}"
            + ("" if g("report.in_range") else "; a distance does not fit and is sent as 32767"))


def story_text(doc, pack, rule, lemmas, views, legs, *, shown: str, checked: int) -> str:
    out: list[str] = []
    add = out.append
    first = views[0]
    n, cabs = first.snap.count, first.snap.cab_changes
    add(f"Counterexample to induction {shown}")
    add(f"  pack {pack.name} ({pack.path}, sha256 {pack.sha256[:16]}...), {rule.role} {rule.id} "
        f"(line {rule.line}): bounded. It holds for up to {counted(doc['bound'], 'leg')} (checked for every "
        f"world), but is not proved for any number of legs"
        + ("; minimal" if doc["minimal"] else "; not fully minimised") + ".")
    add("")
    add("This is not a world in which the rule is false. It is a state the induction step could")
    add("not rule out: the rule holds there, and one leg later it does not.")
    add("")
    add(f"The {rule.role}: {rule.title}")
    add(f"  given:  {rule.given.text if rule.given else '(always)'}")
    add(f"  expect: {rule.expect.text}")
    if lemmas:
        add("Lemmas assumed at every state (each proved for any number of legs):")
        for lemma in lemmas:
            add(f"  {lemma.id}: " + (f"given {lemma.given.text}, " if lemma.given else "")
                + f"expect {lemma.expect.text}")
    else:
        add("No lemma was assumed.")
    add("")
    w = first.world
    add(f"The group: {w.balises} balise{'s' if w.balises != 1 else ''}, {w.read} read, "
        f"{'linked' if w.linked else 'not linked'}, Q_LOCACC {m(w.locacc)}, real mark "
        f"{m(w.offset)} from its engineered location. The train: {m(w.length)} long, antenna "
        f"{m(w.antenna)} behind the front. The passage: {w.direction.word}, "
        f"{'front' if w.running.word == 'forward' else 'rear'} first, detection error "
        f"{m(w.detect_error)}; the onboard sees it as {first.get('passage.seen').word}.")
    if first.snap.route is not None:
        _route_words(add, first)
    add("")
    rs = first.snap.route
    since = "" if rs is None else f" since G{rs.group}'s detection ({rs.journey} into the journey)"
    add(f"State s0, after {n} leg{'s' if n != 1 else ''}{since} and {cabs} change{'s' if cabs != 1 else ''} "
        f"of cab (the legs themselves are not known, only what they left behind):")
    if rs is not None:          # the legs are numbered along the journey
        n = rs.journey
    add(f"  {_state_words(first)}.")
    add(f"  Report: {_report_words(first)}.")
    accs = [a for a in doc["state"]["accumulators"]]
    if accs:
        add("  What the legs so far left behind for the quantifiers:")
        for a in accs:
            cases = "; ".join(f"{', '.join(map(str, c['case'])) or 'value'}: {_plain(c['value'])}" for c in a["cases"])
            add(f"    {a['of']}: {cases}")
    add(f"  The {rule.role} holds at s0.")
    for i, (leg, v) in enumerate(zip(legs, views[1:]), 1):
        err = leg.odometer - leg.distance
        reading = ("exact" if err == 0 else f"over-read by {m(err)}" if err > 0 else f"under-read by {m(-err)}")
        add("")
        add(f"Leg {n + i}: " + ("change of cab, then " if leg.cab_change else "")
            + f"running {leg.running.word}, real distance {m(leg.distance)}, measured "
              f"{m(leg.odometer)} ({reading}).")
        if v.snap.route is not None:
            k, det = detection(views[i - 1].snap, v.snap)
            if k:
                took = v.snap.route.group == k
                add(f"  At its end G{k} is found (detection error {m(det)}): "
                    + (f"it becomes the LRBG; the list holds {_groups(v.snap.route.history)}."
                       if took else f"it is not taken; G{v.snap.route.group} stays the LRBG."))
        add(f"State s{i}: {_state_words(v)}.")
        add(f"  Report: {_report_words(v)}.")
    last = views[-1]
    f = failed_detail(rule, last)
    add("")
    add("What failed")
    if f and "op" in f:
        add(f"  At s{len(views) - 1}: {comparison_words(f)}.")
    elif f:
        add(f"  At s{len(views) - 1}: {f['text']} is false.")
    add("")
    add("What to do")
    add("  If no run in scope can reach s0, add a [[lemma]]: an invariant that holds after any")
    add("  number of legs and is false at s0 (for example a relation between the values above that")
    add("  s0 breaks); once it is proved, the step is asked again with it. If a run can reach s0,")
    add(f"  the rule is false after {counted(n + len(legs), 'leg')}: check with more legs (--legs up to 8), or")
    add("  narrow the scope or the rule.")
    add("")
    add(f"Checked: all {checked} recorded values agree with a fresh exact simulation of the recorded "
        f"state and legs under {pack.path} (tool that wrote the file: verifier "
        f"{doc['tool'].get('verifier', '?')}, {doc['tool'].get('solver', '?')}).")
    add(f"Caution: {cexfile.INDUCTION_CAUTION}")
    return "\n".join(out)


def _groups(ks) -> str:
    return ", ".join(f"G{k}" for k in ks)


def _route_words(add, first) -> None:
    """A route's state in words (DESIGN 4.10): the groups, which is the LRBG and how it was
    accepted, what was found so far and what the onboard's list holds."""
    rs, v = first.snap.route, first.snap.world
    w = rs.world
    add("The group above is G1, the first of the route. The route: "
        + "; ".join(f"G{k} {m(g.distance)} on, {g.balises} balise{'s' if g.balises != 1 else ''} "
                    f"({g.read} read), {'linked' if g.linked else 'not linked'}, orientation "
                    f"{g.orientation.word}, Q_LOCACC {m(g.locacc)}" for k, g in enumerate(w.route, 2))
        + f". The onboard keeps its last {counted(rs.size, 'LRBG')}.")
    found = [(k, g) for k, g in enumerate(w.route, 2) if g.found]
    add(f"At s0, {counted(rs.journey, 'leg')} into the journey: "
        + ("; ".join(f"G{k} found at the end of leg {g.at} ("
                     + ("became the LRBG" if rs.lrbgs[k - 2] else "not taken") + ")" for k, g in found)
           if found else "no later group found yet")
        + f". The LRBG is G{rs.group}"
        + ("" if rs.group == 1 else
           f", accepted {'through linking, in its window' if rs.linking else 'without linking'}"
           + (f", its directions referred to G{v.prv_group} (a report based on two groups)" if v.prv else "")
           + f"; its passage {v.direction.word}, {'front' if v.running.word == 'forward' else 'rear'} "
             f"first, detection error {m(v.detect_error)}")
        + f"; the list holds {_groups(rs.history)}.")


def _plain(v) -> str:
    return ("true" if v else "false") if isinstance(v, bool) else str(v)
