"""Fold arrays for a search: one Preprocessor per fold, fitted on that fold's training rows only."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from labbench.data.prep import Preprocessor, category_levels
from labbench.data.table import Table


@dataclass(frozen=True)
class FoldArrays:
    X_train: tuple[np.ndarray, ...]
    y_train: tuple[np.ndarray, ...]
    X_val: tuple[np.ndarray, ...]
    y_val: tuple[np.ndarray, ...]
    train_rows: tuple[np.ndarray, ...]     # positions into the table
    val_rows: tuple[np.ndarray, ...]
    preprocessors: tuple[Preprocessor, ...]

    @property
    def n_folds(self) -> int:
        return len(self.X_train)

    @property
    def n_inputs(self) -> int:
        return int(self.X_train[0].shape[1]) if self.X_train else 0


def prepare_folds(table: Table, rows: Sequence[int] | np.ndarray,
                  folds: Sequence[tuple[np.ndarray, np.ndarray]], scaling: str = "standard") -> FoldArrays:
    """Arrays for each fold. ``rows``: positions into ``table`` (the search's training rows);
    ``folds``: (train_pos, val_pos) pairs of positions into ``rows`` (as :func:`make_folds` gives).

    Each fold's Preprocessor sees ``table.frame`` at that fold's training rows and nothing else.
    """
    rows = np.asarray(rows, dtype=np.int64)
    numeric, categorical = table.numeric, table.categorical
    out: dict[str, list] = {k: [] for k in ("X_train", "y_train", "X_val", "y_val", "train_rows", "val_rows", "pre")}
    levels = category_levels(table.frame.iloc[rows], categorical)   # one column layout for all folds
    for train_pos, val_pos in folds:
        tr = rows[np.asarray(train_pos, dtype=np.int64)]
        va = rows[np.asarray(val_pos, dtype=np.int64)]
        pre = Preprocessor(numeric, categorical, scaling, levels=levels).fit(table.frame.iloc[tr])
        out["X_train"].append(pre.transform(table.frame.iloc[tr]))
        out["X_val"].append(pre.transform(table.frame.iloc[va]))
        out["y_train"].append(table.y[tr])
        out["y_val"].append(table.y[va])
        out["train_rows"].append(tr)
        out["val_rows"].append(va)
        out["pre"].append(pre)
    return FoldArrays(tuple(out["X_train"]), tuple(out["y_train"]), tuple(out["X_val"]), tuple(out["y_val"]),
                      tuple(out["train_rows"]), tuple(out["val_rows"]), tuple(out["pre"]))
