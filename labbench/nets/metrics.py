"""Scores of a network's output against the truth, in numpy only (no scikit-learn at run time).

``compute(name, y_true, output, task, n_classes)`` takes the network output as
``StackTrainer.predict_output`` gives it: regression values (n,), binary P(class 1) (n,), or
multiclass probabilities (n, C); ``y_true`` holds values or integer class codes 0..C-1.
Definitions follow scikit-learn's ``sklearn.metrics`` (tests compare the two on random inputs):
binary labels are P >= 0.5, multiclass labels the arg-max; balanced accuracy averages recall over
the classes present in ``y_true``; macro F1 averages over the classes present in the truth or the
prediction; log loss clips probabilities to [eps, 1 - eps] of their dtype; R² is 1.0 for a
perfect fit of a constant target and 0.0 for an imperfect one. ROC AUC with one class present is
undefined and returns NaN.

The map and group families (a table without a target: task ``UNSUPERVISED``) are scored by
their own engine on each member's validation rows (``labbench.maps``); their four metrics are
registered here so that the spec, the search and the report know their names, labels and
directions, but ``compute`` does not score them.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from labbench.errors import SpecError


@dataclass(frozen=True)
class MetricInfo:
    name: str
    direction: str                 # "maximize" | "minimize"
    tasks: tuple[str, ...]         # tasks it applies to
    label: str                     # for screens and reports


_CLASS = ("binary", "multiclass")
#: the task of a table without a target (the map and group families)
UNSUPERVISED = "unsupervised"
_MAPS = (UNSUPERVISED,)
METRICS: dict[str, MetricInfo] = {
    "accuracy": MetricInfo("accuracy", "maximize", _CLASS, "accuracy"),
    "balanced_accuracy": MetricInfo("balanced_accuracy", "maximize", _CLASS, "balanced accuracy"),
    "log_loss": MetricInfo("log_loss", "minimize", _CLASS, "log loss"),
    "roc_auc": MetricInfo("roc_auc", "maximize", ("binary",), "ROC AUC"),
    "macro_f1": MetricInfo("macro_f1", "maximize", _CLASS, "macro F1"),
    "rmse": MetricInfo("rmse", "minimize", ("regression",), "RMSE"),
    "mae": MetricInfo("mae", "minimize", ("regression",), "MAE"),
    "r2": MetricInfo("r2", "maximize", ("regression",), "R²"),
    # the map and group families: computed by their engine (labbench.maps), never by compute()
    "quantisation_error": MetricInfo("quantisation_error", "minimize", _MAPS, "quantisation error"),
    "topographic_error": MetricInfo("topographic_error", "minimize", _MAPS, "topographic error"),
    "reconstruction_error": MetricInfo("reconstruction_error", "minimize", _MAPS,
                                       "reconstruction error"),
    "penalised_error": MetricInfo("penalised_error", "minimize", _MAPS, "penalised error"),
}
#: the metrics the map engine computes itself (``compute`` refuses them)
ENGINE_METRICS = tuple(n for n, info in METRICS.items() if info.tasks == _MAPS)

_DEFAULTS = {"regression": "rmse", "binary": "roc_auc", "multiclass": "balanced_accuracy"}


def default_metric(task: str) -> str:
    """The default metric of a supervised task; a table without a target is scored by its
    family's own default (``Family.default_metric``)."""
    if task not in _DEFAULTS:
        raise ValueError(f"no default metric for the task {task!r} here; a family without a "
                         "target names its own (Family.default_metric)")
    return _DEFAULTS[task]


def check_metric(name: str, task: str) -> MetricInfo:
    """The MetricInfo, or a SpecError naming the metric and what is allowed for the task."""
    info = METRICS.get(name)
    allowed = [m for m, i in METRICS.items() if task in i.tasks]
    if info is None:
        raise SpecError(f"metric: {name!r} is not known; use one of {', '.join(allowed)}")
    if task not in info.tasks:
        raise SpecError(f"metric: {name!r} does not apply to a {task} task; use one of {', '.join(allowed)}")
    return info


def labels_from_output(output: np.ndarray, task: str) -> np.ndarray:
    output = np.asarray(output)
    if task == "binary":
        return (output >= 0.5).astype(np.int64)
    return np.argmax(output, axis=1).astype(np.int64)


