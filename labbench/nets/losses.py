"""Output layers and their losses, as a small table (one entry per task).

Each output pairs an activation with its canonical loss, so the error at the output's
pre-activation is simply ``output - target`` (identity + squared error, sigmoid + log loss,
softmax + cross-entropy). Loss conventions follow scikit-learn's MLP (its ``_base.py``): squared
error is halved, probabilities are clipped to [eps, 1 - eps] of the working dtype.

An ``Output`` offers:

* ``forward(z, scratch)``   steps (see ``activations.py``) applying the output activation in place
  to the (m, b, k) pre-activations of a batch;
* ``row_terms(delta, q, scratch)``  steps writing a per-row quantity to ``q`` (m, b) during
  training, from which ``epoch_loss(q_rows, dtype)`` gives the mean loss of those rows; this keeps
  the per-step cost of the training loss to one or two numpy calls;
* ``apply(z)``  out of place, for prediction;
* ``loss(out, target)``  the mean loss of the rows of one member, (n, k) arrays.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from labbench.nets.activations import Steps, sigmoid, sigmoid_steps

TASKS = ("regression", "binary", "multiclass")


@dataclass(frozen=True)
class Output:
    name: str                      # "identity" | "sigmoid" | "softmax"
    loss_name: str                 # for messages and docs
    forward: Callable[[np.ndarray, np.ndarray], Steps]
    row_terms: Callable[[np.ndarray, np.ndarray, np.ndarray], Steps]
    epoch_loss: Callable[[np.ndarray, np.dtype], float]
    apply: Callable[[np.ndarray], np.ndarray]
    loss: Callable[[np.ndarray, np.ndarray], float]


def _eps(dtype: np.dtype) -> float:
    return float(np.finfo(dtype).eps)


# identity + squared error --------------------------------------------------------------------
def _identity_forward(z: np.ndarray, scratch: np.ndarray) -> Steps:
    return []


def _identity_terms(delta: np.ndarray, q: np.ndarray, scratch: np.ndarray) -> Steps:
    return [(np.square, (delta[..., 0], q))]


def _identity_epoch(q: np.ndarray, dtype: np.dtype) -> float:
    return 0.5 * float(np.mean(q, dtype=np.float64))


def _squared_loss(out: np.ndarray, target: np.ndarray) -> float:
    diff = np.asarray(out, dtype=np.float64) - target
    return 0.5 * float(np.mean(diff * diff))


# sigmoid + binary log loss: |p - y| = 1 - P(true class) -------------------------------------
def _sigmoid_forward(z: np.ndarray, scratch: np.ndarray) -> Steps:
    return sigmoid_steps(z)


def _sigmoid_terms(delta: np.ndarray, q: np.ndarray, scratch: np.ndarray) -> Steps:
    return [(np.abs, (delta[..., 0], q))]


def _log_true(p_true: np.ndarray, dtype: np.dtype) -> float:
    eps = _eps(dtype)
    p = np.clip(np.asarray(p_true, dtype=np.float64), eps, 1 - eps)
    return -float(np.mean(np.log(p)))


def _sigmoid_epoch(q: np.ndarray, dtype: np.dtype) -> float:
    return _log_true(1.0 - np.asarray(q, dtype=np.float64), dtype)


def _binary_log_loss(out: np.ndarray, target: np.ndarray) -> float:
    p = np.asarray(out)
    eps = _eps(p.dtype if p.dtype.kind == "f" else np.dtype(np.float64))
    p = np.clip(p.astype(np.float64), eps, 1 - eps)
    t = np.asarray(target, dtype=np.float64)
    return -float(np.mean(t * np.log(p) + (1 - t) * np.log(1 - p)))


# softmax + cross-entropy: sum |P - Y| over classes = 2 (1 - P(true class)) -------------------
def _softmax_forward(z: np.ndarray, scratch: np.ndarray) -> Steps:
    # scratch: (m, b, 1). Subtract the row maximum (column by column: faster than a reduction
    # over a short last axis), exponentiate, divide by the row sum (a matmul with ones).
    k = z.shape[-1]
    steps: Steps = []
    if k <= 8:
        mx = scratch[..., 0]
        steps.append((_max_into, (z[..., 0], z[..., 1], mx)))
        steps += [(_max_into, (mx, z[..., c], mx)) for c in range(2, k)]
    else:
        steps.append((_row_max, (z, scratch)))
    return steps + [(np.subtract, (z, scratch, z)), (np.exp, (z, z)),
                    (np.matmul, (z, _ones_column(k, z.dtype), scratch)), (np.divide, (z, scratch, z))]


def _max_into(a: np.ndarray, b: np.ndarray, out: np.ndarray) -> None:
    np.maximum(a, b, out=out)


def _row_max(z: np.ndarray, out: np.ndarray) -> None:
    np.max(z, axis=-1, keepdims=True, out=out)


_ONES: dict[tuple[int, str], np.ndarray] = {}


def _ones_column(k: int, dtype: np.dtype) -> np.ndarray:
    key = (k, np.dtype(dtype).str)
    if key not in _ONES:
        _ONES[key] = np.ones((k, 1), dtype=dtype)
    return _ONES[key]


def _softmax_terms(delta: np.ndarray, q: np.ndarray, scratch: np.ndarray) -> Steps:
    # scratch: (m, b, k); q gets sum_c |P - Y| (halved when the epoch's loss is formed)
    return [(np.abs, (delta, scratch)),
            (np.matmul, (scratch, _ones_column(delta.shape[-1], delta.dtype), q[..., None]))]


def _softmax_epoch(q: np.ndarray, dtype: np.dtype) -> float:
    return _log_true(1.0 - 0.5 * np.asarray(q, dtype=np.float64), dtype)


def softmax(z: np.ndarray) -> np.ndarray:
    z = np.asarray(z)
    e = np.exp(z - z.max(axis=-1, keepdims=True))
    return e / e.sum(axis=-1, keepdims=True)


def _cross_entropy(out: np.ndarray, target: np.ndarray) -> float:
    p = np.asarray(out)
    eps = _eps(p.dtype if p.dtype.kind == "f" else np.dtype(np.float64))
    p = np.clip(p.astype(np.float64), eps, 1 - eps)
    t = np.asarray(target, dtype=np.float64)
    return -float(np.mean(np.sum(t * np.log(p), axis=-1)))


OUTPUTS: dict[str, Output] = {
    "identity": Output("identity", "squared error (halved)", _identity_forward, _identity_terms,
                       _identity_epoch, lambda z: np.array(z, copy=True), _squared_loss),
    "sigmoid": Output("sigmoid", "log loss", _sigmoid_forward, _sigmoid_terms, _sigmoid_epoch,
                      sigmoid, _binary_log_loss),
    "softmax": Output("softmax", "cross-entropy", _softmax_forward, _softmax_terms, _softmax_epoch,
                      softmax, _cross_entropy),
}

OUTPUT_FOR_TASK = {"regression": "identity", "binary": "sigmoid", "multiclass": "softmax"}


def output_for(task: str) -> Output:
    return OUTPUTS[OUTPUT_FOR_TASK[task]]


def encode_targets(task: str, y: np.ndarray, n_outputs: int, dtype: np.dtype) -> np.ndarray:
    """Targets as the (n, k) array the output is compared with: values, 0/1, or one-hot rows."""
    y = np.asarray(y)
    if task == "multiclass":
        codes = y.astype(np.int64).ravel()
        target = np.zeros((codes.shape[0], n_outputs), dtype=dtype)
        target[np.arange(codes.shape[0]), codes] = 1
        return target
    return y.astype(dtype).reshape(-1, 1)
