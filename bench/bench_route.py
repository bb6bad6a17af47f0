"""Cost of a route of groups (DESIGN 4.10): the seconds of each rule of one rule set on routes
of N = 2, 3, 4 and 8 groups at the same bound of legs, and their ratio to N = 2. It is not a
test.

    .venv/bin/python bench/bench_route.py                 # N = 2, 3, 4, 8 at 2 legs
    .venv/bin/python bench/bench_route.py --legs 3 --groups 2 3 4
    .venv/bin/python bench/bench_route.py --rule list     # one rule only (a substring of its id)
    .venv/bin/python bench/bench_route.py --step          # the induction step alone (DESIGN 4.10)

With ``--step`` each rule's induction step at depth 1 is timed alone (no base case), the
envelope lemma of rules/route.toml assumed (its own step is timed as a row of its own): how the
state of a proof across hand-overs grows with the number of groups.

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


LEMMA = ("along(est.orientation, est.front - actual.front) <= lrbg.locacc + (if passage.seen == est.orientation "
         "or any(l in legs: l.motion == est.orientation) then actual.over_reading else 0 m) + (if passage.seen == "
         "flip(est.orientation) or any(l in legs: l.motion == flip(est.orientation)) then actual.under_reading else 0 m) "
         "and along(est.orientation, actual.front - est.front) <= lrbg.locacc + (if passage.seen == est.orientation or "
         "any(l in legs: l.motion == est.orientation) then actual.under_reading else 0 m) + (if passage.seen == "
         "flip(est.orientation) or any(l in legs: l.motion == flip(est.orientation)) then actual.over_reading else 0 m)")


def pack_text(groups: int, legs: int, lemma: bool = False) -> str:
    later = "".join(f'[[group]]\nnumber = {k}\ndistance = ["200 m", "2 km"]\n\n' for k in range(3, groups + 1))
    rules = "".join(f'[[rule]]\nid = "{rid}"\ntitle = "{rid}"\nexpect = "{expr}"\n\n' for rid, expr in RULES.items())
    return (f'[pack]\nname = "route-{groups}"\ntitle = "bench: {groups} groups"\nlegs = {legs}\n\n'
            f'[world]\ngroups = {groups}\nhistory = 2\ng2_distance = ["200 m", "2 km"]\ng2_side = "nominal"\n'
            f'leg_distance = ["0 m", "3 km"]\n\n{later}'
            '[[info]]\nid = "limit"\ngroup = 1\nat = "900 m"\nvalid = "nominal"\n\n'
            '[[info]]\nid = "stop"\ngroup = 2\nat = "400 m"\nvalid = "reverse"\n\n'
            + (f'[[lemma]]\nid = "estimate-envelope"\ntitle = "lemma"\ngiven = "passage.seen != unknown"\n'
               f'expect = "{LEMMA}"\n\n' if lemma else "") + rules)


def time_steps(pack) -> dict:
    """The induction step at depth 1 of the lemma, then of every rule with the lemma assumed:
    {id: (CPU seconds, proved/failed/unknown)}."""
    from verifier.check.unbounded import plan_for, rule_formulas
    from verifier.smt import induction
    lemma = pack.rule("estimate-envelope")
    out = {}
    for rule in (lemma, *pack.rules):
        lemmas = () if rule is lemma else (lemma,)
        plan = plan_for(pack, rule_formulas(rule) + [f for x in lemmas for f in rule_formulas(x)])
        t0 = time.process_time()
        st = induction.step(pack, rule, lemmas, plan, 1, minimise=False)
        out[rule.id] = (time.process_time() - t0, st.status)
    return out


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--legs", type=int, default=2)
    ap.add_argument("--groups", type=int, nargs="+", default=[2, 3, 4, 8])
    ap.add_argument("--rule", default="", help="only the rules whose id contains this")
    ap.add_argument("--timeout", type=float, default=120.0, help="per rule (default 120 s)")
    ap.add_argument("--step", action="store_true", help="time the induction step alone (depth 1)")
    args = ap.parse_args()
    table: dict = {}
    ids = list(RULES)
    for n in args.groups:
        text = pack_text(n, args.legs, lemma=args.step)
        pack = pack_from_source((f"route-{n}.toml", text, hashlib.sha256(text.encode()).hexdigest()))
        if args.step:
            for rid, (secs, status) in time_steps(pack).items():
                if args.rule in rid:
                    table[(rid, n)] = (secs, "holds" if status == "proved" else status)
                    print(f"  N={n} {rid}: step {status} {secs:.2f} s", flush=True)
            ids = ["estimate-envelope"] + list(RULES)
            continue
        for rule in pack.rules:
            if args.rule not in rule.id:
                continue
            t0 = time.process_time()
            res = check_packs([pack], CheckOptions(legs=args.legs, out=None, rules=(rule.id,),
                                                   timeout=args.timeout, jobs=1))[0].results[0]
            table[(rule.id, n)] = (time.process_time() - t0, res.verdict)
            print(f"  N={n} {rule.id}: {res.verdict} {table[(rule.id, n)][0]:.2f} s", flush=True)
    base = args.groups[0]
    what = "the induction step at depth 1" if args.step else f"legs {args.legs}"
    print(f"\n{what}; CPU seconds per rule, and the ratio to N = {base}")
    print(f"{'rule':32}" + "".join(f"{'N=' + str(n):>16}" for n in args.groups))
    totals = {n: 0.0 for n in args.groups}
    for rid in ids:
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
