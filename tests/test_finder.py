"""Tests of the coupling finder against hand-computed geometry and a
brute-force reference.

Each expected value carries its hand calculation in the comment beside it.
Pieces are rectangles of width w centred on their segment, flat ends.
"""

from __future__ import annotations

import functools
import math

import numpy as np
import pytest
import shapely

from checker.finder import PairTable, find_broadside, find_edge, run_labels
from checker.finder.index import Boxes, overlapping_pairs
from checker.model import NO_NET, Pieces

TOL = 1e-9


def mk(*rows) -> Pieces:
    """Pieces from rows (x1, y1, x2, y2, width, net, layer[, source, ordinal]);
    source defaults to the row number and ordinal to 0."""
    full = [tuple(r) + ((i, 0) if len(r) == 7 else ()) for i, r in enumerate(rows)]
    return Pieces.from_columns(*zip(*full)) if full else Pieces.empty()


def one(table: PairTable) -> dict:
    assert len(table) == 1, f"expected one pair, got {len(table)}"
    return {n: getattr(table, n)[0] for n in PairTable.COLUMNS}


# --- parallel pairs -----------------------------------------------------------

def test_parallel_fully_overlapped_broadside():
    p = mk((0, 0, 10, 0, 0.2, 1, 0), (2, 0.05, 8, 0.05, 0.1, 2, 1))
    r = one(find_broadside(p, 0, 1, search_mm=0.5))
    assert (r["a"], r["b"]) == (0, 1)
    assert r["parallel"] and r["angle_deg"] == pytest.approx(0, abs=TOL)   # both along x
    assert r["length_mm"] == pytest.approx(6.0, abs=TOL)      # projections [0,10] and [2,8] overlap on [2,8]
    assert r["offset_mm"] == pytest.approx(0.05, abs=TOL)     # centrelines at y=0 and y=0.05
    assert r["gap_mm"] == pytest.approx(-0.1, abs=TOL)        # 0.05 - (0.2+0.1)/2
    assert r["overlap_mm2"] == pytest.approx(0.6, abs=TOL)    # 6 * clip(0.15-0.05, 0, 0.1) = 6 * 0.1: all of b
    assert r["x"] == pytest.approx(5.0, abs=TOL)              # middle of [2, 8]
    assert r["y"] == pytest.approx(0.025, abs=TOL)            # midway between y=0 and y=0.05


def test_parallel_offset_by_one_width_kept_within_search():
    p = mk((0, 0, 10, 0, 0.2, 1, 0), (0, 0.2, 10, 0.2, 0.2, 2, 1))
    r = one(find_broadside(p, 0, 1, search_mm=0.1))
    assert r["offset_mm"] == pytest.approx(0.2, abs=TOL)      # one width apart
    assert r["gap_mm"] == pytest.approx(0.0, abs=TOL)         # 0.2 - (0.2+0.2)/2: edges touch in plan
    assert r["overlap_mm2"] == pytest.approx(0.0, abs=TOL)    # 10 * clip(0.2-0.2, 0, 0.2)
    assert r["length_mm"] == pytest.approx(10.0, abs=TOL)     # same extent [0, 10]


def test_parallel_gap_against_search_distance():
    p = mk((0, 0, 10, 0, 0.2, 1, 0), (0, 0.5, 10, 0.5, 0.2, 2, 1))
    # gap = 0.5 - (0.2+0.2)/2 = 0.3
    assert len(find_broadside(p, 0, 1, search_mm=0.25)) == 0     # 0.3 > 0.25
    assert one(find_broadside(p, 0, 1, search_mm=0.35))["gap_mm"] == pytest.approx(0.3, abs=TOL)


def test_parallel_partial_run():
    p = mk((0, 0, 10, 0, 0.2, 1, 0), (7, 0.3, 15, 0.3, 0.2, 2, 1))
    r = one(find_broadside(p, 0, 1, search_mm=0.5))
    assert r["length_mm"] == pytest.approx(3.0, abs=TOL)      # [0,10] and [7,15] overlap on [7,10]
    assert r["offset_mm"] == pytest.approx(0.3, abs=TOL)
    assert r["gap_mm"] == pytest.approx(0.1, abs=TOL)         # 0.3 - 0.2
    assert r["overlap_mm2"] == pytest.approx(0.0, abs=TOL)    # gap > 0, no copper overlap
    assert (r["x"], r["y"]) == pytest.approx((8.5, 0.15), abs=TOL)   # middle of [7,10]; between 0 and 0.3


