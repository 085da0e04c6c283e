"""The fixture writer ``scripts/write_fab.py``: a board as a fabrication package.

The written files are read back with gerbonara 1.5, an independent
Gerber / Excellon / IPC-D-356 library from PyPI (the oracle), and compared
with the Board read from the JSON file:

* copper per layer and per net (shapely areas and symmetric differences),
  tracks on both sides stroked the same way (shapely ``buffer`` with round
  caps and joins, 16 segments per quarter circle), arcs chorded on both
  sides by the same rule (``checker.readers.arcs``), so the two sides
  agree to rounding: tolerance 1e-9 mm^2 per mm^2 of copper;
* via pads, drill hits, the IPC-D-356A records, the job file's stackup.

What gerbonara 1.5 gets wrong, and how the tests work around it:

* step and repeat: ``%SRX..Y..I..J..*%`` blocks are not repeated (its
  parser files the block's first object as an ordinary object, so the
  list it repeats stays empty): the oracle comparisons use packages
  written without ``sr``; the SR blocks are checked against the hand-laid
  via grid from the file text (``test_step_and_repeat_*``);
* regions: ``Region`` objects carry no object attributes, so their
  ``TO.N`` is lost: per-net areas are compared for tracks and arcs, region
  nets are read from the ``TO.N`` in force at each ``G36`` in the file
  text, and whole-layer areas include the regions;
* it has no notion of ``TF.FilePolarity``: negative layers are inverted
  here (copper = profile outline minus the image), by the Gerber spec's
  definition of a negative file.
"""

from __future__ import annotations

import json
import math
import re
import sys
from collections import defaultdict
from pathlib import Path

import numpy as np
import pytest
import shapely

from checker.model import NO_NET, Board
from checker.readers import load_board, read_board_dict
from checker.readers.arcs import arc_polyline

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "scripts"))

import write_fab  # noqa: E402
from write_fab import (  # noqa: E402
    FabWriteError,
    cutin_contour,
    find_grids,
    rounding_mm,
)
from write_fab import (  # noqa: E402
    write_fab as write_package,
)

SIX = ROOT / "fixtures" / "six_layer_fab.json"
FOUR = ROOT / "fixtures" / "four_layer_mixed.json"
DEMO = ROOT / "checker" / "data" / "demo_board.json"
BOARDS = {"six": SIX, "four": FOUR, "demo": DEMO}

#: round caps and joins of strokes: shapely's default circle resolution
QUAD_SEGS = 16
#: copper compared to 1e-9 mm^2 per mm^2 (rounding only: both sides are
#: built from the same coordinates to ~1e-15 mm)
AREA_TOL = 1e-9


def gerbonara():
    return pytest.importorskip("gerbonara", reason="gerbonara (the oracle) is not installed")


# --------------------------------------------------------------------------- the Board side


def board_copper(board: Board, layer: int) -> tuple[dict[int, shapely.Geometry], dict[int, shapely.Geometry]]:
    """Strokes (tracks and arcs) and regions of one layer, per net, from
    the Board directly: each source's pieces as one polyline stroked with
    round caps, each region as its polygon."""
    p = board.pieces
    strokes: dict[int, list] = defaultdict(list)
    rows = np.flatnonzero(p.layer == layer)
    for source in np.unique(p.source[rows]):
        mine = rows[p.source[rows] == source]
        mine = mine[np.argsort(p.ordinal[mine])]
        xy = [(p.x1[mine[0]], p.y1[mine[0]])] + [(p.x2[r], p.y2[r]) for r in mine]
        line = shapely.LineString(xy)
        strokes[int(p.net[mine[0]])].append(line.buffer(p.width[mine[0]] / 2, quad_segs=QUAD_SEGS))
    regions: dict[int, list] = defaultdict(list)
    for r in board.regions:
        if r.layer == layer:
            regions[r.net].append(r.polygon)
    return ({k: shapely.union_all(v) for k, v in strokes.items()},
            {k: shapely.union_all(v) for k, v in regions.items()})


# --------------------------------------------------------------------------- the gerbonara side


def arc_points(arc) -> list[tuple[float, float]]:
    """A gerbonara ``Arc`` (G75: from p1 to p2 about its centre, clockwise
    or not; equal ends = a full circle, Gerber spec) chorded by the rule
    every couplint door uses, ends exactly at p1 and p2."""
    (x1, y1), (x2, y2), (cx, cy) = arc.p1, arc.p2, arc.center
    a0, a2 = math.atan2(y1 - cy, x1 - cx), math.atan2(y2 - cy, x2 - cx)
    if arc.clockwise:
        sweep = -((a0 - a2) % (2 * math.pi)) or -2 * math.pi
    else:
        sweep = (a2 - a0) % (2 * math.pi) or 2 * math.pi
    xy = arc_polyline(cx, cy, math.hypot(x1 - cx, y1 - cy), a0, sweep)
    xy[0], xy[-1] = arc.p1, arc.p2
    return [tuple(q) for q in xy]


def function_of(obj) -> str | None:
    attrs = dict(getattr(obj.aperture, "attrs", ()) or ()) if hasattr(obj, "aperture") else {}
    value = attrs.get(".AperFunction")
    return value[0] if value else None


def net_of(obj) -> str | None:
    attrs = getattr(obj, "attrs", None)
    if not isinstance(attrs, dict):  # gerbonara 1.5 regions have none
        return None
    value = attrs.get(".N")
    return value[0] if value else None


