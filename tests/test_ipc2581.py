"""The IPC-2581 door (checker/readers/ipc2581.py).

(1) One board, two doors: the committed IPC-2581 fixtures (written by
scripts/write_ipc2581.py from the same JSON boards write_fab.py wrote as
Gerber packages) read into the same Board as the Gerber door reads from
fixtures/fab/ — stackup numbers, net names, pieces, regions, vias,
outline — and give the same findings (as tests/test_fab_roundtrip.py does
for the Gerber door against the JSON door). The oracle is the other door.
(2) Small hand-worked files: units, primitive areas, transforms, arcs,
stackup rules; each expected value says where it comes from.
(3) Bad input: one FabError naming the file and the place."""

from __future__ import annotations

import io
import json
import math
import pathlib
import random
import re
import sys

import numpy as np
import pytest
import shapely

from checker.errors import FabError
from checker.model import ARC_CHORD_TOLERANCE_MM, NO_NET
from checker.readers import load_board
from checker.readers.arcs import arc_polyline
from checker.readers.fab.assemble import load_package
from checker.readers.fab.gerber_apertures import disc
from checker.readers.fab.jobfile import ASSUMED_WORDS, DEFAULT_DIELECTRIC_ER
from checker.readers.ipc2581 import (
    HOLLOW_LINE_MM,
    MIN_TRACE_MM,
    is_ipc2581,
    load_ipc2581,
    looks_like_xml,
    read_ipc2581,
)
from checker.ruleset import default_ruleset, load_ruleset
from checker.runner import check_board

ROOT = pathlib.Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "scripts"))
from write_ipc2581 import FIXTURES, ipc2581_text  # noqa: E402 (scripts/ goes on sys.path first)

#: IPC-2581 fixture -> (the Gerber package of the same board, its JSON source)
PAIRS = {
    "six_layer.xml": ("six_layer", "six_layer_fab.json"),
    "four_layer_mixed_inch.xml": ("four_layer_mixed", "four_layer_mixed.json"),
}

#: Coordinates agree to this (mm); the brief's 1e-6 mm.
TOL_MM = 1e-6


# --------------------------------------------------------------------------- (1) the two doors agree


@pytest.fixture(scope="module", params=sorted(PAIRS))
def doors(request):
    xml, (package, source) = request.param, PAIRS[request.param]
    return (load_ipc2581(ROOT / "fixtures" / "ipc2581" / xml), load_package([str(ROOT / "fixtures" / "fab" / package)]),
            ROOT / "fixtures" / source)


def test_committed_fixtures_are_what_the_writer_writes():
    """A stale fixture would test an old writer: regenerate with
    ``python scripts/write_ipc2581.py --fixtures``."""
    for name, (board, options) in FIXTURES.items():
        committed = (ROOT / "fixtures" / "ipc2581" / name).read_text(encoding="utf-8")
        assert committed == ipc2581_text(load_board(ROOT / board), **options), name


def test_same_stackup(doors):
    ipc, gerber, _ = doors
    a, b = ipc.stackup, gerber.stackup
    assert [(c.name, c.role) for c in a.layers] == [(c.name, c.role) for c in b.layers]
    # INCH fixture: thicknesses pass through 15 inch decimals (2.5e-14 mm), so
    # numbers are compared to 1e-12 relative rather than for equality
    assert [c.thickness_mm for c in a.layers] == pytest.approx([c.thickness_mm for c in b.layers], rel=1e-12)
    pairs = [(x, y) for x, y in zip(a.dielectrics, b.dielectrics)] + [(a.mask_top, b.mask_top),
                                                                       (a.mask_bottom, b.mask_bottom)]
    assert len(a.dielectrics) == len(b.dielectrics)
    for x, y in pairs:
        assert (x is None) == (y is None)
        if x is not None:
            assert (x.thickness_mm, x.er) == pytest.approx((y.thickness_mm, y.er), rel=1e-12)
            assert (x.loss_tangent is None) == (y.loss_tangent is None)
            if x.loss_tangent is not None:
                assert x.loss_tangent == pytest.approx(y.loss_tangent, rel=1e-12)
            assert x.assumed == y.assumed == ()


def test_same_nets_and_pieces(doors):
    ipc, gerber, _ = doors
    assert sorted(n.name for n in ipc.nets) == sorted(n.name for n in gerber.nets)
    assert len(ipc.pieces) == len(gerber.pieces) > 0

    def rows(board):
        p = board.pieces
        names = np.array([board.nets[n].name if n >= 0 else "" for n in p.net])
        order = np.lexsort((np.round(p.y2, 4), np.round(p.x2, 4), np.round(p.y1, 4), np.round(p.x1, 4), p.layer,
                            names))
        return names[order], p.layer[order], np.column_stack((p.x1, p.y1, p.x2, p.y2, p.width))[order]

    na, la, ga = rows(ipc)
    nb, lb, gb = rows(gerber)
    assert na.tolist() == nb.tolist()
    assert la.tolist() == lb.tolist()
    assert np.abs(ga - gb).max() <= TOL_MM
    # pieces of one stroke stay one source with consecutive ordinals (runs
    # group consecutive pieces of one polyline): same number of sources
    assert len(set(ipc.pieces.source.tolist())) == len(set(gerber.pieces.source.tolist()))


def test_same_regions_and_outline(doors):
    ipc, gerber, _ = doors

    def copper(board):
        out: dict[tuple[int, str], list] = {}
        for r in board.regions:
            out.setdefault((r.layer, board.nets[r.net].name if r.net != NO_NET else ""), []).append(r.polygon)
        return {k: shapely.union_all(v) for k, v in out.items()}

    a, b = copper(ipc), copper(gerber)
    assert sorted(a) == sorted(b)
    assert len(ipc.regions) == len(gerber.regions)
    for key in a:
        assert a[key].area == pytest.approx(b[key].area, rel=1e-9), key
        assert shapely.symmetric_difference(a[key], b[key]).area < 1e-9, key
    assert ipc.outline is not None and gerber.outline is not None
    assert ipc.outline.area == pytest.approx(gerber.outline.area, rel=1e-12)
    assert shapely.symmetric_difference(ipc.outline, gerber.outline).area < 1e-9


def test_same_vias(doors):
    ipc, gerber, _ = doors

    def rows(board):
        v = board.vias
        names = [board.nets[n].name if n >= 0 else "" for n in v.net]
        return sorted(zip(np.round(v.x, 6), np.round(v.y, 6), v.drill, v.pad, v.first_layer, v.last_layer, names))

    assert len(ipc.vias) == len(gerber.vias) > 0
    for x, y in zip(rows(ipc), rows(gerber)):
        assert x[4:] == y[4:]
        assert np.allclose(np.array(x[:4], dtype=float), np.array(y[:4], dtype=float), rtol=0, atol=TOL_MM)


#: Notes of the shared assembly step about the copper and its nets (the
#: words of checker/readers/fab/assemble.py): the same copper must give the
#: same ones through either door. Notes about files (a netlist, a job
#: file, names of layers' sources) differ by door and are not compared.
GEOMETRY_NOTES = ("unconnected copper", "copper of different nets touches", "plated hole(s) lie on no copper",
                  "found by connectivity", "carry test points of more than one net")


def geometry_notes(board) -> list[str]:
    return [n for n in board.notes if any(words in n for words in GEOMETRY_NOTES)]


def test_same_notes(doors):
    """What the assembly had to say about the copper and its nets
    (unconnected copper, holes without net) is the same, word for word,
    and the IPC-2581 door adds nothing else on a clean export."""
    ipc, gerber, _ = doors
    assert geometry_notes(ipc) == geometry_notes(gerber)
    assert len(geometry_notes(ipc)) >= 1  # both fixtures have an island of unconnected copper: a real comparison
    assert list(ipc.notes) == geometry_notes(ipc)


