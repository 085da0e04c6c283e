"""couplint against the bare geometry pipeline, in paired runs on one machine.

For each round, in alternating order, two fresh processes on the same
seeded synthetic two-layer board (``scripts/synth.py``):

* **couplint**: the full check of ``scripts/bench.py`` (finder,
  capacitance, noise, the five coupling rule kinds, the JSON report written
  to a file);
* **bare**: ``scripts/bare_pipeline.py`` (every overlapping broadside pair
  and every edge pair within 1 mm, exact areas and run lengths).

CPU time is the child's user + system time (all its threads and any
processes it starts), measured by the parent with ``RUSAGE_CHILDREN``;
peak memory is the child's own maximum RSS. The machine is shared, so
only figures from the same round are compared.

    python scripts/bench_paired.py 100000 --rounds 3
    python scripts/bench_paired.py 1000000 --cold    # couplint with an empty solve cache each run
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent


def _child(argv: list[str], env: dict) -> tuple[dict, float]:
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    proc = subprocess.run([sys.executable, *argv], capture_output=True, text=True, env=env)
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    if proc.returncode:
        sys.exit(f"{' '.join(argv)} failed:\n{proc.stderr[-3000:]}")
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return json.loads(proc.stdout.strip().splitlines()[-1]), cpu


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("n", type=int, help="pieces per layer")
    ap.add_argument("--rounds", type=int, default=1)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--cold", action="store_true", help="couplint starts each run with an empty solve cache")
    args = ap.parse_args(argv)
    ratios = []
    with tempfile.TemporaryDirectory() as tmp:
        for r in range(args.rounds):
            env = dict(os.environ)
            if args.cold:
                env["COUPLINT_CACHE_DIR"] = str(Path(tmp) / f"cache-{r}")
            runs = [("couplint", [str(HERE / "bench.py"), "--one", str(args.n), "--seed", str(args.seed)]),
                    ("bare", [str(HERE / "bare_pipeline.py"), str(args.n), "--seed", str(args.seed)])]
            if r % 2:
                runs.reverse()
            got = {}
            for name, child_argv in runs:
                figures, cpu = _child(child_argv, env)
                got[name] = (figures, cpu)
            (c, c_cpu), (b, b_cpu) = got["couplint"], got["bare"]
            ratio = c_cpu / b_cpu
            ratios.append(ratio)
            print(f"round {r + 1}: {args.n:,} pieces/layer | couplint {c_cpu:.2f} CPU-s ({c['seconds']:.2f} s wall, "
                  f"peak {c['peak_mb']:,.0f} MB, report {c['report_mb']:,.0f} MB, {c['findings']:,} findings) | "
                  f"bare {b_cpu:.2f} CPU-s ({b['seconds']:.2f} s wall, peak {b['peak_mb']:,.0f} MB) | "
                  f"ratio {ratio:.2f}", flush=True)
    if len(ratios) > 1:
        print(f"ratio over {len(ratios)} rounds: median {statistics.median(ratios):.2f}, "
              f"range {min(ratios):.2f}-{max(ratios):.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
