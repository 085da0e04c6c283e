"""The shielding fixture boards, through both doors.

Each case of ``fixtures/shielding/*.json`` (invented boards; the hand
calculation is in each board's ``description``) is also committed as a
fabrication package in ``fixtures/fab/shielding-<case>/``, written by
``scripts/write_fab.py`` with ``roles=False``: its Gerber
``TF.FileFunction`` copper attributes and its job file declare no layer
role at all (no Plane / Signal / Mixed). Shielding is decided by the copper
of the reference nets (``checker.shielding``), so both doors must give the
same board and the same findings under the shipped default rule set, and
each case must give the physics its geometry calls for.

Shared geometry (mm; every fixture's ``description`` says the same):
L1 / 0.2 prepreg (er 4.2) / L2 / 0.3 core (er 4.5) / L3 / 0.2 prepreg
(er 4.2) / L4, copper 0.035; CLK_SYNC on L1 and SENSE_BRIDGE on L3, both
0.15 wide, x 5 -> 30 at y 10 (a 25 mm run). Vertical distance L1-L3
m = 0.2 + 0.035 + 0.3 = 0.535.
"""

from __future__ import annotations

import json
import re
from functools import lru_cache
from pathlib import Path

import numpy as np
import pytest
import shapely

from checker.analysis import BROADSIDE, EDGE, RELAY
from checker.model import NO_NET
from checker.readers import load_board
from checker.readers.fab.assemble import load_package
from checker.ruleset import default_ruleset, load_ruleset
from checker.runner import check_board

ROOT = Path(__file__).resolve().parents[1]
CASES = ("void_under_run", "empty_layer", "ground_strip", "island", "split_plane", "guard_stitched",
         "guard_one_end")
CLOCK, SENSOR = "CLK_SYNC", "SENSE_BRIDGE"


def json_path(case: str) -> Path:
    return ROOT / "fixtures" / "shielding" / f"{case}.json"


def package_path(case: str) -> Path:
    return ROOT / "fixtures" / "fab" / f"shielding-{case}"


@lru_cache(maxsize=None)
def results(case: str):
    """(JSON door result, package door result) under the default rules,
    computed once per case (the tests only read them)."""
    rules = default_ruleset()
    return (check_board(load_board(json_path(case)), rules),
            check_board(load_package([str(package_path(case))]), rules))


def rows_between(result, kind: int, a: str = CLOCK, b: str = SENSOR) -> np.ndarray:
    """Indices of the coupling rows of ``kind`` between nets a and b."""
    an = result.analysis
    c = an.couplings
    return np.array([i for i in range(len(c)) if c.kind[i] == kind
                     and {an.net_name(int(c.net_a[i])), an.net_name(int(c.net_b[i]))} == {a, b}], dtype=np.int64)


# --------------------------------------------------------------------------- the packages declare no roles


@pytest.mark.parametrize("case", CASES)
def test_package_declares_no_layer_roles(case):
    folder = package_path(case)
    gerbers = sorted(folder.glob("*-L*.gbr"))
    assert len(gerbers) == 4
    for path in gerbers:
        functions = re.findall(r"^%TF\.FileFunction,([^*]*)\*%$", path.read_text(), re.MULTILINE)
        # Copper,L<n>,Top|Inr|Bot and nothing after it: the type field is left out
        assert len(functions) == 1 and re.fullmatch(r"Copper,L[1-4],(Top|Inr|Bot)", functions[0]), path.name
        lines = path.read_text().splitlines()
        attributes = [ln for ln in lines if ln.startswith("%T")]
        assert not any(re.search(r"Plane|Signal|Mixed", ln, re.IGNORECASE) for ln in attributes), path.name
        # and the writer's comment names the layer only (it says "(plane)" etc. with roles)
        assert re.fullmatch(r"G04 board [^*]*, copper layer L[1-4]\*", lines[1]), path.name
    (job,) = folder.glob("*.gbrjob")
    data = json.loads(job.read_text())
    copper_functions = [f["FileFunction"] for f in data["FilesAttributes"] if f["FileFunction"].startswith("Copper")]
    assert copper_functions == ["Copper,L1,Top", "Copper,L2,Inr", "Copper,L3,Inr", "Copper,L4,Bot"]
    copper = [e for e in data["MaterialStackup"] if e["Type"] == "Copper"]
    assert [sorted(e) for e in copper] == [["Name", "Thickness", "Type"]] * 4
    # the reader takes the layers as mixed and says so; the JSON declares roles
    board = load_package([str(folder)])
    assert [layer.role for layer in board.stackup.layers] == ["mixed"] * 4
    assert any("layer role not given for L1, L2, L3, L4" in n for n in board.notes)
    assert all(layer.role in ("signal", "plane") for layer in load_board(json_path(case)).stackup.layers)