def test_same_findings(doors, tmp_path):
    """Both doors, checked with the JSON board's differential pairs declared
    in a rule file (as tests/test_fab_roundtrip.py does), give the same
    findings: ids, nets, layers, severities, values within 1e-6 relative."""
    ipc, gerber, source = doors
    data = json.loads(source.read_text())
    pairs = [[n["name"], n["pair"]] for n in data["nets"] if n.get("pair")]
    rules_path = tmp_path / "pairs.yaml"
    rules_path.write_text(f"version: 1\nextends: default\ndifferential_pairs: {json.dumps(pairs)}\n")
    rules = load_ruleset(rules_path)
    a, b = check_board(ipc, rules), check_board(gerber, rules)
    assert len(b.findings) > 0
    assert [f.id for f in a.findings] == [f.id for f in b.findings]
    for x, y in zip(a.findings, b.findings):
        assert (x.rule, x.aggressor, x.victim, x.layers, x.severity) == (y.rule, y.aggressor, y.victim, y.layers,
                                                                         y.severity)
        for key in ("value", "limit", "length_mm", "area_mm2", "c12_pf", "noise_mv", "keep_fraction"):
            u, v = getattr(x, key), getattr(y, key)
            assert (u is None) == (v is None), key
            if u is not None:
                assert u == pytest.approx(v, rel=1e-6, abs=1e-12), (x.id, key)


def test_micron_export_reads_the_same(tmp_path):
    """The six-layer board written in MICRON units reads into the same pieces
    and vias as the MILLIMETER fixture (1 um = 0.001 mm)."""
    board = load_board(ROOT / "fixtures" / "six_layer_fab.json")
    path = tmp_path / "six_um.xml"
    path.write_text(ipc2581_text(board, units="MICRON"), encoding="utf-8")
    assert 'units="MICRON"' in path.read_text()
    a, b = load_ipc2581(path), load_ipc2581(ROOT / "fixtures" / "ipc2581" / "six_layer.xml")
    for key in ("x1", "y1", "x2", "y2", "width"):
        assert np.abs(getattr(a.pieces, key) - getattr(b.pieces, key)).max() <= TOL_MM
    assert np.abs(a.vias.pad - b.vias.pad).max() <= TOL_MM


# --------------------------------------------------------------------------- small files


SPECS = """
   <Spec name="S_CORE"><Dielectric type="DIELECTRIC_CONSTANT"><Property value="4.5"/></Dielectric>
     <Dielectric type="LOSS_TANGENT"><Property value="0.02"/></Dielectric></Spec>"""
LAYERS = ("""
   <Layer name="TOP" layerFunction="SIGNAL" side="TOP" polarity="POSITIVE"/>
   <Layer name="CORE" layerFunction="DIELCORE" side="INTERNAL" polarity="POSITIVE"/>
   <Layer name="BOT" layerFunction="PLANE" side="BOTTOM" polarity="POSITIVE"/>
   <Layer name="DRILL" layerFunction="DRILL" side="ALL" polarity="POSITIVE">"""
          '<Span fromLayer="TOP" toLayer="BOT"/></Layer>')
STACKUP = """
   <Stackup name="S" overallThickness="1.57"><StackupGroup name="G">
    <StackupLayer layerOrGroupRef="TOP" thickness="0.035" sequence="1"/>
    <StackupLayer layerOrGroupRef="CORE" thickness="1.5" sequence="2"><SpecRef id="S_CORE"/></StackupLayer>
    <StackupLayer layerOrGroupRef="BOT" thickness="0.035" sequence="3"/>
   </StackupGroup></Stackup>"""
LINE = """<Set net="SIG"><Features><Line startX="1" startY="1" endX="9" endY="1">
      <LineDesc lineEnd="ROUND" lineWidth="0.2"/></Line></Features></Set>"""


def ipc(tmp_path, top: str = LINE, *, units: str = "MILLIMETER", dictionaries: str = "", specs: str = SPECS,
        layers: str = LAYERS, stackup: str = STACKUP, bot: str = "", drill: str = "", step_extra: str = "",
        root: str = 'revision="C"', name: str = "board.xml") -> pathlib.Path:
    """A two-layer IPC-2581 file (TOP signal, 1.5 mm core of εr 4.5, BOT
    plane) with the given copper, written to ``tmp_path / name``."""
    text = f"""<?xml version="1.0" encoding="UTF-8"?>
<IPC-2581 {root} xmlns="http://webstds.ipc.org/2581">
 <Content roleRef="Owner"><FunctionMode mode="FABRICATION"/><StepRef name="b"/>{dictionaries}</Content>
 <Ecad name="b">
  <CadHeader units="{units}">{specs}</CadHeader>
  <CadData>{layers}{stackup}
   <Step name="b">{step_extra}
    <LayerFeature layerRef="TOP">{top}</LayerFeature>
    <LayerFeature layerRef="BOT">{bot}</LayerFeature>
    <LayerFeature layerRef="DRILL">{drill}</LayerFeature>
   </Step>
  </CadData>
 </Ecad>
</IPC-2581>
"""
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def only_region(board):
    assert len(board.regions) == 1, [r.source for r in board.regions]
    return board.regions[0].polygon


def test_inch_line_gives_millimetres(tmp_path):
    """A line from (1, 0.5) to (3, 0.5) in of width 0.01 in: 1 in = 25.4 mm
    exactly (international inch, 1959), so (25.4, 12.7) -> (76.2, 12.7) mm,
    width 0.254 mm."""
    top = """<Set net="SIG"><Features><Line startX="1" startY="0.5" endX="3" endY="0.5">
      <LineDesc lineEnd="ROUND" lineWidth="0.01"/></Line></Features></Set>"""
    board = load_ipc2581(ipc(tmp_path, top, units="INCH", stackup=STACKUP.replace('"0.035"', '"0.0014"')
                             .replace('"1.5"', '"0.059"')))
    p = board.pieces
    assert len(p) == 1
    assert (p.x1[0], p.y1[0], p.x2[0], p.y2[0]) == pytest.approx((25.4, 12.7, 76.2, 12.7), abs=1e-12)
    assert p.width[0] == pytest.approx(0.254, abs=1e-12)
    # the stackup in inch too: 0.059 in = 1.4986 mm, 0.0014 in = 0.03556 mm (x 25.4)
    assert board.stackup.dielectrics[0].thickness_mm == pytest.approx(1.4986, abs=1e-12)
    assert board.stackup.layers[0].thickness_mm == pytest.approx(0.03556, abs=1e-12)
    assert board.nets[p.net[0]].name == "SIG"


def test_dictionary_units_are_its_own(tmp_path):
    """CadHeader in INCH, the line-width dictionary in MILLIMETER: the width
    is read in the dictionary's units (0.2 mm), the coordinates in inch
    (2 in = 50.8 mm)."""
    dictionaries = """<DictionaryLineDesc units="MILLIMETER"><EntryLineDesc id="W">
      <LineDesc lineEnd="ROUND" lineWidth="0.2"/></EntryLineDesc></DictionaryLineDesc>"""
    top = """<Set net="SIG"><Features><Line startX="0" startY="0" endX="2" endY="0"><LineDescRef id="W"/></Line>
      </Features></Set>"""
    board = load_ipc2581(ipc(tmp_path, top, units="INCH", dictionaries=dictionaries))
    assert board.pieces.width[0] == pytest.approx(0.2, abs=1e-12)
    assert board.pieces.x2[0] == pytest.approx(50.8, abs=1e-12)


def test_micron_units(tmp_path):
    """1500 um = 1.5 mm (1 um = 0.001 mm)."""
    top = """<Set net="SIG"><Features><Line startX="0" startY="0" endX="1500" endY="0">
      <LineDesc lineWidth="100"/></Line></Features></Set>"""
    board = load_ipc2581(ipc(tmp_path, top, units="MICRON", stackup=STACKUP.replace('"0.035"', '"35"')
                             .replace('"1.5"', '"1500"')))
    assert (board.pieces.x2[0], board.pieces.width[0]) == pytest.approx((1.5, 0.1), abs=1e-12)
    assert board.stackup.dielectrics[0].thickness_mm == pytest.approx(1.5, abs=1e-12)


def pad(primitive: str, x: float = 5, y: float = 5, xform: str = "", net: str = "P") -> str:
    return f"""<Set net="{net}"><Pad>{xform}<Location x="{x}" y="{y}"/>{primitive}</Pad></Set>"""


