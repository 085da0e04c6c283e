"""What-if answers: how much less coupling would meet a budget.

Computed by the same model that produced the finding, not guessed. Mutual
capacitance grows linearly with the length of a uniform coupled run, so
"keep a fraction k of today's C12" is also "keep a fraction k of today's
coupled length at today's spacing".
"""

from __future__ import annotations

from typing import Callable

#: bisection steps: 2**-60 of the unit interval, far below any reported digit
_STEPS = 60


def largest_scale(total: Callable[[float], float], limit: float) -> float:
    """Largest k in [0, 1] with ``total(k) <= limit``, for a ``total`` that
    does not decrease with k and is 0 at k = 0 (found by bisection)."""
    if total(1.0) <= limit:
        return 1.0
    lo, hi = 0.0, 1.0
    for _ in range(_STEPS):
        mid = 0.5 * (lo + hi)
        if total(mid) <= limit:
            lo = mid
        else:
            hi = mid
    return lo


def shorten_text(k: float, longest_mm: float, c12_pf: float) -> str:
    """One line telling the designer what would meet the budget."""
    return (f"meets the budget with {k * 100:.0f} % of today's coupling: C12 {c12_pf * k:.3g} pF, "
            f"e.g. the longest coupled run cut from {longest_mm:.2f} mm to {longest_mm * k:.2f} mm "
            f"at today's spacing, or more spacing for the same effect")
