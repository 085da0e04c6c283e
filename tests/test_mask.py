"""Conformal solder mask (Stackup.mask_style, physics.sections.mask_blocks)
and the field solver's dielectric blocks it rests on.

References: exact properties of the discretised Laplace problem (a uniform
permittivity scales the Maxwell matrix exactly; a block that coincides with
a slab is that slab), the geometry worked by hand, and direct field solves
of the same cross-section at a finer grid with Richardson extrapolation.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from checker.model import CopperLayer, Dielectric, Stackup
from checker.physics.edge import EdgeModel, edge_section
from checker.physics.fieldsolve import Block, Conductor, CrossSection, Slab, solve
from checker.physics.sections import mask_blocks

MICROSTRIP = Stackup((CopperLayer("top", "signal", 0.035), CopperLayer("gnd", "plane", 0.035)),
                     (Dielectric(0.2, 4.2),), mask_top=Dielectric(0.02, 3.5), mask_style="conformal")


def test_a_block_filling_the_domain_scales_the_matrix_exactly():
    a, b = Conductor(-0.3, -0.1, 0.0, 0.035, 0), Conductor(0.1, 0.3, 0.0, 0.035, 1)
    vac = solve(CrossSection((a, b), planes=(-0.2,)), 1.0).maxwell
    full = solve(CrossSection((a, b), planes=(-0.2,), blocks=(Block(-1e3, 1e3, -1e3, 1e3, 3.0),)), 1.0).maxwell
    assert np.allclose(full, 3.0 * vac, rtol=1e-9, atol=0)


def test_a_block_where_a_slab_is_changes_nothing():
    a, b = Conductor(-0.3, -0.1, 0.0, 0.035, 0), Conductor(0.1, 0.3, 0.0, 0.035, 1)
    slab = solve(CrossSection((a, b), (Slab(-0.2, 0.0, 4.2),), (-0.2,)), 1.0).maxwell
    both = solve(CrossSection((a, b), (Slab(-0.2, 0.0, 4.2),), (-0.2,),
                              blocks=(Block(-1e3, 1e3, -0.2, 0.0, 4.2),)), 1.0).maxwell
    assert np.allclose(both, slab, rtol=1e-12, atol=0)


def test_conformal_mask_geometry_by_hand():
    """A 0.15 mm trace, 35 um copper (y -0.035..0), 20 um mask: a cap
    x -0.095..0.095, y 0..0.02, walls 20 um wide down to the laminate, and
    a 20 um coat on the laminate (slab y -0.035..-0.015)."""
    cs = edge_section(MICROSTRIP, 0, 0.15, 0.15, 0.5)
    left = [b for b in cs.blocks if b.x1 <= 0.0]  # trace 0 lies at x -0.4 .. -0.25
    cap = [b for b in left if b.y0 == pytest.approx(0.0)]
    assert len(cap) == 1 and (cap[0].x0, cap[0].x1, cap[0].y1) == pytest.approx((-0.42, -0.23, 0.02))
    walls = sorted((b.x0, b.x1) for b in left if b.y1 == pytest.approx(0.0))
    assert walls == [pytest.approx((-0.42, -0.4)), pytest.approx((-0.25, -0.23))]
    coat = [s for s in cs.slabs if s.er == 3.5]
    assert len(coat) == 1 and (coat[0].y0, coat[0].y1) == pytest.approx((-0.035, -0.015))
    assert mask_blocks(replace(MICROSTRIP, mask_style="flat"), 0, 0, cs.conductors) == ()


@pytest.mark.parametrize("gap", [0.1, 0.3, 0.6])
def test_conformal_table_against_a_finer_direct_solve(gap):
    """The edge table on a conformally masked microstrip against a direct
    solve of the same cross-section at resolution 3, Richardson-extrapolated:
    within 2 %."""
    direct = -solve(edge_section(MICROSTRIP, 0, 0.15, 0.15, gap), 3.0, richardson=True).extrapolated[0, 1]
    table = float(EdgeModel(MICROSTRIP, 0, [0.15], max_gap_mm=gap).c12_per_m(0.15, 0.15, gap))
    assert table == pytest.approx(direct, rel=0.02)


def test_flat_mask_reads_higher_than_conformal_which_reads_higher_than_bare():
    """More dielectric between the sidewalls, more C12: the flat fill (mask
    filling the whole copper band and a slab above) reads 17-22 % above the
    conformal coat at 0.1-0.6 mm gaps (measured), and the bare board below both."""
    for gap in (0.1, 0.3, 0.6):
        c = {}
        for name, st in (("flat", replace(MICROSTRIP, mask_style="flat")), ("conformal", MICROSTRIP),
                         ("bare", replace(MICROSTRIP, mask_top=None))):
            c[name] = -solve(edge_section(st, 0, 0.15, 0.15, gap), 2.0).maxwell[0, 1]
        assert c["flat"] > 1.1 * c["conformal"] and c["conformal"] > 1.1 * c["bare"]
