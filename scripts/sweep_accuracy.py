#!/usr/bin/env python
r"""Accuracy sweep: couplint's fast capacitance estimates against direct field solves.

Every fast estimate the checker has (closed forms, table models) is compared
with a direct solve of the same cross-section by ``checker.physics.fieldsolve``
at resolution ``FINE`` (3), Richardson-extrapolated from resolution 1.5
(``solve(cs, 1.5, richardson=True)``: the finer solve is at ``FINE``; the
extrapolated value is used as the reference and the Richardson error estimate
is written beside it; it is typically below 0.3 %, an order under the floors
checked here).

Estimates (``estimate`` column of the CSV)
-----------------------------------------
* ``c2g_closed``: ``capacitance.c2g_per_m`` (Hammerstad & Jensen 1980 for
  microstrip; Cohn 1954 + Wheeler 1978 thickness correction, off-centre by
  half-stripline combination, for stripline) against C_M[0, 0] of one trace.
* ``c2g_plate``: eps0 er w / h (``parallel_plate_per_m``, both planes for
  stripline), shown only as the fringing-free baseline.
* ``c2g_model``: ``edge.GroundModel.c_per_m`` when ``checker/physics/edge.py``
  exists (built from the group's four widths: it solves each, plus fill-in
  knots where two are more than twice apart, ``edge.ground_knots``).
* ``edge_closed``: ``capacitance.edge_c12_per_m`` (Kirschning & Jansen 1984
  for microstrip, Cohn 1955 for stripline; zero-thickness models, mean width
  for unequal traces) against -C_M[0, 1] of two traces on one layer.
* ``edge_model``: ``edge.EdgeModel.c12_per_m`` when ``edge.py`` exists.
* ``broadside_plate``: eps0 er_eff overlap / d (series er, d the facing-
  surface separation; zero once the traces no longer overlap) against
  -C_M[0, 1] of two traces on neighbouring layers. Shown to document why it
  is not used.
* ``broadside_model``: ``broadside.BroadsideModel.c12_per_m`` (the checker's
  table model, built as ``checker.analysis`` builds it: widths of the
  group, ``max_offset_mm`` = broadside search + widest trace, or the largest
  query offset if that is larger).

Stackups
--------
* ``microstrip``: signal layer on top of one dielectric of height h over a
  plane; air above (solder mask when the model has it and ``--mask`` is on:
  not yet, see docs/accuracy.md).
* ``stripline``: signal layer between two planes, h below and a*h above
  (a in 1..2), one er.
* ``dual_stripline``: plane / S1 / S2 / plane; h between S1 and S2, outer
  dielectrics h_o (0.05-0.5 mm) of a second er (prepreg vs core).
Copper 35 um; every fourth group has zero-thickness copper (the variant).
An inner copper layer's band beside the traces is resin of the mean er of
the two dielectrics touching it (the checker's convention); an outer one's is
air.

Sampling
--------
Seeded Latin hypercube (``scipy.stats.qmc``) over the group parameters (h,
er, ratios) and, separately, over the query parameters: w 0.075-0.5 mm
(log-uniform), gap 0.5-10 w (log-uniform), lateral centre offset 0-4 w with
w the mean width, er 3-4.7. Each group draws four widths per layer (the
table models' knots); half of its queries sit on knots and half between
them (log-uniform between the smallest and largest), which is how the
models are queried on a real board with more than four widths (for
``GroundModel``, which solves every distinct width up to 32, on a board
with more than 32, or by a caller with widths not on the layer).

Floors (issue): capacitance to plane within 3 %; mutual C12 within 15 %
where the rule checks use it (edge gap <= the default ``edge_search`` 1 mm;
broadside plan-view gap <= the default ``broadside_search`` 0.5 mm) and
within max(30 %, 0.5 pF/m) everywhere.

Outputs: ``docs/accuracy/sweep.csv`` (every case), ``docs/accuracy/
sweep.png`` (error vs w/h, gap/w, offset/w) and the markdown table printed
and written to ``docs/accuracy/table.md``. ``--quick`` runs a small sample
(under a minute on two cores). Two solves run at a time at most.

Usage::

    python scripts/sweep_accuracy.py [--quick] [--out docs/accuracy] [--seed 7]
"""

