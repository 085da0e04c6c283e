r"""Coupled noise in a filtered victim's band, from the aggressor's trapezoidal spectrum.

A victim that is filtered (an RC before an ADC, a declared bandwidth) does
not see a clock's edges at full weight. The aggressor is a periodic
trapezoid: swing A, period T = 1/f, rise and fall time tr (equal), pulse
width tau = duty x T (between the 50 % points). Its one-sided harmonic
amplitudes, n = 1, 2, ... at f_n = n f, are

.. math::

    c_n = 2 A \frac{\tau}{T}
          \left|\frac{\sin(n\pi\tau/T)}{n\pi\tau/T}\right|
          \left|\frac{\sin(n\pi t_r/T)}{n\pi t_r/T}\right|

(the trapezoid as the convolution of a rectangle of width tau with one of
width tr; envelope corners at 1/(pi tau) and 1/(pi tr); C. R. Paul,
*Introduction to Electromagnetic Compatibility*, Wiley, 2006, ch. 3, cited
from memory; checked in the tests against scipy's FFT of a sampled
trapezoid). The DC term does not couple.

Each harmonic reaches the victim node through the lumped coupling network
(Kirchhoff's current law at the node, :func:`checker.physics.crosstalk.kcl_noise_v`)

.. math::

    H_c(f) = \frac{j\omega R C_{1k}}{1 + j\omega R C_{tot}}

and the victim's own single-pole filter, corner f_c,
:math:`H_f(f) = 1/(1 + j f/f_c)` (the filter taken as not loading the
node: a load would only lower the node's noise, so this errs high). In the
victim's band:

* peak <= sum_n c_n |H_c(f_n)| |H_f(f_n)| (every harmonic at its crest at
  once: an upper bound of the steady-state peak),
* RMS = sqrt(sum_n (c_n |H_c| |H_f|)^2 / 2) (Parseval; the DC term is
  blocked).

The sum runs over the first :data:`MAX_HARMONICS` harmonics; what lies
beyond is bounded from the envelope (|sin x / x| <= 1/x for both sinc
factors, |H_c| <= C_1k/C_tot, |H_f| <= f_c/f_n) and added to the peak, so
the peak errs high, never low (the RMS adds the same tail in quadrature).
Both are capped by the capacitive divider A C_1k/C_tot, which bounds the
steady-state output outright (the coupling's impulse response has zero area
and L1 norm 2 C_1k/C_tot, the filter's 1). A missing rise time is taken as
0 (a rectangle: more high-frequency content, errs high), a missing duty as
50 %.
"""

from __future__ import annotations

import math

import numpy as np

#: Harmonics summed explicitly (the rest bounded, module docstring).
MAX_HARMONICS = 20000

#: Duty taken when the aggressor's class gives none.
DEFAULT_DUTY = 0.5


def trapezoid_harmonics(swing_v: float, frequency_hz: float, rise_time_s: float, duty: float,
                        n: np.ndarray) -> np.ndarray:
    """One-sided amplitude (V) of harmonics ``n`` (>= 1) of the trapezoid
    (module docstring)."""
    n = np.asarray(n, float)
    period = 1.0 / frequency_hz
    x_tau = np.pi * n * duty
    x_tr = np.pi * n * rise_time_s / period
    return 2.0 * swing_v * duty * np.abs(np.sinc(x_tau / np.pi)) * np.abs(np.sinc(x_tr / np.pi))


def filtered_noise_v(r_ohm: float, c1k_f: float, c_tot_f: float, swing_v: float, frequency_hz: float,
                     rise_time_s: float | None, duty: float | None, corner_hz: float,
                     max_harmonics: int = MAX_HARMONICS) -> tuple[float, float, int]:
    """(peak, RMS, harmonics summed) of the noise one aggressor couples into
    the band of a victim filtered at ``corner_hz`` (module docstring).
    ``rise_time_s`` None: 0; ``duty`` None: :data:`DEFAULT_DUTY`."""
    tr = 0.0 if rise_time_s is None or not math.isfinite(rise_time_s) else float(rise_time_s)
    d = DEFAULT_DUTY if duty is None or not math.isfinite(duty) else float(duty)
    period = 1.0 / frequency_hz
    tr = min(tr, min(d, 1.0 - d) * period)  # edges cannot outlast the pulse or the gap
    n = np.arange(1, max_harmonics + 1, dtype=float)
    f = n * frequency_hz
    w = 2.0 * np.pi * f
    c_n = trapezoid_harmonics(swing_v, frequency_hz, tr, d, n)
    h_c = w * r_ohm * c1k_f / np.hypot(1.0, w * r_ohm * c_tot_f)
    h_f = 1.0 / np.hypot(1.0, f / corner_hz)
    v = c_n * h_c * h_f
    peak = float(v.sum())
    rms = float(math.sqrt(float((v * v).sum()) / 2.0))
    # beyond N (module docstring): c_n <= (2 A / (n pi)) * T / (n pi tr) when tr > 0, |H_c| <= C1k / Ctot,
    # |H_f| <= fc / f_n once f_n > fc; each such factor adds a power of 1/n, and
    # sum_{n>N} n^-(1+p) <= 1 / (p N^p)
    big_n = float(max_harmonics)
    k = 2.0 * swing_v / math.pi * (c1k_f / c_tot_f)
    p = 0
    if tr > 0:
        k *= period / (math.pi * tr)
        p += 1
    if corner_hz < big_n * frequency_hz:
        k *= corner_hz / frequency_hz
        p += 1
    tail = k / (p * big_n ** p) if p else math.inf  # a rectangle with no filter: no series bound
    # the steady-state output is bounded outright: the coupling is a high-pass whose impulse response
    # (C1k/Ctot)(delta - e^(-t/tau)/tau) has L1 norm 2 C1k/Ctot and zero area, the filter's has L1 norm 1,
    # so |v| <= 2 (C1k/Ctot) max|u - A/2| = A C1k/Ctot (the capacitive divider)
    divider = swing_v * c1k_f / c_tot_f
    rms_bound = math.sqrt(rms * rms + tail * tail / 2.0) if math.isfinite(tail) else divider
    return min(peak + tail, divider), min(rms_bound, divider), max_harmonics
