"""NetClassifier / NetRegressor in use, beyond scikit-learn's generic checks."""

from __future__ import annotations

import pickle
import subprocess
import sys

import numpy as np
import pytest
from sklearn.base import clone
from sklearn.datasets import load_iris, make_regression
from sklearn.model_selection import cross_val_score
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

import labbench
from labbench.nets import NetConfig, NetWeights
from labbench.nets.estimator import NetClassifier, NetRegressor


def test_top_level_package_exports_the_estimators():
    assert labbench.NetClassifier is NetClassifier and labbench.NetRegressor is NetRegressor


def test_params_match_netconfig_fields_plus_random_state():
    names = set(NetClassifier().get_params())
    assert names == set(NetConfig.__dataclass_fields__) | {"random_state", "validation_fraction"}
    assert NetRegressor().get_params()["hidden"] == NetConfig().hidden
    est = NetClassifier().set_params(epochs=3, hidden=(4,))
    assert est.epochs == 3 and clone(est).get_params() == est.get_params()
    assert repr(est) == "NetClassifier(epochs=3, hidden=(4,))"
    with pytest.raises(ValueError, match="Invalid parameter 'epoch'"):
        est.set_params(epoch=3)


def test_classifier_with_string_labels_in_a_pipeline_and_cross_validation():
    X, y = load_iris(return_X_y=True)
    names = np.array(["setosa", "versicolor", "virginica"])[y]
    model = make_pipeline(StandardScaler(), NetClassifier(hidden=(16,), learning_rate=0.01, batch_size=16,
                                                          epochs=40, random_state=0))
    scores = cross_val_score(model, X, names, cv=3)
    assert scores.mean() > 0.9       # iris, scaled MLP: usually ~0.95 (from memory)
    model.fit(X, names)
    net = model[-1]
    assert list(net.classes_) == ["setosa", "versicolor", "virginica"]
    assert set(model.predict(X)) <= set(names)
    proba = model.predict_proba(X)
    np.testing.assert_allclose(proba.sum(axis=1), 1, rtol=1e-6)
    assert len(net.loss_curve_) == net.n_iter_ == 40 and net.loss_curve_[-1] < net.loss_curve_[0]
    assert isinstance(net.weights_, NetWeights) and net.n_features_in_ == 4


def test_binary_classifier_proba_columns_follow_classes():
    rng = np.random.default_rng(0)
    X = rng.normal(size=(80, 3))
    y = np.where(X[:, 0] > 0, "yes", "no")
    clf = NetClassifier(hidden=(8,), learning_rate=0.03, batch_size=16, epochs=40, random_state=1).fit(X, y)
    proba = clf.predict_proba(X)
    assert proba.shape == (80, 2) and list(clf.classes_) == ["no", "yes"]
    np.testing.assert_array_equal(clf.predict(X), np.where(proba[:, 1] >= 0.5, "yes", "no"))
    assert clf.score(X, y) > 0.9


def test_regressor_fits_and_scores_r2():
    X, y = make_regression(n_samples=200, n_features=5, noise=1.0, random_state=0)
    reg = NetRegressor(hidden=(), learning_rate=0.05, batch_size=32, epochs=60, dtype="float64",
                       random_state=0).fit(X, y / y.std())
    assert reg.score(X, y / y.std()) > 0.99


def test_same_random_state_same_model_and_pickle_round_trip():
    X, y = load_iris(return_X_y=True)
    a = NetClassifier(epochs=3, random_state=5).fit(X, y)
    b = NetClassifier(epochs=3, random_state=5).fit(X, y)
    np.testing.assert_array_equal(a.predict_proba(X), b.predict_proba(X))
    c = pickle.loads(pickle.dumps(a))
    np.testing.assert_array_equal(a.predict_proba(X), c.predict_proba(X))


def test_patience_holds_back_rows_and_keeps_the_best_epoch():
    X, y = make_regression(n_samples=120, n_features=5, noise=30.0, random_state=1)
    y = y / y.std()
    reg = NetRegressor(hidden=(64,), learning_rate=0.01, batch_size=8, epochs=300, patience=5,
                       dtype="float64", random_state=0).fit(X, y)
    best = reg.best_epoch_
    # stopped `patience` epochs after its lowest held-back loss, before the maximum
    assert reg.n_iter_ == best + 5 < 300 and len(reg.validation_loss_) == reg.n_iter_
    assert int(np.argmin(reg.validation_loss_)) + 1 == best
    # same rows held back, trained exactly `best` epochs without early stopping: same weights
    # (so the kept weights are the best epoch's, not the last one's)
    fit, val = reg._split(y, "regression", 0)
    assert len(val) == 12 and not set(fit) & set(val)
    plain = NetRegressor(hidden=(64,), learning_rate=0.01, batch_size=8, epochs=best,
                         dtype="float64", random_state=0).fit(X[fit], y[fit])
    np.testing.assert_array_equal(reg.predict(X), plain.predict(X))
    # the classifier holds back rows of every class (scikit-learn stratifies its split too)
    Xi, yi = load_iris(return_X_y=True)
    _, val = NetClassifier(patience=3)._split(yi, "multiclass", 0)
    assert np.bincount(yi[val]).tolist() == [5, 5, 5]
    with pytest.raises(ValueError, match="validation_fraction"):
        NetClassifier(patience=3, validation_fraction=1.5).fit(Xi, yi)