def gerber_copper(path: Path):
    """(strokes per net, whole-layer image, via pads) from gerbonara's
    objects: dark objects add, clear objects remove what came before
    (Gerber spec, load polarity). Strokes are joined per stroke: a D02
    starts a new one (consecutive Line / Arc objects whose ends touch are
    one stroke, as the writer promises one stroke per source)."""
    gb = gerbonara()
    layer = gb.GerberFile.open(path)
    image = shapely.Polygon()
    strokes: dict[str | None, list] = defaultdict(list)
    pads = []
    current: list | None = None  # [net, width, points]

    def flush() -> None:
        nonlocal current
        if current is not None:
            net, width, pts = current
            strokes[net].append(shapely.LineString(pts).buffer(width / 2, quad_segs=QUAD_SEGS))
            current = None

    for obj in layer.objects:
        kind = type(obj).__name__
        if kind == "Flash" and function_of(obj) == "ViaPad":
            pads.append((round(obj.x, 9), round(obj.y, 9), obj.aperture.diameter, net_of(obj)))
            continue
        if kind in ("Line", "Arc"):
            assert obj.polarity_dark
            pts = [obj.p1, obj.p2] if kind == "Line" else arc_points(obj)
            width = obj.aperture.diameter
            if current is not None and current[2][-1] == tuple(pts[0]) and current[0] == net_of(obj) \
                    and current[1] == width:
                current[2].extend(pts[1:])
            else:
                flush()
                current = [net_of(obj), width, [tuple(q) for q in pts]]
            shape = shapely.LineString(pts).buffer(width / 2, quad_segs=QUAD_SEGS)
        elif kind == "Region":
            flush()
            shape = shapely.make_valid(shapely.Polygon(obj.outline))
        else:
            raise AssertionError(f"unexpected object {kind} in {path.name}")
        image = shapely.union(image, shape) if obj.polarity_dark else shapely.difference(image, shape)
    flush()
    return {k: shapely.union_all(v) for k, v in strokes.items()}, image, pads, layer


def region_nets(path: Path) -> list[str | None]:
    """The ``TO.N`` in force at each dark ``G36`` of a file (gerbonara 1.5
    drops it): a scan of the file text."""
    net, dark, out = None, True, []
    for line in path.read_text().splitlines():
        if line.startswith("%TO.N,"):
            net = line[6:-2]
        elif line in ("%TD*%", "%TD.N*%"):
            net = None
        elif line in ("%LPD*%", "%LPC*%"):
            dark = line == "%LPD*%"
        elif line == "G36*" and dark:
            out.append(net)
    return out


def assert_same_area(got: shapely.Geometry, want: shapely.Geometry, what: str, moved: float = 0.0) -> None:
    """Equal areas and a negligible symmetric difference. ``moved``: how far
    rounding to the 1 nm grid moved the written coordinates (mm); an edge
    moved by d changes the area by at most d times the perimeter, and the
    chords of an arc whose centre moved by d move by up to 2 d: allow
    4 d x perimeter on top of the rounding tolerance."""
    tol = AREA_TOL * max(want.area, 1.0) + 4 * moved * want.length
    assert abs(got.area - want.area) <= tol, (what, got.area, want.area)
    assert shapely.symmetric_difference(got, want).area <= tol, what


# --------------------------------------------------------------------------- packages


@pytest.fixture(scope="module")
def packages(tmp_path_factory):
    """Packages written once per (board, holes) without step and repeat."""
    cache: dict[tuple, tuple[Board, Path]] = {}

    def get(key: str, **options) -> tuple[Board, Path]:
        ident = (key, tuple(sorted(options.items())))
        if ident not in cache:
            out = tmp_path_factory.mktemp(f"{key}-fab")
            board = load_board(BOARDS[key])
            write_package(board, out, **options)
            cache[ident] = (board, out)
        return cache[ident]

    return get


def copper_files(out: Path) -> dict[int, Path]:
    return {int(m.group(1)) - 1: p for p in out.glob("*-L*.gbr") if (m := re.search(r"-L(\d+)\.gbr$", p.name))}


# --------------------------------------------------------------------------- copper, by the oracle


@pytest.mark.parametrize("holes", ["clear", "cutin"])
@pytest.mark.parametrize("key", ["six", "four", "demo"])
def test_copper_per_layer_and_net_equals_the_board(packages, key, holes):
    # oracle: gerbonara 1.5 reads the Gerber files; the Board is the JSON door
    board, out = packages(key, holes=holes)
    moved = rounding_mm(board)  # 0 but float noise for six and four; 0.15 nm for the demo's arc
    files = copper_files(out)
    assert sorted(files) == list(range(len(board.stackup.layers)))
    names = {i: n.name for i, n in enumerate(board.nets)} | {NO_NET: None}
    for layer, path in files.items():
        want_strokes, want_regions = board_copper(board, layer)
        got_strokes, image, _pads, _ = gerber_copper(path)
        # per net: tracks and arcs (gerbonara keeps TO.N on them)
        assert set(got_strokes) == {names[k] for k in want_strokes}, path.name
        for net, geometry in want_strokes.items():
            assert_same_area(got_strokes[names[net]], geometry, f"{path.name} {names[net]}", moved)
        # the whole layer, regions and holes included
        want = shapely.union_all(list(want_strokes.values()) + list(want_regions.values()))
        assert_same_area(image, want, path.name, moved)
        # per net regions: the nets in force at each region (text scan, see above)
        regions = [r for r in board.regions if r.layer == layer]
        assert region_nets(path) == [names[r.net] for r in regions]


def test_the_oracle_sees_a_wrong_width(packages, tmp_path):
    # the comparison can fail: a track written 1 um wider is caught
    board, out = packages("four", holes="clear")
    path = copper_files(out)[0]
    broken = tmp_path / path.name
    broken.write_text(path.read_text().replace("%ADD10C,0.2*%", "%ADD10C,0.201*%"))
    got, _image, _pads, _ = gerber_copper(broken)
    want, _regions = board_copper(board, 0)
    clk = board.net_index()["CLK_X"]
    with pytest.raises(AssertionError):
        assert_same_area(got["CLK_X"], want[clk], "CLK_X")


