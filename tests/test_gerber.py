"""The Gerber copper-layer reader (checker/readers/fab/gerber.py).

Every Gerber snippet here is written for these tests. Each check names what
it is checked against:

* "spec X.Y": the Gerber Layer Format Specification, revision 2021.02
  (Ucamco), read for this work; sub-section numbers follow that revision's
  table of contents (4.4.2 Circle, 4.4.3 Rectangle ...). Examples taken
  from the specification's text are marked as such.
* exact geometry, with the hand calculation beside the expected value;
* gerbonara 1.5 (the package registry's general-purpose Gerber library) as
  an independent oracle, on constructs it reads correctly.

Curved outlines: the reader's disc polygons have exactly the circle's area
(``gerber_apertures`` docstring), so circle, obround and hole areas are
compared with the exact formulas to 1e-9. Arcs are chords within
ARC_CHORD_TOLERANCE_MM of the circle, as in the JSON door.
"""

from __future__ import annotations

import hashlib
import io
import math
import warnings
import zipfile

import numpy as np
import pytest
import shapely
import shapely.affinity

from checker.errors import FabError
from checker.model import ARC_CHORD_TOLERANCE_MM
from checker.readers import read_board_dict
from checker.readers.arcs import arc_polyline, chord_count
from checker.readers.fab.gerber import load_gerber, read_gerber
from checker.readers.fab.gerber_apertures import disc, obround
from checker.readers.fab.layer import NET_UNKNOWN

HEADER = "%FSLAX46Y46*%\n%MOMM*%\n"


def gbr(body: str, header: str = HEADER, end: str = "M02*\n") -> bytes:
    return (header + body + end).encode()


def read(body: str, header: str = HEADER, end: str = "M02*\n", name: str = "t.gbr"):
    return read_gerber(io.BytesIO(gbr(body, header, end)), name)


def read_raw(data: bytes, name: str = "t.gbr"):
    return read_gerber(io.BytesIO(data), name)


def fails(data, match: str, line: int | None = None, name: str = "t.gbr") -> FabError:
    """One FabError naming the file (and the line), matching ``match``."""
    if isinstance(data, str):
        data = data.encode()
    with pytest.raises(FabError, match=match) as info:
        read_gerber(io.BytesIO(data), name)
    err = info.value
    assert err.file == name
    assert str(err).startswith(f"{name}: ")
    if line is not None:
        assert err.line == line, str(err)
        assert str(err).startswith(f"{name}: line {line}: ")
    return err


def pads(layer, kind="pad"):
    return [s for s in layer.shapes if s.kind == kind]


def mm(v: float) -> str:
    """A coordinate in the 4.6 mm format of HEADER."""
    return str(int(round(v * 1e6)))


def piece_outline(x1, y1, x2, y2, w) -> shapely.Geometry:
    """A straight stroke of a round aperture: the stadium of length L + w
    and width w (the reader's own obround polygon, used on both sides of
    every comparison so the polygonisation is the same)."""
    length = math.hypot(x2 - x1, y2 - y1)
    if length == 0:
        return disc(x1, y1, w / 2)
    g = obround(length + w, w)
    g = shapely.affinity.rotate(g, math.atan2(y2 - y1, x2 - x1), origin=(0, 0), use_radians=True)
    return shapely.affinity.translate(g, (x1 + x2) / 2, (y1 + y2) / 2)


def copper_by_net(layer) -> dict[str | None, shapely.Geometry]:
    """Union of each net's copper: traces as stadiums, shapes as they are."""
    parts: dict[str | None, list] = {}
    t = layer.traces

    def name(i):
        return None if i == NET_UNKNOWN else layer.net_names[i]

    for k in range(len(t)):
        parts.setdefault(name(t.net[k]), []).append(piece_outline(t.x1[k], t.y1[k], t.x2[k], t.y2[k], t.width[k]))
    for s in layer.shapes:
        parts.setdefault(name(s.net), []).append(s.polygon)
    return {n: shapely.union_all(p) for n, p in parts.items()}


# --------------------------------------------------------------------------- gerbonara as oracle

def _gerbonara_arc_chords(x1, y1, x2, y2, cx, cy, clockwise):
    r = math.hypot(x1 - cx, y1 - cy)
    a0 = math.atan2(y1 - cy, x1 - cx)
    a1 = math.atan2(y2 - cy, x2 - cx)
    if math.isclose(x1, x2, abs_tol=1e-12) and math.isclose(y1, y2, abs_tol=1e-12):
        sweep = -2 * math.pi if clockwise else 2 * math.pi
    elif clockwise:
        sweep = -((a0 - a1) % (2 * math.pi))
    else:
        sweep = (a1 - a0) % (2 * math.pi)
    pts = arc_polyline(cx, cy, r, a0, sweep)
    pts[0], pts[-1] = (x1, y1), (x2, y2)
    return pts


def _gerbonara_primitive(p) -> shapely.Geometry:
    from gerbonara import graphic_primitives as gp
    if isinstance(p, gp.Circle):
        return disc(p.x, p.y, p.r)
    if isinstance(p, gp.Line):
        return piece_outline(p.x1, p.y1, p.x2, p.y2, p.width)
    if isinstance(p, gp.Arc):
        pts = _gerbonara_arc_chords(p.x1, p.y1, p.x2, p.y2, p.cx, p.cy, p.clockwise)
        return shapely.union_all([piece_outline(*pts[k], *pts[k + 1], p.width) for k in range(len(pts) - 1)])
    if isinstance(p, gp.Rectangle):
        assert p.rotation == 0, "only unrotated rectangles are compared"
        return shapely.box(p.x - p.w / 2, p.y - p.h / 2, p.x + p.w / 2, p.y + p.h / 2)
    if isinstance(p, gp.ArcPoly):
        ring = []
        for (xa, ya), (xb, yb), (clockwise, center) in p.segments:
            if clockwise is None:
                ring.append((xa, ya))
            else:
                ring.extend(map(tuple, _gerbonara_arc_chords(xa, ya, xb, yb, *center, clockwise)[:-1]))
        poly = shapely.Polygon(ring)
        return poly if poly.is_valid else shapely.make_valid(poly, method="structure")
    raise AssertionError(f"no conversion for {p!r}")


def gerbonara_copper_by_net(data: bytes) -> dict[str | None, shapely.Geometry]:
    """Per-net copper as gerbonara reads the file: its objects composed in
    file order, dark ones added to their net, clear ones removed from all."""
    from gerbonara import GerberFile
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        gf = GerberFile.from_string(data.decode())
        objects = list(gf.objects)
    nets: dict[str | None, shapely.Geometry] = {}
    for obj in objects:
        prims = list(obj.to_primitives("mm"))
        same = [_gerbonara_primitive(p) for p in prims if p.polarity_dark == obj.polarity_dark]
        other = [_gerbonara_primitive(p) for p in prims if p.polarity_dark != obj.polarity_dark]
        g = shapely.union_all(same)
        if other:
            g = g.difference(shapely.union_all(other))
        attrs = obj.attrs if isinstance(obj.attrs, dict) else {}
        net = attrs.get(".N", (None,))[0]
        if obj.polarity_dark:
            nets[net] = shapely.union(nets[net], g) if net in nets else g
        else:
            nets = {n: shapely.difference(v, g) for n, v in nets.items()}
    return nets


def assert_same_copper(mine: dict, oracle: dict, rel: float = 1e-6) -> None:
    mine = {n: g for n, g in mine.items() if g.area > 0}
    oracle = {n: g for n, g in oracle.items() if g.area > 0}
    assert set(mine) == set(oracle)
    for n in oracle:
        assert mine[n].area == pytest.approx(oracle[n].area, rel=rel), n
        # the same place too, not only the same area
        assert mine[n].symmetric_difference(oracle[n]).area <= rel * oracle[n].area + 1e-12, n


# =========================================================================== coordinates and units

def test_fs_mo_millimetres_and_the_coordinate_unit():
    # spec 4.2.2: FSLAX46Y46 in MOMM -> coordinate unit 1e-6 mm; X1500000 is 1.5 mm
    layer = read("%ADD10C,0.1*%\nD10*\nX1500000Y-250000D02*\nX2500000Y750000D01*\n")
    t = layer.traces
    assert (t.x1[0], t.y1[0], t.x2[0], t.y2[0]) == (1.5, -0.25, 2.5, 0.75)
    assert t.width[0] == 0.1


def test_inch_file_is_converted_to_millimetres():
    # spec 4.2.1 MO IN; 1 inch = 25.4 mm exactly. FSLAX24Y24: 4 decimals -> X15000 = 1.5 in = 38.1 mm
    layer = read("%ADD10C,0.01*%\nD10*\nX0Y0D02*\nX15000Y-5000D01*\n", header="%FSLAX24Y24*%\n%MOIN*%\n")
    t = layer.traces
    assert t.x2[0] == pytest.approx(38.1, rel=1e-15)
    assert t.y2[0] == pytest.approx(-12.7, rel=1e-15)
    assert t.width[0] == pytest.approx(0.254, rel=1e-15)  # aperture sizes are in the MO unit too (4.3.1)


def test_deprecated_g70_g71_set_the_unit():
    # spec 8.1.1: G70 inch, G71 mm
    inch = read("%ADD10C,0.01*%\nD10*\nX0Y0D02*\nX10000Y0D01*\n", header="%FSLAX24Y24*%\nG70*\n")
    assert inch.traces.x2[0] == pytest.approx(25.4)
    metric = read("%ADD10C,0.1*%\nD10*\nX0Y0D02*\nX1000000Y0D01*\n", header="%FSLAX46Y46*%\nG71*\n")
    assert metric.traces.x2[0] == 1.0


