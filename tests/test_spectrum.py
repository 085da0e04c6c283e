"""The trapezoidal spectrum and the filtered-victim noise (checker.physics.spectrum).

References: scipy.fft of a finely sampled trapezoid (harmonic amplitudes),
and scipy.signal.lsim of the same coupling network and filter driven by
that trapezoid in the time domain (steady-state RMS and peak), both
general-purpose numerical libraries independent of the closed forms.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import fft, signal

from checker.physics.spectrum import filtered_noise_v, trapezoid_harmonics


def trapezoid(t, swing, period, tr, duty):
    """Sampled trapezoid: 0 -> swing in tr starting at 0, flat, down in tr;
    duty is the width between the 50 % points."""
    x = np.mod(t, period)
    tau = duty * period
    up = np.clip(x / tr, 0, 1) if tr > 0 else (x >= 0).astype(float)
    down = np.clip((x - tau) / tr, 0, 1) if tr > 0 else (x >= tau).astype(float)
    return swing * (up - down)


@pytest.mark.parametrize("duty, tr_frac", [(0.5, 0.02), (0.3, 0.05), (0.5, 0.0), (0.1, 0.01)])
def test_harmonics_match_the_fft_of_a_sampled_trapezoid(duty, tr_frac):
    period, swing, m = 1e-6, 3.3, 1 << 16
    tr = tr_frac * period
    t = np.arange(m) * period / m
    # start each edge half a rise early so that the 50 % points are tau apart
    x = trapezoid(t + tr / 2, swing, period, tr, duty)
    spec = np.abs(fft.rfft(x)) * 2 / m
    n = np.arange(1, 40)
    want = trapezoid_harmonics(swing, 1 / period, tr, duty, n)
    assert np.allclose(spec[n], want, rtol=2e-3, atol=2e-4 * swing)


def test_noise_in_band_against_a_time_domain_solve():
    """Clock 1 MHz, 3.3 V, 20 ns edges, onto a 100 kohm node (C1k 0.5 pF,
    C_tot 12 pF) filtered at 100 kHz: the spectral RMS equals the RMS of the
    steady-state output of scipy.signal.lsim, and the spectral peak is at or
    above its peak."""
    swing, f, tr, duty = 3.3, 1e6, 20e-9, 0.5
    r, c1k, c_tot, fc = 1e5, 0.5e-12, 12e-12, 1e5
    peak, rms, _ = filtered_noise_v(r, c1k, c_tot, swing, f, tr, duty, fc)
    # H(s) = s R C1k / ((1 + s R Ctot)(1 + s / wc))
    wc = 2 * np.pi * fc
    num = [r * c1k, 0.0]
    den = np.polymul([r * c_tot, 1.0], [1 / wc, 1.0])
    period = 1 / f
    per = 4000
    cycles = 60  # the slowest pole (1/wc = 1.6 us) has long settled
    t = np.arange(cycles * per) * period / per
    u = trapezoid(t, swing, period, tr, duty)
    _, y, _ = signal.lsim((num, den), u, t)
    last = y[-per:]
    last = last - last.mean()  # no DC passes the coupling capacitor
    assert rms == pytest.approx(float(np.sqrt(np.mean(last ** 2))), rel=0.01)
    assert peak >= float(np.max(np.abs(last))) * 0.999


def test_a_slow_filter_takes_a_fast_clock_almost_out():
    """The same node unfiltered (corner far above every harmonic that
    matters) against a 10 Hz filter: the band-limited noise is below a
    thousandth of it."""
    wide = filtered_noise_v(1e5, 0.5e-12, 12e-12, 3.3, 25e6, 1e-9, 0.5, 1e15)[0]
    narrow = filtered_noise_v(1e5, 0.5e-12, 12e-12, 3.3, 25e6, 1e-9, 0.5, 10.0)[0]
    assert narrow < 1e-3 * wide
    # unfiltered, each harmonic is the KCL share of its amplitude at its frequency (crosstalk.kcl_noise_v,
    # itself checked against an exact nodal solve); their sum exceeds the capacitive divider 3.3 x 0.5 / 12 V
    # here, which bounds the steady-state output outright, so the divider is the answer
    from checker.physics.crosstalk import kcl_noise_v

    n = np.arange(1, 200)
    shares = kcl_noise_v(1e5, 0.5e-12, 12e-12, trapezoid_harmonics(3.3, 25e6, 1e-9, 0.5, n), n * 25e6)
    assert shares.sum() > 3.3 * 0.5 / 12
    assert wide == pytest.approx(3.3 * 0.5 / 12, rel=1e-12)


def test_a_rectangle_with_no_effective_filter_is_capped_by_the_divider():
    """No rise time and a corner far above every harmonic summed: the series
    has no bound, but the steady-state output never exceeds A C1k/Ctot
    (the high-pass's impulse response has zero area and L1 norm 2 C1k/Ctot)."""
    peak, rms, _ = filtered_noise_v(1e5, 1e-12, 12e-12, 3.3, 25e6, None, None, 1e12)
    assert peak == pytest.approx(3.3 / 12, rel=1e-12) and rms <= peak
