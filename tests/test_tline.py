"""Tests of the transmission-line crosstalk module (checker.physics.tline).

Check values and their sources (each also named beside its test):

* Homogeneous dielectric: every TEM mode travels at c0/sqrt(er), L C =
  mu0 eps0 er I, so Cm/C = Lm/L for a symmetric pair and the far-end
  crosstalk vanishes (C. R. Paul, *Analysis of Multiconductor Transmission
  Lines*, 2nd ed., Wiley, 2008, per-unit-length parameters of a homogeneous
  medium; H. W. Johnson & M. Graham, *High-Speed Digital Design*, Prentice
  Hall, 1993, crosstalk chapter: "no forward crosstalk in stripline"; from
  memory). On this solver's grid C = er C0 exactly (the grid does not
  depend on er), so these hold to rounding, not just to discretisation.
  c0, mu0, eps0: ``scipy.constants``.
* Microstrip (air above): Lm/L > Cm/C, so the far-end pulse is inverted
  (same texts, and E. Bogatin, *Signal and Power Integrity -- Simplified*,
  3rd ed., 2018, crosstalk chapter; from memory). The size of the ratio,
  2-5x, is a *within-project field-solve measurement* (the brief for this
  module), used as a loose band only.
* Single microstrip: Z0 and v = c0/sqrt(eps_eff) from scikit-rf's
  ``skrf.media.MLine`` with the Hammerstad-Jensen quasi-static model
  (E. Hammerstad, O. Jensen, "Accurate models for microstrip computer-aided
  design", IEEE MTT-S Int. Microwave Symp. Digest, pp. 407-409, 1980),
  with thickness, no dispersion, lossless.
* Hand calculations of Kb, kf, Lsat, NEXT and FEXT from made-up matrices,
  arithmetic beside each value (formulas: module docstring; Johnson &
  Graham 1993; S. H. Hall, G. W. Hall & J. A. McCall, *High-Speed Digital
  System Design*, Wiley, 2000; Bogatin 2018).
* Reciprocity of the coupled-wave amplitudes: swapping aggressor and victim
  scales Kb by Z_a/Z_v (equal power coupled each way; follows from the
  forms derived in the module docstring).
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from scipy.constants import c as C0
from scipy.constants import epsilon_0 as EPS0
from scipy.constants import mu_0 as MU0

from checker.model import CopperLayer, Dielectric, Stackup
from checker.physics.broadside import broadside_section
from checker.physics.fieldsolve import FAST, FINE, Conductor, CrossSection, Slab
from checker.physics.tline import (
    Crosstalk,
    LineMatrices,
    is_electrically_long,
    line_matrices,
    same_layer_section,
    transmission_line_crosstalk,
    vacuum,
)


def approx(value, rel: float):
    """Relative tolerance only (the default abs=1e-12 would swallow SI
    values such as F/m, H/m and s/m)."""
    return pytest.approx(value, rel=rel, abs=0.0)


ER = 4.3


def stripline_stackup(t: float = 0.035) -> Stackup:
    """plane / signal / plane, 0.2 mm dielectrics of er 4.3 on both sides:
    one dielectric fills everything between the planes (the trace layer's
    band beside the traces gets the mean of 4.3 and 4.3)."""
    return Stackup(
        (CopperLayer("g1", "plane", t), CopperLayer("s", "signal", t), CopperLayer("g2", "plane", t)),
        (Dielectric(0.2, ER), Dielectric(0.2, ER)),
    )


def four_layer() -> Stackup:
    """top (microstrip over gnd, 0.2 mm) / gnd / in / bottom plane."""
    return Stackup(
        (
            CopperLayer("top", "signal", 0.035),
            CopperLayer("gnd", "plane", 0.035),
            CopperLayer("in", "signal", 0.035),
            CopperLayer("bot", "plane", 0.035),
        ),
        (Dielectric(0.2, ER), Dielectric(0.5, ER), Dielectric(0.2, ER)),
    )


def six_layer() -> Stackup:
    """The unequal six-layer stackup of tests/test_broadside.py."""
    return Stackup(
        (
            CopperLayer("top", "signal", 0.035),
            CopperLayer("gnd1", "plane", 0.035),
            CopperLayer("in1", "signal", 0.018),
            CopperLayer("in2", "mixed", 0.035),
            CopperLayer("gnd2", "plane", 0.035),
            CopperLayer("bot", "signal", 0.035),
        ),
        (Dielectric(0.1, 4.2), Dielectric(0.15, 4.4), Dielectric(0.25, 3.9), Dielectric(0.2, 4.4),
         Dielectric(0.1, 4.2)),
    )


@pytest.fixture(scope="module")
def stripline() -> LineMatrices:
    return line_matrices(same_layer_section(stripline_stackup(), 1, 0.2, 0.2, 0.2), FAST)


@pytest.fixture(scope="module")
def microstrip() -> LineMatrices:
    return line_matrices(same_layer_section(four_layer(), 0, 0.2, 0.2, 0.2), FAST)


# ---------------------------------------------------------------- geometry


def test_same_layer_section_geometry():
    """Traces on the layer's copper band, edge gap as given, aggressor 0 on
    the left; planes at the facing surfaces of g1 and g2."""
    cs = same_layer_section(stripline_stackup(), 1, 0.1, 0.3, 0.2)
    a, v = cs.conductors
    # layer s spans y = -0.235 .. -0.270 (0.035 copper + 0.2 dielectric above it)
    assert (a.x0, a.x1, a.net) == pytest.approx((-0.2, -0.1, 0))
    assert (v.x0, v.x1, v.net) == pytest.approx((0.1, 0.4, 1))
    assert (a.y0, a.y1) == (v.y0, v.y1) == pytest.approx((-0.27, -0.235))
    assert sorted(cs.planes) == pytest.approx([-0.47, -0.035])
    assert {s.er for s in cs.slabs} == {ER}


def test_same_layer_section_mirrors_broadside_conventions():
    """Layer in1 of the six-layer stackup has the same grounds (gnd1 above,
    gnd2 below) as the broadside pair (in1, in2): planes and slabs must be
    identical to broadside_section's."""
    su = six_layer()
    mine = same_layer_section(su, 2, 0.1, 0.1, 0.1)
    theirs = broadside_section(su, 2, 3, 0.1, 0.1, 0.0)
    assert sorted(mine.planes) == sorted(theirs.planes)
    assert sorted(mine.slabs, key=lambda s: s.y0) == sorted(theirs.slabs, key=lambda s: s.y0)