@pytest.mark.parametrize("primitive, area, note", [
    ('<Circle diameter="1.2"/>', math.pi * 1.2 ** 2 / 4, "disc: A = pi d^2 / 4"),
    ('<RectCenter width="2" height="0.5"/>', 1.0, "rectangle: w h"),
    ('<RectCorner lowerLeftX="-1" lowerLeftY="-0.25" upperRightX="1" upperRightY="0.25"/>', 1.0, "w h"),
    ('<Oval width="2" height="1"/>', (2 - 1) * 1 + math.pi * 1 ** 2 / 4,
     "obround: box (w - h) h plus a disc of diameter h"),
    ('<Oval width="1" height="3"/>', (3 - 1) * 1 + math.pi / 4, "upright obround, same formula"),
    ('<Ellipse width="2" height="1"/>', math.pi * 1 * 0.5, "ellipse: pi a b"),
    ('<Diamond width="2" height="1"/>', 2 * 1 / 2, "rhombus: d1 d2 / 2"),
    ('<Donut shape="ROUND" outerDiameter="1" innerDiameter="0.5"/>', math.pi / 4 * (1 - 0.25),
     "annulus: pi (D^2 - d^2) / 4"),
    ('<Donut shape="SQUARE" outerDiameter="1" innerDiameter="0.5"/>', 1 - 0.25, "D^2 - d^2"),
    ('<RectCham width="2" height="1" chamfer="0.2"/>', 2 - 4 * 0.2 ** 2 / 2, "four corner triangles c^2/2 off"),
    ('<RectCham width="2" height="1" chamfer="0.2" lowerLeft="true"/>', 2 - 0.2 ** 2 / 2, "one corner"),
])
def test_standard_primitive_areas(tmp_path, primitive, area, note):
    """Each primitive as a pad (not over a hole, so it stays a region); the
    expected area is the hand formula named in ``note``. Circles, ovals,
    ellipses and donuts are equal-area polygons (the Gerber door's), so
    they match to rounding."""
    board = load_ipc2581(ipc(tmp_path, LINE + pad(primitive)))
    assert only_region(board).area == pytest.approx(area, rel=1e-9), note


@pytest.mark.parametrize("flags, corners", [("", 4), ('upperRight="true"', 1),
                                            ('upperRight="true" lowerLeft="true" upperLeft="false"', 2)])
def test_rounded_rectangle_area(tmp_path, flags, corners):
    """RectRound 2 x 1, radius 0.25: each rounded corner takes (1 - pi/4) r^2
    off w h (a square of r^2 less a quarter disc). Its arc is chorded
    within ARC_CHORD_TOLERANCE_MM, which takes at most (2/3) x sagitta x arc
    length more (a parabolic segment's area) per corner."""
    r = 0.25
    exact = 2 * 1 - corners * (1 - math.pi / 4) * r * r
    chords = corners * (2 / 3) * ARC_CHORD_TOLERANCE_MM * (math.pi / 2 * r)
    board = load_ipc2581(ipc(tmp_path, LINE + pad(f'<RectRound width="2" height="1" radius="{r}" {flags}/>')))
    assert exact - chords <= only_region(board).area <= exact + 1e-12


def test_pad_rotation_and_dictionary_reference(tmp_path):
    """A 2 x 1 RectCenter from the dictionary, rotated 90 degrees at (5, 5):
    the box turns upright, bounds (4.5, 4, 5.5, 6) by hand."""
    dictionaries = """<DictionaryStandard units="MILLIMETER"><EntryStandard id="R">
      <RectCenter width="2" height="1"/></EntryStandard></DictionaryStandard>"""
    board = load_ipc2581(ipc(tmp_path, LINE + pad('<StandardPrimitiveRef id="R"/>', xform='<Xform rotation="90"/>'),
                             dictionaries=dictionaries))
    assert only_region(board).bounds == pytest.approx((4.5, 4.0, 5.5, 6.0), abs=1e-12)


def test_user_primitive_contour(tmp_path):
    """A user primitive: a 1 x 1 square Contour with a 0.5 x 0.5 Cutout,
    area 1 - 0.25 = 0.75, placed at (5, 5)."""
    dictionaries = """<DictionaryUser units="MILLIMETER"><EntryUser id="U"><UserSpecial><Contour>
      <Polygon><PolyBegin x="-0.5" y="-0.5"/><PolyStepSegment x="0.5" y="-0.5"/><PolyStepSegment x="0.5" y="0.5"/>
       <PolyStepSegment x="-0.5" y="0.5"/><PolyStepSegment x="-0.5" y="-0.5"/></Polygon>
      <Cutout><PolyBegin x="-0.25" y="-0.25"/><PolyStepSegment x="0.25" y="-0.25"/><PolyStepSegment x="0.25" y="0.25"/>
       <PolyStepSegment x="-0.25" y="0.25"/><PolyStepSegment x="-0.25" y="-0.25"/></Cutout>
      </Contour></UserSpecial></EntryUser></DictionaryUser>"""
    board = load_ipc2581(ipc(tmp_path, LINE + pad('<UserPrimitiveRef id="U"/>'), dictionaries=dictionaries))
    poly = only_region(board)
    assert poly.area == pytest.approx(0.75, abs=1e-12)
    assert poly.bounds == pytest.approx((4.5, 4.5, 5.5, 5.5), abs=1e-12)


def test_arc_and_curved_polyline_are_chorded_by_the_shared_function(tmp_path):
    """An Arc from (3, 1) to (1, 3) around (1, 1), counter-clockwise: the
    chords are arc_polyline's (start angle 0, sweep +pi/2, radius 2) with
    the ends put on the given points, as the Gerber door does; the same
    quarter circle as a PolyStepCurve after a straight step gives the
    straight piece and then the same chords."""
    arc = """<Set net="A"><Features><Arc startX="3" startY="1" endX="1" endY="3" centerX="1" centerY="1"
      clockwise="false"><LineDesc lineEnd="ROUND" lineWidth="0.1"/></Arc></Features></Set>"""
    poly = """<Set net="B"><Features><Polyline><PolyBegin x="3" y="0"/><PolyStepSegment x="3" y="1"/>
      <PolyStepCurve x="1" y="3" centerX="1" centerY="1" clockwise="false"/>
      <LineDesc lineEnd="ROUND" lineWidth="0.1"/></Polyline></Features></Set>"""
    board = load_ipc2581(ipc(tmp_path, arc + poly))
    expected = arc_polyline(1.0, 1.0, 2.0, 0.0, math.pi / 2)
    expected[0], expected[-1] = (3, 1), (1, 3)
    p = board.pieces
    names = [board.nets[n].name for n in p.net]
    for net, skip in (("A", 0), ("B", 1)):
        rows = [k for k, name in enumerate(names) if name == net]
        rows.sort(key=lambda k: p.ordinal[k])
        got = np.array([[p.x1[k], p.y1[k]] for k in rows] + [[p.x2[rows[-1]], p.y2[rows[-1]]]])
        assert len(got) == len(expected) + skip
        assert np.abs(got[skip:] - expected).max() <= 1e-12
        assert len({int(p.source[k]) for k in rows}) == 1   # one stroke: one source
    # B's first piece is the straight step (3, 0) -> (3, 1)
    first = min((k for k, name in enumerate(names) if name == "B"), key=lambda k: p.ordinal[k])
    assert (p.x1[first], p.y1[first], p.x2[first], p.y2[first]) == (3, 0, 3, 1)


def test_clockwise_arc_goes_the_other_way(tmp_path):
    """The same end points clockwise around (1, 1) is the 270 degree arc:
    sweep -3 pi / 2, so it passes (1, -1) (the circle's lowest point, by hand)."""
    arc = """<Set net="A"><Features><Arc startX="3" startY="1" endX="1" endY="3" centerX="1" centerY="1"
      clockwise="true"><LineDesc lineWidth="0.1"/></Arc></Features></Set>"""
    p = load_ipc2581(ipc(tmp_path, arc)).pieces
    assert len(p) == len(arc_polyline(1.0, 1.0, 2.0, 0.0, -3 * math.pi / 2)) - 1
    assert p.y1.min() == pytest.approx(-1.0, abs=ARC_CHORD_TOLERANCE_MM)


