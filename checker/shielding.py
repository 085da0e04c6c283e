"""What shields and what does not, decided by the copper that is there.

A conductor between two circuits that is tied to AC ground takes the
coupling to ground; one that is not passes it on (textbook circuit theory;
e.g. H. W. Ott, *Electromagnetic Compatibility Engineering*, Wiley, 2009,
ch. 2 and 6, cited from memory). So couplint does not trust a layer's
declared role: it asks which copper belongs to a *reference net* (AC ground:
the rule file's ``settings.reference_nets`` patterns, default
:data:`DEFAULT_REFERENCE_NETS`) and where that copper lies.

Reference copper of a layer
---------------------------
The union of the layer's regions (pours, plane shapes) of reference nets
and the flat-ended rectangles of its reference-net pieces, minus every piece
and region of any other net on the same layer (copper of another net inside
a pour is isolated from it, whatever the file drew). Plated holes are not
subtracted: a via of another net through a plane is drawn with its antipad
by every exporter seen; where it is not, the plane is taken as solid there.

Roles from copper
-----------------
A layer whose reference copper covers at least :data:`PLANE_COVER_FRACTION`
of the board (outline area, else the copper's bounding box) is a *plane* for
the cross-section models (``checker.physics``): it is the ground above or
below the traces of the layers beyond it. Every other layer is *signal*.
The declared role is a hint for reports only, so a board whose export
declares no roles gets the same answer as one that does.

Shielding of a broadside run
----------------------------
Two pieces on layers i < j couple through whatever lies between. For a
parallel pair the *coupled window* is the rectangle centred on the pair's
spot, along the pair, as long as the coupled run and as wide as both traces
plus a fringe margin ``m`` (the vertical distance between the two layers)
on either side, widened by the sideways drift of two pieces that are not
exactly parallel (half the run length x tan of their angle): the field
lines that link the two traces run inside it.
A stretch of the run is *shielded* where reference copper of the layers
between covers the whole width of the window; the rest is *unshielded*:

* the unshielded length is the projection, onto the run's direction, of the
  window minus the reference copper (each connected leftover projects to an
  interval; their union is measured exactly);
* C12 of the pair = C12 of the open cross-section (the layers between taken
  as dielectric) x unshielded length / coupled length.

A stretch counts as shielded only where the cover spans the whole window,
so a partial cover (a narrow ground strip, a slot beside the traces) counts
as open: the estimate errs toward more coupling, never less. A field solve
shows a grounded strip one trace width wide already removes more than 80 %
of broadside C12 (measured with this project's solver; see
``shared/REFERENCES.md``), which this rule does not credit.

A crossing's window is a square around its spot holding the plan overlap
of the two pieces grown by ``m`` (half side (wa + wb) / (2 sin angle) + m);
it is shielded only when reference copper covers all of it.

The lateral search band of a layer pair grows with its vertical distance:
``max(broadside_search, BAND_PER_SEPARATION x separation)``.
"""

from __future__ import annotations

import fnmatch
import re
from dataclasses import dataclass, field, replace

import numpy as np
import shapely

from .cores import ordered_map, split_map
from .model import NO_NET, Board, CopperLayer, Pieces, Stackup
from .occupancy import Occupancy
from .progress import Counter
from .stackup import separation_mm

#: Nets taken as AC ground when the rule file names none (glob patterns,
#: matched against the whole name, case sensitive). Common practice names;
#: supply rails are not in it: add them (``"+3V3"``, ``"VDD*"``) where they
#: are decoupled well enough to serve as a reference.
DEFAULT_REFERENCE_NETS: tuple[str, ...] = (
    "GND", "GND*", "*_GND", "*GND", "AGND*", "DGND*", "PGND*", "VSS*", "0V", "EARTH*", "CHASSIS*")

#: Share of the board area reference copper must cover for a layer to act
#: as a plane for the cross-section models (project choice).
PLANE_COVER_FRACTION = 0.5

