"""The numpy-only script written beside a bundle, run as a user would run it (a subprocess)."""

from __future__ import annotations

import ast
import csv
import subprocess
import sys

import numpy as np
import pandas as pd

from labbench.data import read_csv
from labbench.export import save_bundle, write_snippet
from labbench.export.snippet import SNIPPET_NAME


def _run(script, *args, cwd):
    return subprocess.run([sys.executable, str(script), *map(str, args)], capture_output=True,
                          text=True, cwd=cwd, timeout=120)


def test_script_imports_only_numpy_and_the_standard_library(trained, tmp_path):
    bundle = save_bundle(trained["binary"]["model"], tmp_path / "winner.npz")
    script = write_snippet(bundle)
    assert script.name == SNIPPET_NAME and script.parent == bundle.parent
    tree = ast.parse(script.read_text())
    imported = {a.name.split(".")[0] for n in ast.walk(tree) if isinstance(n, ast.Import) for a in n.names}
    imported |= {n.module.split(".")[0] for n in ast.walk(tree) if isinstance(n, ast.ImportFrom)}
    assert imported <= {"csv", "json", "sys", "pathlib", "numpy"}
    assert "BUNDLE = 'winner.npz'" in script.read_text()


def test_script_predicts_like_labbench(case, tmp_path):
    model, frame = case["model"], case["frame"]
    rows = frame.iloc[case["holdout"]].iloc[:, ::-1]           # reordered columns are fine
    rows.insert(3, "unused", 1.0)                               # and extra ones are ignored
    data = tmp_path / "new rows.csv"
    rows.to_csv(data, index=False)
    # the script is copied somewhere else with the bundle: it needs nothing but the pair
    folder = tmp_path / "elsewhere"
    bundle = save_bundle(model, folder / "m.npz")
    script = write_snippet(bundle)
    out = tmp_path / "out.csv"
    done = _run(script, data, out, cwd=tmp_path)
    assert done.returncode == 0, done.stderr
    got = pd.read_csv(out, dtype={"row_id": str})
    # the reference: labbench's TrainedModel on the same file as labbench reads it
    same = read_csv(data)
    want = model.predict(same)
    assert list(got["row_id"]) == list(same["row_id"])
    column = f"predicted_{model.target}"
    if model.task == "regression":
        np.testing.assert_allclose(got[column], want, rtol=1e-6, atol=1e-7)
    else:
        assert list(got[column].astype(str)) == [str(v) for v in want]
        proba = got[[f"proba_{c}" for c in model.classes]].to_numpy()
        np.testing.assert_allclose(proba, model.predict_proba(same), rtol=1e-6, atol=1e-7)


def test_script_to_screen_and_help(trained, tmp_path):
    model = trained["multiclass"]["model"]
    rows = trained["multiclass"]["frame"].iloc[:5].drop(columns=["row_id"])
    data = tmp_path / "five.csv"
    rows.to_csv(data, index=False, sep=";")                     # semicolon files work too
    script = write_snippet(save_bundle(model, tmp_path / "model.npz"))
    done = _run(script, data, cwd=tmp_path)
    assert done.returncode == 0, done.stderr
    lines = list(csv.reader(done.stdout.splitlines()))
    assert lines[0] == ["predicted_outcome", "proba_class_0", "proba_class_1", "proba_class_2"]
    assert [r[0] for r in lines[1:]] == list(model.predict(rows))
    assert _run(script, "--help", cwd=tmp_path).stdout.startswith("Usage:")


def test_script_guards_formula_cells_like_labbench_predict(trained, tmp_path):
    """OWASP "CSV Injection": the same leading-quote rule as ``labbench predict``."""
    from labbench.cli import main

    t = trained["binary"]
    rows = t["frame"].iloc[t["holdout"][:4]].reset_index(drop=True)
    rows["row_id"] = ["=HYPERLINK(1)", "-2.5", "@x", "ok"]
    data = tmp_path / "rows.csv"
    rows.to_csv(data, index=False)
    script = write_snippet(save_bundle(t["model"], tmp_path / "model.npz"))
    done = _run(script, data, tmp_path / "script.csv", cwd=tmp_path)
    assert done.returncode == 0, done.stderr
    assert main(["predict", str(tmp_path / "model.npz"), str(data), "-o",
                 str(tmp_path / "labbench.csv")]) == 0
    script_ids = [r[0] for r in csv.reader(open(tmp_path / "script.csv", newline=""))][1:]
    labbench_ids = [r[0] for r in csv.reader(open(tmp_path / "labbench.csv", newline=""))][1:]
    assert script_ids == labbench_ids == ["'=HYPERLINK(1)", "-2.5", "'@x", "ok"]
