"""Benchmark of the coupling finder on synthetic boards (scripts/synth.py).

For each size (pieces per layer) it times, on layers 0 and 1:
find_broadside(0, 1), find_edge(0), find_edge(1) and run_labels over all the
pairs found, and prints wall times, pieces per second, candidate box pairs,
pairs kept and the peak resident memory of the process.

    python scripts/bench_finder.py 10000 100000 1000000 [--search 0.5] [--seed 1]
        [--workers N]

Wall times on a shared machine vary; the process CPU time is printed too.
"""

from __future__ import annotations

import argparse
import resource
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from synth import make_pieces  # noqa: E402

from checker.finder import find_broadside, find_edge, run_labels  # noqa: E402
from checker.finder import index as finder_index  # noqa: E402


def _peak_mb() -> float:
    # Linux reports ru_maxrss in kilobytes
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


class _CountCandidates:
    """Wraps the box search to count the candidate pairs it yields."""

    def __init__(self) -> None:
        self.count = 0
        self._inner = finder_index.overlapping_pairs

    def __call__(self, *args, **kwargs):
        for ia, ib in self._inner(*args, **kwargs):
            self.count += ia.size
            yield ia, ib


def run(n: int, seed: int, search: float, workers: int | None = None) -> dict:
    from checker.finder import pairs as finder_pairs

    pieces = make_pieces(n, seed)
    base = _peak_mb()
    counter = _CountCandidates()
    finder_pairs.overlapping_pairs = counter
    times = {}
    try:
        cpu0 = time.process_time()
        t0 = time.perf_counter()
        bs = find_broadside(pieces, 0, 1, search, workers=workers)
        times["broadside"] = time.perf_counter() - t0
        t = time.perf_counter()
        e0 = find_edge(pieces, 0, search, workers=workers)
        times["edge0"] = time.perf_counter() - t
        t = time.perf_counter()
        e1 = find_edge(pieces, 1, search, workers=workers)
        times["edge1"] = time.perf_counter() - t
        t = time.perf_counter()
        a = np.concatenate([bs.a, e0.a, e1.a])
        b = np.concatenate([bs.b, e0.b, e1.b])
        labels = run_labels(pieces, a, b)
        times["runs"] = time.perf_counter() - t
        total = time.perf_counter() - t0
        cpu = time.process_time() - cpu0
    finally:
        finder_pairs.overlapping_pairs = counter._inner
    return dict(n=n, total=total, cpu=cpu, times=times, candidates=counter.count,
                kept=(len(bs), len(e0), len(e1)), runs=int(labels.max()) + 1 if labels.size else 0,
                peak_mb=_peak_mb(), base_mb=base)


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("sizes", nargs="*", type=int, default=[10_000, 100_000],
                    help="pieces per layer (default: 10000 100000)")
    ap.add_argument("--search", type=float, default=0.5, help="search distance, mm (0.5)")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--workers", type=int, default=None,
                    help="measuring threads (default: finder's choice)")
    args = ap.parse_args(argv)
    prev = None
    for n in args.sizes:
        r = run(n, args.seed, args.search, args.workers)
        t = r["times"]
        print(f"n/layer {n:>9,}: total {r['total']:7.2f} s  "
              f"(broadside {t['broadside']:.2f}, edge0 {t['edge0']:.2f}, "
              f"edge1 {t['edge1']:.2f}, runs {t['runs']:.2f})  "
              f"{2 * n / r['total']:,.0f} pieces/s  cpu {r['cpu']:.2f} s")
        print(f"    candidate pairs (grown boxes overlap) {r['candidates']:,}  kept broadside {r['kept'][0]:,}  "
              f"edge0 {r['kept'][1]:,}  edge1 {r['kept'][2]:,}  runs {r['runs']:,}  "
              f"peak RSS {r['peak_mb']:,.0f} MB (after building pieces {r['base_mb']:,.0f} MB)")
        if prev is not None:
            print(f"    scaling x{n / prev['n']:.0f} pieces -> x{r['total'] / prev['total']:.1f} time")
        prev = r


if __name__ == "__main__":
    main()
