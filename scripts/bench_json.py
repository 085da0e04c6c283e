"""Reading a large neutral board JSON file: ``load_board`` on N two-point tracks.

Writes a seeded, invented board (two signal layers, 5 000 nets, N tracks of
0.1-2.1 mm at random places on 200 x 200 mm, coordinates with 4 decimals,
compact separators as a program would write it) to a temporary file, then
times ``checker.readers.load_board`` on it ``--runs`` times in this process
(the first run pays the imports of the quick path) and prints the median
and range, the file size and the peak RSS.

    python scripts/bench_json.py                 # 1 000 000 tracks, 3 runs
    python scripts/bench_json.py 200000 --runs 5

Floor (issue 15): 1 M tracks in 5 s.
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))


def write_board(path: Path, n: int, seed: int) -> None:
    rng = np.random.default_rng(seed)
    x = np.round(rng.random(n) * 200, 4)
    y = np.round(rng.random(n) * 200, 4)
    length = np.round(0.1 + rng.random(n) * 2, 4)
    nets = [f"N{i}" for i in range(5000)]
    head = ('{"format":"couplint-board","version":1,"units":"mm","name":"bench-json",'
            '"stackup":[{"copper":"TOP","role":"signal","thickness":0.035},'
            '{"dielectric":"core","thickness":0.2,"er":4.3},'
            '{"copper":"BOT","role":"signal","thickness":0.035}],'
            '"nets":[' + ",".join(f'{{"name":"{name}"}}' for name in nets) + '],"tracks":[')
    with open(path, "w", encoding="utf-8") as out:
        out.write(head)
        for i in range(n):
            x0, y0, x1 = float(x[i]), float(y[i]), float(round(x[i] + length[i], 4))
            layer = "TOP" if i % 2 else "BOT"
            out.write(("," if i else "") + f'{{"layer":"{layer}","net":"{nets[i % 5000]}","width":0.15,'
                      f'"points":[[{x0!r},{y0!r}],[{x1!r},{y0!r}]]}}')
        out.write("]}")


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("n", nargs="?", type=int, default=1_000_000, help="tracks (default 1 000 000)")
    ap.add_argument("--runs", type=int, default=3)
    ap.add_argument("--seed", type=int, default=1)
    args = ap.parse_args(argv)
    from checker.readers import load_board

    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "bench.json"
        write_board(path, args.n, args.seed)
        size_mb = os.path.getsize(path) / 1e6
        times = []
        for _ in range(args.runs):
            t0 = time.perf_counter()
            board = load_board(path)
            times.append(time.perf_counter() - t0)
            pieces = len(board.pieces)
            del board
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"{args.n:,} tracks ({size_mb:.0f} MB, {pieces:,} pieces): "
          f"load_board median {statistics.median(times):.2f} s "
          f"(range {min(times):.2f}-{max(times):.2f} s over {args.runs} runs), peak RSS {peak:,.0f} MB")


if __name__ == "__main__":
    main()
