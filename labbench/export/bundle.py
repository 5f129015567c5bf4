"""The model bundle: one ``.npz`` file that holds a trained model, readable with numpy alone.

Entries (all plain numeric or unicode arrays; saved and loaded with ``allow_pickle=False``):

``meta``                    uint8 array: UTF-8 JSON metadata (format name and version, what the
                            model predicts, settings, scores, data fingerprint, caution text)
``layer{i}_W``, ``layer{i}_b``  the network family's record, layer i = 0..n-1: W (fan_in,
                            fan_out), b (fan_out,) (another family writes its own entries,
                            ``Family.bundle_entries``)
``numeric_names``           unicode (n_num,): numeric inputs, in the order of the network's inputs
``numeric_impute`` / ``numeric_center`` / ``numeric_scale``  float64 (n_num,):
                            x' = (x if present else impute - center) / scale
``categorical_names``       unicode (n_cat,); ``categorical_impute`` unicode (n_cat,): the value
                            used for a missing entry
``categories{j}``           unicode (k_j,): the one-hot order of categorical column j; a value not
                            in the list encodes as all zeros
Network inputs: all numeric columns, then each categorical column's one-hot block.

Target scaling (format 2). A regression network is trained on a scaled target; the metadata's
``preprocessing.target`` = ``{"method": "standard" | "log" | "none", "center": float, "scale":
float}`` maps its output z back to the target's own units: ``center + scale * z`` (standard,
none) or ``exp(center + scale * z)`` (log), in float64. A bundle whose network needs that map is
written as format 2, so a labbench that does not know it refuses the file instead of predicting
in the wrong units; any other bundle is written as format 1. A format-1 bundle (or one without
the entry) loads with ``"none"``: its network gives target units directly.

Model families (format 3). The metadata's ``family`` names the model family
(``labbench.families``) whose entries the bundle holds; loading dispatches on it. A bundle
without the key (written before families existed) is the network family. A network bundle keeps
format 1 or 2 as above; a bundle of any other family is written as format 3, so a labbench that
does not know families refuses it instead of misreading it.

Models without a target (format 3, the map and group families of ``labbench.maps``). ``task`` is
``"unsupervised"``, ``target`` is ``""``, ``classes`` null and there is no target scaling; the
family's entries are described in ``labbench.families.maps_export`` (``prototypes``,
``unit_group`` and the metadata entry ``maps`` with the grid; or ``components``). A family that
learns without a target must hold an unsupervised model and the other way round.
"""

from __future__ import annotations

import json
import math
import os
import tempfile
import zipfile
from datetime import datetime, timezone
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from labbench import __version__
from labbench.errors import BundleError
from labbench.families import DEFAULT as NETWORK
from labbench.families import get_family
from labbench.model import UNSUPERVISED, TrainedModel
from labbench.nets.losses import TASKS

FORMAT_NAME = "labbench-model-bundle"
FORMAT_VERSION = 3          # the newest format this labbench reads and writes
CAUTION = (
    "A cross-validated score is an estimate of how the model does on new rows like the training "
    "data, not a guarantee. Decisions that affect people, money or safety need independent "
    "validation on fresh data and must follow the local rules of that field."
)
META_KEYS = ("format", "format_version", "labbench_version", "created", "data_sha256", "task",
             "target", "features", "kinds", "classes", "settings", "metric", "scores",
             "id_column", "preprocessing", "caution")
_ZIP_MAGIC = (b"PK\x03\x04", b"PK\x05\x06")


