"""Column kinds (numeric / categorical), the task a target implies, and value conversions.

Rules (common practice): a column pandas reads as numbers (or True/False) is numeric, even an
integer column with few distinct values (a count, a rating) - the user can override it to
categorical; a text column is categorical. A target of text or True/False is a class label
(2 distinct: binary, more: multiclass); a numeric target with 2 distinct values is binary. A
numeric target with 3 or more distinct values is multiclass only when it reads like a set of codes:

* every value is a whole number, and there are at most ``MAX_CLASSES`` (20) of them;
* the values repeat: at most half as many distinct values as rows (``CODES_PER_ROW``; each class
  has two rows or more on average - Longley's employment total, 16 values in 16 rows, is a
  quantity);
* the values are small (all within -20..20) or compact (the range they span holds at most twice
  as many whole numbers as there are distinct values: a 1-5 rating, 0-9 digit codes; a
  body-weight column of 18 kilogram values spread over 52..97 is a quantity).

Anything else numeric is regression. ``task = "regression"`` (or "multiclass") in the spec's
[data] section overrides the rule; every error about classes says so.
"""

from __future__ import annotations

from typing import Mapping

import numpy as np
import pandas as pd

from labbench.errors import DataError
from labbench.data.reading import names_text, show
from labbench.nets.losses import TASKS   # the one list of tasks: the losses the engine has

KINDS = ("numeric", "categorical")
MAX_CLASSES = 20   # whole-number targets with more distinct values are treated as regression
CODES_PER_ROW = 0.5   # more distinct values than this share of the rows: a quantity
SMALL_CODE = 20       # whole numbers within -20..20 are small enough to be codes in any pattern
FORCE_REGRESSION = 'if the target is a quantity, set task = "regression" in the spec\'s [data] section'


def is_numeric(series: pd.Series) -> bool:
    return bool(pd.api.types.is_numeric_dtype(series) or pd.api.types.is_bool_dtype(series))


def infer_kinds(frame: pd.DataFrame) -> dict[str, str]:
    """Each column's kind: "numeric" for numbers and True/False, "categorical" for text."""
    return {str(col): ("numeric" if is_numeric(frame[col]) else "categorical") for col in frame.columns}


def infer_task(series: pd.Series) -> str:
    """The task a target column implies (missing values are ignored)."""
    values = series.dropna()
    distinct = int(values.nunique())
    if distinct < 2:
        only = show(values.iloc[0]) if len(values) else "nothing"
        raise DataError(f"target {show(series.name)} has a single value ({only}) in every row; "
                        "a model needs a target that varies")
    if distinct == 2:
        return "binary"
    if not is_numeric(series) or pd.api.types.is_bool_dtype(series):
        return "multiclass"
    v = values.to_numpy(dtype=np.float64)
    if distinct > MAX_CLASSES or not np.all(v == np.round(v)):
        return "regression"
    if distinct > CODES_PER_ROW * len(v):
        return "regression"
    small = bool(np.abs(v).max() <= SMALL_CODE)
    compact = (v.max() - v.min() + 1) <= 2 * distinct
    return "multiclass" if small or compact else "regression"


MOSTLY_NUMERIC = 0.9   # a text column whose non-missing cells are at least this share numbers


def stray_cells(series: pd.Series, *, always: bool = False) -> np.ndarray | None:
    """Positions of the cells that are not numbers in a mostly numeric text column.

    "Mostly numeric" (common practice): at least ``MOSTLY_NUMERIC`` of the non-missing cells read
    as numbers (surrounding spaces ignored). None when the column is numeric already, is not
    mostly numeric (a label column; unless ``always``), or has no stray cell.
    """
    if is_numeric(series):
        return None
    present = series.notna().to_numpy()
    if not present.any():
        return None
    codes, uniques = pd.factorize(series, use_na_sentinel=True)      # judge each distinct text once
    stripped = pd.Series([u.strip() if isinstance(u, str) else u for u in uniques], dtype=object)
    is_number = pd.to_numeric(stripped, errors="coerce").notna().to_numpy()
    numbers = np.append(is_number, False)[codes]                       # code -1 (missing) -> False
    bad = present & ~numbers
    if not bad.any():
        return None
    if not always and numbers.sum() < MOSTLY_NUMERIC * present.sum():
        return None
    return np.flatnonzero(bad)


