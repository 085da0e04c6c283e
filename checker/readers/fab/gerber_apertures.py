"""Aperture outlines for the Gerber reader: the standard templates C, R, O
and P (with round or rectangular holes), the disc and half-disc polygons
every curved outline is built from, the LM/LR/LS transformation and the
swept outline of a draw with a non-round aperture.

Every outline is a shapely geometry in millimetres with the aperture's
origin at (0, 0) (Gerber Layer Format Specification 2021.02, 2.2: the origin
of a standard aperture is its geometric centre).

Curves as polygons. A circle of radius r becomes a regular n-gon whose
vertices lie at radius ``r * sqrt(2 pi / (n sin(2 pi / n)))``: the polygon's
area ``n/2 rho^2 sin(2 pi / n)`` is then exactly ``pi r^2`` (to rounding),
and its boundary stays within about ``r (pi/n)^2 / 3`` of the true circle,
inside the chord tolerance of :data:`checker.model.ARC_CHORD_TOLERANCE_MM`
because ``n`` comes from :func:`checker.readers.arcs.chord_count` (at least
16 vertices, a multiple of 4). A half disc (the end of an obround) keeps its
two end points on the circle, so it meets the straight sides exactly, and
puts its inner vertices at the radius that makes the fan's area exactly
``pi r^2 / 2``. Areas of circles, obrounds and holes are therefore exact;
straight-sided shapes are exact anyway.
"""

from __future__ import annotations

import functools
import math

import numpy as np
import shapely
import shapely.affinity

from ..arcs import chord_count

#: Fewest vertices of a disc polygon.
MIN_DISC_VERTICES = 16

EMPTY = shapely.Polygon()


class ApertureError(ValueError):
    """An aperture definition that the specification does not allow; the
    reader turns it into a FabError naming the file and line."""


def disc_vertex_count(radius: float) -> int:
    """Vertices of the polygon standing for a circle of ``radius`` mm:
    enough chords for the arc chord tolerance, at least 16, a multiple of 4."""
    n = max(MIN_DISC_VERTICES, chord_count(radius, 2 * math.pi))
    return n + (-n) % 4


def disc_ring(cx: float, cy: float, radius: float) -> np.ndarray:
    """(n, 2) vertices, counter-clockwise, of the equal-area polygon of the
    circle (cx, cy, radius): ``rho = r sqrt(2 pi / (n sin(2 pi / n)))``."""
    n = disc_vertex_count(radius)
    rho = radius * math.sqrt(2 * math.pi / (n * math.sin(2 * math.pi / n)))
    t = 2 * math.pi * np.arange(n) / n
    return np.column_stack((cx + rho * np.cos(t), cy + rho * np.sin(t)))


def disc(cx: float, cy: float, radius: float) -> shapely.Polygon:
    """The equal-area polygon of a circle (empty for radius <= 0)."""
    if radius <= 0:
        return EMPTY
    return shapely.Polygon(disc_ring(cx, cy, radius))


def half_disc_points(cx: float, cy: float, radius: float, start: float) -> np.ndarray:
    """Points of the half circle from angle ``start`` counter-clockwise
    through pi, both end points exactly on the circle, the k - 1 inner ones
    at radius rho chosen so the fan (centre plus these points) has area
    ``pi r^2 / 2``: with ``D = pi / k``,
    ``(k - 2) rho^2 + 2 r rho = pi r^2 / sin D``, so
    ``rho = r (sqrt(1 + (k - 2) pi / sin D) - 1) / (k - 2)``."""
    dx, dy = _half_disc_offsets(radius, start)
    return np.column_stack((cx + dx, cy + dy))


@functools.lru_cache(maxsize=4096)
def _half_disc_offsets(radius: float, start: float) -> tuple[np.ndarray, np.ndarray]:
    """The points of :func:`half_disc_points` relative to the centre
    (cached: every draw of one width has the same ends; read-only arrays)."""
    k = disc_vertex_count(radius) // 2
    step = math.pi / k
    rho = radius * (math.sqrt(1 + (k - 2) * math.pi / math.sin(step)) - 1) / (k - 2)
    t = start + step * np.arange(k + 1)
    rad = np.full(k + 1, rho)
    rad[0] = rad[-1] = radius
    dx, dy = rad * np.cos(t), rad * np.sin(t)
    dx.flags.writeable = dy.flags.writeable = False
    return dx, dy