from __future__ import annotations

import argparse
import csv
import importlib
import math
import sys
import time
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from scipy.stats import qmc

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from checker.model import CopperLayer, Dielectric, Stackup  # noqa: E402
from checker.physics import capacitance  # noqa: E402
from checker.physics.broadside import BroadsideModel  # noqa: E402
from checker.physics.fieldsolve import FINE, Conductor, CrossSection, Slab, solve  # noqa: E402
from checker.stackup import effective_er, reference_of, separation_mm  # noqa: E402

#: Reference solve: resolution FINE / 2 with Richardson, i.e. FINE and the
#: extrapolation from FINE / 2 to FINE.
REF_RESOLUTION = FINE / 2

#: Copper thickness of the main cases, mm.
COPPER_MM = 0.035
#: Default search distances of the rule set (checker/ruleset.py), mm.
EDGE_SEARCH_MM = 1.0
BROADSIDE_SEARCH_MM = 0.5

#: Floors (issue).
C2G_FLOOR = 0.03
C12_RULE_FLOOR = 0.15
C12_ALL_FLOOR = 0.30
C12_ALL_ABS = 0.5e-12  # F/m

W_RANGE = (0.075, 0.5)
H_RANGE = (0.05, 0.5)
GAP_RANGE = (0.5, 10.0)  # x w
OFFSET_RANGE = (0.0, 4.0)  # x w
ER_RANGE = (3.0, 4.7)
#: Solder mask over the copper (variant of the microstrip), mm and er.
MASK_T_RANGE = (0.01, 0.03)
MASK_ER_RANGE = (3.3, 4.0)
WORKERS = 2


# --------------------------------------------------------------------------
# stackups and reference cross-sections (built here, independently of the
# models' own section builders)


def microstrip_stackup(h, er, t, mask=None):
    """``mask``: (thickness mm, er) of a top solder mask, or None (bare)."""
    kw = {} if mask is None else dict(mask_top=Dielectric(mask[0], mask[1]))
    return Stackup((CopperLayer("TOP", "signal", t), CopperLayer("GND", "plane", 0.035)),
                   (Dielectric(h, er),), **kw)


def stripline_stackup(h_below, h_above, er, t):
    return Stackup((CopperLayer("GND1", "plane", 0.035), CopperLayer("SIG", "signal", t),
                    CopperLayer("GND2", "plane", 0.035)),
                   (Dielectric(h_above, er), Dielectric(h_below, er)))


def dual_stripline_stackup(h_between, h_outer, er_core, er_outer, t):
    return Stackup((CopperLayer("GND1", "plane", 0.035), CopperLayer("S1", "signal", t),
                    CopperLayer("S2", "signal", t), CopperLayer("GND2", "plane", 0.035)),
                   (Dielectric(h_outer, er_outer), Dielectric(h_between, er_core), Dielectric(h_outer, er_outer)))


def reference_section(stackup: Stackup, traces) -> CrossSection:
    """Cross-section of ``traces`` = [(layer, x0, x1), ...] (net = position in
    the list): every plane-role layer is a grounded plane at its surface
    facing the signal layers (the planes here are outermost), every
    dielectric a slab, an inner signal layer's copper band resin of the mean
    er of its two dielectrics, an outer one's air."""
    layers, diel = stackup.layers, stackup.dielectrics
    n = len(layers)
    top, bot = np.zeros(n), np.zeros(n)
    y = 0.0
    for i, layer in enumerate(layers):
        top[i] = y
        y -= layer.thickness_mm
        bot[i] = y
        if i < n - 1:
            y -= diel[i].thickness_mm
    signals = [k for k in range(n) if layers[k].role != "plane"]
    planes = []
    for k in range(n):
        if layers[k].role == "plane":
            planes.append(float(bot[k]) if k < min(signals) else float(top[k]))
    slabs = [Slab(float(top[i + 1]), float(bot[i]), float(diel[i].er)) for i in range(n - 1)]
    for k in range(1, n - 1):
        if layers[k].role != "plane" and layers[k].thickness_mm > 0:
            slabs.append(Slab(float(bot[k]), float(top[k]), 0.5 * (diel[k - 1].er + diel[k].er)))
    # solder mask (microstrip only here): the outer copper band filled with
    # mask plus a slab of the mask's thickness over the copper (the
    # checker's approximation of a conformal mask)
    mask = getattr(stackup, "mask_top", None)
    if mask is not None and layers[0].role != "plane":
        slabs.append(Slab(float(bot[0]), float(top[0]) + mask.thickness_mm, float(mask.er)))
    conductors = tuple(Conductor(float(x0), float(x1), float(bot[k]), float(top[k]), net)
                       for net, (k, x0, x1) in enumerate(traces))
    return CrossSection(conductors, tuple(slabs), tuple(planes))