def test_trailing_zero_omission():
    # spec 8.2.1.1 (deprecated): with format 23, "15" is padded to "15000" and means 15.000
    layer = read("%ADD10C,0.1*%\nD10*\nX0Y0D02*\nX15Y-15D01*\n", header="%FSTAX23Y23*%\n%MOMM*%\n")
    assert (layer.traces.x2[0], layer.traces.y2[0]) == (15.0, -15.0)


def test_low_resolution_format():
    # spec 8.2.1.3: fewer decimals are deprecated but read: FSLAX23Y23 mm -> X1500 = 1.5 mm
    layer = read("%ADD10C,0.1*%\nD10*\nX0Y0D02*\nX1500Y2D01*\n", header="%FSLAX23Y23*%\n%MOMM*%\n")
    assert (layer.traces.x2[0], layer.traces.y2[0]) == (1.5, 0.002)


def test_format_and_unit_in_one_extended_command():
    # spec 3.3: an extended command holds one or more words
    layer = read("%ADD10C,0.1*%\nD10*\nX0Y0D02*\nX10000Y0D01*\n", header="%FSLAX24Y24*MOIN*%\n")
    assert layer.traces.x2[0] == pytest.approx(25.4)


# =========================================================================== draws, strokes, nets

def test_two_square_boxes_example():
    # spec 2.11.1 "Two square boxes" (the example's text, format 25): 8 draws of a 0.01 mm circle
    layer = read_raw(b"""G04 Ucamco ex. 1: Two square boxes*
%MOMM*%
%FSLAX25Y25*%
%TF.Part,Other,example*%
%LPD*%
%ADD10C,0.010*%
D10*
X0Y0D02*
G01*
X500000Y0D01*
Y500000D01*
X0D01*
Y0D01*
X600000D02*
X1100000D01*
Y500000D01*
X600000D01*
Y0D01*
M02*
""")
    t = layer.traces
    assert len(t) == 8
    assert t.stroke.tolist() == [0, 0, 0, 0, 1, 1, 1, 1]
    assert t.ordinal.tolist() == [0, 1, 2, 3, 0, 1, 2, 3]
    assert t.stroke_line.tolist() == [10, 15]  # the line of each stroke's first D01
    # the first box: (0,0) (5,0) (5,5) (0,5) (0,0) -- modal X and Y (spec 4.8.2)
    assert np.column_stack((t.x1[:4], t.y1[:4], t.x2[:4], t.y2[:4])).tolist() == [
        [0, 0, 5, 0], [5, 0, 5, 5], [5, 5, 0, 5], [0, 5, 0, 0]]
    assert layer.attributes == {".Part": ("Other", "example")}
    assert not layer.shapes


def test_strokes_break_at_aperture_and_net_changes():
    # GerberTraces contract: a stroke ends at D02, D03, an aperture change or an attribute change
    layer = read("""%ADD10C,0.1*%
%ADD11C,0.2*%
D10*
%TO.N,A*%
X0Y0D02*
X1000000Y0D01*
X2000000Y0D01*
D11*
X3000000Y0D01*
%TO.N,B*%
X4000000Y0D01*
%TO.N,B*%
X5000000Y0D01*
""")
    t = layer.traces
    assert t.stroke.tolist() == [0, 0, 1, 2, 2]  # the repeated TO.N,B changes nothing
    assert t.ordinal.tolist() == [0, 1, 0, 0, 1]
    assert t.width.tolist() == [0.1, 0.1, 0.2, 0.2, 0.2]
    assert [layer.net_names[i] for i in t.net] == ["A", "A", "A", "B", "B"]
    assert (t.x1[2], t.x2[2]) == (2.0, 3.0)  # the new stroke starts at the current point


def test_coordinates_without_operation_code_after_d01():
    # spec 8.3.2 (deprecated): after a D01, coordinates alone mean D01
    layer = read("%ADD10C,0.1*%\nD10*\nX0Y0D02*\nX1000000Y0D01*\nX1000000Y1000000*\nX0Y1000000*\n")
    assert len(layer.traces) == 3
    assert layer.traces.stroke.tolist() == [0, 0, 0]


def test_coordinates_without_operation_code_after_d02_are_refused():
    # spec 8.3.2: after D02, D03 or Dnn the operation mode is undefined
    fails(gbr("%ADD10C,0.1*%\nD10*\nX0Y0D02*\nX1000000Y0*\n"), r"no operation code.*8\.3\.2", line=6)


def test_combined_g01_d01_g54_and_style_variations():
    # spec 8.3.1 (G01 with D01 in one word), 8.1.1 (G54 before Dnn), 8.3.3 (G1 / D1 spellings)
    layer = read("%ADD10C,0.1*%\nG90*\nG54D10*\nX0Y0D2*\nG01X1000000Y0D01*\nG1X2000000Y0D1*\n")
    assert layer.traces.x2.tolist() == [1.0, 2.0]


def test_net_attribute_values():
    # spec 5.6.13: the empty value and N/C are reserved net names; 3.4.3 unicode escapes
    layer = read("""%ADD10C,0.1*%
D10*
%TO.N,*%
X0Y0D02*
X1000000Y0D01*
%TO.N,N/C*%
X2000000Y0D02*
X3000000Y0D01*
%TO.N,Caf\\u00e9*%
X4000000Y0D02*
X5000000Y0D01*
%TO.N,A,B*%
X6000000Y0D02*
X7000000Y0D01*
%TD.N*%
X8000000Y0D02*
X9000000Y0D01*
""")
    assert layer.net_names == ["", "N/C", "Caf\u00e9"]
    assert layer.traces.net.tolist() == [0, 1, 2, NET_UNKNOWN, NET_UNKNOWN]  # several nets, then none


def test_old_comment_form_of_attributes():
    # the G04 #@! form carries the same attribute commands (spec 4.1 reserves "#@!")
    layer = read("""G04 #@! TF.FileFunction,Copper,L2,Inr,Plane*
G04 #@! TA.AperFunction,ViaPad*
%ADD10C,0.6*%
G04 #@! TO.N,GND*
D10*
X0Y0D03*
G04 #@! TD*
X1000000Y0D03*
""")
    assert layer.file_function == ("Copper", "L2", "Inr", "Plane")
    p = pads(layer)
    assert [s.function for s in p] == ["ViaPad", "ViaPad"]
    assert [s.net for s in p] == [0, NET_UNKNOWN]


def test_aperture_attributes_attach_at_definition():
    # spec 5.3: AD attaches the TA dictionary as it is then; later TA and TD do not change the aperture
    layer = read("""%TA.AperFunction,SMDPad,CuDef*%
%ADD10R,1X0.5*%
%TA.AperFunction,ComponentPad*%
%ADD11C,1*%
%TD.AperFunction*%
%ADD12C,1*%
%TO.P,U1,3,VCC*%
%TO.C,U1*%
D10*
X0Y0D03*
D11*
X2000000Y0D03*
D12*
X4000000Y0D03*
""")
    p = pads(layer)
    assert [s.function for s in p] == ["SMDPad", "ComponentPad", None]
    assert [s.at for s in p] == [(0.0, 0.0), (2.0, 0.0), (4.0, 0.0)]
    assert p[0].pin == ("U1", "3", "VCC") and p[0].component == "U1"  # spec 5.6.14, 5.6.15


def test_file_function_polarity_and_other_file_attributes():
    # spec 5.6.3, 5.6.4
    layer = read("%ADD10C,1*%\nD10*\nX0Y0D03*\n",
                 header="%TF.FileFunction,Copper,L2,Inr,Plane*%\n%TF.FilePolarity,Negative*%\n"
                        "%TF.GenerationSoftware,Invented,Tool,1.0*%\n" + HEADER)
    assert layer.file_function == ("Copper", "L2", "Inr", "Plane")
    assert layer.negative is True
    assert layer.attributes == {".GenerationSoftware": ("Invented", "Tool", "1.0")}
    assert len(pads(layer)) == 1  # the drawn objects are returned as they are


def test_deprecated_image_polarity_negative():
    # spec 8.1.4: IPNEG reverses the image: the drawn objects are the absence of copper
    assert read("%ADD10C,1*%\nD10*\nX0Y0D03*\n", header="%IPNEG*%\n" + HEADER).negative is True
    assert read("%ADD10C,1*%\nD10*\nX0Y0D03*\n", header="%IPPOS*%\n" + HEADER).negative is False


def test_non_conductor_copper_is_flagged_not_a_trace_and_drawings_are_dropped():
    # spec 5.6.10: NonConductor is copper without electrical function; NonMaterial and Profile are not copper
    layer = read("""%TF.FileFunction,Copper,L1,Top*%
%TA.AperFunction,NonConductor*%
%ADD10C,0.2*%
%TA.AperFunction,NonMaterial*%
%ADD11C,0.2*%
%TA.AperFunction,Profile*%
%ADD12C,0.1*%
%TD*%
D10*
X0Y0D02*
X1000000Y0D01*
D11*
X0Y5000000D02*
X1000000Y5000000D01*
X0Y0D03*
D12*
X0Y9000000D02*
X9000000Y9000000D01*
""")
    assert len(layer.traces) == 0
    (s,) = layer.shapes
    assert (s.kind, s.function) == ("draw", "NonConductor")
    # a 1 mm stroke 0.2 wide with round ends: 1 x 0.2 + pi 0.1^2
    assert s.polygon.area == pytest.approx(0.2 + math.pi * 0.01, rel=1e-12)


