"""Straight draws and region vertices read in bulk: the text of a run of
``X..Y..D01*`` lines is kept as it is and parsed later, together with the
other kept runs, in one vectorised numpy pass.

Nearly all of an exported copper layer is straight draws and region contour
vertices (Gerber Layer Format Specification 2021.02, 4.7.1 and 4.10). The
reader (:mod:`.gerber`) finds a run of such lines with one regular
expression (:func:`group_matchers` for whole strokes with their net
changes, :func:`run_matcher` for the rest), counts its lines, reads only
its last coordinates (the new current point) and hands the run's text to a
:class:`PointChunks`; the coordinates are parsed when the points are needed
(:meth:`PointChunks.take`), a few tens of thousands of lines at a time.
Arcs wait there too (:meth:`PointChunks.add_arc`) and are chorded in bulk.

The values are those of the line-by-line path, bit for bit: a coordinate is
the integer its digits spell divided by the coordinate units per mm (one
IEEE division, as ``int(digits) / div``); a missing X or Y repeats the
previous point's (modal coordinates, 4.8.2). With ``negate_after`` (the rule
of the reader's general command path) a negative coordinate is the negated
quotient of its magnitude, which differs only for ``-0``: ``-0.0``.
"""

from __future__ import annotations

import functools
import re

import numpy as np

from ..arcs import chord_count

_TO_SPACE = bytes.maketrans(b"XYD*", b"    ")
_EMPTY = np.zeros(0, dtype=np.float64)
#: A coordinate written as a negative zero (``X-0Y``, ``Y-000D``): the one
#: spelling whose general-path value (``-0.0``) the bulk integer parse loses.
_NEGATIVE_ZERO = re.compile(rb"-0++[YD]")


@functools.cache
def run_matcher(nx: int, ny: int, simple: bool):
    """``match(buffer, pos)`` of one or more whole lines ``[G01][X<x>][Y<y>]D01*``
    (each ending in a line feed; X with at most ``nx`` digits, Y with at
    most ``ny``), after at most one line ``[G01][X<x>][Y<y>]D02*`` (group 3),
    after at most one net attribute line ``%TO.N,<name>*%`` (group 1, the
    name in group 2; printable ASCII without ``%*,\\``, so its one field is
    the name as written). Possessive, so a long run costs about a tenth of a
    microsecond a line. ``simple``: only the commonest spelling, every line
    ``X<x>Y<y>D01*`` (``D02*``) with a bare line feed; faster to match."""
    if simple:
        line, end = rb"X[+-]?+[0-9]{1,%d}+Y[+-]?+[0-9]{1,%d}+D0" % (nx, ny), rb"\*\n"
    else:
        line, end = (rb"(?:G0*+1)?+(?:X[+-]?+[0-9]{1,%d}+)?+(?:Y[+-]?+[0-9]{1,%d}+)?+D0*+" % (nx, ny),
                     rb"\*\r?+\n")
    return re.compile(rb"(%%TO\.N,([\x21-\x24\x26-\x29\x2b\x2d-\x5b\x5d-\x7e]*+)\*%%\r?+\n)?+"
                      rb"(%s2%s)?+(?:%s1%s)++" % (line, end, line, end)).match


@functools.cache
def group_matchers(nx: int, ny: int):
    """(``match(buffer, pos)`` of one or more groups, ``sub`` that deletes
    their net lines). A group is an optional net attribute line
    ``%TO.N,<name>*%`` (name as in :func:`run_matcher`), a line
    ``X<x>Y<y>D02*`` and one or more lines ``X<x>Y<y>D01*``, each ending in
    a bare line feed: one stroke, after a net change. Exported copper is
    mostly such groups."""
    net = rb"(%TO\.N,([\x21-\x24\x26-\x29\x2b\x2d-\x5b\x5d-\x7e]*+)\*%\n)?+"
    line = rb"X[+-]?+[0-9]{1,%d}+Y[+-]?+[0-9]{1,%d}+D0" % (nx, ny)
    groups = re.compile(rb"(?:%s%s2\*\n(?:%s1\*\n)++)++" % (net, line, line)).match
    nets = re.compile(rb"%TO[^\n]*+\n").sub
    return groups, nets


def stroke_heads(text: bytes) -> tuple[np.ndarray, np.ndarray, list[tuple[int, bytes]]]:
    """The strokes in ``text`` (whole groups, see :func:`group_matchers`):
    the line of each stroke's D02 in ``text``, the index of its point among
    the points of ``text`` (every line but the net lines), and for each net
    line, in order, (the stroke it comes before, the net name)."""
    a = np.frombuffer(text, dtype=np.uint8)
    ends = np.flatnonzero(a == 10)
    starts = np.r_[0, ends[:-1] + 1]
    is_net = a[starts] == 37  # '%'
    d02 = np.flatnonzero((a[ends - 2] == 50) & ~is_net)  # ...D02*
    net_lines = np.flatnonzero(is_net)
    points_before = d02 - np.searchsorted(net_lines, d02)
    before = np.searchsorted(d02, net_lines + 1).tolist()
    names = [text[b + 6:e - 2] for b, e in zip(starts[net_lines].tolist(), ends[net_lines].tolist())]  # %TO.N,...*%
    return d02, points_before, list(zip(before, names))


