"""Closed-form capacitances against outside references.

Each check names its source beside the value or tolerance. "From memory"
marks a textbook value or formula that was not re-read from the source for
this test.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.constants as const
from scipy.special import ellipk

from checker.physics import capacitance as cap
from checker.stackup import Reference

EPS0 = const.epsilon_0  # CODATA, scipy.constants
C0 = const.c
ETA0 = const.mu_0 * const.c


# --------------------------------------------------------------------------
# Parallel plates


def test_constants_are_codata():
    # scipy.constants (CODATA): eps0, c, mu0; eta0 = mu0 c.
    assert cap.EPS0 == const.epsilon_0
    assert cap.ETA0 == pytest.approx(const.mu_0 * const.c, rel=1e-15, abs=0)
    assert cap.ETA0 == pytest.approx(376.730313, rel=1e-8, abs=0)  # CODATA 2018 Z0


def test_parallel_plate_is_eps_w_over_d():
    # C' = eps0 er w / d (any electromagnetics text); eps0 from scipy.
    assert cap.parallel_plate_per_m(1.0, 1.0, 1.0) == pytest.approx(EPS0, rel=1e-15, abs=0)
    got = cap.parallel_plate_per_m([2.0, 0.2], [0.5, 0.1], [4.0, 3.0])
    np.testing.assert_allclose(got, [16 * EPS0, 6 * EPS0], rtol=1e-15)


# --------------------------------------------------------------------------
# Microstrip: Hammerstad & Jensen vs scikit-rf


def _skrf_mline(w_m, h_m, t_m, er):
    """scikit-rf 2.2 MLine, set up to be Hammerstad & Jensen's static model:
    model='hammerstadjensen' (quasi-static Z0 and eps_eff with thickness),
    disp='none' (no frequency dispersion), diel='frequencyinvariant' with
    tand=0 (constant, lossless er). Loss terms do not enter Z0 or eps_eff."""
    import skrf
    from skrf.media import MLine

    freq = skrf.Frequency(10, 10, 1, unit="GHz")  # 10 GHz: copper >= 3 skin depths
    line = MLine(
        frequency=freq,
        w=w_m,
        h=h_m,
        t=t_m,
        ep_r=er,
        tand=0.0,
        model="hammerstadjensen",
        disp="none",
        diel="frequencyinvariant",
    )
    return float(np.real(line.z0_characteristic[0])), float(np.real(line.ep_reff_f[0]))


# er = 1 is left out: scikit-rf's dielectric-loss term divides by (er - 1).
@pytest.mark.parametrize("er", [2.2, 3.66, 4.4, 10.2])
@pytest.mark.parametrize("t_over_h", [0.0, 0.02, 0.2])
def test_microstrip_matches_scikit_rf(er, t_over_h):
    # Reference: scikit-rf's MLine (Hammerstad & Jensen 1980), same model
    # in double precision -> agreement to 1e-9 relative.
    h = 1.0  # mm
    widths = np.geomspace(0.05, 50.0, 13)  # w/h from 0.05 to 50
    t = t_over_h * h
    line = cap.hammerstad_jensen(widths, h, t, er)
    for i, w in enumerate(widths):
        z_ref, e_ref = _skrf_mline(w * 1e-3, h * 1e-3, (t * 1e-3) if t > 0 else None, er)
        assert line.z0_ohm[i] == pytest.approx(z_ref, rel=1e-9, abs=0)
        assert line.er_eff[i] == pytest.approx(e_ref, rel=1e-9, abs=0)
        c_ref = math.sqrt(e_ref) / (C0 * z_ref)  # C' = sqrt(eps_eff) / (c0 Z0)
        est = cap.microstrip_c_per_m(w, h, t, er)
        assert float(est.value) == pytest.approx(c_ref, rel=1e-9, abs=0)


def test_microstrip_textbook_case():
    # Pozar, Microwave Engineering (3rd ed., Example 3.7; from memory):
    # er = 2.20, d = 0.127 cm, 50 ohm -> W = 0.391 cm, eps_e = 1.87, using
    # Pozar's simpler design formulas (~1 %) -> tolerance 1 %.
    line = cap.hammerstad_jensen(3.91, 1.27, 0.0, 2.20)
    assert float(line.z0_ohm) == pytest.approx(50.0, rel=0.01, abs=0)
    assert float(line.er_eff) == pytest.approx(1.87, rel=0.01, abs=0)


def test_microstrip_exceeds_parallel_plate_and_flags_range():
    # Fringing only adds capacitance (physics; any EM text).
    w = np.geomspace(0.05, 20, 9)
    est = cap.microstrip_c_per_m(w, 1.0, 0.0, 4.4)
    assert np.all(est.value > cap.parallel_plate_per_m(w, 1.0, 4.4))
    # Hammerstad & Jensen stated range 0.01 <= w/h <= 100 (from memory).
    flags = cap.microstrip_c_per_m([0.005, 0.5, 150.0, 1.0], 1.0, 0.0, [4.4, 4.4, 4.4, -1]).in_range
    assert flags.tolist() == [False, True, False, False]


# --------------------------------------------------------------------------
# Stripline: Cohn 1954


def _cohn_z0_ellipk(w, b, er):
    """Independent evaluation of Cohn (1954): Z0 = eta0/(4 sqrt er) K(k)/K(k'),
    k = sech(pi w / 2b); scipy's ellipk takes the parameter m = k**2."""
    k = 1.0 / np.cosh(np.pi * w / (2 * b))
    return ETA0 / (4 * np.sqrt(er)) * ellipk(k**2) / ellipk(1 - k**2)


def test_cohn_stripline_matches_independent_ellipk():
    # Reference: Cohn 1954 evaluated directly with scipy.special.ellipk.
    w = np.geomspace(0.02, 4.0, 25)
    for er in (1.0, 4.3):
        z = _cohn_z0_ellipk(w, 1.0, er)
        c_ref = np.sqrt(er) / (C0 * z)
        est = cap.stripline_c_per_m(w, 1.0, 0.0, er)
        np.testing.assert_allclose(est.value, c_ref, rtol=1e-10)
        assert est.in_range.all()


def test_cohn_stripline_textbook_case():
    # Pozar, Microwave Engineering (3rd ed., Example 3.5; from memory):
    # b = 0.32 cm, er = 2.20, 50 ohm -> W = 0.266 cm, found with Pozar's
    # curve-fit formula (stated ~1 %) -> tolerance 1.5 %.
    c = float(cap.stripline_c_per_m(2.66, 3.2, 0.0, 2.20).value)
    z0 = math.sqrt(2.20) / (C0 * c)
    assert z0 == pytest.approx(50.0, rel=0.015, abs=0)


def test_cohn_stripline_wide_strip_limit():
    # K(k') -> ln(4/k) as k -> 0 (Abramowitz & Stegun 17.3.26), so for a
    # wide strip C' -> 2 eps w/(b/2) [parallel plates to both planes]
    # + (8 ln 2 / pi) eps [four edge fringes, 2 ln2/pi each: Cohn's t = 0
    # fringing constant]. Residual ~ k^2 ln k, k = sech(pi w/2b) <= 0.02.
    eps = EPS0 * 3.0
    for w_over_b in (3.0, 5.0, 10.0, 100.0, 1e4):
        c = float(cap.stripline_c_per_m(w_over_b, 1.0, 0.0, 3.0).value)
        limit = 2 * eps * w_over_b / 0.5 + 8 * math.log(2) / math.pi * eps
        assert c == pytest.approx(limit, rel=2e-4, abs=0)


def test_wheeler_thickness_formula_reproduces_cohn_at_zero_thickness():
    # Wheeler (1978) claims 0.5 % for W'/(b - t) < 10 (from memory);
    # reference: Cohn's exact t = 0 solution (independent ellipk form).
    w = np.geomspace(0.05, 5.0, 15)
    z_w = cap._wheeler_z0_air(w, 1.0, np.zeros_like(w))
    z_c = _cohn_z0_ellipk(w, 1.0, 1.0)
    np.testing.assert_allclose(z_w, z_c, rtol=0.005)


def _cohn_thick_c(w, b, t, er):
    """Cohn's thick wide-strip stripline (S. B. Cohn, "Problems in strip
    transmission lines", IRE Trans. MTT-3, 1955; from memory):
    C'/eps = 4 (w/b)/(1 - t/b) + 4 Cf'/eps,
    Cf'/eps = (1/pi)[2/(1-x) ln(1/(1-x) + 1) - (1/(1-x) - 1) ln(1/(1-x)^2 - 1)],
    x = t/b; Cohn states a largest error of 1.24 % at w/(b - t) = 0.35,
    less for wider strips (from memory)."""
    x = t / b
    cf = (2 / (1 - x) * np.log(1 / (1 - x) + 1) - (1 / (1 - x) - 1) * np.log(1 / (1 - x) ** 2 - 1)) / np.pi
    return EPS0 * er * (4 * (w / b) / (1 - x) + 4 * cf)


@pytest.mark.parametrize("t_over_b", [0.01, 0.05, 0.1, 0.2])
def test_thick_stripline_matches_cohn_wide_strip_formula(t_over_b):
    # Tolerance 1.3 %: Cohn's stated 1.24 % for w/(b - t) >= 0.35 (from
    # memory; at t = 0 the formula is 1.17 % above the exact solution there).
    b, er = 1.0, 4.0
    t = t_over_b * b
    w = np.array([0.35, 0.5, 1.0, 2.0, 4.0]) * (b - t)
    est = cap.stripline_c_per_m(w, b, t, er)
    np.testing.assert_allclose(est.value, _cohn_thick_c(w, b, t, er), rtol=0.013)
    assert est.in_range.all()
    # thicker copper, more capacitance (physics)
    assert np.all(est.value > cap.stripline_c_per_m(w, b, 0.0, er).value)


def test_off_centre_stripline_combination():
    b, t, er, w = 1.0, 0.05, 4.0, np.array([0.1, 0.4, 1.5])
    centred = cap.stripline_c_per_m(w, b, t, er).value
    # h1 = h2: the half-stripline combination is the centred line itself.
    same = cap.stripline_c_per_m(w, b, t, er, h1_mm=(b - t) / 2).value
    np.testing.assert_allclose(same, centred, rtol=1e-12)
    # symmetric in which plane is "one"; closer plane -> more capacitance.
    a = cap.stripline_c_per_m(w, b, t, er, h1_mm=0.3).value
    c = cap.stripline_c_per_m(w, b, t, er, h1_mm=b - t - 0.3).value
    np.testing.assert_allclose(a, c, rtol=1e-12)
    assert np.all(a > centred)
    # Wide-strip limit: parallel plates to both planes, eps w (1/h1 + 1/h2)
    # (any EM text); fringing is a fixed few eps, < 1 % at w = 500 b.
    h1, h2 = 0.2, b - t - 0.2
    wide = float(cap.stripline_c_per_m(500.0, b, t, er, h1_mm=h1).value)
    assert wide == pytest.approx(EPS0 * er * 500.0 * (1 / h1 + 1 / h2), rel=0.01, abs=0)
    assert not cap.stripline_c_per_m(0.2, b, t, er, h1_mm=0.99).in_range


# --------------------------------------------------------------------------
# Edge-coupled stripline: Cohn 1955


def _cohn_coupled_z_ellipk(w, s, b, er):
    """Independent evaluation of Cohn (1955):
    Z0e,o = eta0/(4 sqrt er) K(k')/K(k),
    k_e = tanh(pi w/2b) tanh(pi (w+s)/2b), k_o = tanh(pi w/2b) coth(pi (w+s)/2b)."""
    a = np.pi * w / (2 * b)
    c = np.pi * (w + s) / (2 * b)
    out = []
    for k in (np.tanh(a) * np.tanh(c), np.tanh(a) / np.tanh(c)):
        out.append(ETA0 / (4 * np.sqrt(er)) * ellipk(1 - k**2) / ellipk(k**2))
    return out


def test_cohn_coupled_stripline_matches_independent_ellipk():
    w, b, er = 0.3, 1.0, 4.0
    s = np.geomspace(0.02, 2.0, 20)
    ze, zo = _cohn_coupled_z_ellipk(w, s, b, er)
    m = cap.coupled_stripline_modes(w, s, b, er)
    np.testing.assert_allclose(m.z_even_ohm, ze, rtol=1e-10)
    np.testing.assert_allclose(m.z_odd_ohm, zo, rtol=1e-10)
    np.testing.assert_allclose(m.c_even_per_m, np.sqrt(er) / (C0 * ze), rtol=1e-10)


def test_cohn_coupled_stripline_case():
    # One case, w/b = 0.5, s/b = 0.2, er = 1: Z0e, Z0o from the independent
    # ellipk evaluation of Cohn (1955); odd below single below even.
    ze, zo = _cohn_coupled_z_ellipk(0.5, 0.2, 1.0, 1.0)
    m = cap.coupled_stripline_modes(0.5, 0.2, 1.0, 1.0)
    assert float(m.z_even_ohm) == pytest.approx(float(ze), rel=1e-10, abs=0)
    assert float(m.z_odd_ohm) == pytest.approx(float(zo), rel=1e-10, abs=0)
    z_single = float(_cohn_z0_ellipk(0.5, 1.0, 1.0))
    assert float(zo) < z_single < float(ze)


def test_cohn_coupled_stripline_limits():
    w, b, er = 0.3, 1.0, 3.5
    single = float(cap.stripline_c_per_m(w, b, 0.0, er).value)
    # Large gap: k_e, k_o -> tanh(pi w/2b), both modes -> single strip
    # (Cohn 1954); the residual falls as exp(-pi s/b).
    far = cap.coupled_stripline_modes(w, 8.0, b, er)
    assert float(far.c_even_per_m) == pytest.approx(single, rel=1e-9, abs=0)
    assert float(far.c_odd_per_m) == pytest.approx(single, rel=1e-9, abs=0)
    # Gap -> 0: even mode per strip = half a strip of width 2w, by Landen's
    # transformation K(k1')/K(k1) = 2 K(k')/K(k), k1 = (1-k')/(1+k')
    # (Abramowitz & Stegun 17.5), here k1 = tanh^2(a), k = tanh(2a).
    near = cap.coupled_stripline_modes(w, 1e-9, b, er)
    double = float(cap.stripline_c_per_m(2 * w, b, 0.0, er).value)
    assert float(near.c_even_per_m) == pytest.approx(double / 2, rel=1e-6, abs=0)


def test_coupled_stripline_mutual_capacitance_behaviour():
    s = np.geomspace(0.01, 5.0, 60)
    for w in (0.1, 0.5, 2.0):
        m = cap.coupled_stripline_modes(w, s, 1.0, 4.0)
        assert np.all(m.c_odd_per_m > m.c_even_per_m)
        c12 = m.c12_per_m
        assert np.all(np.diff(c12) < 0)  # falls monotonically with the gap
        assert c12[-1] < 1e-6 * c12[0]  # -> 0 (exp(-pi s/b) tail)
        assert m.in_range.all()


# --------------------------------------------------------------------------
# Edge-coupled microstrip: Kirschning & Jansen 1984


def _garg_bahl(u, g, er):
    """Independent published model: Garg & Bahl, IEEE Trans. MTT-27(7),
    1979 (formulas from memory), per-strip mode capacitances / eps0,
    with the single line from Hammerstad & Jensen:
    Cp = er u; 2Cf = sqrt(ee)/(c Z0) - Cp;
    Cf' = Cf (er/ee)^(1/4) / (1 + A/g tanh(8g)), A = exp(-0.1 exp(2.33 - 2.53u));
    Ce = Cp + Cf + Cf';
    Cga = K(k')/K(k), k = g/(g + 2u);
    Cgd = (er/pi) ln coth(pi g/4) + 0.65 Cf (0.02 sqrt(er)/g + 1 - er^-2);
    Co = Cp + Cf + Cga + Cgd."""
    line = cap.hammerstad_jensen(u, 1.0, 0.0, er)
    cp = er * u
    cf = (float(line.c_per_m) / EPS0 - cp) / 2
    a = math.exp(-0.1 * math.exp(2.33 - 2.53 * u))
    cfp = cf * (er / float(line.er_eff)) ** 0.25 / (1 + a / g * math.tanh(8 * g))
    k = g / (g + 2 * u)
    cga = ellipk(1 - k**2) / ellipk(k**2)
    cgd = er / math.pi * math.log(1 / math.tanh(math.pi * g / 4)) + 0.65 * cf * (
        0.02 * math.sqrt(er) / g + 1 - er**-2
    )
    return cp + cf + cfp, cp + cf + cga + cgd


@pytest.mark.parametrize("er", [1.0, 2.2, 4.4])
def test_coupled_microstrip_agrees_with_garg_bahl(er):
    # Two independently published closed forms: Kirschning & Jansen (~1 %)
    # and Garg & Bahl (~3 %; range 0.2 <= u <= 2, 0.05 <= g <= 2), both
    # stated accuracies from memory. Even mode within 4 % (sum of the
    # claims). Garg & Bahl's odd-mode gap term is the looser part: it
    # differs by up to ~7 % here, so the odd mode is held to 8 %.
    for u in (0.2, 0.5, 1.0, 2.0):
        for g in (0.1, 0.3, 1.0, 2.0):
            m = cap.coupled_microstrip_modes(u, g, 1.0, er)
            ce, co = _garg_bahl(u, g, er)
            assert float(m.c_even_per_m) / EPS0 == pytest.approx(ce, rel=0.04, abs=0), (u, g)
            assert float(m.c_odd_per_m) / EPS0 == pytest.approx(co, rel=0.08, abs=0), (u, g)


@pytest.mark.parametrize("er", [1.0, 2.2, 4.4])
def test_coupled_microstrip_large_gap_tends_to_single_line(er):
    # At g = s/h = 10 both modes must approach the single microstrip of
    # Hammerstad & Jensen (1980); within 2 %.
    for u in (0.2, 1.0, 3.0):
        single = float(cap.microstrip_c_per_m(u, 1.0, 0.0, er).value)
        m = cap.coupled_microstrip_modes(u, 10.0, 1.0, er)
        assert float(m.c_even_per_m) == pytest.approx(single, rel=0.02, abs=0)
        assert float(m.c_odd_per_m) == pytest.approx(single, rel=0.02, abs=0)


def test_coupled_microstrip_even_mode_permittivity_at_zero_gap():
    # K&J's even-mode eps_eff uses v = u (20 + g^2)/(10 + g^2) + g e^-g,
    # which is 2u at g = 0: the two strips merge into one of width 2w
    # (Hammerstad & Jensen eps_eff of width 2w).
    m = cap.coupled_microstrip_modes(0.7, 1e-6, 1.0, 4.4)
    merged = float(cap.hammerstad_jensen(1.4, 1.0, 0.0, 4.4).er_eff)
    assert float(m.er_eff_even) == pytest.approx(merged, rel=1e-5, abs=0)


@pytest.mark.parametrize("er", [2.2, 3.5, 4.4])
def test_coupled_microstrip_c12_falls_with_gap(er):
    g = np.geomspace(0.1, 10.0, 200)
    for u in np.geomspace(0.1, 10.0, 7):
        m = cap.coupled_microstrip_modes(u, g, 1.0, er)
        ok = m.in_range
        assert ok[0]  # tight gaps are in range
        assert np.all(m.c_odd_per_m[ok] > m.c_even_per_m[ok])
        c12 = m.c12_per_m[ok]
        assert np.all(c12 > 0)
        assert np.all(np.diff(c12) < 0)


def test_coupled_microstrip_flags():
    # K&J range (from memory): 0.1 <= u <= 10, 0.1 <= g <= 10, er <= 18;
    # copper as thick as the gap and unresolvable C12 are flagged too.
    w = [0.05, 1.0, 1.0, 1.0, 1.0]
    s = [1.0, 0.05, 1.0, 1.0, 8.0]
    m = cap.coupled_microstrip_modes(w, s, 1.0, 4.4, [0, 0, 0, 1.5, 0])
    assert m.in_range.tolist() == [False, False, True, False, False]
    assert not cap.coupled_microstrip_modes(1.0, 1.0, 1.0, 30.0).in_range


# --------------------------------------------------------------------------
# Coplanar strips and the dispatchers


def test_coplanar_strips_symmetric_case():
    # k = s/(s + 2w) = 1/sqrt(2) makes k = k', so K(k')/K(k) = 1 and
    # C' = eps (Gupta et al. 1996, coplanar strips, exact).
    w = 1.0
    s = 2 * w / (math.sqrt(2) - 1)
    assert float(cap.coplanar_strips_c12_per_m(w, s, 2.5)) == pytest.approx(2.5 * EPS0, rel=1e-12, abs=0)


def test_c2g_dispatch():
    w = np.array([0.1, 0.2, 0.3])
    ms = Reference("microstrip", 0.2, 4.2)
    np.testing.assert_array_equal(
        cap.c2g_per_m(ms, w, 0.035).value, cap.microstrip_c_per_m(w, 0.2, 0.035, 4.2).value
    )
    # stripline: b = 0.5 incl. copper, farther plane 0.25 away, nearer 0.215
    sl = Reference("stripline", 0.5, 4.0, 0.25)
    np.testing.assert_array_equal(
        cap.c2g_per_m(sl, w, 0.035).value, cap.stripline_c_per_m(w, 0.5, 0.035, 4.0, h1_mm=0.25).value
    )
    none = cap.c2g_per_m(Reference("none", 0.0, 1.0), w, 0.035)
    assert np.all(none.value == 0) and not none.in_range.any()
    with pytest.raises(ValueError, match="microstrip, stripline, none"):
        cap.c2g_per_m(Reference("coax", 1.0, 1.0), w, 0.0)


def test_edge_c12_dispatch_and_mean_width():
    sl = Reference("stripline", 0.5, 4.0, 0.2325)  # centred: (0.5 - 0.035)/2
    est = cap.edge_c12_per_m(sl, 0.1, 0.2, 0.15, 0.035)
    ref = cap.coupled_stripline_modes(0.15, 0.15, 0.5, 4.0, 0.035, h1_mm=0.2325)
    assert float(est.value) == pytest.approx(float(ref.c12_per_m), rel=1e-12, abs=0)
    assert bool(est.in_range)
    ms = Reference("microstrip", 0.2, 4.4)
    est = cap.edge_c12_per_m(ms, [0.2, 0.2], [0.2, 0.2], [0.2, 3.0], 0.0)
    ref = cap.coupled_microstrip_modes(0.2, [0.2, 3.0], 0.2, 4.4)
    assert float(est.value[0]) == pytest.approx(float(ref.c12_per_m[0]), rel=1e-12, abs=0)
    assert est.in_range.tolist() == [True, False]
    assert np.all(est.value >= 0)
    none = cap.edge_c12_per_m(Reference("none", 0.0, 1.0), 0.2, 0.2, 0.2, 0.035)
    assert float(none.value) == pytest.approx(float(cap.coplanar_strips_c12_per_m(0.2, 0.2, 1.0)), rel=1e-12, abs=0)
    assert not none.in_range