def obround(width: float, height: float) -> shapely.Polygon:
    """The obround of 4.4.4: a ``width`` x ``height`` box whose shorter
    sides are half circles (a circle when they are equal)."""
    if width == height:
        return disc(0.0, 0.0, width / 2)
    if width > height:
        r, a = height / 2, (width - height) / 2
        right = half_disc_points(a, 0.0, r, -math.pi / 2)
        left = half_disc_points(-a, 0.0, r, math.pi / 2)
    else:
        r, a = width / 2, (height - width) / 2
        right = half_disc_points(0.0, a, r, 0.0)
        left = half_disc_points(0.0, -a, r, math.pi)
    return shapely.Polygon(np.vstack((right, left)))


def stadium(x1: float, y1: float, x2: float, y2: float, width: float) -> shapely.Polygon:
    """Copper of a round aperture of ``width`` moved straight from (x1, y1)
    to (x2, y2): the obround of length ``L + width`` along the segment
    (round ends of exact area; a disc when the points coincide)."""
    length = math.hypot(x2 - x1, y2 - y1)
    if width <= 0:
        return EMPTY
    if length == 0:
        return disc(x1, y1, width / 2)
    c, s = (x2 - x1) / length, (y2 - y1) / length
    long, short = length + width, width
    if long == short:  # too short to show at this width: a disc
        return apply_matrix(obround(long, short), (c, -s, s, c), (x1 + x2) / 2, (y1 + y2) / 2)
    # obround(long, short) moved by apply_matrix, with the same arithmetic, without building it twice
    r, a = short / 2, (long - short) / 2
    rx, ry = _half_disc_offsets(r, -math.pi / 2)
    lx, ly = _half_disc_offsets(r, math.pi / 2)
    x = np.concatenate((a + rx, -a + lx))
    y = np.concatenate((0.0 + ry, 0.0 + ly))
    mx, my = (x1 + x2) / 2, (y1 + y2) / 2
    return shapely.polygons(np.column_stack((c * x + -s * y + mx, s * x + c * y + my)))


def regular_polygon(cx: float, cy: float, diameter: float, vertices: int, rotation_deg: float) -> shapely.Polygon:
    """Regular polygon with circumscribed ``diameter``, first vertex at
    ``rotation_deg`` counter-clockwise from the positive x axis through the
    centre (4.4.5; macro primitive 5 places it the same way, 4.5.1.7)."""
    if diameter <= 0:
        return EMPTY
    t = math.radians(rotation_deg) + 2 * math.pi * np.arange(vertices) / vertices
    r = diameter / 2
    return shapely.Polygon(np.column_stack((cx + r * np.cos(t), cy + r * np.sin(t))))


def _positive(value: float, what: str) -> float:
    if not value > 0:
        raise ApertureError(f"{what} must be greater than 0, not {value:g} "
                            "(only the C aperture may have size 0; spec 4.3.2)")
    return value


