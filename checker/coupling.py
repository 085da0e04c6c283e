"""The vocabulary the analysis, the checks and the reports share about
coupled rows, kept below all of them so none imports another for it: the
kinds of coupling a row records, a victim's noise result, and the victim
node's whole capacitance in mutual form.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: what a coupled row is: two pieces on neighbouring layers (broadside), side
#: by side on one layer (edge), or a coupling relayed through a third
#: conductor (floating copper, a high-impedance net)
BROADSIDE, EDGE, RELAY = 0, 1, 2
KIND_NAMES = ("broadside", "edge", "relay")


@dataclass(frozen=True)
class VictimNoise:
    """One victim's coupled noise under one noise-budget rule, passing or not:
    the summed noise (mV), the budget (mV), which model gave it
    (``lumped``, ``small-r`` or ``transmission-line`` when any of its
    aggressors' runs is electrically long; ``small-r (out of range)`` where
    that limit does not hold), the worst aggressor and how many aggressors
    contribute; the victim node's whole capacitance C_tot and its
    capacitance to ground in mutual form C_tot - sum_k C_1k (pF,
    :func:`node_total_pf`)."""

    rule: str
    victim: str
    noise_mv: float
    budget_mv: float
    model: str
    worst_aggressor: str
    aggressors: int
    c_total_pf: float = float("nan")
    c_ground_mutual_pf: float = float("nan")
    #: a filtered victim: its noise with the filter left out (mV); NaN otherwise
    unfiltered_mv: float = float("nan")

    @property
    def passes(self) -> bool:
        return self.noise_mv <= self.budget_mv



def node_total_pf(trace_c2g_pf, coupled_pf, node_pf):
    """A victim node's whole capacitance C_tot = C_1g + sum_k C_1k (pF), the
    Maxwell diagonal with every neighbour held at ground, in mutual form.

    Taken as max(C of its traces to ground computed alone, sum_k C_1k) plus
    the node capacitance its class gives. The capacitance to ground of a
    trace computed alone is the Maxwell diagonal without neighbours; a
    grounded neighbour only raises the diagonal (a conductor added at ground
    can only raise the charge the excited one holds: the Dirichlet
    variational principle of electrostatics), and the
    diagonal is at least the sum of the mutual capacitances (C_1g >= 0). So
    this is a lower bound of C_tot: the noise it gives errs high, never low
    (it is not the single-trace value plus C12, which counts C12 twice)."""
    return np.maximum(trace_c2g_pf, coupled_pf) + node_pf
