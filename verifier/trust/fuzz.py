"""Fuzzing the front half of the tool: generated and mutated rule files and expressions.

Every input is a pack file. It is read (``read_pack``: TOML, keys, expression grammar), checked
(``check_pack``: names, types, units, linearity, observability) and, when it loads, checked
against the solver with a small bound and budget. Each input must end in a clean error
(:class:`~verifier.errors.PackError` whose diagnostics render) or a verdict: never an uncaught
exception, never longer than a time bound, never a file written (the run happens in an empty
sandbox directory with counterexample files switched on, and the sandbox must only ever hold
the input file and the counterexample files of reported violations).

Inputs are drawn from a seeded ``random.Random``, so a run is reproducible from its seed. Kinds:

- ``expr``: a pack around generated well-typed rule expressions (to reach the solver); one in
  four is a two-group pack with an information item (DESIGN 4.8, 4.9), whose expressions also
  name ``g2.*`` and ``info.ID.*``;
- ``mistyped``: generated expressions made ill-typed while staying well-formed (a name of
  another type, a unit dropped, a Bool added to a length, an unknown parameter, a design
  formula reading the hidden truth);
- ``expr-mutated``: the same with the expression text broken (truncated, operators swapped,
  brackets dropped, characters or unicode inserted, names misspelt);
- ``pack-mutated``: a catalogue pack with lines deleted, duplicated or swapped, values given the
  wrong type, huge or negative numbers, unicode, or truncated;
- ``deep``: deep nesting (brackets, ``not``, unary minus, if-then-else, quantifiers);
- ``huge``: numbers with hundreds of digits, tiny and enormous lengths;
- ``bytes``: random bytes, often not UTF-8.
"""

from __future__ import annotations

import os
import random
import signal
import tempfile
import time
from pathlib import Path

import attrs

from verifier.api import CheckOptions, check_packs
from verifier.check import typer
from verifier.errors import PackError
from verifier.lang.pack import read_pack
from verifier.lang.vocab import GLOBAL, INFO_FIELDS, LEG, names_for
from verifier.run.loader import nothing_to_check
from verifier.smt.concrete import violation_status

KINDS = (("expr", 4), ("mistyped", 14), ("expr-mutated", 26), ("pack-mutated", 42), ("deep", 5),
         ("huge", 4), ("bytes", 5))
FULL_ENGINE_EVERY = 100     # one input in this many, if it loads, goes through the whole engine
STAGES = ("toml-or-structure", "type-checker", "solver")


# ---- generated expressions --------------------------------------------------------------------

ITEM_ID = "mark"          # the information item of a generated two-group pack
_BY_TYPE: dict = {g: {} for g in range(1, 9)}   # groups -> type -> names (a route: 3..8, DESIGN 4.10)
for _g in _BY_TYPE:
    for _n in names_for(_g):
        _BY_TYPE[_g].setdefault(GLOBAL[_n].ty, []).append(_n)
    for _f, (_ty, *_rest) in (INFO_FIELDS.items() if _g >= 2 else ()):
        _BY_TYPE[_g].setdefault(_ty, []).append(f"info.{ITEM_ID}.{_f}")
_LEG_BY_TYPE: dict = {}
for _n, _e in LEG.items():
    _LEG_BY_TYPE.setdefault(_e.ty, []).append(_n)
_LENGTHS = ["0 m", "1 m", "12.5 m", "30 cm", "2 km", "5 mm", "0.1 m", "3276.65 m", "400 m"]
_STEPS = ["10 cm", "1 m", "10 m", "0.5 m", "3 cm"]


