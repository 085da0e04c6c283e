"""The annotated SVG overlay (checker.report.svg) on the demo board and on
small hand-made boards."""

from __future__ import annotations

import dataclasses
import datetime as dt
import functools
import io
import re
import textwrap
import xml.etree.ElementTree as ET

import numpy as np
import pytest
import shapely
from boards import STACKUP, track
from boards import json_board as make_board

from checker.cli import demo_board_path
from checker.model import Pieces
from checker.readers import load_board, read_board_dict
from checker.report import svg
from checker.report.svg import finding_number, render_svg, svg_per_layer_group
from checker.review import Review
from checker.ruleset import default_ruleset, load_ruleset
from checker.runner import check_board
from checker.waivers import Waiver

NS = "{http://www.w3.org/2000/svg}"

SPACING = textwrap.dedent("""
    version: 1
    net_classes:
      fast:
        nets: {aggressors}
      quiet:
        nets: {victims}
    rules:
      - name: spacing
        kind: spacing-ratio
        aggressor: fast
        victim: quiet
        measure: centre/width
        min_ratio: 3
        min_length: 1 mm
""")


@pytest.fixture(scope="module")
def demo_svg(demo):
    return render_svg(demo)


def spacing_rules(tmp_path, aggressors=("CLK*",), victims=("SENSE*",)):
    path = tmp_path / "rules.yaml"
    quote = lambda names: "[" + ", ".join("'" + n.replace("'", "''") + "'" for n in names) + "]"  # noqa: E731
    path.write_text(SPACING.format(aggressors=quote(aggressors), victims=quote(victims)), encoding="utf-8")
    return load_ruleset(path)


def parse(text: str) -> ET.Element:
    root = ET.fromstring(text)
    assert root.tag == NS + "svg"
    return root


def viewbox(root) -> tuple[float, float, float, float]:
    x, y, w, h = (float(v) for v in root.get("viewBox").split())
    return x, y, w, h


def groups_by_id(root) -> dict[str, ET.Element]:
    return {el.get("id"): el for el in root.iter() if el.get("id")}


def flip_of(root) -> tuple[ET.Element, float]:
    """The group flipped by matrix(1 0 0 -1 0 F), and F."""
    for g in root.iter(NS + "g"):
        m = re.fullmatch(r"matrix\(1 0 0 -1 0 (-?[\d.]+)\)", g.get("transform", ""))
        if m:
            return g, float(m.group(1))
    raise AssertionError("no flipped group")


def path_points(d: str) -> list[tuple[float, float]]:
    """The points of SVG path data made of M, L, l (relative: steps from the
    point before, repeated pairs continuing the command) and Z, as absolute
    coordinates (SVG 1.1, 8.3 path data)."""
    tokens = re.findall(r"[MLlZz]|-?\d+(?:\.\d+)?", d)
    points: list[tuple[float, float]] = []
    command, i = None, 0
    while i < len(tokens):
        if tokens[i] in "MLlZz":
            command = tokens[i]
            i += 1
            continue
        x, y = float(tokens[i]), float(tokens[i + 1])
        i += 2
        if command == "l":
            x, y = points[-1][0] + x, points[-1][1] + y
        points.append((round(x, 9), round(y, 9)))
    return points


# --- structure -------------------------------------------------------------


def test_demo_parses_and_has_every_callout_with_its_number(demo, demo_svg):
    root = parse(demo_svg)
    ids = groups_by_id(root)
    numbers = finding_number(demo)
    assert len(demo.findings) >= 5  # the demo fails every rule kind at least once
    for i, f in enumerate(demo.findings, 1):
        assert numbers[f.id] == i
        g = ids[f"f-{f.id}"]
        assert g.get("data-number") == str(i)
        assert [t.text for t in g.iter(NS + "text")] == [str(i)]
        title = g.find(NS + "title").text
        assert f.aggressor in title and f.victim in title and f.rule in title and f.message in title
        assert f"limit {f.limit:.4g} {f.unit}" in title
        assert g.get("data-severity") == f.severity
        # the stretch group of the same finding sits in the flipped copper group
        assert f"s-{f.id}" in ids


def test_finding_number_keeps_the_first_of_a_repeated_id(demo):
    class Twice:
        findings = [demo.findings[1], demo.findings[0], demo.findings[1]]
    assert finding_number(Twice()) == {demo.findings[1].id: 1, demo.findings[0].id: 2}


def test_viewbox_contains_the_board_with_a_margin_and_a_legend_below(demo, demo_svg):
    root = parse(demo_svg)
    x, y, w, h = viewbox(root)
    bx0, by0, bx1, by1 = demo.analysis.board.bounds()
    assert x < bx0 and x + w > bx1
    # board y and SVG y cover the same range (mirrored about its middle); the legend adds height below
    assert y < by0 and y + h > by1
    _, flip = flip_of(root)
    # SVG y = F - board y with F = vy0 + vy1; the margin is the same on every side, so F = ymin + ymax
    assert flip == pytest.approx(by0 + by1, abs=2e-3)
    assert bx0 - x == pytest.approx(by0 - y, abs=2e-3)
    assert int(root.get("width")) == 960
    assert int(root.get("height")) == round(960 * h / w)


