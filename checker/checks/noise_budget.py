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

from ..coupling import VictimNoise, node_total_pf
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
    """Yield a finding per victim whose summed coupled noise exceeds ``max_noise``."""
    from ..longruns import long_run_crosstalk
    from .common import make_finding, path_text, run_place
    from .whatif import SPACING_ANSWERS, extra_spacing_mm, shorten_text

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
    # filtered victims: the aggressor's trapezoidal spectrum in the victim's band (not with small-r)
    unfiltered = noise.copy()
    filtered = _filtered_entries(ctx, aggressors, victims) if not small_r else np.zeros(0, np.int64)
    if filtered.size:
        noise[filtered] = _filtered_shares(ctx, rule, filtered, aggressors, victims, pair, 1.0)
    # electrically long runs: the lumped model does not hold; near-/far-end
    # crosstalk of the run's cross-section replaces it (the worse end counts)
    long_runs = long_run_crosstalk(ctx, list(zip(range(len(pair)), pair.tolist(), aggressors.tolist())))
    lumped = noise.copy()
    tl_used = set()  # entries whose number is the transmission-line one
    # the line replaces its run's share only: the pair's other runs and relays keep their lumped share
    # (linear in C12 at a fixed node capacitance)
    terminated = {}
    for i, run in long_runs.items():
        pair_pf = float(np_.c12_pf[pair[i]])
        rest = lumped[i] * max(0.0, 1.0 - run.c12_pf / pair_pf) if pair_pf > 0 else 0.0
        terminated[i] = _terminated(ctx, run, int(aggressors[i]), int(victims[i])) + rest
    for i, tl in terminated.items():
        if rule.options["long_runs"] == "transmission-line" or tl >= lumped[i]:
            noise[i] = tl
            tl_used.add(i)
    totals = np.bincount(victims, weights=noise, minlength=len(ctx.board.nets))
    # the small-R limit holds only while x = w R C_tot is small: per victim, the largest x
    e = ctx.electrical
    x = 2 * np.pi * e.frequency_hz[aggressors] * e.resistance_ohm[victims] * _c_tot(ctx, victims) * 1e-12
    worst_x = np.zeros(len(ctx.board.nets))
    np.maximum.at(worst_x, victims, np.where(np.isfinite(x), x, 0.0))
    full = (np.bincount(victims, weights=np.concatenate([np_.noise_ab_v, np_.noise_ba_v])[use],
                        minlength=len(ctx.board.nets)) if small_r else None)
    by_victim = np.argsort(victims, kind="stable")
    starts = np.searchsorted(victims[by_victim], np.arange(len(ctx.board.nets) + 1))
    _record_victims(ctx, rule, victims, aggressors, noise, totals, by_victim, starts, tl_used, limit, small_r,
                    worst_x, set(filtered.tolist()), unfiltered)
    failing = np.flatnonzero(totals > limit)
    scales = _scales_meeting_budget(ctx, failing, victims, aggressors, pair, terminated, limit, small_r,
                                    rule.options["long_runs"] != "transmission-line",
                                    (rule, filtered))
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
            coupling_path=_with_grounding(ctx, path_text(ctx, rows), mine, victims, aggressors, pair, noise,
                                          long_runs, small_r),
        )


def _record_victims(ctx, rule, victims, aggressors, noise, totals, by_victim, starts, tl_used, limit,
                    small_r, worst_x, in_band=frozenset(), unfiltered=None) -> None:
    """Every victim this rule looked at, passing or not, with the model that
    gave its number (``Analysis.victim_noise``; the reports list them)."""

    plain = "small-r" if small_r else "lumped"
    for victim in np.unique(victims).tolist():
        mine = by_victim[starts[victim]:starts[victim + 1]]
        worst = int(mine[np.argmax(noise[mine])])
        model = "transmission-line" if any(int(i) in tl_used for i in mine.tolist()) else plain
        if model == "small-r" and worst_x[victim] > SMALL_R_LIMIT:
            model = "small-r (out of range)"
        band_entries = [int(i) for i in mine.tolist() if int(i) in in_band]
        if model == "lumped" and band_entries:
            model = f"lumped, {rule.options['measure']} in band"
        # a filtered victim's noise with the filter left out: the unfiltered shares where filtered
        raw = (float(totals[victim] - noise[band_entries].sum() + unfiltered[band_entries].sum()) * 1e3
               if band_entries and unfiltered is not None else float("nan"))
        c_tot = float(_c_tot(ctx, np.array([victim]))[0])
        ctx.victim_noise.append(VictimNoise(rule.name, ctx.net_name(victim), float(totals[victim]) * 1e3,
                                            limit * 1e3, model, ctx.net_name(int(aggressors[worst])), len(mine),
                                            c_tot, c_tot - float(ctx.net_pairs.coupled_pf[victim]), raw))


