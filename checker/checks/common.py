"""What the rule kinds share: selecting coupled rows, grouping them into
runs, and turning a run into a finding's place (bbox, worst spot, layers)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Iterator

import numpy as np

from ..findings import Finding, finding_id


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


def run_place(ctx, rows: np.ndarray, worst: int) -> tuple[tuple[float, float, float, float], tuple[float, float], tuple[str, ...]]:
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
