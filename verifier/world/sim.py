"""The simulator: the reference semantics of the world model (DESIGN 4), step by step, in exact
rational arithmetic. It imports neither z3 nor :mod:`verifier.smt`; the SMT encoding is written
independently, and each is tested against the other.
"""

from __future__ import annotations

import math
from fractions import Fraction

import attrs

from verifier.check.model import Formula, Pack
from verifier.lang import ast
from verifier.world.numbers import fmt
from verifier.world.scope import Scope
from verifier.world.vocab import MAX_CODE, Q_SCALES, UNKNOWN_CODE, Direction, Running

F = Fraction
NOM, REV, UNK = Direction.NOMINAL, Direction.REVERSE, Direction.UNKNOWN
FWD, BWD = Running.FORWARD, Running.BACKWARD
STEPS = (("10 cm", F(1, 10)), ("1 m", F(1)), ("10 m", F(10)))


@attrs.frozen
class Leg:
    cab_change: bool = False
    running: Running = FWD
    distance: Fraction = F(0)
    odometer: Fraction = F(0)


@attrs.frozen
class World:
    """The inputs of DESIGN 4.1: one configuration of group, train, passage and legs."""

    balises: int = 2
    read: int = 2
    linked: bool = False
    locacc: Fraction = F(0)
    offset: Fraction = F(0)
    length: Fraction = F(100)
    antenna: Fraction = F(2)
    direction: Direction = NOM
    running: Running = FWD
    detect_error: Fraction = F(0)
    legs: tuple = ()


def sign(d: Direction) -> int:
    return -1 if d is REV else 1


def direction_of(s: int) -> Direction:
    return NOM if s > 0 else REV


def floor_to(x: Fraction, step: Fraction) -> Fraction:
    return math.floor(x / step) * step


def ceil_to(x: Fraction, step: Fraction) -> Fraction:
    return math.ceil(x / step) * step


def round_to(x: Fraction, step: Fraction) -> Fraction:
    """Nearest step, ties up: floor(x/step + 1/2) * step (DESIGN 3.1)."""
    return math.floor(x / step + F(1, 2)) * step


def _m(x) -> str:
    return f"{fmt(x)} m"


def scope_problems(world: World, scope: Scope, bound: int) -> list[str]:
    """Why ``world`` is outside the scope (an empty list when it is inside)."""
    out = []
    lo, hi = scope.balises
    if not lo <= world.balises <= hi:
        out.append(f"lrbg.balises {world.balises} outside {lo}..{hi}")
    if not 1 <= world.read <= world.balises:
        out.append(f"lrbg.read {world.read} outside 1..lrbg.balises")
    if world.locacc.denominator != 1 or not scope.locacc[0] <= world.locacc <= scope.locacc[1]:
        out.append(f"lrbg.locacc {world.locacc} m not a whole metre in {scope.locacc[0]}..{scope.locacc[1]} m")
    if abs(world.offset) > world.locacc:
        out.append(f"|lrbg.offset| {abs(world.offset)} m above lrbg.locacc")
    for name, value, rng in (("train.length", world.length, scope.train_length),
                             ("train.antenna", world.antenna, scope.antenna)):
        if not rng[0] <= value <= rng[1]:
            out.append(f"{name} {value} m outside {rng[0]}..{rng[1]} m")
    if world.antenna > world.length:
        out.append("train.antenna is longer than the train")
    if world.direction is UNK:
        out.append("passage.direction must be nominal or reverse")
    if abs(world.detect_error) > scope.detection:
        out.append(f"|passage.detect_error| above world.detection {scope.detection} m")
    if len(world.legs) > bound:
        out.append(f"{len(world.legs)} legs, above the bound {bound}")
    for i, leg in enumerate(world.legs, 1):
        if not scope.leg_distance[0] <= leg.distance <= scope.leg_distance[1]:
            out.append(f"legs[{i}].distance {leg.distance} m outside the scope")
        if leg.odometer < 0:
            out.append(f"legs[{i}].odometer is negative")
    # the prefix-closed reading error bound (DESIGN 4.1)
    d = world.detect_error
    over, under, measured = max(F(0), -d), max(F(0), d), F(0)
    for j in range(len(world.legs) + 1):
        if j:
            leg = world.legs[j - 1]
            over += max(F(0), leg.odometer - leg.distance)
            under += max(F(0), leg.distance - leg.odometer)
            measured += leg.odometer if scope.odometry_basis == "measured" else leg.distance
        if over > scope.odometry_over.at(measured):
            out.append(f"over-reading {_m(over)} after {j} legs exceeds the bound {_m(scope.odometry_over.at(measured))}")
        if under > scope.odometry_under.at(measured):
            out.append(f"under-reading {_m(under)} after {j} legs exceeds the bound {_m(scope.odometry_under.at(measured))}")
    return out


