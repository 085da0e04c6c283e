r"""Same-layer edge coupling and capacitance to ground from field solutions.

Two traces side by side on one copper layer couple across the gap between
their edges; each trace also has a capacitance to its reference planes.
``EdgeModel`` field-solves the real stackup cross-section
(``checker.physics.fieldsolve``) on a small grid of trace widths and edge
gaps and interpolates C12'(wa, wb, gap); ``GroundModel`` solves the
capacitance C' of a single trace to ground at each width on the layer.
They replace the zero-thickness closed forms of
``checker.physics.capacitance`` (Cohn 1954 / 1955, Hammerstad-Jensen,
Kirschning-Jansen), which are kept there as
cross-checks: those understate the edge C12 of 35 um copper by 25-40 % at
gap = width and know nothing of solder mask.

The cross-section
-----------------
The one ``checker.physics.broadside`` builds (``broadside.surroundings``
with ``upper = lower = layer``), so both kinds of coupling see the same
board:

* y up, layer 0 at the top; copper bands and dielectrics of their
  thicknesses.
* Grounded: the nearest ``plane``-role layer above and the nearest below the
  layer (full width, at their surfaces facing the traces). Where there is
  none on a side, the board surface and air beyond it, closed by the
  solver's far grounded box.
* Every dielectric between the grounds; inner copper bands beside the traces
  filled with resin of the mean permittivity of the two dielectrics touching
  them; on an outer layer, the band filled with solder mask and a slab of the
  mask's thickness over the copper where the stackup has a mask (air without
  one; see ``broadside``'s docstring for this approximation).
* ``edge_section``: trace 0 (width ``wa``) at ``-gap/2 - wa <= x <=
  -gap/2``, trace 1 (width ``wb``) at ``gap/2 <= x <= gap/2 + wb``, both the
  full copper thickness of the layer (zero thickness gives lines).
  C12' = -C_M[0, 1], F/m.
* ``ground_section``: one trace of width ``w`` centred at x = 0;
  C' = C1g = sum_j C_M[0, j], F/m: the charge per volt to every ground
  (planes, and the far box).

With no plane on either side of the layer the only ground is the far box
(``fieldsolve.DEFAULT_BOX_MARGIN`` = 20 structure sizes away): C' to ground
then falls as 1/ln(box size), and depends on the box by roughly
-10 % per doubling of the margin for a 0.2 mm trace on a 1.5 mm two-layer
board (measured; C12' rises a few % per doubling instead, see
``broadside``): read it as the capacitance to surroundings at about the
board's own size. With a plane on at least one side the box does not matter
(< 0.1 %).

The edge table
--------------
* Widths: ``broadside.width_knots`` of the widths present on the layer (at
  most 4 knots). Only pairs i <= j are solved; C12'(wa, wb) is looked up
  with the two widths sorted, which makes it exactly symmetric in wa <-> wb
  (the mirror image of the cross-section). A width pair's gap column is
  solved the first time a query needs it (all its gaps in one batch;
  ``solve_all`` fills every pair), so a layer whose traces have two widths
  costs three columns, not ten. The values do not depend on the order of
  queries.
* Gaps (edge to edge): the fixed series ``MIN_GAP_MM`` (0.01 mm) x
  ``GAP_RATIO`` (2) ** k, from the last knot <= ``min_gap_mm`` to the first
  >= ``max_gap_mm``: log spacing puts knots densely at small gaps, where
  C12' changes fastest, and sparsely beyond; the knots themselves do not
  depend on the range asked for. 8 gaps for 0.01-1 mm.
* Each value is the Richardson extrapolation (``fieldsolve.solve(...,
  richardson=True)``) of solves at ``TABLE_RESOLUTION`` (0.5) and 1.0. The
  plain solve's error falls as resolution**-2 but grows with the gap (C12'
  is then a small part of each trace's charge): at resolution 1, against
  Cohn's exact zero-thickness stripline pair (b = 0.4 mm, w = 0.2 mm),
  +4.4 % at gap 0.2 mm, +12 % at 0.6 mm, +33 % at 1 mm; extrapolated from
  0.5 and 1: +0.3 %, +1.2 %, -2.7 % (and -10 % at 1.3 mm with w = 0.1,
  where C12' is 1e-4 of its value at gap = w; at gap 0.02 mm, +0.06 %).
  Extrapolating from 0.7 and 1.4 would halve these errors at twice the cost.
  Measured on a shared 2-core machine: 20-50 ms per value.
* Interpolation in gap: monotone piecewise-cubic Hermite (Fritsch-Carlson,
  ``scipy.interpolate.PchipInterpolator``) of ln C12' against ln gap. C12'
  behaves as a power of the gap at small gaps (sidewall ~ 1/gap, edge
  ~ ln(1/gap)) and decays exponentially at large ones (between planes),
  which the cubic follows between knots 2 times apart. Measured against
  direct solves at the geometric midpoints between knots 0.01-1.28 mm
  (w = 0.15 mm; stripline b = 0.47 mm, microstrip h = 0.2 mm bare and
  masked, no plane): within 1.5 % up to 0.45 mm; at the last midpoint
  (0.9 mm), where C12' has fallen 100-1000 times, up to 6 % (stripline) and
  5 % (masked microstrip). Below the first knot the first segment's power
  law is continued; beyond the last knot the last segment's exponential
  decay (ln C12' linear in gap), a lower estimate where the tail is
  algebraic (no plane).
* Between two planes (spacing b) the far tail follows the decay law
  instead: a knot is added at ``TAIL_ANCHOR_SPACINGS`` (1.25) b, and beyond
  it C12' = C12'(anchor) exp(-lambda (gap - anchor)), lambda the slowest
  decay rate of a potential between the planes in the layered dielectric
  (``plate_decay_per_mm``; pi / b for one dielectric). There the table's
  own solves lose accuracy fast (2.7 times the converged value at 4.5 b,
  measured), while the law holds to the higher modes' exp(-pi gap / b):
  against Cohn's exact zero-thickness pair (b = 0.4 mm, w = 0.1 and
  0.2 mm) within 0.65 % from 0.5 to 2.4 mm, and against solves refined to
  12 cells per unit on offset striplines within 1 % at 3-5 b.
* Interpolation in widths: between the four surrounding (sorted) width
  knots, bilinear in ln(width), each corner at the query's gap. Widths
  outside the knots are clamped to the nearest knot (the knots include the
  narrowest and widest width present). Measured within 1 % between knots
  0.1, 0.15, 0.2, 0.3 mm at gaps up to 0.45 mm (same stackups; the width
  dependence of C12' at a fixed edge gap is weak), no worse than the gap
  interpolation beyond.
* Cost: 8 gaps per width pair at 20-50 ms: 0.2-0.45 s per pair on two
  threads, so 0.7-1.4 s for a layer with two widths (3 pairs, measured on
  a loaded shared 2-core machine); a full 4-knot table (10 pairs) 1.3-5 s.
  ``solves`` (values in the table), ``shared`` (of those, reused from an
  identical cross-section solved before, e.g. the other outer layer of a
  board symmetric about its middle: ``sections.solve_shared``) and
  ``build_seconds`` report it.

The ground table
----------------
``GroundModel`` solves C' (one conductor: about 7-14 ms of wall time a
value, two at a time on a shared 2-core machine; Richardson from
``TABLE_RESOLUTION`` as above) at ``ground_knots`` of the widths present:

* every distinct width on the layer rounded to 1 um, so on a board with at
  most ``GROUND_MAX_WIDTHS`` (32) distinct widths per layer every query is a
  knot (to within the rounding); with more, a geometric series of 32 widths
  from the narrowest to the widest (neighbours 1.063 times apart for a
  0.075-0.5 mm range);
* a single width gets its double as a second knot;
* neighbouring knots more than ``GROUND_KNOT_RATIO`` (2) times apart get
  geometric fill-in knots, so that a width that is not on the layer (a
  caller with other widths) is never interpolated across more than a
  factor 2.

Interpolation: C'(w) = a w + F(w), a = ``plate_per_m_per_mm``, the
parallel-plate part eps0 er_eff / d summed over the nearest plane on each
side (0 with no plane), and F, the fringing and copper-thickness part,
piecewise linear in ln w between the knots (exact at the knots whatever a
is). F varies slowly, between roughly ln w for narrow traces and a constant
(two edge fringes) for wide ones, so it is close to linear in ln w, while
C' itself goes from w^0 to w^1. Outside the knots F is continued as the end
segment's power law (positive), or linearly if F is not positive there.

Measured (interpolation alone, against the table's own solves at widths
1.06 times apart from 0.05 to 0.75 mm; microstrip and off-centre stripline
with h 0.05, 0.1, 0.2, 0.5 mm and 35 um or zero copper, masked microstrip,
dual-stripline inner layer: 24 stackups), worst case over all stackups and
knot placements, against knots r times apart:

=================  ======  ======  ======  ======  ======  ======
r                  1.5     2.0     3.1     4.1     5.9     9.4
a w + F, F lin ln  0.45 %  0.51 %  0.76 %  1.1 %   1.6 %   2.3 %
ln C' lin in ln w  0.62 %  1.6 %   3.9 %   6.2 %   9.6 %   15 %
=================  ======  ======  ======  ======  ======  ======

(the second row is the interpolation used before; up to r = 2 the first
row is mostly the table values' own scatter of 0.05-0.3 % from grid changes
between widths). With no plane the far box's distance grows with the trace
width once the trace is wider than the board is thick (``fieldsolve``'s box
is ``DEFAULT_BOX_MARGIN`` structure sizes away), so C' there is not even
monotonic in w (measured on a 0.27 mm two-layer board: it peaks at about
0.23 mm); the interpolation errs up to 1.5 % at r = 1.3 there, and the
value is a rough figure anyway (see above).

Cost: a board with 5 widths per layer, 5 solves per layer, 0.05 s.

References
----------
* Field solver and its accuracy: ``checker.physics.fieldsolve``.
* F. N. Fritsch and R. E. Carlson, "Monotone piecewise cubic
  interpolation," *SIAM J. Numer. Anal.* 17(2), 238-246, 1980.
* Maxwell vs mutual capacitance: C. R. Paul, *Analysis of Multiconductor
  Transmission Lines*, 2nd ed., Wiley, 2008, ch. 3.
* Cross-checks (closed forms): ``checker.physics.capacitance``.

Validity: quasi-static, per unit length of a run long against the
cross-section and short against a wavelength; rectangular traces (no etch
trapezoid); planes solid and wider than the coupled region; only the two
traces on the layer (other copper nearby is not modelled).
"""

