"""A toy model family: one constant prediction learned from the training rows.

This one module is all a new family needs (plus one registration line:
``labbench.families.register(FAMILY)`` in a process, or ``LABBENCH_FAMILIES=toy_constant:FAMILY``
for processes labbench starts). Its one setting, ``shrink`` (0 to 1), moves the constant from the
training rows' average toward a neutral value: a regression value from the mean toward the
median, class shares toward equal shares. With ``shrink = 0`` it is scikit-learn's
``DummyRegressor(strategy="mean")`` / ``DummyClassifier(strategy="prior")``.
"""

from __future__ import annotations

import numpy as np

from labbench.families.base import Family
from labbench.families.settings import SettingInfo
from labbench.nets.config import EpochScores
from labbench.nets.metrics import compute


class ConstantRecord:
    family = "constant"

    def __init__(self, values, task: str):
        self.values = np.asarray(values, dtype=np.float64).reshape(-1)
        self.task = task

    def forward(self, X):
        n = np.asarray(X).shape[0]
        if self.task == "multiclass":
            return np.tile(self.values, (n, 1))
        return np.full(n, self.values[0])


def constant_of(y, task: str, n_outputs: int, shrink: float) -> np.ndarray:
    if task == "regression":
        return np.array([(1 - shrink) * np.mean(y) + shrink * np.median(y)])
    k = max(n_outputs, 2)
    shares = np.bincount(np.asarray(y, dtype=np.int64), minlength=k) / len(y)
    shares = (1 - shrink) * shares + shrink / k
    return shares[1:] if task == "binary" else shares


def _loss(task: str, y, out) -> float:
    if task == "regression":
        return float(np.mean((np.asarray(y) - out) ** 2))
    p = np.column_stack([1 - out, out]) if out.ndim == 1 else out
    return float(-np.mean(np.log(np.clip(p[np.arange(len(y)), np.asarray(y, int)], 1e-15, 1))))


class ConstantTraining:
    def __init__(self, shrink, task, n_outputs, X_train, y_train, X_val, y_val, metric,
                 target_inverse):
        self.shrink, self.task, self.n_outputs = shrink, task, n_outputs
        self.X_train, self.y_train, self.X_val, self.y_val = X_train, y_train, X_val, y_val
        self.metric, self.target_inverse = metric, target_inverse
        self.best_epoch = np.ones(len(y_train), dtype=np.int64)
        self.best_val_metric = None
        self.records = []

    def run(self, on_epoch=None):
        self.records = [ConstantRecord(constant_of(y, self.task, self.n_outputs, self.shrink), self.task)
                        for y in self.y_train]
        train = np.array([_loss(self.task, y, r.forward(X))
                          for r, X, y in zip(self.records, self.X_train, self.y_train)])
        val_loss = val_metric = None
        if self.X_val is not None:
            val_loss, val_metric = [], []
            for i, (r, X, y) in enumerate(zip(self.records, self.X_val, self.y_val)):
                out = r.forward(X)
                val_loss.append(_loss(self.task, y, out))
                if self.target_inverse is not None:      # scores in the target's own units
                    out, y = self.target_inverse[i](out), self.target_inverse[i](y)
                val_metric.append(compute(self.metric, y, out, self.task, n_classes=self.n_outputs
                                          if self.task == "multiclass" else 2))
            val_loss, val_metric = np.array(val_loss), np.array(val_metric)
            self.best_val_metric = val_metric
        scores = EpochScores(1, train, val_loss, val_metric)
        if on_epoch is not None:
            on_epoch(scores)
        return [scores]

    def record(self, member: int):
        return self.records[member]


class ConstantFamily(Family):
    name = "constant"
    label = "Constant prediction"
    settings = {"shrink": SettingInfo(
        "shrink", "Shrink", "float", 0.0, "How far the constant moves from the training average "
        "toward a neutral value (regression: the median; classes: equal shares).",
        low=0.0, high=1.0)}
    default_space = {"shrink": {"low": 0.0, "high": 1.0}}
    numpy_source = '''
def constant_forward(model, X):
    values = model["constant_values"]
    if model["meta"]["task"] == "multiclass":
        return np.tile(values, (X.shape[0], 1))
    return np.full(X.shape[0], values[0])


FORWARD["constant"] = constant_forward
'''

    def stack(self, settings, task, n_outputs, X_train, y_train, X_val=None, y_val=None, *,
              seeds, metric=None, target_inverse=None, groups=None, dtype="float32", epochs=None):
        return ConstantTraining(float(settings["shrink"]), task, n_outputs, X_train, y_train,
                                X_val, y_val, metric, target_inverse)

    def bundle_entries(self, record):
        return {"constant_values": record.values}, {"constant": {"outputs": len(record.values)}}

    def from_bundle(self, arrays, meta, name, n_inputs, n_outputs):
        from labbench.errors import BundleError

        values = arrays.get("constant_values")
        if values is None or values.dtype != np.float64 or values.shape != (n_outputs,):
            raise BundleError(f"{name}: entry 'constant_values' is missing or not {n_outputs} "
                              "float64 values; save the model again")
        return ConstantRecord(values, meta["task"])

    def onnx_body(self, record, h, n_inputs, node, const, net_type, task):
        # a constant is a Gemm with zero weights: inputs [N, n_inputs] -> [N, outputs]
        zeros = const("constant_W", np.zeros((n_inputs, len(record.values))))
        return node("Gemm", [h, zeros, const("constant_b", record.values)], "_lb.constant")


FAMILY = ConstantFamily()
