"""The accumulated objects of a Gerber file turned into the reader's
result: :class:`GerberTraces` from the round-aperture strokes and
:class:`GerberShape` records, with clear polarity applied.

Clear polarity (Gerber Layer Format Specification 2021.02, 2.7): a clear
object removes the copper of every object created before it, whatever its
net; objects created after it are untouched. Because every object is
cleared by exactly the clear objects that come after it, the result does not
depend on the order in which the clears are applied: an object ends as
itself minus the union of the later clear objects that touch it. Candidates
come from one shapely STRtree over the clear objects, queried with all
shapes and with the bounding boxes of all trace pieces at once.

* Shapes (pads, regions, non-round draws, dots): polygon difference.
* Trace pieces: the centreline is clipped by the clear objects and the
  remaining sub-segments are kept, with the piece's full width. This is an
  approximation: a trace cut by a clear object ends square at the
  centreline's intersection with the clear outline (its round end cap and
  the part of its width that reaches into the clear object are not
  modelled), and a clear object that only grazes the trace's edge without
  reaching the centreline leaves the trace whole.

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


def _union(clear_geoms: np.ndarray, idx: list[int]) -> shapely.Geometry:
    """Union of some clear objects. Many anti-pads seldom overlap: only the
    groups of polygons that touch or overlap are merged (connected
    components of an STRtree self-query); the rest, disjoint, form a valid
    multipolygon as they are, which is much faster than one big union."""
    if len(idx) == 1:
        return clear_geoms[idx[0]]
    if len(idx) <= 16:
        return shapely.union_all(clear_geoms[idx])
    parts = shapely.get_parts(clear_geoms[idx])
    parts = parts[~shapely.is_empty(parts)]
    a, b = shapely.STRtree(parts).query(parts, predicate="intersects")
    pair = a != b
    if pair.any():
        label = _components(len(parts), a[pair], b[pair])
        size = np.bincount(label)
        merged = [shapely.union_all(parts[label == k]) for k in np.flatnonzero(size > 1)]
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
        if not len(geoms):
            return geoms
        obj, clr = self.tree.query(geoms, predicate="intersects")
        later = order[obj] < before[clr]
        out = geoms.copy()
        for k, cs in _group(obj[later], clr[later]).items():
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
    """Pieces minus the later clear objects (centreline clipping)."""
    if not len(x1):
        return x1, y1, x2, y2, stroke
    boxes = shapely.box(np.minimum(x1, x2), np.minimum(y1, y2), np.maximum(x1, x2), np.maximum(y1, y2))
    obj, clr = clears.tree.query(boxes, predicate="intersects")
    later = stroke[obj] < clears.strokes_before[clr]
    groups = _group(obj[later], clr[later])
    if not groups:
        return x1, y1, x2, y2, stroke
    hit = np.fromiter(groups.keys(), dtype=np.int64, count=len(groups))
    lines = shapely.linestrings(np.stack([np.column_stack((x1[hit], y1[hit])),
                                          np.column_stack((x2[hit], y2[hit]))], axis=1))
    cut = np.empty(len(hit), dtype=object)
    cut[:] = [_union(clears.geoms, groups[int(k)]) for k in hit]
    left = shapely.difference(lines, cut)
    parts, part_owner = shapely.get_parts(left, return_index=True)
    coords, coord_part = shapely.get_coordinates(parts, return_index=True)
    same = coord_part[1:] == coord_part[:-1]
    sa, sb = coords[:-1][same], coords[1:][same]
    piece = hit[part_owner[coord_part[:-1][same]]]
    # orient every sub-segment along its piece and order them from its start
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
    cat = lambda u, v: np.concatenate((u, v))[order]  # noqa: E731
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
    f = lambda a: np.ascontiguousarray(a, dtype=np.float64)  # noqa: E731
    i = lambda a: np.ascontiguousarray(a, dtype=np.int32)  # noqa: E731
    return GerberTraces(f(x1), f(y1), f(x2), f(y2), f(width), i(net), i(new_stroke), i(ordinal),
                        np.ascontiguousarray(line, dtype=np.int64))


def build(sink: ObjectSink, functions: list[str], drawn_as_shapes: set[int]) -> tuple[GerberTraces, list[GerberShape]]:
    """Traces and shapes of the image in ``sink`` with clear polarity
    applied. ``functions[i]`` names aperture-function index ``i``; strokes
    whose function index is in ``drawn_as_shapes`` (non-conductor copper)
    become ``draw`` shapes instead of traces, flagged with that function."""
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