from __future__ import annotations

import math
import time

import numpy as np
from scipy.constants import epsilon_0
from scipy.interpolate import PchipInterpolator

from ..model import Stackup
from ..stackup import effective_er, separation_mm
from .fieldsolve import CrossSection
from .sections import (
    RISE_MARGIN,
    blend_width_knots,
    check_layer,
    edge_section,
    ground_section,
    grounds,
    solve_shared,
    surroundings,
    width_knots,
)

#: Solver resolution of the tables; each value is the Richardson extrapolation
#: of solves at this resolution and twice it (module docstring).
TABLE_RESOLUTION = 0.5

#: Smallest gap knot, mm (the analysis floors gaps at 0.01 mm too).
MIN_GAP_MM = 0.01

#: Ratio between neighbouring gap knots.
GAP_RATIO = 2.0

#: Most distinct widths a ``GroundModel`` solves one by one; with more, it
#: solves a geometric series of this many widths over their range instead.
GROUND_MAX_WIDTHS = 32

#: Largest ratio between neighbouring width knots of a ``GroundModel``;
#: wider intervals get geometric fill-in knots.
GROUND_KNOT_RATIO = 2.0


def gap_knots(max_gap_mm: float, min_gap_mm: float = MIN_GAP_MM) -> np.ndarray:
    """The knots ``MIN_GAP_MM * GAP_RATIO**k`` from the last one <=
    ``min_gap_mm`` (k >= 0) to the first one
    >= ``max_gap_mm``; at least two knots."""
    if not (max_gap_mm > 0 and math.isfinite(max_gap_mm)):
        raise ValueError(f"max_gap_mm must be positive and finite, got {max_gap_mm}")
    if not (min_gap_mm > 0 and math.isfinite(min_gap_mm)):
        raise ValueError(f"min_gap_mm must be positive and finite, got {min_gap_mm}")
    step = math.log(GAP_RATIO)
    k0 = max(0, int(math.floor(math.log(min_gap_mm / MIN_GAP_MM) / step + 1e-9)))
    k1 = max(k0 + 1, int(math.ceil(math.log(max(max_gap_mm, MIN_GAP_MM) / MIN_GAP_MM) / step - 1e-9)))
    return MIN_GAP_MM * GAP_RATIO ** np.arange(k0, k1 + 1)


