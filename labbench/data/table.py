"""A validated table: the feature columns, the encoded target, column roles, and what was changed.

``load_table`` reads the file (:mod:`labbench.data.reading`), assigns roles (target, ignored,
features), drops what cannot be used (rows without a target, constant and id-like columns - see
:mod:`labbench.data.screen` -, rows with missing values under ``missing="drop"``) with a warning
for each, stops on a mostly numeric column with a few stray text cells (naming them), and refuses with a one-line
:class:`DataError` what cannot be fixed silently. Nothing is fitted here: imputation and scaling
are fitted per fold later (:mod:`labbench.data.prep`).

A table WITHOUT a target (``target`` None or ``""``; the map and group families learn from the
inputs alone) has the task ``"unsupervised"``, no classes, ``y`` all zeros (float64: one value
per row, so the splitting and fold code keeps working) and keeps every row. An optional ``label``
column names something known about each row (a machine state, a species) to show beside the
groups found: it is never an input and never used in training; its values are kept as text in
``Table.labels`` (``category_text``; None where empty).
"""

from __future__ import annotations

import hashlib
import logging
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Mapping, Sequence

import numpy as np
import pandas as pd

from labbench.errors import DataError
from labbench.data.reading import names_text, read_file, show
from labbench.data.roles import (FORCE_REGRESSION, TASKS, as_float, category_text, check_kinds,
                                 class_labels, infer_kinds, infer_task, is_numeric, stray_cells)
from labbench.data.screen import screen_columns
from labbench.nets.metrics import UNSUPERVISED   # the task of a table without a target

log = logging.getLogger("labbench.data")

MISSING_POLICIES = ("impute", "drop")


@dataclass(frozen=True)
class Table:
    path: str
    frame: pd.DataFrame              # the feature columns only, original values, index 0..n-1
    target: str                      # "" for a table without a target
    features: tuple[str, ...]        # file order, minus target, label, ignored, constant
    kinds: Mapping[str, str]         # feature -> "numeric" | "categorical"
    task: str                        # "regression" | "binary" | "multiclass" | "unsupervised"
    classes: tuple[str, ...] | None  # sorted class labels as strings; y holds codes into it
    y: np.ndarray                    # float64 (regression; zeros without a target) or int64 codes
    ids: np.ndarray | None           # values of the first ignored column, else None
    id_column: str | None
    sha256: str                      # of the file's bytes
    warnings: tuple[str, ...]
    label: str | None = None         # a column shown beside the groups (never an input)
    labels: np.ndarray | None = None  # its values as text (object array, None where empty)

    @property
    def has_target(self) -> bool:
        return self.task != UNSUPERVISED

    @property
    def n_rows(self) -> int:
        return int(len(self.y))

    @property
    def numeric(self) -> tuple[str, ...]:
        return tuple(f for f in self.features if self.kinds[f] == "numeric")

    @property
    def categorical(self) -> tuple[str, ...]:
        return tuple(f for f in self.features if self.kinds[f] == "categorical")


def _lines_text(lines: np.ndarray, limit: int = 5) -> str:
    shown = ", ".join(str(int(x)) for x in lines[:limit])
    return ("line " if len(lines) == 1 else "lines ") + shown + (", ..." if len(lines) > limit else "")