class ExprGen:
    """Random typed expressions of the rule language (DESIGN 3.1)."""

    def __init__(self, rnd: random.Random, depth: int = 4, groups: int = 1):
        self.r = rnd
        self.depth = depth
        self.groups = groups

    def pick(self, xs):
        return xs[self.r.randrange(len(xs))]

    def name(self, ty: str, leg: str | None) -> str:
        if leg and ty in _LEG_BY_TYPE and self.r.random() < 0.6:
            return f"{leg}.{self.pick(_LEG_BY_TYPE[ty])}"
        if ty in _LEG_BY_TYPE and self.r.random() < 0.1:
            return f"legs[{self.r.randint(1, 3)}].{self.pick(_LEG_BY_TYPE[ty])}"
        return self.pick(_BY_TYPE[self.groups][ty])

    def boolean(self, d: int = 0, leg: str | None = None) -> str:
        r = self.r.random()
        if d >= self.depth or r < 0.15:
            return self.pick([self.compare("Length", d + 1, leg), self.name("Bool", leg),
                              f"{self.direction(d + 1, leg)} == {self.pick(['nominal', 'reverse', 'unknown'])}",
                              self.compare("Count", d + 1, leg)])
        if r < 0.35:
            return self.compare(self.pick(["Length", "Length", "Count", "Direction"]), d + 1, leg)
        if r < 0.5:
            return f"{self.boolean(d + 1, leg)} {self.pick(['and', 'or', 'implies'])} {self.boolean(d + 1, leg)}"
        if r < 0.58:
            return f"not ({self.boolean(d + 1, leg)})"
        if r < 0.68 and leg is None:
            v = self.pick(["l", "leg", "x"])
            return f"{self.pick(['all', 'any'])}({v} in legs: {self.boolean(d + 1, v)})"
        if r < 0.75:
            return f"(if {self.boolean(d + 1, leg)} then {self.boolean(d + 1, leg)} else {self.boolean(d + 1, leg)})"
        if r < 0.82:
            return f"{self.running(leg)} == {self.pick(['forward', 'backward'])}"
        return self.compare("Length", d + 1, leg)

    def running(self, leg):
        return f"{leg}.running" if leg and self.r.random() < 0.5 else "passage.running"

    def compare(self, ty: str, d: int, leg) -> str:
        if ty == "Direction":
            return f"{self.direction(d, leg)} {self.pick(['==', '!='])} {self.direction(d, leg)}"
        term = self.length if ty == "Length" else self.count
        ops = ["==", "!=", "<", "<=", ">", ">="]
        if self.r.random() < 0.15:
            return f"{term(d, leg)} {self.pick(ops[2:4])} {term(d, leg)} {self.pick(ops[2:4])} {term(d, leg)}"
        return f"{term(d, leg)} {self.pick(ops)} {term(d, leg)}"

    def length(self, d: int = 0, leg=None) -> str:
        r = self.r.random()
        if d >= self.depth or r < 0.35:
            return self.pick([self.name("Length", leg), self.pick(_LENGTHS), self.name("Length", leg)])
        if r < 0.5:
            return f"({self.length(d + 1, leg)} {self.pick(['+', '-'])} {self.length(d + 1, leg)})"
        if r < 0.58:
            return f"{self.pick(['2', '0.5', '3', '5 %'])} * {self.length(d + 1, leg)}"
        if r < 0.62:
            return f"{self.length(d + 1, leg)} / {self.pick(['2', '4', '10'])}"
        if r < 0.7:
            return f"{self.pick(['abs', '-'])}({self.length(d + 1, leg)})"
        if r < 0.76:
            return f"{self.pick(['min', 'max'])}({self.length(d + 1, leg)}, {self.length(d + 1, leg)})"
        if r < 0.84:
            return f"{self.pick(['floor_to', 'ceil_to', 'round_to'])}({self.length(d + 1, leg)}, {self.pick(_STEPS)})"
        if r < 0.9:
            return f"along({self.direction(d + 1, leg)}, {self.length(d + 1, leg)})"
        if r < 0.95 and leg is None:
            return f"sum(l in legs: {self.pick(['l.odometer', 'l.distance', 'l.est_front'])})"
        return f"(if {self.boolean(d + 1, leg)} then {self.length(d + 1, leg)} else {self.length(d + 1, leg)})"

    def count(self, d: int = 0, leg=None) -> str:
        r = self.r.random()
        if d >= self.depth or r < 0.5:
            return self.pick([self.name("Count", leg), str(self.r.randint(0, 9)), "legs.count"])
        if r < 0.7 and leg is None:
            return f"count(l in legs: {self.boolean(d + 1, 'l')})"
        return f"({self.count(d + 1, leg)} + {self.count(d + 1, leg)})"

    def direction(self, d: int = 0, leg=None) -> str:
        r = self.r.random()
        if d >= self.depth or r < 0.6:
            return self.pick([self.name("Direction", leg), self.pick(["nominal", "reverse", "unknown"])])
        if r < 0.8:
            return f"flip({self.direction(d + 1, leg)})"
        return f"side({self.length(d + 1, leg)})"


