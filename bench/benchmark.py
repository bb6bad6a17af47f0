"""Benchmark: how long the shipped packs take, how much of it is the solver, and how the time
grows with the bound. Prints figures side by side in one run; it is not a test.

    .venv/bin/python bench/benchmark.py            # all of rules/, K = 1, 2, 4, 8
    .venv/bin/python bench/benchmark.py --quick    # K = 1, 2 only

It also times the proofs for any number of legs (DESIGN 4.7) of the packs that ask for them
against the bounded check of the same packs at K = 3.

Ratios, not absolute times, are what to compare between machines.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from verifier.api import CheckOptions, check_packs  # noqa: E402
from verifier.run.loader import load_all  # noqa: E402


def run(packs, legs=None):
    t0 = time.perf_counter()
    results = check_packs(packs, CheckOptions(legs=legs, out=None))
    total = time.perf_counter() - t0
    rules = [r for p in results for r in p.results]
    solver = sum(r.solver_seconds for r in rules)
    verdicts = {}
    for r in rules:
        verdicts[r.verdict] = verdicts.get(r.verdict, 0) + 1
    return total, solver, len(rules), verdicts


def two_groups_vs_one(packs, legs: int = 2) -> None:
    """The two-group packs against the one-group packs at the same bound: seconds per rule."""
    two = [p for p in packs if p.scope.groups == 2 and "/demo/" not in p.path]
    one = [p for p in packs if p.scope.groups == 1 and "/demo/" not in p.path]
    if not two or not one:
        return
    t2, _, n2, v2 = run(two, legs=legs)
    t1, _, n1, v1 = run(one, legs=legs)
    print(f"two groups at K = {legs}: {n2} rules in {t2:.2f} s ({t2 / n2:.3f} s a rule, {v2}); one group: "
          f"{n1} rules in {t1:.2f} s ({t1 / n1:.3f} s a rule); ratio per rule = {(t2 / n2) / (t1 / n1):.2f}")


def any_vs_bounded(packs) -> None:
    """Each pack with rules for any number of legs: the whole proof (base case up to 3 legs,
    lemmas, induction steps) against the bounded check at K = 3, and how many rules and lemmas
    the proof covers."""
    for pack in packs:
        if not any(pack.unbounded_for(r) for r in pack.rules + pack.lemmas):
            continue
        t_any, _, n, verdicts = run([pack])
        t_k3, _, _, _ = run([pack], legs=3)
        results = check_packs([pack], CheckOptions(out=None))[0].results
        proved = sum(1 for r in results if r.unbounded)
        print(f"any number of legs, {pack.name}: {t_any:6.2f} s for {n} rules and lemmas "
              f"({proved} proved for any number, {verdicts}); bounded K = 3: {t_k3:6.2f} s; "
              f"ratio any / K=3 = {t_any / t_k3:.2f}")


def without_lemmas(packs) -> None:
    """Each rule of a pack for any number of legs, proved with the pack's lemmas taken out:
    what a user meets who has not written the lemma yet (the induction step fails, the base
    case is deepened within its budget, the answer is bounded)."""
    import tempfile

    from verifier.run.loader import load_pack
    for pack in packs:
        if not pack.lemmas or not any(pack.unbounded_for(r) for r in pack.rules):
            continue
        text = Path(pack.path).read_text(encoding="utf-8")
        if text.rfind("[[lemma]]") > text.index("[[rule]]"):
            continue                   # lemmas among the rules: not cut out here
        bare = text[:text.index("[[lemma]]")] + text[text.index("[[rule]]"):]
        with tempfile.TemporaryDirectory() as tmp:
            path = Path(tmp) / Path(pack.path).name
            path.write_text(bare, encoding="utf-8")
            stripped = load_pack(path)
            worst = (0.0, "")
            t0 = time.perf_counter()
            for res in check_packs([stripped], CheckOptions(out=None))[0].results:
                worst = max(worst, (res.seconds, f"{res.rule} ({res.verdict})"))
            total = time.perf_counter() - t0
        print(f"any number of legs without lemmas, {pack.name}: {total:6.2f} s for "
              f"{len(stripped.rules)} rules; slowest {worst[1]} {worst[0]:.2f} s")


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("paths", nargs="*", default=[str(ROOT / "rules")])
    ap.add_argument("--quick", action="store_true", help="bounds 1 and 2 only")
    args = ap.parse_args()
    packs, diags = load_all(args.paths)
    if any(d.severity == "error" for d in diags):
        for d in diags:
            print(d.render(), file=sys.stderr)
        return 2
    print(f"packs: {', '.join(p.name for p in packs)}")
    total, solver, n, verdicts = run(packs)
    print(f"default bounds: {n} rules in {total:.2f} s; inside the solver {solver:.2f} s; "
          f"solver / total = {solver / total:.2f}; {verdicts}")
    bounds = (1, 2) if args.quick else (1, 2, 4, 8)
    times = {}
    for k in bounds:
        t, s, n, v = run(packs, legs=k)
        times[k] = t
        print(f"K = {k}: {t:7.2f} s total, {s:7.2f} s solver ({s / t:.2f}), {v}")
    base = times[bounds[0]]
    print("growth: " + ", ".join(f"K={k}: x{times[k] / base:.1f}" for k in bounds)
          + (f"; K=8 / K=4 = x{times[8] / times[4]:.2f}" if 8 in times else ""))
    any_vs_bounded(packs)
    if not args.quick:
        without_lemmas(packs)
    two_groups_vs_one(packs)
    try:
        from bench_edits import report as edits_report  # added by the cache/jobs work
    except ImportError:
        return 0
    edits_report(packs)
    return 0


if __name__ == "__main__":
    sys.exit(main())
