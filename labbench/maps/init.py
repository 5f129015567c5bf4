"""Starting prototypes and weight vectors, drawn per member from its own generator.

* ``random_rows``: k distinct training rows (with repetition only when there are fewer rows than
  units) - the usual random start of competitive learning and of the SOM.
* ``kmeans_plus_plus``: "k-means++" seeding (Arthur & Vassilvitskii, k-means++: the advantages of
  careful seeding, SODA 2007): the first prototype a uniformly drawn row, each next one a row drawn
  with probability proportional to its squared distance to the nearest prototype so far - in its
  greedy form (also in that paper, and scikit-learn's): 2 + ln(k) rows are drawn at each step and
  the one that lowers the sum of squared distances most is kept.
* ``pca_plane``: Kohonen's linear initialisation (Self-Organizing Maps, 3rd ed. 2001, section
  3.7): the prototypes lie on the plane of the first two principal components through the mean,
  spread over the grid - the longer side of the map along the first component. The grid spans
  +-1 standard deviation along each component (labbench's choice). Needs no random numbers.
* ``random_unit_rows``: c random directions of length 1 (the start of the Hebbian rules).
"""

from __future__ import annotations

import numpy as np

PROTOTYPE_INITS = ("random_rows", "kmeans++", "pca_plane")


def random_rows(rng: np.random.Generator, X: np.ndarray, k: int) -> np.ndarray:
    n = X.shape[0]
    return X[rng.choice(n, size=k, replace=n < k)].copy()


def kmeans_plus_plus(rng: np.random.Generator, X: np.ndarray, k: int) -> np.ndarray:
    n = X.shape[0]
    X64 = np.asarray(X, dtype=np.float64)
    x2 = np.einsum("nd,nd->n", X64, X64)
    trials = 2 + int(np.log(k))                 # candidates per step (greedy k-means++)
    chosen = [int(rng.integers(n))]
    c = X64[chosen[0]]
    best = np.maximum(x2 - 2.0 * (X64 @ c) + c @ c, 0.0)
    for _ in range(1, k):
        total = best.sum()
        if total <= 0.0:                     # every row sits on a prototype: take any row
            chosen.append(int(rng.integers(n)))
            continue
        picks = np.searchsorted(np.cumsum(best), rng.random(trials) * total, side="right")
        picks = np.minimum(picks, n - 1)
        C = X64[picks]
        d2 = np.maximum(x2[None, :] - 2.0 * (C @ X64.T) + np.einsum("td,td->t", C, C)[:, None], 0.0)
        np.minimum(d2, best[None, :], out=d2)
        winner = int(np.argmin(d2.sum(axis=1)))  # the candidate that lowers the potential most
        chosen.append(int(picks[winner]))
        best = d2[winner]
    return X[chosen].copy()


def principal_axes(X: np.ndarray, count: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(mean (d,), axes (count, d), standard deviations (count,)) of the rows, largest first;
    each axis's sign is fixed so that its largest-magnitude entry is positive. Missing axes
    (fewer columns than ``count``) are zero."""
    X = np.asarray(X, dtype=np.float64)
    mean = X.mean(axis=0)
    d = X.shape[1]
    cov = np.cov(X - mean, rowvar=False).reshape(d, d) if X.shape[0] > 1 else np.zeros((d, d))
    values, vectors = np.linalg.eigh(cov)
    order = np.argsort(values)[::-1]
    values, vectors = np.maximum(values[order], 0.0), vectors[:, order].T
    axes, sds = np.zeros((count, d)), np.zeros(count)
    take = min(count, d)
    for j in range(take):
        v = vectors[j]
        axes[j] = v if v[np.argmax(np.abs(v))] >= 0 else -v
        sds[j] = np.sqrt(values[j])
    return mean, axes, sds


def pca_plane(X: np.ndarray, positions: np.ndarray) -> np.ndarray:
    """(k, d) prototypes on the plane of the first two principal components, spread over the
    grid ``positions`` (k, 2) - the grid's longer extent along the first component."""
    mean, axes, sds = principal_axes(X, 2)
    pos = np.asarray(positions, dtype=np.float64)
    span = pos.max(axis=0) - pos.min(axis=0)
    coords = np.zeros_like(pos)
    for j in range(2):
        if span[j] > 0:
            coords[:, j] = 2.0 * (pos[:, j] - pos[:, j].min()) / span[j] - 1.0    # in [-1, 1]
    if span[1] > span[0]:                      # the longer side goes along the first component
        coords = coords[:, ::-1]
    return mean + coords[:, :1] * (sds[0] * axes[0]) + coords[:, 1:] * (sds[1] * axes[1])


def random_unit_rows(rng: np.random.Generator, c: int, d: int) -> np.ndarray:
    W = rng.standard_normal((c, d))
    return W / np.maximum(np.linalg.norm(W, axis=1, keepdims=True), 1e-12)