def _toml_str(text: str) -> str:
    return '"' + text.replace("\\", "\\\\").replace('"', '\\"') + '"'


def _pack_around(rnd: random.Random, rules: list[tuple[str | None, str]], groups: int = 1) -> str:
    legs = rnd.choice([0, 1, 1, 2])
    lines = ["[pack]", 'name = "fuzz"', 'title = "generated"', f"legs = {legs}", ""]
    if groups == 2:
        lines += ["[world]", "groups = 2", 'g2_distance = ["100 m", "600 m"]',
                  f"g2_orientation = {_toml_str(rnd.choice(['same', 'opposite', 'any']))}", "",
                  "[[info]]", f'id = "{ITEM_ID}"', f"group = {rnd.choice([1, 2])}",
                  f"at = {_toml_str(rnd.choice(['0 m', '150 m', '1 km']))}",
                  f"valid = {_toml_str(rnd.choice(['nominal', 'reverse', 'both']))}", ""]
    elif groups >= 3:
        lines += _route_world(rnd, groups)
    if rnd.random() < 0.2:
        lines += ["[onboard]", f"q_scale = {_toml_str(rnd.choice(['10 cm', '1 m', '10 m', 'auto']))}",
                  f"rounding = {_toml_str(rnd.choice(['widen', 'nearest', 'down']))}", ""]
    for i, (given, expect) in enumerate(rules):
        lines += ["[[rule]]", f'id = "r{i}"', f'title = "rule {i}"']
        if given is not None:
            lines.append(f"given = {_toml_str(given)}")
        lines += [f"expect = {_toml_str(expect)}", ""]
    return "\n".join(lines)


def _route_world(rnd: random.Random, groups: int) -> list[str]:
    """The [world], [[group]] and [[info]] lines of a route of ``groups`` groups (DESIGN 4.10):
    a list of LRBGs mostly shorter than the route, an item of any group. Not drawn by
    :func:`inputs` yet (the encoding of routes is checked on its own first); the generator and
    the pack text are ready for it."""
    lines = ["[world]", f"groups = {groups}", f"history = {rnd.choice([2, groups - 1, 8])}",
             'g2_distance = ["100 m", "600 m"]', 'leg_distance = ["0 m", "800 m"]', ""]
    for k in range(3, groups + 1):
        distance = rnd.choice(['"200 m"', '["100 m", "500 m"]'])
        lines += ["[[group]]", f"number = {k}", f"distance = {distance}",
                  f"orientation = {_toml_str(rnd.choice(['same', 'opposite', 'any']))}", ""]
    lines += ["[[info]]", f'id = "{ITEM_ID}"', f"group = {rnd.randint(1, groups)}",
              f"at = {_toml_str(rnd.choice(['0 m', '150 m', '1 km']))}",
              f"valid = {_toml_str(rnd.choice(['nominal', 'reverse', 'both']))}", ""]
    return lines


# ---- text mutations -----------------------------------------------------------------------------

_UNICODE = ["é", "ß", "Ω", "→", "≤", "≥", "\u200b", "🚆", "\u0000", "\ufeff", "𝑥", "ｍ", "\u202e"]
_SWAPS = [("and", "or"), ("<=", ">="), ("==", "="), ("+", "*"), ("(", ""), (")", ""), ("m", "mm"),
          ("legs", "leg"), (".", ".."), (",", ""), ("true", "True"), ("not", "!"), ("in", "of")]