def test_profile_draws_are_read_in_a_profile_file():
    # spec 5.6.3 Profile file: its draws (.AperFunction Profile) are its content, not drawing clutter
    layer = read("%TF.FileFunction,Profile,NP*%\n%TA.AperFunction,Profile*%\n%ADD10C,0.1*%\nD10*\nX0Y0D02*\n"
                 "X10000000Y0D01*\nY5000000D01*\nX0D01*\nY0D01*\n")
    assert len(layer.traces) == 4 and layer.file_function == ("Profile", "NP")


def test_zero_length_draw_is_a_dot():
    # spec 2.4: a zero-length draw is a draw object whose image is that of a flash: a disc
    layer = read("%ADD10C,0.5*%\nD10*\nX1000000Y1000000D02*\nX1000000Y1000000D01*\n")
    assert len(layer.traces) == 0
    (s,) = layer.shapes
    assert s.kind == "draw" and s.at is None
    assert s.polygon.area == pytest.approx(math.pi * 0.25**2, rel=1e-12)  # pi r^2, r = 0.25
    assert s.polygon.centroid.coords[0] == pytest.approx((1.0, 1.0))


def test_zero_length_piece_inside_a_stroke_is_dropped():
    layer = read("%ADD10C,0.5*%\nD10*\nX0Y0D02*\nX1000000Y0D01*\nX1000000Y0D01*\nX2000000Y0D01*\n")
    assert len(layer.traces) == 2 and not layer.shapes
    assert layer.traces.stroke.tolist() == [0, 0]


def test_zero_size_circle_makes_no_copper():
    # spec 4.3.2: a C aperture of diameter 0 is valid; its objects do not affect the image
    layer = read("%ADD10C,0*%\nD10*\nX0Y0D03*\nX1000000Y0D01*\n")
    assert len(layer.traces) == 0 and not layer.shapes


# =========================================================================== standard apertures

def test_circle_flash_area_and_hole():
    # spec 4.4.2 circle; 4.4.6 a hole is not part of the aperture: area pi (R^2 - r^2)
    layer = read("%ADD10C,1.5*%\n%ADD11C,1.5X0.5*%\nD10*\nX0Y0D03*\nD11*\nX5000000Y0D03*\n")
    solid, holed = pads(layer)
    assert solid.polygon.area == pytest.approx(math.pi * 0.75**2, rel=1e-12)
    assert holed.polygon.area == pytest.approx(math.pi * (0.75**2 - 0.25**2), rel=1e-12)
    assert len(holed.polygon.interiors) == 1
    assert holed.polygon.centroid.coords[0] == pytest.approx((5.0, 0.0))


def test_circle_polygon_stays_within_the_chord_tolerance():
    # the disc polygon's boundary lies within ARC_CHORD_TOLERANCE_MM of the true circle
    layer = read("%ADD10C,5*%\nD10*\nX0Y0D03*\n")
    ring = np.asarray(pads(layer)[0].polygon.exterior.coords)
    assert np.abs(np.hypot(ring[:, 0], ring[:, 1]) - 2.5).max() <= ARC_CHORD_TOLERANCE_MM
    mid = (ring[1:] + ring[:-1]) / 2  # edge midpoints: the farthest inside
    assert np.abs(np.hypot(mid[:, 0], mid[:, 1]) - 2.5).max() <= ARC_CHORD_TOLERANCE_MM


def test_rectangle_flash_and_hole():
    # spec 4.4.3: w x h; with a round hole w h - pi r^2
    layer = read("%ADD10R,2X1*%\n%ADD11R,2X1X0.4*%\nD10*\nX1000000Y2000000D03*\nD11*\nX0Y0D03*\n")
    rect, holed = pads(layer)
    assert rect.polygon.bounds == (0.0, 1.5, 2.0, 2.5)
    assert rect.polygon.area == 2.0
    assert holed.polygon.area == pytest.approx(2.0 - math.pi * 0.2**2, rel=1e-12)


def test_deprecated_rectangular_hole():
    # spec 8.2.2: two hole values are a rectangular hole: 10 mm circle minus a 5 x 5 mm square
    layer = read("%ADD10C,10X5X5*%\nD10*\nX0Y0D03*\n")
    assert pads(layer)[0].polygon.area == pytest.approx(math.pi * 25 - 25, rel=1e-12)


def test_obround_flash():
    # spec 4.4.4: a w x h box whose short sides are half circles: (w - h) h + pi (h/2)^2
    layer = read("%ADD10O,3X1*%\n%ADD11O,1X3X0.5*%\n%ADD12O,2X2*%\nD10*\nX0Y0D03*\nD11*\nX5000000Y0D03*\n"
                 "D12*\nX9000000Y0D03*\n")
    wide, tall, round_ = pads(layer)
    assert wide.polygon.area == pytest.approx(2 * 1 + math.pi * 0.25, rel=1e-12)
    # the half-circle ends lie within the chord tolerance of the true ends
    assert wide.polygon.bounds == pytest.approx((-1.5, -0.5, 1.5, 0.5), abs=ARC_CHORD_TOLERANCE_MM)
    assert tall.polygon.area == pytest.approx(2 + math.pi * 0.25 - math.pi * 0.0625, rel=1e-12)
    assert tall.polygon.bounds == pytest.approx((4.5, -1.5, 5.5, 1.5), abs=ARC_CHORD_TOLERANCE_MM)
    assert round_.polygon.area == pytest.approx(math.pi, rel=1e-12)  # w = h: a circle


def test_polygon_flash():
    # spec 4.4.5: regular polygon, outer diameter d: area n/2 (d/2)^2 sin(2 pi / n);
    # rotation 0 puts a vertex on the positive X axis through the centre
    layer = read("%ADD10P,2X6*%\n%ADD11P,2X4X45*%\n%ADD12P,2X3X0X0.5*%\nD10*\nX0Y0D03*\nD11*\nX5000000Y0D03*\n"
                 "D12*\nX9000000Y0D03*\n")
    hexagon, square, holed = pads(layer)
    assert hexagon.polygon.area == pytest.approx(3 * math.sin(math.pi / 3), rel=1e-12)
    assert hexagon.polygon.bounds[2] == pytest.approx(1.0)  # vertex at (1, 0)
    # 4 vertices at 45, 135 ... degrees on a radius-1 circle: an axis-parallel square of side sqrt 2
    assert square.polygon.area == pytest.approx(2.0, rel=1e-12)
    assert square.polygon.bounds == pytest.approx((5 - 0.5**0.5, -0.5**0.5, 5 + 0.5**0.5, 0.5**0.5))
    assert holed.polygon.area == pytest.approx(1.5 * math.sin(2 * math.pi / 3) - math.pi * 0.0625, rel=1e-12)


def test_aperture_sizes_the_spec_forbids():
    # spec 4.3.2: only the C aperture may have size 0; 4.4.5: 3 to 12 vertices; 4.4.6: the hole must fit
    fails(gbr("%ADD10R,0X1*%\n"), r"aperture D10: rectangle X size must be greater than 0", line=3)
    fails(gbr("%ADD10O,1X-1*%\n"), r"obround Y size must be greater than 0", line=3)
    fails(gbr("%ADD10P,1X13*%\n"), r"3 to 12 vertices", line=3)
    fails(gbr("%ADD10C,1X1*%\n"), r"hole does not fit", line=3)
    fails(gbr("%ADD10C,-1*%\n"), r"must not be negative", line=3)
    fails(gbr("%ADD10C,1*%\n%ADD10C,2*%\n"), r"D10 is defined a second time \(first at line 3\)", line=4)
    fails(gbr("%ADD5C,1*%\n"), r"outside D10", line=3)


# =========================================================================== aperture macros

def test_macro_circle_with_exposure_off_hole():
    # spec 4.5.5.1 DONUTFIX: a 0.100 circle with exposure-off 0.080 circle: pi (0.05^2 - 0.04^2)
    layer = read("%AMDONUTFIX*\n1,1,0.100,0,0*\n1,0,0.080,0,0*%\n%ADD33DONUTFIX*%\nD33*\nX0Y0D03*\n")
    assert pads(layer)[0].polygon.area == pytest.approx(math.pi * (0.05**2 - 0.04**2), rel=1e-12)


def test_macro_variables_and_definition():
    # spec 4.5.5.3 DONUTCAL: $4=$1x0.75; with AD 0.020 the inner diameter is 0.015
    layer = read("%AMDONUTCAL*\n1,1,$1,$2,$3*\n$4=$1x0.75*\n1,0,$4,$2,$3*%\n%ADD35DONUTCAL,0.020X0X0*%\n"
                 "D35*\nX0Y0D03*\n")
    assert pads(layer)[0].polygon.area == pytest.approx(math.pi * (0.01**2 - 0.0075**2), rel=1e-12)


def test_macro_expressions():
    # spec 4.5.4.2: + - x / with the usual precedence, unary minus, parentheses; undefined variables are 0
    # a centre-line rectangle of width $1+$2x3 = 1 + 0.5 x 3 = 2.5, height ($1+$2)/3 x 2 = 1,
    # centred at (-$9 + 1, -(2-3)) = (1, 1) ($9 undefined: 0)
    layer = read("%AMEXPR*\n21,1,$1+$2x3,($1+$2)/3x2,-$9+1,-(2-3),0*%\n%ADD20EXPR,1X0.5*%\nD20*\nX0Y0D03*\n")
    assert pads(layer)[0].polygon.bounds == pytest.approx((1 - 1.25, 0.5, 1 + 1.25, 1.5))


