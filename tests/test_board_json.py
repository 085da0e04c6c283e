"""The neutral board JSON format: schema, reader, fixtures and demo board."""

from __future__ import annotations

import copy
import fnmatch
import json
import math
import random
from pathlib import Path

import jsonschema
import numpy as np
import pytest
import shapely

from checker.errors import BoardError
from checker.model import ARC_CHORD_TOLERANCE_MM, NO_NET, Board
from checker.readers import board_json, load_board, read_board_dict
from checker.readers.board_json import (
    _fast_schema_check,
    arc_polyline,
    board_schema,
    chord_count,
    circle_through,
    format_path,
)

ROOT = Path(__file__).resolve().parents[1]
FIXTURES = sorted((ROOT / "fixtures").glob("*.json"))
DEMO = ROOT / "checker" / "data" / "demo_board.json"
FOUR = ROOT / "fixtures" / "four_layer_mixed.json"
TWO_MM = ROOT / "fixtures" / "two_layer_parallel.json"
TWO_MIL = ROOT / "fixtures" / "two_layer_parallel_mil.json"
TOL = ARC_CHORD_TOLERANCE_MM


def four() -> dict:
    return json.loads(FOUR.read_text(encoding="utf-8"))


def of_source(board: Board, name: str) -> np.ndarray:
    """Row indices of the pieces that came from source ``name``, in order."""
    k = board.sources.index(name)
    rows = np.flatnonzero(board.pieces.source == k)
    return rows[np.argsort(board.pieces.ordinal[rows])]


# --------------------------------------------------------------------------- every file loads


@pytest.mark.parametrize("path", FIXTURES + [DEMO], ids=lambda p: p.name)
def test_every_fixture_and_the_demo_load(path: Path) -> None:
    assert len(FIXTURES) >= 3
    before = path.read_bytes()
    board = load_board(path)
    assert path.read_bytes() == before
    jsonschema.Draft202012Validator(board_schema()).validate(json.loads(before))
    data = json.loads(before)
    assert board.path == str(path)
    assert board.name == data.get("name", path.stem)
    assert isinstance(data.get("description"), str) and data["description"]
    n_tracks, n_arcs = len(data.get("tracks", [])), len(data.get("arcs", []))
    assert board.sources == tuple([f"tracks[{i}]" for i in range(n_tracks)] + [f"arcs[{i}]" for i in range(n_arcs)])
    p = board.pieces
    assert len(p) >= n_tracks + n_arcs
    assert np.all(p.length > 0)
    assert set(np.unique(p.source)) == set(range(len(board.sources)))
    assert np.all((p.layer >= 0) & (p.layer < len(board.stackup.layers)))
    assert np.all((p.net == NO_NET) | ((p.net >= 0) & (p.net < len(board.nets))))
    assert len(board.regions) == len(data.get("regions", []))
    assert len(board.vias) == len(data.get("vias", []))
    assert all(r.polygon.is_valid and r.polygon.area > 0 for r in board.regions)
    if "outline" in data:
        assert board.outline is not None and board.outline.is_valid
        xmin, ymin, xmax, ymax = board.bounds()
        assert board.outline.bounds == pytest.approx((xmin, ymin, xmax, ymax))
    partner = board.partner_of()
    for i, j in enumerate(partner):
        if j != NO_NET:
            assert partner[j] == i


def test_the_example_in_the_documentation_loads() -> None:
    text = (ROOT / "docs" / "board-format.md").read_text(encoding="utf-8")
    example = text.split("```json\n", 1)[1].split("```", 1)[0]
    board = read_board_dict(json.loads(example), "example.json")
    assert board.name == "example"
    assert board.stackup.names == ("TOP", "GND", "BOT")
    assert board.sources == ("tracks[0]", "tracks[1]", "tracks[2]", "tracks[3]", "arcs[0]")
    assert board.nets[board.net_index()["SENSE_N"]].partner == "SENSE_P"
    assert board.vias.net.tolist() == [NO_NET]


