"""The model bundle: exact round trip, metadata, and a corpus of corrupt or foreign files."""

from __future__ import annotations

import json
import os
import pickle
import zipfile
from pathlib import Path

import numpy as np
import pytest

from labbench.errors import BundleError
from labbench.export import bundle_metadata, load_bundle, save_bundle
from labbench.export.bundle import FORMAT_NAME, FORMAT_VERSION, bundle_arrays


def test_round_trip_predicts_exactly_the_same(case, tmp_path):
    model, frame = case["model"], case["frame"]
    path = save_bundle(model, tmp_path / "winner")
    assert path.suffix == ".npz" and path.exists()
    loaded = load_bundle(path)
    rows = frame.iloc[case["holdout"]]
    assert np.array_equal(loaded.output(rows), model.output(rows))     # bit for bit
    assert np.array_equal(loaded.predict(rows), model.predict(rows))
    for W, b in loaded.weights.layers:
        assert W.dtype == np.float32 and b.dtype == np.float32
    assert loaded.task == model.task and loaded.classes == model.classes
    assert loaded.features == model.features and dict(loaded.kinds) == dict(model.kinds)
    assert loaded.id_column == "row_id" and loaded.settings == model.settings
    assert loaded.preprocessor.to_state() == model.preprocessor.to_state()


def test_file_reads_with_numpy_alone_and_holds_no_objects(trained, tmp_path):
    model = trained["multiclass"]["model"]
    path = save_bundle(model, tmp_path / "m.npz")
    with np.load(path, allow_pickle=False) as f:       # raises if any entry needed pickle
        kinds = {key: f[key].dtype.kind for key in f.files}
        meta = json.loads(f["meta"].tobytes().decode("utf-8"))
    assert set(kinds.values()) <= {"f", "U", "u"}
    # a classification model needs nothing of format 2 (target scaling), so it stays readable as 1
    assert meta["format"] == FORMAT_NAME and meta["format_version"] == 1 < FORMAT_VERSION
    for key in ("labbench_version", "created", "data_sha256", "task", "target", "features", "kinds",
                "classes", "settings", "metric", "scores", "id_column", "caution"):
        assert key in meta
    assert meta["scores"]["cv_mean"] == 0.5 and meta["scores"]["holdout_score"] == 0.5
    assert "not a guarantee" in meta["caution"] and "safety" in meta["caution"]
    assert bundle_metadata(path)["classes"] == ["class_0", "class_1", "class_2"]


# -- the corrupt / foreign corpus ----------------------------------------------------------------

def _write_npz(path: Path, arrays: dict) -> Path:
    with open(path, "wb") as handle:
        np.savez(handle, **arrays)
    return path


def _one_line(exc: BundleError, path: Path) -> str:
    text = str(exc)
    assert "\n" not in text and str(path) in text
    return text


class _Payload:
    """Unpickling this would create a marker file: proof of whether pickled code ran."""

    def __init__(self, marker: str):
        self.marker = marker

    def __reduce__(self):
        return (open, (self.marker, "w"))


@pytest.fixture()
def good(trained, tmp_path) -> tuple[Path, dict]:
    model = trained["binary"]["model"]
    return save_bundle(model, tmp_path / "good.npz"), bundle_arrays(model)