def _solve_all(sections: list[CrossSection], resolution: float) -> tuple[list[tuple[np.ndarray, np.ndarray]], int]:
    """(Richardson-extrapolated, finer-grid) Maxwell matrices (F/m) of
    ``sections``, two solves at a time, results in input order (so
    deterministic), through ``sections.solve_shared`` (a section identical
    to one solved before is not solved again); and how many were shared."""
    results, shared = solve_shared(sections, resolution, richardson=True)
    assert all(r.extrapolated is not None for r in results)  # asked for with richardson=True
    return [(r.extrapolated, r.maxwell) for r in results], shared  # type: ignore[misc]


#: Between two planes, a gap knot is put at this many plane spacings b and
#: C12' beyond it is the between-planes decay from it: by then the next mode
#: is down by exp(-1.25 pi) ~ 2 %, while the solver's own relative error
#: grows with the gap (C12' becomes a tiny part of each trace's charge).
TAIL_ANCHOR_SPACINGS = 1.25

#: Resolution (cells across the plane spacing) of the 1-D decay problem.
_DECAY_CELLS = 4000


def plate_decay_per_mm(planes, slabs) -> float | None:
    """The slowest exponential decay rate lambda (1/mm) of a potential
    between two grounded planes in a layered dielectric, or ``None`` without
    two planes.

    Separation of variables in the x-independent layered medium
    (eps = eps(y)): phi = Y(y) exp(-lambda x) with
    -(eps Y')' = lambda^2 eps Y, Y = 0 on both planes, Y and eps Y'
    continuous across interfaces; lambda is the square root of the smallest
    eigenvalue (for one dielectric, pi / b exactly: the lowest term of the
    Fourier series of a Dirichlet strip). Far from the traces, C12' of two
    traces between the planes falls as exp(-lambda gap). Solved here with a
    conservative second-order finite-difference discretisation on
    ``_DECAY_CELLS`` cells (``scipy.linalg.eigh_tridiagonal``); relative
    error below 1e-6 for the stackups tested.
    """
    from scipy.linalg import eigh_tridiagonal

    if len(planes) != 2:
        return None
    y0, y1 = sorted(float(p) for p in planes)
    b = y1 - y0
    if not b > 0:
        return None
    n = _DECAY_CELLS
    h = b / n
    mid = y0 + h * (np.arange(n) + 0.5)
    eps = np.ones(n)
    for slab in slabs:
        inside = (mid >= min(slab.y0, slab.y1)) & (mid <= max(slab.y0, slab.y1))
        eps[inside] = slab.er
    # interior nodes 1..n-1: stiffness (eps Y')' and lumped mass eps at the node
    left, right = eps[:-1], eps[1:]
    mass = 0.5 * (left + right)
    diag = (left + right) / (h * h)
    off = -eps[1:-1] / (h * h)
    scale = 1.0 / np.sqrt(mass)
    lowest = eigh_tridiagonal(diag * scale * scale, off * scale[:-1] * scale[1:], eigvals_only=True,
                              select="i", select_range=(0, 0))[0]
    return float(math.sqrt(lowest))


