"""Where the graphical objects of a Gerber file accumulate, in creation
order: round-aperture strokes as flat arrays (no Python object per draw),
other copper as shape records, clear-polarity objects as clear records that
remember how many strokes and shapes were created before them.

One :class:`ObjectSink` holds the file's image; others hold the content of
a step-and-repeat statement or a block aperture until it is copied into
its parent (:meth:`ObjectSink.replay_into`). Gerber Layer Format
Specification 2021.02, 2.7 (polarity: a clear object clears everything
created before it, a later dark object is unaffected), 2.8 (blocks: once
added to the stream, a block's objects are ordinary objects; a clear object
in a block clears all objects beneath it, not only the block's), 4.11.1 (a
block flashed with clear polarity has the polarity of each of its objects
toggled, through all nesting levels), 4.12 (step and repeat).
"""

from __future__ import annotations

import math
from array import array
from dataclasses import dataclass, replace

import numpy as np
import shapely

from .gerber_apertures import EMPTY, apply_matrix, disc, stadium
from .gerber_runs import PointChunks


@dataclass(slots=True)
class ShapeRecord:
    """A copper object that is not a round-aperture stroke, or (in
    ``ObjectSink.clears``) any clear object. ``geometry`` is in mm, placed
    at (dx, dy) (flashes keep their aperture's outline and the offset until
    the end, when all are placed at once). ``strokes_before`` /
    ``shapes_before``: for a clear object, how many strokes and shapes of
    its sink existed when it was created (the objects it can clear)."""

    kind: str
    geometry: shapely.Geometry
    dx: float
    dy: float
    net: int
    line: int
    function: str | None = None
    at: tuple[float, float] | None = None
    pin: tuple[str, ...] | None = None
    component: str | None = None
    strokes_before: int = 0
    shapes_before: int = 0

    def placed(self) -> shapely.Geometry:
        if self.dx == 0.0 and self.dy == 0.0:
            return self.geometry
        return apply_matrix(self.geometry, (1.0, 0.0, 0.0, 1.0), self.dx, self.dy)


def stroke_outline(points: np.ndarray, width: float) -> shapely.Geometry:
    """Copper of a round aperture of ``width`` moved along ``points`` ((k, 2),
    mm): the union of the stadium of every segment (round ends and joints
    of exact area; a disc when the points coincide)."""
    if width <= 0 or len(points) == 0:
        return EMPTY
    step = np.any(points[1:] != points[:-1], axis=1)
    if not step.any():
        return disc(float(points[0, 0]), float(points[0, 1]), width / 2)
    xy = points.tolist()
    parts = [stadium(xy[k][0], xy[k][1], xy[k + 1][0], xy[k + 1][1], width) for k in np.flatnonzero(step).tolist()]
    return parts[0] if len(parts) == 1 else shapely.union_all(parts)


class ReplayError(ValueError):
    """Copying a block would put copper more than 10 m from the origin."""


