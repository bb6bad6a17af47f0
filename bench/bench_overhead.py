"""Overhead over the bare solver: each rule's bounded check by verifier (solve, witness or
minimal counterexample, replay in the simulator, compare) against one z3 check() of the same
obligation (``given and not expect``) on the same encoding, built by the project's own encoder
in a fresh context. Prints per-pack and total CPU ratios and the solver checks per rule; it is
not a test.

    .venv/bin/python bench/bench_overhead.py                 # rules/ and tests/packs/overhead-*.toml
    .venv/bin/python bench/bench_overhead.py rules/relocation.toml

Ratios, not absolute times, are what to compare between machines.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import z3

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from verifier.run.engine import CheckOptions, check_rule  # noqa: E402
from verifier.run.loader import load_all  # noqa: E402
from verifier.smt.encode import Encoding  # noqa: E402
from verifier.smt.solve import COMPARED, DEFAULT_RLIMIT  # noqa: E402


def bare(pack, rule, bound: int) -> tuple[float, str]:
    """CPU seconds of the encoding and one check of the rule's violation question."""
    t0 = time.process_time()
    ctx = z3.Context()
    enc = Encoding(pack, bound, ctx)
    given, expect = enc.given(rule), enc.expect(rule)
    for name in COMPARED:       # the same encoding as verifier's (it names these for replay)
        enc.name(name)
    s = z3.Solver(ctx=ctx)
    s.set("rlimit", DEFAULT_RLIMIT)
    s.add(*enc.constraints, given, z3.Not(expect))
    r = s.check()
    return time.process_time() - t0, str(r)


def ours(pack, rule, bound: int):
    t0 = time.process_time()
    res = check_rule(pack, rule, CheckOptions(legs=bound, out=None))
    return time.process_time() - t0, res


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("paths", nargs="*",
                    default=[str(ROOT / "rules")] + sorted(str(p) for p in (ROOT / "tests" / "packs").glob("overhead-*.toml")))
    ap.add_argument("--verbose", action="store_true", help="one line per rule")
    args = ap.parse_args()
    packs, diags = load_all(args.paths)
    if any(d.severity == "error" for d in diags):
        for d in diags:
            print(d.render(), file=sys.stderr)
        return 2
    T_bare = T_ours = 0.0
    n_rules = n_checks = 0
    by_verdict: dict = {}
    for pack in packs:
        pb = po = 0.0
        for rule in pack.lemmas + pack.rules:
            bound = pack.bound_for(rule, None)
            tb, rb = bare(pack, rule, bound)
            to, res = ours(pack, rule, bound)
            pb, po = pb + tb, po + to
            n_rules += 1
            n_checks += res.checks
            v = by_verdict.setdefault(res.verdict, [0.0, 0.0, 0, 0])
            v[0] += tb
            v[1] += to
            v[2] += 1
            v[3] += res.checks
            if args.verbose:
                print(f"  {pack.name}/{rule.id}: bare {tb:.3f} s ({rb}), verifier {to:.3f} s "
                      f"({res.verdict}, {res.checks} checks), x{to / tb:.2f}")
        T_bare, T_ours = T_bare + pb, T_ours + po
        print(f"{pack.name}: bare {pb:.2f} s, verifier {po:.2f} s, ratio {po / pb:.2f}")
    for verdict, (tb, to, n, c) in sorted(by_verdict.items()):
        print(f"verdict {verdict}: {n} rules, bare {tb:.2f} s, verifier {to:.2f} s, ratio {to / tb:.2f}, "
              f"{c / n:.1f} checks a rule")
    print(f"total: {n_rules} rules, bare {T_bare:.2f} s CPU, verifier {T_ours:.2f} s CPU, "
          f"ratio {T_ours / T_bare:.2f}; {n_checks / n_rules:.1f} solver checks a rule")
    return 0


if __name__ == "__main__":
    sys.exit(main())
