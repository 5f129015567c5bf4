"""Held-out measures of a map or a feature extractor (computed on rows it did not train on).

* quantisation error: the mean Euclidean distance of a row to its best-matching unit (Kohonen,
  Self-Organizing Maps, 2001; minisom's ``quantization_error`` is the same number);
* topographic error: the share of rows whose best and second-best units are not neighbours on the
  grid (Kiviluoto, Topology preservation in self-organizing maps, ICNN 1996). Neighbours as in
  minisom 2.3's ``topographic_error``: on a rectangular grid the 8 surrounding units (minisom counts
  a pair as an error when their grid distance exceeds 1.42, i.e. diagonal units are neighbours),
  on a hexagonal grid the 6 units at distance 1;
* reconstruction error: the mean of ||x - W^T W x||^2 over the rows divided by the mean ||x||^2
  (the share of the rows' energy the components do not rebuild);
* relative error: quantisation error / the quantisation error of one prototype at the training
  rows' mean (so 1 means "no better than the mean row");
* penalised error: relative error (+ topographic error for a map) + unit_cost * units; for the
  Hebbian extractor reconstruction error + unit_cost * components.

Distances use ||x||^2 - 2 x.p + ||p||^2: one matrix product per member.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from labbench.maps.record import PrototypeRecord, SubspaceRecord, squared_distances

#: measure names (labbench.nets.metrics registers them as metrics)
QE, TE, REC, REL, PEN = ("quantisation_error", "topographic_error", "reconstruction_error",
                         "relative_error", "penalised_error")


def grid_neighbours(positions: np.ndarray, topology: str) -> np.ndarray:
    """(k, k) bool: the pairs of units the topographic error counts as neighbours (see above)."""
    pos = np.asarray(positions, dtype=np.float64)
    delta = np.abs(pos[:, None, :] - pos[None, :, :])
    if topology == "hexagonal":
        near = np.abs(np.sqrt((delta ** 2).sum(-1)) - 1.0) < 1e-9
    else:
        near = np.isclose(delta.max(-1), 1.0)
    np.fill_diagonal(near, False)
    return near


def grid_touching(positions: np.ndarray, topology: str) -> np.ndarray:
    """(k, k) bool: units sharing an edge (rectangular: the 4 beside, above and below; hexagonal:
    the 6 around) - what "contiguous" means for the groups of a map."""
    pos = np.asarray(positions, dtype=np.float64)
    dist = np.sqrt(((pos[:, None, :] - pos[None, :, :]) ** 2).sum(-1))
    near = np.abs(dist - 1.0) < 1e-9
    np.fill_diagonal(near, False)
    return near


def best_two(d2: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Best and second-best unit of each row of squared distances (n, k); ties to the lower
    index, as numpy.argmin. With one unit both are that unit."""
    first = np.argmin(d2, axis=1)
    if d2.shape[1] < 2:
        return first, first
    masked = d2.copy()
    masked[np.arange(d2.shape[0]), first] = np.inf
    return first, np.argmin(masked, axis=1)


def quantisation_error(X: np.ndarray, P: np.ndarray) -> float:
    d2 = squared_distances(X, P)
    return float(np.sqrt(d2.min(axis=1)).mean(dtype=np.float64))


def topographic_error(X: np.ndarray, P: np.ndarray, neighbours: np.ndarray) -> float:
    """Share of rows whose two best units are not neighbours (0 for a one-unit map)."""
    if P.shape[0] < 2:
        return 0.0
    first, second = best_two(squared_distances(X, P))
    return float(np.mean(~neighbours[first, second]))


def prototype_scores(X: np.ndarray, P: np.ndarray, neighbours: np.ndarray | None
                     ) -> tuple[float, float | None]:
    """(quantisation error, topographic error or None without a grid) from one distance pass."""
    d2 = squared_distances(X, P)
    if neighbours is None or P.shape[0] < 2:
        qe = float(np.sqrt(d2.min(axis=1)).mean(dtype=np.float64))
        return qe, (None if neighbours is None else 0.0)
    first, second = best_two(d2)
    qe = float(np.sqrt(d2[np.arange(len(first)), first]).mean(dtype=np.float64))
    return qe, float(np.mean(~neighbours[first, second]))


def mean_distance(X: np.ndarray, centre: np.ndarray) -> float:
    """Quantisation error of one prototype at ``centre``: the relative error's denominator."""
    diff = np.asarray(X, dtype=np.float64) - np.asarray(centre, dtype=np.float64)
    return float(np.sqrt((diff * diff).sum(axis=1)).mean())


def relative(qe: float, qe0: float) -> float:
    return float(qe / qe0) if qe0 > 0 else 0.0


def reconstruction_error(X: np.ndarray, W: np.ndarray) -> float:
    X = np.asarray(X)
    W = np.asarray(W, dtype=X.dtype if X.dtype.kind == "f" else np.float64)
    R = X - (X @ W.T) @ W
    energy = float(np.einsum("nd,nd->", X, X, dtype=np.float64))
    if energy <= 0.0:
        return 0.0
    return float(np.einsum("nd,nd->", R, R, dtype=np.float64)) / energy


def penalised(error: float, units: int, unit_cost: float, topographic: float | None = None) -> float:
    return float(error + (topographic or 0.0) + unit_cost * units)


def record_measures(record: Any, X: np.ndarray, *, unit_cost: float,
                    train_mean: np.ndarray | None = None) -> dict[str, Any]:
    """Every measure of a trained record on scaled rows ``X`` (e.g. the hold-out rows):
    ``quantisation_error``, ``topographic_error`` (None without a grid), ``reconstruction_error``
    (None for prototypes), ``relative_error``, ``penalised_error`` and ``units``. ``train_mean`` is
    the training rows' mean (default: ``record.extra["train_mean"]``, else the origin)."""
    X = np.asarray(X, dtype=np.float64)
    if isinstance(record, SubspaceRecord):
        rec = reconstruction_error(X, record.components)
        c = record.n_components
        return {QE: None, TE: None, REC: rec, REL: rec, PEN: penalised(rec, c, unit_cost), "units": c}
    if not isinstance(record, PrototypeRecord):
        raise TypeError(f"not a map record: {type(record).__name__}")
    neighbours = None
    if record.shape is not None:
        neighbours = grid_neighbours(record.positions, record.topology or "rectangular")
    qe, te = prototype_scores(X, record.prototypes, neighbours)
    if train_mean is None:
        train_mean = record.extra.get("train_mean", np.zeros(X.shape[1]))
    rel = relative(qe, mean_distance(X, np.asarray(train_mean, dtype=np.float64)))
    k = record.n_units
    return {QE: qe, TE: te, REC: None, REL: rel, PEN: penalised(rel, k, unit_cost, te), "units": k}
