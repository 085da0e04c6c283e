"""The accumulated objects of a Gerber file turned into the reader's
result: :class:`GerberTraces` from the round-aperture strokes and
:class:`GerberShape` records, with clear polarity applied.

Clear polarity (Gerber Layer Format Specification 2021.02, 2.7): a clear
object removes the copper of every object created before it, whatever its
net; objects created after it are untouched. Because every object is
cleared by exactly the clear objects that come after it, the result does not
depend on the order in which the clears are applied: an object ends as
itself minus the union of the later clear objects that touch it. Candidates
come from one shapely STRtree over the clear objects, queried (bounding
boxes only) with the shapes and the trace pieces created before the last
clear object; pairs in the wrong order are dropped before any geometry is
looked at, and only then is ``intersects`` evaluated, pair by pair, with
the geometry of more vertices prepared (:func:`_intersecting`). Work is
therefore proportional to the pairs that can matter, and a clear region of
thousands of vertices costs a logarithmic test per object near it, not a
scan of its outline per object in its bounding box.

* Shapes (pads, regions, non-round draws, dots): polygon difference with
  the union of their clear objects (:func:`_union`).
* Trace pieces: the centreline is clipped by the clear objects and the
  remaining sub-segments are kept, with the piece's full width
  (:func:`_clip_pieces`: all piece and clear-object pairs intersected in
  one vectorised call, the stretches inside merged along each piece; no
  union per piece). This is an approximation: a trace cut by a clear
  object ends square at the centreline's intersection with the clear
  outline (its round end cap and the part of its width that reaches into
  the clear object are not modelled), and a clear object that only grazes
  the trace's edge without reaching the centreline leaves the trace whole.

Strokes are then renumbered so that a stroke is again a run of pieces that
touch end to start: a stroke that lost a stretch in the middle becomes two.
"""

from __future__ import annotations

from collections import defaultdict

import numpy as np
import shapely

from .gerber_macros import polygonal_part
from .gerber_sink import ObjectSink, ShapeRecord, stroke_outline
from .layer import GerberShape, GerberTraces

#: Pieces shorter than this (mm) are dropped, as the JSON door does.
MIN_PIECE_LENGTH_MM = 1e-9
#: Geometries with at least this many vertices are prepared for the pairwise intersects test.
PREPARE_MIN_VERTICES = 64
#: A union of clear objects whose parts' bounding boxes meet more than this many others on average
#: (estimated from about DENSITY_SAMPLE of them) is one union_all, not a union per overlapping group.
DENSE_NEIGHBOURS = 9
DENSITY_SAMPLE = 64


def _placed_geometries(records: list[ShapeRecord]) -> np.ndarray:
    """Every record's geometry at its final place, in one vectorised call."""
    geoms = np.empty(len(records), dtype=object)
    geoms[:] = [r.geometry for r in records]
    if not len(records):
        return geoms
    offsets = np.array([(r.dx, r.dy) for r in records], dtype=np.float64)
    moving = np.flatnonzero(np.any(offsets != 0.0, axis=1))
    if len(moving):
        counts = shapely.get_num_coordinates(geoms[moving])
        shift = np.repeat(offsets[moving], counts, axis=0)
        geoms[moving] = shapely.transform(geoms[moving], lambda c: c + shift)
    return geoms


def _group(pairs_obj: np.ndarray, pairs_clear: np.ndarray) -> dict[int, list[int]]:
    groups: dict[int, list[int]] = defaultdict(list)
    for o, c in zip(pairs_obj.tolist(), pairs_clear.tolist()):
        groups[o].append(c)
    return groups


