"""Shielding decided by the copper that is there (checker.shielding).

Hand-worked geometry is beside each expected value; the physics checks
compare with the parallel-plate limit (any electromagnetics text, e.g.
Cheng, Field and Wave Electromagnetics, 2nd ed., sec. 3-10) and with the
exact zero a full grounded plane between two conductors must give.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.constants import epsilon_0

from checker.analysis import BROADSIDE, analyse
from checker.physics.broadside import broadside_section
from checker.physics.fieldsolve import Conductor, CrossSection, Slab, solve
from checker.readers.board_json import read_board_dict
from checker.ruleset import default_ruleset, load_ruleset
from checker.shielding import effective_stackup, reference_copper, reference_mask

W = 0.15  # trace width, mm


def stackup(roles=("signal", "plane", "signal")):
    return [
        {"copper": "L1", "role": roles[0], "thickness": 0.035},
        {"dielectric": "d1", "thickness": 0.2, "er": 4.2},
        {"copper": "L2", "role": roles[1], "thickness": 0.035},
        {"dielectric": "d2", "thickness": 0.2, "er": 4.2},
        {"copper": "L3", "role": roles[2], "thickness": 0.035},
    ]


def make(regions=(), roles=("signal", "plane", "signal"), width=W, extra_tracks=()):
    """CLK on L1 over SENSE on L3, both from x = 0 to 25 at y = 0."""
    return read_board_dict({
        "format": "couplint-board", "version": 1, "name": "t", "stackup": stackup(roles),
        "nets": [{"name": "CLK"}, {"name": "SENSE"}, {"name": "GND"}, {"name": "ISLAND"}],
        "tracks": [{"layer": "L1", "net": "CLK", "width": width, "points": [[0, 0], [25, 0]]},
                   {"layer": "L3", "net": "SENSE", "width": width, "points": [[0, 0], [25, 0]]},
                   *extra_tracks],
        "regions": list(regions),
        "outline": [[-20, -20], [45, -20], [45, 20], [-20, 20]],
    }, "t.json")


def plane(holes=()):
    return {"layer": "L2", "net": "GND", "outline": [[-20, -20], [45, -20], [45, 20], [-20, 20]],
            "holes": [list(h) for h in holes]}


def broadside_rows(a):
    c = a.couplings
    return c.take(np.flatnonzero(c.kind == BROADSIDE))


def open_c12_per_m(board, w=W):
    """C12' (F/m) of the L1/L3 cross-section with nothing on L2, solved
    directly here at a finer resolution than the tables."""
    st = effective_stackup(board.stackup, reference_copper(board, ("GND*",)))
    return solve(broadside_section(st, 0, 2, w, w, 0.0), 2.0).c12


def test_reference_nets_by_pattern():
    assert reference_mask(["GND", "AGND_1", "VSS", "CLK", "SENSE_GND"], ("GND*", "AGND*", "VSS*", "*_GND")).tolist() \
        == [True, True, True, False, True]
    assert default_ruleset().settings.reference_nets[0] == "GND"


def test_solid_plane_between_shields_everything():
    a = analyse(make([plane()]), default_ruleset())
    assert len(broadside_rows(a)) == 0
    assert any(n.endswith("(no broadside pair to measure): L1/L3") for n in a.notes)


def test_void_under_the_run_couples_over_its_length():
    """A 10 mm void (x 5..15) in the L2 plane under a 25 mm run: the window
    is |y| <= W/2 + m with m = 0.2 + 0.035 + 0.2 = 0.435 mm (vertical
    distance L1-L3), i.e. |y| <= 0.51 mm, inside the void's |y| <= 3 mm, so
    exactly 10 mm of the run is open: open fraction 10 / 25 = 0.4."""
    b = make([plane([[[5, -3], [15, -3], [15, 3], [5, 3]]])])
    rows = broadside_rows(analyse(b, default_ruleset()))
    assert len(rows) == 1
    assert rows.open_fraction[0] == pytest.approx(0.4, abs=1e-9)
    assert rows.shield_layer[0] == 1
    # C12 = C12'(open cross-section) x 10 mm; tables within 3 % of a direct solve (broadside docstring)
    assert rows.c12_pf[0] == pytest.approx(open_c12_per_m(b) * 0.010 * 1e12, rel=0.03)


def test_void_narrower_than_the_window_counts_as_open():
    """A slot |y| <= 0.3 mm is narrower than the window (|y| <= 0.51 mm):
    partial cover errs toward coupling, so the slot's whole 4 mm length is
    open: 4 / 25 = 0.16."""
    b = make([plane([[[10, -0.3], [14, -0.3], [14, 0.3], [10, 0.3]]])])
    rows = broadside_rows(analyse(b, default_ruleset()))
    assert rows.open_fraction[0] == pytest.approx(0.16, abs=1e-9)


def test_empty_layer_between_couples_fully():
    b = make([])
    a = analyse(b, default_ruleset())
    rows = broadside_rows(a)
    assert len(rows) == 1 and rows.open_fraction[0] == 1.0
    per_m = rows.c12_pf[0] / 25e-3 * 1e-12
    # tens of pF/m, above the parallel-plate value eps0 er w / d (fringing adds to it):
    # 8.854e-12 * 4.2 * 0.15 / 0.435 = 12.8 pF/m
    pp = epsilon_0 * 4.2 * W / 0.435
    assert pp == pytest.approx(12.82e-12, rel=1e-3)
    assert 1.5 * pp < per_m < 10 * pp
    assert per_m == pytest.approx(open_c12_per_m(b), rel=0.03)


def test_wide_strips_approach_the_parallel_plate_limit():
    """Two 8 mm strips on L1 and L3 with L2 empty: C12' -> eps0 er w / d as
    w/d grows (parallel plates, any electromagnetics text); with the
    fringing at both edges it reads a few % above (w/d = 18)."""
    b = make([], width=8.0)
    per_m = open_c12_per_m(b, 8.0)
    pp = epsilon_0 * 4.2 * 8.0 / 0.435
    assert 1.0 < per_m / pp < 1.15


def test_roles_declared_or_not_give_the_same_answer():
    holes = [[[5, -3], [15, -3], [15, 3], [5, 3]]]
    declared = analyse(make([plane(holes)]), default_ruleset())
    none = analyse(make([plane(holes)], roles=("signal", "signal", "signal")), default_ruleset())
    assert broadside_rows(declared).c12_pf.tolist() == broadside_rows(none).c12_pf.tolist()
    assert declared.board.stackup.layers[1].role == none.board.stackup.layers[1].role == "plane"


def test_plane_declared_but_empty_does_not_shield():
    """The export says L2 is a plane, but no copper is drawn there."""
    a = analyse(make([], roles=("signal", "plane", "signal")), default_ruleset())
    assert len(broadside_rows(a)) == 1
    assert a.board.stackup.layers[1].role == "signal"


def test_copper_of_a_non_reference_net_does_not_shield(tmp_path):
    """The same solid plane, drawn on a net that is not a reference net."""
    island = dict(plane(), net="ISLAND")
    a = analyse(make([island]), default_ruleset())
    assert broadside_rows(a).open_fraction.tolist() == [1.0]


def test_planes_shield_false_ignores_the_plane(tmp_path):
    path = tmp_path / "r.yaml"
    path.write_text("version: 1\nextends: default\nsettings:\n  planes_shield: false\n")
    rows = broadside_rows(analyse(make([plane()]), load_ruleset(path)))
    assert rows.open_fraction.tolist() == [1.0]


def test_reference_nets_setting(tmp_path):
    """With no reference nets the GND plane is just copper: nothing shields."""
    path = tmp_path / "r.yaml"
    path.write_text("version: 1\nextends: default\nsettings:\n  reference_nets: []\n")
    a = analyse(make([plane()]), load_ruleset(path))
    assert broadside_rows(a).open_fraction.tolist() == [1.0]


def test_full_grounded_plane_between_gives_exactly_zero():
    """Field solver: a grounded plane spanning the whole domain between two
    conductors separates them; the mutual capacitance is exactly 0."""
    cs = CrossSection(
        (Conductor(-0.1, 0.1, 0.5, 0.535, 0), Conductor(-0.1, 0.1, 0.0, 0.035, 1)),
        (Slab(-1.0, 2.0, 4.2),), (0.27,))
    r = solve(cs, 1.0)
    assert r.c12 == 0.0
    assert r.to_ground(0) > 0 and r.to_ground(1) > 0
