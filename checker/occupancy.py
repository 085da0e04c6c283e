"""Which query boxes may touch a fixed set of boxes: a raster prefilter.

Shielding asks, for hundreds of thousands of pieces and piece pairs, whether
their (grown) bounding box comes near any opening in the reference copper
between two layers. The openings are few (a plane's antipads and voids);
the questions are many. Building a shapely box per question and asking an
STRtree costs microseconds each; this answers in bulk with array arithmetic.

Method: the region ``bounds`` is cut into at most ``max_cells`` square
cells. Every fixed box marks the cells its closed extent touches (a 2-D
difference array, summed twice), and a summed-area table of the marked
cells (Crow 1984, "Summed-area tables for texture mapping") gives, for any
query box, the number of marked cells in the cells it touches in four
look-ups. Two closed boxes that overlap share a point, and the cell holding
that point is touched by both, so a query box that overlaps a fixed box is
always reported: the answer is a superset ("may touch"), never a subset.
Query boxes that reach beyond ``bounds`` (where the raster knows nothing)
are reported as touching. Callers follow up with the exact geometry.
"""

from __future__ import annotations

import math

import numpy as np

#: Most cells of one raster (4 bytes each in the summed-area table; about
#: 0.4 mm cells on a 200 mm square board).
MAX_CELLS = 1 << 18


class Occupancy:
    """Raster of the cells that the boxes (``xmin``, ``ymin``, ``xmax``,
    ``ymax``: arrays, mm) touch within ``bounds`` (xmin, ymin, xmax, ymax);
    parts of boxes beyond ``bounds`` are left out (see :meth:`touches`)."""

    def __init__(self, xmin, ymin, xmax, ymax, bounds: tuple[float, float, float, float],
                 max_cells: int = MAX_CELLS):
        x0, y0, x1, y1 = (float(v) for v in bounds)
        if not all(math.isfinite(v) for v in (x0, y0, x1, y1)) or x1 < x0 or y1 < y0:
            raise ValueError(f"bounds must be finite with xmin <= xmax and ymin <= ymax, got {bounds}")
        self.bounds = (x0, y0, x1, y1)
        w, h = max(x1 - x0, 1e-9), max(y1 - y0, 1e-9)
        self.cell = max(math.sqrt(w * h / max(int(max_cells), 1)), 1e-9)
        self.nx = max(1, min(math.ceil(w / self.cell), int(max_cells)))
        self.ny = max(1, min(math.ceil(h / self.cell), int(max_cells)))
        xmin, ymin, xmax, ymax = (np.asarray(v, float).ravel() for v in (xmin, ymin, xmax, ymax))
        inside = (xmax >= x0) & (xmin <= x1) & (ymax >= y0) & (ymin <= y1)
        ix0, iy0, ix1, iy1 = self._cells(xmin[inside], ymin[inside], xmax[inside], ymax[inside])
        diff = np.zeros((self.ny + 1, self.nx + 1), np.int32)
        np.add.at(diff, (iy0, ix0), 1)
        np.add.at(diff, (iy0, ix1 + 1), -1)
        np.add.at(diff, (iy1 + 1, ix0), -1)
        np.add.at(diff, (iy1 + 1, ix1 + 1), 1)
        marked = diff.cumsum(axis=0).cumsum(axis=1)[: self.ny, : self.nx] > 0
        self.sat = np.zeros((self.ny + 1, self.nx + 1), np.int32)
        self.sat[1:, 1:] = marked.cumsum(axis=0).cumsum(axis=1)
        self.marked_cells = int(self.sat[-1, -1])

    def _cells(self, xmin, ymin, xmax, ymax):
        x0, y0 = self.bounds[0], self.bounds[1]
        ix0 = np.clip(np.floor((xmin - x0) / self.cell), 0, self.nx - 1).astype(np.int64)
        ix1 = np.clip(np.floor((xmax - x0) / self.cell), 0, self.nx - 1).astype(np.int64)
        iy0 = np.clip(np.floor((ymin - y0) / self.cell), 0, self.ny - 1).astype(np.int64)
        iy1 = np.clip(np.floor((ymax - y0) / self.cell), 0, self.ny - 1).astype(np.int64)
        return ix0, iy0, ix1, iy1

    def touches(self, xmin, ymin, xmax, ymax) -> np.ndarray:
        """True for each query box (arrays, broadcast) that may touch one of
        the boxes (module docstring): any box sharing a cell with a marked
        one, and any box reaching beyond ``bounds``."""
        xmin, ymin, xmax, ymax = np.broadcast_arrays(*(np.asarray(v, float) for v in (xmin, ymin, xmax, ymax)))
        shape = xmin.shape
        xmin, ymin, xmax, ymax = (v.ravel() for v in (xmin, ymin, xmax, ymax))
        x0, y0, x1, y1 = self.bounds
        beyond = (xmin < x0) | (ymin < y0) | (xmax > x1) | (ymax > y1) | ~np.isfinite(xmin + ymin + xmax + ymax)
        if self.marked_cells == 0:
            return beyond.reshape(shape)
        ix0, iy0, ix1, iy1 = self._cells(np.nan_to_num(xmin), np.nan_to_num(ymin),
                                         np.nan_to_num(xmax), np.nan_to_num(ymax))
        s = self.sat
        count = s[iy1 + 1, ix1 + 1] - s[iy0, ix1 + 1] - s[iy1 + 1, ix0] + s[iy0, ix0]
        return (beyond | (count > 0)).reshape(shape)