def _components(n: int, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Connected-component label of each of ``n`` nodes joined by edges
    (a[k], b[k]): union-find with path halving."""
    parent = list(range(n))

    def root(i: int) -> int:
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    for i, j in zip(a.tolist(), b.tolist()):
        ri, rj = root(i), root(j)
        if ri != rj:
            parent[ri] = rj
    roots = np.array([root(i) for i in range(n)])
    return np.unique(roots, return_inverse=True)[1]


def _intersecting(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """``intersects(a[k], b[k])`` for every pair ``k`` (two equal-length
    object arrays). In each pair the geometry with more vertices is the
    prepared one (GEOS prepared predicates index their geometry), so a test
    costs about the logarithm of the big outline instead of a scan of it."""
    if not len(a):
        return np.zeros(0, dtype=bool)
    na = shapely.get_num_coordinates(a)
    nb = shapely.get_num_coordinates(b)
    swap = nb > na
    first = np.where(swap, b, a)
    second = np.where(swap, a, b)
    big = first[np.maximum(na, nb) >= PREPARE_MIN_VERTICES]
    fresh = big[~shapely.is_prepared(big)] if len(big) else big
    shapely.prepare(fresh)
    try:
        return shapely.intersects(first, second)
    finally:
        shapely.destroy_prepared(fresh)


def _query_intersecting(tree: shapely.STRtree, geoms: np.ndarray, tree_geoms: np.ndarray,
                        keep=None) -> tuple[np.ndarray, np.ndarray]:
    """(input index, tree index) pairs whose geometries intersect, in the
    order ``tree.query(geoms, predicate="intersects")`` gives them; ``keep``
    (optional) takes the bounding-box pairs and says which to test at all."""
    obj, clr = tree.query(geoms)
    if keep is not None:
        mask = keep(obj, clr)
        obj, clr = obj[mask], clr[mask]
    hit = _intersecting(geoms[obj], tree_geoms[clr])
    return obj[hit], clr[hit]


def _union(clear_geoms: np.ndarray, idx: list[int]) -> shapely.Geometry:
    """Union of some clear objects. Many anti-pads seldom overlap: only the
    groups of polygons that touch or overlap are merged (connected
    components of an STRtree self-query); the rest, disjoint, form a valid
    multipolygon as they are, which is much faster than one big union. When
    most of them overlap many others (big clearance strokes across a
    board), the self-query would be quadratic and one union_all is used."""
    if len(idx) == 1:
        return clear_geoms[idx[0]]
    if len(idx) <= 16:
        return shapely.union_all(clear_geoms[idx])
    parts = shapely.get_parts(clear_geoms[idx])
    parts = parts[~shapely.is_empty(parts)]
    tree = shapely.STRtree(parts)
    sample = parts[::max(1, len(parts) // DENSITY_SAMPLE)]
    if len(tree.query(sample)[0]) > DENSE_NEIGHBOURS * len(sample):
        # most parts overlap many others: the components would cost a test per pair, the union does not
        return shapely.union_all(parts)
    a, b = _query_intersecting(tree, parts, parts, keep=lambda a, b: a != b)
    if len(a):
        label = _components(len(parts), a, b)
        size = np.bincount(label)
        groups = np.flatnonzero(size > 1)
        members = np.argsort(label, kind="stable")  # each component's parts, in order
        ends = np.cumsum(size)
        merged = [shapely.union_all(parts[members[ends[k] - size[k]:ends[k]]]) for k in groups.tolist()]
        parts = np.concatenate((parts[size[label] == 1], shapely.get_parts(np.array(merged, dtype=object))))
    return shapely.multipolygons(parts)


class _Clears:
    """The clear objects of the image with their STRtree."""

    def __init__(self, clears: list[ShapeRecord]) -> None:
        self.geoms = _placed_geometries(clears)
        self.strokes_before = np.array([c.strokes_before for c in clears], dtype=np.int64)
        self.shapes_before = np.array([c.shapes_before for c in clears], dtype=np.int64)
        self.tree = shapely.STRtree(self.geoms)

    def cut_shapes(self, geoms: np.ndarray, order: np.ndarray, before: np.ndarray) -> np.ndarray:
        """``geoms`` minus the clear objects created after them: object ``k``
        is cleared by clear ``c`` if ``order[k] < before[c]``."""
        if not len(geoms) or not len(before):
            return geoms
        cand = np.flatnonzero(order < before.max())  # objects that some clear object comes after
        obj, clr = _query_intersecting(self.tree, geoms[cand], self.geoms,
                                       keep=lambda o, c: order[cand[o]] < before[c])
        obj = cand[obj]
        out = geoms.copy()
        for k, cs in _group(obj, clr).items():
            out[k] = polygonal_part(shapely.difference(geoms[k], _union(self.geoms, cs)))
        return out


def _pieces(sink: ObjectSink, traces: np.ndarray):
    """Pieces of the strokes marked in ``traces``: (x1, y1, x2, y2, stroke)
    between consecutive points of a stroke, zero-length ones dropped."""
    n = len(sink.px)
    px = np.frombuffer(sink.px, dtype=np.float64)
    py = np.frombuffer(sink.py, dtype=np.float64)
    starts = np.frombuffer(sink.s_start, dtype=np.int64)
    counts = np.diff(np.append(starts, n))
    owner = np.repeat(np.arange(len(starts)), counts)
    is_start = np.zeros(n, dtype=bool)
    is_start[starts] = True
    b = np.flatnonzero(~is_start & traces[owner]) if n else np.zeros(0, dtype=np.int64)
    a = b - 1
    x1, y1, x2, y2 = px[a], py[a], px[b], py[b]
    keep = np.hypot(x2 - x1, y2 - y1) > MIN_PIECE_LENGTH_MM
    return x1[keep], y1[keep], x2[keep], y2[keep], owner[b][keep]


def _clip_pieces(clears: _Clears, x1, y1, x2, y2, stroke):
    """Pieces minus the later clear objects (centreline clipping).

    Each piece is intersected with each later clear object that touches it,
    one vectorised call for all pairs; the stretches inside clear objects
    (merged where they overlap or touch) are removed, and a piece is also
    split where an outline only touches it at a point, as a polygon
    difference nodes it there. This is the piece minus the union of those
    clear objects without building a union per piece (which made a long
    trace under many overlapping clear objects quadratic); the cut points
    are the same segment intersections, up to rounding where clear objects
    overlap each other."""
    if not len(x1):
        return x1, y1, x2, y2, stroke
    cand = np.flatnonzero(stroke < clears.strokes_before.max())  # pieces some clear object comes after
    boxes = shapely.box(np.minimum(x1[cand], x2[cand]), np.minimum(y1[cand], y2[cand]),
                        np.maximum(x1[cand], x2[cand]), np.maximum(y1[cand], y2[cand]))
    obj, clr = _query_intersecting(clears.tree, boxes, clears.geoms,
                                   keep=lambda o, c: stroke[cand[o]] < clears.strokes_before[c])
    if not len(obj):
        return x1, y1, x2, y2, stroke
    pair_piece = cand[obj]
    lines = shapely.linestrings(np.stack([np.column_stack((x1[pair_piece], y1[pair_piece])),
                                          np.column_stack((x2[pair_piece], y2[pair_piece]))], axis=1))
    parts, owner = shapely.get_parts(shapely.intersection(lines, clears.geoms[clr]), return_index=True)
    while len(parts) and (shapely.get_type_id(parts) >= 4).any():  # flatten multi-parts and collections
        parts, sub = shapely.get_parts(parts, return_index=True)
        owner = owner[sub]
    coords, coord_part = shapely.get_coordinates(parts, return_index=True)
    if not len(coords):  # the clear objects only meet the pieces' bounding boxes
        return x1, y1, x2, y2, stroke
    hit = np.unique(pair_piece)
    piece_of = pair_piece[owner[coord_part]]
    ax, ay = x1[piece_of], y1[piece_of]
    dx, dy = x2[piece_of] - ax, y2[piece_of] - ay
    t = ((coords[:, 0] - ax) * dx + (coords[:, 1] - ay) * dy) / np.maximum(dx * dx + dy * dy, 1e-300)
    # every part by its first and last coordinate along its piece (a point: the same one twice)
    order = np.lexsort((t, coord_part))
    first = np.ones(len(order), dtype=bool)
    first[1:] = coord_part[order][1:] != coord_part[order][:-1]
    lo, hi = order[first], order[np.r_[first[1:], True]]
    part_piece = piece_of[lo]
    line = shapely.get_type_id(parts)[coord_part[lo]] == 1
    removed = _merged(part_piece[line], t[lo[line]], t[hi[line]], coords[lo[line]], coords[hi[line]])
    g_piece, g_t0, g_t1, g_p0, g_p1 = _gaps(hit, removed, np.column_stack((x1, y1)), np.column_stack((x2, y2)))
    # every kept stretch is a run of boundaries: its start, the points that split it, its end
    s_gap, s_t, s_xy = _splits(g_piece, g_t0, g_t1, part_piece[~line], t[lo[~line]], coords[lo[~line]])
    n = len(g_piece)
    b_gap = np.concatenate((np.arange(n), s_gap, np.arange(n)))
    b_class = np.concatenate((np.zeros(n, dtype=np.int8), np.ones(len(s_gap), dtype=np.int8),
                              np.full(n, 2, dtype=np.int8)))
    b_t = np.concatenate((g_t0, s_t, g_t1))
    b_xy = np.vstack((g_p0, s_xy, g_p1))
    b_order = np.lexsort((b_t, b_class, b_gap))
    seg = np.flatnonzero(b_gap[b_order][1:] == b_gap[b_order][:-1])
    sa, sb = b_xy[b_order[seg]], b_xy[b_order[seg + 1]]
    return _ordered(x1, y1, x2, y2, stroke, hit, sa, sb, g_piece[b_gap[b_order[seg]]])


def _merged(piece, t0, t1, p0, p1):
    """Stretches [t0, t1] of pieces merged where they overlap or touch:
    (piece, t0, t1, p0, p1) of the merged ones, ordered by piece and t0."""
    o = np.lexsort((t0, piece))
    piece, t0, t1, p0, p1 = piece[o], t0[o], t1[o], p0[o], p1[o]
    # exact ranks of all ends, piece by piece, so a running maximum never crosses pieces or rounds
    k = len(piece)
    ends_t, ends_piece = np.concatenate((t0, t1)), np.concatenate((piece, piece))
    e = np.lexsort((ends_t, ends_piece))
    step = np.ones(2 * k, dtype=np.int64)
    if k:
        step[0] = 0
        step[1:] = (ends_piece[e][1:] != ends_piece[e][:-1]) | (ends_t[e][1:] != ends_t[e][:-1])
    rank = np.empty(2 * k, dtype=np.int64)
    rank[e] = np.cumsum(step)
    r0, r1 = rank[:k], rank[k:]
    reach = np.maximum.accumulate(r1) if k else r1
    start = np.ones(k, dtype=bool)
    start[1:] = r0[1:] > reach[:-1]
    group = np.cumsum(start) - 1
    firsts = np.flatnonzero(start)
    far = np.lexsort((r1, group))  # within each merged group, the stretch reaching furthest gives the end
    lasts = far[np.r_[group[far][1:] != group[far][:-1], True]] if k else far
    return piece[firsts], t0[firsts], t1[lasts], p0[firsts], p1[lasts]


def _gaps(hit, removed, start_xy, end_xy):
    """The stretches of the ``hit`` pieces outside the ``removed`` ones:
    (piece, t0, t1, p0, p1)."""
    m_piece, m_t0, m_t1, m_p0, m_p1 = removed
    new = np.ones(len(m_piece), dtype=bool)
    new[1:] = m_piece[1:] != m_piece[:-1]
    prev = np.maximum(np.arange(len(m_piece)) - 1, 0)
    # before each removed stretch: from the piece start or the previous stretch's end
    before_t0 = np.where(new, 0.0, m_t1[prev])
    before_p0 = np.where(new[:, None], start_xy[m_piece], m_p1[prev])
    # after the last one of each piece (or the whole piece): to the piece end
    tail_t0 = np.zeros(len(hit))
    tail_p0 = start_xy[hit]
    last = np.flatnonzero(np.r_[new[1:], True]) if len(m_piece) else np.zeros(0, dtype=np.int64)
    at = np.searchsorted(hit, m_piece[last])
    tail_t0[at] = m_t1[last]
    tail_p0[at] = m_p1[last]
    return (np.concatenate((m_piece, hit)), np.concatenate((before_t0, tail_t0)),
            np.concatenate((m_t0, np.ones(len(hit)))), np.vstack((before_p0, tail_p0)),
            np.vstack((m_p0, end_xy[hit])))


def _splits(g_piece, g_t0, g_t1, piece, t, xy):
    """The points (piece, t, xy) strictly inside a stretch (g_piece, g_t0,
    g_t1): (stretch index, t, xy) of each."""
    n = len(g_piece)
    keys_piece = np.concatenate((g_piece, piece))
    keys_t = np.concatenate((g_t0, t))
    is_point = np.r_[np.zeros(n, dtype=bool), np.ones(len(piece), dtype=bool)]
    o = np.lexsort((is_point, keys_t, keys_piece))  # a stretch starting at the same t comes first
    mark = np.where(is_point[o], -1, np.arange(len(o)))
    last_start = np.maximum.accumulate(mark) if len(o) else mark
    point_at = np.flatnonzero(is_point[o])
    sorted_pos = last_start[point_at]
    which = o[point_at] - n  # the point
    ok = sorted_pos >= 0
    gap = np.where(ok, o[np.maximum(sorted_pos, 0)], 0)
    ok &= (gap < n) & (g_piece[gap] == piece[which]) & (t[which] > g_t0[gap]) & (t[which] < g_t1[gap])
    return gap[ok], t[which[ok]], xy[which[ok]]


def _ordered(x1, y1, x2, y2, stroke, hit, sa, sb, piece):
    """The untouched pieces and the kept sub-segments of the ``hit`` ones,
    oriented along their piece and ordered by piece, then from its start."""
    ax, ay = x1[piece], y1[piece]
    dx, dy = x2[piece] - ax, y2[piece] - ay
    ta = (sa[:, 0] - ax) * dx + (sa[:, 1] - ay) * dy
    tb = (sb[:, 0] - ax) * dx + (sb[:, 1] - ay) * dy
    flip = ta > tb
    sa[flip], sb[flip] = sb[flip].copy(), sa[flip].copy()
    t = np.minimum(ta, tb) / np.maximum(dx * dx + dy * dy, 1e-300)
    long_enough = np.hypot(*(sb - sa).T) > MIN_PIECE_LENGTH_MM
    sa, sb, piece, t = sa[long_enough], sb[long_enough], piece[long_enough], t[long_enough]
    untouched = np.ones(len(x1), dtype=bool)
    untouched[hit] = False
    keep = np.flatnonzero(untouched)
    order_piece = np.concatenate((keep, piece)).astype(np.float64)
    order_t = np.concatenate((np.zeros(len(keep)), t))
    order = np.lexsort((order_t, order_piece))

    def cat(u, v):
        return np.concatenate((u, v))[order]

    return (cat(x1[keep], sa[:, 0]), cat(y1[keep], sa[:, 1]), cat(x2[keep], sb[:, 0]),
            cat(y2[keep], sb[:, 1]), cat(stroke[keep], stroke[piece]))


def _traces(sink: ObjectSink, x1, y1, x2, y2, stroke) -> GerberTraces:
    """Strokes renumbered as runs of pieces that touch end to start."""
    n = len(x1)
    brk = np.ones(n, dtype=bool)
    if n > 1:
        gap = np.hypot(x1[1:] - x2[:-1], y1[1:] - y2[:-1]) > MIN_PIECE_LENGTH_MM
        brk[1:] = (stroke[1:] != stroke[:-1]) | gap
    new_stroke = np.cumsum(brk) - 1
    first = np.flatnonzero(brk)
    ordinal = np.arange(n) - first[new_stroke] if n else np.zeros(0, dtype=np.int64)
    width = np.frombuffer(sink.s_width, dtype=np.float64)[stroke]
    net = np.frombuffer(sink.s_net, dtype=np.int32)[stroke]
    line = np.frombuffer(sink.s_line, dtype=np.int64)[stroke[first]]
    f = lambda a: np.ascontiguousarray(a, dtype=np.float64)
    i = lambda a: np.ascontiguousarray(a, dtype=np.int32)
    return GerberTraces(f(x1), f(y1), f(x2), f(y2), f(width), i(net), i(new_stroke), i(ordinal),
                        np.ascontiguousarray(line, dtype=np.int64))


def build(sink: ObjectSink, functions: list[str], drawn_as_shapes: set[int]) -> tuple[GerberTraces, list[GerberShape]]:
    """Traces and shapes of the image in ``sink`` with clear polarity
    applied. ``functions[i]`` names aperture-function index ``i``; strokes
    whose function index is in ``drawn_as_shapes`` (non-conductor copper)
    become ``draw`` shapes instead of traces, flagged with that function."""
    sink.flush()
    n_strokes = sink.stroke_count()
    s_func = np.frombuffer(sink.s_func, dtype=np.int32)
    as_shape = np.isin(s_func, np.fromiter(drawn_as_shapes, dtype=np.int32)) if drawn_as_shapes \
        else np.zeros(n_strokes, dtype=bool)
    x1, y1, x2, y2, stroke = _pieces(sink, ~as_shape)
    # strokes that left no piece (zero-length draws) are dots: discs
    has_piece = np.zeros(n_strokes, dtype=bool)
    has_piece[stroke] = True
    stroke_shapes: list[ShapeRecord] = []
    stroke_of_shape: list[int] = []
    for s in np.flatnonzero(as_shape | ~has_piece).tolist():
        f = int(s_func[s])
        outline = stroke_outline(sink.stroke_points(s), sink.s_width[s])
        if outline.is_empty:
            continue
        stroke_shapes.append(ShapeRecord("draw", outline, 0.0, 0.0, sink.s_net[s], sink.s_line[s],
                                         functions[f] if f >= 0 else None))
        stroke_of_shape.append(s)
    shape_geoms = _placed_geometries(sink.shapes)
    stroke_geoms = _placed_geometries(stroke_shapes)
    if sink.clears:
        clears = _Clears(sink.clears)
        shape_geoms = clears.cut_shapes(shape_geoms, np.arange(len(shape_geoms)), clears.shapes_before)
        stroke_geoms = clears.cut_shapes(stroke_geoms, np.asarray(stroke_of_shape, dtype=np.int64),
                                         clears.strokes_before)
        x1, y1, x2, y2, stroke = _clip_pieces(clears, x1, y1, x2, y2, stroke)
    traces = _traces(sink, x1, y1, x2, y2, stroke)
    shapes = []
    for rec, geom in zip(sink.shapes + stroke_shapes, list(shape_geoms) + list(stroke_geoms)):
        geom = polygonal_part(geom)
        if geom.is_empty:
            continue
        if geom.geom_type == "GeometryCollection":  # pragma: no cover - polygonal_part unions parts
            geom = shapely.union_all(shapely.get_parts(geom))
        shapes.append(GerberShape(rec.kind, geom, int(rec.net), int(rec.line), rec.function, rec.at,
                                  rec.pin, rec.component))
    return traces, shapes