def test_the_shipped_schema_is_a_valid_2020_12_schema() -> None:
    schema = board_schema()
    assert schema["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    jsonschema.Draft202012Validator.check_schema(schema)


# --------------------------------------------------------------------------- units


def scaled(data: dict, mm_per_unit: float, unit: str) -> dict:
    """``data`` (in mm) rewritten in ``unit``: every length divided."""
    d = copy.deepcopy(data)
    s = lambda v: v / mm_per_unit  # noqa: E731
    pts = lambda ps: [[s(x), s(y)] for x, y in ps]  # noqa: E731
    d["units"] = unit
    for entry in d["stackup"]:
        entry["thickness"] = s(entry["thickness"])
    for t in d.get("tracks", []):
        t["width"], t["points"] = s(t["width"]), pts(t["points"])
    for a in d.get("arcs", []):
        a["width"] = s(a["width"])
        if "center" in a:
            a["center"], a["radius"] = pts([a["center"]])[0], s(a["radius"])
        else:
            for k in ("start", "mid", "end"):
                a[k] = pts([a[k]])[0]
    for r in d.get("regions", []):
        r["outline"] = pts(r["outline"])
        r["holes"] = [pts(h) for h in r.get("holes", [])]
    for v in d.get("vias", []):
        v["at"], v["drill"], v["pad"] = pts([v["at"]])[0], s(v["drill"]), s(v["pad"])
    if "outline" in d:
        d["outline"] = pts(d["outline"])
    return d


def assert_same_board(a: Board, b: Board) -> None:
    assert a.stackup.names == b.stackup.names
    for la, lb in zip(a.stackup.layers, b.stackup.layers):
        assert la.role == lb.role and la.thickness_mm == pytest.approx(lb.thickness_mm, rel=1e-12, abs=0)
    for da, db in zip(a.stackup.dielectrics, b.stackup.dielectrics):
        assert (da.er, da.loss_tangent, da.name) == (db.er, db.loss_tangent, db.name)
        assert da.thickness_mm == pytest.approx(db.thickness_mm, rel=1e-12, abs=0)
    assert a.nets == b.nets and a.sources == b.sources
    assert len(a.pieces) == len(b.pieces)
    for col in ("x1", "y1", "x2", "y2", "width"):
        np.testing.assert_allclose(getattr(a.pieces, col), getattr(b.pieces, col), rtol=0, atol=1e-9)
    for col in ("net", "layer", "source", "ordinal"):
        np.testing.assert_array_equal(getattr(a.pieces, col), getattr(b.pieces, col))
    for ra, rb in zip(a.regions, b.regions):
        assert (ra.layer, ra.net, ra.source) == (rb.layer, rb.net, rb.source)
        assert ra.polygon.equals_exact(rb.polygon, 1e-9)
    for col in ("x", "y", "drill", "pad"):
        np.testing.assert_allclose(getattr(a.vias, col), getattr(b.vias, col), rtol=0, atol=1e-9)
    assert (a.outline is None) == (b.outline is None)
    if a.outline is not None:
        assert a.outline.equals_exact(b.outline, 1e-9)


def test_the_mil_fixture_is_the_mm_fixture() -> None:
    mm, mil = load_board(TWO_MM), load_board(TWO_MIL)
    assert_same_board(mm, mil)
    assert mil.pieces.width[0] == pytest.approx(0.254, abs=1e-12)  # 10 mil
    assert mil.stackup.dielectrics[0].thickness_mm == pytest.approx(1.524, abs=1e-12)  # 60 mil


@pytest.mark.parametrize("unit,mm_per_unit", [("mm", 1.0), ("mil", 0.0254), ("um", 0.001), ("in", 25.4)])
def test_every_length_is_converted_in_every_unit(unit: str, mm_per_unit: float) -> None:
    reference = load_board(FOUR)
    board = read_board_dict(scaled(four(), mm_per_unit, unit), str(FOUR))
    assert_same_board(reference, board)


# --------------------------------------------------------------------------- arcs


@pytest.mark.parametrize("radius", [0.05, 0.3, 2.0, 25.0, 400.0])
@pytest.mark.parametrize("sweep_deg", [1.0, 45.0, 90.0, 179.0, 270.0, 360.0])
def test_chord_count_is_the_fewest_within_tolerance(radius: float, sweep_deg: float) -> None:
    sweep = math.radians(sweep_deg)
    n = chord_count(radius, sweep)
    sagitta = lambda k: radius * (1 - math.cos(sweep / (2 * k)))  # noqa: E731
    assert sagitta(n) <= TOL
    formula = math.ceil(sweep / (2 * math.acos(1 - TOL / radius)))
    assert n == max(formula, math.ceil(sweep / (math.pi / 2) - 1e-9))
    if n > 1 and n == formula:
        assert sagitta(n - 1) > TOL  # one chord fewer would be too coarse


def check_on_circle(xy: np.ndarray, cx: float, cy: float, r: float) -> None:
    """Chord end points lie on the circle; every chord is within the
    tolerance of its arc. A chord of a circle is farthest from its arc at the
    chord's midpoint, by the sagitta ``r - |midpoint - centre|``, so checking
    the midpoints checks the whole chord."""
    dist = np.hypot(xy[:, 0] - cx, xy[:, 1] - cy)
    np.testing.assert_allclose(dist, r, rtol=0, atol=1e-9)
    mid = (xy[:-1] + xy[1:]) / 2
    sagitta = r - np.hypot(mid[:, 0] - cx, mid[:, 1] - cy)
    assert np.all(sagitta >= -1e-12)
    assert sagitta.max() <= TOL + 1e-12


def arc_points(board: Board, source: str) -> np.ndarray:
    rows = of_source(board, source)
    p = board.pieces
    np.testing.assert_array_equal(p.ordinal[rows], np.arange(len(rows)))
    # consecutive chords share their end points: one connected polyline
    np.testing.assert_array_equal(p.x2[rows[:-1]], p.x1[rows[1:]])
    np.testing.assert_array_equal(p.y2[rows[:-1]], p.y1[rows[1:]])
    return np.vstack([np.column_stack((p.x1[rows], p.y1[rows])), [[p.x2[rows[-1]], p.y2[rows[-1]]]]])


def test_centre_form_arc_chords() -> None:
    board = load_board(FOUR)  # arcs[0]: centre (10, 2), r 2, 270 -> 360 degrees, counter-clockwise
    xy = arc_points(board, "arcs[0]")
    check_on_circle(xy, 10, 2, 2)
    np.testing.assert_allclose(xy[0], [10 + 2 * math.cos(math.radians(270)), 2 + 2 * math.sin(math.radians(270))],
                               rtol=0, atol=1e-12)
    np.testing.assert_allclose(xy[-1], [12, 2], rtol=0, atol=1e-12)
    angles = np.unwrap(np.arctan2(xy[:, 1] - 2, xy[:, 0] - 10))
    assert np.all(np.diff(angles) > 0)  # counter-clockwise throughout
    assert angles[-1] - angles[0] == pytest.approx(math.pi / 2, abs=1e-12)
    assert len(xy) - 1 == chord_count(2, math.pi / 2)


def test_three_point_arc_keeps_its_end_points_exactly() -> None:
    board = load_board(FOUR)  # arcs[1]: (3, -4) through (0, -1) to (-3, -4): centre (0, -4), r 3
    xy = arc_points(board, "arcs[1]")
    check_on_circle(xy, 0, -4, 3)
    assert tuple(xy[0]) == (3.0, -4.0) and tuple(xy[-1]) == (-3.0, -4.0)
    assert xy[:, 1].max() == pytest.approx(-1, abs=TOL)  # passes through the mid point's side


@pytest.mark.parametrize("clockwise", [False, True])
def test_circle_through_three_points(clockwise: bool) -> None:
    c, r = np.array([1.5, -2.0]), 3.7
    angles = [math.radians(a) for a in (200.0, 290.0, 20.0)]  # counter-clockwise order, 180 degree sweep
    pts = [c + r * np.array([math.cos(a), math.sin(a)]) for a in angles]
    if clockwise:
        pts = pts[::-1]
    cx, cy, rr, a0, sweep = circle_through(*pts)
    assert (cx, cy, rr) == pytest.approx((1.5, -2.0, 3.7), abs=1e-12)
    assert sweep == pytest.approx(-math.pi if clockwise else math.pi, abs=1e-12)
    xy = arc_polyline(cx, cy, rr, a0, sweep)
    check_on_circle(xy, cx, cy, rr)
    mid = pts[1]
    assert np.hypot(*(xy - mid).T).min() <= 0.1  # the path goes past the mid point, not the other way round


def test_full_circle_and_wrapped_angles() -> None:
    data = four()
    data["arcs"] = [
        {"layer": "TOP", "net": None, "width": 0.1, "center": [0, 0], "radius": 1, "start_angle": 0, "end_angle": 360},
        {"layer": "TOP", "net": None, "width": 0.1, "center": [0, 0], "radius": 1, "start_angle": 350, "end_angle": 10},
        {"layer": "TOP", "net": None, "width": 0.1, "center": [0, 0], "radius": 1, "start_angle": -90, "end_angle": 0},
    ]
    board = read_board_dict(data, "circle.json")
    full = arc_points(board, "arcs[0]")
    check_on_circle(full, 0, 0, 1)
    np.testing.assert_allclose(full[0], full[-1], atol=1e-12)
    assert len(full) - 1 == chord_count(1, 2 * math.pi)
    wrapped = arc_points(board, "arcs[1]")  # 350 -> 10 counter-clockwise is 20 degrees, across 0
    angles = np.unwrap(np.arctan2(wrapped[:, 1], wrapped[:, 0]))
    assert angles[-1] - angles[0] == pytest.approx(math.radians(20), abs=1e-12)
    quarter = arc_points(board, "arcs[2]")
    np.testing.assert_allclose([quarter[0], quarter[-1]], [[0, -1], [1, 0]], atol=1e-12)


def test_a_tiny_arc_still_gets_one_chord_per_quarter_turn() -> None:
    xy = arc_polyline(0, 0, 0.001, 0, 2 * math.pi)
    assert len(xy) - 1 == 4
    assert np.all(np.hypot(*np.diff(xy, axis=0).T) > 0)


# --------------------------------------------------------------------------- bookkeeping


def test_sources_and_ordinals() -> None:
    board = load_board(FOUR)
    assert board.sources == ("tracks[0]", "tracks[1]", "tracks[2]", "tracks[3]", "tracks[4]", "arcs[0]", "arcs[1]")
    p = board.pieces
    # tracks[1] is (5,-5) (5,0) (5,0) (5,2): the repeated point gives no piece
    rows = of_source(board, "tracks[1]")
    np.testing.assert_array_equal(p.ordinal[rows], [0, 1])
    np.testing.assert_array_equal(np.column_stack((p.x1, p.y1, p.x2, p.y2))[rows], [[5, -5, 5, 0], [5, 0, 5, 2]])
    np.testing.assert_array_equal(p.width[rows], [0.2, 0.2])
    assert board.stackup.names[p.layer[rows[0]]] == "IN1"
    assert board.nets[p.net[rows[0]]].name == "SENSE_X"
    # unconnected copper
    assert p.net[of_source(board, "tracks[4]")].tolist() == [NO_NET]
    # every source's ordinals run 0, 1, 2 ... and its pieces chain end to start
    for k, _name in enumerate(board.sources):
        rows = np.flatnonzero(p.source == k)
        np.testing.assert_array_equal(p.ordinal[rows], np.arange(len(rows)))
        np.testing.assert_array_equal(p.x2[rows[:-1]], p.x1[rows[1:]])
        np.testing.assert_array_equal(p.y2[rows[:-1]], p.y1[rows[1:]])


def test_the_demo_polyline_pieces_follow_the_file() -> None:
    data = json.loads(DEMO.read_text(encoding="utf-8"))
    board = load_board(DEMO)
    p = board.pieces
    for i, track in enumerate(data["tracks"]):
        rows = of_source(board, f"tracks[{i}]")
        pts = np.array(track["points"], dtype=float)
        np.testing.assert_array_equal(np.column_stack((p.x1[rows], p.y1[rows])), pts[:-1])
        np.testing.assert_array_equal(np.column_stack((p.x2[rows], p.y2[rows])), pts[1:])


def test_regions_vias_and_defaults() -> None:
    board = load_board(FOUR)
    gnd = board.regions[0]
    assert gnd.source == "regions[0]" and board.stackup.names[gnd.layer] == "GND"
    assert board.nets[gnd.net].name == "GND"
    assert len(gnd.polygon.interiors) == 1
    assert gnd.polygon.area == pytest.approx(25 * 16 - 1.2 * 1.2)
    assert gnd.polygon.exterior.is_ccw
    v = board.vias
    assert v.x.tolist() == [5, 17] and v.y.tolist() == [-5, 6]
    assert v.first_layer.tolist() == [0, 0] and v.last_layer.tolist() == [1, 3]
    assert v.drill.tolist() == [0.2, 0.3] and v.pad.tolist() == [0.45, 0.6]
    assert [board.nets[i].name for i in v.net] == ["SENSE_X", "GND"]
    assert board.stackup.dielectrics[2].name is None and board.stackup.dielectrics[2].loss_tangent is None
    assert board.stackup.dielectrics[0].loss_tangent == 0.02
    # name defaults to the file stem; region net and via net may be left out
    data = four()
    del data["name"]
    del data["regions"][1]["net"]
    del data["vias"][0]["net"]
    board = read_board_dict(data, "some/where/my_board.json")
    assert board.name == "my_board" and board.path == "some/where/my_board.json"
    assert board.regions[1].net == NO_NET and board.vias.net[0] == NO_NET


def test_diff_pairs_are_made_symmetric() -> None:
    board = load_board(FOUR)  # only DATA_P names its partner
    by_name = {n.name: n for n in board.nets}
    assert by_name["DATA_P"].partner == "DATA_N" and by_name["DATA_N"].partner == "DATA_P"
    assert by_name["CLK_X"].partner is None
    idx = board.net_index()
    partner = board.partner_of()
    assert partner[idx["DATA_P"]] == idx["DATA_N"] and partner[idx["DATA_N"]] == idx["DATA_P"]
    # both sides declared, agreeing: fine
    data = four()
    data["nets"][3]["pair"] = "DATA_P"
    assert read_board_dict(data, "b.json").nets == board.nets


def test_solder_mask_entries_at_both_ends() -> None:
    """A mask before the first copper and after the last become
    Stackup.mask_top / mask_bottom; without them both are None
    (docs/board-format.md)."""
    d = four()
    plain = read_board_dict(d, "four.json").stackup
    assert plain.mask_top is None and plain.mask_bottom is None
    d["stackup"] = ([{"mask": "top-mask", "thickness": 0.015, "er": 3.8}] + d["stackup"]
                    + [{"mask": None, "thickness": 0.025, "er": 3.5, "loss_tangent": 0.02}])
    st = read_board_dict(d, "mask.json").stackup
    assert st.mask_top is not None and st.mask_bottom is not None
    assert (st.mask_top.thickness_mm, st.mask_top.er, st.mask_top.name, st.mask_top.loss_tangent) == \
        (0.015, 3.8, "top-mask", None)
    assert (st.mask_bottom.thickness_mm, st.mask_bottom.er, st.mask_bottom.name, st.mask_bottom.loss_tangent) == \
        (0.025, 3.5, None, 0.02)
    assert st.layers == plain.layers and st.dielectrics == plain.dielectrics  # masks are not copper or dielectrics


def test_read_board_dict_does_not_modify_its_input() -> None:
    data = four()
    data["units"] = "mil"
    for entry in data["stackup"]:  # 1.4 mil = 35.56 um: copper thickness within its sanity bound
        if "copper" in entry:
            entry["thickness"] = 1.4
    before = copy.deepcopy(data)
    read_board_dict(data, "b.json")
    assert data == before


def test_format_path() -> None:
    assert format_path(("tracks", 12, "width")) == "tracks[12].width"
    assert format_path(("regions", 0, "holes", 1, 2)) == "regions[0].holes[1][2]"
    assert format_path(()) is None
    assert format_path(("odd key",)) == '["odd key"]'


# --------------------------------------------------------------------------- the demo scenario


def copper(board: Board, net: str, layer: str) -> shapely.Geometry:
    p = board.pieces
    rows = np.flatnonzero((p.net == board.net_index()[net]) & (p.layer == board.stackup.index(layer)))
    assert len(rows), (net, layer)
    return shapely.union_all([
        shapely.LineString([(p.x1[i], p.y1[i]), (p.x2[i], p.y2[i])]).buffer(p.width[i] / 2, cap_style="flat")
        for i in rows
    ])


def centreline(board: Board, net: str, layer: str) -> shapely.Geometry:
    p = board.pieces
    rows = np.flatnonzero((p.net == board.net_index()[net]) & (p.layer == board.stackup.index(layer)))
    return shapely.union_all([shapely.LineString([(p.x1[i], p.y1[i]), (p.x2[i], p.y2[i])]) for i in rows])


def run_length(board: Board, a: str, b: str, layer_a: str, layer_b: str, gap: float) -> float:
    """Length along net a's centreline where a's copper is within ``gap``
    (edge to edge, in plan) of net b's copper."""
    p = board.pieces
    half = float(p.width[p.net == board.net_index()[a]].max()) / 2
    return centreline(board, a, layer_a).intersection(copper(board, b, layer_b).buffer(gap + half)).length


def test_demo_board_scenario_is_as_documented() -> None:
    board = load_board(DEMO)
    st = board.stackup
    assert st.names == ("TOP", "IN1", "GND", "BOT")
    assert [layer.role for layer in st.layers] == ["signal", "signal", "plane", "mixed"]
    assert [layer.thickness_mm for layer in st.layers] == [0.035] * 4
    assert [(d.thickness_mm, d.er) for d in st.dielectrics] == [(0.2, 4.2), (1.0, 4.5), (0.2, 4.2)]
    assert board.outline is not None and board.outline.bounds == (0, 0, 40, 30)
    # the shipped rule classes must find these nets
    classes = {"clock": ["*CLK*", "*SCK*"], "switch": ["SW_*"], "analog": ["*SENSE*", "*VREF*", "AIN*", "THERM*"]}
    kind = lambda n: {k for k, pats in classes.items() if any(fnmatch.fnmatchcase(n, p) for p in pats)}  # noqa: E731
    assert kind("CLK_ADC") == kind("SPI_SCK") == {"clock"} and kind("SW_BUCK") == {"switch"}
    for victim in ("SENSE_P", "SENSE_N", "VREF_2V5", "THERM_IN", "AIN3"):
        assert kind(victim) == {"analog"}
    for other in ("GND", "3V3", "I2C_SDA"):
        assert kind(other) == set()
        assert other in board.net_index()

    # 1. CLK_ADC on TOP directly over SENSE_P on IN1 for 12 mm, x 4 -> 16
    # (the centreline over SENSE_P's copper: 12 mm straight, plus 0.075 mm of
    # the vertical lead-in and ~0.1 mm of the 45 degree lead-out)
    over = centreline(board, "CLK_ADC", "TOP").intersection(copper(board, "SENSE_P", "IN1"))
    assert over.length == pytest.approx(12 + 0.075 + 0.075 * math.sqrt(2), abs=1e-6)
    # 2. SW_BUCK crosses VREF_2V5 once, at 90 degrees: overlap = 0.5 x 0.2
    cross = copper(board, "SW_BUCK", "TOP").intersection(copper(board, "VREF_2V5", "IN1"))
    assert cross.area == pytest.approx(0.5 * 0.2, abs=1e-9)
    # 3. SPI_SCK beside THERM_IN on TOP, 0.15 mm gap, ~6 mm
    assert copper(board, "SPI_SCK", "TOP").distance(copper(board, "THERM_IN", "TOP")) == pytest.approx(0.15, abs=1e-6)
    assert run_length(board, "SPI_SCK", "THERM_IN", "TOP", "TOP", 0.16) == pytest.approx(6, abs=0.3)
    # 4. SPI_SCK beside AIN3 on IN1, 0.35 mm gap (0.5 mm centres = 3.33 W), ~25 mm with a 45 degree jog
    assert copper(board, "SPI_SCK", "IN1").distance(copper(board, "AIN3", "IN1")) == pytest.approx(0.35, abs=1e-4)
    assert 20 < run_length(board, "SPI_SCK", "AIN3", "IN1", "IN1", 0.36) < 27
    ain3 = of_source(board, "tracks[10]")
    directions = {round(math.degrees(math.atan2(board.pieces.y2[i] - board.pieces.y1[i],
                                                board.pieces.x2[i] - board.pieces.x1[i]))) for i in ain3}
    assert directions == {0, 45}
    # 5. the sensor pair, 0.15 mm apart, declared as a pair
    assert copper(board, "SENSE_P", "IN1").distance(copper(board, "SENSE_N", "IN1")) == pytest.approx(0.15, abs=1e-4)
    idx = board.net_index()
    assert board.partner_of()[idx["SENSE_P"]] == idx["SENSE_N"]
    # 6. arcs, a holed pour on BOT, the GND plane, vias
    assert any(s.startswith("arcs[") for s in board.sources)
    layers = {(st.names[r.layer], board.nets[r.net].name, len(r.polygon.interiors)) for r in board.regions}
    assert ("BOT", "GND", 1) in layers and any(la == "GND" and n == "GND" for la, n, _ in layers)
    assert len(board.vias) >= 3
    # 7. VREF_2V5 beside CLK_ADC one layer down: no overlap, 0.15 mm plan gap, 4 mm
    clk, vref = copper(board, "CLK_ADC", "TOP"), copper(board, "VREF_2V5", "IN1")
    assert clk.intersection(vref).area == 0
    assert clk.distance(vref) == pytest.approx(0.15, abs=1e-6)
    assert run_length(board, "VREF_2V5", "CLK_ADC", "IN1", "TOP", 0.16) == pytest.approx(4, abs=0.1)
    # 8. a 2 x 4 mm void in the GND plane under IN1: SPI_SCK's centreline on IN1 (y 10) crosses it at
    # 90 degrees, 13 - 11 = 2 mm over no GND copper; TOP has no GND copper, so GND is IN1's nearest
    (plane,) = [r.polygon for r in board.regions if st.names[r.layer] == "GND"]
    assert shapely.Polygon([(11, 8), (13, 8), (13, 12), (11, 12)]).within(
        shapely.Polygon(plane.exterior).difference(plane))
    assert centreline(board, "SPI_SCK", "IN1").difference(plane).length == pytest.approx(2.0, abs=1e-9)
    # no accidental shorts: different nets on one layer never touch
    p = board.pieces
    for layer in range(len(st.layers)):
        nets = sorted({int(n) for n in p.net[p.layer == layer]})
        shapes = {n: copper(board, board.nets[n].name, st.names[layer]) for n in nets}
        for a in nets:
            for b in nets:
                if a < b:
                    assert shapes[a].distance(shapes[b]) >= 0.149, (st.names[layer], a, b)


# --------------------------------------------------------------------------- bad input


def drop(path: list):
    def mutate(d: dict) -> None:
        target = d
        for k in path[:-1]:
            target = target[k]
        del target[path[-1]]
    return mutate


def put(path: list, value):
    def mutate(d: dict) -> None:
        target = d
        for k in path[:-1]:
            target = target[k]
        target[path[-1]] = copy.deepcopy(value)
    return mutate


def both(*mutations):
    def mutate(d: dict) -> None:
        for m in mutations:
            m(d)
    return mutate


STACK2 = [{"copper": "A", "role": "signal", "thickness": 0.035},
          {"dielectric": "d", "thickness": 0.2, "er": 4},
          {"copper": "B", "role": "signal", "thickness": 0.035}]

MASK = {"mask": "top-mask", "thickness": 0.015, "er": 3.8}

# (id, mutation of four_layer_mixed.json, JSON path in the message (None: the file), words in the message)
BAD = [
    ("format", put(["format"], "something-else"), "format", "couplint-board"),
    ("no-format", drop(["format"]), "format", "couplint board file"),
    ("version", put(["version"], 2), "version", "version 1"),
    ("unknown-top-key", put(["trakcs"], []), None, "unknown key 'trakcs'"),
    ("missing-stackup", drop(["stackup"]), None, "missing required key 'stackup'"),
    ("units", put(["units"], "cm"), "units", '"mil"'),
    ("width-zero", put(["tracks", 2, "width"], 0), "tracks[2].width", "must be > 0"),
    ("width-negative", put(["tracks", 2, "width"], -0.1), "tracks[2].width", "must be > 0"),
    ("width-string", put(["tracks", 2, "width"], "0.2"), "tracks[2].width", "must be a number"),
    ("width-bool", put(["tracks", 2, "width"], True), "tracks[2].width", "must be a number"),
    ("width-nan", put(["tracks", 2, "width"], float("nan")), "tracks[2].width", "finite"),
    ("coord-infinity", put(["tracks", 0, "points", 1, 0], float("inf")), "tracks[0].points[1][0]", "finite"),
    ("description-nan", put(["description"], float("-inf")), "description", "finite"),
    ("missing-width", drop(["tracks", 3, "width"]), "tracks[3]", "missing required key 'width'"),
    ("typo-key", put(["tracks", 3, "widht"], 1), "tracks[3]", "unknown key 'widht'"),
    ("one-point", put(["tracks", 0, "points"], [[0, 0]]), "tracks[0].points", "at least 2 points"),
    ("no-points", put(["tracks", 0, "points"], []), "tracks[0].points", "at least 2 points"),
    ("bad-point", put(["tracks", 0, "points", 1], [1, 2, 3]), "tracks[0].points[1]", "[x, y]"),
    ("point-string", put(["tracks", 0, "points", 1, 1], "3"), "tracks[0].points[1][1]", "must be a number"),
    ("coincident-points", put(["tracks", 0, "points"], [[1, 1], [1, 1], [1, 1]]), "tracks[0].points", "no length"),
    ("far-coordinate", put(["tracks", 1, "points", 2], [5, 10001]), "tracks[1].points[2]", "10 m"),
    ("far-coordinate-in-inches", both(put(["units"], "in"), put(["stackup", 3, "thickness"], 0.04),
                                      put(["tracks", 4, "points", 0], [1e307, 0])),
     "tracks[4].points[0]", "1e+307 in is more than 10 m"),
    ("far-region-corner", put(["regions", 0, "holes", 0, 2], [0, -1e5]), "regions[0].holes[0][2]", "10 m"),
    ("huge-width", put(["tracks", 2, "width"], 2e4), "tracks[2].width", "more than 10 m"),
    ("huge-arc-width", put(["arcs", 1, "width"], 2e4), "arcs[1].width", "more than 10 m"),
    ("huge-thickness", put(["stackup", 3, "thickness"], 1e300), "stackup[3].thickness", "more than 10 m"),
    ("huge-pad", put(["vias", 0, "pad"], 1e9), "vias[0].pad", "more than 10 m"),
    # physical sanity bounds (checker/bounds.py): refused with the key before any solver sees them
    ("huge-int-width", put(["tracks", 2, "width"], 10 ** 400), "tracks[2].width", "number far too large"),
    ("huge-int-er", put(["stackup", 1, "er"], 10 ** 400), "stackup[1].er", "number far too large"),
    ("huge-int-coordinate", put(["tracks", 0, "points", 0], [10 ** 400, 0]), "tracks[0].points[0][0]",
     "number far too large"),
    ("sub-micron-dielectric", put(["stackup", 1, "thickness"], 1e-16), "stackup[1].thickness",
     "below the sanity bound (1 um to 25 mm)"),
    ("thin-copper", put(["stackup", 0, "thickness"], 1e-4), "stackup[0].thickness",
     "0.1 um is below the sanity bound (1 um to 1 mm)"),
    ("er-absurd", put(["stackup", 1, "er"], 1e6), "stackup[1].er", "above the sanity bound (1 to 100)"),
    ("loss-tangent-absurd", put(["stackup", 1, "loss_tangent"], 3), "stackup[1].loss_tangent",
     "above the sanity bound (0 to 1)"),
    ("nanometre-width", put(["tracks", 2, "width"], 1e-7), "tracks[2].width", "below the sanity bound"),
    ("nanometre-arc-width", put(["arcs", 1, "width"], 1e-7), "arcs[1].width", "below the sanity bound"),
    ("nanometre-drill", both(put(["vias", 0, "drill"], 1e-9)), "vias[0].drill", "below the sanity bound"),
    ("unknown-layer", put(["tracks", 1, "layer"], "IN2"), "tracks[1].layer", "unknown layer 'IN2'"),
    ("dielectric-as-layer", put(["tracks", 1, "layer"], "core"), "tracks[1].layer", "dielectric"),
    ("unknown-net", put(["tracks", 1, "net"], "NOPE"), "tracks[1].net", "unknown net 'NOPE'"),
    ("net-number", put(["tracks", 1, "net"], 3), "tracks[1].net", "net name"),
    ("missing-net", drop(["tracks", 1, "net"]), "tracks[1]", "missing required key 'net'"),
    ("duplicate-layer", put(["stackup", 4, "copper"], "IN1"), "stackup[4].copper", "already used by stackup[2]"),
    ("duplicate-net", put(["nets", 5, "name"], "GND"), "nets[5].name", "already declared at nets[4]"),
    ("empty-net-name", put(["nets", 5, "name"], ""), "nets[5].name", "must not be empty"),
    ("two-copper-in-a-row", put(["stackup", 1], {"copper": "X", "role": "signal", "thickness": 0.035}),
     "stackup[1]", "expected a dielectric"),
    ("starts-with-dielectric", put(["stackup"], STACK2[1:]), "stackup[0]", "starts with copper"),
    ("ends-with-dielectric", put(["stackup"], STACK2 + [STACK2[1]]), "stackup[3]", "end with a copper layer"),
    ("stackup-entry-neither", put(["stackup", 2], {"name": "IN1"}), "stackup[2]", '"copper" key'),
    ("stackup-empty", put(["stackup"], []), "stackup", "at least one copper layer"),
    ("role", put(["stackup", 4, "role"], "ground"), "stackup[4].role", '"plane"'),
    ("thickness-zero", put(["stackup", 1, "thickness"], 0), "stackup[1].thickness", "must be > 0"),
    ("er-below-1", put(["stackup", 3, "er"], 0.9), "stackup[3].er", "must be >= 1"),
    ("loss-tangent-negative", put(["stackup", 1, "loss_tangent"], -0.01), "stackup[1].loss_tangent", ">= 0"),
    # solder mask entries (docs/board-format.md, "Solder mask")
    ("mask-in-the-middle", put(["stackup"], STACK2[:2] + [MASK] + STACK2[2:]), "stackup[2]", "only be the first"),
    ("mask-before-dielectric", put(["stackup"], [MASK] + STACK2[1:]), "stackup[1]",
     "top solder mask is followed by copper"),
    ("mask-after-dielectric", put(["stackup"], STACK2[:2] + [MASK]), "stackup[1]", "before the bottom solder mask"),
    ("mask-only", put(["stackup"], [MASK]), "stackup", "at least one copper layer besides"),
    ("mask-twice-on-top", put(["stackup"], [MASK, MASK] + STACK2), "stackup[1]", "only be the first"),
    ("mask-thickness-zero", put(["stackup"], [dict(MASK, thickness=0)] + STACK2), "stackup[0].thickness",
     "must be > 0"),
    ("mask-er-below-1", put(["stackup"], STACK2 + [dict(MASK, er=0.5)]), "stackup[3].er", "must be >= 1"),
    ("mask-missing-er", put(["stackup"], [{"mask": "m", "thickness": 0.02}] + STACK2), "stackup[0]",
     "missing required key 'er'"),
    ("mask-unknown-key", put(["stackup"], [dict(MASK, colour="green")] + STACK2), "stackup[0]", "unknown key 'colour'"),
    ("mask-as-layer", both(put(["stackup"], [MASK] + four()["stackup"]), put(["tracks", 1, "layer"], "top-mask")),
     "tracks[1].layer", "solder mask, not a copper layer"),
    ("pair-unknown", put(["nets", 3, "pair"], "DATA_Q"), "nets[3].pair", "unknown net 'DATA_Q'"),
    ("pair-self", put(["nets", 3, "pair"], "DATA_N"), "nets[3].pair", "own differential partner"),
    ("pair-conflict", put(["nets", 3, "pair"], "CLK_X"), "nets[3].pair", "'DATA_N' is already paired with 'DATA_P'"),
    ("pair-taken", put(["nets", 0, "pair"], "DATA_N"), "nets[2].pair", "'DATA_N' is already paired with 'CLK_X'"),
    ("arc-radius-zero", put(["arcs", 0, "radius"], 0), "arcs[0].radius", "must be > 0"),
    ("arc-radius-negative", put(["arcs", 0, "radius"], -2), "arcs[0].radius", "must be > 0"),
    ("arc-width-zero", put(["arcs", 1, "width"], 0), "arcs[1].width", "must be > 0"),
    ("arc-no-sweep", put(["arcs", 0, "end_angle"], 270), "arcs[0].end_angle", "sweeps nothing"),
    ("arc-collinear", put(["arcs", 1, "mid"], [0, -4]), "arcs[1]", "collinear"),
    ("arc-coincident", put(["arcs", 1, "end"], [3, -4]), "arcs[1]", "collinear or coincide"),
    ("arc-nearly-collinear", put(["arcs", 1, "mid"], [0, -4.0000001]), "arcs[1]", "almost collinear"),
    ("arc-mixed-forms", put(["arcs", 0, "mid"], [1, 1]), "arcs[0]", "unknown key 'mid'"),
    ("arc-no-form", put(["arcs", 0], {"layer": "TOP", "net": None, "width": 0.1}), "arcs[0]", "either"),
    ("arc-far", put(["arcs", 0, "radius"], 20000), "arcs[0].radius", "10 m"),
    ("arc-unknown-layer", put(["arcs", 1, "layer"], "L9"), "arcs[1].layer", "unknown layer"),
    ("self-intersecting-region", put(["regions", 1, "outline"], [[8, -7], [18, -1], [18, -7], [8, -1]]),
     "regions[1].outline", "Self-intersection"),
    ("degenerate-region", put(["regions", 1, "outline"], [[8, -7], [10, -5], [12, -3]]),
     "regions[1].outline", "degenerate"),
    ("two-corner-region", put(["regions", 1, "outline"], [[8, -7], [10, -5], [8, -7]]),
     "regions[1].outline", "fewer than 3 distinct corners"),
    ("region-two-points", put(["regions", 1, "outline"], [[8, -7], [10, -5]]), "regions[1].outline",
     "at least 3 corners"),
    ("hole-outside", put(["regions", 1, "holes", 0], [[17, -5], [19, -5], [19, -3], [17, -3]]),
     "regions[1].holes[0]", "outside"),
    ("self-intersecting-hole", put(["regions", 1, "holes", 0], [[12, -5], [14, -3], [14, -5], [12, -3]]),
     "regions[1].holes[0]", "Self-intersection"),
    ("overlapping-holes", put(["regions", 1, "holes"], [[[9, -6], [12, -6], [12, -3], [9, -3]],
                                                        [[11, -5], [14, -5], [14, -2], [11, -2]]]),
     "regions[1].holes", "invalid polygon"),
    ("region-unknown-net", put(["regions", 0, "net"], "AGND"), "regions[0].net", "unknown net 'AGND'"),
    ("region-unknown-layer", put(["regions", 0, "layer"], "INNER"), "regions[0].layer", "unknown layer"),
    ("outline-invalid", put(["outline"], [[0, 0], [1, 1], [1, 0], [0, 1]]), "outline", "Self-intersection"),
    ("outline-not-points", put(["outline"], [1, 2, 3]), "outline[0]", "[x, y]"),
    ("empty-board", both(put(["tracks"], []), drop(["arcs"]), drop(["regions"])), None, "no copper"),
    ("via-unknown-layer", put(["vias", 1, "from"], "TOPP"), "vias[1].from", "unknown layer 'TOPP'"),
    ("via-wrong-order", both(put(["vias", 1, "from"], "BOT"), put(["vias", 1, "to"], "TOP")), "vias[1]", "lies below"),
    ("via-one-layer", put(["vias", 1, "to"], "TOP"), "vias[1].to", "at least two layers"),
    ("via-pad-small", put(["vias", 1, "pad"], 0.3), "vias[1].pad", "larger than the drill"),
    ("via-unknown-net", put(["vias", 0, "net"], "VCC"), "vias[0].net", "unknown net 'VCC'"),
    ("via-far", put(["vias", 0, "at"], [-20000, 0]), "vias[0].at", "10 m"),
    ("via-missing-drill", drop(["vias", 0, "drill"]), "vias[0]", "missing required key 'drill'"),
    ("nets-not-array", put(["nets"], {"CLK_X": {}}), "nets", "must be an array"),
]


def load_broken(tmp_path: Path, text: str | bytes, name: str = "board.json") -> BoardError:
    path = tmp_path / name
    if isinstance(text, str):
        text = text.encode("utf-8")
    path.write_bytes(text)
    with pytest.raises(BoardError) as info:
        load_board(path)
    assert path.read_bytes() == text  # the input is never touched
    error = info.value
    assert error.file == str(path)
    assert "\n" not in str(error)
    return error


@pytest.mark.parametrize("case,mutate,place,words", BAD, ids=[c[0] for c in BAD])
def test_bad_input_gives_one_clear_message(tmp_path: Path, case: str, mutate, place: str | None, words: str) -> None:
    data = four()
    mutate(data)
    error = load_broken(tmp_path, json.dumps(data, indent=1))
    assert error.place == place, str(error)
    prefix = f"{tmp_path / 'board.json'}: " + (f"{place}: " if place else "")
    assert str(error).startswith(prefix), str(error)
    assert words in error.message, str(error)
    # the same data in memory gives the same message
    with pytest.raises(BoardError) as again:
        read_board_dict(data, str(tmp_path / "board.json"))
    assert str(again.value) == str(error)


def test_a_good_file_is_accepted_by_the_same_path(tmp_path: Path) -> None:
    # guards the table above: the unmutated fixture loads from tmp_path
    path = tmp_path / "board.json"
    path.write_text(json.dumps(four()))
    assert len(load_board(path).pieces) == len(load_board(FOUR).pieces)


FILE_CASES = [
    ("syntax", '{"format": "couplint-board",\n  "version": 1,,\n}', "line 2, column 16", "invalid JSON"),
    ("truncated", '{"format": "couplint-board", "version": 1, "stackup": [', "line 1, column 56", "invalid JSON"),
    ("empty", "", None, "empty"),
    ("blank", "  \n ", None, "empty"),
    ("array", "[1, 2]", None, "JSON object"),
    ("string", '"board"', None, "JSON object"),
    ("nan-literal", '{"format": "couplint-board", "version": 1, "stackup": [{"copper": "A", "role": "signal", '
                    '"thickness": NaN}], "nets": []}', "stackup[0].thickness", "finite number, got NaN"),
    ("infinity-literal", '{"format": "couplint-board", "version": 1, "stackup": [], "nets": [], '
                         '"outline": [[0, 0], [1, -Infinity], [1, 1]]}', "outline[1][1]", "got -Infinity"),
    ("overflow", '{"format": "couplint-board", "version": 1, "stackup": [], "nets": [], "tracks": '
                 '[{"layer": "A", "net": null, "width": 1e999, "points": []}]}', "tracks[0].width", "finite"),
    ("duplicate-key", '{"format": "couplint-board", "version": 1, "stackup": [{"copper": "A", "copper": "B", '
                      '"role": "signal", "thickness": 1}], "nets": []}', "stackup[0]",
     "'copper' appears more than once"),
    ("deep", "[" * 50000 + "]" * 50000, None, "invalid JSON"),
    ("deep-valid-ish", '{"format": "couplint-board", "version": 1, "stackup": ' + "[" * 500 + "]" * 500 + "}",
     "stackup[0][0][0][0][0][0][0][0][0][0][0][0][0][0][0][0]", "nested"),
]


@pytest.mark.parametrize("case,text,place,words", FILE_CASES, ids=[c[0] for c in FILE_CASES])
def test_bad_files(tmp_path: Path, case: str, text: str, place: str | None, words: str) -> None:
    error = load_broken(tmp_path, text)
    assert error.place == place, str(error)
    assert words in error.message, str(error)


def test_not_utf8(tmp_path: Path) -> None:
    error = load_broken(tmp_path, b'{"name": "\xff"}')
    assert error.place is None and "UTF-8" in error.message


def test_missing_file_and_folder(tmp_path: Path) -> None:
    with pytest.raises(BoardError) as info:
        load_board(tmp_path / "nowhere.json")
    assert str(info.value) == f"{tmp_path / 'nowhere.json'}: no such file"
    with pytest.raises(BoardError) as info:
        load_board(tmp_path)
    assert info.value.file == str(tmp_path) and "folder" in info.value.message


def test_a_byte_order_mark_is_accepted(tmp_path: Path) -> None:
    path = tmp_path / "bom.json"
    path.write_bytes(b"\xef\xbb\xbf" + FOUR.read_bytes())
    assert load_board(path).name == "four-layer-mixed"


# --------------------------------------------------------------------------- the quick schema check


def mutations(data: dict, rng: random.Random) -> dict:
    """``data`` with one random change somewhere (kinds of change a broken
    exporter makes)."""
    d = copy.deepcopy(data)
    spots: list[tuple[object, object]] = []

    def walk(node: object) -> None:
        if isinstance(node, dict):
            for k, v in node.items():
                spots.append((node, k))
                walk(v)
        elif isinstance(node, list):
            for i, v in enumerate(node):
                spots.append((node, i))
                walk(v)

    walk(d)
    parent, key = rng.choice(spots)
    pool = [None, True, False, 0, -1, 1, 0.5, -0.0, 1e6, "", "x", "TOP", "GND", "signal", "couplint-board",
            [], [0], [0, 0], [1, 2, 3], [[0, 0], [1, 0]], [[0, 0], [1, 0], [0, 1]], {}, {"copper": "Z"},
            {"dielectric": None, "thickness": 1, "er": 2}, {"center": [0, 0]}, {"start": [0, 0]}]
    action = rng.randrange(4)
    if action == 0:
        parent[key] = copy.deepcopy(rng.choice(pool))  # type: ignore[index]
    elif action == 1 and isinstance(parent, dict):
        del parent[key]
    elif action == 1 and isinstance(parent, list):
        del parent[key]  # type: ignore[arg-type]
    elif action == 2 and isinstance(parent, dict):
        parent[rng.choice(["zz", "pair", "net", "holes", "mid", "radius", "loss_tangent", "name"])] = rng.choice(pool)
    else:
        parent[key] = [parent[key]] if rng.random() < 0.5 else {"v": parent[key]}  # type: ignore[index]
    return d


def test_the_quick_check_agrees_with_jsonschema() -> None:
    validator = jsonschema.Draft202012Validator(board_schema())
    quick = _fast_schema_check()
    rng = random.Random(20240611)
    outcomes = {True: 0, False: 0}
    for path in FIXTURES + [DEMO]:
        data = json.loads(path.read_text(encoding="utf-8"))
        assert quick(data) and validator.is_valid(data)
        for _ in range(200):
            d = mutations(data, rng)
            expected = validator.is_valid(d)
            assert quick(d) == expected, json.dumps(d)[:400]
            outcomes[expected] += 1
    assert outcomes[True] > 50 and outcomes[False] > 500  # both sides were exercised




# --------------------------------------------------------------------------- the column-wise bulk check


def test_bulk_check_accepts_exactly_what_the_schema_accepts() -> None:
    """checker.readers.board_json._bulk_valid checks tracks and vias a column
    at a time for speed; the oracle is the jsonschema library validating the
    shipped schema on the same objects. Every mutation below must get the
    same yes/no from both."""
    import random

    from checker.readers import board_json

    validator = jsonschema.Draft202012Validator(board_schema())
    base = four()
    track, via = base["tracks"][0], base["vias"][0]
    values = [None, True, False, 0, -1, 0.5, 2, 1e-9, "", "x", "L1", [], [1], [1, 2], [1, 2, 3], ["1", 2],
              [True, 1], [[1, 2]], [[1, 2], [3, 4]], [[1, 2], [3]], [[1, 2], [3, True]], {}, {"a": 1}]
    rng = random.Random(5)
    cases = []
    for template, kind in ((track, "tracks"), (via, "vias")):
        keys = list(template) + ["net", "extra", "points", "at"]
        for _ in range(1500):
            obj = copy.deepcopy(template)
            for _ in range(rng.randint(1, 3)):
                key = rng.choice(keys)
                if rng.random() < 0.2:
                    obj.pop(key, None)
                else:
                    obj[key] = copy.deepcopy(rng.choice(values))
            cases.append((kind, obj))
        cases.append((kind, copy.deepcopy(template)))
    agree = valid = 0
    for kind, obj in cases:
        board = copy.deepcopy(base)
        board[kind] = [copy.deepcopy(x) for x in base[kind]] + [obj]
        expected = validator.is_valid(board)
        got = board_json._bulk_valid(kind, board[kind]) and board_json._valid_fast(board)
        assert got == expected, (kind, obj)
        agree += 1
        valid += expected
    assert agree == len(cases) and 10 < valid < len(cases) - 100  # both answers occur often


# --------------------------------------------------------------------------- the quick parse (msgspec)


def careful(path: Path) -> Board:
    """The board as the careful path reads it (Python's json with every hook)."""
    text = path.read_bytes().decode("utf-8-sig")
    data, suspect = board_json._parse_json(text, str(path))
    return board_json._read(data, str(path), suspect=suspect)


@pytest.mark.parametrize("path", FIXTURES + [DEMO], ids=lambda p: p.name)
def test_the_quick_parse_reads_what_the_careful_path_reads(path: Path) -> None:
    quick = board_json._read_fast(path.read_bytes(), str(path))
    assert quick is not None, "a well-formed fixture should take the quick path"
    slow = careful(path)
    assert_same_board(quick, slow)
    for col in ("x1", "y1", "x2", "y2", "width"):  # bit for bit, not only within 1e-9
        np.testing.assert_array_equal(getattr(quick.pieces, col), getattr(slow.pieces, col))


def test_msgspec_reads_every_number_as_python_does() -> None:
    # the quick path's numbers must be Python's own: correctly rounded IEEE doubles of the decimal text
    rng = np.random.default_rng(11)
    texts = [f"{float(m):.{int(d)}f}" for m, d in zip(rng.normal(0, 300, 20000), rng.integers(0, 17, 20000))]
    texts += [repr(float(v)) for v in rng.random(20000) * 10.0 ** rng.integers(-8, 8, 20000)]
    texts += ["0.1", "-0.0", "1e-7", "2.2250738585072014e-308", "179769313486231570e290", "0.30000000000000004"]
    doc = "[" + ",".join(texts) + "]"
    import msgspec

    assert [(type(v), v) for v in msgspec.json.decode(doc)] == [(type(v), v) for v in json.loads(doc)]
    as_float = msgspec.json.decode(doc, type=list[float])  # as the typed tracks read widths and points
    assert [np.float64(v).tobytes() for v in as_float] == [np.float64(float(v)).tobytes() for v in json.loads(doc)]


def compact_board(tracks: int = 200) -> dict:
    data = four()
    first = next(t for t in data["tracks"])
    data["tracks"] = data["tracks"] + [dict(first, points=[[i * 0.5, 1.0], [i * 0.5, 2.0]]) for i in range(tracks)]
    return data


@pytest.mark.parametrize("spelling", ["same value", "other value", "escaped name"])
def test_a_repeated_key_in_a_bulk_track_is_found(tmp_path: Path, spelling: str) -> None:
    data = compact_board()
    text = json.dumps(data, separators=(",", ":"))
    k = len(data["tracks"]) - 7
    head = json.dumps(data["tracks"][k], separators=(",", ":"))
    width = data["tracks"][k]["width"]
    again = {"same value": f',"width":{width}', "other value": ',"width":0.123',
             "escaped name": f',"wid\\u0074h":{width}'}[spelling]
    assert text.count(head) >= 1
    at = text.index(head, text.index('"tracks"')) if text.count(head) == 1 else None
    if at is None:  # the track's text repeats (a copy of the first): make this one unique
        data["tracks"][k]["points"] = [[-3.25, 7.5], [-3.25, 9.5]]
        text = json.dumps(data, separators=(",", ":"))
        head = json.dumps(data["tracks"][k], separators=(",", ":"))
        at = text.index(head)
    text = text[:at + len(head) - 1] + again + text[at + len(head) - 1:]
    error = load_broken(tmp_path, text)
    assert error.place == f"tracks[{k}]", str(error)
    assert "'width' appears more than once" in error.message


@pytest.mark.parametrize("style", ["escaped quote in a net name", "space before a colon", "indented"])
def test_files_the_quick_parse_passes_on_still_read(tmp_path: Path, style: str) -> None:
    data = compact_board()
    if style == "escaped quote in a net name":
        old = data["nets"][0]["name"]
        new = 'SENSE "A"'
        data["nets"][0]["name"] = new
        for item in data["tracks"] + data.get("arcs", []) + data.get("regions", []) + data.get("vias", []):
            if item.get("net") == old:
                item["net"] = new
        text = json.dumps(data)
    elif style == "space before a colon":
        text = json.dumps(data, separators=(", ", " : "))
    else:
        text = json.dumps(data, indent=2)
    path = tmp_path / "b.json"
    path.write_text(text)
    quick = board_json._read_fast(path.read_bytes(), str(path))
    assert (quick is None) == (style != "indented")  # the indented file is quick, the others careful
    compact = tmp_path / "c.json"
    compact.write_text(json.dumps(data, separators=(",", ":")))
    assert_same_board(load_board(path), load_board(compact))


def test_the_quick_parse_accepts_exactly_the_tracks_the_schema_accepts() -> None:
    # the oracle: the jsonschema library on the shipped schema; msgspec's typed tracks (_QuickTrack) plus the
    # quick check of the rest must say yes exactly when it does
    validator = jsonschema.Draft202012Validator(board_schema())
    base = four()
    template = base["tracks"][0]
    values = [None, True, False, 0, -1, 0.5, 2, 1e-9, "", "x", "L1", [], [1], [1, 2], [1, 2, 3], ["1", 2],
              [True, 1], [[1, 2]], [[1, 2], [3, 4]], [[1, 2], [3]], [[1, 2], [3, True]], [[1, 2], [3, "4"]],
              [[1, 2], [3, 4], [5, 6]], {}, {"a": 1}]
    rng = random.Random(17)
    keys = list(template) + ["extra", "at"]
    agree = valid = 0
    for n in range(2500):
        obj = copy.deepcopy(template)
        for _ in range(rng.randint(0 if n < 5 else 1, 3)):
            key = rng.choice(keys)
            if rng.random() < 0.2:
                obj.pop(key, None)
            else:
                obj[key] = copy.deepcopy(rng.choice(values))
        board = copy.deepcopy(base)
        board["tracks"] = board["tracks"] + [obj]
        expected = validator.is_valid(board)
        parsed = board_json._quick_parse(json.dumps(board).encode())
        got = parsed is not None and board_json._valid_fast(parsed[0])
        assert got == expected, obj
        agree += 1
        valid += expected
    assert 100 < valid < agree - 500  # both answers occur often
