"""Back-propagated gradients against central finite differences (common practice), float64.

Every hidden activation × every output (task) × with and without the L2 penalty, for a network
with two hidden layers, with one hidden layer (with one output the trainer folds f'(z) into the
first layer's gradient product: a path of its own) and for the 0-hidden-layer baseline. The
objective is the engine's own full-batch objective (mean data loss + l2 / (2 n) Σ‖W‖²,
scikit-learn's convention).
"""

from __future__ import annotations

import zlib

import numpy as np
import pytest

from labbench.nets import NetConfig, NetWeights
from labbench.nets.activations import ACTIVATIONS
from labbench.nets.losses import OUTPUT_FOR_TASK, TASKS

from _nets_helpers import one_member, random_weights, task_data

H = 1e-6


def _objective(trainer, weights):
    trainer.set_weights(0, weights)
    return trainer.loss_and_gradient()[0][0]


def _numeric_gradient(trainer, weights):
    grads = []
    for li, (W, b) in enumerate(weights.layers):
        pair = []
        for which, array in enumerate((W, b)):
            g = np.zeros_like(array)
            for idx in np.ndindex(array.shape):
                values = []
                for sign in (1.0, -1.0):
                    layers = [[w.copy(), c.copy()] for w, c in weights.layers]
                    layers[li][which][idx] += sign * H
                    values.append(_objective(trainer, NetWeights(tuple(map(tuple, layers)), weights.activation, weights.output)))
                g[idx] = (values[0] - values[1]) / (2 * H)
            pair.append(g)
        grads.append(pair)
    return grads


CASES = [(act, task, l2, (5, 3)) for act in sorted(ACTIVATIONS) for task in TASKS for l2 in (0.0, 0.7)]
CASES += [(act, task, l2, (6,)) for act in sorted(ACTIVATIONS) for task in TASKS for l2 in (0.0, 0.7)]
CASES += [("relu", task, l2, ()) for task in TASKS for l2 in (0.0, 0.7)]   # no hidden layer
CASES = [case + (3,) for case in CASES] + [("tanh", "multiclass", 0.7, (5,), 10)]  # many-class softmax path


@pytest.mark.parametrize("activation, task, l2, hidden, classes", CASES)
def test_gradient_matches_central_differences(activation, task, l2, hidden, classes):
    rng = np.random.default_rng(zlib.crc32(repr((activation, task, l2, hidden, classes)).encode()))
    X, y, k = task_data(task, rng, n=25, d=4, classes=classes)
    sizes = (4, *hidden, k)
    weights = random_weights(rng, sizes, activation, OUTPUT_FOR_TASK[task])
    config = NetConfig(hidden=hidden, activation=activation, l2=l2, dtype="float64")
    trainer = one_member(config, task, k, X, y, weights)
    _, analytic = trainer.loss_and_gradient()
    numeric = _numeric_gradient(trainer, weights)
    for (gw, gb), (nw, nb) in zip(analytic[0], numeric):
        np.testing.assert_allclose(gw, nw, rtol=1e-6, atol=1e-8)
        np.testing.assert_allclose(gb, nb, rtol=1e-6, atol=1e-8)
