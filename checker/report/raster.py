"""Copper traces as one embedded PNG, for overviews of boards so large that
drawing every piece as a vector would make a picture of many megabytes.

A vector path costs some 25 bytes per piece whatever the zoom: a board of
320 000 pieces makes an overview of 12 MB that a browser renders slowly and
no reader can resolve anyway, since hundreds of pieces share each pixel.
Above :data:`RASTER_ABOVE` pieces in the picture, the traces are painted
with Pillow (a well-kept imaging library; drawing and PNG encoding are what
it is for) at :data:`RASTER_SCALE` times the picture's pixel width, layer by
layer, bottom first, each layer composited at the copper opacity the vector
drawing uses, and the result is quantized to a small palette (the picture
has a handful of colours) and written as PNG. Pours, findings, callouts and
the legend stay vectors, so every annotation stays sharp and selectable.

The image is deterministic for a given Pillow version: no clock, no random
dithering (Floyd-Steinberg is turned off).
"""

from __future__ import annotations

import base64
import io
import math

import numpy as np

#: more pieces than this in the framed area: traces as an embedded PNG
RASTER_ABOVE = 25_000
#: PNG pixels per output pixel (2: sharp on a high-density screen and in print at A4 width)
RASTER_SCALE = 2
#: colours of the quantized PNG (layers and their overlaps over white need few)
PALETTE_COLOURS = 64


def _table(opacity: float) -> list[int]:
    """A point table turning a painted mask (0 or not) into that alpha."""
    return [0] + [int(round(255 * opacity))] * 255


def _rgb(hex_colour: str) -> tuple[int, int, int]:
    h = hex_colour.lstrip("#")
    return int(h[0:2], 16), int(h[2:4], 16), int(h[4:6], 16)


def traces_png(pieces, layers_bottom_first: list[tuple[np.ndarray, str]], box: tuple[float, float, float, float],
               px_per_mm: float, min_width_px: float, opacity: float) -> tuple[bytes, int, int]:
    """Paint the pieces as a PNG of the board area ``box`` = (xmin, ymin,
    xmax, ymax) in mm, y up (row 0 is ``ymax``), ``px_per_mm`` PNG pixels
    per mm. ``layers_bottom_first``: (indices of the pieces of one layer,
    its colour), painted in that order, each at ``opacity``. Strokes are the
    pieces' widths, at least ``min_width_px`` PNG pixels, with round ends
    where wider than 2 pixels. Returns (PNG bytes, width, height)."""
    from PIL import Image, ImageDraw

    x0, y0, x1, y1 = box
    width = max(1, int(math.ceil((x1 - x0) * px_per_mm)))
    height = max(1, int(math.ceil((y1 - y0) * px_per_mm)))
    canvas = Image.new("RGBA", (width, height), (255, 255, 255, 0))
    for on, colour in layers_bottom_first:
        if not on.size:
            continue
        paint = Image.new("L", (width, height), 0)  # where this layer has copper
        draw = ImageDraw.Draw(paint)
        ax = ((pieces.x1[on] - x0) * px_per_mm).tolist()
        ay = ((y1 - pieces.y1[on]) * px_per_mm).tolist()
        bx = ((pieces.x2[on] - x0) * px_per_mm).tolist()
        by = ((y1 - pieces.y2[on]) * px_per_mm).tolist()
        w = np.maximum(pieces.width[on] * px_per_mm, min_width_px)
        wi = np.maximum(1, np.rint(w)).astype(np.int64).tolist()
        line, ellipse = draw.line, draw.ellipse
        for i in range(len(ax)):
            line((ax[i], ay[i], bx[i], by[i]), fill=255, width=wi[i])
        for i in np.flatnonzero(w > 2.0).tolist():  # round ends, as the vector drawing's round caps
            r = wi[i] / 2
            ellipse((ax[i] - r, ay[i] - r, ax[i] + r, ay[i] + r), fill=255)
            ellipse((bx[i] - r, by[i] - r, bx[i] + r, by[i] + r), fill=255)
        layer = Image.new("RGBA", (width, height), (*_rgb(colour), 0))
        layer.putalpha(paint.point(_table(opacity)))
        canvas.alpha_composite(layer)
    small = canvas.quantize(colors=PALETTE_COLOURS, method=Image.Quantize.FASTOCTREE, dither=Image.Dither.NONE)
    out = io.BytesIO()
    small.save(out, format="PNG", compress_level=6)  # optimize=True: 3 s more for a few % less
    return out.getvalue(), width, height


def data_uri(png: bytes) -> str:
    """``data:image/png;base64,...``: the picture stays one self-contained file."""
    return "data:image/png;base64," + base64.b64encode(png).decode("ascii")


def bands_png(looks: list[tuple[np.ndarray, str, float, float]], box: tuple[float, float, float, float],
              px_per_mm: float, outline_px: float) -> tuple[bytes, int, int]:
    """Paint filled quadrilaterals (the coupled stretches of a crowded
    overview) as a PNG of ``box`` (mm, y up), ``px_per_mm`` pixels per mm.
    ``looks``: (corners of shape (n, 4, 2) in mm, colour, fill opacity,
    outline opacity), painted in order, each look on its own layer so its
    bands do not darken where they overlap (as one merged vector outline
    would look). Every band is at least one pixel across. Returns (PNG
    bytes, width, height)."""
    from PIL import Image, ImageDraw

    x0, y0, x1, y1 = box
    width = max(1, int(math.ceil((x1 - x0) * px_per_mm)))
    height = max(1, int(math.ceil((y1 - y0) * px_per_mm)))
    canvas = Image.new("RGBA", (width, height), (255, 255, 255, 0))
    line_w = max(1, int(round(outline_px)))
    for quads, colour, fill_alpha, line_alpha in looks:
        if not len(quads):
            continue
        fill = Image.new("L", (width, height), 0)
        edge = Image.new("L", (width, height), 0)
        draw_fill, draw_edge = ImageDraw.Draw(fill), ImageDraw.Draw(edge)
        px = (quads[:, :, 0] - x0) * px_per_mm
        py = (y1 - quads[:, :, 1]) * px_per_mm
        for xs, ys in zip(px.tolist(), py.tolist()):
            corners = list(zip(xs, ys))
            draw_fill.polygon(corners, fill=255)
            draw_edge.line(corners + corners[:1], fill=255, width=line_w)
        rgb = _rgb(colour)
        fill_layer = Image.new("RGBA", (width, height), (*rgb, 0))
        fill_layer.putalpha(fill.point(_table(fill_alpha)))
        edge_layer = Image.new("RGBA", (width, height), (*rgb, 0))
        edge_layer.putalpha(edge.point(_table(line_alpha)))
        canvas.alpha_composite(fill_layer)
        canvas.alpha_composite(edge_layer)
    small = canvas.quantize(colors=PALETTE_COLOURS, method=Image.Quantize.FASTOCTREE, dither=Image.Dither.NONE)
    out = io.BytesIO()
    small.save(out, format="PNG", compress_level=6)
    return out.getvalue(), width, height
