"""Arcs as chords: the one place that turns a circular arc into straight
pieces, shared by every input door so the same arc gives the same pieces
whichever file it came from (``ARC_CHORD_TOLERANCE_MM`` in the model)."""

from __future__ import annotations

import math

import numpy as np

from ..model import ARC_CHORD_TOLERANCE_MM


def chord_count(radius: float, sweep: float, tolerance: float = ARC_CHORD_TOLERANCE_MM) -> int:
    """Fewest equal chords for an arc of ``radius`` and ``sweep`` (radians)
    whose sagitta ``r (1 - cos(step / 2))`` stays within ``tolerance``:
    ``n = ceil(sweep / (2 acos(1 - tol / r)))``, and at least one chord per
    90 degrees (which only binds for radii under 7 um, where the formula
    would allow a single chord across a whole circle)."""
    sweep = abs(sweep)
    step = 2.0 * math.acos(max(-1.0, 1.0 - tolerance / radius))
    n = max(1, math.ceil(sweep / step), math.ceil(sweep / (math.pi / 2) - 1e-9))
    while radius * (1.0 - math.cos(sweep / (2 * n))) > tolerance:  # guard against rounding
        n += 1
    return n


def arc_polyline(cx: float, cy: float, radius: float, start: float, sweep: float,
                 tolerance: float = ARC_CHORD_TOLERANCE_MM) -> np.ndarray:
    """Chord endpoints (n + 1, 2) of the arc from angle ``start`` through
    ``sweep`` radians (positive: counter-clockwise). Every point lies on the
    circle; the chords stay within ``tolerance`` of it."""
    n = chord_count(radius, sweep, tolerance)
    t = start + sweep * np.arange(n + 1) / n
    return np.column_stack((cx + radius * np.cos(t), cy + radius * np.sin(t)))


def circle_through(p0, p1, p2) -> tuple[float, float, float, float, float]:
    """Circle through three points, as (cx, cy, r, start angle, signed sweep)
    of the arc from ``p0`` through ``p1`` to ``p2`` (radians; positive sweep
    is counter-clockwise). ``ValueError`` if the points are collinear."""
    (ax, ay), (bx, by), (qx, qy) = p0, p1, p2
    bx, by, qx, qy = bx - ax, by - ay, qx - ax, qy - ay
    cross = bx * qy - by * qx
    scale = max(bx * bx + by * by, qx * qx + qy * qy, (qx - bx) ** 2 + (qy - by) ** 2)
    if scale == 0 or abs(cross) <= 1e-12 * scale:
        raise ValueError("are collinear or coincide")
    d = 2.0 * cross
    b2, q2 = bx * bx + by * by, qx * qx + qy * qy
    ux = (qy * b2 - by * q2) / d
    uy = (bx * q2 - qx * b2) / d
    cx, cy = ax + ux, ay + uy
    r = math.hypot(ux, uy)
    a0 = math.atan2(ay - cy, ax - cx)
    a2 = math.atan2(p2[1] - cy, p2[0] - cx)
    if cross > 0:  # p0 -> p1 -> p2 turns left: counter-clockwise
        sweep = (a2 - a0) % (2 * math.pi)
    else:
        sweep = -((a0 - a2) % (2 * math.pi))
    return cx, cy, r, a0, sweep
