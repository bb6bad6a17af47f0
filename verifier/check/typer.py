"""Name resolution, types and units, linearity and observability (DESIGN 3.1 and 5).

``check_pack(raw)`` turns a :class:`~verifier.lang.pack.RawPack` into a typed
:class:`~verifier.check.model.Pack`, or raises one PackError listing every problem.

Resolved names carry a ``ref``:

- ``("var", "lrbg.read")``           a vocabulary name (DESIGN 4)
- ``("leg", "l", "odometer")``       a field of a quantifier's leg variable
- ``("legat", 2, "odometer")``       a field of ``legs[2]``
- ``("num", Fraction)``              a constant: ``params.X`` or ``world.X``
- ``("const", Direction|Running)``   ``nominal``, ``forward``, ...
- ``("let", "name")``                a ``[let]`` definition
"""

from __future__ import annotations

import re
from fractions import Fraction

import attrs

from verifier.check.model import Formula, Pack, Rule
from verifier.errors import Diagnostic, PackError, suggest
from verifier.lang import ast, vocab
from verifier.lang.ast import BOOL, COUNT, DIRECTION, LENGTH, NUMBER, NUMERIC, ZERO
from verifier.lang.numbers import counted
from verifier.lang.pack import RawExpr, RawPack

FUNCTIONS = ("abs", "min", "max", "flip", "side", "along", "floor_to", "ceil_to", "round_to")


class _Fail(Exception):
    """One type error; the message is already recorded."""


def _show(ty: str) -> str:
    return "a number" if ty == ZERO else ty


@attrs.define
class _Env:
    pack: RawPack
    key: tuple
    what: str
    readers: str | None
    params: dict
    world: dict
    diags: list
    qvars: tuple = ()
    item: bool = False            # an [onboard] info_* formula: item.* names the item (DESIGN 4.9)
    deps: set = attrs.Factory(set)
    reads: dict = attrs.Factory(dict)      # vocabulary name -> (offset, length) of first read
    max_leg: int = 0
    let_types: dict = attrs.Factory(dict)

    def error(self, node: ast.Node, message: str) -> _Fail:
        self.diags.append(self.pack.source.at_key(
            self.key, f"{self.what}: {message}", offset=node.start,
            length=max(1, node.end - node.start)))
        return _Fail(message)


# ---- constants -----------------------------------------------------------------------

def const_value(node: ast.Node) -> Fraction | None:
    """The value of a constant numeric sub-expression (literals, params, world), else None.

    Used only to decide linearity and to reject division by zero; each evaluator computes
    values on its own.
    """
    if isinstance(node, ast.Num):
        return node.value
    if isinstance(node, ast.Name) and node.ref and node.ref[0] == "num":
        return node.ref[1]
    if isinstance(node, ast.Unary) and node.op == "-":
        v = const_value(node.operand)
        return None if v is None else -v
    if isinstance(node, ast.Binary) and node.op in "+-*/":
        a, b = const_value(node.left), const_value(node.right)
        if a is None or b is None:
            return None
        if node.op == "+":
            return a + b
        if node.op == "-":
            return a - b
        if node.op == "*":
            return a * b
        return None if b == 0 else a / b
    if isinstance(node, ast.Call) and node.func in ("abs", "min", "max"):
        vals = [const_value(a) for a in node.args]
        if any(v is None for v in vals) or not vals:
            return None
        return {"abs": lambda v: abs(v[0]), "min": min, "max": max}[node.func](vals)
    return None


# ---- typing --------------------------------------------------------------------------

def _num_type(node: ast.Num) -> str:
    if node.unit == "m":
        return LENGTH
    if node.unit == "%":
        return NUMBER
    if node.value == 0:
        return ZERO
    return COUNT if node.value.denominator == 1 else NUMBER


def _unify(env: _Env, node: ast.Node, a: str, b: str, verb: str) -> str:
    if a not in NUMERIC or b not in NUMERIC:
        raise env.error(node, f"cannot {verb} {_show(a)} and {_show(b)}")
    if a == ZERO:
        return b
    if b == ZERO:
        return a
    if a == b:
        return a
    if {a, b} == {COUNT, NUMBER}:
        return NUMBER
    hint = ""
    if LENGTH in (a, b):
        hint = " (a length needs a unit, such as '5 m')"
    raise env.error(node, f"cannot {verb} {_show(a)} and {_show(b)}{hint}")