def test_square_ended_line_is_a_region(tmp_path):
    """lineEnd SQUARE: not a round-ended trace but copper of its outline:
    length 8 + 2 x 0.1 (the square ends stick out w/2) by 0.2: area 1.64."""
    top = """<Set net="SIG"><Features><Line startX="1" startY="1" endX="9" endY="1">
      <LineDesc lineEnd="SQUARE" lineWidth="0.2"/></Line></Features></Set>"""
    board = load_ipc2581(ipc(tmp_path, top))
    assert len(board.pieces) == 0
    assert only_region(board).area == pytest.approx(8.2 * 0.2, rel=1e-12)


def test_via_hole_span_and_pad(tmp_path):
    """A VIA hole on the drill layer spanning TOP..BOT with a VIA pad on each
    layer becomes one via (first 0, last 1) of the pads' net, its pad the
    0.6 mm circle; a NONPLATED hole is no via."""
    dictionaries = """<DictionaryStandard units="MILLIMETER"><EntryStandard id="C6"><Circle diameter="0.6"/>
      </EntryStandard></DictionaryStandard>"""
    vpad = '<Set net="SIG" padUsage="VIA"><Pad><Location x="9" y="1"/><StandardPrimitiveRef id="C6"/></Pad></Set>'
    gnd = """<Set net="GND"><Features><Contour><Polygon><PolyBegin x="0" y="0"/><PolyStepSegment x="10" y="0"/>
      <PolyStepSegment x="10" y="-5"/><PolyStepSegment x="0" y="-5"/><PolyStepSegment x="0" y="0"/></Polygon>
      </Contour></Features></Set>"""
    drill = """<Set net="SIG"><Hole name="H1" diameter="0.3" platingStatus="VIA" plusTol="0" minusTol="0" x="9" y="1"/>
      </Set><Set><Hole name="H2" diameter="1.0" platingStatus="NONPLATED" x="5" y="-2.5"/></Set>"""
    board = load_ipc2581(ipc(tmp_path, LINE + vpad, bot=gnd + vpad, drill=drill, dictionaries=dictionaries))
    v = board.vias
    assert len(v) == 1
    assert (v.x[0], v.y[0], v.drill[0], v.first_layer[0], v.last_layer[0]) == (9, 1, 0.3, 0, 1)
    # the via pad is the bounding width of the 0.6 mm circle's polygon, as
    # the Gerber door gives for a C,0.6 flash (the same disc() polygon,
    # whose vertices sit slightly outside the circle to keep its area)
    x0, y0, x1, y1 = disc(0.0, 0.0, 0.3).bounds
    assert v.pad[0] == pytest.approx(min(x1 - x0, y1 - y0), abs=1e-12)
    assert 0.6 <= v.pad[0] <= 0.6 + 2 * ARC_CHORD_TOLERANCE_MM
    assert board.nets[v.net[0]].name == "SIG"
    assert [board.nets[r.net].name for r in board.regions] == ["GND"]  # the via pads joined the via


def test_component_pad_and_hole_are_not_a_via(tmp_path):
    """A PLATED hole in a TERMINATION Set is a component hole and its
    TERMINATION pads component pads: no via, both pads stay copper regions
    (assemble makes vias of via and unknown-function holes only). The same
    hole without padUsage is a plated hole of unknown use: a via, as an
    Excellon hole without TA.AperFunction is."""
    dictionaries = """<DictionaryStandard units="MILLIMETER"><EntryStandard id="C"><Circle diameter="1.5"/>
      </EntryStandard></DictionaryStandard>"""
    cpad = ('<Set net="SIG" padUsage="TERMINATION"><Pad><Location x="9" y="1"/>'
            '<StandardPrimitiveRef id="C"/></Pad></Set>')
    hole = '<Hole name="J1" diameter="0.9" platingStatus="PLATED" x="9" y="1"/>'
    board = load_ipc2581(ipc(tmp_path, LINE + cpad, bot=cpad, dictionaries=dictionaries,
                             drill=f'<Set net="SIG" padUsage="TERMINATION">{hole}</Set>'))
    assert len(board.vias) == 0
    assert sorted(r.layer for r in board.regions) == [0, 1]
    board = load_ipc2581(ipc(tmp_path, LINE + cpad, bot=cpad, dictionaries=dictionaries,
                             drill=f'<Set net="SIG">{hole}</Set>'))
    assert len(board.vias) == 1 and board.vias.drill[0] == 0.9
    assert sorted(r.layer for r in board.regions) == [0, 1]  # component pads never join a via


def test_layer_functions_give_roles(tmp_path):
    """SIGNAL -> signal, PLANE -> plane (the brief's mapping), MIXED ->
    mixed; CONDUCTOR is the generic copper function (an exporter writes it
    for every copper layer, planes too): it states no role, so the layer
    is taken as mixed with a note, as CONDFOIL is."""
    board = load_ipc2581(ipc(tmp_path))
    assert [c.role for c in board.stackup.layers] == ["signal", "plane"]
    mixed = LAYERS.replace('"SIGNAL"', '"MIXED"').replace('"PLANE"', '"CONDUCTOR"')
    board = load_ipc2581(ipc(tmp_path, layers=mixed))
    assert [c.role for c in board.stackup.layers] == ["mixed", "mixed"]
    assert [n for n in board.notes if "layer BOT" in n and "names no role" in n]
    assert not [n for n in board.notes if "layer TOP" in n and "names no role" in n]  # MIXED is a role


def test_generic_copper_export_reads_as_mixed_layers(tmp_path):
    """The six-layer board written with layerFunction CONDUCTOR on every
    copper layer: the same stackup thicknesses, every layer mixed (no
    declared role), one note per layer."""
    board = load_board(ROOT / "fixtures" / "six_layer_fab.json")
    path = tmp_path / "six_conductor.xml"
    path.write_text(ipc2581_text(board, generic_copper=True), encoding="utf-8")
    read = load_ipc2581(path)
    assert [c.role for c in read.stackup.layers] == ["mixed"] * 6
    assert len([n for n in read.notes if "names no role" in n]) == 6
    assert [c.thickness_mm for c in read.stackup.layers] == [c.thickness_mm for c in board.stackup.layers]


def test_two_dielectrics_combine_in_series(tmp_path):
    """0.1 mm of εr 4 and 0.1 mm of εr 5 between the copper layers: one
    dielectric of 0.2 mm and εeff = 0.2 / (0.1/4 + 0.1/5) = 4.444... (the
    series rule jobfile uses), named after both."""
    specs = SPECS + """<Spec name="S4"><Dielectric type="DIELECTRIC_CONSTANT"><Property value="4"/></Dielectric></Spec>
      <Spec name="S5"><Dielectric type="DIELECTRIC_CONSTANT"><Property value="5"/></Dielectric></Spec>"""
    layers = LAYERS.replace('<Layer name="CORE"', '<Layer name="PP" layerFunction="DIELPREG"/><Layer name="CORE"')
    stackup = STACKUP.replace(
        '<StackupLayer layerOrGroupRef="CORE" thickness="1.5" sequence="2"><SpecRef id="S_CORE"/></StackupLayer>',
        '<StackupLayer layerOrGroupRef="PP" thickness="0.1"><SpecRef id="S4"/></StackupLayer>'
        '<StackupLayer layerOrGroupRef="CORE" thickness="0.1"><SpecRef id="S5"/></StackupLayer>').replace(
        ' sequence="1"', "").replace(' sequence="3"', "")
    d = load_ipc2581(ipc(tmp_path, specs=specs, layers=layers, stackup=stackup)).stackup.dielectrics[0]
    assert d.thickness_mm == pytest.approx(0.2, abs=1e-15)
    assert d.er == pytest.approx(0.2 / (0.1 / 4 + 0.1 / 5), rel=1e-15)
    assert d.name == "PP + CORE"


