"""Fold arrays for a search: one Preprocessor per fold, fitted on that fold's training rows only.

For a regression table the target is scaled too (:mod:`labbench.data.target`), again fitted on
each fold's training rows only: ``y_train`` and ``y_val`` are in training units, and
``target_scalers[i]`` maps fold i's network output (and ``y_val[i]``) back to the target's own
units, which is where every score is computed (``StackTrainer(..., target_inverse=...)``).

A table without a target (task "unsupervised") gets no target scaler: ``y_train`` / ``y_val``
are its dummy zeros, and the families that learn without a target ignore them.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from labbench.data.prep import Preprocessor, category_levels
from labbench.data.table import Table
from labbench.data.target import DEFAULT_TARGET_SCALING, TargetScaler


@dataclass(frozen=True)
class FoldArrays:
    X_train: tuple[np.ndarray, ...]
    y_train: tuple[np.ndarray, ...]        # regression: in training units (scaled target)
    X_val: tuple[np.ndarray, ...]
    y_val: tuple[np.ndarray, ...]          # regression: in training units (scaled target)
    train_rows: tuple[np.ndarray, ...]     # positions into the table
    val_rows: tuple[np.ndarray, ...]
    preprocessors: tuple[Preprocessor, ...]
    target_scalers: tuple[TargetScaler, ...] = ()   # regression only, one per fold; else empty

    @property
    def n_folds(self) -> int:
        return len(self.X_train)

    @property
    def n_inputs(self) -> int:
        return int(self.X_train[0].shape[1]) if self.X_train else 0

    @property
    def target_inverse(self) -> tuple[TargetScaler, ...] | None:
        """Per fold, what maps outputs back to the target's units (``StackTrainer``'s
        ``target_inverse``); None when there is nothing to map (classification, or "none")."""
        if not self.target_scalers or all(s.is_identity for s in self.target_scalers):
            return None
        return self.target_scalers


def prepare_folds(table: Table, rows: Sequence[int] | np.ndarray,
                  folds: Sequence[tuple[np.ndarray, np.ndarray]], scaling: str = "standard",
                  target_scaling: str = DEFAULT_TARGET_SCALING, dtype=None) -> FoldArrays:
    """Arrays for each fold. ``rows``: positions into ``table`` (the search's training rows);
    ``folds``: (train_pos, val_pos) pairs of positions into ``rows`` (as :func:`make_folds` gives).

    Each fold's Preprocessor (and, for regression, its TargetScaler) sees ``table.frame`` /
    ``table.y`` at that fold's training rows and nothing else. ``target_scaling`` is ignored for
    classification tables. ``dtype``: the inputs' dtype (default float64; the search keeps them
    in float32, the dtype it trains in, converted fold by fold so no float64 copy of all folds
    is ever held).
    """
    rows = np.asarray(rows, dtype=np.int64)
    numeric, categorical = table.numeric, table.categorical
    regression = table.task == "regression"
    where = f"{table.path}: "
    if regression:     # the whole column checked once (log: positive?), one error for all folds
        TargetScaler(target_scaling, table.target).fit(table.y, where)
    out: dict[str, list] = {k: [] for k in ("X_train", "y_train", "X_val", "y_val", "train_rows",
                                            "val_rows", "pre", "target")}
    levels = category_levels(table.frame.iloc[rows], categorical)   # one column layout for all folds
    for train_pos, val_pos in folds:
        tr = rows[np.asarray(train_pos, dtype=np.int64)]
        va = rows[np.asarray(val_pos, dtype=np.int64)]
        pre = Preprocessor(numeric, categorical, scaling, levels=levels).fit(table.frame.iloc[tr])
        out["X_train"].append(pre.transform(table.frame.iloc[tr]).astype(dtype or np.float64, copy=False))
        out["X_val"].append(pre.transform(table.frame.iloc[va]).astype(dtype or np.float64, copy=False))
        if regression:
            target = TargetScaler(target_scaling, table.target).fit(table.y[tr], where)
            out["y_train"].append(target.transform(table.y[tr], where))
            out["y_val"].append(target.transform(table.y[va], where))
            out["target"].append(target)
        else:
            out["y_train"].append(table.y[tr])
            out["y_val"].append(table.y[va])
        out["train_rows"].append(tr)
        out["val_rows"].append(va)
        out["pre"].append(pre)
    return FoldArrays(tuple(out["X_train"]), tuple(out["y_train"]), tuple(out["X_val"]), tuple(out["y_val"]),
                      tuple(out["train_rows"]), tuple(out["val_rows"]), tuple(out["pre"]),
                      tuple(out["target"]))