def test_parallel_at_five_degrees_uses_bisector():
    c5, s5 = math.cos(math.radians(5)), math.sin(math.radians(5))
    c, s = math.cos(math.radians(2.5)), math.sin(math.radians(2.5))
    p = mk((0, 0, 10, 0, 0.2, 1, 0), (0, 1, 10 * c5, 1 + 10 * s5, 0.2, 2, 1))
    r = one(find_broadside(p, 0, 1, search_mm=2.0))
    assert r["angle_deg"] == pytest.approx(5.0, abs=TOL)
    # bisector u at 2.5 deg: a projects to [0, 10c]; b's start (0,1) to s, its end to
    # 10*cos5*c + (1+10*sin5)*s = 10c + s; overlap [s, 10c]
    assert r["length_mm"] == pytest.approx(10 * c - s, abs=TOL)          # 9.946856...
    # at tm = (10c+s)/2: a's point (tm/c, 0), b's point (0,1) + ((tm-s)/c)(cos5, sin5);
    # their distance along n = (-s, c) works out to c + 10 s
    assert r["offset_mm"] == pytest.approx(c + 10 * s, abs=TOL)          # 1.435242...
    assert r["gap_mm"] == pytest.approx(c + 10 * s - 0.2, abs=TOL)


# --- crossings ----------------------------------------------------------------

def test_orthogonal_crossing():
    p = mk((0, 0, 10, 0, 0.2, 1, 0), (5, -5, 5, 5, 0.3, 2, 1))
    r = one(find_broadside(p, 0, 1, search_mm=0.0))
    assert r["angle_deg"] == pytest.approx(90.0, abs=TOL)
    assert not r["parallel"]
    assert r["overlap_mm2"] == pytest.approx(0.06, abs=TOL)   # wa*wb = 0.2*0.3
    assert r["length_mm"] == pytest.approx(0.3, abs=TOL)      # max(wa, wb)
    assert r["offset_mm"] == 0.0
    assert r["gap_mm"] == pytest.approx(-0.2, abs=TOL)        # -min(wa, wb)
    assert (r["x"], r["y"]) == pytest.approx((5.0, 0.0), abs=TOL)   # crossing point


def test_thirty_degree_crossing():
    c30, s30 = math.cos(math.radians(30)), math.sin(math.radians(30))
    p = mk((0, 0, 10, 0, 0.2, 1, 0), (5 - 4 * c30, -4 * s30, 5 + 4 * c30, 4 * s30, 0.3, 2, 1))
    r = one(find_broadside(p, 0, 1, search_mm=0.0))
    assert r["angle_deg"] == pytest.approx(30.0, abs=TOL)
    assert r["overlap_mm2"] == pytest.approx(0.12, abs=TOL)   # wa*wb/sin30 = 0.06/0.5
    assert r["length_mm"] == pytest.approx(0.6, abs=TOL)      # max(wa, wb)/sin30 = 0.3/0.5
    assert (r["x"], r["y"]) == pytest.approx((5.0, 0.0), abs=TOL)


def test_crossing_at_a_piece_end():
    # a ends at x=5 inside b, which spans x in [4.9, 5.3]
    p = mk((0, 0, 5, 0, 0.2, 1, 0), (5.1, -5, 5.1, 5, 0.4, 2, 1))
    r = one(find_broadside(p, 0, 1, search_mm=0.0))
    assert r["overlap_mm2"] == pytest.approx(0.02, abs=TOL)   # x in [4.9, 5] times y in [-0.1, 0.1]: 0.1*0.2
    assert (r["x"], r["y"]) == pytest.approx((4.95, 0.0), abs=TOL)   # centre of that 0.1 x 0.2 box
    # a's centreline inside b: x in [4.9, 5] = 0.1; b's centreline (x=5.1) misses a: 0
    assert r["length_mm"] == pytest.approx(0.1, abs=TOL)


def test_crossing_without_plan_overlap_is_dropped():
    # b's copper spans x in [5.25, 5.55]; a ends at x = 5: 0.25 mm apart
    p = mk((0, 0, 5, 0, 0.2, 1, 0), (5.4, -5, 5.4, 5, 0.3, 2, 1))
    assert len(find_broadside(p, 0, 1, search_mm=1.0)) == 0