# Roles from the copper (checker.shielding: a layer is a plane where reference
# copper covers >= 50 % of the 35 x 20 = 700 mm^2 board), the same through both
# doors although only the JSON declares roles. Hand areas: a full GND region
# 700 mm^2 (100 %); void_under_run L2 700 - 10 x 3 = 670 (96 %); split_plane L2
# 35 x 9.5 x 2 = 665 (95 %); ground_strip L2 a 29 x 0.5 = 14.5 mm^2 strip (2 %);
# the guard trace on L1 25 x 0.2 = 5 mm^2 (under 1 %).
ROLES_FROM_COPPER = {
    "void_under_run": ["signal", "plane", "signal", "plane"],
    "empty_layer": ["signal", "signal", "signal", "plane"],
    "ground_strip": ["signal", "signal", "signal", "plane"],
    "island": ["signal", "signal", "signal", "signal"],  # no reference copper at all
    "split_plane": ["signal", "plane", "signal", "plane"],
    "guard_stitched": ["signal", "plane", "signal", "plane"],
    "guard_one_end": ["signal", "plane", "signal", "plane"],
}


@pytest.mark.parametrize("case", CASES)
def test_roles_come_from_the_copper_through_both_doors(case):
    from_json, from_fab = results(case)
    for result in (from_json, from_fab):
        assert [layer.role for layer in result.analysis.board.stackup.layers] == ROLES_FROM_COPPER[case]


# --------------------------------------------------------------------------- one board, two doors


def piece_key(board):
    p = board.pieces
    return sorted((board.nets[n].name if n != NO_NET else "", int(layer), round(float(x1), 6), round(float(y1), 6),
                   round(float(x2), 6), round(float(y2), 6), round(float(w), 6))
                  for n, layer, x1, y1, x2, y2, w in zip(p.net, p.layer, p.x1, p.y1, p.x2, p.y2, p.width))


def copper_by_layer_and_net(board) -> dict:
    out: dict = {}
    for r in board.regions:
        name = board.nets[r.net].name if r.net != NO_NET else ""
        out.setdefault((r.layer, name), []).append(r.polygon)
    return {k: shapely.union_all(v) for k, v in out.items()}


@pytest.mark.parametrize("case", CASES)
def test_both_doors_read_the_same_board(case):
    a = load_board(json_path(case))
    b = load_package([str(package_path(case))])
    assert a.stackup.names == b.stackup.names
    assert [c.thickness_mm for c in a.stackup.layers] == [c.thickness_mm for c in b.stackup.layers]
    assert [(d.thickness_mm, d.er, d.loss_tangent) for d in a.stackup.dielectrics] == \
        [(d.thickness_mm, d.er, d.loss_tangent) for d in b.stackup.dielectrics]
    assert piece_key(a) == piece_key(b)
    ra, rb = copper_by_layer_and_net(a), copper_by_layer_and_net(b)
    assert sorted(ra) == sorted(rb)
    for key, shape in ra.items():
        # the same polygons: area and symmetric difference to rounding (1 nm grid, exact here)
        assert rb[key].area == pytest.approx(shape.area, rel=1e-12), key
        assert shapely.symmetric_difference(shape, rb[key]).area < 1e-9, key
    va, vb = a.vias, b.vias
    assert sorted(zip(np.round(va.x, 6), np.round(va.y, 6), va.first_layer, va.last_layer, np.round(va.drill, 6))) == \
        sorted(zip(np.round(vb.x, 6), np.round(vb.y, 6), vb.first_layer, vb.last_layer, np.round(vb.drill, 6)))
    assert [a.nets[int(n)].name for n in va.net] == [b.nets[int(n)].name for n in vb.net]
    assert shapely.equals(a.outline, b.outline)


