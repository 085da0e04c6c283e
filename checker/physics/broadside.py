r"""Broadside (neighbouring-layer) mutual capacitance from field solutions.

Two traces on copper layers ``upper`` and ``lower`` of a stackup couple
through the dielectric between them. ``BroadsideModel`` field-solves the real
stackup cross-section (``checker.physics.fieldsolve``) on a small grid of
trace widths and lateral offsets and interpolates; ``broadside_c12_pf`` turns
the per-unit-length value into a capacitance per piece pair, for parallel
runs and for crossings.

The cross-section
-----------------
* y up, layer 0 at the top; each copper layer is a band of its thickness and
  each dielectric its thickness (``Dielectric.thickness_mm`` is the distance
  between facing copper surfaces, as in ``checker.model``).
* Trace *a* (width ``wa``) fills the band of ``upper`` at x = -offset/2,
  trace *b* (width ``wb``) the band of ``lower`` at x = +offset/2; both are
  rectangles of the layer's copper thickness.
* Grounded: the nearest ``plane``-role layer above ``upper`` and the nearest
  below ``lower`` (full width, at their surfaces facing the traces). Where
  there is none, the board surface and air beyond it, closed by the solver's
  far grounded box (``fieldsolve.DEFAULT_BOX_MARGIN`` = 20 structure sizes
  away; see below for what that means with no plane at all).
* Dielectrics: every dielectric between the two grounds. The copper band of
  an inner layer, beside the traces, is filled with resin of the mean
  permittivity of the two dielectrics touching it (the model does not say
  which side is prepreg); the band of an outer layer is air on a bare board.
  Traces on other layers between the grounds are not modelled (their bands
  are dielectric).
* Solder mask (``Stackup.mask_top`` / ``mask_bottom``), where the board
  surface lies between the grounds (no plane beyond the outer layer): real
  mask is roughly conformal, about its nominal thickness over the copper and
  filling the spaces between traces down to the laminate. It is modelled as
  the outer layer's copper band filled with mask (er of the mask) beside the
  traces, plus a slab of the mask's thickness over the copper surface: one
  uniform slab from the laminate to copper top + mask thickness. This puts
  mask, not air, between the sidewalls of neighbouring outer traces, which
  is where it matters most for edge coupling; it overstates the mask where
  the real mask thins over wide gaps (a flat top, not a conformal one).
  That is ``Stackup.mask_style == "flat"`` (the rule file's default). With
  ``"conformal"`` the mask follows the copper instead: a slab of its
  thickness over the laminate, and for each trace on the outer layer a cap
  of that thickness over its top (widened by it each side) and a wall of
  that width down each side (``mask_blocks``, dielectric blocks of the
  solver). It assumes the mask as thin over the laminate as over the
  copper, where real mask is often thicker there, so it can read low: the
  rule file's default is the flat fill, which errs high. Approximation;
  project choice. A plane-role layer *between* ``upper`` and
  ``lower`` (a pair made with ``planes_shield=False``) is treated as absent,
  since the caller has said it cannot be trusted as a shield.
* The two traces are conductors 0 and 1; C12' = -C_M[0, 1] (mutual form,
  see ``fieldsolve``), F/m.

With no plane on either side the only ground is the far box: in 2-D the
capacitance to a far ground vanishes only as 1/ln(box size), so C12' then
depends on the box: about +4 % per doubling of the margin, measured for two
0.2 mm traces on a 1.5 mm two-layer board, where the default box is about
30 mm away, i.e. ground at the distance of a small board's size. With at
least one plane the box does not matter (< 0.1 % from margin 10 to 160).

The table
---------
* Widths: the distinct widths of each layer rounded to 1 um, if there are at
  most 4; else 4 knots: the 0, 1/3, 2/3 and 1 quantiles of the widths
  present (``inverted_cdf``, so a knot is a width that occurs, weighted by
  how often), topped up, if quantiles coincide, with the distinct width
  farthest from the knots so far.
* Offsets (centre to centre), per width pair, with lo = |wa - wb|/2 (the
  narrower trace reaches the wider one's edge), hi = (wa + wb)/2 (edges
  aligned; overlap ends) and wn = min(wa, wb): 0, lo/2, lo, lo + wn/4,
  lo + wn/2, lo + 3 wn/4, hi (dense where the overlap changes), then steps
  starting at wn/4 and growing 1.7 times, up to the table's end (always a
  knot): ``max_offset_mm`` plus half the amount by which this pair's widths
  exceed the narrowest pair's (see the width interpolation). Typically 12-15
  offsets per pair.
* Each combination is solved at ``TABLE_RESOLUTION`` (0.8: 1.0-1.6 % high on
  broadside pairs, measured against resolution 6), two solves at a time.
* Interpolation in offset: piecewise linear in C12' up to hi (the overlap,
  and so most of C12', is linear in offset there) and piecewise linear in
  ln C12' beyond (exact for the exponential decay between planes). Measured
  within 2.3 % of direct solves between knots (three stackups).
* Interpolation in widths: between the four surrounding width knots,
  bilinear in ln(width), each corner taken at the query's edge gap
  e = offset - (wa + wb)/2, i.e. at offset e + (wa_k + wb_k)/2 (floored at
  0), so that the overlap (or the gap) is the same as the query's; C12'
  depends mostly on that, and saturates as one trace gets wider than the
  other, which ln(width) follows better than width. Measured within 3 %
  between knots 2-2.5 times apart; wider spacing errs more (knots 5 times
  apart: up to about 10 %). Widths outside the knots are clamped to the
  nearest knot.
* Beyond the table's end the last segment's exponential decay is continued
  (a lower estimate where there is no plane, whose tail is algebraic).
* Cost: 4 x 4 width knots, 2 mm: about 200 solves, 2.5-4 s on a shared
  2-core machine (more with no plane at all: the far box adds grid lines);
  2 x 2 knots about 0.6 s. ``solves`` (table values field-solved, here or
  shared, see below), ``shared`` (of those, taken from an identical
  cross-section solved before) and ``build_seconds`` report it.

Shared solves
-------------
The table models here and in ``checker.physics.edge`` solve through
``solve_shared``, which keeps the results of recent solves (at most
``SHARED_CACHE_SIZE``, least recently used dropped first) under the
cross-section's ``section_signature``: its conductors, slabs and planes moved
so the lowest conductor bottom is at y = 0, and of that and its mirror
images (y -> -y, x -> -x) the one that sorts first, with the conductors
sorted by place and their net numbers left out, every length rounded to
1 nm, with the resolution and whether Richardson extrapolation was asked
for. Two cross-sections with the same signature are the same electrostatic
problem (a translation or reflection of the same conductors, dielectrics and
planes, perhaps numbered differently); the shared Maxwell matrix is kept in
the signature's conductor order and re-indexed to each section's own net
numbers. So a layer (or layer pair) whose surroundings repeat those of
another one reuses its solves instead of repeating them: the two outer
layers of a board symmetric about its middle, mirrored layer pairs (L1/L3
and L4/L6 of a symmetric six-layer board, where the wider trace of one is
the narrower of the other), the inner layers of a stackup built from
repeated cores, and the wider tables of the what-if answers, whose knots are
mostly the analysis's own. Solving the moved or mirrored grid instead gives
the same matrix to rounding (measured: within 1.2e-15 relative on a dual
stripline pair, mirrored and moved by 0.3 and 1.2 mm; 3.3e-16 mirrored left
to right with its nets swapped), so a value does not depend, beyond
rounding, on which layer was solved first.

Crossings
---------
For pieces crossing at angle theta the coupling is a 3-D effect. It is
approximated (pending a 3-D check) by a parallel-plate overlap of
fringing-extended widths:

.. math:: C \approx \frac{\varepsilon_0 \varepsilon_{r,eff}\, w_{e,a} w_{e,b}}
          {d\,|\sin\theta|},\qquad w_{e,x} = w_x + 2\Delta,

    \Delta = \tfrac12\Big(\frac{C_{12}'(w_a, w_b, 0)\, d}
             {\varepsilon_0 \varepsilon_{r,eff}} - \min(w_a, w_b)\Big),

i.e. Delta is the edge extension that makes the parallel-plate formula
reproduce the solved C12' of the same two traces overlapped and parallel
(the overlap of two parallel strips is the narrower width). *d* is
``checker.stackup.separation_mm`` and er_eff ``checker.stackup.effective_er``
(series permittivity). For wa <= wb this is C12'(wa, wb, 0) times
(wb + 2 Delta)/|sin theta|: the parallel value over the length of a's
centreline inside b's band widened by the fringing reach Delta on each side.

Where a piece ends inside the crossing that length is shorter, so the value
is capped at C12'(wa, wb, 0) (L + 2 Delta/|sin theta|), with L =
``length_mm`` the coupled centreline length as ``checker.finder.pairs``
reports it (the longer of the two centrelines clipped to the other piece's
band and to both pieces' ends; max(wa, wb)/|sin theta| for an interior
crossing, where the cap equals the formula and changes nothing). The cap is
skipped when ``length_mm`` is not positive and finite.

References
----------
* Parallel-plate capacitance C = eps A / d and series dielectrics: any
  electromagnetics text, e.g. D. K. Cheng, *Field and Wave Electromagnetics*,
  2nd ed., Addison-Wesley, 1989, sec. 3-10.
* Maxwell vs mutual capacitance: J. D. Jackson, *Classical Electrodynamics*,
  3rd ed., Wiley, 1999, sec. 1.11 (from memory); C. R. Paul, *Analysis of Multiconductor
  Transmission Lines*, 2nd ed., Wiley, 2008, ch. 3.

Validity: quasi-static, per unit length of a run long against the
cross-section and short against a wavelength; rectangular traces; planes
solid and wider than the coupled region.
"""

