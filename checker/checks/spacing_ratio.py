"""spacing-ratio: same-layer neighbours must keep a minimum spacing ratio.

For an aggressor and a victim running side by side on one layer for more
than ``min_length``, the spacing divided by a reference dimension must be at
least ``min_ratio``. ``measure`` picks the ratio:

* ``centre/width``: centre-to-centre distance over the wider trace's width.
  With ``min_ratio: 3`` this is the 3W rule (common practice).
* ``gap/width``: edge-to-edge gap over the wider trace's width.
* ``gap/height``: edge-to-edge gap over the victim's height above its
  nearest reference plane (edge coupling falls off with gap/height).

Options (defaults)::

    measure: centre/width
    min_ratio: 3
    min_length: 1 mm       # shorter side-by-side runs are ignored

Fails: 0.15 mm traces 0.15 mm apart for 5 mm (ratio 2). Passes: the same
traces 0.3 mm apart (ratio 3).
"""

from __future__ import annotations

import numpy as np

from ..coupling import EDGE
from .options import Option

KIND = "spacing-ratio"
SCOPE = "edge"
OPTIONS = {
    "measure": Option("choice", default="centre/width",
                      choices=("centre/width", "gap/width", "gap/height"),
                      help="which ratio is compared"),
    "min_ratio": Option("ratio", default=3.0, minimum=0.0, exclusive_minimum=True,
                        help="smallest ratio allowed"),
    "min_length": Option("length", default=1.0, minimum=0.0,
                         help="side-by-side runs shorter than this are ignored"),
}


def ratios(ctx, rows: np.ndarray, aggressor: np.ndarray, measure: str) -> np.ndarray:
    """The chosen spacing ratio for each coupled row (NaN where it cannot be
    formed, e.g. gap/height on a layer with no reference plane)."""
    from ..stackup import reference_of

    c = ctx.couplings
    p = ctx.board.pieces
    wider = np.maximum(p.width[c.a[rows]], p.width[c.b[rows]])
    if measure == "centre/width":
        return c.offset_mm[rows] / wider
    if measure == "gap/width":
        return c.gap_mm[rows] / wider
    # gap/height: the victim's height above its nearest reference plane
    heights = np.full(len(ctx.board.stackup.layers), np.nan)
    for k in range(len(heights)):
        ref = reference_of(ctx.board.stackup, k)
        if ref.kind == "microstrip":
            heights[k] = ref.h_mm
        elif ref.kind == "stripline":
            heights[k] = ref.h_mm - ctx.board.stackup.layers[k].thickness_mm - ref.h_other_mm
    return c.gap_mm[rows] / heights[c.layer_a[rows]]


def check(rule, ctx):
    """Yield a finding per side-by-side run whose spacing ratio falls below
    ``min_ratio`` over more than ``min_length``."""
    from .common import Note, applicable_rows, iter_runs, make_finding, run_place

    c = ctx.couplings
    measure, min_ratio, min_length = (rule.options[k] for k in ("measure", "min_ratio", "min_length"))
    rows, aggressor = applicable_rows(ctx, rule, c.kind == EDGE)
    value = ratios(ctx, rows, aggressor, measure)
    if measure == "gap/height" and np.isnan(value).any():
        yield Note(f"{rule.name}: gap/height skipped on layers without a reference plane")
    bad = value < min_ratio  # NaN compares False
    rows, aggressor, value = rows[bad], aggressor[bad], value[bad]
    ratio_of = np.full(len(c), np.nan)
    ratio_of[rows] = value
    for run in iter_runs(ctx, rows, aggressor):
        length = float(c.length_mm[run.rows].sum())
        if length <= min_length:
            continue
        run_ratios = ratio_of[run.rows]
        worst_i = int(np.argmin(run_ratios))
        worst_ratio = float(run_ratios[worst_i])
        bbox, at, layers = run_place(ctx, run.rows, int(run.rows[worst_i]))
        excess = min_ratio / worst_ratio if worst_ratio > 0 else float(min_ratio) + 1.0
        yield make_finding(
            ctx, rule, aggressor=run.aggressor, victim=run.victim, layers=layers, bbox=bbox, at=at,
            value=worst_ratio, limit=min_ratio, unit=measure, excess=excess,
            message=(f"{ctx.net_name(run.aggressor)} runs {length:.2f} mm beside {ctx.net_name(run.victim)} "
                     f"on {layers[0]} at {measure} {worst_ratio:.2f} (minimum {min_ratio:g})"),
            length_mm=length, c12_pf=float(c.c12_pf[run.rows].sum()),
        )