def _typed(node: ast.Node, ty: str, **changes) -> ast.Node:
    return attrs.evolve(node, ty=ty, **changes)


def _resolve_name(env: _Env, node: ast.Name) -> ast.Node:
    parts = node.parts
    dotted = node.dotted
    first = parts[0]
    # quantifier variable
    if isinstance(first, str) and first in env.qvars:
        if len(parts) != 2 or not isinstance(parts[1], str):
            raise env.error(node, f"write '{first}.FIELD', a field of the leg (fields: "
                            + ", ".join(vocab.LEG) + ")")
        field = parts[1]
        if field not in vocab.LEG:
            raise env.error(node, f"legs have no field '{field}'" + suggest(field, vocab.LEG))
        env.reads.setdefault(f"leg.{field}", (node.start, node.end - node.start))
        return _typed(node, vocab.LEG[field].ty, ref=("leg", first, field))
    if first == "legs" and len(parts) >= 2 and isinstance(parts[1], int):
        i = parts[1]
        if i < 1:
            raise env.error(node, "legs are counted from 1: legs[1] is the first")
        if len(parts) != 3 or not isinstance(parts[2], str):
            raise env.error(node, f"write 'legs[{i}].FIELD' (fields: " + ", ".join(vocab.LEG) + ")")
        field = parts[2]
        if field not in vocab.LEG:
            raise env.error(node, f"legs have no field '{field}'" + suggest(field, vocab.LEG))
        env.max_leg = max(env.max_leg, i)
        env.reads.setdefault(f"leg.{field}", (node.start, node.end - node.start))
        return _typed(node, vocab.LEG[field].ty, ref=("legat", i, field))
    if any(isinstance(p, int) for p in parts):
        raise env.error(node, f"only 'legs' can be indexed, not '{dotted}'")
    if len(parts) == 1:
        if first in vocab.CONSTANTS:
            ty, value = vocab.CONSTANTS[first]
            return _typed(node, ty, ref=("const", value))
        if first in env.pack.lets:
            env.deps.add(("let", first))
            return _typed(node, None, ref=("let", first))
    if first == "params":
        pname = dotted[len("params."):]
        if len(parts) == 2 and pname in env.params:
            ty, value = env.params[pname]
            return _typed(node, ty, ref=("num", value))
        raise env.error(node, f"unknown parameter '{dotted}'"
                        + suggest(pname, env.params))
    if dotted in env.world:
        ty, value = env.world[dotted]
        return _typed(node, ty, ref=("num", value))
    if first == "item" and len(parts) == 2 and isinstance(parts[1], str):
        if not env.item:
            raise env.error(node, "item.* names the information item an [onboard] info_accepted "
                            "or info_position formula is evaluated for; elsewhere write info.ID.FIELD")
        if parts[1] not in vocab.ITEM:
            raise env.error(node, f"items have no field '{parts[1]}'" + suggest(parts[1], vocab.ITEM))
        if parts[1] in vocab.ROUTE_ITEM and env.pack.scope.groups < 2:
            raise env.error(node, f"'{dotted}' says what the onboard knows of the item's group in a route: "
                            "set [world] groups to 2 or more")
        env.reads.setdefault(dotted, (node.start, node.end - node.start))
        return _typed(node, vocab.ITEM[parts[1]][0], ref=("item", parts[1]))
    if first == "info" and len(parts) >= 2:
        ids = {i.id: i for i in env.pack.infos}
        if len(parts) != 3 or not all(isinstance(p, str) for p in parts) or parts[1] not in ids:
            raise env.error(node, f"unknown information item in '{dotted}'"
                            + (suggest(str(parts[1]), ids) if ids else " (the pack has no [[info]])"))
        field = parts[2]
        if field not in vocab.INFO_FIELDS:
            raise env.error(node, f"information items have no field '{field}'" + suggest(field, vocab.INFO_FIELDS))
        if field in vocab.ROUTE_ITEM and env.pack.scope.groups < 2:
            raise env.error(node, f"'{dotted}' says what the onboard knows of the item's group in a route: "
                            "set [world] groups to 2 or more")
        ty, _, kind, _ = vocab.INFO_FIELDS[field]
        env.reads.setdefault(f"info.*.{field}", (node.start, node.end - node.start))
        if kind == "onboard-output":
            env.deps.add(("onboard", f"info_{field}"))
        env.deps.update(vocab.INFO_DEPENDS.get(field, ()))
        return _typed(node, ty, ref=("info", parts[1], field))
    if dotted in vocab.GLOBAL and vocab.groups_needed(dotted) > env.pack.scope.groups:
        need = vocab.groups_needed(dotted)
        raise env.error(node, f"'{dotted}' needs a route of {need} groups or more: set [world] groups = {need}"
                        + (" (this pack has one)" if env.pack.scope.groups == 1 else f" (this pack has {env.pack.scope.groups})"))
    if dotted in vocab.GLOBAL:
        entry = vocab.GLOBAL[dotted]
        env.reads.setdefault(dotted, (node.start, node.end - node.start))
        if entry.kind == "onboard-output":
            env.deps.add(("onboard", dotted.split(".", 1)[1]))
        elif entry.kind == "trackside-output":
            env.deps.add(("trackside", dotted.split(".", 1)[1]))
        return _typed(node, entry.ty, ref=("var", dotted))
    choices = (set(vocab.GLOBAL) | set(vocab.CONSTANTS) | set(env.pack.lets) | set(env.world)
               | {f"params.{p}" for p in env.params} | {"legs.count"}
               | {f"{q}.{f}" for q in env.qvars for f in vocab.LEG})
    if first in ("leg", "l") and not env.qvars:
        raise env.error(node, f"unknown name '{dotted}': a leg field is read inside a quantifier "
                        "such as all(leg in legs: ...), or as legs[1].FIELD")
    raise env.error(node, f"unknown name '{dotted}'" + suggest(dotted, choices))