def test_one_stroke_per_track_and_arc(packages):
    # every JSON track and arc starts with its own D02: count D02 per file
    # against the tracks and arcs of the JSON file (hand count below)
    board, out = packages("six", holes="clear")
    data = json.loads(SIX.read_text())
    for layer, path in copper_files(out).items():
        name = board.stackup.layers[layer].name
        want = sum(t["layer"] == name for t in data["tracks"]) + sum(a["layer"] == name for a in data["arcs"])
        text = path.read_text()
        strokes = text.count("D02*") - text.count("G36*")  # a contour starts with one D02 too
        assert strokes == want, path.name
    # hand count: TOP has 9 tracks, IN2 7 tracks and the clock's arc
    assert sum(t["layer"] == "TOP" for t in data["tracks"]) == 9
    assert sum(t["layer"] == "IN2" for t in data["tracks"]) + sum(a["layer"] == "IN2" for a in data["arcs"]) == 8


def test_arcs_have_the_hand_laid_centres_and_directions(packages):
    # oracle: gerbonara's Arc objects; expected values from the fixture:
    # the clock on IN2, centre (20, 10), radius 4, 90 -> 180 deg: from
    # (20, 14) to (16, 10) counter-clockwise (G03); the 3V3 arc on BOT
    # from (10, 6) through (12, 8) to (14, 6): centre (12, 6), clockwise (G02)
    board, out = packages("six", holes="clear")
    files = copper_files(out)
    arcs = {}
    for layer in (2, 5):
        _s, _i, _p, parsed = gerber_copper(files[layer])
        found = [o for o in parsed.objects if type(o).__name__ == "Arc"]
        assert len(found) == 1
        arcs[layer] = found[0]
    a = arcs[2]
    assert (a.p1, a.p2, a.center, a.clockwise) == ((20.0, 14.0), (16.0, 10.0), (20.0, 10.0), False)
    assert net_of(a) == "CLK_25M" and a.aperture.diameter == 0.15
    b = arcs[5]
    assert (b.p1, b.p2, b.center, b.clockwise) == ((10.0, 6.0), (14.0, 6.0), (12.0, 6.0), True)
    assert net_of(b) == "3V3" and b.aperture.diameter == 0.3


def test_full_circle_and_single_chord_arcs(tmp_path):
    # a full circle (0 -> 360 deg, radius 1 about (2, 10)) is one G75 arc
    # with equal ends; an arc of radius 0.1 over 10 deg has a sagitta of
    # 0.1 (1 - cos 5 deg) = 0.38 um < 2 um, so the Board has one chord for
    # it, and the writer draws that chord (oracle: gerbonara)
    data = _small_board()
    data["arcs"] = [
        {"layer": "TOP", "net": "CLK_X", "width": 0.2, "center": [2, 10], "radius": 1,
         "start_angle": 0, "end_angle": 360},
        {"layer": "TOP", "net": "CLK_X", "width": 0.1, "center": [2, 14], "radius": 0.1,
         "start_angle": 0, "end_angle": 10},
    ]
    data["outline"] = [[-5, -8], [20, -8], [20, 16], [-5, 16]]
    data["regions"][0]["outline"] = data["outline"]
    board = read_board_dict(data, "arcs.json")
    write_package(board, tmp_path)
    text = (tmp_path / "four-layer-mixed-L1.gbr").read_text()
    assert "X3000000Y10000000D02*\nG03*\nX3000000Y10000000I-1000000J0D01*" in text
    strokes, image, _pads, parsed = gerber_copper(tmp_path / "four-layer-mixed-L1.gbr")
    arcs = [o for o in parsed.objects if type(o).__name__ == "Arc"]
    assert len(arcs) == 1 and arcs[0].p1 == arcs[0].p2 == (3.0, 10.0)
    chords = [o for o in parsed.objects if type(o).__name__ == "Line" and o.aperture.diameter == 0.1]
    assert len(chords) == 1 and chords[0].p1 == (2.1, 14.0)
    end = (2 + 0.1 * math.cos(math.radians(10)), 14 + 0.1 * math.sin(math.radians(10)))
    assert math.dist(chords[0].p2, end) <= 0.5e-6 * math.sqrt(2)  # rounded to the 1 nm grid
    want, _regions = board_copper(board, 0)
    clk = board.net_index()["CLK_X"]
    assert_same_area(strokes["CLK_X"], want[clk], "CLK_X", rounding_mm(board))
    # the circle's stroke: an annulus of radii 0.9 and 1.1, 0.4 pi, less the
    # chording (sagitta <= 2 um over a length of 2 pi: area within 2.8e-3)
    circle = shapely.Point(2, 10).buffer(1.5).intersection(strokes["CLK_X"])
    assert circle.area == pytest.approx(0.4 * math.pi, abs=3e-3)


def test_mil_board(tmp_path):
    # a board in mil: lengths converted once (1 mil = 0.0254 mm) and written in mm
    board = load_board(ROOT / "fixtures" / "two_layer_parallel_mil.json")
    write_package(board, tmp_path)
    for layer, path in copper_files(tmp_path).items():
        strokes, image, _pads, _ = gerber_copper(path)
        want, regions = board_copper(board, layer)
        assert_same_area(image, shapely.union_all(list(want.values()) + list(regions.values())), path.name,
                         rounding_mm(board))


