"""Overhead over the bare solver: a pack's bounded check by verifier, as `verifier check --legs K
--no-cache --no-files` runs it (lemmas first, each rule solved, its witness or minimal
counterexample found, replayed in the simulator and compared), against one z3 check() per rule
of the same obligation (``given and not expect``) on the same encoding, built by the project's
own encoder in a fresh context. Prints per-pack and total CPU ratios and the solver checks per
rule; it is not a test.

Two bare references are printed:

- ``bare``: the obligation alone, as a hand-written encoding would ask it;
- ``bare+lemmas``: the obligation with the pack's lemmas as facts, as verifier asks it once the
  lemmas are proved (``solve.lemma_facts``: the same answers, often far less work).

A pack whose rules are proved for any number of legs is checked here at its base bound only
(``--legs K``), since the bare check has no induction step.

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

from verifier.run import induct  # noqa: E402
from verifier.run.engine import CheckOptions, check_packs  # noqa: E402
from verifier.run.loader import load_all  # noqa: E402
from verifier.smt.encode import Encoding  # noqa: E402
from verifier.smt.solve import COMPARED, DEFAULT_RLIMIT, lemma_facts  # noqa: E402


def bare(pack, rule, bound: int, lemmas=()) -> tuple[float, str]:
    """CPU seconds of the encoding and one check of the rule's violation question."""
    t0 = time.process_time()
    ctx = z3.Context()
    enc = Encoding(pack, bound, ctx)
    given, expect = enc.given(rule), enc.expect(rule)
    for name in COMPARED:       # the same encoding as verifier's (it names these for replay)
        enc.name(name)
    facts = lemma_facts(enc, lemmas)
    s = z3.Solver(ctx=ctx)
    s.set("rlimit", DEFAULT_RLIMIT)
    s.add(*enc.constraints, *facts, given, z3.Not(expect))
    r = s.check()
    return time.process_time() - t0, str(r)


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
    T_bare = T_lem = T_ours = 0.0
    n_rules = n_checks = 0
    by_verdict: dict = {}
    for pack in packs:
        rules = pack.lemmas + pack.rules
        legs = max(induct.base_bound(pack, r, None, 4) for r in rules) if any(
            pack.unbounded_for(r) for r in rules) else None
        t0 = time.process_time()
        [res_pack] = check_packs([pack], CheckOptions(legs=legs, out=None))
        po = time.process_time() - t0
        results = {r.rule: r for r in res_pack.results}
        pb = pl = 0.0
        for rule in rules:
            res = results[rule.id]
            bound = pack.bound_for(rule, legs)
            tb, rb = bare(pack, rule, bound)
            tl, _ = bare(pack, rule, bound, pack.lemmas if rule.role == "rule" else ())
            pb, pl = pb + tb, pl + tl
            n_rules += 1
            n_checks += res.checks
            v = by_verdict.setdefault(res.verdict, [0.0, 0.0, 0, 0])
            v[0] += tb
            v[1] += res.seconds
            v[2] += 1
            v[3] += res.checks
            if args.verbose:
                print(f"  {pack.name}/{rule.id}: bare {tb:.3f} s ({rb}), bare+lemmas {tl:.3f} s, "
                      f"verifier {res.seconds:.3f} s ({res.verdict}, {res.checks} checks)")
        T_bare, T_lem, T_ours = T_bare + pb, T_lem + pl, T_ours + po
        print(f"{pack.name}: bare {pb:.2f} s, bare+lemmas {pl:.2f} s, verifier {po:.2f} s, "
              f"ratio {po / pb:.2f} ({po / pl:.2f} against bare+lemmas)")
    for verdict, (tb, to, n, c) in sorted(by_verdict.items()):
        print(f"verdict {verdict}: {n} rules, bare {tb:.2f} s, verifier {to:.2f} s (wall), "
              f"ratio {to / tb:.2f}, {c / n:.1f} checks a rule")
    print(f"total: {n_rules} rules, bare {T_bare:.2f} s CPU, bare+lemmas {T_lem:.2f} s CPU, "
          f"verifier {T_ours:.2f} s CPU, ratio {T_ours / T_bare:.2f} "
          f"({T_ours / T_lem:.2f} against bare+lemmas); {n_checks / n_rules:.1f} solver checks a rule")
    return 0


if __name__ == "__main__":
    sys.exit(main())