def mutate_text(rnd: random.Random, text: str, times: int = 1) -> str:
    for _ in range(times):
        if not text:
            return rnd.choice(_UNICODE)
        i = rnd.randrange(len(text) + 1)
        op = rnd.randrange(8)
        if op == 0:
            text = text[:i]                                          # truncation
        elif op == 1:
            j = min(len(text), i + rnd.randint(1, 6))
            text = text[:i] + text[j:]                               # deletion
        elif op == 2:
            text = text[:i] + rnd.choice(_UNICODE) + text[i:]        # unicode
        elif op == 3:
            a, b = rnd.choice(_SWAPS)
            text = text.replace(a, b, 1) if rnd.random() < 0.7 else text.replace(a, b)
        elif op == 4:
            text = text[:i] + rnd.choice("()[]{}.,:;=<>!+-*/\"'#\\ \t\n0123456789") + text[i:]
        elif op == 5:
            j = min(len(text), i + rnd.randint(1, 20))
            text = text[:i] + text[i:j] * 2 + text[j:]               # duplication
        elif op == 6:
            text = text[:i] + rnd.choice(["9" * rnd.randint(20, 400), "0." + "0" * 300 + "1",
                                          "1e999", "-0", "NaN", "inf"]) + text[i:]
        else:
            text = text[:i] + rnd.choice(["legs[0]", "legs[99]", "params.nope", "world.x.y",
                                          "lrbg.rea", "actual.frnt", "foo(", "all(l in x: true)"]) + text[i:]
    return text


_WRONG_VALUES = ['3', '"3"', '3.5', '-1', '1000', 'true', '[]', '["a", "b"]', '{ a = 1 }',
                 '"\u00e9\u00e9"', '99999999999999999999999999', '"1e400 m"', '"-5 m"', '""',
                 '"5 m"', '[1, 2]', '["1 m", "0 m"]', '["0 m", "99999999 km"]', '0', '"auto"',
                 '"nl-name\\n"', '"Kestrel\\u001b[2J"']


def mutate_pack(rnd: random.Random, text: str) -> str:
    lines = text.split("\n")
    for _ in range(rnd.randint(1, 3)):
        if not lines:
            break
        i = rnd.randrange(len(lines))
        op = rnd.randrange(7)
        if op == 0:
            del lines[i]
        elif op == 1:
            lines.insert(i, lines[rnd.randrange(len(lines))])
        elif op == 2:
            j = rnd.randrange(len(lines))
            lines[i], lines[j] = lines[j], lines[i]
        elif op == 3 and "=" in lines[i]:
            key = lines[i].split("=", 1)[0]
            lines[i] = f"{key}= {rnd.choice(_WRONG_VALUES)}"
        elif op == 4 and "=" in lines[i]:
            key, value = lines[i].split("=", 1)
            lines[i] = key + "=" + mutate_text(rnd, value, rnd.randint(1, 2))
        elif op == 5:
            lines[i] = mutate_text(rnd, lines[i])
        else:
            k = rnd.randrange(len(text) + 1)
            return text[:k]
    return "\n".join(lines)


_MISTYPES = [("train.length", "lrbg.linked"), ("est.front", "passage.seen"), (" m", ""),
             ("legs.count", "train.antenna"), ("nominal", "forward"), ("forward", "nominal"),
             ("est.d_lrbg", "report.code.d_lrbg"), ("==", "<"), ("lrbg.read", "lrbg.locacc")]