def test_uppercase_x_multiply_in_macros():
    # seen in exports: X as the multiply sign; 5,1,8,0,0,1.08239X$1,22.5 is an octagon of diameter 1.08239 $1
    layer = read("%AMOC8*\n5,1,8,0,0,1.08239X$1,22.5*%\n%ADD10OC8,1*%\nD10*\nX0Y0D03*\n")
    r = 1.08239 / 2
    assert pads(layer)[0].polygon.area == pytest.approx(4 * r * r * math.sin(math.pi / 4), rel=1e-12)


def test_macro_centre_line_rotates_about_the_macro_origin():
    # spec 4.5.1.5 example RECTANGLE: 21,1,6.8,1.2,3.4,0.6,30 -- rotation about (0, 0), not the centre
    layer = read("%AMRECTANGLE*\n21,1,6.8,1.2,3.4,0.6,30*%\n%ADD10RECTANGLE*%\nD10*\nX0Y0D03*\n")
    g = pads(layer)[0].polygon
    t = math.radians(30)
    assert g.area == pytest.approx(6.8 * 1.2, rel=1e-12)
    assert g.centroid.coords[0] == pytest.approx((3.4 * math.cos(t) - 0.6 * math.sin(t),
                                                  3.4 * math.sin(t) + 0.6 * math.cos(t)))


def test_macro_vector_line_outline_polygon_and_circle_rotation():
    # spec 4.5.1.4 vector line: a w x length rectangle with square ends: 0.9 x 12 (example "Line")
    line = read("%AMLine*\n20,1,0.9,0,0.45,12,0.45,0*%\n%ADD10Line*%\nD10*\nX0Y0D03*\n")
    assert pads(line)[0].polygon.bounds == pytest.approx((0, 0, 12, 0.9))
    # spec 4.5.1.6 example Triangle_30: (1,-1) (1,1) (2,1), rotated 30 degrees about the origin; area 1
    tri = read("%AMTriangle_30*\n4,1,3,\n1,-1,\n1,1,\n2,1,\n1,-1,\n30*\n%\n%ADD10Triangle_30*%\nD10*\nX0Y0D03*\n")
    g = pads(tri)[0].polygon
    assert g.area == pytest.approx(1.0, rel=1e-12)
    t = math.radians(30)
    cx, cy = 4 / 3, 1 / 3  # the triangle's centroid before rotation
    assert g.centroid.coords[0] == pytest.approx((cx * math.cos(t) - cy * math.sin(t),
                                                  cx * math.sin(t) + cy * math.cos(t)))
    # spec 4.5.1.7 polygon primitive: 8 vertices, diameter 8: area 4 x 4^2 sin(45 degrees)
    octagon = read("%AMPolygon*\n5,1,8,0,0,8,0*%\n%ADD10Polygon*%\nD10*\nX0Y0D03*\n")
    assert pads(octagon)[0].polygon.area == pytest.approx(4 * 16 * math.sin(math.pi / 4), rel=1e-12)
    # spec 4.5.1.3: the circle's optional rotation moves its centre about the origin: (2, 0) by 90 -> (0, 2)
    circle = read("%AMC1*\n1,1,1,2,0,90*%\n%ADD10C1*%\nD10*\nX0Y0D03*\n")
    assert pads(circle)[0].polygon.centroid.coords[0] == pytest.approx((0.0, 2.0), abs=1e-12)


def test_macro_thermal():
    # spec 4.5.1.8: ring (outer D, inner d) with two crossing gaps of width g through the centre.
    # Hand formula: the strip |y| < h of a disc of radius R has area 2 (h sqrt(R^2 - h^2) + R^2 asin(h/R));
    # the gaps remove 2 (S(R) - S(r)) from the ring (their g x g crossing lies inside the inner circle).
    outer, inner, gap = 0.8, 0.55, 0.125
    layer = read(f"%AMTHERMAL80*\n7,0,0,{outer},{inner},{gap},45*%\n%ADD19THERMAL80*%\nD19*\nX0Y0D03*\n")

    def strip(radius, h):
        return 2 * (h * math.sqrt(radius**2 - h**2) + radius**2 * math.asin(h / radius))

    expected = math.pi * (outer**2 - inner**2) / 4 - 2 * (strip(outer / 2, gap / 2) - strip(inner / 2, gap / 2))
    g = pads(layer)[0].polygon
    # The disc polygons have exact areas, but where a gap cuts them their boundary is within
    # ARC_CHORD_TOLERANCE_MM of the circle, so the area may differ by at most that times the length of the
    # circle arcs inside the gaps: 4 arcs of 2 radius asin(h / radius) on each circle.
    arcs = sum(4 * 2 * rho * math.asin(gap / 2 / rho) for rho in (outer / 2, inner / 2))
    assert abs(g.area - expected) <= ARC_CHORD_TOLERANCE_MM * arcs
    assert g.geom_type == "MultiPolygon" and len(g.geoms) == 4  # four quarter rings


def _strip(radius, h):
    """Area of the part of a disc of ``radius`` with |y| < h: 2 (h sqrt(r^2 - h^2) + r^2 asin(h / r))."""
    return 2 * (h * math.sqrt(radius**2 - h**2) + radius**2 * math.asin(h / radius))


def test_deprecated_macro_primitives_moire_and_lines():
    # spec 8.2.6 example MOIRE: 6,0,0,5,0.5,0.5,2,0.1,6,0 -- two rings (outer diameters 5 and 3, thickness
    # 0.5) and a crosshair of two 6 x 0.1 bars. Union area: rings 2.25 pi + 1.25 pi, bars 2 x 0.6 - 0.01,
    # minus where the bars cross the rings (strip formula, 4 crossings per ring); the bars' 0.1 x 0.1
    # crossing lies inside the inner ring's hole.
    layer = read("%AMMOIRE*\n6,0,0,5,0.5,0.5,2,0.1,6,0*%\n%ADD10MOIRE*%\nD10*\nX0Y0D03*\n")
    h = 0.05
    overlap = 2 * sum(_strip(outer, h) - _strip(outer - 0.5, h) for outer in (2.5, 1.5))
    expected = 3.5 * math.pi + 2 * 0.6 - 0.01 - overlap
    arcs = sum(4 * 2 * rho * math.asin(h / rho) for rho in (2.5, 2.0, 1.5, 1.0))
    assert abs(pads(layer)[0].polygon.area - expected) <= ARC_CHORD_TOLERANCE_MM * arcs
    # spec 8.2.5 primitive 22: a 6.8 x 1.2 rectangle with its lower left corner at (0, 0) (example LINE2)
    lower_left = read("%AMLINE2*\n22,1,6.8,1.2,0,0,0*%\n%ADD10LINE2*%\nD10*\nX0Y0D03*\n")
    assert pads(lower_left)[0].polygon.bounds == pytest.approx((0, 0, 6.8, 1.2))
    # spec 8.2.4: primitive 2 is primitive 20
    two = read("%AMV*\n2,1,0.9,0,0.45,12,0.45,0*%\n%ADD10V*%\nD10*\nX0Y0D03*\n")
    assert pads(two)[0].polygon.bounds == pytest.approx((0, 0, 12, 0.9))


def test_macro_errors_name_the_line():
    fails(gbr("%AMBAD*\n1,1,$1*%\n"), r"primitive 1 takes 4 or 5 parameters, not 2", line=4)
    fails(gbr("%AMBAD*\n9,1,2*%\n"), r"unknown primitive code 9", line=4)
    fails(gbr("%AMBAD*\n1,1,(1+2,0,0*%\n"), r"unclosed parenthesis", line=4)
    fails(gbr("%AMBAD*\n1,1,1/0,0,0*%\n%ADD10BAD*%\n"), r"aperture D10: division by zero", line=5)
    fails(gbr("%AMBAD*\n1,2,1,0,0*%\n%ADD10BAD*%\n"), r"exposure 2", line=5)
    fails(gbr("%ADD10NOPE,1*%\n"), r"uses the macro 'NOPE', which was never defined", line=3)
    # spec 2.4: draws need a circle standard aperture (or the deprecated rectangle); 4.10.1: no D03 in a region
    fails(gbr("%AMC1*\n1,1,1,0,0*%\n%ADD10C1*%\nD10*\nX0Y0D02*\nX1000000Y0D01*\n"),
          r"D01 with D10, a macro aperture", line=8)
    fails(gbr("%ADD10C,1*%\nD10*\nG36*\nX0Y0D02*\nX0Y0D03*\n"), r"D03 \(flash\) inside a region", line=7)


# =========================================================================== arcs

def _arc_pieces(layer):
    t = layer.traces
    return np.column_stack((t.x1, t.y1, t.x2, t.y2))


