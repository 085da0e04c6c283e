"""Stackup questions: neighbours, separations, permittivity, reference planes.

Dielectric thickness is the distance between the facing copper surfaces of
the two layers it separates. Between two copper layers that are not
neighbours, the distance is the sum of the dielectrics plus the copper of the
layers in between.
"""

from __future__ import annotations

from dataclasses import dataclass

from .model import Stackup


def broadside_pairs(stackup: Stackup, planes_shield: bool = True) -> list[tuple[int, int]]:
    """Copper layer pairs (upper, lower) that can couple broadside.

    Two neighbouring copper layers couple broadside when neither is a plane.
    With ``planes_shield=False`` (a plane so voided that it cannot be trusted
    as a shield) the two layers on either side of a plane pair up as well.
    """
    layers = stackup.layers
    pairs: list[tuple[int, int]] = []
    for i in range(len(layers) - 1):
        if layers[i].role != "plane" and layers[i + 1].role != "plane":
            pairs.append((i, i + 1))
        elif not planes_shield and layers[i].role != "plane":
            # skip over consecutive planes to the next non-plane layer
            j = i + 1
            while j < len(layers) and layers[j].role == "plane":
                j += 1
            if j < len(layers):
                pairs.append((i, j))
    return pairs


def separation_mm(stackup: Stackup, i: int, j: int) -> float:
    """Vertical distance (mm) between the facing surfaces of layers i and j."""
    lo, hi = min(i, j), max(i, j)
    if lo == hi:
        return 0.0
    dielectric = sum(d.thickness_mm for d in stackup.dielectrics[lo:hi])
    copper = sum(layer.thickness_mm for layer in stackup.layers[lo + 1 : hi])
    return dielectric + copper


def effective_er(stackup: Stackup, i: int, j: int) -> float:
    """Relative permittivity of the dielectrics between layers i and j, taken
    as capacitors in series: ``er_eff = sum(d) / sum(d / er)``.

    This is exact for a parallel-plate field crossing stacked dielectric
    sheets (any electromagnetics text); copper in between counts as gap-free.
    """
    lo, hi = min(i, j), max(i, j)
    sheets = stackup.dielectrics[lo:hi]
    if not sheets:
        raise ValueError("layers i and j must differ")
    total = sum(d.thickness_mm for d in sheets)
    return total / sum(d.thickness_mm / d.er for d in sheets)


@dataclass(frozen=True)
class Reference:
    """A signal layer's surroundings for its capacitance to ground.

    ``kind`` is ``microstrip`` (one plane, on one side), ``stripline`` (planes
    on both sides) or ``none`` (no plane in the stackup: the estimate of the
    capacitance to ground falls back to the user's node capacitance only).
    ``h_mm`` is the distance to the nearest plane (microstrip) or the
    plane-to-plane spacing ``b`` (stripline, including the trace's copper);
    ``er`` the series permittivity of the dielectric between the planes.
    ``h_other_mm`` is, for stripline, the distance to the farther plane.
    """

    kind: str
    h_mm: float
    er: float
    h_other_mm: float = 0.0
    plane_above: int | None = None
    plane_below: int | None = None


def reference_of(stackup: Stackup, i: int) -> Reference:
    """Nearest reference planes of copper layer ``i`` and what kind of line it makes."""
    layers = stackup.layers
    above = next((k for k in range(i - 1, -1, -1) if layers[k].role == "plane"), None)
    below = next((k for k in range(i + 1, len(layers)) if layers[k].role == "plane"), None)
    if above is not None and below is not None:
        ha = separation_mm(stackup, above, i)
        hb = separation_mm(stackup, i, below)
        b = ha + hb + layers[i].thickness_mm
        er = effective_er(stackup, above, below)
        return Reference("stripline", b, er, max(ha, hb), above, below)
    if above is None and below is None:
        return Reference("none", 0.0, 1.0)
    plane = above if above is not None else below
    assert plane is not None
    return Reference(
        "microstrip",
        separation_mm(stackup, plane, i),
        effective_er(stackup, plane, i),
        0.0,
        above,
        below,
    )
