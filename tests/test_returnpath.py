"""Traces over gaps in their reference copper (checker.returnpath) and the
reference-gap rule kind that reads them.

Every board here is hand-built: a 0.15 mm clock trace over a GND plane with
rectangular voids, so each expected length is plain plane geometry, worked
beside it. Lengths are along the trace's centreline.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import shapely

from checker import returnpath, shielding
from checker.analysis import analyse
from checker.errors import RuleError
from checker.model import NO_NET
from checker.readers.board_json import read_board_dict
from checker.ruleset import load_ruleset
from checker.runner import check_board

W = 0.15  # trace width, mm
BIG = [[-20, -20], [45, -20], [45, 20], [-20, 20]]  # board outline and full plane, mm


def region(layer="L2", net="GND", outline=BIG, holes=()):
    return {"layer": layer, "net": net, "outline": outline, "holes": [list(h) for h in holes]}


def rect(x0, y0, x1, y1):
    return [[x0, y0], [x1, y0], [x1, y1], [x0, y1]]


def track(points, layer="L1", net="CLK", width=W):
    return {"layer": layer, "net": net, "width": width, "points": [list(p) for p in points]}


def make(regions, tracks, thicknesses=(0.2, 0.2), nets=("CLK", "SENSE", "SIG", "GND", "AGND", "DGND")):
    """Three copper layers L1, L2, L3 (0.035 mm copper) with the given
    dielectric thicknesses between them; roles are decided by the copper."""
    stackup = [{"copper": "L1", "role": "signal", "thickness": 0.035},
               {"dielectric": "d1", "thickness": thicknesses[0], "er": 4.2},
               {"copper": "L2", "role": "signal", "thickness": 0.035},
               {"dielectric": "d2", "thickness": thicknesses[1], "er": 4.2},
               {"copper": "L3", "role": "signal", "thickness": 0.035}]
    return read_board_dict({
        "format": "couplint-board", "version": 1, "name": "t", "stackup": stackup,
        "nets": [{"name": n} for n in nets], "tracks": list(tracks), "regions": list(regions),
        "outline": BIG}, "t.json")


@pytest.fixture
def rules(tmp_path):
    def load(max_length="1 mm", extra=""):
        path = tmp_path / "gap.yaml"
        path.write_text("version: 1\n"
                        "net_classes:\n  clocks: {nets: ['CLK*']}\n"
                        "rules:\n"
                        "  - {name: over-gap, kind: reference-gap, aggressor: clocks, "
                        f"max_length: {max_length}{extra}}}\n")
        return load_ruleset(path)
    return load


def gaps(board, rs):
    return analyse(board, rs).return_gaps


def findings(board, rs):
    return check_board(board, rs).findings


STRAIGHT = track([(0, 0), (25, 0)])  # CLK on L1 along y = 0, x 0..25
SLOT = rect(10, -3, 12, 3)           # a void 2 mm wide (x 10..12), 6 mm tall


# ---------------------------------------------------------------- geometry


def test_solid_plane_gives_no_stretch_and_no_finding(rules):
    b = make([region()], [STRAIGHT])
    g = gaps(b, rules())
    assert len(g) == 0
    assert g.reference_layers == {0: (1,)}  # L1's nearest (only) layer with GND copper is L2
    assert findings(b, rules("0 mm")) == []


def test_slot_crossed_at_90_degrees(rules):
    """The centreline y = 0 crosses the void x 10..12: 12 - 10 = 2.000 mm."""
    b = make([region(holes=[SLOT])], [STRAIGHT])
    g = gaps(b, rules())
    assert len(g) == 1
    assert g.length_mm[0] == pytest.approx(2.0, abs=1e-9)
    assert (g.layer[0], g.ref_layer[0], g.net[0], g.ref_net[0], g.other_ref_net[0]) == (0, 1, 0, 3, NO_NET)
    # spot: the middle of the stretch (11, 0); bbox: the stretch x 10..12 at y 0, grown by W/2 = 0.075
    assert (g.x[0], g.y[0]) == pytest.approx((11.0, 0.0))
    assert (g.xmin[0], g.ymin[0], g.xmax[0], g.ymax[0]) == pytest.approx((9.925, -0.075, 12.075, 0.075))
    (f,) = findings(b, rules())
    assert (f.kind, f.aggressor, f.victim, f.layers, f.unit) == ("reference-gap", "CLK", "GND", ("L1", "L2"), "mm")
    assert f.value == pytest.approx(2.0) and f.limit == 1.0 and f.excess == pytest.approx(2.0)  # 2 mm / 1 mm
    assert f.length_mm == pytest.approx(2.0)
    assert f.at == pytest.approx((11.0, 0.0)) and f.bbox == pytest.approx((9.925, -0.075, 12.075, 0.075))
    assert "CLK on L1 runs 2.00 mm over a gap in the GND copper of layer L2" in f.message


def test_slot_crossed_at_45_degrees(rules):
    """The centreline y = x - 11 enters the void at (10, -1) and leaves at
    (12, 1), inside |y| <= 3: sqrt(2^2 + 2^2) = 2*sqrt(2) = 2.828427 mm."""
    b = make([region(holes=[SLOT])], [track([(0, -11), (22, 11)])])
    g = gaps(b, rules())
    assert len(g) == 1
    assert g.length_mm[0] == pytest.approx(2 * math.sqrt(2), abs=1e-9)
    assert (g.x[0], g.y[0]) == pytest.approx((11.0, 0.0))  # the middle of (10, -1)-(12, 1)


def test_split_plane_of_one_net(rules):
    """Two GND shapes, x -20..10 and x 12..45, leave a 2 mm split: the
    trace crosses 12 - 10 = 2 mm of it; both sides are GND, so it is a gap
    in GND, not a split between two nets."""
    b = make([region(outline=rect(-20, -20, 10, 20)), region(outline=rect(12, -20, 45, 20))], [STRAIGHT])
    g = gaps(b, rules())
    assert g.length_mm.tolist() == pytest.approx([2.0])
    assert g.ref_net[0] == 3 and g.other_ref_net[0] == NO_NET  # nets: CLK SENSE SIG GND AGND DGND
    (f,) = findings(b, rules())
    assert f.victim == "GND" and "a gap in the GND copper" in f.message


def test_split_between_two_reference_nets(rules):
    """AGND x -20..10 and DGND x 12..45 on L2: the 2 mm stretch touches
    both at its ends (distance 0 to each), so the finding names the split;
    its victim is the first of the two by name (AGND)."""
    b = make([region(net="AGND", outline=rect(-20, -20, 10, 20)),
              region(net="DGND", outline=rect(12, -20, 45, 20))], [STRAIGHT])
    g = gaps(b, rules())
    assert g.length_mm.tolist() == pytest.approx([2.0])
    assert (g.ref_net[0], g.other_ref_net[0]) == (4, 5)
    (f,) = findings(b, rules())
    assert f.victim == "AGND" and "over the split between AGND and DGND of layer L2" in f.message


def test_another_nets_copper_on_the_plane_layer_is_a_gap(rules):
    """SIG routed on L2 across the plane (x 10.75..11.25, 0.5 mm wide) is
    cut out of the GND copper: CLK crosses 11.25 - 10.75 = 0.5 mm of it,
    under the default 1 mm, over a 0 mm limit."""
    b = make([region()], [STRAIGHT, track([(11, -10), (11, 10)], layer="L2", net="SIG", width=0.5)])
    g = gaps(b, rules())
    assert g.length_mm.tolist() == pytest.approx([0.5])
    assert findings(b, rules()) == []
    (f,) = findings(b, rules("0 mm"))
    assert f.value == pytest.approx(0.5)


def test_bend_inside_a_void_is_one_stretch(rules):
    """CLK (0,0) -> (11,0) -> (11,5) bends inside the void x 10..12,
    y -3..3: 11 - 10 = 1 mm on the first piece plus 3 - 0 = 3 mm on the
    second, joined at (11, 0) into one 4 mm stretch; the spot is the middle
    of the longer part, (11, 1.5)."""
    b = make([region(holes=[SLOT])], [track([(0, 0), (11, 0), (11, 5)])])
    g = gaps(b, rules())
    assert len(g) == 1 and g.parts[0] == 2
    assert g.length_mm[0] == pytest.approx(4.0, abs=1e-9)
    assert (g.x[0], g.y[0]) == pytest.approx((11.0, 1.5))
    # bbox: x 10..11, y 0..3, grown by W/2 = 0.075
    assert (g.xmin[0], g.ymin[0], g.xmax[0], g.ymax[0]) == pytest.approx((9.925, -0.075, 11.075, 3.075))


def test_two_crossings_are_two_findings(rules):
    """CLK crosses the void on the way out (y = 0) and back (y = 2): two
    stretches of 2 mm each, two findings with their own ids."""
    b = make([region(holes=[SLOT])], [track([(0, 0), (25, 0), (25, 2), (0, 2)])])
    g = gaps(b, rules())
    assert g.length_mm.tolist() == pytest.approx([2.0, 2.0])
    fs = findings(b, rules())
    assert sorted(f.at[1] for f in fs) == pytest.approx([0.0, 2.0])
    assert len({f.id for f in fs}) == 2


def test_max_length_and_aggressor_classes(rules):
    """A void 0.5 mm wide (x 10..10.5): 0.5 mm over the gap passes the
    default 1 mm and fails 0.2 mm. SENSE, in no aggressor class, crosses the
    same void (a row in the analysis) but never makes a finding."""
    b = make([region(holes=[rect(10, -3, 10.5, 3)])], [STRAIGHT, track([(0, 1), (25, 1)], net="SENSE")])
    g = gaps(b, rules())
    assert sorted(g.net.tolist()) == [0, 1] and g.length_mm.tolist() == pytest.approx([0.5, 0.5])
    assert findings(b, rules()) == []
    (f,) = findings(b, rules("0.2 mm"))
    assert f.aggressor == "CLK" and f.value == pytest.approx(0.5)
    assert f.excess == pytest.approx(2.5)  # 0.5 / 0.2


def test_tiles_change_no_length(rules, monkeypatch):
    """The plane is cut into tiles before lines are subtracted (speed only):
    with tiles of at most 16 vertices, 7 x 7 square voids and 15 traces
    (some straight across, some diagonal), every net's total length over
    the voids equals what shapely gives subtracting the whole cover from
    its centreline at once (the direct computation, done here)."""
    voids = [rect(2 + 4 * i, -14 + 4 * j, 3.3 + 4 * i, -12.9 + 4 * j) for i in range(7) for j in range(7)]
    tracks = [track([(0, y), (30, y + 1 + 2 * (n % 4))], net=f"CLK{n}")
              for n, y in enumerate(np.linspace(-14, 12, 15))]
    b = make([region(holes=voids)], tracks, nets=[f"CLK{n}" for n in range(15)] + ["GND"])
    monkeypatch.setattr(returnpath, "TILE_VERTICES", 16)
    assert shielding.cover_tiles(analyse(b, rules()).reference.cover[1], 16).size > 10
    g = gaps(b, rules())
    plane = shapely.Polygon(BIG, voids)
    crossing = 0
    for n, t in enumerate(tracks):
        direct = shapely.LineString(t["points"]).difference(plane).length
        crossing += direct > 0
        assert g.length_mm[g.net == n].sum() == pytest.approx(direct, abs=1e-9), n
    assert crossing >= 10  # most traces cross some voids


# ---------------------------------------------------------------- which reference layer


def two_planes(thicknesses):
    """CLK on L2 between GND planes on L1 (void x 5..7, 2 mm) and L3 (void
    x 15..18, 3 mm)."""
    return make([region(layer="L1", holes=[rect(5, -3, 7, 3)]), region(layer="L3", holes=[rect(15, -3, 18, 3)])],
                [track([(0, 0), (25, 0)], layer="L2")], thicknesses)


def test_nearest_reference_layer_above(rules):
    """L1 is 0.1 mm above L2, L3 0.3 mm below: L1 is the reference, so only
    its 7 - 5 = 2 mm void counts; L3's void is ignored."""
    g = gaps(two_planes((0.1, 0.3)), rules())
    assert g.reference_layers == {1: (0,)}
    assert g.ref_layer.tolist() == [0] and g.length_mm.tolist() == pytest.approx([2.0])
    (f,) = findings(two_planes((0.1, 0.3)), rules())
    assert f.layers == ("L1", "L2") and "of layer L1" in f.message


