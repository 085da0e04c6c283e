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
on either side: the field lines that link the two traces run inside it.
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

A crossing's window is the plan overlap of the two pieces grown by ``m``;
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

from .model import NO_NET, Board, CopperLayer, Pieces, Stackup
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
    _union: dict = field(default_factory=dict, repr=False)

    def between(self, i: int, j: int):
        """Reference copper of the layers strictly between i and j (union,
        prepared), or None where there is none."""
        lo, hi = min(i, j), max(i, j)
        key = (lo, hi)
        if key not in self._union:
            parts = [self.cover[k] for k in range(lo + 1, hi) if not shapely.is_empty(self.cover[k])]
            geom = shapely.union_all(parts) if parts else None
            if geom is not None:
                shapely.prepare(geom)
            self._union[key] = geom
        return self._union[key]

    def reference_names(self, board: Board) -> tuple[str, ...]:
        return tuple(n.name for n, r in zip(board.nets, self.is_reference) if r)


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
    cover, fraction, ref_nets = [], np.zeros(n_layers), []
    for k in range(n_layers):
        on = p.layer == k
        ref_idx = np.flatnonzero(on & piece_ref)
        regions = [r for r in board.regions if r.layer == k]
        ref_regions = [r for r in regions if r.net != NO_NET and is_ref[r.net]]
        shapes = [r.polygon for r in ref_regions]
        if ref_idx.size:
            shapes.extend(piece_polygons(p, ref_idx, 1e-4).tolist())
        if not shapes:
            cover.append(shapely.Polygon())
            ref_nets.append(())
            continue
        geom = shapely.union_all(shapes)
        # copper of any other net (or of none) on the layer is cut out of it
        others = [r.polygon for r in regions if not (r.net != NO_NET and is_ref[r.net])]
        other_idx = np.flatnonzero(on & ~piece_ref)
        if other_idx.size:
            polys = piece_polygons(p, other_idx)
            tree = shapely.STRtree(polys)
            hit = np.unique(tree.query(geom, predicate="intersects"))
            others.extend(polys[hit].tolist())
        if others:
            geom = shapely.difference(geom, shapely.union_all(others))
        cover.append(geom)
        fraction[k] = min(float(geom.area) / area, 1.0)
        nets = {names[r.net] for r in ref_regions} | {names[i] for i in np.unique(net[ref_idx])}
        ref_nets.append(tuple(sorted(nets)))
    return ReferenceCopper(patterns, is_ref, cover, fraction, ref_nets, area)


def effective_stackup(stackup: Stackup, ref: ReferenceCopper) -> Stackup:
    """The stackup with every layer's role decided by its reference copper
    (module docstring, "Roles from copper")."""
    layers = tuple(CopperLayer(layer.name, "plane" if ref.fraction[k] >= PLANE_COVER_FRACTION else "signal",
                               layer.thickness_mm) for k, layer in enumerate(stackup.layers))
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
        role = "plane" if ref.fraction[k] >= PLANE_COVER_FRACTION else "signal"
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


def exposed_pieces(pieces: Pieces, index: np.ndarray, shield, grow_mm: float) -> np.ndarray:
    """Of the pieces at ``index``, those whose rectangle grown by
    ``grow_mm`` is not wholly inside ``shield`` (None: all of them)."""
    if shield is None or index.size == 0:
        return index
    inside = shapely.covers(shield, piece_polygons(pieces, index, grow_mm))
    return index[~inside]


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
    windows = _windows(p, table, m)
    touched = shapely.intersects(shield, windows)
    rows = np.flatnonzero(touched)
    if rows.size == 0:
        return ShieldSplit(open_fraction, shield_layer)
    left = shapely.difference(windows[rows], shield)
    area = shapely.area(left)
    par = np.asarray(table.parallel, bool)[rows]
    # crossings: shielded only when nothing is left
    open_fraction[rows[~par]] = np.where(area[~par] > SLIVER_MM2, 1.0, 0.0)
    pr = rows[par]
    if pr.size:
        open_fraction[pr] = _open_length(p, table, pr, left[par]) / np.maximum(table.length_mm[pr], 1e-12)
    open_fraction = np.clip(open_fraction, 0.0, 1.0)
    for k in range(upper + 1, lower):
        c = ref.cover[k]
        if shapely.is_empty(c):
            continue
        still = rows[shield_layer[rows] < 0]
        if still.size:
            hit = shapely.intersects(c, windows[still])
            shield_layer[still[hit]] = k
    return ShieldSplit(open_fraction, shield_layer)


def _direction(p: Pieces, a: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    dx, dy = p.x2[a] - p.x1[a], p.y2[a] - p.y1[a]
    n = np.hypot(dx, dy)
    n = np.where(n > 0, n, 1.0)
    return dx / n, dy / n


def _windows(p: Pieces, t, m: float) -> np.ndarray:
    """The coupled window of each row (module docstring)."""
    a, b = t.a.astype(np.int64), t.b.astype(np.int64)
    out = np.empty(len(t), dtype=object)
    par = np.asarray(t.parallel, bool)
    if par.any():
        r = np.flatnonzero(par)
        ux, uy = _direction(p, a[r])
        half_l = t.length_mm[r] / 2
        half_w = np.abs(t.offset_mm[r]) / 2 + np.maximum(p.width[a[r]], p.width[b[r]]) / 2 + m
        cx, cy = t.x[r], t.y[r]
        lx, ly, nx, ny = ux * half_l, uy * half_l, -uy * half_w, ux * half_w
        xs = np.stack([cx - lx + nx, cx + lx + nx, cx + lx - nx, cx - lx - nx, cx - lx + nx], axis=1)
        ys = np.stack([cy - ly + ny, cy + ly + ny, cy + ly - ny, cy - ly - ny, cy - ly + ny], axis=1)
        out[r] = shapely.polygons(np.stack([xs, ys], axis=2))
    if (~par).any():
        r = np.flatnonzero(~par)
        inter = shapely.intersection(piece_polygons(p, a[r]), piece_polygons(p, b[r]))
        out[r] = shapely.buffer(inter, m, join_style="mitre")
    return out


def _open_length(p: Pieces, t, rows: np.ndarray, left: np.ndarray) -> np.ndarray:
    """Length (mm) along each parallel row's direction over which some part
    of its window is left uncovered: the union of the projections of the
    leftover pieces."""
    parts, owner = shapely.get_parts(left, return_index=True)
    out = np.zeros(rows.size)
    if parts.size == 0:
        return out
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
    hi = np.minimum(hi, half[owner])
    order = np.lexsort((lo, owner))
    for k in np.unique(owner):
        sel = order[owner[order] == k]
        total, end = 0.0, -np.inf
        for a, b in zip(lo[sel], hi[sel]):
            if b <= a:
                continue
            if a > end:
                total += b - a
                end = b
            elif b > end:
                total += b - end
                end = b
        out[k] = total
    return out
