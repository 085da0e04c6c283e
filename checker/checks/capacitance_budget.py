"""capacitance-budget: total mutual capacitance allowed between two nets.

Adds up the estimated mutual capacitance C12 of every coupled run between an
aggressor net and a victim net, on every layer and layer pair (broadside and
edge), and fails when the total exceeds ``max_c12``.

Options (defaults)::

    max_c12: (required)    # e.g. 0.5 pF

Fails: 1.2 pF between a switching node and a sensor input with a 0.5 pF
budget. Passes: 0.1 pF.
"""

from __future__ import annotations

import numpy as np

from .options import Option

KIND = "capacitance-budget"
SCOPE = "net-pair"
OPTIONS = {
    "max_c12": Option("capacitance", required=True, minimum=0.0, exclusive_minimum=True,
                      help="largest total mutual capacitance per net pair"),
}


def check(rule, ctx):
    """Yield a finding per net pair whose total C12 exceeds ``max_c12``."""
    from ..whatif import SPACING_ANSWERS, extra_spacing_mm, shorten_text
    from .common import make_finding, path_text, run_place

    np_ = ctx.net_pairs
    c = ctx.couplings
    limit_pf = rule.options["max_c12"] * 1e12
    applies, aggressor = ctx.orient(rule, np_.net_a, np_.net_b)
    over = np.flatnonzero(applies & (np_.c12_pf > limit_pf))
    longest = ctx.longest_run_mm(over)
    answered = set(over[np.argsort(-np_.c12_pf[over], kind="stable")][:SPACING_ANSWERS].tolist())
    for k in over:
        rows = ctx.rows_of_pairs(k)
        worst = int(rows[np.argmax(c.c12_pf[rows])])
        bbox, at, layers = run_place(ctx, rows, worst)
        agg = int(aggressor[k])
        victim = int(np_.net_b[k] if np_.net_a[k] == agg else np_.net_a[k])
        total = float(np_.c12_pf[k])
        extra = extra_spacing_mm(ctx, rows, limit_pf) if ctx.what_if and int(k) in answered else False
        yield make_finding(
            ctx, rule, aggressor=agg, victim=victim, layers=layers, bbox=bbox, at=at,
            value=total, limit=limit_pf, unit="pF", excess=total / limit_pf,
            message=(f"{ctx.net_name(agg)} and {ctx.net_name(victim)} couple through {total:.3g} pF "
                     f"on {'/'.join(layers)} (budget {limit_pf:.3g} pF)"),
            length_mm=float(c.length_mm[rows].sum()), area_mm2=float(c.overlap_mm2[rows].sum()),
            c12_pf=total, keep_fraction=limit_pf / total, extra_spacing_mm=extra if extra is not False else None,
            suggestion=shorten_text(limit_pf / total, float(longest[k]), total, extra),
            coupling_path=path_text(ctx, rows),
        )
