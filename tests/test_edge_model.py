"""Tests of the field-solved same-layer edge coupling and capacitance to
ground (``checker.physics.edge``).

Check values and their sources:

* Cohn 1955, exact even/odd capacitances of two zero-thickness strips
  centred between planes (``capacitance.coupled_stripline_modes``; S. B.
  Cohn, IRE Trans. MTT-3(5), 29-38, 1955): C12 = (C_odd - C_even)/2.
* Cohn 1954, exact capacitance of one zero-thickness centred strip
  (``capacitance.stripline_c_per_m``; S. B. Cohn, IRE Trans. MTT-2(2),
  52-57, 1954).
* Hammerstad & Jensen 1980 microstrip, computed by scikit-rf's ``MLine``
  (C' = sqrt(er_eff) / (c0 Z0)); H-J is itself accurate to about 1 %
  (their paper), so the band is 1 % plus the solver's.
* The solver's stated accuracy (``fieldsolve``; Richardson values as
  measured in ``edge``'s docstring): 1.5 % on edge C12 up to gap = 3 w,
  1 % on a single trace.
* Within-project field-solve measurements (expectations, not outside
  references; loose bands): 35 um copper raises C12 at gap = width by
  roughly 25-40 % over zero thickness; solder mask raises outer-layer C12
  (by about 40-50 % in a simple model); a high-er substrate raises C12 at
  wide gaps by less than its effective permittivity.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.constants import c as C0

from checker.model import CopperLayer, Dielectric, Stackup
from checker.physics import capacitance as cap
from checker.physics.edge import (
    GROUND_KNOT_RATIO,
    GROUND_MAX_WIDTHS,
    EdgeModel,
    GroundModel,
    edge_section,
    gap_knots,
    ground_knots,
    ground_section,
    plate_decay_per_mm,
)
from checker.physics.fieldsolve import Conductor, CrossSection, Slab, solve
from checker.physics.sections import section_signature


def approx(value, rel: float):
    return pytest.approx(value, rel=rel, abs=0.0)


def stripline(t: float = 0.0, h: float = 0.2, er: float = 4.0) -> Stackup:
    """plane / signal (copper t) / plane, h of dielectric each side: a
    centred stripline with b = 2h + t."""
    return Stackup((CopperLayer("g1", "plane", 0.035), CopperLayer("s", "signal", t),
                    CopperLayer("g2", "plane", 0.035)),
                   (Dielectric(h, er), Dielectric(h, er)))


def microstrip(t: float = 0.035, h: float = 0.2, er: float = 4.3, mask: Dielectric | None = None) -> Stackup:
    return Stackup((CopperLayer("top", "signal", t), CopperLayer("gnd", "plane", 0.035)), (Dielectric(h, er),),
                   mask_top=mask)


def direct_c12(st: Stackup, layer: int, wa: float, wb: float, gap: float, resolution: float) -> float:
    return float(-solve(edge_section(st, layer, wa, wb, gap), resolution, richardson=True).extrapolated[0, 1])


# ------------------------------------------------------------ outside references


# gaps on the knots test the solver (1.5 %); between knots (0.2, 0.6) the
# interpolation adds its error too (2.5 % in all)
@pytest.mark.parametrize("w, gap, rel", [(0.2, 0.02, 0.015), (0.2, 0.08, 0.015), (0.2, 0.16, 0.015),
                                         (0.1, 0.32, 0.015), (0.2, 0.64, 0.015), (0.2, 0.2, 0.025),
                                         (0.2, 0.6, 0.025)])
def test_zero_thickness_stripline_pair_matches_cohn_1955(w, gap, rel):
    st = stripline(t=0.0)
    m = EdgeModel(st, 1, [w], max_gap_mm=gap)
    exact = cap.coupled_stripline_modes(w, gap, 0.4, 4.0).c12_per_m  # Cohn 1955, exact
    assert float(m.c12_per_m(w, w, gap)) == approx(float(exact), rel)


@pytest.mark.parametrize("w", [0.1, 0.2])
@pytest.mark.parametrize("gap", [0.8, 1.0, 1.6, 2.4])
def test_far_stripline_tail_matches_cohn_1955(w, gap):
    """Two to six plane spacings apart (b = 0.4 mm), where C12' has fallen by
    1e2-1e7 and a direct solve at the table's resolution is off by tens of
    percent, the between-planes decay law from the anchor knot keeps the
    model on Cohn's exact value (measured: within 0.65 %)."""
    m = EdgeModel(stripline(t=0.0), 1, [w], max_gap_mm=gap)
    exact = cap.coupled_stripline_modes(w, gap, 0.4, 4.0).c12_per_m  # Cohn 1955, exact
    assert float(m.c12_per_m(w, w, gap)) == approx(float(exact), 0.01)