def _check(env: _Env, node: ast.Node) -> ast.Node:
    if isinstance(node, ast.Num):
        return _typed(node, _num_type(node))
    if isinstance(node, ast.BoolLit):
        return _typed(node, BOOL)
    if isinstance(node, ast.Name):
        out = _resolve_name(env, node)
        if out.ref[0] == "let":
            name = out.ref[1]
            if name not in env.let_types:
                raise env.error(node, f"a parameter is a constant: it cannot use let '{name}'")
            if env.let_types[name] is None:
                raise _Fail(name)   # the let's own error is already reported
            return _typed(out, env.let_types[name])
        return out
    if isinstance(node, ast.Unary):
        operand = _check(env, node.operand)
        if node.op == "not":
            if operand.ty != BOOL:
                raise env.error(node.operand, f"'not' needs a Bool, not {_show(operand.ty)}")
            return _typed(node, BOOL, operand=operand)
        if operand.ty not in NUMERIC:
            raise env.error(node.operand, f"cannot negate {_show(operand.ty)}")
        return _typed(node, operand.ty, operand=operand)
    if isinstance(node, ast.Binary):
        left = _check(env, node.left)
        right = _check(env, node.right)
        op = node.op
        if op in ("and", "or", "implies"):
            for side in (left, right):
                if side.ty != BOOL:
                    raise env.error(side, f"'{op}' needs Bool operands, not {_show(side.ty)}")
            return _typed(node, BOOL, left=left, right=right)
        if op in "+-":
            ty = _unify(env, node, left.ty, right.ty, "add" if op == "+" else "subtract")
            return _typed(node, ty, left=left, right=right)
        for side in (left, right):
            if side.ty not in NUMERIC:
                raise env.error(side, f"cannot {'multiply' if op == '*' else 'divide'} {_show(side.ty)}")
        lc, rc = const_value(left), const_value(right)
        if op == "*":
            if lc is None and rc is None:
                raise env.error(node, "multiplication needs a constant on one side "
                                "(a product of two unknowns is not linear)")
            a, b = left.ty, right.ty
            if a == LENGTH and b == LENGTH:
                raise env.error(node, "cannot multiply two lengths (an area is not a type here)")
            if ZERO in (a, b):
                ty = b if a == ZERO else a
            elif LENGTH in (a, b):
                ty = LENGTH
            elif a == b == COUNT:
                ty = COUNT
            else:
                ty = NUMBER
            return _typed(node, ty, left=left, right=right)
        # division
        if rc is None:
            raise env.error(node.right, "division needs a constant divisor (the logic stays linear)")
        if rc == 0:
            raise env.error(node.right, "division by zero")
        a, b = left.ty, right.ty
        if b == LENGTH:
            if a not in (LENGTH, ZERO):
                raise env.error(node, f"cannot divide {_show(a)} by a Length")
            ty = NUMBER
        elif a == LENGTH:
            ty = LENGTH
        else:
            ty = NUMBER
        return _typed(node, ty, left=left, right=right)
    if isinstance(node, ast.Chain):
        operands = [_check(env, o) for o in node.operands]
        for op, a, b in zip(node.ops, operands, operands[1:]):
            if op in ("==", "!="):
                if a.ty in NUMERIC or b.ty in NUMERIC:
                    _unify(env, node, a.ty, b.ty, "compare")
                elif a.ty != b.ty:
                    raise env.error(node, f"cannot compare {_show(a.ty)} with {_show(b.ty)}")
            else:
                if a.ty not in NUMERIC or b.ty not in NUMERIC:
                    bad = a if a.ty not in NUMERIC else b
                    raise env.error(bad, f"'{op}' needs numbers or lengths, not {_show(bad.ty)}")
                _unify(env, node, a.ty, b.ty, "compare")
        return _typed(node, BOOL, operands=tuple(operands))
    if isinstance(node, ast.IfThen):
        cond = _check(env, node.cond)
        if cond.ty != BOOL:
            raise env.error(node.cond, f"the condition of 'if' must be Bool, not {_show(cond.ty)}")
        then = _check(env, node.then)
        orelse = _check(env, node.orelse)
        if then.ty in NUMERIC and orelse.ty in NUMERIC:
            ty = _unify(env, node, then.ty, orelse.ty, "choose between")
        elif then.ty != orelse.ty:
            raise env.error(node, f"the branches of 'if' differ: {_show(then.ty)} and {_show(orelse.ty)}")
        else:
            ty = then.ty
        return _typed(node, ty, cond=cond, then=then, orelse=orelse)
    if isinstance(node, ast.Call):
        return _check_call(env, node)
    if isinstance(node, ast.Quant):
        if node.var in env.qvars:
            raise env.error(node, f"'{node.var}' is already bound by an outer quantifier")
        if node.var in vocab.CONSTANTS or node.var in ("legs", "params", "world") \
                or node.var.split(".")[0] in {n.split(".")[0] for n in vocab.GLOBAL}:
            raise env.error(node, f"'{node.var}' cannot name a leg: it is a word of the vocabulary")
        inner = attrs.evolve(env, qvars=env.qvars + (node.var,))
        # share the accumulators
        inner.deps, inner.reads = env.deps, env.reads
        body = _check(inner, node.body)
        env.max_leg = max(env.max_leg, inner.max_leg)
        if node.kind in ("all", "any", "count"):
            if body.ty != BOOL:
                raise env.error(node.body, f"{node.kind}(...) needs a Bool body, not {_show(body.ty)}")
            ty = BOOL if node.kind != "count" else COUNT
        else:
            if body.ty not in NUMERIC:
                raise env.error(node.body, f"sum(...) needs a numeric body, not {_show(body.ty)}")
            ty = COUNT if body.ty == ZERO else body.ty
        return _typed(node, ty, body=body)
    raise env.error(node, "unsupported expression")  # pragma: no cover - parser builds no other


