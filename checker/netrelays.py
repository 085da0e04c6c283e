"""High-impedance third nets as relays.

A net held to ground only through a resistance (its net class gives a
``resistance``: a sensor input, a reference, a bias node) is not a shield
between two other nets but a node that passes coupling on, like floating
copper (``checker.islands``). At the angular frequency omega its admittance
to ground is

    Y_N = 1/R_N + j omega C_N,    C_N = C_Ng + sum_k C_Nk,

C_Ng its capacitance to ground (mutual form) and C_Nk its mutual
capacitance to each net it couples to (their drivers hold them at AC
ground): its whole capacitance, taken as in ``analysis.node_total_pf``
(max(its traces' capacitance to ground computed alone, sum_k C_Nk) plus its
node capacitance: a lower bound, so the relay errs high). Driven by net A
through C_AN, N sits at V_N = j omega C_AN V_A / Y_N and drives net V
through C_NV. Eliminating N from the nodal equations (Kron reduction, to
first order: V itself held near ground) adds between A and V

    C_relay = C_AN C_NV / |C_N + 1/(j omega R_N)|
            = C_AN C_NV / sqrt(C_N^2 + 1/(omega R_N)^2),

which for R_N -> infinity is the floating-conductor formula
C_AN C_NV / C_N (textbook nodal analysis; H. W. Ott, *Electromagnetic
Compatibility Engineering*, Wiley, 2009, ch. 6, cited from memory, for the
floating limit). omega is 2 pi f of the faster of A and V (the larger
relay, erring toward more coupling).

Only pairs that feed a noise estimate are relayed: one of A and V has an
aggressor frequency, the other a resistance (a relay between two nets that
no noise model pairs would only add rows). The capacitances are the net-pair totals of the direct (broadside and edge)
coupling rows and the net's capacitance to ground; relays of relays are left
out. A third net that is driven (no ``resistance``) or in no class is taken
as held by its driver: it relays nothing, and its partial shielding of the
pair is not credited either (the direct C12 is solved without it), so the
estimate errs high there too. Each relay is one RELAY row of the couplings
table, ``island`` -1 and ``gap_net`` the relaying net, placed where that net
couples most strongly to the victim-side net.
"""

from __future__ import annotations

import math

import numpy as np

from .coupling import node_total_pf
from .model import NO_NET

#: At most this many of a relaying net's neighbours (the most strongly
#: coupled ones) take part in its relays; a note says when a net had more.
MAX_NEIGHBOURS = 100