#: A reference whose Richardson error estimate exceeds this (relative, any
#: entry of the Maxwell matrix) is solved again at twice the resolution, up
#: to MAX_REF_RESOLUTION: far-apart traces between close planes, where C12
#: is a tiny part of each trace's charge.
REF_TRUST = 0.01
MAX_REF_RESOLUTION = 4 * REF_RESOLUTION


def reference_solve(cs: CrossSection):
    """(C_M extrapolated, C_M at the finer grid, Richardson error estimate),
    F/m, and the resolution used (REF_RESOLUTION, doubled while the error
    estimate exceeds REF_TRUST, up to MAX_REF_RESOLUTION)."""
    resolution = REF_RESOLUTION
    while True:
        r = solve(cs, resolution, richardson=True)
        size = np.abs(r.extrapolated)
        worst = float(np.max(np.where(size > 0, np.abs(r.error) / np.where(size > 0, size, 1.0), 0.0)))
        if worst <= REF_TRUST or resolution >= MAX_REF_RESOLUTION:
            return r.extrapolated, r.maxwell, r.error, resolution
        resolution *= 2


# --------------------------------------------------------------------------
# optional models (edge.py, solder mask) -- used as soon as they exist


def load_edge():
    try:
        return importlib.import_module("checker.physics.edge")
    except ModuleNotFoundError as exc:
        if exc.name != "checker.physics.edge":
            raise
        return None


# --------------------------------------------------------------------------
# sampling


def log_map(u, lo, hi):
    return lo * (hi / lo) ** u


def lhs(n: int, d: int, seed: int) -> np.ndarray:
    try:
        sampler = qmc.LatinHypercube(d=d, rng=np.random.default_rng(seed))
    except TypeError:  # scipy < 1.15
        sampler = qmc.LatinHypercube(d=d, seed=seed)
    return sampler.random(n)


@dataclass
class Group:
    kind: str  # microstrip | stripline | dual_stripline
    stackup: Stackup
    layer: int  # signal layer (upper one for broadside)
    t: float
    params: dict
    widths: np.ndarray  # knots offered to the models (layer widths)
    widths_b: np.ndarray | None = None
    queries: list = field(default_factory=list)


