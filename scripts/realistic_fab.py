"""An invented, realistic 6-layer fabrication package: the "real export" benchmark.

Everything is made up (board, parts, net names, stackup); no layout program's
files or conventions are copied. Each feature is here because real exports
have it and it costs couplint's readers or checks something:

* 160 x 100 mm at ``--scale 1`` (area and counts scale), masks both sides:
  L1_TOP parts + signal, L2_GND plane, L3_SIG / L4_SIG signal with no plane
  between (broadside coupling), L5_PWR split plane, L6_BOT mixed.
* Parts: BGA-like arrays (0.8 mm pitch, dog-bone vias, rings 0..3 escaping on
  L1 / L3 / L4 / L6 between the via rows), 0.5 mm quad packages (staggered
  fan-out vias, GND centre pad with vias), 0402 / 0603 parts on both sides.
* Routing: buses of 1..16 bits parallel to a centre line walking in 45 degree
  steps round what is in the way (jogs, chamfered 90 degree turns), trombones
  on length-tuned BUS_* bits, differential pairs with flared vias, staggered
  vias where a bus ends; most buses with filleted corners (concentric arcs,
  G02/G03). Runs are split into collinear pieces of mean ``--split`` mm
  (0.2 by default; exports of re-routed or converted designs split runs,
  though rarely this finely): the knob that brings this 160 x 100 mm board
  to ~100k pieces (``--split 1`` gives ~33k, closer to a hand-routed board).
* Pours: GND on L1, L3, L4, L6, 0.25 mm from other nets, thermal reliefs (4
  spokes merged into the pour), islands without a GND via removed, islands
  with holes inside another region's hole left out (write_fab would write
  them as slow cut-ins). Planes: L2 GND with an antipad per other net's via,
  a slot and a void; L5 split into 3V3 / 1V8 / 5V / VCORE / 3V3_A. A 2.5 mm
  GND stitching grid where free and a via fence at the edge.
* On purpose, so couplint finds something: CLK_ADC beside SENSE_BRIDGE on L1,
  SW_BUCK1 on L3 over AIN3 on L4, CLK_MAIN on L4 across the L5 split,
  SPI0_SCK beside THERM_2 on L6; clock names in random buses add more.

Built as neutral JSON (docs/board-format.md), loaded with ``load_board`` and
written by ``write_fab()`` (scripts/write_fab.py): Gerber X2 copper, Excellon,
job file with the stackup, profile, IPC-D-356A.

    python scripts/realistic_fab.py OUTDIR [--scale S] [--seed N] [--split MM] [--json-only] [--holes H] [--sr]
                                           [--no-net-attributes]
    python scripts/realistic_fab.py --bench [--scale S] [--seed N] [--warm-cache] [--no-profile]

OUTDIR gets the package, OUTDIR.json the board (``--json-only``: only
OUTDIR/realistic-6L.json). ``--bench`` generates once in a child process
(cached in the temp folder by scale, seed and the text of this file and
write_fab.py), then profiles ``couplint check PACKAGE --format json``
in-process: wall time, peak RSS, top 25 by cumulative time (field-solve disk
cache off unless ``--warm-cache``). ``--holes cutin`` does not scale to these
pours (write_fab.cutin_contour).
"""

from __future__ import annotations

import argparse
import cProfile
import hashlib
import io
import json
import math
import os
import pstats
import resource
import subprocess
import sys
import tempfile
import time
from collections import defaultdict
from pathlib import Path

import numpy as np
import shapely
from shapely.geometry import Point, Polygon, box

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "scripts"))

from write_fab import write_fab  # noqa: E402

NAMES = ("L1_TOP", "L2_GND", "L3_SIG", "L4_SIG", "L5_PWR", "L6_BOT")
TOP, L2, IN1, IN2, L5, BOT = range(6)
SIGNAL = (TOP, IN1, IN2, BOT)
CLR, POUR_CLR, ANTIPAD = 0.1, 0.25, 0.2  # between nets on a layer; pour to other nets; plane beyond a via pad
THERMAL_GAP, SPOKE_W = 0.25, 0.25
KEEPOUT = "__keepout__"
ROUND_SHARE = 0.8  # share of buses with filleted (arc) corners
DIRS = [(round(math.cos(k * math.pi / 4), 12), round(math.sin(k * math.pi / 4), 12)) for k in range(8)]
POWER = ["GND", "3V3", "1V8", "5V", "VCORE", "3V3_A", "12V_IN"]
PAIRS = [f"BUS_DQS{k}" for k in range(4)] + ["BUS_CK", "ETH_TX", "ETH_RX", "USB_D", "PCIE_TX0", "PCIE_RX0",
                                             "CLK_100M"] + [f"LVDS{k}" for k in range(4)]
ANALOG = ([f"AIN{k}" for k in range(16)] + ["SENSE_BRIDGE"] + [f"SENSE_I{k}" for k in range(1, 5)]
          + [f"THERM_{k}" for k in range(1, 7)] + ["VREF_ADC"])


def signal_pool(n: int) -> list[str]:
    """Invented digital net names, related ones together, padded with GPIOs."""
    sig = [f"BUS_D{i}" for i in range(32)] + [f"BUS_A{i}" for i in range(16)]
    sig += ["BUS_WE", "BUS_RAS", "BUS_CAS", "BUS_CKE", "BUS_ODT", "BUS_CS0", "BUS_CS1", "CLK_25M", "CLK_AUDIO"]
    sig += [f"SPI{k}_{s}" for k in range(6) for s in ("SCK", "MOSI", "MISO", "CS")]
    sig += [f"I2C{k}_{s}" for k in range(4) for s in ("SCL", "SDA")] + [f"UART{k}_{s}" for k in range(8) for s in "TR"]
    sig += [f"PWM{k}" for k in range(16)] + [f"LED{k}" for k in range(24)] + [f"QSPI_IO{k}" for k in range(4)]
    sig += ["QSPI_SCK", "QSPI_CS", "JTAG_TCK", "JTAG_TMS", "JTAG_TDI", "JTAG_TDO", "RESET_N", "BOOT0"]
    return sig + [f"GPIO{k}" for k in range(max(0, n - len(sig)))]