def mistype(rnd: random.Random, gen: ExprGen) -> str:
    e = gen.boolean()
    how = rnd.randrange(6)
    if how == 0:
        hits = [(a, b) for a, b in _MISTYPES if a in e]
        if hits:
            a, b = rnd.choice(hits)
            return _pack_around(rnd, [(None, e.replace(a, b, 1))])
    if how == 1:
        return _pack_around(rnd, [(None, f"({e}) + 1 m > 0 m")])
    if how == 2:
        return _pack_around(rnd, [(None, f"{e} and params.{rnd.choice(['missing', 'x', 'platfrom'])} > 0 m")])
    if how == 3:
        hidden = rnd.choice(["actual.front", "lrbg.offset", "passage.direction", "legs[1].distance"])
        out = rnd.choice(["d_lrbg", "l_doubtover", "q_dlrbg"])
        value = {"d_lrbg": f"abs({hidden})", "l_doubtover": f"abs({hidden}) + 1 m",
                 "q_dlrbg": f"side({hidden})"}[out]
        if hidden == "passage.direction":
            value = "passage.direction" if out == "q_dlrbg" else "abs(est.front)"
        return _pack_around(rnd, [(None, e)]).replace("[[rule]]", f"[onboard]\n{out} = {_toml_str(value)}\n\n[[rule]]", 1)
    if how == 4:
        return _pack_around(rnd, [(None, f"{gen.length()} * {gen.length()} > 0 m")])
    return _pack_around(rnd, [(None, f"{gen.length()} == {gen.count()} and {e}")])


def deep(rnd: random.Random) -> str:
    n = rnd.choice([10, 40, 63, 64, 65, 100, 500, 3000])
    kind = rnd.randrange(5)
    if kind == 0:
        e = "(" * n + "legs.count >= 0" + ")" * n
    elif kind == 1:
        e = "not " * n + "true"
    elif kind == 2:
        e = "-" * n + "train.length > 0 m"
    elif kind == 3:
        e = "if true then " * n + "true" + " else false" * n
    else:
        e = "all(l in legs: " * min(n, 80) + "true" + ")" * min(n, 80)
    return _pack_around(rnd, [(None, e)])


def huge(rnd: random.Random) -> str:
    digits = "9" * rnd.choice([20, 100, 400, 5000])
    e = rnd.choice([f"train.length <= {digits} m", f"est.d_lrbg < 0.{'0' * 300}1 m",
                    f"legs.count < {digits}", f"round_to(est.front, 0.{'0' * 50}1 m) == est.front",
                    f"train.length * {digits} >= 0 m", f"est.front / {digits} <= 1 m",
                    f"lrbg.locacc == {digits} m", f"floor_to(est.front, {digits} km) <= est.front"])
    return _pack_around(rnd, [(None, e)]) if rnd.random() < 0.7 else (
        _pack_around(rnd, [(None, "true")]).replace("legs = ", f"legs = {digits}\n#", 1))


# ---- the inputs -----------------------------------------------------------------------------------

@attrs.frozen
class Input:
    kind: str
    data: bytes


def inputs(seed: int, n: int, corpus: list[str]):
    """``n`` fuzz inputs from ``seed`` (reproducible); ``corpus``: pack texts to mutate."""
    rnd = random.Random(seed)
    kinds = [k for k, w in KINDS for _ in range(w)]
    for _ in range(n):
        kind = rnd.choice(kinds)
        gen = ExprGen(rnd, depth=rnd.choice([1, 2, 3, 4]))
        if kind == "expr":
            gen = ExprGen(rnd, depth=gen.depth, groups=2 if rnd.random() < 0.25 else 1)
            rules = [(gen.boolean() if rnd.random() < 0.5 else None, gen.boolean())
                     for _ in range(rnd.choice([1, 1, 2]))]
            text = _pack_around(rnd, rules, gen.groups)
        elif kind == "mistyped":
            text = mistype(rnd, gen)
        elif kind == "expr-mutated":
            expect = mutate_text(rnd, gen.boolean(), rnd.randint(1, 2))
            text = _pack_around(rnd, [(None, expect)])
        elif kind == "pack-mutated":
            text = mutate_pack(rnd, rnd.choice(corpus)) if corpus else deep(rnd)
        elif kind == "deep":
            text = deep(rnd)
        elif kind == "huge":
            text = huge(rnd)
        else:
            size = rnd.choice([0, 1, 10, 100, 1000])
            raw = bytes(rnd.randrange(256) for _ in range(size))
            if rnd.random() < 0.5 and corpus:
                base = rnd.choice(corpus).encode()
                k = rnd.randrange(len(base) + 1)
                raw = base[:k] + raw + base[k:]
            yield Input(kind, raw)
            continue
        yield Input(kind, text.encode("utf-8", "surrogatepass"))


