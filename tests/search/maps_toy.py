"""A toy family that learns WITHOUT a target, for the search / winner / CLI path of the map families.

It follows the map families' contract (/work/wt/_notes/MAPS.md, "Metrics" and "Extra per-member
measures") with the simplest possible training, so that the search side can be tested before the
real engine (``labbench.maps``, ``labbench.families.maps``) lands:

* ``units`` prototypes start at distinct random training rows (each member's own seed) and move
  by Lloyd's k-means steps (assign each row to its nearest prototype, move each prototype to the
  mean of its rows), one step per epoch;
* ``grid = "line"`` lays the units on a 1 × units map (a rectangular grid of one row), so the
  topographic error and the layout agreement of the map families are exercised too (the toy does
  not order its line: its topographic error is honest, just large);
* per epoch: train_loss = training quantisation error, val_loss = held-out quantisation error,
  val_metric = "quantisation_error" or "penalised_error" (relative error QE / QE0 + unit_cost ×
  units, plus the topographic error on a line), QE0 = the held-out rows' mean distance to the
  training rows' mean;
* ``measures()``: per member at the kept (last) epoch, ``units``: the unit count.

Registered with ``LABBENCH_FAMILIES=maps_toy:FAMILY`` for labbench's own processes. When the
engine's ``labbench.maps.stability`` is not there yet (this branch), a small stand-in of its two
functions is installed under that name so the winner's stability check can run; after the merge
the engine's own module is used.
"""

from __future__ import annotations

import sys
import types

import numpy as np

from labbench.errors import BundleError
from labbench.families.base import Family
from labbench.families.settings import SettingInfo, spec_error
from labbench.maps.record import PrototypeRecord, squared_distances
from labbench.nets.config import EpochScores

NAME = "toymap"


# ---- a stand-in for labbench.maps.stability (only while the engine's module is absent)


def adjusted_rand_index(labels_a, labels_b) -> float:
    """Hubert & Arabie's adjusted Rand index from the contingency table (own numpy version;
    test_maps_search checks it against sklearn.metrics.adjusted_rand_score)."""
    a = np.unique(np.asarray(labels_a), return_inverse=True)[1].ravel()
    b = np.unique(np.asarray(labels_b), return_inverse=True)[1].ravel()
    n = len(a)
    table = np.zeros((a.max() + 1, b.max() + 1))
    np.add.at(table, (a, b), 1)

    def pairs(x):
        return float((x * (x - 1) / 2).sum())

    index, rows, cols = pairs(table), pairs(table.sum(1)), pairs(table.sum(0))
    expected = rows * cols / (n * (n - 1) / 2)
    top = 0.5 * (rows + cols)
    return 1.0 if top == expected else (index - expected) / (top - expected)


def layout_agreement(units_a, units_b, positions_a, positions_b, *, pairs: int = 2000,
                     seed: int = 0) -> float:
    """Pearson correlation between the grid distances of the best units of sampled row pairs
    (NaN when either run puts every pair at one distance), as the engine's function."""
    units_a, units_b = np.asarray(units_a), np.asarray(units_b)
    rng = np.random.default_rng(seed)
    i = rng.integers(0, len(units_a), pairs)
    j = rng.integers(0, len(units_a), pairs)
    da = np.linalg.norm(positions_a[units_a[i]] - positions_a[units_a[j]], axis=1)
    db = np.linalg.norm(positions_b[units_b[i]] - positions_b[units_b[j]], axis=1)
    if da.std() == 0 or db.std() == 0:
        return float("nan")
    return float(np.corrcoef(da, db)[0, 1])


try:                                      # the engine's own functions, once merged
    import labbench.maps.stability  # noqa: F401
except ImportError:
    _module = types.ModuleType("labbench.maps.stability")
    _module.adjusted_rand_index = adjusted_rand_index
    _module.layout_agreement = layout_agreement
    sys.modules["labbench.maps.stability"] = _module


# ---- training


def _qe(X, P) -> np.ndarray:
    """Per row: distance to the nearest prototype, and that prototype."""
    d2 = squared_distances(X, P)
    return np.sqrt(d2.min(axis=1))


def _topographic(X, P) -> float:
    """Share of rows whose two nearest units are not next to each other on the line."""
    if len(P) < 2:
        return 0.0
    order = np.argsort(squared_distances(X, P), axis=1)[:, :2]
    return float(np.mean(np.abs(order[:, 0] - order[:, 1]) > 1))