def _scales_meeting_budget(ctx, failing, victims, aggressors, pair, long_runs, limit, small_r,
                           larger: bool = True, band=None) -> np.ndarray:
    """Per victim in ``failing``: the largest fraction k of today's coupling
    (every aggressor's C12 onto it, and its long runs' lengths, scaled by k)
    whose total noise meets ``limit``, by the same models; bisection run on
    all failing victims at once (``checker.checks.whatif`` explains k)."""
    from ..physics import crosstalk
    from .whatif import BISECTION_STEPS

    scales = np.ones(len(ctx.board.nets))
    if failing.size == 0:
        return scales
    e = ctx.electrical
    model = crosstalk.lumped_noise_small_r_v if small_r else crosstalk.kcl_noise_v
    entries = np.flatnonzero(np.isin(victims, failing))
    vic, agg = victims[entries], aggressors[entries]
    c12 = ctx.net_pairs.c12_pf[pair[entries]] * 1e-12
    long_at = np.array([int(i) in long_runs for i in entries.tolist()], dtype=bool)
    in_band = (np.flatnonzero(np.isin(entries, band[1])) if band is not None and band[1].size
               else np.zeros(0, np.int64))
    line = np.array([long_runs[int(i)] for i in entries[long_at].tolist()])

    def totals_at(k_of_victim: np.ndarray) -> np.ndarray:
        k = k_of_victim[vic]
        each = model(e.resistance_ohm[vic], k * c12, _c_tot(ctx, vic, k) * 1e-12, e.swing_v[agg],
                     e.frequency_hz[agg])
        if in_band.size:  # filtered victims: the spectrum at this fraction of the coupling
            each[in_band] = _filtered_shares(ctx, band[0], entries[in_band], aggressors, victims, pair, k[in_band])
        if long_at.any():  # weak coupling: the line's noise in proportion to its coupling
            tl = line * k[long_at]
            each[long_at] = np.maximum(tl, each[long_at]) if larger else tl
        return np.bincount(vic, weights=each, minlength=len(ctx.board.nets))

    lo, hi = np.zeros(len(ctx.board.nets)), np.ones(len(ctx.board.nets))
    for _ in range(BISECTION_STEPS):
        mid = 0.5 * (lo + hi)
        ok = totals_at(mid) <= limit
        lo, hi = np.where(ok, mid, lo), np.where(ok, hi, mid)
    scales[failing] = lo[failing]
    return scales


def _with_grounding(ctx, text, mine, victims, aggressors, pair, noise, long_runs, small_r):
    """``text`` and, where floating copper relays part of the coupling,
    how much of the victim's noise grounding it would remove (the same
    lumped model without the relayed C12; long runs keep their value)."""
    from ..physics import crosstalk

    relay = ctx.net_pairs.island_relay_pf[pair[mine]]
    if text is None or not np.any(relay > 0):
        return text
    e = ctx.electrical
    model = crosstalk.lumped_noise_small_r_v if small_r else crosstalk.kcl_noise_v
    vic, agg = victims[mine], aggressors[mine]
    np_ = ctx.net_pairs
    c_tot = _c_tot(ctx, vic, 1.0, removed_pf=float(relay.sum()))
    without = model(e.resistance_ohm[vic], (np_.c12_pf[pair[mine]] - relay) * 1e-12,
                    c_tot * 1e-12, e.swing_v[agg], e.frequency_hz[agg])
    long_at = np.array([int(i) in long_runs for i in mine.tolist()], dtype=bool)
    without[long_at] = noise[mine][long_at]
    removed = float(noise[mine].sum() - without.sum())
    return text + f"; grounding the floating copper would remove {removed * 1e3:.3g} mV"


