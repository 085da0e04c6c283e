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
    # C12 = C12'(open cross-section) x 10 mm; L1/L3 are not neighbours, so their table is the
    # coarser one that reads high: 0 to 10 % above a direct solve
    assert 1.0 <= rows.c12_pf[0] / (open_c12_per_m(b) * 0.010 * 1e12) <= 1.10


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
    assert 1.0 <= per_m / open_c12_per_m(b) <= 1.10  # the coarser far-layer table reads high


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


# --------------------------------------------------------------------------
# Floating copper: the zero-charge reduction and islands as relays
# --------------------------------------------------------------------------

from checker.analysis import RELAY  # noqa: E402
from checker.physics.network import kron_reduce, maxwell_from_mutual, mutual_form, relayed_mutual  # noqa: E402


def test_kron_reduction_is_the_series_circuit():
    """Three conductors 1, 2 and a floating s (mutual form, pF): C12 = 0.1,
    C1s = 2, C2s = 3, Csg = 5, C1g = 1, C2g = 4. Textbook circuit theory:
    C12' = C12 + C1s C2s / (C1s + C2s + Csg) = 0.1 + 6/10 = 0.7;
    C1g' = C1g + C1s (C2s... ) -- the total seen from node 1 with 2 grounded:
    C1g + C12 + (C1s series (C2s + Csg)) = 1 + 0.1 + 2*8/10 = 2.7 = C11'."""
    mutual = np.array([[0, 0.1, 2.0], [0.1, 0, 3.0], [2.0, 3.0, 0]])
    ground = np.array([1.0, 4.0, 5.0])
    reduced = kron_reduce(maxwell_from_mutual(mutual, ground), [2])
    m, g = mutual_form(reduced)
    assert m[0, 1] == pytest.approx(0.7, rel=1e-12)
    assert reduced[0, 0] == pytest.approx(2.7, rel=1e-12)
    assert relayed_mutual([2.0, 3.0], 5.0)[0, 1] == pytest.approx(0.6, rel=1e-12)
    # a grounded conductor is simply dropped: C12 stays 0.1
    assert -maxwell_from_mutual(mutual, ground)[np.ix_([0, 1], [0, 1])][0, 1] == pytest.approx(0.1)


def test_floating_sheet_between_plates_shortens_the_gap():
    """Field solve: two 20 mm plates 0.5 mm apart in air, with a floating
    0.2 mm sheet midway. Parallel plates (any electromagnetics text): a
    floating conductor of thickness t between them leaves C' = eps0 w /
    (d - t), i.e. the ratio to the empty gap is d / (d - t) = 0.5 / 0.3 =
    1.667; the edges add a little fringing to both (within 3 %)."""
    w, d, t = 20.0, 0.5, 0.2
    a = Conductor(-w / 2, w / 2, d, d + 0.01, 0)
    b = Conductor(-w / 2, w / 2, -0.01, 0.0, 1)
    s = Conductor(-w / 2, w / 2, (d - t) / 2, (d + t) / 2, 2)
    empty = solve(CrossSection((a, b), (), ()), 1.0).c12
    three = solve(CrossSection((a, b, s), (), ()), 1.0)
    relayed = -kron_reduce(three.maxwell, [2])[0, 1]
    assert empty == pytest.approx(epsilon_0 * w / d, rel=0.06)
    assert relayed / empty == pytest.approx(d / (d - t), rel=0.03)
    # with the sheet held at 0 V instead (grounded), almost nothing couples
    assert three.c12 < 0.05 * empty


def island_board(plane_between=False):
    """CLK (L1, y = 0, x 0..25, 0.15 mm) over a floating island on L3
    (x 0..25, |y| <= 1); SENSE on L3 at y = 1.475, so its edge is 0.4 mm
    from the island's; too far from CLK to couple directly (edge gap in
    plan 1.475 - 0.15 = 1.325 mm > band 2.5 x 0.435 = 1.09 mm)."""
    island = {"layer": "L3", "outline": [[0, -1], [25, -1], [25, 1], [0, 1]]}
    regions = [island] + ([plane()] if plane_between else [])
    return read_board_dict({
        "format": "couplint-board", "version": 1, "name": "t", "stackup": stackup(),
        "nets": [{"name": "CLK"}, {"name": "SENSE"}, {"name": "GND"}],
        "tracks": [{"layer": "L1", "net": "CLK", "width": W, "points": [[0, 0], [25, 0]]},
                   {"layer": "L3", "net": "SENSE", "width": W, "points": [[0, 1.475], [25, 1.475]]}],
        "regions": regions,
        "outline": [[-20, -20], [45, -20], [45, 20], [-20, 20]],
    }, "t.json")


