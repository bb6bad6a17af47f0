"""Margins of the rules that hold (DESIGN 9): check the pack, then for each rule that holds its
slack, the thresholds of the [world] bounds named, and the assumptions its proof needs; every
world found is replayed in the simulator, which must agree, before it is reported.

It writes no file itself: the caller passes ``files`` (``verifier.evidence.files.Files``), as
to the engine."""

from __future__ import annotations

import time
from fractions import Fraction
from typing import Callable

import attrs

from verifier.about import CAUTION
from verifier.check.model import Pack, Rule
from verifier.errors import UsageError, WriteError, suggest
from verifier.lang.numbers import fmt
from verifier.lang.scope import VARY, VARY_DEFAULT, bound_of, with_bound
from verifier.run import engine
from verifier.run.engine import CheckOptions, RuleResult
from verifier.smt import margin as smt_margin
from verifier.smt.solve import DEFAULT_RLIMIT
from verifier.world.scenario import world_from_flat
from verifier.world.sim import State, applies, evaluate, holds, scope_problems


@attrs.frozen
class MarginOptions:
    rules: tuple = ()                  # --rule: only these (empty: every rule that holds)
    vary: tuple = VARY_DEFAULT         # --vary: the [world] bounds whose thresholds are found
    legs: int | str | None = None      # --legs, as for check
    rlimit: int | None = None
    timeout: float = 120.0             # seconds per search (a guard only)
    core: bool = True                  # the assumptions each proof needs
    out: object = None                 # a folder for the worlds' files, or None


@attrs.frozen
class RuleMargin:
    pack: str
    rule: str
    verdict: str                  # the check's verdict; margins only for "holds"
    bound: int                    # the legs the margins were found up to
    unbounded: bool               # the verdict is for any number of legs (margins: up to bound)
    slacks: tuple = ()
    thresholds: tuple = ()
    core: object = None           # smt.margin.Core or None
    lemmas: tuple = ()            # the lemmas an any-number proof used (from the check)
    files: dict = attrs.field(factory=dict)   # "slack" / key -> the world's file
    errors: tuple = ()            # disagreements with the simulator (each makes the margin wrong)
    seconds: float = 0.0
    check_seconds: float = 0.0

    def as_json(self) -> dict:
        out = {"id": self.rule, "verdict": self.verdict, "legs": self.bound,
               "any_number_of_legs": self.unbounded}
        if self.verdict != "holds":
            return out
        out["slack"] = [slack_json(s) for s in self.slacks]
        least = least_slack(self.slacks)
        out["least_slack"] = None if least is None else slack_json(least)
        out["thresholds"] = [threshold_json(t) for t in self.thresholds]
        if self.core is not None:
            out["assumptions"] = {"needed": list(self.core.needed), "not_needed": list(self.core.not_needed),
                                  "undecided": list(self.core.undecided)}
        if self.lemmas:
            out["lemmas_used"] = list(self.lemmas)
        out["files"] = dict(sorted(self.files.items()))
        if self.errors:
            out["errors"] = list(self.errors)
        return out


def least_slack(slacks) -> smt_margin.Slack | None:
    """The part with the least slack (the first on a tie), among those with a value."""
    known = [s for s in slacks if s.high is not None and s.status != "equality"]
    if not known:
        return None
    return min(known, key=lambda s: s.high)


def _q(x) -> str | None:
    return None if x is None else fmt(x)


def slack_json(s) -> dict:
    return {"part": s.part, "status": s.status, "low": _q(s.low), "high": _q(s.high),
            "unit": s.unit, "reason": s.reason, "words": slack_words(s)}


def threshold_json(t) -> dict:
    return {"key": t.key, "way": t.way, "stated": _q(t.stated), "status": t.status,
            "holds_at": _q(t.holds_at), "fails_at": _q(t.fails_at), "minimal": t.minimal,
            "reason": t.reason, "words": threshold_words(t)}


def check_vary(keys) -> tuple:
    for k in keys:
        if k not in VARY:
            raise UsageError(f"--vary: no [world] bound '{k}'" + suggest(k, VARY)
                             + f" (one of: {', '.join(VARY)})")
    return tuple(dict.fromkeys(keys))


@attrs.frozen
class MarginRun:
    checked: object          # the check's engine.PackResult
    rules: tuple             # RuleMargin, in file order

    def as_json(self) -> dict:
        return {"pack": self.checked.name, "path": self.checked.path,
                "rules": [m.as_json() for m in self.rules]}