def test_via_pads_on_every_layer_of_the_span(packages):
    # oracle: gerbonara's ViaPad flashes (TA.AperFunction on the aperture)
    board, out = packages("six", holes="clear")
    v = board.vias
    counts = {}
    for layer, path in copper_files(out).items():
        _s, _i, pads, _ = gerber_copper(path)
        rows = np.flatnonzero((v.first_layer <= layer) & (v.last_layer >= layer))
        want = sorted((float(v.x[k]), float(v.y[k]), float(v.pad[k]),
                       None if v.net[k] == NO_NET else board.nets[v.net[k]].name) for k in rows)
        assert sorted(pads, key=lambda t: (t[0], t[1], t[2], t[3] or "")) == \
            sorted(want, key=lambda t: (t[0], t[1], t[2], t[3] or "")), path.name
        counts[layer] = len(pads)
    # hand count from the fixture: 29 vias; 16 GND + 5 other through vias
    # (THERM, 3V3, the test coupon) = 19 through; blind L1-L3: CLK, MOSI,
    # MISO, DOUT_P, DOUT_N (5); blind L1-L4: SPI_SCK, UART_TX, UART_RX (3);
    # buried L3-L4: VREF_ADC (1); blind L4-L6: AIN_PRESSURE (1)
    assert counts == {0: 27, 1: 27, 2: 28, 3: 24, 4: 20, 5: 20}


# --------------------------------------------------------------------------- step and repeat


def test_step_and_repeat_blocks_hold_the_via_grids(tmp_path):
    # gerbonara 1.5 does not repeat SR blocks (see the module docstring), so
    # the blocks are read from the text: %SRX<nx>Y<ny>I<dx>J<dy>*%, one
    # flash, %SR*% (Gerber spec, step and repeat; from memory). Hand values:
    # the GND stitching grid, 3 x 4 at 2.5 mm from (36, 20), and the four
    # GND corner vias, 2 x 2 at 44 x 34 mm from (3, 3).
    board = load_board(SIX)
    write_package(board, tmp_path, sr=True)
    text = (tmp_path / "six-layer-fab-L1.gbr").read_text()
    blocks = re.findall(r"%SRX(\d+)Y(\d+)I([\d.]+)J([\d.]+)\*%\n(X-?\d+Y-?\d+)D03\*\n%SR\*%", text)
    assert blocks == [("3", "4", "2.5", "2.5", "X36000000Y20000000"), ("2", "2", "44.0", "34.0", "X3000000Y3000000")]
    assert text.count("%SR") == 4
    # expanded by the spec (copies at x0 + i I, y0 + j J), with the single
    # flashes, they give every via pad of the layer
    flashes = []
    sr = None
    for line in text.splitlines():
        if m := re.fullmatch(r"%SRX(\d+)Y(\d+)I([\d.]+)J([\d.]+)\*%", line):
            sr = (int(m[1]), int(m[2]), float(m[3]), float(m[4]))
        elif line == "%SR*%":
            sr = None
        elif m := re.fullmatch(r"X(-?\d+)Y(-?\d+)D03\*", line):
            x, y = int(m[1]) / 1e6, int(m[2]) / 1e6
            nx, ny, dx, dy = sr or (1, 1, 0.0, 0.0)
            flashes += [(round(x + i * dx, 6), round(y + j * dy, 6)) for i in range(nx) for j in range(ny)]
    v = board.vias
    rows = np.flatnonzero(v.first_layer == 0)
    assert sorted(flashes) == sorted((float(v.x[k]), float(v.y[k])) for k in rows)
    # the drill hits stay individual
    drill = (tmp_path / "six-layer-fab-PTH-1-6.drl").read_text()
    assert "X36.0Y20.0" in drill and "X41.0Y27.5" in drill and "R" not in drill.split("%", 1)[1]


def test_step_and_repeat_changes_only_the_form(tmp_path):
    # with and without SR the files differ only where the via pads are
    board = load_board(SIX)
    write_package(board, tmp_path / "plain")
    write_package(board, tmp_path / "sr", sr=True)
    def strip(text: str) -> list[str]:
        return [ln for ln in text.splitlines() if not ln.endswith("D03*") and "%SR" not in ln]

    for path in sorted((tmp_path / "plain").iterdir()):
        plain, other = path.read_text(), (tmp_path / "sr" / path.name).read_text()
        if re.search(r"-L\d\.gbr$", path.name):  # every copper layer has the through GND vias
            assert other != plain and other.count("%SR*%") == 2 and strip(other) == strip(plain), path.name
        else:
            assert other == plain, path.name


def test_find_grids_hand_examples():
    # a 3 x 2 grid at (10, 20) pitch (5, 7), plus a stray point and a repeat
    pts = [(10, 20), (15, 20), (20, 20), (10, 27), (15, 27), (20, 27), (99, 99), (15, 20)]
    grids, singles = find_grids(pts)
    assert grids == [(10, 20, 3, 2, 5, 7)]
    assert singles == [6, 7]
    # an L of three points is no grid; a 2 x 1 row is no grid
    assert find_grids([(0, 0), (1, 0), (0, 1)]) == ([], [0, 1, 2])
    assert find_grids([(0, 0), (1, 0)]) == ([], [0, 1])
    # a 2 x 2 grid with one row longer: the grid takes what is full
    grids, singles = find_grids([(0, 0), (4, 0), (8, 0), (0, 3), (4, 3)])
    assert grids == [(0, 0, 2, 2, 4, 3)] and singles == [2]


# --------------------------------------------------------------------------- cut-ins