# ---- running one input ----------------------------------------------------------------------------

@attrs.frozen
class Outcome:
    kind: str
    stage: str            # how far it got: toml-or-structure, type-checker, solver
    result: str           # "error" (clean) | a verdict | "crash" | "hang" | "file written"
    detail: str
    seconds: float


class _Hang(Exception):
    pass


class _Done(Exception):
    pass


def _alarm(signum, frame):
    raise _Hang()


def run_one(inp: Input, sandbox: Path, limit: float = 30.0, solver_timeout: float = 5.0,
            full: bool = True) -> Outcome:
    """Read, check and (if it loads) solve one input inside ``sandbox`` (the working directory
    of the run), with a hard time limit. With ``full`` a loaded pack goes through the whole
    engine (verdict, minimisation, replay, counterexample files); otherwise each rule is
    encoded and asked the violation question once (cheap, still exercises the encoder)."""

    for f in sandbox.iterdir():
        _remove(f)
    path = sandbox / "input.toml"
    path.write_bytes(inp.data)
    stage, t0 = STAGES[0], time.monotonic()
    old = signal.signal(signal.SIGALRM, _alarm)
    signal.setitimer(signal.ITIMER_REAL, limit)
    allowed: set = {path.resolve()}
    try:
        try:
            raw = read_pack(path, "input.toml")
            # syntax errors travel with the raw pack and are raised by the checker, together
            # with its own: the input got past the parser only if there are none
            if not any(d.severity == "error" for d in getattr(raw, "diagnostics", ())):
                stage = STAGES[1]
            pack = typer.check_pack(raw)
            if not pack.rules and not pack.lemmas:     # as `verifier check`: an input error
                raise PackError([nothing_to_check([path], pack.warnings), *pack.warnings])
        except PackError as exc:
            rendered = "\n".join(d.render() for d in exc.diagnostics)
            if not exc.diagnostics or "input.toml:" not in rendered:
                return Outcome(inp.kind, stage, "crash", "a PackError without a diagnostic", time.monotonic() - t0)
            result, detail = "error", exc.diagnostics[0].message[:120]
        else:
            stage = STAGES[2]
            if not full:
                # the first and the last rule, no legs: cheap, and still the whole encoder
                todo = [pack.rules[0], pack.rules[-1]] if pack.rules else []
                answers = {violation_status(pack, r, 0, rlimit=2_000_000, timeout=solver_timeout)
                           for r in dict.fromkeys(todo)}
                result, detail = ",".join(sorted(answers)) or "no rules", "one solver question"
                raise _Done()
            opts = CheckOptions(legs=min(pack.legs, 1), timeout=solver_timeout, rlimit=20_000_000,
                                out=Path("counterexamples"), witness=False)
            results = check_packs([pack], opts)
            verdicts = [r for p in results for r in p.results]
            for r in verdicts:
                if r.counterexample:
                    cex = (sandbox / r.counterexample).resolve()
                    allowed.update({cex, cex.with_suffix(".svg")})
            internal = [r for r in verdicts if r.verdict == "error" and r.kind == "internal"]
            if internal:
                return Outcome(inp.kind, stage, "internal error", internal[0].message[:300],
                               time.monotonic() - t0)
            result = ",".join(sorted({r.verdict for r in verdicts})) or "no rules"
            detail = ""
    except _Done:
        pass
    except _Hang:
        return Outcome(inp.kind, stage, "hang", f"no answer within {limit} s", time.monotonic() - t0)
    except RecursionError as exc:
        return Outcome(inp.kind, stage, "crash", f"RecursionError: {str(exc)[:100]}", time.monotonic() - t0)
    except Exception as exc:  # noqa: BLE001 - this is what the fuzzer looks for
        return Outcome(inp.kind, stage, "crash", f"{type(exc).__name__}: {str(exc)[:200]} {_where(exc)}",
                       time.monotonic() - t0)
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, old)
    written = [p for p in sandbox.rglob("*") if p.is_file() and p.resolve() not in allowed]
    if written:
        return Outcome(inp.kind, stage, "file written", ", ".join(p.relative_to(sandbox).as_posix() for p in written),
                       time.monotonic() - t0)
    return Outcome(inp.kind, stage, result, detail, time.monotonic() - t0)


