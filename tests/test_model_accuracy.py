"""Pinned accuracy of the capacitance estimates the checker uses.

A sample of the comparisons ``scripts/sweep_accuracy.py`` makes over the full
ranges (results in ``docs/accuracy.md``): each fast estimate the analysis
uses -- ``BroadsideModel`` (broadside C12), ``EdgeModel`` (edge C12) and
``GroundModel`` (capacitance to plane) -- against a direct field solve of
the same cross-section at ``fieldsolve.FINE`` (0.04-0.4 % high, fieldsolve's
docstring), built here independently of the models' own section builders.

Floors (issue): capacitance to plane within 3 %; mutual C12 within 15 % where
the rule checks use it (edge gap <= 1 mm, broadside plan-view gap <= 0.5 mm,
the default search distances). Each case names its geometry and tolerance.
"""

from __future__ import annotations

import pytest

from checker.model import CopperLayer, Dielectric, Stackup
from checker.physics.broadside import BroadsideModel
from checker.physics.capacitance import parallel_plate_per_m
from checker.physics.edge import EdgeModel, GroundModel
from checker.physics.fieldsolve import FINE, Conductor, CrossSection, Slab, solve
from checker.stackup import effective_er, separation_mm

T = 0.035  # copper, mm
C2G_FLOOR = 0.03
C12_RULE_FLOOR = 0.15

# --- stackups: 35 um copper, planes 35 um ----------------------------------
# microstrip: TOP over 0.2 mm of er 4.3 over a plane (bare, or 20 um of er 3.8 mask)
MICRO = Stackup((CopperLayer("TOP", "signal", T), CopperLayer("GND", "plane", T)), (Dielectric(0.2, 4.3),))
MASKED = Stackup((CopperLayer("TOP", "signal", T), CopperLayer("GND", "plane", T)), (Dielectric(0.1, 4.0),),
                 mask_top=Dielectric(0.02, 3.8))
# stripline: plane / 0.3 mm / SIG / 0.2 mm / plane, er 4.0
STRIP = Stackup((CopperLayer("G1", "plane", T), CopperLayer("SIG", "signal", T), CopperLayer("G2", "plane", T)),
                (Dielectric(0.3, 4.0), Dielectric(0.2, 4.0)))
# dual stripline: plane / 0.2 mm er 3.6 / S1 / 0.15 mm er 4.2 / S2 / 0.2 mm er 3.6 / plane
DUAL = Stackup((CopperLayer("G1", "plane", T), CopperLayer("S1", "signal", T), CopperLayer("S2", "signal", T),
                CopperLayer("G2", "plane", T)),
               (Dielectric(0.2, 3.6), Dielectric(0.15, 4.2), Dielectric(0.2, 3.6)))


def _section(stackup: Stackup, traces) -> CrossSection:
    """Reference cross-section of ``traces`` = [(layer, x0, x1)] (net = list
    position): planes at their surfaces facing the signals (outermost here),
    dielectric slabs, inner copper bands of the mean er of their two
    dielectrics, a top mask as band + slab of its thickness over the copper
    (the checker's stated approximation), else air."""
    layers, diel = stackup.layers, stackup.dielectrics
    top, bot, y = [], [], 0.0
    for i, layer in enumerate(layers):
        top.append(y)
        y -= layer.thickness_mm
        bot.append(y)
        if i < len(diel):
            y -= diel[i].thickness_mm
    first_signal = min(k for k, layer in enumerate(layers) if layer.role != "plane")
    planes = tuple(bot[k] if k < first_signal else top[k] for k, layer in enumerate(layers) if layer.role == "plane")
    slabs = [Slab(top[i + 1], bot[i], diel[i].er) for i in range(len(diel))]
    slabs += [Slab(bot[k], top[k], 0.5 * (diel[k - 1].er + diel[k].er))
              for k in range(1, len(layers) - 1) if layers[k].role != "plane"]
    if stackup.mask_top is not None:
        slabs.append(Slab(bot[0], top[0] + stackup.mask_top.thickness_mm, stackup.mask_top.er))
    conductors = tuple(Conductor(x0, x1, bot[k], top[k], net) for net, (k, x0, x1) in enumerate(traces))
    return CrossSection(conductors, tuple(slabs), planes)


def _solved_c2g(stackup, layer, w):
    return solve(_section(stackup, [(layer, -w / 2, w / 2)]), FINE).maxwell[0, 0]


def _solved_edge(stackup, layer, wa, wb, gap):
    x0 = -gap / 2 - wa
    return solve(_section(stackup, [(layer, x0, x0 + wa), (layer, gap / 2, gap / 2 + wb)]), FINE).c12


