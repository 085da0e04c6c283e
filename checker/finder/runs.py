"""Coupled runs: group the piece pairs of one continuous coupled stretch.

A graph is built on the pieces named by the pairs. Its edges are the pairs
themselves (a[k] - b[k]) and the polyline links: two pieces both present
with the same ``source`` and ordinals differing by one are consecutive
pieces of one track. The connected components of that graph
(``scipy.sparse.csgraph.connected_components``) are the runs.

Optional per-pair keys (for example the two net indices) keep groups apart:
the graph is then built on (piece, key) nodes, so only pairs with equal keys
join one run, and a piece shared by two groups does not merge them.
"""

from __future__ import annotations

import numpy as np
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import connected_components

from ..model import Pieces


def run_labels(pieces: Pieces, a: np.ndarray, b: np.ndarray, *keys: np.ndarray) -> np.ndarray:
    """Run label (int64) of each pair k: the component holding ``a[k]``,
    numbered 0, 1, ... in order of first appearance along the pairs, so the
    labels depend only on the input. ``keys``: optional integer arrays, one
    value per pair; pairs whose keys differ are never in the same run."""
    a = np.asarray(a, dtype=np.int64)
    b = np.asarray(b, dtype=np.int64)
    if a.shape != b.shape or a.ndim != 1:
        raise ValueError("run_labels: a and b must be 1-D arrays of equal length")
    for k in keys:
        if np.shape(k) != a.shape:
            raise ValueError("run_labels: each key needs one value per pair")
    m = a.size
    if m == 0:
        return np.zeros(0, dtype=np.int64)
    n_pieces = len(pieces)
    if min(int(a.min()), int(b.min())) < 0 or max(int(a.max()), int(b.max())) >= n_pieces:
        raise ValueError("run_labels: piece index out of range")
    if keys:
        group = _dense(keys)
        n_groups = int(group.max()) + 1
        node_key, inv = np.unique(np.concatenate([a * n_groups + group, b * n_groups + group]),
                                  return_inverse=True)
        node_piece, node_group = node_key // n_groups, node_key % n_groups
        la, lb = inv[:m], inv[m:]
    else:
        # compact node numbering of the pieces present (dense mark, no sort)
        present = np.zeros(n_pieces, dtype=bool)
        present[a] = True
        present[b] = True
        node_piece = np.flatnonzero(present)
        node_group = None
        local = np.cumsum(present) - 1
        la, lb = local[a], local[b]
    n = node_piece.size
    ra, rb = _polyline_links(pieces, node_piece, node_group)
    ra = np.concatenate([la, ra])
    rb = np.concatenate([lb, rb])
    graph = csr_matrix((np.ones(ra.size, dtype=np.int8), (ra, rb)), shape=(n, n))
    n_comp, comp = connected_components(graph, directed=False)
    label = comp[la]
    first = np.full(n_comp, m, dtype=np.int64)
    np.minimum.at(first, label, np.arange(m, dtype=np.int64))
    rank = np.full(n_comp, -1, dtype=np.int64)
    used = np.flatnonzero(first < m)
    rank[used[np.argsort(first[used], kind="stable")]] = np.arange(used.size)
    return rank[label]


def _dense(keys: tuple[np.ndarray, ...]) -> np.ndarray:
    """One dense id (0..G-1) per distinct tuple of key values."""
    gid = np.zeros(np.shape(keys[0]), dtype=np.int64)
    for k in keys:
        _, kk = np.unique(np.asarray(k, dtype=np.int64), return_inverse=True)
        gid = gid * (int(kk.max()) + 1) + kk
        _, gid = np.unique(gid, return_inverse=True)
    return gid.astype(np.int64)


def _polyline_links(pieces: Pieces, node_piece: np.ndarray,
                    node_group: np.ndarray | None) -> tuple[np.ndarray, np.ndarray]:
    """Node pairs (i, j) where j is the next piece of i's track (same source,
    ordinal + 1) in the same group. Nodes are keyed by (group, source,
    ordinal) packed in one int64: a dense id of (group, source) in the high
    32 bits, the ordinal (shifted to be non-negative) in the low 32."""
    source = pieces.source[node_piece].astype(np.int64)
    source -= source.min()
    if node_group is not None:
        _, line = np.unique((node_group << 32) | source, return_inverse=True)
    else:
        line = source
    key = (line.astype(np.int64) << 32) + (pieces.ordinal[node_piece].astype(np.int64) + 2**31)
    n = key.size
    if n > 1 and np.all(key[1:] >= key[:-1]):
        order = np.arange(n)                     # pieces usually come in track order
    else:
        order = np.argsort(key, kind="stable")
    sorted_key = key[order]
    hit = np.searchsorted(sorted_key, key + 1)
    found = hit < n
    found[found] = sorted_key[hit[found]] == key[found] + 1
    return np.flatnonzero(found), order[hit[found]]