def test_island_relays_clock_onto_sensor():
    from checker.islands import find_islands, island_links

    b = island_board()
    a = analyse(b, default_ruleset())
    c = a.couplings
    assert not np.any(c.kind != RELAY)  # no direct coupling at all
    (row,) = np.flatnonzero(c.kind == RELAY)
    assert [a.net_name(int(c.net_a[row])), a.net_name(int(c.net_b[row]))] == ["CLK", "SENSE"]
    assert (len(a.islands), a.islands[0].area_mm2) == (1, pytest.approx(50.0))  # 25 x 2 mm
    # the relay is the series circuit of the island's own capacitances
    st = a.board.stackup
    signal = b.pieces
    links = island_links(a.board, a.reference, find_islands(a.board), signal, 1.0, [])
    c1s, c2s = links.c_pf
    assert links.ground_pf[0] == 0.0  # no plane anywhere: nothing to ground but the nets
    assert c.c12_pf[row] == pytest.approx(c1s * c2s / (c1s + c2s + 0.0), rel=1e-9)
    # C(CLK, island) = C'(0.15 mm over a wide strip) x 25 mm, the table against a direct solve
    wide = max(1.0, 10 * 0.435)
    per_m = solve(broadside_section(st, 0, 2, W, wide, 0.0), 1.5).c12
    assert c1s == pytest.approx(per_m * 0.025 * 1e12, rel=0.04)
    assert a.net_pairs.relay_pf.tolist() == pytest.approx([c.c12_pf[row]])


def test_island_over_a_plane_relays_less_and_names_itself(tmp_path):
    """Over a GND plane the island's C to ground is eps0 er A / h with A =
    50 mm^2, h = 0.2 mm, er 4.2: 8.854e-12 * 4.2 * 50e-6 / 0.2e-3 = 9.30 pF;
    the clock on L1 is shielded from the island (plane between): no relay."""
    from checker.islands import find_islands, island_links

    a = analyse(island_board(plane_between=True), default_ruleset())
    links = island_links(a.board, a.reference, find_islands(a.board), a.board.pieces, 1.0, [])
    assert links.ground_pf[0] == pytest.approx(9.297, rel=1e-3)
    assert not np.any(a.couplings.kind == RELAY)


def test_relay_is_named_in_the_finding(tmp_path):
    from checker.runner import check_board

    path = tmp_path / "r.yaml"
    path.write_text("version: 1\nextends: default\nrules:\n"
                    "  - {name: c12, kind: capacitance-budget, aggressor: clocks, victim: sensitive-analog,"
                    " max_c12: 0.01 pF}\n")
    result = check_board(island_board(), load_ruleset(path))
    f = next(f for f in result.findings if f.rule == "c12")
    assert "relayed through floating copper (island 1 on L3" in f.coupling_path
    noise = next(f for f in result.findings if f.kind == "noise-budget")
    assert "grounding the floating copper would remove" in noise.coupling_path


def test_overlay_draws_the_void_and_the_island(tmp_path):
    """The SVG overlay shows what leaves a run unshielded or relays it."""
    from checker.report.svg import CONTEXT_LABELS, render_svg
    from checker.runner import check_board

    path = tmp_path / "r.yaml"
    path.write_text("version: 1\nextends: default\nrules:\n"
                    "  - {name: c12, kind: capacitance-budget, aggressor: clocks, victim: sensitive-analog,"
                    " max_c12: 0.01 pF}\n")
    void = render_svg(check_board(make([plane([[[5, -3], [15, -3], [15, 3], [5, 3]]])]), load_ruleset(path)))
    assert void.count('data-role="void"') == 1 and CONTEXT_LABELS["void"] in void
    assert 'data-role="island"' not in void
    island = render_svg(check_board(island_board(), load_ruleset(path)))
    assert island.count('data-role="island"') == 1 and "island 1: floating copper on L3, 50 mm^2" in island


def test_far_layer_table_errs_high_against_direct_solves():
    """Layers that are not neighbours get a coarser table (resolution 0.5, 2
    width knots, offsets stepped from a quarter of their distance;
    checker.physics.broadside.FAR_TABLE_RESOLUTION): against direct solves
    at resolution 2 (this project's field solver, itself checked against
    exact solutions in test_fieldsolve) it must read high (toward more
    coupling) and within 10 % (measured +1.0 to +5.2 %)."""
    from checker.model import CopperLayer, Dielectric, Stackup
    from checker.physics.broadside import FAR_OFFSET_STEP, FAR_TABLE_RESOLUTION, FAR_WIDTH_KNOTS, BroadsideModel

    st = Stackup(layers=tuple(CopperLayer(f"L{i + 1}", "plane" if i in (1, 4) else "signal", 0.035)
                              for i in range(6)),
                 dielectrics=tuple(Dielectric(0.2 if i != 2 else 1.0, 4.2) for i in range(5)))
    widths = np.array([0.1, 0.15, 0.2, 0.25, 0.3] * 4)
    model = BroadsideModel(st, 0, 2, widths, widths, max_offset_mm=1.4, resolution=FAR_TABLE_RESOLUTION,
                           max_width_knots=FAR_WIDTH_KNOTS, offset_step_mm=FAR_OFFSET_STEP * 0.435)
    for wa, wb, off in ((0.1, 0.2, 0.1), (0.25, 0.12, 0.3), (0.15, 0.3, 0.7), (0.3, 0.3, 0.0), (0.25, 0.2, 0.05)):
        table = model.c12_per_m(np.array([wa]), np.array([wb]), np.array([off]))[0]
        direct = solve(broadside_section(st, 0, 2, wa, wb, off), 2.0).c12
        assert 1.0 <= table / direct <= 1.10, (wa, wb, off, table / direct)


