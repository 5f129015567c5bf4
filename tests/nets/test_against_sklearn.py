"""The engine's steps against scikit-learn's MLP (source: sklearn.neural_network, float64).

From identical weights, one full-batch SGD step (no momentum) must give scikit-learn's
``partial_fit`` loss and updated weights to ~1e-10; so must several full-batch epochs of SGD with
momentum and of Adam (with the whole data in one batch the row order does not matter). Its
conventions, which the engine shares: squared error halved, L2 term alpha / (2 n) Σ‖W‖² with
biases not penalised, one logistic output for two classes, softmax for more.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.neural_network import MLPClassifier, MLPRegressor

from labbench.nets import NetConfig, NetWeights
from labbench.nets.losses import OUTPUT_FOR_TASK

from _nets_helpers import one_member, random_weights, task_data

SK_ACTIVATION = {"relu": "relu", "tanh": "tanh", "sigmoid": "logistic"}
SK_SOLVER = {"sgd": dict(solver="sgd", momentum=0.0, nesterovs_momentum=False),
             "momentum": dict(solver="sgd", momentum=0.9, nesterovs_momentum=False),
             "adam": dict(solver="adam")}


def _sklearn_model(task, activation, hidden, optimizer, lr, alpha, n):
    cls = MLPRegressor if task == "regression" else MLPClassifier
    return cls(hidden_layer_sizes=hidden, activation=SK_ACTIVATION[activation], learning_rate_init=lr,
               alpha=alpha, batch_size=n, shuffle=False, learning_rate="constant", random_state=0,
               **SK_SOLVER[optimizer])


def _start_sklearn(model, X, y, task, weights: NetWeights):
    """Initialise scikit-learn's model by one partial_fit, then put our weights in and drop its
    optimiser so the next partial_fit starts a fresh one on these arrays."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        if task == "regression":
            model.partial_fit(X, y)
        else:
            model.partial_fit(X, y, classes=np.unique(y))
    model.coefs_ = [w.copy() for w, _ in weights.layers]
    model.intercepts_ = [b.copy() for _, b in weights.layers]
    del model._optimizer


def _compare(ours: NetWeights, model, tol):
    for (w, b), cw, cb in zip(ours.layers, model.coefs_, model.intercepts_):
        np.testing.assert_allclose(w, cw, rtol=0, atol=tol)
        np.testing.assert_allclose(b, cb, rtol=0, atol=tol)


@pytest.mark.parametrize("hidden", [(6,), (5, 4)])
@pytest.mark.parametrize("activation", ["relu", "tanh", "sigmoid"])
@pytest.mark.parametrize("task", ["regression", "binary", "multiclass"])
def test_one_full_batch_sgd_step_equals_sklearn(task, activation, hidden):
    rng = np.random.default_rng(7)
    X, y, k = task_data(task, rng, n=30, d=4)
    weights = random_weights(rng, (4, *hidden, k), activation, OUTPUT_FOR_TASK[task])
    alpha, lr = 0.3, 0.2
    config = NetConfig(hidden=hidden, activation=activation, optimizer="sgd", learning_rate=lr,
                       l2=alpha, batch_size=len(X), epochs=1, dtype="float64")
    trainer = one_member(config, task, k, X, y, weights)
    loss_before = trainer.loss_and_gradient()[0][0]
    trainer.run()

    model = _sklearn_model(task, activation, hidden, "sgd", lr, alpha, len(X))
    _start_sklearn(model, X, y, task, weights)
    model.partial_fit(X, y)

    assert abs(loss_before - model.loss_) <= 1e-10 * max(1.0, abs(model.loss_))
    _compare(trainer.weights(0), model, 1e-10)
    assert not np.allclose(trainer.weights(0).layers[0][0], weights.layers[0][0])   # it moved


@pytest.mark.parametrize("optimizer", ["momentum", "adam"])
@pytest.mark.parametrize("task", ["regression", "binary", "multiclass"])
def test_full_batch_epochs_with_momentum_and_adam_equal_sklearn(task, optimizer):
    rng = np.random.default_rng(11)
    X, y, k = task_data(task, rng, n=40, d=5)
    hidden = (8,)
    weights = random_weights(rng, (5, *hidden, k), "tanh", OUTPUT_FOR_TASK[task])
    lr, alpha, epochs = 0.05, 1e-3, 6
    config = NetConfig(hidden=hidden, activation="tanh", optimizer=optimizer, learning_rate=lr,
                       momentum=0.9, l2=alpha, batch_size=len(X), epochs=epochs, dtype="float64")
    trainer = one_member(config, task, k, X, y, weights)
    trainer.run()

    model = _sklearn_model(task, "tanh", hidden, optimizer, lr, alpha, len(X))
    _start_sklearn(model, X, y, task, weights)
    for _ in range(epochs):
        model.partial_fit(X, y)
    _compare(trainer.weights(0), model, 1e-10)
