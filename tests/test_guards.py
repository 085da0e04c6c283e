"""Guard traces (checker.guards) and the guard-grounding rule kind.

Geometry and stitching distances are worked by hand beside each value; the
wavelength is c0 / (f sqrt(er)) (any electromagnetics text); lambda/20 as
the stitching limit is common practice, not a derived value.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.constants import c as C0

from checker.analysis import EDGE, analyse
from checker.guards import guard_section
from checker.physics.edge import edge_section
from checker.physics.fieldsolve import solve
from checker.readers.board_json import read_board_dict
from checker.ruleset import default_ruleset, load_ruleset
from checker.runner import check_board

STACKUP = [{"copper": "L1", "role": "signal", "thickness": 0.035},
           {"dielectric": "d1", "thickness": 0.2, "er": 4.2},
           {"copper": "L2", "role": "plane", "thickness": 0.035}]
OUTLINE = [[-20, -20], [45, -20], [45, 20], [-20, 20]]


def board(vias, guard=True, pour_ends=False):
    """CLK (y = 0) and SENSE (y = 0.8) on L1, 0.15 mm wide, x 0..25: gap
    0.8 - 0.15 = 0.65 mm; a 0.2 mm GND guard at y = 0.4 between them; a GND
    plane on L2; GND vias (pad 0.4 mm) at x = ``vias`` on the guard."""
    tracks = [{"layer": "L1", "net": "CLK", "width": 0.15, "points": [[0, 0], [25, 0]]},
              {"layer": "L1", "net": "SENSE", "width": 0.15, "points": [[0, 0.8], [25, 0.8]]}]
    if guard:
        tracks.append({"layer": "L1", "net": "GND", "width": 0.2, "points": [[0, 0.4], [25, 0.4]]})
    regions = [{"layer": "L2", "net": "GND", "outline": OUTLINE}]
    if pour_ends:  # small GND pours on L1 that both guard ends run into
        regions += [{"layer": "L1", "net": "GND", "outline": [[-3, 0.2], [0.05, 0.2], [0.05, 0.6], [-3, 0.6]]},
                    {"layer": "L1", "net": "GND", "outline": [[24.95, 0.2], [28, 0.2], [28, 0.6], [24.95, 0.6]]}]
    return read_board_dict({
        "format": "couplint-board", "version": 1, "name": "g", "stackup": STACKUP,
        "nets": [{"name": "CLK"}, {"name": "SENSE"}, {"name": "GND"}], "tracks": tracks, "regions": regions,
        "vias": [{"at": [x, 0.4], "drill": 0.2, "pad": 0.4, "net": "GND", "from": "L1", "to": "L2"} for x in vias],
        "outline": OUTLINE}, "g.json")


def edge_row(a):
    (row,) = np.flatnonzero(a.couplings.kind == EDGE)
    return row


#: lambda/20 at 25 MHz (the default rule set's clock class) in er 4.2:
#: 0.05 * 299792458 / (25e6 * sqrt(4.2)) = 0.29257 m
LIMIT_25MHZ_MM = 0.05 * C0 / (25e6 * np.sqrt(4.2)) * 1e3


def test_stitched_guard_is_credited_with_a_field_solved_reduction():
    a = analyse(board([0, 5, 10, 15, 20, 25]), default_ruleset())
    g = a.guards
    assert g.state == ["stitched"]
    assert g.max_gap_mm[0] == pytest.approx(5.0, abs=1e-9)  # vias every 5 mm
    assert g.limit_mm[0] == pytest.approx(LIMIT_25MHZ_MM, rel=1e-9)
    assert LIMIT_25MHZ_MM == pytest.approx(292.57, abs=0.01)
    row = edge_row(a)
    # the reduction against a direct 3-conductor solve at a finer resolution:
    # guard centre 0.4 from CLK's centre = 0.325 mm from CLK's edge
    st = a.board.stackup
    ratio = solve(guard_section(st, 0, 0.15, 0.15, 0.65, 0.2, 0.325), 3.0).c12 / \
        solve(edge_section(st, 0, 0.15, 0.15, 0.65), 3.0).c12
    assert 0.0 < ratio < 1.0
    assert a.couplings.guard_factor[row] == pytest.approx(ratio, rel=0.02)
    assert a.couplings.guard_factor[row] >= ratio  # errs toward more coupling
    unguarded = analyse(board([], guard=False), default_ruleset())
    assert a.couplings.c12_pf[row] == pytest.approx(unguarded.couplings.c12_pf[edge_row(unguarded)] * ratio,
                                                    rel=0.03)


@pytest.mark.parametrize("vias, state, gap", [
    ([0], "one end", 25.0),     # via at x = 0 only: 25 mm run free to x = 25
    ([25], "one end", 25.0),
    ([], "floating", 25.0),     # nothing ties it down: the whole 25 mm
])
def test_ungrounded_guard_is_not_credited(vias, state, gap):
    a = analyse(board(vias), default_ruleset())
    assert a.guards.state == [state]
    assert a.guards.max_gap_mm[0] == pytest.approx(gap, abs=1e-9)
    assert a.couplings.guard_factor[edge_row(a)] == 1.0


def test_guard_ending_on_pours_counts_as_grounded_at_both_ends():
    a = analyse(board([], pour_ends=True), default_ruleset())
    assert a.guards.state == ["stitched"]
    assert a.guards.max_gap_mm[0] == pytest.approx(25.0, abs=1e-9)


def test_sparse_stitching_for_a_fast_edge(tmp_path):
    """rise time 0.1 ns -> f = 0.35 / 0.1 ns = 3.5 GHz; lambda/20 in er 4.2 =
    0.05 * 299792458 / (3.5e9 * 2.04939) = 2.0898 mm < 5 mm between vias."""
    path = tmp_path / "r.yaml"
    path.write_text("version: 1\nnet_classes:\n  fast: {nets: [CLK], swing: 3.3 V, rise_time: 0.1 ns}\n"
                    "  quiet: {nets: [SENSE], resistance: 10 kohm}\n"
                    "rules:\n  - {name: guards, kind: guard-grounding, aggressor: fast, victim: quiet}\n")
    result = check_board(board([0, 5, 10, 15, 20, 25]), load_ruleset(path))
    g = result.analysis.guards
    assert g.state == ["sparse"] and g.limit_mm[0] == pytest.approx(2.0898, abs=1e-4)
    (f,) = result.findings
    assert (f.rule, f.aggressor, f.victim, f.value) == ("guards", "CLK", "SENSE", pytest.approx(5.0))
    assert f.limit == pytest.approx(2.0898, abs=1e-4) and "stitched 5.00 mm apart" in f.message


def test_rule_reports_one_end_guard(tmp_path):
    path = tmp_path / "r.yaml"
    path.write_text("version: 1\nextends: default\nrules:\n"
                    "  - {name: guards, kind: guard-grounding, aggressor: clocks, victim: sensitive-analog}\n")
    findings = [f for f in check_board(board([0]), load_ruleset(path)).findings if f.rule == "guards"]
    (f,) = findings
    assert "GND guard between CLK and SENSE on L1 is grounded at one end only" in f.message
    assert f.value == pytest.approx(25.0)
    assert not [f for f in check_board(board([0, 5, 10, 15, 20, 25]), load_ruleset(path)).findings
                if f.rule == "guards"]


def test_overlay_draws_guard_and_stitching_vias(tmp_path):
    from checker.report.svg import render_svg

    path = tmp_path / "r.yaml"
    path.write_text("version: 1\nextends: default\nrules:\n"
                    "  - {name: guards, kind: guard-grounding, aggressor: clocks, victim: sensitive-analog}\n")
    svg = render_svg(check_board(board([0]), load_ruleset(path)))
    assert svg.count('data-role="guard"') == 1 and "guard (GND): one end, longest free stretch 25 mm" in svg
    assert svg.count('data-role="stitch"') == 1  # the one via at x = 0


def third_net_board(net="CLK_AUX"):
    """As ``board`` but the trace in the gap (y = 0.4, 0.2 mm) is a signal net."""
    tracks = [{"layer": "L1", "net": "CLK", "width": 0.15, "points": [[0, 0], [25, 0]]},
              {"layer": "L1", "net": "SENSE", "width": 0.15, "points": [[0, 0.8], [25, 0.8]]},
              {"layer": "L1", "net": net, "width": 0.2, "points": [[0, 0.4], [25, 0.4]]}]
    return read_board_dict({
        "format": "couplint-board", "version": 1, "name": "g", "stackup": STACKUP,
        "nets": [{"name": "CLK"}, {"name": "SENSE"}, {"name": "GND"}, {"name": net}], "tracks": tracks,
        "regions": [{"layer": "L2", "net": "GND", "outline": OUTLINE}], "outline": OUTLINE}, "t.json")


def test_driven_third_net_in_the_gap_shields_like_a_grounded_conductor():
    """A trace of a driven net (its class gives an aggressor frequency and no
    resistance: CLK_AUX matches the default set's clocks) in the gap is a
    conductor at AC ground in the cross-section: the same reduction as a
    stitched guard of its width and place."""
    a = analyse(third_net_board(), default_ruleset())
    c = a.couplings
    rows = np.flatnonzero((c.kind == EDGE) & (c.net_a == a.board.net_index()["CLK"])
                          & (c.net_b == a.board.net_index()["SENSE"]))
    stitched = analyse(board([0, 5, 10, 15, 20, 25]), default_ruleset())
    assert c.guard_factor[rows].tolist() == pytest.approx(stitched.couplings.guard_factor[edge_row(stitched)])
    assert c.gap_net[rows].tolist() == [a.board.net_index()["CLK_AUX"]]
    # a net in no class (its impedance unknown) is not credited
    plain = analyse(third_net_board("DATA"), default_ruleset())
    pc = plain.couplings
    idx = plain.board.net_index()
    rows = np.flatnonzero((pc.kind == EDGE) & (pc.net_a == idx["CLK"]) & (pc.net_b == idx["SENSE"]))
    assert pc.guard_factor[rows].tolist() == [1.0]


def test_high_impedance_third_net_is_not_credited():
    """AIN_X matches the default set's sensitive-analog class, which gives a
    resistance: a high-impedance node may float, so no reduction."""
    a = analyse(third_net_board("AIN_X"), default_ruleset())
    c = a.couplings
    idx = a.board.net_index()
    rows = np.flatnonzero((c.kind == EDGE) & (c.net_a == idx["CLK"]) & (c.net_b == idx["SENSE"]))
    assert c.guard_factor[rows].tolist() == [1.0]


def strokes_board(cuts, vias):
    """``board`` with the guard drawn as several strokes joined end to end
    at x = ``cuts`` (as many exports draw it)."""
    xs = [0, *cuts, 25]
    tracks = [{"layer": "L1", "net": "CLK", "width": 0.15, "points": [[0, 0], [25, 0]]},
              {"layer": "L1", "net": "SENSE", "width": 0.15, "points": [[0, 0.8], [25, 0.8]]}]
    tracks += [{"layer": "L1", "net": "GND", "width": 0.2, "points": [[a, 0.4], [b, 0.4]]} for a, b in zip(xs, xs[1:])]
    return read_board_dict({
        "format": "couplint-board", "version": 1, "name": "g", "stackup": STACKUP,
        "nets": [{"name": "CLK"}, {"name": "SENSE"}, {"name": "GND"}], "tracks": tracks,
        "regions": [{"layer": "L2", "net": "GND", "outline": OUTLINE}],
        "vias": [{"at": [x, 0.4], "drill": 0.2, "pad": 0.4, "net": "GND", "from": "L1", "to": "L2"} for x in vias],
        "outline": OUTLINE}, "g.json")


def test_guard_in_several_strokes_is_one_guard_and_its_joints_do_not_ground_it():
    """Three strokes joined at x = 8 and 17, no via: still floating (its
    joints touch only itself); two strokes with vias at 0 and 25: grounded
    at both ends, 25 mm apart (not 12.5)."""
    a = analyse(strokes_board([8, 17], []), default_ruleset())
    assert a.guards.state == ["floating"] and a.guards.max_gap_mm[0] == pytest.approx(25.0, abs=1e-9)
    assert a.couplings.guard_factor[a.couplings.kind == EDGE].tolist() == [1.0]
    b = analyse(strokes_board([12.5], [0, 25]), default_ruleset())
    assert b.guards.state == ["stitched"] and b.guards.max_gap_mm[0] == pytest.approx(25.0, abs=1e-9)
