"""Where a trace's return current finds no reference copper beside it.

At the frequencies that make crosstalk, a signal's return current flows in
the reference copper nearest the trace, concentrated right under (or over)
it, because that path has the least inductance. Where that copper has a
void or a split, the return current detours around the gap: the loop grows,
its inductance and the coupling to everything near the detour grow with it
(textbook signal-integrity reasoning; e.g. H. W. Ott, *Electromagnetic
Compatibility Engineering*, Wiley, 2009, ch. 16 and 17, cited from memory). Not
routing fast signals across plane gaps is common practice.

This module measures the geometry once, in the analysis step; the
``reference-gap`` rule kind (``checker.checks.reference_gap``) reads it.

Reference layer of a trace layer
--------------------------------
For copper layer ``L``: the nearest copper layer above ``L`` whose
reference copper covers at least :data:`REFERENCE_LAYER_SHARE` of the board
(``ReferenceCopper.fraction``) and the nearest such layer below, by vertical distance
(:func:`checker.stackup.separation_mm`). The nearer of the two is the
reference layer; when both lie at the same distance (within
:data:`TIE_MM`), both are, and each is checked on its own. Reference copper
on ``L`` itself (a coplanar pour) does not count. A layer with no reference
copper on any other layer has no reference layer and is not checked.

A layer with a few ground traces (a guard, a ground return) and nothing
else is not a reference layer: below that share it is routing, and every
trace beside it would otherwise "cross a gap" away from those traces.

Gap stretches
-------------
For each piece of a net that is not a reference net, on a layer with a
reference layer ``k``: its centreline (the segment between its end points;
the copper rectangle's flat ends do not count) minus ``cover[k]``. What is
left is over no reference copper. Leftover parts of one net that meet end
to end (consecutive pieces of a polyline bending inside the gap) join into
one *stretch*; parts that meet elsewhere (a branch ending on another
piece's middle) stay apart. Stretches shorter than :data:`GAP_FLOOR_MM` are
rounding noise and are dropped.

Per stretch: its length (the sum of its parts), its bbox (the parts' bbox
grown by half the widest trace width, so it covers the copper), its spot
(the middle of its longest part), and the reference net it crosses: the
reference net of layer ``k`` whose copper there lies nearest the stretch;
where the copper of two reference nets touches the stretch (within
:data:`TOUCH_MM`), as at a split between two plane shapes, the second one
too.

All of it runs on arrays per (trace layer, reference layer): shapely's
vectorised ``covers`` (on the prepared cover) keeps only the pieces that
leave it; they are subtracted from the cover cut into small tiles
(:func:`cover_tiles`, found through an ``STRtree``) with vectorised
``difference``, then ``get_parts`` and ``length``; connected components
(``scipy.sparse.csgraph``) over the parts' end points join them.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import shapely
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import connected_components

from .cores import ordered_map
from .model import NO_NET, Board, Stackup
from .progress import Counter
from .shielding import TILE_VERTICES, ReferenceCopper, cover_tiles, piece_polygons
from .stackup import separation_mm

#: Two reference layers this close (mm) in vertical distance tie.
TIE_MM = 1e-6

#: Gap stretches shorter than this (mm) are rounding noise (project choice:
#: 1 um, far below any drawn void, far above float round-off).
GAP_FLOOR_MM = 1e-3

#: Part end points on this grid (mm) are the same point when joining parts.
JOIN_GRID_MM = 1e-6

#: Reference copper this close (mm) to a stretch touches it (project choice).
TOUCH_MM = 1e-3

@dataclass
class ReturnGaps:
    """Every gap stretch of a board, one row per stretch, as parallel
    arrays (module docstring).

    ``net``: the trace's net; ``layer``: its copper layer; ``ref_layer``:
    the reference layer the stretch is measured against; ``ref_net``: the
    reference net whose copper has the gap; ``other_ref_net``: a second
    reference net whose copper touches the stretch (a split between two
    shapes), else ``NO_NET``; ``length_mm``: the stretch's length along
    the centreline; ``x``, ``y``: its spot; ``xmin`` .. ``ymax``: its bbox;
    ``parts``: how many pieces' leftovers make it.

    ``reference_layers[L]``: the reference layer(s) of copper layer L
    (only layers that carry pieces of nets other than reference nets).
    """

    net: np.ndarray
    layer: np.ndarray
    ref_layer: np.ndarray
    ref_net: np.ndarray
    other_ref_net: np.ndarray
    length_mm: np.ndarray
    x: np.ndarray
    y: np.ndarray
    xmin: np.ndarray
    ymin: np.ndarray
    xmax: np.ndarray
    ymax: np.ndarray
    parts: np.ndarray
    reference_layers: dict[int, tuple[int, ...]] = field(default_factory=dict)

    def __len__(self) -> int:
        return int(self.net.shape[0])

    @classmethod
    def empty(cls, reference_layers: dict[int, tuple[int, ...]] | None = None) -> "ReturnGaps":
        i, f = np.zeros(0, np.int64), np.zeros(0)
        return cls(i, i.copy(), i.copy(), i.copy(), i.copy(), f, f.copy(), f.copy(), f.copy(), f.copy(),
                   f.copy(), f.copy(), i.copy(), dict(reference_layers or {}))


#: Share of the board a layer's reference copper must cover to serve as the
#: return-path reference of its neighbours (project choice: a quarter keeps
#: partial pours of two-layer boards, and leaves out guard traces and
#: scattered ground routing).
REFERENCE_LAYER_SHARE = 0.25


def reference_layers_of(stackup: Stackup, has_reference: np.ndarray, layer: int) -> tuple[int, ...]:
    """The reference layer(s) of copper layer ``layer``: the nearest layer
    above and below with reference copper (``has_reference[k]``), the
    nearer of the two, both on a tie (module docstring)."""
    above = next((k for k in range(layer - 1, -1, -1) if has_reference[k]), None)
    below = next((k for k in range(layer + 1, len(has_reference)) if has_reference[k]), None)
    if above is None or below is None:
        return tuple(k for k in (above, below) if k is not None)
    da, db = separation_mm(stackup, above, layer), separation_mm(stackup, layer, below)
    if abs(da - db) <= TIE_MM:
        return (above, below)
    return (above,) if da < db else (below,)


def return_gaps(board: Board, ref: ReferenceCopper) -> ReturnGaps:
    """Every gap stretch of ``board``'s non-reference traces over the
    reference copper ``ref`` (module docstring)."""
    p = board.pieces
    has_ref = np.array([not shapely.is_empty(c) for c in ref.cover], dtype=bool) \
        & (np.asarray(ref.fraction) >= REFERENCE_LAYER_SHARE)
    net = p.net.astype(np.int64)
    live = net != NO_NET
    live[live] = ~ref.is_reference[net[live]]
    live &= p.length > 0
    layers = np.unique(p.layer[live]).tolist() if len(p) else []
    by_layer = {int(k): reference_layers_of(board.stackup, has_ref, int(k)) for k in layers}
    jobs = [(layer, k) for layer, targets in by_layer.items() for k in targets]

    counted = Counter("traces over their reference copper: layer pairs", len(jobs))

    def over(k: int) -> dict[tuple[int, int], dict | None]:
        # one reference layer's work in one thread: its prepared copper and tree are not shared
        cut = cover_tiles(ref.cover[k], TILE_VERTICES)
        tree = shapely.STRtree(cut)
        out = {}
        for layer, kk in jobs:
            if kk == k:
                out[(layer, k)] = _stretches(board, ref, np.flatnonzero(live & (p.layer == layer)), layer, k, cut,
                                             tree)
                counted.add()
        return out

    done: dict[tuple[int, int], dict | None] = {}
    for part in ordered_map(over, sorted({k for _, k in jobs})):
        done.update(part)
    chunks: list[dict] = [c for c in (done[job] for job in jobs) if c is not None]
    if not chunks:
        return ReturnGaps.empty(by_layer)
    cols = {name: np.concatenate([c[name] for c in chunks]) for name in chunks[0]}
    order = np.lexsort((cols["ymin"], cols["xmin"], cols["net"], cols["ref_layer"], cols["layer"]))
    return ReturnGaps(**{name: v[order] for name, v in cols.items()}, reference_layers=by_layer)


def _stretches(board: Board, ref: ReferenceCopper, idx: np.ndarray, layer: int, k: int,
               tiles: np.ndarray, tree) -> dict | None:
    """The gap stretches of the pieces ``idx`` (on ``layer``) over the
    reference copper of layer ``k`` (cut into ``tiles``, indexed by
    ``tree``), as columns; None when there are none."""
    p = board.pieces
    cover = ref.cover[k]
    shapely.prepare(cover)
    coords = np.stack([np.stack([p.x1[idx], p.y1[idx]], axis=1), np.stack([p.x2[idx], p.y2[idx]], axis=1)], axis=1)
    lines = shapely.linestrings(coords)
    open_ = ~shapely.covers(cover, lines)
    if not open_.any():
        return None
    left = _subtract_tiles(lines[open_], tiles, tree)
    parts, owner = shapely.get_parts(left, return_index=True)
    length = shapely.length(parts)
    keep = length > 0
    if not keep.any():
        return None
    parts, length = parts[keep], length[keep]
    piece = idx[open_][owner[keep]]
    part_net = p.net[piece].astype(np.int64)
    label = _join(parts, part_net)
    n = int(label.max()) + 1
    total = np.bincount(label, weights=length, minlength=n)
    big = total >= GAP_FLOOR_MM
    if not big.any():
        return None
    bounds = shapely.bounds(parts)
    half = p.width[piece] / 2
    xmin, ymin = np.full(n, np.inf), np.full(n, np.inf)
    xmax, ymax = np.full(n, -np.inf), np.full(n, -np.inf)
    np.minimum.at(xmin, label, bounds[:, 0] - half)
    np.minimum.at(ymin, label, bounds[:, 1] - half)
    np.maximum.at(xmax, label, bounds[:, 2] + half)
    np.maximum.at(ymax, label, bounds[:, 3] + half)
    # the spot: the middle of each stretch's longest part (first one on a tie)
    order = np.lexsort((-length, label))
    first = order[np.r_[0, np.flatnonzero(np.diff(label[order])) + 1]]
    spot = shapely.get_coordinates(shapely.line_interpolate_point(parts[first], 0.5, normalized=True))
    stretch_net = np.zeros(n, np.int64)
    stretch_net[label] = part_net
    by_label = np.argsort(label, kind="stable")
    geoms = shapely.multilinestrings(parts[by_label], indices=label[by_label])
    ref_net, other = _crossed_nets(board, ref, k, geoms)
    cols = dict(net=stretch_net, layer=np.full(n, layer, np.int64), ref_layer=np.full(n, k, np.int64),
                ref_net=ref_net, other_ref_net=other, length_mm=total, x=spot[:, 0], y=spot[:, 1],
                xmin=xmin, ymin=ymin, xmax=xmax, ymax=ymax, parts=np.bincount(label, minlength=n))
    return {name: v[big] for name, v in cols.items()}


def _subtract_tiles(lines: np.ndarray, tiles: np.ndarray, tree) -> np.ndarray:
    """Each line minus every tile it meets: one vectorised difference per
    round, round r taking each line's r-th tile (a short line meets one to
    a few)."""
    li, ti = tree.query(lines, predicate="intersects")
    left = lines.copy()
    if li.size == 0:
        return left
    order = np.lexsort((ti, li))
    li, ti = li[order], ti[order]
    start = np.r_[0, np.flatnonzero(np.diff(li)) + 1]
    rank = np.arange(li.size) - np.repeat(start, np.diff(np.r_[start, li.size]))
    for r in range(int(rank.max()) + 1):
        on = rank == r
        left[li[on]] = shapely.difference(left[li[on]], tiles[ti[on]])
    return left


def _join(parts: np.ndarray, net: np.ndarray) -> np.ndarray:
    """Stretch label (0..S-1) per part: parts of one net whose end points
    coincide (on :data:`JOIN_GRID_MM`) are in one stretch."""
    m = parts.size
    ends = np.concatenate([shapely.get_coordinates(shapely.get_point(parts, 0)),
                           shapely.get_coordinates(shapely.get_point(parts, -1))])
    key = np.column_stack([np.concatenate([net, net]), np.round(ends / JOIN_GRID_MM).astype(np.int64)])
    _, node = np.unique(key, axis=0, return_inverse=True)
    node = node.ravel()
    n_nodes = int(node.max()) + 1
    part = np.concatenate([np.arange(m), np.arange(m)])
    graph = csr_matrix((np.ones(2 * m, np.int8), (part, m + node)), shape=(m + n_nodes, m + n_nodes))
    _, comp = connected_components(graph, directed=False)
    _, label = np.unique(comp[:m], return_inverse=True)
    return label.ravel().astype(np.int64)


def _crossed_nets(board: Board, ref: ReferenceCopper, k: int, geoms: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per stretch: the reference net of layer ``k`` whose copper lies
    nearest it, and a second one touching it (else ``NO_NET``)."""
    names = ref.nets[k]
    index = board.net_index()
    nets = [index[name] for name in names]
    n = geoms.size
    if len(nets) == 1:
        return np.full(n, nets[0], np.int64), np.full(n, NO_NET, np.int64)
    p = board.pieces
    dist = np.full((len(nets), n), np.inf)
    for row, net in enumerate(nets):  # a loop over the layer's reference nets (a few), not over pieces
        shapes = [r.polygon for r in board.regions if r.layer == k and r.net == net]
        on = np.flatnonzero((p.layer == k) & (p.net == net))
        if on.size:
            shapes.extend(piece_polygons(p, on).tolist())
        if shapes:
            (which, _), d = shapely.STRtree(shapes).query_nearest(geoms, return_distance=True, all_matches=False)
            dist[row, which] = d
    order = np.argsort(dist, axis=0, kind="stable")
    first = np.asarray(nets, np.int64)[order[0]]
    second_d = np.take_along_axis(dist, order[1:2], axis=0)[0]
    second = np.where(second_d <= TOUCH_MM, np.asarray(nets, np.int64)[order[1]], NO_NET)
    return first, second.astype(np.int64)
