"""Floating copper as a relay: islands, what they couple to, and the
mutual capacitance they add between the nets around them.

Copper on no net (an unconnected pour, an island left by a plane split, a
stub of track) floats: it carries no net charge and sits at whatever
potential its capacitances give it, so it passes coupling on from one net to
another (textbook circuit theory; H. W. Ott, *Electromagnetic Compatibility
Engineering*, Wiley, 2009, ch. 6, cited from memory). couplint treats each
island as one node of the board's capacitance network and eliminates it by
the zero-charge condition (``checker.physics.network``): two nets a and b
around island s gain

    C_relay(a, b) = C_as C_bs / (C_sg + sum_k C_ks)

Islands
-------
The connected parts (per layer) of the union of the layer's copper on no
net: regions and pieces with ``NO_NET``. Parts smaller than
:data:`MIN_ISLAND_MM2` are left out (pad-sized specks). Islands on several
layers that one plated hole on no net touches are one conductor (one node):
their capacitances to each net and to ground add up before the island is
eliminated. The report's note says how many islands and conductors were
found.

What an island couples to (each value errs toward more coupling)
-----------------------------------------------------------------
* A piece on another layer i (island on layer k): the piece's centreline
  length inside the island grown by the vertical distance d between the
  layers (fringing reach), minus where reference copper of the layers
  between covers it, times C12' of the piece over a wide conductor
  (width max(1 mm, 10 d)) from the field-solved broadside table of layers
  i and k (``checker.physics.broadside``). A wide conductor collects at
  least the field a narrower island would.
* A piece on the same layer within ``edge_search`` of the island: its
  centreline length within ``edge_search`` + w/2 of the island times
  C12'(w, wide, g) at its smallest gap g to the island, from the layer's
  field-solved edge table (``checker.physics.edge``).
* Ground: parallel-plate capacitance eps0 er A / h to the nearest plane
  above and below (plane as ``checker.shielding`` decides it), fringing
  left out: a smaller C_sg relays more.

Island-to-island coupling (between separate conductors) is left out (a
chain of floating conductors relays less than one, so this can read low
there); so is the island's pull on the nets' own capacitance to ground
(it would lower the relayed noise).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import shapely
from scipy.constants import epsilon_0

from .model import NO_NET, Board, Pieces
from .physics.broadside import BroadsideModel
from .physics.edge import EdgeModel
from .physics.network import relayed_mutual
from .shielding import ReferenceCopper, piece_polygons, valid
from .stackup import effective_er, reference_of, separation_mm

#: Islands smaller than this (mm^2) are left out.
MIN_ISLAND_MM2 = 0.05

#: At most this many nets per island take part in its relays (the most
#: strongly coupled ones); a note says when an island had more.
MAX_NETS_PER_ISLAND = 100

#: Smallest same-layer gap (mm) asked of the edge tables.
GAP_FLOOR_MM = 0.01


@dataclass(frozen=True)
class Island:
    """One floating copper island: its id (1-based, in layer then position
    order), layer, area (mm^2), a point inside it and its outline."""

    id: int
    layer: int
    area_mm2: float
    x: float
    y: float
    polygon: object
    #: index (in the island list) of the first island of the conductor this
    #: one is part of: islands on several layers joined by a plated hole on
    #: no net are one conductor
    node: int = -1


@dataclass
class IslandLinks:
    """Capacitance (pF) from islands to nets, one row per (island, net):
    ``island`` indexes the island list, ``piece`` is the net's piece that
    couples most strongly to it. ``ground_pf`` per island."""

    island: np.ndarray
    net: np.ndarray
    piece: np.ndarray
    c_pf: np.ndarray
    ground_pf: np.ndarray


@dataclass
class Relays:
    """Mutual capacitance (pF) relayed between two nets through one island,
    one row per (island, net_a < net_b): the pieces of each net that couple
    most to the island, and the island's C to each net and to ground."""

    island: np.ndarray
    net_a: np.ndarray
    net_b: np.ndarray
    piece_a: np.ndarray
    piece_b: np.ndarray
    c_pf: np.ndarray

    def __len__(self) -> int:
        return int(self.island.shape[0])


def find_islands(board: Board) -> list[Island]:
    """The floating copper islands of ``board`` (module docstring)."""
    p = board.pieces
    out: list[Island] = []
    for k in range(len(board.stackup.layers)):
        shapes = [valid(r.polygon) for r in board.regions if r.layer == k and r.net == NO_NET]
        idx = np.flatnonzero((p.layer == k) & (p.net == NO_NET) & (p.length > 0))
        if idx.size:
            shapes.extend(piece_polygons(p, idx).tolist())
        if not shapes:
            continue
        parts = shapely.get_parts(shapely.union_all(shapes))
        parts = [g for g in parts if g.area >= MIN_ISLAND_MM2]
        parts.sort(key=lambda g: (round(g.bounds[0], 6), round(g.bounds[1], 6)))
        for g in parts:
            pt = g.representative_point()
            out.append(Island(len(out) + 1, k, float(g.area), float(pt.x), float(pt.y), g, len(out)))
    return _joined_by_vias(board, out)


