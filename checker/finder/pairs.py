"""Coupled piece pairs: which copper pieces of different nets lie close
together, and how (angle, run length, offset, gap, plan-view overlap).

A piece is the rectangle of width ``w`` centred on its segment, flat ends.
Only pieces with a net (``net != NO_NET``) and non-zero length take part, and
only pairs of different nets are reported.

Geometry of a pair (a, b), with unit directions ``ua``, ``ub``:

* ``angle_deg`` = ``atan2(|ua x ub|, |ua . ub|)`` in degrees, folded to
  [0, 90] (0 parallel, 90 orthogonal). The pair is *parallel* when
  ``angle_deg <= parallel_angle_deg``, otherwise a *crossing*.
* Parallel pairs. ``u`` is the bisector of ``ua`` and ``ub`` (``ub``
  sign-aligned to ``ua``), ``n`` its normal. ``length_mm`` is the overlap of
  the projections of the two centrelines onto ``u``. ``offset_mm`` is the
  distance, along ``n``, between the two centrelines at the middle ``tm`` of
  that overlap interval (the points of a and b whose projection is ``tm``).
  ``gap_mm = offset - (wa + wb)/2`` (negative: copper overlaps in plan).
  ``overlap_mm2 = length * clip((wa + wb)/2 - offset, 0, min(wa, wb))``,
  exact for exactly parallel rectangles. ``x, y`` is the midpoint of the two
  centreline points at ``tm``. Kept when ``length > 0`` and
  ``gap <= search_mm``. On one layer (``find_edge``) a negative gap means
  copper of two nets overlapping, a short; such pairs are kept and reported
  as measured.
* Crossing pairs (broadside only: ``find_edge`` leaves out pieces of one
  layer meeting at more than ``parallel_angle_deg``). Kept when the two
  rectangles overlap in plan with area above ``AREA_EPS_MM2``.
  ``overlap_mm2`` is the exact area of the intersection (closed form for an
  interior crossing, ``wa * wb / sin(angle)``; otherwise integrated exactly
  around rectangle a in b's own frame, see ``_clip_area``). ``length_mm`` is
  the longer of (a's centreline inside rectangle b) and (b's centreline
  inside rectangle a), i.e. the centreline clipped to the other piece's band
  of its width and to both pieces' ends (Liang-Barsky); an interior crossing
  gives ``max(wa, wb) / sin(angle)``. ``offset_mm = 0``, ``gap_mm = -min(wa,
  wb)``, ``x, y`` the centroid of the overlap polygon.

Search. ``find_edge`` splits the pieces into four orientation classes
(direction nearest to 0, 45, 90 or 135 degrees) and searches each class
against itself in a frame turned to the class direction, where the boxes are
tight (a 45-degree piece has a large, mostly empty box in board axes), plus
each pair of neighbouring classes restricted to pieces within
``parallel_angle_deg`` of their common border (two pieces within that angle
of each other but in different classes straddle it). ``find_broadside``
searches all pieces at once in board axes: most broadside pairs are
crossings between classes, and splitting was measured slower there. Within a
search, each piece's centreline bounding box is grown by ``w/2 +
search_mm/2`` on every side. A parallel pair within ``search_mm`` has two
centreline points (one on each piece) at most ``search_mm + (wa + wb)/2``
apart, and overlapping rectangles are each inside their grown box, so every
reportable pair has overlapping grown boxes, in any frame. Those are found
in bulk with the grid hash of :mod:`checker.finder.index`, then measured
exactly with numpy on the candidates, chunk by chunk (on a small thread
pool: numpy releases the GIL in its array loops). Results are sorted by (a,
b) and do not depend on grid, chunk size or thread count.
"""

from __future__ import annotations

from collections import deque
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass
from typing import Any, Callable, ClassVar, Iterable, Iterator, Sequence

import numpy as np

from ..cores import workers_for
from ..model import NO_NET, Pieces
from ..progress import Counter
from .index import CHUNK_PAIRS, Boxes, Grid, overlapping_pairs, sort_order

#: Crossing pairs whose plan-view overlap is at most this (mm^2) count as
#: touching, not overlapping (1e-12 mm^2 = 1e-6 um^2; rounding noise only).
AREA_EPS_MM2 = 1e-12

