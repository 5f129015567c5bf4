"""labbench: tune small neural networks on tabular data, on a laptop CPU.

This package (everything outside ``labbench.gui``) never imports Qt.
"""

from __future__ import annotations

__version__ = "0.1.0"

from labbench.errors import BundleError, DataError, DivergenceError, LabbenchError, SpecError

__all__ = [
    "__version__",
    "LabbenchError",
    "DataError",
    "SpecError",
    "BundleError",
    "DivergenceError",
    "NetClassifier",
    "NetRegressor",
    "fit_folds",
]


def __getattr__(name: str):
    # The estimators pull in the engine; load them on first use so `import labbench` stays light.
    if name in ("NetClassifier", "NetRegressor", "fit_folds"):
        from labbench.nets import estimator

        return getattr(estimator, name)
    raise AttributeError(f"module 'labbench' has no attribute {name!r}")