def _joined_by_vias(board: Board, islands: list[Island]) -> list[Island]:
    """``islands`` with ``node`` set: islands that one plated hole on no net
    touches (its pad on each layer of its span) are one conductor, named by
    the first of them (union-find)."""
    v = board.vias
    if not islands or not len(v):
        return islands
    parent = list(range(len(islands)))

    def root(i: int) -> int:
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    polys = np.array([isl.polygon for isl in islands], dtype=object)
    layer = np.array([isl.layer for isl in islands])
    tree = shapely.STRtree(polys)
    free = np.flatnonzero(v.net == NO_NET)
    if free.size:
        pads = shapely.buffer(shapely.points(v.x[free], v.y[free]), np.maximum(v.pad[free], v.drill[free]) / 2)
        hole, isl = tree.query(pads, predicate="intersects")
        ok = (layer[isl] >= v.first_layer[free][hole]) & (layer[isl] <= v.last_layer[free][hole])
        hole, isl = hole[ok], isl[ok]
        for h in np.unique(hole).tolist():
            members = isl[hole == h].tolist()
            for m in members[1:]:
                a, b = root(members[0]), root(m)
                if a != b:
                    parent[max(a, b)] = min(a, b)
    return [Island(i.id, i.layer, i.area_mm2, i.x, i.y, i.polygon, root(k)) for k, i in enumerate(islands)]


