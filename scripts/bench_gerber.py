"""Speed and memory of the Gerber reader (checker/readers/fab/gerber.py).

Writes invented Gerber files into a temporary directory, then reads each
case in a fresh process (one process = one core), so every measurement's
peak memory (VmHWM, else max RSS from ``resource.getrusage``) is its own.
The cases:

* ``draws``: one copper layer of N linear draws (default 1 000 000), each a
  ``X..Y..D01*`` line, with a ``TO.N`` net attribute changing every 20
  draws, coordinates in format 4.6 mm;
* ``export``: an export-like copper layer (about 2 MB) with the traits of
  real exports: one X2 attribute, no net attributes, about 300 apertures
  (circles, rectangles, obrounds, rounded-rectangle macros built from an
  outline, circles and vector lines, rotated outline and obround macros),
  flashes that switch aperture often, tracks with G75 arcs, G36/G37 pours
  of thousands of vertices with arcs and cut-in holes in their contours,
  clear-polarity (LPC) regions of thousands of vertices splitting pours
  (with another pour inside), an LPC region of thousands of vertices
  clearing the board edge, and LPC clearances (flashes and draws)
  cutting the pours, some alternating LPC/LPD object by object;
* ``export-inch``: the same board written in %FSLAX36Y36*% %MOIN*%;
  ``--scale`` multiplies the board area and every object count of these
  (the density stays the same), so equal rates at scales 1, 2 and 4 show
  that the read time grows linearly;
* ``pour``: four big regions, about 100 000 contour vertices in all (with
  arcs and cut-in holes), cut by 5 000 LPC anti-pads, four LPC regions of
  3 000 vertices (plane splits) and 1 500 LPC clearance draws;
* ``six-layer``: a six-layer set: two outer layers (traces, SMD and via
  pads, a few pours), two inner signal layers, two plane layers (a pour
  with clear anti-pads).

What is timed: ``load_gerber`` on the case's files, in a process that has
already imported the reader; interpreter start and ``import`` are timed
apart and are *not* in the read time or in the rates. The rates are
operations per second of that read: D01/D02/D03 commands in the file
(draws, arcs, moves, flashes and region vertices; for ``draws`` exactly the
draws and their moves). Each case is run ``--repeat`` times (default 5),
the cases alternating, and the median with the range (min to max) is
printed, since timing on a shared machine varies by tens of percent.

    python scripts/bench_gerber.py                     # all cases, 5 runs each
    python scripts/bench_gerber.py --draws 200000 --seed 3 --repeat 3
    python scripts/bench_gerber.py --cases export,pour --scale 1,2,4 --repeat 3
    python scripts/bench_gerber.py --profile export    # cProfile of one read, top 30

Floors (the reader's issue): at least 1 000 000 draws per second per core
for the read of the ``draws`` layer (under 1 s for 1M draws) and under 1 GB
peak RSS; the export-like and pour layers at comparable operation rates
(no superlinear behaviour); the six-layer set well under a second.
"""

from __future__ import annotations

import argparse
import json
import math
import random
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

HEADER = "%TF.FileFunction,Copper,L{n},{side}*%\n%TF.FilePolarity,{polarity}*%\n%FSLAX46Y46*%\n%MOMM*%\n"


def _um(v: float) -> int:
    return round(v * 1e6)


def write_draws(path: Path, draws: int, seed: int) -> int:
    """One layer of ``draws`` D01 lines; the net changes every 20 draws.
    Returns the number of operations (D01 and D02)."""
    rng = random.Random(seed)
    ops = 0
    with open(path, "w") as f:
        f.write(HEADER.format(n=1, side="Top", polarity="Positive"))
        f.write("%TA.AperFunction,Conductor*%\n%ADD10C,0.15*%\n%TD*%\nG01*\nD10*\n")
        x = y = 0
        for i in range(draws):
            if i % 20 == 0:
                f.write(f"%TO.N,NET{rng.randrange(5000)}*%\n")
                x, y = rng.randrange(0, 300_000_000), rng.randrange(0, 200_000_000)
                f.write(f"X{x}Y{y}D02*\n")
                ops += 1
            x += rng.randrange(-2_000_000, 2_000_001)
            y += rng.randrange(-2_000_000, 2_000_001)
            f.write(f"X{x}Y{y}D01*\n")
            ops += 1
        f.write("M02*\n")
    return ops