def _solved_broadside(stackup, upper, wa, wb, offset):
    x = offset / 2
    return solve(_section(stackup, [(upper, -x - wa / 2, -x + wa / 2),
                                    (upper + 1, x - wb / 2, x + wb / 2)]), FINE).c12


# --- capacitance to plane: GroundModel, floor 3 % ---------------------------

# The analysis builds a GroundModel from every width on the layer: each
# distinct width (up to 32) is solved, so a queried width on the layer is a
# knot. Widths between knots arise with more than 32 distinct widths, or from
# callers with other widths; the cases below query between knots.
_MANY = [round(0.1 * 3 ** (k / 39), 3) for k in range(40)]  # 40 widths 0.1-0.3 mm: 32 knots

# The three worst c2g_model cases of the sweep's previous full run
# (docs/accuracy/sweep.csv before this interpolation: +3.6 to +4.2 %;
# stackup parameters rounded here): four widths per layer, the queried width
# between two of them 3.1-3.6 times apart. The model now puts a fill-in knot
# in such an interval (at most 2 times apart), which lands within 4 um of
# those widths, so each stackup is also queried at the geometric midpoint of
# a new interval, where the interpolation errs most. OLD: the error of the
# interpolation used before (ln C' linear in ln w between the four widths)
# against the same direct solves (measured), i.e. these cases fail with it.
MS_WORST = Stackup((CopperLayer("TOP", "signal", T), CopperLayer("GND", "plane", T)), (Dielectric(0.146, 3.78),))
SL_WORST = Stackup((CopperLayer("G1", "plane", T), CopperLayer("SIG", "signal", T), CopperLayer("G2", "plane", T)),
                   (Dielectric(0.339, 4.52), Dielectric(0.173, 4.52)))
MM_WORST = Stackup((CopperLayer("TOP", "signal", 0.0), CopperLayer("GND", "plane", T)), (Dielectric(0.118, 3.87),),
                   mask_top=Dielectric(0.02, 3.89))


@pytest.mark.parametrize("stackup, layer, widths, w, on_knot", [
    # microstrip h 0.2 er 4.3, widths 0.1/0.2/0.4, w 0.2 (a knot)
    pytest.param(MICRO, 0, [0.1, 0.2, 0.4], 0.2, True, id="microstrip-w0.2"),
    # masked microstrip h 0.1 (mask 20 um er 3.8), widths 0.1/0.15/0.3, w 0.15 (a knot)
    pytest.param(MASKED, 0, [0.1, 0.15, 0.3], 0.15, True, id="masked-microstrip-w0.15"),
    # off-centre stripline b 0.535, widths 0.1/0.15/0.3, w 0.15 (a knot)
    pytest.param(STRIP, 1, [0.1, 0.15, 0.3], 0.15, True, id="stripline-w0.15"),
    # microstrip with 40 widths present; w = a width left out of the 32 knots
    pytest.param(MICRO, 0, _MANY, None, False, id="microstrip-40-widths-between-knots"),
    # previous worst: microstrip h 0.146 er 3.78, knots 0.115 | 0.214 (fill-in) | 0.397;
    # OLD +4.0 % at 0.2144 (the sweep's case), +3.0 % at 0.291
    pytest.param(MS_WORST, 0, [0.085, 0.115, 0.397, 0.428], 0.2144, False, id="worst-microstrip-w0.2144"),
    pytest.param(MS_WORST, 0, [0.085, 0.115, 0.397, 0.428], 0.291, False, id="worst-microstrip-w0.291"),
    # previous worst: stripline 0.173 below / 0.339 above, er 4.52, knots 0.077 | 0.146 | 0.276;
    # OLD +4.1 % at 0.1427 (the sweep's case), +3.1 % at 0.201
    pytest.param(SL_WORST, 1, [0.077, 0.276, 0.374, 0.41], 0.1427, False, id="worst-stripline-w0.1427"),
    pytest.param(SL_WORST, 1, [0.077, 0.276, 0.374, 0.41], 0.201, False, id="worst-stripline-w0.201"),
    # previous worst: zero-thickness masked microstrip h 0.118 (mask 20 um er 3.89),
    # knots 0.09 | 0.118 | 0.209 | 0.37; OLD +3.5 % at 0.2091 (the sweep's case), +2.6 % at 0.157
    pytest.param(MM_WORST, 0, [0.09, 0.118, 0.37], 0.2091, False, id="worst-masked-microstrip-w0.2091"),
    pytest.param(MM_WORST, 0, [0.09, 0.118, 0.37], 0.157, False, id="worst-masked-microstrip-w0.157"),
    # the whole sweep width range at once: widths 0.075 and 0.5 only (knots 0.075 |
    # 0.141 | 0.266 | 0.5), w 0.19, stripline above; OLD +9.8 %
    pytest.param(STRIP, 1, [0.075, 0.5], 0.19, False, id="stripline-0.075/0.5-w0.19"),
])
def test_ground_model_within_3_percent(stackup, layer, widths, w, on_knot):
    model = GroundModel(stackup, layer, widths)
    if w is None:
        w = next(x for x in widths if x not in model.widths_knots)
    assert (w in model.widths_knots) == on_knot  # the case tests what it says
    est = model.c_per_m(w)
    assert est == pytest.approx(_solved_c2g(stackup, layer, w), rel=C2G_FLOOR, abs=0)