def _plate_spacing_mm(planes) -> float | None:
    return abs(float(planes[1]) - float(planes[0])) if len(planes) == 2 else None


def _between_planes_tail(column: np.ndarray, gaps: np.ndarray, decay: float | None,
                         spacing: float | None) -> np.ndarray:
    """The far end of a gap column between two planes, from the decay law.

    Between two grounded planes C12' far from the traces falls as
    exp(-lambda gap) (``plate_decay_per_mm``), while the solver's relative
    error grows with the gap: at 0.64 mm between planes 0.14 mm apart the
    table's own solve read 2.7 times the converged value (measured against
    solves refined to 12 cells per unit). So every knot beyond the anchor
    knot at ``TAIL_ANCHOR_SPACINGS`` plane spacings, where the solve is
    still accurate, takes the anchor's value times exp(-lambda (gap -
    anchor gap)). Without two planes, or without the anchor knot (all gaps
    asked for are nearer), the column is unchanged.
    """
    if decay is None or spacing is None:
        return column
    near = np.flatnonzero(np.isclose(gaps, TAIL_ANCHOR_SPACINGS * spacing, rtol=1e-9, atol=0) & (column > 0))
    if near.size == 0:
        return column
    anchor = int(near[0])
    out = column.copy()
    tail = np.arange(anchor + 1, gaps.size)
    out[tail] = out[anchor] * np.exp(-decay * (gaps[tail] - gaps[anchor]))
    return out