from __future__ import annotations

import math
import time
from typing import Protocol

import numpy as np
from scipy.constants import epsilon_0

from ..stackup import effective_er, separation_mm
from .sections import (
    MAX_WIDTH_KNOTS,
    RISE_MARGIN,
    blend_width_knots,
    broadside_section,
    check_pair,
    ground_section_of,
    offset_knots,
    solve_shared,
    width_knots,
)

#: Solver resolution used for the tables (see ``fieldsolve``): 1.0-1.6 %
#: high on broadside pairs, 5-30 ms a solve.
TABLE_RESOLUTION = 0.8

#: Solver resolution of the tables of two layers that are not neighbours
#: (coupling through openings in the copper between): 3-4 times faster than
#: ``TABLE_RESOLUTION`` and reads higher (+1.7 to +4.6 % against resolution
#: 3 on L1/L3 and L1/L6 of a six-layer stackup). With the coarser width and
#: offset knots below, the table reads +1.0 to +5.2 % against direct solves
#: at resolution 2 (measured over 4 x 3 widths 0.1-0.3 mm and offsets 0-3 mm
#: on four layer pairs of a six-layer and two of a thin four-layer stackup,
#: table widths 0.1-0.3 mm), i.e. always toward more coupling there.
FAR_TABLE_RESOLUTION = 0.5