def test_g75_quarter_arc_matches_the_json_door():
    # spec 4.7.2: centre = start + (I, J). From (1, 0) to (0, 1) counter-clockwise around (0, 0), radius 1.
    layer = read("%ADD10C,0.1*%\nD10*\nX1000000Y0D02*\nG75*\nG03*\nX0Y1000000I-1000000J0D01*\n")
    pieces = _arc_pieces(layer)
    assert len(pieces) == chord_count(1.0, math.pi / 2)
    ends = np.vstack((pieces[:, :2], pieces[-1:, 2:]))
    assert np.hypot(ends[:, 0], ends[:, 1]) == pytest.approx(1.0, abs=1e-12)
    # the JSON door chords the same arc into the same pieces
    board = read_board_dict({
        "format": "couplint-board", "version": 1, "name": "arc", "units": "mm",
        "stackup": [{"copper": "TOP", "role": "signal", "thickness": 0.035}],
        "nets": [{"name": "N"}],
        "arcs": [{"layer": "TOP", "net": "N", "width": 0.1, "center": [0, 0], "radius": 1,
                  "start_angle": 0, "end_angle": 90}],
    }, "arc.json")
    p = board.pieces
    assert np.column_stack((p.x1, p.y1, p.x2, p.y2)) == pytest.approx(pieces, abs=1e-12)


def test_g75_full_circle_and_clockwise_arc():
    # spec 4.7.2: start = end is a full circle; G02 is clockwise
    layer = read("%ADD10C,0.1*%\nD10*\nX0Y6000000D02*\nG75*\nG02*\nX0Y6000000I5000000J0D01*\n")
    pieces = _arc_pieces(layer)
    assert len(pieces) == chord_count(5.0, 2 * math.pi)
    d = np.hypot(pieces[:, 0] - 5, pieces[:, 1] - 6)
    assert d == pytest.approx(5.0, abs=1e-9)
    # clockwise: the first chord goes from (0, 6) upwards (around centre (5, 6))
    assert pieces[0, 3] > 6
    assert (pieces[0, 0], pieces[0, 1]) == (0.0, 6.0) and (pieces[-1, 2], pieces[-1, 3]) == (0.0, 6.0)


def test_g74_single_quadrant_arcs():
    # spec 8.1.10 example: four quarter arcs of radius 4 around (7, 6) with unsigned I, J, then two draws
    layer = read_raw(b"%FSLAX22Y22*%\n%MOMM*%\n%ADD10C,0.1*%\nG74*\nD10*\nX1100Y600D02*\nG03*\n"
                     b"X700Y1000I400J0D01*\nX300Y600I0J400D01*\nX700Y200I400J0D01*\nX1100Y600I0J400D01*\n"
                     b"X300D02*\nG01*\nX1100D01*\nX700Y200D02*\nY1000D01*\nM02*\n")
    t = layer.traces
    arc = t.stroke == 0
    pts = np.vstack((np.column_stack((t.x1[arc], t.y1[arc])), [[t.x2[arc][-1], t.y2[arc][-1]]]))
    assert np.hypot(pts[:, 0] - 7, pts[:, 1] - 6) == pytest.approx(4.0, abs=1e-9)
    # counter-clockwise all the way round: the swept angle adds up to 2 pi
    angles = np.unwrap(np.arctan2(pts[:, 1] - 6, pts[:, 0] - 7))
    assert angles[-1] - angles[0] == pytest.approx(2 * math.pi)
    assert len(t) == arc.sum() + 2


def test_g74_zero_length_arc_is_a_dot_not_a_circle():
    # spec 8.1.10: in G74 an arc whose end is its start covers 0 degrees; in G75 it is a full circle
    dot = read("%ADD10C,0.5*%\nD10*\nX0Y6000000D02*\nG74*\nG02*\nX0Y6000000I5000000J0D01*\n")
    assert len(dot.traces) == 0 and dot.shapes[0].polygon.area == pytest.approx(math.pi * 0.0625)
    circle = read("%ADD10C,0.5*%\nD10*\nX0Y6000000D02*\nG75*\nG02*\nX0Y6000000I5000000J0D01*\n")
    assert len(circle.traces) > 8 and not circle.shapes


def test_arc_errors():
    fails(gbr("%ADD10C,0.1*%\nD10*\nX0Y0D02*\nG03*\nX1000000Y1000000I0J1000000D01*\n"),
          r"before G75.*4\.7\.2", line=7)
    # centre (3, 0) is 3 from the start (0, 0) but 1 from the end (2, 0): spec 4.7.2.2 "nonsensical"
    fails(gbr("%ADD10C,0.1*%\nD10*\nX0Y0D02*\nG75*\nG03*\nX2000000Y0I3000000J0D01*\n"),
          r"no circle fits \(spec 4\.7\.2\.2\)", line=8)
    fails(gbr("%ADD10C,0.1*%\nD10*\nX0Y0D02*\nG75*\nG03*\nX2000000Y0I0J0D01*\n"), r"centre coincides", line=8)


# =========================================================================== regions

def test_region_square_with_attributes():
    # spec 4.10.4.1-style contour; 5.3.1 aperture attributes and 5.4 object attributes attach to regions
    layer = read("%TA.AperFunction,Conductor*%\n%TO.N,GND*%\nG36*\nX0Y0D02*\nG01*\nX2000000D01*\nY1000000D01*\n"
                 "X0D01*\nY0D01*\nG37*\n")
    (r,) = layer.shapes
    assert (r.kind, r.function, layer.net_names[r.net], r.line) == ("region", "Conductor", "GND", 6)
    assert r.polygon.area == 2.0


def test_region_spec_simple_contour():
    # spec 4.10.4.1 (the example's coordinates, format 4.6 assumed): (2,3) (7,3) (7,1) (11,5) (7,9) (7,7) (2,7)
    layer = read("G36*\nX2000000Y3000000D02*\nG01*\nX7000000D01*\nY1000000D01*\nX11000000Y5000000D01*\n"
                 "X7000000Y9000000D01*\nY7000000D01*\nX2000000D01*\nY3000000D01*\nG37*\n")
    # a 5 x 4 rectangle plus a triangle with base 8 (y 1..9) and height 4 (x 7..11): 20 + 16
    assert layer.shapes[0].polygon.area == pytest.approx(36.0)


def test_region_several_contours_and_fully_coincident_segments():
    # spec 4.10.4.2: D02 starts a second contour; each contour is filled on its own
    two = read("G36*\nX0Y5000000D02*\nY10000000D01*\nX10000000D01*\nY0D01*\nX0D01*\nY5000000D01*\n"
               "X-1000000D02*\nX-5000000Y1000000D01*\nX-9000000Y5000000D01*\nX-5000000Y9000000D01*\n"
               "X-1000000Y5000000D01*\nG37*\n")
    assert [s.polygon.area for s in two.shapes] == pytest.approx([100.0, 32.0])
    # spec 4.10.4.8 ex2: fully coincident segments cut a diamond hole into the square: 100 - 32
    hole = read("G36*\nX0Y5000000D02*\nY10000000D01*\nX10000000D01*\nY0D01*\nX0D01*\nY5000000D01*\n"
                "X1000000D01*\nX5000000Y1000000D01*\nX9000000Y5000000D01*\nX5000000Y9000000D01*\n"
                "X1000000Y5000000D01*\nX0D01*\nG37*\n")
    (s,) = hole.shapes
    assert s.polygon.area == pytest.approx(68.0) and len(s.polygon.interiors) == 1
    # spec 4.10.4.8 ex1: the same with the diamond outside: one contour, two regions, 100 + 32
    apart = read("G36*\nX0Y5000000D02*\nY10000000D01*\nX10000000D01*\nY0D01*\nX0D01*\nY5000000D01*\n"
                 "X-1000000D01*\nX-5000000Y1000000D01*\nX-9000000Y5000000D01*\nX-5000000Y9000000D01*\n"
                 "X-1000000Y5000000D01*\nX0D01*\nG37*\n")
    (s,) = apart.shapes
    assert s.polygon.geom_type == "MultiPolygon" and s.polygon.area == pytest.approx(132.0)


def test_region_cut_in_with_circle():
    # spec 4.10.4.7: square (2,2)-(12,10) with a cut-in to a full circle of radius 3 around (8, 6).
    # The circle is n chords (n = chord_count(3, 2 pi)); the hole is that regular n-gon: n/2 r^2 sin(2 pi/n).
    layer = read("G75*\nG36*\nX2000000Y10000000D02*\nG01*\nX12000000D01*\nY2000000D01*\nX2000000D01*\n"
                 "Y6000000D01*\nX5000000D01*\nG03*\nX5000000Y6000000I3000000J0D01*\nG01*\nX2000000D01*\n"
                 "Y10000000D01*\nG37*\n")
    n = chord_count(3.0, 2 * math.pi)
    (s,) = layer.shapes
    assert s.polygon.area == pytest.approx(80 - n / 2 * 9 * math.sin(2 * math.pi / n), rel=1e-12)
    assert len(s.polygon.interiors) == 1


def test_region_valid_cut_in_example():
    # spec 4.10.4.9 (valid cut-in), read with FSLAX26Y26: a 0.09 x 0.15 mm block with two slots of
    # 0.04 x 0.04 and 0.04 x 0.03 mm: 0.0135 - 0.0016 - 0.0012 = 0.0107 mm^2
    body = ("G36*\nX1220000Y2570000D02*\nG01*\nY2720000D01*\nX1310000D01*\nY2570000D01*\nX1250000D01*\n"
            "Y2600000D01*\nX1290000D01*\nY2640000D01*\nX1250000D01*\nY2670000D01*\nX1290000D01*\nY2700000D01*\n"
            "X1250000D01*\nY2670000D01*\nY2640000D01*\nY2600000D01*\nY2570000D01*\nX1220000D01*\nG37*\n")
    layer = read(body, header="%FSLAX26Y26*%\n%MOMM*%\n")
    assert layer.shapes[0].polygon.area == pytest.approx(0.0107, rel=1e-9)


