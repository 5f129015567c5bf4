"""The family seam, proven with a toy family (toy_constant.py: one module, one registration).

It runs end to end through ``labbench run`` and ``labbench predict`` in subprocesses (registered
there with LABBENCH_FAMILIES), the numpy-only script and, when onnxruntime is installed, ONNX.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import toy_constant
from labbench.errors import SpecError
from labbench.families import get_family, register
from labbench.search.space import SearchSpace
from labbench.search.spec import load_spec

ROOT = Path(__file__).resolve().parents[2]
HERE = Path(__file__).resolve().parent


@pytest.fixture(autouse=True)
def _registered():
    register(toy_constant.FAMILY)        # the one registration line (in this process)


def _env() -> dict[str, str]:
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join([str(ROOT), str(HERE)])
    env["LABBENCH_FAMILIES"] = "toy_constant:FAMILY"   # the registration for labbench's processes
    return env


def _invented_rows(n: int, seed: int) -> pd.DataFrame:
    """Invented data: two measurements, a site label and a skewed target."""
    rng = np.random.default_rng(seed)
    return pd.DataFrame({
        "row_id": np.arange(1, n + 1),
        "depth": rng.normal(10, 3, n).round(2),
        "width": rng.uniform(1, 5, n).round(2),
        "site": rng.choice(["north", "south", "east"], n),
        "yield_kg": rng.gamma(2.0, 3.0, n).round(3),
    })


def test_the_settings_table_drives_the_space_and_its_messages():
    space = SearchSpace.from_dict({"shrink": {"low": 0.0, "high": 1.0}}, "toy.toml", "constant")
    assert space.searched_params() == ["shrink"]
    assert space.fixed_at({"shrink": 0.25, "epochs": 1}).to_dict() == {"shrink": 0.25}
    with pytest.raises(SpecError) as info:
        SearchSpace.from_dict({"shrink": 2}, "toy.toml", "constant")
    assert str(info.value) == "toy.toml: space.shrink: 2 is outside the allowed range 0.0 to 1.0"
    with pytest.raises(SpecError, match="space.hidden_layers: unknown setting; known settings are shrink"):
        SearchSpace.from_dict({"hidden_layers": 1}, "toy.toml", "constant")


def test_an_unknown_family_is_one_clear_line(tmp_path):
    (tmp_path / "d.csv").write_text("a,y\n1,2\n")
    spec = tmp_path / "s.toml"
    spec.write_text('[data]\npath = "d.csv"\ntarget = "y"\n[model]\nfamily = "forest"\n')
    with pytest.raises(SpecError) as info:
        load_spec(spec)
    assert str(info.value).startswith(f"{spec}: model.family: 'forest' is not a known model family")
    assert "\n" not in str(info.value)


def test_with_no_shrink_it_is_scikit_learns_dummy_model():
    # reference: scikit-learn's DummyRegressor(strategy="mean") and DummyClassifier(strategy="prior")
    from sklearn.dummy import DummyClassifier, DummyRegressor

    rng = np.random.default_rng(3)
    X = rng.normal(size=(50, 2))
    family = get_family("constant")
    y = rng.gamma(2.0, 1.0, 50)
    fit = family.stack({"shrink": 0.0}, "regression", 1, [X], [y], seeds=[0])
    fit.run()
    ref = DummyRegressor(strategy="mean").fit(X, y).predict(X[:5])
    np.testing.assert_allclose(fit.record(0).forward(X[:5]), ref, rtol=1e-12)
    codes = rng.integers(0, 3, 50)
    fit = family.stack({"shrink": 0.0}, "multiclass", 3, [X], [codes], seeds=[0])
    fit.run()
    ref = DummyClassifier(strategy="prior").fit(X, codes).predict_proba(X[:5])
    np.testing.assert_allclose(fit.record(0).forward(X[:5]), ref, rtol=1e-12)
    # shrink = 1: equal shares (the arithmetic of the setting's definition)
    fit = family.stack({"shrink": 1.0}, "multiclass", 3, [X], [codes], seeds=[0])
    fit.run()
    np.testing.assert_allclose(fit.record(0).forward(X[:1]), [[1 / 3] * 3], rtol=1e-12)


def test_run_bundle_predict_numpy_script_and_onnx_end_to_end(tmp_path):
    _invented_rows(90, 1).to_csv(tmp_path / "train.csv", index=False)
    new = _invented_rows(7, 2).drop(columns="yield_kg")
    new.to_csv(tmp_path / "new.csv", index=False)
    spec = tmp_path / "toy.toml"
    spec.write_text('[data]\npath = "train.csv"\ntarget = "yield_kg"\nignore = ["row_id"]\n'
                    '[evaluation]\nfolds = 3\nholdout = 0.25\nseed = 4\nseed_spread = 2\n'
                    '[search]\ntrials = 4\nsampler = "random"\npruner = "none"\n'
                    '[model]\nfamily = "constant"\n'
                    '[space]\nshrink = { low = 0.0, high = 1.0 }\n')
    out = tmp_path / "out"
    run = subprocess.run([sys.executable, "-m", "labbench", "run", str(spec), "--out", str(out),
                          "--quiet"], env=_env(), cwd=tmp_path, capture_output=True, text=True,
                         timeout=600)
    assert run.returncode == 0, run.stderr
    summary = json.loads((out / "winner.json").read_text())
    shrink = summary["settings"]["shrink"]
    assert 0.0 <= shrink <= 1.0 and summary["trials"]

    # the constant the refit must have learned: from the search's training rows (hold-out excluded)
    from labbench.search.prepare import prepare

    prepared = prepare(load_spec(spec))
    y = prepared.table.y[prepared.train_pos]
    expected = (1 - shrink) * y.mean() + shrink * np.median(y)

    from labbench.export.bundle import bundle_metadata, load_bundle

    meta = bundle_metadata(out / "model.npz")
    assert meta["family"] == "constant" and meta["format_version"] == 3
    assert load_bundle(out / "model.npz").family == "constant"

    preds = tmp_path / "preds.csv"
    run = subprocess.run([sys.executable, "-m", "labbench", "predict", str(out / "model.npz"),
                          str(tmp_path / "new.csv"), "-o", str(preds)], env=_env(),
                         capture_output=True, text=True, timeout=300)
    assert run.returncode == 0, run.stderr
    table = pd.read_csv(preds)
    assert table["row_id"].tolist() == new["row_id"].tolist()
    np.testing.assert_allclose(table["predicted_yield_kg"], expected, rtol=1e-9)

    # the numpy-only script needs nothing from labbench (no PYTHONPATH, no family variable)
    bare = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "LABBENCH_FAMILIES")}
    script_out = tmp_path / "script.csv"
    run = subprocess.run([sys.executable, str(out / "predict_with_numpy.py"),
                          str(tmp_path / "new.csv"), str(script_out)], env=bare, cwd=tmp_path,
                         capture_output=True, text=True, timeout=120)
    assert run.returncode == 0, run.stderr
    np.testing.assert_allclose(pd.read_csv(script_out)["predicted_yield_kg"], expected, rtol=1e-9)

    ort = pytest.importorskip("onnxruntime")       # reference runtime: onnxruntime
    session = ort.InferenceSession(str(out / "model.onnx"))
    feeds = {"depth": new[["depth"]].to_numpy(np.float64), "width": new[["width"]].to_numpy(np.float64),
             "site": new[["site"]].to_numpy().astype(str)}
    value = session.run(["value"], feeds)[0]
    np.testing.assert_allclose(value, expected, rtol=1e-6)


@pytest.mark.parametrize("n_classes", [2, 3])
def test_a_class_constant_through_bundle_and_onnx(tmp_path, n_classes):
    """The shared ONNX head (labels, probabilities) around a family's body, for classes."""
    ort = pytest.importorskip("onnxruntime")       # reference runtime: onnxruntime
    from labbench.data import Preprocessor
    from labbench.export import export_onnx, load_bundle, save_bundle
    from labbench.model import TrainedModel

    frame = _invented_rows(40, 5)
    codes = np.arange(40) % n_classes
    classes = tuple(f"grade_{c}" for c in "abc"[:n_classes])
    pre = Preprocessor(["depth", "width"], ["site"]).fit(frame)
    task = "binary" if n_classes == 2 else "multiclass"
    fit = get_family("constant").stack({"shrink": 0.5}, task, 1 if task == "binary" else 3,
                                       [pre.transform(frame)], [codes], seeds=[0])
    fit.run()
    model = TrainedModel(preprocessor=pre, weights=fit.record(0), task=task, target="grade",
                         features=("depth", "width", "site"),
                         kinds={"depth": "numeric", "width": "numeric", "site": "categorical"},
                         classes=classes)
    assert model.family == "constant"
    loaded = load_bundle(save_bundle(model, tmp_path / "m.npz"))
    proba = loaded.predict_proba(frame.head(4))
    shares = np.bincount(codes, minlength=n_classes) / 40 * 0.5 + 0.5 / n_classes
    np.testing.assert_allclose(proba, np.tile(shares, (4, 1)), rtol=1e-12)
    session = ort.InferenceSession(str(export_onnx(loaded, tmp_path / "m.onnx")))
    feeds = {"depth": frame[["depth"]].head(4).to_numpy(np.float64),
             "width": frame[["width"]].head(4).to_numpy(np.float64),
             "site": frame[["site"]].head(4).to_numpy().astype(str)}
    label, probabilities = session.run(["label", "probabilities"], feeds)
    np.testing.assert_allclose(probabilities, proba, rtol=1e-6)
    assert list(label) == list(loaded.predict(frame.head(4)))