#: Width knots per layer of such a table (2 instead of 4: 4 width pairs
#: instead of 16). Between them C12' is interpolated linearly in ln(width);
#: C12' is convex in ln(width) both where the layers are far apart compared
#: with the widths (about 1/ln(d/w)) and where they are close (about w plus
#: a constant), so the chord reads high, never low.
FAR_WIDTH_KNOTS = 2

#: Its first offset step beyond the overlap, as a fraction of the distance
#: between the two layers (``offset_knots(min_step_mm=...)``).
FAR_OFFSET_STEP = 0.25

#: Factor the analysis applies to C12 from such a table: between its coarse
#: offset knots it was found up to 0.44 % below direct solves (L1/L4 of a
#: six-layer stackup at 0.64 mm offset, an independent review); 1.02 keeps
#: every value measured on the high side.
FAR_TABLE_MARGIN = 1.02


class BroadsideModel:
    """Per-unit-length mutual capacitance C12'(wa, wb, offset) for one layer pair, by
    field-solving the real stackup cross-section on a small grid of widths and
    lateral offsets and interpolating (state interpolation and grid).

    Parameters
    ----------
    stackup : Stackup
    upper, lower : int
        Copper layer indices, ``upper < lower``; neither a plane.
    widths_a, widths_b : array_like
        Widths (mm) of the pieces present on ``upper`` and ``lower`` (any
        length; only their distribution is used to pick the width knots).
    max_offset_mm : float
        Largest lateral centre-to-centre offset (mm) the table covers.

    The grid, the interpolation and the cross-section are described in the
    module docstring. ``widths_a_knots``, ``widths_b_knots``, ``offsets``
    (per width pair) and ``table`` (F/m) hold what was solved; ``solves``
    how many values, ``shared`` how many of them were taken from identical
    cross-sections solved before (``solve_shared``), ``build_seconds`` how
    long it took.
    """

    def __init__(self, stackup, upper: int, lower: int, widths_a, widths_b, max_offset_mm: float,
                 resolution: float = TABLE_RESOLUTION, max_width_knots: int = MAX_WIDTH_KNOTS,
                 offset_step_mm: float = 0.0):
        check_pair(stackup, upper, lower)
        if not (max_offset_mm > 0 and math.isfinite(max_offset_mm)):
            raise ValueError(f"max_offset_mm must be positive and finite, got {max_offset_mm}")
        t0 = time.perf_counter()
        self.stackup = stackup
        self.upper = upper
        self.lower = lower
        self.max_offset_mm = float(max_offset_mm)
        self.resolution = float(resolution)
        self.separation_mm = separation_mm(stackup, upper, lower)
        self.er_eff = effective_er(stackup, upper, lower)
        self.widths_a_knots = width_knots(widths_a, max_width_knots)
        self.widths_b_knots = width_knots(widths_b, max_width_knots)
        na, nb = self.widths_a_knots.size, self.widths_b_knots.size
        # corner (wa_k, wb_k) is looked up at the query's edge gap, i.e. at
        # offset + ((wa_k + wb_k) - (wa + wb)) / 2: cover that up to max_offset
        base = self.widths_a_knots[0] + self.widths_b_knots[0]
        self.offsets: list[list[np.ndarray]] = [
            [offset_knots(float(wa), float(wb), self.max_offset_mm + 0.5 * (wa + wb - base), offset_step_mm)
             for wb in self.widths_b_knots]
            for wa in self.widths_a_knots
        ]
        jobs = [
            (i, j, k, broadside_section(stackup, upper, lower, float(self.widths_a_knots[i]),
                                        float(self.widths_b_knots[j]), float(off)))
            for i in range(na)
            for j in range(nb)
            for k, off in enumerate(self.offsets[i][j])
        ]
        # neighbouring layers: each trace alone in the same surroundings, for the rise of its self-capacitance
        alone_jobs = ([ground_section_of(stackup, upper, float(w)) for w in self.widths_a_knots]
                      + [ground_section_of(stackup, lower, float(w)) for w in self.widths_b_knots]
                      if lower - upper == 1 else [])
        solved, self.shared = solve_shared([job[3] for job in jobs] + alone_jobs, self.resolution)
        alone = [float(r.maxwell[0, 0]) for r in solved[len(jobs):]]
        solved = solved[:len(jobs)]
        values = [r.c12 for r in solved]
        self.table: list[list[np.ndarray]] = [[np.empty(len(self.offsets[i][j])) for j in range(nb)] for i in range(na)]
        #: rise of the upper (``rise_a``) and lower (``rise_b``) trace's Maxwell self-capacitance with the
        #: other beside it, over the trace alone (F/m, >= 0); zeros for layers that are not neighbours
        self.rise_a = [[np.zeros(len(self.offsets[i][j])) for j in range(nb)] for i in range(na)]
        self.rise_b = [[np.zeros(len(self.offsets[i][j])) for j in range(nb)] for i in range(na)]
        for (i, j, k, _), v, r in zip(jobs, values, solved):
            if not v > 0:
                raise RuntimeError(f"non-positive C12' {v} solved at {self.widths_a_knots[i]}, "
                                   f"{self.widths_b_knots[j]}, {self.offsets[i][j][k]}")
            self.table[i][j][k] = v
            if alone:
                self.rise_a[i][j][k] = max(float(r.maxwell[0, 0]) - alone[i], 0.0)
                self.rise_b[i][j][k] = max(float(r.maxwell[1, 1]) - alone[na + j], 0.0)
        self.solves = len(jobs) + len(alone_jobs)
        self.build_seconds = time.perf_counter() - t0

    def _along_offset(self, i: int, j: int, offset: np.ndarray) -> np.ndarray:
        """Table (i, j) at ``offset`` (>= 0): piecewise linear in C12' while
        the traces overlap (offset <= (wa + wb)/2), piecewise linear in
        ln C12' beyond; the last segment's exponential decay continued past
        the last knot."""
        x, c = self.offsets[i][j], self.table[i][j]
        hi = 0.5 * (self.widths_a_knots[i] + self.widths_b_knots[j])
        lnc = np.log(c)
        out = np.exp(np.interp(offset, x, lnc))
        near = offset <= hi
        out[near] = np.interp(offset[near], x, c)
        beyond = offset > x[-1]
        if np.any(beyond):
            slope = min((lnc[-1] - lnc[-2]) / (x[-1] - x[-2]), 0.0) if x.size > 1 else 0.0
            out[beyond] = c[-1] * np.exp(slope * (offset[beyond] - x[-1]))
        return out

    def c12_per_m(self, wa, wb, offset) -> np.ndarray:
        """C12' in F/m for widths ``wa`` (upper), ``wb`` (lower) and lateral
        centre-to-centre ``offset``, all mm, broadcast together. The sign of
        the offset does not matter (mirror symmetry)."""
        wa, wb, off = np.broadcast_arrays(np.asarray(wa, float), np.asarray(wb, float),
                                          np.abs(np.asarray(offset, float)))
        shape = off.shape
        wa, wb, off = wa.ravel(), wb.ravel(), off.ravel()
        return blend_width_knots(self.widths_a_knots, self.widths_b_knots, wa, wb,
                                 lambda i, j, sel: self._along_offset(i, j, self._same_gap(i, j, wa, wb, off, sel))
                                 ).reshape(shape)

    def _same_gap(self, i: int, j: int, wa, wb, off, sel) -> np.ndarray:
        """The offset at corner (i, j) with the same edge gap, offset - (wa + wb)/2, as the queries ``sel``."""
        shift = 0.5 * (self.widths_a_knots[i] + self.widths_b_knots[j] - wa[sel] - wb[sel])
        return np.maximum(off[sel] + shift, 0.0)

    def self_rise_per_m(self, wa, wb, offset, upper_side: bool) -> np.ndarray:
        """How much the upper (``upper_side``) or lower trace's Maxwell
        self-capacitance rises (F/m, >= 0) with the other beside it, over the
        trace alone, at widths ``wa`` (upper), ``wb`` (lower) and lateral
        offset; from the same solves as C12', bilinear in the width knots as
        :meth:`c12_per_m`, linear in the offset, 0 beyond the table and for
        layers that are not neighbours; counted at ``sections.RISE_MARGIN``."""

        wa, wb, off = np.broadcast_arrays(np.asarray(wa, float), np.asarray(wb, float),
                                          np.abs(np.asarray(offset, float)))
        shape = off.shape
        wa, wb, off = wa.ravel(), wb.ravel(), off.ravel()
        rise = self.rise_a if upper_side else self.rise_b
        out = blend_width_knots(self.widths_a_knots, self.widths_b_knots, wa, wb, lambda i, j, sel: np.interp(
            self._same_gap(i, j, wa, wb, off, sel), self.offsets[i][j], rise[i][j], right=0.0))
        return RISE_MARGIN * out.reshape(shape)

    def effective_extension_mm(self, wa, wb) -> np.ndarray:
        """Delta (mm): the edge extension that makes eps0 er_eff (min(wa, wb) +
        2 Delta) / d equal the solved C12'(wa, wb, 0)."""
        c0 = self.c12_per_m(wa, wb, 0.0)
        d = self.separation_mm
        return 0.5 * (c0 * d / (epsilon_0 * self.er_eff) - np.minimum(wa, wb))