#: Lateral search band per mm of vertical distance between two layers
#: (project choice: beyond 2.5 separations sideways, broadside C12' of two
#: strips between planes has fallen by well over an order of magnitude).
BAND_PER_SEPARATION = 2.5

#: Leftover slivers of a window smaller than this (mm^2) are rounding noise.
SLIVER_MM2 = 1e-6


def reference_mask(names, patterns) -> np.ndarray:
    """Per net name: True where it matches one of ``patterns`` (fnmatch
    globs, or ``re:`` regular expressions as in net classes).

    >>> reference_mask(["GND", "AGND", "CLK", "VSS_A"], ("GND*", "AGND", "VSS*")).tolist()
    [True, True, False, True]
    >>> reference_mask(["VREF_2V5", "2V5", "SENSE_GND_REF"], ("[0-9]V[0-9]*", "GND*")).tolist()
    [False, True, False]
    """
    # a glob matches the whole name (fnmatch.translate anchors the end; match the start);
    # a regular expression is searched, as in net classes
    tests = [re.compile(p[3:]).search if p.startswith("re:") else re.compile(fnmatch.translate(p)).match
             for p in patterns]
    return np.array([any(t(n) for t in tests) for n in names], dtype=bool)


def piece_polygons(pieces: Pieces, index: np.ndarray, grow_mm=0.0) -> np.ndarray:
    """Flat-ended copper rectangles of the pieces at ``index`` (shapely
    polygons), each side pushed out by ``grow_mm`` (scalar or per piece)."""
    index = np.asarray(index, dtype=np.int64)
    x1, y1, x2, y2 = pieces.x1[index], pieces.y1[index], pieces.x2[index], pieces.y2[index]
    dx, dy = x2 - x1, y2 - y1
    n = np.hypot(dx, dy)
    n = np.where(n > 0, n, 1.0)
    ux, uy = dx / n, dy / n
    h = pieces.width[index] / 2 + grow_mm
    ex, ey = ux * np.asarray(grow_mm, float), uy * np.asarray(grow_mm, float)
    nx, ny = -uy * h, ux * h
    ax, ay, bx, by = x1 - ex, y1 - ey, x2 + ex, y2 + ey
    ring = np.stack([np.stack([ax + nx, bx + nx, bx - nx, ax - nx, ax + nx], axis=1),
                     np.stack([ay + ny, by + ny, by - ny, ay - ny, ay + ny], axis=1)], axis=2)
    return shapely.polygons(ring)


