"""Input checks of the scikit-learn style estimators, without importing scikit-learn.

Messages follow scikit-learn's wording where its estimator checks look for it ("Reshape your
data", "0 feature(s)", "Unknown label type", "X has 3 features, but ... is expecting 4 features
as input"), so labbench's estimators behave like any other in a scikit-learn pipeline. When
scikit-learn is already imported, the not-fitted error and the column-vector warning are also
instances of scikit-learn's own ``NotFittedError`` / ``DataConversionWarning``.
"""

from __future__ import annotations

import sys
import warnings
from functools import lru_cache

import numpy as np


class NotFittedError(ValueError, AttributeError):
    """An estimator was asked to predict before ``fit`` (same bases as scikit-learn's)."""


class DataConversionWarning(UserWarning):
    """Input was converted (e.g. a column-vector y raveled)."""


@lru_cache(maxsize=None)
def _with_sklearn(ours: type, sklearn_name: str) -> type:
    theirs = getattr(sys.modules["sklearn.exceptions"], sklearn_name)
    return type(ours.__name__, (ours, theirs), {"__module__": __name__})


def _flavoured(ours: type, sklearn_name: str) -> type:
    if "sklearn.exceptions" in sys.modules:
        return _with_sklearn(ours, sklearn_name)
    return ours


def not_fitted(estimator) -> Exception:
    cls = _flavoured(NotFittedError, "NotFittedError")
    name = type(estimator).__name__
    return cls(f"This {name} instance is not fitted yet; call fit(X, y) before using it")


def _is_sparse(X) -> bool:
    module = type(X).__module__ or ""
    return module.startswith("scipy.sparse") or hasattr(X, "tocsr")


def check_X(X, estimator, *, reset: bool) -> np.ndarray:
    """A finite 2-D float64 copy of X; on ``reset`` records ``n_features_in_``."""
    name = type(estimator).__name__
    if _is_sparse(X):
        raise TypeError(f"{name} does not take sparse input; convert it with X.toarray() first")
    X = np.asarray(X)
    if np.iscomplexobj(X):
        raise ValueError("Complex data not supported")
    if X.dtype.kind not in "biuf":
        X = X.astype(np.float64)   # raises TypeError for values that are not numbers
    if X.ndim != 2:
        raise ValueError(
            f"Expected a 2D array, got a {X.ndim}D array instead. Reshape your data either using "
            "array.reshape(-1, 1) if your data has a single feature or array.reshape(1, -1) if it "
            "contains a single sample."
        )
    if X.shape[0] < 1:
        raise ValueError(f"Found array with 0 sample(s) (shape={X.shape}) while a minimum of 1 is required.")
    if X.shape[1] < 1:
        raise ValueError(f"Found array with 0 feature(s) (shape={X.shape}) while a minimum of 1 is required.")
    X = np.array(X, dtype=np.float64, order="C")
    if not np.all(np.isfinite(X)):
        raise ValueError("Input X contains NaN or infinity; impute or drop those values first.")
    if reset:
        estimator.n_features_in_ = X.shape[1]
    elif X.shape[1] != estimator.n_features_in_:
        raise ValueError(
            f"X has {X.shape[1]} features, but {name} is expecting {estimator.n_features_in_} "
            "features as input."
        )
    return X


def check_y(y, n_rows: int, estimator) -> np.ndarray:
    name = type(estimator).__name__
    if y is None:
        raise ValueError(f"{name} requires y to be passed, but the target y is None.")
    y = np.asarray(y)
    if y.ndim == 2 and y.shape[1] == 1:
        warnings.warn(
            _flavoured(DataConversionWarning, "DataConversionWarning")(
                "A column-vector y was passed when a 1d array was expected. Please change the "
                "shape of y to (n_samples,), for example using ravel()."
            ),
            stacklevel=3,
        )
        y = y.ravel()
    if y.ndim != 1:
        raise ValueError(f"y should be a 1d array, got an array of shape {y.shape} instead.")
    if y.shape[0] != n_rows:
        raise ValueError(f"X has {n_rows} rows but y has {y.shape[0]} values; give one target per row.")
    return y


def check_regression_target(y: np.ndarray) -> np.ndarray:
    y = np.asarray(y, dtype=np.float64)
    if np.any(np.isnan(y)):
        raise ValueError("Input y contains NaN.")
    if not np.all(np.isfinite(y)):
        raise ValueError("Input y contains infinity or a value too large for dtype('float64').")
    return y


def check_class_target(y: np.ndarray) -> np.ndarray:
    """Reject continuous and missing targets; return y ready for ``np.unique``."""
    if y.dtype.kind == "f":
        if np.any(np.isnan(y)):
            raise ValueError("Input y contains NaN.")
        if not np.all(np.isfinite(y)):
            raise ValueError("Input y contains infinity or a value too large for dtype('float64').")
        if np.any(y != np.round(y)):
            raise ValueError("Unknown label type: continuous. A classifier needs class labels; "
                             "use NetRegressor for a numeric target.")
    elif y.dtype.kind == "O":
        if any(v is None or (isinstance(v, float) and np.isnan(v)) for v in y):
            raise ValueError("Input y contains NaN.")
        kinds = {type(v) for v in y}
        if len(kinds) > 1 and not all(issubclass(k, (int, np.integer)) for k in kinds):
            raise ValueError(f"Unknown label type: mixed types {sorted(k.__name__ for k in kinds)}")
        if kinds and next(iter(kinds)) in (float, np.float64) and any(v != round(v) for v in y):
            raise ValueError("Unknown label type: continuous.")
    elif y.dtype.kind not in "biuUS":
        raise ValueError(f"Unknown label type: dtype {y.dtype}")
    return y