def make_groups(kind: str, n_groups: int, n_queries: int, seed: int) -> list[Group]:
    ug = lhs(n_groups, 5, seed)
    uq = lhs(n_groups * n_queries, 4, seed + 1000)
    rng = np.random.default_rng(seed + 2000)
    groups = []
    for g in range(n_groups):
        h = float(log_map(ug[g, 0], *H_RANGE))
        er = float(ER_RANGE[0] + ug[g, 1] * (ER_RANGE[1] - ER_RANGE[0]))
        t = 0.0 if g % 4 == 3 else COPPER_MM
        if kind == "microstrip":
            st, layer, params = microstrip_stackup(h, er, t), 0, dict(h=h, er=er)
        elif kind == "microstrip_mask":
            mask = (float(MASK_T_RANGE[0] + ug[g, 3] * (MASK_T_RANGE[1] - MASK_T_RANGE[0])),
                    float(MASK_ER_RANGE[0] + ug[g, 4] * (MASK_ER_RANGE[1] - MASK_ER_RANGE[0])))
            st, layer = microstrip_stackup(h, er, t, mask), 0
            params = dict(h=h, er=er, mask_mm=mask[0], mask_er=mask[1])
        elif kind == "stripline":
            a = 1.0 + ug[g, 2]
            st, layer, params = stripline_stackup(h, a * h, er, t), 1, dict(h=h, h_above=a * h, er=er)
        else:
            ho = float(log_map(ug[g, 2], *H_RANGE))
            er_o = float(ER_RANGE[0] + ug[g, 3] * (ER_RANGE[1] - ER_RANGE[0]))
            st, layer = dual_stripline_stackup(h, ho, er, er_o, t), 1
            params = dict(h=h, h_outer=ho, er=er, er_outer=er_o)
        widths = np.sort(np.round(log_map(rng.random(4), *W_RANGE), 3))
        widths_b = np.sort(np.round(log_map(rng.random(4), *W_RANGE), 3)) if kind == "dual_stripline" else None
        grp = Group(kind, st, layer, t, params, widths, widths_b)
        for q in range(n_queries):
            u = uq[g * n_queries + q]
            on_knot = q % 2 == 0

            def pick(knots, uu, on_knot=on_knot):
                if on_knot:
                    return float(knots[min(int(uu * knots.size), knots.size - 1)])
                return float(log_map(uu, knots[0], knots[-1]))

            wa = pick(widths, u[0])
            if kind == "dual_stripline":
                wb = pick(widths_b, u[1])
                w = 0.5 * (wa + wb)
                offset = float(OFFSET_RANGE[0] + u[2] * (OFFSET_RANGE[1] - OFFSET_RANGE[0])) * w
                grp.queries.append(dict(wa=wa, wb=wb, offset=offset, on_knot=on_knot))
            else:
                # half the edge pairs equal, half of two widths of the layer
                wb = wa if q % 4 < 2 else pick(widths, u[1])
                w = 0.5 * (wa + wb)
                gap = float(log_map(u[2], *GAP_RANGE)) * w
                grp.queries.append(dict(wa=wa, wb=wb, gap=gap, on_knot=on_knot))
        groups.append(grp)
    return groups


# --------------------------------------------------------------------------
# evaluation


def _row(grp: Group, estimate: str, quantity: str, est: float, ref, fine, err, resolution, in_range,
         **geo) -> dict:
    rel = est / ref - 1.0
    return dict(stackup=grp.kind, estimate=estimate, quantity=quantity, t_mm=grp.t,
                h_mm=grp.params["h"], er=grp.params["er"],
                h_other_mm=grp.params.get("h_above", grp.params.get("h_outer", "")),
                er_other=grp.params.get("er_outer", ""),
                mask_mm=grp.params.get("mask_mm", ""), mask_er=grp.params.get("mask_er", ""),
                wa_mm=geo.get("wa"), wb_mm=geo.get("wb", ""), gap_mm=geo.get("gap", ""),
                offset_mm=geo.get("offset", ""), on_knot=geo.get("on_knot", ""),
                rule_region=geo.get("rule_region", ""), in_range=in_range,
                ref_resolution=resolution, ref_pf_per_m=ref * 1e12, fine_pf_per_m=fine * 1e12,
                richardson_err_pct=100 * err / ref,
                est_pf_per_m=est * 1e12, err_pct=100 * rel, abs_err_pf_per_m=(est - ref) * 1e12)