#: Grown boxes are padded by this much (mm) against rounding at the limit.
BOX_SLACK_MM = 1e-9

#: Default upper bound on measuring threads.
MAX_WORKERS = 4

#: Pieces are searched in orientation classes of this width (degrees),
#: centred on 0, 45, 90 and 135.
CLASS_DEG = 45.0
N_CLASSES = 4

#: Slack (degrees) when deciding which pieces lie near a class border.
ANGLE_TOL_DEG = 1e-6


@dataclass
class PairTable:
    """Coupled piece pairs as parallel arrays (one row a pair); see the module
    docstring for the meaning of each column. ``a`` and ``b`` index the
    board's ``Pieces``; for ``edge`` tables ``a < b`` and each unordered pair
    appears once."""

    kind: str
    layer_a: int
    layer_b: int
    a: np.ndarray
    b: np.ndarray
    angle_deg: np.ndarray
    parallel: np.ndarray
    length_mm: np.ndarray
    offset_mm: np.ndarray
    gap_mm: np.ndarray
    overlap_mm2: np.ndarray
    x: np.ndarray
    y: np.ndarray
    #: candidate piece pairs (grown bounding boxes overlapping) whose exact
    #: geometry was measured to produce this table; 0 for derived tables
    candidates: int = 0

    #: the array columns, in order
    COLUMNS: ClassVar[tuple[str, ...]] = ("a", "b", "angle_deg", "parallel", "length_mm",
                                          "offset_mm", "gap_mm", "overlap_mm2", "x", "y")

    def __len__(self) -> int:
        return int(self.a.shape[0])

    @classmethod
    def empty(cls, kind: str, layer_a: int, layer_b: int) -> "PairTable":
        i = np.zeros(0, dtype=np.int32)
        f = np.zeros(0, dtype=np.float64)
        columns: dict[str, Any] = {n: f.copy() for n in cls.COLUMNS}
        columns.update(a=i, b=i.copy(), parallel=np.zeros(0, dtype=bool))
        return cls(kind, layer_a, layer_b, **columns)

    def take(self, mask_or_index) -> "PairTable":
        """The rows selected by a boolean mask, an index array or a slice."""
        sel = mask_or_index if isinstance(mask_or_index, slice) else np.asarray(mask_or_index)
        taken: dict[str, Any] = {n: getattr(self, n)[sel] for n in self.COLUMNS}
        return PairTable(self.kind, self.layer_a, self.layer_b, **taken)

    @classmethod
    def concat(cls, tables: Sequence["PairTable"]) -> "PairTable":
        """Rows of all ``tables`` in order. All must have the same kind; the
        layer fields are taken from the first table (concatenating tables of
        different layer pairs keeps the first table's layers as a label only:
        the piece indices still say where each row lies)."""
        tables = list(tables)
        if not tables:
            raise ValueError("PairTable.concat needs at least one table")
        kinds = {t.kind for t in tables}
        if len(kinds) != 1:
            raise ValueError(f"PairTable.concat: tables of different kinds {sorted(kinds)}")
        t0 = tables[0]
        joined: dict[str, Any] = {n: np.concatenate([getattr(t, n) for t in tables]) for n in cls.COLUMNS}
        return cls(t0.kind, t0.layer_a, t0.layer_b, **joined)



