r"""Two-dimensional electrostatic field solver for PCB cross-sections.

Solves :math:`\nabla\cdot(\varepsilon\nabla\varphi) = 0` on a rectangular
cross-section (x across the board, y up through the stackup) and returns the
per-unit-length Maxwell capacitance matrix of the signal conductors.

Model
-----
* Conductors are axis-aligned rectangles ``x0 <= x <= x1, y0 <= y <= y1``
  (mm). A zero thickness (``y0 == y1``) or zero width gives a line. Each is a
  numbered signal conductor ``0 .. N-1`` or ground (``GROUND``).
* Round conductors (wires seen end-on) are discs ``Circle(cx, cy, r, net)``.
  A ``Circle`` given as the box is a grounded circular enclosure: everything
  outside it is ground (the shield of a coaxial line). Circles may be mixed
  with rectangles, slabs and planes.
* Dielectrics are horizontal slabs ``y0 <= y <= y1`` of relative permittivity
  ``er`` spanning the full width, and rectangles (``Block``) over them (the
  grid follows their edges); everything else is vacuum (``er = 1``).
* ``planes`` are grounded zero-thickness planes at the given y, full width.
* The domain is closed by a grounded rectangular (or circular) box. Either
  give it (``CrossSection.box``) or let the solver put it ``box_margin`` times the
  size of the structure away on every side, standing in for open space. A
  plane that lies beyond every conductor closes the domain on that side
  instead. The box is a real conductor: in an open 2-D problem the capacitance
  to "infinity" vanishes only logarithmically with the box size, so values
  that depend on charge escaping to the far box (a conductor's capacitance to
  ground when no plane is near) depend, weakly, on ``box_margin`` (for two
  traces on a 1.6 mm board with no plane, C12 rises about 4 % per doubling
  of the margin). With a plane within a few conductor sizes the truncation
  error is below 0.1 % at the default margin (measured, see
  ``tests/test_fieldsolve.py``). Between two planes the field dies sideways
  at least as fast as :math:`\exp(-\pi x\sqrt{\varepsilon_{min}/
  \varepsilon_{max}}/b)` (b the plane spacing; lowest mode of the layered
  parallel-plate region, a Rayleigh-quotient bound), so the box sides are
  then put at most :math:`5b\sqrt{\varepsilon_{max}/\varepsilon_{min}}` away.

Discretisation
--------------
Vertex-centred finite volumes (box integration) on a tensor-product,
non-uniform grid. Every conductor edge, slab face, plane and box side is a
grid line, so a cell never straddles a material interface and holds one
constant permittivity. The flux between neighbouring nodes *a* and *b* at
spacing *h* through the dual-cell face of length ``l1/2 + l2/2`` (halves of
the two cells on either side of the edge) has the coefficient

.. math:: w_{ab} = \frac{\varepsilon_1 l_1/2 + \varepsilon_2 l_2/2}{h},

i.e. the length-weighted *arithmetic* mean of the two cell permittivities for
the flux running along an interface (exact: the two half-faces are
capacitors in parallel). Flux crossing an interface needs no averaging: the
node sits on the interface and each half-cell uses its own permittivity, which
enforces continuity of the normal displacement (the harmonic-mean rule of
cell-centred schemes is not needed here). With constant permittivity per cell
this 5-point stencil is identical to linear finite elements on the grid split
into right triangles, so the discrete solution minimises the field energy
over the grid's functions and the computed self-capacitances are upper
bounds that fall as the grid is refined (rectangles only; see below for
circles).

The grid is graded towards conductor edges (where the field is singular:
:math:`r^{-1/2}` at a zero-thickness edge, :math:`r^{-1/3}` at a 90 degree
corner). Along each axis the local spacing is

.. math:: h(d) = \min(h_{max},\ h_0 + g\,d + g_{far}\max(0, d - D)),

with *d* the distance to the nearest conductor edge on that axis and *D* the
size of the group of conductors, so cells grow geometrically (ratio about
``1 + g``) away from edges and twice as fast beyond the structure; each
interval between neighbouring grid lines gets at least ``n_min`` cells. With
``resolution`` *r*:

* :math:`h_0 = 0.01\,\ell/r^2`, where :math:`\ell` is the smallest gap next
  to a conductor edge (between key grid lines, not counting a conductor's own
  width or thickness) or the smallest signal conductor's larger side;
* :math:`g = g_{far} = 0.35/r`, :math:`h_{max}` = domain size / (10 r),
  :math:`n_{min} = \lceil 2r \rceil`.

The innermost cell contributes an error of order :math:`h_0` (edge
singularity) and the graded cells one of order :math:`g^2`, so :math:`h_0
\propto r^{-2}` balances the two and the error falls as :math:`r^{-2}`
(measured: 3.9-4.8 times per doubling of *r*).

Round conductors (cut edges)
----------------------------
A circle's boundary does not follow grid lines (only its centre lines and
its four extreme lines are key lines), so it is treated by the *symmetric
Shortley-Weller* rule: a node inside or on a circle is fixed to its net; a
grid edge that the boundary crosses is cut at the true crossing point, and
each free stretch of it (length :math:`\theta h`, :math:`0 < \theta \le 1`)
links its two ends -- a free node, or the conductor at the crossing -- with
the weight :math:`w_{ab}/\theta` (the edge's own dual-face weight, i.e.
:math:`\varepsilon\,l/(\theta h)`: the flux to the boundary uses the true
distance to it). The dual-cell faces are left whole, which keeps the matrix
symmetric (Shortley-Weller proper divides by the shortened cell width and is
not), and the charge is still the energy form above, now summed over the
links. :math:`\theta` is floored at ``_THETA_MIN`` = 1e-3 (moves the boundary
by at most 1e-3 of a cell). Unlike a staircase (error O(h), erratic), this is
second order: the error falls 3.4-4.0 times per doubling of *r*, smoothly,
as ``RICHARDSON_ORDER`` assumes. The grid spacing is constant across each
circle's extent, :math:`h_c = 0.1\,\min(r_c, g_c)/r` with :math:`r_c` its
radius and :math:`g_c` its clearance to the nearest other conductor, plane
or box, and grows outside it at the rate *g* above (for a circular box,
:math:`r_c` is its radius and :math:`g_c` the clearance of what it holds).
The upper-bound property is lost: the cut-edge scheme is not a conforming
finite-element method, and values were seen on both sides of exact (e.g. an
eccentric coax reads 0.003 % low at ``FINE``).

Measured at a = 1 mm against the exact values of the module tests
(``tests/test_fieldsolve.py``); open problems (two-wire, wire over plane)
with the default ``box_margin`` (20), whose truncation is included:

==================================  ================  ================  ==========
case                                ``FAST`` (r = 1)  ``FINE`` (r = 3)  time, FINE
==================================  ================  ================  ==========
coax b/a = 2.3, 5, 10               0.004-0.43 %      0.001-0.05 %      0.1-0.2 s
two-wire D/2a = 1.5, 3, 10          0.66-1.2 %        0.10-0.17 %       0.3-0.6 s
wire over plane h/a = 1.5, 3, 10    0.9-2.6 %         0.17-0.41 %       0.2-0.4 s
coax b/a = 4 half-filled, er = 2.1  0.16 %            0.02 %            0.1 s
eccentric coax b/a = 4              0.02-0.11 %       0.003-0.013 %     0.2-0.4 s
==================================  ================  ================  ==========

All read high except the eccentric coax with a large offset. Part of the
error of an open wire is the far box: doubling
``box_margin`` from 20 lowers the wire-over-plane (h/a = 10) value by
0.075 % and the two-wire one (D/2a = 10) by 0.02 % (image dipole, the error
falls as the margin squared). With ``box_margin = 80`` the Richardson
estimate from r = 1 and 2 is 0.85-1.0 times the true error of the r = 2
value in the eight coax/two-wire/plane cases above whose error exceeds
0.01 % (coax b/a = 2.3 is within 0.003 % at every r measured, below the
estimate's resolution), and the extrapolated value is within 0.06 % of
exact (0.003 % for the coax).

Charge
------
From the discrete energy: with :math:`\varphi_j` the solution for conductor
*j* at 1 V and all others (and ground) at 0 V,

.. math:: C_{M,ij} = \varepsilon_0 \sum_{edges} w_{ab}\,
          (\varphi_i(a)-\varphi_i(b))(\varphi_j(a)-\varphi_j(b)),

which at the discrete solution equals the charge on conductor *i* found by
Gauss's law over the dual cells around it (the residual of the stencil summed
over the conductor's nodes). It is symmetric by construction.

Conventions
-----------
``CapacitanceResult.maxwell`` is the Maxwell (short-circuit) matrix, F/m:
positive diagonal, negative off-diagonals. The mutual ("circuit") form is
``C_ij = -C_M[i, j]`` (i != j) and ``C_ig = sum_j C_M[i, j]`` (to ground only);
``C_M[i, i] = C_ig + sum_{j != i} C_ij``. All values are quasi-static,
per unit length of a line that is uniform along z: valid when the run is long
against the cross-section and short against a wavelength.

Speed and accuracy
------------------
Measured on a 2-core machine shared with other jobs, against exact
conformal-mapping values (stripline, edge-coupled stripline), resolution 6
(broadside pairs with 35 um copper) or scikit-rf's Hammerstad-Jensen
microstrip. The solver read high in every case measured (self-capacitances
must, by the upper-bound property above):

============================  ================  ================
case                          ``FAST`` (r = 1)  ``FINE`` (r = 3)
============================  ================  ================
time, two traces              10-30 ms          0.1-0.8 s
broadside C12, C11 (35 um)    0.6-1.0 %         0.04-0.08 %
stripline C (t = 0)           0.3-1.9 %         0.04-0.22 %
edge-coupled C12 (t = 0)      2.1-2.6 %         0.17-0.27 %
microstrip C vs H-J           1.0-2.8 %         0.13-0.41 %
============================  ================  ================

``solve(..., richardson=True)`` solves at *r* and *2r* and returns the finer
result with an error estimate and an extrapolated value (on the stripline at
r = 1: estimate 0.34 %, true error 0.30 %, extrapolated within 0.02 %).
Round conductors: see their own table above.

References
----------
* R. S. Varga, *Matrix Iterative Analysis*, Prentice-Hall, 1962, ch. 6
  (box-integration derivation of finite-difference equations for
  :math:`\nabla\cdot(\varepsilon\nabla\varphi)` with piecewise-constant
  coefficients).
* L. F. Richardson, "The deferred approach to the limit", *Phil. Trans. R.
  Soc. A* 226, 299-361, 1927 (extrapolation from two grid spacings).
* J. D. Jackson, *Classical Electrodynamics*, 3rd ed., Wiley, 1999:
  sec. 1.11 (energy of a system of conductors, capacitance coefficients),
  1.12 (variational principle: the energy is least at the true potential),
  1.13 (finite-difference relaxation in 2-D), 2.11 (fields near conducting
  edges and corners). Section numbers and the Varga chapter are from memory.
* G. H. Shortley, R. Weller, "The numerical solution of Laplace's
  equation", *J. Appl. Phys.* 9, 334-348, 1938 (boundary nodes use the true
  distance to a curved boundary). F. Gibou, R. Fedkiw, L.-T. Cheng, M. Kang,
  "A second-order-accurate symmetric discretization of the Poisson equation
  on irregular domains", *J. Comput. Phys.* 176, 205-227, 2002 (the
  symmetric form used here, second order in the solution). Both from memory.
* O. C. Zienkiewicz, R. L. Taylor, *The Finite Element Method*, vol. 1, any
  edition (linear triangles; their stiffness on right triangles reduces to
  the 5-point stencil).

Validity: quasi-static TEM, perfect conductors, isotropic lossless
dielectrics in horizontal slabs. Rectangles and circles (no trapezoidal
etch).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import scipy.sparse as sp
from scipy.constants import epsilon_0
from scipy.sparse.linalg import splu

from ..errors import SolveError

#: Net number of a grounded conductor.
GROUND = -1

#: ``resolution`` for quick values: 0.3-2.8 % high on two-trace
#: cross-sections, 10-30 ms (module docstring table).
FAST = 1.0
#: ``resolution`` for single accurate values: 0.04-0.4 % high, under 1 s.
FINE = 3.0

#: Default distance from the structure to the far grounded box, in multiples
#: of the structure's size (the larger of its width and height).
DEFAULT_BOX_MARGIN = 20.0

# Grid constants at resolution 1 (see the module docstring).
_H0_FRACTION = 0.01
_GRADING = 0.35
_GRADING_FAR = 0.35
_N_MIN = 2.0

#: Order of convergence assumed by the Richardson estimate. Measured on the
#: test cases (zero-thickness stripline, edge-coupled stripline, broadside
#: pairs with 35 um copper, coupled microstrip) between resolutions 1, 2 and
#: 3: the error falls as resolution**-2 (3.9 to 4.8 times per doubling).
RICHARDSON_ORDER = 2.0


@dataclass(frozen=True)
class Conductor:
    """A rectangular conductor, ``x0 <= x <= x1``, ``y0 <= y <= y1`` in mm.

    ``net`` is ``0 .. N-1`` for the signal conductors of the capacitance
    matrix or ``GROUND``. Several rectangles may share a net (they are then
    one conductor).
    """

    x0: float
    x1: float
    y0: float
    y1: float
    net: int = GROUND


@dataclass(frozen=True)
class Circle:
    """A round conductor (a wire seen end-on): the disc
    ``(x - cx)**2 + (y - cy)**2 <= r**2``, in mm.

    ``net`` as for ``Conductor``. Given as ``CrossSection.box`` instead, a
    circle is the grounded enclosure: everything *outside* it is ground (the
    outer conductor of a coaxial line); its ``net`` must then be ``GROUND``.
    The curved boundary is treated by cut edges (module docstring).
    """

    cx: float
    cy: float
    r: float
    net: int = GROUND


@dataclass(frozen=True)
class Slab:
    """A dielectric slab ``y0 <= y <= y1`` (mm) of relative permittivity
    ``er``, full width."""

    y0: float
    y1: float
    er: float


@dataclass(frozen=True)
class Block:
    """A rectangle of dielectric ``x0 <= x <= x1``, ``y0 <= y <= y1`` (mm)
    of relative permittivity ``er``: it replaces the slabs where it lies
    (a later block replaces an earlier one), e.g. solder mask that follows
    the copper."""

    x0: float
    x1: float
    y0: float
    y1: float
    er: float


@dataclass(frozen=True)
class CrossSection:
    """What to solve. Lengths in mm.

    ``conductors``: rectangles (``Conductor``) and round wires (``Circle``).
    ``planes``: y of grounded full-width planes. ``box``: grounded enclosure,
    either a rectangle ``(x0, x1, y0, y1)`` or a ``Circle`` (ground outside
    it, e.g. a coaxial shield); ``None`` puts a rectangle ``box_margin`` x
    (structure size) away on each side (a stand-in for open space, see the
    module docstring).
    """

    conductors: tuple[Conductor | Circle, ...]
    slabs: tuple[Slab, ...] = ()
    planes: tuple[float, ...] = ()
    box: tuple[float, float, float, float] | Circle | None = None
    box_margin: float = DEFAULT_BOX_MARGIN
    #: dielectric rectangles over the slabs (``Block``)
    blocks: tuple[Block, ...] = ()


@dataclass(frozen=True)
class CapacitanceResult:
    """Solved per-unit-length capacitances.

    ``maxwell``: Maxwell matrix C_M, F/m (N x N). ``error``: Richardson error
    estimate of each entry, F/m (``None`` unless asked for). ``extrapolated``:
    the Richardson-extrapolated matrix (``None`` unless asked for).
    ``nodes``: grid size (nx, ny) of the solve that produced ``maxwell``.
    """

    maxwell: np.ndarray
    resolution: float
    nodes: tuple[int, int]
    error: np.ndarray | None = None
    extrapolated: np.ndarray | None = None

    @property
    def n(self) -> int:
        return int(self.maxwell.shape[0])

    def mutual(self, i: int = 0, j: int = 1) -> float:
        """Mutual capacitance ``C_ij = -C_M[i, j]`` (F/m), positive."""
        if i == j:
            raise ValueError("mutual capacitance needs two different conductors")
        return float(-self.maxwell[i, j])

    def to_ground(self, i: int = 0) -> float:
        """Capacitance of conductor i to ground only, ``sum_j C_M[i, j]`` (F/m)."""
        return float(self.maxwell[i].sum())

    @property
    def c12(self) -> float:
        """``-C_M[0, 1]`` in F/m."""
        return self.mutual(0, 1)

    @property
    def c1g(self) -> float:
        """``sum_j C_M[0, j]`` in F/m."""
        return self.to_ground(0)


# --------------------------------------------------------------------------
# grid


def _merge(values: np.ndarray, tol: float) -> np.ndarray:
    """Sorted values with runs closer than ``tol`` collapsed to their first."""
    v = np.sort(np.asarray(values, dtype=float))
    if v.size == 0:
        return v
    keep = np.concatenate(([True], np.diff(v) > tol))
    return v[keep]


def _fill(a: float, b: float, sing: np.ndarray, spacing: "_Spacing") -> np.ndarray:
    """Interior points of the interval (a, b), spaced by ``spacing.h`` of the
    distance to the nearest singular coordinate.

    The spacing is piecewise linear along the interval, so the point density
    1/h is integrated exactly and the points are put at equal steps of that
    integral (which makes the result mirror-symmetric).
    """
    k = np.searchsorted(sing, 0.5 * (a + b))
    s_left = sing[k - 1] if k > 0 else -math.inf
    s_right = sing[k] if k < sing.size else math.inf

    def h_at(x: float) -> float:
        return spacing.h(min(x - s_left, s_right - x))

    cut_set = {a, b, 0.5 * (s_left + s_right)}
    for d in spacing.breaks():
        cut_set.update((s_left + d, s_right - d))
    cuts = sorted(c for c in cut_set if a <= c <= b and math.isfinite(c))
    # per piece: start, h at start, slope dh/dx, integral of 1/h so far
    pieces = []
    total = 0.0
    for p, q in zip(cuts[:-1], cuts[1:]):
        hp, hq = h_at(p), h_at(q)
        slope = (hq - hp) / (q - p)
        if abs(slope) < 1e-12:
            slope, integral = 0.0, (q - p) / hp
        else:
            integral = math.log(hq / hp) / slope
        pieces.append((p, hp, slope, total))
        total += integral
    n = max(spacing.n_min, math.ceil(total - 1e-9))
    if n <= 1:
        return np.empty(0)
    targets = total * np.arange(1, n) / n
    starts = np.array([pc[3] for pc in pieces])
    idx = np.searchsorted(starts, targets, side="right") - 1
    out = np.empty(targets.size)
    for m, (p, hp, slope, s0) in enumerate(pieces):
        sel = idx == m
        if not sel.any():
            continue
        ds = targets[sel] - s0
        if slope == 0.0:
            out[sel] = p + ds * hp
        else:
            out[sel] = p + hp * np.expm1(slope * ds) / slope
    return out


@dataclass(frozen=True)
class _Spacing:
    """h(d) = min(h_max, h0 + g d + g_far max(0, d - d_far)), d = distance
    to the nearest conductor edge on the axis (mm)."""

    h0: float
    g: float
    g_far: float
    d_far: float
    h_max: float
    n_min: int

    def h(self, d: float) -> float:
        return min(self.h_max, self.h0 + self.g * d + self.g_far * max(0.0, d - self.d_far))

    def breaks(self) -> tuple[float, ...]:
        """Distances where h(d) changes slope."""
        near_top = self.h0 + self.g * self.d_far
        if near_top >= self.h_max:
            return ((self.h_max - self.h0) / self.g,)
        return (self.d_far, self.d_far + (self.h_max - near_top) / (self.g + self.g_far))


def _snap(keys: np.ndarray, values: np.ndarray, tol: float) -> np.ndarray:
    """Index of the key within ``tol`` of each value (keys sorted)."""
    i = np.clip(np.searchsorted(keys, values - tol), 0, keys.size - 1)
    if np.any(np.abs(keys[i] - values) > tol):
        raise ValueError("a coordinate is outside the solved domain")
    return i


def _axis(keys: np.ndarray, sing: np.ndarray, spacing: _Spacing) -> np.ndarray:
    pts = [keys[:1]]
    for a, b in zip(keys[:-1], keys[1:]):
        pts.append(_fill(float(a), float(b), sing, spacing))
        pts.append(np.array([b]))
    return np.concatenate(pts)


@dataclass
class _Grid:
    x: np.ndarray
    y: np.ndarray
    label: np.ndarray  # (nx, ny): -2 free, -1 ground, k signal
    eps: np.ndarray  # (nx-1, ny-1) relative permittivity per cell
    n_signal: int
    # cut edges (round conductors): ``cut`` indexes the edges (x-edges then
    # y-edges, as in ``_solve_grid``) that a circle boundary crosses; they
    # are replaced by ``links``: end node ids (node id, or nx*ny + k for net
    # k, nx*ny + n_signal for ground) and the factor 1/(free fraction of the
    # edge) that multiplies the edge's weight.
    cut: np.ndarray = field(default_factory=lambda: np.empty(0, dtype=np.int64))
    link_a: np.ndarray = field(default_factory=lambda: np.empty(0, dtype=np.int64))
    link_b: np.ndarray = field(default_factory=lambda: np.empty(0, dtype=np.int64))
    link_edge: np.ndarray = field(default_factory=lambda: np.empty(0, dtype=np.int64))
    link_factor: np.ndarray = field(default_factory=lambda: np.empty(0))


_FREE = -2

#: Spacing at a round conductor at resolution 1, as a fraction of the
#: smaller of its radius and its clearance to the nearest other conductor
#: (module docstring).
_CIRCLE_FRACTION = 0.1
#: Shortest free fraction of a cut edge used in its weight (a node closer to
#: a circle than this fraction of the edge is joined to it with the weight of
#: this distance; the boundary moves by at most 1e-3 of a cell).
_THETA_MIN = 1e-3


def _extent(c: Conductor | Circle) -> tuple[float, float, float, float]:
    """Bounding rectangle (x0, x1, y0, y1) of a conductor."""
    if isinstance(c, Circle):
        return c.cx - c.r, c.cx + c.r, c.cy - c.r, c.cy + c.r
    return c.x0, c.x1, c.y0, c.y1


def domain(cs: CrossSection) -> tuple[float, float, float, float]:
    ext = [_extent(c) for c in cs.conductors]
    cx = [e[0] for e in ext] + [e[1] for e in ext]
    cy = [e[2] for e in ext] + [e[3] for e in ext]
    if isinstance(cs.box, Circle):
        b = cs.box
        for c in cs.conductors:
            if isinstance(c, Circle):
                inside = math.hypot(c.cx - b.cx, c.cy - b.cy) + c.r < b.r
            else:
                inside = all(math.hypot(x - b.cx, y - b.cy) < b.r for x in (c.x0, c.x1) for y in (c.y0, c.y1))
            if not inside:
                raise SolveError("every conductor must lie strictly inside the box")
        return _extent(b)
    if cs.box is not None:
        bx0, bx1, by0, by1 = cs.box
        if not (bx0 < min(cx) and max(cx) < bx1 and by0 < min(cy) and max(cy) < by1):
            raise SolveError("every conductor must lie strictly inside the box")
        return float(bx0), float(bx1), float(by0), float(by1)
    if cs.box_margin <= 0:
        raise ValueError(f"box_margin must be positive, got {cs.box_margin}")
    ys = cy + [s.y0 for s in cs.slabs] + [s.y1 for s in cs.slabs] + list(cs.planes)
    size = max(max(cx) - min(cx), max(ys) - min(ys))
    m = cs.box_margin * size
    lo, hi = min(ys) - m, max(ys) + m
    below = [p for p in cs.planes if p < min(cy)]
    above = [p for p in cs.planes if p > max(cy)]
    by0 = max(below) if below else lo
    by1 = min(above) if above else hi
    if below and above:
        # between two planes the field dies sideways at least as fast as
        # exp(-pi x sqrt(er_min/er_max) / b); 5 such lengths is ample
        ers = [s.er for s in cs.slabs if s.y1 > by0 and s.y0 < by1]
        covered = sum(min(s.y1, by1) - max(s.y0, by0) for s in cs.slabs if s.y1 > by0 and s.y0 < by1)
        if covered < (by1 - by0) * (1 - 1e-9):
            ers.append(1.0)
        ratio = max(ers, default=1.0) / min(ers, default=1.0)
        m = min(m, 5.0 * (by1 - by0) * math.sqrt(ratio))
    return min(cx) - m, max(cx) + m, by0, by1


def _rect_distance(c: Conductor, x: float, y: float) -> float:
    """Distance from the point (x, y) to the rectangle ``c`` (0 inside)."""
    return math.hypot(max(c.x0 - x, 0.0, x - c.x1), max(c.y0 - y, 0.0, y - c.y1))


def _circle_clearances(
    cs: CrossSection, circles: list[Circle], enclosure: Circle | None, tol: float
) -> list[float]:
    """Clearance of each circle (and last, of the enclosure) to the nearest
    other conductor, plane or enclosure; raises if a signal circle touches
    another net or ground."""
    planes = list(cs.planes)
    out = []
    for c in circles:
        gaps: list[tuple[float, int]] = []
        for o in cs.conductors:
            if o is c:
                continue
            if isinstance(o, Circle):
                gaps.append((math.hypot(o.cx - c.cx, o.cy - c.cy) - o.r - c.r, o.net))
            else:
                gaps.append((_rect_distance(o, c.cx, c.cy) - c.r, o.net))
        gaps += [(abs(p - c.cy) - c.r, GROUND) for p in planes]
        if enclosure is not None:
            gaps.append((enclosure.r - math.hypot(c.cx - enclosure.cx, c.cy - enclosure.cy) - c.r, GROUND))
        elif isinstance(cs.box, tuple):
            bx0, bx1, by0, by1 = cs.box
            gaps.append((min(c.cx - bx0, bx1 - c.cx, c.cy - by0, by1 - c.cy) - c.r, GROUND))
        if c.net != GROUND:
            for g, net in gaps:
                if g <= tol and net != c.net:
                    what = "ground (a plane, the box or a ground conductor)" if net == GROUND else f"net {net}"
                    raise SolveError(f"signal conductor {c} touches {what}")
        out.append(min((g for g, net in gaps if net != c.net), default=math.inf))
    if enclosure is not None:
        inner = [enclosure.r - math.hypot(o.cx - enclosure.cx, o.cy - enclosure.cy) - o.r for o in circles]
        inner += [
            enclosure.r - max(math.hypot(x - enclosure.cx, y - enclosure.cy)
                              for x in (o.x0, o.x1) for y in (o.y0, o.y1))
            for o in cs.conductors
            if isinstance(o, Conductor)
        ]
        out.append(min(inner, default=math.inf))
    return out


def _density_fill(a: float, b: float, hfun, n_min: int) -> np.ndarray:
    """Interior points of (a, b) at equal steps of the integral of 1/h(x).

    The integral is taken by the trapezoid rule on sample points marched at
    an eighth of the local spacing (h changes by under 10 % per step)."""
    marched = [a]
    while marched[-1] < b:
        marched.append(marched[-1] + hfun(marched[-1]) / 8.0)
    marched[-1] = b
    xs = np.array(marched)
    if xs.size < 3:
        xs = np.linspace(a, b, 9)
    inv = 1.0 / np.array([hfun(v) for v in xs])
    cum = np.concatenate(([0.0], np.cumsum(0.5 * (inv[1:] + inv[:-1]) * np.diff(xs))))
    total = cum[-1]
    n = max(n_min, math.ceil(total - 1e-9))
    if n <= 1:
        return np.empty(0)
    return np.interp(total * np.arange(1, n) / n, cum, xs)


def _circle_axis(keys: np.ndarray, hfun, n_min: int) -> np.ndarray:
    pts = [keys[:1]]
    for a, b in zip(keys[:-1], keys[1:]):
        pts.append(_density_fill(float(a), float(b), hfun, n_min))
        pts.append(np.array([b]))
    return np.concatenate(pts)


def _build(cs: CrossSection, resolution: float) -> _Grid:
    """The non-uniform finite-difference grid of ``cs`` (lengths in mm).

    Grid lines: every conductor, slab, block and plane boundary is a key
    line (a circle gives its centre and extreme lines); between key lines
    the spacing starts at a fraction of the smallest gap next to copper
    divided by ``resolution`` squared and grows linearly with the distance
    to the nearest key line (faster beyond the size of the structure), up to
    a tenth of the domain divided by ``resolution``, with at least a few
    lines across each copper thickness (:class:`_Spacing`). Labels: the
    domain's edge (:func:`domain`) and every plane are ground; each
    conductor's nodes carry its net (a signal touching ground or another
    net raises :class:`SolveError`). Permittivity per cell from the slabs,
    then the blocks it lies in. Raises ``ValueError`` for a resolution that
    is not positive or a section without conductors."""
    if resolution <= 0:
        raise ValueError(f"resolution must be positive, got {resolution}")
    if not cs.conductors:
        raise ValueError("a cross-section needs at least one conductor")
    rects = [c for c in cs.conductors if isinstance(c, Conductor)]
    circles = [c for c in cs.conductors if isinstance(c, Circle)]
    if len(rects) + len(circles) != len(cs.conductors):
        raise ValueError("conductors must be Conductor or Circle")
    enclosure = cs.box if isinstance(cs.box, Circle) else None
    for c in rects:
        if not (c.x0 <= c.x1 and c.y0 <= c.y1):
            raise ValueError(f"conductor {c} needs x0 <= x1 and y0 <= y1")
        if c.x0 == c.x1 and c.y0 == c.y1:
            raise ValueError(f"conductor {c} is a point")
    for o in circles + ([enclosure] if enclosure else []):
        if not o.r > 0:
            raise ValueError(f"circle {o} needs r > 0")
    if enclosure is not None and enclosure.net != GROUND:
        raise ValueError("a circular box is ground: its net must be GROUND")
    nets = sorted({c.net for c in cs.conductors if c.net != GROUND})
    if not nets or nets != list(range(len(nets))):
        raise ValueError(f"signal nets must be numbered 0..N-1 with N >= 1, got {nets}")
    slabs = sorted(cs.slabs, key=lambda s: s.y0)
    for s in slabs:
        if not (s.y0 < s.y1 and s.er >= 1.0):
            raise ValueError(f"slab {s} needs y0 < y1 and er >= 1")
    for s, t in zip(slabs[:-1], slabs[1:]):
        if t.y0 < s.y1 - 1e-12:
            raise ValueError(f"slabs {s} and {t} overlap")
    for b in cs.blocks:
        if not (b.x0 < b.x1 and b.y0 < b.y1 and b.er >= 1.0):
            raise ValueError(f"block {b} needs x0 < x1, y0 < y1 and er >= 1")

    bx0, bx1, by0, by1 = domain(cs)
    size = max(bx1 - bx0, by1 - by0)
    tol = 1e-9 * size
    clearances = _circle_clearances(cs, circles, enclosure, tol) if circles or enclosure else []

    ext = np.array([_extent(c) for c in cs.conductors])
    round_all = circles + ([enclosure] if enclosure else [])
    # circles contribute their centre lines and extreme lines as key lines
    ckx = [v for c in round_all for v in (c.cx - c.r, c.cx, c.cx + c.r)]
    cky = [v for c in round_all for v in (c.cy - c.r, c.cy, c.cy + c.r)]
    xs = np.array([v for c in rects for v in (c.x0, c.x1)] + ckx + [bx0, bx1]
                  + [v for b in cs.blocks for v in (b.x0, b.x1)])
    ys = [v for c in rects for v in (c.y0, c.y1)] + cky + [by0, by1]
    ys += [v for s in slabs for v in (s.y0, s.y1)] + list(cs.planes)
    ys += [v for b in cs.blocks for v in (b.y0, b.y1)]
    ys_arr = np.array(ys)
    ys_arr = ys_arr[(ys_arr >= by0 - tol) & (ys_arr <= by1 + tol)]
    xs = xs[(xs >= bx0 - tol) & (xs <= bx1 + tol)]
    kx = _merge(np.clip(xs, bx0, bx1), tol)
    ky = _merge(np.clip(ys_arr, by0, by1), tol)
    sx = _merge(np.array([v for c in rects for v in (c.x0, c.x1)]), tol)
    sy = _merge(np.array([v for c in rects for v in (c.y0, c.y1)]), tol)

    # smallest gap next to a conductor edge: intervals between neighbouring
    # key lines with a conductor edge at one end, except a conductor's own
    # width or thickness (thin copper is resolved by n_min instead)
    def smallest_gap(keys: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> float:
        if lo.size == 0:
            return size
        i_lo = _snap(keys, lo, tol)
        i_hi = _snap(keys, hi, tol)
        edge = np.zeros(keys.size, dtype=bool)
        edge[i_lo] = edge[i_hi] = True
        own = np.zeros(keys.size - 1, dtype=bool)
        own[i_lo[i_hi == i_lo + 1]] = True
        gaps = np.diff(keys)
        ok = (edge[:-1] | edge[1:]) & ~own
        return float(gaps[ok].min()) if ok.any() else size

    rx0 = np.array([c.x0 for c in rects])
    rx1 = np.array([c.x1 for c in rects])
    ry0 = np.array([c.y0 for c in rects])
    ry1 = np.array([c.y1 for c in rects])
    sizes = np.maximum(rx1 - rx0, ry1 - ry0)[[c.net != GROUND for c in rects]]
    sizes = np.concatenate((sizes, [2 * c.r for c in circles if c.net != GROUND]))
    ell = min(smallest_gap(kx, rx0, rx1), smallest_gap(ky, ry0, ry1), float(sizes.min()))
    structure = max(float(ext[:, 1].max() - ext[:, 0].min()), float(ext[:, 3].max() - ext[:, 2].min()), ell)
    spacing = _Spacing(
        h0=_H0_FRACTION * ell / resolution**2,
        g=_GRADING / resolution,
        g_far=_GRADING_FAR / resolution,
        d_far=structure,
        h_max=size / 10.0 / resolution,
        n_min=math.ceil(_N_MIN * resolution),
    )
    if not round_all:
        x = _axis(kx, sx, spacing)
        y = _axis(ky, sy, spacing)
    else:
        # spacing: the least of the rectangle-edge grading and, per circle,
        # a constant h_c across its extent growing as the rectangle grading
        # outside it (the boundary passes every grid line of that band)
        hc = [_CIRCLE_FRACTION * min(c.r, g) / resolution for c, g in zip(round_all, clearances)]

        def make_h(sing: np.ndarray, centres: list[float]):
            def h(v: float) -> float:
                if sing.size:
                    k = np.searchsorted(sing, v)
                    d = min(v - sing[k - 1] if k > 0 else math.inf, sing[k] - v if k < sing.size else math.inf)
                    best = spacing.h(d)
                else:
                    best = spacing.h_max
                for c0, r, h0 in zip(centres, (c.r for c in round_all), hc):
                    d = max(0.0, abs(v - c0) - r)
                    best = min(best, h0 + spacing.g * d + spacing.g_far * max(0.0, d - spacing.d_far))
                return best

            return h

        x = _circle_axis(kx, make_h(sx, [c.cx for c in round_all]), spacing.n_min)
        y = _circle_axis(ky, make_h(sy, [c.cy for c in round_all]), spacing.n_min)

    nx, ny = x.size, y.size
    label = np.full((nx, ny), _FREE, dtype=np.int64)
    label[0, :] = label[-1, :] = label[:, 0] = label[:, -1] = GROUND

    def index(grid: np.ndarray, v: float) -> int:
        i = int(np.searchsorted(grid, v - tol))
        if i >= grid.size or abs(grid[i] - v) > tol:
            raise ValueError(f"coordinate {v} is outside the solved domain")
        return i

    for p in cs.planes:
        if by0 - tol <= p <= by1 + tol:
            label[:, index(y, p)] = GROUND
    if enclosure is not None:
        dx, dy = x[:, None] - enclosure.cx, y[None, :] - enclosure.cy
        label[dx * dx + dy * dy >= (enclosure.r - tol) ** 2] = GROUND
    # ground first, then signals, so that a signal touching ground is caught
    for cond in sorted(cs.conductors, key=lambda o: o.net):
        if isinstance(cond, Circle):
            dx, dy = x[:, None] - cond.cx, y[None, :] - cond.cy
            inside = dx * dx + dy * dy <= (cond.r + tol) ** 2
            if cond.net != GROUND:
                clash = label[inside & (label != _FREE) & (label != cond.net)]
                if clash.size:
                    what = ("ground (a plane, the box or a ground conductor)" if clash[0] == GROUND
                            else f"net {clash[0]}")
                    raise SolveError(f"signal conductor {cond} touches {what}")
            label[inside] = cond.net
            continue
        i0, i1 = index(x, cond.x0), index(x, cond.x1)
        j0, j1 = index(y, cond.y0), index(y, cond.y1)
        block = label[i0 : i1 + 1, j0 : j1 + 1]
        if cond.net != GROUND:
            clash = block[(block != _FREE) & (block != cond.net)]
            if clash.size:
                what = "ground (a plane, the box or a ground conductor)" if clash[0] == GROUND else f"net {clash[0]}"
                raise SolveError(f"signal conductor {cond} touches {what}")
        block[...] = cond.net

    yc = 0.5 * (y[:-1] + y[1:])
    er_rows = np.ones(ny - 1)
    for s in slabs:
        er_rows[(yc > s.y0) & (yc < s.y1)] = s.er
    eps = np.broadcast_to(er_rows, (nx - 1, ny - 1))
    if cs.blocks:
        eps = eps.copy()
        xc = 0.5 * (x[:-1] + x[1:])
        for b in cs.blocks:
            inside_x = (xc > b.x0) & (xc < b.x1)
            inside_y = (yc > b.y0) & (yc < b.y1)
            eps[np.ix_(inside_x, inside_y)] = b.er
    grid = _Grid(x, y, label, np.ascontiguousarray(eps), len(nets))
    if round_all:
        _cut_edges(grid, circles, enclosure)
    return grid


def _cut_edges(grid: _Grid, circles: list[Circle], enclosure: Circle | None) -> None:
    """Find the grid edges that a circle boundary crosses and replace each
    free stretch of such an edge by a link between its ends (a free node or
    a conductor at the crossing point) weighted by 1/(stretch length as a
    fraction of the edge): the symmetric Shortley-Weller rule (module
    docstring)."""
    x, y, label, n = grid.x, grid.y, grid.label, grid.n_signal
    nx, ny = x.size, y.size
    n_x_edges = (nx - 1) * ny
    # solid stretches (edge, t0, t1, net) along edges, t from the edge's
    # first node (lower index) to its second
    recs: list[tuple[np.ndarray, np.ndarray, np.ndarray, int]] = []

    def add(c: Circle, ids: np.ndarray, lo: np.ndarray, hi: np.ndarray, crosses: np.ndarray) -> None:
        # the disc covers t in [lo, hi] of each edge on a grid line that
        # crosses it (``crosses``); an enclosure covers the rest instead
        lo, hi = np.clip(lo, 0.0, 1.0), np.clip(hi, 0.0, 1.0)
        partial = crosses & (hi > lo) & ~((lo <= 0.0) & (hi >= 1.0))
        if c is not enclosure:
            recs.append((ids[partial], lo[partial], hi[partial], c.net))
            return
        s1 = partial & (lo > 0.0)
        recs.append((ids[s1], np.zeros(int(s1.sum())), lo[s1], GROUND))
        s2 = partial & (hi < 1.0)
        recs.append((ids[s2], hi[s2], np.ones(int(s2.sum())), GROUND))

    hx, hy = np.diff(x), np.diff(y)
    for c in circles + ([enclosure] if enclosure else []):
        # x-edges (i, j)-(i+1, j), id i * ny + j, on the lines y = y[j]
        d = y - c.cy
        half = np.sqrt(np.maximum(c.r * c.r - d * d, 0.0))[None, :]
        lo = (c.cx - half - x[:-1, None]) / hx[:, None]
        hi = (c.cx + half - x[:-1, None]) / hx[:, None]
        ids = np.arange(n_x_edges).reshape(nx - 1, ny)
        add(c, ids, lo, hi, np.broadcast_to((d * d < c.r * c.r)[None, :], lo.shape))
        # y-edges (i, j)-(i, j+1), id n_x_edges + i * (ny - 1) + j
        d = x - c.cx
        half = np.sqrt(np.maximum(c.r * c.r - d * d, 0.0))[:, None]
        lo = (c.cy - half - y[None, :-1]) / hy[None, :]
        hi = (c.cy + half - y[None, :-1]) / hy[None, :]
        ids = n_x_edges + np.arange(nx * (ny - 1)).reshape(nx, ny - 1)
        add(c, ids, lo, hi, np.broadcast_to((d * d < c.r * c.r)[:, None], lo.shape))

    if not recs:
        return
    e_all = np.concatenate([r[0] for r in recs])
    if e_all.size == 0:
        return
    t0_all = np.concatenate([r[1] for r in recs])
    t1_all = np.concatenate([r[2] for r in recs])
    net_all = np.concatenate([np.full(r[0].size, r[3], dtype=np.int64) for r in recs])
    order = np.lexsort((t0_all, e_all))
    e_all, t0_all, t1_all, net_all = e_all[order], t0_all[order], t1_all[order], net_all[order]
    lab = label.ravel()
    ground_id = nx * ny + n

    def net_id(k: int) -> int:
        return ground_id if k == GROUND else nx * ny + int(k)

    cut: list[int] = []
    la: list[Any] = []  # node or conductor id at each link's ends (ints; None never reaches a link)
    lb: list[Any] = []
    le: list[int] = []
    lf: list[float] = []
    starts = np.concatenate(([0], np.nonzero(np.diff(e_all))[0] + 1, [e_all.size]))
    for s0, s1 in zip(starts[:-1], starts[1:]):
        e = int(e_all[s0])
        if e < n_x_edges:
            i, j = divmod(e, ny)
            na, nb = i * ny + j, (i + 1) * ny + j
        else:
            i, j = divmod(e - n_x_edges, ny - 1)
            na, nb = i * ny + j, i * ny + j + 1
        # solid stretches along the edge, ends included as points
        solids = [(float(t0_all[k]), float(t1_all[k]), int(net_all[k])) for k in range(s0, s1)]
        if lab[na] != _FREE:
            solids.append((0.0, 0.0, int(lab[na])))
        if lab[nb] != _FREE:
            solids.append((1.0, 1.0, int(lab[nb])))
        solids.sort()
        cut.append(e)
        # walk the free stretches between solids
        left_end: int | None = na
        left_t, reach = 0.0, -1.0
        left_net: int | None = None
        if lab[na] != _FREE:
            left_end = None
        for t0, t1, net in solids:
            if t0 > reach + 1e-12 and (left_end is not None or reach >= 0.0):
                end_a = left_end if left_end is not None else left_net
                la.append(end_a)
                lb.append(net_id(net))
                le.append(e)
                lf.append(1.0 / max(t0 - left_t, _THETA_MIN))
            if t1 >= reach:
                reach, left_t, left_net, left_end = t1, t1, net_id(net), None
        if lab[nb] == _FREE and reach < 1.0:
            la.append(left_end if left_end is not None else left_net)
            lb.append(nb)
            le.append(e)
            lf.append(1.0 / max(1.0 - left_t, _THETA_MIN))
    grid.cut = np.array(cut, dtype=np.int64)
    grid.link_a = np.array(la, dtype=np.int64)
    grid.link_b = np.array(lb, dtype=np.int64)
    grid.link_edge = np.array(le, dtype=np.int64)
    grid.link_factor = np.array(lf)


# --------------------------------------------------------------------------
# solve


def _solve_grid(grid: _Grid) -> np.ndarray:
    x, y, label, eps, n = grid.x, grid.y, grid.label, grid.eps, grid.n_signal
    nx, ny = x.size, y.size
    hx, hy = np.diff(x), np.diff(y)
    # edge weights (box integration; see module docstring)
    p = np.zeros((nx - 1, ny + 1))
    p[:, 1:ny] = eps * hy
    wx = 0.5 * (p[:, :ny] + p[:, 1:]) / hx[:, None]  # edge (i,j)-(i+1,j)
    q = np.zeros((nx + 1, ny - 1))
    q[1:nx, :] = eps * hx[:, None]
    wy = 0.5 * (q[:nx] + q[1:]) / hy[None, :]  # edge (i,j)-(i,j+1)

    ids = np.arange(nx * ny).reshape(nx, ny)
    a = np.concatenate((ids[:-1, :].ravel(), ids[:, :-1].ravel()))
    b = np.concatenate((ids[1:, :].ravel(), ids[:, 1:].ravel()))
    w = np.concatenate((wx.ravel(), wy.ravel()))
    lab = label.ravel()
    if grid.cut.size:
        # cut edges -> links (a conductor end is the net's virtual node)
        keep = np.ones(a.size, dtype=bool)
        keep[grid.cut] = False
        a = np.concatenate((a[keep], grid.link_a))
        b = np.concatenate((b[keep], grid.link_b))
        w = np.concatenate((w[keep], w[grid.link_edge] * grid.link_factor))
        lab = np.concatenate((lab, np.arange(n), [GROUND]))
    n_nodes = lab.size

    free = lab == _FREE
    fidx = np.full(n_nodes, -1, dtype=np.int64)
    nfree = int(free.sum())
    fidx[free] = np.arange(nfree)
    fa, fb = fidx[a], fidx[b]

    # right-hand sides: free node next to signal conductor k at 1 V
    rhs = np.zeros((nfree, n))
    la, lb = lab[a], lab[b]
    m1 = (fa >= 0) & (lb >= 0)
    np.add.at(rhs, (fa[m1], lb[m1]), w[m1])
    m2 = (fb >= 0) & (la >= 0)
    np.add.at(rhs, (fb[m2], la[m2]), w[m2])

    phi = np.zeros((n_nodes, n))
    if nfree:
        phi[free] = _spd_solve(fa, fb, w, nfree, rhs)
    sig = lab >= 0
    phi[np.nonzero(sig)[0], lab[sig]] = 1.0

    # energy form, only edges where some potential differs
    d = phi[a] - phi[b]
    active = np.any(d != 0.0, axis=1)
    d = d[active]
    cm = (d * w[active, None]).T @ d
    return epsilon_0 * cm


def _spd_solve(fa: np.ndarray, fb: np.ndarray, w: np.ndarray, nfree: int, rhs: np.ndarray) -> np.ndarray:
    """Solve the symmetric positive definite system on the free nodes by
    sparse LU (SuperLU, COLAMD ordering).

    ``fa``, ``fb``: free-node index of each edge's ends (-1 if fixed), ``w``:
    edge weights. (A banded Cholesky was tried: faster alone, but its
    multithreaded BLAS stalls when two solves run at once.)
    """
    diag = np.bincount(fa[fa >= 0], weights=w[fa >= 0], minlength=nfree)
    diag += np.bincount(fb[fb >= 0], weights=w[fb >= 0], minlength=nfree)
    both = (fa >= 0) & (fb >= 0)
    p, q, v = fa[both], fb[both], w[both]
    idx = np.arange(nfree)
    mat = sp.csc_matrix(
        (np.concatenate((-v, -v, diag)), (np.concatenate((p, q, idx)), np.concatenate((q, p, idx)))),
        shape=(nfree, nfree),
    )
    return splu(mat).solve(rhs)


def solve(cs: CrossSection, resolution: float = FAST, *, richardson: bool = False) -> CapacitanceResult:
    """Maxwell capacitance matrix per unit length (F/m) of ``cs``.

    Parameters
    ----------
    cs : CrossSection
        Geometry in mm (see the module docstring for the model).
    resolution : float
        Grid refinement, dimensionless; ``FAST`` (1) or ``FINE`` (3) are the
        calibrated settings; every spacing scales as 1/resolution.
    richardson : bool
        Also solve at ``2 * resolution``; the result is then the finer solve,
        with ``error = |C(2r) - C(r)| / (2**p - 1)`` and
        ``extrapolated = C(2r) + (C(2r) - C(r)) / (2**p - 1)``,
        ``p = RICHARDSON_ORDER`` (Richardson 1927). Costs about 5 times one solve.

    Returns
    -------
    CapacitanceResult

    Raises
    ------
    ValueError
        Bad geometry: a signal conductor touching ground or another net,
        overlapping slabs, nets not numbered 0..N-1, a conductor outside the box.
    """
    grid = _build(cs, resolution)
    cm = _solve_grid(grid)
    if not richardson:
        return CapacitanceResult(cm, resolution, (grid.x.size, grid.y.size))
    grid2 = _build(cs, 2 * resolution)
    cm2 = _solve_grid(grid2)
    factor = 1.0 / (2.0**RICHARDSON_ORDER - 1.0)
    return CapacitanceResult(
        cm2,
        2 * resolution,
        (grid2.x.size, grid2.y.size),
        error=np.abs(cm2 - cm) * factor,
        extrapolated=cm2 + (cm2 - cm) * factor,
    )


def grid_of(cs: CrossSection, resolution: float = FAST) -> tuple[np.ndarray, np.ndarray]:
    """The grid lines (x, y), mm, that ``solve`` would use (for inspection)."""
    grid = _build(cs, resolution)
    return grid.x, grid.y