def run_same_layer(groups: list[Group], edge_mod, pool, log) -> list[dict]:
    """c2g (one trace) and edge C12 (two traces) cases of microstrip and
    stripline groups."""
    jobs = []
    for gi, grp in enumerate(groups):
        for qi, q in enumerate(grp.queries):
            jobs.append((gi, qi, "c2g", reference_section(grp.stackup, [(grp.layer, -q["wa"] / 2, q["wa"] / 2)])))
            x0 = -q["gap"] / 2 - q["wa"]
            jobs.append((gi, qi, "edge", reference_section(
                grp.stackup, [(grp.layer, x0, x0 + q["wa"]), (grp.layer, q["gap"] / 2, q["gap"] / 2 + q["wb"])])))
    results = list(pool.map(lambda j: reference_solve(j[3]), jobs))
    log(f"  {len(jobs)} reference solves")
    models = {}
    if edge_mod is not None:
        for gi, grp in enumerate(groups):
            # as checker.analysis builds them: the layer's widths, the gap
            # range of the pairs queried
            gaps = [q["gap"] for q in grp.queries]
            models[gi] = (edge_mod.EdgeModel(grp.stackup, grp.layer, grp.widths, max_gap_mm=max(gaps),
                                             min_gap_mm=min(gaps)),
                          edge_mod.GroundModel(grp.stackup, grp.layer, grp.widths))
    rows = []
    raised: set[int] = set()
    for (gi, qi, what, _), (cm, cm_fine, err, res) in zip(jobs, results):
        grp, q = groups[gi], groups[gi].queries[qi]
        ref_kind = reference_of(grp.stackup, grp.layer)
        if what == "c2g":
            geo = dict(wa=q["wa"], on_knot=q["on_knot"])
            args = (float(cm[0, 0]), float(cm_fine[0, 0]), float(err[0, 0]), res)
            est, ok = capacitance.c2g_per_m(ref_kind, q["wa"], grp.t)
            rows.append(_row(grp, "c2g_closed", "c2g", float(est), *args, bool(ok), **geo))
            st = grp.stackup
            planes = [k for k in range(len(st.layers)) if st.layers[k].role == "plane"]
            plate = sum(float(capacitance.parallel_plate_per_m(q["wa"], separation_mm(st, k, grp.layer),
                                                                effective_er(st, k, grp.layer))) for k in planes)
            rows.append(_row(grp, "c2g_plate", "c2g", plate, *args, True, **geo))
            if gi in models:
                v = float(np.asarray(models[gi][1].c_per_m(q["wa"])).ravel()[0])
                rows.append(_row(grp, "c2g_model", "c2g", v, *args, True, **geo))
        else:
            geo = dict(wa=q["wa"], wb=q["wb"], gap=q["gap"], on_knot=q["on_knot"],
                       rule_region=q["gap"] <= EDGE_SEARCH_MM)
            args = (float(-cm[0, 1]), float(-cm_fine[0, 1]), float(err[0, 1]), res)
            est, ok = capacitance.edge_c12_per_m(ref_kind, q["wa"], q["wb"], q["gap"], grp.t)
            rows.append(_row(grp, "edge_closed", "c12", float(est), *args, bool(ok), **geo))
            if gi in models:
                try:
                    v = float(np.asarray(models[gi][0].c12_per_m(q["wa"], q["wb"], q["gap"])).ravel()[0])
                except RuntimeError as exc:  # a table column failed to build: count it, keep going
                    if gi not in raised:
                        log(f"  EdgeModel raised ({grp.kind}, h {grp.params['h']:.3g} mm, first at wa "
                            f"{q['wa']:.3g} wb {q['wb']:.3g} gap {q['gap']:.3g}): {exc}")
                    raised.add(gi)
                    v = math.nan
                rows.append(_row(grp, "edge_model", "c12", v, *args, True, **geo))
    return rows