class State:
    """Every vocabulary value of one world under one pack, computed on demand and memoised."""

    def __init__(self, pack: Pack, world: World):
        self.pack = pack
        self.world = world
        self.values: dict = {}
        self.legs: list[dict] = []
        self._memo: dict = {}
        self._physics()

    # ---- the real world and the estimate, step by step (DESIGN 4.2, 4.3) ------------
    def _physics(self) -> None:
        w, v = self.world, self.values
        s = sign(w.direction)
        o = s if w.running is FWD else -s
        front = w.offset + s * w.detect_error + o * w.antenna
        known = w.read >= 2 or w.linked
        seen = w.direction if known else UNK
        # the estimate in the passage frame (positive = the way the train moved over the group)
        op = 1 if w.running is FWD else -1
        est_p = op * w.antenna
        frame = s if known else 1     # passage frame -> frame of est.front
        v["passage.actual_front"], v["passage.est_front"] = front, frame * est_p
        motion = s
        travelled = measured = F(0)
        cab_changes = 0
        for i, leg in enumerate(w.legs, 1):
            if leg.cab_change:
                front -= o * w.length
                o = -o
                est_p -= op * w.length
                op = -op
                cab_changes += 1
            m = o if leg.running is FWD else -o
            mp = op if leg.running is FWD else -op
            front += m * leg.distance
            est_p += mp * leg.odometer
            travelled += leg.distance
            measured += leg.odometer
            motion = m
            self.legs.append({
                "index": F(i), "cab_change": leg.cab_change, "running": leg.running,
                "distance": leg.distance, "odometer": leg.odometer,
                "orientation": direction_of(o) if known else UNK,
                "motion": direction_of(m) if known else UNK,
                "actual_orientation": direction_of(o), "actual_motion": direction_of(m),
                "actual_front": front, "est_front": frame * est_p,
            })
        scope = self.pack.scope
        v.update({
            "lrbg.balises": F(w.balises), "lrbg.read": F(w.read), "lrbg.linked": w.linked,
            "lrbg.locacc": w.locacc, "lrbg.offset": w.offset,
            "train.length": w.length, "train.antenna": w.antenna,
            "passage.direction": w.direction, "passage.running": w.running,
            "passage.detect_error": w.detect_error, "passage.seen": seen,
            "legs.count": F(len(w.legs)), "cab_changes": F(cab_changes),
            "actual.front": front, "actual.rear": front - o * w.length,
            "actual.orientation": direction_of(o), "actual.motion": direction_of(motion),
            "actual.travelled": travelled,
            "est.front_passage": est_p, "est.front": frame * est_p,
            "est.rear": frame * (est_p - op * w.length),
            "est.orientation": direction_of(o) if known else UNK,
            "est.motion": direction_of(motion) if known else UNK,
            "est.travelled": measured,
            "est.bound_over": scope.odometry_over.at(measured),
            "est.bound_under": scope.odometry_under.at(measured),
        })

    # ---- the position report on the wire (DESIGN 4.4) --------------------------------
    def _rounded(self, step: Fraction) -> tuple:
        d = self.get("est.d_lrbg")
        over = self.get("est.l_doubtover")
        under = self.get("est.l_doubtunder")
        mode = self.pack.rounding
        if mode == "nearest":
            return round_to(d, step), round_to(over, step), round_to(under, step)
        if mode == "down":
            return floor_to(d, step), floor_to(over, step), floor_to(under, step)
        rd = round_to(d, step)
        widen = abs(rd - d)
        return rd, ceil_to(over + widen, step), ceil_to(under + widen, step)

    def _wire(self) -> None:
        v = self.values
        if self.pack.q_scale == "auto":
            chosen = STEPS[-1]
            for name, step in STEPS:
                codes = [x / step for x in self._rounded(step)]
                if all(0 <= c <= MAX_CODE for c in codes):
                    chosen = (name, step)
                    break
        else:
            chosen = (self.pack.q_scale, dict(STEPS)[self.pack.q_scale])
        name, step = chosen
        rounded = self._rounded(step)
        known = v["passage.seen"] is not UNK
        codes = []
        for x in rounded:
            c = x / step
            codes.append(c if known and 0 <= c <= MAX_CODE else F(UNKNOWN_CODE))
        quals = [self.get(f"est.{q}") if known else UNK for q in ("q_dlrbg", "q_dirlrbg", "q_dirtrain")]
        for q, val in zip(("q_dlrbg", "q_dirlrbg", "q_dirtrain"), quals):
            v[f"report.{q}"] = val
            v[f"report.code.{q}"] = F(val.value)
        for k, x, c in zip(("d_lrbg", "l_doubtover", "l_doubtunder"), rounded, codes):
            v[f"report.{k}"] = x
            v[f"report.code.{k}"] = c
            v[f"rbc.{k}"] = c * step
        v["report.q_scale"] = step
        v["report.code.q_scale"] = F(Q_SCALES[name])
        v["report.in_range"] = all(c <= MAX_CODE for c in codes)
        v["rbc.placed"] = v["report.in_range"] and all(q is not UNK for q in quals)

    # ---- names ------------------------------------------------------------------------
    def get(self, name: str):
        if name in self.values:
            return self.values[name]
        if name.startswith("est.") and name[4:] in self.pack.onboard:
            value = self.formula(("onboard", name[4:]))
        elif name.startswith("rbc.") and name[4:] in self.pack.trackside:
            value = self.formula(("trackside", name[4:]))
        elif name.startswith(("report.", "rbc.")):
            self._wire()
            return self.values[name]
        else:
            raise KeyError(name)
        self.values[name] = value
        return value

    def formula(self, dep: tuple):
        if dep not in self._memo:
            self._memo[dep] = None  # cycles are excluded by the checker
            self._memo[dep] = evaluate(self.pack.definition(dep).node, self, {})
        return self._memo[dep]

    def leg(self, index: int) -> dict:
        return self.legs[index - 1]