def test_bad_setting_is_a_value_error_at_fit():
    X, y = load_iris(return_X_y=True)
    with pytest.raises(ValueError, match="activation: 'gelu' is not known"):
        NetClassifier(activation="gelu").fit(X, y)


def test_labbench_nets_imports_and_trains_without_sklearn_or_scipy():
    code = (
        "import sys, numpy as np\n"
        "import labbench, labbench.nets\n"
        "from labbench.nets.estimator import NetClassifier\n"
        "X = np.random.default_rng(0).normal(size=(30, 3)); y = (X[:, 0] > 0).astype(int)\n"
        "NetClassifier(epochs=2).fit(X, y).predict(X)\n"
        "bad = sorted(m for m in sys.modules if m.split('.')[0] in ('sklearn', 'scipy'))\n"
        "assert not bad, bad\n"
    )
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert result.returncode == 0, result.stderr


# ------------------------------------------------------------------ fit_folds: folds as one stack
def _assert_same_fit(stacked, alone, rtol):
    assert stacked.n_iter_ == alone.n_iter_
    np.testing.assert_allclose(stacked.loss_curve_, alone.loss_curve_, rtol=rtol)
    for (w, b), (w1, b1) in zip(stacked.weights_.layers, alone.weights_.layers):
        np.testing.assert_allclose(w, w1, rtol=rtol, atol=rtol * 1e-2)
        np.testing.assert_allclose(b, b1, rtol=rtol, atol=rtol * 1e-2)


@pytest.mark.parametrize("patience", [0, 3])
def test_fit_folds_gives_each_split_the_fit_a_loop_of_clones_gives(patience):
    # reference: scikit-learn's own cross-validation idiom, clone(estimator).fit per split
    from sklearn.model_selection import StratifiedKFold

    X, y = load_iris(return_X_y=True)
    X = StandardScaler().fit_transform(X)
    est = NetClassifier(hidden=(8,), learning_rate=0.02, batch_size=16, epochs=25, patience=patience,
                        dtype="float64", random_state=3)
    splits = list(StratifiedKFold(4, shuffle=True, random_state=0).split(X, y))
    stacked = labbench.fit_folds(est, X, y, splits)
    assert len(stacked) == 4 and all(m is not est for m in stacked) and not hasattr(est, "weights_")
    for model, (train, test) in zip(stacked, splits):
        alone = clone(est).fit(X[train], y[train])
        _assert_same_fit(model, alone, 1e-10)
        assert list(model.classes_) == [0, 1, 2]
        assert model.score(X[test], y[test]) == alone.score(X[test], y[test])
        if patience:
            assert model.best_epoch_ == alone.best_epoch_
            np.testing.assert_allclose(model.validation_loss_, alone.validation_loss_, rtol=1e-10)
    if patience:   # the members stopped at their own epochs, not all at the slowest one's
        assert len({m.n_iter_ for m in stacked}) > 1 or stacked[0].n_iter_ < est.epochs


def test_fit_folds_regression_and_a_split_missing_a_class():
    X, y = make_regression(n_samples=120, n_features=4, noise=1.0, random_state=0)
    y = (y - y.mean()) / y.std()
    rows = np.arange(120)
    splits = [(rows[rows % 3 != i], rows[rows % 3 == i]) for i in range(3)]
    est = NetRegressor(hidden=(6,), learning_rate=0.01, batch_size=32, epochs=8, dtype="float64",
                       random_state=5)
    for model, (train, _) in zip(labbench.fit_folds(est, X, y, splits), splits):
        _assert_same_fit(model, clone(est).fit(X[train], y[train]), 1e-10)

    labels = np.array([0, 1, 2] * 40)
    odd = (rows[labels != 2], rows[labels == 2])          # this split's training rows lack class 2
    est = NetClassifier(hidden=(4,), epochs=3, dtype="float64", random_state=1)
    whole = (rows[rows % 4 != 0], rows[rows % 4 == 0])
    models = labbench.fit_folds(est, X, labels, [whole, odd])
    assert list(models[0].classes_) == [0, 1, 2] and list(models[1].classes_) == [0, 1]
    _assert_same_fit(models[1], clone(est).fit(X[odd[0]], labels[odd[0]]), 1e-10)
    with pytest.raises(ValueError, match="at least one split"):
        labbench.fit_folds(est, X, labels, [])
