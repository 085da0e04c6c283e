"""A net's own side-by-side pieces (checker.ownruns) in its capacitance to ground.

Reference: a direct field solve of the two legs as one conductor (both
rectangles on the same net: the solver's Maxwell entry for that net), the
physics this module approximates from below.
"""

from __future__ import annotations

import numpy as np
import pytest

from checker.analysis import analyse
from checker.ownruns import own_mutual_pf
from checker.physics.edge import ground_section
from checker.physics.fieldsolve import Conductor, CrossSection, solve
from checker.readers.board_json import read_board_dict
from checker.ruleset import default_ruleset

STACKUP = [{"copper": "L1", "role": "signal", "thickness": 0.035},
           {"dielectric": "d", "thickness": 0.2, "er": 4.2},
           {"copper": "L2", "role": "plane", "thickness": 0.035}]
OUTLINE = [[-10, -10], [40, -10], [40, 10], [-10, 10]]


def board(points):
    return read_board_dict({
        "format": "couplint-board", "version": 1, "name": "m", "stackup": STACKUP,
        "nets": [{"name": "AIN_M"}, {"name": "GND"}],
        "tracks": [{"layer": "L1", "net": "AIN_M", "width": 0.15, "points": points}],
        "regions": [{"layer": "L2", "net": "GND", "outline": OUTLINE}], "outline": OUTLINE}, "m.json")


def test_pieces_joined_end_to_end_share_nothing():
    assert own_mutual_pf(board([[0, 0], [10, 0], [20, 0]]), np.array([True, False]), 1.0, 10.0)[0] == 0.0


@pytest.mark.parametrize("pitch", [0.25, 0.35])
def test_two_legs_of_one_net_stay_a_lower_bound_close_to_the_direct_solve(pitch):
    """Legs 20 mm long, 0.15 mm wide, centre to centre ``pitch`` (gaps 0.1
    and 0.2 mm), joined at one end: the sum of the pieces alone less twice
    their mutual capacitance is at most the net's capacitance from a direct
    solve of both legs as one conductor (times 20 mm; the 0.1-0.2 mm joint
    left out, which the sum includes), and within 10 % of it; the sum alone
    was 13-23 % above it (measured)."""
    b = board([[0, 0], [20, 0], [20, pitch], [0, pitch]])
    a = analyse(b, default_ruleset())
    alone = float(a.c2g_pf[0]) - 10.0  # the default set's node capacitance of AIN*
    own = float(own_mutual_pf(b, np.array([True, False]), 1.0, 10.0)[0])
    st = a.board.stackup
    cs = ground_section(st, 0, 0.15)
    leg = cs.conductors[0]
    both = CrossSection((leg, Conductor(leg.x0 + pitch, leg.x1 + pitch, leg.y0, leg.y1, 0)), cs.slabs, cs.planes,
                        blocks=cs.blocks)
    direct = float(solve(both, 3.0, richardson=True).extrapolated[0, 0]) * 0.020 * 1e12  # pF for 20 mm
    bound = alone - 2 * own
    assert bound <= direct * 1.01  # the joint (about 0.01 mm^2 of extra copper) the direct solve leaves out
    assert bound >= 0.9 * direct
    assert alone > 1.1 * direct


def test_the_edge_model_key_is_the_analysis_one():
    from checker import analysis, ownruns

    assert ownruns.EDGE == analysis.EDGE


def test_a_trace_drawn_twice_counts_once():
    """Two identical strokes of one net are one conductor: the sum of the
    pieces alone less twice the shared part is exactly one stroke's
    capacitance (the narrower piece's own capacitance over the overlap is
    what was counted twice)."""
    b = read_board_dict({
        "format": "couplint-board", "version": 1, "name": "twice", "stackup": STACKUP,
        "nets": [{"name": "AIN_M"}, {"name": "GND"}],
        "tracks": [{"layer": "L1", "net": "AIN_M", "width": 0.15, "points": [[0, 0], [20, 0]]},
                   {"layer": "L1", "net": "AIN_M", "width": 0.15, "points": [[0, 0], [20, 0]]}],
        "regions": [{"layer": "L2", "net": "GND", "outline": OUTLINE}], "outline": OUTLINE}, "twice.json")
    a = analyse(b, default_ruleset())
    alone = float(a.c2g_pf[0]) - 10.0
    own = float(own_mutual_pf(b, np.array([True, False]), 1.0, 10.0)[0])
    assert alone - 2 * own == pytest.approx(alone / 2, rel=1e-9)


def test_an_edge_model_is_reused_only_inside_its_widths():
    """Clamping a wider leg to a narrower width knot would read C12 low (and
    take off too little): a model whose knots do not span the widths asked
    is not reused."""
    from checker.ownruns import _edge_model
    from checker.physics.edge import EdgeModel

    b = analyse(board([[0, 0], [20, 0]]), default_ruleset()).board
    narrow = EdgeModel(b.stackup, 0, [0.1, 0.15], max_gap_mm=1.0)
    models = {(1, 0, 0): narrow}
    gap = np.array([0.2])
    assert _edge_model(b, 0, np.array([0.12]), np.array([0.14]), gap, models) is narrow
    assert _edge_model(b, 0, np.array([0.6]), np.array([0.6]), gap, models) is not narrow
