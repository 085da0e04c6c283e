"""High-impedance third nets as relays (checker.netrelays).

Reference: exact complex nodal analysis of the same small circuit (an
aggressor source, the relaying node N with R_N and its capacitances, the
victim node V with R_V and C_Vg), solved with numpy.linalg.solve — textbook
circuit theory, independent of the relay formula. The lumped estimate with
the relayed capacitance must never read below it.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from checker.analysis import BROADSIDE, RELAY, analyse
from checker.netrelays import net_relay_rows
from checker.physics.crosstalk import lumped_noise_v
from checker.readers.board_json import read_board_dict
from checker.ruleset import default_ruleset
from checker.runner import check_board


def exact_victim_v(c_an, c_nv, c_ng, c_vg, r_n, r_v, f):
    """|V_V| for 1 V on A: nodal equations of nodes N and V (A driven, no
    direct A-V coupling)."""
    w = 2 * math.pi * f
    y = np.array([[1 / r_n + 1j * w * (c_ng + c_an + c_nv), -1j * w * c_nv],
                  [-1j * w * c_nv, 1 / r_v + 1j * w * (c_vg + c_nv)]])
    return abs(np.linalg.solve(y, np.array([1j * w * c_an, 0.0]))[1])


class _Rows:
    """The few ``Couplings`` columns ``net_relay_rows`` reads."""

    def __init__(self, net_a, net_b, c12_pf):
        self.net_a, self.net_b = np.array(net_a, np.int64), np.array(net_b, np.int64)
        self.a, self.b = np.arange(len(net_a)) * 2, np.arange(len(net_a)) * 2 + 1
        self.c12_pf = np.array(c12_pf, float)


def relay_pf(c_an, c_nv, c_ng, r_n, f_a):
    """The relayed pF from ``net_relay_rows`` for nets A=0 (an aggressor at
    ``f_a``), N=1 (``r_n``), V=2 (a victim node, 100 kohm)."""
    rows = _Rows([0, 1], [1, 2], [c_an, c_nv])
    out = net_relay_rows(rows, np.array([np.nan, r_n, 1e5]), np.array([f_a, np.nan, np.nan]),
                         np.array([5.0, c_ng, 5.0]), np.ones(2, bool), ["A", "N", "V"], [])
    assert out["net_a"].tolist() == [0] and out["net_b"].tolist() == [2] and out["gap_net"].tolist() == [1]
    return float(out["c12_pf"][0])


def test_relay_is_the_series_formula_in_the_floating_limit():
    """R_N -> infinity: C_AN C_NV / (C_Ng + C_AN + C_NV), the series
    capacitance through a floating conductor (textbook circuit theory).
    N's capacitance computed alone (its Maxwell diagonal) is C_Ng + C_AN +
    C_NV = 2.0 + 0.5 + 0.4 = 2.9 pF."""
    assert relay_pf(0.5, 0.4, 2.9, 1e15, 1e6) == pytest.approx(0.5 * 0.4 / 2.9, rel=1e-9)


def test_relay_fades_when_the_node_is_held_by_a_low_resistance():
    """1/(omega R_N) = 159 pF at 1 MHz and 1 kohm, far above C_N = 2.9 pF."""
    leak = 1e12 / (2 * math.pi * 1e6 * 1e3)
    assert relay_pf(0.5, 0.4, 2.9, 1e3, 1e6) == pytest.approx(0.2 / math.hypot(2.9, leak), rel=1e-9)
    assert relay_pf(0.5, 0.4, 2.9, 1e3, 1e6) < 0.02 * relay_pf(0.5, 0.4, 2.9, 1e9, 1e6)


def test_lumped_noise_with_the_relay_never_reads_below_the_exact_circuit():
    """Random circuits over six decades of R and f and three of C: the
    lumped model fed the relayed C12 (victim R_V, C_Vg) is at or above the
    exact nodal solution."""
    rng = np.random.default_rng(7)
    for _ in range(3000):
        c_an, c_nv, c_ng, c_vg = 10 ** rng.uniform(-14, -11, 4)
        r_n, r_v = 10 ** rng.uniform(1, 8, 2)
        f = 10 ** rng.uniform(3, 9)
        c_r = relay_pf(c_an * 1e12, c_nv * 1e12, (c_ng + c_an + c_nv) * 1e12, r_n, f) * 1e-12
        lumped = float(lumped_noise_v(r_v, c_r, c_vg, 1.0, f))
        assert lumped >= exact_victim_v(c_an, c_nv, c_ng, c_vg, r_n, r_v, f) * (1 - 1e-9)


STACKUP = [{"copper": "L1", "role": "signal", "thickness": 0.035},
           {"dielectric": "d1", "thickness": 0.2, "er": 4.2},
           {"copper": "L2", "role": "signal", "thickness": 0.035},
           {"dielectric": "d2", "thickness": 0.2, "er": 4.2},
           {"copper": "L3", "role": "signal", "thickness": 0.035},
           {"dielectric": "d3", "thickness": 0.2, "er": 4.2},
           {"copper": "L4", "role": "plane", "thickness": 0.035}]
OUTLINE = [[-20, -20], [45, -20], [45, 20], [-20, 20]]


def stacked_board(middle):
    """CLK on L1, ``middle`` on L2, SENSE on L3, all 0.2 mm wide along x
    0..20 at y = 0 (broadside, nothing grounded between); GND plane on L4."""
    tracks = [{"layer": "L1", "net": "CLK", "width": 0.2, "points": [[0, 0], [20, 0]]},
              {"layer": "L2", "net": middle, "width": 0.2, "points": [[0, 0], [20, 0]]},
              {"layer": "L3", "net": "SENSE", "width": 0.2, "points": [[0, 0], [20, 0]]}]
    return read_board_dict({
        "format": "couplint-board", "version": 1, "name": "stack", "stackup": STACKUP,
        "nets": [{"name": "CLK"}, {"name": middle}, {"name": "SENSE"}, {"name": "GND"}], "tracks": tracks,
        "regions": [{"layer": "L4", "net": "GND", "outline": OUTLINE}], "outline": OUTLINE}, "stack.json")


def test_high_impedance_net_on_the_layer_between_relays_the_clock():
    """AIN_MID (default set: sensitive-analog, 100 kohm) between CLK (25 MHz)
    and SENSE: a RELAY row CLK-SENSE through it, its value the formula on the
    analysis' own net-pair totals, and the finding names it."""
    a = analyse(stacked_board("AIN_MID"), default_ruleset())
    c, idx = a.couplings, a.board.net_index()
    clk, mid, sense = idx["CLK"], idx["AIN_MID"], idx["SENSE"]
    relay = np.flatnonzero((c.kind == RELAY) & (c.gap_net == mid))
    assert relay.size == 1 and {int(c.net_a[relay[0]]), int(c.net_b[relay[0]])} == {clk, sense}
    assert c.island[relay[0]] == -1

    def pair_pf(x, y):
        sel = (c.kind == BROADSIDE) & (((c.net_a == x) & (c.net_b == y)) | ((c.net_a == y) & (c.net_b == x)))
        return float(c.c12_pf[sel].sum())

    c_an, c_nv = pair_pf(clk, mid), pair_pf(mid, sense)
    node = 10.0  # the default set's sensitive-analog node capacitance
    c_n = max(float(a.c2g_pf[mid]) - node, c_an + c_nv) + node
    leak = 1e12 / (2 * math.pi * 25e6 * 1e5)
    assert c.c12_pf[relay[0]] == pytest.approx(c_an * c_nv / math.hypot(c_n, leak), rel=1e-9)
    assert pair_pf(clk, sense) > 0  # the direct broadside coupling across the empty part of L2 stays
    p = a.net_pairs
    k = np.flatnonzero(((p.net_a == clk) & (p.net_b == sense)) | ((p.net_a == sense) & (p.net_b == clk)))[0]
    assert p.relay_pf[k] == pytest.approx(c.c12_pf[relay[0]]) and p.island_relay_pf[k] == 0.0
    texts = [f.coupling_path or "" for f in check_board(a.board, default_ruleset()).findings
             if f.victim == "SENSE" and f.aggressor == "CLK"]
    assert any("relayed through AIN_MID (a high-impedance node: 1e+05 ohm" in t for t in texts)


