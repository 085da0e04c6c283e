"""What-if answers: how much less coupling would meet a budget.

Computed by the same model that produced the finding, not guessed. Mutual
capacitance grows linearly with the length of a uniform coupled run, so
"keep a fraction k of today's C12" is also "keep a fraction k of today's
coupled length at today's spacing".
"""

from __future__ import annotations

import numpy as np

from .coupling import BROADSIDE

#: bisection steps: 2**-60 of the unit interval, far below any reported digit
BISECTION_STEPS = 60


def shorten_text(k: float, longest_mm: float, c12_pf: float, extra_mm: float | None | bool) -> str:
    """One line telling the designer what would meet the budget."""
    return (f"meets the budget with {k * 100:.0f} % of today's coupling: C12 {c12_pf * k:.3g} pF, "
            f"e.g. the longest coupled run cut from {longest_mm:.2f} mm to {longest_mm * k:.2f} mm "
            f"at today's spacing, {spacing_text(extra_mm)}")


#: per rule, the spacing answer is worked out for this many of the worst
#: findings (each is a bisection over the models); the rest get the
#: fraction-of-coupling answer only
SPACING_ANSWERS = 50

#: largest extra spacing (mm) the spacing answer searches
MAX_EXTRA_SPACING_MM = 2.0


def extra_spacing_mm(ctx, rows: np.ndarray, target_pf: float) -> float | None:
    """Smallest extra lateral spacing (mm) of the parallel coupled pieces in
    ``rows`` that brings their total C12 down to ``target_pf``, asking the
    same C12' models at the wider spacing (bisection); crossings keep their
    value (moving traces apart does not shrink a crossing). ``None`` when
    even ``MAX_EXTRA_SPACING_MM`` does not reach the target."""

    c = ctx.couplings
    p = ctx.board.pieces
    fixed = float(c.c12_pf[rows][~c.parallel[rows]].sum())
    parallel = rows[c.parallel[rows]]
    row_group = ctx.net_pairs.row_group[parallel]  # the (kind, layer, layer) group of each row
    groups = []
    for g in np.unique(row_group).tolist():
        kind, lo, hi = ctx.net_pairs.layer_groups[g]
        if (kind, lo, hi) not in ctx.models:
            continue
        mine = parallel[row_group == g]
        up = np.where(p.layer[c.a[mine]] == lo, c.a[mine], c.b[mine])  # piece on the upper layer first
        dn = np.where(p.layer[c.a[mine]] == lo, c.b[mine], c.a[mine])
        spacing = np.abs(c.offset_mm[mine]) if kind == BROADSIDE else np.maximum(c.gap_mm[mine], 0.01)
        groups.append((_wide_model(ctx, kind, lo, hi), p.width[up], p.width[dn], spacing, c.length_mm[mine]))

    def total(extra: float) -> float:
        out = fixed
        for model, wa, wb, spacing, length in groups:
            per_m = model.c12_per_m(wa, wb, spacing + extra)
            out += float(np.sum(per_m * length)) * 1e-3 * 1e12
        return out

    if total(MAX_EXTRA_SPACING_MM) > target_pf:
        return None
    lo, hi = 0.0, MAX_EXTRA_SPACING_MM
    for _ in range(30):  # 2 mm / 2**30: below 2 nm
        mid = 0.5 * (lo + hi)
        if total(mid) <= target_pf:
            hi = mid
        else:
            lo = mid
    return hi


def _wide_model(ctx, kind: int, lo: int, hi: int):
    """The C12' model of a layer group, valid out to today's spacings plus
    ``MAX_EXTRA_SPACING_MM``. The check's own tables cover only the spacings
    on the board (beyond them they extrapolate), so a table reaching further
    is solved once per layer group, on first use; accurate mode's direct
    solves answer any spacing as they are."""
    from .physics.broadside import BroadsideModel
    from .physics.edge import EdgeModel

    model = ctx.models[(kind, lo, hi)]
    if ctx.mode == "accurate":
        return model
    key = ("what-if", kind, lo, hi)
    if key not in ctx.memo:  # a cache the analysis owns: filling it changes no number of the analysis
        c, p = ctx.couplings, ctx.board.pieces
        rows = np.flatnonzero(ctx.net_pairs.row_group == ctx.net_pairs.layer_groups.index((kind, lo, hi)))
        widths_lo = np.where(p.layer[c.a[rows]] == lo, p.width[c.a[rows]], p.width[c.b[rows]])
        widths_hi = np.where(p.layer[c.a[rows]] == lo, p.width[c.b[rows]], p.width[c.a[rows]])
        if kind == BROADSIDE:
            reach = float(np.abs(c.offset_mm[rows]).max()) + MAX_EXTRA_SPACING_MM
            ctx.memo[key] = BroadsideModel(ctx.board.stackup, lo, hi, widths_lo, widths_hi, max_offset_mm=reach)
        else:
            gaps = np.maximum(c.gap_mm[rows], 0.01)
            ctx.memo[key] = EdgeModel(ctx.board.stackup, lo, np.concatenate([widths_lo, widths_hi]),
                                      max_gap_mm=float(gaps.max()) + MAX_EXTRA_SPACING_MM,
                                      min_gap_mm=float(gaps.min()))
    return ctx.memo[key]


def spacing_text(extra: float | None | bool) -> str:
    """The spacing half of a what-if answer (``False``: not worked out)."""
    if extra is False:
        return (f"or more spacing (worked out with --what-if, for the worst {SPACING_ANSWERS} findings "
                "of a rule)")
    if extra is None:
        return f"more spacing alone does not reach it within {MAX_EXTRA_SPACING_MM:g} mm"
    return f"or {extra:.3f} mm more spacing between the coupled traces along the run"
