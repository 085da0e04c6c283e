r"""Coupled noise from a mutual capacitance: the lumped victim-node model.

The victim net is one node with a resistance ``R`` to its (AC) ground (the
driver's output resistance, or a termination) and a capacitance ``C2G`` to
ground; the aggressor swings with amplitude ``V1`` at frequency ``f`` and
couples through ``C12``. Kirchhoff's current law at the victim node gives

.. math::

    V_n = \frac{j\omega R C_{12}}{1 + j\omega R (C_{12} + C_{2G})} V_1,
    \qquad
    |V_n| = \frac{\omega R C_{12} V_1}{\sqrt{1 + [\omega R (C_{12} + C_{2G})]^2}}

with :math:`\omega = 2\pi f`. Capacitances are totals for the coupled run
(F), not per metre. The model is lumped: valid while the coupled run is
electrically short (well under a tenth of a wavelength at ``f``, common
practice); longer runs need transmission-line (near-/far-end) crosstalk.

Limits:

* small R, :math:`\omega R (C_{12} + C_{2G}) \ll 1`:
  :math:`|V_n| \approx \omega R C_{12} V_1`, which over-reads the full
  model by the factor :math:`\sqrt{1 + x^2}`, :math:`x = \omega R(C_{12} +
  C_{2G})`: more than 10 % once :math:`x > \sqrt{1.1^2 - 1} \approx 0.458`.
* large R: :math:`|V_n| \to V_1 C_{12}/(C_{12} + C_{2G})`, a capacitive
  divider the noise never exceeds.
"""

from __future__ import annotations

import numpy as np

#: -3 dB bandwidth x 10-90 % rise time of a single-pole response,
#: ln(9) / (2 pi) = 0.3497..., usually rounded to 0.35.
SINGLE_POLE_FACTOR = 0.35

#: Johnson & Graham's "knee frequency" factor, f_knee = 0.5 / tr.
KNEE_FACTOR = 0.5

#: x = omega R (C12 + C2G) above which the small-R formula over-reads the
#: full model by more than 10 %: sqrt(1.1**2 - 1).
SMALL_R_LIMIT = float(np.sqrt(1.1**2 - 1.0))


def _arrays(*args):
    return np.broadcast_arrays(*(np.asarray(a, dtype=np.float64) for a in args))


def lumped_noise_v(R_ohm, C12_F, C2G_F, V1_V, f_Hz):
    r"""Amplitude of the noise coupled onto a victim node (V).

    .. math::

        |V_n| = \frac{\omega R C_{12} V_1}
                     {\sqrt{1 + [\omega R (C_{12} + C_{2G})]^2}},
        \quad \omega = 2\pi f

    from Kirchhoff's current law at the victim node (module docstring). It
    never exceeds the capacitive-divider ceiling
    :func:`divider_ceiling_v`.

    Parameters
    ----------
    R_ohm : array_like
        Victim node resistance to AC ground, ohm (>= 0).
    C12_F : array_like
        Mutual capacitance aggressor-victim over the coupled run, F.
    C2G_F : array_like
        Victim capacitance to ground (planes, loads), F.
    V1_V : array_like
        Aggressor amplitude, V.
    f_Hz : array_like
        Frequency, Hz (e.g. :func:`edge_frequency_hz` of the rise time).

    Returns
    -------
    numpy.ndarray
        |Vn|, V. Valid while the coupled run is electrically short.

    References
    ----------
    Circuit analysis (KCL) of the lumped coupling network; the same model
    with its limits is discussed in H. W. Ott, *Electromagnetic
    Compatibility Engineering*, Wiley, 2009, ch. 2 (capacitive coupling;
    from memory).
    """
    R, c12, c2g, v1, f = _arrays(R_ohm, C12_F, C2G_F, V1_V, f_Hz)
    w = 2.0 * np.pi * f
    return w * R * c12 * v1 / np.hypot(1.0, w * R * (c12 + c2g))


def kcl_noise_v(R_ohm, C1k_F, Ctotal_F, Vk_V, f_Hz):
    r"""One aggressor's share of the noise on a victim node that several
    aggressors couple to (V).

    .. math::

        |V_{n,k}| = \frac{\omega_k R C_{1k} V_k}{\sqrt{1 + (\omega_k R C_{tot})^2}},
        \qquad C_{tot} = C_{1g} + \sum_j C_{1j}

    from Kirchhoff's current law at the victim node with every other net
    held at AC ground by its driver at :math:`\omega_k` (superposition:
    one aggressor at a time). :math:`C_{tot}` is the node's whole
    capacitance, its capacitance to ground in mutual form :math:`C_{1g}`
    (the Maxwell matrix's row sum) plus its mutual capacitance to every
    neighbour: the Maxwell diagonal. The victim's noise is the sum of the
    magnitudes over its aggressors (phases aligned: the worst case). Each
    share is at most :math:`V_k C_{1k}/C_{tot}`, so the sum never exceeds
    the capacitive-divider limit :math:`\sum_k V_k C_{1k}/C_{tot}`. With one
    aggressor, :func:`lumped_noise_v` with ``C2G = C_tot - C12``.

    Parameters
    ----------
    R_ohm : array_like
        Victim node resistance to AC ground, ohm.
    C1k_F : array_like
        Mutual capacitance of this aggressor onto the victim, F.
    Ctotal_F : array_like
        The victim node's whole capacitance :math:`C_{tot}`, F (not less
        than the sum of its mutual capacitances).
    Vk_V, f_Hz : array_like
        This aggressor's amplitude (V) and frequency (Hz).

    References
    ----------
    Nodal analysis (KCL) of the lumped coupling network, as
    :func:`lumped_noise_v`.
    """
    R, c1k, ctot, v, f = _arrays(R_ohm, C1k_F, Ctotal_F, Vk_V, f_Hz)
    w = 2.0 * np.pi * f
    return w * R * c1k * v / np.hypot(1.0, w * R * ctot)


