"""Predictions for a CSV file from a saved model bundle (what ``labbench predict`` runs).

Column handling (documented for users):
  * every input column of the model must be present (by name; order does not matter) - else a
    one-line error names the missing ones;
  * other columns are ignored (one line on the log says which); the model's id column, when the
    data has it, is copied in front of the predictions;
  * a numeric column must hold numbers (empty = missing); text there is an error naming the column
    and the file line;
  * a category the model never saw is encoded as all zeros (no category), with one warning line
    per column naming the column and the values.

What is written: ``predicted_<target>`` (and ``proba_<class>`` per class) for a network; for a
model without a target (a map or group model) ``unit``, ``group`` and ``distance`` (units and
groups numbered from 0, the distance in the scaled input space) or ``component_1`` ..
``component_c`` (Hebbian features). The id column, when present, comes first.
"""

from __future__ import annotations

import logging
import os
from pathlib import Path

import numpy as np
import pandas as pd

from labbench.errors import DataError
from labbench.model import UNSUPERVISED, TrainedModel

log = logging.getLogger("labbench.export.predict")


def default_output(data_path: str | os.PathLike) -> Path:
    data = Path(data_path)
    return data.with_name(f"{data.stem}_predictions.csv")


def prediction_column(model: TrainedModel) -> str:
    return f"predicted_{model.target}"


def _short(values, limit: int = 6) -> str:
    shown = ", ".join(repr(v) for v in values[:limit])
    return shown + (f", ... ({len(values)} in all)" if len(values) > limit else "")


def check_frame(model: TrainedModel, frame: pd.DataFrame, source: str,
                lines: np.ndarray | None = None) -> None:
    """Refuse what cannot be predicted; log what is ignored or unseen (see the module docstring)."""
    from labbench.data.roles import as_float, category_text

    missing = [c for c in model.features if c not in frame.columns]
    if missing:
        raise DataError(f"{source}: missing column(s) {', '.join(missing)}; the model needs "
                        f"{', '.join(model.features)} (any order, extra columns are ignored)")
    extra = [str(c) for c in frame.columns if c not in model.features and c != model.id_column]
    if extra:
        log.warning("%s: ignored column(s) the model does not use: %s", source, _short(extra))
    state = model.preprocessor.to_state()
    for col in model.features:
        if model.kinds[col] == "numeric":
            values = as_float(frame[col], col, where=source, lines=lines)
            bad = np.flatnonzero(np.isinf(values))
            if bad.size:
                pos = int(bad[0])
                place = f"line {int(lines[pos])}" if lines is not None else f"row {pos + 1}"
                raise DataError(f"{source}: column {col!r}, {place}: {values[pos]} is not a finite number; "
                                "replace it with a real value or leave it empty for missing")
    for col, cats in zip(state["categorical"], state["categories"]):
        text = category_text(frame[col])
        present = text[pd.notna(text)]
        unseen = sorted(set(present.tolist()) - set(cats))
        if unseen:
            log.warning("%s: column %r has value(s) the model never saw (%s); they are encoded as no "
                        "category (all zeros)", source, col, _short(unseen))


def predict_frame(model: TrainedModel, frame: pd.DataFrame, source: str = "the data",
                  lines: np.ndarray | None = None) -> pd.DataFrame:
    """The predictions table: [id column,] predicted_<target>[, proba_<class> ...]; a model
    without a target: [id column,] unit, group, distance (or component_1..c)."""
    check_frame(model, frame, source, lines)
    out = pd.DataFrame(index=range(len(frame)))
    if model.id_column and model.id_column in frame.columns:
        out[model.id_column] = frame[model.id_column].to_numpy()
    labels = model.predict(frame, source)
    if model.task == UNSUPERVISED:
        for col in labels.columns:
            name = col if col not in out.columns else f"{col}_predicted"   # an id column "unit"
            out[name] = labels[col].to_numpy()
        return out
    if model.task == "regression":
        out[prediction_column(model)] = np.asarray(labels, dtype=np.float64)
    else:
        out[prediction_column(model)] = [str(v) for v in labels]
        proba = model.predict_proba(frame, source)
        for j, cls in enumerate(model.classes):
            out[f"proba_{cls}"] = np.asarray(proba[:, j], dtype=np.float64)
    return out


def predict_file(bundle_path: str | os.PathLike, data_path: str | os.PathLike,
                 out_path: str | os.PathLike | None = None) -> tuple[Path, int]:
    """Load the bundle, predict every row of the CSV, write the table; returns (path, rows)."""
    from labbench.data.reading import read_file
    from labbench.export.bundle import load_bundle

    out = output_path(bundle_path, data_path, out_path)      # checked before any work
    model = load_bundle(bundle_path)
    read = read_file(data_path)
    table = predict_frame(model, read.frame, str(data_path), read.lines)
    write_csv(table, out)
    return out, len(table)


def output_path(bundle_path: str | os.PathLike, data_path: str | os.PathLike,
                out_path: str | os.PathLike | None = None) -> Path:
    """Where ``predict`` writes: ``-o`` (a folder gets the default file name inside it), else
    ``<data name>_predictions.csv`` beside the data; never the bundle or the data file."""
    from labbench.fileio import check_output

    out = Path(out_path) if out_path is not None else default_output(data_path)
    if out.is_dir():
        out = out / default_output(data_path).name
    return check_output(out, inputs=(("model bundle", bundle_path), ("data file", data_path)),
                        what="predictions file")


def write_csv(table: pd.DataFrame, out: str | os.PathLike) -> Path:
    """The table as CSV, written atomically; text cells a spreadsheet would run as a formula get a
    leading ``'`` (labbench.fileio.csv_safe_cell)."""
    from labbench.fileio import atomic_path, csv_safe_cell

    safe = table.copy()
    for col in safe.columns:
        if not pd.api.types.is_numeric_dtype(safe[col]):
            safe[col] = safe[col].map(csv_safe_cell)
    safe.columns = [csv_safe_cell(str(c)) for c in safe.columns]
    with atomic_path(out) as tmp:
        safe.to_csv(tmp, index=False)
    return Path(out)