def _decaying(column: np.ndarray) -> np.ndarray:
    """A gap column of C12' made positive and non-increasing.

    Far beyond the plane spacing of a stripline, C12' has decayed by many
    orders of magnitude and the extrapolated (or even the raw) value is
    rounding noise that can come out zero or negative. Such a value, or one
    above its nearer neighbour, is replaced by half the nearer neighbour (a
    slower decay than the true exponential one, so still an upper estimate of
    a negligible coupling), keeping ln C12' finite for the interpolation.
    """
    out = column.copy()
    for k in range(1, out.size):
        if not (out[k] > 0) or out[k] > out[k - 1]:
            out[k] = 0.5 * out[k - 1]
    return out


class EdgeModel:
    """Per-unit-length edge-coupled mutual capacitance C12'(wa, wb, gap) of
    two traces on one copper layer, from a field-solved table (module
    docstring: cross-section, grid, interpolation, measured error).

    Parameters
    ----------
    stackup : Stackup
    layer : int
        Copper layer index.
    widths : array_like
        Widths (mm) of the pieces on the layer (only their distribution is
        used, to pick the width knots).
    max_gap_mm : float
        Largest edge-to-edge gap (mm) the table must cover.

    ``widths_knots``, ``gaps`` (mm) and ``table`` (F/m, ``table[i, j, k]``
    for widths i <= j and gap k; i > j mirrors j, i) hold what was solved,
    ``solves`` how many and ``build_seconds`` how long it took.
    """

    def __init__(self, stackup: Stackup, layer: int, widths, max_gap_mm: float, min_gap_mm: float = MIN_GAP_MM):
        check_layer(stackup, layer)
        self.stackup = stackup
        self.layer = layer
        self.resolution = TABLE_RESOLUTION
        self.widths_knots = width_knots(widths)
        planes, slabs = surroundings(stackup, layer, layer)
        #: between two planes: the decay rate (1/mm) and spacing used for the far tail
        self.decay_per_mm = plate_decay_per_mm(planes, slabs)
        self.plate_spacing_mm = _plate_spacing_mm(planes)
        self.gaps = gap_knots(max_gap_mm, min_gap_mm)
        #: between two planes, the gap (mm) beyond which C12' is the decay law
        #: from the knot there (``_between_planes_tail``), else None
        self.tail_anchor_mm: float | None = None
        if self.plate_spacing_mm is not None:
            anchor = TAIL_ANCHOR_SPACINGS * self.plate_spacing_mm
            if anchor < self.gaps[-1]:
                self.gaps = np.unique(np.append(self.gaps[self.gaps < anchor * (1 - 1e-9)], anchor).tolist()
                                      + self.gaps[self.gaps > anchor * (1 + 1e-9)].tolist())
                self.tail_anchor_mm = float(self.gaps[np.argmin(abs(self.gaps - anchor))])
        nw = self.widths_knots.size
        self.table = np.full((nw, nw, self.gaps.size), np.nan)
        #: ``rise[i, j, k]``: how much trace i's Maxwell self-capacitance (F/m)
        #: rises with trace j beside it at gap k, over trace i alone (>= 0)
        self.rise = np.full((nw, nw, self.gaps.size), np.nan)
        self._alone: dict[int, float] = {}
        self._lng = np.log(self.gaps)
        self._curves: dict[tuple[int, int], PchipInterpolator] = {}
        self.solves = 0
        self.shared = 0
        self.build_seconds = 0.0

    def _ensure(self, pairs) -> None:
        """Solve the gap columns of the width-knot pairs ``pairs`` (i <= j)
        not solved yet, all in one batch."""
        todo = sorted({(min(p), max(p)) for p in pairs} - set(self._curves))
        if not todo:
            return
        t0 = time.perf_counter()
        w, ng = self.widths_knots, self.gaps.size
        jobs = [(i, j, k) for i, j in todo for k in range(ng)]
        lone = sorted({v for pair in todo for v in pair} - set(self._alone))
        sections = [edge_section(self.stackup, self.layer, float(w[i]), float(w[j]), float(self.gaps[k]))
                    for i, j, k in jobs] + [ground_section(self.stackup, self.layer, float(w[i])) for i in lone]
        solved, shared = _solve_all(sections, self.resolution)
        self.shared += shared
        for i, (extrapolated, _raw) in zip(lone, solved[len(jobs):]):
            self._alone[i] = float(extrapolated[0, 0])
        for (i, j, k), (extrapolated, raw) in zip(jobs, solved):
            v = -extrapolated[0, 1]
            self.table[i, j, k] = self.table[j, i, k] = v if v > 0 else -raw[0, 1]
            # the solves alone and beside differ in their far box a little: a rise below 0 is taken as 0
            self.rise[i, j, k] = max(float(extrapolated[0, 0]) - self._alone[i], 0.0)
            self.rise[j, i, k] = max(float(extrapolated[1, 1]) - self._alone[j], 0.0)
        for i, j in todo:
            if not self.table[i, j, 0] > 0:
                raise RuntimeError(f"non-positive C12' solved at {w[i]}, {w[j]}, gap {self.gaps[0]}")
            column = _between_planes_tail(self.table[i, j], self.gaps, self.decay_per_mm, self.plate_spacing_mm)
            self.table[i, j] = self.table[j, i] = _decaying(column)
            self._curves[(i, j)] = PchipInterpolator(self._lng, np.log(self.table[i, j]))
        self.solves += len(jobs) + len(lone)
        self.build_seconds += time.perf_counter() - t0

    def solve_all(self) -> "EdgeModel":
        """Fill the whole table (every width pair); returns self."""
        nw = self.widths_knots.size
        self._ensure([(i, j) for i in range(nw) for j in range(i, nw)])
        return self

    def _along_gap(self, i: int, j: int, gap: np.ndarray) -> np.ndarray:
        """Table (i, j) at ``gap`` (module docstring: PCHIP of ln C12' in
        ln gap inside the knots, end segments continued outside)."""
        i, j = min(i, j), max(i, j)
        lng, lnc = self._lng, np.log(self.table[i, j])
        u = np.log(gap)
        out = self._curves[(i, j)](np.clip(u, lng[0], lng[-1]))
        below = u < lng[0]
        if np.any(below):
            slope = (lnc[1] - lnc[0]) / (lng[1] - lng[0])
            out[below] = lnc[0] + slope * (u[below] - lng[0])
        anchor = self.tail_anchor_mm
        if anchor is not None and self.decay_per_mm is not None:  # between planes, past the anchor: the decay law
            k = int(np.flatnonzero(self.gaps == anchor)[0])
            tail = gap > anchor
            out[tail] = lnc[k] - self.decay_per_mm * (gap[tail] - anchor)
            return np.exp(out)
        beyond = u > lng[-1]
        if np.any(beyond):
            g = self.gaps
            slope = min((lnc[-1] - lnc[-2]) / (g[-1] - g[-2]), 0.0)
            out[beyond] = lnc[-1] + slope * (gap[beyond] - g[-1])
        return np.exp(out)

    def c12_per_m(self, wa, wb, gap) -> np.ndarray:
        """C12' in F/m for widths ``wa``, ``wb`` and edge-to-edge ``gap``,
        all mm, broadcast together; symmetric in ``wa`` and ``wb``. Gaps
        must be positive."""
        wa, wb, gap = np.broadcast_arrays(np.asarray(wa, float), np.asarray(wb, float), np.asarray(gap, float))
        shape = gap.shape
        lo, hi, gap = np.minimum(wa, wb).ravel(), np.maximum(wa, wb).ravel(), gap.ravel()
        if np.any(~(gap > 0)):
            raise ValueError("gaps must be positive")
        out = blend_width_knots(self.widths_knots, self.widths_knots, lo, hi,
                                lambda i, j, sel: self._along_gap(i, j, gap[sel]),
                                prepare=lambda corners: self._ensure(corners))
        return out.reshape(shape)


