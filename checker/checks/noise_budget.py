"""noise-budget: coupled noise allowed on a victim net.

For each victim net, estimates the noise each aggressor couples onto it with
the lumped capacitive-coupling model (see :mod:`checker.physics.crosstalk`)
from the aggressor class's ``swing`` and ``frequency`` (or ``rise_time``)
and the victim class's ``resistance`` and ``node_capacitance``; the victim's
noise is the sum over its aggressors (worst case: all in phase). Where an
aggressor's longest run onto the victim is electrically long (longer than
the near-end saturation length tr*v/2), the run is also solved as a coupled
pair of lines with the victim's real terminations (:mod:`checker.physics.mtl`:
its resistance at one end, its node capacitance at the other; the
aggressor's trapezoid harmonics) and, by default, the larger of that and the
lumped value counts (``long_runs: transmission-line`` takes the line's
number alone); the matched-termination NEXT/FEXT
(:mod:`checker.longruns`) are given for comparison. The finding says
which model gave the number; every victim the rule looked at, passing or
not, is listed with its noise, budget and model in the reports. Fails when
it exceeds ``max_noise``. Aggressor nets whose class gives no swing, and
victims whose class gives no resistance, are skipped.

Options (defaults)::

    max_noise: (required)  # e.g. 10 mV
    model: full            # full | small-r (the small-R limit w*R*C12*V1)
    long_runs: larger      # larger | transmission-line
    measure: peak          # peak | rms (filtered victims only)

Noise from several aggressors adds by Kirchhoff's current law at the victim
node: each aggressor's share is w R C1k V / sqrt(1 + (w R C_tot)^2) with the
node's whole capacitance C_tot (``physics.crosstalk.kcl_noise_v``,
``analysis.node_total_pf``), magnitudes added (phases aligned: the worst
case); the sum never exceeds the capacitive divider sum V_k C1k / C_tot.
A victim whose class gives a ``bandwidth`` (or ``filter_resistance`` and
``filter_capacitance``) is judged in its band: an aggressor with a
``frequency`` is a periodic trapezoid (its ``rise_time`` and ``duty``) whose
harmonics pass the coupling network and then the filter
(``physics.spectrum``); ``measure`` takes their amplitude sum (a peak bound)
or their RMS, and the victim list gives the unfiltered number beside it.
The small-R limit is said to be out of range in the finding (and the model
named ``small-r (out of range)``) where w R C_tot exceeds
``crosstalk.SMALL_R_LIMIT`` (it then over-reads the full model by more than
10 %, and the finding gives the full model's value too).

Fails: 40 mV on a 100 kohm sensor input with a 10 mV budget.
"""

from __future__ import annotations

import numpy as np

from ..physics.crosstalk import SMALL_R_LIMIT
from .options import Option

KIND = "noise-budget"
SCOPE = "victim"
OPTIONS = {
    "max_noise": Option("voltage", required=True, minimum=0.0, exclusive_minimum=True,
                        help="largest coupled noise on a victim"),
    "model": Option("choice", default="full", choices=("full", "small-r"),
                    help="full lumped model or its small-R limit"),
    "measure": Option("choice", default="peak", choices=("peak", "rms"),
                      help="filtered victims: the peak (sum of harmonic amplitudes, an upper bound) or the "
                           "RMS of the noise in the victim's band"),
    "long_runs": Option("choice", default="larger", choices=("larger", "transmission-line"),
                        help="electrically long runs: the larger of the lumped and the transmission-line "
                             "numbers, or the transmission-line number alone"),
}


