"""guard-grounding: a guard trace between an aggressor and a victim must be grounded along its length.

A trace of a reference net (``settings.reference_nets``) running in the gap
between two edge-coupled traces is a guard. It takes coupling to ground only
where it is tied to ground: couplint credits its reduction of C12 only when
it is grounded at both ends and stitched with reference vias no farther
apart than ``settings.guard_stitch_fraction`` of a wavelength (lambda/20 by
default, common practice) at the faster neighbouring net's frequency. This
rule reports every guard that is not: ``floating`` (no via, no pour at
either end), grounded at ``one end`` only, or ``sparse`` (both ends, but
stitched too far apart). The value is the longest stretch of the guard not
tied down at both ends; the limit is the stitching interval for a
``sparse`` guard and 0 for the others (no free stretch is allowed). A guard
that fails is left out of the C12 estimate (the pair couples as if it were
not there), which this rule's message says.

Options (defaults)::

    min_length: 1 mm    # guards alongside less coupled length than this are not checked

Fails: a GND trace between a clock and a sensor input with one via at one
end. Passes: the same trace with vias at both ends and every 5 mm (a 25 MHz
clock in FR-4, er 4.2: lambda/20 = c0 / (25 MHz x sqrt(4.2)) / 20 = 292 mm).
"""

from __future__ import annotations

import numpy as np

from ..coupling import EDGE
from .options import Option

KIND = "guard-grounding"
SCOPE = "edge"
OPTIONS = {
    "min_length": Option("length", default=1.0, minimum=0.0,
                         help="guards alongside less coupled length than this are not checked"),
}


def check(rule, ctx):
    """Yield a finding per guard that is not grounded along its length,
    for the worst aggressor/victim pair it sits between."""
    from .common import applicable_rows, make_finding, run_place

    c = ctx.couplings
    g = ctx.guards
    rows, aggressor = applicable_rows(ctx, rule, (c.kind == EDGE) & (c.guard >= 0))
    if rows.size == 0:
        return
    for k in np.unique(c.guard[rows]).tolist():
        state = g.state[k]
        if state == "stitched":
            continue
        mine = np.flatnonzero(c.guard[rows] == k)
        along = float(c.length_mm[rows[mine]].sum())
        if along < rule.options["min_length"]:
            continue
        worst = int(mine[np.argmax(c.c12_pf[rows[mine]])])
        row = int(rows[worst])
        agg = int(aggressor[worst])
        victim = int(c.net_b[row] if c.net_a[row] == agg else c.net_a[row])
        pair_rows = rows[mine][(c.net_a[rows[mine]] == c.net_a[row]) & (c.net_b[rows[mine]] == c.net_b[row])]
        bbox, _, layers = run_place(ctx, pair_rows, row)
        limit = float(g.limit_mm[k])
        value = float(g.max_gap_mm[k])
        if state != "sparse":
            limit = 0.0  # a stretch not tied down at both ends is allowed no length at all
        finite = np.isfinite(limit) and limit > 0
        excess = max(value / limit, 1.0) if finite else 1.0 + value
        net = ctx.net_name(int(g.net[k]))
        how = {"floating": "floating: no reference via on it and no pour at either end",
               "one end": f"grounded at one end only: its last {value:.2f} mm run free",
               "sparse": f"stitched {value:.2f} mm apart, more than {limit:.3g} mm "
                         f"({ctx.ruleset.settings.guard_stitch_fraction:g} of a wavelength)"}[state]
        yield make_finding(
            ctx, rule, aggressor=agg, victim=victim, layers=layers, bbox=bbox, at=(float(g.x[k]), float(g.y[k])),
            value=value, limit=limit if finite else 0.0, unit="mm", excess=excess,
            message=(f"{net} guard between {ctx.net_name(agg)} and {ctx.net_name(victim)} on {'/'.join(layers)} "
                     f"is {how}; not counted as a shield (C12 as without it)"),
            length_mm=along, c12_pf=float(c.c12_pf[pair_rows].sum()),
        )
