"""Seeded synthetic routing for benchmarks: ``make_pieces`` and ``make_board``.

Each layer gets many nets, one polyline per net of 20-50 pieces. A polyline
keeps a heading along the layer's preferred axis (x on even layers, y on odd
ones) and each piece runs along that axis (60 %), at 45 degrees to it (25 %),
across it (10 %) or at a random angle within 60 degrees of it (5 %); it never
doubles back. Piece lengths: 1-5 mm along the axis, 0.3-1.5 mm otherwise.
Widths per net: 0.10, 0.15, 0.20, 0.25 or 0.30 mm. The board is square, sized
so copper covers about 20 % of each layer, and each polyline is placed at a
random spot where it fits. Layer-1 nets are new nets except for about 10 %
that continue a layer-0 net (as through a via).

Run as a script to print a summary: ``python scripts/synth.py 100000``.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from checker.model import (  # noqa: E402
    Board,
    CopperLayer,
    Dielectric,
    Net,
    Pieces,
    Stackup,
)

COVERAGE = 0.20
WIDTHS = np.array([0.10, 0.15, 0.20, 0.25, 0.30])


def _layer(n: int, rng: np.random.Generator, vertical: bool):
    """Polylines for one layer, relative to each polyline's start: returns
    vertex offsets, widths, polyline id and ordinal per piece."""
    sizes = []
    total = 0
    while total < n:
        k = int(rng.integers(20, 51))
        k = min(k, n - total)
        sizes.append(k)
        total += k
    sizes = np.array(sizes, dtype=np.int64)
    line = np.repeat(np.arange(sizes.size), sizes)
    ordinal = np.arange(n) - np.repeat(np.cumsum(sizes) - sizes, sizes)
    heading = rng.choice([-1.0, 1.0], size=sizes.size)[line]
    side = rng.choice([-1.0, 1.0], size=n)
    kind = rng.choice(4, size=n, p=[0.60, 0.25, 0.10, 0.05])
    along = np.select([kind == 0, kind == 1, kind == 2], [1.0, np.sqrt(0.5), 0.0],
                      np.cos(np.radians(rng.uniform(-60, 60, n))))
    across = np.select([kind == 0, kind == 1, kind == 2], [0.0, np.sqrt(0.5), 1.0],
                       np.sqrt(1 - along ** 2)) * side
    length = np.where(kind == 0, rng.uniform(1.0, 5.0, n), rng.uniform(0.3, 1.5, n))
    da = heading * along * length
    dc = across * length
    dx, dy = (dc, da) if vertical else (da, dc)
    width = rng.choice(WIDTHS, size=sizes.size)[line]
    return dx, dy, width, line, ordinal, sizes


def make_pieces(n_per_layer: int, seed: int, layers: int = 2) -> Pieces:
    """``layers`` layers of ``n_per_layer`` pieces each (see module doc);
    nets, sources and ordinals are filled in, with no ``NO_NET`` pieces."""
    rng = np.random.default_rng(seed)
    made = [_layer(n_per_layer, rng, vertical=bool(k % 2)) for k in range(layers)]
    copper = max(float(np.sum(np.hypot(dx, dy) * w)) for dx, dy, w, *_ in made)
    side = float(np.sqrt(copper / COVERAGE)) if copper > 0 else 1.0
    cols: dict[str, list[np.ndarray]] = {k: [] for k in
                                         ("x1", "y1", "x2", "y2", "width", "net", "layer",
                                          "source", "ordinal")}
    net_base = 0
    src_base = 0
    first_layer_nets = 0
    for layer, (dx, dy, width, line, ordinal, sizes) in enumerate(made):
        starts = np.cumsum(sizes) - sizes
        ex, ey = np.cumsum(dx), np.cumsum(dy)                     # end points, unshifted
        ox = np.repeat(ex[starts] - dx[starts], sizes)            # each line's origin
        oy = np.repeat(ey[starts] - dy[starts], sizes)
        x2, y2 = ex - ox, ey - oy
        x1, y1 = x2 - dx, y2 - dy
        lo_x = np.minimum.reduceat(np.minimum(x1, x2), starts)
        hi_x = np.maximum.reduceat(np.maximum(x1, x2), starts)
        lo_y = np.minimum.reduceat(np.minimum(y1, y2), starts)
        hi_y = np.maximum.reduceat(np.maximum(y1, y2), starts)
        room_x = np.maximum(side - (hi_x - lo_x), 0.0)
        room_y = np.maximum(side - (hi_y - lo_y), 0.0)
        sx = rng.uniform(0, 1, sizes.size) * room_x - lo_x
        sy = rng.uniform(0, 1, sizes.size) * room_y - lo_y
        x1, x2 = x1 + sx[line], x2 + sx[line]
        y1, y2 = y1 + sy[line], y2 + sy[line]
        net = net_base + line
        if layer > 0 and first_layer_nets:
            reuse = rng.uniform(size=sizes.size) < 0.10
            net = np.where(reuse[line], rng.integers(0, first_layer_nets, sizes.size)[line], net)
        if layer == 0:
            first_layer_nets = sizes.size
        for k, v in (("x1", x1), ("y1", y1), ("x2", x2), ("y2", y2), ("width", width),
                     ("net", net), ("layer", np.full(x1.size, layer)),
                     ("source", src_base + line), ("ordinal", ordinal)):
            cols[k].append(v)
        net_base += sizes.size
        src_base += sizes.size
    return Pieces.from_columns(*(np.concatenate(cols[k]) for k in
                                 ("x1", "y1", "x2", "y2", "width", "net", "layer",
                                  "source", "ordinal")))


def make_board(n_per_layer: int, seed: int) -> Board:
    """A two-signal-layer board around ``make_pieces(n_per_layer, seed)``:
    35 um copper, 0.2 mm dielectric of er 4.2, nets ``N000000``..."""
    pieces = make_pieces(n_per_layer, seed, layers=2)
    stackup = Stackup(
        layers=(CopperLayer("L1", "signal", 0.035), CopperLayer("L2", "signal", 0.035)),
        dielectrics=(Dielectric(0.2, 4.2),),
    )
    n_nets = int(pieces.net.max()) + 1 if len(pieces) else 0
    n_sources = int(pieces.source.max()) + 1 if len(pieces) else 0
    return Board(
        name=f"synth-{n_per_layer}-{seed}",
        path=f"<synthetic n_per_layer={n_per_layer} seed={seed}>",
        stackup=stackup,
        nets=tuple(Net(f"N{i:06d}") for i in range(n_nets)),
        pieces=pieces,
        sources=tuple(f"tracks[{i}]" for i in range(n_sources)),
    )


def _summary(pieces: Pieces) -> str:
    lines = []
    x0, x1 = min(pieces.x1.min(), pieces.x2.min()), max(pieces.x1.max(), pieces.x2.max())
    y0, y1 = min(pieces.y1.min(), pieces.y2.min()), max(pieces.y1.max(), pieces.y2.max())
    area = (x1 - x0) * (y1 - y0)
    for layer in np.unique(pieces.layer):
        m = pieces.layer == layer
        copper = float(np.sum(pieces.length[m] * pieces.width[m]))
        nets = np.unique(pieces.net[m]).size
        lines.append(f"layer {layer}: {int(m.sum())} pieces, {nets} nets, "
                     f"mean length {pieces.length[m].mean():.2f} mm, coverage {copper / area:.1%}")
    lines.append(f"board {x1 - x0:.1f} x {y1 - y0:.1f} mm")
    return "\n".join(lines)


if __name__ == "__main__":
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 10000
    print(_summary(make_pieces(n, seed=1)))
