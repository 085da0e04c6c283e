r"""Crosstalk on a coupled pair of lines with real terminations, in the frequency domain.

The matched-line formulas of :mod:`checker.physics.tline` (near-end
``Kb V1``, far-end ``kf len/tr V1``) assume the victim terminated in its
characteristic impedance at both ends. A sensor input is nothing like that:
a resistance at one end, a high-impedance receiver with some capacitance at
the other. This module solves the lossless two-conductor line exactly with
whatever terminations the ends have.

With phasor voltages V(z) and currents I(z) (2-vectors: aggressor 0,
victim 1) and the per-unit-length matrices L and C, the telegrapher's
equations d/dz [V; I] = -[[0, jwL], [jwC, 0]] [V; I] give
[V(l); I(l)] = Phi [V(0); I(0)] with Phi = expm(-M l) (C. R. Paul,
*Analysis of Multiconductor Transmission Lines*, Wiley, 2008, the chain-
parameter matrix; cited from memory). The ends close the system:

    V(0) + Z_S I(0) = V_S        (sources and impedances at z = 0)
    V(l) - Z_L I(l) = 0          (loads at z = l)

Z_S, Z_L diagonal (no impedance between the lines at the ends). Four linear
equations for V(0), I(0); then V(l) from Phi. Checked in the tests against
a lumped ladder of many LC sections solved by nodal analysis, and against
the capacitive divider it must tend to for a short line and a high-impedance
victim.
"""

from __future__ import annotations

import numpy as np

from .tline import LineMatrices


def victim_transfer(m: LineMatrices, length_m: float, f_hz, z_source, z_load) -> tuple[np.ndarray, np.ndarray]:
    """Victim voltage at z = 0 (the aggressor's source end) and at z = l per
    volt of aggressor source, at each frequency of ``f_hz``.

    The chain-parameter matrix is built from the modes of the line: with
    LC T = T diag(lambda) (lossless: lambda_i = 1/v_i^2), beta_i = w sqrt(lambda_i),

        Phi11 = T cos(beta l) T^-1,             Phi12 = -j T [sin(beta l)/sqrt(lambda)] T^-1 L,
        Phi21 = -j L^-1 T [sqrt(lambda) sin(beta l)] T^-1,   Phi22 = L^-1 T cos(beta l) T^-1 L,

    which is expm(-M l) (module docstring) in closed form, for all
    frequencies at once.

    Parameters
    ----------
    m : LineMatrices
        Two conductors, aggressor 0, victim 1.
    length_m : float
        Coupled length, m (> 0).
    f_hz : array_like
        Frequencies, Hz (> 0).
    z_source, z_load : callable or sequence of two
        The impedances (ohm, complex allowed) of the aggressor and the
        victim at z = 0 and at z = l: two numbers, or a function of the
        frequency array (Hz) returning two arrays (or numbers).

    Returns
    -------
    (near, far) : complex arrays shaped like ``f_hz``.
    """
    m._need_pair()
    if not (length_m > 0 and np.isfinite(length_m)):
        raise ValueError(f"length_m must be positive and finite, got {length_m}")
    f = np.atleast_1d(np.asarray(f_hz, float))
    shape = f.shape
    f = f.ravel()
    L, C = np.asarray(m.L, float), np.asarray(m.C, float)
    lam, T = np.linalg.eig(L @ C)
    lam, T = lam.real, T.real
    Ti = np.linalg.inv(T)
    Li = np.linalg.inv(L)
    sq = np.sqrt(lam)
    bl = 2.0 * np.pi * f[:, None] * sq[None, :] * length_m  # (F, 2)
    cos, sin = np.cos(bl), np.sin(bl)

    def modal(diag):  # T diag T^-1 for each frequency: (F, 2, 2)
        return np.einsum("ik,fk,kj->fij", T, diag, Ti)

    phi11 = modal(cos)
    phi12 = -1j * modal(sin / sq[None, :]) @ L
    phi21 = -1j * Li @ modal(sin * sq[None, :])
    phi22 = Li @ modal(cos) @ L

    def ends(z):
        v = z(f) if callable(z) else z
        a, b = (np.broadcast_to(np.asarray(x, complex), f.shape) for x in v)
        out = np.zeros((f.size, 2, 2), complex)
        out[:, 0, 0], out[:, 1, 1] = a, b
        return out

    zs, zl = ends(z_source), ends(z_load)
    a = np.zeros((f.size, 4, 4), complex)
    a[:, :2, :2] = np.eye(2)
    a[:, :2, 2:] = zs
    a[:, 2:, :2] = phi11 - zl @ phi21
    a[:, 2:, 2:] = phi12 - zl @ phi22
    rhs = np.zeros((f.size, 4, 1), complex)
    rhs[:, 0, 0] = 1.0
    x = np.linalg.solve(a, rhs)[:, :, 0]
    v_end = np.einsum("fij,fj->fi", phi11, x[:, :2]) + np.einsum("fij,fj->fi", phi12, x[:, 2:])
    return x[:, 1].reshape(shape), v_end[:, 1].reshape(shape)


