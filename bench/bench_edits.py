"""Benchmark figures for rule edits, called by bench/benchmark.py (``report(packs)``):

- the re-check time after a one-rule edit, with and without the verdict cache;
- the same after an edit of one onboard formula (only the rules that reach it are solved again);
- the speed-up of ``--jobs 2`` over ``--jobs 1`` on a full check without cache.

Also runnable on its own: ``.venv/bin/python bench/bench_edits.py [PATH...]``.
Ratios, not absolute times, are what to compare between machines.
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from verifier.run.cache import Cache  # noqa: E402
from verifier.check.typer import check_pack  # noqa: E402
from verifier.api import CheckOptions, check_packs  # noqa: E402
from verifier.lang.pack import parse_pack_text  # noqa: E402
from verifier.run.loader import load_all  # noqa: E402


def edit_one_rule(packs):
    """The packs with the first rule's expect X rewritten as (X) or false: same meaning,
    new text, so exactly that rule's cache key changes. Returns (packs, "pack/rule")."""
    for i, pack in enumerate(packs):
        if not pack.rules:
            continue
        rule = pack.rules[0]
        old = f'expect = "{rule.expect.text}"'
        if pack.text.count(old) != 1:
            continue
        text = pack.text.replace(old, f'expect = "({rule.expect.text}) or false"')
        edited = check_pack(parse_pack_text(text, pack.path))
        return packs[:i] + [edited] + packs[i + 1:], f"{pack.name}/{rule.id}"
    raise SystemExit("bench_edits: no rule with a one-line expect to edit")


def edit_one_design(packs):
    """The packs with the first pack-written onboard formula X rewritten as (X): same meaning,
    new text. Returns (packs, "pack/onboard.name") or None when no pack writes one."""
    for i, pack in enumerate(packs):
        for name, formula in sorted(pack.onboard.items()):
            old = f'{name} = "{formula.text}"'
            if pack.text.count(old) != 1:
                continue
            text = pack.text.replace(old, f'{name} = "({formula.text})"')
            edited = check_pack(parse_pack_text(text, pack.path))
            return packs[:i] + [edited] + packs[i + 1:], f"{pack.name}/onboard.{name}"
    return None


def _cached_recheck(packs, edited):
    with tempfile.TemporaryDirectory(prefix="verifier-bench-cache-") as tmp:
        _timed(packs, cache=Cache(Path(tmp)))                       # fills the cache
        cached = Cache(Path(tmp))
        t, results = _timed(edited, cache=cached)
    return t, results, cached


def _timed(packs, **kw):
    t0 = time.perf_counter()
    results = check_packs(packs, CheckOptions(out=None, **kw))
    return time.perf_counter() - t0, [(r.rule, r.verdict, r.witness) for p in results for r in p.results]


def report(packs) -> None:
    print("--- rule edits: cache and --jobs ---")
    n = sum(len(p.rules) for p in packs)
    edited, which = edit_one_rule(packs)
    with tempfile.TemporaryDirectory(prefix="verifier-bench-cache-") as tmp:
        cold, base = _timed(packs, cache=Cache(Path(tmp)))          # fills the cache
        cached = Cache(Path(tmp))
        t_cache, with_cache = _timed(edited, cache=cached)
    t_plain, without = _timed(edited)
    t_jobs2, jobs2 = _timed(edited, jobs=2)
    same = with_cache == without == jobs2
    print(f"{n} rules; cold check filling the cache: {cold:.2f} s")
    print(f"re-check after editing {which}: {t_cache:.2f} s with the cache "
          f"({cached.misses} solved, {cached.hits} from the cache), {t_plain:.2f} s without; "
          f"cache / no cache = {t_cache / t_plain:.3f}")
    print(f"--jobs 2: {t_jobs2:.2f} s against {t_plain:.2f} s for --jobs 1: "
          f"speed-up x{t_plain / t_jobs2:.2f}")
    print(f"identical verdicts and witnesses in the three runs: {same}")
    design = edit_one_design(packs)
    if design is not None:
        edited, which = design
        t_cache, with_cache, cached = _cached_recheck(packs, edited)
        t_plain, without = _timed(edited)
        print(f"re-check after editing {which}: {t_cache:.2f} s with the cache "
              f"({cached.misses} solved, {cached.hits} from the cache), {t_plain:.2f} s without; "
              f"cache / no cache = {t_cache / t_plain:.3f}; identical results: {with_cache == without}")


def main() -> int:
    packs, diags = load_all(sys.argv[1:] or [str(ROOT / "rules")])
    if any(d.severity == "error" for d in diags):
        for d in diags:
            print(d.render(), file=sys.stderr)
        return 2
    report(packs)
    return 0


if __name__ == "__main__":
    sys.exit(main())
