"""Same obligation, second solver: re-solve exported SMT-LIB text with cvc5.

This checks the solver, not the encoding: the text is the one z3 decided (see
:mod:`verifier.smt.export`), so a bug in the encoding itself would pass both solvers. The
differential tests against the simulator are what check the encoding.

cvc5 is an optional extra (``pip install 'verifier[crosscheck]'``). Each text is solved in a
fresh cvc5 solver with strict SMT-LIB parsing and a time limit; the answer is ``sat``,
``unsat`` or ``unknown`` (plain text), and ``available()`` says whether cvc5 can be used.
"""

from __future__ import annotations

import attrs


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


def solve_text(text: str, timeout: float = 60.0, parse_only: bool = False) -> Answer:
    """Solve one SMT-LIB 2.6 script with cvc5 (strict parsing); the answer of its last
    ``check-sat``. With ``parse_only`` every command but ``check-sat`` is run, so the answer is
    ``unknown`` with reason ``parsed`` when cvc5 reads and type-checks the whole text."""
    import time

    import cvc5
    t0 = time.monotonic()
    tm = cvc5.TermManager()
    solver = cvc5.Solver(tm)
    solver.setOption("strict-parsing", "true")
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
    return Answer(status, reason, time.monotonic() - t0)
