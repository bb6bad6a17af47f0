"""Cost of a route of groups (DESIGN 4.10): the seconds of each rule of one rule set on routes
of N = 2, 3, 4 and 8 groups at the same bound of legs, and their ratio to N = 2. It is not a
test.

    .venv/bin/python bench/bench_route.py                 # N = 2, 3, 4, 8 at 2 legs
    .venv/bin/python bench/bench_route.py --legs 3 --groups 2 3 4
    .venv/bin/python bench/bench_route.py --rule list     # one rule only (a substring of its id)

Every pack has the same rules, items referred to G1 and G2, a list of two LRBGs, groups 200 m to
2 km apart, and the default design; each rule is checked as `verifier check --no-cache
--no-files` does it (the proof, its witness and the witness's minimal world), serially, and the
CPU seconds are summed per rule. Ratios, not absolute times, are what to compare between
machines.
"""

from __future__ import annotations

import argparse
import hashlib
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from verifier.run.engine import CheckOptions, check_packs  # noqa: E402
from verifier.run.loader import pack_from_source  # noqa: E402

RULES = {
    "previous-lrbg-is-earlier":
        "(lrbg.group == 1) == (lrbg.previous == 0) and lrbg.previous < lrbg.group",
    "list-holds-the-lrbg":
        "lrbg.remembered >= 1 and lrbg.remembered <= world.history and (lrbg.group == 1 implies g1.remembered)",
    "forgotten-item-rejected":
        "not g1.remembered implies not info.limit.accepted",
    "items-placed-where-they-are":
        "(info.limit.accepted implies info.limit.position == info.limit.real) and "
        "(info.stop.accepted implies info.stop.position == info.stop.real)",
    "doubts-restart":
        "(lrbg.group >= 2 and passage.seen != unknown and legs.count == 0) implies "
        "est.l_doubtover == lrbg.locacc + world.detection + (if passage.running == forward then "
        "world.odometry_over.fixed else world.odometry_under.fixed)",
    "real-front-inside-the-interval":
        "rbc.placed implies (along(report.q_dirlrbg, actual.front - rbc.min_safe_front) >= 0 m and "
        "along(report.q_dirlrbg, rbc.max_safe_front - actual.front) >= 0 m)",
}


def pack_text(groups: int, legs: int) -> str:
    later = "".join(f'[[group]]\nnumber = {k}\ndistance = ["200 m", "2 km"]\n\n' for k in range(3, groups + 1))
    rules = "".join(f'[[rule]]\nid = "{rid}"\ntitle = "{rid}"\nexpect = "{expr}"\n\n' for rid, expr in RULES.items())
    return (f'[pack]\nname = "route-{groups}"\ntitle = "bench: {groups} groups"\nlegs = {legs}\n\n'
            f'[world]\ngroups = {groups}\nhistory = 2\ng2_distance = ["200 m", "2 km"]\ng2_side = "nominal"\n'
            f'leg_distance = ["0 m", "3 km"]\n\n{later}'
            '[[info]]\nid = "limit"\ngroup = 1\nat = "900 m"\nvalid = "nominal"\n\n'
            '[[info]]\nid = "stop"\ngroup = 2\nat = "400 m"\nvalid = "reverse"\n\n' + rules)


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--legs", type=int, default=2)
    ap.add_argument("--groups", type=int, nargs="+", default=[2, 3, 4, 8])
    ap.add_argument("--rule", default="", help="only the rules whose id contains this")
    ap.add_argument("--timeout", type=float, default=120.0, help="per rule (default 120 s)")
    args = ap.parse_args()
    table: dict = {}
    for n in args.groups:
        text = pack_text(n, args.legs)
        pack = pack_from_source((f"route-{n}.toml", text, hashlib.sha256(text.encode()).hexdigest()))
        for rule in pack.rules:
            if args.rule not in rule.id:
                continue
            t0 = time.process_time()
            res = check_packs([pack], CheckOptions(legs=args.legs, out=None, rules=(rule.id,),
                                                   timeout=args.timeout, jobs=1))[0].results[0]
            table[(rule.id, n)] = (time.process_time() - t0, res.verdict)
            print(f"  N={n} {rule.id}: {res.verdict} {table[(rule.id, n)][0]:.2f} s", flush=True)
    base = args.groups[0]
    print(f"\nlegs {args.legs}; CPU seconds per rule, and the ratio to N = {base}")
    print(f"{'rule':32}" + "".join(f"{'N=' + str(n):>16}" for n in args.groups))
    totals = {n: 0.0 for n in args.groups}
    for rid in RULES:
        if args.rule not in rid:
            continue
        row = f"{rid:32}"
        for n in args.groups:
            secs, verdict = table[(rid, n)]
            totals[n] += secs
            ratio = secs / table[(rid, base)][0] if table[(rid, base)][0] else 0
            mark = "" if verdict == "holds" else f" {verdict}"
            row += f"{secs:8.2f} x{ratio:5.1f}{mark:>2}"
        print(row)
    print(f"{'all':32}" + "".join(f"{totals[n]:8.2f} x{totals[n] / totals[base]:5.1f}  " for n in args.groups))
    return 0


if __name__ == "__main__":
    sys.exit(main())