def check(rule, ctx):
    """Yield a finding per victim whose summed coupled noise exceeds
    ``max_noise``, from the numbers the analysis worked out for this rule
    (:func:`checker.victimnoise.rule_noise`)."""
    from ..victimnoise import with_grounding
    from ..whatif import SPACING_ANSWERS, extra_spacing_mm, shorten_text
    from .common import make_finding, path_text, run_place

    np_ = ctx.net_pairs
    c = ctx.couplings
    limit = rule.options["max_noise"]
    small_r = rule.options["model"] == "small-r"
    n = ctx.noise[rule.name]
    aggressors, victims, noise, pair = n.aggressors, n.victims, n.noise, n.pair
    lumped, unfiltered, filtered, long_runs, terminated = n.lumped, n.unfiltered, n.filtered, n.long_runs, \
        n.terminated
    tl_used, totals, worst_x, full, by_victim, starts = n.tl_used, n.totals, n.worst_x, n.full, n.by_victim, \
        n.starts
    failing, scales = n.failing, n.scales
    longest = ctx.longest_run_mm(pair[np.isin(victims, failing)])
    answered = set(failing[np.argsort(-totals[failing], kind="stable")][:SPACING_ANSWERS].tolist())
    for victim in failing:
        mine = by_victim[starts[victim]:starts[victim + 1]]
        total = float(totals[victim])
        order = mine[np.argsort(-noise[mine], kind="stable")]
        main = int(aggressors[order[0]])
        rows = ctx.rows_of_pairs(pair[mine])
        worst = int(rows[np.argmax(c.c12_pf[rows])])
        bbox, at, layers = run_place(ctx, rows, worst)
        scale = float(scales[victim])
        c12_now = float(np_.c12_pf[pair[mine]].sum())
        extra = extra_spacing_mm(ctx, rows, scale * c12_now) if ctx.what_if and int(victim) in answered else False
        others = len(order) - 1
        names = ctx.net_name(main) + (f" and {others} more" if others else "")
        how = "small-R limit" if small_r else "lumped model"
        band = [int(i) for i in order if int(i) in set(filtered.tolist())]
        if band:
            measure = rule.options["measure"]
            how += (f"; filtered to {ctx.electrical.corner_hz[victim]:.3g} Hz: the {measure} of the aggressor's "
                    f"trapezoidal spectrum in that band, {float(unfiltered[band].sum()) * 1e3:.3g} mV unfiltered")
        if small_r and worst_x[victim] > SMALL_R_LIMIT:
            how += (f", out of range: w R C_tot = {worst_x[victim]:.3g} > {SMALL_R_LIMIT:.3g}, it reads up to "
                    f"{np.hypot(1.0, worst_x[victim]):.3g} x the full model, which gives "
                    f"{float(full[victim]) * 1e3:.3g} mV")
        elif small_r:
            how += " (in range)"
        long_here = [(int(i), long_runs[int(i)]) for i in order if int(i) in long_runs]
        if not long_here and not small_r:
            how = how.replace("lumped model", "lumped model, in range: runs electrically short", 1)
        if long_here:
            which = ("transmission-line value used" if rule.options["long_runs"] == "transmission-line"
                     else "the larger counts")
            how += "; electrically long: " + ", ".join(
                f"{ctx.net_name(int(aggressors[i]))} over {r.crosstalk.coupled_length_m * 1e3:.1f} mm on "
                f"{'/'.join(r.layers)} {terminated[i] * 1e3:.3g} mV with the victim's terminations "
                f"(other runs lumped; matched "
                f"ends would give NEXT {r.crosstalk.next_v * 1e3:.3g} mV, FEXT {r.crosstalk.fext_v * 1e3:.3g} mV), "
                f"lumped {lumped[i] * 1e3:.3g} mV"
                for i, r in long_here) + f" ({which})"
        yield make_finding(
            ctx, rule, aggressor=main, victim=int(victim), layers=layers,
            bbox=bbox, at=at, value=total * 1e3, limit=limit * 1e3, unit="mV", excess=total / limit,
            message=(f"{ctx.net_name(int(victim))} picks up {total * 1e3:.3g} mV from {names} "
                     f"({how}; budget {limit * 1e3:.3g} mV)"),
            c12_pf=float(np_.c12_pf[pair[mine]].sum()), noise_mv=total * 1e3,
            noise_model=("transmission-line" if any(i in tl_used for i, _ in long_here)
                         else ("small-r" if small_r else
                               (f"lumped, {rule.options['measure']} in band" if band else "lumped"))),
            keep_fraction=scale, extra_spacing_mm=extra if extra is not False else None,
            suggestion=shorten_text(scale, float(longest[pair[mine]].max()), c12_now, extra),
            coupling_path=with_grounding(ctx, path_text(ctx, rows), mine, victims, aggressors, pair, noise,
                                          long_runs, small_r),
        )