def run_broadside(groups: list[Group], pool, log) -> list[dict]:
    jobs = []
    for gi, grp in enumerate(groups):
        u, lo = grp.layer, grp.layer + 1
        for qi, q in enumerate(grp.queries):
            x = q["offset"] / 2
            cs = reference_section(grp.stackup, [(u, -x - q["wa"] / 2, -x + q["wa"] / 2),
                                                 (lo, x - q["wb"] / 2, x + q["wb"] / 2)])
            jobs.append((gi, qi, cs))
    results = list(pool.map(lambda j: reference_solve(j[2]), jobs))
    log(f"  {len(jobs)} reference solves")
    rows = []
    build = 0.0
    for gi, grp in enumerate(groups):
        u, lo = grp.layer, grp.layer + 1
        max_off = max(BROADSIDE_SEARCH_MM + float(max(grp.widths.max(), grp.widths_b.max())),
                      max(q["offset"] for q in grp.queries) * 1.0001)
        model = BroadsideModel(grp.stackup, u, lo, grp.widths, grp.widths_b, max_off)
        build += model.build_seconds
        d, er_eff = separation_mm(grp.stackup, u, lo), effective_er(grp.stackup, u, lo)
        for (gj, qi, _), (cm, cm_fine, err, res) in zip(jobs, results):
            if gj != gi:
                continue
            q = grp.queries[qi]
            plan_gap = q["offset"] - 0.5 * (q["wa"] + q["wb"])
            geo = dict(wa=q["wa"], wb=q["wb"], offset=q["offset"], on_knot=q["on_knot"],
                       rule_region=plan_gap <= BROADSIDE_SEARCH_MM)
            args = (float(-cm[0, 1]), float(-cm_fine[0, 1]), float(err[0, 1]), res)
            overlap = max(0.0, min(-q["offset"] / 2 + q["wa"] / 2, q["offset"] / 2 + q["wb"] / 2)
                          - max(-q["offset"] / 2 - q["wa"] / 2, q["offset"] / 2 - q["wb"] / 2))
            plate = float(capacitance.parallel_plate_per_m(overlap, d, er_eff))
            rows.append(_row(grp, "broadside_plate", "c12", plate, *args, True, **geo))
            v = float(model.c12_per_m(q["wa"], q["wb"], q["offset"]))
            rows.append(_row(grp, "broadside_model", "c12", v, *args, True, **geo))
    log(f"  {len(groups)} broadside models built in {build:.1f} s")
    return rows


# --------------------------------------------------------------------------
# summary


def meets(row: dict) -> dict:
    """Floors met by one row (a NaN estimate -- the model raised -- meets none)."""
    rel = abs(row["err_pct"]) / 100
    if math.isnan(rel):
        rel = math.inf
        row = dict(row, abs_err_pf_per_m=math.inf)
    if row["quantity"] == "c2g":
        return dict(floor=rel <= C2G_FLOOR)
    absolute = abs(row["abs_err_pf_per_m"]) * 1e-12
    everywhere = rel <= C12_ALL_FLOOR or absolute <= C12_ALL_ABS
    rule = (rel <= C12_RULE_FLOOR) if row["rule_region"] else None
    sizeable = rule if row["ref_pf_per_m"] * 1e-12 >= C12_ALL_ABS else None
    return dict(floor=everywhere, rule=rule, sizeable=sizeable)