def net_relay_rows(c, resistance_ohm: np.ndarray, frequency_hz: np.ndarray, c2g_pf: np.ndarray,
                   direct: np.ndarray, names: list[str], notes: list[str],
                   node_pf: np.ndarray | None = None) -> dict[str, np.ndarray] | None:
    """Columns of the RELAY rows (``Couplings`` field names) that the
    high-impedance nets relay between the nets around them; ``direct``
    marks the rows of ``c`` (a ``Couplings``) that are direct coupling.
    ``c2g_pf``: per net, its traces' capacitance to ground computed alone
    plus ``node_pf`` (its class's node capacitance; default none). None when
    no net relays anything."""

    relay_net = np.isfinite(resistance_ohm) & (resistance_ohm > 0)
    has_r, has_f = relay_net, np.isfinite(frequency_hz) & (frequency_hz > 0)
    rows = np.flatnonzero(direct & (c.net_a != NO_NET) & (c.net_b != NO_NET))
    if not relay_net.any() or rows.size == 0:
        return None
    n_nets = len(resistance_ohm)
    # both directions: (relaying net x, neighbour y, the neighbour's piece, pF, row)
    x = np.concatenate([c.net_a[rows], c.net_b[rows]]).astype(np.int64)
    y = np.concatenate([c.net_b[rows], c.net_a[rows]]).astype(np.int64)
    piece_y = np.concatenate([c.b[rows], c.a[rows]]).astype(np.int64)
    pf = np.concatenate([c.c12_pf[rows], c.c12_pf[rows]])
    row = np.concatenate([rows, rows])
    keep = relay_net[x] & (pf > 0)
    x, y, piece_y, pf, row = x[keep], y[keep], piece_y[keep], pf[keep], row[keep]
    if x.size == 0:
        return None
    key = x * n_nets + y
    order = np.lexsort((-pf, key))  # by key, the strongest row first
    key, x, y, piece_y, pf, row = key[order], x[order], y[order], piece_y[order], pf[order], row[order]
    first = np.concatenate(([True], key[1:] != key[:-1]))
    total = np.add.reduceat(pf, np.flatnonzero(first))
    x, y, piece_y, row = x[first], y[first], piece_y[first], row[first]
    # x is sorted: one group of neighbours per relaying net
    starts = np.flatnonzero(np.concatenate(([True], x[1:] != x[:-1])))
    sizes = np.diff(np.append(starts, x.size))
    group = np.repeat(np.arange(starts.size), sizes)
    nets_x = x[starts]
    node = node_pf[nets_x] if node_pf is not None else np.zeros(nets_x.size)
    c_total = node_total_pf(c2g_pf[nets_x] - node, np.add.reduceat(total, starts), node)  # C_N per net
    # of the neighbours that can feed a noise estimate (a frequency or a resistance), the strongest
    # MAX_NEIGHBOURS of each net take part (C_N above counts every neighbour)
    can = has_f[y] | has_r[y]
    order = np.lexsort((-total, ~can, group))
    rank = np.arange(x.size) - starts[group[order]]
    n_can = np.bincount(group, weights=can.astype(float), minlength=starts.size)
    crowded = nets_x[n_can > MAX_NEIGHBOURS]
    kept = np.sort(order[(rank < MAX_NEIGHBOURS) & can[order]])
    x, y, piece_y, row, total, group = x[kept], y[kept], piece_y[kept], row[kept], total[kept], group[kept]
    starts = np.flatnonzero(np.concatenate(([True], group[1:] != group[:-1])))
    sizes = np.diff(np.append(starts, x.size))
    # every pair (i < j) within a group: entry i with each later entry of its group
    later = np.repeat(starts + sizes, sizes) - np.arange(x.size) - 1
    ni = np.repeat(np.arange(x.size), later)
    nj = ni + 1 + (np.arange(ni.size) - np.repeat(np.cumsum(later) - later, later))
    ya, yb = y[ni], y[nj]
    # only pairs that feed a noise estimate: one net an aggressor (a frequency), the other a node with a resistance
    useful = ((has_f[ya] & has_r[yb]) | (has_f[yb] & has_r[ya])) & (ya != yb) & (c_total[group[ni]] > 0)
    ni, nj, ya, yb = ni[useful], nj[useful], ya[useful], yb[useful]
    if crowded.size:
        notes.append(f"high-impedance nets coupled to more than {MAX_NEIGHBOURS} nets (only the most strongly "
                     f"coupled take part in their relays): {', '.join(names[k] for k in crowded[:10].tolist())}"
                     + (f" and {crowded.size - 10} more" if crowded.size > 10 else ""))
    if ni.size == 0:
        return None
    n_of = x[ni]
    f = np.fmax(frequency_hz[ya], frequency_hz[yb])
    leak = 1e12 / (2 * math.pi * f * resistance_ohm[n_of])  # 1/(omega R_N) in pF (one always has a frequency)
    value = total[ni] * total[nj] / np.sqrt(c_total[group[ni]] ** 2 + leak ** 2)
    lo = ya < yb
    out = {
        "a": np.where(lo, piece_y[ni], piece_y[nj]), "b": np.where(lo, piece_y[nj], piece_y[ni]),
        "net_a": np.where(lo, ya, yb), "net_b": np.where(lo, yb, ya),
        # placed where the relaying net couples most strongly to the victim side (the higher-numbered net)
        "row": np.where(lo, row[nj], row[ni]), "c12_pf": value, "gap_net": n_of.astype(np.int64),
    }
    nets = np.unique(out["gap_net"]).tolist()
    notes.append(f"high-impedance nets as relays: {len(nets)} net(s) whose class gives a resistance "
                 f"({', '.join(names[k] for k in nets[:10])}{' and more' if len(nets) > 10 else ''}) pass "
                 f"coupling on between {out['c12_pf'].size} pair(s) of the nets around them "
                 "(C_relay = C_AN C_NV / |C_N + 1/(j omega R_N)|; checker.netrelays)")
    return out
