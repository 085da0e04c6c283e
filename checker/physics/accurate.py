"""Accurate mode: a direct field solve of every distinct coupled cross-section.

The fast models (:class:`checker.physics.broadside.BroadsideModel`,
:class:`checker.physics.edge.EdgeModel`, :class:`checker.physics.edge.GroundModel`)
solve a small table and interpolate between its knots (a few % between
knots, see docs/accuracy.md). The classes here answer the same questions with
the same interfaces, but by solving each distinct cross-section itself at
``ACCURATE_RESOLUTION`` / 2 and ``ACCURATE_RESOLUTION`` and extrapolating
(Richardson 1927, as the tables do), so ``couplint check --accurate`` has no
interpolation error at all, and little discretisation error: against
Cohn's exact edge-coupled stripline (1955) from s = w to 5w, within 0.13 %
(the resolution-2 solve alone read 0.7-8 % high there); the measured sweep
is in ``tests/test_accurate.py``. Where the extrapolation would flip a
value's sign (a vanishing far coupling), the finer solve is taken; the
mutual terms are then raised by the extrapolation's error estimate, so the
result errs toward more coupling (it read up to 0.13 % low without).

Distinct means equal after rounding the widths and the offset or gap to
``grid_mm`` (5 um to start). When a board has more than ``MAX_SOLVES``
distinct cross-sections for one layer pair or layer, the grid is doubled
until it has no more, so a whole board costs a few hundred solves per layer
pair at most; the grid used is kept in ``grid_mm`` for the report.
"""

from __future__ import annotations

import numpy as np

from ..cores import SOLVE_THREADS, ordered_map
from ..model import Stackup
from ..stackup import effective_er, separation_mm
from .fieldsolve import CrossSection
from .sections import broadside_section, edge_section, ground_section
from .solvecache import cached_solve

#: grid refinement of the accurate solves (``FINE`` is 3)
ACCURATE_RESOLUTION = 2.0
#: most solves per layer pair or layer before the rounding grid is coarsened
MAX_SOLVES = 300
#: starting rounding grid, mm
START_GRID_MM = 0.005


def _snap(values: np.ndarray, grid: float) -> np.ndarray:
    """``values`` (mm) rounded to the nearest multiple of ``grid`` (mm)."""
    return np.round(np.asarray(values, dtype=np.float64) / grid) * grid


def _keys(columns: list[np.ndarray], grid: float) -> tuple[np.ndarray, np.ndarray, float]:
    """Unique rounded rows of ``columns`` (lengths in mm) and each query's
    row, coarsening the rounding ``grid`` (mm, doubled each time) until
    there are at most ``MAX_SOLVES``; returns the rows, the index of each
    query's row, and the grid used."""
    while True:
        snapped = np.stack([_snap(c, grid) for c in columns], axis=1)
        unique, inverse = np.unique(snapped, axis=0, return_inverse=True)
        if len(unique) <= MAX_SOLVES:
            return unique, inverse.reshape(-1), grid
        grid *= 2


def _extrapolated(cs: CrossSection) -> np.ndarray:
    """Maxwell matrix (F/m) of ``cs``, Richardson-extrapolated from
    ``ACCURATE_RESOLUTION`` / 2 and ``ACCURATE_RESOLUTION``; an entry whose
    sign the extrapolation would flip keeps the finer solve's value."""
    r = cached_solve(cs, ACCURATE_RESOLUTION / 2, richardson=True)
    assert r.extrapolated is not None and r.error is not None  # asked for with richardson=True
    out = r.extrapolated.copy()
    flipped = np.sign(out) != np.sign(r.maxwell)
    out[flipped] = r.maxwell[flipped]
    # err toward more coupling by the extrapolation's own error estimate: mutual terms larger (more
    # negative off the diagonal), which also lowers each row sum (capacitance to ground)
    off = ~np.eye(out.shape[0], dtype=bool)
    out[off] -= r.error[off]
    return out