def test_no_findings_draws_every_layer_with_copper(tmp_path):
    b = make_board([track("TOP", "A", [[0, 0], [5, 0]]), track("IN1", "B", [[0, 3], [5, 3]])])
    result = check_board(b, spacing_rules(tmp_path))
    assert result.findings == []
    root = parse(render_svg(result))
    layers = [g.get("data-layer") for g in root.iter(NS + "g") if g.get("data-role") == "traces"]
    assert layers == ["IN1", "TOP"]  # bottom first, so the upper layer lies on top
    assert not [el for el in root.iter() if (el.get("id") or "").startswith("f-")]


def test_degenerate_boards_still_give_a_picture(tmp_path):
    rules = spacing_rules(tmp_path)
    dot = make_board([track("TOP", "A", [[3, 3], [3, 3.001]])])  # one 1 um piece, no outline
    root = parse(render_svg(check_board(dot, rules)))
    x, y, w, h = viewbox(root)
    assert w > 0 and h > 0 and x < 3 < x + w
    # nothing at all (a board model with no copper): a 1 mm frame round the origin
    empty = dataclasses.replace(dot, pieces=Pieces.empty(), regions=(), outline=None)
    root = parse(render_svg(check_board(empty, rules)))
    x, y, w, h = viewbox(root)
    assert x < -0.5 and x + w > 0.5 and w < 2
    pour = read_board_dict({"format": "couplint-board", "version": 1, "name": "pour", "stackup": STACKUP,
                            "nets": [{"name": "GND"}],
                            "regions": [{"layer": "GND", "net": "GND", "outline": [[0, 0], [4, 0], [4, 4], [0, 4]]}]},
                           "p.json")
    root = parse(render_svg(check_board(pour, rules)))
    assert [g.get("data-layer") for g in root.iter(NS + "g") if g.get("data-role") == "regions"] == ["GND"]
    # a tiny view gives a scale bar in micrometres
    tiny = parse(render_svg(check_board(dot, rules), view=(2.9, 2.9, 3.1, 3.1)))
    bar = next(p for p in tiny.iter(NS + "path") if p.get("data-role") == "scale-bar")
    assert bar.get("data-length-mm") == "0.05"
    assert "50 \u00b5m" in [t.text for t in tiny.iter(NS + "text")]


def test_layers_default_to_the_layers_findings_name_and_upper_layers_last(demo, demo_svg):
    root = parse(demo_svg)
    order = [g.get("data-layer") for g in root.iter(NS + "g") if g.get("data-role") == "traces"]
    assert order == ["IN1", "TOP"]
    names = [t.text for t in root.iter(NS + "text") if t.get("data-role") == "layer-name"]
    # GND too: the reference-gap finding names the plane layer with the void
    assert names == ["TOP (signal)", "IN1 (signal)", "GND (plane)"]
    board_name = [t.text for t in root.iter(NS + "text") if t.get("data-role") == "board-name"]
    assert board_name == [demo.analysis.board.name]


