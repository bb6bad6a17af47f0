"""Same obligation, second solver: re-solve exported SMT-LIB text with cvc5.

This checks the solver, not the encoding: the text is the one z3 decided (see
:mod:`verifier.smt.export`), so a bug in the encoding itself would pass both solvers. The
differential tests against the simulator are what check the encoding.

cvc5 is an optional extra (``pip install 'verifier[crosscheck]'``). Each text is solved in a
fresh cvc5 solver with strict SMT-LIB parsing and a time limit; the answer is ``sat``,
``unsat`` or ``unknown`` (plain text), and ``available()`` says whether cvc5 can be used.

cvc5 tries two configurations in turn (:data:`CONFIGS`): its defaults for a few seconds, then
``ite-simp`` (if-then-else simplification in preprocessing) for the rest of the time limit. The
envelope obligations are dense with if-then-else terms (one per leg's direction, cab change and
motion): with the defaults six of them stayed undecided after 30 s, with ``ite-simp`` they take
10 to 29 s. But ``ite-simp`` also slows some easy questions down: two single-balise witnesses
of the position-report pack take 0.05 s with the defaults and 13 s, or over 30 s, with it
(all measured on the shipped packs, cvc5 1.4.2, December 2026). Any configuration's ``sat`` or
``unsat`` is cvc5's answer to the same text; only the search differs.
:func:`solve_split` goes further for an obligation that is still undecided: it divides it into
cases (one per number of legs, then per leg's cab change and direction) and solves each case as
its own fresh query. The cases cover every world by construction, so the obligation is ``unsat``
exactly when every case is and ``sat`` when one case is; a case left undecided is divided again
until the budget is spent, and then the answer is ``unknown``, never a guess.
"""

from __future__ import annotations

import time
from typing import Callable

import attrs

# cvc5 configurations tried in turn on every text (see the module doc for why), and the time
# each one but the last gets; the last one gets what is left of the time limit
CONFIGS: tuple[tuple[tuple[str, str], ...], ...] = ((), (("ite-simp", "true"),))
FIRST_TRY = 5.0


def available() -> bool:
    try:
        import cvc5  # noqa: F401
    except ImportError:
        return False
    return True


def version() -> str:
    try:
        from importlib.metadata import version as v
        return f"cvc5 {v('cvc5')}"
    except Exception:  # noqa: BLE001 - a version string only
        return "cvc5 (version unknown)"


@attrs.frozen
class Answer:
    status: str          # sat, unsat, unknown
    reason: str = ""     # why unknown, or the parser's complaint
    seconds: float = 0.0
    cases: int = 1       # queries solved: 1 for the whole obligation, more after a case split
    options: str = ""    # the cvc5 options of the configuration that answered

    def how(self) -> str:
        """How the answer was reached, in words."""
        with_ = f" with {self.options}" if self.options else ""
        if self.cases <= 1:
            return f"{self.status}{with_} in {self.seconds:.1f} s"
        return f"{self.status} by {self.cases} cases in {self.seconds:.1f} s"


def solve_text(text: str, timeout: float = 60.0, parse_only: bool = False) -> Answer:
    """Solve one SMT-LIB 2.6 script with cvc5 (strict parsing); the answer of its last
    ``check-sat``, from the first of :data:`CONFIGS` that decides it within ``timeout`` seconds
    in all. With ``parse_only`` every command but ``check-sat`` is run, so the answer is
    ``unknown`` with reason ``parsed`` when cvc5 reads and type-checks the whole text."""
    t0 = time.monotonic()
    ans = Answer("unknown", "no configuration tried")
    for i, options in enumerate(CONFIGS):
        left = timeout - (time.monotonic() - t0)
        last = i == len(CONFIGS) - 1
        if left <= 0:
            break
        ans = _solve_once(text, left if last else min(FIRST_TRY, left), parse_only, options)
        if ans.status != "unknown" or parse_only or ans.reason.startswith("cvc5"):
            break
    return attrs.evolve(ans, seconds=time.monotonic() - t0)