#: Harmonics are summed up to this many times the trapezoid's second corner
#: 1/(pi tr), at most :data:`MAX_LINE_HARMONICS` of them; the rest is
#: estimated from the envelope (c_n <= (2A/pi)(T/(pi tr))/n^2) times the
#: largest |H| met among those solved, and added.
HARMONIC_REACH = 100.0

#: At most this many harmonics are solved per run (all frequencies at once).
MAX_LINE_HARMONICS = 20000

#: An open end, ohm (a receiver input with no load given).
OPEN_OHM = 1e9


def terminated_noise_v(m: LineMatrices, length_m: float, swing_v: float, frequency_hz: float,
                       rise_time_s: float, duty: float, r_victim_ohm: float, c_node_f: float,
                       corner_hz: float | None = None) -> float:
    """Noise (V, the sum of the harmonic amplitudes: an upper bound of the
    peak) on a victim of an electrically long coupled run, with the victim
    held by ``r_victim_ohm`` at one end and loaded by ``c_node_f`` (its
    receiver; none: open) at the other, the aggressor a periodic trapezoid
    (``physics.spectrum``) driven through its line's own impedance (a
    series-terminated driver, common practice) into an open far end. Both
    orientations of the victim and both of its ends are tried; the largest
    counts. ``corner_hz``: the victim's filter, if any."""
    from .spectrum import trapezoid_harmonics

    z_agg = float(np.sqrt(m.L[0, 0] / m.C[0, 0]))
    tr = min(rise_time_s, min(duty, 1 - duty) / frequency_hz)  # edges cannot outlast the pulse or the gap
    n_max = int(min(MAX_LINE_HARMONICS, max(2.0, HARMONIC_REACH / (np.pi * max(tr, 1e-15)) / frequency_hz)))
    n = np.arange(1, n_max + 1)
    f = n * frequency_hz
    c_n = trapezoid_harmonics(swing_v, frequency_hz, tr, duty, n)
    h_f = 1.0 / np.hypot(1.0, f / corner_hz) if corner_hz else np.ones(n.size)

    def receiver(fk: float) -> complex:
        return 1.0 / (1j * 2 * np.pi * fk * c_node_f) if c_node_f > 0 else OPEN_OHM

    worst = 0.0
    for held_near in (True, False):
        zs = (lambda fk: (z_agg, r_victim_ohm)) if held_near else (lambda fk: (z_agg, receiver(fk)))
        zl = (lambda fk: (OPEN_OHM, receiver(fk))) if held_near else (lambda fk: (OPEN_OHM, r_victim_ohm))
        near, far = victim_transfer(m, length_m, f, zs, zl)
        for h in (near, far):
            g = np.abs(h) * h_f
            tail = (2.0 * swing_v / np.pi) * (1.0 / (frequency_hz * np.pi * max(tr, 1e-15))) / n_max \
                * float(g.max())  # sum_{n>N} 1/n^2 <= 1/N
            worst = max(worst, float(np.sum(c_n * g)) + tail)
    return worst