def self_rise_per_m(model: "EdgeModel", w_self, w_other, gap) -> np.ndarray:
    """How much a trace's Maxwell self-capacitance rises (F/m, >= 0) with a
    neighbour of width ``w_other`` at edge gap ``gap`` beside it, over the
    trace alone: its capacitance to ground in mutual form is that diagonal
    less C12'. From the same solves as ``model``'s C12' table, interpolated
    bilinearly in ln(width) and linearly in ln(gap); below the first gap
    knot the first value, beyond the last knot 0 (too little: the victim's
    capacitance then errs low and its noise high). The result is taken at
    :data:`RISE_MARGIN` of the interpolated value: the rise is a small
    difference of two large solves, and against direct solves at resolution
    3 (extrapolated) the table read it 4-14 % high (measured on four
    microstrip cases), which would lower the noise."""
    ws, wo, gap = np.broadcast_arrays(np.asarray(w_self, float), np.asarray(w_other, float),
                                      np.asarray(gap, float))
    shape = gap.shape
    ws, wo, gap = ws.ravel(), wo.ravel(), gap.ravel()
    u = np.log(np.maximum(gap, 1e-9))

    def along(i: int, j: int, sel: np.ndarray) -> np.ndarray:
        column = model.rise[i, j]
        return np.interp(u[sel], model._lng, column, left=column[0], right=0.0)

    out = blend_width_knots(model.widths_knots, model.widths_knots, ws, wo, along,
                            prepare=lambda corners: model._ensure(corners))
    return RISE_MARGIN * out.reshape(shape)