class ToyTraining:
    def __init__(self, settings, X_train, X_val, seeds, metric, epochs):
        self.k = int(settings["units"])
        self.units = self.k
        self.line = settings.get("grid", "none") == "line"
        self.unit_cost = float(settings.get("unit_cost", 0.01))
        self.epochs = int(epochs if epochs is not None else settings["epochs"])
        self.X_train = [np.asarray(X, dtype=np.float64) for X in X_train]
        self.X_val = None if X_val is None else [np.asarray(X, dtype=np.float64) for X in X_val]
        self.metric = metric or "penalised_error"
        self.P = []
        for X, seed in zip(self.X_train, seeds):
            rng = np.random.default_rng(seed)
            self.P.append(X[rng.choice(len(X), self.k, replace=len(X) < self.k)].copy())
        m = len(self.X_train)
        self.best_epoch = np.zeros(m, dtype=np.int64)
        self.best_val_metric = None
        self._measures: dict[str, np.ndarray] = {}

    def _scores(self, i):
        X, P = self.X_val[i], self.P[i]
        qe = float(_qe(X, P).mean())
        qe0 = float(np.linalg.norm(X - self.X_train[i].mean(axis=0), axis=1).mean())
        te = _topographic(X, P) if self.line else None
        rel = qe / qe0 if qe0 > 0 else 0.0
        penalised = rel + self.unit_cost * self.k + (te or 0.0)
        out = {"quantisation_error": qe, "relative_error": rel}
        if te is not None:
            out["topographic_error"] = te
        return out, (qe if self.metric == "quantisation_error" else penalised)

    def run(self, on_epoch=None):
        history = []
        m = len(self.X_train)
        for epoch in range(1, self.epochs + 1):
            for i, X in enumerate(self.X_train):
                unit = np.argmin(squared_distances(X, self.P[i]), axis=1)
                for u in range(self.k):
                    rows = X[unit == u]
                    if len(rows):
                        self.P[i][u] = rows.mean(axis=0)
            train = np.array([_qe(X, P).mean() for X, P in zip(self.X_train, self.P)])
            val_loss = val_metric = None
            if self.X_val is not None:
                per = [self._scores(i) for i in range(m)]
                val_loss = np.array([p[0]["quantisation_error"] for p in per])
                val_metric = np.array([p[1] for p in per])
                self._measures = {key: np.array([p[0][key] for p in per]) for key in per[0][0]}
                self.best_val_metric = val_metric
            self.best_epoch[:] = epoch
            scores = EpochScores(epoch, train, val_loss, val_metric)
            history.append(scores)
            if on_epoch is not None and on_epoch(scores) is False:
                break
        return history

    def measures(self) -> dict[str, np.ndarray]:
        return dict(self._measures)

    def record(self, member: int) -> PrototypeRecord:
        if self.line:
            return PrototypeRecord(NAME, self.P[member].copy(), shape=(1, self.k),
                                   topology="rectangular")
        return PrototypeRecord(NAME, self.P[member].copy())


class ToyMapFamily(Family):
    name = NAME
    label = "Toy prototypes (k-means steps)"
    needs_target = False
    settings = {
        "units": SettingInfo("units", "Units", "int", 4, "Number of prototypes.", low=1, high=40),
        "epochs": SettingInfo("epochs", "Epochs", "int", 3, "Lloyd steps.", low=1, high=50),
        "grid": SettingInfo("grid", "Grid", "choice", "none", "Units on a line (a 1-row map) or "
                            "free.", options=("none", "line")),
        "unit_cost": SettingInfo("unit_cost", "Unit cost", "float", 0.01, "The share of the "
                                 "held-out error one more unit must remove to be worth having.",
                                 low=0.0, high=1.0),
    }
    default_space = {"units": {"low": 2, "high": 8}, "epochs": 3}
    numpy_source = '''
def toymap_forward(model, X):
    P = model["toymap_prototypes"]
    d2 = (X * X).sum(axis=1)[:, None] - 2.0 * (X @ P.T) + (P * P).sum(axis=1)[None, :]
    return np.sqrt(np.maximum(d2, 0.0))


FORWARD["toymap"] = toymap_forward
'''

    def metrics(self, task):
        return ("quantisation_error", "penalised_error") if task == "unsupervised" else ()

    def default_metric(self, task):
        return "penalised_error"

    def check_space(self, space):
        super().check_space(space)
        if space.searched("unit_cost"):
            raise spec_error(space.source, "space.unit_cost", "is searched; fix unit_cost to one value")

    def stack(self, settings, task, n_outputs, X_train, y_train, X_val=None, y_val=None, *,
              seeds, metric=None, target_inverse=None, groups=None, dtype="float32", epochs=None):
        assert task == "unsupervised", task
        return ToyTraining(settings, X_train, X_val, seeds, metric, epochs)

    def bundle_entries(self, record):
        meta = {"toymap": {"units": record.n_units,
                           "shape": list(record.shape) if record.shape else None}}
        return {"toymap_prototypes": record.prototypes}, meta

    def from_bundle(self, arrays, meta, name, n_inputs, n_outputs):
        P = arrays.get("toymap_prototypes")
        if P is None or P.ndim != 2 or P.shape[1] != n_inputs:
            raise BundleError(f"{name}: entry 'toymap_prototypes' is missing or not "
                              f"(units, {n_inputs}); save the model again")
        shape = (meta.get("toymap") or {}).get("shape")
        return PrototypeRecord(NAME, P, shape=tuple(shape) if shape else None,
                               topology="rectangular" if shape else None)


FAMILY = ToyMapFamily()
