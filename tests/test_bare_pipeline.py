"""The bare reference pipeline of the speed benchmark (scripts/bare_pipeline.py)
computes the same exact geometry as shapely (GEOS), the general-purpose
reference: overlap areas of rotated rectangles, segment lengths inside
them, segment-to-segment distances. A wrong reference would make the
benchmark's ratio meaningless."""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import shapely

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "scripts"))

import bare_pipeline as bp  # noqa: E402


def random_segments(rng: np.random.Generator, n: int):
    x1, y1 = rng.uniform(0, 3, n), rng.uniform(0, 3, n)
    angle, length = rng.uniform(0, 2 * np.pi, n), rng.uniform(0.3, 3, n)
    return x1, y1, x1 + length * np.cos(angle), y1 + length * np.sin(angle), rng.uniform(0.1, 1, n)


def test_exact_geometry_matches_shapely() -> None:
    rng = np.random.default_rng(7)
    a, b = random_segments(rng, 4000), random_segments(rng, 4000)
    ca, cb = bp.corners(*a), bp.corners(*b)
    pa, pb = shapely.polygons(ca), shapely.polygons(cb)
    assert np.allclose(shapely.area(pa), np.hypot(a[2] - a[0], a[3] - a[1]) * a[4])  # length x width
    overlap = shapely.area(shapely.intersection(pa, pb))
    assert (overlap > 0).sum() > 500  # the sample has many real overlaps
    np.testing.assert_allclose(bp.clip_area(ca, cb), overlap, atol=1e-12)
    line_a = shapely.linestrings(np.stack([np.stack(a[:2], 1), np.stack(a[2:4], 1)], 1))
    line_b = shapely.linestrings(np.stack([np.stack(b[:2], 1), np.stack(b[2:4], 1)], 1))
    np.testing.assert_allclose(bp.clip_length(*a[:4], cb), shapely.length(shapely.intersection(line_a, pb)),
                               atol=1e-12)
    np.testing.assert_allclose(bp.segment_distance(*a[:4], *b[:4]), shapely.distance(line_a, line_b), atol=1e-12)


def test_candidates_find_every_touching_box_pair() -> None:
    rng = np.random.default_rng(8)
    lo = rng.uniform(0, 20, (300, 2))
    boxes = np.concatenate([lo, lo + rng.uniform(0.1, 2, (300, 2))], 1)
    i, j = bp.candidates(boxes, boxes)
    got = set(zip(i.tolist(), j.tolist()))
    want = {(p, q) for p in range(300) for q in range(300)
            if boxes[p, 0] <= boxes[q, 2] and boxes[q, 0] <= boxes[p, 2]
            and boxes[p, 1] <= boxes[q, 3] and boxes[q, 1] <= boxes[p, 3]}
    assert got == want