def test_one_path_per_layer_and_width_not_per_piece(tmp_path):
    # rows 1.5 mm apart, alternating layers: nothing couples, so the check is quick
    tracks = []
    for i in range(1000):
        x, y = 5.0 * (i % 10), 1.5 * (i // 10)
        tracks.append(track("TOP" if i % 2 else "IN1", f"N{i % 40}", [[x, y], [x + 1, y + 0.5], [x + 2, y]],
                            width=(0.1, 0.2)[i % 3 == 0]))
    b = make_board(tracks)
    assert len(b.pieces) == 2000
    root = parse(render_svg(check_board(b, spacing_rules(tmp_path))))
    per_layer = {g.get("data-layer"): g for g in root.iter(NS + "g") if g.get("data-role") == "traces"}
    assert set(per_layer) == {"TOP", "IN1"}
    for g in per_layer.values():
        paths = g.findall(NS + "path")
        assert len(paths) == 2  # widths 0.1 and 0.2
        # 500 tracks of two pieces per layer: each track one subpath (its second piece continues the first)
        assert sum(p.get("d").count("M") for p in paths) == 500
        assert sum(len(path_points(p.get("d"))) for p in paths) == 1500
        assert sorted(float(p.get("stroke-width")) for p in paths) == [0.1, 0.2]


def test_regions_are_filled_with_holes(demo):
    root = parse(render_svg(demo, layers=("BOT", "GND")))
    regions = {g.get("data-layer"): g for g in root.iter(NS + "g") if g.get("data-role") == "regions"}
    assert set(regions) == {"BOT", "GND"}
    # the outline and its holes: BOT's keep-out; GND's antipad around the VREF_2V5 via and the 2 x 4 mm void
    holes = {"BOT": 1, "GND": 2}
    for layer, g in regions.items():
        (p,) = g.findall(NS + "path")
        assert p.get("fill-rule") == "evenodd"
        assert p.get("d").count("M") == 1 + holes[layer]
    # planes are drawn fainter than pours
    assert float(regions["GND"].find(NS + "path").get("fill-opacity")) < \
        float(regions["BOT"].find(NS + "path").get("fill-opacity"))


def test_unknown_layer_or_finding_or_bad_view_is_refused(demo):
    with pytest.raises(ValueError, match="'L7'.*TOP, IN1, GND, BOT"):
        render_svg(demo, layers=("TOP", "L7"))
    with pytest.raises(ValueError, match="no finding with id 'nope'"):
        render_svg(demo, only="nope")
    with pytest.raises(ValueError, match="view"):
        render_svg(demo, view=(5, 5, 5, 10))
    with pytest.raises(ValueError, match="view"):
        render_svg(demo, view=(0, 0, float("nan"), 10))
    with pytest.raises(ValueError, match="width_px"):
        render_svg(demo, width_px=3)


# --- coordinates -------------------------------------------------------------


def test_y_is_flipped_by_a_transform_and_text_is_not_mirrored(tmp_path):
    b = make_board([track("TOP", "LOW", [[0, 1], [10, 1]]), track("IN1", "HIGH", [[0, 9], [10, 9]])],
                   outline=[[0, 0], [10, 0], [10, 10], [0, 10]])
    root = parse(render_svg(check_board(b, spacing_rules(tmp_path))))
    flipped, flip = flip_of(root)
    traces = {g.get("data-layer"): g.find(NS + "path").get("d") for g in flipped.iter(NS + "g")
              if g.get("data-role") == "traces"}
    # coordinates stay in board mm; the transform maps board y to SVG y = F - y
    assert path_points(traces["TOP"]) == [(0, 1), (10, 1)]
    assert path_points(traces["IN1"]) == [(0, 9), (10, 9)]
    low_svg_y, high_svg_y = flip - 1, flip - 9
    assert high_svg_y < low_svg_y  # the trace at higher board y is higher in the picture
    _, y, _, _ = viewbox(root)
    assert y < high_svg_y < low_svg_y < flip - y  # both inside the drawing area [vy0, vy1]
    assert not list(flipped.iter(NS + "text"))
    assert all("-1" not in (g.get("transform") or "") for g in root.iter() if g is not flipped)


def test_y_flip_in_the_rendered_image(tmp_path):
    """End to end: a trace near the top edge of the board comes out in the
    upper part of the picture."""
    cairosvg = pytest.importorskip("cairosvg")
    image = pytest.importorskip("PIL.Image")
    b = make_board([track("TOP", "A", [[1, 9], [9, 9]], width=0.5)], outline=[[0, 0], [10, 0], [10, 10], [0, 10]])
    text = render_svg(check_board(b, spacing_rules(tmp_path)))
    root = parse(text)
    _, _, w, h = viewbox(root)
    png = image.open(io.BytesIO(cairosvg.svg2png(bytestring=text.encode()))).convert("RGB")
    px = np.asarray(png, dtype=np.int32)
    # TOP's colour at copper opacity over white: the only thing drawn in it
    top = np.array([int(svg.LAYER_COLOURS[0][i:i + 2], 16) for i in (1, 3, 5)])
    expected = svg.COPPER_OPACITY * top + (1 - svg.COPPER_OPACITY) * 255
    rows = np.flatnonzero((np.abs(px - expected).max(axis=2) < 12).any(axis=1))
    assert rows.size
    # the board drawing is the top (vh / (vh + band)) of the picture; the trace is in its upper fifth
    drawing_rows = png.height * (10 + 2 * (10 * svg.TEXT_PX / 960 * svg.MARGIN)) / h
    legend_rows = rows[rows >= drawing_rows]  # the layer swatch in the legend
    trace_rows = rows[rows < drawing_rows]
    assert trace_rows.size and legend_rows.size
    assert trace_rows.max() < 0.25 * drawing_rows


def test_view_crops_to_a_region(tmp_path):
    b = make_board([track("TOP", "CLK", [[0, 0], [10, 0]]), track("TOP", "SENSE", [[0, 0.3], [10, 0.3]]),
                    track("TOP", "CLK2", [[200, 100], [210, 100]]),
                    track("TOP", "SENSE2", [[200, 100.3], [210, 100.3]])])
    result = check_board(b, spacing_rules(tmp_path))
    near, far = sorted(result.findings, key=lambda f: f.at[0])
    whole = parse(render_svg(result))
    assert {f"f-{near.id}", f"f-{far.id}"} <= set(groups_by_id(whole))
    view = (-1.0, -2.0, 11.0, 2.0)
    root = parse(render_svg(result, view=view))
    x, y, w, h = viewbox(root)
    margin = 12 * svg.TEXT_PX / 960 * svg.MARGIN  # the margin follows the larger side of the view
    assert (x, y, w) == pytest.approx((-1 - margin, -2 - margin, 12 + 2 * margin), abs=1e-3)
    _, flip = flip_of(root)
    assert flip == pytest.approx((-2 - margin) + (2 + margin), abs=1e-3)
    ids = groups_by_id(root)
    assert f"f-{near.id}" in ids and f"f-{far.id}" not in ids
    points = [pt for g in root.iter(NS + "g") if g.get("data-role") == "traces"
              for p in g.iter(NS + "path") for pt in path_points(p.get("d"))]
    assert points and max(px for px, _ in points) <= 10  # the far-away copper is left out
    # the scale bar follows the view, not the board
    bar = next(p for p in root.iter(NS + "path") if p.get("data-role") == "scale-bar")
    assert float(bar.get("data-length-mm")) == 2.0


def test_only_draws_one_callout_and_the_others_faintly(demo):
    target = demo.findings[2]
    root = parse(render_svg(demo, only=target.id))
    ids = groups_by_id(root)
    callouts = [i for i in ids if i.startswith("f-")]
    assert callouts == [f"f-{target.id}"]
    strong = ids[f"s-{target.id}"].find(NS + "path")
    # another finding on the same layers keeps a faint, unnumbered stretch
    # (a coupled one: a reference-gap finding has no coupled rows, only its dashed extent)
    other = next(f for f in demo.findings if f.layers == target.layers and f.id != target.id
                 and f.kind != "reference-gap")
    assert f"s-{other.id}" not in ids  # unnumbered: the faint bands are grouped by look, not by finding
    (others,) = [g for g in root.iter(NS + "g") if g.get("data-role") == "others"]
    faint = others.findall(NS + "path")
    assert faint and all(float(p.get("stroke-opacity")) < float(strong.get("stroke-opacity")) for p in faint)
    assert all(float(p.get("fill-opacity")) < float(strong.get("fill-opacity")) for p in faint)
    # the faint outline covers the bands the whole-board overlay draws for that finding (same frame):
    # bands merged into one outline per look, drawn even-odd, kept to a quarter pixel
    full = groups_by_id(parse(render_svg(demo)))[f"s-{other.id}"].find(NS + "path").get("d")
    bands = [shapely.Polygon(path_points(b)) for b in re.findall(r"M[^M]*Z", full)]
    covered = shapely.union_all([  # even-odd within each path, the paths over each other
        functools.reduce(shapely.symmetric_difference,
                         [shapely.Polygon(path_points(r)) for r in re.findall(r"M[^M]*Z", p.get("d"))])
        for p in faint])
    assert bands and all(covered.buffer(0.05).covers(b) for b in bands)


def test_stretch_follows_the_coupled_rows(demo, demo_svg):
    """SPI_SCK beside AIN3 on IN1: the stretch is drawn from the coupled rows
    (one band per row, within the finding's bbox plus the halo), so no dashed
    extent box is needed; VREF_2V5's noise finding spans two aggressors far
    apart, so its extent box is drawn as well."""
    root = parse(demo_svg)
    ids = groups_by_id(root)
    # a band covers both traces: half the 0.5 mm centre spacing plus half a
    # 0.15 mm width beyond the coupling spots (the finding's bbox holds the
    # spots grown by half a width), plus the halo
    tol = svg.HALO * demo_unit(demo) + 0.25 + 0.075 + 1e-3
    run = next(f for f in demo.findings if f.rule == "parallel-run-length" and f.victim == "AIN3")
    g = ids[f"s-{run.id}"]
    roles = [el.get("data-role") for el in g]
    assert roles == ["stretch"]
    d = g[0].get("d")
    assert d.count("M") >= 3  # the run is several pieces: straight, jog, straight
    x0, y0, x1, y1 = run.bbox
    for x, y in path_points(d):
        assert x0 - tol <= x <= x1 + tol and y0 - tol <= y <= y1 + tol
    # VREF_2V5's noise sums two aggressors far apart (SW_BUCK crossing it at
    # (31, 8), CLK_ADC beside it near (21.5, 28.3)): both are marked
    noise = next(f for f in demo.findings if f.rule == "coupled-noise" and f.victim == "VREF_2V5")
    (band,) = ids[f"s-{noise.id}"]
    pts = path_points(band.get("d"))
    assert any(abs(x - 31) < 0.6 and abs(y - 8) < 0.6 for x, y in pts)
    assert any(19 < x < 24 and abs(y - 28.3) < 0.6 for x, y in pts)


def test_extent_box_stands_in_when_no_coupled_row_matches(demo):
    f = demo.findings[0]
    moved = dataclasses.replace(f, aggressor="NO_SUCH_NET")
    result = dataclasses.replace(demo, findings=[moved, *demo.findings[1:]])
    g = groups_by_id(parse(render_svg(result)))[f"s-{f.id}"]
    (rect,) = g
    assert rect.get("data-role") == "extent" and rect.get("stroke-dasharray")
    x0, y0, x1, y1 = f.bbox
    assert float(rect.get("x")) == pytest.approx(x0, abs=1e-3)
    assert float(rect.get("width")) == pytest.approx(x1 - x0, abs=2e-3)


def demo_unit(result):
    x0, y0, x1, y1 = result.analysis.board.bounds()
    return max(x1 - x0, y1 - y0) * svg.TEXT_PX / 960


# --- scaling -------------------------------------------------------------------


def scaled_board(size_mm: float):
    """A square board of side ``size_mm`` with one spacing violation (a
    0.15 mm pair at 0.3 mm centre spacing) across most of it."""
    k = size_mm / 10
    w = 0.15
    return make_board(
        [track("TOP", "CLK", [[1 * k, 5 * k], [9 * k, 5 * k]], width=w),
         track("TOP", "SENSE", [[1 * k, 5 * k + 2 * w], [9 * k, 5 * k + 2 * w]], width=w)],
        outline=[[0, 0], [size_mm, 0], [size_mm, size_mm], [0, size_mm]])


def sizes(text: str) -> dict[str, float]:
    root = parse(text)
    _, _, w, _ = viewbox(root)
    (callout,) = [el for el in root.iter(NS + "g") if (el.get("id") or "").startswith("f-")]
    number = callout.find(NS + "text")
    marker = max(float(c.get("r")) for c in callout.iter(NS + "circle"))  # the spot dot is smaller
    legend = next(t for t in root.iter(NS + "text") if t.get("data-role") == "layer-name")
    outline = next(p for p in root.iter(NS + "path") if p.get("data-role") == "outline")
    return {"w": w, "number": float(number.get("font-size")), "legend": float(legend.get("font-size")),
            "marker": marker, "outline": float(outline.get("stroke-width")),
            "leader": float(callout.find(NS + "line").get("stroke-width"))}


def test_text_and_strokes_scale_with_the_board_from_10_to_500_mm(tmp_path):
    rules = spacing_rules(tmp_path)
    small, large = (sizes(render_svg(check_board(scaled_board(s), rules))) for s in (10.0, 500.0))
    assert large["w"] / small["w"] == pytest.approx(50, rel=1e-3)
    for key in ("number", "legend", "marker", "outline", "leader"):
        # in proportion to the picture, so the same on screen at the same
        # width_px (strokes of ~10 um on the small board lose a little to the 1 um rounding)
        assert large[key] / small[key] == pytest.approx(50, rel=0.06), key
        assert small[key] / small["w"] == pytest.approx(large[key] / large["w"], rel=0.06), key
    # and readable: numbers, legend text and markers are 8-30 px high at
    # the width asked for, also in a small picture
    half = sizes(render_svg(check_board(scaled_board(10.0), rules), width_px=480))
    for s, px in ((small, 960), (large, 960), (half, 480)):
        for key in ("number", "legend", "marker"):
            assert 8 <= s[key] / s["w"] * px <= 30, (key, px)


def test_scale_bar_is_a_round_length():
    assert [svg._nice_length(v) for v in (0.3, 1.0, 2.5, 4.99, 7.0, 130.0)] == [0.2, 1.0, 2.0, 2.0, 5.0, 100.0]


def test_thin_copper_stays_visible_on_a_large_board(tmp_path):
    b = make_board([track("TOP", "A", [[0, 0], [500, 0]], width=0.1), track("TOP", "B", [[0, 400], [500, 400]])])
    root = parse(render_svg(check_board(b, spacing_rules(tmp_path)), width_px=1000))
    _, _, w, _ = viewbox(root)
    widths = [float(p.get("stroke-width")) for g in root.iter(NS + "g") if g.get("data-role") == "traces"
              for p in g.findall(NS + "path")]
    assert widths == [pytest.approx(svg.MIN_COPPER_PX * w / 1000, abs=1e-3)] * 2


# --- escaping, safety, determinism ---------------------------------------------


EVIL_A, EVIL_V = "<script>", 'A&B"'


@pytest.fixture(scope="module")
def evil(tmp_path_factory):
    rules = spacing_rules(tmp_path_factory.mktemp("r"), aggressors=(EVIL_A,), victims=(EVIL_V,))
    stackup = [{"copper": "T<o>p&'\"", "role": "signal", "thickness": 0.035}]
    b = make_board([track("T<o>p&'\"", EVIL_A, [[0, 0], [8, 0]]), track("T<o>p&'\"", EVIL_V, [[0, 0.3], [8, 0.3]])],
                   name="<script>alert(1)</script> & \x1b", stackup=stackup)
    result = check_board(b, rules)
    assert [(f.aggressor, f.victim) for f in result.findings] == [(EVIL_A, EVIL_V)]
    f = result.findings[0]
    result.review = Review(waived={f.id: Waiver(reason="ok <img src=x onerror=alert(1)>", author="Q&A",
                                                date=dt.date(2024, 5, 1), id=f.id)})
    return result


def test_hostile_names_are_escaped_and_nothing_runs(evil):
    text = render_svg(evil)
    root = parse(text)  # well-formed
    assert "<script" not in text.lower() and "<img" not in text.lower()
    for el in root.iter():
        assert not el.tag.lower().endswith("script")
        assert not el.tag.lower().endswith("foreignobject")
        for name, value in el.attrib.items():
            assert not name.lower().startswith("on"), name
            assert "javascript:" not in value.lower()
    f = evil.findings[0]
    g = groups_by_id(root)[f"f-{f.id}"]
    title = g.find(NS + "title").text
    # the names come back intact once parsed
    assert EVIL_A in title and EVIL_V in title and "onerror=alert(1)>" in title
    assert g.get("data-waived") == "true"
    texts = [t.text for t in root.iter(NS + "text")]
    assert "T<o>p&'\" (signal)" in texts
    assert "<script>alert(1)</script> & \\x1b" in texts  # a control character is shown as an escape
    for part in svg_per_layer_group(evil).values():
        parse(part)


def test_waived_findings_are_marked(demo):
    target = demo.findings[0]
    marked = dataclasses.replace(demo, review=Review(waived={target.id: Waiver(
        reason="reviewed", author="me", date=dt.date(2024, 1, 1), id=target.id)}))
    ids = groups_by_id(parse(render_svg(marked)))
    g = ids[f"f-{target.id}"]
    assert g.get("data-waived") == "true"
    assert "waived by me: reviewed" in g.find(NS + "title").text
    assert g.find(NS + "circle[@stroke-dasharray]") is not None  # dotted ring
    assert len(g.findall(NS + "line")) == 2  # leader and strike
    others = [ids[f"f-{f.id}"] for f in demo.findings[1:]]
    assert all(o.get("data-waived") is None and len(o.findall(NS + "line")) == 1 for o in others)


def test_output_is_deterministic(demo, demo_svg):
    again = check_board(load_board(demo_board_path()), default_ruleset())
    assert render_svg(demo) == demo_svg
    assert render_svg(again) == demo_svg
    # coordinates and sizes carry at most three decimals (1 um), never "-0"
    for el in parse(demo_svg).iter():
        for name, value in el.attrib.items():
            if name in ("d", "x", "y", "x1", "y1", "x2", "y2", "cx", "cy", "r", "width", "height",
                        "stroke-width", "font-size", "viewBox", "transform"):
                assert not re.search(r"\d\.\d{4}", value), (name, value)
                assert not re.search(r"(?<![\d.])-0(?![.\d])", value), (name, value)


def test_number_formatting():
    assert [svg._f(v) for v in (0, -0.0, -0.0004, 1.5, -2, 123.4567, 2.6e-3, 1e6)] == \
        ["0", "0", "0", "1.5", "-2", "123.457", "0.003", "1000000"]
    assert svg._fs(np.array([-0.0001, 3.0, 0.1234])) == ["0", "3", "0.123"]


# --- per layer group -----------------------------------------------------------


def test_one_picture_per_layer_group(demo):
    pictures = svg_per_layer_group(demo)
    # IN1-GND: the reference-gap finding of SPI_SCK over the void in the GND plane
    assert list(pictures) == ["TOP", "TOP-IN1", "IN1", "IN1-GND"]
    for key, text in pictures.items():
        root = parse(text)
        layers = key.split("-")
        drawn = [g.get("data-layer") for g in root.iter(NS + "g") if g.get("data-role") == "traces"]
        assert sorted(drawn) == sorted(layer for layer in layers if layer != "GND")  # GND: regions only
        callouts = {i[2:] for i in groups_by_id(root) if i.startswith("f-")}
        assert callouts == {f.id for f in demo.findings if set(f.layers) <= set(layers)}
        assert callouts  # each group has findings
    assert pictures["TOP-IN1"] == render_svg(demo, layers=("TOP", "IN1"))


# --- rendering -----------------------------------------------------------------


def test_renders_to_a_picture_with_copper_and_severity_colours(demo, demo_svg):
    cairosvg = pytest.importorskip("cairosvg")
    image = pytest.importorskip("PIL.Image")
    png = image.open(io.BytesIO(cairosvg.svg2png(bytestring=demo_svg.encode()))).convert("RGB")
    assert png.width == 960
    px = np.asarray(png, dtype=np.int32).reshape(-1, 3)
    packed = (px[:, 0] << 16) | (px[:, 1] << 8) | px[:, 2]
    assert np.unique(packed).size > 50  # copper, halos, markers, text, antialiasing
    non_white = np.count_nonzero((px != 255).any(axis=1)) / px.shape[0]
    assert 0.03 < non_white < 0.8  # most of the board is the faint GND plane, drawn for the reference-gap finding
    # opaque callout markers come out in the palette's exact colours
    for hex_colour in (svg.SEVERITY_COLOURS["error"], svg.SEVERITY_COLOURS["warning"]):
        rgb = tuple(int(hex_colour[i:i + 2], 16) for i in (1, 3, 5))
        assert np.count_nonzero((px == rgb).all(axis=1)) > 100, hex_colour


def test_docs_give_the_colours_the_code_uses():
    from pathlib import Path

    doc = (Path(__file__).resolve().parents[1] / "docs" / "overlay.md").read_text(encoding="utf-8")
    layer_rows = re.findall(r"^\| (\d)\w\w(?: \(top\))?, .*? \| ([\w ]+) \((Tol|Okabe–Ito)\) \| `(#[0-9A-F]{6})` \|$",
                            doc, flags=re.M)
    assert [hex_ for *_, hex_ in layer_rows] == list(svg.LAYER_COLOURS)
    for _, name, palette, hex_ in layer_rows:  # each named as its palette names it
        assert (svg.TOL_MUTED if palette == "Tol" else svg.OKABE_ITO)[name] == hex_
    for severity, colour in svg.SEVERITY_COLOURS.items():
        assert re.search(rf"^\| {severity} \| [\w ]+ \| `{colour}` \|$", doc, flags=re.M), severity
    assert re.search(rf"^\| waived .*`{svg.WAIVED_COLOUR}` \|$", doc, flags=re.M)


def test_palettes_are_the_published_ones():
    assert set(svg.LAYER_COLOURS) <= set(svg.OKABE_ITO.values()) | set(svg.TOL_MUTED.values())
    assert set(svg.SEVERITY_COLOURS.values()) <= set(svg.OKABE_ITO.values())
    assert not set(svg.LAYER_COLOURS) & set(svg.SEVERITY_COLOURS.values())
    # Tol's muted scheme (SRON/EPS/TN/09-002, issue 3.2; quoted from memory)
    assert svg.TOL_MUTED == {
        "indigo": "#332288", "cyan": "#88CCEE", "teal": "#44AA99", "green": "#117733", "olive": "#999933",
        "sand": "#DDCC77", "rose": "#CC6677", "wine": "#882255", "purple": "#AA4499"}
    # the published sRGB values (Okabe and Ito 2008; Wong 2011)
    assert svg.OKABE_ITO == {
        "black": "#000000", "orange": "#E69F00", "sky blue": "#56B4E9", "bluish green": "#009E73",
        "yellow": "#F0E442", "blue": "#0072B2", "vermillion": "#D55E00", "reddish purple": "#CC79A7"}


def test_pours_are_drawn_to_a_quarter_pixel_with_far_fewer_corners(tmp_path):
    # a pour with a finely sampled round hole (2 000 corners): drawn over the whole board at 960 px, its
    # outline keeps only the corners that matter at that scale, and every corner drawn lies within a
    # quarter pixel of the true outline (Douglas-Peucker's bound; the distances measured with shapely)
    import math

    import shapely

    n = 2000
    hole = [[20 + 5 * math.cos(2 * math.pi * k / n), 20 + 5 * math.sin(2 * math.pi * k / n)] for k in range(n)]
    outline = [[0, 0], [40, 0], [40, 40], [0, 40]]
    b = make_board([track("TOP", "CLK", [[1, 1], [39, 1]])],
                   regions=[{"layer": "IN1", "net": "GND", "outline": outline, "holes": [hole]}],
                   nets=["CLK", "GND"], outline=outline)
    root = parse(render_svg(check_board(b, spacing_rules(tmp_path)), layers=("IN1",), width_px=960))
    (g,) = [g for g in root.iter(NS + "g") if g.get("data-role") == "regions"]
    d = g.find(NS + "path").get("d")
    rings = [path_points(part) for part in re.findall(r"M[^M]*", d)]
    assert len(rings) == 2
    drawn_hole = rings[1]
    assert 8 <= len(drawn_hole) < 200  # was 2 000 corners
    _, _, width_mm, _ = viewbox(root)
    quarter_px = 0.25 * width_mm / 960
    drawn_ring = shapely.LinearRing(drawn_hole)
    worst = max(drawn_ring.distance(shapely.Point(p)) for p in hole)  # every true corner near the drawn outline
    assert worst <= quarter_px + 1e-3  # + the 1 um rounding of the coordinates written
    assert worst > 0.2 * quarter_px  # the tolerance was used, not a far finer one


# --- boards with many findings ----------------------------------------------


def crowded_board(tmp_path):
    """Three patches of 30 short CLK/SENSE pairs each, 0.3 mm apart centre to
    centre (ratio 2 < 3: every pair a spacing finding), plus five lone pairs
    far apart, on a 100 mm board: 95 findings."""
    tracks = []
    k = 0
    for px, py in ((15, 15), (50, 80), (85, 30)):
        for i in range(30):
            x, y = px + (i % 5) * 0.8, py + (i // 5) * 0.8
            tracks += [track("TOP", f"CLK{k}", [[x, y], [x + 0.6, y]]),
                       track("TOP", f"SENSE{k}", [[x, y + 0.3], [x + 0.6, y + 0.3]])]
            k += 1
    lone = [(5, 95), (95, 95), (50, 45), (30, 60), (70, 5)]
    for x, y in lone:
        tracks += [track("TOP", f"CLK{k}", [[x, y], [x + 2, y]]), track("TOP", f"SENSE{k}", [[x, y + 0.3],
                                                                                         [x + 2, y + 0.3]])]
        k += 1
    b = make_board(tracks, outline=[[0, 0], [100, 0], [100, 100], [0, 100]])
    rules = SPACING.replace("min_length: 1 mm", "min_length: 0.5 mm")
    path = tmp_path / "crowded.yaml"
    path.write_text(rules.format(aggressors="['CLK*']", victims="['SENSE*']"), encoding="utf-8")
    return check_board(b, load_ruleset(path)), lone


def test_a_crowded_overview_clusters_findings_and_numbers_the_lone_ones(tmp_path):
    result, lone = crowded_board(tmp_path)
    assert len(result.findings) == 95 > svg.CLUSTER_ABOVE
    root = parse(render_svg(result))
    clusters = [g for g in root.iter(NS + "g") if g.get("data-role") == "cluster"]
    callouts = [g for g in root.iter(NS + "g") if (g.get("id") or "").startswith("f-")]
    # every finding is told exactly once: in one cluster or as one numbered callout
    told = [i for g in clusters for i in g.get("data-findings").split()] + [g.get("id")[2:] for g in callouts]
    assert sorted(told) == sorted(f.id for f in result.findings)
    assert sum(int(g.get("data-count")) for g in clusters) + len(callouts) == 95
    # the three patches (each at most four cells of the grid) become a handful of markers, not 90 callouts
    assert 3 <= len(clusters) <= 12 and sum(int(g.get("data-count")) for g in clusters) == 90
    # the five lone pairs keep their numbered callouts
    by_id = {f.id: f for f in result.findings}
    lone_found = sorted((round(by_id[g.get("id")[2:]].bbox[0]), round(by_id[g.get("id")[2:]].bbox[1]))
                        for g in callouts)
    assert lone_found == sorted((x, y) for x, y in lone)
    # a cluster shows its count and the worst severity among its findings
    for g in clusters:
        members = [by_id[i] for i in g.get("data-findings").split()]
        assert g.find(NS + "text").text == str(len(members))
        assert g.get("data-severity") == min((f.severity for f in members), key=("error", "warning").index)
    legend = " ".join(t.text or "" for t in root.iter(NS + "text"))
    assert "findings close together" in legend


def test_a_close_up_never_clusters(tmp_path):
    result, _ = crowded_board(tmp_path)
    f = result.findings[0]
    root = parse(render_svg(result, view=(f.bbox[0] - 3, f.bbox[1] - 3, f.bbox[2] + 3, f.bbox[3] + 3), only=f.id))
    assert not [g for g in root.iter(NS + "g") if g.get("data-role") == "cluster"]
    assert [g.get("id") for g in root.iter(NS + "g") if (g.get("id") or "").startswith("f-")] == [f"f-{f.id}"]


def test_traces_as_an_image_look_like_the_traces_as_vectors(tmp_path, monkeypatch):
    """Above the raster threshold the traces become one PNG; rendered, the
    picture matches the vector one (the same copper in the same place)."""
    cairosvg = pytest.importorskip("cairosvg")
    from PIL import Image

    from checker.report import raster

    result, _ = crowded_board(tmp_path)
    vector = render_svg(result)
    assert "traces-image" not in vector
    monkeypatch.setattr(raster, "RASTER_ABOVE", 10)
    image = render_svg(result)
    root = parse(image)
    (img,) = [el for el in root.iter(NS + "image") if el.get("data-role") == "traces-image"]
    assert img.get("href").startswith("data:image/png;base64,")
    assert int(img.get("data-pieces")) == len(result.analysis.board.pieces)
    assert not [g for g in root.iter(NS + "g") if g.get("data-role") == "traces"]

    def pixels(text):
        png = cairosvg.svg2png(bytestring=text.encode(), output_width=960)
        return np.asarray(Image.open(io.BytesIO(png)).convert("RGB"), dtype=np.int32)

    a, b = pixels(vector), pixels(image)
    assert a.shape == b.shape
    top = np.array([int(svg.LAYER_COLOURS[0][i:i + 2], 16) for i in (1, 3, 5)])
    ink = lambda px: (np.abs(px - (svg.COPPER_OPACITY * top + (1 - svg.COPPER_OPACITY) * 255)).max(axis=2)  # noqa: E731
                      < 40)
    ia, ib = ink(a), ink(b)
    assert ia.sum() > 200
    # the copper covers nearly the same pixels (edges differ by antialiasing)
    assert (ia & ib).sum() / (ia | ib).sum() > 0.6
    assert np.abs(a - b).mean() < 3.0


def test_a_close_up_names_both_nets_on_their_copper_without_overlap(tmp_path):
    """A broadside pair stacked on two layers: both nets named in the
    picture (a print keeps it), the aggressor's label above, the victim's
    below, a text height or more apart."""
    b = make_board([track("TOP", "CLK_A", [[0, 5], [10, 5]]), track("IN1", "SENSE_B", [[0, 5], [10, 5]])],
                   outline=[[-5, 0], [15, 0], [15, 10], [-5, 10]])
    rules = tmp_path / "r.yaml"
    rules.write_text(textwrap.dedent("""
        version: 1
        net_classes:
          fast: {nets: ["CLK*"]}
          quiet: {nets: ["SENSE*"]}
        rules:
          - {name: cross, kind: crossing-angle, aggressor: fast, victim: quiet, min_angle: 60 deg, max_length: 1 mm}
    """), encoding="utf-8")
    result = check_board(b, load_ruleset(rules))
    (f,) = result.findings
    root = parse(render_svg(result, view=(f.bbox[0] - 2, f.bbox[1] - 2, f.bbox[2] + 2, f.bbox[3] + 2), only=f.id))
    labels = {g.get("data-net"): g for g in root.iter(NS + "g") if g.get("data-role") == "net-label"}
    assert set(labels) == {"CLK_A", "SENSE_B"}
    texts = {net: [t for t in g.iter(NS + "text")] for net, g in labels.items()}
    assert [t.text for t in texts["CLK_A"]] == ["CLK_A (aggressor)"] * 2  # the halo copy and the text
    y_agg, y_vic = float(texts["CLK_A"][1].get("y")), float(texts["SENSE_B"][1].get("y"))
    size = float(texts["CLK_A"][1].get("font-size"))
    assert y_vic - y_agg >= size  # SVG y grows downwards: the aggressor's label is above
    assert texts["CLK_A"][1].get("fill") == svg.OKABE_ITO["black"]
    assert texts["CLK_A"][0].get("stroke") == svg.BACKGROUND  # the white halo under it


def test_report_close_ups_draw_only_the_findings_layers(demo):
    from checker.report.html import render_html

    page = render_html(demo, inputs=[], cards=len(demo.findings))
    cards = re.findall(r'<article class="card[^"]*" id="f-([0-9a-f]{12})".*?</article>', page, re.S)
    bodies = re.findall(r'<article class="card[^"]*" id="f-[0-9a-f]{12}".*?</article>', page, re.S)
    by_id = {f.id: f for f in demo.findings}
    assert len(cards) == len(demo.findings)
    for fid, body in zip(cards, bodies):
        drawn = set(re.findall(r'data-layer="([^"]+)" data-role="(?:traces|regions)"', body))
        assert drawn and drawn <= set(by_id[fid].layers), (fid, drawn, by_id[fid].layers)


def test_a_close_up_draws_the_vias_in_view(demo):
    """The demo board's vias: every one whose pad meets a close-up's view is
    drawn there as a ring, none outside it, none in the whole-board picture."""
    from checker.report.html import picture_view

    v = demo.analysis.board.vias
    assert len(v)
    f = demo.findings[0]
    view = picture_view(f.bbox)
    root = parse(render_svg(demo, view=view, only=f.id))
    frame_margin = svg.MARGIN * max(view[2] - view[0], view[3] - view[1]) * svg.TEXT_PX / 960
    x0, y0, x1, y1 = view[0] - frame_margin, view[1] - frame_margin, view[2] + frame_margin, view[3] + frame_margin
    inside = [(float(x), float(y)) for x, y, p in zip(v.x, v.y, v.pad)
              if x + p / 2 >= x0 and x - p / 2 <= x1 and y + p / 2 >= y0 and y - p / 2 <= y1]
    (group,) = [g for g in root.iter(NS + "g") if g.get("data-role") == "vias"]
    rings = {(float(c.get("cx")), float(c.get("cy"))) for c in group.iter(NS + "circle")
             if c.get("fill") == svg.BACKGROUND}
    assert rings == {(round(x, 3), round(y, 3)) for x, y in inside} and rings
    whole = parse(render_svg(demo))
    assert not [g for g in whole.iter(NS + "g") if g.get("data-role") == "vias"]