class PointChunks:
    """Points in creation order: single points (appended to ``xs``, ``ys``),
    arrays, and kept runs. ``len()`` counts them all; :meth:`take` returns
    them as two float64 arrays and empties the store. ``negate_after``:
    read the runs' coordinates as the general command path does."""

    __slots__ = ("arcs", "arrays", "count", "negate_after", "runs", "xs", "ys")

    def __init__(self, negate_after: bool = False) -> None:
        self.negate_after = negate_after
        self.xs: list[float] = []
        self.ys: list[float] = []
        self.arrays: list[tuple[int, np.ndarray, np.ndarray]] = []  # (position, x, y)
        self.runs: list[tuple] = []  # (text, position, lines, start, x0, y0, div_x, div_y, simple)
        self.arcs: list[tuple] = []  # (position, chords, with start, x0, y0, x1, y1, cx, cy, r, a0, sweep)
        self.count = 0  # points before those in xs, ys

    def __len__(self) -> int:
        return self.count + len(self.xs)

    def _commit(self) -> None:
        if self.xs:
            self.arrays.append((self.count, np.array(self.xs, dtype=np.float64), np.array(self.ys, dtype=np.float64)))
            self.count += len(self.xs)
            self.xs.clear()  # in place: callers may hold the bound append methods
            self.ys.clear()

    def add(self, x: float, y: float) -> None:
        self.xs.append(x)
        self.ys.append(y)

    def add_array(self, x: np.ndarray, y: np.ndarray) -> None:
        self._commit()
        self.arrays.append((self.count, np.asarray(x, dtype=np.float64), np.asarray(y, dtype=np.float64)))
        self.count += len(x)

    def add_arc(self, x0: float, y0: float, x1: float, y1: float, circle: tuple[float, float, float, float, float],
                with_start: bool) -> int:
        """The chord points of an arc from (x0, y0) to (x1, y1) on ``circle``
        (centre x, centre y, radius, start angle, sweep), as
        :func:`~checker.readers.fab.gerber_arcs.arc_points` gives them, the
        start point only if ``with_start``; computed in bulk by :meth:`take`
        with the arithmetic of :func:`~checker.readers.arcs.arc_polyline`.
        Returns the number of chords."""
        if self.xs:
            self._commit()
        n = chord_count(circle[2], circle[4])
        self.arcs.append((self.count, n, with_start, x0, y0, x1, y1) + circle)
        self.count += n + with_start
        return n

    def add_run(self, text: bytes, lines: int, x0: float, y0: float, div_x: float, div_y: float,
                start: bool, simple: bool = False) -> None:
        """The ``lines`` points of ``text`` (whole lines matched by
        :func:`run_matcher`; a D02 line's point counts like the others),
        after the point (x0, y0) itself if ``start``; (x0, y0) is the
        current point before the run (for a missing X or Y). ``simple``:
        matched by the ``simple`` expression."""
        if self.xs:
            self._commit()
        self.runs.append((text, self.count, lines, start, x0, y0, div_x, div_y, simple))
        self.count += lines + start

    def take(self) -> tuple[np.ndarray, np.ndarray]:
        self._commit()
        total = self.count
        if not total:
            return _EMPTY, _EMPTY
        arrays, runs = self.arrays, self.runs
        if not runs and not self.arcs and len(arrays) == 1:
            out = arrays[0][1], arrays[0][2]
        else:
            out_x = np.empty(total, dtype=np.float64)
            out_y = np.empty(total, dtype=np.float64)
            for at, x, y in arrays:
                out_x[at:at + len(x)] = x
                out_y[at:at + len(y)] = y
            if runs:
                texts, at_, lines_, start_, x0_, y0_, div_x, div_y, simple = zip(*runs)
                run_at = np.array(at_, dtype=np.int64)
                lines = np.array(lines_, dtype=np.int64)
                start = np.array(start_, dtype=bool)
                x0 = np.array(x0_, dtype=np.float64)
                y0 = np.array(y0_, dtype=np.float64)
                rx, ry = _parse_runs(b"".join(texts), lines, x0, y0, np.repeat(div_x, lines),
                                     np.repeat(div_y, lines), self.negate_after, all(simple))
                first = np.cumsum(lines) - lines
                dest = np.repeat(run_at + start - first, lines) + np.arange(len(rx))
                out_x[dest] = rx
                out_y[dest] = ry
                out_x[run_at[start]] = x0[start]
                out_y[run_at[start]] = y0[start]
            if self.arcs:
                _place_arcs(self.arcs, out_x, out_y)
            out = out_x, out_y
        for store in (self.arcs, arrays, runs):
            store.clear()  # in place, as in _commit
        self.count = 0
        return out


