"""Benchmark: a six-layer board with voided planes, full check, against another checkout.

Builds a seeded synthetic board (``scripts/synth.py`` routing on four signal
layers L1, L3, L4, L6) with GND planes on L2 and L5: a pour over the whole
board with a square antipad for every 20th piece's start and a few long
voids (slots 0.6-2 mm wide, 5-15 mm long) that signal runs cross. Times the
complete check (both broadside and edge searches, capacitance, the five
coupling rule kinds of ``scripts/bench.py`` and the JSON report) in a
fresh process, for this checkout and, with ``--against DIR``, for another
checkout of couplint (for example the commit before a change, made with
``git worktree add /tmp/old <commit>``), in alternating runs.

    python scripts/bench_layers.py 20000                       # pieces per signal layer
    python scripts/bench_layers.py 20000 --against /tmp/old --repeat 3

The issue that asked for it: copper-decided shielding must not take more
than 1.5 times the time of the role-decided search on a six-layer board.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def child(n: int, seed: int, rules_path: str) -> dict:
    """Build the board and check it in this process (``sys.path`` decides
    which checkout's ``checker`` runs)."""
    import numpy as np
    import shapely

    # the checkout's checker first: synth.py puts this checkout on sys.path
    from checker.model import NO_NET, Board, CopperLayer, Dielectric, Net, Region, Stackup
    from checker.report.json_report import build_report
    from checker.ruleset import load_ruleset
    from checker.runner import check_board

    sys.path.insert(0, str(ROOT / "scripts"))
    from synth import make_pieces

    p = make_pieces(n, seed, layers=4)
    where = np.array([0, 2, 3, 5], np.int32)
    p.layer = where[p.layer]
    rng = np.random.default_rng(seed + 1)
    x0, y0 = float(min(p.x1.min(), p.x2.min())) - 1, float(min(p.y1.min(), p.y2.min())) - 1
    x1, y1 = float(max(p.x1.max(), p.x2.max())) + 1, float(max(p.y1.max(), p.y2.max())) + 1
    board_box = shapely.box(x0, y0, x1, y1)
    n_nets = int(p.net.max()) + 1
    gnd = n_nets
    regions = []
    for k in (1, 4):
        starts = np.flatnonzero(p.ordinal == 0)[::20]
        holes = [shapely.box(p.x1[i] - 0.3, p.y1[i] - 0.3, p.x1[i] + 0.3, p.y1[i] + 0.3) for i in starts]
        for _ in range(max(3, n // 5000)):
            cx, cy = rng.uniform(x0, x1), rng.uniform(y0, y1)
            w, length = rng.uniform(0.6, 2.0), rng.uniform(5, 15)
            holes.append(shapely.box(cx - w / 2, cy - length / 2, cx + w / 2, cy + length / 2) if rng.uniform() < 0.5
                         else shapely.box(cx - length / 2, cy - w / 2, cx + length / 2, cy + w / 2))
        plane = shapely.difference(board_box, shapely.union_all(holes))
        for part in shapely.get_parts(plane):
            regions.append(Region(k, gnd, part, f"regions[{len(regions)}]"))
    stackup = Stackup(
        layers=tuple(CopperLayer(f"L{i + 1}", "plane" if i in (1, 4) else "signal", 0.035) for i in range(6)),
        dielectrics=tuple(Dielectric(0.2 if i != 2 else 1.0, 4.2) for i in range(5)),
    )
    n_sources = int(p.source.max()) + 1
    board = Board(name=f"six-{n}-{seed}", path="<synthetic>", stackup=stackup,
                  nets=tuple(Net(f"N{i:06d}") for i in range(n_nets)) + (Net("GND"),), pieces=p,
                  sources=tuple(f"tracks[{i}]" for i in range(n_sources)), regions=tuple(regions),
                  outline=board_box)
    assert NO_NET == -1
    ruleset = load_ruleset(rules_path)
    t0, c0 = time.perf_counter(), time.process_time()
    result = check_board(board, ruleset)
    with tempfile.TemporaryFile("w") as fh:
        json.dump(build_report(result), fh)
    import checker
    return {"checker": str(Path(checker.__file__).parent), "seconds": time.perf_counter() - t0,
            "cpu_seconds": time.process_time() - c0,
            "findings": len(result.findings), "pairs": int(len(result.analysis.couplings)),
            "peak_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024}


def run(root: Path, n: int, seed: int, rules_path: str) -> dict:
    env = dict(os.environ, PYTHONPATH=str(root))
    code = (f"import sys, json; sys.path.insert(0, {str(root)!r}); sys.path.insert(1, {str(ROOT / 'scripts')!r});"
            f"import bench_layers; print(json.dumps(bench_layers.child({n}, {seed}, {rules_path!r})))")
    out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, check=True,
                         cwd=str(root))
    return json.loads(out.stdout.strip().splitlines()[-1])


def main(argv=None) -> int:
    sys.path.insert(0, str(ROOT / "scripts"))
    from bench import BENCH_RULES

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("n", type=int, nargs="?", default=20000, help="pieces per signal layer (default 20000)")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--against", type=Path, help="another couplint checkout to time in alternation")
    parser.add_argument("--repeat", type=int, default=1)
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        rules = Path(tmp) / "rules.yaml"
        rules.write_text(BENCH_RULES)
        for _ in range(args.repeat):
            for name, root in [("this", ROOT)] + ([("against", args.against)] if args.against else []):
                r = run(root, args.n, args.seed, str(rules))
                print(f"{name:8s} {args.n} pieces/layer x 4 + 2 voided planes: {r['seconds']:.2f} s wall, "
                      f"{r['cpu_seconds']:.2f} s CPU, {r['peak_mb']:.0f} MB peak, {r['pairs']} coupled rows, "
                      f"{r['findings']} findings ({r['checker']})", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