def test_same_layer_section_outer_layer_is_microstrip():
    """Top layer: one plane (gnd, below), its own band is air (no slab)."""
    cs = same_layer_section(four_layer(), 0, 0.2, 0.2, 0.2)
    assert cs.planes == pytest.approx((-0.235,))
    assert [(s.y0, s.y1, s.er) for s in cs.slabs] == [pytest.approx((-0.235, -0.035, ER))]


@pytest.mark.parametrize("args", [(0, 0.2, 0.2, 0.0), (0, -0.1, 0.2, 0.2), (7, 0.2, 0.2, 0.2)])
def test_same_layer_section_rejects(args):
    """Zero gap, negative width, bad index."""
    with pytest.raises(ValueError):
        same_layer_section(four_layer(), *args)


def test_vacuum_keeps_slab_faces():
    cs = same_layer_section(four_layer(), 0, 0.2, 0.2, 0.2)
    vac = vacuum(cs)
    assert [(s.y0, s.y1) for s in vac.slabs] == [(s.y0, s.y1) for s in cs.slabs]
    assert all(s.er == 1.0 for s in vac.slabs)


# ---------------------------------------------------------- homogeneous


def test_homogeneous_lc_is_identity_over_v_squared(stripline):
    """Homogeneous medium: L C = mu0 eps0 er I (Paul 2008), here to rounding
    because C = er C0 on the same grid."""
    lc = stripline.L @ stripline.C
    np.testing.assert_allclose(lc / (MU0 * EPS0 * ER), np.eye(2), rtol=0, atol=1e-12)


