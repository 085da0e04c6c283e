"""The Gerber reader's bulk paths (checker/readers/fab/gerber.py,
gerber_runs.py): long runs of draws and region vertices parsed in one
vectorised pass, clear draws and arcs read without the general command path,
and centreline clipping by many clear objects.

Every Gerber file here is written for these tests; each expected value is
worked out by hand from the coordinates written (the layouts are chosen so
that the arithmetic is exact or a closed formula), never from the reader.
Spec sections refer to the Gerber Layer Format Specification 2021.02.
"""

from __future__ import annotations

import io
import math
from itertools import pairwise

import numpy as np
import pytest
import shapely

from checker.readers.arcs import chord_count
from checker.readers.fab.gerber import CHECK_EVERY, READ_BLOCK, read_gerber

HEADER = "%FSLAX46Y46*%\n%MOMM*%\n"


def read_text(text: str):
    return read_gerber(io.BytesIO(text.encode()), "bulk.gbr")


def test_long_runs_in_every_spelling_read_as_written():
    # 4.8.2 modal coordinates, 8.3.1 G01 with D01, 8.3.3 D1 spelling, CR LF line ends (3.1), TO.N changes
    # (5.6.13) and D02 moves: a file far over one read block and one limit-check interval, every point known
    rng = np.random.default_rng(7)
    lines = [HEADER, "%ADD10C,0.25*%\n", "%ADD11C,0.5*%\n", "D10*\n"]
    strokes = []  # (net, width, [(x, y) ...], line of its first D01)
    x = y = 0
    lineno = 6  # the number of the next line written
    width = 0.25
    while lineno < 2 * CHECK_EVERY + 3000:
        net = f"N{len(strokes) % 37}"
        if len(strokes) % 11 == 10:  # an aperture change now and then
            width = 0.5 if width == 0.25 else 0.25
            lines.append("D11*\n" if width == 0.5 else "D10*\n")
            lineno += 1
        lines.append(f"%TO.N,{net}*%\n")
        x, y = int(rng.integers(-50_000_000, 50_000_000)), int(rng.integers(-50_000_000, 50_000_000))
        lines.append(f"X{x}Y{y}D02*\n")
        lineno += 2
        points = [(x, y)]
        first = lineno
        for _k in range(int(rng.integers(1, 60))):
            style = int(rng.integers(0, 10))
            nx = x + int(rng.integers(-2_000_000, 2_000_000))
            ny = y + int(rng.integers(-2_000_000, 2_000_000))
            if style == 0:
                nx = x  # X omitted: modal
                text = f"Y{ny}D01*"
            elif style == 1:
                ny = y
                text = f"X{nx}D1*"
            elif style == 2:
                text = f"G01X{nx}Y{ny}D01*"
            elif style == 3:
                text = f"X{nx:+d}Y{ny}D001*"
            else:
                text = f"X{nx}Y{ny}D01*"
            lines.append(text + ("\r\n" if style == 4 else "\n"))
            lineno += 1
            x, y = nx, ny
            points.append((x, y))
        strokes.append((net, width, points, first))
    lines.append("M02*\n")
    data = "".join(lines)
    assert len(data) > 2 * READ_BLOCK
    layer = read_text(data)
    t = layer.traces
    # expected pieces: consecutive points of each stroke, zero-length ones dropped (a zero-length draw
    # inside a longer stroke is no piece)
    exp = [(a, b, net, w, s) for s, (net, w, pts, _) in enumerate(strokes) for a, b in pairwise(pts) if a != b]
    assert len(t) == len(exp)
    got = np.column_stack((t.x1, t.y1, t.x2, t.y2))
    want = np.array([(a[0], a[1], b[0], b[1]) for a, b, _, _, _ in exp], dtype=np.float64) / 1e6
    assert np.array_equal(got, want)  # int / 1e6, exactly as written
    assert [layer.net_names[i] for i in t.net] == [e[2] for e in exp]
    assert t.width.tolist() == [e[3] for e in exp]
    kept = [s for s, (_, _, pts, _) in enumerate(strokes) if any(a != b for a, b in pairwise(pts))]
    assert t.stroke_line.tolist() == [strokes[s][3] for s in kept]


def test_region_of_many_vertices_has_the_polygon_area():
    # 4.10: a contour of n vertices on a circle of radius r, written as one long run (some with X or Y
    # omitted, some G01-prefixed), is the regular n-gon: area n/2 r^2 sin(2 pi / n)
    n, r = 5000, 20.0
    pts = [(round(r * math.cos(2 * math.pi * k / n) * 1e6), round(r * math.sin(2 * math.pi * k / n) * 1e6))
           for k in range(n)]
    lines = [HEADER, "G36*\n", f"X{pts[0][0]}Y{pts[0][1]}D02*\n"]
    for k, (px, py) in enumerate(pts[1:] + pts[:1], 1):
        lines.append(("G01" if k % 97 == 0 else "") + f"X{px}Y{py}D01*\n")
    lines.append("G37*\nM02*\n")
    layer = read_text("".join(lines))
    (region,) = layer.shapes
    exact = shapely.Polygon(np.array(pts, dtype=np.float64) / 1e6).area  # the polygon written, shoelace
    assert region.polygon.area == pytest.approx(exact, rel=1e-12)
    assert region.polygon.area == pytest.approx(n / 2 * r * r * math.sin(2 * math.pi / n), rel=1e-9)
    assert len(shapely.get_coordinates(region.polygon)) == n + 1