def seg_geoms(pts, w: float) -> np.ndarray:
    p = np.asarray(pts, dtype=float)
    return shapely.buffer(shapely.linestrings(np.stack([p[:-1], p[1:]], axis=1)), w / 2, quad_segs=2)


def rect(cx, cy, w, h) -> Polygon:
    return box(cx - w / 2, cy - h / 2, cx + w / 2, cy + h / 2)


def rounded(pts, o: float, r0: float):
    """Straight runs and fillet arcs (centre, radius, start, end: counter-
    clockwise) of a polyline: radius r0 - o inside a left turn, r0 + o inside
    a right one, so a bus's bits get concentric arcs; a fillet takes at most
    45 % of either segment."""
    p = np.asarray(pts, dtype=float)
    runs, arcs = [[tuple(p[0])]], []
    for i in range(1, len(p) - 1):
        d1, d2 = p[i] - p[i - 1], p[i + 1] - p[i]
        l1, l2 = math.hypot(*d1), math.hypot(*d2)
        d1, d2 = d1 / l1, d2 / l2
        cross = d1[0] * d2[1] - d1[1] * d2[0]
        th, s = math.atan2(abs(cross), float(d1 @ d2)), (1 if cross > 0 else -1)
        t = min((r0 - s * o) * math.tan(th / 2), 0.45 * l1, 0.45 * l2)
        if th < 1e-3 or t < 0.02:
            runs[-1].append(tuple(p[i]))
            continue
        r = t / math.tan(th / 2)
        t1, t2 = p[i] - d1 * t, p[i] + d2 * t
        c = t1 + s * r * np.array([-d1[1], d1[0]])
        a1, a2 = (math.degrees(math.atan2(q[1] - c[1], q[0] - c[0])) for q in (t1, t2))
        runs[-1].append(tuple(t1))
        arcs.append((c, r, a1, a2) if s > 0 else (c, r, a2, a1))
        runs.append([tuple(t2)])
    runs[-1].append(tuple(p[-1]))
    return runs, arcs


def arc_points(c, r: float, a0: float, a1: float) -> list:
    sweep = (a1 - a0) % 360
    t = np.radians(a0 + np.linspace(0, sweep, max(2, int(sweep / 10) + 2)))
    return list(zip(c[0] + r * np.cos(t), c[1] + r * np.sin(t)))