def test_missing_er_takes_the_documented_default_with_a_note(tmp_path):
    """εr is optional in a Spec: the dielectric gets jobfile's documented
    DEFAULT_DIELECTRIC_ER, is marked assumed, and a note says the value and
    'common practice, not your board'. The loss tangent the Spec gives is kept."""
    specs = '<Spec name="S_CORE"><Dielectric type="LOSS_TANGENT"><Property value="0.02"/></Dielectric></Spec>'
    board = load_ipc2581(ipc(tmp_path, specs=specs))
    d = board.stackup.dielectrics[0]
    assert d.er == DEFAULT_DIELECTRIC_ER and d.assumed == ("er",)
    assert d.loss_tangent == 0.02
    note = [n for n in board.notes if "dielectric εr" in n]
    assert len(note) == 1 and f"{DEFAULT_DIELECTRIC_ER:g} used" in note[0] and ASSUMED_WORDS in note[0]
    assert "CORE" in note[0]


def core_spec_ref(ref: str) -> str:
    return STACKUP.replace('<SpecRef id="S_CORE"/>', f'<SpecRef id="{ref}"/>')


def spec(name: str, er: float, tan_d: float) -> str:
    return (f'<Spec name="{name}"><Dielectric type="DIELECTRIC_CONSTANT"><Property value="{er}"/></Dielectric>'
            f'<Dielectric type="LOSS_TANGENT"><Property value="{tan_d}"/></Dielectric></Spec>')


def test_spec_ref_names_the_spec_without_its_prefix(tmp_path):
    """SpecRef SPEC_CORE with only a Spec CORE_1 (the naming a widely used
    open-source exporter writes): read as that Spec (εr 3.9, tan δ 0.011,
    values of the file), with a note; an exact id wins over the near name."""
    board = load_ipc2581(ipc(tmp_path, specs=spec("CORE_1", 3.9, 0.011), stackup=core_spec_ref("SPEC_CORE")))
    d = board.stackup.dielectrics[0]
    assert (d.er, d.assumed) == (3.9, ())
    assert d.loss_tangent == pytest.approx(0.011, rel=1e-12)  # through the series rule's complex εr: rounding
    assert [n for n in board.notes if "'SPEC_CORE'" in n and "'CORE_1'" in n]
    board = load_ipc2581(ipc(tmp_path, specs=spec("CORE_1", 3.9, 0.011) + spec("SPEC_CORE", 4.2, 0.02),
                             stackup=core_spec_ref("SPEC_CORE")))
    assert board.stackup.dielectrics[0].er == 4.2
    assert not [n for n in board.notes if "SpecRef" in n]


@pytest.mark.parametrize("specs, words", [
    (spec("OTHER", 3.9, 0.011), "names no Spec"),
    (spec("CORE_1", 3.9, 0.011) + spec("CORE_2", 4.1, 0.02), "could be any of 'CORE_1', 'CORE_2'"),
    (spec("CORE_X", 3.9, 0.011), "names no Spec"),
])
def test_spec_ref_to_no_spec_takes_the_documented_default(tmp_path, specs, words):
    """No Spec of that id, and not exactly one named CORE or CORE_<digits>:
    not refused; the dielectric gets jobfile's DEFAULT_DIELECTRIC_ER, marked
    assumed, with the 'common practice' note and a note on the SpecRef."""
    board = load_ipc2581(ipc(tmp_path, specs=specs, stackup=core_spec_ref("SPEC_CORE")))
    d = board.stackup.dielectrics[0]
    assert (d.er, d.loss_tangent, d.assumed) == (DEFAULT_DIELECTRIC_ER, None, ("er",))
    assert [n for n in board.notes if "'SPEC_CORE'" in n and words in n]
    assert [n for n in board.notes if ASSUMED_WORDS in n and "CORE" in n]


def test_numbered_spec_export_reads_the_same_stackup():
    """The six-layer board written with Specs named <layer>_1 and SpecRefs
    SPEC_<layer>: the same dielectrics and masks as the committed fixture
    (which names its Specs SPEC_<layer>), none assumed."""
    board = load_board(ROOT / "fixtures" / "six_layer_fab.json")
    a = read_ipc2581(io.BytesIO(ipc2581_text(board, numbered_specs=True).encode()), "numbered.xml").stackup
    b = load_ipc2581(ROOT / "fixtures" / "ipc2581" / "six_layer.xml").stackup
    pairs = list(zip(a.dielectrics, b.dielectrics)) + [(a.mask_top, b.mask_top), (a.mask_bottom, b.mask_bottom)]
    assert len(a.dielectrics) == len(b.dielectrics) == 5
    for x, y in pairs:
        assert (x.thickness_mm, x.er, x.loss_tangent, x.assumed) == (y.thickness_mm, y.er, y.loss_tangent, ())


@pytest.mark.parametrize("where, value, layer", [
    ('"1.5"', "1e-12", "CORE"), ('"1.5"', "1e-300", "CORE"), ('"1.5"', "0.0009", "CORE"),
    ('"0.035" sequence="1"', "1e-300", "TOP"), ('"0.035" sequence="3"', "1e-9", "BOT"),
])
def test_layer_thinner_than_a_micrometre_is_refused(tmp_path, where, value, layer):
    """A dielectric or copper layer thinner than 1 um is no physical board
    (a units mistake): refused, naming the StackupLayer, instead of the
    analysis failing on a slab of no thickness."""
    stackup = STACKUP.replace(where, where.replace(where.split('"')[1], value))
    err = refused(ipc(tmp_path, stackup=stackup), "StackupLayer", f"'{layer}'", "thinner than 1 um")
    assert err.line is not None


def test_line_of_a_nanometre_is_skipped_with_a_note(tmp_path):
    """lineWidth 1e-6 mm (1 nm) beside an ordinary line: skipped with a
    note, the ordinary line read."""
    thin = LINE.replace('lineWidth="0.2"', 'lineWidth="1e-6"').replace('startY="1" ', 'startY="3" ').replace(
        'endY="1"', 'endY="3"')
    board = load_ipc2581(ipc(tmp_path, LINE + thin))
    assert board.pieces.width.tolist() == [0.2]
    assert [n for n in board.notes if "1 nm wide or less" in n]


@pytest.mark.parametrize("width", ["1e-5", "0.0004"])
def test_trace_under_a_micrometre_is_read_a_micrometre_wide(tmp_path, width):
    """A round-ended trace of 10 nm or 0.4 um: read MIN_TRACE_MM (1 um) wide
    with a note (more copper, not less); the board checks without error
    (the analysis tables widths to 1 um, where it had none)."""
    board = load_ipc2581(ipc(tmp_path, LINE.replace('lineWidth="0.2"', f'lineWidth="{width}"')))
    assert board.pieces.width.tolist() == [MIN_TRACE_MM] and MIN_TRACE_MM == 0.001
    assert [n for n in board.notes if "read 1 um wide" in n]
    check_board(board, default_ruleset())


def test_dashed_line_is_read_solid(tmp_path):
    """lineProperty DASHED: read as a solid line (more copper), with a note."""
    board = load_ipc2581(ipc(tmp_path, LINE.replace("<LineDesc ", '<LineDesc lineProperty="DASHED" ')))
    assert len(board.pieces) == 1 and board.pieces.width[0] == 0.2
    assert [n for n in board.notes if "read as solid" in n]


SQUARE = """<Polygon><PolyBegin x="0" y="-5"/><PolyStepSegment x="2" y="-5"/><PolyStepSegment x="2" y="-3"/>
  <PolyStepSegment x="0" y="-3"/><PolyStepSegment x="0" y="-5"/>{line}</Polygon>"""


def contour(fill: str = "", line: str = "", net: str = "A") -> str:
    """A Set of one 2 x 2 mm square Contour, corners (0, -5) and (2, -3)."""
    return f'<Set net="{net}"><Features><Contour>{SQUARE.format(line=line)}{fill}</Contour></Features></Set>'


def ring_area(side: float, w: float) -> float:
    """A square outline of side s stroked with a round line of width w
    (r = w/2): (s + 2r)^2 less the four corners' (4 - pi) r^2 — the outer
    parallel body by Steiner's formula, A + L r + pi r^2 — minus the inner
    square (s - 2r)^2: 2 L r + (pi - 4) r^2 with L = 4 s."""
    r = w / 2
    return 2 * 4 * side * r + (math.pi - 4) * r * r