# --- arc as chords beside a straight trace ------------------------------------

def test_arc_chords_beside_straight_trace():
    R, g0, w = 10.0, 0.5, 0.15
    psi = np.radians([-8.0, -4.0, 0.0, 4.0, 8.0])               # chord ends on the circle
    px, py = R * np.sin(psi), g0 + R - R * np.cos(psi)        # circle centre (0, g0+R)
    rows = [(-10, 0, 10, 0, w, 1, 0, 0, 0)]
    rows += [(px[k], py[k], px[k + 1], py[k + 1], w, 2, 0, 1, k) for k in range(4)]
    table = find_edge(mk(*rows), 0, search_mm=0.6)
    assert list(table.a) == [0, 0, 0, 0] and list(table.b) == [1, 2, 3, 4]
    mid = np.radians([-6.0, -2.0, 2.0, 6.0])                  # chord direction = mid angle
    half_step = math.radians(2.0)
    # chord length 2R sin(2 deg); projected on the bisector (at mid/2) it keeps cos(mid/2);
    # the trace's projection covers it, so that is the coupled length
    expected_len = 2 * R * math.sin(half_step) * np.cos(mid / 2)
    np.testing.assert_allclose(table.length_mm, expected_len, atol=TOL)
    # the chord midpoint M is at height g0 + R - R cos(2 deg) cos(mid); the normal to the
    # bisector through M reaches y=0 after My / cos(mid/2)
    expected_off = (g0 + R - R * math.cos(half_step) * np.cos(mid)) / np.cos(mid / 2)
    np.testing.assert_allclose(table.offset_mm, expected_off, atol=TOL)
    np.testing.assert_allclose(table.angle_deg, [6, 2, 2, 6], atol=TOL)
    total = table.length_mm.sum()
    # horizontal extent of the arc 2R sin 8deg <= coupled length <= arc length 2R (8 deg in rad)
    assert 2 * R * math.sin(math.radians(8)) < total < 2 * R * math.radians(8)
    # all four chords belong to one polyline beside one trace: one run
    assert list(run_labels(mk(*rows), table.a, table.b)) == [0, 0, 0, 0]


# --- selection ------------------------------------------------------------------

def test_same_net_and_no_net_excluded():
    base = [(0, 0, 10, 0, 0.2, 1, 0), (0, 0.1, 10, 0.1, 0.2, 2, 1)]
    assert len(find_broadside(mk(*base), 0, 1, 0.5)) == 1          # control: different nets couple
    same = [base[0], (0, 0.1, 10, 0.1, 0.2, 1, 1)]
    assert len(find_broadside(mk(*same), 0, 1, 0.5)) == 0          # same net
    nonet = [base[0], (0, 0.1, 10, 0.1, 0.2, NO_NET, 1)]
    assert len(find_broadside(mk(*nonet), 0, 1, 0.5)) == 0         # NO_NET
    both = [(0, 0, 10, 0, 0.2, NO_NET, 0), (0, 0.1, 10, 0.1, 0.2, NO_NET, 1)]
    assert len(find_broadside(mk(*both), 0, 1, 0.5)) == 0          # NO_NET == NO_NET is no net


def test_zero_length_piece_ignored():
    p = mk((0, 0, 10, 0, 0.2, 1, 0), (5, 0, 5, 0, 0.3, 2, 1), (5, -1, 5, 1, 0.3, 3, 1))
    t = find_broadside(p, 0, 1, 0.5)
    assert list(t.b) == [2]                                   # the zero-length piece 1 is skipped


def test_edge_pair_gap_and_length():
    p = mk((0, 0, 10, 0, 0.2, 1, 0),
           (6, 0.5, 2, 0.5, 0.1, 2, 0),          # reversed direction, still parallel
           (0, 5, 10, 5, 0.2, 3, 0),             # far away
           (3, -1, 5, 1, 0.2, 4, 0),             # 45 deg across piece 0: not an edge pair
           (0, 0.5, 10, 0.5, 0.2, 5, 1))         # other layer
    t = find_edge(p, 0, search_mm=0.4)
    assert list(zip(t.a, t.b)) == [(0, 1)]
    r = one(t)
    assert r["length_mm"] == pytest.approx(4.0, abs=TOL)      # [0,10] and [2,6] overlap on [2,6]
    assert r["gap_mm"] == pytest.approx(0.35, abs=TOL)        # 0.5 - (0.2+0.1)/2
    assert r["angle_deg"] == pytest.approx(0.0, abs=TOL)      # antiparallel folds to 0
    assert (r["x"], r["y"]) == pytest.approx((4.0, 0.25), abs=TOL)
    assert len(find_edge(p, 0, search_mm=0.3)) == 0           # 0.35 > 0.3


