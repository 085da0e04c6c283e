"""Speed and memory of the Gerber reader (checker/readers/fab/gerber.py).

Writes invented Gerber files into a temporary directory, then reads them in
a fresh process each, so every measurement's peak memory (max RSS, from
``resource.getrusage``) is its own:

* one copper layer of N linear draws (default 1 000 000), each a
  ``X..Y..D01*`` line, with a ``TO.N`` net attribute changing every 20
  draws, coordinates in format 4.6 mm;
* a six-layer set: two outer layers (traces, SMD and via pads, a few pours),
  two inner signal layers, two plane layers (a pour with clear anti-pads).

    python scripts/bench_gerber.py                  # 1M draws and the 6-layer set
    python scripts/bench_gerber.py --draws 200000 --seed 3

Floors (the reader's issue): 1M draws in under 10 s and 1 GB peak RSS on a
2-core machine; the six-layer set well under a second.
"""

from __future__ import annotations

import argparse
import json
import random
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

HEADER = "%TF.FileFunction,Copper,L{n},{side}*%\n%TF.FilePolarity,{polarity}*%\n%FSLAX46Y46*%\n%MOMM*%\n"


def _um(v: float) -> int:
    return int(round(v * 1e6))


def write_draws(path: Path, draws: int, seed: int) -> None:
    """One layer of ``draws`` D01 lines; the net changes every 20 draws."""
    rng = random.Random(seed)
    with open(path, "w") as f:
        f.write(HEADER.format(n=1, side="Top", polarity="Positive"))
        f.write("%TA.AperFunction,Conductor*%\n%ADD10C,0.15*%\n%TD*%\nG01*\nD10*\n")
        x = y = 0
        for i in range(draws):
            if i % 20 == 0:
                f.write(f"%TO.N,NET{rng.randrange(5000)}*%\n")
                x, y = rng.randrange(0, 300_000_000), rng.randrange(0, 200_000_000)
                f.write(f"X{x}Y{y}D02*\n")
            x += rng.randrange(-2_000_000, 2_000_001)
            y += rng.randrange(-2_000_000, 2_000_001)
            f.write(f"X{x}Y{y}D01*\n")
        f.write("M02*\n")


