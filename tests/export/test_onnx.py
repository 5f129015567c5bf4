"""ONNX export checked by onnx's own checker and run by onnxruntime (the reference runtime)."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

onnx = pytest.importorskip("onnx")
ort = pytest.importorskip("onnxruntime")

from labbench.export import export_onnx  # noqa: E402
from labbench.export.onnx_export import input_names  # noqa: E402


def _feeds(model, frame: pd.DataFrame) -> dict:
    names = input_names(model.features)
    feeds = {}
    for col in model.features:
        if model.kinds[col] == "numeric":
            feeds[names[col]] = frame[[col]].to_numpy(np.float64)
        else:   # the documented encoding: text, "" for missing
            feeds[names[col]] = np.array([["" if pd.isna(v) else str(v)] for v in frame[col]], dtype=object)
    return feeds


def test_onnx_matches_labbench_on_holdout_rows(case, tmp_path):
    model, frame = case["model"], case["frame"]
    path = export_onnx(model, tmp_path / "winner")
    proto = onnx.load(str(path))
    onnx.checker.check_model(proto, full_check=True)       # source: the onnx package's checker
    assert {o.domain: o.version for o in proto.opset_import} == {"": 17, "ai.onnx.ml": 2}
    rows = frame.iloc[case["holdout"]]
    # the hold-out rows exercise imputation of numbers and of categories
    assert rows.iloc[:, 1].isna().any() and rows["band"].isna().any()
    # source: onnxruntime, the reference runtime for ONNX graphs, runs the exported file
    session = ort.InferenceSession(str(path), providers=["CPUExecutionProvider"])
    got = dict(zip([o.name for o in session.get_outputs()], session.run(None, _feeds(model, rows))))
    want = model.output(rows)
    if model.task == "regression":
        assert got["value"].shape == (len(rows),)
        np.testing.assert_allclose(got["value"], want, rtol=0, atol=1e-5)
    else:
        proba = got["probabilities"]
        ref = np.column_stack([1 - want, want]) if model.task == "binary" else want
        assert proba.shape == ref.shape
        np.testing.assert_allclose(proba, ref, rtol=0, atol=1e-5)
        assert list(got["label"]) == list(model.predict(rows))
    meta = {p.key: p.value for p in proto.metadata_props}
    assert json.loads(meta["labbench"])["task"] == model.task
    assert "unseen = all zeros" in proto.doc_string


def test_unseen_category_encodes_as_zeros(trained, tmp_path):
    model, frame = trained["multiclass"]["model"], trained["multiclass"]["frame"]
    path = export_onnx(model, tmp_path / "m.onnx")
    rows = frame.iloc[:8].copy()
    rows["band"] = "never-seen"
    session = ort.InferenceSession(str(path), providers=["CPUExecutionProvider"])
    proba = session.run(["probabilities"], _feeds(model, rows))[0]
    np.testing.assert_allclose(proba, model.output(rows), atol=1e-5)   # labbench: all zeros too


def test_input_names_are_sanitised_and_unique():
    assert input_names(["mean radius", "mean-radius", "2nd", "ok"]) == {
        "mean radius": "mean_radius", "mean-radius": "mean_radius_2", "2nd": "c_2nd", "ok": "ok"}


def test_input_names_never_take_an_output_name():
    assert input_names(["value", "label", "probabilities", "value_2"]) == {
        "value": "value_2", "label": "label_2", "probabilities": "probabilities_2",
        "value_2": "value_2_2"}


@pytest.mark.parametrize("task", ["regression", "multiclass"])
def test_a_column_named_like_an_output_exports_and_runs(trained, task, tmp_path):
    """statsmodels' Grunfeld data has a column named "value": the graph once used that name for
    an input and the regression output, which onnx's checker rejects (SSA form)."""
    import dataclasses

    model, frame = trained[task]["model"], trained[task]["frame"]
    renamed = {model.features[0]: "value", model.features[1]: "label"}
    frame = frame.rename(columns=renamed)
    state = model.preprocessor.to_state()
    state["numeric"] = [renamed.get(c, c) for c in state["numeric"]]
    pre = type(model.preprocessor).from_state(state)
    model = dataclasses.replace(model, preprocessor=pre,
                                features=tuple(renamed.get(c, c) for c in model.features),
                                kinds={renamed.get(c, c): k for c, k in model.kinds.items()})
    path = export_onnx(model, tmp_path / "m.onnx")
    onnx.checker.check_model(onnx.load(str(path)), full_check=True)   # source: onnx's checker
    rows = frame.iloc[:20]
    session = ort.InferenceSession(str(path), providers=["CPUExecutionProvider"])
    out = session.run(None, _feeds(model, rows))[0 if task == "regression" else 1]
    np.testing.assert_allclose(out, model.output(rows), atol=1e-5)     # source: onnxruntime
