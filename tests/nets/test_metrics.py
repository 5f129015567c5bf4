"""labbench.nets.metrics against sklearn.metrics on random inputs (source: scikit-learn)."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn import metrics as skm

from labbench.nets import metrics

# balanced accuracy with a predicted class that is absent from y_true: scikit-learn warns, both drop it
pytestmark = pytest.mark.filterwarnings("ignore:y_pred contains classes not in y_true")

SEEDS = range(25)


def _class_case(rng, task):
    n = int(rng.integers(5, 80))
    c = 2 if task == "binary" else int(rng.integers(3, 6))
    y = rng.integers(0, c, n)
    if task == "binary":
        p = rng.random(n)
        if rng.random() < 0.3:
            p = np.round(p, 1)          # ties
        return y, p, c, (p >= 0.5).astype(int)
    p = rng.dirichlet(np.ones(c), size=n)
    return y, p, c, np.argmax(p, axis=1)


@pytest.mark.parametrize("seed", SEEDS)
@pytest.mark.parametrize("task", ["binary", "multiclass"])
def test_classification_metrics_equal_sklearn(task, seed):
    rng = np.random.default_rng(seed)
    y, p, c, labels = _class_case(rng, task)
    assert metrics.compute("accuracy", y, p, task) == pytest.approx(skm.accuracy_score(y, labels), abs=1e-12)
    assert metrics.compute("balanced_accuracy", y, p, task, c) == pytest.approx(
        skm.balanced_accuracy_score(y, labels), abs=1e-12)
    assert metrics.compute("macro_f1", y, p, task, c) == pytest.approx(
        skm.f1_score(y, labels, average="macro", zero_division=0), abs=1e-12)
    proba = np.column_stack([1 - p, p]) if task == "binary" else p
    assert metrics.compute("log_loss", y, p, task, c) == pytest.approx(
        skm.log_loss(y, proba, labels=list(range(c))), rel=1e-10)
    if task == "binary" and 0 < y.sum() < len(y):
        assert metrics.compute("roc_auc", y, p, task) == pytest.approx(skm.roc_auc_score(y, p), abs=1e-12)


@pytest.mark.parametrize("seed", SEEDS)
def test_regression_metrics_equal_sklearn(seed):
    rng = np.random.default_rng(seed)
    n = int(rng.integers(2, 60))
    y = rng.normal(size=n) * rng.uniform(0.1, 100)
    pred = y + rng.normal(size=n) * rng.uniform(0.01, 10)
    assert metrics.compute("rmse", y, pred, "regression") == pytest.approx(np.sqrt(skm.mean_squared_error(y, pred)), rel=1e-12)
    assert metrics.compute("mae", y, pred, "regression") == pytest.approx(skm.mean_absolute_error(y, pred), rel=1e-12)
    assert metrics.compute("r2", y, pred, "regression") == pytest.approx(skm.r2_score(y, pred), rel=1e-10, abs=1e-12)


def test_r2_of_a_constant_target_follows_sklearn():
    y = np.full(5, 2.0)
    assert metrics.compute("r2", y, y, "regression") == skm.r2_score(y, y) == 1.0
    assert metrics.compute("r2", y, y + 1, "regression") == skm.r2_score(y, y + 1) == 0.0


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 1), st.sampled_from([0.0, 0.1, 0.25, 0.5, 0.5, 0.9, 1.0])), min_size=2, max_size=40))
def test_roc_auc_with_many_ties_equals_sklearn(pairs):
    y = np.array([a for a, _ in pairs])
    s = np.array([b for _, b in pairs])
    if y.min() == y.max():
        assert np.isnan(metrics.compute("roc_auc", y, s, "binary"))
    else:
        assert metrics.compute("roc_auc", y, s, "binary") == pytest.approx(skm.roc_auc_score(y, s), abs=1e-12)


def test_metric_table_directions_tasks_and_defaults():
    assert {m: i.direction for m, i in metrics.METRICS.items()} == {
        "accuracy": "maximize", "balanced_accuracy": "maximize", "log_loss": "minimize", "roc_auc": "maximize",
        "macro_f1": "maximize", "rmse": "minimize", "mae": "minimize", "r2": "maximize",
        # the map families' (MAPS.md contract): all minimised, for a table without a target
        "quantisation_error": "minimize", "topographic_error": "minimize",
        "reconstruction_error": "minimize", "penalised_error": "minimize"}
    assert [m for m, i in metrics.METRICS.items() if "unsupervised" in i.tasks] == [
        "quantisation_error", "topographic_error", "reconstruction_error", "penalised_error"]
    assert all(i.tasks == ("unsupervised",) for m, i in metrics.METRICS.items()
               if m in metrics.ENGINE_METRICS)
    assert metrics.default_metric("regression") == "rmse"
    assert metrics.default_metric("binary") == "roc_auc"
    assert metrics.default_metric("multiclass") == "balanced_accuracy"
    assert all(t in i.tasks for t in ("binary",) for i in metrics.METRICS.values() if i.name == "roc_auc")


def test_unknown_or_misapplied_metric_is_a_spec_error():
    from labbench.errors import SpecError

    with pytest.raises(SpecError, match="^metric: 'auc' is not known"):
        metrics.compute("auc", [0, 1], [0.2, 0.8], "binary")
    with pytest.raises(SpecError, match="does not apply to a multiclass task"):
        metrics.compute("roc_auc", [0, 1, 2], np.eye(3), "multiclass")


def test_the_map_metrics_are_not_computed_from_an_output():
    # the map engine computes them on each member's validation rows; compute() must say so
    for name in ("quantisation_error", "topographic_error", "reconstruction_error", "penalised_error"):
        with pytest.raises(ValueError, match="computed by the map engine"):
            metrics.compute(name, np.zeros(3), np.zeros(3), "unsupervised")
    with pytest.raises(ValueError, match="Family.default_metric"):
        metrics.default_metric("unsupervised")