def test_cutin_contour_hand_example():
    # a 10 x 10 square with two 2 x 2 square holes: area 100 - 4 - 4 = 92
    shell = [(0, 0), (10, 0), (10, 10), (0, 10)]
    holes = [[(2, 2), (2, 4), (4, 4), (4, 2)], [(6, 6), (6, 8), (8, 8), (8, 6)]]
    contour = cutin_contour(shell, holes)
    ring = shapely.Polygon(contour)
    assert ring.area == 92  # the shoelace area of the single contour
    assert shapely.make_valid(ring).equals(shapely.Polygon(shell, holes))
    # every cut-in segment is traversed once each way, and nothing else repeats
    edges = [(contour[i], contour[(i + 1) % len(contour)]) for i in range(len(contour))]
    once = [e for e in edges if (e[1], e[0]) not in edges]
    assert len(once) == 4 + 4 + 4
    assert len(edges) == len(once) + 2 * len(holes) * 1


def test_cutin_regions_read_back_as_the_board(packages):
    # oracle: gerbonara reads the single contour; shapely's make_valid turns
    # the self-touching ring into the polygon with holes
    board, out = packages("six", holes="cutin")
    text = (out / "six-layer-fab-L2.gbr").read_text()
    assert "%LPC*%" not in text and text.count("G36*") == 1
    _s, image, _p, _ = gerber_copper(out / "six-layer-fab-L2.gbr")
    plane = next(r.polygon for r in board.regions if r.layer == 1)
    assert len(plane.interiors) == 12  # 11 antipads (vias of other nets through GND) and the electrode void
    assert_same_area(image, plane, "GND plane")


def test_clear_holes_follow_their_region(packages):
    # LPC holes come right after their region, before any track or pad
    board, out = packages("six", holes="clear")
    # PWR (L5): the plane, its 19 antipads in clear polarity, then the pads;
    # antipads around 16 GND, THERM, test-coupon and AIN_PRESSURE vias
    lines = (out / "six-layer-fab-L5.gbr").read_text().splitlines()
    assert lines.count("%LPC*%") == lines.count("%LPD*%") == 1
    start, end = lines.index("%LPC*%"), lines.index("%LPD*%")
    assert lines[:start].count("G36*") == 1 and lines[start:end].count("G36*") == 19
    assert not any(ln.endswith("D03*") for ln in lines[:end])
    assert lines[end:].count("G36*") == 0 and sum(ln.endswith("D03*") for ln in lines[end:]) == 20


def test_clear_hole_over_earlier_copper_falls_back_to_cutins(tmp_path):
    # region 0 covers region 1's hole: clearing that hole would also clear
    # region 0, so region 1 is written as cut-ins (hand-built board)
    data = json.loads(FOUR.read_text())
    data["regions"] = [
        {"layer": "BOT", "net": "GND", "outline": [[12.5, -4.5], [13.5, -4.5], [13.5, -3.5], [12.5, -3.5]]},
        data["regions"][1],
    ]
    board = read_board_dict(data, "overlap.json")
    write_package(board, tmp_path, holes="clear")
    text = (tmp_path / "four-layer-mixed-L4.gbr").read_text()
    assert "%LPC*%" not in text and "written as cut-ins" in text
    _s, image, _p, _ = gerber_copper(tmp_path / "four-layer-mixed-L4.gbr")
    # 1 x 1 island + (10 x 6 - 2 x 2) pour + the 3V3 arc's stroke
    want, regions = board_copper(board, 3)
    assert_same_area(image, shapely.union_all(list(want.values()) + list(regions.values())), "BOT")
    assert shapely.union_all(list(regions.values())).area == pytest.approx(1 + 60 - 4, abs=1e-12)


# --------------------------------------------------------------------------- negative planes


def test_negative_planes_invert_to_the_plane_regions(packages):
    # oracle: gerbonara reads the image and the profile; a negative file's
    # copper is the profile minus the image (Gerber spec, TF.FilePolarity)
    board, out = packages("six", holes="clear", negative_planes=True)
    gb = gerbonara()
    profile = gb.GerberFile.open(out / "six-layer-fab-Profile.gbr")
    edges = [shapely.LineString([o.p1, o.p2]) for o in profile.objects]
    outline = shapely.polygonize(edges).geoms[0]
    assert_same_area(outline, board.outline, "profile")
    for layer in (1, 4):
        path = out / f"six-layer-fab-L{layer + 1}.gbr"
        strokes, image, pads, parsed = gerber_copper(path)
        assert parsed.file_attrs[".FilePolarity"] == ("Negative",)
        assert not strokes and not pads and "%TO" not in path.read_text()
        plane = next(r.polygon for r in board.regions if r.layer == layer)
        assert_same_area(shapely.difference(outline, image), plane, path.name)
    job = json.loads((out / "six-layer-fab.gbrjob").read_text())
    polarity = {f["Path"]: f["FilePolarity"] for f in job["FilesAttributes"]}
    assert polarity["six-layer-fab-L2.gbr"] == polarity["six-layer-fab-L5.gbr"] == "Negative"
    assert polarity["six-layer-fab-L1.gbr"] == "Positive"


def test_negative_pulled_back_plane_as_cutin(packages):
    board, out = packages("six", holes="cutin", negative_planes=True)
    text = (out / "six-layer-fab-L5.gbr").read_text()
    assert "%LPC*%" not in text
    _s, image, _p, _ = gerber_copper(out / "six-layer-fab-L5.gbr")
    plane = next(r.polygon for r in board.regions if r.layer == 4)
    assert_same_area(shapely.difference(board.outline, image), plane, "PWR")
    # the margin between board edge and plane edge: 50 x 40 less its four
    # 1 mm chamfers (4 x 0.5) = 1998, minus the plane, 49 x 39 less its
    # four 0.7 mm chamfers (4 x 0.245) = 1910.02
    assert shapely.Polygon(board.outline).area == pytest.approx(1998, abs=1e-9)
    assert shapely.Polygon(plane.exterior).area == pytest.approx(1910.02, abs=1e-9)


