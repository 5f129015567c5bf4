"""Weight initialisation: Glorot (Xavier) uniform and He normal.

* Glorot & Bengio (2010): W ~ U(-r, r), r = sqrt(6 / (fan_in + fan_out)).
* He et al. (2015): W ~ N(0, 2 / fan_in), made for relu layers.

``NetConfig(init="auto")`` picks per activation by measurement (``config.INIT_FOR_ACTIVATION``,
benchmarks/bench_init.py): Glorot for relu and tanh, He for sigmoid. On the reference workload
(10,000 × 20, 64 units, Adam, 30 epochs, 5 folds) He cost relu 1.3 accuracy points against
Glorot, while sigmoid learned faster from He's larger start.

Biases are drawn like the weights of their layer (scikit-learn's MLP does this for its Glorot
start); starting them at zero makes every relu unit's hyperplane pass through the origin, which on
the reference benchmark costs about a point of accuracy after 30 epochs.

Values are drawn in float64 from the member's own generator and then cast, so a float32 and a
float64 run from the same seed start from the same weights (up to rounding).
"""

from __future__ import annotations

import numpy as np

SCHEMES = ("glorot", "he")


def init_layer(rng: np.random.Generator, fan_in: int, fan_out: int, scheme: str) -> tuple[np.ndarray, np.ndarray]:
    """One layer's (W (fan_in, fan_out), b (fan_out,)) in float64."""
    if scheme == "glorot":
        bound = np.sqrt(6.0 / (fan_in + fan_out))
        weights = rng.uniform(-bound, bound, size=(fan_in, fan_out))
        bias = rng.uniform(-bound, bound, size=fan_out)
    elif scheme == "he":
        std = np.sqrt(2.0 / fan_in)
        weights = rng.normal(0.0, std, size=(fan_in, fan_out))
        bias = rng.normal(0.0, std, size=fan_out)
    else:  # NetConfig validates the name; this is a programming error
        raise ValueError(f"unknown initialisation {scheme!r}")
    return weights, bias


def init_network(rng: np.random.Generator, sizes: tuple[int, ...], scheme: str) -> list[tuple[np.ndarray, np.ndarray]]:
    """All layers of a network with layer widths ``sizes`` = (inputs, hidden..., outputs)."""
    return [init_layer(rng, fan_in, fan_out, scheme) for fan_in, fan_out in zip(sizes[:-1], sizes[1:])]