def test_plate_decay_of_one_dielectric_is_pi_over_b():
    """Separation of variables between grounded planes b apart: the slowest
    mode is sin(pi y / b) exp(-pi x / b), whatever the permittivity."""
    for b, er in ((0.4, 4.0), (0.1427, 3.58), (1.2, 1.0)):
        assert plate_decay_per_mm((0.0, b), (Slab(0.0, b, er),)) == approx(np.pi / b, 1e-6)


@pytest.mark.parametrize("d1, e1, d2, e2", [(0.1, 3.0, 0.3, 4.5), (0.2, 4.2, 0.05, 2.0), (0.15, 1.0, 0.15, 4.0)])
def test_plate_decay_of_two_dielectrics_solves_the_interface_condition(d1, e1, d2, e2):
    """Two slabs: Y = sin(k y) below the interface, sin(k (b - y)) above; Y and
    eps Y' continuous give eps1 cot(k d1) + eps2 cot(k d2) = 0, whose smallest
    root is found here with scipy's brentq, independently of the solver."""
    from scipy.optimize import brentq

    def condition(k):
        return e1 / np.tan(k * d1) + e2 / np.tan(k * d2)

    upper = np.pi / max(d1, d2)  # the first pole of the thicker slab's cotangent
    root = brentq(condition, 1e-9 + 1e-6 * upper, upper * (1 - 1e-9))
    got = plate_decay_per_mm((0.0, d1 + d2), (Slab(0.0, d1, e1), Slab(d1, d1 + d2, e2)))
    assert got == approx(root, 1e-5)


def test_no_decay_law_without_two_planes():
    assert plate_decay_per_mm((0.0,), (Slab(-0.2, 0.0, 4.3),)) is None
    assert plate_decay_per_mm((), ()) is None


@pytest.mark.parametrize("w", [0.1, 0.2, 0.5])
def test_single_stripline_matches_cohn_1954(w):
    g = GroundModel(stripline(t=0.0), 1, [w])
    exact = cap.stripline_c_per_m(w, 0.4, 0.0, 4.0).value  # Cohn 1954, exact for t = 0, centred
    assert float(g.c_per_m(w)) == approx(float(exact), 0.01)


@pytest.mark.parametrize("w", [0.09, 0.13, 0.2, 0.3, 0.45])
def test_single_stripline_between_far_apart_widths_matches_cohn_1954(w):
    """Built from widths 0.075 and 0.5 mm only (6.7 times apart: knots
    0.075, 0.141, 0.266, 0.5 with the fill-ins), queried between knots: the
    interpolation (a w + F, F linear in ln w; edge docstring, 0.5 % at knots
    2 times apart) and the solver together within 1 % of the exact value.
    The interpolation used before (ln C' linear in ln w) errs 1.6 % at knots
    2 times apart and 4-10 % at 3-6 times (edge docstring)."""
    g = GroundModel(stripline(t=0.0), 1, [0.075, 0.5])
    assert w not in g.widths_knots
    exact = cap.stripline_c_per_m(w, 0.4, 0.0, 4.0).value  # Cohn 1954, exact for t = 0, centred
    assert float(g.c_per_m(w)) == approx(float(exact), 0.01)


