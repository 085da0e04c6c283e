"""Guard traces: reference-net copper running between two traces on one
layer, whether it is really grounded, and how much edge coupling it takes.

A grounded conductor between two traces takes part of the coupling to
ground (Ott, *Electromagnetic Compatibility Engineering*, 2009, ch. 6, cited
from memory); one that is not grounded along its length passes it on. So a
guard earns its reduction only when it is grounded.

Finding guards
--------------
For every same-layer coupled pair (a, b) of the edge finder, the *gap
strip* is the band between the two traces over the coupled length. A
reference-net piece on the same layer whose centreline runs inside that
strip is a guard candidate; the one covering most of the coupled length
is the pair's guard, and ``covered`` (0..1) is the share of the coupled
length along which it runs.

Grounded or not
---------------
A guard is one chain of reference pieces on the layer that touch one
another (a guard drawn as several strokes is one guard). Its *grounding
points* are the places along it where a plated hole of a reference net
whose span includes the layer touches it (hole pad within w/2 + pad/2 of
the centreline), and each end that lies on a reference pour or plane shape
(a region) of the layer; other reference traces it touches do not count
(they may float themselves). It is:

* ``floating``: no grounding point;
* ``one end``: grounded only near one end (every grounding point within
  1 mm of one end) -- along its length it rises and falls with the
  aggressor like an antenna grounded at one end;
* ``stitched``: grounded at both ends and between, with the largest
  distance between neighbouring grounding points (its ends count when they
  are grounded) no longer than ``stitch_fraction`` x the wavelength in the
  dielectric at the faster of the two nets' frequencies
  (lambda = c0 / (f sqrt(er)), er the larger of the dielectrics touching
  the layer). lambda/20 is common practice for stitching (lambda/10 to
  lambda/20 are both quoted), not a derived limit.
* ``sparse``: grounded at both ends, but stitched farther apart than that.

Only a ``stitched`` guard is credited in the physics.

A trace of a third signal net in the gap (found the same way) is a
conductor held by its driver: where its net class marks it as driven (an
aggressor frequency, no ``resistance``) and no credited guard is there, it
is credited the same way, as a conductor at AC ground, on the rows that
feed a noise estimate (one net with an aggressor frequency, the other a
victim node with a resistance), at most :data:`MAX_THIRD_NET_SOLVES`
distinct cross-sections per board (a layer that would take more than
what is left is not credited). A third net with a ``resistance`` is not
credited (it may float and relay); elsewhere third nets are left out. Both
err toward more coupling.

The reduction
-------------
For a credited guard the edge cross-section of the pair (``edge_section``)
gets a third, grounded conductor of the guard's width at its place in the
gap, and C12' is solved with and without it (``GUARD_RESOLUTION`` with
Richardson extrapolation); their ratio, raised by ``RATIO_MARGIN`` so it
errs toward more coupling, scales the row:
C12 of the row = C12 x (1 - covered + covered x ratio). Solves are shared
by cross-sections equal to 5 um; beyond :data:`MAX_GUARD_SOLVES` distinct
ones a guard is not credited (the value then errs toward more coupling) and
a note says so.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import shapely
from scipy.constants import c as C0

from .model import NO_NET, Board, Pieces
from .physics.fieldsolve import GROUND, Conductor, CrossSection
from .physics.sections import edge_section, mask_blocks, solve_shared
from .shielding import cover_tiles, piece_polygons, valid

#: Default fraction of a wavelength between stitching vias (common practice).
STITCH_FRACTION = 0.05

#: Grounding points within this distance (mm) of one end count as that end.
END_ZONE_MM = 1.0

#: Most distinct guard cross-sections solved per board.
MAX_GUARD_SOLVES = 100

#: Resolution of the guard solves (with Richardson extrapolation from r and
#: 2r): the ratio came out 0.6 % below the converged value on a 0.2 mm guard
#: in a 0.65 mm gap (measured against resolution 3 extrapolated).
GUARD_RESOLUTION = 1.0

#: The solved ratio is raised by this factor so that the reduction errs
#: toward more coupling, never less (covers the 0.6 % above).
RATIO_MARGIN = 1.01

#: Most distinct cross-sections solved per board for third nets in gaps
#: (beyond it they are not credited: C12 errs high). Each costs two
#: extrapolated solves, about 0.25 s on an inner layer of the six-layer
#: bench: this bounds the refinement to about 2 s.
MAX_THIRD_NET_SOLVES = 8


@dataclass
class SolveBudget:
    """Distinct cross-sections still allowed (``guard_factors``)."""

    left: int

#: Cross-sections are rounded to this grid (mm) to share solves.
GRID_MM = 0.005

STATES = ("floating", "one end", "sparse", "stitched")


@dataclass
class Guards:
    """One row per guard track: its board ``source``, ``layer``, ``net``,
    ``length_mm``, ``state`` (one of :data:`STATES`), ``max_gap_mm`` the
    longest stretch of it not tied down at both ends (between neighbouring
    grounding points; from the last one to a free end; the whole guard when
    it floats), the
    allowed ``limit_mm`` (inf when neither net near it has a frequency),
    the middle of that largest gap (``x``, ``y``), and how many grounding
    points it has."""

    source: np.ndarray
    layer: np.ndarray
    net: np.ndarray
    length_mm: np.ndarray
    state: list
    max_gap_mm: np.ndarray
    limit_mm: np.ndarray
    x: np.ndarray
    y: np.ndarray
    points: np.ndarray

    def __len__(self) -> int:
        return int(self.source.shape[0])

    @classmethod
    def empty(cls) -> "Guards":
        z = np.zeros(0)
        i = np.zeros(0, np.int64)
        return cls(i, i.copy(), i.copy(), z, [], z.copy(), z.copy(), z.copy(), z.copy(), i.copy())


@dataclass
class GuardedRows:
    """Per edge row: the guard (index into ``Guards``, -1 none), the share
    of the coupled length it covers, and the factor applied to C12."""

    guard: np.ndarray
    covered: np.ndarray
    factor: np.ndarray
    #: the net of the credited conductor in the gap (NO_NET: none)
    gap_net: np.ndarray


def _gap_strips(p: Pieces, t) -> np.ndarray:
    """The band between the two traces of each edge row, over its coupled length."""
    a = t.a.astype(np.int64)
    dx, dy = p.x2[a] - p.x1[a], p.y2[a] - p.y1[a]
    n = np.hypot(dx, dy)
    n = np.where(n > 0, n, 1.0)
    ux, uy = dx / n, dy / n
    hl = t.length_mm / 2
    hw = np.maximum(t.gap_mm, 0.0) / 2
    cx, cy = t.x, t.y
    xs = np.stack([cx - ux * hl - uy * hw, cx + ux * hl - uy * hw, cx + ux * hl + uy * hw,
                   cx - ux * hl + uy * hw, cx - ux * hl - uy * hw], axis=1)
    ys = np.stack([cy - uy * hl + ux * hw, cy + uy * hl + ux * hw, cy + uy * hl - ux * hw,
                   cy - uy * hl - ux * hw, cy - uy * hl + ux * hw], axis=1)
    return shapely.polygons(np.stack([xs, ys], axis=2))


def find_guard_pieces(board: Board, is_ref_piece: np.ndarray, t, layer: int,
                      exclude_own: bool = False) -> tuple[np.ndarray, np.ndarray]:
    """Per row of the edge table ``t``: the piece (among those where
    ``is_ref_piece`` holds) running in its gap strip over the longest
    stretch (-1: none) and the share of the coupled length it covers.
    ``exclude_own``: leave out pieces of the row's own two nets."""
    p = board.pieces
    n = len(t)
    best = np.full(n, -1, np.int64)
    share = np.zeros(n)
    refs = np.flatnonzero(is_ref_piece & (p.layer == layer) & (p.length > 0))
    if n == 0 or refs.size == 0:
        return best, share
    strips = _gap_strips(p, t)
    lines = shapely.linestrings(np.stack([np.stack([p.x1[refs], p.x2[refs]], 1),
                                          np.stack([p.y1[refs], p.y2[refs]], 1)], 2))
    tree = shapely.STRtree(lines)
    row, k = tree.query(strips, predicate="intersects")
    if exclude_own and row.size:
        net = p.net[refs[k]]
        other = (net != p.net[t.a[row]]) & (net != p.net[t.b[row]])
        row, k = row[other], k[other]
    if row.size == 0:
        return best, share
    inside = shapely.length(shapely.intersection(lines[k], strips[row]))
    frac = inside / np.maximum(t.length_mm[row], 1e-12)
    order = np.lexsort((-frac, row))
    first = order[np.r_[True, row[order][1:] != row[order][:-1]]]
    best[row[first]] = refs[k[first]]
    share[row[first]] = np.clip(frac[first], 0.0, 1.0)
    return best, share


