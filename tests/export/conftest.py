"""Small real models for the export tests, trained with labbench's own engine on scikit-learn's
bundled data sets (load_diabetes: regression, load_breast_cancer: binary, load_wine: multiclass).

Each frame gets a categorical column derived deterministically from a numeric one (to exercise
one-hot encoding), a few missing numbers and categories (imputation), and an id column.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sklearn import datasets

from labbench.data import Preprocessor, holdout_split
from labbench.model import TrainedModel
from labbench.nets import NetConfig, StackTrainer

CATEGORY = "band"


def _frame(loader, band_from: str, labels=("low", "mid", "high")) -> tuple[pd.DataFrame, np.ndarray]:
    bunch = loader()
    X = pd.DataFrame(bunch.data, columns=[str(c).replace(" ", "_") for c in bunch.feature_names])
    src = band_from.replace(" ", "_")
    cuts = np.quantile(X[src], [1 / 3, 2 / 3])
    band = np.where(X[src] < cuts[0], labels[0], np.where(X[src] < cuts[1], labels[1], labels[2]))
    X = X.drop(columns=[src])
    X.insert(2, CATEGORY, pd.Series(band, dtype=object))
    X.iloc[::7, 0] = np.nan           # a few missing numbers
    X.loc[X.index[5::11], CATEGORY] = None   # a few missing categories
    X.insert(0, "row_id", [f"r{i:04d}" for i in range(len(X))])
    return X, bunch.target


def _train(task: str, frame: pd.DataFrame, target: np.ndarray, classes, *, hidden=(12,),
           activation="tanh", epochs=25) -> dict:
    stratify = task != "regression"
    y = target.astype(np.float64) if task == "regression" else target.astype(np.int64)
    if task == "regression":
        y = (y - y.mean()) / y.std()     # keeps training quick and stable
    train, hold = holdout_split(y, 0.2, seed=3, stratify=stratify)
    features = [c for c in frame.columns if c != "row_id"]
    kinds = {c: ("categorical" if c == CATEGORY else "numeric") for c in features}
    pre = Preprocessor([c for c in features if kinds[c] == "numeric"], [CATEGORY]).fit(frame.iloc[train])
    X = pre.transform(frame.iloc[train])
    n_out = 1 if task != "multiclass" else len(classes)
    config = NetConfig(hidden=hidden, activation=activation, learning_rate=0.01, epochs=epochs, batch_size=32)
    trainer = StackTrainer(config, task, n_out, [X], [y[train]], seeds=[11])
    trainer.run()
    model = TrainedModel(
        preprocessor=pre, weights=trainer.weights(0), task=task, target="outcome",
        features=tuple(features), kinds=kinds, classes=classes,
        settings={"hidden": list(hidden), "activation": activation, "learning_rate": 0.01,
                  "epochs": epochs, "batch_size": 32, "optimizer": "adam"},
        metric={"regression": "rmse", "binary": "roc_auc", "multiclass": "balanced_accuracy"}[task],
        scores={"cv_mean": 0.5, "cv_std": 0.01, "fold_scores": [0.49, 0.51], "holdout_score": 0.5},
        data_sha256="0" * 64, id_column="row_id",
    )
    return {"model": model, "frame": frame, "train": train, "holdout": hold, "y": y}


@pytest.fixture(scope="session")
def trained() -> dict[str, dict]:
    reg_frame, reg_y = _frame(datasets.load_diabetes, "bmi")
    bin_frame, bin_y = _frame(datasets.load_breast_cancer, "mean radius")
    mc_frame, mc_y = _frame(datasets.load_wine, "alcohol")
    return {
        "regression": _train("regression", reg_frame, reg_y, None, hidden=(16, 8), activation="relu"),
        "binary": _train("binary", bin_frame, bin_y, ("malignant", "benign"), activation="sigmoid"),
        "multiclass": _train("multiclass", mc_frame, mc_y, ("class_0", "class_1", "class_2")),
    }


@pytest.fixture(params=["regression", "binary", "multiclass"])
def case(request, trained) -> dict:
    return trained[request.param]
