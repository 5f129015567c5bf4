"""The 0-hidden-layer regression network on the Longley data against the NIST StRD certified
coefficients (source: NIST Statistical Reference Datasets, "Longley", linear regression, higher
difficulty; certified values written below from memory and cross-checked against
numpy.linalg.lstsq in the same test). The data come from statsmodels.datasets.longley.

Longley is badly conditioned (raw design condition number ~1e8). The network trains on
standardised inputs and target in float64 with full-batch heavy-ball gradient descent (the
engine's "momentum" optimiser) at Polyak's optimal step and momentum for a quadratic,
lr = 4 / (sqrt(L) + sqrt(mu))², momentum = ((sqrt(k) - 1) / (sqrt(k) + 1))², from the extreme
eigenvalues L, mu of the loss's Hessian (common practice); the coefficients are then mapped back
to the original units.
"""

from __future__ import annotations

import numpy as np
import pytest
from statsmodels.datasets import longley

from labbench.nets import NetConfig, StackTrainer
from labbench.nets.exact import least_squares

# NIST StRD Longley certified parameters (from memory): intercept, then GNPDEFL, GNP, UNEMP,
# ARMED, POP, YEAR.
CERTIFIED = np.array([
    -3482258.63459582,
    15.0618722713733,
    -0.358191792925910e-01,
    -2.02022980381683,
    -1.03322686717359,
    -0.511041056535807e-01,
    1829.15146461355,
])

EPOCHS = 3000
# After 3000 steps at a contraction of (sqrt(k)-1)/(sqrt(k)+1) ~ 0.982 per step (k ~ 1.2e4) the
# starting error has shrunk by ~1e-23, so rounding sets the limit: about k · eps ~ 3e-12 on the
# standardised weights, amplified a little by the cancellation in the intercept when unscaling.
# 1e-9 relative leaves a wide margin while still demanding ~9 correct digits of every coefficient.
GD_RTOL = 1e-9


@pytest.fixture(scope="module")
def data():
    frame = longley.load_pandas()
    assert list(frame.exog.columns) == ["GNPDEFL", "GNP", "UNEMP", "ARMED", "POP", "YEAR"]
    return frame.exog.to_numpy(np.float64), frame.endog.to_numpy(np.float64)


def _standardise(X, y):
    mx, sx, my, sy = X.mean(axis=0), X.std(axis=0), y.mean(), y.std()
    return (X - mx) / sx, (y - my) / sy, (mx, sx, my, sy)


def _unscale(weights, scaling):
    mx, sx, my, sy = scaling
    (W, b), = weights.layers
    slopes = W[:, 0] * sy / sx
    return np.r_[my + sy * b[0] - np.sum(slopes * mx), slopes]


def test_certified_values_agree_with_numpy_lstsq(data):
    X, y = data
    coef, *_ = np.linalg.lstsq(np.column_stack([np.ones(len(y)), X]), y, rcond=None)
    np.testing.assert_allclose(coef, CERTIFIED, rtol=1e-8)


def test_gradient_descent_reaches_the_certified_coefficients(data):
    X, y = data
    Xs, ys, scaling = _standardise(X, y)
    # Hessian of mean ½ r² in (w, b): X'X / n for the slopes, 1 for the bias (X is centred)
    eig = np.linalg.eigvalsh(Xs.T @ Xs / len(y))
    big, small = max(eig[-1], 1.0), min(eig[0], 1.0)
    kappa = big / small
    lr = 4.0 / (np.sqrt(big) + np.sqrt(small)) ** 2
    momentum = ((np.sqrt(kappa) - 1) / (np.sqrt(kappa) + 1)) ** 2
    config = NetConfig(hidden=(), optimizer="momentum", learning_rate=lr, momentum=momentum,
                       batch_size=len(y), epochs=EPOCHS, dtype="float64")
    trainer = StackTrainer(config, "regression", 1, [Xs], [ys], seeds=[0])
    history = trainer.run()
    coef = _unscale(trainer.weights(0), scaling)
    np.testing.assert_allclose(coef, CERTIFIED, rtol=GD_RTOL)
    # and it really was gradient descent doing it: far from the answer after a tenth of the steps
    early = StackTrainer(config, "regression", 1, [Xs], [ys], seeds=[0])
    early.run(on_epoch=lambda s: s.epoch < EPOCHS // 10)
    assert np.max(np.abs(_unscale(early.weights(0), scaling) / CERTIFIED - 1)) > 1e3 * GD_RTOL
    assert history[-1].train_loss[0] < history[0].train_loss[0]


def test_closed_form_path_reaches_the_certified_coefficients(data):
    X, y = data
    Xs, ys, scaling = _standardise(X, y)
    np.testing.assert_allclose(_unscale(least_squares(Xs, ys), scaling), CERTIFIED, rtol=1e-9)


@pytest.mark.parametrize("l2", [0.0, 2.5])
def test_closed_form_is_where_the_engine_gradient_vanishes(data, l2):
    # same objective (scikit-learn's L2 convention, alpha / (2 n) Σ w²) in both paths
    X, y = data
    Xs, ys, _ = _standardise(X, y)
    config = NetConfig(hidden=(), l2=l2, dtype="float64", batch_size=len(y))
    trainer = StackTrainer(config, "regression", 1, [Xs], [ys], seeds=[0])
    trainer.set_weights(0, least_squares(Xs, ys, l2=l2))
    _, grads = trainer.loss_and_gradient()
    (gw, gb), = grads[0]
    assert np.max(np.abs(gw)) < 1e-12 and abs(gb[0]) < 1e-12