def _solve_once(text: str, timeout: float, parse_only: bool, options) -> Answer:
    import cvc5
    t0 = time.monotonic()
    tm = cvc5.TermManager()
    solver = cvc5.Solver(tm)
    solver.setOption("strict-parsing", "true")
    for key, value in options:
        solver.setOption(key, value)
    solver.setOption("tlimit-per", str(max(1, int(timeout * 1000))))
    parser = cvc5.InputParser(solver)
    parser.setStringInput(cvc5.InputLanguage.SMT_LIB_2_6, text, "obligation")
    sm = parser.getSymbolManager()
    status = "unknown"
    reason = "no check-sat in the text"
    try:
        while True:
            cmd = parser.nextCommand()
            if cmd.isNull():
                break
            if parse_only and cmd.getCommandName() == "check-sat":
                reason = "parsed"
                continue
            out = cmd.invoke(solver, sm).strip()
            if cmd.getCommandName() == "check-sat":
                status = out if out in ("sat", "unsat") else "unknown"
                reason = "" if status != "unknown" else (out or "gave up")
            elif out.startswith("(error"):
                return Answer("unknown", f"cvc5: {out}", time.monotonic() - t0)
    except RuntimeError as exc:       # cvc5 reports parse and type errors this way
        return Answer("unknown", f"cvc5 could not read the text: {exc}", time.monotonic() - t0)
    shown = " ".join(f"--{k}={v}" for k, v in options)
    return Answer(status, reason, time.monotonic() - t0, options=shown if status != "unknown" else "")


def with_case(text: str, literals: tuple[str, ...]) -> str:
    """``text`` with one more assertion, the conjunction of ``literals``, before its last
    ``check-sat``."""
    head, sep, tail = text.rpartition("(check-sat)")
    if not sep:
        raise ValueError("no check-sat in the text")
    if not literals:
        return text
    case = literals[0] if len(literals) == 1 else "(and " + " ".join(literals) + ")"
    return f"{head}(assert {case}) ; case of a split\n{sep}{tail}"


def cases_of(alternatives: tuple[str, ...]) -> tuple[str, ...]:
    """The cases of one split: the alternatives, plus the world where none holds unless the
    alternatives are a literal and its negation. So the cases cover every world whatever the
    alternatives are; the extra case is normally unsat at once (its alternatives are the whole
    range the scope allows)."""
    if len(alternatives) == 2 and alternatives[1] == f"(not {alternatives[0]})":
        return alternatives
    return alternatives + ("(not (or " + " ".join(alternatives) + "))",)


def solve_split(text: str, next_split: Callable[[tuple[str, ...]], tuple[str, ...] | None],
                case_timeout: float = 20.0, budget: float = 600.0) -> Answer:
    """Solve ``text``; if cvc5 leaves it undecided within ``case_timeout``, divide it into cases
    by ``next_split`` and solve those, dividing again any case left undecided, until ``budget``
    seconds are spent. ``next_split(fixed)`` names the alternatives of the next split given the
    literals already fixed, or ``None`` when there is nothing left to split on."""
    t0 = time.monotonic()
    deadline = t0 + budget
    solved = 0
    pending: list[tuple[str, ...]] = [()]
    open_cases: list[tuple[str, ...]] = []
    while pending:
        fixed = pending.pop(0)
        left = deadline - time.monotonic()
        if left <= 0:
            open_cases.append(fixed)
            open_cases.extend(pending)
            break
        ans = solve_text(with_case(text, fixed), timeout=min(case_timeout, left))
        solved += 1
        if ans.status == "sat":           # a case is a subset of the worlds: the whole is sat
            return attrs.evolve(ans, seconds=time.monotonic() - t0, cases=solved,
                                options=ans.options if solved == 1 else "")
        if ans.status == "unsat":
            if solved == 1:               # decided whole
                return attrs.evolve(ans, seconds=time.monotonic() - t0)
            continue
        if ans.reason.startswith("cvc5"):  # cvc5 could not read the text: no split will help
            return Answer("unknown", ans.reason, time.monotonic() - t0, solved)
        alternatives = next_split(fixed)
        if not alternatives:
            open_cases.append(fixed)
            continue
        pending.extend(fixed + (c,) for c in cases_of(tuple(alternatives)))
    seconds = time.monotonic() - t0
    if open_cases:
        shown = "; ".join(" and ".join(c) or "the whole obligation" for c in open_cases[:3])
        more = f" and {len(open_cases) - 3} more" if len(open_cases) > 3 else ""
        return Answer("unknown", f"undecided cases: {shown}{more}", seconds, solved)
    return Answer("unsat", "", seconds, solved)