def by_conductor(links: "IslandLinks", islands: list[Island]) -> "IslandLinks":
    """``links`` with islands of one conductor (``Island.node``) merged: C to
    each net summed (the strongest piece kept), C to ground summed;
    ``island`` then names the conductor's first island."""
    node = np.array([i.node for i in islands], np.int64)
    ground = np.bincount(node, weights=links.ground_pf, minlength=len(islands))
    if links.island.size == 0:
        return IslandLinks(links.island, links.net, links.piece, links.c_pf, ground)
    owner = node[links.island]
    n_nets = int(links.net.max()) + 1
    key = owner * n_nets + links.net
    order = np.lexsort((-links.c_pf, key))
    uniq, first, inv = np.unique(key[order], return_index=True, return_inverse=True)
    total = np.bincount(inv, weights=links.c_pf[order])
    return IslandLinks(uniq // n_nets, uniq % n_nets, links.piece[order][first], total, ground)


def island_links(board: Board, ref: ReferenceCopper, islands: list[Island], signal: Pieces,
                 edge_search_mm: float, notes: list[str], planes_shield: bool = True) -> IslandLinks:
    """C from every island to every net near it, and to ground (module
    docstring; ``planes_shield=False``: reference copper between does not
    shield, as for broadside runs). ``signal``: the board's pieces with reference-net and
    unconnected copper taken off their nets (``NO_NET``)."""
    st = board.stackup
    live = np.flatnonzero((signal.net != NO_NET) & (signal.length > 0))
    ground = np.zeros(len(islands))
    rows: list[tuple[np.ndarray, np.ndarray, np.ndarray]] = []  # (island, piece, pF)
    if not islands:
        z = np.zeros(0, np.int64)
        return IslandLinks(z, z.copy(), z.copy(), np.zeros(0), ground)
    rects = piece_polygons(signal, live)
    tree = shapely.STRtree(rects)
    lines = shapely.linestrings(np.stack([np.stack([signal.x1[live], signal.x2[live]], 1),
                                          np.stack([signal.y1[live], signal.y2[live]], 1)], 2))
    layer_of = signal.layer[live]
    width_of = signal.width[live]
    wanted: dict[tuple, list] = {}  # model key -> list of (island, rows, widths, lengths, gaps)
    for s, isl in enumerate(islands):
        k = isl.layer
        near = reference_of(st, k)
        for plane in (i for i in (near.plane_above, near.plane_below) if i is not None):
            h = separation_mm(st, plane, k)
            ground[s] += epsilon_0 * effective_er(st, plane, k) * isl.area_mm2 * 1e-6 / (h * 1e-3) * 1e12
        reach = max(edge_search_mm, max(separation_mm(st, k, i) for i in range(len(st.layers))) + 0.0)
        near = tree.query(shapely.buffer(isl.polygon, reach), predicate="intersects")
        if near.size == 0:
            continue
        for i in np.unique(layer_of[near]):
            sel = near[layer_of[near] == i]
            if i == k:
                gap = np.maximum(shapely.distance(rects[sel], isl.polygon), GAP_FLOOR_MM)
                inside = shapely.length(shapely.intersection(
                    lines[sel], shapely.buffer(isl.polygon, edge_search_mm + width_of[sel] / 2)))
                ok = (gap <= edge_search_mm) & (inside > 0)
                wanted.setdefault(("edge", int(k)), []).append((s, sel[ok], width_of[sel][ok], inside[ok], gap[ok]))
            else:
                d = separation_mm(st, int(i), k)
                zone = shapely.buffer(isl.polygon, d)
                shield = ref.between(int(i), k) if ref is not None and planes_shield else None
                if shield is not None:
                    zone = shapely.difference(zone, shield)
                if shapely.is_empty(zone):
                    continue
                inside = shapely.length(shapely.intersection(lines[sel], zone))
                ok = inside > 0
                wanted.setdefault(("broadside", int(i), k), []).append(
                    (s, sel[ok], width_of[sel][ok], inside[ok], np.zeros(int(ok.sum()))))
    for key, items in sorted(wanted.items()):
        sel = np.concatenate([it[1] for it in items])
        if sel.size == 0:
            continue
        owner = np.concatenate([np.full(it[1].size, it[0]) for it in items])
        w = np.concatenate([it[2] for it in items])
        length = np.concatenate([it[3] for it in items])
        gap = np.concatenate([it[4] for it in items])
        if key[0] == "edge":
            wide = 1.0
            edge = EdgeModel(st, key[1], np.concatenate([w, [wide]]), max_gap_mm=float(gap.max()),
                             min_gap_mm=float(gap.min()))
            per_m = edge.c12_per_m(w, np.full(w.size, wide), gap)
        else:
            i, k = key[1], key[2]
            wide = max(1.0, 10 * separation_mm(st, i, k))
            lo, hi = min(i, k), max(i, k)
            wa = w if i == lo else np.array([wide])
            wb = np.array([wide]) if i == lo else w
            model = BroadsideModel(st, lo, hi, wa, wb, max_offset_mm=0.01)
            per_m = model.c12_per_m(w, np.full(w.size, wide), 0.0) if i == lo else \
                model.c12_per_m(np.full(w.size, wide), w, 0.0)
        rows.append((owner, live[sel], per_m * length * 1e-3 * 1e12))
    if not rows:
        z = np.zeros(0, np.int64)
        return IslandLinks(z, z.copy(), z.copy(), np.zeros(0), ground)
    owner = np.concatenate([r[0] for r in rows]).astype(np.int64)
    piece = np.concatenate([r[1] for r in rows]).astype(np.int64)
    pf = np.concatenate([r[2] for r in rows])
    net = signal.net[piece].astype(np.int64)
    # one row per (island, net): summed C, and the piece contributing most
    n_nets = int(net.max()) + 1
    pair_key = owner * n_nets + net
    order = np.lexsort((-pf, pair_key))
    uniq, first, inv = np.unique(pair_key[order], return_index=True, return_inverse=True)
    total = np.bincount(inv, weights=pf[order])
    return IslandLinks(uniq // n_nets, uniq % n_nets, piece[order][first], total, ground)


def relays(links: IslandLinks, n_islands: int, notes: list[str]) -> Relays:
    """Kron-eliminate each island (module docstring): one row per pair of
    nets it couples to."""
    cols: dict[str, list] = {k: [] for k in ("island", "net_a", "net_b", "piece_a", "piece_b", "c_pf")}
    crowded = 0
    for s in range(n_islands):
        mine = np.flatnonzero(links.island == s)
        if mine.size < 2:
            continue
        if mine.size > MAX_NETS_PER_ISLAND:
            crowded += 1
        # the relay divides by the island's total C, so take every net for that
        total_c = links.c_pf[mine]
        keep = mine[np.argsort(-total_c, kind="stable")][:MAX_NETS_PER_ISLAND]
        keep = keep[np.argsort(links.net[keep], kind="stable")]
        extra = float(total_c.sum() - links.c_pf[keep].sum())
        add = relayed_mutual(links.c_pf[keep], links.ground_pf[s] + extra)
        a, b = np.triu_indices(keep.size, 1)
        cols["island"].append(np.full(a.size, s))
        cols["net_a"].append(links.net[keep][a])
        cols["net_b"].append(links.net[keep][b])
        cols["piece_a"].append(links.piece[keep][a])
        cols["piece_b"].append(links.piece[keep][b])
        cols["c_pf"].append(add[a, b])
    if crowded:
        notes.append(f"{crowded} floating island(s) couple to more than {MAX_NETS_PER_ISLAND} nets: relays "
                     f"worked out for the {MAX_NETS_PER_ISLAND} most strongly coupled ones")
    if not cols["island"]:
        z = np.zeros(0, np.int64)
        return Relays(z, z.copy(), z.copy(), z.copy(), z.copy(), np.zeros(0))
    island, net_a, net_b, piece_a, piece_b, c_pf = (np.concatenate(cols[k]) for k in
                                                   ("island", "net_a", "net_b", "piece_a", "piece_b", "c_pf"))
    return Relays(island, net_a, net_b, piece_a, piece_b, c_pf)
