"""Tables for labbench: reading CSV files, column roles, validation, hold-out and folds, and
preprocessing fitted on each fold's training rows only. See DEVELOPERS.md ("labbench.data")."""

from __future__ import annotations

from labbench.data.folds import FoldArrays, prepare_folds
from labbench.data.prep import SCALINGS, Preprocessor
from labbench.data.reading import MISSING_MARKERS, read_csv
from labbench.data.roles import KINDS, TASKS, category_text, infer_kinds, infer_task
from labbench.data.screen import screen_columns
from labbench.data.splits import check_folds, holdout_split, make_folds
from labbench.data.table import MISSING_POLICIES, Table, load_table
from labbench.data.target import DEFAULT_TARGET_SCALING, TARGET_SCALINGS, TargetScaler

__all__ = [
    "read_csv", "infer_kinds", "infer_task", "load_table", "Table",
    "check_folds", "holdout_split", "make_folds",
    "Preprocessor", "prepare_folds", "FoldArrays", "TargetScaler",
    "category_text", "KINDS", "TASKS", "SCALINGS", "MISSING_POLICIES",
    "TARGET_SCALINGS", "DEFAULT_TARGET_SCALING",
    "screen_columns", "MISSING_MARKERS",
]