def test_unclosed_region_is_refused():
    # spec 4.10, 4.13: a region statement must be closed by G37 before M02
    fails(gbr("G36*\nX0Y0D02*\nX1000000Y0D01*\nX0Y1000000D01*\n"), r"M02 inside the region statement opened "
          r"at line 3: G37 is missing", line=7)
    # and at the end of a file without M02 the error points at the G36
    fails(gbr("G36*\nX0Y0D02*\nX1000000Y0D01*\n", end=""), r"region statement \(G36\) opened here is not closed",
          line=3)


# =========================================================================== polarity

def test_clear_polarity_removes_earlier_copper_of_any_net():
    # spec 2.7: a clear object clears everything created before it; later dark objects stay whole
    layer = read("""%ADD10R,10X10*%
%ADD11R,2X20*%
%ADD12R,4X4*%
D10*
%TO.N,A*%
X0Y0D03*
%TO.N,B*%
D11*
%LPC*%
X0Y0D03*
%LPD*%
%TO.N,C*%
D12*
X0Y0D03*
""")
    copper = copper_by_net(layer)
    assert copper["A"].area == pytest.approx(100 - 2 * 10)  # 10 x 10 minus the 2 x 10 strip
    assert copper["C"].area == pytest.approx(16.0)  # drawn after the clear object: whole
    assert "B" not in copper  # the clear object itself is no copper
    assert len(pads(layer)) == 2


def test_clear_polarity_clips_trace_centrelines():
    # gerber_output: a trace cut by a clear object ends square where its centreline meets the outline;
    # a trace drawn after the clear object is untouched
    layer = read("""%ADD10C,0.2*%
%ADD11R,2X2*%
D10*
X-5000000Y0D02*
X5000000Y0D01*
X5000000Y3000000D01*
%LPC*%
D11*
X0Y0D03*
%LPD*%
D10*
X-5000000Y500000D02*
X5000000Y500000D01*
""")
    t = layer.traces
    rows = np.column_stack((t.x1, t.y1, t.x2, t.y2)).tolist()
    assert rows == [[-5, 0, -1, 0], [1, 0, 5, 0], [5, 0, 5, 3], [-5, 0.5, 5, 0.5]]
    assert t.stroke.tolist() == [0, 1, 1, 2] and t.ordinal.tolist() == [0, 0, 1, 0]
    assert t.stroke_line.tolist() == [7, 7, 15]  # the line of each stroke's first D01


def test_spec_polarity_example_against_exact_area():
    # spec 4.10.4.6 (the example's text, read with format 26 instead of 25): big square (2.5..17.5)^2 dark,
    # circle r 5 at (10,10) clear, square (7.5..12.5)^2 dark, circle r 2.5 at (14,10) clear. Exact area by
    # inclusion-exclusion:
    # 225 - 25 pi + 25 - area(small circle minus (big circle minus small square)).
    layer = read_raw(b"""%FSLAX26Y26*%
%MOMM*%
G01*
%LPD*%
G36*
X2500000Y2500000D02*
X17500000D01*
Y17500000D01*
X2500000D01*
Y2500000D01*
G37*
%LPC*%
G36*
G75*
X5000000Y10000000D02*
G03*
X5000000Y10000000I5000000J0D01*
G37*
%LPD*%
G01*
G36*
X7500000Y7500000D02*
X12500000D01*
Y12500000D01*
X7500000D01*
Y7500000D01*
G37*
%LPC*%
G36*
G75*
X11500000Y10000000D02*
G03*
X11500000Y10000000I2500000J0D01*
G37*
M02*
""")
    got = shapely.union_all([s.polygon for s in layer.shapes])
    # the same construction from exact-area shapes (discs of exactly pi r^2 at the chord count the reader uses
    # for arcs would differ by the chord error; compare with the chorded circles' areas instead)
    n5, n25 = chord_count(5.0, 2 * math.pi), chord_count(2.5, 2 * math.pi)
    big = shapely.box(2.5, 2.5, 17.5, 17.5)
    c1 = shapely.Polygon(arc_polyline(10, 10, 5, math.pi, 2 * math.pi)[:-1])
    sq = shapely.box(7.5, 7.5, 12.5, 12.5)
    c2 = shapely.Polygon(arc_polyline(14, 10, 2.5, math.pi, 2 * math.pi)[:-1])
    expected = big.difference(c1).union(sq).difference(c2)
    assert len(c1.exterior.coords) == n5 + 1 and len(c2.exterior.coords) == n25 + 1
    assert got.area == pytest.approx(expected.area, rel=1e-12)
    assert got.symmetric_difference(expected).area < 1e-9


# =========================================================================== LM / LR / LS

def test_load_rotation_and_mirroring_of_flashes():
    # spec 4.9.4: LR rotates the aperture counter-clockwise about its origin; 4.9.3: LM mirrors first
    layer = read("""%AMARROW*
4,1,3,0,0,2,0,0,1,0,0,0*%
%ADD10ARROW*%
%ADD11R,2X1*%
D11*
%LR90*%
X0Y0D03*
D10*
%LR0*%
X10000000Y0D03*
%LMX*%
X20000000Y0D03*
%LR90*%
X30000000Y0D03*
""")
    rect, arrow, mirrored, mirrored_rotated = pads(layer)
    assert rect.polygon.bounds == pytest.approx((-0.5, -1, 0.5, 1))  # 2 x 1 turned into 1 x 2
    assert arrow.polygon.bounds == pytest.approx((10, 0, 12, 1))
    assert mirrored.polygon.bounds == pytest.approx((18, 0, 20, 1))  # x negated
    # mirror first, then rotate: (2, 0) -> (-2, 0) -> (0, -2); rotating first would give (0, 2) -> (0, 2)
    assert mirrored_rotated.polygon.bounds == pytest.approx((29, -2, 30, 0))


def test_load_scaling_of_draws_and_flashes():
    # spec 4.9 example: a 1 mm circle draws a 1 mm line, after LS1.5 a 1.5 mm line
    layer = read("%ADD10C,1*%\nD10*\nG01*\nX0Y0D02*\nX1000000D01*\n%LS1.5*%\nY2000000D01*\nX5000000Y5000000D03*\n")
    assert layer.traces.width.tolist() == [1.0, 1.5]
    assert layer.traces.stroke.tolist() == [0, 1]  # a transformation change ends the stroke
    assert pads(layer)[0].polygon.area == pytest.approx(math.pi * 0.75**2)


def test_draw_with_rectangle_aperture():
    # spec 8.2.3 (deprecated): a rectangle swept along the draw; aligned, it gives square ends: 1 x (4 + 1)
    layer = read("%ADD10R,1X1*%\nD10*\nX0Y0D02*\nX4000000Y0D01*\n%LR45*%\nX4000000Y4000000D01*\n")
    straight, turned = [s for s in layer.shapes if s.kind == "draw"]
    assert straight.polygon.bounds == pytest.approx((-0.5, -0.5, 4.5, 0.5))
    assert straight.polygon.area == pytest.approx(5.0)
    # a diamond of diagonal sqrt 2 swept 4 mm along y: 4 sqrt 2 + its own area 1
    assert turned.polygon.area == pytest.approx(4 * math.sqrt(2) + 1.0)


# =========================================================================== step and repeat, blocks

def test_step_and_repeat_copies_and_order():
    # spec 4.12 example: %SRX3Y2I5.0J4.0*% with two flashes: 12 pads, copied along Y first, then X
    layer = read("%ADD13C,0.5*%\n%ADD14C,0.3*%\n%SRX3Y2I5.0J4.0*%\nD13*\nX123456Y789012D03*\nD14*\n"
                 "X456789Y12345D03*\n%SR*%\n")
    p = pads(layer)
    assert len(p) == 12
    first = [c for s in p if s.polygon.area > 0.1 for c in s.at]
    expected = [c for i in range(3) for j in range(2) for c in (0.123456 + 5 * i, 0.789012 + 4 * j)]
    assert first == pytest.approx(expected)


def test_step_and_repeat_copies_keep_the_polarity_order():
    # spec 4.12: a clear object in a copy clears everything beneath it, including earlier copies; a later
    # copy is drawn over it. Copies of a 2 x 1 pad with a 0.5 x 0.5 clear square, stepped 1 along X:
    # dark (-1..2) x (-0.5..0.5) = 3; the first clear square is half re-covered by the second copy (0.125 stays
    # clear), the second clear square (0.25) stays clear: 3 - 0.125 - 0.25 = 2.625.
    layer = read("%ADD10R,2X1*%\n%ADD11R,0.5X0.5*%\n%SRX2Y1I1J0*%\nD10*\nX0Y0D03*\n%LPC*%\nD11*\nX0Y0D03*\n"
                 "%LPD*%\n%SR*%\n")
    assert shapely.union_all([p.polygon for p in layer.shapes]).area == pytest.approx(2.625)


def test_step_and_repeat_of_traces_and_deprecated_closes():
    # spec 8.3.4: %SRX1Y1I0J0*% in the header is no repeat; as a close it ends the open SR;
    # an SR still open at M02 is closed there
    layer = read("%SRX1Y1I0J0*%\n%ADD10C,0.1*%\nD10*\n%SRX2Y1I10J0*%\nX0Y0D02*\nX1000000Y0D01*\nX1000000Y1000000D01*\n"
                 "%SRX1Y1I0J0*%\nX50000000Y0D02*\nX51000000Y0D01*\n%SRX1Y2I0J3*%\nX0Y0D03*\n")
    t = layer.traces
    assert t.x1.tolist() == [0, 1, 10, 11, 50]
    assert t.stroke.tolist() == [0, 0, 1, 1, 2]
    assert [s.at for s in pads(layer)] == [(0.0, 0.0), (0.0, 3.0)]