def test_truncated_file(good, tmp_path):
    path, _ = good
    bad = tmp_path / "truncated.npz"
    bad.write_bytes(path.read_bytes()[: path.stat().st_size // 2])
    with pytest.raises(BundleError) as err:
        load_bundle(bad)
    assert "damaged or truncated" in _one_line(err.value, bad)


def test_random_bytes_and_other_files(tmp_path):
    noise = tmp_path / "noise.npz"
    noise.write_bytes(np.random.default_rng(0).bytes(4096))
    plain_npy = tmp_path / "array.npz"
    np.save(open(plain_npy, "wb"), np.arange(3))
    for path in (noise, plain_npy):
        with pytest.raises(BundleError) as err:
            load_bundle(path)
        assert "not a labbench model bundle" in _one_line(err.value, path)
    with pytest.raises(BundleError, match="no such file"):
        load_bundle(tmp_path / "absent.npz")


def test_foreign_npz(tmp_path):
    path = _write_npz(tmp_path / "foreign.npz", {"weights": np.ones((2, 2)), "bias": np.zeros(2)})
    with pytest.raises(BundleError) as err:
        load_bundle(path)
    text = _one_line(err.value, path)
    assert "no 'meta' entry" in text and "bias, weights" in text
    meta = np.frombuffer(json.dumps({"format": "someone-else", "format_version": 1}).encode(), np.uint8)
    path2 = _write_npz(tmp_path / "foreign2.npz", {"meta": meta})
    with pytest.raises(BundleError, match="format 'someone-else'"):
        load_bundle(path2)


def _with_meta(arrays: dict, **changes) -> dict:
    meta = json.loads(arrays["meta"].tobytes().decode())
    meta.update(changes)
    return {**arrays, "meta": np.frombuffer(json.dumps(meta).encode(), np.uint8)}


def test_wrong_versions(good, tmp_path):
    _, arrays = good
    newer = _write_npz(tmp_path / "newer.npz", _with_meta(arrays, format_version=FORMAT_VERSION + 1))
    with pytest.raises(BundleError) as err:
        load_bundle(newer)
    assert "upgrade labbench" in _one_line(err.value, newer)
    for bad_version in (0, "1", None):
        path = _write_npz(tmp_path / "v.npz", _with_meta(arrays, format_version=bad_version))
        with pytest.raises(BundleError, match="invalid bundle format version"):
            load_bundle(path)


@pytest.mark.parametrize("change, expected", [
    (lambda a: a.update(layer0_W=a["layer0_W"][:-1]), "layer0_W has shape"),          # fan-in off by one
    (lambda a: a.update(layer1_W=a["layer1_W"][:, :0]), "layer1_b has shape"),       # last layer emptied
    (lambda a: a.update(layer0_b=a["layer0_b"][:-2]), "layer0_b has shape"),
    (lambda a: a.update(layer0_W=a["layer0_W"].astype(np.float64)), "mixes dtypes"),
    (lambda a: a.update(layer0_W=a["layer0_W"].astype(np.int32)), "expected 2-D float"),
    (lambda a: a.update(numeric_scale=a["numeric_scale"][:-1]), "numeric_scale"),
    (lambda a: a.update(numeric_center=a["numeric_center"].astype(np.float32)), "numeric_center"),
    (lambda a: a.update(categorical_impute=np.array(["x", "y"])), "categorical_impute"),
    (lambda a: a.pop("categories0"), "lacks the entry 'categories0'"),
    (lambda a: a.update(layer0_W=np.full_like(a["layer0_W"], np.nan)), "NaN or infinite"),
    (lambda a: a.update(layer2_W=np.ones((3, 1), np.float32)), "beyond the 2"),
    (lambda a: a.update(meta=a["meta"].astype(np.int64)), "expected uint8"),
])
def test_tampered_entries(good, tmp_path, change, expected):
    _, arrays = good
    arrays = dict(arrays)
    change(arrays)
    path = _write_npz(tmp_path / "tampered.npz", arrays)
    with pytest.raises(BundleError) as err:
        load_bundle(path)
    assert expected in _one_line(err.value, path)


@pytest.mark.parametrize("changes, expected", [
    ({"task": "clustering"}, "task 'clustering'"),
    ({"classes": ["only"]}, "1 class(es)"),
    ({"features": ["nope"]}, "feature list does not match"),
    ({"network": {"layers": 2, "activation": "swish", "output": "sigmoid"}}, "activation 'swish'"),
    ({"network": {"layers": 2, "activation": "relu", "output": "softmax"}}, "does not fit task"),
])
def test_tampered_metadata(good, tmp_path, changes, expected):
    _, arrays = good
    path = _write_npz(tmp_path / "meta.npz", _with_meta(arrays, **changes))
    with pytest.raises(BundleError) as err:
        load_bundle(path)
    assert expected in _one_line(err.value, path)


def test_missing_metadata_keys(good, tmp_path):
    _, arrays = good
    meta = json.loads(arrays["meta"].tobytes().decode())
    del meta["target"], meta["scores"]
    path = _write_npz(tmp_path / "short.npz", {**arrays, "meta": np.frombuffer(json.dumps(meta).encode(), np.uint8)})
    with pytest.raises(BundleError, match="metadata lacks target, scores"):
        load_bundle(path)


def test_pickled_object_is_refused_without_running_it(good, tmp_path):
    _, arrays = good
    marker = tmp_path / "code_ran.txt"
    payload = np.empty(1, dtype=object)
    payload[0] = _Payload(str(marker))
    # sanity: the payload really would run if unpickled (checked on a copy, then removed)
    pickle.loads(pickle.dumps(_Payload(str(marker)))).close()
    assert marker.exists()
    marker.unlink()
    path = tmp_path / "pickled.npz"
    with open(path, "wb") as handle:
        np.savez(handle, allow_pickle=True, **{**arrays, "layer0_W": payload})
    with zipfile.ZipFile(path) as z:   # the file really holds a pickle stream
        assert b"code_ran" in z.read("layer0_W.npy")
    with pytest.raises(BundleError) as err:
        load_bundle(path)
    assert "pickled Python object" in _one_line(err.value, path)
    assert not marker.exists()
    # a bare pickle file (no zip) is refused before numpy even looks at it
    bare = tmp_path / "bare.npz"
    bare.write_bytes(pickle.dumps(_Payload(str(marker))))
    with pytest.raises(BundleError, match="not a .npz archive"):
        load_bundle(bare)
    assert not marker.exists()


def test_save_is_atomic_and_leaves_no_temp_files(trained, tmp_path):
    save_bundle(trained["regression"]["model"], tmp_path / "a.npz")
    assert sorted(os.listdir(tmp_path)) == ["a.npz"]