class BroadsideC12(Protocol):
    """What :func:`broadside_c12_pf` asks of a broadside model: C12' (F/m)
    of two widths at an offset (mm), the layers' separation (mm) and
    effective permittivity. :class:`BroadsideModel` (tables) and
    ``accurate.ExactBroadside`` (direct solves) both answer it."""

    separation_mm: float
    er_eff: float

    def c12_per_m(self, wa, wb, offset) -> np.ndarray: ...


def broadside_c12_pf(model: BroadsideC12, wa, wb, offset_mm, length_mm, angle_deg, parallel) -> np.ndarray:
    """Mutual capacitance C12 (pF) of each piece pair on the model's layers.

    Parameters (all broadcast together)
    ----------
    model : BroadsideModel
    wa, wb : array_like
        Widths (mm) of the pieces on ``model.upper`` and ``model.lower``.
    offset_mm : array_like
        Lateral centre-to-centre offset (mm) of parallel pieces (ignored for
        crossings).
    length_mm : array_like
        Parallel pairs: the coupled (overlapping) run length, mm. Crossings:
        the coupled centreline length L (mm) used for the cap described in
        the module docstring; ignored when <= 0 or not finite.
    angle_deg : array_like
        Angle between the pieces, degrees (crossings only).
    parallel : array_like of bool
        True for parallel runs, False for crossings.

    Returns
    -------
    numpy.ndarray
        pF per pair. Parallel: C12'(wa, wb, offset) x length. Crossing:
        eps0 er_eff we_a we_b / (d |sin(angle)|) (module docstring), capped
        as described there. A crossing at angle 0 or 180 raises ValueError
        (mark it parallel).
    """
    wa, wb, off, length, angle, par = np.broadcast_arrays(
        np.asarray(wa, float), np.asarray(wb, float), np.asarray(offset_mm, float),
        np.asarray(length_mm, float), np.asarray(angle_deg, float), np.asarray(parallel, bool),
    )
    out = np.zeros(wa.shape)
    if par.any():
        out[par] = model.c12_per_m(wa[par], wb[par], off[par]) * length[par] * 1e-3 * 1e12
    cross = ~par
    if cross.any():
        a, b = wa[cross], wb[cross]
        c_overlap = model.c12_per_m(a, b, 0.0)  # F/m
        d = model.separation_mm
        delta = 0.5 * (c_overlap * d / (epsilon_0 * model.er_eff) - np.minimum(a, b))  # mm
        we_a = np.maximum(a + 2 * delta, 0.0)
        we_b = np.maximum(b + 2 * delta, 0.0)
        s = np.abs(np.sin(np.radians(angle[cross])))
        if np.any(s < 1e-9):
            raise ValueError("a crossing at 0 or 180 degrees has no finite overlap; mark it parallel instead")
        c = epsilon_0 * model.er_eff * we_a * we_b / (d * s) * 1e-3  # mm^2/mm -> m: F
        length_c = length[cross]
        capped = np.isfinite(length_c) & (length_c > 0)
        reach = np.where(capped, length_c, np.inf) + 2 * np.maximum(delta, 0.0) / s  # mm
        out[cross] = np.minimum(c, c_overlap * reach * 1e-3) * 1e12
    return out