def test_nested_block_apertures_spec_example():
    # spec 4.11.4 (the example's text): block 100 = one stroke of two draws + one flash; block 101 = 4 x D100;
    # block 102 = 6 x D101 + one D12 flash; then two D13 flashes and 6 x D102.
    # Count: 6 x (6 x 4) = 144 copies of D100 -> 288 draws and 144 flashes, + 6 D12 + 2 D13 flashes.
    body = """%ADD10C,7.500000*%
%ADD11C,15*%
%ADD12R,20X10*%
%ADD13R,10X20*%
%ABD100*%
D10*
X65532000Y17605375D02*
Y65865375D01*
X-3556000D01*
D11*
X-3556000Y17605375D03*
%AB*%
%ABD102*%
%ABD101*%
D100*
X0Y0D03*
X0Y70000000D03*
X100000000Y0D03*
X100000000Y70000000D03*
%AB*%
D101*
X0Y0D03*
X0Y160000000D03*
X0Y320000000D03*
X230000000Y0D03*
X230000000Y160000000D03*
X230000000Y320000000D03*
D12*
X19500000Y-10000000D03*
%AB*%
D13*
X-30000000Y10000000D03*
X143000000Y-30000000D03*
D102*
X0Y0D03*
X0Y520000000D03*
X500000000Y0D03*
X500000000Y520000000D03*
X1000000000Y0D03*
X1000000000Y520000000D03*
"""
    layer = read(body)
    t = layer.traces
    assert len(t) == 288 and t.stroke.max() == 143
    assert np.all(t.width == 7.5)
    p = pads(layer)
    assert len(p) == 152
    areas = [round(s.polygon.area, 9) for s in p]
    assert areas.count(200.0) == 8  # 6 D12 and 2 D13 rectangles of 20 x 10
    assert areas.count(round(math.pi * 7.5**2, 9)) == 144  # the D11 circles (pi r^2, r = 7.5)
    # the farthest copy of the D100 flash: block 102 at (1000, 520) + block 101 at (230, 320) + (100, 70)
    assert max(s.at for s in p if s.polygon.area > 170) == pytest.approx((1000 + 230 + 100 - 3.556,
                                                                          520 + 320 + 70 + 17.605375))


def test_block_flashed_with_clear_polarity_toggles_its_objects():
    # spec 4.11.1: flashed with LPC, every object of the block changes polarity
    layer = read("""%ADD10R,10X10*%
%ADD11R,4X4*%
%ADD12R,2X2*%
%ABD20*%
D11*
X0Y0D03*
%LPC*%
D12*
X0Y0D03*
%LPD*%
%AB*%
D10*
X0Y0D03*
D20*
%LPC*%
X0Y0D03*
""")
    # 10 x 10, then the 4 x 4 square cleared, then the 2 x 2 hole drawn dark again: 100 - 16 + 4
    assert shapely.union_all([s.polygon for s in layer.shapes]).area == pytest.approx(88.0)


def test_block_flashed_mirrored_rotated_scaled():
    # spec 4.11.1: LM, LR and LS transform a block flash about the block origin (the file's 0, 0)
    layer = read("%ADD10C,1*%\n%ABD12*%\nD10*\nX2000000Y0D02*\nX3000000Y0D01*\nX2000000Y1000000D03*\n%AB*%\n"
                 "D12*\n%LMX*%\n%LR90*%\n%LS2*%\nX10000000Y0D03*\n")
    t = layer.traces
    # (2, 0) -> mirror (-2, 0) -> rotate 90 (0, -2) -> scale (0, -4) -> + (10, 0)
    assert (t.x1[0], t.y1[0], t.x2[0], t.y2[0]) == pytest.approx((10, -4, 10, -6))
    assert t.width[0] == 2.0
    (pad,) = pads(layer)
    assert pad.at == pytest.approx((8, -4))  # (2, 1) -> (-2, 1) -> (-1, -2) -> (-2, -4) -> (8, -4)
    assert pad.polygon.area == pytest.approx(math.pi)  # a 1 mm circle scaled by 2


def test_open_block_at_m02_is_refused():
    fails(gbr("%ADD10C,1*%\n%ABD12*%\nD10*\nX0Y0D03*\n"), r"M02 inside the block aperture D12 opened at line 4",
          line=7)


# =========================================================================== bad input

def test_undefined_aperture_message():
    err = fails(gbr("%ADD10C,1*%\nD12*\nX0Y0D03*\n"), r"aperture D12 is used but was never defined \(AD\)", line=4)
    assert str(err) == "t.gbr: line 4: aperture D12 is used but was never defined (AD)"


def test_operation_before_format_and_unit():
    fails(b"%ADD10C,1*%\nD10*\nX0Y0D03*\nM02*\n", r"unit was set \(MO")
    fails(b"%MOMM*%\n%ADD10C,1*%\nD10*\nX0Y0D03*\nM02*\n", r"before the coordinate format was set \(FS", line=4)


def test_missing_m02_and_truncation():
    fails(gbr("%ADD10C,1*%\nD10*\nX0Y0D03*\n", end=""), r"ends without M02.*truncated", line=5)
    fails(gbr("%ADD10C,1*%\nD10*\nX0Y0D0", end=""), r"ends inside the command 'X0Y0D0'", line=5)
    fails(gbr("%ADD10C,1*%\n%AMX*\n1,1,1,0,0*\n", end=""), r"extended command: the '%' opened here", line=4)


def test_absurd_coordinates_are_refused():
    fails(gbr("%ADD10C,1*%\nD10*\nX10000000001Y0D03*\n"), r"X10000000001 is 10000 mm.*more than 10 m", line=5)
    fails(gbr("%ADD10C,1*%\nD10*\nX0Y0D02*\nX0Y-99999999999999999999D01*\n"), r"more than 18 digits", line=6)


def test_copies_beyond_10_m_are_refused():
    # step and repeat and block flashes are checked like coordinates
    fails(gbr("%ADD10C,1*%\n%SRX3Y1I6000J0*%\nD10*\nX0Y0D03*\n%SR*%\n"), r"more than 10 m", line=4)
    fails(gbr("%ADD10C,1*%\n%ABD11*%\nD10*\nX9000000000Y0D03*\n%AB*%\nD11*\n%LS2*%\nX0Y0D03*\n"),
          r"flashing block aperture D11: .*more than 10 m", line=10)


def test_absurd_sizes_are_refused():
    fails(gbr("%ADD10C,99999999999999999999*%\n"), r"aperture D10: a size of 1e\+20 mm is more than 10 m", line=3)
    fails(gbr("%ADD10C,1*%\n%LS100000*%\nD10*\nX0Y0D03*\n"), r"D10 scaled by LS100000 reaches more than 10 m",
          line=6)
    fails(gbr("%ADD10C,1*%\n%LS100000*%\nD10*\nX0Y0D02*\nX1Y0D01*\n"), r"100000 mm wide, more than 10 m", line=7)
    fails(gbr("%AMA*\n1,1,$1x$1,0,0*%\n%ADD10A,1000*%\n"), r"aperture D10: macro A: an expression gives 1e\+06",
          line=5)


def test_non_utf8_and_non_ascii_bytes():
    fails(b"%FSLAX46Y46*%\n%MOMM*%\n%TO.N,\xff\xfe*%\nM02*\n", r"not valid UTF-8", line=3)
    fails(b"%FSLAX46Y46*%\n%MOMM*%\nX0\xe9Y0D02*\nM02*\n", r"byte 0xE9.*printable ASCII", line=3)
    # a comment may hold UTF-8 text; it is not read
    assert len(read_raw("G04 Kommentar \u00fcber*\n%FSLAX46Y46*%\n%MOMM*%\nM02*\n".encode()).shapes) == 0


def test_incremental_coordinates_are_refused():
    fails(b"%FSLIX46Y46*%\n%MOMM*%\nM02*\n", r"incremental coordinates \(I\)", line=1)
    fails(gbr("G91*\n"), r"G91 sets incremental coordinates", line=3)


def test_unknown_commands_are_ignored_and_garbage_refused():
    # spec 2.14: readers warn about unknown commands and go on; unreadable words are errors
    layer = read("%XYZ12*%\nG99*\n%ADD10C,1*%\nD10*\nX0Y0D03*\n")
    assert len(pads(layer)) == 1
    fails(gbr("X0Y0Q5D02*\n"), r"cannot read the command 'X0Y0Q5D02'", line=3)
    fails(gbr("D05*\n"), r"D05 is reserved", line=3)


def test_size_limit_refuses_before_reading(tmp_path, monkeypatch):
    from checker import limits

    path = tmp_path / "big.gbr"
    path.write_bytes(gbr("G04 padding*\n" * 100_000))  # 1.3 MB
    opened = []
    real_open = open
    monkeypatch.setattr("builtins.open", lambda *a, **k: opened.append(a) or real_open(*a, **k))
    with limits.using(limits.Limits(file_mb=1)):
        with pytest.raises(FabError, match=r"more than the cap of 1,000,000 bytes per file; refusing to read it "
                                           r"\(raise it with --limit file-mb=N") as info:
            load_gerber(path)
    assert info.value.file == str(path) and not opened
    # a stream is cut off once it passes the limit
    with pytest.raises(FabError, match=r"larger than 500 bytes"):
        read_gerber(io.BytesIO(path.read_bytes()), "s.gbr", size_limit=500)