def test_edge_pairs_ordered_a_less_than_b():
    p = mk((0, 0.5, 10, 0.5, 0.2, 2, 0), (0, 0, 10, 0, 0.2, 1, 0), (0, 1, 10, 1, 0.2, 3, 0))
    t = find_edge(p, 0, search_mm=0.4)
    # offsets: 0-1 0.5, 0-2 0.5, 1-2 1.0 -> gaps 0.3, 0.3, 0.8
    assert list(zip(t.a, t.b)) == [(0, 1), (0, 2)]


def test_edge_pairs_across_orientation_class_borders():
    # the finder groups pieces by direction nearest to 0/45/90/135 degrees; near
    # parallel pieces on either side of a class border (22.5, 157.5) must pair
    def piece(x, y, deg, net):
        t = math.radians(deg)
        return (x, y, x + 10 * math.cos(t), y + 10 * math.sin(t), 0.2, net, 0)

    p = mk(piece(0, 0, 20, 1), piece(0, 1, 27, 2),          # classes 0 and 1, 7 deg apart
           piece(50, 0, 157, 3), piece(50, 1, 164, 4),      # classes 3 and 0, 7 deg apart
           piece(100, 0, 20, 5), piece(100, 1, 32, 6))      # 12 deg apart: not parallel
    t = find_edge(p, 0, search_mm=2.0)
    assert list(zip(t.a, t.b)) == [(0, 1), (2, 3)]
    np.testing.assert_allclose(t.angle_deg, [7, 7], atol=TOL)
    c35 = math.cos(math.radians(3.5))
    # bisector u at 23.5 (160.5) deg: a projects to [0, 10 cos 3.5], b (started 1 mm
    # above a) to [sin 23.5, sin 23.5 + 10 cos 3.5] (resp. sin 160.5 = sin 19.5)
    np.testing.assert_allclose(t.length_mm, [10 * c35 - math.sin(math.radians(23.5)),
                                             10 * c35 - math.sin(math.radians(19.5))], atol=TOL)
    ref = _ref_pairs(p, "edge", 0, 0, 2.0, 10.0)
    assert sorted(ref) == [(0, 1), (2, 3)]


def test_pair_reported_once_across_many_cells():
    p = mk((0, 50, 100, 50, 0.2, 1, 0), (0, 50.3, 100, 50.3, 0.2, 2, 0),
           (0, 0, 100, 100, 0.2, 3, 1), (0, 100, 100, 0, 0.2, 4, 1))
    # 100 mm pieces over 0.5 mm cells: each spans hundreds of cells
    e = find_edge(p, 0, search_mm=0.2, cell_mm=0.5)
    assert list(zip(e.a, e.b)) == [(0, 1)]
    assert e.length_mm[0] == pytest.approx(100.0, abs=TOL)
    b = find_broadside(p, 0, 1, search_mm=0.2, cell_mm=0.5, chunk_pairs=64)
    # both diagonals cross both traces, each crossing once
    assert list(zip(b.a, b.b)) == [(0, 2), (0, 3), (1, 2), (1, 3)]
    # 45 deg crossing of two 0.2 wide pieces: 0.04 / sin 45
    np.testing.assert_allclose(b.overlap_mm2, 0.04 / math.sin(math.pi / 4), atol=TOL)


def test_empty_input():
    for p in (Pieces.empty(), mk((0, 0, 1, 0, 0.2, 1, 0))):
        t = find_broadside(p, 0, 1, 0.5)
        # piece indices in int32 (the narrowest that holds them)
        assert len(t) == 0 and t.kind == "broadside" and t.a.dtype == np.int32
        assert len(find_edge(p, 0, 0.5)) == 0
    assert run_labels(Pieces.empty(), np.zeros(0, np.int64), np.zeros(0, np.int64)).size == 0


