"""The raster prefilter of ``checker.occupancy`` against exact box overlap.

Reference: shapely's (GEOS) ``intersects`` of the same closed boxes, a
general-purpose geometry library. The prefilter must report every query box
that overlaps or touches a fixed box (a superset), and it must drop boxes far
from all of them (else it filters nothing).
"""

import numpy as np
import pytest
import shapely

from checker.occupancy import Occupancy


def _boxes(rng, n, lo, hi, size):
    x, y = rng.uniform(lo, hi, n), rng.uniform(lo, hi, n)
    w, h = rng.uniform(0, size, n), rng.uniform(0, size, n)
    return x, y, x + w, y + h


@pytest.mark.parametrize("seed, max_cells", [(1, 1 << 20), (2, 400), (3, 7), (4, 1)])
def test_every_overlapping_box_is_reported(seed, max_cells):
    rng = np.random.default_rng(seed)
    fixed = _boxes(rng, 60, 0.0, 100.0, 3.0)
    query = _boxes(rng, 4000, 0.0, 100.0, 6.0)
    occ = Occupancy(*fixed, bounds=(0.0, 0.0, 103.0, 103.0), max_cells=max_cells)
    got = occ.touches(*query)
    tree = shapely.STRtree(shapely.box(*fixed))
    exact = np.zeros(len(query[0]), bool)
    exact[np.unique(tree.query(shapely.box(*query), predicate="intersects")[0])] = True
    assert not np.any(exact & ~got)  # never misses an overlap
    if max_cells > 100:
        assert np.count_nonzero(got) < 0.5 * got.size  # and filters: most boxes are far from the 60


def test_touching_edges_count_and_far_boxes_do_not():
    occ = Occupancy([10.0], [10.0], [11.0], [11.0], bounds=(0.0, 0.0, 100.0, 100.0))
    assert occ.touches([11.0, 0.0, 50.0], [10.5, 0.0, 50.0], [12.0, 1.0, 51.0], [10.6, 1.0, 51.0]).tolist() == \
        [True, False, False]


def test_beyond_bounds_or_not_finite_always_may_touch():
    occ = Occupancy(np.zeros(0), np.zeros(0), np.zeros(0), np.zeros(0), bounds=(0.0, 0.0, 10.0, 10.0))
    got = occ.touches([-1.0, 1.0, 1.0, np.nan], [1.0, 1.0, 1.0, 1.0], [2.0, 2.0, 11.0, 2.0], [2.0, 2.0, 2.0, 2.0])
    assert got.tolist() == [True, False, True, True]


def test_bad_bounds_are_refused():
    with pytest.raises(ValueError, match="bounds"):
        Occupancy([0.0], [0.0], [1.0], [1.0], bounds=(5.0, 0.0, 1.0, 1.0))
