"""Hidden-layer activations as a small table of in-place steps.

The training loop never calls numpy with fresh arrays: for each batch width it builds, once, a
*plan* — a list of ``(numpy function, arguments)`` pairs whose output arrays are preallocated —
and every step just runs it. So an activation describes itself as such steps:

* ``forward(z, scratch)``: steps that turn the pre-activation ``z`` into the activation in place;
  they may leave something in ``scratch`` (same shape and dtype as ``z``) for the backward pass;
* ``backward(a, delta, scratch)``: steps that multiply the back-propagated error ``delta`` by
  f'(z) in place, from the activation ``a`` (and what ``forward`` left in ``scratch``);
* ``derivative(a, scratch)``: steps that leave f'(z) itself in ``scratch``, from the activation
  ``a`` (and what ``forward`` left there); the trainer uses them where it can fold f'(z) into a
  matrix product instead of multiplying the error by it (one hidden layer, one output);
* ``apply(z)``: the plain out-of-place function, for prediction;
* ``infer(z)`` (optional): steps applying the activation in place when no backward pass follows
  (the validation pass); relu needs no mask there, so one call instead of two.

To add an activation write these four and add an ``Activation`` to ``ACTIVATIONS`` (the names
in ``config.ACTIVATION_NAMES``, the search's choices and the exporters follow the table; the
numpy script and ONNX need their own line, a test says which); the finite-difference gradient
test runs every name in the table.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable

import numpy as np

Steps = list[tuple[Callable[..., Any], tuple]]


@dataclass(frozen=True)
class Activation:
    name: str
    forward: Callable[[np.ndarray, np.ndarray], Steps]
    backward: Callable[[np.ndarray, np.ndarray, np.ndarray], Steps]
    apply: Callable[[np.ndarray], np.ndarray]
    derivative: Callable[[np.ndarray, np.ndarray], Steps]
    infer: Callable[[np.ndarray], Steps] | None = None

    def infer_steps(self, z: np.ndarray, scratch: np.ndarray) -> Steps:
        return self.infer(z) if self.infer is not None else self.forward(z, scratch)


def run(steps: Steps) -> None:
    for func, args in steps:
        func(*args)


# relu: scratch keeps the 0/1 mask of positive inputs (a float mask multiplies faster than a bool one)
def _relu_forward(z, scratch) -> Steps:
    return [(np.greater, (z, 0, scratch)), (np.multiply, (z, scratch, z))]


def _relu_backward(a, delta, scratch) -> Steps:
    return [(np.multiply, (delta, scratch, delta))]


def _relu_derivative(a, scratch) -> Steps:
    return []                                    # the forward pass left the mask there


def _relu_apply(z: np.ndarray) -> np.ndarray:
    return np.maximum(z, 0)


def _relu_in_place(z: np.ndarray) -> None:
    np.maximum(z, 0, out=z)


def _relu_infer(z) -> Steps:
    return [(_relu_in_place, (z,))]


# tanh: f'(z) = 1 - a²
def _tanh_forward(z, scratch) -> Steps:
    return [(np.tanh, (z, z))]


def _tanh_derivative(a, scratch) -> Steps:
    return [(np.multiply, (a, a, scratch)), (np.subtract, (1, scratch, scratch))]


def _tanh_backward(a, delta, scratch) -> Steps:
    return _tanh_derivative(a, scratch) + [(np.multiply, (delta, scratch, delta))]


# sigmoid (logistic): a = 1 / (1 + exp(-z)), f'(z) = a (1 - a). exp may overflow to inf for very
# negative z, which still gives the right limit 0 (the trainer silences the overflow warning).
def sigmoid_steps(z: np.ndarray) -> Steps:
    return [(np.negative, (z, z)), (np.exp, (z, z)), (np.add, (z, 1, z)), (np.reciprocal, (z, z))]


def _sigmoid_forward(z, scratch) -> Steps:
    return sigmoid_steps(z)


def _sigmoid_derivative(a, scratch) -> Steps:
    return [(np.subtract, (1, a, scratch)), (np.multiply, (scratch, a, scratch))]


def _sigmoid_backward(a, delta, scratch) -> Steps:
    return _sigmoid_derivative(a, scratch) + [(np.multiply, (delta, scratch, delta))]


def sigmoid(z: np.ndarray) -> np.ndarray:
    out = np.array(z, copy=True)
    with np.errstate(over="ignore"):
        run(sigmoid_steps(out))
    return out


ACTIVATIONS: dict[str, Activation] = {
    "relu": Activation("relu", _relu_forward, _relu_backward, _relu_apply, _relu_derivative,
                       _relu_infer),
    "tanh": Activation("tanh", _tanh_forward, _tanh_backward, np.tanh, _tanh_derivative),
    "sigmoid": Activation("sigmoid", _sigmoid_forward, _sigmoid_backward, sigmoid,
                          _sigmoid_derivative),
}