def test_bad_arguments():
    p = mk((0, 0, 1, 0, 0.2, 1, 0))
    with pytest.raises(ValueError, match="search_mm"):
        find_edge(p, 0, -1.0)
    with pytest.raises(ValueError, match="parallel_angle_deg"):
        find_edge(p, 0, 0.5, parallel_angle_deg=95)
    with pytest.raises(ValueError, match="different layers"):
        find_broadside(p, 0, 0, 0.5)
    with pytest.raises(ValueError, match="finite"):
        find_edge(mk((0, 0, np.nan, 0, 0.2, 1, 0)), 0, 0.5)
    with pytest.raises(ValueError, match="widths"):
        find_edge(mk((0, 0, 1, 0, -0.2, 1, 0)), 0, 0.5)


def test_take_and_concat():
    p = mk((0, 0, 10, 0, 0.2, 1, 0), (0, 0.3, 10, 0.3, 0.2, 2, 0), (0, 0.6, 10, 0.6, 0.2, 3, 0))
    t = find_edge(p, 0, search_mm=0.15)
    # gaps: 0-1 0.1, 1-2 0.1, 0-2 0.4 (out of range)
    assert list(zip(t.a, t.b)) == [(0, 1), (1, 2)]
    both = PairTable.concat([t.take(np.array([1])), t.take(t.a == 0)])
    assert list(zip(both.a, both.b)) == [(1, 2), (0, 1)] and both.kind == "edge"
    with pytest.raises(ValueError):
        PairTable.concat([t, find_broadside(p, 0, 1, 0.1)])


# --- runs -------------------------------------------------------------------------

def test_run_labels_polyline_beside_long_trace():
    p = mk((0, 0, 20, 0, 0.2, 1, 0, 0, 0),          # long trace
           (1, 0.4, 6, 0.4, 0.2, 2, 0, 1, 0),       # polyline: ordinal 0
           (6, 0.4, 12, 0.4, 0.2, 2, 0, 1, 1),      # polyline: ordinal 1
           (0, 50, 20, 50, 0.2, 3, 0, 2, 0),        # an unrelated pair far away
           (0, 50.4, 20, 50.4, 0.2, 4, 0, 3, 0))
    t = find_edge(p, 0, search_mm=0.3)
    assert list(zip(t.a, t.b)) == [(0, 1), (0, 2), (3, 4)]
    assert list(run_labels(p, t.a, t.b)) == [0, 0, 1]


def test_run_labels_joins_only_consecutive_ordinals():
    # two aggressor pieces of different sources, each beside one victim piece
    rows = [(0, 0, 5, 0, 0.2, 1, 0, 10, 0), (6, 0, 11, 0, 0.2, 1, 0, 11, 0),
            (0, 0.4, 5, 0.4, 0.2, 2, 0, 20, 0), (6, 0.4, 11, 0.4, 0.2, 2, 0, 20, 1)]
    a, b = np.array([0, 1]), np.array([2, 3])
    assert list(run_labels(mk(*rows), a, b)) == [0, 0]        # victim ordinals 0,1 link the runs
    rows[3] = rows[3][:8] + (2,)
    assert list(run_labels(mk(*rows), a, b)) == [0, 1]        # ordinals 0,2: two runs
    rows[3] = rows[3][:7] + (21, 1)
    assert list(run_labels(mk(*rows), a, b)) == [0, 1]        # other source: two runs


def test_run_labels_keys_keep_net_pairs_apart():
    # victim polyline V0, V1 (net 2); aggressor X (net 3) beside V0, X2 (net 3, other
    # track) beside V1; aggressor Y (net 4) beside both V0 and V1
    p = mk((0, 0, 5, 0, 0.2, 2, 0, 1, 0), (5, 0, 10, 0, 0.2, 2, 0, 1, 1),      # V0, V1
           (0, 0.4, 5, 0.4, 0.2, 3, 0, 2, 0), (5, 0.4, 10, 0.4, 0.2, 3, 0, 3, 0),  # X, X2
           (0, -0.4, 10, -0.4, 0.2, 4, 0, 4, 0))                                 # Y
    a, b = np.array([2, 4, 4, 3]), np.array([0, 0, 1, 1])
    assert list(run_labels(p, a, b)) == [0, 0, 0, 0]          # all joined through V0, V1
    net_a, net_b = p.net[a], p.net[b]
    # per net pair: (3,2) rows 0 and 3 joined by the V0-V1 link; (4,2) rows 1 and 2
    assert list(run_labels(p, a, b, net_a, net_b)) == [0, 1, 1, 0]
    assert list(run_labels(p, a, b, net_b, net_a)) == [0, 1, 1, 0]


