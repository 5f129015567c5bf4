"""A trained model ready to use: fitted preprocessing + one family's record + what it was trained for.

This is what the search's winner refit produces, what the model bundle stores and loads, what
``labbench predict`` and the ONNX export consume. It holds plain objects only (no Optuna, no Qt).

``family`` names the model family (``labbench.families``) and ``weights`` holds that family's
record: an object with ``forward(X)`` giving the outputs below from the preprocessed inputs (the
network family's record is ``labbench.nets.NetWeights``). Exporters dispatch on ``family``.

A model of a map or group family (``labbench.maps``) has task ``"unsupervised"``, no target
(``target = ""``), no classes and no target scaler. Its ``output`` is the record's forward (the
distances of every row to every unit, or the Hebbian projection) and ``predict`` a table, one row
per input row: ``unit``, ``group`` (both int64, numbered from 0) and ``distance`` (to the unit's
prototype, in the scaled input space) for the prototype families, ``component_1`` ..
``component_c`` for the Hebbian features.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np
import pandas as pd

from labbench.errors import BundleError
from labbench.families.maps_export import output_table
from labbench.nets.metrics import UNSUPERVISED   # the task of a model trained without a target


@dataclass(frozen=True)
class TrainedModel:
    preprocessor: Any                 # labbench.data.Preprocessor (fitted)
    weights: Any                      # the family's record (network: labbench.nets.NetWeights)
    task: str                         # "regression" | "binary" | "multiclass" | "unsupervised"
    target: str                       # "" for an unsupervised model
    features: tuple[str, ...]         # input columns in training order
    kinds: Mapping[str, str]          # feature -> "numeric" | "categorical"
    classes: tuple[str, ...] | None   # class labels (classification), index = output column
    settings: Mapping[str, Any] = field(default_factory=dict)   # the winning settings
    metric: str = ""
    scores: Mapping[str, Any] = field(default_factory=dict)     # cv_mean, cv_std, holdout_score ...
    data_sha256: str = ""
    id_column: str | None = None
    # regression: labbench.data.TargetScaler mapping the network's output to the target's own
    # units (fitted on the training rows); None = the network outputs target units directly
    target_scaler: Any = None
    # the model family; None: the record's own ``family`` attribute, else "network"
    family: str | None = None

    def __post_init__(self) -> None:
        if self.family is None:
            object.__setattr__(self, "family", str(getattr(self.weights, "family", "network")))

    @property
    def record(self) -> Any:
        """The family's trained-model record (the same object as ``weights``)."""
        return self.weights

    def _inputs(self, frame: pd.DataFrame, source: str = "the data") -> np.ndarray:
        missing = [c for c in self.features if c not in frame.columns]
        if missing:
            raise BundleError(
                f"{source}: missing column(s) {', '.join(missing)}; the model needs "
                f"{', '.join(self.features)}"
            )
        return self.preprocessor.transform(frame.loc[:, list(self.features)])

    def output(self, frame: pd.DataFrame, source: str = "the data") -> np.ndarray:
        """Regression values (n,) in the target's own units, P(class 1) (n,), class
        probabilities (n, C); unsupervised: the record's forward (distances (n, k) or
        components (n, c))."""
        out = np.asarray(self.weights.forward(self._inputs(frame, source)))
        if self.task == "regression" and self.target_scaler is not None:
            out = self.target_scaler.inverse(out)
        return out

    def predict(self, frame: pd.DataFrame, source: str = "the data") -> np.ndarray | pd.DataFrame:
        """Regression values, class labels; unsupervised: a DataFrame (the input's index) with
        unit, group, distance or component_1..c (see the module docstring)."""
        if self.task == UNSUPERVISED:
            table = output_table(self.weights, self._inputs(frame, source))
            return pd.DataFrame(table, index=frame.index)
        out = self.output(frame, source)
        if self.task == "regression":
            return out.astype(np.float64)
        labels = np.asarray(self.classes, dtype=object)
        if self.task == "binary":
            return labels[(out >= 0.5).astype(int)]
        return labels[np.argmax(out, axis=1)]

    def predict_proba(self, frame: pd.DataFrame, source: str = "the data") -> np.ndarray:
        if self.task == "regression":
            raise BundleError("predict_proba: a regression model gives values, not class probabilities")
        if self.task == UNSUPERVISED:
            raise BundleError("predict_proba: a model without a target gives units and groups (or "
                              "components), not class probabilities; use predict")
        out = self.output(frame, source)
        if self.task == "binary":
            return np.column_stack([1.0 - out, out])
        return out