def _c_tot(ctx, victims: np.ndarray, k=1.0, removed_pf: float = 0.0) -> np.ndarray:
    """The victim nodes' whole capacitance (pF, ``analysis.node_total_pf``)
    with every mutual capacitance onto them scaled by ``k`` (what-if) and
    ``removed_pf`` taken off it (floating copper grounded)."""

    p = ctx.net_pairs
    # the neighbours' rise of the victim's diagonal shrinks with its coupling too
    trace = p.trace_c2g_pf[victims] - (1.0 - k) * p.rise_pf[victims] if p.rise_pf.size else p.trace_c2g_pf[victims]
    return node_total_pf(np.maximum(trace, 0.0), k * np.maximum(p.coupled_pf[victims] - removed_pf, 0.0),
                         p.node_pf[victims])


def _filtered_entries(ctx, aggressors: np.ndarray, victims: np.ndarray) -> np.ndarray:
    """Entries whose victim declares a filter and whose aggressor a period."""
    e = ctx.electrical
    ok = np.isfinite(e.corner_hz[victims]) & np.isfinite(e.clock_hz[aggressors]) & (e.clock_hz[aggressors] > 0)
    return np.flatnonzero(ok)


def _filtered_shares(ctx, rule, entries: np.ndarray, aggressors, victims, pair, k) -> np.ndarray:
    """Per entry: the noise in the victim's band (peak or RMS, the rule's
    ``measure``) of the aggressor's trapezoidal spectrum through the lumped
    coupling network at ``k`` times today's coupling
    (``physics.spectrum.filtered_noise_v``)."""
    from ..physics.spectrum import filtered_noise_v

    e = ctx.electrical
    k = np.broadcast_to(np.asarray(k, float), entries.shape)
    vic, agg = victims[entries], aggressors[entries]
    c12 = ctx.net_pairs.c12_pf[pair[entries]] * 1e-12
    c_tot = _c_tot(ctx, vic, k) * 1e-12
    out = np.empty(entries.size)
    pick = 0 if rule.options["measure"] == "peak" else 1
    for j in range(entries.size):
        a, v = int(agg[j]), int(vic[j])
        tr = float(e.rise_time_s[a])
        duty = float(e.duty[a])
        out[j] = filtered_noise_v(float(e.resistance_ohm[v]), float(k[j] * c12[j]), float(c_tot[j]),
                                  float(e.swing_v[a]), float(e.clock_hz[a]), tr if np.isfinite(tr) else None,
                                  duty if np.isfinite(duty) else None, float(e.corner_hz[v]))[pick]
    return out


def _terminated(ctx, run, aggressor: int, victim: int) -> float:
    """The run's noise on the victim with its real terminations
    (``physics.mtl.terminated_noise_v``): its class's resistance at one end,
    its node capacitance at the other, its filter if any; the aggressor a
    periodic trapezoid at its declared frequency (else at the lumped model's
    frequency), duty 50 % unless its class says."""
    from ..physics.mtl import terminated_noise_v

    e = ctx.electrical
    x = run.crosstalk
    f0 = float(e.clock_hz[aggressor]) if np.isfinite(e.clock_hz[aggressor]) else float(e.frequency_hz[aggressor])
    duty = float(e.duty[aggressor]) if np.isfinite(e.duty[aggressor]) else 0.5
    corner = float(e.corner_hz[victim]) if np.isfinite(e.corner_hz[victim]) else None
    return terminated_noise_v(run.matrices, x.coupled_length_m, float(e.swing_v[aggressor]), f0, x.rise_time_s,
                              duty, float(e.resistance_ohm[victim]), float(e.node_capacitance_f[victim]), corner)