# --- fast search against brute force ------------------------------------------------

@pytest.mark.parametrize("cell_mm", [None, 1.0, 0.5, 3.0])
def test_box_search_matches_brute_force_with_touching_boxes(cell_mm):
    # integer corners: many boxes touch exactly, on cell borders (cell 1.0, 0.5);
    # some boxes have zero width or height
    rng = np.random.default_rng(7)
    def boxes(n):
        x0, y0 = rng.integers(0, 20, n).astype(float), rng.integers(0, 20, n).astype(float)
        return Boxes(x0, y0, x0 + rng.integers(0, 4, n), y0 + rng.integers(0, 4, n))
    a, b = boxes(150), boxes(120)

    def brute(p, q, self_join):
        return {(i, j) for i in range(len(p)) for j in range(len(q))
                if (not self_join or i < j)
                and p.xmin[i] <= q.xmax[j] and q.xmin[j] <= p.xmax[i]
                and p.ymin[i] <= q.ymax[j] and q.ymin[j] <= p.ymax[i]}

    got = [(int(i), int(j)) for ia, ib in overlapping_pairs(a, b, cell_mm=cell_mm, chunk_pairs=97)
           for i, j in zip(ia, ib)]
    assert len(got) == len(set(got)) and set(got) == brute(a, b, False)
    got = [tuple(sorted((int(i), int(j))))
           for ia, ib in overlapping_pairs(a, None, cell_mm=cell_mm, chunk_pairs=97)
           for i, j in zip(ia, ib)]
    assert len(got) == len(set(got)) and set(got) == brute(a, a, True)
    assert len(got) > 300                               # dense enough to mean something


def _ref_pairs(p: Pieces, kind: str, la: int, lb: int, search: float, par_deg: float):
    """Brute-force O(n^2) reference: every pair, definitions applied one by
    one with scalar maths; crossing areas, centroids and inside lengths from
    shapely."""
    n = len(p)
    rect = {}
    out = {}

    def geom(i):
        if i not in rect:
            x1, y1, x2, y2, w = p.x1[i], p.y1[i], p.x2[i], p.y2[i], p.width[i]
            L = math.hypot(x2 - x1, y2 - y1)
            nx, ny = -(y2 - y1) / L * w / 2, (x2 - x1) / L * w / 2
            rect[i] = (shapely.Polygon([(x1 + nx, y1 + ny), (x2 + nx, y2 + ny),
                                        (x2 - nx, y2 - ny), (x1 - nx, y1 - ny)]),
                       shapely.LineString([(x1, y1), (x2, y2)]))
        return rect[i]

    for i in range(n):
        for j in range(n):
            if kind == "edge" and not (i < j and p.layer[i] == la and p.layer[j] == la):
                continue
            if kind == "broadside" and not (p.layer[i] == la and p.layer[j] == lb):
                continue
            if p.net[i] == NO_NET or p.net[j] == NO_NET or p.net[i] == p.net[j]:
                continue
            pa = np.array([p.x1[i], p.y1[i]]), np.array([p.x2[i], p.y2[i]])
            pb = np.array([p.x1[j], p.y1[j]]), np.array([p.x2[j], p.y2[j]])
            da, db = pa[1] - pa[0], pb[1] - pb[0]
            if not (np.any(da) and np.any(db)):
                continue
            wa, wb = p.width[i], p.width[j]
            diff = abs(math.degrees(math.atan2(da[1], da[0]) - math.atan2(db[1], db[0]))) % 180
            angle = min(diff, 180 - diff)
            if angle <= par_deg:
                ua, ub = da / np.linalg.norm(da), db / np.linalg.norm(db)
                if ua @ ub < 0:
                    ub = -ub
                u = (ua + ub) / np.linalg.norm(ua + ub)
                nrm = np.array([-u[1], u[0]])
                ta, tb = sorted([pa[0] @ u, pa[1] @ u]), sorted([pb[0] @ u, pb[1] @ u])
                lo, hi = max(ta[0], tb[0]), min(ta[1], tb[1])
                if hi - lo <= 0:
                    continue
                tm = (lo + hi) / 2
                qa = pa[0] + (tm - pa[0] @ u) / (da @ u) * da      # point of a projecting to tm
                qb = pb[0] + (tm - pb[0] @ u) / (db @ u) * db
                off = abs((qb - qa) @ nrm)
                gap = off - (wa + wb) / 2
                if gap > search:
                    continue
                area = (hi - lo) * min(max((wa + wb) / 2 - off, 0), min(wa, wb))
                mid = (qa + qb) / 2
                out[(i, j)] = (angle, True, hi - lo, off, gap, area, mid[0], mid[1])
            elif kind == "broadside":
                (ra, sa), (rb, sb) = geom(i), geom(j)
                inter = ra.intersection(rb)
                if inter.area <= 1e-12:
                    continue
                length = max(sa.intersection(rb).length, sb.intersection(ra).length)
                cen = inter.centroid
                out[(i, j)] = (angle, False, length, 0.0, -min(wa, wb), inter.area, cen.x, cen.y)
    return out