def margins(pack: Pack, opts: MarginOptions = MarginOptions(), files=None,
            progress: Callable | None = None) -> MarginRun:
    """Check ``pack`` (no files), then find the margins of every selected rule that holds."""
    vary = check_vary(opts.vary)
    copts = CheckOptions(legs=opts.legs, rules=opts.rules, out=None, witness=False,
                         rlimit=opts.rlimit)
    result = engine.check_packs([pack], copts)[0]
    checked = result.results
    rules = {r.id: r for r in pack.rules + pack.lemmas}
    wanted = set(opts.rules) if opts.rules else {r.id for r in pack.rules}
    proved = [(rules[r.rule], r) for r in checked if r.role == "lemma"]
    out, moved = [], {}
    for res in checked:
        if res.rule not in wanted:
            continue
        if progress:
            progress(pack, res.rule)
        rule = rules[res.rule]
        out.append(_margin(pack, rule, res, proved, vary, opts, files, res.seconds, moved))
    return MarginRun(result, tuple(out))


def _margin(pack: Pack, rule: Rule, res: RuleResult, proved, vary, opts: MarginOptions, files,
            check_seconds: float, moved: dict) -> RuleMargin:
    bound = pack.bound_for(rule, opts.legs)
    base = dict(pack=pack.name, rule=rule.id, verdict=res.verdict, bound=bound,
                unbounded=res.unbounded, check_seconds=check_seconds)
    if res.verdict != "holds":
        return RuleMargin(**base)
    t0 = time.monotonic()
    rl = opts.rlimit or DEFAULT_RLIMIT
    lemmas = engine.usable_lemmas(proved, bound)
    slacks = tuple(smt_margin.slacks(pack, rule, bound, assume=lemmas, rlimit=rl, timeout=opts.timeout))
    core = smt_margin.core(pack, rule, bound, rlimit=rl, timeout=opts.timeout) if opts.core else None
    thresholds = tuple(_threshold(pack, rule, bound, k, core, rl, opts.timeout, moved) for k in vary)
    errors, written = [], {}
    parts = smt_margin.comparisons(rule)
    for s in slacks:
        if s.world is None:
            continue
        st, problem = _replay(pack, rule, s.world, s.values, pack.scope, bound, expect=True)
        if problem:
            errors.append(f"slack of {s.part}: {problem}")
            continue
        _, a, op, b = parts[s.index]
        va, vb = evaluate(a, st, {}), evaluate(b, st, {})
        value = (vb - va) if op in ("<=", "<") else (va - vb)
        if value != s.high:
            errors.append(f"slack of {s.part}: solver {fmt(s.high)}, simulator {fmt(value)}")
        elif s is least_slack(slacks) and files is not None:
            written["slack"] = _write(files, pack, rule, st, "slack", "holds", bound, pack.scope, s.part)
    for t in thresholds:
        if t.world is None:
            continue
        real = with_bound(pack.scope, t.key, t.fails_at)
        st, problem = _replay(pack, rule, t.world, t.values, real, bound, expect=False)
        if not problem and not scope_problems(st.world, pack.scope, bound):
            problem = "the world past the threshold is inside the pack's own scope"
        if problem:
            errors.append(f"threshold of {t.key}: {problem}")
        elif files is not None:
            written[t.key] = _write(files, pack, rule, st, t.key, "violated", bound, real,
                                    f"{t.key} = {fmt(t.fails_at)}")
    lemmas_used = tuple((res.proof or {}).get("lemmas") or ()) if res.unbounded else ()
    return RuleMargin(**base, slacks=slacks, thresholds=thresholds, core=core, lemmas=lemmas_used,
                      files=written, errors=tuple(errors), seconds=time.monotonic() - t0)


def _threshold(pack: Pack, rule: Rule, bound: int, key: str, core, rlimit: int, timeout: float,
               moved: dict):
    """A threshold, searched for unless the core shows that the proof needs none of the
    constraints the bound moves (then the rule holds whatever the bound is: no search).
    ``moved`` keeps :func:`smt_margin.moved_by` by (bound, key) for the pack's rules."""
    if core is not None and not core.undecided:
        if (bound, key) not in moved:
            moved[bound, key] = smt_margin.moved_by(pack, bound, key)
        names = moved[bound, key]
        if names and names <= set(core.not_needed):
            return smt_margin.not_needed(key, Fraction(bound_of(pack.scope, key)), VARY[key].way, names)
    return smt_margin.threshold(pack, rule, bound, key, rlimit=rlimit, timeout=timeout)


def _replay(pack: Pack, rule: Rule, world_flat: dict, values: dict | None, scope, bound: int,
            expect: bool) -> tuple:
    """The world in the simulator: inside ``scope``, the rule's given true and its expect as
    ``expect``, every derived value as the solver's. (state, problem or "")."""
    world = world_from_flat(world_flat)
    problems = scope_problems(world, scope, bound, design=pack.scope)
    st = State(pack, world)
    if problems:
        return st, "the solver's world is outside the scope: " + "; ".join(problems)
    if not applies(rule, st):
        return st, "the simulator says the given is false"
    if holds(rule, st) != expect:
        return st, f"the simulator says the expect is {not expect}"
    disagree = engine.compare_values(values or {}, st)
    if disagree:
        return st, "; ".join(disagree)
    return st, ""