def _check_call(env: _Env, node: ast.Call) -> ast.Node:
    f = node.func
    if f not in FUNCTIONS:
        if f in ("all", "any", "count", "sum"):
            raise env.error(node, f"write {f}(leg in legs: ...)")
        raise env.error(node, f"unknown function '{f}'" + suggest(f, FUNCTIONS))
    args = [_check(env, a) for a in node.args]
    arity = {"abs": 1, "flip": 1, "side": 1, "along": 2, "floor_to": 2, "ceil_to": 2, "round_to": 2}
    if f in arity and len(args) != arity[f]:
        raise env.error(node, f"{f}() takes {arity[f]} argument{'s' if arity[f] > 1 else ''}, got {len(args)}")
    if f in ("min", "max"):
        if len(args) < 2:
            raise env.error(node, f"{f}() takes at least 2 arguments")
        ty = args[0].ty
        for a in args:
            if a.ty not in NUMERIC:
                raise env.error(a, f"{f}() needs numbers or lengths, not {_show(a.ty)}")
        for a in args[1:]:
            ty = _unify(env, node, ty, a.ty, f"take the {f} of")
        return _typed(node, ty, args=tuple(args))
    if f == "abs":
        if args[0].ty not in NUMERIC:
            raise env.error(args[0], f"abs() needs a number or a length, not {_show(args[0].ty)}")
        return _typed(node, args[0].ty, args=tuple(args))
    if f == "flip":
        if args[0].ty != DIRECTION:
            raise env.error(args[0], f"flip() needs a Direction, not {_show(args[0].ty)}")
        return _typed(node, DIRECTION, args=tuple(args))
    if f == "side":
        if args[0].ty not in NUMERIC:
            raise env.error(args[0], f"side() needs a position (a Length), not {_show(args[0].ty)}")
        return _typed(node, DIRECTION, args=tuple(args))
    if f == "along":
        if args[0].ty != DIRECTION:
            raise env.error(args[0], f"along() needs a Direction first, not {_show(args[0].ty)}")
        if args[1].ty not in NUMERIC:
            raise env.error(args[1], f"along() needs a length second, not {_show(args[1].ty)}")
        return _typed(node, args[1].ty, args=tuple(args))
    # floor_to, ceil_to, round_to
    x, step = args
    if x.ty not in NUMERIC:
        raise env.error(x, f"{f}() needs a number or a length, not {_show(x.ty)}")
    sv = const_value(step)
    if sv is None:
        raise env.error(step, f"the step of {f}() must be a constant")
    if sv <= 0:
        raise env.error(step, f"the step of {f}() must be above zero")
    ty = _unify(env, node, x.ty, step.ty, f"round ({f})")
    return _typed(node, ty, args=tuple(args))