def same_findings(a, b) -> None:
    assert [f.id for f in a.findings] == [f.id for f in b.findings]
    for x, y in zip(a.findings, b.findings):
        assert (x.rule, x.kind, x.aggressor, x.victim, x.layers, x.severity) == \
            (y.rule, y.kind, y.aggressor, y.victim, y.layers, y.severity)
        for key in ("value", "limit", "length_mm", "area_mm2", "c12_pf", "noise_mv", "keep_fraction"):
            u, v = getattr(x, key), getattr(y, key)
            assert (u is None) == (v is None), key
            if u is not None:
                assert v == pytest.approx(u, rel=1e-6, abs=1e-12), (x.id, key)


def coupling_rows(result) -> list[tuple]:
    an = result.analysis
    c = an.couplings
    return sorted((int(c.kind[i]), *sorted((an.net_name(int(c.net_a[i])), an.net_name(int(c.net_b[i])))),
                   int(c.layer_a[i]), int(c.layer_b[i]), float(c.length_mm[i]), float(c.open_fraction[i]),
                   float(c.c12_pf[i])) for i in range(len(c)))


#: Cases the default rule set must have findings for: a clock coupling onto
#: the sensor (directly or through the island) far over the 10 mV noise
#: budget. Nothing is asserted of the others here (the guard cases await
#: their physics; the split case is checked with its own rule below).
WITH_FINDINGS = ("void_under_run", "empty_layer", "ground_strip", "island")


@pytest.mark.parametrize("case", CASES)
def test_both_doors_give_the_same_findings(case):
    from_json, from_fab = results(case)
    if case in WITH_FINDINGS:
        assert any(f.kind == "noise-budget" and (f.aggressor, f.victim) == (CLOCK, SENSOR) for f in from_json.findings)
    same_findings(from_json, from_fab)
    # and the same coupling rows underneath, findings or not
    ja, fa = coupling_rows(from_json), coupling_rows(from_fab)
    assert [r[:5] for r in ja] == [r[:5] for r in fa]
    for x, y in zip(ja, fa):
        assert y[5:] == pytest.approx(x[5:], rel=1e-6, abs=1e-12)


# --------------------------------------------------------------------------- the physics of each case


@pytest.mark.parametrize("door", [0, 1], ids=["json", "fab"])
def test_void_under_run_couples_over_the_void_only(door):
    """Hand calculation (void_under_run.json description): the window is
    x 5..30 by |y - 10| <= 0.15/2 + 0.535 = 0.61 mm; the void x 12.5..22.5,
    |y - 10| <= 1.5 covers its whole width, so 22.5 - 12.5 = 10 mm are open:
    open fraction 10 / 25 = 0.4, shielded by L2 (index 1) elsewhere."""
    result = results("void_under_run")[door]
    c = result.analysis.couplings
    (row,) = rows_between(result, BROADSIDE)
    assert c.length_mm[row] == pytest.approx(25.0, abs=1e-9)  # x 5 -> 30
    assert c.open_fraction[row] == pytest.approx(0.4, abs=1e-9)
    assert c.shield_layer[row] == 1
    # C12 = C12'(open cross-section) x open length (checker/shielding.py); the
    # open cross-section is the empty-layer board's (layers between are taken
    # as dielectric, L4 the plane below in both), so C12 = 0.4 x its C12
    empty = results("empty_layer")[door]
    (erow,) = rows_between(empty, BROADSIDE)
    assert c.c12_pf[row] == pytest.approx(0.4 * empty.analysis.couplings.c12_pf[erow], rel=1e-6)
    # the noise finding says how much is shielded: 25 - 10 = 15 of 25 mm, by L2's GND
    (noise,) = [f for f in result.findings if f.kind == "noise-budget"]
    assert "15.00 of 25.00 mm of the broadside run shielded by reference copper on L2 (GND)" in noise.coupling_path


