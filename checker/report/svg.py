"""Annotated SVG overlay: the copper of the layers involved, with every
finding's coupled stretch marked and numbered.

The picture is in board millimetres with y up, as seen from the top: the
``viewBox`` is the board bounds (or the requested ``view``) plus a margin, and
the copper sits in a group flipped with ``matrix(1 0 0 -1 0 F)`` where
``F = ymin + ymax`` of the framed area, so board y and SVG y cover the same
range. Text is never placed inside the flipped group, so it is never
mirrored. A legend band (board name, layer colours, symbols, scale bar) sits
under the drawing.

Sizes of text, markers and annotation strokes are a fixed fraction of the
larger side of the framed area: text is :data:`TEXT_PX` pixels high when
that side is shown ``width_px`` pixels long, whatever the board's size in
mm. Copper is drawn at its real width, but never thinner than about one
output pixel.

Colours come from the Okabe-Ito palette, a set of eight colours chosen to
stay distinguishable for the common forms of colour-vision deficiency:
M. Okabe and K. Ito, "Color Universal Design (CUD): how to make figures and
presentations that are friendly to colorblind people", J*Fly, 2002/2008,
https://jfly.uni-koeln.de/color/ ; reprinted as B. Wong, "Points of view:
Color blindness", Nature Methods 8, 441 (2011), doi:10.1038/nmeth.1618.
Severity is never told by colour alone: errors are round markers with solid
outlines, warnings square markers with dashed outlines, waived findings
white markers with a dotted outline and a strike.

Output is deterministic: coordinates are rounded to 1 um (copper and
stretches to 10 um where a pixel is at least 40 um) and printed with a
fixed format, elements come in a fixed order, and ids derive from finding ids
(``f-<id>`` for a callout, ``s-<id>`` for its coupled stretch). Every piece
of text from the input is escaped; the output has no scripts, no event
attributes, no external references and no XML declaration (so it can be
inlined into HTML as is); the one embedded image, a large board's traces,
is a ``data:`` PNG (:mod:`.raster`).

A picture with more than :data:`CLUSTER_ABOVE` callouts groups findings
close together into cluster markers; a close-up of one finding names its
two nets on the copper and draws vias and the nets' pads.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, cast
from xml.sax.saxutils import escape, quoteattr

import numpy as np
import shapely

from ..checks import REGISTRY
from ..coupling import BROADSIDE, EDGE
from ..findings import Finding
from ..model import Board
from . import raster
from .visible import xml_visible

#: The Okabe-Ito palette (name -> sRGB hex), in the order of its publication.
OKABE_ITO: dict[str, str] = {
    "black": "#000000",
    "orange": "#E69F00",
    "sky blue": "#56B4E9",
    "bluish green": "#009E73",
    "yellow": "#F0E442",
    "blue": "#0072B2",
    "vermillion": "#D55E00",
    "reddish purple": "#CC79A7",
}

#: Paul Tol's "muted" qualitative scheme (name -> sRGB hex), designed to stay
#: distinct for colour-blind readers: P. Tol, "Colour Schemes", SRON technical
#: note SRON/EPS/TN/09-002 (issue 3.2, 2021), https://personal.sron.nl/~pault/
#: (hex values as published there; quoted from memory, checked by the test below).
TOL_MUTED: dict[str, str] = {
    "indigo": "#332288", "cyan": "#88CCEE", "teal": "#44AA99", "green": "#117733", "olive": "#999933",
    "sand": "#DDCC77", "rose": "#CC6677", "wine": "#882255", "purple": "#AA4499",
}

#: Copper layer colours by stackup position (top = first), cycling on boards
#: with more copper layers: chosen from the two palettes above so that any two
#: layers up to two apart in the cycle differ by a CIEDE2000 of at least 15
#: (15.2 measured) for normal vision and the three dichromacies (Machado et al. 2009
#: simulation) drawn at :data:`COPPER_OPACITY` on white, neighbours also in
#: lightness (at least 13 L*, so a grey print tells them apart), every one
#: dark enough to see as a thin line (L* at most 88), none near a severity
#: colour; measured with the colour-science library in
#: tests/test_layer_colours.py. Orange and vermillion are kept for
#: severities, black for annotations.
LAYER_COLOURS: tuple[str, ...] = (
    TOL_MUTED["indigo"], TOL_MUTED["green"], OKABE_ITO["sky blue"], TOL_MUTED["wine"], TOL_MUTED["sand"],
    OKABE_ITO["reddish purple"])

SEVERITY_COLOURS: dict[str, str] = {"error": OKABE_ITO["vermillion"], "warning": OKABE_ITO["orange"]}
WAIVED_COLOUR = OKABE_ITO["black"]
BACKGROUND = "#FFFFFF"

#: Opacity of copper traces, of pours on signal / mixed layers, and of planes.
COPPER_OPACITY = 0.7
POUR_OPACITY = 0.14
PLANE_OPACITY = 0.06

#: Text height in output pixels when the larger side of the framed area is
#: ``width_px`` long (1/64 of it at the default 960 px); every other
#: annotation size is a multiple of the text height.
TEXT_PX = 15.0

#: Margin around the framed area, in text heights (room for callouts).
MARGIN = 3.0

#: A coupled stretch is drawn this many text heights wider than its copper
#: on every side, under the traces, so it reads as a halo around them.
HALO = 0.25

#: Copper is never drawn thinner than this many output pixels.
MIN_COPPER_PX = 0.8
#: Pours and planes are drawn to within this many output pixels of their
#: outline (Douglas-Peucker): a quarter pixel is invisible.
REGION_TOLERANCE_PX = 0.25
#: Pictures whose pixel is at least this many mm round copper coordinates to
#: 10 um instead of 1 um (a quarter pixel or less: the same picture, some 20 %
#: fewer bytes)
COARSE_GRID_PX_MM = 0.04
#: Copper shapes of a close-up's two nets up to this area (mm^2) are pads
#: and drawn at copper strength; larger ones are pours and stay light
PAD_MAX_MM2 = 4.0
#: A finding with more bands than this in the picture has them drawn as one
#: merged outline (filled even-odd) instead of one quadrilateral each
MERGE_BANDS_ABOVE = 12
#: A clustered overview merges up to this many bands into vector outlines;
#: more are painted as an image (merging 35 000 overlapping bands: 5 s)
MERGED_VECTOR_BANDS = 3000

#: more callouts than this in one picture: findings whose spots share a
#: cell of :data:`CLUSTER_CELL` text heights are drawn as one cluster marker
#: (their count; its shape the worst severity), lone ones keep their callout
CLUSTER_ABOVE = 60
CLUSTER_CELL = 6.0

_FONT = "DejaVu Sans, Verdana, Arial, sans-serif"


# --------------------------------------------------------------------------
# public API


def finding_number(result) -> dict[str, int]:
    """Finding id -> its 1-based position in ``result.findings`` (the number
    the terminal table and the HTML report show). Should two findings share
    an id, the first keeps it."""
    out: dict[str, int] = {}
    for i, f in enumerate(result.findings, 1):
        out.setdefault(f.id, i)
    return out


def svg_per_layer_group(result) -> dict[str, str]:
    """One overlay per layer group that has findings: key ``"TOP-IN1"`` (the
    finding's layer names joined by ``-``, stackup order), value the SVG text
    drawn with exactly those layers. Keys come in stackup order."""
    board = result.analysis.board
    position = {name: i for i, name in enumerate(board.stackup.names)}
    groups: dict[tuple[str, ...], None] = {}
    for f in result.findings:
        groups.setdefault(tuple(sorted(f.layers, key=lambda n: position.get(n, len(position)))), None)
    ordered = sorted(groups, key=lambda g: ([position.get(n, len(position)) for n in g], g))
    return {"-".join(g): render_svg(result, layers=g) for g in ordered if g}


def render_svg(result, *, layers: tuple[str, ...] | None = None,
               view: tuple[float, float, float, float] | None = None,
               only: str | None = None, width_px: int = 960, reuse: dict | None = None,
               compact_legend: bool = False) -> str:
    """The annotated overlay of ``result`` as SVG text.

    ``layers``: copper layer names to draw (default: every layer some
    finding names, or every layer with copper when there are no findings).
    A finding gets a callout when all its layers are drawn and its extent
    meets the framed area. ``view`` = (xmin, ymin, xmax, ymax) in mm frames
    that region instead of the whole board; copper outside it is left out.
    ``only`` = a finding id: only that finding gets a callout and a strong
    mark; the other findings' stretches are drawn faintly, unnumbered.
    ``width_px``: the width attribute of the picture (its height follows the
    aspect ratio); it also sets the thinnest copper drawn. ``reuse``: a dict
    the caller keeps across pictures of the same ``result`` (the sign-off
    report's close-ups), so work over the whole board is done once.
    ``compact_legend``: the legend names the layers and the scale only (the
    sign-off report's cards, whose symbols the overview's legend explains).

    A close-up (``only`` with a ``view``) also draws the vias in the view,
    the pads and other small copper of the finding's two nets at copper
    strength, and the two nets' names on their copper.

    Raises ``ValueError`` for an unknown layer name or finding id, an empty
    or non-finite ``view``, or a ``width_px`` below 16.
    """
    analysis = result.analysis
    board: Board = analysis.board
    findings: list[Finding] = list(result.findings)
    if reuse is not None and reuse.get("analysis") is analysis and reuse.get("findings") == len(findings):
        rows_of = reuse["rows"]
    else:
        rows_of = _RowFinder(analysis, findings, finding_number(result))
        if reuse is not None:
            reuse.update(analysis=analysis, rows=rows_of, findings=len(findings))
    numbers = rows_of.numbers
    waived = getattr(getattr(result, "review", None), "waived", {}) or {}
    if isinstance(width_px, bool) or not isinstance(width_px, int) or width_px < 16:
        raise ValueError(f"width_px must be an integer >= 16, got {width_px!r}")
    if only is not None and only not in numbers:
        raise ValueError(f"only: no finding with id {only!r} among the {len(numbers)} findings")
    drawn = _drawn_layers(board, findings, layers, rows_of.named_bits)
    frame = _Frame.make(board, view, width_px)

    # which findings are marked, and how: all their layers drawn (else part of their coupling is on a
    # layer not drawn; the finding called out is always drawn), their extent meeting the framed area,
    # a duplicate id once (ids must be unique in the document)
    drawn_bits = sum(1 << k for k in drawn)
    b = rows_of.boxes
    keep = (((rows_of.layer_bits & ~drawn_bits) == 0) | rows_of.is_id(only)) & ~rows_of.duplicate
    if len(findings):
        keep &= ~((b[:, 2] < frame.vx0) | (b[:, 0] > frame.vx1) | (b[:, 3] < frame.vy0) | (b[:, 1] > frame.vy1))
    shown: list[Finding] = [findings[i] for i in np.flatnonzero(keep).tolist()]
    callouts = [f for f in shown if only is None or f.id == only]
    # what explains the findings called out (a close-up explains its own finding, not the faint others)
    context, context_kinds = _context(analysis, callouts, frame, rows_of)
    legend = _Legend(frame, board, drawn, callouts, waived, context_kinds,
                     clustered=only is None and len(callouts) > CLUSTER_ABOVE, compact=compact_legend)
    target = next((f for f in callouts if f.id == only), None) if frame.cropped else None
    frame.set_band(legend.height)

    out: list[str] = []
    names = ", ".join(board.stackup.layers[k].name for k in drawn) or "no layers"
    title = f"{board.name}: coupling findings on {names}"
    out.append(
        f'<svg xmlns="http://www.w3.org/2000/svg" version="1.1" width="{width_px}" '
        f'height="{frame.height_px()}" viewBox="{frame.viewbox()}" font-family={quoteattr(_FONT)} role="img">')
    out.append(f"<title>{_text(title)}</title>")
    out.append(f'<rect x="{_f(frame.vx0)}" y="{_f(frame.vy0)}" width="{_f(frame.vw)}" '
               f'height="{_f(frame.vh + frame.band)}" fill="{BACKGROUND}"/>')
    out.append(f'<g transform="matrix(1 0 0 -1 0 {_f(frame.flip)})">')
    # pours and planes, then the marked stretches (as a halo under the
    # traces, faint ones first), then the traces, upper layers last
    out.extend(_regions(board, drawn, frame, _nets_of(rows_of.net, target)))
    out.extend(context)
    clustered = only is None and len(callouts) > CLUSTER_ABOVE
    if clustered:  # thousands of findings: their stretches merged by look, not one group each
        inside, outside = _stretches_merged(analysis, shown, rows_of, frame, waived)
        out.extend(inside)
        if outside:  # painted bands, in SVG coordinates, under the traces
            out += ["</g>", *outside, f'<g transform="matrix(1 0 0 -1 0 {_f(frame.flip)})">']
    elif only is not None:  # a close-up: the other findings' bands faintly, then the finding's own
        out.extend(_faint_bands(findings, {f.id for f in shown if f.id != only}, rows_of, frame, waived))
        target = next(f for f in shown if f.id == only)
        out.extend(_stretch(analysis, target, rows_of(target), frame, False, target.id in waived))
    else:
        for f in shown:
            out.extend(_stretch(analysis, f, rows_of(f), frame, False, f.id in waived))
    per_layer = _pieces_in_frame(board, drawn, frame)
    if sum(int(on.size) for _, on in per_layer) > raster.RASTER_ABOVE:
        # too many pieces for vectors (a 320 000-piece board: 12 MB of paths): one image of them, in SVG
        # coordinates, between the flipped group's marks and its outline
        out.append("</g>")
        out.extend(_traces_image(board, per_layer, frame))
        out.append(f'<g transform="matrix(1 0 0 -1 0 {_f(frame.flip)})">')
    else:
        out.extend(_traces(board, per_layer, frame))
    if target is not None:
        out.extend(_vias(board, drawn, frame))
    out.extend(_outline(board, frame))
    out.append("</g>")
    placer = _Placer(frame)
    if target is not None:
        labels, spots = _net_labels(board, target, per_layer, frame, rows_of.net)
        out.extend(labels)
        for x, y, half in spots:  # the callout keeps clear of the labels
            for k in range(-int(half / placer.cell), int(half / placer.cell) + 1):
                placer.block(x + k * placer.cell, y)
    # the worst findings get the first pick of places, and are drawn last (on top); on a crowded
    # picture, findings close together first become clusters, which keep their places
    singles, clusters = _clusters(callouts, frame) if clustered else (callouts, [])
    cluster_places = [placer.place(c.at, first_free=True) for c in clusters]
    places = [placer.place(f.at) for f in singles]
    for f, place in reversed(list(zip(singles, places, strict=True))):
        out.extend(_callout(f, numbers[f.id], frame, place, placer.r, waived.get(f.id)))
    for i, (c, place) in reversed(list(enumerate(zip(clusters, cluster_places, strict=True)))):
        out.extend(_cluster_marker(c, i, numbers, waived, frame, place, placer.r))
    out.extend(legend.draw())
    out.append("</svg>")
    return "\n".join(out) + "\n"


# --------------------------------------------------------------------------
# number formatting and text


def _f(v: float) -> str:
    """A length in mm rounded to 1 um, without trailing zeros (never ``-0``)."""
    return f"{round(float(v) * 1000) / 1000 + 0.0:.3f}".rstrip("0").rstrip(".")


def _gs(q: np.ndarray, per_mm: int) -> list[str]:
    """Whole grid steps ``q`` (``per_mm`` of them per mm: 1000 or 100) as
    mm without trailing zeros: exact, since a grid step has three or two
    decimals."""
    digits = 3 if per_mm == 1000 else 2
    v = np.asarray(q, dtype=np.float64) / per_mm + 0.0
    return [t.rstrip("0").rstrip(".") for t in map(f"{{:.{digits}f}}".format, v.tolist())]


def _fs(a: np.ndarray) -> list[str]:
    """:func:`_f` over an array: round to whole um (adding 0.0 turns -0.0
    into 0.0), print with three decimals, which is exact for a whole number
    of um, then trim the zeros."""
    q = np.rint(np.asarray(a, dtype=np.float64) * 1000) / 1000 + 0.0
    return [t.rstrip("0").rstrip(".") for t in map("{:.3f}".format, q.tolist())]


def _clean(s: str) -> str:
    """Characters XML 1.0 cannot carry or discourages (control characters,
    lone surrogates, U+FFFE/U+FFFF) shown as ``\\xNN`` escapes."""
    return xml_visible(s)


def _text(s: str) -> str:
    """Escaped element text."""
    return escape(_clean(s))


def _attr(s: str) -> str:
    """A quoted, escaped attribute value."""
    return quoteattr(_clean(s), {"\n": "&#10;", "\r": "&#13;", "\t": "&#9;"})


def _id(finding_id: str) -> str:
    """A finding id reduced to characters safe in an XML id."""
    return "".join(ch if ch.isascii() and (ch.isalnum() or ch in "-_") else "_" for ch in str(finding_id))


def _g(v: float) -> str:
    """A measured value for people, 4 significant digits."""
    return f"{v:.4g}" if math.isfinite(v) else str(v)


# --------------------------------------------------------------------------
# frame: what part of the board is shown, and the size of everything


@dataclass
class _Frame:
    x0: float  # framed board area (mm), before the margin
    y0: float
    x1: float
    y1: float
    unit: float  # text height (mm)
    margin: float
    width_px: int
    band: float = 0.0  # legend band height under the drawing
    cropped: bool = False

    @classmethod
    def make(cls, board: Board, view, width_px: int) -> _Frame:
        if view is not None:
            try:
                x0, y0, x1, y1 = (float(v) for v in view)
            except (TypeError, ValueError):
                raise ValueError(f"view must be (xmin, ymin, xmax, ymax) in mm, got {view!r}") from None
            if not all(math.isfinite(v) for v in (x0, y0, x1, y1)) or x1 <= x0 or y1 <= y0:
                raise ValueError(f"view must be finite with xmax > xmin and ymax > ymin, got {view!r}")
            cropped = True
        else:
            x0, y0, x1, y1 = board.bounds()
            cropped = False
        if x1 - x0 < 1e-3:  # a degenerate board still gets a drawable frame
            x0, x1 = x0 - 0.5, x1 + 0.5
        if y1 - y0 < 1e-3:
            y0, y1 = y0 - 0.5, y1 + 0.5
        size = max(x1 - x0, y1 - y0)
        unit = size * TEXT_PX / width_px
        return cls(x0, y0, x1, y1, unit, MARGIN * unit, width_px, cropped=cropped)

    # framed area with margin, in board coordinates
    @property
    def vx0(self) -> float:
        return self.x0 - self.margin

    @property
    def vx1(self) -> float:
        return self.x1 + self.margin

    @property
    def vy0(self) -> float:
        return self.y0 - self.margin

    @property
    def vy1(self) -> float:
        return self.y1 + self.margin

    @property
    def vw(self) -> float:
        return self.vx1 - self.vx0

    @property
    def vh(self) -> float:
        return self.vy1 - self.vy0

    @property
    def flip(self) -> float:
        """SVG y = flip - board y."""
        return self.vy0 + self.vy1

    def sy(self, y: float) -> float:
        return self.flip - y

    def set_band(self, band: float) -> None:
        self.band = band

    def viewbox(self) -> str:
        return f"{_f(self.vx0)} {_f(self.vy0)} {_f(self.vw)} {_f(self.vh + self.band)}"

    def height_px(self) -> int:
        return max(1, int(round(self.width_px * (self.vh + self.band) / self.vw)))

    def px(self) -> float:
        """One output pixel in mm."""
        return self.vw / self.width_px

    @property
    def per_mm(self) -> int:
        """Grid steps per mm that copper and stretch coordinates are
        rounded to: 1000 (um), or 100 (10 um) where a pixel is at least
        :data:`COARSE_GRID_PX_MM`, so a step stays a quarter pixel or less."""
        return 100 if self.px() >= COARSE_GRID_PX_MM else 1000

    def stroke(self, k: float = 1.0) -> float:
        """An annotation stroke width (mm): ``k`` times the basic one."""
        return 0.07 * self.unit * k

    def meets(self, bbox) -> bool:
        """Whether a finding's bbox touches the framed area with margin."""
        bx0, by0, bx1, by1 = bbox
        return not (bx1 < self.vx0 or bx0 > self.vx1 or by1 < self.vy0 or by0 > self.vy1)


# --------------------------------------------------------------------------
# copper


def _drawn_layers(board: Board, findings: list[Finding], layers, named_bits: int | None = None) -> list[int]:
    """Stackup indices of the layers to draw, top first. ``named_bits``:
    the layers the findings name, one bit per stackup index, if known."""
    names = board.stackup.names
    if layers is not None:
        if isinstance(layers, str):
            layers = (layers,)
        unknown = [n for n in layers if n not in names]
        if unknown:
            raise ValueError(f"layers: unknown copper layer {unknown[0]!r}; layers: {', '.join(names)}")
        wanted = set(layers)
    else:
        if named_bits is not None:
            wanted = {n for k, n in enumerate(names) if named_bits >> k & 1}
        else:
            wanted = {n for f in findings for n in f.layers if n in names}
        if not wanted:
            with_copper = set(np.unique(board.pieces.layer).tolist()) | {r.layer for r in board.regions}
            wanted = {names[k] for k in with_copper if 0 <= k < len(names)}
    return [k for k, n in enumerate(names) if n in wanted]


def _nets_of(index: dict[str, int], f: Finding | None) -> set[int]:
    """Net indices of a finding's aggressor and victim (none for ``None``);
    ``index``: net name -> index."""
    if f is None:
        return set()
    return {index[n] for n in (f.aggressor, f.victim) if n in index}


def _regions(board: Board, drawn: list[int], frame: _Frame,
             strong_nets: set[int] | frozenset[int] = frozenset()) -> list[str]:
    """Pours (and, fainter, planes) of the drawn layers as light fills with
    their holes, bottom layer first. Small copper (pads: at most
    :data:`PAD_MAX_MM2`) of ``strong_nets`` is drawn at copper strength, so a
    close-up shows where its two nets land."""
    out: list[str] = []
    box = shapely.box(frame.vx0, frame.vy0, frame.vx1, frame.vy1)
    min_w = MIN_COPPER_PX * frame.px()
    # a pour's outline to a quarter of a pixel: the same picture, without the thousands of vertices of
    # antipads and thermal reliefs no screen or print shows (the whole-board overview of a six-layer
    # export: 10.9 MB of pours before)
    tolerance = REGION_TOLERANCE_PX * frame.px()
    for k in reversed(drawn):
        layer = board.stackup.layers[k]
        colour = LAYER_COLOURS[k % len(LAYER_COLOURS)]
        opacity = PLANE_OPACITY if layer.role == "plane" else POUR_OPACITY
        paths = []
        for r in board.regions:
            if r.layer != k:
                continue
            shape = r.polygon
            if frame.cropped:
                shape = shapely.clip_by_rect(shape, frame.vx0, frame.vy0, frame.vx1, frame.vy1)
            elif not shape.intersects(box):
                continue
            d = _polygon_path(shapely.simplify(shape, tolerance, preserve_topology=False), frame.per_mm)
            if d and r.net in strong_nets and r.polygon.area <= PAD_MAX_MM2:
                paths.append(f'<path d="{d}" fill="{colour}" fill-opacity="{COPPER_OPACITY}" fill-rule="evenodd" '
                             f'data-role="pad"/>')
            elif d:
                paths.append(f'<path d="{d}" fill="{colour}" fill-opacity="{opacity}" fill-rule="evenodd" '
                             f'stroke="{colour}" stroke-opacity="{min(1.0, opacity * 3):.2f}" '
                             f'stroke-width="{_f(max(frame.stroke(0.5), min_w / 2))}"/>')
        if paths:
            out += [f'<g data-layer={_attr(layer.name)} data-role="regions">', *paths, "</g>"]
    return out


def _pieces_in_frame(board: Board, drawn: list[int], frame: _Frame) -> list[tuple[int, np.ndarray]]:
    """(layer, indices of its pieces that meet the framed area), bottom
    layer first, layers without such pieces left out."""
    p = board.pieces
    if not len(p):
        return []
    half = p.width / 2
    inside = ~((np.maximum(p.x1, p.x2) + half < frame.vx0) | (np.minimum(p.x1, p.x2) - half > frame.vx1)
               | (np.maximum(p.y1, p.y2) + half < frame.vy0) | (np.minimum(p.y1, p.y2) - half > frame.vy1))
    out = []
    for k in reversed(drawn):
        on = np.flatnonzero((p.layer == k) & inside)
        if on.size:
            out.append((k, on))
    return out


def _traces(board: Board, per_layer: list[tuple[int, np.ndarray]], frame: _Frame) -> list[str]:
    """Pieces of the drawn layers as round-capped strokes of their width
    (at least :data:`MIN_COPPER_PX` pixels), bottom layer first so upper
    layers lie on top; one path per (layer, width), only pieces that meet
    the framed area."""
    out: list[str] = []
    p = board.pieces
    min_w = MIN_COPPER_PX * frame.px()
    for k, on in per_layer:
        layer = board.stackup.layers[k]
        colour = LAYER_COLOURS[k % len(LAYER_COLOURS)]
        out.append(f'<g data-layer={_attr(layer.name)} data-role="traces">')
        q = np.rint(p.width[on] * 1000).astype(np.int64)
        for wq in np.unique(q).tolist():
            sel = on[q == wq]
            # each piece: its start, then the step to its end (whole um: exact, and shorter); a piece
            # that starts where the one before it ended (a polyline) continues it with its step alone
            g = frame.per_mm
            q1x, q1y = np.rint(p.x1[sel] * g), np.rint(p.y1[sel] * g)
            q2x, q2y = np.rint(p.x2[sel] * g), np.rint(p.y2[sel] * g)
            x1, y1 = _gs(q1x, g), _gs(q1y, g)
            dx, dy = _gs(q2x - q1x, g), _gs(q2y - q1y, g)
            joined = np.zeros(sel.size, bool)
            joined[1:] = (q1x[1:] == q2x[:-1]) & (q1y[1:] == q2y[:-1])
            d = "".join(f" {c} {e}" if j else f"M{a} {b}l{c} {e}"
                        for a, b, c, e, j in zip(x1, y1, dx, dy, joined.tolist(), strict=True))
            out.append(f'<path d="{d}" fill="none" stroke="{colour}" stroke-opacity="{COPPER_OPACITY}" '
                       f'stroke-width="{_f(max(wq / 1000, min_w))}" stroke-linecap="round" '
                       f'stroke-linejoin="round"/>')
        out.append("</g>")
    return out


def _traces_image(board: Board, per_layer: list[tuple[int, np.ndarray]], frame: _Frame) -> list[str]:
    """The same traces as one PNG (:mod:`.raster`) placed over the framed
    area, in SVG coordinates (outside the flipped group)."""
    scale = raster.RASTER_SCALE * frame.width_px / frame.vw  # PNG pixels per mm
    png, w, h = raster.traces_png(
        board.pieces, [(on, LAYER_COLOURS[k % len(LAYER_COLOURS)]) for k, on in per_layer],
        (frame.vx0, frame.vy0, frame.vx1, frame.vy1), scale, MIN_COPPER_PX * raster.RASTER_SCALE, COPPER_OPACITY)
    names = ", ".join(board.stackup.layers[k].name for k, _ in reversed(per_layer))
    count = sum(int(on.size) for _, on in per_layer)
    return [f'<image x="{_f(frame.vx0)}" y="{_f(frame.vy0)}" width="{_f(w / scale)}" height="{_f(h / scale)}" '
            f'preserveAspectRatio="none" data-role="traces-image" data-pieces="{count}" '
            f'href="{raster.data_uri(png)}"><title>{_text(f"{count} copper pieces on {names}, drawn as an image")}'
            "</title></image>"]


def _vias(board: Board, drawn: list[int], frame: _Frame) -> list[str]:
    """Plated holes through any drawn layer inside the framed area: the
    pad as a dark ring, the drill as a white hole (board coordinates)."""
    v = board.vias
    if not len(v) or not drawn:
        return []
    lo, hi = min(drawn), max(drawn)
    r = v.pad / 2
    on = np.flatnonzero((v.first_layer <= hi) & (v.last_layer >= lo)
                        & (v.x + r >= frame.vx0) & (v.x - r <= frame.vx1)
                        & (v.y + r >= frame.vy0) & (v.y - r <= frame.vy1))
    if not on.size:
        return []
    ring = frame.stroke(0.8)
    out = ['<g data-role="vias">']
    for i in on.tolist():
        pad_r, hole_r = float(v.pad[i]) / 2, float(v.drill[i]) / 2
        out.append(f'<circle cx="{_f(v.x[i])}" cy="{_f(v.y[i])}" r="{_f(max(pad_r - ring / 2, ring))}" '
                   f'fill="{BACKGROUND}" stroke="{OKABE_ITO["black"]}" stroke-opacity="0.7" '
                   f'stroke-width="{_f(ring)}"/>')
        if hole_r > ring:
            out.append(f'<circle cx="{_f(v.x[i])}" cy="{_f(v.y[i])}" r="{_f(hole_r)}" fill="{OKABE_ITO["black"]}" '
                       f'fill-opacity="0.25"/>')
    out.append("</g>")
    return out


def _net_labels(board: Board, f: Finding, per_layer: list[tuple[int, np.ndarray]], frame: _Frame,
                index: dict[str, int]) -> tuple[list[str], list[tuple[float, float, float]]]:
    """The finding's aggressor and victim named on their copper: each label
    beside that net's piece nearest the worst spot, moved along the piece
    (the aggressor one way, the victim the other) and off it on the side
    away from the other net, so labels of parallel traces do not sit on
    each other; black on a white halo (a white-stroked copy under it:
    viewers that ignore ``paint-order`` show it too), in SVG coordinates. A
    printed report keeps them; hover titles it would not. Also returns
    where each label sits (board x, y and its estimated half width), so
    callouts can keep clear of it. ``index``: net name -> index."""
    p = board.pieces
    on = np.concatenate([idx for _, idx in per_layer]) if per_layer else np.zeros(0, np.int64)
    size = 0.8 * frame.unit
    ax, ay = f.at
    anchors: list[tuple[str, str, float, float, float, float]] = []  # name, role, x, y, along x, along y
    for net_name, role, sign in ((f.aggressor, "aggressor", 1.0), (f.victim, "victim", -1.0)):
        k = index.get(net_name)
        mine = on[p.net[on] == k] if k is not None and on.size else on[:0]
        if not mine.size:
            continue
        # the nearest point of each piece to the worst spot, then the nearest piece
        x1, y1, dx, dy = p.x1[mine], p.y1[mine], p.x2[mine] - p.x1[mine], p.y2[mine] - p.y1[mine]
        ll = dx * dx + dy * dy
        t = np.clip(((ax - x1) * dx + (ay - y1) * dy) / np.where(ll > 0, ll, 1.0), 0.0, 1.0)
        j = int(np.argmin(np.hypot(x1 + t * dx - ax, y1 + t * dy - ay)))
        length = math.sqrt(float(ll[j]))
        ux, uy = (float(dx[j]) / length, float(dy[j]) / length) if length > 0 else (1.0, 0.0)
        at = float(t[j]) * length
        if ux < 0 or (ux == 0 and uy < 0):  # "along" is rightwards (or up) for both nets
            ux, uy, at = -ux, -uy, length - at
            x0, y0 = float(x1[j] + dx[j]), float(y1[j] + dy[j])
        else:
            x0, y0 = float(x1[j]), float(y1[j])
        along = min(max(at + sign * min(4.0 * frame.unit, length / 2), 0.0), length)
        anchors.append((net_name, role, x0 + along * ux, y0 + along * uy, ux, uy))
    out: list[str] = []
    spots: list[tuple[float, float, float]] = []
    for i, (name, role, x, y, ux, uy) in enumerate(anchors):
        nx, ny = -uy, ux
        if ny < 0 or (ny == 0 and nx < 0):
            nx, ny = -nx, -ny  # "up" (or right) off the copper
        if len(anchors) == 2:  # off the copper, away from the other net's label
            ox, oy = anchors[1 - i][2], anchors[1 - i][3]
            apart = (x - ox) * nx + (y - oy) * ny
            if abs(apart) < 1.5 * size:  # stacked or close (a broadside pair): the aggressor above, the victim below
                apart = 1.0 if role == "aggressor" else -1.0
            if apart < 0:
                nx, ny = -nx, -ny
        lx = min(max(x + nx * size, frame.vx0 + 4 * size), frame.vx1 - 4 * size)
        ly = min(max(y + ny * size, frame.vy0 + size), frame.vy1 - size)
        where = f'x="{_f(lx)}" y="{_f(frame.sy(ly) + 0.35 * size)}" font-size="{_f(size)}" text-anchor="middle"'
        words = _text(f"{name} ({role})")
        out.append(f'<g data-role="net-label" data-net={_attr(name)}>'
                   f'<text {where} fill="none" stroke="{BACKGROUND}" stroke-width="{_f(0.3 * size)}" '
                   f'stroke-linejoin="round" aria-hidden="true">{words}</text>'
                   f'<text {where} fill="{OKABE_ITO["black"]}">{words}</text></g>')
        spots.append((lx, ly, 0.3 * size * len(f"{name} ({role})")))
    return out, spots


def _ring(coords, per_mm: int = 1000) -> str:
    """A closed subpath: the first corner absolute, the others as steps
    from the one before (``l``), all in whole grid steps (``per_mm`` per
    mm: um, or 10 um where a pixel is larger, see :attr:`_Frame.per_mm`),
    so the steps add up exactly to the rounded corners, in fewer
    characters."""
    xy = np.asarray(coords, dtype=np.float64)
    if xy.shape[0] < 3:
        return ""
    if np.array_equal(xy[0], xy[-1]):
        xy = xy[:-1]
    q = np.rint(xy * per_mm)
    step = np.diff(q, axis=0)
    head = _gs(q[0], per_mm)
    dx, dy = _gs(step[:, 0], per_mm), _gs(step[:, 1], per_mm)
    return f"M{head[0]} {head[1]}l" + " ".join(f"{a} {b}" for a, b in zip(dx, dy, strict=True)) + "Z"


def _polygon_path(shape, per_mm: int = 1000) -> str:
    """Path data of a (multi)polygon, holes as further subpaths (to be filled
    with ``fill-rule="evenodd"``)."""
    if shape.is_empty:
        return ""
    parts = getattr(shape, "geoms", [shape])
    d = []
    for g in parts:
        if g.geom_type != "Polygon" or g.is_empty:
            continue
        d.append(_ring(g.exterior.coords, per_mm))
        d.extend(_ring(h.coords, per_mm) for h in g.interiors)
    return "".join(d)


def _outline(board: Board, frame: _Frame) -> list[str]:
    if board.outline is None:
        return []
    d = _polygon_path(board.outline)
    if not d:
        return []
    return [f'<path d="{d}" fill="none" stroke="{OKABE_ITO["black"]}" stroke-width="{_f(frame.stroke(0.8))}" '
            f'data-role="outline"/>']


# --------------------------------------------------------------------------
# what shields or relays a finding: voids, islands, guards, stitching vias

#: legend words for the context shapes, in the order they are listed
CONTEXT_LABELS: dict[str, str] = {
    "void": "gap in reference copper between the layers",
    "island": "floating copper (relays coupling)",
    "guard": "guard trace (solid: grounded; dotted: not)",
    "stitch": "stitching via",
}


def _context_style(what: str, frame: _Frame) -> str:
    """Fill and stroke attributes of a context shape (black, white and
    yellow of the Okabe-Ito palette, told apart by dash pattern and shape
    as well as colour)."""
    u = frame.unit
    if what == "void":
        return (f'fill="{BACKGROUND}" fill-opacity="0.6" stroke="{OKABE_ITO["black"]}" '
                f'stroke-width="{_f(frame.stroke(0.8))}" stroke-dasharray="{_f(u * 0.4)} {_f(u * 0.25)}"')
    if what == "island":
        return (f'fill="{OKABE_ITO["yellow"]}" fill-opacity="0.45" stroke="{OKABE_ITO["black"]}" '
                f'stroke-width="{_f(frame.stroke(0.8))}" stroke-dasharray="{_f(u * 0.1)} {_f(u * 0.2)}"')
    if what == "stitch":
        return f'fill="{BACKGROUND}" stroke="{OKABE_ITO["black"]}" stroke-width="{_f(frame.stroke(0.8))}"'
    # black: a green of the palette would read as a layer's copper
    return f'fill="none" stroke="{OKABE_ITO["black"]}" stroke-width="{_f(frame.stroke(2.0))}"'


def _context_swatch(what: str, x: float, mid: float, u: float, frame: _Frame) -> list[str]:
    """A legend swatch for a context shape (``mid`` is an SVG y)."""
    if what == "stitch":
        return [f'<circle cx="{_f(x + 0.9 * u)}" cy="{_f(mid)}" r="{_f(0.35 * u)}" {_context_style(what, frame)}/>']
    if what == "guard":
        return [f'<line x1="{_f(x + 0.1 * u)}" y1="{_f(mid)}" x2="{_f(x + 1.8 * u)}" y2="{_f(mid)}" '
                f'{_context_style(what, frame)}/>']
    return [f'<rect x="{_f(x + 0.1 * u)}" y="{_f(mid - 0.4 * u)}" width="{_f(1.7 * u)}" height="{_f(0.8 * u)}" '
            f'{_context_style(what, frame)}/>']


def _context(analysis, shown: list[Finding], frame: _Frame, rows_of: _RowFinder) -> tuple[list[str], tuple[str, ...]]:
    """Shapes that explain the shown findings: the gaps in the reference
    copper between the layers of a partly shielded broadside run, floating
    islands that relay a net pair's coupling, guard traces in the gap of an
    edge-coupled pair and their stitching vias. Returns the SVG elements
    (board coordinates, inside the flipped group) and the kinds drawn."""

    c = analysis.couplings
    board = analysis.board
    ref = getattr(analysis, "reference", None)
    if not len(c) or not shown:
        return [], ()
    index = rows_of.net
    voids: dict[tuple[int, int], list] = {}
    islands: set[int] = set()
    guards: set[int] = set()
    for f in shown:
        ia, iv = index.get(f.aggressor), index.get(f.victim)
        if ia is None or iv is None:
            continue
        rows = rows_of.pair_rows(min(ia, iv), max(ia, iv))
        if not rows.size:
            continue
        islands.update(int(k) for k in c.island[rows] if k >= 0)
        guards.update(int(k) for k in getattr(c, "guard", np.zeros(0, np.int64))[rows] if k >= 0)
        part = rows[(c.kind[rows] == BROADSIDE) & (c.open_fraction[rows] < 1.0)]
        for r in part.tolist():
            key = (int(min(c.layer_a[r], c.layer_b[r])), int(max(c.layer_a[r], c.layer_b[r])))
            voids.setdefault(key, []).append(f.bbox)
    out: list[str] = []
    kinds: list[str] = []
    if ref is not None:
        for (u, l), boxes in sorted(voids.items()):
            shield = ref.between(u, l)
            if shield is None:
                continue
            grow = 2.0 * (board.stackup.dielectrics[u].thickness_mm if u < len(board.stackup.dielectrics) else 0.1)
            area = shapely.union_all([shapely.box(b[0] - grow, b[1] - grow, b[2] + grow, b[3] + grow)
                                      for b in boxes])
            gap = shapely.difference(area, shield)
            d = _polygon_path(gap)
            if d:
                names = f"{board.stackup.layers[u].name}/{board.stackup.layers[l].name}"
                out.append(f'<path d="{d}" fill-rule="evenodd" {_context_style("void", frame)} data-role="void">'
                           f'<title>{_text(f"no reference copper between {names} here")}</title></path>')
                kinds.append("void")
    for s in sorted(islands):
        isl = analysis.islands[s]
        d = _polygon_path(isl.polygon)
        if d:
            what = (f"island {isl.id}: floating copper on {board.stackup.layers[isl.layer].name}, "
                    f"{isl.area_mm2:.3g} mm^2, relays coupling")
            out.append(f'<path d="{d}" fill-rule="evenodd" {_context_style("island", frame)} data-role="island">'
                       f'<title>{_text(what)}</title></path>')
    if islands:
        kinds.append("island")
    g: Any = getattr(analysis, "guards", None)  # checker.guards.Guards, or None for an analysis without them
    p = board.pieces
    stitches: list[str] = []
    for k in (sorted(guards) if g is not None else []):
        mine = np.flatnonzero(p.source == g.source[k])
        d = "".join(f"M{a} {b}L{e} {h}" for a, b, e, h in zip(_fs(p.x1[mine]), _fs(p.y1[mine]), _fs(p.x2[mine]),
                                                               _fs(p.y2[mine]), strict=True))
        dash = ("" if g.state[k] == "stitched"
                else f' stroke-dasharray="{_f(frame.unit * 0.15)} {_f(frame.unit * 0.25)}"')
        what = f"guard ({board.nets[int(g.net[k])].name}): {g.state[k]}, longest free stretch {g.max_gap_mm[k]:.3g} mm"
        out.append(f'<path d="{d}" {_context_style("guard", frame)}{dash} stroke-linecap="round" data-role="guard">'
                   f'<title>{_text(what)}</title></path>')
        v = board.vias
        if len(v):
            line = shapely.LineString(np.concatenate([np.stack([p.x1[mine], p.y1[mine]], 1),
                                                      [[p.x2[mine[-1]], p.y2[mine[-1]]]]]))
            on = (v.net == g.net[k]) & (shapely.distance(line, shapely.points(v.x, v.y))
                                         <= p.width[mine].max() / 2 + v.pad / 2)
            for i in np.flatnonzero(on).tolist():
                stitches.append(f'<circle cx="{_f(v.x[i])}" cy="{_f(v.y[i])}" '
                                f'r="{_f(max(v.pad[i] / 2, frame.unit * 0.2))}" '
                                f'{_context_style("stitch", frame)} data-role="stitch"/>')
    if guards:
        kinds.append("guard")
    if stitches:
        out.extend(stitches)
        kinds.append("stitch")
    return out, tuple(kinds)


# --------------------------------------------------------------------------
# coupled stretches


class _RowFinder:
    """Coupled rows of a finding: the rows of its net pair (for a rule that
    sums over a victim's aggressors, ``SCOPE == "victim"``, the rows of every
    net of the rule's aggressor classes onto its victim), of the kind of
    coupling the rule looks at, on its layers, whose coupling spot lies in
    its bbox."""

    def __init__(self, analysis, findings: list[Finding] | None = None, numbers: dict[str, int] | None = None) -> None:
        self.a = analysis
        board = analysis.board
        self.net = board.net_index()
        # what every picture of the report asks of the findings, as arrays: extents, layers (one bit
        # per stackup layer; a layer name the stackup lacks sets a bit no picture draws), number by id
        findings = findings or []
        self.numbers = numbers if numbers is not None else {}
        self.ids = [f.id for f in findings]
        self.boxes = np.array([f.bbox for f in findings], np.float64).reshape(-1, 4)
        position = {name: i for i, name in enumerate(board.stackup.names)}
        self.layer_bits = np.array([sum(1 << position.get(n, 62) for n in set(f.layers)) for f in findings],
                                   np.int64)
        self.named_bits = int(np.bitwise_or.reduce(self.layer_bits)) if len(findings) else 0
        first: dict[str, int] = {}
        self.duplicate = np.array([first.setdefault(i, k) != k for k, i in enumerate(self.ids)], bool)
        self.layer = {name: i for i, name in enumerate(board.stackup.names)}
        self.rules = {r.name: r for r in getattr(analysis.ruleset, "rules", ())}
        np_ = analysis.net_pairs
        self.net_a = np.asarray(np_.net_a, np.int64)
        self.net_b = np.asarray(np_.net_b, np.int64)
        # net -> the net pairs it is in, grouped once
        nets = np.concatenate([self.net_a, self.net_b])
        pair = np.concatenate([np.arange(self.net_a.size)] * 2)
        order = np.argsort(nets, kind="stable")
        self.by_net = pair[order]
        self.starts = np.searchsorted(nets[order], np.arange(len(board.nets) + 1))
        self.masks: dict[str, np.ndarray] = {}
        self._pair_key: tuple[np.ndarray, np.ndarray] | None = None
        self._bands: dict | None = None

    def is_id(self, finding_id: str | None) -> np.ndarray:
        """Per finding, whether it is the one with this id."""
        return np.array([i == finding_id for i in self.ids], bool) if finding_id is not None else \
            np.zeros(len(self.ids), bool)

    def pair_rows(self, lo: int, hi: int) -> np.ndarray:
        """Coupled rows of the net pair (lo, hi), lo < hi, ascending: one
        sort of the couplings, shared by every picture of the report."""
        c = self.a.couplings
        n = len(self.a.board.nets) + 1
        if self._pair_key is None:
            key = np.asarray(c.net_a, np.int64) * n + np.asarray(c.net_b, np.int64)
            order = np.argsort(key, kind="stable")
            self._pair_key = (key[order], order)
        sorted_key, order = self._pair_key
        k = lo * n + hi
        return np.sort(order[np.searchsorted(sorted_key, k):np.searchsorted(sorted_key, k, side="right")])

    def bands(self, findings: list[Finding]) -> dict:
        """Every finding's bands, built once: per coupled row its centre,
        direction along and across, half length and half width (unpadded),
        and the finding it belongs to (position in ``findings``)."""
        if self._bands is None:
            rows_per = [self(f) for f in findings]
            rows = np.concatenate(rows_per) if rows_per else np.zeros(0, np.int64)
            owner = np.repeat(np.arange(len(findings)), [r.size for r in rows_per]) if rows_per else rows
            self._bands = {"owner": owner, **_band_axes(self.a, rows)}
        return self._bands

    def _pairs(self, f: Finding, ia: int, iv: int) -> np.ndarray:
        mine = np.sort(self.by_net[self.starts[iv]:self.starts[iv + 1]])
        other = np.where(self.net_a[mine] == iv, self.net_b[mine], self.net_a[mine])
        rule = self.rules.get(f.rule)
        if rule is not None and getattr(REGISTRY.get(f.kind), "SCOPE", None) == "victim":
            if f.rule not in self.masks:
                self.masks[f.rule] = self.a.class_mask(rule.aggressor)
            return mine[self.masks[f.rule][other] | (other == ia)]
        return mine[other == ia]

    def _kinds(self, f: Finding) -> tuple[int, ...]:

        scope = getattr(REGISTRY.get(f.kind), "SCOPE", None)
        if scope == "broadside":
            return (BROADSIDE,)
        if scope == "edge":
            return (EDGE,)
        rule = self.rules.get(f.rule)
        coupling = rule.options.get("coupling") if rule is not None else None
        by_option: dict[str, tuple[int, ...]] = {"edge": (EDGE,), "broadside": (BROADSIDE,)}
        return by_option.get(str(coupling), (BROADSIDE, EDGE))

    def __call__(self, f: Finding) -> np.ndarray:
        ia, iv = self.net.get(f.aggressor), self.net.get(f.victim)
        empty = np.zeros(0, np.int64)
        if ia is None or iv is None or ia == iv or self.net_a.size == 0:
            return empty
        pairs = self._pairs(f, ia, iv)
        if pairs.size == 0:
            return empty
        rows = np.asarray(self.a.rows_of_pairs(pairs), np.int64)
        c = self.a.couplings
        on = np.zeros(len(self.layer) + 1, bool)
        on[[self.layer[n] for n in f.layers if n in self.layer]] = True
        kinds = self._kinds(f)
        tol = 1e-6
        x0, y0, x1, y1 = f.bbox
        keep = (((c.kind[rows] == kinds[0]) | (c.kind[rows] == kinds[-1]))
                & on[c.layer_a[rows]] & on[c.layer_b[rows]]
                & (c.x[rows] >= x0 - tol) & (c.x[rows] <= x1 + tol)
                & (c.y[rows] >= y0 - tol) & (c.y[rows] <= y1 + tol))
        return np.sort(rows[keep])


def _band_axes(analysis, rows: np.ndarray) -> dict[str, np.ndarray]:
    """Per coupled row, the band it couples over, unpadded: its centre (the
    coupling spot ``cx``, ``cy``), the unit direction of piece a (``ux``,
    ``uy``; x for a piece of no length), half the coupled length
    (``half_l``) and half the width that covers both pieces (``half_w``)."""
    c = analysis.couplings
    p = analysis.board.pieces
    ia, ib = c.a[rows], c.b[rows]
    dx, dy = p.x2[ia] - p.x1[ia], p.y2[ia] - p.y1[ia]
    norm = np.hypot(dx, dy)
    zero = norm == 0
    norm[zero] = 1.0
    cover = np.maximum(p.width[ia], p.width[ib]) / 2
    return {"cx": c.x[rows], "cy": c.y[rows],
            "ux": np.where(zero, 1.0, dx / norm), "uy": np.where(zero, 0.0, dy / norm),
            "half_l": np.maximum(c.length_mm[rows], 0.0) / 2,
            "half_w": np.where(c.parallel[rows], np.abs(c.offset_mm[rows]) / 2 + cover, cover)}


def _corners(cx, cy, ux, uy, half_l, half_w) -> tuple[np.ndarray, np.ndarray]:
    """The four corners (x, y arrays of shape (n, 4)) of bands centred on
    (cx, cy), ``half_l`` along (ux, uy) and ``half_w`` across."""
    sl = np.array([1, 1, -1, -1])
    sw = np.array([1, -1, -1, 1])
    ux, uy, hl, hw = ux[:, None], uy[:, None], half_l[:, None], half_w[:, None]
    return cx[:, None] + ux * hl * sl - uy * hw * sw, cy[:, None] + uy * hl * sl + ux * hw * sw


def _row_quads(analysis, rows: np.ndarray, pad: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per row, the four corners (x, y arrays of shape (n, 4)) of the band it
    couples over (:func:`_band_axes`), grown by ``pad`` on every side (so it
    shows around the copper drawn over it); and the extent (xmin, ymin,
    xmax, ymax) of all of them."""
    b = _band_axes(analysis, rows)
    xs, ys = _corners(b["cx"], b["cy"], b["ux"], b["uy"], b["half_l"] + pad, b["half_w"] + pad)
    extent = np.array([xs.min(), ys.min(), xs.max(), ys.max()]) if rows.size else np.zeros(0)
    return xs, ys, extent


def _stretch_shapes(analysis, f: Finding, rows: np.ndarray, frame: _Frame, faint: bool,
                    with_path: bool = True) -> tuple[str, tuple[float, float, float, float] | None]:
    """The path data of the finding's bands that meet the framed area (one
    band per coupled row; ``""`` unless ``with_path``), and its bbox when
    the bands do not cover it (or stand in for them when no row could be
    matched), else ``None``."""
    d = ""
    x0, y0, x1, y1 = f.bbox
    show_bbox = True
    if rows.size:
        xs, ys, ext = _row_quads(analysis, rows, HALO * frame.unit)
        # only the bands that meet the framed area: a close-up of one spot of a net pair coupled all over
        # the board draws that spot's bands, not the board's (a card of a large board: 2.5 MB before)
        xs, ys = np.asarray(xs).reshape(-1, 4), np.asarray(ys).reshape(-1, 4)
        seen = ((xs.max(axis=1) >= frame.vx0) & (xs.min(axis=1) <= frame.vx1)
                & (ys.max(axis=1) >= frame.vy0) & (ys.min(axis=1) <= frame.vy1))
        xs, ys = xs[seen], ys[seen]
        g = frame.per_mm
        if with_path and len(xs) > MERGE_BANDS_ABOVE:
            # many bands (a victim summed over dozens of aggressors): one outline of them, to a quarter pixel
            shape = shapely.union_all(shapely.polygons(np.stack([xs, ys], axis=-1)))
            d = _polygon_path(shapely.simplify(shape, REGION_TOLERANCE_PX * frame.px(), preserve_topology=False), g)
        elif with_path:
            # each band: its first corner, then the steps to the other three (whole grid steps, as in _ring)
            qx, qy = np.rint(xs * g), np.rint(ys * g)
            hx, hy = _gs(qx[:, 0], g), _gs(qy[:, 0], g)
            steps = [(_gs(qx[:, k] - qx[:, k - 1], g), _gs(qy[:, k] - qy[:, k - 1], g)) for k in (1, 2, 3)]
            (ax, ay), (bx, by), (cx, cy) = steps
            d = "".join(f"M{hx[i]} {hy[i]}l{ax[i]} {ay[i]} {bx[i]} {by[i]} {cx[i]} {cy[i]}Z"
                        for i in range(len(hx)))
        # the bbox was grown on both axes by half the wider piece; the bands are
        # turned with the pieces, so allow that much before drawing it as well
        slack = max((0.5 + HALO) * frame.unit, float(np.max(analysis.board.pieces.width[analysis.couplings.a[rows]])))
        show_bbox = (x0 < ext[0] - slack or y0 < ext[1] - slack or x1 > ext[2] + slack or y1 > ext[3] + slack)
    box = f.bbox if show_bbox and not (faint and frame.cropped) else None  # a close-up frames its own finding
    return d, box


def _stretch_style(f: Finding, frame: _Frame, faint: bool, waived: bool) -> tuple[str, str]:
    """Attributes of a finding's bands and of its dashed extent."""
    colour = WAIVED_COLOUR if waived else SEVERITY_COLOURS.get(f.severity, OKABE_ITO["vermillion"])
    alpha = 0.35 if faint else 1.0
    fill_alpha = 0.0 if waived else (0.12 if faint else 0.35)
    band = (f'fill="{colour}" fill-opacity="{fill_alpha}" stroke="{colour}" stroke-opacity="{alpha}" '
            f'stroke-width="{_f(frame.stroke(0.8))}"{_dash(f.severity, waived, frame)} stroke-linejoin="round"')
    extent = (f'fill="none" stroke="{colour}" stroke-opacity="{alpha}" stroke-width="{_f(frame.stroke(0.6))}" '
              f'stroke-dasharray="{_f(frame.unit * 0.3)} {_f(frame.unit * 0.2)}"')
    return band, extent


def _stretch(analysis, f: Finding, rows: np.ndarray, frame: _Frame, faint: bool, waived: bool) -> list[str]:
    """The finding's coupled stretch as a group ``s-<id>``: its bands, and
    its extent dashed (:func:`_stretch_shapes`)."""
    d, box = _stretch_shapes(analysis, f, rows, frame, faint)
    band, extent = _stretch_style(f, frame, faint, waived)
    parts: list[str] = []
    if d:
        parts.append(f'<path d="{d}" fill-rule="evenodd" {band} data-role="stretch"/>')
    if box is not None:
        x0, y0, x1, y1 = box
        parts.append(f'<rect x="{_f(x0)}" y="{_f(y0)}" width="{_f(max(x1 - x0, 0))}" height="{_f(max(y1 - y0, 0))}" '
                     f'{extent} data-role="extent"/>')
    return [f'<g id="s-{_id(f.id)}">', *parts, "</g>"]


def _faint_bands(findings: list[Finding], faint_ids: set[str], rows_of: _RowFinder, frame: _Frame,
                 waived) -> list[str]:
    """The bands of the findings ``faint_ids`` that meet the framed area,
    faint and unnumbered, one path per look, from the band table every
    close-up of the report shares (:meth:`_RowFinder.bands`)."""
    if not faint_ids:
        return []
    t = rows_of.bands(findings)
    pad = HALO * frame.unit
    hl, hw = t["half_l"] + pad, t["half_w"] + pad
    reach = hl + hw
    near = ((t["cx"] + reach >= frame.vx0) & (t["cx"] - reach <= frame.vx1)
            & (t["cy"] + reach >= frame.vy0) & (t["cy"] - reach <= frame.vy1))
    wanted = np.array([f.id in faint_ids for f in findings], bool)
    sel = np.flatnonzero(near & wanted[t["owner"]]) if near.size else near
    if not sel.size:
        return []
    xs, ys = _corners(t["cx"][sel], t["cy"][sel], t["ux"][sel], t["uy"][sel], hl[sel], hw[sel])
    by_look: dict[str, list[int]] = {}
    for i, o in enumerate(t["owner"][sel].tolist()):
        f = findings[o]
        by_look.setdefault(_stretch_style(f, frame, True, f.id in waived)[0], []).append(i)
    out = ['<g data-role="others">']
    for look, members in by_look.items():
        # the faint bands of one look as one outline (overlapping bands merge), to a quarter pixel
        shape = shapely.union_all(shapely.polygons(np.stack([xs[members], ys[members]], axis=-1)))
        d = _polygon_path(shapely.simplify(shape, REGION_TOLERANCE_PX * frame.px(), preserve_topology=False),
                          frame.per_mm)
        if d:
            out.append(f'<path d="{d}" fill-rule="evenodd" {look} data-role="stretch"/>')
    out.append("</g>")
    return out


def _stretches_merged(analysis, findings: list[Finding], rows_of, frame: _Frame,
                      waived) -> tuple[list[str], list[str]]:
    """The stretches of many findings (a clustered overview) by look
    (severity, waived) instead of one group per finding: the same picture
    in a fraction of the bytes. Up to :data:`MERGED_VECTOR_BANDS` bands,
    one merged vector outline per look (to a quarter pixel); beyond, the
    bands painted as one PNG (:func:`.raster.bands_png`), since merging tens
    of thousands of overlapping bands costs seconds and their detail is
    below a pixel at overview scale. Dashed extents stay vectors either way.
    Returns elements for inside the flipped group, then for outside it (SVG
    coordinates)."""
    bands: dict[tuple[str, str], list[np.ndarray]] = {}
    colour_of: dict[tuple[str, str], tuple[str, float, float]] = {}
    extents: dict[tuple[str, str], list[str]] = {}
    pad = HALO * frame.unit
    for f in findings:
        rows = rows_of(f)
        is_waived = f.id in waived
        key = _stretch_style(f, frame, False, is_waived)
        if rows.size:
            xs, ys, _ = _row_quads(analysis, rows, pad)
            bands.setdefault(key, []).append(np.stack([xs, ys], axis=-1))
            colour_of[key] = (WAIVED_COLOUR if is_waived else SEVERITY_COLOURS.get(f.severity, OKABE_ITO["vermillion"]),
                              0.0 if is_waived else 0.35, 1.0)
        _, box = _stretch_shapes(analysis, f, rows, frame, False, with_path=False)
        if box is not None:
            x0, y0, x1, y1 = box
            extents.setdefault(key, []).append(f"M{_f(x0)} {_f(y0)}H{_f(x1)}V{_f(y1)}H{_f(x0)}Z")
    inside = [f'<g data-role="stretches" data-findings="{len(findings)}">']
    outside: list[str] = []
    quads = {key: np.concatenate(q) for key, q in bands.items()}
    if sum(len(q) for q in quads.values()) > MERGED_VECTOR_BANDS:
        scale = raster.RASTER_SCALE * frame.width_px / frame.vw
        png, w, h = raster.bands_png([(q, *colour_of[key]) for key, q in quads.items()],
                                     (frame.vx0, frame.vy0, frame.vx1, frame.vy1), scale,
                                     frame.stroke(0.8) * scale)
        outside.append(f'<image x="{_f(frame.vx0)}" y="{_f(frame.vy0)}" width="{_f(w / scale)}" '
                       f'height="{_f(h / scale)}" preserveAspectRatio="none" data-role="stretches-image" '
                       f'data-bands="{sum(len(q) for q in quads.values())}" href="{raster.data_uri(png)}"/>')
    else:
        for key, q in quads.items():
            # overlapping bands merge into one outline, kept to a quarter of a pixel, as pours are
            shape = shapely.union_all(shapely.polygons(q))
            d = _polygon_path(shapely.simplify(shape, REGION_TOLERANCE_PX * frame.px(), preserve_topology=False),
                              frame.per_mm)
            if d:
                inside.append(f'<path d="{d}" fill-rule="evenodd" {key[0]} data-role="stretch"/>')
    inside += [f'<path d="{"".join(ds)}" {key[1]} data-role="extent"/>' for key, ds in extents.items()]
    inside.append("</g>")
    return inside, outside


def _dash(severity: str, waived: bool, frame: _Frame) -> str:
    if waived:
        return f' stroke-dasharray="{_f(frame.unit * 0.05)} {_f(frame.unit * 0.15)}" stroke-linecap="round"'
    if severity == "warning":
        return f' stroke-dasharray="{_f(frame.unit * 0.4)} {_f(frame.unit * 0.2)}"'
    return ""


# --------------------------------------------------------------------------
# callouts


class _Placer:
    """Greedy, deterministic placement of callout markers so that they do
    not overlap: candidates on rings around the spot, eight directions each,
    the first free one wins (a grid hash keeps the check local)."""

    ANGLES = (45, 135, 315, 225, 90, 0, 270, 180)

    def __init__(self, frame: _Frame) -> None:
        self.frame = frame
        self.r = frame.unit * 0.85
        self.cell = 2.4 * self.r
        self.grid: dict[tuple[int, int], list[tuple[float, float]]] = {}

    def _free(self, x: float, y: float) -> bool:
        i, j = int(math.floor(x / self.cell)), int(math.floor(y / self.cell))
        for di in (-1, 0, 1):
            for dj in (-1, 0, 1):
                for px, py in self.grid.get((i + di, j + dj), ()):
                    if math.hypot(px - x, py - y) < self.cell:
                        return False
        return True

    def place(self, at: tuple[float, float], first_free: bool = False) -> tuple[float, float]:
        """A free place near ``at``; ``first_free``: ``at`` itself when free
        (a cluster marker sits on its findings)."""
        fr = self.frame
        ax, ay = at
        if first_free and self._free(ax, ay) and fr.vx0 <= ax <= fr.vx1 and fr.vy0 <= ay <= fr.vy1:
            return self._take(ax, ay)
        lo_x, hi_x = fr.vx0 + self.r * 1.2, fr.vx1 - self.r * 1.2
        lo_y, hi_y = fr.vy0 + self.r * 1.2, fr.vy1 - self.r * 1.2
        first = None
        for ring in range(1, 8):
            dist = 2.6 * self.r * (1 + 0.75 * (ring - 1))
            for a in self.ANGLES:
                x = ax + dist * math.cos(math.radians(a))
                y = ay + dist * math.sin(math.radians(a))
                if not (lo_x <= x <= hi_x and lo_y <= y <= hi_y):
                    continue
                if first is None:
                    first = (x, y)
                if self._free(x, y):
                    return self._take(x, y)
        if first is None:
            first = (min(max(ax, lo_x), hi_x) if lo_x <= hi_x else ax,
                     min(max(ay, lo_y), hi_y) if lo_y <= hi_y else ay)
        return self._take(*first)

    def block(self, x: float, y: float) -> None:
        """Keep callouts off (x, y) (a label sits there)."""
        self._take(x, y)

    def _take(self, x: float, y: float) -> tuple[float, float]:
        key = (int(math.floor(x / self.cell)), int(math.floor(y / self.cell)))
        self.grid.setdefault(key, []).append((x, y))
        return x, y


def _marker(kind: str, waived: bool, cx: float, cy: float, r: float, frame: _Frame,
            double: bool = False) -> list[str]:
    """A marker shape at SVG coordinates (cx, cy): circle for errors, square
    for warnings; waived: white with a dotted outline and a strike;
    ``double``: a second outline around it (a cluster of findings)."""
    colour = SEVERITY_COLOURS.get(kind, OKABE_ITO["vermillion"])
    fill = BACKGROUND if waived else colour
    stroke = WAIVED_COLOUR if waived else OKABE_ITO["black"]
    dash = (f' stroke-dasharray="{_f(r * 0.12)} {_f(r * 0.22)}" stroke-linecap="round"' if waived else
            (f' stroke-dasharray="{_f(r * 0.45)} {_f(r * 0.2)}"' if kind == "warning" else ""))
    sw = _f(frame.stroke(1.3))
    if kind == "warning":
        s = r * 0.9
        shape = (f'<rect x="{_f(cx - s)}" y="{_f(cy - s)}" width="{_f(2 * s)}" height="{_f(2 * s)}" '
                 f'fill="{fill}" stroke="{stroke}" stroke-width="{sw}"{dash}/>')
    else:
        shape = (f'<circle cx="{_f(cx)}" cy="{_f(cy)}" r="{_f(r)}" fill="{fill}" stroke="{stroke}" '
                 f'stroke-width="{sw}"{dash}/>')
    out = [shape]
    if double:  # the same outline again, a stroke's gap outside: told apart from a lone finding in grey print
        g = r + frame.stroke(3.0)
        out.append(f'<rect x="{_f(cx - g * 0.9)}" y="{_f(cy - g * 0.9)}" width="{_f(1.8 * g)}" height="{_f(1.8 * g)}" '
                   f'fill="none" stroke="{stroke}" stroke-width="{sw}"{dash}/>' if kind == "warning" else
                   f'<circle cx="{_f(cx)}" cy="{_f(cy)}" r="{_f(g)}" fill="none" stroke="{stroke}" '
                   f'stroke-width="{sw}"{dash}/>')
    if waived:
        k = r * 0.75
        out.append(f'<line x1="{_f(cx - k)}" y1="{_f(cy + k)}" x2="{_f(cx + k)}" y2="{_f(cy - k)}" '
                   f'stroke="{WAIVED_COLOUR}" stroke-width="{_f(frame.stroke(0.9))}"/>')
    return out


def _number_colour(severity: str, waived: bool) -> str:
    # white on vermillion, black on orange and on white: the stronger contrast
    if waived or severity == "warning":
        return OKABE_ITO["black"]
    return BACKGROUND


def _callout(f: Finding, number: int, frame: _Frame, place: tuple[float, float], r: float, waiver) -> list[str]:
    """The numbered marker at ``place`` (board coordinates) with its leader
    to the finding's worst spot and its hover title."""
    waived = waiver is not None
    ax, ay = f.at
    bx, by = place
    # leader from the spot to the marker's edge (SVG coordinates)
    sax, say, sbx, sby = ax, frame.sy(ay), bx, frame.sy(by)
    dist = math.hypot(sbx - sax, sby - say) or 1.0
    ex, ey = sbx - (sbx - sax) / dist * r, sby - (sby - say) / dist * r
    label = str(number)
    size = frame.unit * (1.0 if len(label) <= 2 else 2.0 / len(label))
    status = f" (waived by {waiver.author}: {waiver.reason})" if waived else ""
    tip = (f"{number}. {f.severity}{status} - {f.rule}: {f.aggressor} -> {f.victim} on {'/'.join(f.layers)}\n"
           f"value {_g(f.value)} {f.unit}, limit {_g(f.limit)} {f.unit}\n{f.message}\nid {f.id}")
    waived_attr = ' data-waived="true"' if waived else ""
    out = [f'<g id="f-{_id(f.id)}" data-number="{number}" data-severity={_attr(f.severity)}{waived_attr}>',
           f"<title>{_text(tip)}</title>",
           f'<line x1="{_f(sax)}" y1="{_f(say)}" x2="{_f(ex)}" y2="{_f(ey)}" stroke="{OKABE_ITO["black"]}" '
           f'stroke-width="{_f(frame.stroke(0.9))}"/>',
           f'<circle cx="{_f(sax)}" cy="{_f(say)}" r="{_f(frame.stroke(2.2))}" fill="{OKABE_ITO["black"]}"/>']
    out.extend(_marker(f.severity, waived, sbx, sby, r, frame))
    out.append(f'<text x="{_f(sbx)}" y="{_f(sby + size * 0.36)}" font-size="{_f(size)}" font-weight="bold" '
               f'text-anchor="middle" fill="{_number_colour(f.severity, waived)}">{label}</text>')
    out.append("</g>")
    return out


# --------------------------------------------------------------------------
# clusters


@dataclass
class _Cluster:
    """Findings whose spots share a cell; ``members`` worst first, ``at``
    the mean of their spots (board mm)."""

    members: list[Finding]
    at: tuple[float, float]


def _clusters(callouts: list[Finding], frame: _Frame) -> tuple[list[Finding], list[_Cluster]]:
    """Split the callouts (worst first) into lone findings and clusters:
    findings whose worst spots fall in one square cell of
    :data:`CLUSTER_CELL` text heights (a grid anchored at the framed
    area's corner, so the split is deterministic). Both lists keep the
    order of their worst member."""
    cell = CLUSTER_CELL * frame.unit
    cells: dict[tuple[int, int], list[Finding]] = {}
    for f in callouts:
        key = (int(math.floor((f.at[0] - frame.vx0) / cell)), int(math.floor((f.at[1] - frame.vy0) / cell)))
        cells.setdefault(key, []).append(f)
    singles = [m[0] for m in cells.values() if len(m) == 1]
    clusters = [_Cluster(m, (sum(f.at[0] for f in m) / len(m), sum(f.at[1] for f in m) / len(m)))
                for m in cells.values() if len(m) > 1]
    return singles, clusters


def _cluster_marker(c: _Cluster, i: int, numbers: dict[str, int], waived, frame: _Frame,
                    place: tuple[float, float], r: float) -> list[str]:
    """A cluster: a marker of the worst unwaived severity among its
    findings (all waived: the waived marker), a little larger than a
    callout, with the count in it; a leader when it had to move off its
    spot; the hover title lists the findings by number."""
    unwaived = [f for f in c.members if f.id not in waived]
    worst = unwaived[0].severity if unwaived else c.members[0].severity
    all_waived = not unwaived
    n = len(c.members)
    big = r * (1.2 + 0.15 * math.log10(n))
    ax, ay = c.at
    bx, by = place
    sax, say, sbx, sby = ax, frame.sy(ay), bx, frame.sy(by)
    errors = sum(1 for f in c.members if f.severity == "error")
    listed = ", ".join(str(numbers[f.id]) for f in c.members[:40]) + (", ..." if n > 40 else "")
    first = c.members[0]
    tip = (f"{n} findings here ({errors} error, {n - errors} warning, {n - len(unwaived)} waived); worst: "
           f"{numbers[first.id]}. {first.rule}: {first.aggressor} -> {first.victim}\nnumbers: {listed}")
    label = str(n)
    size = frame.unit * (1.0 if len(label) <= 2 else 2.1 / len(label))
    out = [f'<g id="c-{i}" data-role="cluster" data-count="{n}" data-severity={_attr(worst)}'
           f' data-findings="{" ".join(_id(f.id) for f in c.members)}">', f"<title>{_text(tip)}</title>"]
    if (sax, say) != (sbx, sby):
        dist = math.hypot(sbx - sax, sby - say)
        ex, ey = sbx - (sbx - sax) / dist * big, sby - (sby - say) / dist * big
        out.append(f'<line x1="{_f(sax)}" y1="{_f(say)}" x2="{_f(ex)}" y2="{_f(ey)}" stroke="{OKABE_ITO["black"]}" '
                   f'stroke-width="{_f(frame.stroke(0.9))}"/>')
    out.extend(_marker(worst, all_waived, sbx, sby, big, frame, double=True))
    out.append(f'<text x="{_f(sbx)}" y="{_f(sby + size * 0.36)}" font-size="{_f(size)}" font-weight="bold" '
               f'text-anchor="middle" fill="{_number_colour(worst, all_waived)}">{label}</text>')
    out.append("</g>")
    return out


# --------------------------------------------------------------------------
# legend band


def _nice_length(limit: float) -> float:
    """The largest 1, 2 or 5 x 10^k not above ``limit`` (> 0)."""
    k = math.floor(math.log10(limit))
    for m in (5, 2, 1):
        if m * 10 ** k <= limit:
            return m * 10.0 ** k
    return 10.0 ** k


def _len_label(v: float) -> str:
    return f"{v:g} mm" if v >= 0.1 else f"{v * 1000:g} \u00b5m"


class _Legend:
    """Rows of legend items laid out left to right and wrapped to the
    picture's width; text widths are estimated (0.6 em per character), so
    the layout does not depend on fonts installed."""

    def __init__(self, frame: _Frame, board: Board, drawn: list[int], callouts: list[Finding], waived,
                 context_kinds: tuple[str, ...] = (), clustered: bool = False, compact: bool = False) -> None:
        self.frame = frame
        u = frame.unit
        self.u = u
        self.line = 1.7 * u
        errors = sum(1 for f in callouts if f.severity == "error")
        warnings = sum(1 for f in callouts if f.severity == "warning")
        n_waived = sum(1 for f in callouts if f.id in waived)
        name = board.name if len(board.name) <= 80 else board.name[:79] + "\u2026"
        self.rows: list[list[tuple[str, object]]] = []
        if not compact:
            self.rows.append([("title", name),
                              ("text", f"findings marked: {len(callouts)} ({errors} error, {warnings} warning; "
                                       f"{n_waived} of them waived)")])
        layer_items: list[tuple[str, object]] = [] if compact else [("text", "layers (top first):")]
        for k in drawn:
            layer = board.stackup.layers[k]
            layer_items.append(("layer", (LAYER_COLOURS[k % len(LAYER_COLOURS)], layer.name, layer.role)))
        self.rows.append(layer_items)
        if not compact:
            self.rows.append([("marker", ("error", False, "error")), ("marker", ("warning", False, "warning")),
                              ("marker", ("error", True, "waived")), ("band", "coupled stretch"),
                              ("extent", "finding extent")])
        if clustered:
            self.rows.append([("cluster", "findings close together: how many (shape: the worst)")])
        if context_kinds:
            self.rows.append([("context", (k, CONTEXT_LABELS[k])) for k in context_kinds])
        bar = _nice_length(0.25 * (frame.x1 - frame.x0))
        self.bar = bar
        self.rows.append([("scale", bar)] if compact else [("scale", bar), ("text", "view from top, y up")])
        self._layout()

    def _width(self, kind: str, value) -> float:
        u = self.u
        em = 0.6 * u
        if kind == "title":
            return len(str(value)) * em * 1.1 + u
        if kind == "text":
            return len(str(value)) * em + u
        if kind == "layer":
            _, name, role = value
            return 2.4 * u + len(f"{name} ({role})") * em + u
        if kind in ("marker", "band", "extent"):
            return 2.2 * u + len(str(value[2] if kind == "marker" else value)) * em + u
        if kind == "context":
            return 2.2 * u + len(str(value[1])) * em + u
        if kind == "cluster":
            return 2.6 * u + len(str(value)) * em + u
        if kind == "scale":
            return self.bar + len(_len_label(self.bar)) * em + 1.5 * u
        raise AssertionError(kind)

    def _layout(self) -> None:
        fr = self.frame
        left, right = fr.vx0 + self.u, fr.vx1 - self.u
        self.placed: list[tuple[str, object, float, int]] = []  # kind, value, x, line
        line = 0
        for row in self.rows:
            x = left
            for kind, value in row:
                w = self._width(kind, value)
                if x > left and x + w > right:
                    line += 1
                    x = left
                self.placed.append((kind, value, x, line))
                x += w
            line += 1
        self.lines = line
        self.height = (line + 0.8) * self.line

    def draw(self) -> list[str]:
        fr, u = self.frame, self.u
        top = fr.vy0 + fr.vh  # SVG y where the band starts
        out = ['<g data-role="legend">',
               f'<rect x="{_f(fr.vx0)}" y="{_f(top)}" width="{_f(fr.vw)}" height="{_f(self.height)}" '
               f'fill="{BACKGROUND}"/>',
               f'<line x1="{_f(fr.vx0)}" y1="{_f(top)}" x2="{_f(fr.vx1)}" y2="{_f(top)}" '
               f'stroke="{OKABE_ITO["black"]}" stroke-width="{_f(fr.stroke(0.6))}"/>']
        fs = _f(0.85 * u)
        for kind, value, x, line in self.placed:
            mid = top + (line + 0.9) * self.line  # centre line of this legend line
            base = _f(mid + 0.3 * u)
            if kind == "title":
                out.append(f'<text x="{_f(x)}" y="{base}" font-size="{_f(u)}" font-weight="bold" '
                           f'data-role="board-name">{_text(str(value))}</text>')
            elif kind == "text":
                out.append(f'<text x="{_f(x)}" y="{base}" font-size="{fs}">{_text(str(value))}</text>')
            elif kind == "layer":
                colour, name, role = cast(tuple[str, str, str], value)
                out.append(f'<line x1="{_f(x + 0.2 * u)}" y1="{_f(mid)}" x2="{_f(x + 1.8 * u)}" y2="{_f(mid)}" '
                           f'stroke="{colour}" stroke-opacity="{COPPER_OPACITY}" stroke-width="{_f(0.5 * u)}" '
                           f'stroke-linecap="round"/>')
                out.append(f'<text x="{_f(x + 2.4 * u)}" y="{base}" font-size="{fs}" '
                           f'data-role="layer-name">{_text(f"{name} ({role})")}</text>')
            elif kind == "marker":
                sev, waived, label = cast(tuple[str, bool, str], value)
                out.extend(_marker(sev, waived, x + 0.9 * u, mid, 0.6 * u, fr))
                out.append(f'<text x="{_f(x + 2.2 * u)}" y="{base}" font-size="{fs}">{_text(label)}</text>')
            elif kind == "band":
                colour = SEVERITY_COLOURS["error"]
                out.append(f'<rect x="{_f(x + 0.1 * u)}" y="{_f(mid - 0.4 * u)}" width="{_f(1.7 * u)}" '
                           f'height="{_f(0.8 * u)}" fill="{colour}" fill-opacity="0.35" stroke="{colour}" '
                           f'stroke-width="{_f(fr.stroke(0.8))}"/>')
                out.append(f'<text x="{_f(x + 2.2 * u)}" y="{base}" font-size="{fs}">{_text(str(value))}</text>')
            elif kind == "extent":
                colour = SEVERITY_COLOURS["error"]
                out.append(f'<rect x="{_f(x + 0.1 * u)}" y="{_f(mid - 0.4 * u)}" width="{_f(1.7 * u)}" '
                           f'height="{_f(0.8 * u)}" fill="none" stroke="{colour}" '
                           f'stroke-width="{_f(fr.stroke(0.6))}" '
                           f'stroke-dasharray="{_f(u * 0.3)} {_f(u * 0.2)}"/>')
                out.append(f'<text x="{_f(x + 2.2 * u)}" y="{base}" font-size="{fs}">{_text(str(value))}</text>')
            elif kind == "cluster":
                out.extend(_marker("error", False, x + 1.1 * u, mid, 0.6 * u, fr, double=True))
                out.append(f'<text x="{_f(x + 1.1 * u)}" y="{_f(mid + 0.25 * u)}" font-size="{_f(0.7 * u)}" '
                           f'font-weight="bold" text-anchor="middle" fill="{BACKGROUND}">12</text>')
                out.append(f'<text x="{_f(x + 2.6 * u)}" y="{base}" font-size="{fs}">{_text(str(value))}</text>')
            elif kind == "context":
                what, label = cast(tuple[str, str], value)
                out.extend(_context_swatch(what, x + 0.1 * u, mid, u, fr))
                out.append(f'<text x="{_f(x + 2.2 * u)}" y="{base}" font-size="{fs}">{_text(str(label))}</text>')
            elif kind == "scale":
                length = float(value)  # type: ignore[arg-type]
                x0, x1 = x + 0.2 * u, x + 0.2 * u + length
                tick = 0.35 * u
                sw = _f(fr.stroke(1.2))
                out.append(f'<path d="M{_f(x0)} {_f(mid - tick)}L{_f(x0)} {_f(mid + tick)}M{_f(x0)} {_f(mid)}'
                           f'L{_f(x1)} {_f(mid)}M{_f(x1)} {_f(mid - tick)}L{_f(x1)} {_f(mid + tick)}" '
                           f'fill="none" stroke="{OKABE_ITO["black"]}" stroke-width="{sw}" data-role="scale-bar" '
                           f'data-length-mm="{length:g}"/>')
                out.append(f'<text x="{_f(x1 + 0.5 * u)}" y="{base}" font-size="{fs}">'
                           f'{_text(_len_label(length))}</text>')
        out.append("</g>")
        return out
