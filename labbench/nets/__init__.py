"""The numpy network engine: stacked training of small networks on tabular data.

Public API (see DEVELOPERS.md, "labbench.nets"): ``NetConfig``, ``EpochScores``, ``StackTrainer``,
``NetWeights``, the ``metrics`` module, and the scikit-learn style ``NetClassifier`` /
``NetRegressor`` with ``fit_folds`` (one copy per split, trained as one stack; loaded on
first use).
"""

from __future__ import annotations

from labbench.nets import metrics
from labbench.nets.config import EpochScores, NetConfig
from labbench.nets.stack import StackTrainer
from labbench.nets.weights import NetWeights

__all__ = ["NetConfig", "EpochScores", "StackTrainer", "NetWeights", "metrics", "NetClassifier", "NetRegressor", "fit_folds"]


def __getattr__(name: str):
    if name in ("NetClassifier", "NetRegressor", "fit_folds"):
        from labbench.nets import estimator

        return getattr(estimator, name)
    raise AttributeError(f"module 'labbench.nets' has no attribute {name!r}")
