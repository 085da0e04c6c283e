"""A net's own pieces side by side (meanders, parallel legs), for its capacitance to ground.

The victim node's whole capacitance (``analysis.node_total_pf``) starts from
the sum of its pieces' capacitance to ground, each computed alone. Where two
pieces of the same net run side by side, that sum counts twice the field
they share: for two parallel legs 1 and 2 of one net, the net's capacitance
to ground is C11 + C22 + 2 C12 (Maxwell form, C12 < 0), i.e. C11 + C22 - 2
|C12|, and each leg's Cii with the other leg beside it is at least its value
alone. So

    sum of the legs alone - 2 x (their mutual capacitance)

is still a lower bound of the net's capacitance to ground, which is what the
noise estimate needs (a lower bound: the noise errs high). This module finds
the same-net side-by-side pairs of the nets that are victims (a
``resistance``) on each layer, with the edge finder, and prices their mutual
capacitance with the layer's field-solved edge table. Pieces joined end to end
overlap along no length and add nothing; pieces of one net whose copper
overlaps side by side (a trace drawn as several strokes) are one conductor,
and there the narrower one's own capacitance to ground over the overlap is
what the sum counted twice; same-net pieces on different layers
(a net over itself) are not looked for (the sum then errs high there: noted).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from .finder.pairs import find_edge
from .model import NO_NET, Board
from .physics.edge import EdgeModel, GroundModel

#: the analysis' key for a layer's edge model (``analysis.EDGE``)
EDGE = 1

#: Gaps below this (mm) are priced at it (as ``analysis.EDGE_GAP_FLOOR_MM``).
GAP_FLOOR_MM = 0.01


def own_mutual_pf(board: Board, victims: np.ndarray, search_mm: float, parallel_angle_deg: float,
                  models: dict | None = None) -> np.ndarray:
    """Per net: the summed mutual capacitance (pF) between its own pieces
    that run side by side on one layer, for the nets flagged in ``victims``
    (a boolean array over nets); 0 elsewhere. ``models``: the analysis'
    C12' models by (kind, layer, layer); a layer's edge model found there is
    asked (its tables fill in lazily) instead of building another."""
    out = np.zeros(len(board.nets))
    p = board.pieces
    net = p.net.astype(np.int64)
    mine = (net != NO_NET)
    mine[mine] = victims[net[mine]]
    if not mine.any():
        return out
    # every victim piece its own "net", so the finder keeps pairs of one real net
    fake = np.where(mine, np.arange(len(p)), NO_NET).astype(np.int32)
    own = replace(p, net=fake)
    for layer in np.unique(p.layer[mine]).tolist():
        t = find_edge(own, int(layer), search_mm, parallel_angle_deg)
        if len(t) == 0:
            continue
        same = net[t.a] == net[t.b]
        if not same.any():
            continue
        a, b = t.a[same], t.b[same]
        gap, length = t.gap_mm[same], t.length_mm[same]
        wa, wb = p.width[a], p.width[b]
        pf = np.zeros(a.size)
        apart = gap > 0
        if apart.any():
            model = _edge_model(board, int(layer), wa[apart], wb[apart], np.maximum(gap[apart], GAP_FLOOR_MM),
                                models)
            pf[apart] = model.c12_per_m(wa[apart], wb[apart], np.maximum(gap[apart], GAP_FLOOR_MM)) \
                * length[apart] * 1e-3 * 1e12
        if (~apart).any():
            # overlapping copper of one net is one conductor: the sum counted the narrower piece's own
            # capacitance to ground twice over the overlap (the x2 in the caller takes off half each)
            narrow = np.minimum(wa[~apart], wb[~apart])
            ground = GroundModel(board.stackup, int(layer), narrow)
            pf[~apart] = 0.5 * ground.c_per_m(narrow) * length[~apart] * 1e-3 * 1e12
        out += np.bincount(net[a], weights=pf, minlength=len(out))
    return out


def _edge_model(board: Board, layer: int, wa, wb, gap, models: dict | None):
    """The analysis' field-solved edge model of ``layer`` where it covers
    these widths (its width knots span them: outside, clamping to a knot
    would read C12 low, which here would take off too little), else one
    built for them."""
    model = (models or {}).get((EDGE, layer, layer))
    if isinstance(model, EdgeModel):
        knots = model.widths_knots
        if knots[0] <= min(wa.min(), wb.min()) and max(wa.max(), wb.max()) <= knots[-1]:
            return model
    return EdgeModel(board.stackup, layer, np.concatenate([wa, wb]), max_gap_mm=float(gap.max()),
                     min_gap_mm=float(gap.min()))
