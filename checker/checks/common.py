"""What the rule kinds share: selecting coupled rows, grouping them into
runs, and turning a run into a finding's place (bbox, worst spot, layers)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Iterator

import numpy as np

from ..coupling import BROADSIDE, EDGE, RELAY
from ..findings import Finding, finding_id


@dataclass(frozen=True)
class Note:
    """Something a rule has to say about the board besides its findings
    (what it could not judge); a check yields it among its findings and the
    runner gathers it into the result's notes."""

    text: str


@dataclass
class Run:
    """One continuous coupled run: the indices of its coupled rows."""

    rows: np.ndarray
    aggressor: int
    victim: int


def applicable_rows(ctx, rule, mask: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Indices of coupled rows where ``mask`` holds and ``rule`` applies, and
    the aggressor net of each."""
    c = ctx.couplings
    applies, aggressor = ctx.orient(rule, c.net_a, c.net_b)
    rows = np.flatnonzero(mask & applies)
    return rows, aggressor[rows]


def iter_runs(ctx, rows: np.ndarray, aggressor: np.ndarray) -> Iterator[Run]:
    """Group ``rows`` into runs, in a stable order (by first row)."""
    if rows.size == 0:
        return
    labels = ctx.runs(rows)
    order = np.argsort(labels, kind="stable")
    bounds = np.flatnonzero(np.diff(labels[order])) + 1
    c = ctx.couplings
    for group in np.split(order, bounds):
        r = rows[group]
        agg = int(aggressor[group[0]])
        victim = int(c.net_b[r[0]] if c.net_a[r[0]] == agg else c.net_a[r[0]])
        yield Run(r, agg, victim)


def run_place(ctx, rows: np.ndarray,
              worst: int) -> tuple[tuple[float, float, float, float], tuple[float, float], tuple[str, ...]]:
    """bbox of the coupled stretches of ``rows`` (mm), the spot of row
    ``worst``, and the names of the layers involved (stackup order)."""
    c = ctx.couplings
    p = ctx.board.pieces
    a = c.a[rows]
    dx, dy = p.x2[a] - p.x1[a], p.y2[a] - p.y1[a]
    norm = np.hypot(dx, dy)
    norm[norm == 0] = 1.0
    half = c.length_mm[rows] / 2
    ux, uy = dx / norm * half, dy / norm * half
    # both traces: they lie offset/2 either side of the spot, each half a width wide
    pad = (np.abs(c.offset_mm[rows]) + np.maximum(p.width[c.a[rows]], p.width[c.b[rows]])) / 2
    xs = np.concatenate([c.x[rows] - np.abs(ux) - pad, c.x[rows] + np.abs(ux) + pad])
    ys = np.concatenate([c.y[rows] - np.abs(uy) - pad, c.y[rows] + np.abs(uy) + pad])
    bbox = (float(xs.min()), float(ys.min()), float(xs.max()), float(ys.max()))
    at = (float(c.x[worst]), float(c.y[worst]))
    layers = np.unique(np.concatenate([c.layer_a[rows], c.layer_b[rows]]))
    return bbox, at, tuple(ctx.layer_name(int(k)) for k in layers)


def make_finding(ctx, rule, *, aggressor: int, victim: int, layers: tuple[str, ...],
                 bbox, at, value: float, limit: float, unit: str, excess: float, message: str,
                 **quantities) -> Finding:
    """A finding with its stable id; the runner's rule name and severity."""
    agg, vic = ctx.net_name(aggressor), ctx.net_name(victim)
    return Finding(
        id=finding_id(rule.name, agg, vic, layers, bbox),
        rule=rule.name, kind=rule.kind, severity=rule.severity,
        aggressor=agg, victim=vic, layers=layers, bbox=bbox, at=at,
        value=float(value), limit=float(limit), unit=unit, excess=float(excess),
        message=message, **quantities,
    )


def ratio_over(value: float, limit: float) -> float:
    """How many times ``value`` exceeds ``limit`` (a zero limit counts any
    positive value as far over)."""
    return value / limit if limit > 0 else 1.0 + value


def path_text(ctx, rows: np.ndarray) -> str | None:
    """In words: how much of the broadside length of ``rows`` reference
    copper between the layers shields (and on which layer, by which nets),
    and what floating islands (id, layer, place, area, pF) and high-impedance
    third nets (name, resistance, pF) relay."""

    c = ctx.couplings
    parts = []
    bs = rows[c.kind[rows] == BROADSIDE]
    if bs.size:
        # rows wholly shielded were never kept; open_fraction < 1 marks partly shielded rows
        partly = bs[c.open_fraction[bs] < 1.0]
        if partly.size:
            length = float(c.length_mm[bs].sum())
            shielded = float((c.length_mm[partly] * (1.0 - c.open_fraction[partly])).sum())
            layers = sorted({int(k) for k in c.shield_layer[partly] if k >= 0})
            ref = ctx.reference
            by = ", ".join(f"{ctx.layer_name(k)}" + (f" ({'+'.join(ref.nets[k])})" if ref and ref.nets[k] else "")
                           for k in layers)
            open_mm = length - shielded
            open_area = float((c.overlap_mm2[bs] * c.open_fraction[bs]).sum())
            parts.append(f"{shielded:.2f} of {length:.2f} mm of the broadside run shielded by reference copper on "
                         f"{by} ({shielded / length * 100:.0f} %); the open {open_mm:.2f} mm (overlapping copper "
                         f"{open_area:.3g} mm^2) lies over voids or gaps in it")
    ed = rows[(c.kind[rows] == EDGE) & (c.guard[rows] >= 0)]
    if ed.size:
        g = ctx.guards
        for k in np.unique(c.guard[ed]).tolist():
            mine = ed[c.guard[ed] == k]
            net = ctx.net_name(int(g.net[k]))
            if g.state[k] == "stitched":
                before = float((c.c12_pf[mine] / c.guard_factor[mine]).sum())
                cut = 1.0 - float(c.c12_pf[mine].sum()) / before if before > 0 else 0.0
                parts.append(f"a grounded {net} guard in the gap on {ctx.layer_name(int(g.layer[k]))} takes "
                             f"{cut * 100:.0f} % off the edge C12 beside it")
            else:
                state = {"floating": "floating", "one end": "grounded at one end only",
                         "sparse": "stitched too far apart"}[g.state[k]]
                parts.append(f"a {net} guard in the gap on {ctx.layer_name(int(g.layer[k]))} is {state}: "
                             "not counted as a shield")
    third = rows[(c.kind[rows] == EDGE) & (c.guard[rows] < 0) & (c.gap_net[rows] >= 0)]
    for k in np.unique(c.gap_net[third]).tolist():
        mine = third[c.gap_net[third] == k]
        before = float((c.c12_pf[mine] / c.guard_factor[mine]).sum())
        cut = 1.0 - float(c.c12_pf[mine].sum()) / before if before > 0 else 0.0
        parts.append(f"a trace of {ctx.net_name(int(k))} in the gap (taken as held by its driver) takes "
                     f"{cut * 100:.0f} % off the edge C12 beside it")
    rl = rows[(c.kind[rows] == RELAY) & (c.island[rows] >= 0)]
    if rl.size:
        for s in np.unique(c.island[rl]).tolist():
            isl = ctx.islands[s]
            pf = float(c.c12_pf[rl][c.island[rl] == s].sum())
            joined = [i for i in ctx.islands if i.node == s and i is not isl]
            more = (f", joined by a plated hole to island{'s' if len(joined) > 1 else ''} "
                    + ", ".join(f"{i.id} on {ctx.layer_name(i.layer)}" for i in joined)) if joined else ""
            parts.append(f"{pf:.3g} pF relayed through floating copper (island {isl.id} on "
                         f"{ctx.layer_name(isl.layer)} at {isl.x:.2f}, {isl.y:.2f}, {isl.area_mm2:.3g} mm^2, "
                         f"on no net{more})")
    by_net = rows[(c.kind[rows] == RELAY) & (c.island[rows] < 0) & (c.gap_net[rows] >= 0)]
    for k in np.unique(c.gap_net[by_net]).tolist():
        pf = float(c.c12_pf[by_net][c.gap_net[by_net] == k].sum())
        r = float(ctx.electrical.resistance_ohm[k])
        parts.append(f"{pf:.3g} pF relayed through {ctx.net_name(int(k))} (a high-impedance node: {r:.3g} ohm "
                     f"to ground, {float(ctx.c2g_pf[k]):.3g} pF to ground)")
    return "; ".join(parts) or None
