"""Preprocessing fitted on training rows only: imputation, scaling, one-hot encoding.

Numeric columns: missing values get the training median, then standardisation (mean 0, standard
deviation 1, ``ddof=0``) or min-max scaling to [0, 1] of the training rows (inputs on similar
scales train best: common practice); a column that is constant in the training rows gets scale 1.
Categorical columns: values become text (:func:`labbench.data.roles.category_text`), missing ones
the most frequent training value (ties: the smallest, as scikit-learn's ``SimpleImputer``), then
one 0/1 column per training category in sorted order; a category never seen in training encodes as
all zeros.

The folds of one search must share one column layout (the networks of a trial are trained
stacked), so :func:`labbench.data.prepare_folds` passes ``levels``: every category of the search's
training rows. A level that a fold's training rows lack still gets its column (all zeros in that
fold's training rows) and is encoded as unseen - all zeros - when it turns up in the fold's
validation rows; a level occurring in a single row thus never changes a fold's width.

``fit`` looks at the frame it is given and nothing else, and ``transform`` reads only the fitted
state, so validation rows cannot leak into what is fitted.
"""

from __future__ import annotations

import warnings
from typing import Any, Mapping, Sequence

import numpy as np
import pandas as pd

from labbench.errors import BundleError, DataError
from labbench.data.reading import names_text, show
from labbench.data.roles import as_float, category_text

SCALINGS = ("standard", "minmax")


