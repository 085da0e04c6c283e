"""The coupled noise a noise-budget rule judges, worked out with the
analysis (the physics of a rule, computed once, before any rule runs):
every (aggressor, victim) share by the lumped model or its small-R limit,
the filtered victims' band-limited share of the aggressor's trapezoidal
spectrum, electrically long runs by their transmission-line noise with the
victim's real terminations, the totals per victim and the model that gave
each, and for the failing victims the fraction of today's coupling that
would meet the budget (bisection over the same models).

:func:`rule_noise` returns a :class:`RuleNoise` the ``noise-budget`` check
reads; :func:`with_grounding` answers "how much would grounding the
floating copper remove" for its message. Nothing here changes the analysis.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .coupling import VictimNoise, node_total_pf
from .longruns import LongRun, long_run_crosstalk
from .physics import crosstalk
from .physics.crosstalk import SMALL_R_LIMIT
from .physics.mtl import terminated_noise_v
from .physics.spectrum import filtered_noise_v
from .whatif import BISECTION_STEPS


@dataclass(frozen=True)
class RuleNoise:
    """One noise-budget rule's view of the board. Entries are (aggressor,
    victim) shares, both directions of every coupled net pair the rule's
    classes take: ``pair`` indexes ``net_pairs``; ``noise`` (V) is what
    counts, ``lumped`` the lumped share before long runs, ``unfiltered``
    before a victim's filter; ``filtered``: entries in a victim's band;
    ``long_runs`` / ``terminated`` (V): entries on electrically long runs;
    ``tl_used``: entries whose number is the transmission-line one. Per net:
    ``totals`` (V), ``worst_x`` (w R C_tot), ``full`` (the full model's
    total, with ``small_r``), ``scales`` (the fraction of today's coupling
    that meets the budget, failing victims only; 1 elsewhere). ``by_victim``
    / ``starts``: the entries of victim v are
    ``by_victim[starts[v]:starts[v + 1]]``. ``victims_seen``: every victim
    with its total and model (the reports' per-victim table)."""

    aggressors: np.ndarray
    victims: np.ndarray
    noise: np.ndarray
    pair: np.ndarray
    lumped: np.ndarray
    unfiltered: np.ndarray
    filtered: np.ndarray
    long_runs: dict[int, LongRun]
    terminated: dict[int, float]
    tl_used: frozenset[int]
    totals: np.ndarray
    worst_x: np.ndarray
    full: np.ndarray | None
    by_victim: np.ndarray
    starts: np.ndarray
    failing: np.ndarray
    scales: np.ndarray
    victims_seen: tuple[VictimNoise, ...]


def rule_noise(ctx, rule) -> RuleNoise:
    """Everything ``rule`` (a noise-budget rule) judges, from the analysis
    ``ctx`` (module docstring)."""
    np_ = ctx.net_pairs
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
    seen = _record_victims(ctx, rule, victims, aggressors, noise, totals, by_victim, starts, tl_used, limit,
                           small_r, worst_x, set(filtered.tolist()), unfiltered)
    failing = np.flatnonzero(totals > limit)
    scales = _scales_meeting_budget(ctx, failing, victims, aggressors, pair, terminated, limit, small_r,
                                    rule.options["long_runs"] != "transmission-line", (rule, filtered))
    return RuleNoise(aggressors, victims, noise, pair, lumped, unfiltered, filtered, long_runs, terminated,
                     frozenset(tl_used), totals, worst_x, full, by_victim, starts, failing, scales, tuple(seen))


def _record_victims(ctx, rule, victims, aggressors, noise, totals, by_victim, starts, tl_used, limit,
                    small_r, worst_x, in_band=frozenset(), unfiltered=None) -> list[VictimNoise]:
    """Every victim this rule looked at, passing or not, with the model that
    gave its number (``Analysis.victim_noise``; the reports list them)."""
    out: list[VictimNoise] = []

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
        out.append(VictimNoise(rule.name, ctx.net_name(victim), float(totals[victim]) * 1e3,
                               limit * 1e3, model, ctx.net_name(int(aggressors[worst])), len(mine),
                               c_tot, c_tot - float(ctx.net_pairs.coupled_pf[victim]), raw))
    return out


def _scales_meeting_budget(ctx, failing, victims, aggressors, pair, long_runs, limit, small_r,
                           larger: bool = True, band=None) -> np.ndarray:
    """Per victim in ``failing``: the largest fraction k of today's coupling
    (every aggressor's C12 onto it, and its long runs' lengths, scaled by k)
    whose total noise meets ``limit``, by the same models; bisection run on
    all failing victims at once (``checker.whatif`` explains k)."""

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


def with_grounding(ctx, text, mine, victims, aggressors, pair, noise, long_runs, small_r):
    """``text`` and, where floating copper relays part of the coupling,
    how much of the victim's noise grounding it would remove (the same
    lumped model without the relayed C12; long runs keep their value)."""

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

    e = ctx.electrical
    x = run.crosstalk
    f0 = float(e.clock_hz[aggressor]) if np.isfinite(e.clock_hz[aggressor]) else float(e.frequency_hz[aggressor])
    duty = float(e.duty[aggressor]) if np.isfinite(e.duty[aggressor]) else 0.5
    corner = float(e.corner_hz[victim]) if np.isfinite(e.corner_hz[victim]) else None
    return terminated_noise_v(run.matrices, x.coupled_length_m, float(e.swing_v[aggressor]), f0, x.rise_time_s,
                              duty, float(e.resistance_ohm[victim]), float(e.node_capacitance_f[victim]), corner)