def _where(exc: BaseException) -> str:
    """The innermost frame of the tool's own code in a traceback: "at verifier/x.py:12 f"."""
    import traceback
    frames = [f for f in traceback.extract_tb(exc.__traceback__) if "/verifier/" in f.filename]
    if not frames:
        return ""
    f = frames[-1]
    return f"at verifier/{f.filename.rsplit('/verifier/', 1)[1]}:{f.lineno} {f.name}"


def _remove(p: Path) -> None:
    if p.is_dir() and not p.is_symlink():
        for q in p.iterdir():
            _remove(q)
        p.rmdir()
    else:
        p.unlink()


# ---- a whole run -------------------------------------------------------------------------------------

@attrs.frozen
class FuzzReport:
    inputs: int
    by_kind: dict         # kind -> {"inputs": n, stage: inputs of that kind that reached it}
    stages: dict          # stage -> inputs that reached it (cumulative: reached at least)
    results: dict         # result -> count
    failures: tuple       # (kind, stage, result, detail, input excerpt)
    slowest: float
    seconds: float
    seed: int

    def share(self, stage: str) -> float:
        return self.stages.get(stage, 0) / self.inputs if self.inputs else 0.0

    def as_json(self) -> dict:
        d = attrs.asdict(self)
        d["shares"] = {s: round(self.share(s), 4) for s in STAGES}
        return d


def _fuzz_worker(job) -> list:
    seed, start, count, corpus, limit = job
    os.environ.setdefault("PYTHONHASHSEED", "0")
    with tempfile.TemporaryDirectory(prefix="verifier-fuzz-") as tmp:
        sandbox = Path(tmp)
        old = os.getcwd()
        os.chdir(sandbox)
        try:
            out = []
            for i, inp in enumerate(inputs(seed, start + count, corpus)):
                if i < start:
                    continue
                o = run_one(inp, sandbox, limit, full=i % FULL_ENGINE_EVERY == 0)
                excerpt = inp.data[:200].decode("utf-8", "replace") if o.result in _BAD else ""
                out.append((o, excerpt))
            return out
        finally:
            os.chdir(old)


_BAD = ("crash", "hang", "file written", "internal error")


def run_fuzz(n: int, seed: int, corpus_paths=(), workers: int = 2, limit: float = 30.0) -> FuzzReport:
    """Feed ``n`` inputs (seeded) through loader and checker in ``workers`` processes."""
    from concurrent.futures import ProcessPoolExecutor
    from multiprocessing import get_context
    t0 = time.monotonic()
    corpus = [Path(p).read_text(encoding="utf-8") for p in corpus_paths]
    # every worker generates the same stream and runs its own slice of it
    per = -(-n // max(1, workers))
    jobs = [(seed, i * per, min(per, n - i * per), corpus, limit) for i in range(workers) if i * per < n]
    if len(jobs) == 1:
        parts = [_fuzz_worker(jobs[0])]
    else:
        with ProcessPoolExecutor(len(jobs), mp_context=get_context("spawn")) as pool:
            parts = list(pool.map(_fuzz_worker, jobs))
    outcomes = [x for part in parts for x in part]
    by_kind, stages, results = {}, dict.fromkeys(STAGES, 0), {}
    failures = []
    for o, excerpt in outcomes:
        k = by_kind.setdefault(o.kind, {"inputs": 0, **dict.fromkeys(STAGES[1:], 0)})
        k["inputs"] += 1
        for s in STAGES[: STAGES.index(o.stage) + 1]:
            stages[s] += 1
            if s in k:
                k[s] += 1
        results[o.result] = results.get(o.result, 0) + 1
        if o.result in _BAD:
            failures.append((o.kind, o.stage, o.result, o.detail, excerpt))
    return FuzzReport(len(outcomes), by_kind, stages, results, tuple(failures),
                      max((o.seconds for o, _ in outcomes), default=0.0), time.monotonic() - t0, seed)