def summarise(rows: list[dict]) -> str:
    keys = []
    for r in rows:
        k = (r["estimate"], r["stackup"], r["t_mm"])
        if k not in keys:
            keys.append(k)
    lines = [
        "| estimate | stackup | copper | n | raised | in range | median | 90 % | max | signed median | "
        "meets floor (all) | within 15 % in rule region (n) | same, C12 >= 0.5 pF/m (n) |",
        "|---|---|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|",
    ]
    for est, stk, t in sorted(keys, key=lambda k: (k[0], k[1], -k[2])):
        sel = [r for r in rows if (r["estimate"], r["stackup"], r["t_mm"]) == (est, stk, t)]
        e_all = np.array([r["err_pct"] for r in sel])
        e = e_all[np.isfinite(e_all)]
        a = np.abs(e)
        raised = int(np.count_nonzero(~np.isfinite(e_all)))
        ok = [meets(r) for r in sel]
        floor = np.mean([m["floor"] for m in ok])
        rule = [m["rule"] for m in ok if m.get("rule") is not None]
        rule_s = f"{100 * np.mean(rule):.0f} % ({len(rule)})" if rule else "-"
        big = [m["sizeable"] for m in ok if m.get("sizeable") is not None]
        big_s = f"{100 * np.mean(big):.0f} % ({len(big)})" if big else "-"
        inr = np.mean([bool(r["in_range"]) for r in sel])
        if a.size == 0:
            a = e = np.array([math.nan])
        lines.append(
            f"| {est} | {stk} | {'35 um' if t > 0 else '0'} | {len(sel)} | {raised} | {100 * inr:.0f} % | "
            f"{np.median(a):.1f} % | {np.percentile(a, 90):.1f} % | {a.max():.1f} % | {np.median(e):+.1f} % | "
            f"{100 * floor:.0f} % | {rule_s} | {big_s} |")
    ref_err = np.array([abs(r["richardson_err_pct"]) for r in rows])
    shaky = [r for r in rows if abs(r["richardson_err_pct"]) > 1.0]
    lines.append("")
    if shaky:
        lines.append(f"{len(shaky)} rows have a reference whose Richardson error estimate exceeds 1 %; all have "
                     f"solved C12 <= {max(r['ref_pf_per_m'] for r in shaky):.3g} pF/m (far-apart traces "
                     "between close planes, where C12 is a tiny part of each trace's charge); there only the "
                     "absolute floor means anything.")
        lines.append("")
    raised_ref = [r for r in rows if float(r.get("ref_resolution") or REF_RESOLUTION) > REF_RESOLUTION]
    if raised_ref:
        lines.append(f"{len(raised_ref)} rows' references were solved again at a higher resolution (up to "
                     f"{MAX_REF_RESOLUTION:g} and {2 * MAX_REF_RESOLUTION:g}) because their error estimate "
                     f"exceeded {100 * REF_TRUST:g} % (column ref_resolution).")
        lines.append("")
    lines.append(f"Errors are |estimate / solve - 1|. Reference: Richardson-extrapolated solve (resolution "
                 f"{REF_RESOLUTION:g} and {2 * REF_RESOLUTION:g}, raised where needed); its error estimate, median "
                 f"{np.median(ref_err):.3f} %, max {ref_err.max():.3f} %. Floors: capacitance to plane "
                 f"within {100 * C2G_FLOOR:.0f} %; C12 within max({100 * C12_ALL_FLOOR:.0f} %, "
                 f"{C12_ALL_ABS * 1e12:g} pF/m) everywhere and within {100 * C12_RULE_FLOOR:.0f} % in the "
                 f"rule region (edge gap <= {EDGE_SEARCH_MM:g} mm, broadside plan-view gap <= "
                 f"{BROADSIDE_SEARCH_MM:g} mm).")
    return "\n".join(lines)


def plot(rows: list[dict], path: Path) -> None:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    panels = [
        ("c2g", "w / h", lambda r: r["wa_mm"] / r["h_mm"], "capacitance to plane"),
        ("edge", "gap / w", lambda r: r["gap_mm"] / (0.5 * (r["wa_mm"] + r["wb_mm"])), "edge C12"),
        ("broadside", "offset / w", lambda r: r["offset_mm"] / (0.5 * (r["wa_mm"] + r["wb_mm"])), "broadside C12"),
    ]
    fig, axes = plt.subplots(1, 3, figsize=(13, 4.2))
    markers = {"microstrip": "o", "microstrip_mask": "D", "stripline": "s", "dual_stripline": "^"}
    for ax, (prefix, xlabel, fx, title) in zip(axes, panels):
        ests = sorted({r["estimate"] for r in rows if r["estimate"].startswith(prefix)})
        for ci, est in enumerate(ests):
            for stk, mk in markers.items():
                sel = [r for r in rows if r["estimate"] == est and r["stackup"] == stk]
                if not sel:
                    continue
                x = [fx(r) for r in sel]
                y = [r["err_pct"] for r in sel]
                face = [f"C{ci}" if r["t_mm"] > 0 else "none" for r in sel]
                ax.scatter(x, y, s=10, marker=mk, facecolors=face, edgecolors=f"C{ci}", linewidths=0.6,
                           label=f"{est} ({stk})")
        band = 100 * (C2G_FLOOR if prefix == "c2g" else C12_RULE_FLOOR)
        ax.axhspan(-band, band, color="0.9", zorder=0)
        ax.axhline(0, color="0.4", lw=0.6)
        if prefix != "broadside":
            ax.set_xscale("log")
        ax.set_ylim(-105, 60)
        ax.set_xlabel(xlabel)
        ax.set_ylabel("error vs field solve, %")
        ax.set_title(title, fontsize=10)
        ax.legend(fontsize=6, loc="lower right")
    fig.suptitle("couplint fast estimates vs direct 2-D solves (filled: 35 um copper, open: zero "
                 "thickness; grey band: floor)", fontsize=9)
    fig.tight_layout()
    fig.savefig(path, dpi=72)
    plt.close(fig)


