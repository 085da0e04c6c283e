"""The bare geometry pipeline: the reference couplint's speed is measured against.

What any coupling checker must at least do on a two-layer board, written as
a lean numpy/shapely program (no physics, no rules, no report):

1. **Broadside**: every pair of pieces on the two neighbouring layers whose
   copper overlaps (each piece a flat-capped rectangle of its width along
   its centre line), with the exact overlap area (the two rectangles
   clipped against each other, Sutherland-Hodgman, vectorised over all
   pairs) and the run length (the part of one centre line inside the other
   rectangle, Liang-Barsky clipping).
2. **Edge**: on each layer, every pair of pieces of different nets whose
   centre lines come within 1 mm, with the exact centre-line distance
   (closed form for two segments) and the run length (the length of one
   piece's projection onto the other's line that falls on the other).

Candidates come from shapely's STRtree (one bulk query of the pieces'
bounding boxes, no predicate: the fast path of the library), every exact
figure from numpy over all candidates at once. This is the speed a plain,
competent implementation on the standard stack reaches; couplint does much
more (field-solved capacitance, noise, rules, reports), so the ratio of the
two is the price of all of that.

    python scripts/bare_pipeline.py 100000          # one size: its figures as JSON
"""

from __future__ import annotations

import argparse
import json
import resource
import sys
import time
from pathlib import Path

import numpy as np
import shapely

sys.path.insert(0, str(Path(__file__).resolve().parent))

#: Edge search distance (mm): the same as the benchmarks' rule set.
EDGE_MM = 1.0


def corners(x1, y1, x2, y2, w) -> np.ndarray:
    """(n, 4, 2) corners of flat-capped rectangles, counter-clockwise."""
    dx, dy = x2 - x1, y2 - y1
    length = np.hypot(dx, dy)
    nx, ny = -dy / length * w / 2, dx / length * w / 2
    return np.stack([np.stack([x1 - nx, y1 - ny], -1), np.stack([x2 - nx, y2 - ny], -1),
                     np.stack([x2 + nx, y2 + ny], -1), np.stack([x1 + nx, y1 + ny], -1)], 1)