class _Layer:
    """The pieces of one layer that can couple, as local arrays: global index,
    net, centre, unit direction, half length, half width, orientation class
    (nearest multiple of 45 degrees, 0..3) and offset from it (degrees, in
    [-22.5, 22.5)). Kept in a spatial order (row-major grid cells) so that
    neighbours in space are neighbours in memory."""

    __slots__ = ("idx", "net", "cx", "cy", "ux", "uy", "hl", "hw", "cls", "off", "grow",
                 "rank", "by_rank")

    def __init__(self, pieces: Pieces, layer: int, grow_mm: float) -> None:
        idx = np.flatnonzero((pieces.layer == layer) & (pieces.net != NO_NET))
        x1, y1, x2, y2 = (getattr(pieces, n)[idx] for n in ("x1", "y1", "x2", "y2"))
        dx, dy = x2 - x1, y2 - y1
        length = np.hypot(dx, dy)
        live = length > 0
        if not live.all():
            live |= np.isnan(length)                 # rejected below, not dropped
            idx, x1, y1, x2, y2, dx, dy, length = (
                v[live] for v in (idx, x1, y1, x2, y2, dx, dy, length))
        width = pieces.width[idx].astype(np.float64)
        if not (np.isfinite(length).all() and np.isfinite(width).all() and (width >= 0).all()):
            raise ValueError(f"pieces on layer {layer} need finite coordinates and widths >= 0")
        self.idx = idx.astype(np.int32)  # piece indices: a board holds fewer than 2**31 pieces
        self.net = pieces.net[idx]
        self.cx = 0.5 * (x1 + x2)
        self.cy = 0.5 * (y1 + y2)
        self.ux = dx / length
        self.uy = dy / length
        self.hl = 0.5 * length
        self.hw = 0.5 * width
        self.grow = grow_mm + BOX_SLACK_MM
        theta = np.degrees(np.arctan2(self.uy, self.ux)) % 180.0
        k = np.floor((theta + CLASS_DEG / 2) / CLASS_DEG)
        self.off = theta - k * CLASS_DEG
        self.cls = (k % N_CLASSES).astype(np.int8)
        # idx is increasing here; after the spatial reorder, rank[i] is the
        # position of piece i in increasing global index order
        self.by_rank = self.idx
        self.rank = np.arange(len(self), dtype=np.int64)
        if len(self) > 1:
            boxes = self.boxes(np.arange(len(self)), 0.0)
            self._reorder(Grid.fit(boxes).order(boxes))

    def __len__(self) -> int:
        return int(self.idx.shape[0])

    def _reorder(self, order: np.ndarray) -> None:
        for name in self.__slots__:
            if name not in ("grow", "by_rank"):
                setattr(self, name, getattr(self, name)[order])

    def boxes(self, sel: np.ndarray, phi_deg: float) -> Boxes:
        """Grown boxes of pieces ``sel`` in the frame turned by ``phi_deg``
        (x' along direction phi): centreline box grown by ``w/2 + grow``."""
        c, s = np.cos(np.radians(phi_deg)), np.sin(np.radians(phi_deg))
        if phi_deg == 0.0:
            c, s = 1.0, 0.0
        cx, cy, ux, uy, hl = self.cx[sel], self.cy[sel], self.ux[sel], self.uy[sel], self.hl[sel]
        px, py = cx * c + cy * s, cy * c - cx * s
        ex = np.abs(ux * c + uy * s) * hl
        ey = np.abs(uy * c - ux * s) * hl
        g = self.hw[sel] + self.grow
        return Boxes(px - ex - g, py - ey - g, px + ex + g, py + ey + g)


def _check_args(search_mm: float, parallel_angle_deg: float) -> None:
    if not (np.isfinite(search_mm) and search_mm >= 0):
        raise ValueError(f"search_mm must be a finite number >= 0, got {search_mm!r}")
    if not (0 <= parallel_angle_deg <= 90):
        raise ValueError(f"parallel_angle_deg must lie in [0, 90], got {parallel_angle_deg!r}")