def _small_board(**changes) -> dict:
    data = json.loads(FOUR.read_text())
    data.update(changes)
    return data


@pytest.mark.parametrize("change, message", [
    (lambda d: d.pop("outline"), "has no outline"),
    (lambda d: d["tracks"].append({"layer": "GND", "net": "GND", "width": 0.2, "points": [[0, 5], [1, 5]]}),
     "has tracks or arcs"),
    (lambda d: d["regions"].append({"layer": "GND", "net": "GND", "outline": [[0, 0], [1, 0], [1, 1]]}),
     "exactly one region"),
    (lambda d: d["vias"].append({"at": [0, 6], "drill": 0.3, "pad": 0.6, "from": "TOP", "to": "BOT", "net": "3V3"}),
     "of another net passes through the plane"),
    (lambda d: d["vias"].pop(1), "no via of GND passes through the plane"),
])
def test_negative_planes_refused_where_they_cannot_be_inverted(tmp_path, change, message):
    data = _small_board()
    change(data)
    board = read_board_dict(data, "small.json")
    with pytest.raises(FabWriteError, match=message):
        write_package(board, tmp_path / "out", negative_planes=True)
    write_package(board, tmp_path / "positive")  # positive is always possible


# --------------------------------------------------------------------------- net attributes


def test_no_net_attributes_same_copper(packages):
    # oracle: gerbonara; without TO.N every object has no net, the copper is unchanged
    board, out = packages("six", holes="clear", net_attributes=False)
    for layer, path in copper_files(out).items():
        assert "%TO" not in path.read_text() and "%TD*%" not in path.read_text()
        strokes, image, pads, _ = gerber_copper(path)
        assert set(strokes) <= {None} and all(p[3] is None for p in pads)
        want_strokes, want_regions = board_copper(board, layer)
        assert_same_area(image, shapely.union_all(list(want_strokes.values()) + list(want_regions.values())),
                         path.name)


def test_net_attributes_change_only_where_the_net_changes(packages):
    # TO.N before each object whose net differs, %TD*% before copper of no
    # net; hand example, four-layer TOP: CLK_X track, the null stub, the
    # CLK_X arc, the SENSE_X and GND via pads
    _board, out = packages("four", holes="clear")
    text = (out / "four-layer-mixed-L1.gbr").read_text()
    attrs = [ln for ln in text.splitlines() if ln.startswith(("%TO", "%TD*"))]
    assert attrs == ["%TO.N,CLK_X*%", "%TD*%", "%TO.N,CLK_X*%", "%TO.N,SENSE_X*%", "%TO.N,GND*%"]


# --------------------------------------------------------------------------- layer roles


def test_no_roles_leaves_out_only_the_layer_type(packages, tmp_path, capsys):
    # roles=False: TF.FileFunction Copper,L<n>,Top|Inr|Bot without the
    # optional type field (Gerber spec), in the files and in the job file's
    # FilesAttributes, and no role in the writer's comment; nothing else moves
    _board, with_roles = packages("six", holes="clear")
    _board, without = packages("six", holes="clear", roles=False)
    assert sorted(p.name for p in with_roles.iterdir()) == sorted(p.name for p in without.iterdir())
    roles = {1: "Signal", 2: "Plane", 3: "Signal", 4: "Signal", 5: "Plane", 6: "Mixed"}  # the fixture's stackup
    positions = {1: "Top", 6: "Bot"}
    for n, role in roles.items():
        name = f"six-layer-fab-L{n}.gbr"
        a, b = (with_roles / name).read_text().splitlines(), (without / name).read_text().splitlines()
        changed = [(x, y) for x, y in zip(a, b) if x != y]
        function = f"Copper,L{n},{positions.get(n, 'Inr')}"
        assert len(a) == len(b) and changed == [
            (a[1], a[1].rsplit(" (", 1)[0] + "*"),
            (f"%TF.FileFunction,{function},{role}*%", f"%TF.FileFunction,{function}*%"),
        ], name
    ja = json.loads((with_roles / "six-layer-fab.gbrjob").read_text())
    jb = json.loads((without / "six-layer-fab.gbrjob").read_text())
    assert ja["MaterialStackup"] == jb["MaterialStackup"]
    strip = {f["Path"]: re.sub(r",(Plane|Signal|Mixed)$", "", f["FileFunction"]) for f in ja["FilesAttributes"]}
    assert {f["Path"]: f["FileFunction"] for f in jb["FilesAttributes"]} == strip
    # the command line: --no-roles
    assert write_fab.main([str(FOUR), str(tmp_path / "cli"), "--no-roles"]) == 0
    capsys.readouterr()
    assert "%TF.FileFunction,Copper,L3,Inr*%" in (tmp_path / "cli" / "four-layer-mixed-L3.gbr").read_text()


# --------------------------------------------------------------------------- drills


SIX_DRILLS = {  # (from, to) -> TF.FileFunction and hit count, from the fixture's via list
    (1, 6): ("Plated,1,6,PTH", 19),
    (1, 3): ("Plated,1,3,Blind", 5),
    (1, 4): ("Plated,1,4,Blind", 3),
    (3, 4): ("Plated,3,4,Buried", 1),
    (4, 6): ("Plated,4,6,Blind", 1),
}


