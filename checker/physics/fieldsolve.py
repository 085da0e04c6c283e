r"""Two-dimensional electrostatic field solver for PCB cross-sections.

Solves :math:`\nabla\cdot(\varepsilon\nabla\varphi) = 0` on a rectangular
cross-section (x across the board, y up through the stackup) and returns the
per-unit-length Maxwell capacitance matrix of the signal conductors.

Model
-----
* Conductors are axis-aligned rectangles ``x0 <= x <= x1, y0 <= y <= y1``
  (mm). A zero thickness (``y0 == y1``) or zero width gives a line. Each is a
  numbered signal conductor ``0 .. N-1`` or ground (``GROUND``).
* Dielectrics are horizontal slabs ``y0 <= y <= y1`` of relative permittivity
  ``er`` spanning the full width; everything else is vacuum (``er = 1``).
* ``planes`` are grounded zero-thickness planes at the given y, full width.
* The domain is closed by a grounded rectangular box. Either give it
  (``CrossSection.box``) or let the solver put it ``box_margin`` times the
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
bounds that fall as the grid is refined.

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
* O. C. Zienkiewicz, R. L. Taylor, *The Finite Element Method*, vol. 1, any
  edition (linear triangles; their stiffness on right triangles reduces to
  the 5-point stencil).

Validity: quasi-static TEM, perfect conductors, isotropic lossless
dielectrics in horizontal slabs. Rectangles only (no trapezoidal etch).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.constants import epsilon_0
from scipy.sparse.linalg import splu

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
class Slab:
    """A dielectric slab ``y0 <= y <= y1`` (mm) of relative permittivity
    ``er``, full width."""

    y0: float
    y1: float
    er: float


@dataclass(frozen=True)
class CrossSection:
    """What to solve. Lengths in mm.

    ``planes``: y of grounded full-width planes. ``box``: grounded enclosure
    ``(x0, x1, y0, y1)``; ``None`` puts one ``box_margin`` x (structure size)
    away on each side (a stand-in for open space, see the module docstring).
    """

    conductors: tuple[Conductor, ...]
    slabs: tuple[Slab, ...] = ()
    planes: tuple[float, ...] = ()
    box: tuple[float, float, float, float] | None = None
    box_margin: float = DEFAULT_BOX_MARGIN


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

    cuts = {a, b, 0.5 * (s_left + s_right)}
    for d in spacing.breaks():
        cuts.update((s_left + d, s_right - d))
    cuts = sorted(c for c in cuts if a <= c <= b and math.isfinite(c))
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


_FREE = -2


def _domain(cs: CrossSection) -> tuple[float, float, float, float]:
    cx = [c.x0 for c in cs.conductors] + [c.x1 for c in cs.conductors]
    cy = [c.y0 for c in cs.conductors] + [c.y1 for c in cs.conductors]
    if cs.box is not None:
        bx0, bx1, by0, by1 = cs.box
        if not (bx0 < min(cx) and max(cx) < bx1 and by0 < min(cy) and max(cy) < by1):
            raise ValueError("every conductor must lie strictly inside the box")
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


def _build(cs: CrossSection, resolution: float) -> _Grid:
    if resolution <= 0:
        raise ValueError(f"resolution must be positive, got {resolution}")
    if not cs.conductors:
        raise ValueError("a cross-section needs at least one conductor")
    for c in cs.conductors:
        if not (c.x0 <= c.x1 and c.y0 <= c.y1):
            raise ValueError(f"conductor {c} needs x0 <= x1 and y0 <= y1")
        if c.x0 == c.x1 and c.y0 == c.y1:
            raise ValueError(f"conductor {c} is a point")
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

    bx0, bx1, by0, by1 = _domain(cs)
    size = max(bx1 - bx0, by1 - by0)
    tol = 1e-9 * size

    xs = np.array([v for c in cs.conductors for v in (c.x0, c.x1)] + [bx0, bx1])
    ys = [v for c in cs.conductors for v in (c.y0, c.y1)] + [by0, by1]
    ys += [v for s in slabs for v in (s.y0, s.y1)] + list(cs.planes)
    ys_arr = np.array(ys)
    ys_arr = ys_arr[(ys_arr >= by0 - tol) & (ys_arr <= by1 + tol)]
    kx = _merge(np.clip(xs, bx0, bx1), tol)
    ky = _merge(np.clip(ys_arr, by0, by1), tol)
    sx = _merge(np.array([v for c in cs.conductors for v in (c.x0, c.x1)]), tol)
    sy = _merge(np.array([v for c in cs.conductors for v in (c.y0, c.y1)]), tol)

    # smallest gap next to a conductor edge: intervals between neighbouring
    # key lines with a conductor edge at one end, except a conductor's own
    # width or thickness (thin copper is resolved by n_min instead)
    def smallest_gap(keys: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> float:
        i_lo = _snap(keys, lo, tol)
        i_hi = _snap(keys, hi, tol)
        edge = np.zeros(keys.size, dtype=bool)
        edge[i_lo] = edge[i_hi] = True
        own = np.zeros(keys.size - 1, dtype=bool)
        own[i_lo[i_hi == i_lo + 1]] = True
        gaps = np.diff(keys)
        ok = (edge[:-1] | edge[1:]) & ~own
        return float(gaps[ok].min()) if ok.any() else size

    cx0 = np.array([c.x0 for c in cs.conductors])
    cx1 = np.array([c.x1 for c in cs.conductors])
    cy0 = np.array([c.y0 for c in cs.conductors])
    cy1 = np.array([c.y1 for c in cs.conductors])
    sizes = np.maximum(cx1 - cx0, cy1 - cy0)[[c.net != GROUND for c in cs.conductors]]
    ell = min(smallest_gap(kx, cx0, cx1), smallest_gap(ky, cy0, cy1), float(sizes.min()))
    structure = max(float(cx1.max() - cx0.min()), float(cy1.max() - cy0.min()), ell)
    spacing = _Spacing(
        h0=_H0_FRACTION * ell / resolution**2,
        g=_GRADING / resolution,
        g_far=_GRADING_FAR / resolution,
        d_far=structure,
        h_max=size / 10.0 / resolution,
        n_min=math.ceil(_N_MIN * resolution),
    )
    x = _axis(kx, sx, spacing)
    y = _axis(ky, sy, spacing)

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
    # ground first, then signals, so that a signal touching ground is caught
    for c in sorted(cs.conductors, key=lambda c: c.net):
        i0, i1 = index(x, c.x0), index(x, c.x1)
        j0, j1 = index(y, c.y0), index(y, c.y1)
        block = label[i0 : i1 + 1, j0 : j1 + 1]
        if c.net != GROUND:
            clash = block[(block != _FREE) & (block != c.net)]
            if clash.size:
                what = "ground (a plane, the box or a ground conductor)" if clash[0] == GROUND else f"net {clash[0]}"
                raise ValueError(f"signal conductor {c} touches {what}")
        block[...] = c.net

    yc = 0.5 * (y[:-1] + y[1:])
    er_rows = np.ones(ny - 1)
    for s in slabs:
        er_rows[(yc > s.y0) & (yc < s.y1)] = s.er
    eps = np.broadcast_to(er_rows, (nx - 1, ny - 1))
    return _Grid(x, y, label, np.ascontiguousarray(eps), len(nets))


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

    free = lab == _FREE
    fidx = np.full(nx * ny, -1, dtype=np.int64)
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

    phi = np.zeros((nx * ny, n))
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
        Grid refinement, dimensionless; ``FAST`` (1) or ``FINE`` (4) are the
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