def write_csv(rows: list[dict], path: Path) -> None:
    """Every case, 4 significant digits (errors to 0.01 %)."""
    def fmt(v):
        return f"{v:.4g}" if isinstance(v, float) else v
    with open(path, "w", newline="") as fh:
        writer = csv.DictWriter(fh, fieldnames=list(rows[0]))
        writer.writeheader()
        for r in rows:
            writer.writerow({k: fmt(v) for k, v in r.items()})


def read_csv(path: Path) -> list[dict]:
    """Rows of a CSV written by this script, with numbers and flags parsed."""
    def parse(v: str):
        if v in ("True", "False"):
            return v == "True"
        if v == "":
            return ""
        try:
            return float(v)
        except ValueError:
            return v
    with open(path, newline="") as fh:
        return [{k: parse(v) for k, v in r.items()} for r in csv.DictReader(fh)]


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--quick", action="store_true", help="small sample (< 1 min on two cores)")
    ap.add_argument("--out", type=Path, default=ROOT / "docs" / "accuracy", help="output directory")
    ap.add_argument("--seed", type=int, default=7)
    ap.add_argument("--no-plot", action="store_true", help="skip the PNG (no matplotlib needed)")
    ap.add_argument("--from-csv", type=Path, help="only re-make the table and plot from a CSV of an earlier run")
    args = ap.parse_args(argv)
    t0 = time.perf_counter()
    if args.from_csv:
        rows = read_csv(args.from_csv)
        write_csv(rows, args.from_csv)
        stem = args.from_csv.with_suffix("")
        table = summarise(rows)
        stem.with_name(stem.name.replace("sweep", "table") + ".md").write_text(table + "\n")
        if not args.no_plot:
            plot(rows, stem.with_suffix(".png"))
        print(table)
        return 0

    def log(msg):
        print(f"[{time.perf_counter() - t0:6.1f} s] {msg}", flush=True)

    if args.quick:
        ng, nq = 2, 4  # 8 cases per stackup and quantity
    else:
        ng, nq = 12, 16  # 192
    edge_mod = load_edge()
    log("edge.py: " + ("found, EdgeModel/GroundModel included" if edge_mod else "absent, closed forms only"))
    rows: list[dict] = []
    with ThreadPoolExecutor(max_workers=WORKERS) as pool:
        kinds = [("microstrip", args.seed), ("stripline", args.seed + 1)]
        if "mask_top" in Stackup.__dataclass_fields__:
            kinds.append(("microstrip_mask", args.seed + 3))
        else:
            log("Stackup has no solder mask yet: masked microstrip skipped")
        for kind, seed in kinds:
            log(kind)
            rows += run_same_layer(make_groups(kind, ng, nq, seed), edge_mod, pool, log)
        log("dual_stripline (broadside)")
        rows += run_broadside(make_groups("dual_stripline", ng, nq, args.seed + 2), pool, log)

    out = args.out
    out.mkdir(parents=True, exist_ok=True)
    suffix = "-quick" if args.quick else ""
    csv_path = out / f"sweep{suffix}.csv"
    write_csv(rows, csv_path)
    table = summarise(rows)
    (out / f"table{suffix}.md").write_text(table + "\n")
    if not args.no_plot:
        plot(rows, out / f"sweep{suffix}.png")
    print(table)
    log(f"wrote {csv_path} ({len(rows)} rows); wall time {time.perf_counter() - t0:.1f} s")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