@dataclass
class ReferenceCopper:
    """The reference copper of a board, layer by layer.

    ``is_reference[k]``: net k is AC ground. ``cover[i]``: reference copper
    of layer i (a shapely geometry, empty where there is none).
    ``fraction[i]``: its share of the board area. ``nets[i]``: the
    reference nets whose copper makes it.
    """

    patterns: tuple[str, ...]
    is_reference: np.ndarray
    cover: list
    fraction: np.ndarray
    nets: list[tuple[str, ...]]
    board_area_mm2: float
    #: (xmin, ymin, xmax, ymax) of the board, mm
    bounds: tuple[float, float, float, float] = (0.0, 0.0, 0.0, 0.0)
    _union: dict = field(default_factory=dict, repr=False)

    def _layers_between(self, i: int, j: int) -> tuple[int, ...]:
        """The layers strictly between i and j that carry reference copper:
        pairs with the same ones share their unions, tiles and rasters."""
        lo, hi = min(i, j), max(i, j)
        return tuple(k for k in range(lo + 1, hi) if not shapely.is_empty(self.cover[k]))

    def between(self, i: int, j: int):
        """Reference copper of the layers strictly between i and j (union,
        prepared), or None where there is none."""
        layers = self._layers_between(i, j)
        key = ("between", layers)
        if key not in self._union:
            if not layers:
                geom = None
            elif len(layers) == 1:
                geom = self.cover[layers[0]]  # already one valid, prepared geometry
            else:
                geom = shapely.union_all([self.cover[k] for k in layers])
                shapely.prepare(geom)
            self._union[key] = geom
        return self._union[key]

    def prepare_between(self, pairs) -> None:
        """Build :meth:`between`, :meth:`open_space` and :meth:`open_mask`
        of every layer pair in ``pairs`` ahead of use, the distinct ones on
        the cores a check may use (:mod:`checker.cores`)."""
        firsts: dict[tuple[int, ...], tuple[int, int]] = {}
        for i, j in pairs:
            firsts.setdefault(self._layers_between(i, j), (i, j))
        ordered_map(lambda ij: self.open_mask(*ij), list(firsts.values()))

    def open_space(self, i: int, j: int):
        """Where no reference copper of the layers strictly between i and j
        lies, within a box well beyond the board: small tiles
        (:func:`cover_tiles`) and an STRtree over them, or None where there
        is no copper between (then everything is open)."""
        key = ("open", self._layers_between(i, j))
        if key not in self._union:
            geom = self.between(i, j)
            if geom is None:
                self._union[key] = None
            else:
                x0, y0, x1, y1 = self.bounds
                pad = 10.0 + max(x1 - x0, y1 - y0)
                inside = shapely.difference(shapely.box(x0, y0, x1, y1), geom)
                tiles = cover_tiles(inside) if not shapely.is_empty(inside) else np.zeros(0, dtype=object)
                # beyond the board's bounds: four strips, not one frame whose bounding box would
                # take in every query on the board
                frame = shapely.box([x0 - pad, x1, x0, x0], [y0 - pad, y0 - pad, y0 - pad, y1],
                                    [x0, x1 + pad, x1, x1], [y1 + pad, y1 + pad, y0, y1 + pad])
                tiles = np.concatenate([tiles, frame[shapely.area(frame) > 0]])
                self._union[key] = (tiles, shapely.STRtree(tiles))
        return self._union[key]

    def open_mask(self, i: int, j: int) -> Occupancy | None:
        """Raster prefilter (:class:`checker.occupancy.Occupancy`) of the
        bounding boxes of ``open_space(i, j)``'s tiles within the board's
        bounds (a box reaching beyond them always may touch open space), or
        None where everything is open."""
        key = ("mask", self._layers_between(i, j))
        if key not in self._union:
            space = self.open_space(i, j)
            if space is None:
                self._union[key] = None
            else:
                b = shapely.bounds(space[0]).reshape(-1, 4)
                self._union[key] = Occupancy(b[:, 0], b[:, 1], b[:, 2], b[:, 3], self.bounds)
        return self._union[key]

    def role(self, k: int) -> str:
        """Layer k's role as its reference copper decides it (module docstring)."""
        return "plane" if self.fraction[k] >= PLANE_COVER_FRACTION else "signal"

    def reference_names(self, board: Board) -> tuple[str, ...]:
        return tuple(n.name for n, r in zip(board.nets, self.is_reference) if r)


#: Most vertices of one tile of reference copper (:func:`cover_tiles`).
TILE_VERTICES = 256


def cover_tiles(cover, max_vertices: int = TILE_VERTICES, max_depth: int = 20) -> np.ndarray:
    """``cover`` cut into polygons of at most ``max_vertices`` vertices
    each (quadrant by quadrant of each part's bbox, at most ``max_depth``
    times): together they are ``cover``, and subtracting the few tiles near
    a short line or a small window costs what their size costs, not what the
    whole plane with its every antipad would."""
    parts = shapely.get_parts(cover)
    parts = parts[shapely.get_type_id(parts) == 3]  # polygons
    done = []
    for _ in range(max_depth):
        small = shapely.get_num_coordinates(parts) <= max_vertices
        done.append(parts[small])
        parts = parts[~small]
        if parts.size == 0:
            break
        b = shapely.bounds(parts)
        xm, ym = (b[:, 0] + b[:, 2]) / 2, (b[:, 1] + b[:, 3]) / 2
        quads = (shapely.box(b[:, 0], b[:, 1], xm, ym), shapely.box(xm, b[:, 1], b[:, 2], ym),
                 shapely.box(b[:, 0], ym, xm, b[:, 3]), shapely.box(xm, ym, b[:, 2], b[:, 3]))
        parts = shapely.get_parts(np.concatenate([shapely.intersection(parts, q) for q in quads]))
        parts = parts[(shapely.get_type_id(parts) == 3) & (shapely.area(parts) > 0)]
    done.append(parts)
    return np.concatenate(done)


