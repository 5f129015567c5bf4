"""Hidden-layer activations as a small table: forward in place, derivative applied in place.

Each entry works on preallocated buffers so the training loop allocates nothing per step:

* ``forward(z, scratch)`` turns the pre-activation ``z`` into the activation, in place; it may
  leave something in ``scratch`` (same shape and dtype as ``z``) for the backward pass.
* ``backward(a, delta, scratch)`` multiplies the back-propagated error ``delta`` by f'(z) in place,
  using the activation ``a`` (and what ``forward`` left in ``scratch``); ``scratch`` may be reused.
* ``apply(z)`` is the plain out-of-place version for prediction.

To add an activation write these three functions, add an ``Activation`` to ``ACTIVATIONS`` and its
name to ``config.ACTIVATION_NAMES``; the finite-difference gradient test picks it up by name.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np


@dataclass(frozen=True)
class Activation:
    name: str
    forward: Callable[[np.ndarray, np.ndarray], None]
    backward: Callable[[np.ndarray, np.ndarray, np.ndarray], None]
    apply: Callable[[np.ndarray], np.ndarray]


# relu: scratch keeps the 0/1 mask of positive inputs (a float mask multiplies faster than a bool one)
def _relu_forward(z: np.ndarray, scratch: np.ndarray) -> None:
    np.greater(z, 0, out=scratch)
    np.multiply(z, scratch, out=z)


def _relu_backward(a: np.ndarray, delta: np.ndarray, scratch: np.ndarray) -> None:
    np.multiply(delta, scratch, out=delta)


def _relu_apply(z: np.ndarray) -> np.ndarray:
    return np.maximum(z, 0)


# tanh: f'(z) = 1 - a²
def _tanh_forward(z: np.ndarray, scratch: np.ndarray) -> None:
    np.tanh(z, out=z)


def _tanh_backward(a: np.ndarray, delta: np.ndarray, scratch: np.ndarray) -> None:
    np.multiply(a, a, out=scratch)
    np.subtract(1, scratch, out=scratch)
    np.multiply(delta, scratch, out=delta)


def _tanh_apply(z: np.ndarray) -> np.ndarray:
    return np.tanh(z)


# sigmoid (logistic): a = 1 / (1 + exp(-z)), f'(z) = a (1 - a). exp may overflow to inf for very
# negative z, which gives the correct limit 0 (the caller silences the overflow warning).
def sigmoid_inplace(z: np.ndarray) -> None:
    np.negative(z, out=z)
    np.exp(z, out=z)
    np.add(z, 1, out=z)
    np.reciprocal(z, out=z)


def _sigmoid_forward(z: np.ndarray, scratch: np.ndarray) -> None:
    sigmoid_inplace(z)


def _sigmoid_backward(a: np.ndarray, delta: np.ndarray, scratch: np.ndarray) -> None:
    np.subtract(1, a, out=scratch)
    np.multiply(scratch, a, out=scratch)
    np.multiply(delta, scratch, out=delta)


def sigmoid(z: np.ndarray) -> np.ndarray:
    out = np.array(z, copy=True)
    with np.errstate(over="ignore"):
        sigmoid_inplace(out)
    return out


ACTIVATIONS: dict[str, Activation] = {
    "relu": Activation("relu", _relu_forward, _relu_backward, _relu_apply),
    "tanh": Activation("tanh", _tanh_forward, _tanh_backward, _tanh_apply),
    "sigmoid": Activation("sigmoid", _sigmoid_forward, _sigmoid_backward, sigmoid),
}
