"""Throughput on a Dask cluster against local worker processes: `mutate` (the first mutants of a
small pack) and the differential sweep, each run

- locally with ``--jobs 1`` (in-process) and ``--jobs 2`` (two worker processes), and
- on a LocalCluster of 1 and of 2 single-threaded worker processes (``--executor dask``),

printing wall seconds and each run's ratio to ``--jobs 1`` (above 1: faster). The cluster's
start-up (a few seconds) is counted, as a user without a standing cluster pays it; the line
"cluster start" says how much it is. It is not a test: it needs the extra ``verifier[dask]``.

    .venv/bin/python bench/bench_cluster.py                 # mutants 24, worlds 400
    .venv/bin/python bench/bench_cluster.py --mutants 40 --worlds 2000

Ratios, not absolute times, are what to compare between machines; on a machine of 2 cores the
client shares them with the workers.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from verifier.run.executor import ExecutorSpec, open_executor  # noqa: E402
from verifier.run.loader import load_pack  # noqa: E402
from verifier.trust import mutate  # noqa: E402
from verifier.trust.differential import run_differential  # noqa: E402

MUTANT_PACK = ROOT / "tests" / "packs" / "diff-mutants.toml"
SWEEP_PACKS = [str(ROOT / "tests" / "packs" / "diff-basic.toml"), str(ROOT / "rules" / "position-report.toml")]
RUNS = [("--jobs 1", ExecutorSpec("local", 1)), ("--jobs 2", ExecutorSpec("local", 2)),
        ("dask, 1 worker", ExecutorSpec("dask", 1)), ("dask, 2 workers", ExecutorSpec("dask", 2))]


def mutants_run(spec: ExecutorSpec, limit: int) -> tuple[float, dict]:
    pack = load_pack(MUTANT_PACK)
    t0 = time.monotonic()
    if spec.parallel:
        with open_executor(spec) as ex:
            rep = mutate.run_mutants(pack, timeout=20, limit=limit, executor=ex)
    else:
        rep = mutate.run_mutants(pack, timeout=20, limit=limit)
    return time.monotonic() - t0, rep.counts()


def sweep_run(spec: ExecutorSpec, worlds: int) -> tuple[float, int]:
    t0 = time.monotonic()
    # two batches whatever the executor (the report depends on the batches, not on the workers)
    rep = run_differential(SWEEP_PACKS, worlds, seed=11, workers=2,
                           executor=spec if spec.parallel else ExecutorSpec("local", 1))
    return time.monotonic() - t0, rep.worlds


def cluster_start() -> float:
    t0 = time.monotonic()
    with open_executor(ExecutorSpec("dask", 2)):
        pass
    return time.monotonic() - t0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--mutants", type=int, default=24)
    ap.add_argument("--worlds", type=int, default=400)
    args = ap.parse_args()
    print(f"cluster start (LocalCluster of 2 workers, opened and closed): {cluster_start():.1f} s")
    for title, run, size in (("mutate", mutants_run, args.mutants), ("differential sweep", sweep_run, args.worlds)):
        base = None
        for name, spec in RUNS:
            seconds, what = run(spec, size)
            base = base or seconds
            print(f"{title:<18} {name:<16} {seconds:7.1f} s  x{base / seconds:4.2f}  {what}")


if __name__ == "__main__":
    main()