# ---- the pack ------------------------------------------------------------------------

def _unreadable(entry, reader: str) -> str:
    """Why ``reader`` cannot read a vocabulary entry, with the name it may read instead."""
    if entry.readers:
        why = f"readable only by the {' and '.join(sorted(entry.readers))}"
        # line data of G2 that the onboard knows only through linking (DESIGN 4.8)
        alt = entry.name.replace("g2.", "g2.link_", 1) if entry.name.startswith("g2.") else ""
        if alt in vocab.GLOBAL and reader in vocab.GLOBAL[alt].readers:
            why += f"; the {reader} knows it from linking as '{alt}'"
        return why
    if entry.kind == "wire" and entry.name.startswith("report."):
        alt = "rbc." + entry.name[len("report."):]
        if alt in vocab.GLOBAL and reader in vocab.GLOBAL[alt].readers:
            return f"the exact length before coding, read by nobody; the {reader} reads '{alt}'"
        return "the exact length before coding, read by nobody"
    return "hidden truth"


def _legs_through_lets(checked: dict, deps) -> tuple:
    """The highest i of a legs[i] read through the lets ``deps`` reach (themselves or through
    other lets), and the first let (by name) that reads it: (0, None) when none does."""
    lets = {d: checked[d][0].deps for d in checked if d[0] == "let"}
    best, who = 0, None
    for d in sorted(_closure({d for d in deps if d[0] == "let"}, lets)):
        if d in checked and checked[d][2] > best:
            best, who = checked[d][2], d[1]
    return best, who


def _closure(start: set, direct: dict) -> set:
    seen = set()
    todo = list(start)
    while todo:
        d = todo.pop()
        if d in seen:
            continue
        seen.add(d)
        todo.extend(direct.get(d, ()))
    return seen


def _find_cycle(graph: dict) -> list | None:
    state: dict = {}
    stack: list = []

    def visit(n):
        state[n] = 1
        stack.append(n)
        for m in sorted(graph.get(n, ())):
            if state.get(m) == 1:
                return stack[stack.index(m):] + [m]
            if m not in state:
                found = visit(m)
                if found:
                    return found
        stack.pop()
        state[n] = 2
        return None

    for n in sorted(graph):
        if n not in state:
            found = visit(n)
            if found:
                return found
    return None


