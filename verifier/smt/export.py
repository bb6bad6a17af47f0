"""Exported proof obligations: each rule's SMT problem as a portable SMT-LIB 2.6 file.

For every rule two files are written under ``DIR/<pack>/``:

- ``<rule>.smt2``: the violation question the verdict rests on, ``world and given and not
  expect``: ``sat`` means violated, ``unsat`` means no world in scope breaks the rule (it holds,
  unless it is vacuous);
- ``<rule>.given.smt2``: the vacuity question, ``world and given``: ``unsat`` means vacuous.

The text is the engine's own (:func:`verifier.smt.smtlib.export_rule`, the very text the engine
solves) with a ``set-logic`` line, ``set-info`` header, the two assertions and ``check-sat``.
It is made portable: z3 prints a one-argument ``and``/``or``/``+`` that the standard does not
allow (left-associative operators take at least two arguments), so those are rewritten to
their argument, and any operator outside the standard theories of linear integer and real
arithmetic is refused. ``(set-info :status ...)`` records the engine's verdict, so that another
solver's answer can be compared with it mechanically.
"""

from __future__ import annotations

import re
from pathlib import Path

import z3

from verifier.about import __version__
from verifier.check.model import Pack, Rule
from verifier.errors import InternalError
from verifier.lang.numbers import counted
from verifier.smt import solve
from verifier.smt.smtlib import EXPECT, GIVEN, export_rule

LOGIC = "QF_LIRA"
# Operators of SMT-LIB 2.6 Core, Ints, Reals and Reals_Ints (the logic QF_LIRA), and commands.
STANDARD = frozenset("""
    true false not => and or xor = distinct ite
    + - * / div mod abs <= < >= > to_real to_int is_int let !
    set-logic set-info set-option declare-fun declare-const define-fun assert check-sat
    get-model get-value push pop exit
""".split())
_ASSOC = {"and": "true", "or": "false", "+": None}


# ---- a small s-expression reader and printer -------------------------------------------------

_TOKEN = re.compile(r'\s+|;[^\n]*|\(|\)|\|[^|]*\||"(?:[^"]|"")*"|[^\s()|";]+')


def parse_sexprs(text: str) -> list:
    """SMT-LIB text as nested lists of atoms (strings)."""
    stack: list = [[]]
    pos = 0
    for m in _TOKEN.finditer(text):
        if m.start() != pos:
            raise InternalError(f"unreadable SMT-LIB text at offset {pos}")
        pos = m.end()
        tok = m.group(0)
        if tok[0].isspace() or tok[0] == ";":
            continue
        if tok == "(":
            stack.append([])
        elif tok == ")":
            if len(stack) == 1:
                raise InternalError("unbalanced ')' in SMT-LIB text")
            done = stack.pop()
            stack[-1].append(done)
        else:
            stack[-1].append(tok)
    if pos != len(text) or len(stack) != 1:
        raise InternalError("unbalanced '(' in SMT-LIB text")
    return stack[0]


def show(e) -> str:
    if isinstance(e, str):
        return e
    return "(" + " ".join(show(x) for x in e) + ")"


def portable_term(e):
    """Rewrite one-argument applications of left-associative operators to their argument."""
    if isinstance(e, str):
        return e
    e = [portable_term(x) for x in e]
    if e and isinstance(e[0], str) and e[0] in _ASSOC and len(e) <= 2:
        if len(e) == 2:
            return e[1]
        if _ASSOC[e[0]] is not None:
            return _ASSOC[e[0]]
    return e


def nonstandard(text: str) -> list[str]:
    """Operators in ``text`` that are not part of the standard logic (an empty list when the
    text is portable), and one-argument uses of left-associative operators."""
    bad: set = set()
    declared: set = set()

    def visit(e, bound: frozenset):
        if isinstance(e, str) or not e:
            return
        head = e[0]
        if head in ("declare-fun", "declare-const", "define-fun"):
            declared.add(e[1])
        if head == "let":
            names = frozenset(b[0] for b in e[1])
            for b in e[1]:
                visit(b[1], bound)
            visit(e[2], bound | names)
            return
        if isinstance(head, list):
            bad.add(show(head)[:40])            # indexed operators such as (_ pbeq 1 1)
        elif head not in STANDARD and head not in declared and head not in bound:
            bad.add(head)
        if isinstance(head, str) and head in _ASSOC and len(e) <= 2:
            bad.add(f"one-argument {head}")
        for x in e[1:]:
            visit(x, bound)

    for e in parse_sexprs(text):
        visit(e, frozenset())
    return sorted(bad)


# ---- the obligations -------------------------------------------------------------------------

STATUS = {"violated": ("sat", "sat"), "holds": ("unsat", "sat"), "vacuous": ("unsat", "unsat")}


