"""How long ``verifier.run.loader.discover`` takes over many pack files (it was quadratic: each new
file was compared with every file kept so far, resolving both paths each time).

    .venv/bin/python bench/bench_discover.py            # 1,000 and 2,000 packs
    .venv/bin/python bench/bench_discover.py 500 4000   # other sizes
    .venv/bin/python bench/bench_discover.py --once     # the folder named once (no duplicates)

The packs are empty files in a temporary folder (discover does not read them); the folder is
named twice, so every file is also found a second time and must be dropped as a duplicate.
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from verifier.run.loader import discover  # noqa: E402


def measure(n: int, once: bool = False) -> tuple[float, int]:
    with tempfile.TemporaryDirectory(prefix="verifier-discover-") as tmp:
        base = Path(tmp)
        for i in range(n):
            (base / f"pack-{i:05d}.toml").write_text("")
        (base / "sub").mkdir()
        t0 = time.perf_counter()
        found = discover([base] if once else [base, base / "sub" / ".."])
        return time.perf_counter() - t0, len(found)


def main(argv) -> None:
    once = "--once" in argv
    for n in [int(a) for a in argv if a != "--once"] or [1000, 2000]:
        seconds, found = measure(n, once)
        assert found == n, (found, n)
        print(f"discover: {n:6d} packs ({'found once' if once else 'each found twice'}) in {seconds:8.3f} s")


if __name__ == "__main__":
    main(sys.argv[1:])
