"""Benchmark of `verifier test` (checking an implementation against a pack). Prints figures; it
is not a test.

    .venv/bin/python bench/bench_impl.py

1. Worlds per second: a trivial implementation (constant codes) and the reference one, every
   rule of the pack evaluated in each world (the implementation's call, the simulator, the rules).
2. Seeded bugs (examples/kestrel_onboard_buggy.py): how many of the rules each bug breaks are
   found by the solver's worlds (boundary worlds and witnesses of every rule) against Hypothesis
   alone given the same number of worlds, and ten times as many.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from hypothesis import HealthCheck, given, settings  # noqa: E402

from verifier.implcheck import interface  # noqa: E402
from verifier.implcheck.runner import Checker, solver_worlds  # noqa: E402
from verifier.run.loader import load_pack  # noqa: E402
from verifier.trust.strategies import worlds  # noqa: E402

TRIVIAL = dict(q_scale=1, d_lrbg=0, q_dlrbg=1, q_dirlrbg=1, q_dirtrain=1, l_doubtover=10, l_doubtunder=10)


def trivial(obs):
    return TRIVIAL


def generated(pack, n: int, bound: int) -> list:
    out = []

    @settings(max_examples=n, deadline=None, database=None, derandomize=True,
              suppress_health_check=list(HealthCheck))
    @given(worlds(pack.scope, bound))
    def draw(w):
        out.append(w)
    draw()
    return out


def rate(pack, loaded, ws) -> float:
    chk = Checker(pack, loaded)
    t0 = time.perf_counter()
    for w in ws:
        for r in pack.rules:
            chk.outcome(r, w)
    return len(ws) / (time.perf_counter() - t0)


def found(pack, loaded, ws) -> set:
    chk = Checker(pack, loaded)
    return {r.id for w in ws for r in pack.rules if chk.outcome(r, w) == "fail"}


def main() -> int:
    sys.path.insert(0, str(ROOT / "examples"))
    packs = [load_pack(ROOT / "rules" / f"{n}.toml") for n in ("position-report", "confidence-interval")]
    ref = interface.load("kestrel_onboard:report")
    print("--- worlds per second (every rule of the pack in each world) ---")
    for pack in packs:
        ws = generated(pack, 2000, 3)
        print(f"{pack.name}: trivial implementation {rate(pack, interface.wrap(trivial), ws):7.0f} worlds/s; "
              f"reference {rate(pack, ref, ws):7.0f} worlds/s ({len(ws)} worlds, {len(pack.rules)} rules)")
    print("--- seeded bugs: rules found broken, solver worlds against Hypothesis alone ---")
    for pack in packs:
        t0 = time.perf_counter()
        seeds = [w for w, _ in solver_worlds(pack, pack.rules, 3)]
        t_seeds = time.perf_counter() - t0
        n = len(seeds)
        same, ten = generated(pack, n, 3), generated(pack, 10 * n, 3)
        print(f"{pack.name}: {n} solver worlds ({t_seeds:.1f} s to find them)")
        for bug in ("cab", "round", "side"):
            loaded = interface.load(f"kestrel_onboard_buggy:report_{bug}")
            a, b, c = found(pack, loaded, seeds), found(pack, loaded, same), found(pack, loaded, ten)
            every = a | b | c
            print(f"  bug {bug:<5}: {len(every)} rules broken in all; solver worlds find {len(a)}, "
                  f"Hypothesis with {n} worlds {len(b)}, with {10 * n} worlds {len(c)}"
                  + (f"; only the solver's: {', '.join(sorted(a - b - c))}" if a - b - c else ""))
    return 0


if __name__ == "__main__":
    sys.exit(main())