def lumped_noise_small_r_v(R_ohm, C12_F, C2G_F, V1_V, f_Hz):
    r"""Small-R approximation of :func:`lumped_noise_v`,
    :math:`|V_n| \approx \omega R C_{12} V_1` (V).

    Over-reads the full model by :math:`\sqrt{1 + x^2}` with
    :math:`x = \omega R (C_{12} + C_{2G})`: more than 10 % once
    ``x > SMALL_R_LIMIT`` (0.458); see :func:`small_r_in_range`. It also has
    no ceiling, whereas the true noise never exceeds
    :math:`V_1 C_{12}/(C_{12} + C_{2G})`.

    Parameters
    ----------
    R_ohm, C12_F, C2G_F, V1_V, f_Hz : array_like
        As :func:`lumped_noise_v` (ohm, F, F, V, Hz). ``C2G_F`` does not
        enter the value; it is accepted so both functions share one
        signature.

    Returns
    -------
    numpy.ndarray
        V.

    References
    ----------
    As :func:`lumped_noise_v` (its first-order term in omega).
    """
    R, c12, _c2g, v1, f = _arrays(R_ohm, C12_F, C2G_F, V1_V, f_Hz)
    return 2.0 * np.pi * f * R * c12 * v1


def small_r_in_range(R_ohm, C12_F, C2G_F, f_Hz, tolerance=0.10):
    r"""Where the small-R formula stays within ``tolerance`` of the full one.

    True where :math:`\sqrt{1 + x^2} - 1 \le` ``tolerance``, i.e.
    :math:`x = \omega R (C_{12} + C_{2G}) \le \sqrt{(1 + tol)^2 - 1}`
    (0.458 for the default 10 %).

    Parameters
    ----------
    R_ohm, C12_F, C2G_F, f_Hz : array_like
        ohm, F, F, Hz.
    tolerance : float
        Allowed relative over-read (dimensionless).

    Returns
    -------
    numpy.ndarray of bool
    """
    R, c12, c2g, f = _arrays(R_ohm, C12_F, C2G_F, f_Hz)
    x = 2.0 * np.pi * f * R * (c12 + c2g)
    return x <= np.sqrt((1.0 + tolerance) ** 2 - 1.0)


def divider_ceiling_v(C12_F, C2G_F, V1_V):
    r"""High-R limit of the victim noise, :math:`V_1 C_{12}/(C_{12} + C_{2G})`
    (V): the capacitive divider the lumped noise approaches as R grows and
    never exceeds.

    Parameters
    ----------
    C12_F, C2G_F : array_like
        F.
    V1_V : array_like
        Aggressor amplitude, V.

    Returns
    -------
    numpy.ndarray
        V.
    """
    c12, c2g, v1 = _arrays(C12_F, C2G_F, V1_V)
    return v1 * c12 / (c12 + c2g)


def edge_frequency_hz(rise_time_s, factor=SINGLE_POLE_FACTOR):
    r"""Frequency that stands for an edge of 10-90 % rise time ``tr``:
    :math:`f = \mathrm{factor} / t_r` (Hz).

    Default ``factor = 0.35``: the -3 dB bandwidth of a single-pole
    (first-order RC) response. Its step response
    :math:`1 - e^{-t/\tau}` crosses 10 % at :math:`\tau\ln(10/9)` and 90 %
    at :math:`\tau\ln 10`, so :math:`t_r = \tau\ln 9 \approx 2.197\tau`;
    its -3 dB frequency is :math:`1/(2\pi\tau)`, hence
    :math:`f_{3dB} t_r = \ln 9/(2\pi) = 0.3497`.

    ``factor = KNEE_FACTOR`` (0.5) gives Johnson & Graham's "knee
    frequency", below which most of a digital edge's energy lies.
    Report which factor was used.

    Parameters
    ----------
    rise_time_s : array_like
        10-90 % rise time, s (> 0).
    factor : float
        Dimensionless; 0.35 (single pole, default) or 0.5 (knee).

    Returns
    -------
    numpy.ndarray
        Hz.

    References
    ----------
    Single-pole rise time/bandwidth: derivation above (first-order step and
    frequency response).

    H. W. Johnson and M. Graham, *High-Speed Digital Design: A Handbook of
    Black Magic*, Prentice Hall, 1993, ch. 1 (knee frequency 0.5/tr;
    chapter from memory).
    """
    tr = np.asarray(rise_time_s, dtype=np.float64)
    return factor / tr
