r"""Closed-form per-unit-length capacitances of PCB traces.

Capacitance of a trace to its reference plane(s) and the same-layer
edge-coupled mutual capacitance of two traces, from published quasi-static
(2-D, TEM) models. Geometry comes in millimetres; every capacitance leaves in
F/m (SI inside). Multiply by the coupled length for a run: the per-unit-length
value holds where the run is long against the cross-section and short against
a wavelength.

Validity
--------
Every model with a validity range returns its values with a boolean
``in_range`` mask: an :class:`Estimate` (value, in_range), which unpacks as a
pair (``c, ok = microstrip_c_per_m(...)``), or the fuller
:class:`LineModel` / :class:`CoupledModes`. ``in_range`` is ``False`` where
the inputs lie outside the range in which the published model keeps its
stated accuracy, or are not physical (non-finite, zero or negative sizes;
those may give NaN or inf, e.g. a zero gap, where the odd-mode capacitance
diverges). The exact formulas (parallel plates, coplanar strips) return plain
arrays. Nothing here prints or warns; the caller decides how to report a
``False``.

Conventions
-----------
``C12`` is the *mutual* (circuit) capacitance, ``C12 = -C_M[1, 2]`` of the
Maxwell matrix. For a symmetric pair the even mode sees ``C_even = C1g`` and
the odd mode ``C_odd = C1g + 2 C12``, so ``C12 = (C_odd - C_even) / 2``.

All models below are for zero or thin copper and infinitely wide planes.
Within-project 2-D field solves (``../shared/REFERENCES.md``) show that
zero-thickness models understate the edge coupling of real (35 um) copper by
roughly 25-40 % at gap = width: take the edge ``C12`` here as an optimistic
(low) estimate at tight gaps.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
from scipy.constants import c as C0
from scipy.constants import epsilon_0 as EPS0
from scipy.constants import mu_0 as MU0
from scipy.special import ellipkm1

from ..stackup import Reference

#: Wave impedance of free space, eta0 = mu0 * c0 (ohm), from CODATA constants.
ETA0 = MU0 * C0

#: Smallest C12 / C11 (= (C_odd - C_even) / (C_odd + C_even)) for which the
#: coupled-microstrip C12 is reported in range. C12 is a small difference of
#: two mode capacitances, each good to about 1 % (Kirschning & Jansen 1984,
#: from memory), so its relative error can reach ~1 % / (C12 / C11); at 2 %
#: that bound is 50 %. Project choice, stated so it can be changed.
MIN_COUPLING_RATIO = 0.02

#: Reference kinds :func:`c2g_per_m` and :func:`edge_c12_per_m` accept.
REFERENCE_KINDS = ("microstrip", "stripline", "none")


class Estimate(NamedTuple):
    """A per-unit-length estimate and where it is trustworthy.

    ``value``: F/m, an array broadcast from the inputs. ``in_range``: bool
    array of the same shape, ``False`` outside the model's validity range.
    """

    value: np.ndarray
    in_range: np.ndarray


class LineModel(NamedTuple):
    """Quasi-static single-line parameters: ``z0_ohm`` (ohm), ``er_eff``
    (dimensionless), ``c_per_m`` (F/m) and the ``in_range`` mask."""

    z0_ohm: np.ndarray
    er_eff: np.ndarray
    c_per_m: np.ndarray
    in_range: np.ndarray


class CoupledModes(NamedTuple):
    """Even/odd-mode parameters of a symmetric edge-coupled pair.

    Capacitances are per strip, F/m; impedances in ohm; ``er_eff_*``
    dimensionless. ``c12_per_m`` is the mutual capacitance (C_odd - C_even)/2.
    """

    c_even_per_m: np.ndarray
    c_odd_per_m: np.ndarray
    z_even_ohm: np.ndarray
    z_odd_ohm: np.ndarray
    er_eff_even: np.ndarray
    er_eff_odd: np.ndarray
    in_range: np.ndarray

    @property
    def c12_per_m(self) -> np.ndarray:
        return (self.c_odd_per_m - self.c_even_per_m) / 2.0


def _arrays(*args):
    return np.broadcast_arrays(*(np.asarray(a, dtype=np.float64) for a in args))


def _finite_positive(*arrays) -> np.ndarray:
    ok = np.ones(np.broadcast(*arrays).shape, dtype=bool)
    for a in arrays:
        ok &= np.isfinite(a) & (a > 0)
    return ok


# ---------------------------------------------------------------------------
# Parallel plates


def parallel_plate_per_m(w_mm, d_mm, er):
    r"""Parallel-plate capacitance per unit length, :math:`C' = \varepsilon_0
    \varepsilon_r w / d`.

    Parameters
    ----------
    w_mm : array_like
        Plate (overlap) width, mm.
    d_mm : array_like
        Plate separation, mm.
    er : array_like
        Relative permittivity of the filling, dimensionless.

    Returns
    -------
    numpy.ndarray
        F/m. Exact only for plates much wider than their spacing; it ignores
        fringing, so for PCB traces it is low (typically 40-60 % low for a
        microstrip's capacitance to plane). Never use it alone for a trace.

    References
    ----------
    Any electromagnetics text, e.g. D. K. Cheng, *Field and Wave
    Electromagnetics*, 2nd ed., Addison-Wesley, 1989 (parallel-plate
    capacitor).
    """
    w, d, er = _arrays(w_mm, d_mm, er)
    with np.errstate(all="ignore"):
        return EPS0 * er * w / d


# ---------------------------------------------------------------------------
# Microstrip: Hammerstad & Jensen 1980


def _hj_z01(u):
    """Hammerstad-Jensen impedance of a zero-thickness strip in air (ohm)."""
    f = 6.0 + (2.0 * np.pi - 6.0) * np.exp(-((30.666 / u) ** 0.7528))
    return ETA0 / (2.0 * np.pi) * np.log(f / u + np.sqrt(1.0 + (2.0 / u) ** 2))


def _hj_er_eff(u, er):
    """Hammerstad-Jensen static effective permittivity, zero thickness."""
    a = (
        1.0
        + np.log((u**4 + (u / 52.0) ** 2) / (u**4 + 0.432)) / 49.0
        + np.log1p((u / 18.1) ** 3) / 18.7
    )
    b = 0.564 * ((er - 0.9) / (er + 3.0)) ** 0.053
    return (er + 1.0) / 2.0 + (er - 1.0) / 2.0 * (1.0 + 10.0 / u) ** (-a * b)


def hammerstad_jensen(w_mm, h_mm, t_mm, er) -> LineModel:
    r"""Quasi-static microstrip Z0, effective permittivity and capacitance.

    Hammerstad & Jensen (1980), with their strip-thickness correction. With
    :math:`u = w/h` and normalised thickness :math:`t_n = t/h`:

    .. math::

        Z_{01}(u) = \frac{\eta_0}{2\pi}\ln\left[\frac{f(u)}{u}
                    + \sqrt{1 + (2/u)^2}\right],\quad
        f(u) = 6 + (2\pi - 6)\exp\left[-(30.666/u)^{0.7528}\right]

        \varepsilon_e(u, \varepsilon_r) = \frac{\varepsilon_r + 1}{2}
            + \frac{\varepsilon_r - 1}{2}(1 + 10/u)^{-a(u) b(\varepsilon_r)}

        a(u) = 1 + \tfrac{1}{49}\ln\frac{u^4 + (u/52)^2}{u^4 + 0.432}
               + \tfrac{1}{18.7}\ln\left[1 + (u/18.1)^3\right],\quad
        b(\varepsilon_r) = 0.564\left(\frac{\varepsilon_r - 0.9}
                                          {\varepsilon_r + 3}\right)^{0.053}

        \Delta u_1 = \frac{t_n}{\pi}\ln\left[1 + \frac{4e}
                     {t_n\coth^2\sqrt{6.517u}}\right],\quad
        \Delta u_r = \tfrac12\left[1 + \operatorname{sech}
                     \sqrt{\varepsilon_r - 1}\right]\Delta u_1

        Z_0 = \frac{Z_{01}(u_r)}{\sqrt{\varepsilon_e(u_r)}},\quad
        \varepsilon_{eff} = \varepsilon_e(u_r)
            \left[\frac{Z_{01}(u_1)}{Z_{01}(u_r)}\right]^2,\quad
        C' = \frac{\sqrt{\varepsilon_{eff}}}{c_0 Z_0}

    with :math:`u_1 = u + \Delta u_1`, :math:`u_r = u + \Delta u_r`,
    :math:`\eta_0 = \mu_0 c_0`. Static (zero-frequency) values, no
    dispersion, lossless.

    Parameters
    ----------
    w_mm : array_like
        Strip width, mm.
    h_mm : array_like
        Dielectric height between strip and plane, mm.
    t_mm : array_like
        Strip (copper) thickness, mm; 0 for the zero-thickness model.
    er : array_like
        Relative permittivity of the substrate (air above the strip).

    Returns
    -------
    LineModel
        ``z0_ohm`` (ohm), ``er_eff``, ``c_per_m`` (F/m), ``in_range``.

    Notes
    -----
    Validity (Hammerstad & Jensen's stated accuracy, quoted from memory):
    Z01 better than 0.01 % for u <= 1 and 0.03 % for u <= 1000;
    epsilon_e better than 0.2 % for 0.01 <= u <= 100 and er <= 128, both
    against the exact quasi-static solution. ``in_range`` is therefore
    ``0.01 <= w/h <= 100``, ``1 <= er <= 128``; for the thickness correction
    (no range recalled) the mask also asks ``0 <= t < h`` and ``t <= w``
    (project choice).

    The model is a surface microstrip: air above the strip. A trace buried
    under more dielectric (one plane only) has a higher effective
    permittivity, so this understates its capacitance.

    References
    ----------
    E. Hammerstad and Ø. Jensen, "Accurate models for microstrip
    computer-aided design," *IEEE MTT-S International Microwave Symposium
    Digest*, pp. 407-409, May 1980.
    """
    w, h, t, er = _arrays(w_mm, h_mm, t_mm, er)
    with np.errstate(all="ignore"):
        u = w / h
        tn = t / h
        coth2 = 1.0 / np.tanh(np.sqrt(6.517 * u)) ** 2
        du1 = np.where(tn > 0, tn / np.pi * np.log1p(4.0 * np.e / (tn * coth2)), 0.0)
        dur = 0.5 * (1.0 + 1.0 / np.cosh(np.sqrt(np.maximum(er - 1.0, 0.0)))) * du1
        u1 = u + du1
        ur = u + dur
        z01_r = _hj_z01(ur)
        e_r = _hj_er_eff(ur, er)
        z0 = z01_r / np.sqrt(e_r)
        er_eff = e_r * (_hj_z01(u1) / z01_r) ** 2
        c = np.sqrt(er_eff) / (C0 * z0)
    ok = _finite_positive(w, h, er) & np.isfinite(t) & (t >= 0)
    ok &= (u >= 0.01) & (u <= 100.0) & (er >= 1.0) & (er <= 128.0) & (t < h) & (t <= w)
    return LineModel(z0, er_eff, c, ok)


def microstrip_c_per_m(w_mm, h_mm, t_mm, er) -> Estimate:
    r"""Capacitance per unit length of a microstrip to its plane (F/m).

    :math:`C' = \sqrt{\varepsilon_{eff}}/(c_0 Z_0)` with :math:`Z_0` and
    :math:`\varepsilon_{eff}` from Hammerstad & Jensen (1980) including
    their thickness correction; see :func:`hammerstad_jensen` for the
    formulas, units and validity range.

    Parameters
    ----------
    w_mm, h_mm, t_mm : array_like
        Strip width, dielectric height to the plane, copper thickness; mm.
    er : array_like
        Substrate relative permittivity.

    Returns
    -------
    Estimate
        F/m and the ``in_range`` mask of :func:`hammerstad_jensen`.

    References
    ----------
    E. Hammerstad and Ø. Jensen, "Accurate models for microstrip
    computer-aided design," *IEEE MTT-S International Microwave Symposium
    Digest*, pp. 407-409, May 1980.
    """
    line = hammerstad_jensen(w_mm, h_mm, t_mm, er)
    return Estimate(line.c_per_m, line.in_range)


# ---------------------------------------------------------------------------
# Complete elliptic integrals, robust at both ends


_LN4 = np.log(4.0)


def _k_from_m1(m1, log_m1):
    """K(m) for m = 1 - m1, accurate also when m1 underflows.

    Uses K(m) = ln(4 / sqrt(m1)) + O(m1 ln m1) as m1 -> 0
    (Abramowitz & Stegun 17.3.26) below m1 = 1e-15.
    """
    small = m1 < 1e-15
    safe = np.where(small, 0.5, m1)
    return np.where(small, _LN4 - 0.5 * log_m1, ellipkm1(safe))


def _ratio_k_kp(k, log_one_minus_k):
    """K(k) / K(k') for modulus k in [0, 1), with ln(1 - k) supplied
    analytically so that k near 1 keeps its precision (scipy's ellipk
    takes the parameter m = k**2; ellipkm1(p) is K(m = 1 - p))."""
    m = k * k
    log_m1 = log_one_minus_k + np.log1p(k)  # ln(1 - k^2) = ln(1-k) + ln(1+k)
    m1 = np.exp(log_m1)
    k_k = _k_from_m1(m1, log_m1)  # K(k), parameter m = k^2 = 1 - m1
    k_kp = ellipkm1(m)  # K(k'), parameter m1 = 1 - m
    return k_k / k_kp


def _log1p_exp_neg(x):
    """ln(1 + exp(-x)) for x >= 0."""
    return np.log1p(np.exp(-x))


def _log_one_minus_exp_neg(x):
    """ln(1 - exp(-x)) for x > 0."""
    return np.log(-np.expm1(-x))


# ---------------------------------------------------------------------------
# Stripline: Cohn 1954 (exact, zero thickness) and Wheeler 1978 (thickness)


def _cohn_stripline_c(w, b, er):
    r"""Cohn's exact zero-thickness centred stripline, C' = 4 eps K(k)/K(k'),
    k = tanh(pi w / 2b) (equivalently K(k')/K(k) with k = sech)."""
    a = np.pi * w / (2.0 * b)
    k = np.tanh(a)
    # 1 - tanh a = 2 e^{-2a} / (1 + e^{-2a})
    log_1mk = np.log(2.0) - 2.0 * a - _log1p_exp_neg(2.0 * a)
    return 4.0 * EPS0 * er * _ratio_k_kp(k, log_1mk)


def _wheeler_z0_air(w, b, t):
    """Wheeler (1978) stripline impedance in air (ohm), with thickness."""
    w, b, t = _arrays(w, b, t)
    x = t / b
    m = 2.0 / (1.0 + (2.0 / 3.0) * x / (1.0 - x))
    xs = np.where(x > 0, x, 0.5)  # placeholder where t = 0 (branch unused)
    dw = np.where(
        x > 0,
        xs
        / (np.pi * (1.0 - xs))
        * (1.0 - 0.5 * np.log((xs / (2.0 - xs)) ** 2 + (0.0796 * xs / (w / b + 1.1 * xs)) ** m)),
        0.0,
    )
    wp = w / (b - t) + dw  # W' / (b - t)
    p = (8.0 / np.pi) / wp
    return 30.0 * np.log1p((4.0 / np.pi) / wp * (p + np.sqrt(p * p + 6.27)))


def _stripline_centred_c(w, b, t, er):
    """Centred stripline C' (F/m): Cohn exact at t = 0, scaled by Wheeler's
    thickness ratio for t > 0."""
    c0 = _cohn_stripline_c(w, b, er)
    ratio = np.where(t > 0, _wheeler_z0_air(w, b, 0.0 * t) / _wheeler_z0_air(w, b, t), 1.0)
    return c0 * ratio


def stripline_c_per_m(w_mm, b_mm, t_mm, er, h1_mm=None) -> Estimate:
    r"""Capacitance per unit length of a stripline to its two planes (F/m).

    *Centred, zero thickness* (exact, Cohn 1954, conformal mapping):

    .. math::

        Z_0 = \frac{\eta_0}{4\sqrt{\varepsilon_r}}\frac{K(k)}{K(k')},\quad
        k = \operatorname{sech}\frac{\pi w}{2b},\quad k' = \tanh\frac{\pi w}{2b}

        C' = \frac{\sqrt{\varepsilon_r}}{c_0 Z_0}
           = 4\varepsilon_0\varepsilon_r\frac{K(k')}{K(k)}

    (:math:`\eta_0/4 \approx 30\pi` ohm). The form was checked here against
    its wide-strip limit :math:`C' \to 4\varepsilon w/b + (8\ln 2/\pi)
    \varepsilon` (parallel plates to both planes plus four edge fringes).

    *Thickness* (t > 0): the zero-thickness value is multiplied by
    :math:`Z_W(t=0)/Z_W(t)`, where :math:`Z_W` is Wheeler's (1978) stripline
    formula

    .. math::

        Z_W = \frac{30}{\sqrt{\varepsilon_r}}\ln\left\{1 + \frac{4}{\pi}
              \frac{b - t}{W'}\left[\frac{8}{\pi}\frac{b - t}{W'}
              + \sqrt{\left(\frac{8}{\pi}\frac{b - t}{W'}\right)^2
              + 6.27}\right]\right\}

        \frac{W'}{b - t} = \frac{w}{b - t} + \frac{x}{\pi(1 - x)}\left\{1
              - \tfrac12\ln\left[\left(\frac{x}{2 - x}\right)^2
              + \left(\frac{0.0796x}{w/b + 1.1x}\right)^m\right]\right\}

    with :math:`x = t/b`, :math:`m = 2/[1 + \tfrac23 x/(1 - x)]` (quoted
    from memory; checked in the tests against Cohn's exact t = 0 solution and
    Cohn's wide-strip thick formula, both to 0.5 %). Scaling by the ratio
    keeps the exact value at t = 0 (project choice).

    *Off-centre* (``h1_mm`` given): the strip is ``h1`` from one plane and
    ``h2 = b - t - h1`` from the other. Approximation: the parallel
    combination of two half centred striplines,
    :math:`C' \approx \tfrac12 C'_{sym}(2h_1 + t) + \tfrac12
    C'_{sym}(2h_2 + t)` (the usual handbook approach, e.g. Wadell 1991 -
    from memory). It is exact for the parallel-plate part
    (:math:`\varepsilon w/h_1 + \varepsilon w/h_2`) and approximate in the
    fringing; no published accuracy is known to us, so it is not flagged.

    Parameters
    ----------
    w_mm : array_like
        Strip width, mm.
    b_mm : array_like
        Plane-to-plane spacing (including the strip copper), mm.
    t_mm : array_like
        Strip thickness, mm (0 for the exact zero-thickness model).
    er : array_like
        Relative permittivity of the (homogeneous) dielectric.
    h1_mm : array_like, optional
        Distance from the strip's surface to one plane, mm; ``None`` for a
        centred strip.

    Returns
    -------
    Estimate
        F/m. ``in_range`` is ``True`` where t = 0 (exact) or
        ``W'/(b - t) < 10`` (Wheeler's stated 0.5 % accuracy, from memory),
        with ``0 <= t < b`` and, off-centre, ``0 < h1 < b - t``.

    References
    ----------
    S. B. Cohn, "Characteristic impedance of the shielded-strip
    transmission line," *IRE Trans. Microwave Theory Tech.*, vol. MTT-2,
    no. 2, pp. 52-57, July 1954.

    H. A. Wheeler, "Transmission-line properties of a strip line between
    parallel planes," *IEEE Trans. Microwave Theory Tech.*, vol. MTT-26,
    no. 11, pp. 866-876, Nov. 1978.

    B. C. Wadell, *Transmission Line Design Handbook*, Artech House, 1991
    (off-centre stripline as two half striplines; from memory).
    """
    w, b, t, er = _arrays(w_mm, b_mm, t_mm, er)
    with np.errstate(all="ignore"):
        ok = _finite_positive(w, b, er) & np.isfinite(t) & (t >= 0) & (t < b) & (er >= 1.0)
        wide_ok = (t == 0) | (w / (b - t) < 10.0)
        if h1_mm is None:
            value = _stripline_centred_c(w, b, t, er)
        else:
            h1 = np.broadcast_to(np.asarray(h1_mm, dtype=np.float64), w.shape)
            h2 = b - t - h1
            ok &= np.isfinite(h1) & (h1 > 0) & (h2 > 0)
            b1 = 2.0 * h1 + t
            b2 = 2.0 * h2 + t
            value = 0.5 * (_stripline_centred_c(w, b1, t, er) + _stripline_centred_c(w, b2, t, er))
            wide_ok = (t == 0) | ((w / (b1 - t) < 10.0) & (w / (b2 - t) < 10.0))
    return Estimate(value, ok & wide_ok)


# ---------------------------------------------------------------------------
# Edge-coupled stripline: Cohn 1955


def _cohn_coupled_c(w, s, b, er):
    """Even- and odd-mode C' per strip (F/m), Cohn 1955, zero thickness,
    centred: C' = 4 eps K(k)/K(k') with k_e = tanh(a) tanh(c) and
    k_o = tanh(a) coth(c), a = pi w / 2b, c = pi (w + s) / 2b."""
    a = np.pi * w / (2.0 * b)
    d = np.pi * s / (2.0 * b)
    c = a + d
    ke = np.tanh(a) * np.tanh(c)
    ko = np.tanh(a) / np.tanh(c)
    base = np.log(2.0) - 2.0 * a - _log1p_exp_neg(2.0 * a)
    # 1 - ke = cosh(d) / (cosh a cosh c);  1 - ko = sinh(d) / (cosh a sinh c)
    log_1mke = base + _log1p_exp_neg(2.0 * d) - _log1p_exp_neg(2.0 * c)
    log_1mko = base + _log_one_minus_exp_neg(2.0 * d) - _log_one_minus_exp_neg(2.0 * c)
    ce = 4.0 * EPS0 * er * _ratio_k_kp(ke, log_1mke)
    co = 4.0 * EPS0 * er * _ratio_k_kp(ko, log_1mko)
    return ce, co


def coupled_stripline_modes(w_mm, gap_mm, b_mm, er, t_mm=0.0, h1_mm=None) -> CoupledModes:
    r"""Even/odd modes of two equal edge-coupled striplines (Cohn 1955).

    Exact for zero-thickness strips centred between the planes:

    .. math::

        Z_{0e,o} = \frac{\eta_0}{4\sqrt{\varepsilon_r}}
                   \frac{K(k_{e,o}')}{K(k_{e,o})},\quad
        k_e = \tanh\frac{\pi w}{2b}\tanh\frac{\pi(w + s)}{2b},\quad
        k_o = \tanh\frac{\pi w}{2b}\coth\frac{\pi(w + s)}{2b}

        C_{e,o}' = \frac{\sqrt{\varepsilon_r}}{c_0 Z_{0e,o}}
                 = 4\varepsilon_0\varepsilon_r\frac{K(k_{e,o})}{K(k_{e,o}')},
        \quad C_{12}' = (C_o' - C_e')/2

    Both modes tend to the single-strip value of
    :func:`stripline_c_per_m` as s grows; at s = 0 the even mode is half of
    a single strip of width 2w (Landen's transformation). The dielectric is
    homogeneous, so :math:`\varepsilon_{eff} = \varepsilon_r` for both modes.

    Off-centre strips (``h1_mm`` given) use the same half-stripline
    combination as :func:`stripline_c_per_m` for each mode,
    :math:`C'_{e,o} \approx \tfrac12 C'_{e,o}(2h_1 + t) + \tfrac12
    C'_{e,o}(2h_2 + t)` (approximation, by analogy; project choice).

    Parameters
    ----------
    w_mm : array_like
        Width of each strip, mm.
    gap_mm : array_like
        Edge-to-edge gap s, mm.
    b_mm : array_like
        Plane-to-plane spacing, mm.
    er : array_like
        Relative permittivity (homogeneous).
    t_mm : array_like, optional
        Copper thickness, mm. The model is zero-thickness: t only places an
        off-centre strip (``h2 = b - t - h1``) and enters the mask.
    h1_mm : array_like, optional
        Strip-to-plane distance for an off-centre pair, mm.

    Returns
    -------
    CoupledModes
        ``in_range``: finite positive sizes, ``0 <= t < s`` (once the copper
        is as thick as the gap the sidewall coupling, ~eps t/s, is as large
        as the whole zero-thickness C12; project criterion) and, off-centre,
        ``0 < h1 < b - t``. Zero thickness understates C12 of real copper
        (about 25-40 % at gap = width, within-project field solve).

    References
    ----------
    S. B. Cohn, "Shielded coupled-strip transmission line," *IRE Trans.
    Microwave Theory Tech.*, vol. MTT-3, no. 5, pp. 29-38, Oct. 1955.
    """
    w, s, b, er, t = _arrays(w_mm, gap_mm, b_mm, er, t_mm)
    with np.errstate(all="ignore"):
        ok = _finite_positive(w, s, b, er) & np.isfinite(t) & (t >= 0) & (t < s) & (t < b)
        ok &= er >= 1.0
        if h1_mm is None:
            ce, co = _cohn_coupled_c(w, s, b, er)
        else:
            h1 = np.broadcast_to(np.asarray(h1_mm, dtype=np.float64), w.shape)
            h2 = b - t - h1
            ok &= np.isfinite(h1) & (h1 > 0) & (h2 > 0)
            ce1, co1 = _cohn_coupled_c(w, s, 2.0 * h1 + t, er)
            ce2, co2 = _cohn_coupled_c(w, s, 2.0 * h2 + t, er)
            ce, co = 0.5 * (ce1 + ce2), 0.5 * (co1 + co2)
        ze = np.sqrt(er) / (C0 * ce)
        zo = np.sqrt(er) / (C0 * co)
    return CoupledModes(ce, co, ze, zo, er * np.ones_like(ce), er * np.ones_like(co), ok)


# ---------------------------------------------------------------------------
# Edge-coupled microstrip: Kirschning & Jansen 1984


def coupled_microstrip_modes(w_mm, gap_mm, h_mm, er, t_mm=0.0) -> CoupledModes:
    r"""Static even/odd modes of two equal edge-coupled microstrips.

    Kirschning & Jansen (1984), static part (zero thickness, no
    dispersion). With :math:`u = w/h`, :math:`g = s/h`, and the single-line
    :math:`Z_0`, :math:`\varepsilon_{eff}` of Hammerstad & Jensen (t = 0):

    .. math::

        v = u\frac{20 + g^2}{10 + g^2} + g e^{-g},\quad
        \varepsilon_{eff,e} = \frac{\varepsilon_r + 1}{2}
            + \frac{\varepsilon_r - 1}{2}(1 + 10/v)^{-a_e(v) b_e(\varepsilon_r)}

    (:math:`a_e, b_e` = Hammerstad-Jensen's :math:`a, b`);

    .. math::

        \varepsilon_{eff,o} = \left[\frac{\varepsilon_r + 1}{2} + a_o
            - \varepsilon_{eff}\right]e^{-c_o g^{d_o}} + \varepsilon_{eff}

        a_o = 0.7287\left[\varepsilon_{eff} - \frac{\varepsilon_r + 1}{2}
              \right]\left(1 - e^{-0.179u}\right),\quad
        b_o = \frac{0.747\varepsilon_r}{0.15 + \varepsilon_r}

        c_o = b_o - (b_o - 0.207)e^{-0.414u},\quad
        d_o = 0.593 + 0.694e^{-0.562u}

        Z_{0e} = \frac{Z_0\sqrt{\varepsilon_{eff}/\varepsilon_{eff,e}}}
                      {1 - Q_4 Z_0\sqrt{\varepsilon_{eff}}/\eta_0},\quad
        Z_{0o} = \frac{Z_0\sqrt{\varepsilon_{eff}/\varepsilon_{eff,o}}}
                      {1 - Q_{10} Z_0\sqrt{\varepsilon_{eff}}/\eta_0}

    with :math:`Q_1 = 0.8695u^{0.194}`,
    :math:`Q_2 = 1 + 0.7519g + 0.189g^{2.31}`,
    :math:`Q_3 = 0.1975 + [16.6 + (8.4/g)^6]^{-0.387}
    + \tfrac{1}{241}\ln[g^{10}/(1 + (g/3.4)^{10})]`,
    :math:`Q_4 = (2Q_1/Q_2)/[e^{-g}u^{Q_3} + (2 - e^{-g})u^{-Q_3}]`,
    :math:`Q_5 = 1.794 + 1.14\ln[1 + 0.638/(g + 0.517g^{2.43})]`,
    :math:`Q_6 = 0.2305 + \tfrac{1}{281.3}\ln[g^{10}/(1 + (g/5.8)^{10})]
    + \tfrac{1}{5.1}\ln(1 + 0.598g^{1.154})`,
    :math:`Q_7 = (10 + 190g^2)/(1 + 82.3g^3)`,
    :math:`Q_8 = \exp[-6.5 - 0.95\ln g - (g/0.15)^5]`,
    :math:`Q_9 = \ln Q_7\,(Q_8 + 1/16.5)`,
    :math:`Q_{10} = Q_4 - (Q_5/Q_2)\exp[Q_6 u^{-Q_9}\ln u]`.
    Mode capacitances per strip :math:`C'_{e,o} =
    \sqrt{\varepsilon_{eff,e/o}}/(c_0 Z_{0e/o})`.

    **All coefficients are quoted from memory**, not re-read from the paper
    (the paper writes 376.73 or 377 ohm where :math:`\eta_0` is used here).
    They were checked in the tests against the independent Garg & Bahl
    (1979) model (mode capacitances within 6 % over 0.2 <= u <= 2,
    0.1 <= g <= 2, er <= 4.4) and the large-gap single-line limit; an ad-hoc
    finite-difference solve during development agreed on C12 within ~10 %
    wherever the mask below is ``True``.

    Parameters
    ----------
    w_mm : array_like
        Width of each strip, mm.
    gap_mm : array_like
        Edge-to-edge gap s, mm.
    h_mm : array_like
        Dielectric height to the plane, mm.
    er : array_like
        Substrate relative permittivity (air above).
    t_mm : array_like, optional
        Copper thickness, mm. The model is zero-thickness; t enters only the
        mask (``t < s``).

    Returns
    -------
    CoupledModes
        ``in_range``: the published range ``0.1 <= u <= 10``,
        ``0.1 <= g <= 10``, ``1 <= er <= 18`` (from memory; stated accuracy
        about 1 %), ``0 <= t < s``, and C12 / C11 >= ``MIN_COUPLING_RATIO``
        (beyond it the ~1 % mode errors swamp C12, which can even come out
        negative at high er and wide gaps). Zero thickness understates C12
        of real copper (about 25-40 % at gap = width, within-project field
        solve).

    References
    ----------
    M. Kirschning and R. H. Jansen, "Accurate wide-range design equations
    for the frequency-dependent characteristic of parallel coupled microstrip
    lines," *IEEE Trans. Microwave Theory Tech.*, vol. MTT-32, no. 1,
    pp. 83-90, Jan. 1984 (corrections in vol. MTT-33, no. 3, p. 288,
    Mar. 1985 - from memory).

    E. Hammerstad and Ø. Jensen, "Accurate models for microstrip
    computer-aided design," *IEEE MTT-S International Microwave Symposium
    Digest*, pp. 407-409, May 1980.
    """
    w, s, h, er, t = _arrays(w_mm, gap_mm, h_mm, er, t_mm)
    with np.errstate(all="ignore"):
        u = w / h
        g = s / h
        single = hammerstad_jensen(w, h, 0.0 * t, er)
        z0, ee = single.z0_ohm, single.er_eff
        half = (er + 1.0) / 2.0
        # even-mode effective permittivity
        v = u * (20.0 + g**2) / (10.0 + g**2) + g * np.exp(-g)
        eee = _hj_er_eff(v, er)
        # odd-mode effective permittivity
        ao = 0.7287 * (ee - half) * (1.0 - np.exp(-0.179 * u))
        bo = 0.747 * er / (0.15 + er)
        co_ = bo - (bo - 0.207) * np.exp(-0.414 * u)
        do = 0.593 + 0.694 * np.exp(-0.562 * u)
        eeo = (half + ao - ee) * np.exp(-co_ * g**do) + ee
        # impedances
        q1 = 0.8695 * u**0.194
        q2 = 1.0 + 0.7519 * g + 0.189 * g**2.31
        q3 = 0.1975 + (16.6 + (8.4 / g) ** 6) ** -0.387 + np.log(g**10 / (1.0 + (g / 3.4) ** 10)) / 241.0
        q4 = (2.0 * q1 / q2) / (np.exp(-g) * u**q3 + (2.0 - np.exp(-g)) * u**-q3)
        q5 = 1.794 + 1.14 * np.log1p(0.638 / (g + 0.517 * g**2.43))
        q6 = 0.2305 + np.log(g**10 / (1.0 + (g / 5.8) ** 10)) / 281.3 + np.log1p(0.598 * g**1.154) / 5.1
        q7 = (10.0 + 190.0 * g**2) / (1.0 + 82.3 * g**3)
        q8 = np.exp(-6.5 - 0.95 * np.log(g) - (g / 0.15) ** 5)
        q9 = np.log(q7) * (q8 + 1.0 / 16.5)
        q10 = q4 - (q5 / q2) * np.exp(q6 * u**-q9 * np.log(u))
        z_air = z0 * np.sqrt(ee)
        ze = z0 * np.sqrt(ee / eee) / (1.0 - q4 * z_air / ETA0)
        zo = z0 * np.sqrt(ee / eeo) / (1.0 - q10 * z_air / ETA0)
        c_e = np.sqrt(eee) / (C0 * ze)
        c_o = np.sqrt(eeo) / (C0 * zo)
        ratio = (c_o - c_e) / (c_o + c_e)
    ok = _finite_positive(w, s, h, er) & np.isfinite(t) & (t >= 0) & (t < s)
    ok &= (u >= 0.1) & (u <= 10.0) & (g >= 0.1) & (g <= 10.0) & (er >= 1.0) & (er <= 18.0)
    ok &= ratio >= MIN_COUPLING_RATIO
    return CoupledModes(c_e, c_o, ze, zo, eee, eeo, ok)


# ---------------------------------------------------------------------------
# No reference plane: coplanar strips


def coplanar_strips_c12_per_m(w_mm, gap_mm, er):
    r"""Line-to-line capacitance of two equal coplanar strips with no plane.

    Exact (conformal mapping) for zero-thickness strips of width w, gap s,
    in a homogeneous medium of permittivity :math:`\varepsilon_r`:

    .. math::

        C' = \varepsilon_0\varepsilon_r\frac{K(k')}{K(k)},\quad
        k = \frac{s}{s + 2w}

    For strips on a dielectric half-space use
    :math:`\varepsilon_r \to (\varepsilon_r + 1)/2`.

    Parameters
    ----------
    w_mm, gap_mm : array_like
        Strip width and edge-to-edge gap, mm.
    er : array_like
        Relative permittivity of the surrounding medium.

    Returns
    -------
    numpy.ndarray
        F/m.

    References
    ----------
    K. C. Gupta, R. Garg, I. Bahl and P. Bhartia, *Microstrip Lines and
    Slotlines*, 2nd ed., Artech House, 1996, ch. 7 (coplanar strips).

    C. P. Wen, "Coplanar waveguide: a surface strip transmission line
    suitable for nonreciprocal gyromagnetic device applications," *IEEE
    Trans. Microwave Theory Tech.*, vol. MTT-17, no. 12, pp. 1087-1090,
    Dec. 1969.
    """
    w, s, er = _arrays(w_mm, gap_mm, er)
    with np.errstate(all="ignore"):
        k = s / (s + 2.0 * w)
        # 1 - k = 2w / (s + 2w)
        log_1mk = np.log(2.0 * w) - np.log(s + 2.0 * w)
        return EPS0 * er / _ratio_k_kp(k, log_1mk)


# ---------------------------------------------------------------------------
# Dispatch on the layer's reference


def _check_kind(reference: Reference) -> None:
    if reference.kind not in REFERENCE_KINDS:
        raise ValueError(
            f"unknown reference kind {reference.kind!r}; expected one of {', '.join(REFERENCE_KINDS)}"
        )


def c2g_per_m(reference: Reference, w_mm, t_mm) -> Estimate:
    """Capacitance per unit length of a trace to its reference plane(s), F/m.

    Dispatches on ``reference.kind``:

    * ``microstrip``: :func:`microstrip_c_per_m` with ``h = reference.h_mm``
      (Hammerstad & Jensen 1980).
    * ``stripline``: :func:`stripline_c_per_m` with ``b = reference.h_mm``
      and the strip ``reference.h_other_mm`` from the farther plane (Cohn
      1954, Wheeler 1978, half-stripline combination off centre).
    * ``none``: no plane; returns 0 with ``in_range`` all ``False`` (the
      caller falls back to the user's node capacitance).

    Parameters
    ----------
    reference : checker.stackup.Reference
        The layer's surroundings (``reference_of``).
    w_mm, t_mm : array_like
        Trace width and copper thickness, mm.

    Returns
    -------
    Estimate
        F/m and the validity mask of the model used.

    Raises
    ------
    ValueError
        For a kind other than ``microstrip``, ``stripline`` or ``none``.

    References
    ----------
    See :func:`microstrip_c_per_m` and :func:`stripline_c_per_m`.
    """
    _check_kind(reference)
    w, t = _arrays(w_mm, t_mm)
    if reference.kind == "microstrip":
        return microstrip_c_per_m(w, reference.h_mm, t, reference.er)
    if reference.kind == "stripline":
        h1 = reference.h_other_mm if reference.h_other_mm > 0 else None
        return stripline_c_per_m(w, reference.h_mm, t, reference.er, h1_mm=h1)
    return Estimate(np.zeros(w.shape), np.zeros(w.shape, dtype=bool))


def edge_c12_per_m(reference: Reference, w_a_mm, w_b_mm, gap_mm, t_mm) -> Estimate:
    """Same-layer edge-coupled mutual capacitance per unit length, F/m.

    ``C12 = (C_odd - C_even) / 2`` of a symmetric pair whose width is the
    mean of the two traces' widths (approximation for unequal widths:
    exact when equal, otherwise a project choice). Dispatches on
    ``reference.kind``:

    * ``stripline``: :func:`coupled_stripline_modes` (Cohn 1955, exact for
      zero thickness, centred; off centre by half-stripline combination),
      ``b = reference.h_mm``, strip ``reference.h_other_mm`` from one plane.
    * ``microstrip``: :func:`coupled_microstrip_modes` (Kirschning & Jansen
      1984, zero thickness), ``h = reference.h_mm``. A value below zero
      (possible only where the mask is ``False``) is clipped to 0.
    * ``none``: :func:`coplanar_strips_c12_per_m` in a uniform medium of
      ``reference.er`` (``reference_of`` gives 1.0 here, i.e. air: a lower
      bound), always flagged out of range.

    Zero-thickness models understate the C12 of real copper, by roughly
    25-40 % at gap = width (within-project 2-D field solve; REFERENCES.md).

    Parameters
    ----------
    reference : checker.stackup.Reference
        The layer's surroundings.
    w_a_mm, w_b_mm : array_like
        Widths of the two traces, mm.
    gap_mm : array_like
        Edge-to-edge gap, mm.
    t_mm : array_like
        Copper thickness, mm (places an off-centre stripline; enters the
        masks, see the mode functions).

    Returns
    -------
    Estimate
        F/m and the validity mask of the model used.

    Raises
    ------
    ValueError
        For an unknown reference kind.

    References
    ----------
    S. B. Cohn, "Shielded coupled-strip transmission line," *IRE Trans.
    Microwave Theory Tech.*, vol. MTT-3, no. 5, pp. 29-38, Oct. 1955.

    M. Kirschning and R. H. Jansen, "Accurate wide-range design equations
    for the frequency-dependent characteristic of parallel coupled microstrip
    lines," *IEEE Trans. Microwave Theory Tech.*, vol. MTT-32, no. 1,
    pp. 83-90, Jan. 1984.
    """
    _check_kind(reference)
    wa, wb, s, t = _arrays(w_a_mm, w_b_mm, gap_mm, t_mm)
    w = 0.5 * (wa + wb)
    if reference.kind == "stripline":
        h1 = reference.h_other_mm if reference.h_other_mm > 0 else None
        modes = coupled_stripline_modes(w, s, reference.h_mm, reference.er, t, h1_mm=h1)
        ok = modes.in_range & _finite_positive(wa, wb)
        return Estimate(modes.c12_per_m, ok)
    if reference.kind == "microstrip":
        modes = coupled_microstrip_modes(w, s, reference.h_mm, reference.er, t)
        ok = modes.in_range & _finite_positive(wa, wb)
        with np.errstate(invalid="ignore"):
            c12 = np.where(modes.c12_per_m < 0, 0.0, modes.c12_per_m)
        return Estimate(c12, ok)
    c12 = coplanar_strips_c12_per_m(w, s, reference.er)
    return Estimate(c12, np.zeros(c12.shape, dtype=bool))