def _solve_many(sections: list[CrossSection]) -> list[np.ndarray]:
    """Maxwell matrices (F/m), two solves at a time, in input order."""
    return ordered_map(_extrapolated, sections, most=SOLVE_THREADS)


class _Exact:
    """Shared bookkeeping: solves made and the rounding grid used."""

    def __init__(self) -> None:
        self.solves = 0
        self.grid_mm = START_GRID_MM


class ExactBroadside(_Exact):
    """Drop-in for ``BroadsideModel``: C12'(wa, wb, offset) in F/m (widths
    and lateral offset in mm) by direct solves of ``broadside_section`` at
    each distinct rounded (wa, wb, offset)."""

    def __init__(self, stackup: Stackup, upper: int, lower: int) -> None:
        super().__init__()
        self.stackup, self.upper, self.lower = stackup, upper, lower
        self.separation_mm = separation_mm(stackup, upper, lower)
        self.er_eff = effective_er(stackup, upper, lower)

    def c12_per_m(self, wa, wb, offset) -> np.ndarray:
        wa, wb, offset = np.broadcast_arrays(*(np.asarray(v, dtype=np.float64) for v in (wa, wb, offset)))
        if wa.size == 0:
            return np.zeros(wa.shape)
        unique, inverse, self.grid_mm = _keys([wa.ravel(), wb.ravel(), np.abs(offset).ravel()], self.grid_mm)
        sections = [broadside_section(self.stackup, self.upper, self.lower, max(a, self.grid_mm),
                                      max(b, self.grid_mm), o) for a, b, o in unique.tolist()]
        values = np.array([-m[0, 1] for m in _solve_many(sections)])
        self.solves += len(sections)
        return values[inverse].reshape(wa.shape)


class ExactEdge(_Exact):
    """Drop-in for ``EdgeModel``: C12'(wa, wb, gap) in F/m (widths and
    edge-to-edge gap in mm) by direct solves of ``edge_section`` at each
    distinct rounded (wa, wb, gap)."""

    def __init__(self, stackup: Stackup, layer: int) -> None:
        super().__init__()
        self.stackup, self.layer = stackup, layer

    def c12_per_m(self, wa, wb, gap) -> np.ndarray:
        wa, wb, gap = np.broadcast_arrays(*(np.asarray(v, dtype=np.float64) for v in (wa, wb, gap)))
        if wa.size == 0:
            return np.zeros(wa.shape)
        lo, hi = np.minimum(wa, wb), np.maximum(wa, wb)  # C12' is symmetric in the two widths
        unique, inverse, self.grid_mm = _keys([lo.ravel(), hi.ravel(), gap.ravel()], self.grid_mm)
        sections = [edge_section(self.stackup, self.layer, max(a, self.grid_mm), max(b, self.grid_mm),
                                 max(g, self.grid_mm)) for a, b, g in unique.tolist()]
        values = np.array([-m[0, 1] for m in _solve_many(sections)])
        self.solves += len(sections)
        return values[inverse].reshape(wa.shape)


class ExactGround(_Exact):
    """Drop-in for ``GroundModel``: C'(w) in F/m of a trace of width w (mm)
    to the planes, by a direct solve of ``ground_section`` at each distinct
    rounded width."""

    def __init__(self, stackup: Stackup, layer: int) -> None:
        super().__init__()
        self.stackup, self.layer = stackup, layer

    def c_per_m(self, w) -> np.ndarray:
        w = np.asarray(w, dtype=np.float64)
        if w.size == 0:
            return np.zeros(w.shape)
        unique, inverse, self.grid_mm = _keys([w.ravel()], self.grid_mm)
        sections = [ground_section(self.stackup, self.layer, max(x, self.grid_mm)) for (x,) in unique.tolist()]
        values = np.array([m[0].sum() for m in _solve_many(sections)])
        self.solves += len(sections)
        return values[inverse].reshape(w.shape)