class ObjectSink:
    """Objects in creation order.

    Strokes: ``px``, ``py`` are the points of all strokes one after the
    other; stroke ``s`` owns points ``s_start[s]`` up to the next stroke's
    start, was drawn with a round aperture of diameter ``s_width[s]`` (mm),
    carries net ``s_net[s]`` and aperture-function index ``s_func[s]``
    (-1: none), and starts on file line ``s_line[s]``. A stroke of one point
    repeated (a zero-length draw) is a dot.

    New points go to ``pending`` (:class:`~.gerber_runs.PointChunks`: some
    kept as the text of a run of draws, parsed later in bulk) and reach
    ``px``, ``py`` at :meth:`flush`; every point in ``px`` precedes every
    pending one. Stroke records (``s_start`` ...) are written at once, with
    ``s_start`` counting pending points too (:meth:`point_count`). Whoever
    reads ``px``/``py`` flushes first.
    """

    def __init__(self) -> None:
        self.px = array("d")
        self.py = array("d")
        self.s_start = array("q")
        self.s_width = array("d")
        self.s_net = array("i")
        self.s_func = array("i")
        self.s_line = array("q")
        self.shapes: list[ShapeRecord] = []
        self.clears: list[ShapeRecord] = []
        self.pending = PointChunks()

    def stroke_count(self) -> int:
        return len(self.s_start)

    def point_count(self) -> int:
        return len(self.px) + len(self.pending)

    def flush(self) -> None:
        """Move the pending points into ``px``, ``py``."""
        if len(self.pending):
            x, y = self.pending.take()
            self.px.frombytes(x.tobytes())
            self.py.frombytes(y.tobytes())

    def stroke_points(self, s: int) -> np.ndarray:
        start = self.s_start[s]
        end = self.s_start[s + 1] if s + 1 < len(self.s_start) else len(self.px)
        return np.column_stack((np.frombuffer(self.px, dtype=np.float64)[start:end],
                                np.frombuffer(self.py, dtype=np.float64)[start:end]))

    def add_clear(self, record: ShapeRecord) -> None:
        record.strokes_before = len(self.s_start)
        record.shapes_before = len(self.shapes)
        self.clears.append(record)

    # ---- copying a block into its parent

    def replay_into(self, dst: ObjectSink, m: tuple[float, float, float, float], dx: float, dy: float,
                    toggle: bool, max_coordinate_mm: float) -> None:
        """Append this sink's objects to ``dst`` under ``x' = a x + b y + dx,
        y' = d x + e y + dy`` (``m`` = (a, b, d, e); stroke widths scale by
        ``sqrt(|ad - be|)``), with every polarity toggled if ``toggle``."""
        self.flush()
        dst.flush()
        a, b, d, e = m
        scale = math.sqrt(abs(a * e - b * d))
        n = len(self.px)
        x = np.frombuffer(self.px, dtype=np.float64)
        y = np.frombuffer(self.py, dtype=np.float64)
        nx, ny = a * x + b * y + dx, d * x + e * y + dy
        if n and max(np.abs(nx).max(), np.abs(ny).max()) > max_coordinate_mm:
            raise ReplayError("the copy puts a draw more than 10 m from the origin")
        if len(self.s_width) and max(self.s_width) * scale > max_coordinate_mm:
            raise ReplayError("the copy scales a trace to more than 10 m wide")

        def moved(rec: ShapeRecord) -> ShapeRecord:
            g = apply_matrix(rec.placed(), m, dx, dy)
            if not g.is_empty:
                x0, y0, x1, y1 = g.bounds
                if max(abs(x0), abs(y0), abs(x1), abs(y1)) > max_coordinate_mm:
                    raise ReplayError("the copy puts copper more than 10 m from the origin")
            at = None if rec.at is None else (a * rec.at[0] + b * rec.at[1] + dx,
                                               d * rec.at[0] + e * rec.at[1] + dy)
            return replace(rec, geometry=g, dx=0.0, dy=0.0, at=at)

        if not toggle:
            base = len(dst.px)
            base_strokes, base_shapes = len(dst.s_start), len(dst.shapes)
            dst.px.frombytes(nx.tobytes())
            dst.py.frombytes(ny.tobytes())
            dst.s_start.frombytes((np.frombuffer(self.s_start, dtype=np.int64) + base).tobytes())
            dst.s_width.frombytes((np.frombuffer(self.s_width, dtype=np.float64) * scale).tobytes())
            dst.s_net.extend(self.s_net)
            dst.s_func.extend(self.s_func)
            dst.s_line.extend(self.s_line)
            dst.shapes.extend(moved(r) for r in self.shapes)
            for c in self.clears:
                mc = moved(c)
                mc.strokes_before = c.strokes_before + base_strokes
                mc.shapes_before = c.shapes_before + base_shapes
                dst.clears.append(mc)
            return

        # Toggled: dark strokes and shapes become clear objects, clear ones dark.
        # Only the order of each former clear object against the former dark
        # ones matters, and that is what strokes_before / shapes_before record.
        starts = list(self.s_start) + [n]
        moved_points = np.column_stack((nx, ny))
        next_stroke = next_shape = 0  # how far each kind has been turned into clear objects

        def strokes_as_clears(upto: int) -> None:
            nonlocal next_stroke
            while next_stroke < upto:
                s = next_stroke
                outline = stroke_outline(moved_points[starts[s]:starts[s + 1]], self.s_width[s] * scale)
                if not outline.is_empty:
                    dst.add_clear(ShapeRecord("draw", outline, 0.0, 0.0, self.s_net[s], self.s_line[s]))
                next_stroke += 1

        def shapes_as_clears(upto: int) -> None:
            nonlocal next_shape
            while next_shape < upto:
                dst.add_clear(moved(self.shapes[next_shape]))
                next_shape += 1

        for c in self.clears:
            strokes_as_clears(c.strokes_before)
            shapes_as_clears(c.shapes_before)
            dark = moved(c)
            dark.strokes_before = dark.shapes_before = 0
            dst.shapes.append(dark)
        strokes_as_clears(len(self.s_start))
        shapes_as_clears(len(self.shapes))