def evaluate(node: ast.Node, st: State, env: dict):
    """The value of a typed expression in a state; ``env`` binds quantifier variables to
    leg numbers."""
    if isinstance(node, ast.Num):
        return node.value
    if isinstance(node, ast.BoolLit):
        return node.value
    if isinstance(node, ast.Name):
        kind = node.ref[0]
        if kind == "var":
            return st.get(node.ref[1])
        if kind == "num" or kind == "const":
            return node.ref[1]
        if kind == "let":
            return st.formula(("let", node.ref[1]))
        if kind == "leg":
            return st.leg(env[node.ref[1]])[node.ref[2]]
        if kind == "legat":
            i = node.ref[1]
            if i > len(st.legs):
                raise IndexError(f"legs[{i}] read in a world with {len(st.legs)} legs")
            return st.leg(i)[node.ref[2]]
        raise AssertionError(node.ref)
    if isinstance(node, ast.Unary):
        x = evaluate(node.operand, st, env)
        return (not x) if node.op == "not" else -x
    if isinstance(node, ast.Binary):
        op = node.op
        if op == "and":
            return evaluate(node.left, st, env) and evaluate(node.right, st, env)
        if op == "or":
            return evaluate(node.left, st, env) or evaluate(node.right, st, env)
        if op == "implies":
            return (not evaluate(node.left, st, env)) or evaluate(node.right, st, env)
        a, b = evaluate(node.left, st, env), evaluate(node.right, st, env)
        if op == "+":
            return a + b
        if op == "-":
            return a - b
        if op == "*":
            return a * b
        return F(a) / b
    if isinstance(node, ast.Chain):
        vals = [evaluate(o, st, env) for o in node.operands]
        return all(compare(op, a, b) for op, a, b in zip(node.ops, vals, vals[1:]))
    if isinstance(node, ast.IfThen):
        if evaluate(node.cond, st, env):
            return evaluate(node.then, st, env)
        return evaluate(node.orelse, st, env)
    if isinstance(node, ast.Call):
        args = [evaluate(a, st, env) for a in node.args]
        f = node.func
        if f == "abs":
            return abs(args[0])
        if f == "min":
            return min(args)
        if f == "max":
            return max(args)
        if f == "flip":
            return {NOM: REV, REV: NOM, UNK: UNK}[args[0]]
        if f == "side":
            return NOM if args[0] >= 0 else REV
        if f == "along":
            return -args[1] if args[0] is REV else args[1]
        return {"floor_to": floor_to, "ceil_to": ceil_to, "round_to": round_to}[f](F(args[0]), F(args[1]))
    if isinstance(node, ast.Quant):
        results = []
        for i in range(1, len(st.legs) + 1):
            results.append(evaluate(node.body, st, {**env, node.var: i}))
        if node.kind == "all":
            return all(results)
        if node.kind == "any":
            return any(results)
        if node.kind == "count":
            return F(sum(1 for r in results if r))
        return sum(results, F(0))
    raise AssertionError(type(node))


def compare(op: str, a, b) -> bool:
    return bool(ast.COMPARISONS[op](a, b))


def applies(rule, st: State) -> bool:
    """Whether a rule's given (with its implicit premise on legs[i]) holds in a state."""
    if rule.premise_legs > len(st.legs):
        return False
    return rule.given is None or bool(evaluate(rule.given.node, st, {}))


def holds(rule, st: State) -> bool:
    """The rule as an implication in this state: not applicable, or expect true."""
    return (not applies(rule, st)) or bool(evaluate(rule.expect.node, st, {}))


def formula_value(formula: Formula, st: State):
    return evaluate(formula.node, st, {})