def find_broadside(pieces: Pieces, layer_a: int, layer_b: int, search_mm: float,
                   parallel_angle_deg: float = 10.0, *, cell_mm: float | None = None,
                   chunk_pairs: int = CHUNK_PAIRS, workers: int | None = None) -> PairTable:
    """Pairs of a piece on ``layer_a`` and a piece on ``layer_b`` (another
    layer, normally its neighbour) that couple: parallel pairs within
    ``search_mm`` (plan-view gap) and crossings that overlap in plan.

    ``cell_mm`` forces the grid cell size, ``chunk_pairs`` the candidate
    chunk size and ``workers`` the number of threads measuring chunks
    (default: up to 4, one per CPU). Results do not depend on any of them.
    """
    _check_args(search_mm, parallel_angle_deg)
    if layer_a == layer_b:
        raise ValueError("find_broadside needs two different layers; use find_edge for one")
    la = _Layer(pieces, layer_a, 0.5 * search_mm)
    lb = _Layer(pieces, layer_b, 0.5 * search_mm)
    # One search in board axes: splitting by orientation class (as find_edge
    # does) was measured slower here, since most broadside pairs are
    # crossings of different classes and each class pair needs its own grid.
    jobs = [(np.arange(len(la), dtype=np.int32), np.arange(len(lb), dtype=np.int32), 0.0)]
    chunks = _Counted(_job_chunks(la, lb, jobs, False, cell_mm, chunk_pairs))
    parts = _map_chunks(chunks, workers, lambda ia, ib: _measure(
        la, lb, ia, ib, search_mm, parallel_angle_deg, crossings=True))
    table = _assemble("broadside", layer_a, layer_b, la, lb, parts)
    table.candidates = chunks.count
    return table


def find_edge(pieces: Pieces, layer: int, search_mm: float,
              parallel_angle_deg: float = 10.0, *, cell_mm: float | None = None,
              chunk_pairs: int = CHUNK_PAIRS, workers: int | None = None) -> PairTable:
    """Parallel pairs of pieces on one ``layer`` whose plan-view gap is at
    most ``search_mm``; each unordered pair once, with ``a < b``.

    Only parallel pairs are reported: pieces of one layer meeting at a larger
    angle are left out (on one layer they either stay apart, where the
    approach is short, or touch, which is a short circuit for another check).
    A negative gap means the copper of two different nets overlaps: a short,
    reported as found. Keyword arguments as for :func:`find_broadside`.
    """
    _check_args(search_mm, parallel_angle_deg)
    la = _Layer(pieces, layer, 0.5 * search_mm)
    if parallel_angle_deg < CLASS_DEG:
        # within a class, and across neighbouring classes only between pieces
        # within parallel_angle_deg of the border between them
        margin = CLASS_DEG / 2 - parallel_angle_deg - ANGLE_TOL_DEG
        jobs: list[tuple[np.ndarray, np.ndarray | None, float]] = [
            (np.flatnonzero(la.cls == i).astype(np.int32), None, CLASS_DEG * i) for i in range(N_CLASSES)]
        for i in range(N_CLASSES):
            j = (i + 1) % N_CLASSES
            up = np.flatnonzero((la.cls == i) & (la.off >= margin)).astype(np.int32)
            down = np.flatnonzero((la.cls == j) & (la.off <= -margin)).astype(np.int32)
            jobs.append((up, down, CLASS_DEG * (i + 0.5)))
    else:
        jobs = [(np.arange(len(la), dtype=np.int32), None, 0.0)]
    chunks = _Counted(_job_chunks(la, la, jobs, True, cell_mm, chunk_pairs))
    parts = _map_chunks(chunks, workers, lambda ia, ib: _measure(
        la, la, ia, ib, search_mm, parallel_angle_deg, crossings=False))
    table = _assemble("edge", layer, layer, la, la, parts)
    table.candidates = chunks.count
    return table


class _Counted:
    """Passes candidate chunks through, counting the pairs in them."""

    def __init__(self, chunks: Iterator[tuple[np.ndarray, np.ndarray]]) -> None:
        self.chunks = chunks
        self.count = 0

    def __iter__(self) -> Iterator[tuple[np.ndarray, np.ndarray]]:
        for ia, ib in self.chunks:
            self.count += int(ia.size)
            yield ia, ib


def _job_chunks(la: _Layer, lb: _Layer, jobs, self_join: bool, cell_mm: float | None,
                chunk_pairs: int) -> Iterator[tuple[np.ndarray, np.ndarray]]:
    """Candidate pairs (layer-local indices) of every job ``(sel_a, sel_b,
    phi)``: boxes of ``sel_a`` against boxes of ``sel_b`` (or, when ``sel_b``
    is None, against each other) in the frame turned by ``phi``."""
    for sa, sb, phi in jobs:
        if sa.size == 0 or (sb is not None and sb.size == 0):
            continue
        ba = la.boxes(sa, phi)
        if sb is None:
            for ia, ib in overlapping_pairs(ba, None, cell_mm=cell_mm, chunk_pairs=chunk_pairs):
                yield sa[ia], sa[ib]
        else:
            bb = (la if self_join else lb).boxes(sb, phi)
            for ia, ib in overlapping_pairs(ba, bb, cell_mm=cell_mm, chunk_pairs=chunk_pairs):
                yield sa[ia], sb[ib]