class Preprocessor:
    """Fold-safe preprocessing; output columns: all numeric, then each categorical's one-hot block."""

    def __init__(self, numeric: Sequence[str] = (), categorical: Sequence[str] = (), scaling: str = "standard",
                 levels: Mapping[str, Sequence[str]] | None = None):
        if scaling not in SCALINGS:
            raise DataError(f"scaling = {show(scaling)}; use 'standard' (mean 0, sd 1) or 'minmax' (0 to 1)")
        self.numeric = [str(c) for c in numeric]
        self.categorical = [str(c) for c in categorical]
        self.scaling = scaling
        self.levels = {str(c): [str(v) for v in lv] for c, lv in (levels or {}).items()}

    # ------------------------------------------------------------------ fitting
    def fit(self, frame: pd.DataFrame) -> "Preprocessor":
        self._check_columns(frame)
        X = self._numeric_block(frame)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)   # all-missing column: median is NaN
            impute = np.nanmedian(X, axis=0) if X.shape[0] else np.full(X.shape[1], np.nan)
        impute = np.where(np.isfinite(impute), impute, 0.0)
        filled = np.where(np.isnan(X), impute, X)
        if filled.shape[0] == 0:
            center, scale = np.zeros(X.shape[1]), np.ones(X.shape[1])
        elif self.scaling == "standard":
            center, scale = filled.mean(axis=0), filled.std(axis=0)
        else:
            center = filled.min(axis=0)
            scale = filled.max(axis=0) - center
        scale = np.where(np.isfinite(scale) & (scale > 0), scale, 1.0)

        categories, cat_impute, unseen = [], [], []
        for col in self.categorical:
            text = category_text(frame[col])
            present = pd.Series(text[pd.notna(text)], dtype=object)
            layout = self.levels.get(col, [])
            if present.empty:
                categories.append(sorted(set(layout)))
                cat_impute.append("")
                unseen.append(sorted(set(layout)))
                continue
            counts = present.value_counts()
            top = counts[counts == counts.max()].index
            cat_impute.append(min(str(t) for t in top))
            seen = {str(c) for c in counts.index}
            categories.append(sorted(seen | set(layout)))
            unseen.append(sorted(set(layout) - seen))
        self.impute_ = impute.astype(np.float64)
        self.center_ = np.asarray(center, dtype=np.float64)
        self.scale_ = np.asarray(scale, dtype=np.float64)
        self.categories_ = categories
        self.cat_impute_ = cat_impute
        self.unseen_ = unseen
        self.feature_names_ = self._names()
        return self

    def fit_transform(self, frame: pd.DataFrame) -> np.ndarray:
        return self.fit(frame).transform(frame)

    # ------------------------------------------------------------------ applying
    def transform(self, frame: pd.DataFrame) -> np.ndarray:
        if not hasattr(self, "feature_names_"):
            raise RuntimeError("Preprocessor.transform called before fit (or from_state)")
        self._check_columns(frame)
        n = len(frame)
        p = len(self.numeric)
        out = np.zeros((n, len(self.feature_names_)), dtype=np.float64)
        X = self._numeric_block(frame)
        out[:, :p] = (np.where(np.isnan(X), self.impute_, X) - self.center_) / self.scale_
        offset = p
        rows = np.arange(n)
        for col, cats, fill, unseen in zip(self.categorical, self.categories_, self.cat_impute_, self.unseen_):
            if cats:
                text = category_text(frame[col])
                text[pd.isna(text)] = fill
                codes = pd.Index(cats, dtype=object).get_indexer(text)
                seen = codes >= 0
                if unseen:      # levels with a column but not in the rows fitted on: all zeros
                    seen &= ~np.isin(codes, pd.Index(cats, dtype=object).get_indexer(unseen))
                out[rows[seen], offset + codes[seen]] = 1.0
            offset += len(cats)
        return out

    # ------------------------------------------------------------------ state
    def to_state(self) -> dict[str, Any]:
        """Plain lists, floats and strings (JSON/npz friendly); see DEVELOPERS.md for the shape."""
        if not hasattr(self, "feature_names_"):
            raise RuntimeError("Preprocessor.to_state called before fit")
        return {
            "scaling": self.scaling,
            "numeric": list(self.numeric),
            "impute": [float(v) for v in self.impute_],
            "center": [float(v) for v in self.center_],
            "scale": [float(v) for v in self.scale_],
            "categorical": list(self.categorical),
            "categories": [list(c) for c in self.categories_],
            "cat_impute": list(self.cat_impute_),
            **({"unseen": [list(u) for u in self.unseen_]} if any(self.unseen_) else {}),
        }

    @classmethod
    def from_state(cls, state: dict[str, Any]) -> "Preprocessor":
        keys = ("scaling", "numeric", "impute", "center", "scale", "categorical", "categories", "cat_impute")
        missing = [k for k in keys if k not in state]
        if missing:
            raise BundleError(f"preprocessing state: missing key(s) {', '.join(missing)}; the model file is damaged or foreign")
        p = len(state["numeric"])
        for key in ("impute", "center", "scale"):
            if len(state[key]) != p:
                raise BundleError(f"preprocessing state: {key} has {len(state[key])} values for {p} numeric columns; "
                                  "the model file is damaged")
        q = len(state["categorical"])
        for key in ("categories", "cat_impute"):
            if len(state[key]) != q:
                raise BundleError(f"preprocessing state: {key} has {len(state[key])} entries for {q} categorical "
                                  "columns; the model file is damaged")
        try:
            pre = cls(state["numeric"], state["categorical"], str(state["scaling"]))
        except DataError as exc:
            raise BundleError(f"preprocessing state: {exc}") from None
        pre.impute_ = np.asarray(state["impute"], dtype=np.float64).reshape(p)
        pre.center_ = np.asarray(state["center"], dtype=np.float64).reshape(p)
        pre.scale_ = np.asarray(state["scale"], dtype=np.float64).reshape(p)
        pre.categories_ = [[str(c) for c in cats] for cats in state["categories"]]
        pre.cat_impute_ = [str(v) for v in state["cat_impute"]]
        unseen = state.get("unseen") or [[] for _ in range(q)]
        if len(unseen) != q:
            raise BundleError(f"preprocessing state: unseen has {len(unseen)} entries for {q} categorical "
                              "columns; the model file is damaged")
        pre.unseen_ = [[str(c) for c in u] for u in unseen]
        pre.feature_names_ = pre._names()
        return pre

    # ------------------------------------------------------------------ helpers
    def _names(self) -> list[str]:
        names = list(self.numeric)
        for col, cats in zip(self.categorical, self.categories_):
            names.extend(f"{col}={c}" for c in cats)
        return names

    def _check_columns(self, frame: pd.DataFrame) -> None:
        absent = [c for c in self.numeric + self.categorical if c not in frame.columns]
        if absent:
            raise DataError(f"missing column(s) {names_text(absent)}; the preprocessing needs "
                            f"{names_text(self.numeric + self.categorical)}")

    def _numeric_block(self, frame: pd.DataFrame) -> np.ndarray:
        X = np.empty((len(frame), len(self.numeric)), dtype=np.float64)
        for j, col in enumerate(self.numeric):
            X[:, j] = as_float(frame[col], col)
        bad = np.isinf(X)
        if bad.any():
            row, j = (int(v[0]) for v in np.nonzero(bad))
            raise DataError(f"column {show(self.numeric[j])}, row {row + 1}: {X[row, j]} is not a finite number; "
                            "replace it with a real value or leave it empty for missing")
        return X

    def __repr__(self) -> str:
        fitted = "fitted" if hasattr(self, "feature_names_") else "not fitted"
        return (f"Preprocessor(numeric={len(self.numeric)}, categorical={len(self.categorical)}, "
                f"scaling={self.scaling!r}, {fitted})")


def category_levels(frame: pd.DataFrame, categorical: Sequence[str]) -> dict[str, list[str]]:
    """Every category (as text) of each categorical column in ``frame``: the shared layout of a
    search's fold preprocessors."""
    out = {}
    for col in categorical:
        text = category_text(frame[col])
        out[str(col)] = sorted({str(t) for t in text if t is not None})
    return out