# --- edge C12: EdgeModel, floor 15 % (gap <= 1 mm) --------------------------

@pytest.mark.parametrize("stackup, layer, wa, wb, gap", [
    # microstrip, w 0.15, gap = w (where zero-thickness closed forms are 25-40 % low)
    pytest.param(MICRO, 0, 0.15, 0.15, 0.15, id="microstrip-w0.15-gap0.15"),
    # masked microstrip, unequal widths 0.1 / 0.2, gap 0.2
    pytest.param(MASKED, 0, 0.1, 0.2, 0.2, id="masked-microstrip-0.1/0.2-gap0.2"),
    # stripline, w 0.1, gap 0.3 (3 w)
    pytest.param(STRIP, 1, 0.1, 0.1, 0.3, id="stripline-w0.1-gap0.3"),
])
def test_edge_model_within_15_percent(stackup, layer, wa, wb, gap):
    model = EdgeModel(stackup, layer, [wa, wb], max_gap_mm=gap, min_gap_mm=gap)
    est = model.c12_per_m(wa, wb, gap)
    assert est == pytest.approx(_solved_edge(stackup, layer, wa, wb, gap), rel=C12_RULE_FLOOR, abs=0)


# --- broadside C12: BroadsideModel, floor 15 % (plan-view gap <= 0.5 mm) -----

@pytest.mark.parametrize("widths_a, widths_b, wa, wb, offset", [
    # S1/S2 of DUAL (d 0.15 mm), both 0.15 mm, fully overlapped
    pytest.param([0.15], [0.15], 0.15, 0.15, 0.0, id="w0.15-overlapped"),
    # 0.2 over 0.12 (both between knots 0.1 and 0.3), offset 0.25 (plan-view gap 0.09)
    pytest.param([0.1, 0.3], [0.1, 0.3], 0.2, 0.12, 0.25, id="between-knots-offset0.25"),
    # 0.1 / 0.1, plan-view gap 0.4 mm (near the default search distance)
    pytest.param([0.1], [0.1], 0.1, 0.1, 0.5, id="w0.1-plan-gap0.4"),
])
def test_broadside_model_within_15_percent(widths_a, widths_b, wa, wb, offset):
    model = BroadsideModel(DUAL, 1, 2, widths_a, widths_b, max_offset_mm=0.5 + max(widths_a + widths_b))
    est = model.c12_per_m(wa, wb, offset)
    assert est == pytest.approx(_solved_broadside(DUAL, 1, wa, wb, offset), rel=C12_RULE_FLOOR, abs=0)


# --- why parallel-plate overlap is not used ----------------------------------

def test_parallel_plate_reads_zero_one_width_off_while_solved_c12_does_not():
    """Two 0.15 mm traces on S1/S2 of DUAL offset by one width: the overlap,
    and so eps A / d, is 0, yet the solved C12 keeps more than half of its
    overlapped value (about 75 % for similar pairs, REFERENCES.md)."""
    w = 0.15
    d, er = separation_mm(DUAL, 1, 2), effective_er(DUAL, 1, 2)
    overlap = max(0.0, w - w)  # edges just meet at offset = w
    assert parallel_plate_per_m(overlap, d, er) == 0.0
    solved_off = _solved_broadside(DUAL, 1, w, w, w)
    solved_on = _solved_broadside(DUAL, 1, w, w, 0.0)
    assert solved_off > 0.5 * solved_on
    # and overlapped, eps A / d is already more than 15 % low with 35 um copper
    assert parallel_plate_per_m(w, d, er) < (1 - C12_RULE_FLOOR) * solved_on
