"""Terminated coupled lines (checker.physics.mtl) against a lumped ladder
and against the lumped coupling model.

Reference 1: the same line cut into 400 LC sections (a "lumped ladder",
series L and shunt C per section, mutual terms included), solved by nodal
analysis with numpy — circuit theory, independent of the chain-parameter
solution; the ladder converges to the line as (beta dz)^2.
Reference 2: a short line onto a high-impedance victim must give the lumped
model (KCL at one victim node; crosstalk.kcl_noise_v, itself checked against
an exact nodal solve).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from checker.model import CopperLayer, Dielectric, Stackup
from checker.physics.crosstalk import kcl_noise_v
from checker.physics.mtl import victim_transfer
from checker.physics.tline import line_matrices, same_layer_section

STACKUP = Stackup((CopperLayer("L1", "signal", 0.035), CopperLayer("L2", "plane", 0.035)), (Dielectric(0.2, 4.2),))


@pytest.fixture(scope="module")
def lines():
    return line_matrices(same_layer_section(STACKUP, 0, 0.15, 0.15, 0.15))


def ladder(m, length, f, zs, zl, n=400):
    """Victim voltage at both ends per volt of aggressor source: pi-sections."""
    w = 2 * math.pi * f
    dz = length / n
    y_ser = np.linalg.inv(1j * w * np.asarray(m.L) * dz)
    y_sh = 1j * w * np.asarray(m.C) * dz
    size = 2 * (n + 1)
    a = np.zeros((size, size), complex)
    for k in range(n):
        i, j = slice(2 * k, 2 * k + 2), slice(2 * k + 2, 2 * k + 4)
        a[i, i] += y_ser
        a[j, j] += y_ser
        a[i, j] -= y_ser
        a[j, i] -= y_ser
    for k in range(n + 1):
        s = slice(2 * k, 2 * k + 2)
        a[s, s] += y_sh * (0.5 if k in (0, n) else 1.0)
    a[0:2, 0:2] += np.diag(1 / np.asarray(zs, complex))
    a[-2:, -2:] += np.diag(1 / np.asarray(zl, complex))
    rhs = np.zeros(size, complex)
    rhs[0] = 1.0 / zs[0]  # the aggressor's 1 V source behind zs[0] (Norton)
    v = np.linalg.solve(a, rhs)
    return v[1], v[-1]


@pytest.mark.parametrize("f", [10e6, 300e6, 1e9])
def test_terminated_line_matches_a_400_section_ladder(lines, f):
    """10 cm run; aggressor 50 ohm source, 1 Mohm far end; victim 100 kohm at
    the near end, 10 pF (a receiver) at the far end."""
    zs = (50.0, 1e5)
    zl = (1e6, 1 / (1j * 2 * math.pi * f * 10e-12))
    near, far = victim_transfer(lines, 0.1, f, zs, zl)
    ln, lf = ladder(lines, 0.1, f, zs, zl)
    assert abs(near[0]) == pytest.approx(abs(ln), rel=2e-3)
    assert abs(far[0]) == pytest.approx(abs(lf), rel=2e-3)


def test_short_line_onto_a_high_impedance_victim_is_the_lumped_model(lines):
    """1 cm at 1 MHz, aggressor driven hard (0.01 ohm) and open at its far end,
    victim 100 kohm at one end and open at the other: one node with C12 =
    -C[0,1] l and C_tot = C[1,1] l."""
    length, f = 0.01, 1e6
    near, far = victim_transfer(lines, length, f, (0.01, 1e5), (1e9, 1e9))
    c12 = -float(lines.C[0, 1]) * length
    c_tot = float(lines.C[1, 1]) * length
    lumped = float(kcl_noise_v(1e5, c12, c_tot, 1.0, f))
    assert abs(near[0]) == pytest.approx(lumped, rel=0.01)
    assert abs(far[0]) == pytest.approx(lumped, rel=0.01)
