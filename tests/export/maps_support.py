"""Map and group models for the export tests, built directly from the record contract
(``labbench.maps.record``) without the map engine: prototypes from scikit-learn's KMeans or from
rows of the data, a map's grid with contiguous groups, Hebbian components from scikit-learn's PCA.

The rows are invented (readings of an imagined pump station: three numeric gauges, a shift label,
an id column), with a few missing numbers and categories. ``map_families`` registers a minimal
family for each of the four names (delegating every export hook to
``labbench.families.maps_export``) and restores the registry afterwards.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from labbench.data import Preprocessor
from labbench.families import maps_export, registry
from labbench.families.base import Family
from labbench.maps import PrototypeRecord, SubspaceRecord
from labbench.model import UNSUPERVISED, TrainedModel

FEATURES = ("inlet_bar", "motor_amp", "casing_c", "shift")
KINDS = {"inlet_bar": "numeric", "motor_amp": "numeric", "casing_c": "numeric", "shift": "categorical"}


def invented_rows(n: int, seed: int) -> pd.DataFrame:
    """Invented data: three clusters of gauge readings, a shift label, an id column."""
    rng = np.random.default_rng(seed)
    state = rng.integers(0, 3, n)
    centres = np.array([[2.0, 10.0, 40.0], [3.5, 14.0, 55.0], [1.2, 7.0, 35.0]])
    X = centres[state] + rng.normal(0, [0.3, 1.0, 3.0], (n, 3))
    frame = pd.DataFrame({"reading_id": [f"p{i:03d}" for i in range(n)],
                          "inlet_bar": X[:, 0].round(3), "motor_amp": X[:, 1].round(2),
                          "casing_c": X[:, 2].round(1),
                          "shift": rng.choice(["early", "late", "night"], n)})
    frame.loc[frame.index[::9], "motor_amp"] = np.nan
    frame.loc[frame.index[4::13], "shift"] = None
    return frame


class MapFamilyForTests(Family):
    """What ``labbench.families.maps`` will do for export: delegate to maps_export."""

    needs_target = False
    numpy_source = maps_export.NUMPY_SOURCE

    def __init__(self, name: str):
        self.name, self.label = name, name

    def bundle_entries(self, record):
        return maps_export.bundle_entries(record)

    def from_bundle(self, arrays, meta, name, n_inputs, n_outputs):
        return maps_export.from_bundle(arrays, meta, name, n_inputs)

    def onnx_body(self, record, h, n_inputs, node, const, net_type, task):
        return maps_export.onnx_body(record, h, node, const)


@pytest.fixture()
def map_families():
    registry._load()
    saved = dict(registry._FAMILIES)
    for name in maps_export.MAP_FAMILIES:
        registry.register(MapFamilyForTests(name))
    yield
    registry._FAMILIES.clear()
    registry._FAMILIES.update(saved)


def contiguous_groups(rows: int, cols: int) -> np.ndarray:
    """Three groups of grid units: left third, middle, right (contiguous on the map)."""
    c = np.arange(rows * cols) % cols
    return np.minimum(c * 3 // cols, 2).astype(np.int64)


def make_model(kind: str, frame: pd.DataFrame, seed: int = 0) -> TrainedModel:
    """kind: som_rect | som_hex | competitive | neural_gas | hebbian."""
    pre = Preprocessor([f for f in FEATURES if KINDS[f] == "numeric"], ["shift"]).fit(frame)
    X = pre.transform(frame)
    rng = np.random.default_rng(seed)
    if kind in ("som_rect", "som_hex"):
        rows, cols = (3, 4) if kind == "som_rect" else (4, 3)
        P = X[rng.choice(len(X), rows * cols, replace=False)] + rng.normal(0, 0.05, (rows * cols, X.shape[1]))
        record = PrototypeRecord("som", P, contiguous_groups(rows, cols), (rows, cols),
                                 "rectangular" if kind == "som_rect" else "hexagonal",
                                 extra={"training": "batch"})
    elif kind == "competitive":
        from sklearn.cluster import KMeans

        km = KMeans(n_clusters=5, n_init=10, random_state=seed).fit(X)
        record = PrototypeRecord("competitive", km.cluster_centers_)
    elif kind == "neural_gas":
        P = X[rng.choice(len(X), 6, replace=False)].copy()
        P[5] = P[2]                   # a duplicated prototype: exact ties, the lower unit must win
        record = PrototypeRecord("neural_gas", P)
    elif kind == "hebbian":
        from sklearn.decomposition import PCA

        record = SubspaceRecord("hebbian", PCA(n_components=2).fit(X).components_, rule="sanger")
    else:
        raise ValueError(kind)
    return TrainedModel(
        preprocessor=pre, weights=record, task=UNSUPERVISED, target="", features=FEATURES,
        kinds=KINDS, classes=None, settings={"units": record.prototypes.shape[0]}
        if isinstance(record, PrototypeRecord) else {"components": 2},
        metric="penalised_error", scores={"cv_mean": 0.3, "cv_std": 0.02, "holdout_score": 0.31},
        data_sha256="0" * 64, id_column="reading_id", target_scaler=None)


KINDS_OF_MODEL = ("som_rect", "som_hex", "competitive", "neural_gas", "hebbian")