def _hammerstad_jensen_c(w: float, h: float, t: float, er: float) -> float:
    """C' = sqrt(er_eff) / (c0 Z0), F/m, from scikit-rf's Hammerstad-Jensen
    ``MLine`` (no dispersion)."""
    skrf = pytest.importorskip("skrf")
    from skrf.media import MLine

    line = MLine(frequency=skrf.Frequency(10, 10, 1, unit="GHz"), w=w * 1e-3, h=h * 1e-3, t=t * 1e-3, ep_r=er,
                 tand=0.0, model="hammerstadjensen", disp="none", diel="frequencyinvariant")
    z0, er_eff = float(np.real(line.z0_characteristic[0])), float(np.real(line.ep_reff_f[0]))
    return float(np.sqrt(er_eff) / (C0 * z0))


@pytest.mark.parametrize("w, er", [(0.1, 4.3), (0.35, 4.3), (0.8, 3.0)])
def test_single_microstrip_matches_hammerstad_jensen_via_scikit_rf(w, er):
    h, t = 0.2, 0.035
    c_hj = _hammerstad_jensen_c(w, h, t, er)
    g = GroundModel(microstrip(t=t, h=h, er=er), 0, [w])
    assert float(g.c_per_m(w)) == approx(c_hj, 0.02)


@pytest.mark.parametrize("w", [0.1, 0.2, 0.4, 0.7])
def test_microstrip_between_far_apart_widths_matches_hammerstad_jensen(w):
    """Built from widths 0.08 and 1.0 mm only (knots 0.08, 0.15, 0.283,
    0.532, 1.0 with the fill-ins), queried between knots: H-J's 1 % plus the
    solver's 1 % (module docstring of this file)."""
    h, t, er = 0.2, 0.035, 4.3
    g = GroundModel(microstrip(t=t, h=h, er=er), 0, [0.08, 1.0])
    assert w not in g.widths_knots
    assert float(g.c_per_m(w)) == approx(_hammerstad_jensen_c(w, h, t, er), 0.02)


def test_ground_knots_are_the_widths_present_with_fill_ins():
    # five widths, neighbours at most 1.5 times apart: exactly those
    assert ground_knots([0.3, 0.1, 0.15, 0.2, 0.25, 0.1]) == approx([0.1, 0.15, 0.2, 0.25, 0.3], 1e-12)
    # 0.075 .. 0.5 is 6.67 times: ceil(log2 6.67) = 3 intervals of 1.882 each,
    # 0.075 * 1.882 = 0.1411, 0.075 * 1.882**2 = 0.2656 (rounded to 1 um)
    assert ground_knots([0.075, 0.5]) == approx([0.075, 0.141, 0.266, 0.5], 1e-12)
    # one width: its double is the second knot
    assert ground_knots([0.2]) == approx([0.2, 0.4], 1e-12)
    # rounded to 1 um: 0.1016 and 0.1018 are one knot 0.102
    assert ground_knots([0.1016, 0.1018, 0.15]) == approx([0.102, 0.15], 1e-12)
    # more than GROUND_MAX_WIDTHS distinct widths: that many in geometric
    # progression from the narrowest to the widest (0.1 .. 0.3: 3**(1/31) =
    # 1.036 apart, +-1 um of rounding: at most 1.036 x 1.01 at 0.1 mm)
    many = ground_knots(np.linspace(0.1, 0.3, 100))
    assert many.size == GROUND_MAX_WIDTHS and many[0] == 0.1 and many[-1] == 0.3
    assert np.max(many[1:] / many[:-1]) < 3 ** (1 / 31) * 1.01
    for knots in (ground_knots([0.05, 3.0]), ground_knots([0.075, 0.09, 0.5, 2.0])):
        assert np.max(knots[1:] / knots[:-1]) <= GROUND_KNOT_RATIO * 1.001


def test_ground_model_solves_every_width_present():
    """Up to GROUND_MAX_WIDTHS distinct widths, a queried width on the
    layer is a knot: the model answers its own solve of that width."""
    st = microstrip(mask=Dielectric(0.015, 3.8))
    widths = [0.1, 0.12, 0.127, 0.15, 0.2, 0.254, 0.3, 0.35, 0.4, 0.45]
    g = GroundModel(st, 0, widths)
    assert g.widths_knots == approx(widths, 1e-12) and g.solves == len(widths)
    for w in (0.127, 0.254):
        direct = solve(ground_section(st, 0, w), g.resolution, richardson=True).extrapolated[0].sum()
        assert float(g.c_per_m(w)) == approx(float(direct), 1e-12)