@pytest.mark.parametrize("value, place, words", [
    ("GND", "settings.reference_nets", "expected a non-empty list of net-name patterns"),
    ('["re:(GND"]', "settings.reference_nets[0]", "bad regular expression"),
    ("[3]", "settings.reference_nets[0]", "expected a net-name pattern string"),
])
def test_bad_reference_nets_name_the_file_and_key(tmp_path, value, place, words):
    from checker.errors import RuleError

    path = tmp_path / "r.yaml"
    path.write_text(f"version: 1\nsettings:\n  reference_nets: {value}\n")
    with pytest.raises(RuleError) as info:
        load_ruleset(path)
    assert str(info.value).startswith(f"{path}: {place}: ") and words in str(info.value)


def test_bad_guard_stitch_fraction_names_the_key(tmp_path):
    from checker.errors import RuleError

    path = tmp_path / "r.yaml"
    path.write_text("version: 1\nsettings:\n  guard_stitch_fraction: 2\n")
    with pytest.raises(RuleError) as info:
        load_ruleset(path)
    assert str(info.value) == f"{path}: settings.guard_stitch_fraction: must be > 0 and <= 1, got 2"


def joined_islands_board(via=True):
    """CLK (L1, y = 0) over island A on L2 (x 0..25, |y| <= 0.5); island B
    on L3 (x 0..25, y 1..2) 0.425 mm from SENSE (L3, y = 2.5, edge at
    2.425); a plated hole on no net at (12, 0.75), pad 0.6 mm (y 0.45..1.05),
    touches A and B. A alone reaches only CLK (SENSE's centreline is 2.5 mm
    from A, beyond the 0.2 mm fringe of L2/L3), B alone only SENSE (CLK is
    1 mm from B, beyond the 0.435 mm fringe of L1/L3): only the joined
    conductor relays."""
    return read_board_dict({
        "format": "couplint-board", "version": 1, "name": "t", "stackup": stackup(("signal",) * 3),
        "nets": [{"name": "CLK"}, {"name": "SENSE"}],
        "tracks": [{"layer": "L1", "net": "CLK", "width": W, "points": [[0, 0], [25, 0]]},
                   {"layer": "L3", "net": "SENSE", "width": W, "points": [[0, 2.5], [25, 2.5]]}],
        "regions": [{"layer": "L2", "outline": [[0, -0.5], [25, -0.5], [25, 0.5], [0, 0.5]]},
                    {"layer": "L3", "outline": [[0, 1], [25, 1], [25, 2], [0, 2]]}],
        "vias": [{"at": [12, 0.75], "drill": 0.3, "pad": 0.6, "from": "L1", "to": "L3"}] if via else [],
        "outline": [[-20, -20], [45, -20], [45, 20], [-20, 20]],
    }, "t.json")


def test_islands_joined_by_a_via_relay_as_one_conductor():
    from checker.islands import by_conductor, find_islands, island_links

    apart = analyse(joined_islands_board(via=False), default_ruleset())
    assert not np.any(apart.couplings.kind == RELAY)
    a = analyse(joined_islands_board(), default_ruleset())
    assert [i.node for i in a.islands] == [0, 0]
    (row,) = np.flatnonzero(a.couplings.kind == RELAY)
    links = by_conductor(island_links(a.board, a.reference, find_islands(a.board), a.board.pieces, 1.0, []),
                         a.islands)
    c_clk, c_sense = links.c_pf  # the joined conductor's C to CLK and to SENSE (no plane: no C to ground)
    assert a.couplings.c12_pf[row] == pytest.approx(c_clk * c_sense / (c_clk + c_sense), rel=1e-9)


def test_self_crossing_copper_shapes_do_not_break_the_analysis():
    """A bow-tie region (self-crossing outline, as a careless exporter may
    write) on GND and one on no net: repaired, not an internal error; the
    no-net one is two floating islands (the bow tie's two triangles)."""
    from dataclasses import replace

    import shapely

    from checker.model import NO_NET, Region

    b = make([plane()])
    bow = shapely.Polygon([(0, -1), (10, 1), (10, -1), (0, 1)])
    assert not bow.is_valid
    gnd = b.net_index()["GND"]
    b = replace(b, regions=b.regions + (Region(1, gnd, bow, "x"), Region(2, NO_NET, bow, "y")))
    a = analyse(b, default_ruleset())
    assert len(a.islands) == 2 and all(i.area_mm2 == pytest.approx(5.0) for i in a.islands)