def test_drill_hits_match_the_vias(packages):
    # oracle: gerbonara's ExcellonFile; span kinds from the Gerber X2 drill
    # file functions (PTH 1..n, Blind reaching one outer layer, Buried none)
    gb = gerbonara()
    board, out = packages("six", holes="clear")
    v = board.vias
    found = {}
    for path in sorted(out.glob("*.drl")):
        a, b = map(int, re.search(r"-PTH-(\d+)-(\d+)\.drl$", path.name).groups())
        text = path.read_text()
        function = re.search(r"^; #@! TF\.FileFunction,(.*)$", text, re.M).group(1)
        assert "METRIC" in text.splitlines()
        drill = gb.ExcellonFile.open(path)
        hits = sorted((o.x, o.y, o.tool.diameter) for o in drill.objects)
        rows = np.flatnonzero((v.first_layer == a - 1) & (v.last_layer == b - 1))
        assert hits == sorted((float(v.x[k]), float(v.y[k]), float(v.drill[k])) for k in rows)
        found[(a, b)] = (function, len(hits))
        kind = function.rsplit(",", 1)[1]
        assert f"; #@! TA.AperFunction,Plated,{kind},ViaDrill" in text
    assert found == SIX_DRILLS
    assert sum(n for _f, n in found.values()) == len(v) == 29


# --------------------------------------------------------------------------- job file


def test_job_file_stackup_equals_the_board(packages):
    board, out = packages("six", holes="clear")
    job = json.loads((out / "six-layer-fab.gbrjob").read_text())
    assert job["Header"]["CreationDate"] == write_fab.CREATION_DATE
    specs = job["GeneralSpecs"]
    # hand values: 50 x 40 mm; 4 x 0.035 + 2 x 0.018 copper + 0.21 + 0.4 +
    # 0.204 + 0.4 + 0.21 dielectric = 0.176 + 1.424 = 1.6 mm
    assert specs["Size"] == {"X": 50.0, "Y": 40.0}
    assert specs["LayerNumber"] == 6 and specs["BoardThickness"] == pytest.approx(1.6, abs=1e-12)
    stack = job["MaterialStackup"]
    assert [e["Type"] for e in stack] == ["SolderMask"] + ["Copper", "Dielectric"] * 5 + ["Copper", "SolderMask"]
    st = board.stackup
    copper = [e for e in stack if e["Type"] == "Copper"]
    assert [(e["Name"], e["Thickness"]) for e in copper] == [(c.name, c.thickness_mm) for c in st.layers]
    dielectrics = [e for e in stack if e["Type"] == "Dielectric"]
    assert [(e["Name"], e["Thickness"], e["DielectricConstant"], e.get("LossTangent")) for e in dielectrics] == \
        [(d.name, d.thickness_mm, d.er, d.loss_tangent) for d in st.dielectrics]
    masks = [stack[0], stack[-1]]
    assert [(m["Name"], m["Thickness"], m["DielectricConstant"], m["LossTangent"]) for m in masks] == \
        [("top-mask", 0.02, 3.8, 0.025), ("bottom-mask", 0.02, 3.8, 0.025)]
    listed = {f["Path"]: f for f in job["FilesAttributes"]}
    assert listed["six-layer-fab-L2.gbr"]["FileFunction"] == "Copper,L2,Inr,Plane"
    assert listed["six-layer-fab-L6.gbr"]["FileFunction"] == "Copper,L6,Bot,Mixed"
    assert listed["six-layer-fab-Profile.gbr"]["FileFunction"] == "Profile,NP"


def test_job_file_lists_every_file_as_it_describes_itself(packages):
    # FilesAttributes: every file of the package but the netlist and the job
    # itself, with the FileFunction and FilePolarity the file itself states
    # (oracle: gerbonara's file attributes)
    gb = gerbonara()
    _board, out = packages("six", holes="clear")
    job = json.loads((out / "six-layer-fab.gbrjob").read_text())
    listed = {f["Path"]: f for f in job["FilesAttributes"]}
    assert set(listed) == {p.name for p in out.iterdir() if p.suffix in (".gbr", ".drl")}
    for name, entry in listed.items():
        if name.endswith(".gbr"):
            attrs = gb.GerberFile.open(out / name).file_attrs
            assert ",".join(attrs[".FileFunction"]) == entry["FileFunction"]
            assert attrs[".FilePolarity"] == (entry["FilePolarity"],)
        else:
            text = (out / name).read_text()
            assert f"; #@! TF.FileFunction,{entry['FileFunction']}" in text.splitlines()


def test_job_file_er_as_string(packages):
    _board, out = packages("six", holes="clear", er_as_string=True)
    stack = json.loads((out / "six-layer-fab.gbrjob").read_text())["MaterialStackup"]
    ers = [e["DielectricConstant"] for e in stack if "DielectricConstant" in e]
    assert ers == ["3,8", "4,1", "4,4", "4,1", "4,4", "4,1", "3,8"]


# --------------------------------------------------------------------------- IPC-D-356A


def test_ipc356_records(packages):
    # oracle: gerbonara's IPC-D-356 parser (UNITS CUST 1 = mm in 0.001 mm
    # steps, NNAME aliases)
    gb = gerbonara()
    from gerbonara.ipc356 import Netlist

    board, out = packages("six", holes="clear", ipc356=True)
    path = out / "six-layer-fab.ipc"
    netlist = Netlist.open(path)
    assert netlist.import_settings.unit == gb.utils.MM
    v = board.vias
    vias = sorted((round(r.x, 6), round(r.y, 6), r.net_name, round(r.hole_dia, 6), r.access_layer)
                  for r in netlist.test_records if r.is_via)
    # access: 0 through, 1 blind from the top, 6 blind from the bottom, 3 the buried via's upper layer
    access = {(0, 5): 0, (0, 2): 1, (0, 3): 1, (2, 3): 3, (3, 5): 6}
    want = sorted((round(float(v.x[k]), 3), round(float(v.y[k]), 3),
                   None if v.net[k] == NO_NET else board.nets[v.net[k]].name, float(v.drill[k]),
                   access[(int(v.first_layer[k]), int(v.last_layer[k]))]) for k in range(len(v)))
    assert vias == want
    # a 327 at the first point of every outer-layer track with a net
    data = json.loads(SIX.read_text())
    surface = {(round(r.x, 3), round(r.y, 3), r.net_name, r.access_layer)
               for r in netlist.test_records if not r.is_via}
    for t in data["tracks"]:
        if t["layer"] in ("TOP", "BOT") and t["net"] is not None:
            x, y = t["points"][0]
            assert (x, y, t["net"], 1 if t["layer"] == "TOP" else 6) in surface
    # every net with copper is named somewhere
    named = {r.net_name for r in netlist.test_records} - {None}
    assert named == {n.name for n in board.nets}
    # names over 14 characters go through NNAME records
    text = path.read_text().splitlines()
    assert "P  NNAME1    SENSE_ELECTRODE_A" in text and "P  NNAME2    THERM_BRIDGE_POS" in text
    assert "P  UNITS CUST 1" in text and text[-1] == "999"