def obligations(pack: Pack, rule: Rule, bound: int, verdict: str | None = None) -> dict[str, str]:
    """The two portable SMT-LIB texts of a rule: ``{"violation": ..., "given": ...}``."""
    q = export_rule(pack, rule, bound)
    body = [show(portable_term(e)) for e in parse_sexprs(q.text)]
    status = STATUS.get(verdict or "")
    given_text = rule.given.text if rule.given else "true"
    if rule.premise_legs:
        given_text = f"legs.count >= {rule.premise_legs} (implicit) and ({given_text})"
    out = {}
    for i, (kind, goal, meaning) in enumerate((
            ("violation", f"(assert {GIVEN})\n(assert (not {EXPECT}))",
             "sat: some world in scope satisfies given and not expect (the rule is violated); "
             "unsat: none does (the rule holds, unless it is vacuous)"),
            ("given", f"(assert {GIVEN})",
             "sat: some world in scope satisfies the given; unsat: the rule is vacuous"))):
        head = [
            f"; verifier {__version__}: proof obligation ({kind}) of rule '{rule.id}' of pack "
            f"'{pack.name}'",
            f"; pack file: {pack.path} (sha256 {pack.sha256})",
            f"; rule: {_line(rule.title)}",
            f"; given: {_line(given_text)}",
            f"; expect: {_line(rule.expect.text)}",
            f"; bound: up to {counted(bound, 'leg')}; {meaning}",
            f"; encoded by z3 {z3.get_version_string()} and made portable: one-argument and/or/+ "
            "written as their argument; nothing else changed",
            "(set-info :smt-lib-version 2.6)",
            f"(set-logic {LOGIC})",
            f"(set-info :source |verifier {__version__}, pack {pack.name}, rule {rule.id}|)",
        ]
        if status is not None:
            head.append(f"(set-info :status {status[i]})")
        text = "\n".join(head + body + [goal, "(check-sat)", "(exit)", ""])
        bad = nonstandard(text)
        if bad:
            raise InternalError(f"the SMT-LIB text of rule {rule.id} is not portable: {', '.join(bad)}")
        out[kind] = text
    return out


def case_split(bound: int):
    """How an obligation the second solver cannot decide whole is divided into cases
    (:func:`verifier.smt.second.solve_split`): first by the number of legs, then, for each leg
    that exists, by its cab change and its direction, then by the direction of the passage.
    These are the world's own choice variables (declared in every obligation), so each case is
    the same question about a smaller set of worlds."""
    counts = tuple(f"(= legs.count {k})" for k in range(bound + 1))

    def next_split(fixed: tuple[str, ...]) -> tuple[str, ...] | None:
        count = next((k for k, lit in enumerate(counts) if lit in fixed), None)
        if count is None:
            return None if any(lit.startswith("(not (or (= legs.count") for lit in fixed) else counts
        names = [f"legs.{i}.{f}" for i in range(1, count + 1) for f in ("cab_change", "forward")]
        for name in names + ["passage.forward"]:
            if name not in fixed and f"(not {name})" not in fixed:
                return (name, f"(not {name})")
        return None
    return next_split


def _line(text: str) -> str:
    """Rule text on one comment line (a newline would end the comment)."""
    return " ".join(text.split())


def paths_for(out_dir: Path, pack: Pack, rule: Rule) -> dict[str, Path]:
    base = Path(out_dir) / pack.name
    return {"violation": base / f"{rule.id}.smt2", "given": base / f"{rule.id}.given.smt2"}


def write_obligations(out_dir, checked) -> list[Path]:
    """Write the obligations of every (pack, rule, bound, verdict) in ``checked``; return the
    files written. Existing files of those rules are replaced atomically."""
    written = []
    for pack, rule, bound, verdict in checked:
        texts = obligations(pack, rule, bound, verdict)
        for kind, path in paths_for(Path(out_dir), pack, rule).items():
            path.parent.mkdir(parents=True, exist_ok=True)
            tmp = path.with_name(path.name + ".tmp")
            tmp.write_text(texts[kind], encoding="utf-8")
            tmp.replace(path)
            written.append(path)
    return written


def write_for_results(out_dir, packs, results) -> list[Path]:
    """``--smt2 DIR`` of ``verifier check``: the obligations of every rule that was checked."""
    todo = []
    for pack, pr in zip(packs, results):      # in the order of the packs
        for r in pr.results:
            if r.verdict == "error" and r.kind == "input":
                continue
            todo.append((pack, pack.rule(r.rule), r.bound, r.verdict))
    return write_obligations(out_dir, todo)


def z3_status(text: str, timeout: float = 60.0) -> str:
    """Solve SMT-LIB text with z3 from the text alone: ``sat``, ``unsat`` or ``unknown``."""
    ctx = z3.Context()
    s = z3.Solver(ctx=ctx)
    s.set("timeout", int(timeout * 1000))
    s.add(*z3.parse_smt2_string(text, ctx=ctx))
    return str(solve.check(s))


def declared_status(text: str) -> str | None:
    m = re.search(r"\(set-info :status (sat|unsat|unknown)\)", text)
    return m.group(1) if m else None