def test_homogeneous_symmetric_stripline_has_no_fext(stripline):
    """Cm/C == Lm/L, so kf = 0 (no far-end crosstalk in a homogeneous
    dielectric: Johnson & Graham 1993; Paul 2008) and Kb = 1/2 Cm/C."""
    m = stripline
    cc = m.c_mutual / m.c_self
    ll = m.l_mutual / m.l_self
    assert cc > 0.05  # a real coupling (0.10 measured at gap = w), not a vacuous zero
    assert ll == approx(cc, 1e-12)
    scale = cc / m.velocity  # size of either term of kf, s/m (~7e-10)
    assert abs(m.kf_per_s) < 1e-12 * scale
    assert m.kb == approx(0.5 * cc, 1e-12)
    xt = transmission_line_crosstalk(m, 0.3, 50e-12, 1.0)
    assert xt.fext_v < 1e-9 * xt.next_v


def test_homogeneous_unequal_widths_still_no_fext():
    """Unequal traces in one dielectric: still no far-end crosstalk (both
    modes at c0/sqrt(er); Paul 2008). The victim-only ratio difference
    (Cm/C_vv - Lm/L_vv)/2v does NOT vanish here (why the module uses
    (Cm Z_v - Lm/Z_a)/2, see its docstring)."""
    m = line_matrices(same_layer_section(stripline_stackup(), 1, 0.1, 0.3, 0.2), FAST)
    cc = m.c_mutual / m.c_self
    ll = m.l_mutual / m.l_self
    naive = 0.5 * (cc - ll) / m.velocity
    assert abs(naive) > 0.2 * cc / m.velocity  # measured: ll/cc = 1.63
    assert abs(m.kf_per_s) < 1e-12 * cc / m.velocity
    # both modes (eigenvalues of L C) at c0/sqrt(er)
    np.testing.assert_allclose(np.linalg.eigvals(m.L @ m.C), [ER / C0**2] * 2, rtol=1e-10, atol=0)


def test_single_trace_homogeneous_velocity_is_exact():
    """One trace between two planes in one dielectric: v = c0/sqrt(er)
    (scipy.constants.c) to rounding, any grid."""
    for r in (0.7, FAST):
        cs = CrossSection((Conductor(-0.1, 0.1, 0.2, 0.235, 0),), (Slab(0.0, 0.435, ER),), (0.0, 0.435))
        m = line_matrices(cs, r)
        assert m.velocity == approx(C0 / math.sqrt(ER), 1e-12)


# ------------------------------------------------------------ microstrip


def test_microstrip_inductive_coupling_dominates(microstrip):
    """Air above: Lm/L > Cm/C, so kf < 0 (far-end pulse inverted; Johnson &
    Graham 1993, Bogatin 2018). At gap = w the solver gives Lm/L / (Cm/C)
    = 1.86 (FAST); the within-project 2-5x band is checked at gap = 2w."""
    m = microstrip
    cc = m.c_mutual / m.c_self
    ll = m.l_mutual / m.l_self
    assert ll > 1.5 * cc
    assert m.kf_per_s < 0
    # equal traces: the general forms are the textbook ones
    assert m.kf_per_s == approx(0.5 * (cc - ll) / m.velocity, 1e-9)
    assert m.kb == approx(0.25 * (cc + ll), 1e-9)
    wide = line_matrices(same_layer_section(four_layer(), 0, 0.2, 0.2, 0.4), FAST)
    ratio = (wide.l_mutual / wide.l_self) / (wide.c_mutual / wide.c_self)
    assert 2.0 < ratio < 5.0  # loose within-project expectation (2.66 measured)


def test_microstrip_fast_close_to_fine(microstrip):
    """Resolution check: Kb and kf at FAST within 2 % of FINE (measured
    0.7 % and 0.7 %)."""
    fine = line_matrices(same_layer_section(four_layer(), 0, 0.2, 0.2, 0.2), FINE)
    assert microstrip.kb == approx(fine.kb, 0.02)
    assert microstrip.kf_per_s == approx(fine.kf_per_s, 0.02)


