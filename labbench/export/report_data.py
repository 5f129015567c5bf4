"""What the HTML report shows, gathered from a stored search (and its winner files, if written).

``collect(source, study=None)`` opens the search read-only (a spec file or a database URL, the
same way ``labbench show`` does), turns every trial into plain values, finds ``winner.json`` in
the output folder when the search was finished with ``labbench run``, and looks at the data file
(rows, columns, whether its fingerprint still matches). Nothing is written anywhere.

For a search of a map or group family (``labbench.export.report_maps``) it also loads the saved
winner (``model.npz`` beside ``winner.json``) and keeps the data file's rows, from which the
groups' sizes and profiles are computed.
"""

from __future__ import annotations

import hashlib
import json
import logging
import os
import platform
import tomllib
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

from labbench.export.report_maps import MAP_FAMILIES

log = logging.getLogger("labbench.export.report")


@dataclass
class TrialRow:
    number: int
    state: str                      # a key of labbench.search.states (complete, pruned, ...)
    value: float | None
    params: dict[str, Any]
    settings: dict[str, Any]
    fold_scores: list[float]
    cv_std: float | None
    curve: dict[str, list]
    duration_s: float | None
    epochs_run: int | None
    end_reason: str


@dataclass
class ReportData:
    study_name: str
    storage: str                    # URL, password masked
    attrs: dict[str, Any]           # study user attrs (the storage contract)
    direction: str
    trials: list[TrialRow]
    spec: dict[str, Any]            # the parsed spec text ({} when the study has none)
    spec_path: str | None
    winner: dict[str, Any] | None   # winner.json, when found
    winner_path: str | None
    data: dict[str, Any] = field(default_factory=dict)
    out_dir: str | None = None      # the search's output folder (default report place)
    machine: dict[str, Any] = field(default_factory=dict)
    study: Any = None               # the open Optuna study (for importance when no winner.json)
    model: Any = None               # map searches: the saved winner (labbench.model.TrainedModel)
    model_path: str | None = None
    rows: Any = None                # map searches: the data file's rows (pandas.DataFrame) or None


def _state(trial) -> str:
    from labbench.search.states import trial_key

    return trial_key(trial)


def _row(trial) -> TrialRow:
    a = trial.user_attrs
    value = trial.value if trial.state.name == "COMPLETE" else None
    return TrialRow(
        number=int(trial.number), state=_state(trial), value=None if value is None else float(value),
        params=dict(trial.params), settings=dict(a.get("settings") or {}),
        fold_scores=[float(s) for s in a.get("fold_scores") or []],
        cv_std=a.get("cv_std"), curve=dict(a.get("curve") or {}),
        duration_s=a.get("duration_s") or (trial.duration.total_seconds() if trial.duration else None),
        epochs_run=a.get("epochs_run"), end_reason=str(a.get("end_reason") or ""),
    )


def _output_folders(spec_path: str | None, study_name: str) -> list[Path]:
    """Where ``labbench run`` writes the winner files (its default output folder), then the spec's folder."""
    if not spec_path:
        from labbench.fileio import safe_file_name

        return [Path.cwd() / f"{safe_file_name(study_name)}_out", Path.cwd()]
    src = Path(spec_path).resolve()
    return [src.parent / f"{src.stem}_out", src.parent]


def find_winner(folders: list[Path], study_name: str, data_sha256: str | None):
    """(winner.json dict, path) of this search in the first folder that has one, else (None, None)."""
    for folder in folders:
        path = folder / "winner.json"
        if not path.is_file():
            continue
        try:
            summary = json.loads(path.read_text(encoding="utf-8"))
        except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
            log.warning("%s: cannot be read (%s); the report leaves the winner section short", path, exc)
            continue
        same_search = summary.get("study_name") in (None, study_name)
        same_data = data_sha256 is None or summary.get("data_sha256") in (None, data_sha256)
        if same_search and same_data:
            return summary, str(path)
        log.info("%s belongs to another search or data file; not used", path)
    return None, None


