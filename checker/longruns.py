"""Transmission-line crosstalk for coupled runs that are electrically long.

The lumped model behind the noise budget treats the coupled run as a point.
Once a run is longer than the near-end saturation length ``tr·v/2`` (the
round-trip delay along it exceeds the aggressor's rise time; Johnson &
Graham, *High-Speed Digital Design*, 1993), the victim sees near-end (NEXT)
and far-end (FEXT) crosstalk instead, computed here from the per-unit-length
capacitance and inductance matrices of the run's cross-section
(:mod:`checker.physics.tline`). Each aggressor/victim net pair is judged by
its longest continuous run; the cross-section is that run's length-weighted
mean widths and offset (or gap) on its main layer group, solved once per
rounded signature.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.constants import c as C0

from .coupling import BROADSIDE
from .physics.accurate import ACCURATE_RESOLUTION
from .physics.fieldsolve import FAST
from .physics.sections import broadside_section
from .physics.tline import (
    Crosstalk,
    LineMatrices,
    is_electrically_long,
    line_matrices,
    same_layer_section,
    transmission_line_crosstalk,
)

#: cross-section signatures are rounded to this (mm) before solving
SIGNATURE_GRID_MM = 0.005


@dataclass(frozen=True)
class LongRun:
    """The transmission-line view of one aggressor/victim pair."""

    crosstalk: Crosstalk
    layers: tuple[str, ...]
    coupling: str  # "broadside" or "edge"
    #: the run's per-unit-length matrices (aggressor 0, victim 1)
    matrices: LineMatrices | None = None
    #: the run's C12 (pF), the part of its net pair's that the line replaces
    c12_pf: float = 0.0


def longest_runs(ctx, pairs: np.ndarray) -> dict[int, np.ndarray]:
    """Net pair index -> coupled rows of its longest continuous run."""
    rows, labels, length, owner = ctx.pair_runs(pairs)
    if rows.size == 0:
        return {}
    # per owner, the run with the greatest length (ties: the lowest label)
    by_owner = np.lexsort((np.arange(length.size), -length, owner))
    first = by_owner[np.r_[True, owner[by_owner][1:] != owner[by_owner][:-1]]]
    order = np.argsort(labels, kind="stable")
    starts = np.searchsorted(labels[order], np.arange(length.size + 1))
    return {int(owner[run]): rows[order[starts[run]:starts[run + 1]]] for run in first.tolist()}


def long_run_crosstalk(ctx, entries: list[tuple[int, int, int]]) -> dict[int, LongRun]:
    """For each ``(entry, pair, aggressor)`` whose longest run may be
    electrically long, the transmission-line crosstalk onto the other net of
    the pair; entries whose runs are short are left out.

    A run is surely short when it is shorter than ``tr·v_min/2`` with
    ``v_min = c0/sqrt(er_max)`` of the stackup (no line on the board is
    slower), so only the few others are solved.
    """
    e = ctx.electrical
    factor = ctx.ruleset.settings.bandwidth_factor
    stackup = ctx.board.stackup
    er_max = max((d.er for d in stackup.dielectrics), default=1.0)
    v_min = C0 / math.sqrt(er_max)
    # a pair's total coupled length bounds its longest run: most pairs are
    # ruled out here without grouping their rows into runs
    total_mm = ctx.net_pairs.broadside_length_mm + ctx.net_pairs.edge_length_mm
    candidates = []
    for entry, pair, aggressor in entries:
        f, v1 = e.frequency_hz[aggressor], e.swing_v[aggressor]
        if not (np.isfinite(f) and np.isfinite(v1) and f > 0):
            continue
        if total_mm[pair] * 1e-3 <= factor / f * v_min / 2:
            continue
        candidates.append((entry, pair, aggressor, factor / f, v1))
    if not candidates:
        return {}
    runs = longest_runs(ctx, np.array([c[1] for c in candidates]))
    cache: dict[tuple, LineMatrices] = {}
    out: dict[int, LongRun] = {}
    for entry, pair, aggressor, tr, v1 in candidates:
        rows = runs.get(pair)
        if rows is None:
            continue
        length_m = float(ctx.couplings.length_mm[rows].sum()) * 1e-3
        if length_m <= tr * v_min / 2:
            continue
        section_key, coupling, layers = _signature(ctx, rows, aggressor)
        if section_key not in cache:
            cache[section_key] = _matrices(ctx, section_key)
        m = cache[section_key]
        if not is_electrically_long(length_m, tr, m.velocity):
            continue
        out[entry] = LongRun(transmission_line_crosstalk(m, length_m, tr, float(v1)), layers, coupling, m,
                             float(ctx.couplings.c12_pf[rows].sum()))
    return out


def _signature(ctx, rows: np.ndarray, aggressor: int) -> tuple[tuple, str, tuple[str, ...]]:
    """Rounded cross-section of a run: (kind, aggressor layer, victim layer,
    aggressor width, victim width, offset or gap), the coupling kind and the
    layer names."""

    c = ctx.couplings
    p = ctx.board.pieces
    main = int(rows[np.argmax(c.length_mm[rows])])
    same = rows[(c.kind[rows] == c.kind[main]) & (c.layer_a[rows] == c.layer_a[main])
                & (c.layer_b[rows] == c.layer_b[main])]
    weight = c.length_mm[same]
    agg_piece = np.where(c.net_a[same] == aggressor, c.a[same], c.b[same])
    vic_piece = np.where(c.net_a[same] == aggressor, c.b[same], c.a[same])
    wa = float(np.average(p.width[agg_piece], weights=weight))
    wv = float(np.average(p.width[vic_piece], weights=weight))
    la, lv = int(p.layer[agg_piece[0]]), int(p.layer[vic_piece[0]])
    broadside = int(c.kind[main]) == BROADSIDE
    spacing = float(np.average(c.offset_mm[same] if broadside else np.maximum(c.gap_mm[same], 0.01), weights=weight))

    def snap(v: float) -> float:
        return round(round(v / SIGNATURE_GRID_MM) * SIGNATURE_GRID_MM, 6)

    key = ("broadside" if broadside else "edge", la, lv, snap(wa), snap(wv), snap(spacing))
    names = tuple(ctx.layer_name(k) for k in sorted({la, lv}))
    return key, key[0], names


def _matrices(ctx, key: tuple) -> LineMatrices:
    """Solve the run's cross-section; conductor 0 the aggressor, 1 the victim."""
    kind, la, lv, wa, wv, spacing = key
    stackup = ctx.board.stackup
    resolution = ACCURATE_RESOLUTION if ctx.mode == "accurate" else FAST
    if kind == "edge":
        return line_matrices(same_layer_section(stackup, la, wa, wv, max(spacing, 0.01)), resolution)
    upper, lower = min(la, lv), max(la, lv)
    w_upper, w_lower = (wa, wv) if la == upper else (wv, wa)
    m = line_matrices(broadside_section(stackup, upper, lower, w_upper, w_lower, spacing), resolution)
    return m if la == upper else m.swapped()