def test_full_circle_arcs_in_a_region_and_a_track():
    # 4.7.2 (G75): a full circle is an arc whose end is its start; chorded into n = chord_count(r, 2 pi)
    # equal chords, so the region is the inscribed n-gon and the track has n pieces of length 2 r sin(pi/n)
    r = 3.0
    n = chord_count(r, 2 * math.pi)
    layer = read_text(HEADER + """%ADD10C,0.1*%
G75*
G36*
X3000000Y0D02*
G03X3000000Y0I-3000000J0D01*
G37*
D10*
X3000000Y10000000D02*
G02*
X3000000Y10000000I-3000000J0D01*
G01*
M02*
""")
    (region,) = layer.shapes
    assert region.polygon.area == pytest.approx(n / 2 * r * r * math.sin(2 * math.pi / n), rel=1e-12)
    t = layer.traces
    assert len(t) == n
    assert np.hypot(t.x2 - t.x1, t.y2 - t.y1) == pytest.approx(2 * r * math.sin(math.pi / n), rel=1e-12)
    assert (t.x1[0], t.y1[0], t.x2[-1], t.y2[-1]) == (3.0, 10.0, 3.0, 10.0)  # exact start and end


def test_trace_clipped_by_overlapping_clear_objects_and_a_point_contact():
    # 2.7: a trace drawn first loses what later clear objects cover. Two overlapping clear squares
    # cover x in [-5, -3] and [-4, -2]: one gap [-5, -2]; a clear triangle touching the centreline at
    # x = 4 only splits the trace there (the centreline meets it in a point); a trace drawn after the
    # clear objects is whole.
    layer = read_text(HEADER + """%ADD10C,0.2*%
%ADD11R,2X2*%
D10*
X-10000000Y0D02*
X10000000Y0D01*
%LPC*%
D11*
X-4000000Y0D03*
X-3000000Y0D03*
G36*
X4000000Y0D02*
X5000000Y1000000D01*
X3000000Y1000000D01*
X4000000Y0D01*
G37*
%LPD*%
D10*
X-10000000Y-3000000D02*
X10000000Y-3000000D01*
M02*
""")
    t = layer.traces
    rows = np.column_stack((t.x1, t.y1, t.x2, t.y2)).tolist()
    assert rows == [[-10, 0, -5, 0], [-2, 0, 4, 0], [4, 0, 10, 0], [-10, -3, 10, -3]]
    assert t.stroke.tolist() == [0, 1, 1, 2]  # the pieces on either side of the point still touch
    assert t.ordinal.tolist() == [0, 0, 1, 0]


def test_clear_draw_cuts_a_region_by_its_stadium():
    # 2.7 and 4.7.1: a clear draw with a round aperture removes the stadium it sweeps, length L + w,
    # width w, round ends: area L w + pi w^2 / 4 (the reader's disc polygons have the circle's exact
    # area, see gerber_apertures); a zero-length clear draw removes a disc of diameter w
    layer = read_text(HEADER + """%ADD10C,1*%
G36*
X0Y0D02*
X20000000Y0D01*
Y10000000D01*
X0D01*
Y0D01*
G37*
%LPC*%
D10*
X3000000Y5000000D02*
X9000000Y5000000D01*
X15000000Y5000000D02*
X15000000Y5000000D01*
M02*
""")
    (region,) = layer.shapes
    w, length = 1.0, 6.0
    assert region.polygon.area == pytest.approx(200 - (length * w + math.pi * w * w / 4) - math.pi * w * w / 4,
                                                rel=1e-12)


@pytest.mark.parametrize("negative_zero", [False, True])
def test_region_vertices_in_the_common_spelling_read_bit_for_bit(negative_zero):
    # 4.10: a contour written X<x>Y<y>D01* only (the spelling region runs take in bulk); every vertex is
    # int(digits) / 1e6, and a coordinate written "-0" keeps its sign (-0.0) as the line-by-line path reads it
    side = 40
    pts = [(k * 250_000, 0) for k in range(side)] + [(side * 250_000, k * 250_000) for k in range(side)] + \
          [(side * 250_000 - k * 250_000, side * 250_000) for k in range(side)] + \
          [(0, side * 250_000 - k * 250_000) for k in range(side)]
    lines = [HEADER, "G36*\n", "X0Y0D02*\n"]
    for _k, (px, py) in enumerate(pts[1:] + pts[:1]):
        lines.append(f"X{'-0' if negative_zero and px == 0 else px}Y{py}D01*\n")
    lines.append("G37*\nM02*\n")
    (region,) = read_text("".join(lines)).shapes
    xy = shapely.get_coordinates(region.polygon.exterior)
    assert region.polygon.area == pytest.approx((side * 0.25) ** 2, rel=1e-15)
    zero_x = xy[:-1][xy[:-1, 0] == 0.0, 0]
    assert zero_x.size >= side  # the left side's vertices
    assert np.signbit(zero_x).sum() == (zero_x.size - 1 if negative_zero else 0)  # the D02 start is "X0"