def _topo(names, graph, kind) -> tuple:
    order: list = []
    seen: set = set()

    def visit(n):
        if n in seen:
            return
        seen.add(n)
        for m in sorted(graph.get(n, ())):
            visit(m)
        if n[0] == kind:
            order.append(n[1])

    for n in names:
        visit((kind, n))
    return tuple(order)


# Wire names depend on every onboard formula (the step and the codes depend on all three
# distances); rbc.placed likewise.
_WIRE_PREFIXES = ("report.", "rbc.d_lrbg", "rbc.l_doubt", "rbc.placed")


def _names_read(node: ast.Node, bound: tuple = ()):
    """The ("param", name) and ("let", name) a parsed expression reads (a quantifier's variable
    hides a let of the same name inside its body)."""
    if isinstance(node, ast.Quant):
        yield from _names_read(node.body, bound + (node.var,))
        return
    if isinstance(node, ast.Name):
        parts = node.parts
        if len(parts) == 1 and isinstance(parts[0], str) and parts[0] not in bound:
            yield ("let", parts[0])
        elif len(parts) == 2 and parts[0] == "params" and isinstance(parts[1], str):
            yield ("param", parts[1])
    for child in ast.children(node):
        yield from _names_read(child, bound)


def _unused_names(raw: RawPack) -> list[Diagnostic]:
    """A warning at each [params] or [let] name that no rule, lemma, design formula, let or
    other parameter reads: a definition that decides nothing is usually a slip (a misspelt use,
    a rule removed, a value meant to be used)."""
    readers = ([(("param", n), e) for n, e in raw.params.items()]
               + [(("let", n), e) for n, e in raw.lets.items()]
               + [(None, e) for e in (*raw.onboard.values(), *raw.trackside.values())]
               + [(None, e) for r in raw.rules + raw.lemmas for e in (r.given, r.expect)])
    read = {name for who, e in readers if e is not None
            for name in _names_read(e.node) if name != who}
    out = []
    for kind, table, names, word in (("param", "params", raw.params, "parameter"),
                                     ("let", "let", raw.lets, "let")):
        for name in names:
            if (kind, name) in read:
                continue
            value = raw.source.at_key((table, name), "")
            text = value.source_line or ""
            at = text.find(name)
            column = at + 1 if 0 <= at < value.column - 1 else value.column
            others = ("design formula, let or other parameter" if kind == "param"
                      else "design formula or other let")
            out.append(raw.source.diag(value.line, column, f"{word} '{name}' is never read: no "
                                       f"rule, lemma, {others} uses it", "warning", len(name)))
    return out


def check_pack(raw: RawPack) -> Pack:
    try:
        return _check_pack(raw)
    except RecursionError:
        raise PackError([Diagnostic(raw.path, 1, 1, "an expression is nested too deeply to check")]) from None


