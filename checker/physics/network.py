r"""Reductions of a capacitance matrix: floating conductors, mutual form.

A Maxwell (short-circuit) capacitance matrix ``C_M`` (F or F/m) relates the
charges of N conductors to their potentials, ``q = C_M v``, with ground at
0 V: positive diagonal, non-positive off-diagonal. Its *mutual* ("circuit")
form is C_ij = -C_M[i, j] between conductors and C_ig = sum_j C_M[i, j]
from conductor i to ground (C. R. Paul, *Analysis of Multiconductor
Transmission Lines*, 2nd ed., Wiley, 2008, ch. 3).

Floating conductors
-------------------
A conductor tied to nothing (an unconnected copper island) carries no net
charge: its potential is whatever the others give it. Splitting the
conductors into kept (k) and floating (f) ones, q_f = 0 gives
v_f = -C_ff^-1 C_fk v_k, and the kept ones see

.. math:: C_{red} = C_{kk} - C_{kf}\,C_{ff}^{-1}\,C_{fk}

(Kron reduction, the Schur complement of C_ff; any text on network
reduction, e.g. Paul, 2008, or G. Kron, *Tensor Analysis of Networks*, 1939,
cited from memory). For one floating conductor s this is the series
circuit of textbook circuit theory: the mutual capacitance between i and j
grows by

.. math:: \Delta C_{ij} = \frac{C_{is}\,C_{js}}{C_{sg} + \sum_k C_{ks}}

(C_is, C_js, C_sg in mutual form; for two conductors and an island,
C1s C2s / (C1s + C2s + Csg)). A grounded conductor is simply left out of
the kept set without reduction (it is ground).
"""

from __future__ import annotations

import numpy as np


def kron_reduce(maxwell, floating) -> np.ndarray:
    """The Maxwell matrix of the kept conductors once the conductors at
    indices ``floating`` carry zero net charge (module docstring).

    >>> c = np.array([[3.0, -1.0, -1.0], [-1.0, 3.0, -1.0], [-1.0, -1.0, 3.0]])
    >>> kron_reduce(c, [2]).round(4).tolist()
    [[2.6667, -1.3333], [-1.3333, 2.6667]]
    """
    c = np.asarray(maxwell, dtype=float)
    n = c.shape[0]
    if c.shape != (n, n):
        raise ValueError(f"expected a square matrix, got shape {c.shape}")
    f = np.unique(np.asarray(floating, dtype=np.int64))
    if f.size and (f.min() < 0 or f.max() >= n):
        raise ValueError(f"floating indices must lie in 0..{n - 1}")
    k = np.setdiff1d(np.arange(n), f)
    if f.size == 0:
        return c.copy()
    cff = c[np.ix_(f, f)]
    return c[np.ix_(k, k)] - c[np.ix_(k, f)] @ np.linalg.solve(cff, c[np.ix_(f, k)])


def mutual_form(maxwell) -> tuple[np.ndarray, np.ndarray]:
    """(C_mutual, C_to_ground) of a Maxwell matrix: C_mutual[i, j] =
    -C_M[i, j] (zero diagonal), C_to_ground[i] = row sum of C_M."""
    c = np.asarray(maxwell, dtype=float)
    mutual = -c.copy()
    np.fill_diagonal(mutual, 0.0)
    return mutual, c.sum(axis=1)


def maxwell_from_mutual(mutual, to_ground) -> np.ndarray:
    """The Maxwell matrix of a network of mutual capacitances ``mutual``
    (symmetric, diagonal ignored) and capacitances to ground ``to_ground``."""
    m = np.asarray(mutual, dtype=float).copy()
    np.fill_diagonal(m, 0.0)
    out = -m
    np.fill_diagonal(out, np.asarray(to_ground, dtype=float) + m.sum(axis=1))
    return out


def relayed_mutual(c_is, c_sg: float) -> np.ndarray:
    """Mutual capacitance added between every two conductors i, j by one
    floating conductor s coupled to them through ``c_is`` (mutual form, one
    value per conductor) and to ground through ``c_sg``:
    C_is C_js / (C_sg + sum_k C_ks), zero diagonal (module docstring).

    >>> relayed_mutual([1.0, 2.0], 1.0).tolist()
    [[0.0, 0.5], [0.5, 0.0]]
    """
    c = np.asarray(c_is, dtype=float)
    total = float(c_sg) + float(c.sum())
    if total <= 0:
        return np.zeros((c.size, c.size))
    out = np.outer(c, c) / total
    np.fill_diagonal(out, 0.0)
    return out