def write_layer_set(directory: Path, seed: int) -> tuple[list[Path], int]:
    """An invented six-layer board: L1/L6 outer, L3/L4 inner signal, L2/L5
    planes. Returns the paths and the number of operations."""
    rng = random.Random(seed)
    vias = [(rng.uniform(5, 95), rng.uniform(5, 75), f"NET{rng.randrange(400)}") for _ in range(1500)]
    paths = []
    ops = 0
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
            ops += 5 + len(vias)
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
                ops += 9
            lines.append("D12*\n")
            for x, y, net in vias:
                lines.append(f"%TO.N,{net}*%\nX{_um(x)}Y{_um(y)}D03*\n")
            ops += len(vias)
            if n in (1, 6):
                for k in range(1200):
                    lines.append(f"D{13 + k % 3}*\n%TO.N,NET{k % 400}*%\n%TO.P,U{k // 20},{k % 20 + 1}*%\n"
                                 f"X{_um(rng.uniform(2, 98))}Y{_um(rng.uniform(2, 78))}D03*\n")
                lines.append("%TD*%\n%TA.AperFunction,Conductor*%\n%TO.N,GND*%\n")
                for _k in range(20):
                    x, y = rng.uniform(0, 90), rng.uniform(0, 70)
                    lines.append(f"G36*\nX{_um(x)}Y{_um(y)}D02*\nX{_um(x + 8)}D01*\nY{_um(y + 8)}D01*\n"
                                 f"X{_um(x)}D01*\nY{_um(y)}D01*\nG37*\n")
                ops += 1200 + 20 * 5
        lines.append("M02*\n")
        path = directory / f"bench-L{n}.gbr"
        path.write_text("".join(lines))
        paths.append(path)
    return paths, ops


# --------------------------------------------------------------------------- export-like layers

class _Writer:
    """Gerber text in one unit: mm with format 4.6 or inch with format 3.6.
    Lengths are given in mm and converted; ``ops`` counts D01/D02/D03."""

    def __init__(self, inch: bool) -> None:
        self.inch = inch
        self.out: list[str] = []
        self.ops = 0
        self.mode = 1  # the modal interpolation left by a combined G02/G03 word

    def c(self, v: float) -> int:
        """A coordinate (mm) in file units."""
        return round((v / 25.4 if self.inch else v) * 1e6)

    def size(self, v: float) -> str:
        """An aperture or macro size (mm) in the file unit, 6 decimals."""
        return f"{v / 25.4 if self.inch else v:.6f}".rstrip("0").rstrip(".")

    def __call__(self, text: str) -> None:
        self.out.append(text)

    def op(self, x: float | None, y: float | None, d: int, prefix: str = "", ij=None) -> None:
        xs = "" if x is None else f"X{self.c(x)}"
        ys = "" if y is None else f"Y{self.c(y)}"
        ijs = "" if ij is None else f"I{self.c(ij[0])}J{self.c(ij[1])}"
        if d == 1 and ij is None and self.mode != 1:
            prefix, self.mode = "G01", 1
        self.out.append(f"{prefix}{xs}{ys}{ijs}D0{d}*\n")
        self.ops += 1