def _check_pack(raw: RawPack) -> Pack:
    diags: list[Diagnostic] = [d for d in raw.diagnostics if d.severity == "error"]
    world = {k: v for k, v in raw.scope.constants().items()}

    # params: constant expressions, in file order, may use earlier params and world.*
    params: dict = {}
    for name, e in raw.params.items():
        env = _Env(raw, e.key, f"params.{name}", None, params, world, diags)
        env.let_types = {}
        try:
            node = _check(env, e.node)
        except _Fail:
            continue
        value = const_value(node)
        if value is None or node.ty not in NUMERIC:
            env.error(node, "a parameter must be a constant number or length")
            continue
        params[name] = (COUNT if node.ty == ZERO else node.ty, value)

    checked: dict = {}   # ("let"|"onboard"|"trackside", name) -> (Formula, reads)
    let_types: dict = {}

    def check_formula(kind: str, name: str, e: RawExpr, readers) -> None:
        what = {"let": f"let {name}", "onboard": f"onboard {name}",
                "trackside": f"trackside {name}"}[kind]
        env = _Env(raw, e.key, what, readers, params, world, diags)
        env.let_types = let_types
        env.item = kind == "onboard" and name in vocab.INFO_OUTPUTS
        try:
            node = _check(env, e.node)
        except _Fail:
            return
        outputs = {**vocab.ONBOARD_OUTPUTS, **vocab.INFO_OUTPUTS}
        if kind == "onboard" and node.ty not in (outputs[name], ZERO):
            if not (node.ty == ZERO and outputs[name] == LENGTH):
                env.error(node, f"must be a {outputs[name]}, not {_show(node.ty)}")
                return
        if kind == "trackside" and node.ty not in (LENGTH, ZERO):
            env.error(node, f"must be a Length, not {_show(node.ty)}")
            return
        if env.max_leg and kind != "let":
            env.error(node, "legs[i] cannot be used in a design formula (it would apply to some worlds only)")
            return
        if kind != "let":
            leg, let = _legs_through_lets(checked, env.deps)
            if leg:
                env.error(node, f"legs[{leg}] cannot be used in a design formula (it would apply to "
                          f"some worlds only), here read through let '{let}'")
                return
        checked[(kind, name)] = (Formula(what, e.text, node, e.key, e.default, frozenset(env.deps)),
                                 dict(env.reads), env.max_leg)

    # lets may use each other: type them in dependency order
    let_graph: dict = {}
    for name, e in raw.lets.items():
        let_graph[("let", name)] = {("let", n.parts[0]) for n in ast.walk(e.node)
                                    if isinstance(n, ast.Name) and len(n.parts) == 1
                                    and n.parts[0] in raw.lets}
    cycle = _find_cycle(let_graph)
    if cycle:
        names = " -> ".join(n[1] for n in cycle)
        diags.append(raw.source.at_key(("let", cycle[0][1]), f"let definitions form a cycle: {names}"))
        raise PackError(diags)
    for kind_name in _topo(raw.lets, let_graph, "let"):
        check_formula("let", kind_name, raw.lets[kind_name], None)
        if ("let", kind_name) in checked:
            let_types[kind_name] = checked[("let", kind_name)][0].node.ty
        else:
            let_types[kind_name] = None
    for name, e in raw.onboard.items():
        check_formula("onboard", name, e, vocab.ONBOARD)
    for name, e in raw.trackside.items():
        check_formula("trackside", name, e, vocab.TRACKSIDE)

    # lets that failed leave holes: do not go on to dependants with unknown types
    graph = {k: v[0].deps for k, v in checked.items()}
    cycle = _find_cycle(graph)
    if cycle:
        names = " -> ".join(f"{k} {n}" for k, n in cycle)
        first = cycle[0]
        diags.append(raw.source.at_key((first[0], first[1]), f"definitions form a cycle: {names}"))

    def closure_reads(start_deps: set) -> dict:
        out: dict = {}
        for dep in _closure(set(start_deps), graph):
            if dep in checked:
                for r in checked[dep][1]:
                    out.setdefault(r, dep)
        return out

    let_graph_only = {k: {d for d in v if d[0] == "let"} for k, v in graph.items()}

    def let_reads(let: tuple) -> dict:
        """What a let reads, itself or through the lets it uses: name -> the let that reads it."""
        out: dict = {}
        for dep in sorted(_closure({let}, let_graph_only)):
            if dep in checked:
                for r in checked[dep][1]:
                    out.setdefault(r, dep)
        return out

    # Observability of design formulas: what they read, themselves or through lets. A design
    # formula that reads another one is not blamed for what that one reads: the other is
    # checked on its own, and blaming every reader repeats one mistake many times.
    for (kind, name), (formula, reads, _) in sorted(checked.items()):
        if kind == "let":
            continue
        readers = vocab.ONBOARD if kind == "onboard" else vocab.TRACKSIDE
        via = {r: (None, None) for r in reads}
        for used in sorted(d for d in formula.deps if d[0] == "let"):
            for r, reader in let_reads(used).items():
                via.setdefault(r, (used, reader))
        for r, (used, reader) in sorted(via.items(), key=lambda kv: kv[0]):
            entry = vocab.entry(r)
            if readers in entry.readers:
                continue
            hidden = _unreadable(entry, readers)
            if used is None:
                off, length = reads[r]
                diags.append(raw.source.at_key(formula.key, f"{formula.name}: the {kind} cannot read "
                                               f"'{r}' ({hidden})", offset=off, length=length))
                continue
            # point at the let's name where the formula uses it
            m = re.search(rf"(?<![\w.]){re.escape(used[1])}(?![\w.])", formula.text)
            deeper = f" (which uses let '{reader[1]}')" if reader != used else ""
            diags.append(raw.source.at_key(
                formula.key, f"{formula.name}: the {kind} cannot read '{r}' ({hidden}), read "
                f"through let '{used[1]}'{deeper}", offset=m.start() if m else None,
                length=len(used[1]) if m else 1))

    rules = []
    warnings = [d for d in raw.diagnostics if d.severity != "error"] + _unused_names(raw)
    for r in raw.rules + raw.lemmas:
        parts = {}
        max_leg = 0
        deps: set = set()
        reads: dict = {}
        ok = True
        for part, e in (("given", r.given), ("expect", r.expect)):
            if e is None:
                parts[part] = None
                continue
            env = _Env(raw, e.key, f"{r.role} {r.id} {part}", None, params, world, diags)
            env.let_types = let_types
            try:
                node = _check(env, e.node)
            except _Fail:
                ok = False
                continue
            if node.ty != BOOL:
                env.error(node, f"{part} must be a Bool (a condition), not {_show(node.ty)}")
                ok = False
                continue
            parts[part] = Formula(f"{r.role} {r.id} {part}", e.text, node, e.key, False, frozenset(env.deps))
            max_leg = max(max_leg, env.max_leg)
            deps |= env.deps
            for k, v in env.reads.items():
                reads.setdefault(k, v)
        if not ok:
            continue
        if any(d not in checked for d in deps):
            continue  # a definition it uses failed; that error is already reported
        if any(k.startswith(_WIRE_PREFIXES) for k in reads) or any(
                d[0] == "trackside" for d in _closure(deps, graph)):
            deps |= {("onboard", n) for n in vocab.ONBOARD_OUTPUTS}
        full = _closure(deps, graph)
        # legs[i] read through a let makes the same implicit premise legs.count >= i
        max_leg = max(max_leg, _legs_through_lets(checked, deps)[0])
        all_reads = set(reads) | set(closure_reads(full))
        bound = r.legs if r.legs is not None else raw.legs
        rule = Rule(r.id, r.title, parts["given"], parts["expect"], r.refs, r.note, r.legs,
                    r.line, max_leg, frozenset(full), frozenset(all_reads), r.unbounded, r.role)
        positional = {"rbc.est_front", "rbc.max_safe_front", "rbc.min_safe_front",
                      "rbc.min_safe_rear", "rbc.d_lrbg", "rbc.l_doubtover", "rbc.l_doubtunder"}
        given_reads = set()
        if rule.given is not None:
            given_reads = {n.ref[1] for n in ast.walk(rule.given.node)
                           if isinstance(n, ast.Name) and n.ref and n.ref[0] == "var"}
            for dep in _closure(rule.given.deps, graph):
                if dep in checked:
                    given_reads |= set(checked[dep][1])
        if (set(reads) & positional) and "rbc.placed" not in given_reads:
            warnings.append(raw.source.at_key(
                r.expect.key, f"{r.role} {r.id} reads trackside positions but its given does not ask "
                "for rbc.placed (an unplaced report carries no position)", severity="warning"))
        unbounded = r.unbounded if r.unbounded is not None else raw.unbounded
        if max_leg > bound and not unbounded:
            warnings.append(raw.source.at_key(
                r.expect.key, f"{r.role} {r.id} reads legs[{max_leg}] but its bound is {counted(bound, 'leg')}: "
                "it can never apply (vacuous) unless checked with more --legs", severity="warning"))
        rules.append(rule)

    errors = [d for d in diags if d.severity == "error"]
    if errors:
        raise PackError(sorted(diags, key=lambda d: (d.line, d.column)))

    lets = {n: checked[("let", n)][0] for n in raw.lets}
    onboard = {n: checked[("onboard", n)][0] for n in raw.onboard}
    trackside = {n: checked[("trackside", n)][0] for n in raw.trackside}
    return Pack(raw.path, raw.text, raw.sha256, raw.name, raw.title, raw.description, raw.legs,
                raw.scope, params, lets, onboard, _topo(raw.onboard, graph, "onboard"),
                raw.q_scale, raw.rounding, trackside, _topo(raw.trackside, graph, "trackside"),
                tuple(r for r in rules if r.role == "rule"),
                tuple(sorted(warnings, key=lambda d: (d.line, d.column))), raw.unbounded,
                tuple(r for r in rules if r.role == "lemma"), dict(raw.implementation), raw.infos)