# ------------------------------------------------------------ the table


def test_table_reproduces_direct_solves_at_knots_and_between():
    st = microstrip(mask=Dielectric(0.015, 3.8))
    m = EdgeModel(st, 0, [0.1, 0.15, 0.2, 0.3], max_gap_mm=0.5)
    m.solve_all()
    assert m.solves == 10 * m.gaps.size + m.widths_knots.size  # pairs i <= j only, and each width alone
    for wa, wb in [(0.1, 0.1), (0.15, 0.3)]:
        for gap in m.gaps[::3]:
            assert float(m.c12_per_m(wa, wb, gap)) == approx(direct_c12(st, 0, wa, wb, gap, m.resolution), 1e-12)
    mids = np.sqrt(m.gaps[:-1] * m.gaps[1:])
    mids = mids[mids < 0.5]
    for wa, wb in [(0.15, 0.15), (0.12, 0.25)]:
        got = m.c12_per_m(wa, wb, mids)
        want = np.array([direct_c12(st, 0, wa, wb, x, m.resolution) for x in mids])
        np.testing.assert_allclose(got, want, rtol=0.02, atol=0)


def test_gap_knots_are_a_fixed_series():
    assert gap_knots(1.0) == approx(0.01 * 2.0 ** np.arange(8), 1e-12)
    assert gap_knots(0.35, 0.15) == approx([0.08, 0.16, 0.32, 0.64], 1e-12)
    assert gap_knots(0.005, 0.005) == approx([0.01, 0.02], 1e-12)


def test_monotonic_fall_and_exact_symmetry():
    st = microstrip()
    m = EdgeModel(st, 0, [0.1, 0.3], max_gap_mm=1.0)
    gaps = np.geomspace(0.005, 2.0, 60)
    c = m.c12_per_m(0.1, 0.3, gaps)
    assert np.all(np.diff(c) < 0) and np.all(c > 0)
    assert np.array_equal(c, m.c12_per_m(0.3, 0.1, gaps))


# ------------------------------------------------------------ physics the closed forms miss


def test_thick_copper_raises_edge_c12_at_gap_equal_width():
    """Within-project expectation: 35 um copper gives 25-40 % more C12 than
    zero thickness at gap = width (measured here, stripline b = 0.4 mm,
    w = gap = 0.15 mm: +62 %; loose band 15-80 %)."""
    w = 0.15
    thick = float(EdgeModel(stripline(t=0.035), 1, [w], 0.2).c12_per_m(w, w, w))
    thin = float(EdgeModel(stripline(t=0.0), 1, [w], 0.2).c12_per_m(w, w, w))
    assert 1.15 < thick / thin < 1.8


def test_solder_mask_raises_outer_layer_coupling_and_capacitance_to_ground():
    w, gap = 0.15, 0.15
    bare, masked = microstrip(), microstrip(mask=Dielectric(0.015, 3.8))
    c_bare = float(EdgeModel(bare, 0, [w], gap).c12_per_m(w, w, gap))
    c_mask = float(EdgeModel(masked, 0, [w], gap).c12_per_m(w, w, gap))
    assert 1.2 < c_mask / c_bare < 2.0  # within-project: ~1.4-1.5 in a simple model
    g_bare = float(GroundModel(bare, 0, [w]).c_per_m(w))
    g_mask = float(GroundModel(masked, 0, [w]).c_per_m(w))
    assert 1.0 < g_mask / g_bare < 1.2  # the mask adds to the fringe only