def _map_chunks(chunks: Iterable[tuple[np.ndarray, np.ndarray]], workers: int | None,
                measure: Callable[[np.ndarray, np.ndarray], tuple[np.ndarray, ...]]
                ) -> list[tuple[np.ndarray, ...]]:
    """``measure`` applied to every chunk, results in chunk order. With more
    than one worker, chunks are measured on a thread pool (numpy releases the
    GIL inside its array loops) while the main thread produces the next
    ones; at most two chunks per worker are in flight, to bound memory."""
    if workers is None:
        workers = workers_for(MAX_WORKERS)  # 1 inside another map's worker
    if workers < 1:
        raise ValueError(f"workers must be >= 1, got {workers}")
    measured = Counter("candidate piece pairs measured:")
    if workers == 1:
        out = []
        for ia, ib in chunks:
            out.append(measure(ia, ib))
            measured.add(int(ia.size))
        return out
    out = []
    pending: deque[tuple[Future, int]] = deque()
    with ThreadPoolExecutor(max_workers=workers) as pool:
        for ia, ib in chunks:
            pending.append((pool.submit(measure, ia, ib), int(ia.size)))
            if len(pending) >= 2 * workers:
                future, size = pending.popleft()
                out.append(future.result())
                measured.add(size)
        while pending:
            future, size = pending.popleft()
            out.append(future.result())
            measured.add(size)
    return out


def _assemble(kind: str, layer_a: int, layer_b: int, la: _Layer, lb: _Layer,
              parts: list[tuple[np.ndarray, ...]]) -> PairTable:
    """One table from the measured chunks, rows sorted by (a, b). Columns are
    joined and reordered one at a time to keep the peak memory low."""
    lists: list[list[np.ndarray | None]] = [list(p) for p in parts if p[0].size]
    if not lists:
        return PairTable.empty(kind, layer_a, layer_b)

    def column(k: int) -> np.ndarray:
        col = np.concatenate([p[k] for p in lists])
        for p in lists:
            p[k] = None  # each chunk's column freed once joined (peak memory)
        return col

    ra, rb = la.rank[column(0)], lb.rank[column(1)]  # ranks (int64) follow global index order
    if kind == "edge":
        ra, rb = np.minimum(ra, rb), np.maximum(ra, rb)
    order = sort_order(ra * len(lb) + rb)
    a, b = la.by_rank[ra[order]], lb.by_rank[rb[order]]
    del ra, rb
    cols = [column(k)[order] for k in range(2, len(parts[0]))]
    return PairTable(kind, layer_a, layer_b, a, b, *cols)


def _measure(la: _Layer, lb: _Layer, ia: np.ndarray, ib: np.ndarray, search_mm: float,
             parallel_angle_deg: float, crossings: bool) -> tuple[np.ndarray, ...]:
    """Exact geometry of candidate pairs (local indices); returns the kept
    rows as (ia, ib, angle, parallel, length, offset, gap, overlap, x, y)."""
    keep = la.net[ia] != lb.net[ib]
    ia, ib = ia[keep], ib[keep]
    uxa, uya, uxb, uyb = la.ux[ia], la.uy[ia], lb.ux[ib], lb.uy[ib]
    dot = uxa * uxb + uya * uyb
    cross = uxa * uyb - uya * uxb
    angle = np.degrees(np.arctan2(np.abs(cross), np.abs(dot)))
    par = angle <= parallel_angle_deg
    out = []
    if par.any():
        p = np.flatnonzero(par)
        cols = _parallel(la, lb, ia[p], ib[p], uxa[p], uya[p], uxb[p], uyb[p], dot[p])
        ok = (cols[0] > 0) & (cols[2] <= search_mm)
        out.append((ia[p][ok], ib[p][ok], angle[p][ok], np.ones(int(ok.sum()), bool),
                    *(c[ok] for c in cols)))
    if crossings and not par.all():
        c = np.flatnonzero(~par)
        out.append(_crossing(la, lb, ia[c], ib[c], angle[c], uxa[c], uya[c], uxb[c], uyb[c],
                             dot[c], cross[c]))
    if not out:
        e = np.zeros(0, np.int32)
        f = np.zeros(0)
        return (e, e, f, np.zeros(0, bool), f, f, f, f, f, f)
    if len(out) == 1:
        return out[0]
    return tuple(np.concatenate(c) for c in zip(*out))


