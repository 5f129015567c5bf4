"""Cross-validated accuracy on scikit-learn's bundled data sets (iris, wine, breast cancer).

One fixed, reasonable configuration for all three; inputs standardised on each fold's training
rows (labbench.data.Preprocessor) and 5 stratified folds (labbench.data.make_folds), the 5 fold
models trained as one stack. Thresholds: what a scaled MLP usually reaches on these sets,
>= 0.93 / 0.95 / 0.95 (from memory).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer, load_iris, load_wine

from labbench.data import Preprocessor, make_folds
from labbench.nets import NetConfig, StackTrainer, metrics

CONFIG = NetConfig(hidden=(32,), activation="relu", optimizer="adam", learning_rate=0.01,
                   batch_size=16, epochs=60, l2=1e-3)


@pytest.mark.parametrize("loader, floor", [(load_iris, 0.93), (load_wine, 0.95), (load_breast_cancer, 0.95)],
                         ids=["iris", "wine", "breast_cancer"])
def test_cv_accuracy_reaches_what_a_scaled_mlp_usually_does(loader, floor):
    bunch = loader()
    frame = pd.DataFrame(bunch.data, columns=[str(c) for c in bunch.feature_names])
    y = bunch.target.astype(np.int64)
    n_classes = int(y.max()) + 1
    task, k = ("binary", 1) if n_classes == 2 else ("multiclass", n_classes)
    folds = make_folds(y, 5, seed=0, stratify=True)
    Xt, yt, Xv, yv = [], [], [], []
    for train, val in folds:
        prep = Preprocessor(numeric=list(frame.columns), categorical=[], scaling="standard")
        Xt.append(prep.fit_transform(frame.iloc[train]))
        Xv.append(prep.transform(frame.iloc[val]))
        yt.append(y[train])
        yv.append(y[val])
    trainer = StackTrainer(CONFIG, task, k, Xt, yt, Xv, yv, seeds=list(range(5)), metric="accuracy")
    history = trainer.run()
    scores = [metrics.compute("accuracy", yv[i], trainer.predict_output(i, Xv[i]), task) for i in range(5)]
    np.testing.assert_allclose(scores, history[-1].val_metric)
    assert np.mean(scores) >= floor, (loader.__name__, scores)
