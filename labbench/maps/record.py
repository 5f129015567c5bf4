"""The trained-model records of the map and group families (the contract every part shares).

Two kinds of record, both plain numpy (no Qt, no Optuna), all arrays float64, all in the SCALED
input space the fold preprocessor gives (``labbench.data.Preprocessor.transform``):

* ``PrototypeRecord`` - self-organising map, hard competitive learning, neural gas. ``k``
  prototype vectors; a map also has grid positions. Each row goes to its best-matching unit
  (nearest prototype, Euclidean; ties: the lowest unit index, like ``numpy.argmin``), and each
  unit belongs to one group (``unit_group``; without a grouping step every unit is its own group).
* ``SubspaceRecord`` - Hebbian feature extraction (Oja's rule, Sanger's generalised Hebbian
  algorithm). ``c`` weight vectors (rows of ``components``); a row's features are its projection.

``forward(X)`` is what ``labbench.model.TrainedModel`` and the exporters call: the distances to
every unit (N, k) for a prototype record, the projection (N, c) for a subspace record.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

#: family name -> record kind
PROTOTYPE_FAMILIES = ("som", "competitive", "neural_gas")
SUBSPACE_FAMILIES = ("hebbian",)
TOPOLOGIES = ("rectangular", "hexagonal")


def squared_distances(X: np.ndarray, P: np.ndarray) -> np.ndarray:
    """(N, k) squared Euclidean distances of the rows of X to the rows of P (clipped at 0)."""
    X = np.asarray(X)
    P = np.asarray(P, dtype=X.dtype if X.dtype.kind == "f" else np.float64)
    d2 = (X * X).sum(axis=1)[:, None] - 2.0 * (X @ P.T) + (P * P).sum(axis=1)[None, :]
    return np.maximum(d2, 0.0)


def grid_positions(rows: int, cols: int, topology: str) -> np.ndarray:
    """(rows*cols, 2) positions (x, y) of the units, row-major (unit = r * cols + c).

    Rectangular: (c, r). Hexagonal: odd rows shifted by half a unit and rows sqrt(3)/2 apart,
    so every unit's six neighbours are at distance 1.
    """
    r, c = np.divmod(np.arange(rows * cols), cols)
    if topology == "hexagonal":
        return np.column_stack([c + 0.5 * (r % 2), r * (np.sqrt(3.0) / 2.0)]).astype(np.float64)
    return np.column_stack([c, r]).astype(np.float64)


@dataclass
class PrototypeRecord:
    family: str                               # "som" | "competitive" | "neural_gas"
    prototypes: np.ndarray                    # (k, d) float64
    unit_group: np.ndarray | None = None      # (k,) int64 group of each unit, 0..g-1
    shape: tuple[int, int] | None = None      # map only: (rows, cols), rows*cols == k
    topology: str | None = None               # map only: "rectangular" | "hexagonal"
    extra: dict = field(default_factory=dict)  # plain values a family wants kept (JSON-safe)

    def __post_init__(self) -> None:
        self.prototypes = np.asarray(self.prototypes, dtype=np.float64)
        k = self.prototypes.shape[0]
        if self.unit_group is None:
            self.unit_group = np.arange(k, dtype=np.int64)
        self.unit_group = np.asarray(self.unit_group, dtype=np.int64)

    @property
    def n_units(self) -> int:
        return int(self.prototypes.shape[0])

    @property
    def n_groups(self) -> int:
        return int(self.unit_group.max()) + 1 if self.n_units else 0

    @property
    def positions(self) -> np.ndarray | None:
        """(k, 2) grid positions of a map's units; None without a grid."""
        if self.shape is None:
            return None
        return grid_positions(self.shape[0], self.shape[1], self.topology or "rectangular")

    def forward(self, X: np.ndarray) -> np.ndarray:
        """(N, k) Euclidean distances of the scaled rows to every unit."""
        return np.sqrt(squared_distances(np.asarray(X, dtype=np.float64), self.prototypes))

    def assign(self, X: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(unit, group, distance) of each scaled row: its best-matching unit, that unit's group,
        and the distance to it."""
        d = self.forward(X)
        unit = np.argmin(d, axis=1)
        return unit, self.unit_group[unit], d[np.arange(len(unit)), unit]


@dataclass
class SubspaceRecord:
    family: str                               # "hebbian"
    components: np.ndarray                    # (c, d) float64, rows = learned weight vectors
    rule: str = "sanger"                      # "oja" | "sanger" | "hebb"
    extra: dict = field(default_factory=dict)

    def __post_init__(self) -> None:
        self.components = np.asarray(self.components, dtype=np.float64)

    @property
    def n_components(self) -> int:
        return int(self.components.shape[0])

    def forward(self, X: np.ndarray) -> np.ndarray:
        """(N, c) projection of the scaled rows on the components."""
        return np.asarray(X, dtype=np.float64) @ self.components.T

    def reconstruct(self, X: np.ndarray) -> np.ndarray:
        """(N, d) the rows rebuilt from their projection (Y W)."""
        return self.forward(X) @ self.components
