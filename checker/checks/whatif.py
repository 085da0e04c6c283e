"""What-if answers: how much less coupling would meet a budget.

Computed by the same model that produced the finding, not guessed. Mutual
capacitance grows linearly with the length of a uniform coupled run, so
"keep a fraction k of today's C12" is also "keep a fraction k of today's
coupled length at today's spacing".
"""

from __future__ import annotations

#: bisection steps: 2**-60 of the unit interval, far below any reported digit
BISECTION_STEPS = 60


def shorten_text(k: float, longest_mm: float, c12_pf: float) -> str:
    """One line telling the designer what would meet the budget."""
    return (f"meets the budget with {k * 100:.0f} % of today's coupling: C12 {c12_pf * k:.3g} pF, "
            f"e.g. the longest coupled run cut from {longest_mm:.2f} mm to {longest_mm * k:.2f} mm "
            f"at today's spacing, or more spacing for the same effect")
