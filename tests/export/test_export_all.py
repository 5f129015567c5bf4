"""``export_all`` (what the window's buttons call) and the package's light import."""

from __future__ import annotations

import subprocess
import sys

import numpy as np

from labbench.export import export_all, load_bundle


def test_export_all_writes_bundle_script_and_onnx(trained, tmp_path):
    t = trained["regression"]
    model = t["model"]
    import dataclasses

    bare = dataclasses.replace(model, scores={})
    paths = export_all(bare, {"cv_mean": 0.42, "cv_std": 0.05, "holdout_score": 0.4, "trial_number": 7},
                       tmp_path / "out")
    assert [p.name for p in paths] == ["model.npz", "predict_with_numpy.py", "model.onnx"]
    assert all(p.exists() for p in paths)
    loaded = load_bundle(paths[0])
    assert loaded.scores["cv_mean"] == 0.42 and loaded.scores["trial_number"] == 7
    rows = t["frame"].iloc[t["holdout"]]
    assert np.array_equal(loaded.predict(rows), model.predict(rows))


def test_importing_the_package_loads_neither_onnx_nor_optuna_nor_qt():
    code = ("import sys, labbench.export; "
            "print([m for m in ('onnx', 'onnxruntime', 'optuna', 'PySide6') if m in sys.modules])")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == "[]"