def clip_area(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Overlap area of convex quadrilaterals ``a`` and ``b`` ((n, 4, 2),
    counter-clockwise): ``a`` clipped by each edge of ``b`` (Sutherland-
    Hodgman, fixed-size arrays of at most 8 vertices), then the shoelace."""
    n = a.shape[0]
    poly = np.zeros((n, 8, 2))
    poly[:, :4] = a
    count = np.full(n, 4)
    for e in range(4):
        p, q = b[:, e], b[:, (e + 1) % 4]
        edge = q - p
        side = (edge[:, None, 0] * (poly[..., 1] - p[:, None, 1])
                - edge[:, None, 1] * (poly[..., 0] - p[:, None, 0]))  # >= 0: inside (left of the edge)
        out = np.zeros_like(poly)
        out_count = np.zeros(n, dtype=np.int64)
        rows = np.arange(n)
        for k in range(8):
            valid = k < count
            nxt = np.where(k + 1 < count, k + 1, 0)
            cur_in = side[:, k] >= 0
            nxt_side = side[rows, nxt]
            nxt_in = nxt_side >= 0
            keep = valid & cur_in
            out[rows[keep], out_count[keep]] = poly[keep, k]
            out_count += keep
            cross = valid & (cur_in != nxt_in)
            t = side[:, k] / np.where(cross, side[:, k] - nxt_side, 1.0)
            point = poly[:, k] + t[:, None] * (poly[rows, nxt] - poly[:, k])
            out[rows[cross], np.minimum(out_count[cross], 7)] = point[cross]
            out_count += cross
        poly, count = out, np.minimum(out_count, 8)
    x, y = poly[..., 0], poly[..., 1]
    idx = np.arange(8)
    nxt = np.where(idx[None, :] + 1 < count[:, None], idx[None, :] + 1, 0)
    rows = np.arange(n)[:, None]
    cross = x * y[rows, nxt] - x[rows, nxt] * y
    cross = np.where(idx[None, :] < count[:, None], cross, 0.0)
    return np.abs(cross.sum(1)) / 2


def clip_length(x1, y1, x2, y2, b: np.ndarray) -> np.ndarray:
    """Length of segments (x1, y1)-(x2, y2) inside convex quadrilaterals
    ``b`` (counter-clockwise), by Liang-Barsky clipping."""
    t0 = np.zeros(x1.shape)
    t1 = np.ones(x1.shape)
    dx, dy = x2 - x1, y2 - y1
    for e in range(4):
        p, q = b[:, e], b[:, (e + 1) % 4]
        ex, ey = q[:, 0] - p[:, 0], q[:, 1] - p[:, 1]
        start = ex * (y1 - p[:, 1]) - ey * (x1 - p[:, 0])  # >= 0 inside
        rate = ex * dy - ey * dx
        with np.errstate(divide="ignore", invalid="ignore"):
            t = -start / rate
        entering = rate > 0
        leaving = rate < 0
        t0 = np.where(entering, np.maximum(t0, t), t0)
        t1 = np.where(leaving, np.minimum(t1, t), t1)
        t1 = np.where((rate == 0) & (start < 0), -1.0, t1)
    return np.maximum(t1 - t0, 0.0) * np.hypot(dx, dy)


def segment_distance(ax1, ay1, ax2, ay2, bx1, by1, bx2, by2) -> np.ndarray:
    """Shortest distance between segments, vectorised (zero if they cross)."""
    def point_seg(px, py, sx1, sy1, sx2, sy2):
        dx, dy = sx2 - sx1, sy2 - sy1
        t = np.clip(((px - sx1) * dx + (py - sy1) * dy) / (dx * dx + dy * dy), 0.0, 1.0)
        return np.hypot(px - sx1 - t * dx, py - sy1 - t * dy)

    d = np.minimum.reduce([point_seg(ax1, ay1, bx1, by1, bx2, by2), point_seg(ax2, ay2, bx1, by1, bx2, by2),
                           point_seg(bx1, by1, ax1, ay1, ax2, ay2), point_seg(bx2, by2, ax1, ay1, ax2, ay2)])

    def orient(px, py, qx, qy, rx, ry):
        return (qx - px) * (ry - py) - (qy - py) * (rx - px)

    crossing = ((orient(ax1, ay1, ax2, ay2, bx1, by1) * orient(ax1, ay1, ax2, ay2, bx2, by2) < 0)
                & (orient(bx1, by1, bx2, by2, ax1, ay1) * orient(bx1, by1, bx2, by2, ax2, ay2) < 0))
    return np.where(crossing, 0.0, d)


def candidates(boxes_a: np.ndarray, boxes_b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Pairs of boxes (xmin, ymin, xmax, ymax) that intersect: one bulk
    STRtree query, no predicate."""
    tree = shapely.STRtree(shapely.box(*boxes_b.T))
    return tree.query(shapely.box(*boxes_a.T))


def broadside(p, layer_a: int, layer_b: int) -> dict:
    ra, rb = np.flatnonzero(p.layer == layer_a), np.flatnonzero(p.layer == layer_b)
    ca = corners(p.x1[ra], p.y1[ra], p.x2[ra], p.y2[ra], p.width[ra])
    cb = corners(p.x1[rb], p.y1[rb], p.x2[rb], p.y2[rb], p.width[rb])
    box = lambda c: np.stack([c[..., 0].min(1), c[..., 1].min(1), c[..., 0].max(1), c[..., 1].max(1)], 1)  # noqa: E731
    ia, ib = candidates(box(ca), box(cb))
    area = clip_area(ca[ia], cb[ib])
    keep = area > 0
    ia, ib, area = ia[keep], ib[keep], area[keep]
    a = ra[ia]
    run = clip_length(p.x1[a], p.y1[a], p.x2[a], p.y2[a], cb[ib])
    return {"pairs": int(len(ia)), "area_mm2": float(area.sum()), "run_mm": float(run.sum())}


def edge(p, layer: int) -> dict:
    rows = np.flatnonzero(p.layer == layer)
    x1, y1, x2, y2, net = p.x1[rows], p.y1[rows], p.x2[rows], p.y2[rows], p.net[rows]
    boxes = np.stack([np.minimum(x1, x2), np.minimum(y1, y2), np.maximum(x1, x2), np.maximum(y1, y2)], 1)
    i, j = candidates(boxes, boxes + np.array([-EDGE_MM, -EDGE_MM, EDGE_MM, EDGE_MM]))
    keep = (i < j) & (net[i] != net[j])
    i, j = i[keep], j[keep]
    gap = segment_distance(x1[i], y1[i], x2[i], y2[i], x1[j], y1[j], x2[j], y2[j])
    near = gap <= EDGE_MM
    i, j, gap = i[near], j[near], gap[near]
    # run: the part of piece i's projection onto piece j's line that lies on piece j
    dx, dy = x2[j] - x1[j], y2[j] - y1[j]
    length = np.hypot(dx, dy)
    ux, uy = dx / length, dy / length
    s1 = (x1[i] - x1[j]) * ux + (y1[i] - y1[j]) * uy
    s2 = (x2[i] - x1[j]) * ux + (y2[i] - y1[j]) * uy
    run = np.maximum(np.minimum(np.maximum(s1, s2), length) - np.maximum(np.minimum(s1, s2), 0.0), 0.0)
    return {"pairs": int(len(i)), "mean_gap_mm": float(gap.mean()) if len(gap) else 0.0, "run_mm": float(run.sum())}


def run(pieces) -> dict:
    """The whole bare pipeline on a two-layer ``Pieces``; figures and times."""
    t0, c0 = time.perf_counter(), time.process_time()
    out = {"broadside": broadside(pieces, 0, 1), "edge": [edge(pieces, 0), edge(pieces, 1)]}
    out["seconds"] = time.perf_counter() - t0
    out["cpu_seconds"] = time.process_time() - c0
    return out


def main(argv: list[str] | None = None) -> int:
    from synth import make_pieces

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("n", type=int, help="pieces per layer")
    ap.add_argument("--seed", type=int, default=1)
    args = ap.parse_args(argv)
    pieces = make_pieces(args.n, args.seed, layers=2)
    base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    figures = run(pieces)
    figures.update(n=args.n, peak_mb=resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024, base_mb=base)
    print(json.dumps(figures))
    return 0


if __name__ == "__main__":
    sys.exit(main())
