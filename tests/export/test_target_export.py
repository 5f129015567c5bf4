"""A regression model trained on a scaled target predicts in the target's own units everywhere:
TrainedModel, the bundle, the numpy-only script and the ONNX graph (run by onnxruntime) agree;
and a bundle written before target scaling existed still loads (as "none")."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_diabetes

from labbench.data import read_csv
from labbench.errors import BundleError
from labbench.export import export_onnx, load_bundle, save_bundle, write_snippet
from labbench.export.bundle import FORMAT_VERSION, bundle_arrays
from labbench.model import TrainedModel
from labbench.search.prepare import prepare
from labbench.search.spec import loads_spec
from labbench.search.winner import refit

HERE = Path(__file__).parent
SETTINGS = dict(hidden=[8], activation="relu", optimizer="adam", learning_rate=0.01, momentum=0.9,
                l2=0.0, batch_size=32, epochs=20)


@pytest.fixture(scope="module", params=["standard", "log"])
def scaled(request, tmp_path_factory):
    # scikit-learn's bundled diabetes data set (Efron et al. 2004), target 25..346, positive;
    # a few missing numbers exercise the imputation on every path
    folder = tmp_path_factory.mktemp(request.param)
    d = load_diabetes(as_frame=True)
    frame = d.data.copy()
    frame.iloc[::9, 1] = np.nan
    frame.insert(0, "row_id", [f"p{i}" for i in range(len(frame))])
    frame["progression"] = d.target.to_numpy()
    frame.to_csv(folder / "diabetes.csv", index=False)
    spec = loads_spec(f"""
[data]
path = "diabetes.csv"
target = "progression"
ignore = ["row_id"]
target_scaling = "{request.param}"
""", folder, str(folder / "exp.toml"))
    prepared = prepare(spec)
    pre, weights, target = refit(prepared, SETTINGS, seed=0, scaling="standard")
    table = prepared.table
    model = TrainedModel(preprocessor=pre, weights=weights, task="regression", target=table.target,
                         features=tuple(table.features), kinds=dict(table.kinds), classes=None,
                         settings=SETTINGS, metric="rmse", id_column=table.id_column,
                         target_scaler=target)
    rows = table.frame.iloc[prepared.holdout_pos].copy()
    rows.insert(0, "row_id", table.ids[prepared.holdout_pos])
    return {"model": model, "rows": rows, "y": table.y[prepared.holdout_pos], "folder": folder,
            "method": request.param}


def test_model_predicts_in_the_targets_units(scaled):
    model, rows, y = scaled["model"], scaled["rows"], scaled["y"]
    assert model.target_scaler.method == scaled["method"]
    predicted = model.predict(rows)
    # target units: better than predicting the mean (numpy std), and the raw network output is not
    assert np.sqrt(np.mean((predicted - y) ** 2)) < np.std(y)
    raw = model.weights.forward(model.preprocessor.transform(rows.loc[:, list(model.features)]))
    assert np.sqrt(np.mean((raw - y) ** 2)) > 1.5 * np.std(y)


def test_bundle_script_and_onnx_agree(scaled, tmp_path):
    ort = pytest.importorskip("onnxruntime")
    from labbench.export.onnx_export import input_names

    model, rows = scaled["model"], scaled["rows"]
    want = model.predict(rows)
    bundle = save_bundle(model, tmp_path / "m.npz")
    meta = json.loads(bytes(bundle_arrays(model)["meta"]).decode("utf-8"))
    assert meta["format_version"] == 2 < FORMAT_VERSION    # 3: a family other than the network
    assert meta["preprocessing"]["target"] == model.target_scaler.to_state()
    loaded = load_bundle(bundle)
    assert loaded.target_scaler.to_state() == model.target_scaler.to_state()
    np.testing.assert_array_equal(loaded.predict(rows), want)            # bit for bit

    # the numpy-only script, run as a user would (a subprocess) on a CSV of the rows
    data = tmp_path / "rows.csv"
    rows.to_csv(data, index=False)
    script = write_snippet(bundle)
    out = tmp_path / "out.csv"
    done = subprocess.run([sys.executable, str(script), str(data), str(out)], capture_output=True,
                          text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    got = pd.read_csv(out)["predicted_progression"].to_numpy()
    np.testing.assert_allclose(got, model.predict(read_csv(data)), rtol=1e-5)

    # source: onnxruntime, the reference runtime for ONNX graphs, runs the exported file
    path = export_onnx(model, tmp_path / "m.onnx")
    names = input_names(model.features)
    feeds = {names[c]: rows[[c]].to_numpy(np.float64) for c in model.features}
    session = ort.InferenceSession(str(path), providers=["CPUExecutionProvider"])
    value = session.run(["value"], feeds)[0]
    assert value.shape == (len(rows),)
    np.testing.assert_allclose(value, want, rtol=1e-5)


def test_a_bundle_from_before_target_scaling_loads_as_none():
    # written by labbench at commit e626def (bundle format 1, no target scaling): a linear model
    # on two numeric columns with W = (2, 3), b = 1, in the target's own units
    model = load_bundle(HERE / "old_bundles" / "format1_regression.npz")
    assert model.target_scaler.method == "none"
    frame = pd.DataFrame({"width": [1.0, 5.0], "height": [10.0, 25.0]})
    state = model.preprocessor.to_state()
    x = (frame.to_numpy() - np.array(state["center"])) / np.array(state["scale"])
    np.testing.assert_allclose(model.predict(frame), 1 + x @ np.array([2.0, 3.0]), rtol=1e-6)


def test_bundle_with_a_broken_target_scaling_is_refused(scaled, tmp_path):
    arrays = bundle_arrays(scaled["model"])
    meta = json.loads(bytes(arrays["meta"]).decode("utf-8"))
    meta["preprocessing"]["target"]["scale"] = 0.0
    arrays["meta"] = np.frombuffer(json.dumps(meta).encode(), np.uint8).copy()
    path = tmp_path / "bad.npz"
    with open(path, "wb") as handle:
        np.savez(handle, **arrays)
    with pytest.raises(BundleError, match="target scaling") as info:
        load_bundle(path)
    assert "\n" not in str(info.value) and str(path) in str(info.value)
