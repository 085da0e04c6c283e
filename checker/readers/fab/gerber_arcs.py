"""Circular interpolation of the Gerber format (G02/G03 with G75 or the
deprecated G74) turned into chord points by the shared
:func:`checker.readers.arcs.arc_polyline`.

Gerber Layer Format Specification 2021.02:

* 4.7.2 (G75, multi-quadrant): the centre is the start point plus the signed
  offsets (I, J); an arc whose end point equals its start point is a full
  360 degree circle.
* 8.1.10 (G74, single-quadrant, deprecated): I and J are unsigned distances;
  of the four candidate centres (start +- I, start +- J) the arc is the one
  that turns the given way through at most 90 degrees with the least
  deviation; an arc whose end equals its start is a zero-degree arc (a dot).
* 4.7.2.2 (valid arcs): start and end radius may differ by the arc
  deviation; any monotonic curve between the two radii is a valid
  rendering. This reader chords the circle of the start radius and puts the
  last point exactly on the end point, so the deviation goes into the last
  chord. A deviation larger than ``max(1 um, 10 coordinate units,
  0.1 % of the radius)`` is refused: such an arc is "nonsensical".
"""

from __future__ import annotations

import math

import numpy as np

from ..arcs import arc_polyline

#: Smallest arc deviation (mm) refused whatever the resolution.
MIN_DEVIATION_MM = 0.001
#: Slack in angle (radians) when testing a single-quadrant arc for <= 90 degrees.
QUADRANT_SLACK = 1e-6


class ArcError(ValueError):
    """An arc the specification gives no meaning; the reader adds file and line."""


def _sweep(cx: float, cy: float, x0: float, y0: float, x1: float, y1: float,
           clockwise: bool, full: bool) -> tuple[float, float]:
    """(start angle, signed sweep) of the arc around (cx, cy)."""
    a0 = math.atan2(y0 - cy, x0 - cx)
    a1 = math.atan2(y1 - cy, x1 - cx)
    if full:
        return a0, -2 * math.pi if clockwise else 2 * math.pi
    if clockwise:
        return a0, -((a0 - a1) % (2 * math.pi))
    return a0, (a1 - a0) % (2 * math.pi)


def arc_points(x0: float, y0: float, x1: float, y1: float, i: float, j: float,
               clockwise: bool, single_quadrant: bool, resolution_mm: float,
               max_coordinate_mm: float) -> np.ndarray:
    """Chord points (n + 1, 2) of the arc from (x0, y0) to (x1, y1), mm;
    the first and last points are exactly the start and end points.
    Raises :class:`ArcError` for an arc with no valid interpretation."""
    circle = arc_circle(x0, y0, x1, y1, i, j, clockwise, single_quadrant, resolution_mm, max_coordinate_mm)
    if circle is None:
        return np.array([[x0, y0], [x1, y1]])
    pts = arc_polyline(*circle)
    pts[0] = (x0, y0)
    pts[-1] = (x1, y1)
    return pts


def arc_circle(x0: float, y0: float, x1: float, y1: float, i: float, j: float,
               clockwise: bool, single_quadrant: bool, resolution_mm: float,
               max_coordinate_mm: float) -> tuple[float, float, float, float, float] | None:
    """The arc of :func:`arc_points` as (centre x, centre y, radius, start
    angle, signed sweep) for :func:`~checker.readers.arcs.arc_polyline`, or
    ``None`` when it is the straight piece from start to end (a zero-degree
    arc). Raises :class:`ArcError` as :func:`arc_points` does."""
    same = x0 == x1 and y0 == y1
    if single_quadrant:
        if same:
            return None
        best = None
        for sx in ((1.0,) if i == 0 else (1.0, -1.0)):
            for sy in ((1.0,) if j == 0 else (1.0, -1.0)):
                cx, cy = x0 + sx * abs(i), y0 + sy * abs(j)
                r0 = math.hypot(x0 - cx, y0 - cy)
                if r0 == 0:
                    continue
                a0, sweep = _sweep(cx, cy, x0, y0, x1, y1, clockwise, False)
                if abs(sweep) > math.pi / 2 + QUADRANT_SLACK:
                    continue
                deviation = abs(math.hypot(x1 - cx, y1 - cy) - r0)
                if best is None or deviation < best[0]:
                    best = (deviation, cx, cy, r0, a0, sweep)
        if best is None:
            raise ArcError(f"no single-quadrant (G74) arc of at most 90 degrees goes from "
                           f"({x0:g}, {y0:g}) to ({x1:g}, {y1:g}) with centre distances "
                           f"I={abs(i):g}, J={abs(j):g} mm (spec 8.1.10)")
        _, cx, cy, r0, a0, sweep = best
    else:
        cx, cy = x0 + i, y0 + j
        r0 = math.hypot(x0 - cx, y0 - cy)
        if r0 == 0:
            raise ArcError("the arc centre coincides with its start point (I and J are both 0)")
        a0, sweep = _sweep(cx, cy, x0, y0, x1, y1, clockwise, same)
    r1 = math.hypot(x1 - cx, y1 - cy)
    allowed = max(MIN_DEVIATION_MM, 10 * resolution_mm, 1e-3 * r0)
    if abs(r1 - r0) > allowed:
        raise ArcError(f"the arc from ({x0:g}, {y0:g}) to ({x1:g}, {y1:g}) around centre ({cx:g}, {cy:g}) "
                       f"starts {r0:.6g} mm from the centre but ends {r1:.6g} mm from it; "
                       f"no circle fits (spec 4.7.2.2)")
    if max(abs(cx), abs(cy)) + r0 > max_coordinate_mm:
        raise ArcError(f"the arc around centre ({cx:g}, {cy:g}) with radius {r0:g} mm reaches more "
                       "than 10 m from the origin")
    if sweep == 0:
        return None
    return cx, cy, r0, a0, sweep
