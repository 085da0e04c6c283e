"""parallel-length: how far two nets may run side by side at a given gap.

A table of ``gap`` -> ``max_length`` rows: over one coupled run, the length
along which the aggressor and the victim are within ``gap`` of each other
(edge to edge, in plan) may be at most ``max_length``. Every row is checked;
the row with the largest excess is reported. ``coupling`` says which runs
count: ``edge`` (same layer), ``broadside`` (neighbouring layers, gap
measured in plan, overlapping copper counts as gap 0) or ``both``.

Options (defaults)::

    coupling: edge
    table:                 # required
      - {gap: 0.2 mm, max_length: 5 mm}
      - {gap: 0.5 mm, max_length: 20 mm}

Fails: a clock 0.15 mm from a reference line for 12 mm. Passes: the same
clock at 0.6 mm.
"""

from __future__ import annotations

import numpy as np

from ..coupling import BROADSIDE, EDGE
from .options import Option

KIND = "parallel-length"
SCOPE = "run"
OPTIONS = {
    "coupling": Option("choice", default="edge", choices=("edge", "broadside", "both"),
                       help="which coupled runs count"),
    "table": Option("table", required=True,
                    columns=(("gap", "length"), ("max_length", "length")),
                    help="rows of gap -> longest run allowed at that gap or closer"),
}


def check(rule, ctx):
    """Yield a finding per coupled run that is longer, within some row's
    gap, than that row allows; the worst row is reported."""
    from .common import applicable_rows, iter_runs, make_finding, run_place

    c = ctx.couplings
    coupling = rule.options["coupling"]
    table = rule.options["table"]
    kinds = {"edge": (EDGE,), "broadside": (BROADSIDE,), "both": (EDGE, BROADSIDE)}[coupling]
    gap = np.maximum(c.gap_mm, 0.0)  # overlapping copper counts as gap 0
    widest = max(row["gap"] for row in table)
    mask = np.isin(c.kind, kinds) & c.parallel & (gap <= widest)
    rows, aggressor = applicable_rows(ctx, rule, mask)
    for run in iter_runs(ctx, rows, aggressor):
        worst = None
        for row in table:
            within = run.rows[gap[run.rows] <= row["gap"]]
            length = float(c.length_mm[within].sum())
            excess = length / row["max_length"] if row["max_length"] > 0 else (1.0 + length if length else 0.0)
            if excess > 1.0 and (worst is None or excess > worst[0]):
                worst = (excess, length, row, within)
        if worst is None:
            continue
        excess, length, row, within = worst
        spot = int(within[np.argmax(c.length_mm[within])])
        bbox, at, layers = run_place(ctx, within, spot)
        yield make_finding(
            ctx, rule, aggressor=run.aggressor, victim=run.victim, layers=layers, bbox=bbox, at=at,
            value=length, limit=row["max_length"], unit="mm", excess=excess,
            message=(f"{ctx.net_name(run.aggressor)} runs {length:.2f} mm within {row['gap']:g} mm of "
                     f"{ctx.net_name(run.victim)} on {'/'.join(layers)} (allowed {row['max_length']:g} mm)"),
            length_mm=length, c12_pf=float(c.c12_pf[within].sum()),
        )