def _parallel(la: _Layer, lb: _Layer, ia, ib, uxa, uya, uxb, uyb, dot):
    """Run length, offset, gap, overlap area and location of parallel pairs,
    worked in a frame centred on a's centre along the bisector ``u``."""
    sgn = np.where(dot < 0, -1.0, 1.0)
    vxb, vyb = sgn * uxb, sgn * uyb              # b's direction aligned to a's
    bx, by = uxa + vxb, uya + vyb
    norm = np.hypot(bx, by)                      # >= sqrt(2) since angle <= 90
    ux, uy = bx / norm, by / norm
    nx, ny = -uy, ux
    ka = uxa * ux + uya * uy                     # cos(angle/2) > 0, same for b
    kb = vxb * ux + vyb * uy
    rx, ry = lb.cx[ib] - la.cx[ia], lb.cy[ib] - la.cy[ia]
    tb = rx * ux + ry * uy                       # b's centre along u (a's centre = 0)
    ea, eb = la.hl[ia] * ka, lb.hl[ib] * kb      # half extents along u
    lo = np.maximum(-ea, tb - eb)
    hi = np.minimum(ea, tb + eb)
    length = hi - lo
    tm = 0.5 * (lo + hi)
    sa = tm / ka                                 # step along a from its centre
    sb = (tm - tb) / kb                          # step along b (aligned) from its centre
    pax, pay = la.cx[ia] + sa * uxa, la.cy[ia] + sa * uya
    pbx, pby = lb.cx[ib] + sb * vxb, lb.cy[ib] + sb * vyb
    offset = np.abs((pbx - pax) * nx + (pby - pay) * ny)
    half_sum = la.hw[ia] + lb.hw[ib]
    gap = offset - half_sum
    wmin = 2 * np.minimum(la.hw[ia], lb.hw[ib])
    overlap = np.maximum(length, 0) * np.clip(half_sum - offset, 0, wmin)
    return length, offset, gap, overlap, 0.5 * (pax + pbx), 0.5 * (pay + pby)


def _sat_overlap(la: _Layer, lb: _Layer, ia, ib, uxa, uya, uxb, uyb, ad, ac, rx, ry):
    """Separating-axis test of the two rectangles on a's and b's axes
    (``ad = |ua.ub|``, ``ac = |ua x ub|``, ``r`` = b's centre - a's); True
    where no axis separates them (touching counts as overlapping here; the
    integrated area decides)."""
    hla, hwa, hlb, hwb = la.hl[ia], la.hw[ia], lb.hl[ib], lb.hw[ib]
    ok = np.abs(rx * uxa + ry * uya) <= hla + hlb * ad + hwb * ac
    ok &= np.abs(ry * uxa - rx * uya) <= hwa + hlb * ac + hwb * ad
    ok &= np.abs(rx * uxb + ry * uyb) <= hlb + hla * ad + hwa * ac
    ok &= np.abs(ry * uxb - rx * uyb) <= hwb + hla * ac + hwa * ad
    return ok