def valid(shape):
    """``shape`` repaired (``shapely.make_valid``) if it is not a valid
    geometry, so that unions and differences of copper from any exporter
    cannot fail on a self-touching outline."""
    return shape if shapely.is_valid(shape) else shapely.make_valid(shape)


def reference_copper(board: Board, patterns) -> ReferenceCopper:
    """Build :class:`ReferenceCopper` for ``board`` (module docstring)."""
    patterns = tuple(patterns)
    names = [n.name for n in board.nets]
    is_ref = reference_mask(names, patterns) if names else np.zeros(0, bool)
    p = board.pieces
    n_layers = len(board.stackup.layers)
    net = p.net.astype(np.int64)
    piece_ref = np.zeros(len(p), bool)
    has_net = net != NO_NET
    piece_ref[has_net] = is_ref[net[has_net]]
    if board.outline is not None and board.outline.area > 0:
        area = float(board.outline.area)
    else:
        x0, y0, x1, y1 = board.bounds()
        area = max((x1 - x0) * (y1 - y0), 1e-12)

    done = Counter("reference copper: layers", n_layers)

    def layer_cover(k: int) -> tuple[object, float, tuple[str, ...]]:
        try:
            return _layer_cover(k)
        finally:
            done.add()

    def _layer_cover(k: int) -> tuple[object, float, tuple[str, ...]]:
        on = p.layer == k
        ref_idx = np.flatnonzero(on & piece_ref)
        regions = [r for r in board.regions if r.layer == k]
        ref_regions = [r for r in regions if r.net != NO_NET and is_ref[r.net]]
        shapes = [valid(r.polygon) for r in ref_regions]
        if ref_idx.size:
            shapes.extend(piece_polygons(p, ref_idx, 1e-4).tolist())
        if not shapes:
            return shapely.Polygon(), 0.0, ()
        geom = shapely.union_all(shapes)
        # copper of any other net (or of none) on the layer is cut out of it
        others = [valid(r.polygon) for r in regions if not (r.net != NO_NET and is_ref[r.net])]
        other_idx = np.flatnonzero(on & ~piece_ref)
        if other_idx.size:
            polys = piece_polygons(p, other_idx)
            tree = shapely.STRtree(polys)
            hit = np.unique(tree.query(geom, predicate="intersects"))
            others.extend(polys[hit].tolist())
        if others:
            geom = shapely.difference(geom, shapely.union_all(others))
        shapely.prepare(geom)
        nets = {names[r.net] for r in ref_regions} | {names[i] for i in np.unique(net[ref_idx])}
        return geom, min(float(geom.area) / area, 1.0), tuple(sorted(nets))

    # layer by layer on the cores a check may use (GEOS releases the interpreter lock)
    cover, fraction, ref_nets = zip(*ordered_map(layer_cover, range(n_layers))) if n_layers else ((), (), ())
    return ReferenceCopper(patterns, is_ref, list(cover), np.array(fraction, dtype=float), list(ref_nets), area,
                           board.bounds())


