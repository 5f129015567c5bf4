"""Which input columns carry nothing a network can learn from: constant, empty or id-like ones.

One rule, shared by ``load_table`` (the command line prints its notices) and the window's data
page, so both say the same thing about the same file.

* **constant / empty**: one distinct value (or none) in the rows looked at.
* **id-like** (common practice: a key names a row, it does not describe it):
  - a text column with at least ``ID_MIN_ROWS`` (20) values of which at least ``ID_SHARE``
    (95 %) are different (codes, names, free text: one-hot encoding would give a column per row);
  - a whole-number column that counts the rows, 0..n-1 or 1..n in some order, with no gaps;
  - a whole-number column whose values all differ and whose name says it is a key (``id``,
    ``row``, ``index``, ``key``, ``no``, or ending in ``_id`` / ``Id`` / ``ID`` ...).
  A column of floats is a measurement, never id-like; whole numbers that all differ but have an
  ordinary name (an income, a year) are kept too.

Columns named in ``forced`` (the spec's ``keep`` list and any column whose kind the spec gives)
are never left out as id-like.
"""

from __future__ import annotations

import re
from typing import Iterable, Sequence

import numpy as np
import pandas as pd

from labbench.errors import DataError
from labbench.data.reading import show
from labbench.data.roles import is_numeric

ID_MIN_ROWS = 20
ID_SHARE = 0.95
COUNTER_MIN_ROWS = 10
_KEY_NAMES = {"id", "row", "rowid", "row_id", "index", "idx", "key", "no", "nr", "#", "unnamed: 0"}
_KEY_SUFFIX = re.compile(r"[_\s.\-](id|idx|index|key|no|nr|number)$")
_KEY_CAMEL = re.compile(r"[a-z0-9](Id|ID)$")


def name_says_key(name: str) -> bool:
    low = str(name).strip().lower()
    return low in _KEY_NAMES or bool(_KEY_SUFFIX.search(low)) or bool(_KEY_CAMEL.search(str(name).strip()))


def id_reason(series: pd.Series, distinct: int | None = None) -> str | None:
    """Why ``series`` looks like a row id (a short phrase), or None. ``distinct``: the number of
    different non-missing values, when already known."""
    n = int(series.notna().sum())
    if pd.api.types.is_bool_dtype(series) or n < COUNTER_MIN_ROWS:
        return None
    if is_numeric(series):
        v = series.dropna().to_numpy(dtype=np.float64)
        if not np.all(np.isfinite(v)) or not np.all(v == np.round(v)):
            return None                                      # a measurement
        distinct = np.unique(v)
        if len(distinct) != n:
            return None
        if n == len(series) and distinct[0] in (0.0, 1.0) and distinct[-1] == distinct[0] + n - 1:
            return f"it counts the rows, {int(distinct[0])} to {int(distinct[-1])}"
        if name_says_key(str(series.name)):
            return f"{n} different whole numbers and a key's name"
        return None
    if n < ID_MIN_ROWS:
        return None
    distinct = int(series.nunique(dropna=True)) if distinct is None else distinct
    if distinct >= ID_SHARE * n:
        return f"{distinct} different values in {n} rows"
    return None


def screen_columns(frame: pd.DataFrame, features: Sequence[str], where: str, *,
                   forced: Iterable[str] = (), ids: bool = True) -> tuple[list[str], list[str]]:
    """(kept features in their order, one notice per column left out).

    ``frame``: the rows to judge by (rows with a target). ``ids=False`` checks constant and empty
    columns only. Raises a DataError when no column is left.
    """
    forced = set(forced)
    notices: list[str] = []
    kept: list[str] = []
    for col in features:
        s = frame[col]
        count = None
        if is_numeric(s) and not pd.api.types.is_bool_dtype(s):
            v = s.to_numpy(dtype=np.float64, na_value=np.nan)
            present = v[~np.isnan(v)]
            distinct = 0 if present.size == 0 else (1 if present.min() == present.max() else 2)
        else:
            count = int(s.nunique(dropna=True))
            distinct = min(count, 2)
        if distinct == 0:
            notices.append(f"{where}: column {show(col)} is empty in every row; dropped it")
            continue
        if distinct == 1:
            notices.append(f"{where}: column {show(col)} has the same value ({show(s.dropna().iloc[0])}) "
                           "in every row; dropped it")
            continue
        reason = id_reason(s, count) if ids and col not in forced else None
        if reason:
            notices.append(f"{where}: column {show(col)} looks like a row id ({reason}); left it out "
                           f"of the inputs - to use it anyway, add it to keep = [...] in [data]")
            continue
        kept.append(col)
    if not kept:
        raise DataError(f"{where}: every feature column is constant, empty or id-like; "
                        "the table has nothing to learn from (keep = [...] in [data] forces a column in)")
    return kept, notices


__all__ = ["screen_columns", "id_reason", "name_says_key"]