def test_driven_or_unclassified_middle_net_relays_nothing():
    """A net in no class (DATA) or a driven one (CLK_MID, a clock) is held by
    its driver: nothing is relayed through it. SENSE (high-impedance) relays
    only between nets that feed a noise estimate: none of CLK, CLK_MID and
    DATA has a resistance, so it relays nothing either."""
    for name in ("DATA", "CLK_MID"):
        a = analyse(stacked_board(name), default_ruleset())
        assert not np.any(a.couplings.kind == RELAY), name


def test_many_unclassed_neighbours_do_not_crowd_out_the_aggressor_and_victim():
    """N (1 Mohm) couples 1 pF to each of 150 nets in no class and 0.5 pF to
    a 25 MHz aggressor A and to a 100 kohm victim V: the relay A-V is still
    there, with C_N counting every neighbour (150 + 0.5 + 0.5 pF)."""
    n_other = 150
    a_net, n_net, v_net = 0, 1, 2
    others = np.arange(3, 3 + n_other)
    net_a = np.concatenate([[a_net, n_net], np.full(n_other, n_net)])
    net_b = np.concatenate([[n_net, v_net], others])
    pf = np.concatenate([[0.5, 0.5], np.ones(n_other)])
    resistance = np.full(3 + n_other, np.nan)
    resistance[[n_net, v_net]] = (1e6, 1e5)
    frequency = np.full(3 + n_other, np.nan)
    frequency[a_net] = 25e6
    c2g = np.full(3 + n_other, 1.0)
    out = net_relay_rows(_Rows(net_a, net_b, pf), resistance, frequency, c2g, np.ones(net_a.size, bool),
                         [f"N{i}" for i in range(3 + n_other)], [])
    assert out is not None and out["net_a"].tolist() == [a_net] and out["net_b"].tolist() == [v_net]
    leak = 1e12 / (2 * math.pi * 25e6 * 1e6)
    assert out["c12_pf"][0] == pytest.approx(0.25 / math.hypot(n_other + 1.0, leak), rel=1e-9)