class Occupancy:
    """Copper placed on one layer (or part courtyards), bucketed on a 2 mm grid."""

    def __init__(self) -> None:
        self.cells: dict[tuple[int, int], list[int]] = defaultdict(list)
        self.geoms: list = []
        self.nets: list = []

    @staticmethod
    def _cells(g, pad: float):
        x0, y0, x1, y1 = (int(v // 2.0) for v in np.add(g.bounds, (-pad, -pad, pad, pad)))
        return [(i, j) for i in range(x0, x1 + 1) for j in range(y0, y1 + 1)]

    def add(self, g, net) -> int:
        self.geoms.append(g)
        self.nets.append(net)
        for c in self._cells(g, 0):
            self.cells[c].append(len(self.geoms) - 1)
        return len(self.geoms) - 1

    def clash(self, geoms, nets, clr: float) -> bool:
        qa, qb = [], []
        for q, (g, n) in enumerate(zip(geoms, nets)):
            qb += [k for k in {k for c in self._cells(g, clr) for k in self.cells.get(c, ())} if self.nets[k] != n]
            qa += [q] * (len(qb) - len(qa))
        return bool(qa) and bool(shapely.dwithin(np.asarray(geoms, dtype=object)[qa],
                                                 np.array([self.geoms[k] for k in qb], dtype=object), clr).any())


class Gen:
    """Items: ("t", layer, net, width, points), ("p", layer, net, polygon),
    ("v", x, y, net, drill, pad) for a through via. A part or route is placed
    only if its copper keeps CLR from every other net's (no shorts)."""

    def __init__(self, scale: float, seed: int, split: float = 0.2) -> None:
        self.rng, self.scale, self.split = np.random.default_rng(seed), scale, split
        self.W, self.H = round(160 * math.sqrt(scale), 1), round(100 * math.sqrt(scale), 1)
        self.pool = signal_pool(int(500 * scale) - len(POWER) - 2 * len(PAIRS) - len(ANALOG) - 8)
        self.cursor, self.parts, self.pairs, self.nets = 0, 0, {}, {}
        # tracks (layer, net, w, points, style), pads (layer, net, polygon), vias (x, y, net, drill, pad)
        self.tracks, self.pads, self.vias = [], [], []
        self.occ = {layer: Occupancy() for layer in SIGNAL}
        self.place = {TOP: Occupancy(), BOT: Occupancy()}  # courtyards per side
        self.ics, self.pending = [], []  # (x, y, half size) of ICs; escape bundles routed once all ICs are down
        self.keepouts = [Point(x, y).buffer(3.5, quad_segs=8) for x in (4, self.W - 4) for y in (4, self.H - 4)]
        W, H = self.W, self.H  # copper keeps 0.5 mm from the edge: a frame in 4 strips, and the mounting holes
        frame = box(-60, -60, W + 60, H + 60).difference(self.outline().buffer(-0.5, join_style="mitre"))
        strips = [frame.intersection(box(*b)) for b in ((-60, -60, 5, H + 60), (W - 5, -60, W + 60, H + 60),
                                                         (-60, -60, W + 60, 5), (-60, H - 5, W + 60, H + 60))]
        for k in self.keepouts + strips:
            for occ in [*self.occ.values(), *self.place.values()]:
                occ.add(k, KEEPOUT)

    def take(self, k: int) -> list[str]:
        self.cursor += k
        return [self.pool[(self.cursor - k + i) % len(self.pool)] for i in range(k)]

    def shapes(self, items):
        for it in items:
            if it[0] == "t":
                yield from ((it[1], it[2], g) for g in seg_geoms(it[4], it[3]))
            elif it[0] == "p":
                yield it[1], it[2], it[3]
            else:
                g = Point(it[1], it[2]).buffer(it[5] / 2, quad_segs=4)
                yield from ((layer, it[3], g) for layer in SIGNAL)

    def fits(self, items) -> bool:
        by = defaultdict(lambda: ([], []))
        for layer, net, g in self.shapes(items):
            by[layer][0].append(g)
            by[layer][1].append(net)
        return not any(self.occ[layer].clash(g, n, CLR) for layer, (g, n) in by.items())

    def commit_geoms(self, items) -> list:
        return [(layer, self.occ[layer].add(g, net), g) for layer, net, g in self.shapes(items)]

    def record(self, items, style=False) -> None:
        for it in items:
            self.nets[it[3] if it[0] == "v" else it[2]] = None
            if it[0] == "t":
                self.tracks.append((it[1], it[2], it[3], [tuple(map(float, p)) for p in it[4]], style))
            else:
                (self.pads if it[0] == "p" else self.vias).append(it[1:])

    def commit(self, items, style=False) -> None:
        self.commit_geoms(items)
        self.record(items, style)

    def attempt(self, items) -> bool:
        ok = self.fits(items)
        if ok:
            self.commit(items)
        return ok

    def claim(self, court, side: int = TOP) -> bool:
        self.parts += 1
        self.last_claim = self.place[side]
        if self.last_claim.clash([court], [self.parts], 0.2):
            return False
        self.last_claim.add(court, self.parts)
        return True

    def release(self) -> bool:  # the part claimed last did not fit
        self.last_claim.geoms[-1] = Point()
        return False

    # ---- routing
    def bundle(self, layer: int, heads, c, h: int, w: float, length: float, meander: bool = False) -> int:
        """Route a bus from heads (net, lead ending on the line through c across
        heading h, via item or None), bits parallel (mitred) to a walking centre
        line; where nothing fits, each bit dives through a staggered via."""
        heads = [hd for hd in heads if (len(hd[1]) < 2 or self.fits([("t", layer, hd[0], w, hd[1])]))
                 and (hd[2] is None or self.fits([hd[2]]))]
        if not heads:
            return 0
        for net, lead, via in heads:
            self.commit(([via] if via else []) + ([("t", layer, net, w, lead)] if len(lead) > 1 else []))
        nrm = (-DIRS[h][1], DIRS[h][0])
        offs = [(p[-1][0] - c[0]) * nrm[0] + (p[-1][1] - c[1]) * nrm[1] for _, p, _ in heads]
        maxo, r = max(abs(o) for o in offs), self.rng
        cham = 0.83 * maxo + 0.3  # a 90-degree turn's chamfer: the innermost bit keeps 0.3 mm of it
        mn = cham + 0.2
        axis = 0 if layer == IN1 else 2 if layer == IN2 else h % 4
        bits = [[tuple(lead[-1])] * 2 for _, lead, _ in heads]  # the first (straight) step grows it
        pos, hd, done, mine = tuple(c), h, 0.0, []

        def walk(seq):
            """Every bit's new tail after the steps (turn in 45-degree units, length), or None."""
            P, h0, tails = pos, hd, [list(b[-2:]) for b in bits]
            for turn, ln in seq:
                h1 = (h0 + turn) % 8
                (d1x, d1y), (d2x, d2y) = DIRS[h0], DIRS[h1]
                P, k = (P[0] + d2x * ln, P[1] + d2y * ln), 1 + d1x * d2x + d1y * d2y
                for t, o in zip(tails, offs):
                    if turn:  # the bit's last point becomes the mitre corner
                        t[-1] = (t[-1][0] + o * d1y - o * (d1y + d2y) / k, t[-1][1] - o * d1x + o * (d1x + d2x) / k)
                        t.append((P[0] - o * d2y, P[1] + o * d2x))
                    else:
                        t[-1] = (t[-1][0] + d2x * ln, t[-1][1] + d2y * ln)
                h0 = h1
            for t in tails:
                q = np.diff(np.asarray(t), axis=0)
                if len(t) > 2 and (np.hypot(q[1:, 0], q[1:, 1]) < 0.05).any():
                    return None
            return tails, P, h0

        def turn90(s, ln):
            return [(s, cham), (s, ln)]

        while done < length:
            L, s, jog = r.uniform(max(3, mn), 15 + mn), int(r.choice([-1, 1])), r.uniform(mn, mn + 3)
            if done == 0:
                options = [[(0, r.uniform(0.5, 3))]]
            elif hd % 4 != axis:
                options = [turn90(s, r.uniform(mn, mn + 4)), turn90(-s, r.uniform(mn, mn + 4))]
            else:
                d1, d2 = r.uniform(mn, mn + 8), r.uniform(mn, mn + 8)
                options = [[(0, L)], [(0, max(mn, L / 3))], [(s, jog), (-s, L)], [(-s, jog), (s, L)],
                           turn90(s, d1) + turn90(-s, L), turn90(-s, d2) + turn90(s, L),
                           [(0, mn + 0.5)], [(s, jog), (-s, mn + 0.5)], [(-s, jog), (s, mn + 0.5)]]  # squeeze past vias
                if r.random() < 0.15:
                    options.insert(0, options.pop(2))
                if meander and maxo < 3 and r.random() < 0.5:
                    amp, gap = r.uniform(1.5, 4) + 2 * maxo, 2 * maxo + 3 * w + 0.3
                    options.insert(0, (turn90(s, amp) + turn90(-s, gap) + turn90(-s, amp) + turn90(s, gap))
                                   * int(r.integers(2, 7)))
            for seq in options:
                got = walk(seq)
                items = got and [("t", layer, hd_[0], w, t) for hd_, t in zip(heads, got[0])]
                if got and self.fits(items):
                    mine += self.commit_geoms(items)
                    for b, t in zip(bits, got[0]):
                        b[-1:] = t[1:]
                    pos, hd, done = got[1], got[2], done + sum(ln for _, ln in seq)
                    break
            else:
                break
        styles = [True] * len(bits)  # sharp corners, runs split on output
        if r.random() < ROUND_SHARE and maxo < 3:  # swap the mitred copper for filleted copper if that fits
            fillets = [rounded(b, o, maxo + 0.4) for b, o in zip(bits, offs)]
            items = [("t", layer, hd_[0], w, q) for hd_, (runs, arcs) in zip(heads, fillets)
                     for q in runs + [arc_points(*a) for a in arcs] if len(q) > 1]
            for lay, k, _ in mine:
                self.occ[lay].geoms[k] = Point()
            if self.fits(items):
                self.commit_geoms(items)
                styles = [("round", *f) for f in fillets]
            else:
                for lay, k, g in mine:
                    self.occ[lay].geoms[k] = g
        placed = 0
        for k, ((net, _, _), b, style) in enumerate(zip(heads, bits, styles)):
            if b[0] != b[-1]:
                self.record([("t", layer, net, w, b)], style)
                placed += 1
                (x0, y0), (x1, y1) = b[-2], b[-1]
                e = (0.6 + (k % 2) * 1.0) / (math.hypot(x1 - x0, y1 - y0) or 1.0)
                vx, vy = x1 + (x1 - x0) * e, y1 + (y1 - y0) * e
                self.attempt([("t", layer, net, w, [(x1, y1), (vx, vy)]), ("v", vx, vy, net, 0.2, 0.45)])
        return placed

    def bus(self, layer: int, nets, c, h: int, w: float, pitch: float, length: float, pair: bool = False) -> int:
        """A bus from a staggered via row, or a differential pair from flared vias."""
        (dx, dy), heads = DIRS[h], []
        for k, net in enumerate(nets):
            o = (k - (len(nets) - 1) / 2) * pitch
            lat, back = (math.copysign(0.5, o), 0.5 - abs(o)) if pair else (o, 0.6 + (k % 2) * 1.0)
            v = (c[0] - dy * lat - dx * back, c[1] + dx * lat - dy * back)
            heads.append((net, [v, (c[0] - dy * o, c[1] + dx * o)], ("v", v[0], v[1], net, 0.2, 0.45)))
        return self.bundle(layer, heads, c, h, w, length, nets[0].startswith("BUS_") and len(nets) == 1)

    # ---- parts
    def bga(self, cx, cy, n: int, supply: str) -> bool:
        p, half = 0.8, (n - 1) * 0.4
        edge = half + 1.0
        if not self.claim(rect(cx, cy, 2 * half + 3.2, 2 * half + 3.2)):
            return False
        items, esc = [], defaultdict(list)  # esc[(side, layer)]: (net, lead)
        for i in range(n):
            for j in range(n):
                bx, by, ring = cx - half + i * p, cy - half + j * p, min(i, j, n - 1 - i, n - 1 - j)
                if ring >= 4:
                    net = "GND" if (i + j) % 2 else (supply if ring >= 5 else "1V8")
                else:
                    net = "GND" if (i * 7 + j * 3) % 6 == 0 else "3V3" if (i * 5 + j) % 13 == 0 else self.take(1)[0]
                items.append(("p", TOP, net, Point(bx, by).buffer(0.2, quad_segs=3)))
                side = 0 if i == ring else 1 if n - 1 - i == ring else 2 if j == ring else 3
                ux, uy = ((-1, 0), (1, 0), (0, -1), (0, 1))[side]
                if ring == 0 and net not in POWER:
                    esc[(side, TOP)].append((net, [(bx, by), (cx + ux * edge, by) if ux else (bx, cy + uy * edge)]))
                    continue
                vx, vy = bx + (0.4 if i >= n / 2 else -0.4), by + (0.4 if j >= n / 2 else -0.4)  # dog-bone
                items += [("t", TOP, net, 0.1, [(bx, by), (vx, vy)]), ("v", vx, vy, net, 0.2, 0.4)]
                if 1 <= ring <= 3 and net not in POWER:  # 45 degrees into the channel between via rows, then out
                    lead = [(vx + ux * 0.4, by), (cx + ux * edge, by)] if ux else \
                        [(bx, vy + uy * 0.4), (bx, cy + uy * edge)]
                    esc[(side, (IN1, IN2, BOT)[ring - 1])].append((net, [(vx, vy), *lead]))
        if not self.fits(items):
            return self.release()
        self.commit(items)
        self.ics.append((cx, cy, half + 1.6))
        for (side, layer), heads in esc.items():
            h = (4, 0, 6, 2)[side]
            length = self.rng.uniform(3, 8) if layer == TOP else self.rng.uniform(30, 120) * math.sqrt(self.scale)
            self.pending.append((layer, [(net, lead, None) for net, lead in heads],
                                 (cx + DIRS[h][0] * edge, cy + DIRS[h][1] * edge), h, 0.1, length))
        return True

    def qfp(self, cx, cy, per_side: int, pinnets=None, layer_of=(IN1, IN1, IN2, IN2)) -> bool:
        span = (per_side - 1) * 0.5
        body, nets = span + 2.6, pinnets or self.take(4 * per_side)
        if not self.claim(rect(cx, cy, body + 8.4, body + 8.4)):
            return False
        items, esc = [("p", TOP, "GND", rect(cx, cy, body, body))], defaultdict(list)
        items += [("v", cx + gx * 1.2, cy + gy * 1.2, "GND", 0.3, 0.6) for gx in (-1, 0, 1) for gy in (-1, 0, 1)]
        edge = body / 2 + 5.0
        for side, h in enumerate((4, 0, 6, 2)):
            (ux, uy), (tx, ty) = DIRS[h], (-DIRS[h][1], DIRS[h][0])
            for k in range(per_side):
                net = "GND" if k % 9 == 4 else "3V3" if k % 9 == 8 else nets[(side * per_side + k) % len(nets)]
                t = -span / 2 + k * 0.5
                px, py = cx + ux * (body / 2 + 1.2) + tx * t, cy + uy * (body / 2 + 1.2) + ty * t
                vx, vy = px + ux * (1.6 + (k % 2)), py + uy * (1.6 + (k % 2))  # staggered fan-out vias
                items += [("p", TOP, net, rect(px, py, 1.5 if ux else 0.28, 0.28 if ux else 1.5)),
                          ("t", TOP, net, 0.15, [(px, py), (vx, vy)]), ("v", vx, vy, net, 0.2, 0.45)]
                if net not in POWER:
                    esc[side].append((net, [(vx, vy), (cx + ux * edge, vy) if ux else (vx, cy + uy * edge)]))
        if not self.fits(items):
            return self.release()
        self.commit(items)
        self.ics.append((cx, cy, body / 2 + 4.2))
        for side, heads in esc.items():
            h = (4, 0, 6, 2)[side]
            self.pending.append((layer_of[side], [(net, lead, None) for net, lead in heads],
                                 (cx + DIRS[h][0] * edge, cy + DIRS[h][1] * edge), h, 0.1,
                                 self.rng.uniform(20, 80) * math.sqrt(self.scale)))
        return True

    def passive(self, cx, cy, rot: int, big: bool, a: str, b: str, layer: int = TOP) -> bool:
        s, pw, ph = (0.8, 0.9, 0.95) if big else (0.5, 0.55, 0.6)  # 0603 / 0402
        ux, uy = (1, 0) if rot == 0 else (0, 1)
        long_, short = 2 * s + pw + 0.4, ph + 0.4
        if not self.claim(rect(cx, cy, long_ if ux else short, long_ if uy else short), layer):
            return False
        items = []
        for sign, net in ((-1, a), (1, b)):
            px, py = cx + sign * ux * s, cy + sign * uy * s
            vx, vy = px + sign * ux * (pw / 2 + 0.7), py + sign * uy * (pw / 2 + 0.7)
            items += [("p", layer, net, rect(px, py, *((pw, ph) if ux else (ph, pw)))), ("v", vx, vy, net, 0.2, 0.45),
                      ("t", layer, net, 0.25 if net in POWER else 0.12, [(px, py), (vx, vy)])]
        return self.attempt(items) or self.release()

    def passives(self, want: int, near_ics: bool) -> None:
        r, placed = self.rng, 0
        for _ in range(6 * want):
            if placed >= want:
                break
            if near_ics and self.ics:  # decoupling around the ICs
                cx, cy, half = self.ics[int(r.integers(len(self.ics)))]
                ang, dist = r.uniform(0, 2 * math.pi), half + r.uniform(1.5, 9)
                x, y = cx + dist * math.cos(ang), cy + dist * math.sin(ang)
                if not (3 < x < self.W - 3 and 3 < y < self.H - 3):
                    continue
            else:
                x, y = r.uniform(4, self.W - 4), r.uniform(4, self.H - 4)
            a = str(r.choice(["3V3", "1V8", "VCORE", "5V"])) if r.random() < 0.5 else self.take(1)[0]
            b = "GND" if r.random() < 0.7 else self.take(1)[0]
            placed += self.passive(x, y, int(r.integers(2)), r.random() < 0.3, a, b, BOT if r.random() < 0.2 else TOP)

    # ---- the board
    def scenarios(self) -> None:
        W, H, x, y = self.W, self.H, 12.0, 14.0
        self.commit([("t", TOP, "CLK_ADC", 0.15, [(x, y), (x + 9, y), (x + 11, y + 2)]),  # edge coupling on L1
                     ("t", TOP, "SENSE_BRIDGE", 0.15, [(x + 0.5, y + 0.95), (x + 0.5, y + 0.35), (x + 8.5, y + 0.35)]),
                     ("v", x, y, "CLK_ADC", 0.2, 0.45), ("v", x + 0.5, y + 0.95, "SENSE_BRIDGE", 0.2, 0.45)])
        x, y = 10.0, 28.0  # a switch node on L3 over an analog input on L4
        self.commit([("t", IN1, "SW_BUCK1", 0.4, [(x, y), (x + 14, y)]),
                     ("t", IN2, "AIN3", 0.15, [(x + 0.8, y + 0.1), (x + 16, y + 0.1)]),
                     ("v", x, y, "SW_BUCK1", 0.3, 0.6), ("v", x + 16, y + 0.1, "AIN3", 0.2, 0.45)])
        x, y = 0.55 * W, 0.45 * H  # across the L5 split between 3V3 (left) and 5V (right)
        self.commit([("t", IN2, "CLK_MAIN", 0.12, [(x - 6, y), (x + 6, y)]),
                     ("v", x - 6, y, "CLK_MAIN", 0.2, 0.45), ("v", x + 6, y, "CLK_MAIN", 0.2, 0.45)])
        x, y = 30.0, 6.0
        self.commit([("t", BOT, "SPI0_SCK", 0.12, [(x, y), (x + 7, y)]),
                     ("t", BOT, "THERM_2", 0.12, [(x + 1, y + 0.4), (x + 6, y + 0.4)])])
        for k, out in ((1, "5V"), (2, "3V3"), (3, "1V8")):  # buck converters: switch node and output copper
            bx, by = W - 17, 9 + (k - 1) * 11
            self.claim(rect(bx, by, 14, 9))
            sw = Polygon([(bx - 5, by - 2), (bx, by - 2), (bx, by + 1), (bx - 2, by + 3), (bx - 5, by + 3)])
            self.commit([("p", TOP, f"SW_BUCK{k}", sw), ("p", TOP, out, rect(bx + 4, by, 3.5, 5)),
                         ("p", TOP, "12V_IN", rect(bx - 3, by - 3.6, 4, 1.6)),
                         ("p", BOT, out, rect(bx + 2, by, 8, 7))]
                        + [("v", bx + 4 + dx, by + dy, out, 0.3, 0.6) for dx in (-0.8, 0.8) for dy in (-1.5, 0, 1.5)])

    def build(self) -> dict:
        r, W, H, s = self.rng, self.W, self.H, self.scale
        self.scenarios()
        adc = ANALOG + ["CLK_ADC", "SPI_ADC_SCK", "SPI_ADC_MOSI", "SPI_ADC_MISO", "SPI_ADC_CS", "3V3_A"]
        self.qfp(26 * math.sqrt(s), 0.52 * H, 12, adc, layer_of=(IN2, IN1, IN2, IN2))
        for n, supply in [(21, "VCORE"), (14, "1V8"), (17, "VCORE")] * max(1, round(s)):
            n = round(n * min(1.0, s) ** 0.5)
            any(self.bga(r.uniform(0.13 * W, 0.87 * W), r.uniform(0.2 * H, 0.85 * H), n, supply)
                for _ in range(30))
        for _ in range(max(1, round(6 * s))):
            any(self.qfp(r.uniform(15, W - 15), r.uniform(12, H - 12), int(r.integers(16, 26))) for _ in range(30))
        self.passives(int(300 * s), near_ics=True)
        for args in self.pending:
            self.bundle(*args)
        for pair in PAIRS:
            for _ in range(20):
                layer = int(r.choice([IN1, IN2]))
                h = int(r.choice([0, 4] if layer == IN1 else [2, 6]))
                if self.bus(layer, [pair + "_P", pair + "_N"], (r.uniform(5, W - 5), r.uniform(5, H - 5)), h, 0.1, 0.22,
                            r.uniform(20, 60), pair=True) == 2:
                    self.pairs[pair + "_P"] = pair + "_N"
                    break
        tuned = [n for n in self.pool if n.startswith(("BUS_D", "BUS_A"))]
        for i in range(int(6000 * s)):
            layer = int(r.choice([IN1, IN2, IN1, IN2, BOT, TOP]))
            w = float(r.choice([0.1, 0.1, 0.127, 0.15]))
            h = int(r.choice([0, 4] if layer == IN1 else [2, 6] if layer == IN2 else [0, 2, 4, 6]))
            nets = [tuned[i % len(tuned)]] if i % 4 == 0 else self.take(int(r.integers(2, 12)))
            self.bus(layer, nets, (r.uniform(5, W - 5), r.uniform(5, H - 5)), h, w,
                     w + float(r.choice([0.25, 0.3, 0.35])), r.uniform(30, 150))
        self.passives(int(400 * s), near_ics=True)
        self.passives(int(500 * s), near_ics=False)
        for x in np.arange(2.5, W - 1, 2.5):  # stitching grid, then the edge fence
            for y in np.arange(2.5, H - 1, 2.5):
                self.attempt([("v", float(x), float(y), "GND", 0.3, 0.6)])
        ring = self.outline().buffer(-1.2, join_style="mitre").exterior
        for t in np.arange(0, ring.length, 1.27):
            q = ring.interpolate(t)
            self.attempt([("v", round(q.x, 4), round(q.y, 4), "GND", 0.3, 0.6)])
        return self.to_json()

    # ---- pours and planes
    def outline(self) -> Polygon:
        W, H, c = self.W, self.H, 2.0
        return Polygon([(c, 0), (W - c, 0), (W, c), (W, H - c), (W - c, H), (c, H), (0, H - c), (0, c)])

    def via_arrays(self):
        x, y, net, _, pad = zip(*self.vias)
        return np.array(x), np.array(y), np.array(net, dtype=object), np.array(pad)

    def antipads(self, keep: str):
        x, y, net, pad = self.via_arrays()
        sel = net != keep
        return shapely.union_all(shapely.buffer(shapely.points(x[sel], y[sel]), pad[sel] / 2 + ANTIPAD, quad_segs=6))

    def pour(self, layer: int) -> list:
        occ = self.occ[layer]
        blocked = shapely.union_all(shapely.buffer(np.array([g for g, n in zip(occ.geoms, occ.nets) if n != "GND"],
                                                            dtype=object), POUR_CLR, quad_segs=4))
        gpads = [p for (lay, n, p) in self.pads if lay == layer and n == "GND"]
        gaps = shapely.union_all(shapely.buffer(np.array(gpads, dtype=object), THERMAL_GAP, join_style="mitre"))
        area = self.outline().buffer(-0.5, join_style="mitre").difference(shapely.union_all(self.keepouts))
        spokes, hw = [], SPOKE_W / 2
        for p in gpads:  # thermal relief: 4 spokes across the gap
            (x0, y0, x1, y1), (cx, cy) = p.bounds, p.centroid.coords[0]
            rx, ry = (x1 - x0) / 2 + THERMAL_GAP + 0.3, (y1 - y0) / 2 + THERMAL_GAP + 0.3
            spokes += [box(cx, cy - hw, cx + rx, cy + hw), box(cx - rx, cy - hw, cx, cy + hw),
                       box(cx - hw, cy, cx + hw, cy + ry), box(cx - hw, cy - ry, cx + hw, cy)]
        spokes = np.array(spokes, dtype=object)
        shapely.prepare(blocked)
        spokes = spokes[~shapely.intersects(spokes, blocked)] if len(spokes) else spokes
        fill = shapely.union_all(np.concatenate([[area.difference(blocked).difference(gaps)], spokes]))
        return self.connected(fill, "GND")

    def connected(self, copper, net: str) -> list:
        """The parts of copper (over 1 mm2) that a via of net lands on: islands are removed."""
        x, y, nets, _ = self.via_arrays()
        parts = np.array([p for p in shapely.get_parts(copper) if p.area > 1.0], dtype=object)
        _, hit = shapely.STRtree(parts).query(shapely.points(x[nets == net], y[nets == net]), predicate="intersects")
        return list(parts[np.unique(hit)])

    def planes(self) -> list:
        W, H, s = self.W, self.H, math.sqrt(self.scale)
        slot, void = box(43 * s, 4, 44.2 * s, 0.6 * H), box(W * 0.35, H * 0.85, W * 0.35 + 6, H * 0.85 + 6)
        gnd = self.outline().buffer(-0.3, join_style="mitre").difference(self.antipads("GND"))
        gnd = gnd.difference(slot).difference(void)
        out = [(L2, "GND", p) for p in self.connected(gnd, "GND")]
        x, analog = 0.55 * W, box(1, 1, 42 * s, 0.66 * H)
        core = [rect(*p.centroid.coords[0], 6, 6) for (lay, n, p) in self.pads if n == "VCORE" and lay == TOP]
        core = shapely.union_all(np.array(core, dtype=object)).buffer(2.0).buffer(-1.5) if core else Polygon()
        core = shapely.union_all([box(a, 0, c, d) if b < H - d else box(a, b, c, H)  # each VCORE island
                                  for a, b, c, d in shapely.bounds(shapely.get_parts(core))])  # reaches an edge
        regions = {"3V3_A": analog, "VCORE": core.difference(analog.buffer(0.5))}
        for net, area in (("1V8", box(x, 0.5 * H, W, H)), ("5V", box(x, 0, W, 0.5 * H)), ("3V3", box(0, 0, x, H))):
            regions[net] = area.difference(shapely.union_all(list(regions.values())).buffer(0.5))
        pwr = self.outline().buffer(-0.8, join_style="mitre")
        for net, reg in regions.items():
            reg = reg.buffer(-0.25, join_style="mitre").intersection(pwr).difference(self.antipads(net))
            out += [(L5, net, p) for p in self.connected(reg, net)]
        return out

    def to_json(self) -> dict:
        rnd = lambda pts: [[round(x, 4), round(y, 4)] for x, y in pts]  # noqa: E731
        regions = [*self.pads, *((layer, "GND", p) for layer in SIGNAL for p in self.pour(layer)), *self.planes()]
        self.split_points, tracks, arcs = 0, [], []
        for layer, net, w, pts, style in self.tracks:
            runs = [pts]
            if isinstance(style, tuple):
                _, runs, fillets = style
                arcs += [{"layer": NAMES[layer], "net": net, "width": w, "center": [round(c[0], 6), round(c[1], 6)],
                          "radius": round(r, 6), "start_angle": round(a, 6), "end_angle": round(b, 6)}
                         for c, r, a, b in fillets]
            for run in runs:
                out = [run[0]]
                for a, b in zip(run[:-1], run[1:]):  # runs split into collinear pieces
                    n = int(math.dist(a, b) / self.rng.uniform(0.5, 1.5) / self.split) if style else 0
                    f = np.sort(self.rng.uniform(0.1, 0.9, n))
                    out += list(zip(a[0] + (b[0] - a[0]) * f, a[1] + (b[1] - a[1]) * f))
                    out.append(b)
                self.split_points += len(out) - len(run)
                q = rnd(out)
                if any(v != q[0] for v in q):
                    tracks.append({"layer": NAMES[layer], "net": net, "width": w, "points": q})
        self.nets.update((n, None) for _, n, _ in regions)
        # holed regions first, largest first, so a clear hole erases nothing written before it; an island with
        # holes inside another region's hole is left out (write_fab would fall back to slow cut-ins for it)
        regions.sort(key=lambda t: (t[0], not t[2].interiors, -t[2].area))
        holed = [i for i, t in enumerate(regions) if t[2].interiors]
        a, b = shapely.STRtree([Polygon(t[2].exterior) for t in regions]).query(
            shapely.point_on_surface([regions[i][2] for i in holed]), predicate="within")
        nested = {holed[i] for i, j in zip(a, b) if holed[i] != j and regions[j][0] == regions[holed[i]][0]}
        self.dropped_islands, jreg = len(nested), []
        for layer, net, p in (t for i, t in enumerate(regions) if i not in nested):
            for q in shapely.get_parts(shapely.set_precision(p, 1e-4)):
                if q.area > 0:
                    jreg.append({"layer": NAMES[layer], "net": net, "outline": rnd(q.exterior.coords[:-1]),
                                 **({"holes": [rnd(h.coords[:-1]) for h in q.interiors]} if q.interiors else {})})
        stack = [{"mask": "top-mask", "thickness": 0.02, "er": 3.7, "loss_tangent": 0.02}]
        diel = [("prepreg-1", 0.1, 4.0), ("core-1", 0.3, 4.4), ("prepreg-2", 0.6, 4.2), ("core-2", 0.3, 4.4),
                ("prepreg-3", 0.1, 4.0)]
        for i, (name, role) in enumerate(zip(NAMES, ("signal", "plane", "signal", "signal", "plane", "mixed"))):
            stack.append({"copper": name, "role": role, "thickness": 0.035 if i in (0, 5) else 0.018})
            if i < 5:
                d = diel[i]
                stack.append({"dielectric": d[0], "thickness": d[1], "er": d[2], "loss_tangent": 0.018})
        stack.append({"mask": "bottom-mask", "thickness": 0.02, "er": 3.7, "loss_tangent": 0.02})
        return {"format": "couplint-board", "version": 1, "name": "realistic-6L",
                "description": "Invented 6-layer benchmark board (scripts/realistic_fab.py), not a real product.",
                "units": "mm", "stackup": stack,
                "nets": [{"name": n, **({"pair": self.pairs[n]} if n in self.pairs else {})} for n in self.nets],
                "tracks": tracks, "arcs": arcs, "regions": jreg,
                "vias": [{"at": rnd([(x, y)])[0], "drill": d, "pad": pd, "from": NAMES[0], "to": NAMES[-1], "net": n}
                         for x, y, n, d, pd in self.vias],
                "outline": rnd(self.outline().exterior.coords[:-1])}


def counts(data: dict, board) -> str:
    """Per layer: pieces as couplint reads them (arcs chorded), regions, their vertices and holes."""
    pieces = np.bincount(board.pieces.layer, minlength=6)
    size = lambda r: len(r["outline"]) + sum(len(h) for h in r.get("holes", []))  # noqa: E731
    per = {n: [r for r in data["regions"] if r["layer"] == n] for n in NAMES}
    lines = [f"{'layer':8} {'pieces':>8} {'regions':>8} {'vertices':>9} {'holes':>7}"]
    lines += [f"{n:8} {pieces[i]:8d} {len(per[n]):8d} {sum(map(size, per[n])):9d} "
              f"{sum(len(r.get('holes', [])) for r in per[n]):7d}" for i, n in enumerate(NAMES)]
    big = max(data["regions"], key=size)
    lines += [f"total    {pieces.sum():8d} {len(data['regions']):8d} {sum(map(size, data['regions'])):9d} "
              f"{sum(len(r.get('holes', [])) for r in data['regions']):7d}   "
              f"(pieces + regions = {pieces.sum() + len(data['regions'])})",
              f"largest region: {big['layer']} {big['net']}, {size(big)} vertices, {len(big.get('holes', []))} holes",
              f"vias {len(data['vias'])}, nets {len(data['nets'])} ({sum('pair' in n for n in data['nets'])} pairs), "
              f"tracks {len(data['tracks'])}, arcs {len(data['arcs'])}"]
    return "\n".join(lines)


def generate(outdir: Path, scale: float, seed: int, split: float, json_only: bool, **fab_options) -> None:
    from checker.readers import load_board
    t0 = time.perf_counter()
    gen = Gen(scale, seed, split)
    data = gen.build()
    t1 = time.perf_counter()
    outdir.mkdir(parents=True, exist_ok=True)
    path = outdir / "realistic-6L.json" if json_only else outdir.parent / f"{outdir.name}.json"
    path.write_text(json.dumps(data, separators=(",", ":")))
    board = load_board(path)
    print(counts(data, board))
    print(f"generated in {t1 - t0:.1f} s ({gen.split_points} collinear split points, {gen.dropped_islands} nested "
          f"islands left out); the JSON loads")
    files = [path]
    pairs = max(sum(map(len, r.get("holes", []))) * len(r["outline"]) for r in data["regions"])
    if fab_options.get("holes") == "cutin" and pairs > 2e6 and not json_only:  # it would need many GB
        sys.exit(f"--holes cutin: write_fab.cutin_contour weighs every hole corner against every contour corner, "
                 f"{pairs:.1e} pairs for the largest pour here; use --holes clear")
    if not json_only:
        t2 = time.perf_counter()
        files += write_fab(board, outdir, ipc356=True, **fab_options)
        print(f"package written in {time.perf_counter() - t2:.1f} s")
    for f in files:
        print(f"{f.stat().st_size:>11,d}  {f}")


def bench(scale: float, seed: int, warm: bool, profile: bool) -> int:
    key = hashlib.sha256(Path(__file__).read_bytes() + (ROOT / "scripts/write_fab.py").read_bytes()).hexdigest()[:10]
    pkg = Path(tempfile.gettempdir()) / f"couplint-realistic-fab-{scale:g}-{seed}-{key}"
    if not (pkg / "realistic-6L.gbrjob").exists():
        subprocess.run([sys.executable, __file__, str(pkg), "--scale", str(scale), "--seed", str(seed)], check=True)
    if not warm:
        os.environ["COUPLINT_CACHE_DIR"] = "off"
    from checker import cli
    out, prof = pkg.parent / f"{pkg.name}-report.json", cProfile.Profile() if profile else None
    t0 = time.perf_counter()
    prof and prof.enable()
    code = cli.main(["check", str(pkg), "--format", "json", "--out", str(out)])
    prof and prof.disable()
    wall, peak = time.perf_counter() - t0, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    findings = len(json.loads(out.read_text()).get("findings", [])) if out.exists() else "?"
    print(f"package {pkg}\nexit {code}, {findings} findings, wall {wall:.1f} s{' (under cProfile)' * profile}, "
          f"peak RSS {peak:.0f} MB, field-solve cache {'on' if warm else 'off'}")
    if prof:
        prof.dump_stats(pkg.parent / f"{pkg.name}-check.prof")
        text = io.StringIO()
        pstats.Stats(prof, stream=text).sort_stats("cumulative").print_stats(25).sort_stats("tottime").print_stats(12)
        print(text.getvalue() + f"(all stats: {pkg.name}-check.prof beside it; field solves run in worker threads, "
              "which cProfile does not see: they show as lock waits in solve_shared)")
    return 0 if code in (0, 1) else code


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description="Write an invented 6-layer fabrication package (benchmark board).")
    ap.add_argument("outdir", nargs="?", help="folder for the package (the board JSON goes beside it as OUTDIR.json)")
    ap.add_argument("--scale", type=float, default=1.0, help="board area and copper count factor (1: ~160 x 100 mm)")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--split", type=float, default=0.2, help="mean length (mm) of the collinear pieces of a run")
    ap.add_argument("--json-only", action="store_true", help="write only the board, as OUTDIR/realistic-6L.json")
    ap.add_argument("--holes", choices=("clear", "cutin"), default="clear", help="holes as clear objects or cut-ins")
    ap.add_argument("--sr", action="store_true", help="via grids as step-and-repeat blocks")
    ap.add_argument("--no-net-attributes", action="store_true",
                    help="no TO.N: couplint names the copper by connectivity and the IPC-D-356A netlist")
    ap.add_argument("--bench", action="store_true", help="profile 'couplint check' on a (cached) package")
    ap.add_argument("--warm-cache", action="store_true", help="with --bench: use the field-solve disk cache")
    ap.add_argument("--no-profile", action="store_true", help="with --bench: time the check without cProfile")
    args = ap.parse_args(argv)
    if args.scale < 0.25:
        ap.error("--scale below 0.25 leaves no room for the parts")
    if args.bench:
        return bench(args.scale, args.seed, args.warm_cache, not args.no_profile)
    if not args.outdir:
        ap.error("give OUTDIR (or --bench)")
    generate(Path(args.outdir), args.scale, args.seed, args.split, args.json_only, holes=args.holes, sr=args.sr,
             net_attributes=not args.no_net_attributes)
    return 0


if __name__ == "__main__":
    sys.exit(main())