def _random_pieces(seed: int, n: int = 300) -> Pieces:
    rng = np.random.default_rng(seed)
    x1, y1 = rng.uniform(0, 12, n), rng.uniform(0, 12, n)
    steps = rng.choice(8, n) * (np.pi / 4)
    free = rng.uniform(0, 2 * np.pi, n)
    theta = np.where(rng.uniform(size=n) < 0.6, steps, free)    # mostly 0/45/90 multiples
    length = rng.uniform(0.2, 4.0, n) * (rng.uniform(size=n) > 0.03)   # a few zero-length
    net = np.where(rng.uniform(size=n) < 0.1, NO_NET, rng.integers(0, 8, n))
    return Pieces.from_columns(x1, y1, x1 + length * np.cos(theta), y1 + length * np.sin(theta),
                               rng.uniform(0.1, 0.3, n), net, rng.integers(0, 2, n),
                               np.arange(n), np.zeros(n))


def _as_dict(t: PairTable):
    return {(int(a), int(b)): (t.angle_deg[k], bool(t.parallel[k]), t.length_mm[k], t.offset_mm[k],
                               t.gap_mm[k], t.overlap_mm2[k], t.x[k], t.y[k])
            for k, (a, b) in enumerate(zip(t.a, t.b))}


@functools.lru_cache(maxsize=None)
def _ref_cached(seed: int, kind: str, layer_a: int, layer_b: int, search: float, par: float):
    return _ref_pairs(_random_pieces(seed), kind, layer_a, layer_b, search, par)


@pytest.mark.parametrize("seed, par, cell_mm, chunk", [
    (1, 10.0, None, None),        # default grid and chunks
    (2, 10.0, 0.37, 500),         # small cells (pieces span many) and tiny chunks
    (1, 10.0, 0.37, 500),
    (2, 30.0, None, None),        # every piece near an orientation class border
    (1, 60.0, 0.37, 500),         # beyond 45 degrees: one search of all pieces
])
def test_fast_search_matches_brute_force(seed, par, cell_mm, chunk):
    p = _random_pieces(seed)
    search = 0.4
    kw = {"cell_mm": cell_mm} | ({"chunk_pairs": chunk} if chunk else {})
    cases = [("broadside", find_broadside(p, 0, 1, search, par, **kw),
              _ref_cached(seed, "broadside", 0, 1, search, par))]
    for layer in (0, 1):
        cases.append(("edge", find_edge(p, layer, search, par, **kw),
                      _ref_cached(seed, "edge", layer, layer, search, par)))
    n_cross = 0
    for kind, fast, ref in cases:
        keys = list(zip(fast.a.tolist(), fast.b.tolist()))
        assert keys == sorted(keys)                          # sorted by (a, b)
        got = _as_dict(fast)
        assert set(got) == set(ref), kind
        for key, want in ref.items():
            np.testing.assert_allclose(got[key], want, atol=1e-9, rtol=0, err_msg=f"{kind} {key}")
        n_cross += sum(not v[1] for v in ref.values())
    # the comparison exercised a fair number of each kind
    assert n_cross > 30 and sum(len(r) for _, _, r in cases) - n_cross > 20


def test_single_and_multi_threaded_results_identical():
    p = _random_pieces(3)
    one_t = find_broadside(p, 0, 1, 0.4, workers=1, chunk_pairs=300)
    two_t = find_broadside(p, 0, 1, 0.4, workers=2, chunk_pairs=300)
    assert len(one_t) > 100
    for name in PairTable.COLUMNS:
        np.testing.assert_array_equal(getattr(one_t, name), getattr(two_t, name))