def ground_knots(widths) -> np.ndarray:
    """Width knots (mm) of a ``GroundModel`` for the widths present
    (module docstring): every distinct width rounded to 1 um, or, if there
    are more than ``GROUND_MAX_WIDTHS``, that many widths in geometric
    progression from the narrowest to the widest; a single width gets its
    double as a second knot; then neighbouring knots more than
    ``GROUND_KNOT_RATIO`` apart get geometric fill-ins."""
    w = np.round(np.asarray(widths, dtype=float).ravel(), 3)
    w = w[np.isfinite(w) & (w > 0)]
    if w.size == 0:
        raise ValueError("no positive widths given")
    knots = np.unique(w)
    if knots.size > GROUND_MAX_WIDTHS:
        knots = np.unique(np.round(np.geomspace(knots[0], knots[-1], GROUND_MAX_WIDTHS), 3))
    if knots.size == 1:
        knots = np.append(knots, 2.0 * knots[0])
    filled = [knots[:1]]
    for lo, hi in zip(knots[:-1], knots[1:]):
        n = int(math.ceil(math.log(hi / lo) / math.log(GROUND_KNOT_RATIO) - 1e-9))
        filled.append(np.geomspace(lo, hi, max(n, 1) + 1)[1:])
    return np.unique(np.round(np.concatenate(filled), 3))