@pytest.mark.parametrize("door", [0, 1], ids=["json", "fab"])
def test_empty_layer_couples_over_the_whole_run(door):
    result = results("empty_layer")[door]
    c = result.analysis.couplings
    (row,) = rows_between(result, BROADSIDE)
    # nothing on L2: the whole 25 mm run is open (open fraction 1), shielded by no layer
    assert (c.length_mm[row], c.open_fraction[row], c.shield_layer[row]) == (pytest.approx(25.0), 1.0, -1)
    assert c.c12_pf[row] > 0


@pytest.mark.parametrize("door", [0, 1], ids=["json", "fab"])
def test_ground_strip_narrower_than_the_window_counts_as_open(door):
    """The strip covers |y - 10| <= 0.25 of the |y - 10| <= 0.61 window:
    partial cover is open (conservative, checker/shielding.py), so the run
    couples as over the empty layer: open fraction 1 and the very same C12
    (same cross-section, same length)."""
    result = results("ground_strip")[door]
    c = result.analysis.couplings
    (row,) = rows_between(result, BROADSIDE)
    assert c.open_fraction[row] == 1.0
    empty = results("empty_layer")[door]
    (erow,) = rows_between(empty, BROADSIDE)
    assert c.c12_pf[row] == pytest.approx(empty.analysis.couplings.c12_pf[erow], rel=1e-9)
    # and the findings carry the same numbers
    assert [(f.rule, f.value) for f in result.findings] == \
        [(f.rule, pytest.approx(f.value, rel=1e-9)) for f in empty.findings]


@pytest.mark.parametrize("door", [0, 1], ids=["json", "fab"])
def test_island_relays_the_clock_onto_the_sensor(door):
    """island.json: the clock and the sensor are 1.975 mm apart in plan,
    beyond the L1/L3 search band max(0.5, 2.5 x 0.535) = 1.3375 mm, so
    they do not couple directly; the floating island (25 x 3 = 75 mm^2 on
    L3) relays the clock onto the sensor."""
    result = results("island")[door]
    an = result.analysis
    c = an.couplings
    assert not np.any(c.kind != RELAY)  # no direct coupling at all
    (row,) = rows_between(result, RELAY)
    assert c.c12_pf[row] > 0
    assert len(an.islands) == 1
    assert (an.islands[0].layer, an.islands[0].area_mm2) == (2, pytest.approx(75.0, rel=1e-9))
    # the noise the relay carries (far over the 10 mV budget: no plane to
    # ground the island) is reported, and the finding names the island
    (noise,) = [f for f in result.findings if f.kind == "noise-budget"]
    assert (noise.aggressor, noise.victim, noise.layers) == (CLOCK, SENSOR, ("L1", "L3"))
    assert "relayed through floating copper (island 1 on L3" in noise.coupling_path
    assert "75 mm^2" in noise.coupling_path  # 25 x 3 mm


@pytest.fixture(scope="module")
def strict_gap_rules(tmp_path_factory):
    """The default rules with the reference-gap rule at 0.5 mm: the shipped
    1 mm limit reports stretches *longer* than 1 mm, and this split is
    exactly 1 mm wide."""
    path = tmp_path_factory.mktemp("rules") / "gap.yaml"
    path.write_text("version: 1\nextends: default\nrules:\n"
                    "  - {name: fast-net-over-plane-gap, kind: reference-gap, aggressor: [clocks, switch-nodes],"
                    " severity: error, max_length: 0.5 mm}\n")
    return load_ruleset(path)