def _confusion(y_true: np.ndarray, y_pred: np.ndarray, n: int) -> np.ndarray:
    return np.bincount(y_true * n + y_pred, minlength=n * n).reshape(n, n)


def _n_classes(y_true, y_pred, n_classes) -> int:
    top = max(int(y_true.max(initial=0)), int(y_pred.max(initial=0))) + 1
    return max(top, int(n_classes or 0))


def accuracy(y_true, y_pred) -> float:
    return float(np.mean(y_true == y_pred))


def balanced_accuracy(y_true, y_pred, n_classes=None) -> float:
    n = _n_classes(y_true, y_pred, n_classes)
    cm = _confusion(y_true, y_pred, n)
    support = cm.sum(axis=1)
    present = support > 0
    return float(np.mean(np.diag(cm)[present] / support[present]))


def macro_f1(y_true, y_pred, n_classes=None) -> float:
    n = _n_classes(y_true, y_pred, n_classes)
    cm = _confusion(y_true, y_pred, n)
    tp = np.diag(cm).astype(np.float64)
    denominator = cm.sum(axis=0) + cm.sum(axis=1)     # 2 tp + fp + fn
    seen = denominator > 0
    return float(np.mean(2 * tp[seen] / denominator[seen]))


def roc_auc(y_true, score) -> float:
    """Mann–Whitney form: mean rank of the positives, ties sharing their average rank."""
    y_true = np.asarray(y_true).astype(bool)
    n_pos = int(y_true.sum())
    n_neg = y_true.shape[0] - n_pos
    if n_pos == 0 or n_neg == 0:
        return float("nan")
    score = np.asarray(score, dtype=np.float64)
    order = np.argsort(score, kind="mergesort")
    ordered = score[order]
    # average 1-based rank for each run of equal scores
    starts = np.flatnonzero(np.r_[True, ordered[1:] != ordered[:-1]])
    ends = np.r_[starts[1:], ordered.shape[0]]
    run_rank = (starts + ends + 1) / 2.0
    ranks = np.empty_like(score)
    ranks[order] = np.repeat(run_rank, ends - starts)
    return float((ranks[y_true].sum() - n_pos * (n_pos + 1) / 2.0) / (n_pos * n_neg))


def log_loss(y_true, output, task, n_classes=None) -> float:
    p = np.asarray(output)
    if p.dtype.kind != "f":
        p = p.astype(np.float64)
    eps = float(np.finfo(p.dtype).eps)
    if task == "binary":
        p = np.column_stack([1 - p, p])
    p = np.clip(p, eps, 1 - eps).astype(np.float64)
    rows = np.arange(y_true.shape[0])
    return float(-np.mean(np.log(p[rows, y_true])))


def rmse(y_true, y_pred) -> float:
    return float(np.sqrt(np.mean((y_true - y_pred) ** 2)))


def mae(y_true, y_pred) -> float:
    return float(np.mean(np.abs(y_true - y_pred)))


def r2(y_true, y_pred) -> float:
    residual = float(np.sum((y_true - y_pred) ** 2))
    total = float(np.sum((y_true - np.mean(y_true)) ** 2))
    if total == 0.0:
        return 1.0 if residual == 0.0 else 0.0
    return 1.0 - residual / total


def compute(name: str, y_true, output, task: str, n_classes: int | None = None) -> float:
    """The metric ``name`` of ``output`` (network output format) against ``y_true``."""
    check_metric(name, task)
    if name in ENGINE_METRICS:
        raise ValueError(f"the metric {name!r} is computed by the map engine on each member's "
                         "validation rows (labbench.maps), not from an output and a target; "
                         "read it from the Training (best_val_metric, measures())")
    if task == "regression":
        y_true = np.asarray(y_true, dtype=np.float64).ravel()
        y_pred = np.asarray(output, dtype=np.float64).ravel()
        return {"rmse": rmse, "mae": mae, "r2": r2}[name](y_true, y_pred)
    y_true = np.asarray(y_true).astype(np.int64).ravel()
    if name == "log_loss":
        return log_loss(y_true, output, task, n_classes)
    if name == "roc_auc":
        return roc_auc(y_true, np.asarray(output).ravel())
    y_pred = labels_from_output(output, task)
    if name == "accuracy":
        return accuracy(y_true, y_pred)
    if name == "balanced_accuracy":
        return balanced_accuracy(y_true, y_pred, n_classes)
    return macro_f1(y_true, y_pred, n_classes)