def describe_data(attrs: dict[str, Any]) -> dict[str, Any]:
    """Rows, columns and fingerprint of the search's data (the file itself is read when present)."""
    info: dict[str, Any] = {
        "path": attrs.get("data_path"), "sha256": attrs.get("data_sha256"), "task": attrs.get("task"),
        "train_rows": attrs.get("n_rows"), "holdout_rows": attrs.get("n_holdout"),
        "classes": attrs.get("classes"), "columns": None, "file_rows": None, "changed": None,
    }
    path = info["path"]
    if path and Path(path).is_file():
        from labbench.data import infer_kinds, read_csv
        from labbench.errors import DataError

        try:
            frame = read_csv(path)
            info["columns"] = infer_kinds(frame)
            info["file_rows"] = int(len(frame))
            digest = hashlib.sha256(Path(path).read_bytes()).hexdigest()
            info["changed"] = bool(info["sha256"]) and digest != info["sha256"]
        except (DataError, OSError) as exc:
            log.info("data file not described: %s", exc)
    return info


def map_winner(folders: list[Path], winner_path: str | None, data_sha256: str | None = None):
    """(model, path) of the saved winner of a map search: ``model.npz`` beside winner.json (or in
    the output folder) trained on this data; (None, None) when there is none or it cannot be read
    (logged)."""
    from labbench.errors import LabbenchError
    from labbench.export.bundle import load_bundle

    places = ([Path(winner_path).parent] if winner_path else []) + list(folders[:1])
    for folder in places:
        path = folder / "model.npz"
        if path.is_file():
            try:
                model = load_bundle(path)
            except LabbenchError as exc:
                log.warning("%s", exc)
                continue
            if data_sha256 and model.data_sha256 and model.data_sha256 != data_sha256:
                log.info("%s was trained on another data file; not used", path)
                continue
            return model, str(path)
    return None, None


def read_rows(path: str | None):
    """The data file's rows as labbench reads them, or None when it cannot be read."""
    if not path or not Path(path).is_file():
        return None
    from labbench.data import read_csv
    from labbench.errors import DataError

    try:
        return read_csv(path)
    except (DataError, OSError) as exc:
        log.info("data rows not read: %s", exc)
        return None


def is_map_search(attrs: dict[str, Any], spec: dict[str, Any], winner: dict[str, Any] | None) -> bool:
    family = ((spec or {}).get("model") or {}).get("family") or (winner or {}).get("family")
    return family in MAP_FAMILIES or attrs.get("task") == "unsupervised"


def machine_info() -> dict[str, Any]:
    from labbench import __version__

    return {"labbench": __version__, "python": platform.python_version(),
            "platform": platform.platform(), "machine": platform.machine(),
            "processor": platform.processor() or "unknown", "cpus": os.cpu_count(),
            "written": datetime.now(timezone.utc).isoformat(timespec="seconds")}


def collect(source: Any, study: str | None = None) -> ReportData:
    """Everything the report needs; ``source`` is a spec path, a database URL or an Optuna study."""
    from labbench.search.storage import mask_url

    if hasattr(source, "get_trials") and hasattr(source, "study_name"):
        opened, shown = source, "(a search opened in Python)"
    else:
        from labbench.search.stored import open_for_reading

        opened, shown = open_for_reading(str(source), study, None)
        shown = mask_url(shown)
    attrs = dict(opened.user_attrs)
    spec_text = attrs.get("spec_toml") or ""
    try:
        spec = tomllib.loads(spec_text) if spec_text else {}
    except tomllib.TOMLDecodeError:
        spec = {}
    spec_path = attrs.get("spec_path")
    if spec_path is None and not (isinstance(source, str) and "://" in source) and not hasattr(source, "get_trials"):
        spec_path = str(Path(source).resolve())
    trials = [_row(t) for t in opened.get_trials(deepcopy=False)]
    folders = _output_folders(spec_path, opened.study_name)
    winner, winner_path = find_winner(folders, opened.study_name, attrs.get("data_sha256"))
    model = model_path = rows = None
    if is_map_search(attrs, spec, winner):
        model, model_path = map_winner(folders, winner_path, attrs.get("data_sha256"))
        rows = read_rows(attrs.get("data_path"))
    return ReportData(
        study_name=opened.study_name, storage=shown, attrs=attrs,
        direction=str(attrs.get("direction") or opened.direction.name.lower()),
        trials=trials, spec=spec, spec_path=spec_path, winner=winner, winner_path=winner_path,
        data=describe_data(attrs), out_dir=str(folders[0]), machine=machine_info(), study=opened,
        model=model, model_path=model_path, rows=rows,
    )