def json_safe(value: Any) -> Any:
    """Plain JSON values: numpy scalars and arrays to Python, tuples to lists, NaN/inf to None."""
    if isinstance(value, Mapping):
        return {str(k): json_safe(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [json_safe(v) for v in value]
    if isinstance(value, np.ndarray):
        return json_safe(value.tolist())
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if value is None or isinstance(value, (bool, int, float, str)):
        return value
    return str(value)


def _unicode(values) -> np.ndarray:
    return np.array([str(v) for v in values], dtype=np.str_).reshape(-1)


def bundle_arrays(model: TrainedModel) -> dict[str, np.ndarray]:
    """Every entry of the bundle file for ``model`` (metadata included)."""
    state = model.preprocessor.to_state()
    family = get_family(model.family)
    arrays, family_meta = family.bundle_entries(model.weights)
    arrays = dict(arrays)
    arrays["numeric_names"] = _unicode(state["numeric"])
    for key in ("impute", "center", "scale"):
        arrays[f"numeric_{key}"] = np.asarray(state[key], dtype=np.float64).reshape(-1)
    arrays["categorical_names"] = _unicode(state["categorical"])
    arrays["categorical_impute"] = _unicode(state["cat_impute"])
    for j, cats in enumerate(state["categories"]):
        arrays[f"categories{j}"] = _unicode(cats)
    scores = dict(model.scores)
    for key in ("cv_mean", "cv_std", "holdout_score"):
        scores.setdefault(key, None)
    preprocessing: dict[str, Any] = {"scaling": state["scaling"]}
    target = model.target_scaler if model.task == "regression" else None
    if target is not None and not target.is_identity:
        preprocessing["target"] = target.to_state()
    meta = {
        "format": FORMAT_NAME,
        "format_version": 3 if family.name != NETWORK else 2 if "target" in preprocessing else 1,
        "family": family.name,
        "labbench_version": __version__,
        "created": datetime.now(timezone.utc).isoformat(timespec="seconds"),
        "data_sha256": model.data_sha256,
        "task": model.task,
        "target": model.target,
        "features": list(model.features),
        "kinds": {f: model.kinds[f] for f in model.features},
        "classes": list(model.classes) if model.classes is not None else None,
        "settings": dict(model.settings),
        "metric": model.metric,
        "scores": scores,
        "id_column": model.id_column,
        **family_meta,
        "preprocessing": preprocessing,
        "caution": CAUTION,
    }
    text = json.dumps(json_safe(meta), indent=1, sort_keys=True, allow_nan=False)
    arrays["meta"] = np.frombuffer(text.encode("utf-8"), dtype=np.uint8).copy()
    return arrays


def save_bundle(model: TrainedModel, path: str | os.PathLike) -> Path:
    """Write ``model`` as one ``.npz`` file (``.npz`` is added when the name has no suffix).

    The file is written to a temporary name first and then renamed, so a crash never leaves a
    half-written bundle under the final name.
    """
    target = Path(path)
    if not target.suffix:
        target = target.with_suffix(".npz")
    arrays = bundle_arrays(model)
    target.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=".bundle-", suffix=".npz", dir=target.parent)
    try:
        with os.fdopen(fd, "wb") as handle:
            np.savez_compressed(handle, allow_pickle=False, **arrays)
        os.replace(tmp, target)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return target


# -- loading ----------------------------------------------------------------------------------

def _fail(name: str, problem: str, fix: str = "save the model again from labbench") -> BundleError:
    return BundleError(f"{name}: {problem}; {fix}")


def read_entries(path: str | os.PathLike) -> dict[str, np.ndarray]:
    """All arrays of a bundle file, refusing anything that is not a plain numpy archive."""
    name = str(path)
    try:
        with open(path, "rb") as handle:
            head = handle.read(4)
    except FileNotFoundError:
        raise BundleError(f"{name}: no such file; check the path of the model bundle") from None
    except IsADirectoryError:
        raise BundleError(f"{name}: is a folder; give the path of the model bundle (.npz)") from None
    except OSError as exc:
        raise BundleError(f"{name}: cannot be read ({exc.strerror or exc}); check the path") from None
    if head not in _ZIP_MAGIC:
        raise _fail(name, "is not a labbench model bundle (not a .npz archive)",
                    "give the .npz file labbench saved")
    arrays: dict[str, np.ndarray] = {}
    try:
        with np.load(path, allow_pickle=False) as archive:
            for key in archive.files:
                arrays[key] = archive[key]
    except ValueError as exc:
        if "pickle" in str(exc).lower():
            raise _fail(name, "holds a pickled Python object, which labbench bundles never do; "
                        "it was refused without being run", "use a bundle saved by labbench") from None
        raise _fail(name, f"is damaged ({str(exc).splitlines()[0] if str(exc) else 'bad array'})") from None
    except (zipfile.BadZipFile, OSError, EOFError, KeyError, zipfile.LargeZipFile) as exc:
        raise _fail(name, f"is damaged or truncated ({type(exc).__name__}: "
                    f"{str(exc).splitlines()[0] if str(exc) else 'unreadable'})") from None
    except Exception as exc:  # zlib.error and other decompression failures
        raise _fail(name, f"is damaged or truncated ({type(exc).__name__})") from None
    return arrays


def read_metadata(arrays: Mapping[str, np.ndarray], name: str) -> dict[str, Any]:
    """The validated metadata dict of a bundle (format name, version, required keys)."""
    if "meta" not in arrays:
        listed = ", ".join(sorted(arrays)[:8]) or "nothing"
        raise _fail(name, f"is a numpy archive but not a labbench model bundle (no 'meta' entry; it holds {listed})",
                    "give the .npz file labbench saved")
    raw = arrays["meta"]
    if raw.dtype != np.uint8 or raw.ndim != 1:
        raise _fail(name, f"has a 'meta' entry of dtype {raw.dtype} and {raw.ndim} dimension(s), expected uint8 bytes")
    try:
        meta = json.loads(raw.tobytes().decode("utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise _fail(name, f"has unreadable metadata ({type(exc).__name__})") from None
    if not isinstance(meta, dict) or meta.get("format") != FORMAT_NAME:
        found = meta.get("format") if isinstance(meta, dict) else type(meta).__name__
        raise _fail(name, f"is not a labbench model bundle (format {found!r}, expected {FORMAT_NAME!r})",
                    "give the .npz file labbench saved")
    version = meta.get("format_version")
    if not isinstance(version, int) or isinstance(version, bool) or version < 1:
        raise _fail(name, f"has an invalid bundle format version {version!r}")
    if version > FORMAT_VERSION:
        raise _fail(name, f"was written in bundle format {version} by labbench "
                    f"{meta.get('labbench_version', '?')}; this labbench {__version__} reads format "
                    f"{FORMAT_VERSION}", "upgrade labbench to load it")
    missing = [k for k in META_KEYS if k not in meta]
    if missing:
        raise _fail(name, f"metadata lacks {', '.join(missing)}")
    return meta


def _entry(arrays: Mapping[str, np.ndarray], key: str, name: str, kind: str, ndim: int = 1) -> np.ndarray:
    """One array, checked for presence, dtype kind ('f' float, 'U' unicode) and dimensions."""
    if key not in arrays:
        raise _fail(name, f"lacks the entry {key!r}")
    arr = arrays[key]
    if arr.dtype.kind != kind or arr.ndim != ndim:
        want = {"f": "float", "U": "unicode text"}[kind]
        raise _fail(name, f"entry {key!r} is {arr.dtype} with shape {arr.shape}, expected {ndim}-D {want}")
    if kind == "f" and not np.all(np.isfinite(arr)):
        raise _fail(name, f"entry {key!r} holds NaN or infinite values")
    return arr


def _check_preprocessing(arrays, meta, name: str) -> dict[str, Any]:
    numeric = _entry(arrays, "numeric_names", name, "U").tolist()
    n_num = len(numeric)
    state: dict[str, Any] = {"scaling": (meta.get("preprocessing") or {}).get("scaling"), "numeric": numeric}
    for key in ("impute", "center", "scale"):
        arr = arrays.get(f"numeric_{key}")
        if arr is None or arr.dtype != np.float64 or arr.shape != (n_num,):
            got = "missing" if arr is None else f"{arr.dtype} {arr.shape}"
            raise _fail(name, f"entry 'numeric_{key}' is {got}, expected float64 ({n_num},) for {n_num} numeric column(s)")
        _entry(arrays, f"numeric_{key}", name, "f")
        state[key] = arr.tolist()
    if np.any(arrays["numeric_scale"] == 0):
        raise _fail(name, "entry 'numeric_scale' holds a zero (division by zero)")
    categorical = _entry(arrays, "categorical_names", name, "U").tolist()
    cat_impute = _entry(arrays, "categorical_impute", name, "U").tolist()
    if len(cat_impute) != len(categorical):
        raise _fail(name, f"entry 'categorical_impute' has {len(cat_impute)} values for "
                    f"{len(categorical)} categorical column(s)")
    categories = []
    for j in range(len(categorical)):
        # may be empty: a column with no value in the training rows contributes no inputs
        categories.append(_entry(arrays, f"categories{j}", name, "U").tolist())
    state.update(categorical=categorical, categories=categories, cat_impute=cat_impute)
    features, kinds = meta["features"], meta["kinds"]
    if (not isinstance(features, list) or not isinstance(kinds, dict)
            or sorted(features) != sorted(numeric + categorical) or len(set(features)) != len(features)):
        raise _fail(name, "the metadata's feature list does not match the preprocessing columns")
    for col in features:
        want = "numeric" if col in numeric else "categorical"
        if kinds.get(col) != want:
            raise _fail(name, f"column {col!r} is {kinds.get(col)!r} in the metadata but {want} in the preprocessing")
    return state


def _check_family(meta, name: str):
    """The bundle's model family; a bundle without the key is the network's (written before)."""
    from labbench.errors import SpecError

    family = meta.get("family", NETWORK)
    if not isinstance(family, str):
        raise _fail(name, f"metadata 'family' is {family!r}, expected the name of a model family")
    try:
        return get_family(family)
    except SpecError:
        raise _fail(name, f"holds a model of the family {family!r}, which this labbench does not know",
                    "load it where that family is installed (LABBENCH_FAMILIES, see DEVELOPERS.md)") from None


def _check_task(meta, name: str, family: Any = None) -> int:
    """The number of outputs the task needs (0 for a model without a target)."""
    task, classes = meta["task"], meta["classes"]
    needs_target = bool(getattr(family, "needs_target", True))
    if task == UNSUPERVISED or not needs_target:
        if task != UNSUPERVISED or needs_target:
            fam = getattr(family, "name", NETWORK)
            raise _fail(name, f"task {task!r} does not fit the {fam} family, which "
                        f"{'needs' if needs_target else 'learns without'} a target")
        if classes is not None:
            raise _fail(name, "a model without a target must not list classes")
        return 0
    if task not in TASKS:
        raise _fail(name, f"task {task!r} is not one of {', '.join(dict.fromkeys(TASKS + (UNSUPERVISED,)))}")
    if task == "regression":
        if classes is not None:
            raise _fail(name, "a regression model must not list classes")
        return 1
    if not isinstance(classes, list) or not all(isinstance(c, str) for c in classes):
        raise _fail(name, f"a {task} model needs its class labels as a list of text")
    if (task == "binary" and len(classes) != 2) or (task == "multiclass" and len(classes) < 3):
        raise _fail(name, f"a {task} model with {len(classes)} class(es) is not possible")
    return 1 if task == "binary" else len(classes)


def _check_target(meta, name: str):
    """The regression target scaler (``"none"`` when the bundle has none); None for classes."""
    from labbench.data import TargetScaler

    preprocessing = meta.get("preprocessing")
    state = preprocessing.get("target") if isinstance(preprocessing, dict) else None
    if meta["task"] != "regression":
        if state is not None:
            raise _fail(name, f"a {meta['task']} model must not have target scaling")
        return None
    try:
        return TargetScaler.from_state(state, str(meta["target"]))
    except ValueError as exc:
        raise _fail(name, f"has an invalid target scaling in its metadata ({exc})") from None


def load_bundle(path: str | os.PathLike) -> TrainedModel:
    """Read and validate a bundle; every problem is one :class:`BundleError` line."""
    from labbench.data import Preprocessor

    name = str(path)
    arrays = read_entries(path)
    meta = read_metadata(arrays, name)
    family = _check_family(meta, name)
    n_outputs = _check_task(meta, name, family)
    state = _check_preprocessing(arrays, meta, name)
    n_inputs = len(state["numeric"]) + sum(len(c) for c in state["categories"])
    record = family.from_bundle(arrays, meta, name, n_inputs, n_outputs)
    target_scaler = _check_target(meta, name)
    try:
        preprocessor = Preprocessor.from_state(state)
    except (ValueError, KeyError, TypeError) as exc:
        raise _fail(name, f"cannot be rebuilt ({type(exc).__name__}: {str(exc).splitlines()[0] if str(exc) else ''})") from None
    return TrainedModel(
        preprocessor=preprocessor, weights=record, task=meta["task"], target=str(meta["target"]),
        features=tuple(meta["features"]), kinds=dict(meta["kinds"]),
        classes=tuple(meta["classes"]) if meta["classes"] is not None else None,
        settings=dict(meta["settings"] or {}), metric=str(meta["metric"] or ""),
        scores=dict(meta["scores"] or {}), data_sha256=str(meta["data_sha256"] or ""),
        id_column=meta["id_column"], target_scaler=target_scaler, family=family.name,
    )


def bundle_metadata(path: str | os.PathLike) -> dict[str, Any]:
    """The metadata of a bundle (validated format and version), without building the model."""
    return read_metadata(read_entries(path), str(path))