def guard_chains(board: Board, is_ref_piece: np.ndarray, pieces: np.ndarray) -> np.ndarray:
    """For each reference piece in ``pieces``: the label (its lowest piece
    index) of the chain it belongs to, the reference pieces of its layer
    that touch one another end to end or side by side (a guard drawn as
    several strokes is one guard)."""
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    p = board.pieces
    out = np.empty(pieces.size, np.int64)
    for k in np.unique(p.layer[pieces]).tolist():
        refs = np.flatnonzero(is_ref_piece & (p.layer == k) & (p.length > 0))
        polys = piece_polygons(p, refs, 1e-3)
        i, j = shapely.STRtree(polys).query(polys, predicate="intersects")
        graph = coo_matrix((np.ones(i.size), (i, j)), shape=(refs.size, refs.size))
        _, comp = connected_components(graph, directed=False)
        first = np.full(comp.max() + 1, np.iinfo(np.int64).max)
        np.minimum.at(first, comp, refs)
        label = dict(zip(refs.tolist(), first[comp].tolist()))
        on = np.flatnonzero(p.layer[pieces] == k)
        out[on] = [label[int(q)] for q in pieces[on]]
    return out


_WORSE = {"stitched": 0, "sparse": 1, "one end": 2, "floating": 3}


def _ground_points(line, k: int, w: float, vias, via_ref: np.ndarray, pours) -> list[float]:
    """Places (distance along ``line``) where a reference via of layer ``k``
    touches it, and each end that lies on a reference pour."""
    at: list[float] = []
    if len(vias):
        near = np.flatnonzero(via_ref & (vias.first_layer <= k) & (vias.last_layer >= k))
        if near.size:
            pts = shapely.points(vias.x[near], vias.y[near])
            on = shapely.distance(line, pts) <= w / 2 + vias.pad[near] / 2
            at.extend(shapely.line_locate_point(line, pts[on]).tolist())
    if pours is not None:
        tiles, tree = pours
        coords = np.asarray(line.coords)
        for end, s in ((coords[0], 0.0), (coords[-1], float(line.length))):
            disk = shapely.Point(end).buffer(w / 2 + 2e-3)
            hit = tree.query(disk)
            # the pours' share of the disk: the union of the tiles near it, clipped to it
            if hit.size and shapely.area(shapely.union_all(shapely.intersection(tiles[hit], disk))) > 1e-4:
                at.append(s)
    return sorted(set(round(a, 9) for a in at))