def effective_stackup(stackup: Stackup, ref: ReferenceCopper) -> Stackup:
    """The stackup with every layer's role decided by its reference copper
    (module docstring, "Roles from copper")."""
    layers = tuple(CopperLayer(layer.name, ref.role(k), layer.thickness_mm)  # type: ignore[arg-type]  # a role
                   for k, layer in enumerate(stackup.layers))
    return replace(stackup, layers=layers)


def role_notes(declared: Stackup, ref: ReferenceCopper, board: Board) -> list[str]:
    """Notes: which nets are reference and why, and each layer's role from
    its copper beside the declared one."""
    names = ref.reference_names(board)
    shown = ", ".join(names[:12]) + (f" and {len(names) - 12} more" if len(names) > 12 else "")
    notes = [f"reference nets (AC ground, shield when between two traces): {shown or 'none'} "
             f"(matched by settings.reference_nets: {', '.join(ref.patterns) or 'none'})"]
    parts = []
    for k, layer in enumerate(declared.layers):
        role = ref.role(k)
        by = f" {'+'.join(ref.nets[k])}" if ref.nets[k] else ""
        hint = "" if layer.role == role else f", declared {layer.role}"
        parts.append(f"{layer.name} {role} ({ref.fraction[k] * 100:.0f} %{by}{hint})")
    notes.append("layer roles from the copper (share of the board covered by reference copper; a plane is the "
                 "ground beyond the layers it bounds, while shielding between layers follows where that copper "
                 "lies): " + ", ".join(parts))
    return notes


def search_band_mm(stackup: Stackup, i: int, j: int, broadside_search_mm: float) -> float:
    """Lateral search band (mm) of layers i and j (module docstring)."""
    return max(broadside_search_mm, BAND_PER_SEPARATION * separation_mm(stackup, i, j))


def exposed_pieces(pieces: Pieces, index: np.ndarray, space, grow_mm: float,
                   mask: Occupancy | None = None) -> np.ndarray:
    """Of the pieces at ``index``, those whose bounding box grown by
    ``grow_mm`` plus half their width (which holds their rectangle grown by
    ``grow_mm``: a superset, so more pieces count as exposed, never fewer)
    meets the open space ``space`` (``ReferenceCopper.open_space``: tiles and
    their STRtree; None: everything is open). ``mask``
    (``ReferenceCopper.open_mask``) first drops the boxes that cannot."""
    if space is None or index.size == 0:
        return index
    _, tree = space
    g = grow_mm + pieces.width[index] / 2
    x1, x2, y1, y2 = pieces.x1[index], pieces.x2[index], pieces.y1[index], pieces.y2[index]
    bx0, by0 = np.minimum(x1, x2) - g, np.minimum(y1, y2) - g
    bx1, by1 = np.maximum(x1, x2) + g, np.maximum(y1, y2) + g
    if mask is not None:
        near = np.flatnonzero(mask.touches(bx0, by0, bx1, by1))
        index, bx0, by0, bx1, by1 = index[near], bx0[near], by0[near], bx1[near], by1[near]
        if index.size == 0:
            return index
    hit, _ = tree.query(shapely.box(bx0, by0, bx1, by1), predicate="intersects")
    return index[np.unique(hit)]


@dataclass
class ShieldSplit:
    """Per row of a broadside pair table: the part of the coupled run that
    no reference copper between the layers shields (``open_fraction``, 0..1)
    and the layer between whose reference copper does the shielding
    (``shield_layer``, -1 for none)."""

    open_fraction: np.ndarray
    shield_layer: np.ndarray