def test_nearest_reference_layer_below(rules):
    """L1 0.3 mm above, L3 0.1 mm below: L3 is the reference, its void
    18 - 15 = 3 mm counts."""
    g = gaps(two_planes((0.3, 0.1)), rules())
    assert g.reference_layers == {1: (2,)}
    assert g.ref_layer.tolist() == [2] and g.length_mm.tolist() == pytest.approx([3.0])
    (f,) = findings(two_planes((0.3, 0.1)), rules())
    assert f.layers == ("L2", "L3") and f.value == pytest.approx(3.0)


def test_equal_distances_check_both_layers(rules):
    """0.2 mm either way: a tie, both planes count: 2 mm over L1's void and
    3 mm over L3's."""
    g = gaps(two_planes((0.2, 0.2)), rules())
    assert g.reference_layers == {1: (0, 2)}
    assert sorted(zip(g.ref_layer.tolist(), g.length_mm.tolist())) == [(0, pytest.approx(2.0)),
                                                                       (2, pytest.approx(3.0))]
    assert len(findings(two_planes((0.2, 0.2)), rules())) == 2


def test_a_few_ground_traces_do_not_make_a_reference_layer(rules):
    """A short GND trace on L3 (0.1 mm below L2) covers far less than a
    quarter of the board, so it is not L2's reference; L1 (0.3 mm above), a
    solid plane, is: the clock over it crosses no gap."""
    b = make([region(layer="L1")], [track([(0, 0), (25, 0)], layer="L2"),
                                     track([(0, 0), (5, 0)], layer="L3", net="GND", width=0.3)], (0.3, 0.1))
    g = gaps(b, rules())
    assert g.reference_layers == {1: (0,)}
    assert len(g) == 0