def grounding(board: Board, is_ref_net: np.ndarray, chains: list[np.ndarray], frequency_hz: np.ndarray,
              stitch_fraction: float) -> Guards:
    """Grounding state of each guard (module docstring): ``chains[g]`` the
    reference pieces of guard g (one chain, ``guard_chains``),
    ``frequency_hz[g]`` the faster neighbouring net's frequency (NaN:
    unknown). Only reference vias and reference pours (regions) ground a
    guard: other reference traces it touches do not (they may float
    themselves). A chain that branches is judged part by part, the worst
    part deciding."""
    p = board.pieces
    v = board.vias
    st = board.stackup
    out = Guards.empty()
    cols: dict[str, list] = {k: [] for k in ("source", "layer", "net", "length_mm", "state", "max_gap_mm",
                                             "limit_mm", "x", "y", "points")}
    via_ref = np.zeros(len(v), bool)
    if len(v):
        has = v.net != NO_NET
        via_ref[has] = is_ref_net[v.net[has].astype(np.int64)]
    pours: dict[int, object] = {}
    for mine, f in zip(chains, frequency_hz.tolist()):
        mine = mine[np.lexsort((p.ordinal[mine], p.source[mine]))]
        k = int(p.layer[mine[0]])
        if k not in pours:
            shapes = [valid(r.polygon) for r in board.regions
                      if r.layer == k and r.net != NO_NET and is_ref_net[r.net]]
            # small tiles of the pours (no union of a whole layer's pours): each end's test costs what
            # the few tiles near it cost
            tiles = cover_tiles(np.array(shapes, dtype=object)) if shapes else None
            pours[k] = (tiles, shapely.STRtree(tiles)) if tiles is not None and tiles.size else None
        lines = shapely.linestrings(np.stack([np.stack([p.x1[mine], p.x2[mine]], 1),
                                              np.stack([p.y1[mine], p.y2[mine]], 1)], 2))
        merged = shapely.line_merge(shapely.union_all(lines))
        parts = [g for g in shapely.get_parts(merged) if g.length > 0]
        w = float(p.width[mine].max())
        er = max((d.er for d in st.dielectrics[max(k - 1, 0):k + 1]), default=1.0)
        limit = stitch_fraction * C0 / (f * np.sqrt(er)) * 1e3 if np.isfinite(f) and f > 0 else np.inf
        worst, points, total = None, 0, 0.0
        for line in parts:
            length = float(line.length)
            total += length
            at = _ground_points(line, k, w, v, via_ref, pours[k])
            points += len(at)
            start = bool(at) and at[0] <= END_ZONE_MM
            end = bool(at) and at[-1] >= length - END_ZONE_MM
            if not at:
                state, gap, mid = "floating", length, length / 2
            elif not (start and end):
                # the stretch beyond the last grounding point, out to the free end
                gap, mid = (length - at[-1], (length + at[-1]) / 2) if start else (at[0], at[0] / 2)
                state = "one end"
            else:
                pts = np.array([0.0] + at + [length])
                gaps = np.diff(pts)
                j = int(np.argmax(gaps))
                gap, mid = float(gaps[j]), float(pts[j] + gaps[j] / 2)
                state = "sparse" if gap > limit else "stitched"
            key = (_WORSE[state], gap)
            if worst is None or key > worst[0]:
                worst = (key, state, gap, line.interpolate(mid))
        assert worst is not None  # a guard has at least one stretch
        _, state, gap, xy = worst
        for column, val in (("source", int(p.source[mine[0]])), ("layer", k), ("net", int(p.net[mine[0]])),
                            ("length_mm", total), ("state", state), ("max_gap_mm", gap), ("limit_mm", limit),
                            ("x", xy.x), ("y", xy.y), ("points", points)):
            cols[column].append(val)
    if not cols["source"]:
        return out
    return Guards(np.array(cols["source"], np.int64), np.array(cols["layer"], np.int64),
                  np.array(cols["net"], np.int64), np.array(cols["length_mm"]), cols["state"],
                  np.array(cols["max_gap_mm"]), np.array(cols["limit_mm"]), np.array(cols["x"]),
                  np.array(cols["y"]), np.array(cols["points"], np.int64))


