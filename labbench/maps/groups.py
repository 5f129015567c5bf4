"""Groups of a map: its units merged into contiguous regions by Ward's method.

Ward (Hierarchical grouping to optimize an objective function, JASA 1963) merges, step by step,
the two groups whose union raises the within-group sum of squares least: the cost of merging A and
B is |A| |B| / (|A| + |B|) * ||mean(A) - mean(B)||^2. Here the items are the map's prototypes (each
counts once) and only groups that touch on the grid may merge (rectangular grid: units sharing an
edge; hexagonal: the 6 around), so every group is one connected region of the map - the same
rule as scikit-learn's ``AgglomerativeClustering(linkage="ward", connectivity=...)``, which the
tests use as the reference.
"""

from __future__ import annotations

import numpy as np


def ward_groups(prototypes: np.ndarray, touching: np.ndarray, n_groups: int) -> np.ndarray:
    """(k,) int64 group of each unit, 0..g-1 numbered in order of each group's first unit.
    ``n_groups`` <= 0 or >= k: every unit is its own group. A grid that falls apart into more
    pieces than ``n_groups`` keeps its pieces (groups never join across a gap)."""
    P = np.asarray(prototypes, dtype=np.float64)
    k = P.shape[0]
    if n_groups <= 0 or n_groups >= k:
        return np.arange(k, dtype=np.int64)
    adj = np.asarray(touching, dtype=bool).copy()
    np.fill_diagonal(adj, False)
    means, sizes = P.copy(), np.ones(k)
    alive = np.ones(k, dtype=bool)
    label = np.arange(k)

    def costs_to(a: int) -> np.ndarray:
        diff = means - means[a]
        c = sizes * sizes[a] / (sizes + sizes[a]) * np.einsum("kd,kd->k", diff, diff)
        c[~adj[a] | ~alive] = np.inf
        c[a] = np.inf
        return c

    cost = np.full((k, k), np.inf)
    for a in range(k):
        cost[a] = costs_to(a)
    for _ in range(k - n_groups):
        flat = int(np.argmin(cost))
        a, b = divmod(flat, k)
        if not np.isfinite(cost[a, b]):
            break                                  # no touching groups left
        a, b = min(a, b), max(a, b)
        total = sizes[a] + sizes[b]
        means[a] = (sizes[a] * means[a] + sizes[b] * means[b]) / total
        sizes[a] = total
        alive[b] = False
        label[label == b] = a
        adj[a] |= adj[b]
        adj[:, a] |= adj[:, b]
        adj[a, a] = False
        adj[b, :] = adj[:, b] = False
        cost[b, :] = cost[:, b] = np.inf
        cost[a] = costs_to(a)
        cost[:, a] = cost[a]
    # a group's label is its lowest unit (merges keep the lower one), so this numbers the groups
    # in order of their first unit
    return np.unique(label, return_inverse=True)[1].astype(np.int64)
