"""Field-solver speed and accuracy on its reference cases.

Times ``checker.physics.fieldsolve.solve`` at FAST and FINE on a two-trace
PCB cross-section and on the round-conductor cases with exact solutions
(coax 2 pi eps/ln(b/a), two-wire pi eps/acosh(D/2a), wire over plane
2 pi eps/acosh(h/a); textbook results), printing the time (best of three)
and the error against the exact value. The issue's floor: a typical
two-trace cross-section to better than 1 % in under 3 s on a 2-core machine.

    python scripts/bench_solver.py
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np
from scipy.constants import epsilon_0 as EPS0

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from checker.physics.fieldsolve import FAST, FINE, Circle, Conductor, CrossSection, Slab, solve  # noqa: E402


def best_of(cs: CrossSection, resolution: float, n: int = 3):
    best, result = np.inf, None
    for _ in range(n):
        t0 = time.perf_counter()
        result = solve(cs, resolution)
        best = min(best, time.perf_counter() - t0)
    return result, best


def main() -> None:
    two_trace = CrossSection(
        (Conductor(-0.075, 0.075, 0.2, 0.235, 0), Conductor(0.075, 0.225, 0.435, 0.47, 1)),
        (Slab(0.0, 0.67, 4.3),), (0.0, 0.67))
    fine = solve(two_trace, 2 * FINE).maxwell
    for name, res in (("FAST", FAST), ("FINE", FINE)):
        r, dt = best_of(two_trace, res)
        err = abs(-r.maxwell[0, 1] / -fine[0, 1] - 1)
        print(f"two traces, broadside   {name}: {dt * 1e3:7.1f} ms  "
              f"C12 within {err * 100:.2f} % of resolution {2 * FINE:g}")
    a = 0.5
    cases = [
        ("coax b/a=5", CrossSection((Circle(0, 0, a, 0),), box=Circle(0, 0, 5 * a)),
         lambda m: m[0, 0], 2 * np.pi * EPS0 / np.log(5.0)),
        ("two-wire D/2a=3", CrossSection((Circle(-3 * a, 0, a, 0), Circle(3 * a, 0, a, 1))),
         lambda m: (m[0, 0] - m[0, 1]) / 2, np.pi * EPS0 / np.arccosh(3.0)),
        ("wire over plane h/a=3", CrossSection((Circle(0, 3 * a, a, 0),), planes=(0.0,)),
         lambda m: m[0, 0], 2 * np.pi * EPS0 / np.arccosh(3.0)),
    ]
    for name, cs, value, exact in cases:
        for label, res in (("FAST", FAST), ("FINE", FINE)):
            r, dt = best_of(cs, res)
            print(f"{name:22s}  {label}: {dt * 1e3:7.1f} ms  error {abs(value(r.maxwell) / exact - 1) * 100:.3f} %")


if __name__ == "__main__":
    main()
