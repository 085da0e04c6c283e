"""Full-pipeline benchmark: find, estimate, check and report a synthetic board.

For each size (pieces per layer, two neighbouring signal layers without a
plane between them), builds a seeded synthetic board (``scripts/synth.py``)
and times the complete check: broadside search between the layers, edge
search on both, capacitance and noise, every rule kind of
``BENCH_RULES`` and the JSON report. Each size runs in a fresh process so
its peak memory (max RSS) is its own.

    python scripts/bench.py                    # 10k, 100k, 1M
    python scripts/bench.py 100000 --seed 3

Floors (issue 2): 1M pieces per layer in under 40 s and 3 GB on a 2-core
machine; 100k -> 1M costs no more than 12x the time.
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "scripts"))

#: Net classes catch about a tenth of the synthetic nets each (names end in
#: 1 or 7), so every rule kind has real work to do.
BENCH_RULES = """
version: 1
net_classes:
  aggressors:
    nets: ["*1"]
    swing: 3.3 V
    rise_time: 1 ns
  victims:
    nets: ["*7"]
    resistance: 10 kohm
    node_capacitance: 5 pF
rules:
  - {name: cross, kind: crossing-angle, aggressor: aggressors, victim: victims, min_angle: 60 deg, max_length: 2 mm}
  - {name: three-w, kind: spacing-ratio, aggressor: aggressors, victim: victims, min_ratio: 3, min_length: 1 mm}
  - name: run
    kind: parallel-length
    aggressor: aggressors
    victim: victims
    coupling: both
    table: [{gap: 0.2 mm, max_length: 5 mm}, {gap: 0.5 mm, max_length: 20 mm}]
  - {name: c12, kind: capacitance-budget, aggressor: aggressors, victim: victims, max_c12: 0.2 pF}
  - {name: noise, kind: noise-budget, aggressor: aggressors, victim: victims, max_noise: 20 mV}
"""


def one(n: int, seed: int) -> dict:
    """Run one size in this process and return its figures."""
    from synth import make_board

    from checker.report import json_report
    from checker.ruleset import load_ruleset
    from checker.runner import check_board

    with tempfile.TemporaryDirectory() as tmp:
        rules_path = Path(tmp) / "bench.yaml"
        rules_path.write_text(BENCH_RULES)
        ruleset = load_ruleset(rules_path)
    board = make_board(n, seed)
    base_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    t0 = time.perf_counter()
    cpu0 = time.process_time()
    result = check_board(board, ruleset)
    t_check = time.perf_counter() - t0
    check_peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    with tempfile.TemporaryFile("w+", encoding="utf-8") as handle:
        json_report.write(result, handle)
        report_mb = handle.tell() / 2**20
    total = time.perf_counter() - t0
    return {
        "n": n, "pieces": len(board.pieces), "seconds": total, "check_seconds": t_check,
        "report_seconds": total - t_check, "cpu_seconds": time.process_time() - cpu0,
        "pairs_examined": result.analysis.pairs_examined, "net_pairs": len(result.analysis.net_pairs),
        "findings": len(result.findings), "report_mb": report_mb, "check_peak_mb": check_peak_mb,
        "peak_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024, "base_mb": base_mb,
    }


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("sizes", nargs="*", type=int, default=[10_000, 100_000, 1_000_000])
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--one", type=int, help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.one:
        print(json.dumps(one(args.one, args.seed)))
        return
    prev = None
    for n in args.sizes:
        proc = subprocess.run([sys.executable, __file__, "--one", str(n), "--seed", str(args.seed)],
                              capture_output=True, text=True)
        if proc.returncode:
            sys.exit(f"size {n} failed:\n{proc.stderr}")
        r = json.loads(proc.stdout.strip().splitlines()[-1])
        print(f"{n:>9,} pieces/layer: {r['seconds']:6.2f} s wall ({r['check_seconds']:.2f} check + "
              f"{r['report_seconds']:.2f} report, cpu {r['cpu_seconds']:.2f} s), "
              f"{r['pieces'] / r['seconds']:,.0f} pieces/s, {r['pairs_examined']:,} pairs, "
              f"{r['net_pairs']:,} net pairs, {r['findings']:,} findings, "
              f"JSON report {r['report_mb']:,.0f} MB, peak RSS {r['peak_mb']:,.0f} MB "
              f"(board alone {r['base_mb']:,.0f} MB, after the check {r['check_peak_mb']:,.0f} MB)")
        if prev is not None:
            print(f"    x{n / prev['n']:.0f} pieces -> x{r['seconds'] / prev['seconds']:.1f} time")
        prev = r


if __name__ == "__main__":
    main()