def test_missing_file(tmp_path):
    with pytest.raises(FabError, match=r"cannot read the file") as info:
        load_gerber(tmp_path / "nope.gbr")
    assert info.value.file == str(tmp_path / "nope.gbr")


# =========================================================================== streaming

def test_reads_a_zip_member_and_leaves_the_input_unchanged(tmp_path):
    data = gbr("%ADD10C,0.1*%\nD10*\nX0Y0D02*\nX1000000Y0D01*\n")
    archive = tmp_path / "set.zip"
    with zipfile.ZipFile(archive, "w") as z:
        z.writestr("L1.gbr", data)
    before = hashlib.sha256(archive.read_bytes()).hexdigest()
    with zipfile.ZipFile(archive) as z, z.open("L1.gbr") as member:
        layer = read_gerber(member, "set.zip/L1.gbr")
    assert len(layer.traces) == 1 and layer.path == "set.zip/L1.gbr"
    assert hashlib.sha256(archive.read_bytes()).hexdigest() == before
    path = tmp_path / "L1.gbr"
    path.write_bytes(data)
    load_gerber(path)
    assert path.read_bytes() == data


def test_one_command_per_line_and_all_on_one_line_read_the_same():
    # spec 3.1: line breaks carry no meaning. The fast line path and the general path must agree.
    body = ("%TO.N,A*%\n%ADD10C,0.1*%\n%ADD11R,1X1*%\nD10*\nX0Y0D02*\nX1000000Y0D01*\nY1000000D01*\n"
            "%TO.N,B*%\nX-1000000D01*\nG75*\nG02*\nX1000000Y1000000I1000000J0D01*\nG01*\nD11*\nX0Y0D03*\n"
            "%LPC*%\nD10*\nX0Y-500000D02*\nX0Y500000D01*\n%LPD*%\n")
    lines = read(body)
    flat = read_raw(gbr(body).replace(b"\n", b""))
    for field in ("x1", "y1", "x2", "y2", "width", "net", "stroke", "ordinal"):
        assert np.array_equal(getattr(lines.traces, field), getattr(flat.traces, field)), field
    assert lines.net_names == flat.net_names
    assert [s.polygon.wkb for s in lines.shapes] == [s.polygon.wkb for s in flat.shapes]
    assert flat.traces.stroke_line.tolist() == [1] * len(flat.traces.stroke_line)


def test_crlf_line_ends_read_the_same():
    body = "%TO.N,A*%\n%ADD10C,0.1*%\nD10*\nX0Y0D02*\nX1000000Y0D01*\nX1000000Y500000D03*\n"
    lf, crlf = read(body), read_raw(gbr(body).replace(b"\n", b"\r\n"))
    assert np.array_equal(lf.traces.x2, crlf.traces.x2) and lf.traces.stroke_line.tolist() == [7]
    assert crlf.traces.stroke_line.tolist() == [7] and crlf.shapes[0].line == 8


def test_commands_split_across_lines():
    # spec 3.1 / 4.5 note: line breaks inside words are ignored
    layer = read("%ADD10C,\n0.1*%\nD10*\nX0\nY0D02*\nX1000\n000Y0D01*\n")
    assert layer.traces.x2.tolist() == [1.0] and layer.traces.stroke_line.tolist() == [8]


# =========================================================================== gerbonara as oracle

def test_per_net_copper_matches_gerbonara():
    # gerbonara 1.5 composes its objects in file order (gerbonara_copper_by_net); both sides use the same
    # polygons for circles and stadiums, so the areas must agree to 1e-6
    data = gbr("""%TA.AperFunction,Conductor*%
%ADD10C,0.25*%
%ADD11C,0.15*%
%TA.AperFunction,SMDPad,CuDef*%
%ADD12R,1.2X0.8*%
%ADD13O,1.6X0.6*%
%TA.AperFunction,ViaPad*%
%ADD14C,0.6X0.3*%
%ADD15P,1.0X6*%
%TD*%
%TO.N,CLK*%
D10*
X0Y0D02*
X10000000Y0D01*
X12000000Y2000000D01*
G75*
G03*
X14000000Y4000000I0J2000000D01*
G01*
X14000000Y9000000D01*
D12*
X0Y0D03*
%TO.N,SENSE*%
D11*
X0Y1000000D02*
X10000000Y1000000D01*
G02*
X12000000Y3000000I0J2000000D01*
G01*
D13*
X12000000Y3000000D03*
D14*
X5000000Y5000000D03*
%TO.N,GND*%
D15*
X20000000Y0D03*
D14*
X22000000Y0D03*
%LPC*%
D12*
X22000000Y500000D03*
%LPD*%
%TO.N,*%
D11*
X-3000000Y-3000000D02*
X-3000000Y3000000D01*
""")
    layer = read_raw(data)
    assert_same_copper(copper_by_net(layer), gerbonara_copper_by_net(data))


def test_inch_file_matches_gerbonara():
    data = gbr("%ADD10C,0.008*%\n%ADD11R,0.05X0.03*%\n%TO.N,A*%\nD10*\nX0Y0D02*\nX10000Y5000D01*\nD11*\n"
               "X20000Y0D03*\n", header="%FSLAX24Y24*%\n%MOIN*%\n")
    assert_same_copper(copper_by_net(read_raw(data)), gerbonara_copper_by_net(data))


def test_regions_and_clear_polarity_match_gerbonara():
    # gerbonara attaches no attributes to regions, so every object here carries no net on both sides
    data = gbr("""%ADD10C,1*%
G75*
G36*
X0Y0D02*
G01*
X20000000Y0D01*
Y10000000D01*
G03*
X10000000Y10000000I-5000000J0D01*
G01*
X0Y10000000D01*
Y0D01*
X30000000D02*
X40000000Y0D01*
X35000000Y8000000D01*
X30000000Y0D01*
G37*
%LPC*%
D10*
X5000000Y5000000D03*
G36*
X12000000Y2000000D02*
X18000000Y2000000D01*
X18000000Y6000000D01*
X12000000Y2000000D01*
G37*
%LPD*%
X14000000Y3000000D03*
""")
    layer = read_raw(data)
    assert {s.kind for s in layer.shapes} == {"region", "pad"}
    assert_same_copper(copper_by_net(layer), gerbonara_copper_by_net(data))


def test_spec_shapes_example_matches_gerbonara():
    # spec 2.11.2 "Polarities and Apertures" (the example's text without its two macro apertures D18, D19):
    # draws, flashes of C, R, O and P apertures, a full circle, a region and a clear region with arcs
    data = b"""%MOMM*%
%FSLAX36Y36*%
%ADD10C,0.1*%
%ADD11C,0.6*%
%ADD12R,0.6X0.6*%
%ADD13R,0.4X1.00*%
%ADD14R,1.00X0.4*%
%ADD15O,0.4X01.00*%
%ADD16P,1.00X3*%
D10*
X0Y2500000D02*
G01*
X0Y0D01*
X2500000Y0D01*
X10000000Y10000000D02*
X15000000D01*
X20000000Y15000000D01*
X25000000D02*
Y10000000D01*
D11*
X10000000Y10000000D03*
X20000000D03*
X25000000D03*
Y15000000D03*
X20000000D03*
D12*
X10000000Y15000000D03*
D13*
X30000000Y15000000D03*
D14*
Y12500000D03*
D15*
Y10000000D03*
D10*
X37500000Y10000000D02*
G75*
G03*
X37500000Y10000000I2500000J0D01*
D16*
X34000000Y10000000D03*
X35000000Y9000000D03*
G36*
X5000000Y20000000D02*
G01*
Y37500000D01*
X37500000D01*
Y20000000D01*
X5000000D01*
G37*
%LPC*%
G36*
X10000000Y25000000D02*
Y30000000D01*
G02*
X12500000Y32500000I2500000J0D01*
G01*
X30000000D01*
G02*
X30000000Y25000000I0J-3750000D01*
G01*
X10000000D01*
G37*
%LPD*%
D10*
X15000000Y28750000D02*
X20000000D01*
D11*
X15000000Y28750000D03*
X20000000D03*
M02*
"""
    layer = read_raw(data)
    assert len(pads(layer)) == 13 and len([s for s in layer.shapes if s.kind == "region"]) == 1  # 5+1+1+1+1+2+2
    assert_same_copper(copper_by_net(layer), gerbonara_copper_by_net(data))


def test_unknown_commands_are_ignored_with_a_warning():
    """Gerber Layer Format Specification 2021.02, 2.14: an unknown command is
    ignored and the reader warns. Known no-effect codes (G54, M01, G04) give
    no warning; more than MAX_WARNINGS unknown commands are counted, not listed."""
    layer = read("%ADD10C,0.1*%\nG04 a comment*\nG54D10*\nM01*\nG99*\n%XY1*%\nX0Y0D02*\nG01*\nX1000000Y0D01*\n")
    assert layer.warnings == ["line 7: unknown command G99 ignored", "line 8: unknown command %XY1% ignored"]
    assert len(layer.traces) == 1
    many = read("%ADD10C,0.1*%\n" + "G98*\n" * 9)
    assert len(many.warnings) == 6 and many.warnings[-1] == "4 more unknown command(s) ignored"