def write_layer_set(directory: Path, seed: int) -> list[Path]:
    """An invented six-layer board: L1/L6 outer, L3/L4 inner signal, L2/L5 planes."""
    rng = random.Random(seed)
    vias = [(rng.uniform(5, 95), rng.uniform(5, 75), f"NET{rng.randrange(400)}") for _ in range(1500)]
    paths = []
    for n in range(1, 7):
        side = "Top" if n == 1 else "Bot" if n == 6 else "Inr"
        plane = n in (2, 5)
        lines = [HEADER.format(n=n, side=side, polarity="Positive")]
        lines.append("%AMRRECT*\n21,1,$1,$2-$3-$3,0,0,0*\n21,1,$1-$3-$3,$2,0,0,0*\n1,1,$3+$3,$1/2-$3,$2/2-$3*\n"
                     "1,1,$3+$3,-$1/2+$3,$2/2-$3*\n1,1,$3+$3,$1/2-$3,-$2/2+$3*\n1,1,$3+$3,-$1/2+$3,-$2/2+$3*%\n")
        lines.append("%TA.AperFunction,Conductor*%\n%ADD10C,0.127*%\n%ADD11C,0.2*%\n"
                     "%TA.AperFunction,ViaPad*%\n%ADD12C,0.6*%\n"
                     "%TA.AperFunction,SMDPad,CuDef*%\n%ADD13R,1.2X0.7*%\n%ADD14O,1.5X0.6*%\n"
                     "%ADD15RRECT,1.0X0.6X0.1*%\n%TA.AperFunction,AntiPad*%\n%ADD16C,1.0*%\n%TD*%\nG01*\n")
        if plane:
            lines.append("%TA.AperFunction,Conductor*%\n%TO.N,GND*%\nG36*\nX0Y0D02*\nX100000000D01*\n"
                         "Y80000000D01*\nX0D01*\nY0D01*\nG37*\n%TD*%\n%LPC*%\nD16*\n")
            lines += [f"X{_um(x)}Y{_um(y)}D03*\n" for x, y, _ in vias]
            lines.append("%LPD*%\n")
        else:
            lines.append("D10*\n")
            for k in range(1500 if n in (1, 6) else 2500):
                lines.append(f"%TO.N,NET{k % 400}*%\n")
                x, y = rng.uniform(2, 98), rng.uniform(2, 78)
                lines.append(f"X{_um(x)}Y{_um(y)}D02*\n")
                for _ in range(8):
                    x = min(max(x + rng.uniform(-3, 3), 0), 100)
                    y = min(max(y + rng.uniform(-3, 3), 0), 80)
                    lines.append(f"X{_um(x)}Y{_um(y)}D01*\n")
            lines.append("D12*\n")
            for x, y, net in vias:
                lines.append(f"%TO.N,{net}*%\nX{_um(x)}Y{_um(y)}D03*\n")
            if n in (1, 6):
                for k in range(1200):
                    lines.append(f"D{13 + k % 3}*\n%TO.N,NET{k % 400}*%\n%TO.P,U{k // 20},{k % 20 + 1}*%\n"
                                 f"X{_um(rng.uniform(2, 98))}Y{_um(rng.uniform(2, 78))}D03*\n")
                lines.append("%TD*%\n%TA.AperFunction,Conductor*%\n%TO.N,GND*%\n")
                for k in range(20):
                    x, y = rng.uniform(0, 90), rng.uniform(0, 70)
                    lines.append(f"G36*\nX{_um(x)}Y{_um(y)}D02*\nX{_um(x + 8)}D01*\nY{_um(y + 8)}D01*\n"
                                 f"X{_um(x)}D01*\nY{_um(y)}D01*\nG37*\n")
        lines.append("M02*\n")
        path = directory / f"bench-L{n}.gbr"
        path.write_text("".join(lines))
        paths.append(path)
    return paths


def measure(paths: list[str]) -> dict:
    """Read the files (in this process) and report time and peak RSS."""
    from checker.readers.fab.gerber import load_gerber
    t0 = time.perf_counter()
    layers = [load_gerber(p) for p in paths]
    seconds = time.perf_counter() - t0
    rss_kb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    return {"seconds": seconds, "peak_rss_mb": rss_kb / 1024,
            "pieces": sum(len(layer.traces) for layer in layers),
            "shapes": sum(len(layer.shapes) for layer in layers),
            "nets": sum(len(layer.net_names) for layer in layers)}


def _child(paths: list[Path]) -> dict:
    out = subprocess.run([sys.executable, __file__, "--measure", *map(str, paths)], check=True,
                         capture_output=True, text=True)
    return json.loads(out.stdout)


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--draws", type=int, default=1_000_000, help="draws in the big layer (default 1000000)")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--measure", nargs="*", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.measure is not None:
        print(json.dumps(measure(args.measure)))
        return 0
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        big = tmp / "draws.gbr"
        write_draws(big, args.draws, args.seed)
        size_mb = big.stat().st_size / 1e6
        r = _child([big])
        print(f"{args.draws} draws ({size_mb:.1f} MB, format 4.6 mm, net change every 20 draws): "
              f"{r['seconds']:.2f} s, peak RSS {r['peak_rss_mb']:.0f} MB, {r['pieces']} pieces, {r['nets']} nets")
        layer_set = write_layer_set(tmp, args.seed)
        size_mb = sum(p.stat().st_size for p in layer_set) / 1e6
        r = _child(layer_set)
        print(f"six-layer set ({size_mb:.1f} MB): {r['seconds']:.2f} s for all six, peak RSS "
              f"{r['peak_rss_mb']:.0f} MB, {r['pieces']} pieces, {r['shapes']} shapes")
        baseline = _child([])
        print(f"(a process that only imports the reader peaks at {baseline['peak_rss_mb']:.0f} MB)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