def test_reciprocity_on_unequal_microstrip():
    """Swapping aggressor and victim scales Kb by Z_v/Z_a and kf by the
    same factor (equal power each way; module docstring). Unequal widths,
    inhomogeneous: a victim-only ratio form would fail this."""
    m = line_matrices(same_layer_section(four_layer(), 0, 0.1, 0.3, 0.2), FAST)
    s = m.swapped()
    assert s.z0 == m.z0_aggressor and s.z0_aggressor == m.z0
    assert m.kb / s.kb == approx(m.z0 / m.z0_aggressor, 1e-12)
    assert m.kf_per_s / s.kf_per_s == approx(m.z0 / m.z0_aggressor, 1e-12)
    assert m.z0 / m.z0_aggressor < 0.8  # the factor is far from 1 here (0.64 measured)


def _mline(w_mm, h_mm, t_mm, er):
    """scikit-rf MLine, Hammerstad-Jensen quasi-static: (Z0 ohm, v m/s)."""
    import skrf
    from skrf.media import MLine

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        line = MLine(
            frequency=skrf.Frequency(10, 10, 1, unit="GHz"),
            w=w_mm * 1e-3, h=h_mm * 1e-3, t=t_mm * 1e-3, ep_r=er, tand=0.0,
            model="hammerstadjensen", disp="none", diel="frequencyinvariant",
        )
        z0 = float(np.real(line.z0_characteristic[0]))
        eeff = float(np.real(line.ep_reff_f[0]))
    return z0, C0 / math.sqrt(eeff)


@pytest.mark.parametrize("w,h,t,er", [(0.3, 0.2, 0.035, 4.3), (0.15, 0.1, 0.018, 3.7), (1.0, 0.5, 0.035, 4.5)])
def test_single_microstrip_matches_hammerstad_jensen(w, h, t, er):
    """L from the vacuum solve: Z0 = sqrt(L/C) and v = 1/sqrt(LC) of one
    microstrip vs scikit-rf MLine (Hammerstad & Jensen 1980). Measured at
    FAST: Z0 0.9-1.1 % low, v within 0.06 %; tolerances 2 % and 0.5 %."""
    cs = CrossSection((Conductor(-w / 2, w / 2, h, h + t, 0),), (Slab(0.0, h, er),), (0.0,))
    m = line_matrices(cs, FAST)
    z0, v = _mline(w, h, t, er)
    assert m.z0 == approx(z0, 0.02)
    assert m.velocity == approx(v, 0.005)
    with pytest.raises(ValueError):
        _ = m.kb  # one line: no coupling


# ------------------------------------------------------- hand calculation

# Made-up matrices: C = 100 pF/m, Cm = 10 pF/m, L = 360 nH/m, Lm = 54 nH/m.
# sqrt(LC) = sqrt(360e-9 * 100e-12) = sqrt(3.6e-17) = 6e-9 s/m -> v = 1.6667e8 m/s
# Z0 = sqrt(360e-9 / 100e-12) = sqrt(3600) = 60 ohm
# Cm/C = 0.10, Lm/L = 0.15
# Kb = (0.10 + 0.15) / 4 = 0.0625
# kf = (0.10 - 0.15) / 2 * 6e-9 = -1.5e-10 s/m
HAND = LineMatrices(C=np.array([[100e-12, -10e-12], [-10e-12, 100e-12]]),
                    L=np.array([[360e-9, 54e-9], [54e-9, 360e-9]]))


def test_hand_coefficients():
    assert HAND.velocity == approx(1 / 6e-9, 1e-12)
    assert HAND.z0 == approx(60.0, 1e-12)
    assert HAND.c_mutual == approx(10e-12, 1e-12)
    assert HAND.l_mutual == approx(54e-9, 1e-12)
    assert HAND.kb == approx(0.0625, 1e-12)
    assert HAND.kf_per_s == approx(-1.5e-10, 1e-12)