def split_shielded(board: Board, ref: ReferenceCopper, table, upper: int, lower: int) -> ShieldSplit:
    """Shielded and open parts of every row of ``table`` (module docstring,
    "Shielding of a broadside run")."""
    n = len(table)
    open_fraction = np.ones(n)
    shield_layer = np.full(n, -1, np.int32)
    shield = ref.between(upper, lower)
    if shield is None or n == 0:
        return ShieldSplit(open_fraction, shield_layer)
    p = board.pieces
    m = separation_mm(board.stackup, upper, lower)
    tiles, tree = ref.open_space(upper, lower)
    # a row whose window's bounding box meets no open space lies wholly over reference copper
    # (the raster prefilter answers "may meet": the exact test on the window follows)
    mask = ref.open_mask(upper, lower)
    assert mask is not None  # there is reference copper between: ref.between gave a shield
    rows = np.flatnonzero(mask.touches(*_window_bounds(p, table, m)))
    open_fraction[:] = 0.0
    if rows.size == 0:
        return ShieldSplit(open_fraction, shield_layer)
    windows = _windows(p, table, m, rows)
    # what of each remaining window lies in the open space (no reference copper between): its pieces
    wi, ti = tree.query(windows, predicate="intersects")
    pieces = split_map(shapely.intersection, windows[wi], tiles[ti])
    big = shapely.area(pieces) > SLIVER_MM2
    wi, pieces = wi[big], pieces[big]
    par = np.asarray(table.parallel, bool)[rows]
    open_fraction[rows] = 0.0
    # crossings: open unless nothing is left
    cross = np.zeros(rows.size, bool)
    cross[wi] = True
    open_fraction[rows[~par & cross]] = 1.0
    keep = par[wi]
    pr = np.flatnonzero(par)
    if keep.any():
        length = _open_length(p, table, rows, pieces[keep], wi[keep])
        open_fraction[rows[pr]] = length[pr] / np.maximum(table.length_mm[rows[pr]], 1e-12)
    open_fraction = np.clip(open_fraction, 0.0, 1.0)
    for k in range(upper + 1, lower):
        c = ref.cover[k]
        if shapely.is_empty(c):
            continue
        still = np.flatnonzero(shield_layer[rows] < 0)
        if still.size:
            hit = shapely.intersects(c, windows[still])
            shield_layer[rows[still[hit]]] = k
    return ShieldSplit(open_fraction, shield_layer)


