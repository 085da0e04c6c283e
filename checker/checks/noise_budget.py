"""noise-budget: coupled noise allowed on a victim net.

For each victim net, estimates the noise each aggressor couples onto it with
the lumped capacitive-coupling model (see :mod:`checker.physics.crosstalk`)
from the aggressor class's ``swing`` and ``frequency`` (or ``rise_time``)
and the victim class's ``resistance`` and ``node_capacitance``; the victim's
noise is the sum over its aggressors (worst case: all in phase). Fails when
it exceeds ``max_noise``. Aggressor nets whose class gives no swing, and
victims whose class gives no resistance, are skipped.

Options (defaults)::

    max_noise: (required)  # e.g. 10 mV
    model: full            # full | small-r (the small-R limit w*R*C12*V1)

Fails: 40 mV on a 100 kohm sensor input with a 10 mV budget.
"""

from __future__ import annotations

import numpy as np

from .options import Option

KIND = "noise-budget"
SCOPE = "victim"
OPTIONS = {
    "max_noise": Option("voltage", required=True, minimum=0.0, exclusive_minimum=True,
                        help="largest coupled noise on a victim"),
    "model": Option("choice", default="full", choices=("full", "small-r"),
                    help="full lumped model or its small-R limit"),
}


def check(rule, ctx):
    """Yield a finding per victim whose summed coupled noise exceeds ``max_noise``."""
    from ..physics import crosstalk
    from .capacitance_budget import _longest_run_mm
    from .common import make_finding, run_place
    from .whatif import largest_scale, shorten_text

    np_ = ctx.net_pairs
    c = ctx.couplings
    limit = rule.options["max_noise"]
    small_r = rule.options["model"] == "small-r"
    agg_ok, vic_ok = ctx.class_mask(rule.aggressor), ctx.class_mask(rule.victim)
    # both directions of every coupled net pair, as (aggressor, victim, noise, pair)
    aggressors = np.concatenate([np_.net_a, np_.net_b])
    victims = np.concatenate([np_.net_b, np_.net_a])
    noise = np.concatenate([np_.noise_small_r_ab_v, np_.noise_small_r_ba_v] if small_r
                           else [np_.noise_ab_v, np_.noise_ba_v])
    pair = np.concatenate([np.arange(len(np_)), np.arange(len(np_))])
    use = agg_ok[aggressors] & vic_ok[victims] & np.isfinite(noise)
    aggressors, victims, noise, pair = aggressors[use], victims[use], noise[use], pair[use]
    totals = np.bincount(victims, weights=noise, minlength=len(ctx.board.nets))
    by_victim = np.argsort(victims, kind="stable")
    starts = np.searchsorted(victims[by_victim], np.arange(len(ctx.board.nets) + 1))
    for victim in np.flatnonzero(totals > limit):
        mine = by_victim[starts[victim]:starts[victim + 1]]
        total = float(totals[victim])
        order = mine[np.argsort(-noise[mine], kind="stable")]
        main = int(aggressors[order[0]])
        rows = ctx.rows_of_pairs(pair[mine])
        worst = int(rows[np.argmax(c.c12_pf[rows])])
        bbox, at, layers = run_place(ctx, rows, worst)
        # the same model with every aggressor's C12 onto this victim scaled by k
        e = ctx.electrical
        model = crosstalk.lumped_noise_small_r_v if small_r else crosstalk.lumped_noise_v
        c12_f = np_.c12_pf[pair[mine]] * 1e-12
        agg = aggressors[mine]

        def total_at(k: float, victim=int(victim), c12_f=c12_f, agg=agg) -> float:
            return float(np.sum(model(e.resistance_ohm[victim], k * c12_f, ctx.c2g_pf[victim] * 1e-12,
                                      e.swing_v[agg], e.frequency_hz[agg])))

        scale = largest_scale(total_at, limit)
        others = len(order) - 1
        names = ctx.net_name(main) + (f" and {others} more" if others else "")
        yield make_finding(
            ctx, rule, aggressor=main, victim=int(victim), layers=layers,
            bbox=bbox, at=at, value=total * 1e3, limit=limit * 1e3, unit="mV", excess=total / limit,
            message=(f"{ctx.net_name(int(victim))} picks up {total * 1e3:.3g} mV from {names} "
                     f"({'small-R limit' if small_r else 'lumped model'}; budget {limit * 1e3:.3g} mV)"),
            c12_pf=float(np_.c12_pf[pair[mine]].sum()), noise_mv=total * 1e3,
            keep_fraction=scale, suggestion=shorten_text(scale, _longest_run_mm(ctx, rows), float(np_.c12_pf[pair[mine]].sum())),
        )