def test_ipc356_fixed_columns_hand_example(packages):
    # the GND via at (36, 20), drill 0.3, pad 0.6, through: columns 1-3
    # "317", 4-17 net, 21-26 "VIA", 27 "-", 33-37 "D0300", 38 "P", 39-41
    # "A00", 42-49 "X+036000", 50-57 "Y+020000", 58-62 "X0600", 63-67
    # "Y0000", 68-71 "R000", 73-74 "S0" (IPC-D-356A fixed format, from memory)
    _board, out = packages("six", holes="clear", ipc356=True)
    lines = (out / "six-layer-fab.ipc").read_text().splitlines()
    want = "317GND" + " " * 11 + "   VIA   -" + " " * 5 + "D0300PA00X+036000Y+020000X0600Y0000R000 S0"
    assert want in lines
    assert len(want) == 74 and want[32:37] == "D0300" and want[41:49] == "X+036000"
    # the blind clock via and a 327 on the electrode line (NNAME alias)
    assert "317CLK_25M" + " " * 10 + "VIA   -     D0200PA01X+030000Y+020000X0450Y0000R000 S0" in lines
    assert "327NNAME1" + " " * 11 + "TP2   -1          A01X+011000Y+030000X0200Y0000R000 S0" in lines


# --------------------------------------------------------------------------- coordinates and files


def test_fixture_coordinates_lie_on_the_nanometre_grid():
    # plain decimals of at most 6 places (mm) round-trip exactly; arc
    # centres come from circle_through and carry float noise only
    for path in (SIX, FOUR):
        assert rounding_mm(load_board(path)) < 1e-12, path.name
    # the demo's three-point arc passes through (17.7071, 3.7071), a rounded
    # point of the circle about (17, 3): its centre is off the grid, and no
    # coordinate moves more than half a nanometre
    assert 1e-12 < rounding_mm(load_board(DEMO)) <= 0.5e-6


def test_rounding_is_reported():
    # a track end at x = 1.0000004 mm moves 0.4 nm on the 1 nm grid
    data = _small_board()
    data["tracks"][0]["points"][1] = [10.0000004, 0]
    assert rounding_mm(read_board_dict(data, "off.json")) == pytest.approx(4e-7, rel=1e-6)


def test_file_names_and_writer_output(tmp_path):
    files = write_package(SIX, tmp_path, ipc356=True)
    assert [p.name for p in files] == [
        *(f"six-layer-fab-L{i}.gbr" for i in range(1, 7)), "six-layer-fab-Profile.gbr",
        "six-layer-fab-PTH-1-3.drl", "six-layer-fab-PTH-1-4.drl", "six-layer-fab-PTH-1-6.drl",
        "six-layer-fab-PTH-3-4.drl", "six-layer-fab-PTH-4-6.drl", "six-layer-fab.ipc", "six-layer-fab.gbrjob",
    ]
    header = (tmp_path / "six-layer-fab-L4.gbr").read_text().splitlines()[:8]
    assert header[2:] == [
        "%TF.GenerationSoftware,couplint-fixture-writer,write_fab,1*%",
        "%TF.CreationDate,2000-01-01T00:00:00+00:00*%",
        "%TF.FileFunction,Copper,L4,Inr,Signal*%",
        "%TF.FilePolarity,Positive*%",
        "%FSLAX46Y46*%",
        "%MOMM*%",
    ]
    assert write_package(DEMO, tmp_path / "demo", name="demo")[0].name == "demo-L1.gbr"


def test_command_line(tmp_path, capsys):
    code = write_fab.main([str(FOUR), str(tmp_path / "out"), "--holes", "cutin", "--ipc356"])
    assert code == 0
    listed = capsys.readouterr().out.split()
    assert len(listed) == 9 and all(Path(p).is_file() for p in listed)
    data = _small_board()
    data.pop("outline")
    (tmp_path / "no_outline.json").write_text(json.dumps(data))
    code = write_fab.main([str(tmp_path / "no_outline.json"), str(tmp_path / "neg"), "--negative-planes"])
    assert code == 2
    assert "negative plane GND: the board has no outline" in capsys.readouterr().err
    with pytest.raises(SystemExit):
        write_fab.main([str(FOUR)])


def test_committed_packages_are_current(tmp_path):
    # fixtures/fab/* are exactly what the writer produces now (regenerate
    # with: python scripts/write_fab.py --fixtures)
    fresh = write_fab.write_fixtures(ROOT, into=tmp_path)
    for folder, files in fresh.items():
        committed = ROOT / "fixtures" / "fab" / folder
        assert sorted(p.name for p in committed.iterdir()) == sorted(p.name for p in files), folder
        for path in files:
            assert (committed / path.name).read_bytes() == path.read_bytes(), f"{folder}/{path.name} is stale"