def guard_section(stackup, layer: int, wa: float, wb: float, gap: float, wg: float, pos: float) -> CrossSection:
    """``edge_section`` of the pair with a grounded guard of width ``wg``
    whose centre lies ``pos`` mm from trace a's edge, clipped to the gap."""
    cs = edge_section(stackup, layer, wa, wb, gap)
    a = cs.conductors[0]
    assert isinstance(a, Conductor)  # edge sections are made of rectangles
    x0 = max(a.x1 + pos - wg / 2, a.x1 + 1e-4)
    x1 = min(a.x1 + pos + wg / 2, a.x1 + gap - 1e-4)
    guard = Conductor(x0, x1, a.y0, a.y1, GROUND)
    return CrossSection((*cs.conductors, guard), cs.slabs, cs.planes,
                        blocks=cs.blocks + mask_blocks(stackup, layer, layer, (guard,)))


def guard_factors(board: Board, t, layer: int, guard_piece: np.ndarray, covered: np.ndarray,
                  credited: np.ndarray, notes: list[str], budget: SolveBudget | None = None) -> np.ndarray:
    """Factor on C12 per row of the edge table ``t`` (module docstring, "The
    reduction"); 1 where the row has no credited guard. With ``budget``, at
    most ``budget.left`` distinct cross-sections are solved (else none) and
    what is solved is taken off it; without, :data:`MAX_GUARD_SOLVES`."""
    p = board.pieces
    factor = np.ones(len(t))
    rows = np.flatnonzero((guard_piece >= 0) & credited & (t.gap_mm > 0))
    if rows.size == 0:
        return factor
    a, b, g = t.a[rows].astype(np.int64), t.b[rows].astype(np.int64), guard_piece[rows]
    # where the guard's centreline crosses the normal through the pair's spot, from a's edge
    dx, dy = p.x2[a] - p.x1[a], p.y2[a] - p.y1[a]
    nrm = np.hypot(dx, dy)
    nx, ny = -dy / nrm, dx / nrm
    gx, gy = p.x1[g], p.y1[g]
    ax, ay = p.x1[a], p.y1[a]
    dist_g = np.abs((gx - ax) * nx + (gy - ay) * ny)  # guard centre from a's centreline
    pos = dist_g - p.width[a] / 2
    r = lambda v: np.round(np.asarray(v, float) / GRID_MM) * GRID_MM  # noqa: E731
    keys = np.stack([r(p.width[a]), r(p.width[b]), r(t.gap_mm[rows]), r(p.width[g]), r(pos)], axis=1)
    uniq, inv = np.unique(keys, axis=0, return_inverse=True)
    limit = MAX_GUARD_SOLVES if budget is None else budget.left
    if uniq.shape[0] > limit:
        notes.append(f"conductors in the gaps of edge-coupled pairs on {board.stackup.layers[layer].name}: "
                     f"{uniq.shape[0]} distinct cross-sections, more than the {max(limit, 0)} still allowed "
                     "per board: not credited there (C12 errs high)")
        return factor
    if budget is not None:
        budget.left -= uniq.shape[0]
    st = board.stackup
    with_g = [guard_section(st, layer, max(u[0], GRID_MM), max(u[1], GRID_MM), max(u[2], GRID_MM),
                            max(u[3], GRID_MM), max(u[4], 0.0)) for u in uniq]
    without = [edge_section(st, layer, max(u[0], GRID_MM), max(u[1], GRID_MM), max(u[2], GRID_MM)) for u in uniq]
    solved, _ = solve_shared(with_g + without, GUARD_RESOLUTION, richardson=True)
    def c12(r) -> float:
        return float(-r.extrapolated[0, 1]) if r.extrapolated is not None else r.c12

    ratio = np.array([min(1.0, RATIO_MARGIN * c12(s) / c12(o)) if c12(o) > 0 else 1.0
                      for s, o in zip(solved[:len(uniq)], solved[len(uniq):])])
    factor[rows] = 1.0 - covered[rows] + covered[rows] * ratio[inv.ravel()]
    return factor


def concat_guards(tables: list[Guards]) -> Guards:
    """One ``Guards`` table of several (rows in order)."""
    if not tables:
        return Guards.empty()
    columns: dict[str, Any] = {k: (np.concatenate([getattr(t, k) for t in tables]) if k != "state"
                                   else [s for t in tables for s in t.state]) for k in Guards.__dataclass_fields__}
    return Guards(**columns)
