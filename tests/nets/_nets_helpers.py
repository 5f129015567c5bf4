"""Small shared helpers for the engine tests."""

from __future__ import annotations

import numpy as np

from labbench.nets import NetConfig, NetWeights, StackTrainer


def random_weights(rng, sizes, activation, output, scale=0.5) -> NetWeights:
    """Random weights *and biases* (zero biases would put relu units exactly on their kink)."""
    layers = tuple((rng.normal(0, scale, (a, b)), rng.normal(0, scale, b)) for a, b in zip(sizes[:-1], sizes[1:]))
    return NetWeights(layers, activation, output)


def one_member(config: NetConfig, task, n_outputs, X, y, weights: NetWeights | None = None, seed=0) -> StackTrainer:
    trainer = StackTrainer(config, task, n_outputs, [X], [y], seeds=[seed])
    if weights is not None:
        trainer.set_weights(0, weights)
    return trainer


def task_data(task: str, rng, n=40, d=4, classes=3):
    X = rng.normal(size=(n, d))
    if task == "regression":
        return X, rng.normal(size=n), 1
    if task == "binary":
        return X, rng.integers(0, 2, n), 1
    return X, rng.integers(0, classes, n), classes