_FIX_FEATURE = "fix that value, leave it empty for missing, or treat the column as categorical"


def as_float(series: pd.Series, column: str, where: str = "", lines: np.ndarray | None = None,
             fix: str = _FIX_FEATURE) -> np.ndarray:
    """A column as float64 with NaN for missing; text that is not a number is a DataError.

    ``where`` starts the message (usually the file name); ``lines`` maps positions to file lines.
    """
    if is_numeric(series):
        return series.to_numpy(dtype=np.float64, na_value=np.nan)
    converted = pd.to_numeric(series, errors="coerce")
    bad = (series.notna() & converted.isna()).to_numpy()
    if bad.any():
        pos = int(np.argmax(bad))
        place = f"line {int(lines[pos])}" if lines is not None else f"row {pos + 1}"
        prefix = f"{where}: " if where else ""
        raise DataError(
            f"{prefix}column {show(column)} must hold numbers but {place} holds "
            f"{show(series.iloc[pos])}; {fix}"
        )
    return converted.to_numpy(dtype=np.float64, na_value=np.nan)


def category_text(series: pd.Series) -> np.ndarray:
    """Values as category labels (object array of str, None where missing).

    ``str(value)`` with two refinements so a file with and without missing values agree:
    whole-number floats read as integers ("3", not "3.0"), and surrounding spaces are stripped.
    """
    n = len(series)
    missing = series.isna().to_numpy()
    out = np.empty(n, dtype=object)
    if pd.api.types.is_bool_dtype(series):
        out[:] = np.where(series.to_numpy(dtype=bool, na_value=False), "True", "False")
    elif pd.api.types.is_numeric_dtype(series):
        v = series.to_numpy(dtype=np.float64, na_value=np.nan)
        whole = np.isfinite(v) & (v == np.floor(v)) & (np.abs(v) < 1e15)
        out[whole] = v[whole].astype(np.int64).astype(str)
        other = ~whole & ~missing
        out[other] = v[other].astype(str)
    else:
        # strip and convert the distinct values only, then spread them back (vectorised)
        codes, uniques = pd.factorize(series, use_na_sentinel=True)
        labels = np.array([str(u).strip() for u in uniques] + [None], dtype=object)
        out[:] = labels[codes]        # code -1 (missing) picks the trailing None
    out[missing] = None
    return out


def class_labels(series: pd.Series) -> tuple[tuple[str, ...], np.ndarray]:
    """Sorted class labels as strings and int64 codes into them (no missing values expected).

    Numeric labels sort by value (2 before 10), text labels alphabetically.
    """
    text = category_text(series)
    if is_numeric(series) and not pd.api.types.is_bool_dtype(series):
        values = series.to_numpy(dtype=np.float64)
        _, first = np.unique(values, return_index=True)
        classes = tuple(str(t) for t in text[first])
    else:
        classes = tuple(sorted(set(text.tolist())))
    codes = pd.Index(list(classes), dtype=object).get_indexer(text).astype(np.int64)
    return classes, codes


def check_kinds(kinds: Mapping[str, str] | None, columns: list[str], target: str, where: str) -> dict[str, str]:
    """Validate a user's kind overrides against the file's columns."""
    out: dict[str, str] = {}
    for col, kind in (kinds or {}).items():
        if col == target:
            raise DataError(f"{where}: kinds: {show(col)} is the target; set the task "
                            "(regression, binary, multiclass) instead of its kind")
        if col not in columns:
            raise DataError(f"{where}: kinds: no column {show(col)}; the columns are "
                            f"{names_text(columns)}")
        if kind not in KINDS:
            raise DataError(f"{where}: kinds: {show(col)} = {show(kind)}; use 'numeric' or 'categorical'")
        out[col] = kind
    return out