def _write(files, pack, rule, st, what: str, verdict: str, bound: int, scope, note: str) -> str:
    try:
        return files.margin(pack, rule, st, what=what, verdict=verdict, bound=bound, scope=scope,
                            note=note)
    except WriteError as exc:
        return f"not written: {exc}"


def threshold_words(t) -> str:
    """One threshold in words (the table's cell)."""
    v = VARY[t.key]

    def show(x: Fraction) -> str:
        return f"{fmt(x * 100)} %" if v.unit == "%" else f"{fmt(x)} {v.unit}".strip()

    if t.status == "unknown":
        return f"unknown ({t.reason})"
    if t.status == "not_needed":
        return f"holds whatever it is ({t.reason})"
    if t.status == "beyond":
        if t.fails_at is None and t.holds_at == t.stated and v.way == "down":
            return f"holds down to {show(t.stated)} ({t.reason})"
        if v.way == "up":
            return f"holds up to {show(t.holds_at)} at least (the search stops there)"
        return f"holds down to {show(t.holds_at)} (the lowest value searched)"
    own = " (the pack's own figure)" if t.holds_at == t.stated else ""
    tail = "" if t.minimal else " (that world not fully minimised: budget)"
    if t.status == "exact":
        return f"holds {'up' if v.way == 'up' else 'down'} to {show(t.holds_at)}{own}, fails at {show(t.fails_at)}{tail}"
    return f"holds at {show(t.holds_at)}{own}, fails at {show(t.fails_at)}{tail} (between them not searched)"


def slack_words(s) -> str:
    unit = f" {s.unit}" if s.unit else ""
    if s.status == "tight":
        return f"0{unit}: tight"
    if s.status == "slack":
        return f"{fmt(s.high)}{unit}"
    if s.status == "range":
        return (f"at least {fmt(s.low)}{unit}, at most {fmt(s.high)}{unit} (a world within a grid step of "
                f"the least; the least may be approached without being reached)")
    if s.status == "equality":
        return "an equality: no slack"
    return f"unknown ({s.reason})"


def margin_table(run: MarginRun) -> str:
    """The margins as a plain table: a row a rule (its least slack), then detail lines: each
    slack, each threshold, the assumptions needed and not needed."""
    rows = [("rule", "verdict", "legs", "least slack")]
    detail: dict = {}
    for m in run.rules:
        legs = f"{m.bound}" + (" (base of any)" if m.unbounded else "")
        if m.verdict != "holds":
            rows.append((m.rule, m.verdict, legs, f"no margin: the verdict is {m.verdict}, not holds"))
            continue
        least = least_slack(m.slacks)
        if least is None:
            cell = "not a distance rule" if not m.slacks else "an equality: no slack"
        else:
            cell = slack_words(least) + (f" ({least.part})" if len(m.slacks) > 1 else "")
        rows.append((m.rule, m.verdict, legs, cell))
        lines = [f"slack of {s.part}: {slack_words(s)}" for s in m.slacks]
        free = [t.key for t in m.thresholds if t.status == "not_needed"]
        lines += [f"{t.key}: {threshold_words(t)}" for t in m.thresholds if t.status != "not_needed"]
        if free and len(free) == len(m.thresholds) > 1:
            lines.append(f"thresholds: none; the rule holds whatever the real world's {len(free)} bounds "
                         "varied are (the proof needs none of the constraints they move)")
        elif free:
            lines.append("holds whatever the real " + ", ".join(free) + (" is" if len(free) == 1 else " are")
                         + " (the proof needs none of the constraints they move)")
        if m.unbounded and m.thresholds:
            lines.append(f"thresholds found up to the base bound of {m.bound} legs only")
        if m.core is not None:
            lines.append("needs: " + (", ".join(m.core.needed) or "nothing named"))
            if m.core.not_needed:
                lines.append("holds whatever: " + ", ".join(m.core.not_needed))
            if m.core.undecided:
                lines.append("undecided (kept): " + ", ".join(m.core.undecided))
        if m.lemmas:
            lines.append("the proof for any number of legs used the lemmas " + ", ".join(m.lemmas))
        lines += [f"files: {v}" for _, v in sorted(m.files.items())]
        lines += [f"ERROR: {e}" for e in m.errors]
        detail[m.rule] = lines
    widths = [max(len(r[i]) for r in rows) for i in range(3)]
    out = [f"margins of {run.checked.name} ({run.checked.path})"]
    for r in rows:
        out.append("  ".join(x.ljust(w) for x, w in zip(r[:3], widths)) + "  " + r[3])
        out += [" " * 4 + line for line in detail.get(r[0], [])]
    out += ["", "A margin is a property of the stated model, like a verdict. " + CAUTION]
    return "\n".join(out)