def _arc_to(w: _Writer, x0: float, y0: float, x1: float, y1: float, bulge: float, combined: bool) -> None:
    """A G02/G03 arc from (x0, y0) to (x1, y1) whose sagitta is ``bulge``
    times half the chord (positive: bulging to the right of the direction
    of travel). The centre is snapped to file units and the end moved onto
    the circle through it, so start and end radii agree within a unit."""
    mx, my = (x0 + x1) / 2, (y0 + y1) / 2
    dx, dy = x1 - x0, y1 - y0
    half = math.hypot(dx, dy) / 2
    s = abs(bulge) * half
    h = (half * half - s * s) / (2 * s)  # centre distance from the chord
    nx, ny = -dy / (2 * half), dx / (2 * half)  # left normal
    side = 1.0 if bulge > 0 else -1.0  # bulge right -> centre on the left
    cx, cy = mx + side * h * nx, my + side * h * ny
    clockwise = bulge < 0
    code = "G02" if clockwise else "G03"
    if combined:
        w.op(x1, y1, 1, prefix=code, ij=(cx - x0, cy - y0))
        w.mode = 2 if clockwise else 3
    else:
        w(f"{code}*\n")
        w.op(x1, y1, 1, ij=(cx - x0, cy - y0))
        w("G01*\n")


def _pour_contour(w: _Writer, rng: random.Random, cx: float, cy: float, rx: float, ry: float, vertices: int,
                  holes: int, arc_every: int) -> None:
    """One G36/G37 region: a simple wavy contour of about ``vertices``
    vertices around (cx, cy) (no self-intersections, as a layout program's
    pour), every ``arc_every``-th edge an arc, with ``holes`` square holes
    reached by cut-ins (the contour runs in along a ray, round the hole
    clockwise and back out along the same line)."""
    step = 2 * math.pi / vertices
    phase = [rng.uniform(0, 2 * math.pi) for _ in range(3)]
    angles, pts = [], []
    for k in range(vertices):
        a = (k + rng.uniform(-0.3, 0.3)) * step
        r = (1 - 0.06 * (1 + math.sin(3 * a + phase[0])) - 0.03 * (1 + math.sin(11 * a + phase[1]))
             - 0.01 * (1 + math.sin(53 * a + phase[2])))
        angles.append(a)
        pts.append((cx + rx * r * math.cos(a), cy + ry * r * math.sin(a)))
    hole_at = {int((k + 0.5) * vertices / holes): k for k in range(holes)} if holes else {}
    w("G36*\n")
    w.op(*pts[0], 2)
    for k in range(1, len(pts) + 1):
        x1, y1 = pts[k % len(pts)]
        if k in hole_at and k < len(pts):
            w.op(x1, y1, 1)
            a = angles[k]
            hx, hy = cx + 0.45 * rx * math.cos(a), cy + 0.45 * ry * math.sin(a)
            side = 0.01 * min(rx, ry)
            w.op(hx, hy, 1)  # in along the ray
            for sx, sy in ((-1, 1), (1, 1), (1, -1), (-1, -1), (-1, 1)):  # round the hole, clockwise
                w.op(hx + sx * side, hy + sy * side, 1)
            w.op(hx, hy, 1)
            w.op(x1, y1, 1)  # and back out
            continue
        x0, y0 = pts[k - 1]
        if arc_every and k % arc_every == 0:
            _arc_to(w, x0, y0, x1, y1, rng.uniform(0.05, 0.3), combined=k % 2 == 0)
        else:
            w.op(x1, y1, 1)
    w("G37*\n")