def test_split_plane_clock_crosses_the_gap(strict_gap_rules):
    """split_plane.json: the clock (x = 17.5, y 3 -> 17) crosses the 1 mm
    gap between the two GND regions of L2 (y 9.5 .. 10.5) at 90 degrees:
    hand calculation 10.5 - 9.5 = 1 mm of its centreline over no L2 copper,
    L2 being its nearest reference layer (0.2 mm; L4 is 0.77 mm away)."""
    boards = (load_board(json_path("split_plane")), load_package([str(package_path("split_plane"))]))
    found = []
    for board in boards:
        result = check_board(board, strict_gap_rules)
        g = result.analysis.return_gaps
        names = [result.analysis.net_name(int(n)) for n in g.net]
        assert names == [CLOCK]
        assert (int(g.layer[0]), int(g.ref_layer[0])) == (0, 1)
        assert g.length_mm[0] == pytest.approx(1.0, abs=1e-6)
        (f,) = [f for f in result.findings if f.kind == "reference-gap"]
        assert (f.aggressor, f.victim, f.layers) == (CLOCK, "GND", ("L1", "L2"))
        assert f.value == pytest.approx(1.0, abs=1e-6)
        assert f.at[1] == pytest.approx(10.0, abs=1e-6)  # in the middle of the gap
        found.append(result)
    same_findings(*found)


@pytest.mark.parametrize("case, xs", [("guard_stitched", [5, 10, 15, 20, 25, 30]), ("guard_one_end", [5])])
def test_guard_boards_load_with_their_stitching(case, xs):
    """The guard cases only need to load identically through both doors
    (test_both_doors_read_the_same_board); their expected physics is for
    the guard work to add. Here: the GND vias are where the description
    puts them (y 10.4, on the guard; both ends and every 5 mm, or one end),
    through L1 -> L4, and they join the guard trace to the GND planes."""
    for board in (load_board(json_path(case)), load_package([str(package_path(case))])):
        v = board.vias
        assert sorted(np.round(v.x, 6).tolist()) == xs
        assert np.allclose(v.y, 10.4)
        assert v.first_layer.tolist() == [0] * len(xs) and v.last_layer.tolist() == [3] * len(xs)
        assert {board.nets[int(n)].name for n in v.net} == {"GND"}
        guard = [i for i in range(len(board.pieces)) if board.nets[int(board.pieces.net[i])].name == "GND"]
        assert len(guard) == 1 and board.pieces.layer[guard[0]] == 0


@pytest.mark.parametrize("door", [0, 1], ids=["json", "fab"])
def test_guard_stitched_is_credited_and_one_end_is_reported(door):
    """Stitched: GND vias at both ends and every 5 mm, far below lambda/20
    at the default clock class's 25 MHz (292 mm in er 4.2, common-practice
    limit): credited, the edge C12 drops. One end: a single via at x = 5,
    so the guard's other 25 mm run free: not credited (the pair couples as
    without a guard) and reported by the default rule guard-not-grounded,
    value 25 mm, limit 0."""
    stitched = results("guard_stitched")[door]
    one_end = results("guard_one_end")[door]
    assert stitched.analysis.guards.state == ["stitched"]
    assert one_end.analysis.guards.state == ["one end"]
    assert stitched.analysis.guards.max_gap_mm[0] == pytest.approx(5.0, abs=1e-6)
    s_rows = rows_between(stitched, EDGE)
    o_rows = rows_between(one_end, EDGE)
    assert (stitched.analysis.couplings.guard_factor[s_rows] < 1).all()
    assert (one_end.analysis.couplings.guard_factor[o_rows] == 1).all()
    assert stitched.analysis.couplings.c12_pf[s_rows].sum() < one_end.analysis.couplings.c12_pf[o_rows].sum()
    assert not [f for f in stitched.findings if f.kind == "guard-grounding"]
    (f,) = [f for f in one_end.findings if f.kind == "guard-grounding"]
    assert (f.aggressor, f.victim, f.value, f.limit) == (CLOCK, SENSOR, pytest.approx(25.0, abs=1e-6), 0.0)


@pytest.mark.parametrize("door", [0, 1], ids=["json", "fab"])
def test_crossing_angle_counts_only_the_open_stretch(door):
    """The 25 mm run is parallel (0 deg) and overlapped, but only the 10 mm
    over the void is unshielded: the crossing-angle rule measures 10 mm
    (hand calculation in the board's description), not 25."""
    (f,) = [f for f in results("void_under_run")[door].findings if f.kind == "crossing-angle"]
    assert f.value == pytest.approx(10.0, abs=1e-6)
    (g,) = [f for f in results("empty_layer")[door].findings if f.kind == "crossing-angle"]
    assert g.value == pytest.approx(25.0, abs=1e-6)