def load_table(path: str | Path, target: str | None, *, ignore: Sequence[str] = (),
               kinds: Mapping[str, str] | None = None, task: str | None = None,
               missing: str = "impute", missing_markers: Sequence[str] = (),
               thousands: str | None = None, decimal: str | None = None,
               keep: Sequence[str] = (), label: str | None = None) -> Table:
    """Read ``path`` and make a :class:`Table` with ``target`` as the column to predict
    (None or ``""``: no target, the task is "unsupervised"; ``label`` then names a column kept
    beside the rows, never an input).

    ``missing_markers`` add to the usual markers of a missing cell (see
    :data:`labbench.data.reading.MISSING_MARKERS`); ``thousands`` / ``decimal`` declare the number
    format; ``keep`` lists columns to use as inputs even when they look like row ids (so does
    giving a column's kind in ``kinds``).
    """
    where = str(path)
    target = target or ""
    if task is not None and not target:
        raise DataError(f"{where}: task = {show(task)} but no target is named; a table without a "
                        "target has no task to set: leave task out, or name the target")
    if missing not in MISSING_POLICIES:
        raise DataError(f"{where}: missing = {show(missing)}; use 'impute' (fill per fold) or 'drop' (drop rows)")
    if task is not None and task not in TASKS:
        raise DataError(f"{where}: task = {show(task)}; use one of {', '.join(TASKS)} (or leave it out)")
    ignore = (ignore,) if isinstance(ignore, str) else tuple(ignore)
    keep = (keep,) if isinstance(keep, str) else tuple(keep)
    markers = (missing_markers,) if isinstance(missing_markers, str) else tuple(missing_markers)
    read = read_file(path, missing_markers=markers, thousands=thousands, decimal=decimal)
    frame, lines, notes = read.frame, read.lines, list(read.warnings)
    columns = [str(c) for c in frame.columns]

    if target and target not in columns:
        raise DataError(f"{where}: no column {show(target)} for the target; the columns are {names_text(columns)}")
    _check_label(label, target, columns, where, ignore, keep, kinds)
    for key, listed in (("ignore", ignore), ("keep", keep)):
        for col in listed:
            if col not in columns:
                raise DataError(f"{where}: {key}: no column {show(col)}; the columns are {names_text(columns)}")
            if col == target:
                raise DataError(f"{where}: {key}: {show(col)} is the target; remove it from {key}")
    overrides = check_kinds(kinds, columns, target, where)
    ignored = set(ignore)
    for key, listed in (("kinds", overrides), ("keep", keep)):
        for col in listed:
            if col in ignored:
                raise DataError(f"{where}: {key}: {show(col)} is ignored; remove it from {key} or from ignore")

    # rows without a target are of no use: drop them (with a warning); without a target every
    # row is kept
    rows = np.ones(len(frame), dtype=bool)
    if target:
        y_raw = frame[target]
        no_target = y_raw.isna().to_numpy()
        if no_target.all():
            raise DataError(f"{where}: the target column {show(target)} is empty in every row; "
                            "choose another target or fill it in")
        rows = ~no_target
        if no_target.any():
            notes.append(f"{where}: dropped {int(no_target.sum())} row(s) with no value in the target "
                         f"{show(target)} ({_lines_text(lines[no_target])})")

    features = [c for c in columns if c not in (target, label) and c not in ignored]
    if not features:
        besides = " and ".join(filter(None, (f"the target {show(target)}" if target else "",
                                             f"the label {show(label)}" if label else "",
                                             "the ignored ones" if ignored else "")))
        raise DataError(f"{where}: no feature columns left" + (f" besides {besides}" if besides else "")
                        + "; the table needs at least one input column")
    kinds_ = infer_kinds(frame[features])
    kinds_.update(overrides)
    feats = frame[features].copy()
    for col in features:
        if col not in overrides or (kinds_[col] == "numeric" and not is_numeric(feats[col])):
            # a mostly numeric text column (or one declared numeric) with stray text cells
            bad = stray_cells(feats[col], always=col in overrides)
            if bad is not None:
                _stray_error(where, col, feats[col], bad, lines)
        if kinds_[col] == "numeric" and not is_numeric(feats[col]):
            feats[col] = as_float(feats[col], col, where, lines)
        if kinds_[col] == "numeric":
            _check_finite(feats[col], col, where, lines)

    # constant, empty and id-like columns carry nothing to learn from (judged on the rows with a
    # target, before missing = "drop" so an empty column does not take every row with it; the
    # constant check again after)
    features, dropped = screen_columns(feats.loc[rows], features, where, forced=set(keep) | set(overrides))
    notes.extend(dropped)
    if missing == "drop":
        incomplete = feats[features].isna().any(axis=1).to_numpy() & rows
        if incomplete.any():
            notes.append(f"{where}: dropped {int(incomplete.sum())} row(s) with missing values "
                         f"({_lines_text(lines[incomplete])}) as missing = 'drop' asks")
            rows &= ~incomplete
        if not rows.any():
            raise DataError(f"{where}: no row is complete, so missing = 'drop' leaves nothing; "
                            "use missing = 'impute' or ignore the emptiest columns")
        features, dropped = screen_columns(feats.loc[rows], features, where, ids=False)
        notes.extend(dropped)

    feats = feats.loc[rows, features].reset_index(drop=True)
    lines_kept = lines[rows]
    categorical = [c for c in features if kinds_[c] == "categorical"]
    distinct = feats[categorical].nunique(dropna=True)
    for col in categorical:
        if distinct[col] > 20 and distinct[col] > 0.5 * len(feats) and col not in keep:
            notes.append(f"{where}: column {show(col)} has {int(distinct[col])} different values in "
                         f"{len(feats)} rows (an id or free text?); consider ignoring it")
    feats = feats[features]
    kinds_final = {c: kinds_[c] for c in features}

    if target:
        y_kept = frame[target].loc[rows].reset_index(drop=True)
        task_, classes, y = _target(y_kept, target, task, where, lines_kept)
    else:
        task_, classes, y = UNSUPERVISED, None, np.zeros(len(feats), dtype=np.float64)
    labels = category_text(frame[label].loc[rows].reset_index(drop=True)) if label else None

    id_column = next(iter(ignore), None)
    ids = frame[id_column].loc[rows].to_numpy() if id_column is not None else None
    for note in notes[len(read.warnings):]:
        log.warning(note)
    return Table(path=where, frame=feats, target=target, features=tuple(features), kinds=kinds_final,
                 task=task_, classes=classes, y=y, ids=ids, id_column=id_column,
                 sha256=hashlib.sha256(read.raw).hexdigest(), warnings=tuple(notes),
                 label=label or None, labels=labels)