def test_high_er_substrate_raises_wide_gap_c12_less_than_er_eff():
    """At a wide gap the coupling field runs through the air above while the
    high-er substrate pulls each trace's field onto the plane, so C12 is far
    below the air value scaled by er_eff (within-project expectation,
    measured: 0.92 x the air value, er_eff 6.6 from Hammerstad-Jensen)."""
    w, gap, er = 0.15, 0.6, 10.2
    c_air = float(EdgeModel(microstrip(er=1.0), 0, [w], gap).c12_per_m(w, w, gap))
    c_sub = float(EdgeModel(microstrip(er=er), 0, [w], gap).c12_per_m(w, w, gap))
    er_eff = float(cap.hammerstad_jensen(w, 0.2, 0.035, er).er_eff)
    assert c_sub / c_air < 0.5 * er_eff


def test_sections_place_the_traces_and_ground():
    st = microstrip(mask=Dielectric(0.015, 3.8))
    cs = edge_section(st, 0, 0.1, 0.3, 0.2)
    a, b = cs.conductors
    assert (a.x1 - a.x0, b.x1 - b.x0, b.x0 - a.x1) == approx((0.1, 0.3, 0.2), 1e-12)
    assert (a.y0, a.y1) == approx((-0.035, 0.0), 1e-12)
    assert cs.planes == approx((-0.235,), 1e-12)
    assert any(s.y0 == approx(-0.035, 1e-12) and s.y1 == approx(0.015, 1e-12) and s.er == 3.8 for s in cs.slabs)
    one = ground_section(st, 0, 0.2)
    assert len(one.conductors) == 1 and one.conductors[0].x0 == approx(-0.1, 1e-12)
    with pytest.raises(ValueError):
        edge_section(st, 0, 0.1, 0.1, 0.0)


def test_stripline_table_far_beyond_the_plane_spacing_stays_positive():
    """Between planes 0.2 mm apart, C12' at gaps of a millimetre has decayed to rounding noise;
    the table must still answer (positive, falling with gap) instead of failing."""
    from checker.model import CopperLayer, Dielectric, Stackup
    from checker.physics.edge import EdgeModel

    s = Stackup((CopperLayer("P1", "plane", 0.035), CopperLayer("S", "signal", 0.035),
                 CopperLayer("P2", "plane", 0.035)), (Dielectric(0.1, 4.2), Dielectric(0.1, 4.2)))
    m = EdgeModel(s, 1, [0.1], max_gap_mm=0.9, min_gap_mm=0.1)
    values = m.c12_per_m(0.1, 0.1, np.array([0.2, 0.4, 0.6, 0.85]))
    assert np.all(values > 0) and np.all(np.diff(values) < 0)


# ------------------------------------------------------------ shared solves


def _two_sided(mask_bottom: Dielectric | None) -> Stackup:
    """top / 0.15 mm er 4.2 / gnd / 0.15 mm er 4.2 / bottom, a 15 um er 3.8
    mask on top and ``mask_bottom`` below: with the same mask on both sides
    the bottom layer's cross-sections are the top layer's mirrored."""
    return Stackup((CopperLayer("top", "signal", 0.035), CopperLayer("gnd", "plane", 0.035),
                    CopperLayer("bot", "signal", 0.035)), (Dielectric(0.15, 4.2), Dielectric(0.15, 4.2)),
                   mask_top=Dielectric(0.015, 3.8), mask_bottom=mask_bottom)


def test_mirror_image_layer_reuses_the_solves_and_they_equal_its_own():
    st = _two_sided(Dielectric(0.015, 3.8))
    top = EdgeModel(st, 0, [0.11, 0.23], max_gap_mm=0.3).solve_all()
    bottom = EdgeModel(st, 2, [0.11, 0.23], max_gap_mm=0.3).solve_all()
    assert bottom.solves == top.solves and bottom.shared == bottom.solves
    np.testing.assert_array_equal(bottom.table, top.table)
    # the bottom layer's own cross-section, solved directly, is the same problem
    for wa, wb, k in ((0.11, 0.23, 0), (0.23, 0.23, 3)):
        gap = float(bottom.gaps[k])
        assert float(bottom.c12_per_m(wa, wb, gap)) == approx(direct_c12(st, 2, wa, wb, gap, bottom.resolution), 1e-9)
    g_top, g_bottom = GroundModel(st, 0, [0.11, 0.23]), GroundModel(st, 2, [0.11, 0.23])
    assert g_bottom.shared == g_bottom.solves and np.array_equal(g_bottom.table, g_top.table)


