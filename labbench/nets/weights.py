"""``NetWeights``: one trained network as plain arrays (what bundles and the ONNX export store)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from labbench.nets.activations import ACTIVATIONS
from labbench.nets.losses import OUTPUTS


@dataclass(frozen=True, eq=False)
class NetWeights:
    layers: tuple[tuple[np.ndarray, np.ndarray], ...]   # (W (fan_in, fan_out), b (fan_out,)) each
    activation: str                                     # hidden activation
    output: str                                         # "identity" | "sigmoid" | "softmax"

    @property
    def n_inputs(self) -> int:
        return int(self.layers[0][0].shape[0])

    @property
    def n_outputs(self) -> int:
        return int(self.layers[-1][0].shape[1])

    @property
    def hidden(self) -> tuple[int, ...]:
        return tuple(int(w.shape[1]) for w, _ in self.layers[:-1])

    @property
    def dtype(self) -> np.dtype:
        return self.layers[0][0].dtype

    def astype(self, dtype) -> "NetWeights":
        """A copy with every array in ``dtype`` (e.g. float64 for exactly repeatable predictions)."""
        layers = tuple((w.astype(dtype), b.astype(dtype)) for w, b in self.layers)
        return NetWeights(layers, self.activation, self.output)

    def forward(self, X) -> np.ndarray:
        """Regression values (n,), binary P(class 1) (n,), or multiclass probabilities (n, C)."""
        a = np.asarray(X, dtype=self.dtype)
        if a.ndim != 2 or a.shape[1] != self.n_inputs:
            raise ValueError(f"expected inputs of shape (n, {self.n_inputs}), got {a.shape}")
        act = ACTIVATIONS[self.activation].apply
        with np.errstate(over="ignore", under="ignore"):
            for weights, bias in self.layers[:-1]:
                a = act(a @ weights + bias)
            weights, bias = self.layers[-1]
            out = OUTPUTS[self.output].apply(a @ weights + bias)
        if self.output != "softmax":
            return out[:, 0]
        return out