def test_hand_next_saturation():
    """tr = 1 ns: Lsat = tr v / 2 = 1e-9 * 1.6667e8 / 2 = 0.083333 m.
    At or beyond Lsat, NEXT = Kb V1 = 0.0625 * 2 V = 0.125 V; at Lsat/2
    half of it, 0.0625 V."""
    lsat = 1e-9 / 6e-9 / 2  # 0.083333 m
    assert HAND.saturation_length_m(1e-9) == approx(lsat, 1e-12)
    for length, expected in ((lsat, 0.125), (0.5, 0.125), (lsat / 2, 0.0625), (lsat / 10, 0.0125)):
        xt = transmission_line_crosstalk(HAND, length, 1e-9, 2.0)
        assert xt.next_v == approx(expected, 1e-12)
        assert xt.saturation_length_m == approx(lsat, 1e-12)
        assert (xt.model, xt.coupled_length_m, xt.rise_time_s) == ("transmission-line", length, 1e-9)


def test_hand_fext_linear_in_length_inverse_in_rise_time():
    """FEXT = |kf| len / tr V1: 1.5e-10 * 0.1 / 1e-9 * 1 V = 0.015 V;
    twice the length 0.030 V; half the rise time 0.030 V; both 0.060 V.
    No saturation with length (unlike NEXT)."""
    cases = [(0.1, 1e-9, 0.015), (0.2, 1e-9, 0.030), (0.1, 0.5e-9, 0.030), (0.2, 0.5e-9, 0.060)]
    for length, tr, expected in cases:
        assert transmission_line_crosstalk(HAND, length, tr, 1.0).fext_v == approx(expected, 1e-12)


def test_is_electrically_long_at_saturation_length():
    """tr = 2**-30 s (0.931 ns), v = 2**27 m/s (1.34e8): tr v / 2 = 2**-4 =
    0.0625 m, exact in binary; equal to it is not 'longer'."""
    tr, v = 2.0**-30, 2.0**27
    assert not is_electrically_long(0.0624, tr, v)
    assert not is_electrically_long(0.0625, tr, v)
    assert is_electrically_long(0.0626, tr, v)
    with pytest.raises(ValueError):
        is_electrically_long(0.1, 0.0, v)


@pytest.mark.parametrize("args", [(0.0, 1e-9, 1.0), (0.1, 0.0, 1.0), (0.1, 1e-9, -1.0), (float("nan"), 1e-9, 1.0)])
def test_crosstalk_rejects_bad_inputs(args):
    with pytest.raises(ValueError):
        transmission_line_crosstalk(HAND, *args)


def test_line_matrices_validation():
    with pytest.raises(ValueError):  # positive off-diagonal: not Maxwell form
        LineMatrices(np.array([[1e-10, 1e-11], [1e-11, 1e-10]]), HAND.L)
    with pytest.raises(ValueError):  # not symmetric
        LineMatrices(np.array([[1e-10, -1e-11], [-2e-11, 1e-10]]), HAND.L)
    with pytest.raises(ValueError):  # shape mismatch
        LineMatrices(HAND.C, np.array([[1e-7]]))
    with pytest.raises(ValueError):
        Crosstalk("fancy", 0.0, 0.0, 1.0, 1.0, 1e-9)


def test_measured_microstrip_crosstalk_has_the_stated_sign(microstrip):
    """Field-solved 0.2/0.2/0.2 mm microstrip, 50 mm, tr 100 ps, 1 V:
    NEXT saturated (Lsat = 100e-12 * 1.74e8 / 2 = 8.7 mm < 50 mm) at Kb V1,
    FEXT = |kf| * 0.05 / 1e-10 V with kf < 0 (inverted pulse)."""
    xt = transmission_line_crosstalk(microstrip, 0.05, 100e-12, 1.0)
    assert xt.saturation_length_m == approx(100e-12 * microstrip.velocity / 2, 1e-12)
    assert xt.next_v == approx(microstrip.kb, 1e-12)
    assert xt.fext_v == approx(-microstrip.kf_per_s * 0.05 / 100e-12, 1e-12)
    assert 0.05 < xt.fext_v < 0.3  # measured 0.149 V: a real, sizeable far-end pulse