def test_layers_with_different_surroundings_share_nothing():
    """A thicker bottom mask (25 um of er 3.4) makes a different problem."""
    st = _two_sided(Dielectric(0.025, 3.4))
    top = EdgeModel(st, 0, [0.11], max_gap_mm=0.2).solve_all()
    bottom = EdgeModel(st, 2, [0.11], max_gap_mm=0.2).solve_all()
    assert bottom.shared == 0
    assert float(bottom.c12_per_m(0.11, 0.11, 0.1)) != approx(float(top.c12_per_m(0.11, 0.11, 0.1)), 1e-3)


def test_shared_solve_is_reindexed_to_the_sections_own_numbering():
    """A solve shared with a mirrored, renumbered section gives that
    section's own Maxwell matrix: the same as solving it directly (exact
    mirror images solve to the same numbers, to rounding)."""
    from checker.physics.fieldsolve import solve
    from checker.physics.sections import _shared, solve_shared

    a = CrossSection((Conductor(-0.3, -0.1, 0.0, 0.035, 0), Conductor(0.05, 0.2, 0.25, 0.285, 1)),
                     (Slab(-0.5, 0.8, 4.2),), (-0.2,))
    b = CrossSection((Conductor(-0.2, -0.05, 0.25, 0.285, 0), Conductor(0.1, 0.3, 0.0, 0.035, 1)),
                     a.slabs, a.planes)  # a mirrored left to right, nets swapped
    _shared.clear()
    (ra, rb), shared = solve_shared([a, b], 0.5)
    assert shared == 1
    direct = solve(b, 0.5).maxwell
    assert np.allclose(rb.maxwell, direct, rtol=1e-12, atol=0)
    assert rb.maxwell[0, 0] == approx(ra.maxwell[1, 1], rel=1e-12)


def test_section_signature_ignores_translation_reflection_and_numbering_only():
    cs = CrossSection((Conductor(-0.2, -0.1, -0.035, 0.0, 0), Conductor(0.1, 0.3, -0.035, 0.0, 1)),
                      (Slab(-0.235, -0.035, 4.2), Slab(-0.035, 0.015, 3.8)), (-0.235,))

    def moved(c: CrossSection, dy: float, sign: float) -> CrossSection:
        return CrossSection(tuple(Conductor(k.x0, k.x1, *sorted((sign * k.y0 + dy, sign * k.y1 + dy)), k.net)
                                  for k in c.conductors),
                            tuple(Slab(*sorted((sign * s.y0 + dy, sign * s.y1 + dy)), s.er) for s in c.slabs),
                            tuple(sign * p + dy for p in c.planes))

    key = section_signature(cs, 0.5, True)
    assert section_signature(moved(cs, -1.37, 1.0), 0.5, True) == key
    assert section_signature(moved(cs, 0.42, -1.0), 0.5, True) == key
    assert section_signature(cs, 1.0, True) != key and section_signature(cs, 0.5, False) != key
    swapped = CrossSection((Conductor(-0.2, -0.1, -0.035, 0.0, 1), Conductor(0.1, 0.3, -0.035, 0.0, 0)),
                           cs.slabs, cs.planes)
    # the numbering of the conductors is not part of the problem: the shared result is re-indexed
    assert section_signature(swapped, 0.5, True) == key
    flipped = CrossSection(tuple(Conductor(-k.x1, -k.x0, k.y0, k.y1, k.net) for k in cs.conductors),
                           cs.slabs, cs.planes)
    assert section_signature(flipped, 0.5, True) == key  # mirrored left to right
    wider = CrossSection((Conductor(-0.2, -0.1, -0.035, 0.0, 0), Conductor(0.1, 0.31, -0.035, 0.0, 1)),
                         cs.slabs, cs.planes)
    assert section_signature(wider, 0.5, True) != key
    other = CrossSection(cs.conductors, (Slab(-0.235, -0.035, 4.3), Slab(-0.035, 0.015, 3.8)), cs.planes)
    assert section_signature(other, 0.5, True) != key