def test_layer_without_reference_copper_elsewhere_is_not_checked(rules):
    """GND only on the trace's own layer (a coplanar pour): no other layer
    has reference copper, so L1 has no reference layer and no stretch."""
    b = make([region(layer="L1", outline=rect(-20, 5, 45, 20))], [STRAIGHT])
    g = gaps(b, rules("0 mm"))
    assert g.reference_layers == {0: ()} and len(g) == 0


# ---------------------------------------------------------------- rule file


def test_victim_classes_are_refused_with_file_and_place(tmp_path):
    path = tmp_path / "bad.yaml"
    path.write_text("version: 1\nnet_classes:\n  clocks: {nets: ['CLK*']}\n"
                    "rules:\n  - {name: over-gap, kind: reference-gap, aggressor: clocks, victim: clocks}\n")
    with pytest.raises(RuleError) as info:
        load_ruleset(path)
    assert str(info.value).startswith(f"{path}: rules[0].victim: kind 'reference-gap' takes no victim classes")


def test_victim_any_is_accepted(rules):
    rs = rules(extra=", victim: any")
    assert rs.rules[0].victim == () and rs.rules[0].options["max_length"] == 1.0


def test_negative_max_length_is_refused(tmp_path):
    path = tmp_path / "neg.yaml"
    path.write_text("version: 1\nrules:\n  - {name: over-gap, kind: reference-gap, max_length: -1 mm}\n")
    with pytest.raises(RuleError, match=r"neg\.yaml: rules\[0\]\.max_length"):
        load_ruleset(path)


def test_stretch_rows_are_in_a_stable_order(rules):
    """Rows sort by layer, reference layer, net, then place: the return
    crossing (y = 2) and the outgoing one (y = 0) come out by ymin."""
    b = make([region(holes=[SLOT])], [track([(0, 2), (25, 2), (25, 0), (0, 0)])])
    g = gaps(b, rules())
    assert np.all(np.diff(g.ymin) > 0)