def _frame(w: _Writer, rng: random.Random, x0: float, y0: float, x1: float, y1: float, margin: float,
           vertices: int) -> None:
    """One G36/G37 region: the band between the rectangle (x0, y0)-(x1, y1)
    and a wavy contour about ``margin`` inside it (a board-edge clearance),
    as one contour with a cut-in: the outer rectangle counter-clockwise,
    in to the inner contour, round it clockwise (``vertices`` vertices,
    every ninth edge an arc) and back out."""
    wx, wy = x1 - x0 - 2 * margin, y1 - y0 - 2 * margin
    perimeter = 2 * (wx + wy)
    pts = []
    for k in range(vertices):  # clockwise from the lower-left corner: up, right, down, left
        d = perimeter * k / vertices
        inset = margin * (0.2 * math.sin(d * 0.7) + 0.1 * math.sin(d * 3.1))
        if d < wy:
            pts.append((x0 + margin + inset, y0 + margin + d))
        elif d < wy + wx:
            pts.append((x0 + margin + d - wy, y1 - margin - inset))
        elif d < 2 * wy + wx:
            pts.append((x1 - margin - inset, y1 - margin - (d - wy - wx)))
        else:
            pts.append((x1 - margin - (d - 2 * wy - wx), y0 + margin + inset))
    w("G36*\n")
    w.op(x0, y0, 2)
    for x, y in ((x1, y0), (x1, y1), (x0, y1), (x0, y0)):
        w.op(x, y, 1)
    w.op(*pts[0], 1)
    for k in range(1, len(pts) + 1):
        xa, ya = pts[k - 1]
        xb, yb = pts[k % len(pts)]
        if k % 9 == 0:
            _arc_to(w, xa, ya, xb, yb, rng.uniform(0.05, 0.2), combined=False)
        else:
            w.op(xb, yb, 1)
    w.op(x0, y0, 1)
    w("G37*\n")