def _crossing(la: _Layer, lb: _Layer, ia, ib, angle, uxa, uya, uxb, uyb, dot, cross):
    """Crossing pairs whose rectangles overlap in plan.

    The common case is solved in closed form: the two bands (infinite strips
    of widths wa, wb) meet in a parallelogram centred on the crossing point X
    of the centrelines, with corners ``X +- (hwb/s) ua +- (hwa/s) ub``
    (``s = |ua x ub|``). When all four corners lie within both pieces'
    lengths the crossing is interior: area ``wa wb / s``, centroid X, run
    length ``max(wa, wb) / s``. The other pairs go through a separating-axis
    test and, if not separated, exact integration (``_clip_area``) and
    centreline clipping (``_inside_length``).
    """
    hwa, hwb = la.hw[ia], lb.hw[ib]
    rx, ry = lb.cx[ib] - la.cx[ia], lb.cy[ib] - la.cy[ia]
    inv = 1.0 / np.abs(cross)                    # angle > parallel limit, so cross != 0
    alpha = (rx * uyb - ry * uxb) / cross        # X = ca + alpha ua = cb + beta ub
    beta = (rx * uya - ry * uxa) / cross
    ad = np.abs(dot)
    inner = ((np.abs(alpha) + (hwb + hwa * ad) * inv <= la.hl[ia])
             & (np.abs(beta) + (hwa + hwb * ad) * inv <= lb.hl[ib]))
    rest = np.flatnonzero(~inner)
    hit = _sat_overlap(la, lb, ia[rest], ib[rest], uxa[rest], uya[rest], uxb[rest], uyb[rest],
                       ad[rest], np.abs(cross[rest]), rx[rest], ry[rest])
    rest = rest[hit]
    keep = inner.copy()
    keep[rest] = True
    sel = np.flatnonzero(keep)
    ia, ib, angle, hwa, hwb, inv, alpha, uxa, uya = (
        v[sel] for v in (ia, ib, angle, hwa, hwb, inv, alpha, uxa, uya))
    area = 4 * hwa * hwb * inv
    length = 2 * np.maximum(hwa, hwb) * inv
    gx = la.cx[ia] + alpha * uxa
    gy = la.cy[ia] + alpha * uya
    edge = np.flatnonzero(~inner[sel])
    if edge.size:
        ea, eb = ia[edge], ib[edge]
        area[edge], gx[edge], gy[edge] = _clip_area(la, lb, ea, eb)
        length[edge] = np.maximum(_inside_length(la, lb, ea, eb), _inside_length(lb, la, eb, ea))
    ok = area > AREA_EPS_MM2
    n = int(ok.sum())
    return (ia[ok], ib[ok], angle[ok], np.zeros(n, bool), length[ok], np.zeros(n),
            -2 * np.minimum(hwa, hwb)[ok], area[ok], gx[ok], gy[ok])


def _to_frame(src: _Layer, dst: _Layer, i, j):
    """Centre and direction of piece ``src[i]`` in the frame of ``dst[j]``
    (origin at its centre, x along it, y along its left normal)."""
    ux, uy = dst.ux[j], dst.uy[j]
    rx, ry = src.cx[i] - dst.cx[j], src.cy[i] - dst.cy[j]
    sx, sy = src.ux[i], src.uy[i]
    return (rx * ux + ry * uy, ry * ux - rx * uy, sx * ux + sy * uy, sy * ux - sx * uy)