def test_hollow_contour_is_a_ring(tmp_path):
    """FillDesc HOLLOW with a 0.2 mm LineDesc: the outline stroked (a ring
    of area 2 L r + (pi - 4) r^2 = 1.5914), its centre (1, -4) no copper;
    the exact-area round joins of the Gerber door's stroke put it at or a
    little above the exact figure (more copper, never less)."""
    board = load_ipc2581(ipc(tmp_path, LINE + contour('<FillDesc fillProperty="HOLLOW"/>',
                                                         '<LineDesc lineWidth="0.2"/>')))
    ring = only_region(board)
    assert ring_area(2, 0.2) <= ring.area <= ring_area(2, 0.2) * (1 + 1e-3)
    assert not ring.contains(shapely.Point(1, -4))
    # the equal-area round corners reach a little past r = 0.1 (their vertices lie outside the circle)
    assert ring.bounds == pytest.approx((-0.1, -5.1, 2.1, -2.9), abs=5e-3)


def test_filled_contour_with_a_line_is_grown(tmp_path):
    """No FillDesc (and FILL): the area; with a 0.2 mm LineDesc the outline
    drawn too: Steiner's parallel body A + L r + pi r^2 = 4 + 0.8 + 0.0314."""
    assert only_region(load_ipc2581(ipc(tmp_path, LINE + contour('<FillDesc fillProperty="FILL"/>')))).area == 4
    area = only_region(load_ipc2581(ipc(tmp_path, LINE + contour(line='<LineDesc lineWidth="0.2"/>')))).area
    exact = 4 + 8 * 0.1 + math.pi * 0.1 ** 2
    assert exact <= area <= exact * (1 + 1e-3)


def test_hollow_by_dictionary_reference_and_without_a_width(tmp_path):
    """A FillDescRef to a HOLLOW EntryFillDesc, no line width: stroked
    HOLLOW_LINE_MM (0.05 mm) wide, ring area 2 L r + (pi - 4) r^2 with
    r = 0.025, and a note says so."""
    dictionaries = """<DictionaryFillDesc units="MILLIMETER"><EntryFillDesc id="H">
      <FillDesc fillProperty="HOLLOW"/></EntryFillDesc></DictionaryFillDesc>"""
    board = load_ipc2581(ipc(tmp_path, LINE + contour('<FillDescRef id="H"/>'), dictionaries=dictionaries))
    assert HOLLOW_LINE_MM == 0.05
    assert ring_area(2, 0.05) <= only_region(board).area <= ring_area(2, 0.05) * (1 + 1e-3)
    assert [n for n in board.notes if "hollow shapes without a line width" in n]


def test_hollow_outline_around_another_net_does_not_short_it(tmp_path):
    """A hollow square of net A drawn around a short trace of net B: read
    as a ring, the two nets stay apart (filled, the square would cover B's
    trace and the assembly would find copper of different nets touching)."""
    inner = ('<Set net="B"><Features><Line startX="0.5" startY="-4" endX="1.5" endY="-4">'
             '<LineDesc lineWidth="0.2"/></Line></Features></Set>')
    board = load_ipc2581(ipc(tmp_path, LINE + inner + contour('<FillDesc fillProperty="HOLLOW"/>',
                                                                 '<LineDesc lineWidth="0.2"/>')))
    assert not [n for n in board.notes if "different nets touches" in n]
    assert sorted(board.nets[n].name for n in set(board.pieces.net.tolist())) == ["B", "SIG"]
    assert [board.nets[r.net].name for r in board.regions] == ["A"]


def test_hollow_circle_pad_is_an_annulus(tmp_path):
    """A Circle of diameter 1 with FillDesc HOLLOW and a 0.1 mm LineDesc:
    the circle's outline stroked, an annulus pi/4 (1.1^2 - 0.9^2) = 0.1 pi
    (its chorded edge within 0.5 %); an unknown fillProperty is refused."""
    prim = '<Circle diameter="1"><LineDesc lineWidth="0.1"/><FillDesc fillProperty="HOLLOW"/></Circle>'
    area = only_region(load_ipc2581(ipc(tmp_path, LINE + pad(prim)))).area
    assert area == pytest.approx(0.1 * math.pi, rel=5e-3)
    refused(ipc(tmp_path, LINE + pad(prim.replace("HOLLOW", "STRIPED"))), "fillProperty='STRIPED'", "HOLLOW")


def test_primitive_with_its_own_rotation(tmp_path):
    """Revision B: a RectCenter 2 x 1 carrying its own Xform rotation 90 in
    the dictionary, as a Pad at (5, 5) without an Xform: upright, bounds
    (4.5, 4, 5.5, 6) by hand (it was read flat, (4, 4.5, 6, 5.5))."""
    dictionaries = """<DictionaryStandard units="MILLIMETER"><EntryStandard id="R">
      <RectCenter width="2" height="1"><Xform rotation="90"/></RectCenter></EntryStandard></DictionaryStandard>"""
    board = load_ipc2581(ipc(tmp_path, LINE + pad('<StandardPrimitiveRef id="R"/>'), dictionaries=dictionaries))
    assert only_region(board).bounds == pytest.approx((4.5, 4.0, 5.5, 6.0), abs=1e-12)


def test_primitive_xform_comes_before_the_pads(tmp_path):
    """Own Xform (rotate 90, xOffset 1) first, then the Pad's (mirror),
    then the Location (5, 5). By hand: the 2 x 1 box turned upright is
    x in [-0.5, 0.5], y in [-1, 1]; offset: x in [0.5, 1.5]; mirrored:
    x in [-1.5, -0.5]; placed: (3.5, 4, 4.5, 6). The other order (the
    Pad's mirror first) would give x in [5.5, 6.5]."""
    prim = '<RectCenter width="2" height="1"><Xform rotation="90" xOffset="1"/></RectCenter>'
    board = load_ipc2581(ipc(tmp_path, LINE + pad(prim, xform='<Xform mirror="true"/>')))
    assert only_region(board).bounds == pytest.approx((3.5, 4.0, 4.5, 6.0), abs=1e-12)


def test_nested_sets_take_their_own_net_else_the_parents(tmp_path):
    """A Set in a Set: read (it was skipped), on its own net where it names
    one (B), else its parent's (A); a Hole in a nested Set of the drill
    layer is read too, and a nested Set's padUsage VIA makes its pads via
    pads that join the hole's via."""
    nested = """<Set net="A"><Set><Features><Line startX="1" startY="5" endX="9" endY="5">
      <LineDesc lineWidth="0.2"/></Line></Features></Set><Set net="B"><Features><Line startX="1" startY="7"
      endX="9" endY="7"><LineDesc lineWidth="0.2"/></Line></Features></Set></Set>"""
    vpad = '<Set net="SIG"><Set padUsage="VIA"><Pad><Location x="9" y="1"/><Circle diameter="0.6"/></Pad></Set></Set>'
    drill = '<Set><Set net="SIG"><Hole name="H1" diameter="0.3" platingStatus="VIA" x="9" y="1"/></Set></Set>'
    board = load_ipc2581(ipc(tmp_path, LINE + nested + vpad, bot=vpad, drill=drill))
    p = board.pieces
    by_y = {float(p.y1[k]): board.nets[p.net[k]].name for k in range(len(p))}
    assert by_y == {1.0: "SIG", 5.0: "A", 7.0: "B"}
    assert len(board.vias) == 1 and board.nets[board.vias.net[0]].name == "SIG"
    assert len(board.regions) == 0  # both pads became the via's