def plate_per_m_per_mm(stackup: Stackup, layer: int) -> float:
    """The parallel-plate part of a trace's capacitance to its planes per mm
    of width, F/m/mm: sum over the nearest plane above and below ``layer``
    of eps0 er_eff / d, d the facing-surface separation
    (``stackup.separation_mm``) and er_eff the series permittivity between
    (``stackup.effective_er``); 0 with no plane. (C = eps A / d and series
    dielectrics: any electromagnetics text, e.g. D. K. Cheng, *Field and
    Wave Electromagnetics*, 2nd ed., Addison-Wesley, 1989, sec. 3-10.)"""
    return sum(epsilon_0 * effective_er(stackup, k, layer) / separation_mm(stackup, k, layer)
               for k in grounds(stackup, layer, layer) if k is not None)


class GroundModel:
    """Per-unit-length capacitance C'(w) of a single trace on ``layer`` to
    its grounds (C1g of a one-conductor solve), from solves at the widths
    present (``ground_knots``), interpolated as C' = a w + F(w) with F
    piecewise linear in ln w (module docstring).

    ``widths_knots`` (mm) and ``table`` (F/m) hold what was solved,
    ``plate_per_mm`` is a (F/m per mm of width), ``solves`` how many values
    were solved (``shared``: of those, taken from an identical cross-section
    solved before), ``build_seconds`` how long it took.
    """

    def __init__(self, stackup: Stackup, layer: int, widths):
        check_layer(stackup, layer)
        t0 = time.perf_counter()
        self.stackup = stackup
        self.layer = layer
        self.resolution = TABLE_RESOLUTION
        self.widths_knots = ground_knots(widths)
        sections = [ground_section(stackup, layer, float(w)) for w in self.widths_knots]
        solved, self.shared = _solve_all(sections, self.resolution)
        self.table = np.array([ext[0].sum() for ext, _ in solved])
        if not np.all(self.table > 0):
            raise RuntimeError(f"non-positive capacitance to ground solved: {self.table}")
        self.plate_per_mm = plate_per_m_per_mm(stackup, layer)
        self._lnw = np.log(self.widths_knots)
        self._fringe = self.table - self.plate_per_mm * self.widths_knots
        self.solves = len(sections)
        self.build_seconds = time.perf_counter() - t0

    def c_per_m(self, w) -> np.ndarray:
        """C' in F/m of a trace of width ``w`` (mm, positive)."""
        w = np.asarray(w, float)
        if np.any(~(w > 0)):
            raise ValueError("widths must be positive")
        lnw, f = self._lnw, self._fringe
        u = np.log(w)
        out = np.interp(u, lnw, f)
        for end, nxt, side in ((0, 1, u < lnw[0]), (-1, -2, u > lnw[-1])):
            if not np.any(side):
                continue
            if f[end] > 0 and f[nxt] > 0:  # a power law of the fringe part, kept positive
                slope = (math.log(f[end]) - math.log(f[nxt])) / (lnw[end] - lnw[nxt])
                out = np.where(side, f[end] * np.exp(slope * (u - lnw[end])), out)
            else:
                slope = (f[end] - f[nxt]) / (lnw[end] - lnw[nxt])
                out = np.where(side, f[end] + slope * (u - lnw[end]), out)
        return self.plate_per_mm * w + out