def _clip_area(la: _Layer, lb: _Layer, ia, ib):
    """Area and centroid of rectangle a intersected with rectangle b.

    Worked in b's frame, where b is the box ``|x| <= X, |y| <= Y``. For a
    convex region P, the part inside the box has, at abscissa x, the slice
    ``[clamp(ylow(x)), clamp(yhigh(x))]`` with ``clamp`` to [-Y, Y]; so by
    Green's theorem, going once around P counter-clockwise,

        area = -loop integral of clamp(y) dx          over |x| <= X
        Mx   = -loop integral of x clamp(y) dx        (first moment in x)
        My   = -loop integral of clamp(y)**2 / 2 dx   (first moment in y)

    On each edge of rectangle a, the part with |x| <= X is split where y
    crosses -Y and +Y; on each of the three pieces clamp(y) is linear in the
    edge parameter, so the trapezoid rule (area) and Simpson's rule (moments)
    are exact. No vertex lists, no branches: every pair costs the same. The
    centroid ``(Mx, My) / area`` is mapped back to board coordinates.
    """
    cx, cy, dx, dy = _to_frame(la, lb, ia, ib)
    hla, hwa = la.hl[ia], la.hw[ia]
    # corners of a, counter-clockwise, first repeated: shape (5, n) so that
    # every array operation below runs along the long pair axis
    sl = np.array([1.0, -1.0, -1.0, 1.0, 1.0])[:, None]      # corner signs along a
    sw = np.array([1.0, 1.0, -1.0, -1.0, 1.0])[:, None]      # corner signs across a
    PX = cx + sl * (hla * dx) - sw * (hwa * dy)               # a's normal is (-dy, dx)
    PY = cy + sl * (hla * dy) + sw * (hwa * dx)
    bx, by = lb.hl[ib], lb.hw[ib]
    x0, y0 = PX[:-1], PY[:-1]                                 # (4 edges, n)
    ddx, ddy = PX[1:] - x0, PY[1:] - y0
    # Edges with ddx == 0 add nothing (their integrals are multiplied by ddx);
    # on edges with ddy == 0 clamp(y) is constant, so any split is exact.
    # A unit denominator keeps both cases finite.
    rdx = 1.0 / np.where(ddx == 0, 1.0, ddx)
    rdy = 1.0 / np.where(ddy == 0, 1.0, ddy)
    q1, q2 = (-bx - x0) * rdx, (bx - x0) * rdx
    r1, r2 = (-by - y0) * rdy, (by - y0) * rdy
    ta = np.minimum(np.maximum(np.minimum(q1, q2), 0.0), 1.0)
    tb = np.minimum(np.maximum(np.maximum(q1, q2), ta), 1.0)
    s1 = np.minimum(np.maximum(np.minimum(r1, r2), ta), tb)
    s2 = np.minimum(np.maximum(np.maximum(r1, r2), s1), tb)
    T = np.stack([ta, s1, s2, tb])                            # (4 breakpoints, 4 edges, n)
    xs = x0 + T * ddx
    cs = np.minimum(np.maximum(y0 + T * ddy, -by), by)
    d = T[1:] - T[:-1]
    xa, xb, ca, cb = xs[:-1], xs[1:], cs[:-1], cs[1:]
    area_e = (d * (ca + cb)).sum(axis=0) * 0.5
    mx_e = (d * (2 * xa * ca + 2 * xb * cb + xa * cb + xb * ca)).sum(axis=0) / 6
    my_e = (d * (ca * ca + ca * cb + cb * cb)).sum(axis=0) / 6
    a2 = -(ddx * area_e).sum(axis=0)
    mx = -(ddx * mx_e).sum(axis=0)
    my = -(ddx * my_e).sum(axis=0)
    area = np.abs(a2)
    safe = np.where(a2 != 0, a2, 1.0)
    gx = np.where(a2 != 0, mx / safe, 0.0)
    gy = np.where(a2 != 0, my / safe, 0.0)
    ux, uy = lb.ux[ib], lb.uy[ib]
    return area, lb.cx[ib] + gx * ux - gy * uy, lb.cy[ib] + gx * uy + gy * ux


def _inside_length(la: _Layer, lb: _Layer, ia, ib) -> np.ndarray:
    """Length of a's centreline inside rectangle b (Liang-Barsky clip of the
    segment against ``|x| <= hlb, |y| <= hwb`` in b's frame)."""
    cx, cy, dx, dy = _to_frame(la, lb, ia, ib)
    hla = la.hl[ia]
    px, py = cx - hla * dx, cy - hla * dy      # start; segment = p + t (2 hla d), 0 <= t <= 1
    t0 = np.zeros_like(cx)
    t1 = np.ones_like(cx)
    for p, d, h in ((px, 2 * hla * dx, lb.hl[ib]), (py, 2 * hla * dy, lb.hw[ib])):
        with np.errstate(divide="ignore", invalid="ignore"):
            ta = (-h - p) / d
            tb = (h - p) / d
        flat = d == 0
        lo = np.where(flat, np.where(np.abs(p) <= h, -np.inf, np.inf), np.minimum(ta, tb))
        hi = np.where(flat, np.where(np.abs(p) <= h, np.inf, -np.inf), np.maximum(ta, tb))
        t0 = np.maximum(t0, lo)
        t1 = np.minimum(t1, hi)
    return np.maximum(t1 - t0, 0.0) * (2 * hla)