def standard_aperture(kind: str, params: list[float]) -> tuple[shapely.Geometry, float | None]:
    """Outline of a standard aperture (4.4) and, for a solid circle, its
    diameter (the width of the draws it makes; ``None`` for any other).

    ``C,d[Xhole]``, ``R,w X h[Xhole]``, ``O,w X h[Xhole]``,
    ``P,d X n[X rotation[X hole]]``; a hole given by two numbers is the
    deprecated rectangular hole (8.2.2), axis-parallel in the aperture's own
    axes. The hole must fit strictly inside (4.4.6); it is not part of the
    aperture, so the outline is the shape minus the hole."""
    n = len(params)
    if kind == "C":
        if not 1 <= n <= 3:
            raise ApertureError(f"a circle aperture takes a diameter and an optional hole, not {n} values")
        d = params[0]
        if d < 0:
            raise ApertureError(f"circle diameter must not be negative: {d:g}")
        shape, hole = disc(0.0, 0.0, d / 2), params[1:]
    elif kind in "RO":
        name = "rectangle" if kind == "R" else "obround"
        if not 2 <= n <= 4:
            raise ApertureError(f"the {name} aperture takes X and Y sizes and an optional hole, not {n} values")
        w = _positive(params[0], f"{name} X size")
        h = _positive(params[1], f"{name} Y size")
        shape = shapely.box(-w / 2, -h / 2, w / 2, h / 2) if kind == "R" else obround(w, h)
        hole = params[2:]
    elif kind == "P":
        if not 2 <= n <= 5:
            raise ApertureError(f"a polygon aperture takes diameter, vertices, rotation and hole, not {n} values")
        d = _positive(params[0], "polygon diameter")
        vertices = params[1]
        if vertices != int(vertices) or not 3 <= vertices <= 12:
            raise ApertureError(f"a polygon aperture has 3 to 12 vertices, not {vertices:g} (spec 4.4.5)")
        rotation = params[2] if n > 2 else 0.0
        shape, hole = regular_polygon(0.0, 0.0, d, int(vertices), rotation), params[3:]
    else:  # pragma: no cover - the caller only passes C, R, O, P
        raise ApertureError(f"unknown standard aperture {kind}")
    width = params[0] if kind == "C" and not hole else None
    if hole:
        if len(hole) == 1:
            hole_shape = disc(0.0, 0.0, _positive(hole[0], "hole diameter") / 2)
        else:
            hx, hy = _positive(hole[0], "hole X size"), _positive(hole[1], "hole Y size")
            hole_shape = shapely.box(-hx / 2, -hy / 2, hx / 2, hy / 2)
        if shape.is_empty or not shape.contains_properly(hole_shape):
            raise ApertureError("the hole does not fit strictly inside the aperture (spec 4.4.6)")
        shape = shape.difference(hole_shape)
    return shape, width


def transform_matrix(mirror: str, rotation_deg: float, scale: float) -> tuple[float, float, float, float]:
    """(a, b, d, e) of ``x' = a x + b y, y' = d x + e y`` for the aperture
    transformation of 4.9: mirror first (LM: X negates x, Y negates y,
    XY both), then rotate ``rotation_deg`` counter-clockwise (LR), then
    scale (LS); all about the aperture origin."""
    mx = -1.0 if "X" in mirror else 1.0
    my = -1.0 if "Y" in mirror else 1.0
    t = math.radians(rotation_deg)
    c, s = math.cos(t), math.sin(t)
    if rotation_deg % 90 == 0:  # exact quarter turns, no 6e-17 residues
        c, s = round(c), round(s)
    return (scale * c * mx, -scale * s * my, scale * s * mx, scale * c * my)


def apply_matrix(geometry: shapely.Geometry, m: tuple[float, float, float, float],
                 dx: float = 0.0, dy: float = 0.0) -> shapely.Geometry:
    """``geometry`` under ``x' = a x + b y + dx, y' = d x + e y + dy``."""
    a, b, d, e = m
    if (a, b, d, e) == (1.0, 0.0, 0.0, 1.0):
        if dx == 0.0 and dy == 0.0:
            return geometry
        return shapely.transform(geometry, lambda c: c + (dx, dy))
    return shapely.affinity.affine_transform(geometry, (a, b, d, e, dx, dy))


def is_identity(m: tuple[float, float, float, float]) -> bool:
    return m == (1.0, 0.0, 0.0, 1.0)


def swept_outline(outline: shapely.Geometry, path: np.ndarray) -> shapely.Geometry:
    """Area swept by a convex ``outline`` moved along the polyline ``path``
    ((k, 2) points): the union over its segments of the convex hull of the
    outline at both ends (the Minkowski sum of a segment and a convex
    shape). Used for draws with R, O or P apertures (8.2.3); a hole in the
    aperture is ignored, the outline's hull is swept."""
    hull = shapely.get_coordinates(outline.convex_hull)
    if len(hull) == 0:
        return EMPTY
    pieces = []
    for k in range(len(path) - 1):
        pts = np.vstack((hull + path[k], hull + path[k + 1]))
        pieces.append(shapely.MultiPoint(pts).convex_hull)
    if not pieces:
        pieces.append(shapely.MultiPoint(hull + path[0]).convex_hull)
    return pieces[0] if len(pieces) == 1 else shapely.union_all(pieces)
