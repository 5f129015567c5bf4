"""Closed-form optimum of the 0-hidden-layer regression network (a check on gradient descent).

``least_squares(X, y, l2)`` minimises the engine's own full-batch objective for the linear model,
mean ½ (X w + b - y)² + l2 / (2 n) · ‖w‖² (bias not penalised), by ``numpy.linalg.lstsq`` on the
augmented system [X 1; sqrt(l2) I 0] [w; b] = [y; 0] (SVD based, so ill-conditioned designs stay
as accurate as the data allow), and returns it as ``NetWeights``.
"""

from __future__ import annotations

import numpy as np

from labbench.nets.weights import NetWeights


def least_squares(X, y, *, l2: float = 0.0) -> NetWeights:
    X = np.asarray(X, dtype=np.float64)
    y = np.asarray(y, dtype=np.float64).ravel()
    n, d = X.shape
    design = np.column_stack([X, np.ones(n)])
    target = y
    if l2 > 0:
        penalty = np.zeros((d, d + 1))
        penalty[:, :d] = np.sqrt(l2) * np.eye(d)
        design = np.vstack([design, penalty])
        target = np.concatenate([y, np.zeros(d)])
    coef, *_ = np.linalg.lstsq(design, target, rcond=None)
    return NetWeights(((coef[:d].reshape(d, 1), coef[d:].copy()),), "relu", "identity")