def _place_arcs(arcs: list[tuple], out_x: np.ndarray, out_y: np.ndarray) -> None:
    """Write the chord points of ``arcs`` (see :meth:`PointChunks.add_arc`)
    at their places: ``t = a0 + sweep * k / n`` for k = 0 .. n, the points
    ``(cx + r cos t, cy + r sin t)``, the first and last replaced by the
    exact start and end points, as arc_polyline and arc_points do."""
    at, n, with_start, x0, y0, x1, y1, cx, cy, r, a0, sweep = (np.array(v) for v in zip(*arcs))
    n = n.astype(np.int64)
    count = n + 1
    first = np.cumsum(count) - count
    k = np.arange(int(count.sum())) - np.repeat(first, count)
    t = np.repeat(a0, count) + np.repeat(sweep, count) * k / np.repeat(n, count)
    x = np.repeat(cx, count) + np.repeat(r, count) * np.cos(t)
    y = np.repeat(cy, count) + np.repeat(r, count) * np.sin(t)
    last = first + n
    x[first], y[first] = x0, y0
    x[last], y[last] = x1, y1
    with_start = with_start.astype(bool)
    keep = np.ones(len(x), dtype=bool)
    keep[first[~with_start]] = False  # without its start point, which is the previous point already
    shift = at.astype(np.int64) - first - (~with_start).astype(np.int64)
    dest = np.repeat(shift, count) + np.arange(len(x))
    out_x[dest[keep]] = x[keep]
    out_y[dest[keep]] = y[keep]


def _parse_runs(text: bytes, lines: np.ndarray, x0: np.ndarray, y0: np.ndarray, div_x: np.ndarray,
                div_y: np.ndarray, negate_after: bool, simple: bool) -> tuple[np.ndarray, np.ndarray]:
    """The points of all lines of the runs whose texts make ``text`` (run
    ``r`` has ``lines[r]`` lines and starts from (x0[r], y0[r])); ``div_x``,
    ``div_y`` hold each line's units per mm; ``simple``: every line is
    ``X<x>Y<y>D01*`` or ``D02*`` (the simple expression matched them)."""
    total = int(lines.sum())
    if (not negate_after or _NEGATIVE_ZERO.search(text) is None) and (simple or (
            b"G" not in text and b"\r" not in text and text.count(b"X") == total and text.count(b"Y") == total
            and text.count(b"D01*\n") + text.count(b"D02*\n") == total)):
        # every line is exactly X<x>Y<y>D01* (or D02*): the numbers alone, three a line
        values = np.fromstring(text.translate(_TO_SPACE), dtype=np.int64, sep=" ")
        return values[0::3] / div_x, values[1::3] / div_y
    a = np.frombuffer(text, dtype=np.uint8)
    newline = np.flatnonzero(a == 10)
    d_at = np.flatnonzero(a == 68)
    x_at = np.flatnonzero(a == 88)
    y_at = np.flatnonzero(a == 89)
    x_line = np.searchsorted(newline, x_at)
    y_line = np.searchsorted(newline, y_at)
    has_y = np.zeros(total, dtype=bool)
    has_y[y_line] = True
    y_of_line = np.zeros(total, dtype=np.int64)
    y_of_line[y_line] = y_at
    x_end = np.where(has_y[x_line], y_of_line[x_line], d_at[x_line])  # X's digits end at Y, or at D
    first = np.cumsum(lines) - lines
    out = []
    for at, line, end, div, start in ((x_at, x_line, x_end, div_x, x0), (y_at, y_line, d_at[y_line], div_y, y0)):
        magnitude, minus = _magnitudes(a, at + 1, end)
        q = magnitude / div[line]
        q = np.where(minus & ((magnitude != 0) | negate_after), -q, q)
        value = np.empty(total, dtype=np.float64)
        value[line] = q
        known = np.zeros(total, dtype=bool)
        known[line] = True
        open_start = ~known[first]  # runs whose first line omits the coordinate
        value[first[open_start]] = start[open_start]
        known[first] = True
        index = np.where(known, np.arange(total), 0)
        np.maximum.accumulate(index, out=index)
        out.append(value[index])
    return out[0], out[1]


def _magnitudes(a: np.ndarray, start: np.ndarray, end: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(|n|, n < 0 as written) of the signed decimal numbers ``a[start:end]``."""
    if not len(start):
        return np.zeros(0, dtype=np.int64), np.zeros(0, dtype=bool)
    sign = a[start]
    minus = sign == 45
    digits_at = start + (minus | (sign == 43))
    length = end - digits_at
    top = len(a) - 1
    value = np.zeros(len(start), dtype=np.int64)
    for k in range(int(length.max())):
        digit = a[np.minimum(digits_at + k, top)].astype(np.int64) - 48
        value = np.where(k < length, value * 10 + digit, value)
    return value, minus