def test_nets_from_set_attributes_and_connectivity(tmp_path):
    """A Set with net gives that net; copper in a Set without net that
    touches it takes its net by connectivity (as copper without TO.N);
    net="" is on no net."""
    top = LINE + """<Set><Features><Line startX="9" startY="1" endX="9" endY="4"><LineDesc lineWidth="0.2"/></Line>
      </Features></Set><Set net=""><Features><Line startX="1" startY="8" endX="9" endY="8">
      <LineDesc lineWidth="0.2"/></Line></Features></Set>"""
    board = load_ipc2581(ipc(tmp_path, top))
    p = board.pieces
    by_y = {float(p.y2[k]): int(p.net[k]) for k in range(len(p))}
    assert board.nets[by_y[1.0]].name == "SIG" and board.nets[by_y[4.0]].name == "SIG"
    assert by_y[8.0] == NO_NET


def test_profile_is_the_outline(tmp_path):
    """Profile 20 x 10 with a 2 x 2 cutout: outline area 200 - 4."""
    profile = """<Profile><Polygon><PolyBegin x="0" y="-10"/><PolyStepSegment x="20" y="-10"/>
      <PolyStepSegment x="20" y="10"/><PolyStepSegment x="0" y="10"/><PolyStepSegment x="0" y="-10"/></Polygon>
      <Cutout><PolyBegin x="14" y="4"/><PolyStepSegment x="16" y="4"/><PolyStepSegment x="16" y="6"/>
      <PolyStepSegment x="14" y="6"/><PolyStepSegment x="14" y="4"/></Cutout></Profile>"""
    board = load_ipc2581(ipc(tmp_path, step_extra=profile))
    assert board.outline.area == pytest.approx(20 * 20 - 4, abs=1e-12)


def test_negative_layer_is_outline_minus_what_it_draws(tmp_path):
    """BOT with polarity NEGATIVE draws a 2 x 2 void: its copper is the
    20 x 20 outline minus the void, 400 - 4 (the Gerber door's rule for a
    TF.FilePolarity,Negative file, docs/fab-package.md)."""
    profile = """<Profile><Polygon><PolyBegin x="0" y="-10"/><PolyStepSegment x="20" y="-10"/>
      <PolyStepSegment x="20" y="10"/><PolyStepSegment x="0" y="10"/><PolyStepSegment x="0" y="-10"/></Polygon>
      </Profile>"""
    void = """<Set><Features><Contour><Polygon><PolyBegin x="14" y="4"/><PolyStepSegment x="16" y="4"/>
      <PolyStepSegment x="16" y="6"/><PolyStepSegment x="14" y="6"/><PolyStepSegment x="14" y="4"/></Polygon>
      </Contour></Features></Set>"""
    layers = LAYERS.replace('layerFunction="PLANE" side="BOTTOM" polarity="POSITIVE"',
                            'layerFunction="PLANE" side="BOTTOM" polarity="NEGATIVE"')
    board = load_ipc2581(ipc(tmp_path, layers=layers, bot=void, step_extra=profile))
    plane = [r.polygon for r in board.regions if r.layer == 1]
    assert sum(p.area for p in plane) == pytest.approx(400 - 4, abs=1e-9)


def test_sniff_many_comments_then_another_root():
    """10 000 comments before a root that is not IPC-2581: a pattern with a
    repeated group of lazy alternatives backtracked exponentially here
    (40 comments already hung `couplint check`); the scan answers at once.
    The same comments before an IPC-2581 root are skipped too."""
    comments = b"<!-- exported by a tool -->\n" * 10_000
    assert not is_ipc2581(comments + b"<svg/>")
    assert not is_ipc2581(b"<?xml version='1.0'?>\n" + comments + b"<svg><IPC-2581/></svg>")
    assert is_ipc2581(b"<?xml version='1.0'?>\n" + comments + b"<IPC-2581 revision='C'>")
    assert is_ipc2581(b"<?pi a?><!DOCTYPE x [<!ENTITY e 'a>b'>]><!-- c --><IPC-2581>")
    assert not is_ipc2581(b"<!-- never closed " + b"-" * 10_000)
    assert not is_ipc2581(b"<?never closed " + b"?" * 10_000)


@pytest.mark.parametrize("head, xml", [
    (b"<svg/>", True), (b"\xef\xbb\xbf \r\n\t<?xml version='1.0'?>", True),
    ("<?xml version='1.0'?><x/>".encode("utf-16"), True), (b"", False), (b" \n\t ", False),
    (b"\x89PNG\r\n\x1a\n\x00\x00", False), (b"%FSLAX46Y46*%", False), (b'{"a": 1}', False),
])
def test_looks_like_xml(head, xml):
    """Any XML document (after a byte-order mark and white space, '<'),
    IPC-2581 or not; nothing else."""
    assert looks_like_xml(head) is xml


def test_sniff():
    head = (ROOT / "fixtures" / "ipc2581" / "six_layer.xml").read_bytes()[:4096]
    assert is_ipc2581(head)
    assert is_ipc2581(b"\xef\xbb\xbf<!-- exported -->\n<ipc:IPC-2581 xmlns:ipc='x' revision='B'>")
    assert is_ipc2581("<?xml version='1.0'?><IPC-2581/>".encode("utf-16"))
    assert not is_ipc2581(b"<?xml version='1.0'?><IPC-2581B-notes/>")
    assert not is_ipc2581(b"<?xml version='1.0'?><svg><IPC-2581/></svg>")
    assert not is_ipc2581((ROOT / "fixtures" / "fab" / "six_layer" / "six-layer-fab-L1.gbr").read_bytes()[:4096])
    assert not is_ipc2581(b'{"MaterialStackup": []}')


# --------------------------------------------------------------------------- (3) bad input


def refused(path: pathlib.Path, *words: str) -> FabError:
    with pytest.raises(FabError) as info:
        load_ipc2581(path)
    err = info.value
    assert err.file == str(path)
    assert str(err).startswith(f"{path}: ")
    assert "\n" not in str(err)
    for w in words:
        assert w in str(err), (w, str(err))
    return err


def test_not_xml(tmp_path):
    path = tmp_path / "board.xml"
    path.write_bytes(b"\n%FSLAX46Y46*%\n%MOMM*%\n")
    assert refused(path, "not XML", "'%FSLAX46Y46*%", "not an IPC-2581 file").line == 2