def _direction(p: Pieces, a: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    dx, dy = p.x2[a] - p.x1[a], p.y2[a] - p.y1[a]
    n = np.hypot(dx, dy)
    n = np.where(n > 0, n, 1.0)
    return dx / n, dy / n


def _window_shape(p: Pieces, t, m: float, rows: np.ndarray):
    """Centre, unit direction, half length and half width of the window of
    each parallel row at ``rows`` (module docstring)."""
    a, b = t.a[rows].astype(np.int64), t.b[rows].astype(np.int64)
    ux, uy = _direction(p, a)
    half_l = t.length_mm[rows] / 2
    # pieces up to parallel_angle apart drift sideways along the run: widen by that drift
    drift = half_l * np.tan(np.radians(np.minimum(t.angle_deg[rows], 89.0)))
    half_w = np.abs(t.offset_mm[rows]) / 2 + np.maximum(p.width[a], p.width[b]) / 2 + m + drift
    return t.x[rows], t.y[rows], ux, uy, half_l, half_w


def _crossing_half(p: Pieces, t, m: float, rows: np.ndarray) -> np.ndarray:
    """Half side of the square window of each crossing row at ``rows``."""
    s = np.maximum(np.sin(np.radians(t.angle_deg[rows])), 1e-3)
    return (p.width[t.a[rows].astype(np.int64)] + p.width[t.b[rows].astype(np.int64)]) / (2 * s) + m


def _window_bounds(p: Pieces, t, m: float) -> tuple[np.ndarray, ...]:
    """(xmin, ymin, xmax, ymax) of every row's window, without building it."""
    par = np.asarray(t.parallel, bool)
    hx, hy = np.zeros(len(t)), np.zeros(len(t))
    r = np.flatnonzero(par)
    if r.size:
        _, _, ux, uy, hl, hw = _window_shape(p, t, m, r)
        hx[r] = np.abs(ux) * hl + np.abs(uy) * hw
        hy[r] = np.abs(uy) * hl + np.abs(ux) * hw
    r = np.flatnonzero(~par)
    if r.size:
        hx[r] = hy[r] = _crossing_half(p, t, m, r)
    return t.x - hx, t.y - hy, t.x + hx, t.y + hy


def _windows(p: Pieces, t, m: float, rows: np.ndarray | None = None) -> np.ndarray:
    """The coupled window of each row at ``rows`` (default all; module docstring)."""
    rows = np.arange(len(t)) if rows is None else np.asarray(rows, np.int64)
    out = np.empty(rows.size, dtype=object)
    par = np.asarray(t.parallel, bool)[rows]
    if par.any():
        r = np.flatnonzero(par)
        cx, cy, ux, uy, half_l, half_w = _window_shape(p, t, m, rows[r])
        lx, ly, nx, ny = ux * half_l, uy * half_l, -uy * half_w, ux * half_w
        xs = np.stack([cx - lx + nx, cx + lx + nx, cx + lx - nx, cx - lx - nx, cx - lx + nx], axis=1)
        ys = np.stack([cy - ly + ny, cy + ly + ny, cy + ly - ny, cy - ly - ny, cy - ly + ny], axis=1)
        out[r] = shapely.polygons(np.stack([xs, ys], axis=2))
    if (~par).any():
        # a square around the crossing's spot that holds the overlap of the two
        # rectangles (a parallelogram whose half diagonal is at most
        # (wa + wb) / (2 sin angle)) grown by m: a superset, so it errs open
        r = np.flatnonzero(~par)
        half = _crossing_half(p, t, m, rows[r])
        x, y = t.x[rows[r]], t.y[rows[r]]
        out[r] = shapely.box(x - half, y - half, x + half, y + half)
    return out


def _open_length(p: Pieces, t, rows: np.ndarray, left: np.ndarray, left_row: np.ndarray) -> np.ndarray:
    """Length (mm) along each parallel row (``rows`` of ``t``) over which
    some part of its window is left uncovered: the union of the projections,
    onto the row's direction, of the leftover pieces ``left`` (``left_row``:
    the position in ``rows`` each belongs to). Vectorised: intervals sorted
    per row, each adding what reaches beyond the running end of the ones
    before it."""
    out = np.zeros(rows.size)
    parts, which = shapely.get_parts(left, return_index=True)
    if parts.size == 0:
        return out
    owner = np.asarray(left_row)[which]
    keep = shapely.area(parts) > SLIVER_MM2
    parts, owner = parts[keep], owner[keep]
    if parts.size == 0:
        return out
    ux, uy = _direction(p, t.a[rows].astype(np.int64))
    coords, ring_of = shapely.get_coordinates(parts, return_index=True)
    row_of = owner[ring_of]
    proj = (coords[:, 0] - t.x[rows][row_of]) * ux[row_of] + (coords[:, 1] - t.y[rows][row_of]) * uy[row_of]
    lo = np.full(parts.size, np.inf)
    hi = np.full(parts.size, -np.inf)
    np.minimum.at(lo, ring_of, proj)
    np.maximum.at(hi, ring_of, proj)
    half = t.length_mm[rows] / 2
    lo = np.maximum(lo, -half[owner])
    hi = np.maximum(np.minimum(hi, half[owner]), lo)
    order = np.lexsort((lo, owner))
    lo, hi, owner = lo[order], hi[order], owner[order]
    # shift each row's intervals past the previous row's so one running maximum serves all rows
    shift = owner * (2.0 * float(half.max()) + 1.0)
    lo_s, hi_s = lo + shift, hi + shift
    reach = np.maximum.accumulate(hi_s)
    before = np.concatenate(([-np.inf], reach[:-1]))
    first = np.concatenate(([True], owner[1:] != owner[:-1]))
    before[first] = -np.inf
    add = np.maximum(hi_s - np.maximum(lo_s, before), 0.0)
    np.add.at(out, owner, add)
    return out