def _check_label(label: str | None, target: str, columns: list[str], where: str,
                 ignore: Sequence[str], keep: Sequence[str], kinds: Mapping[str, str] | None) -> None:
    """The label column exists and has no other role (it is shown, never learnt from)."""
    if not label:
        return
    if label not in columns:
        raise DataError(f"{where}: label: no column {show(label)}; the columns are {names_text(columns)}")
    if label == target:
        raise DataError(f"{where}: label: {show(label)} is the target; name another column or leave label out")
    for key, listed in (("ignore", ignore), ("keep", keep), ("kinds", tuple(kinds or ()))):
        if label in listed:
            raise DataError(f"{where}: {key}: {show(label)} is the label, which is never an input; "
                            f"remove it from {key}")


_THOUSANDS_COMMA = re.compile(r"[+-]?\d{1,3}(,\d{3})+(\.\d+)?")
_THOUSANDS_POINT = re.compile(r"[+-]?\d{1,3}(\.\d{3})+(,\d+)?")
_DECIMAL_COMMA = re.compile(r"[+-]?\d*,\d+")


def _stray_error(where: str, col: str, series: pd.Series, bad: np.ndarray, lines: np.ndarray) -> None:
    """One line: the column, the lines and values that are not numbers, and the ways out."""
    values = [str(series.iloc[int(p)]).strip() for p in bad]
    shown = ", ".join(f"line {int(lines[int(p)])} {show(v, 20)}" for p, v in zip(bad[:3], values[:3]))
    more = f", ... ({len(bad)} in all)" if len(bad) > 3 else ""
    if any(_THOUSANDS_COMMA.fullmatch(v) for v in values):
        fmt = ', declare the number format (thousands = ",")'
    elif any(_THOUSANDS_POINT.fullmatch(v) for v in values):
        fmt = ', declare the number format (thousands = "." and decimal = ",")'
    elif any(_DECIMAL_COMMA.fullmatch(v) for v in values):
        fmt = ', declare the number format (decimal = ",")'
    else:
        fmt = ""
    words = list(dict.fromkeys(v for v in values if v and not any(ch.isdigit() for ch in v)))[:2]
    markers = ", ".join(show_marker(w) for w in words) if words else '"unknown"'
    raise DataError(f"{where}: column {show(col)} holds numbers but {len(bad)} cell(s) do not: {shown}{more}; "
                    f"correct them, declare them missing in [data] (missing_markers = [{markers}]){fmt}, "
                    'or give the column the kind "categorical" in kinds')


def show_marker(text: str) -> str:
    """A TOML string for a message: double quotes, shortened, on one line."""
    text = text.replace("\\", "\\\\").replace('"', '\\"').replace("\n", "\\n").replace("\r", "\\r")
    return f'"{text[:20]}"'


def _check_finite(series: pd.Series, col: str, where: str, lines: np.ndarray) -> None:
    v = series.to_numpy(dtype=np.float64, na_value=np.nan)
    bad = np.isinf(v)
    if bad.any():
        pos = int(np.argmax(bad))
        raise DataError(f"{where}: column {show(col)}, line {int(lines[pos])}: {v[pos]} is not a finite "
                        "number; replace it with a real value or leave it empty for missing")


def _target(y: pd.Series, target: str, task: str | None, where: str, lines: np.ndarray):
    """(task, classes, y) for the kept target values."""
    text_target = not is_numeric(y)
    if text_target and (task == "regression" or (task is None and _mostly_numbers(y))):
        y = pd.Series(as_float(y, target, where, lines, fix="fix that value, or leave it empty to drop the row"),
                      name=target)
        text_target = False
    if not text_target and not pd.api.types.is_bool_dtype(y):
        _check_finite(y, target, where, lines)
    distinct = int(y.nunique())
    if distinct < 2:
        raise DataError(f"{where}: the target {show(target)} has one value only ({show(y.iloc[0])}) "
                        "in every row with a target; a model needs at least two classes or values")
    if task is None:
        task = infer_task(y)
    if task == "regression":
        return task, None, y.to_numpy(dtype=np.float64)
    classes, codes = class_labels(y)
    if task == "binary" and len(classes) != 2:
        raise DataError(f"{where}: task = 'binary' needs 2 classes but the target {show(target)} has "
                        f"{len(classes)} ({_first(classes)}); use task = 'multiclass'"
                        + (f", or, {FORCE_REGRESSION}" if is_numeric(y) else ""))
    return task, classes, codes


def _first(classes: tuple[str, ...], limit: int = 6) -> str:
    return names_text(classes, limit)


def _mostly_numbers(y: pd.Series) -> bool:
    """A text target where nine in ten values are numbers is a number column with typos."""
    if y.nunique() <= 20:
        return False
    converted = pd.to_numeric(y, errors="coerce")
    return bool(converted.notna().mean() >= 0.9)


__all__ = ["Table", "load_table", "MISSING_POLICIES"]
