"""Cost of `verifier margin` against the plain check: for each rule of the shipped packs that
holds, the seconds of its margins (slack, the thresholds of the `--vary` keys, the assumptions)
against the seconds of its check at the same bound (the ratio), and the solver checks the
threshold searches took. It is not a test.

    .venv/bin/python bench/bench_margin.py                        # rules/*.toml at 1 leg, every default key
    .venv/bin/python bench/bench_margin.py --legs 2 --vary detection rules/confidence-interval.toml
    .venv/bin/python bench/bench_margin.py --quick                # detection and odometry_over.rate only

Ratios, not absolute times, are what to compare between machines.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from verifier.lang.scope import VARY_DEFAULT  # noqa: E402
from verifier.run.engine import CheckOptions, check_packs  # noqa: E402
from verifier.run.loader import load_all  # noqa: E402
from verifier.run.margin import MarginOptions, margins  # noqa: E402


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("paths", nargs="*", default=sorted(str(p) for p in (ROOT / "rules").glob("*.toml")))
    ap.add_argument("--legs", type=int, default=1)
    ap.add_argument("--vary", action="append")
    ap.add_argument("--quick", action="store_true", help="vary detection and odometry_over.rate only")
    args = ap.parse_args()
    vary = tuple(args.vary) if args.vary else (("detection", "odometry_over.rate") if args.quick else VARY_DEFAULT)
    packs, diags = load_all(args.paths)
    if diags:
        for d in diags:
            print(d.render(), file=sys.stderr)
    total_check = total_margin = 0.0
    rules = 0
    print(f"legs {args.legs}; vary {', '.join(vary)}")
    print(f"{'pack/rule':60} {'check s':>8} {'margin s':>9} {'ratio':>7} {'checks':>7}")
    for pack in packs:
        # the plain check, one rule at a time, as `verifier check --legs K --no-cache --no-files`
        t0 = time.process_time()
        checked = check_packs([pack], CheckOptions(legs=args.legs, out=None, witness=True))[0]
        plain = {r.rule: r.seconds for r in checked.results}
        plain_total = time.process_time() - t0
        t0 = time.process_time()
        run = margins(pack, MarginOptions(legs=args.legs, vary=vary, out=None))
        spent = time.process_time() - t0
        for m in run.rules:
            if m.verdict != "holds":
                continue
            rules += 1
            c = plain.get(m.rule, 0.0)
            total_check += c
            total_margin += m.seconds
            n = sum(t.checks for t in m.thresholds)
            print(f"{pack.name + '/' + m.rule:60} {c:8.2f} {m.seconds:9.2f} {m.seconds / max(c, 1e-3):7.0f} {n:7d}")
        print(f"  {pack.name}: check {plain_total:.1f} s CPU, margin {spent:.1f} s CPU "
              f"(its own check included), ratio {spent / max(plain_total, 1e-3):.1f}")
    print(f"total: {rules} rules that hold; their checks {total_check:.1f} s, their margins "
          f"{total_margin:.1f} s, ratio {total_margin / max(total_check, 1e-3):.1f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