@pytest.mark.parametrize("data, words", [
    (b"", "the file is empty"),
    (b"  \r\n\t\n" * 100, "only white space"),
    ("  \n".encode("utf-16"), "only white space"),
    (b"\xef\xbb\xbf\n", "only white space"),
    (b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR", "binary content"),
    (bytes(range(256)) * 4, "binary content"),
    (b"<?xml version='1.0'?>\n<svg xmlns='http://www.w3.org/2000/svg'/>", "the root element is <svg>"),
    (b"<?xml version='1.0'?>\n<a>\x00</a>", "not well-formed XML"),
])
def test_not_an_ipc2581_file_is_named_as_such(tmp_path, data, words):
    """Whatever a .xml file holds, the door names the file and says what it
    is, in one line (the package door's "no stackup ... Gerber job file"
    message named the folder instead)."""
    path = tmp_path / "given.xml"
    path.write_bytes(data)
    err = refused(path, words)
    assert "IPC-2581" in str(err) or "XML" in str(err)
    with pytest.raises(FabError) as info:
        read_ipc2581(io.BytesIO(data), "stream.xml")
    assert str(info.value).startswith("stream.xml")


def test_xml_bomb_is_refused_without_expanding(tmp_path):
    """The 'billion laughs' entity bomb: refused at its DOCTYPE."""
    lol = "".join(f'<!ENTITY l{k} "{f"&l{k - 1};" * 10}">' for k in range(1, 10))
    path = tmp_path / "bomb.xml"
    path.write_text(f'<?xml version="1.0"?>\n<!DOCTYPE IPC-2581 [<!ENTITY l0 "lol">{lol}]>\n<IPC-2581>&l9;</IPC-2581>')
    err = refused(path, "refused for safety", "DOCTYPE")
    assert err.line == 2


def test_external_entity_is_refused(tmp_path):
    path = tmp_path / "xxe.xml"
    path.write_text('<?xml version="1.0"?>\n<!DOCTYPE r [<!ENTITY x SYSTEM "file:///etc/passwd">]>\n'
                    "<IPC-2581>&x;</IPC-2581>")
    refused(path, "refused for safety")


def test_wrong_root(tmp_path):
    path = tmp_path / "x.xml"
    path.write_text('<?xml version="1.0"?>\n<svg/>')
    refused(path, "<svg>", "not an IPC-2581 file")


def test_missing_stackup(tmp_path):
    refused(ipc(tmp_path, stackup=""), "IPC-2581/Ecad/CadData", "no Stackup")


def test_undefined_dictionary_primitive(tmp_path):
    err = refused(ipc(tmp_path, LINE + pad('<StandardPrimitiveRef id="NOPE"/>')), "'NOPE'",
                  "names no entry of the DictionaryStandard", "LayerFeature[TOP]/Set[2]/Pad[1]/StandardPrimitiveRef")
    assert err.line is not None


def test_undefined_line_description(tmp_path):
    top = '<Set net="S"><Features><Line startX="0" startY="0" endX="1" endY="0"><LineDescRef id="W9"/></Line>' \
          "</Features></Set>"
    refused(ipc(tmp_path, top), "LineDescRef id 'W9'", "Features[1]/Line[1]/LineDescRef")


@pytest.mark.parametrize("units", ["FEET", "MILS", ""])
def test_unknown_units(tmp_path, units):
    refused(ipc(tmp_path, units=units), "CadHeader", "unknown units", "MILLIMETER, INCH, MICRON")


def test_unknown_dictionary_units(tmp_path):
    dictionaries = '<DictionaryStandard units="PARSEC"><EntryStandard id="C"><Circle diameter="1"/></EntryStandard>' \
                   "</DictionaryStandard>"
    refused(ipc(tmp_path, dictionaries=dictionaries), "DictionaryStandard[1]", "unknown units 'PARSEC'")


def test_layer_feature_of_an_undefined_layer_is_noted_and_skipped(tmp_path):
    """An exporter writes LayerFeatures of tenting, plugging or filling
    layers no Layer defines: only copper and drill layers matter, so each
    is skipped with a note naming it, and the copper is read as without it."""
    extra = ('<LayerFeature layerRef="L7">' + LINE + "</LayerFeature>"
             '<LayerFeature layerRef="TENTING_TOP">' + LINE + "</LayerFeature>")
    board = load_ipc2581(ipc(tmp_path, step_extra=extra))
    assert len(board.pieces) == 1  # TOP's line only
    note = [n for n in board.notes if "no Layer of CadData defines" in n]
    assert len(note) == 1 and "'L7'" in note[0] and "'TENTING_TOP'" in note[0]


def test_stackup_layer_not_defined(tmp_path):
    refused(ipc(tmp_path, stackup=STACKUP.replace('"CORE" thickness', '"CORE2" thickness')),
            "StackupLayer[2]", "'CORE2' names no Layer")


def test_span_names_an_undefined_layer(tmp_path):
    refused(ipc(tmp_path, layers=LAYERS.replace('toLayer="BOT"', 'toLayer="L9"')), "Layer[DRILL]/Span",
            "toLayer 'L9' names no Layer")


@pytest.mark.parametrize("value, words", [("NaN", "not a finite number"), ("INF", "not a finite number"),
                                          ("1e400", "not a finite number"), ("1,5", "not a number"),
                                          ("20000", "more than 10 m")])
def test_bad_numbers(tmp_path, value, words):
    top = LINE.replace('endX="9"', f'endX="{value}"')
    refused(ipc(tmp_path, top), "Set[1]/Features[1]/Line", f"endX={value!r}", words)


def test_inch_coordinate_beyond_ten_metres(tmp_path):
    """500 in = 12.7 m: a units mistake (an exporter writing mm as inch)."""
    top = LINE.replace('endX="9"', 'endX="500"')
    refused(ipc(tmp_path, top, units="INCH"), "12700 mm", "more than 10 m")


@pytest.mark.parametrize("er, tan_d, where, words", [
    (4.5, "1e308", "Dielectric[2]/Property", "a loss tangent 1e+308 is above the sanity bound (0 to 1)"),
    ("1e308", 0.02, "Dielectric[1]/Property", "a dielectric constant 1e+308 is above the sanity bound (1 to 100)"),
])
def test_material_value_beyond_its_sanity_bound(tmp_path, er, tan_d, where, words):
    """Refused at the Spec's own Property: a loss tangent of 1e308 once
    overflowed the series rule (complex division by zero)."""
    refused(ipc(tmp_path, specs=spec("S_CORE", er, tan_d)), f"Spec[1]/{where}", words)


def test_absurd_thickness(tmp_path):
    refused(ipc(tmp_path, stackup=STACKUP.replace('"1.5"', '"15000"')), "StackupLayer[2]", "more than 10 m")


@pytest.mark.parametrize("top, words", [
    (LINE + pad('<Circle diameter="0"/>'), ("diameter='0' must be > 0",)),
    (LINE + pad('<Thermal shape="ROUND" outerDiameter="1" innerDiameter="0.5"/>'), ("Thermal is not supported",)),
    (LINE.replace("<Set ", '<Set polarity="NEGATIVE" '), ("clear (negative) copper",)),
    (LINE + '<Set net="P"><Pad><StandardPrimitiveRef id="X"/></Pad></Set>', ("a Pad needs a Location",)),
    (LINE.replace('<LineDesc lineEnd="ROUND" lineWidth="0.2"/>', ""), ("needs a LineDesc or LineDescRef",)),
    ("""<Set net="A"><Features><Arc startX="3" startY="1" endX="1" endY="4" centerX="1" centerY="1"
       clockwise="false"><LineDesc lineWidth="0.1"/></Arc></Features></Set>""", ("no circle fits",)),
])
def test_bad_features(tmp_path, top, words):
    refused(ipc(tmp_path, top), "LayerFeature[TOP]", *words)


def test_dielectric_without_thickness(tmp_path):
    refused(ipc(tmp_path, stackup=STACKUP.replace('thickness="1.5" ', "")), "StackupLayer[2]", "no thickness")


def test_empty_file(tmp_path):
    path = tmp_path / "empty.xml"
    path.write_bytes(b"")
    refused(path, "the file is empty")


def test_revision_a_is_refused(tmp_path):
    refused(ipc(tmp_path, root='revision="A"'), "revision='A'")


def test_corrupted_files_give_only_fab_errors():
    """A short fuzz run (the DEVELOPERS.md contract for every door): 150
    corruptions of the small fixture — attribute values swapped for odd
    ones, empty elements dropped or repeated, a byte changed, the file cut
    short — each reads or raises FabError, never anything else."""
    base = (ROOT / "fixtures" / "ipc2581" / "four_layer_mixed_inch.xml").read_bytes()
    rng = random.Random(2581)
    values = [b"", b"-1", b"0", b"1e9", b"abc", b"NaN", b"1e-300", b"true", b"TOP", b"VIA", b"NEGATIVE", b"INCH",
              b"99999", b"DRILL", b"PLANE", b"NONPLATED", b"2.5"]
    outcomes = {"read": 0, "refused": 0}
    for _ in range(150):
        data = base
        for _ in range(rng.randint(1, 3)):
            kind = rng.randrange(5)
            attrs = [m.span(1) for m in re.finditer(rb'="([^"]*)"', data)]
            empty = [m.span() for m in re.finditer(rb"<[A-Za-z][^<>]*/>", data)]
            if kind <= 1 and attrs:
                a, b = rng.choice(attrs)
                data = data[:a] + rng.choice(values) + data[b:]
            elif kind == 2 and empty:
                a, b = rng.choice(empty)
                data = data[:a] + data[b:]
            elif kind == 3 and empty:
                (a, _), (c, d) = rng.choice(empty), rng.choice(empty)
                data = data[:a] + data[c:d] + data[a:]
            else:
                i = rng.randrange(len(data))
                data = data[:i] + bytes([rng.randrange(256)]) + data[i + 1:]
        try:
            read_ipc2581(io.BytesIO(data), "fuzz.xml")
            outcomes["read"] += 1
        except FabError as exc:
            assert exc.file == "fuzz.xml"
            outcomes["refused"] += 1
    assert outcomes["read"] > 0 and outcomes["refused"] > 0  # the run exercised both paths
