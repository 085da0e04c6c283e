"""Lumped coupled-noise model and edge frequency, against hand calculation,
the model's own limits and scipy.signal."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import optimize, signal

from checker.physics import crosstalk as xt


def test_hand_calculation():
    # R = 50 ohm, C12 = 1 pF, C2G = 10 pF, f = 10 MHz, V1 = 3.3 V.
    #   omega            = 2 pi 1e7                     = 6.283185e7 rad/s
    #   omega R C12      = 6.283185e7 * 50 * 1e-12      = 3.141593e-3
    #   omega R (C12+C2G)= 6.283185e7 * 50 * 11e-12     = 3.455752e-2
    #   sqrt(1 + x^2)    = sqrt(1 + 1.194223e-3)        = 1.000597
    #   |Vn| = 3.141593e-3 * 3.3 / 1.000597 = 1.036726e-2 / 1.000597
    #        = 1.036107e-2 V  (10.361 mV)
    vn = xt.lumped_noise_v(50.0, 1e-12, 10e-12, 3.3, 10e6)
    assert float(vn) == pytest.approx(1.036107e-2, rel=2e-6, abs=0)
    # small-R form: omega R C12 V1 = 3.141593e-3 * 3.3 = 1.036726e-2 V
    small = xt.lumped_noise_small_r_v(50.0, 1e-12, 10e-12, 3.3, 10e6)
    assert float(small) == pytest.approx(1.036726e-2, rel=2e-6, abs=0)


def test_small_r_limit_agrees():
    # x = omega R (C12 + C2G) << 1: full -> omega R C12 V1; the ratio
    # small/full = sqrt(1 + x^2) = 1 + x^2/2 - x^4/8 + ... (binomial series).
    c12, c2g, f = 1e-12, 10e-12, 1e6
    x = np.array([1e-3, 1e-2, 0.05])
    R = x / (2 * math.pi * f * (c12 + c2g))
    full = xt.lumped_noise_v(R, c12, c2g, 1.0, f)
    small = xt.lumped_noise_small_r_v(R, c12, c2g, 1.0, f)
    np.testing.assert_allclose(small / full - 1, x**2 / 2, rtol=1e-3)  # next term x^2/4 <= 6e-4
    assert np.all(np.abs(small[:2] / full[:2] - 1) < 1e-4)


def test_high_r_limit_is_the_capacitive_divider():
    # R -> infinity: |Vn| -> V1 C12 / (C12 + C2G) = 3.3 * 1/11 = 0.3 V.
    ceiling = xt.divider_ceiling_v(1e-12, 10e-12, 3.3)
    assert float(ceiling) == pytest.approx(0.3, rel=1e-12, abs=0)
    assert float(xt.lumped_noise_v(1e12, 1e-12, 10e-12, 3.3, 10e6)) == pytest.approx(0.3, rel=1e-9, abs=0)
    # and the noise never exceeds it, for any R
    R = np.geomspace(1e-3, 1e9, 200)
    vn = xt.lumped_noise_v(R, 1e-12, 10e-12, 3.3, 10e6)
    assert np.all(vn <= ceiling * (1 + 1e-12))
    assert np.all(np.diff(vn) > 0)  # rises monotonically with R


def test_small_r_overread_threshold_is_0_46():
    # small / full = sqrt(1 + x^2) = 1.1  ->  x = sqrt(0.21) = 0.4583.
    assert xt.SMALL_R_LIMIT == pytest.approx(math.sqrt(0.21), rel=1e-12, abs=0)
    c12, c2g, f = 1e-12, 10e-12, 10e6
    w = 2 * math.pi * f
    for x, over in ((0.45, False), (0.46, True)):
        R = x / (w * (c12 + c2g))
        ratio = xt.lumped_noise_small_r_v(R, c12, c2g, 1.0, f) / xt.lumped_noise_v(R, c12, c2g, 1.0, f)
        assert (float(ratio) > 1.10) is over
        assert bool(xt.small_r_in_range(R, c12, c2g, f)) is (not over)


def test_single_pole_rise_time_bandwidth_product():
    # scipy.signal: first-order low-pass H(s) = 1 / (tau s + 1).
    # Measure the 10-90 % rise time of its step response and its -3 dB
    # frequency; the product is ln(9) / (2 pi) = 0.3497 (-> 0.35).
    tau = 1e-9
    sys = signal.lti([1.0], [tau, 1.0])
    t = np.linspace(0, 10 * tau, 200001)
    _, y = signal.step(sys, T=t)
    t10 = np.interp(0.1, y, t)
    t90 = np.interp(0.9, y, t)
    tr = t90 - t10

    def gain_db_plus_3(f):
        _, h = signal.freqresp(sys, w=[2 * math.pi * f])
        return 20 * math.log10(abs(h[0])) + 10 * math.log10(2)

    f3 = optimize.brentq(gain_db_plus_3, 1e6, 1e10, xtol=1e-3)
    assert tr * f3 == pytest.approx(math.log(9) / (2 * math.pi), rel=1e-4, abs=0)
    # the module's default factor is that product, rounded to 0.35
    assert float(xt.edge_frequency_hz(tr)) == pytest.approx(f3, rel=0.002, abs=0)


def test_edge_frequency_factors():
    # 0.35 / 1 ns = 350 MHz (single pole); Johnson & Graham knee 0.5 / 1 ns.
    assert float(xt.edge_frequency_hz(1e-9)) == pytest.approx(350e6, rel=1e-12, abs=0)
    assert float(xt.edge_frequency_hz(1e-9, factor=xt.KNEE_FACTOR)) == pytest.approx(500e6, rel=1e-12, abs=0)
    np.testing.assert_allclose(xt.edge_frequency_hz([1e-9, 2e-9, 5e-10]), [350e6, 175e6, 700e6], rtol=1e-12)


def test_kcl_three_aggressors_on_one_node_stay_below_the_swing():
    """Three 1 pF aggressors of 3.3 V onto a node with 1 pF to ground, R very
    large: KCL gives each 3.3 x 1 / (1 + 3) = 0.825 V, 2.475 V in all (the
    capacitive divider of the whole node, worked by hand); taking each
    aggressor with only its own C12 in the denominator gave 3 x 1.65 = 4.95 V,
    more than the swing."""
    share = xt.kcl_noise_v(1e12, 1e-12, 4e-12, 3.3, 25e6)
    assert float(share) == pytest.approx(0.825, rel=1e-6)
    assert float(3 * share) == pytest.approx(2.475, rel=1e-6)


def test_kcl_one_aggressor_is_the_lumped_model():
    for R, c12, c2g, f in ((50.0, 1e-12, 10e-12, 10e6), (1e5, 0.3e-12, 4e-12, 25e6), (1e7, 2e-12, 0.1e-12, 1e3)):
        assert float(xt.kcl_noise_v(R, c12, c12 + c2g, 3.3, f)) == pytest.approx(
            float(xt.lumped_noise_v(R, c12, c2g, 3.3, f)), rel=1e-12)


def _nodal_victim_v(R, c_g, c1k, v_k, phase_k, w):
    """Exact phasor voltage on the victim node (one node: R and C_g to
    ground, C1k to each aggressor source V_k e^{j phase_k}), by solving its
    nodal equation with numpy."""
    y = np.array([[1.0 / R + 1j * w * (c_g + c1k.sum())]])
    i = np.array([(1j * w * c1k * v_k * np.exp(1j * phase_k)).sum()])
    return complex(np.linalg.solve(y, i)[0])


def test_kcl_sum_against_an_exact_nodal_solve_and_the_divider_ceiling():
    """Random nodes (1-6 aggressors, R 1 ohm-10 Mohm, C 0.01-100 pF, one
    frequency 1 kHz-1 GHz): in phase, the sum of KCL shares equals the exact
    phasor solution; with random phases the exact value is at or below it;
    and the sum never exceeds sum_k V_k C1k / C_tot (the capacitive divider)."""
    rng = np.random.default_rng(11)
    for _ in range(2000):
        n = int(rng.integers(1, 7))
        R, f = 10 ** rng.uniform(0, 7), 10 ** rng.uniform(3, 9)
        c_g = 10 ** rng.uniform(-14, -10)
        c1k, v_k = 10 ** rng.uniform(-14, -10, n), rng.uniform(0.1, 15.0, n)
        c_tot = c_g + c1k.sum()
        shares = xt.kcl_noise_v(R, c1k, c_tot, v_k, f)
        w = 2 * np.pi * f
        assert abs(_nodal_victim_v(R, c_g, c1k, v_k, np.zeros(n), w)) == pytest.approx(shares.sum(), rel=1e-9)
        assert abs(_nodal_victim_v(R, c_g, c1k, v_k, rng.uniform(0, 2 * np.pi, n), w)) <= shares.sum() * (1 + 1e-12)
        assert shares.sum() <= (v_k * c1k).sum() / c_tot * (1 + 1e-12)