def write_export_like(path: Path, seed: int, inch: bool = False, scale: float = 1.0) -> int:
    """An invented export-like copper layer (see the module docstring);
    ``scale`` multiplies the object counts and the board area (the density
    stays the same; 1.0: about 1.8 MB). Returns the number of operations."""
    rng = random.Random(seed)
    w = _Writer(inch)

    def n(k: int) -> int:
        return max(1, int(k * scale))

    w("G04 Invented export-like layer for bench_gerber.py*\n")
    w("G04 Layer_Physical_Order=1*\n")
    w("%TF.FileFunction,Copper,L1,Top*%\n")
    w("%FSLAX36Y36*%\n%MOIN*%\n" if inch else "%FSLAX46Y46*%\n%MOMM*%\n")
    w("G04 Aperture macros*\n")
    w("%AMRoundRect*\n0 Rectangle with rounded corners*\n0 $1 Rounding radius*\n"
      "0 $2 $3 $4 $5 $6 $7 $8 $9 X,Y pos of 4 corners*\n"
      "4,1,4,$2,$3,$4,$5,$6,$7,$8,$9,$2,$3,0*\n"
      "1,1,$1+$1,$2,$3*\n1,1,$1+$1,$4,$5*\n1,1,$1+$1,$6,$7*\n1,1,$1+$1,$8,$9*\n"
      "20,1,$1+$1,$2,$3,$4,$5,0*\n20,1,$1+$1,$4,$5,$6,$7,0*\n"
      "20,1,$1+$1,$6,$7,$8,$9,0*\n20,1,$1+$1,$8,$9,$2,$3,0*%\n")
    w("%AMRotRect*\n4,1,4,-$1/2,-$2/2,$1/2,-$2/2,$1/2,$2/2,-$1/2,$2/2,-$1/2,-$2/2,$3*%\n")
    w("%AMRotObround*\n21,1,$1-$2,$2,0,0,$3*\n1,1,$2,$4,$5*\n1,1,$2,0-$4,0-$5*%\n")
    w("%AMThermal*\n7,0,0,$1,$2,$3,45*%\n")
    apertures: dict[str, list[int]] = {k: [] for k in ("track", "via", "pad", "clear", "clear_track")}
    number = 10

    def define(kind: str, text: str) -> None:
        nonlocal number
        w(f"%ADD{number}{text}*%\n")
        apertures[kind].append(number)
        number += 1

    for width in (0.127, 0.15, 0.2, 0.25, 0.3, 0.4, 0.5, 0.8, 1.0):
        define("track", f"C,{w.size(width)}")
    for d in (0.45, 0.6, 0.8, 1.0):
        define("via", f"C,{w.size(d)}")
    for k in range(30):
        define("pad", f"C,{w.size(0.5 + 0.05 * k)}")
    for _k in range(60):
        define("pad", f"R,{w.size(rng.uniform(0.3, 2.5))}X{w.size(rng.uniform(0.3, 2.5))}")
    for k in range(40):
        a, b = rng.uniform(0.4, 2.5), rng.uniform(0.3, 1.2)
        define("pad", f"O,{w.size(a)}X{w.size(b)}" if k % 2 else f"O,{w.size(b)}X{w.size(a)}")
    for k in range(110):
        wd, ht = rng.uniform(0.4, 2.5), rng.uniform(0.3, 1.5)
        r = 0.25 * min(wd, ht)
        t = math.radians((0, 90, 45, 30, 15, 180, 270)[k % 7])
        corners = []
        for sx, sy in ((-1, -1), (1, -1), (1, 1), (-1, 1)):
            px, py = sx * (wd / 2 - r), sy * (ht / 2 - r)
            corners += [px * math.cos(t) - py * math.sin(t), px * math.sin(t) + py * math.cos(t)]
        define("pad", "RoundRect," + "X".join(w.size(v) for v in [r] + corners))
    for _k in range(30):
        define("pad", f"RotRect,{w.size(rng.uniform(0.3, 2))}X{w.size(rng.uniform(0.3, 2))}"
               f"X{rng.choice((30, 45, 60, 120))}")
    for _k in range(20):
        length, dia = rng.uniform(1.0, 2.5), rng.uniform(0.3, 0.9)
        t = math.radians(rng.choice((30, 45, 135)))
        off = (length - dia) / 2
        define("pad", f"RotObround,{w.size(length)}X{w.size(dia)}X{math.degrees(t):g}X"
               f"{w.size(off * math.cos(t))}X{w.size(off * math.sin(t))}")
    for d in (0.9, 1.2, 1.6, 2.0, 2.6, 3.2):
        define("clear", f"C,{w.size(d)}")
    for width in (0.5, 0.6, 0.8):
        define("clear_track", f"C,{w.size(width)}")
    define("pad", f"Thermal,{w.size(1.6)}X{w.size(1.0)}X{w.size(0.3)}")
    thermal = number - 1
    w("%LPD*%\nG01*\nG75*\n")

    board_w, board_h = 160.0 * math.sqrt(scale), 100.0 * math.sqrt(scale)  # the same density at any scale
    # ---- pours (G36/G37) with arcs and cut-in holes
    pour_centres = []
    for _k in range(n(8)):
        cx, cy = rng.uniform(25, board_w - 25), rng.uniform(20, board_h - 20)
        rx, ry = rng.uniform(10, 22), rng.uniform(8, 18)
        pour_centres.append((cx, cy, rx, ry))
        _pour_contour(w, rng, cx, cy, rx, ry, vertices=rng.randrange(1500, 3500), holes=12, arc_every=7)
    # ---- split planes: a clear region in a pour, a smaller dark pour (another net's island) inside it
    for cx, cy, rx, ry in pour_centres[: n(3)]:
        w("%LPC*%\n")
        _pour_contour(w, rng, cx, cy, 0.6 * rx, 0.6 * ry, vertices=rng.randrange(2500, 3500), holes=0, arc_every=9)
        w("%LPD*%\n")
        _pour_contour(w, rng, cx, cy, 0.5 * rx, 0.5 * ry, vertices=rng.randrange(2000, 3000), holes=4, arc_every=9)
    # ---- clearances cutting the pours: the board-edge band, anti-pad flashes, clear draws,
    # then object-by-object LPC/LPD
    vias = [(rng.uniform(2, board_w - 2), rng.uniform(2, board_h - 2)) for _ in range(n(2500))]
    w("%LPC*%\n")
    _frame(w, rng, 0.0, 0.0, board_w, board_h, 1.0, vertices=n(4000))
    current = None
    for x, y in vias[: len(vias) // 2]:
        d = rng.choice(apertures["clear"][:3])
        if d != current:
            w(f"D{d}*\n")
            current = d
        w.op(x, y, 3)
    w(f"D{apertures['clear_track'][0]}*\n")
    for _k in range(n(600)):
        x, y = rng.uniform(5, board_w - 5), rng.uniform(5, board_h - 5)
        w.op(x, y, 2)
        for _ in range(3):
            x, y = x + rng.uniform(-4, 4), y + rng.uniform(-4, 4)
            w.op(x, y, 1)
    w("%LPD*%\n")
    for k, (x, y) in enumerate(vias[len(vias) // 2:]):
        if k % 3 == 0:  # a clearance, then the pad inside it, object by object
            w(f"%LPC*%\nD{apertures['clear'][k % 6]}*\n")
            w.op(x, y, 3)
            w(f"%LPD*%\nD{thermal if k % 2 else apertures['via'][k % 4]}*\n")
            w.op(x, y, 3)
    # ---- tracks with G75 arcs
    for k in range(n(3000)):
        w(f"D{rng.choice(apertures['track'])}*\n")
        x, y = rng.uniform(2, board_w - 2), rng.uniform(2, board_h - 2)
        w.op(x, y, 2)
        for s in range(rng.randrange(2, 8)):
            nx_, ny_ = min(max(x + rng.uniform(-5, 5), 0), board_w), min(max(y + rng.uniform(-5, 5), 0), board_h)
            if s % 4 == 3 and math.hypot(nx_ - x, ny_ - y) > 0.2:
                _arc_to(w, x, y, nx_, ny_, rng.choice((-0.4, 0.4, -1.0, 1.0)), combined=k % 3 == 0)
            else:
                w.op(nx_, ny_, 1)
            x, y = nx_, ny_
    # ---- pads: flashes, aperture switching often
    pads = apertures["pad"]
    for _k in range(n(600)):
        d = rng.choice(pads)
        w(f"D{d}*\n")
        x, y = rng.uniform(3, board_w - 3), rng.uniform(3, board_h - 3)
        for j in range(rng.randrange(4, 40)):
            w.op(x + j * 0.65, y, 3)
    w(f"D{apertures['via'][1]}*\n")
    for x, y in vias:
        w.op(x, y, 3)
    w("M02*\n")
    path.write_text("".join(w.out))
    return w.ops


def write_big_pour(path: Path, seed: int, scale: float = 1.0) -> int:
    """A plane-like layer: four regions of about 25 000 contour vertices each
    (arcs and 40 cut-in holes in each contour), cut by 5 000 LPC anti-pad
    flashes, four LPC regions of 3 000 vertices (plane splits) and 1 500 LPC
    clearance draws, then via pads flashed dark.
    ``scale`` multiplies the number of regions, each in its own 100 mm cell
    with its share of clearances (the density stays the same). Returns the
    number of operations."""
    rng = random.Random(seed)
    w = _Writer(False)
    w("%FSLAX46Y46*%\n%MOMM*%\n%ADD10C,0.6*%\n%ADD11C,1.0*%\n%ADD12C,1.4*%\n%ADD13C,0.5*%\n%LPD*%\nG01*\nG75*\n")
    cols = max(1, round(2 * math.sqrt(scale)))
    rows = max(1, round(4 * scale / cols))
    side_x, side_y = 100.0 * cols, 100.0 * rows  # one 100 mm cell per region: the same density at any scale
    for k in range(rows * cols):
        cx, cy = 50 + 100 * (k % cols), 50 + 100 * (k // cols)
        _pour_contour(w, rng, cx, cy, 48, 48, vertices=24000, holes=40, arc_every=11)
    w("%LPC*%\n")
    vias = [(rng.uniform(3, side_x - 3), rng.uniform(3, side_y - 3)) for _ in range(1250 * rows * cols)]
    current = None
    for k, (x, y) in enumerate(vias):
        d = 11 if k % 5 else 12
        if d != current:
            w(f"D{d}*\n")
            current = d
        w.op(x, y, 3)
    for k in range(rows * cols):  # a split: a clear region of 3000 vertices across each cell's pour
        cx, cy = 50 + 100 * (k % cols), 50 + 100 * (k // cols)
        _pour_contour(w, rng, cx + 20, cy, 20, 30, vertices=3000, holes=0, arc_every=9)
    w("D13*\n")
    for _k in range(75 * rows * cols):
        x, y = rng.uniform(5, side_x - 5), rng.uniform(5, side_y - 5)
        w.op(x, y, 2)
        for _ in range(5):
            x, y = x + rng.uniform(-6, 6), y + rng.uniform(-6, 6)
            w.op(x, y, 1)
    w("%LPD*%\nD10*\n")
    for x, y in vias:
        w.op(x, y, 3)
    w("M02*\n")
    path.write_text("".join(w.out))
    return w.ops


# --------------------------------------------------------------------------- measuring

def measure(paths: list[str]) -> dict:
    """Import the reader, read the files (in this process) and report the
    import time, the read time and peak RSS."""
    t0 = time.perf_counter()
    from checker.readers.fab.gerber import load_gerber
    t1 = time.perf_counter()
    layers = [load_gerber(p) for p in paths]
    t2 = time.perf_counter()
    return {"import_s": t1 - t0, "read_s": t2 - t1, "peak_rss_mb": _peak_rss_kb() / 1024,
            "pieces": sum(len(layer.traces) for layer in layers),
            "shapes": sum(len(layer.shapes) for layer in layers),
            "nets": sum(len(layer.net_names) for layer in layers)}


def _peak_rss_kb() -> float:
    """This process's peak resident set size: VmHWM where Linux gives it
    (``ru_maxrss`` also counts the parent's memory when it was forked), else
    ``ru_maxrss``."""
    try:
        with open("/proc/self/status") as f:
            for line in f:
                if line.startswith("VmHWM:"):
                    return float(line.split()[1])
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss


def _child(paths: list[Path]) -> dict:
    t0 = time.perf_counter()
    out = subprocess.run([sys.executable, __file__, "--measure", *map(str, paths)], check=True,
                         capture_output=True, text=True)
    r = json.loads(out.stdout)
    r["process_s"] = time.perf_counter() - t0
    return r


def _profile(paths: list[Path], top: int) -> None:
    import cProfile
    import pstats

    from checker.readers.fab.gerber import load_gerber
    prof = cProfile.Profile()
    prof.enable()
    for p in paths:
        load_gerber(p)
    prof.disable()
    pstats.Stats(prof).sort_stats("tottime").print_stats(top)


def _spread(values: list[float], fmt: str) -> str:
    med = statistics.median(values)
    if len(values) == 1:
        return format(med, fmt)
    return f"{format(med, fmt)} ({format(min(values), fmt)}-{format(max(values), fmt)})"


CASES = ("draws", "export", "export-inch", "pour", "six-layer")
SCALED = ("export", "export-inch", "pour")


def _write_case(case: str, scale: float, tmp: Path, args) -> tuple[list[Path], int, str]:
    """Write one case's files: (paths, operations, description)."""
    tag = f" x{scale:g}" if scale != 1 else ""
    if case == "draws":
        p = tmp / "draws.gbr"
        return [p], write_draws(p, args.draws, args.seed), f"{args.draws} draws, format 4.6 mm, net change every 20"
    if case in ("export", "export-inch"):
        p = tmp / f"{case}-{scale:g}.gbr"
        ops = write_export_like(p, args.seed, inch=case == "export-inch", scale=scale)
        return [p], ops, f"export-like layer{tag}, " + ("3.6 inch" if case == "export-inch" else "4.6 mm")
    if case == "pour":
        p = tmp / f"pour-{scale:g}.gbr"
        return [p], write_big_pour(p, args.seed, scale=scale), f"pour regions{tag} cut by LPC objects"
    paths, ops = write_layer_set(tmp, args.seed)
    return paths, ops, "six-layer set, all six files"


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--draws", type=int, default=1_000_000, help="draws in the big layer (default 1000000)")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--repeat", type=int, default=5, help="runs of each case, alternating (default 5)")
    parser.add_argument("--cases", default=",".join(CASES), help=f"comma-separated subset of {','.join(CASES)}")
    parser.add_argument("--scale", default="1",
                        help="comma-separated factors of the board area and object counts of the export and pour "
                             "cases, each run as its own case (default 1; e.g. 1,2,4 to see that time grows "
                             "linearly)")
    parser.add_argument("--profile", choices=CASES, help="print a cProfile of one read of this case instead")
    parser.add_argument("--keep", type=Path, help="write the files into this directory and keep them")
    parser.add_argument("--measure", nargs="*", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.measure is not None:
        print(json.dumps(measure(args.measure)))
        return 0
    cases = [c for c in args.cases.split(",") if c]
    unknown = sorted(set(cases) - set(CASES))
    if unknown:
        parser.error(f"unknown case(s) {', '.join(unknown)}; the cases are {', '.join(CASES)}")
    try:
        scales = [float(v) for v in args.scale.split(",") if v]
    except ValueError:
        parser.error(f"--scale takes numbers separated by commas, not {args.scale!r}")
    if not scales or min(scales) <= 0:
        parser.error("--scale factors must be greater than 0")
    if args.profile:
        cases, scales = [args.profile], scales[:1]
    with tempfile.TemporaryDirectory() as tmp:
        tmp = args.keep or Path(tmp)
        tmp.mkdir(parents=True, exist_ok=True)
        files: dict[tuple[str, float], tuple[list[Path], int, str]] = {}
        for case in cases:
            for scale in (scales if case in SCALED else [1.0]):
                files[case, scale] = _write_case(case, scale, tmp, args)
        if args.profile:
            _profile(next(iter(files.values()))[0], 30)
            return 0
        runs: dict[tuple[str, float], list[dict]] = {key: [] for key in files}
        for _ in range(args.repeat):
            for key in files:  # alternate the cases, so a slow spell hits them all
                runs[key].append(_child(files[key][0]))
        baseline = [_child([]) for _ in range(min(3, max(args.repeat, 1)))]
        print(f"{args.repeat} run(s) per case, each in a fresh process, cases alternating; median (min-max). The read "
              f"time excludes interpreter start and import (import alone: "
              f"{_spread([b['import_s'] for b in baseline], '.2f')} s; a process that only starts and imports: "
              f"{_spread([b['process_s'] for b in baseline], '.2f')} s).")
        for key, rs in runs.items():
            if not rs:
                continue
            paths, ops, what = files[key]
            size_mb = sum(p.stat().st_size for p in paths) / 1e6
            read = [r["read_s"] for r in rs]
            last = rs[-1]
            if key[0] == "draws":
                rate = f"{_spread([args.draws / s / 1e6 for s in read], '.2f')} M draws/s"
            else:
                rate = f"{_spread([ops / s / 1e6 for s in read], '.3f')} M ops/s"
            print(f"{what} ({size_mb:.1f} MB, {ops} D01/D02/D03 ops): read {_spread(read, '.3f')} s = {rate}; "
                  f"whole process {_spread([r['process_s'] for r in rs], '.2f')} s; peak RSS "
                  f"{last['peak_rss_mb']:.0f} MB; out: {last['pieces']} trace pieces, {last['shapes']} shapes, "
                  f"{last['nets']} nets")
        print(f"(a process that only imports the reader peaks at {baseline[0]['peak_rss_mb']:.0f} MB)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
