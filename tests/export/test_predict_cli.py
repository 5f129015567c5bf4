"""``labbench predict`` through the real command-line entry point, good and bad input."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from labbench.cli import main
from labbench.export import save_bundle


@pytest.fixture()
def setup(trained, tmp_path):
    t = trained["binary"]
    bundle = save_bundle(t["model"], tmp_path / "model.npz")
    rows = t["frame"].iloc[t["holdout"]].reset_index(drop=True)
    return t["model"], bundle, rows, tmp_path


def _csv(tmp_path, frame: pd.DataFrame, name="rows.csv"):
    path = tmp_path / name
    frame.to_csv(path, index=False)
    return path


def _stderr_lines(capsys) -> list[str]:
    return [line for line in capsys.readouterr().err.splitlines() if line.strip()]


def test_predictions_beside_the_id_column(setup, capsys):
    model, bundle, rows, tmp = setup
    data = _csv(tmp, rows.iloc[:, ::-1])                      # reordered columns
    assert main(["predict", str(bundle), str(data)]) == 0
    assert _stderr_lines(capsys) == []
    out = pd.read_csv(tmp / "rows_predictions.csv", dtype={"row_id": str})
    assert list(out.columns) == ["row_id", "predicted_outcome", "proba_malignant", "proba_benign"]
    assert list(out["row_id"]) == list(rows["row_id"])
    assert list(out["predicted_outcome"]) == list(model.predict(rows))
    np.testing.assert_allclose(out[["proba_malignant", "proba_benign"]], model.predict_proba(rows), rtol=1e-12)


def test_output_option_and_extra_columns(setup, capsys):
    model, bundle, rows, tmp = setup
    data = _csv(tmp, rows.assign(notes="x", outcome=1))
    out = tmp / "sub" / "mine.csv"
    assert main(["predict", str(bundle), str(data), "-o", str(out)]) == 0
    lines = _stderr_lines(capsys)
    assert len(lines) == 1 and "ignored column(s)" in lines[0] and "'notes'" in lines[0]
    assert len(pd.read_csv(out)) == len(rows)


def test_regression_output_has_values_only(trained, tmp_path, capsys):
    t = trained["regression"]
    bundle = save_bundle(t["model"], tmp_path / "reg.npz")
    rows = t["frame"].iloc[t["holdout"]].drop(columns=["row_id"])
    data = _csv(tmp_path, rows)
    assert main(["predict", str(bundle), str(data)]) == 0
    out = pd.read_csv(tmp_path / "rows_predictions.csv")
    assert list(out.columns) == ["predicted_outcome"]
    np.testing.assert_allclose(out["predicted_outcome"], t["model"].predict(rows), rtol=1e-12)


def test_unseen_category_is_zeros_with_one_warning(setup, capsys):
    model, bundle, rows, tmp = setup
    odd = rows.copy()
    odd.loc[:3, "band"] = "enormous"
    data = _csv(tmp, odd)
    assert main(["predict", str(bundle), str(data)]) == 0
    lines = _stderr_lines(capsys)
    assert len(lines) == 1 and "'band'" in lines[0] and "'enormous'" in lines[0] and "all zeros" in lines[0]
    out = pd.read_csv(tmp / "rows_predictions.csv")
    assert list(out["predicted_outcome"]) == list(model.predict(odd))


@pytest.mark.parametrize("break_it, expected", [
    (lambda f: f.drop(columns=["band", "mean_texture"]), "missing column(s) mean_texture, band"),
    (lambda f: f.astype({"mean_texture": object}).assign(
        mean_texture=lambda g: g["mean_texture"].where(g.index != 4, "about 20")),
     "column 'mean_texture' must hold numbers but line 6 holds 'about 20'"),
    (lambda f: f.assign(mean_texture=lambda g: g["mean_texture"].where(g.index != 2, np.inf)),
     "column 'mean_texture', line 4: inf is not a finite number"),
])
def test_bad_data_exits_2_with_one_line(setup, capsys, break_it, expected):
    _, bundle, rows, tmp = setup
    data = _csv(tmp, break_it(rows))
    assert main(["predict", str(bundle), str(data)]) == 2
    lines = _stderr_lines(capsys)
    assert len(lines) == 1 and expected in lines[0] and str(data) in lines[0], lines
    assert not (tmp / "rows_predictions.csv").exists()


@pytest.mark.parametrize("content, expected", [
    ("", "the file is empty"),
    ("row_id,band\n", "no data rows"),
])
def test_empty_files(setup, capsys, content, expected):
    _, bundle, _, tmp = setup
    data = tmp / "empty.csv"
    data.write_text(content)
    assert main(["predict", str(bundle), str(data)]) == 2
    lines = _stderr_lines(capsys)
    assert len(lines) == 1 and expected in lines[0]


def test_bad_bundle_and_same_output_file(setup, capsys):
    _, bundle, rows, tmp = setup
    data = _csv(tmp, rows)
    fake = tmp / "fake.npz"
    fake.write_text("not a model")
    assert main(["predict", str(fake), str(data)]) == 2
    assert "not a labbench model bundle" in _stderr_lines(capsys)[0]
    assert main(["predict", str(bundle), str(data), "-o", str(data)]) == 2
    assert "is the data file itself" in _stderr_lines(capsys)[0]


def test_output_onto_the_bundle_is_refused_and_the_bundle_survives(setup, capsys):
    """Issue 9, finding 6: ``predict model.npz x.csv -o model.npz`` overwrote the model."""
    _, bundle, rows, tmp = setup
    data = _csv(tmp, rows)
    before = bundle.read_bytes()
    assert main(["predict", str(bundle), str(data), "-o", str(bundle)]) == 2
    lines = _stderr_lines(capsys)
    assert len(lines) == 1 and "is the model bundle itself" in lines[0] and "-o" in lines[0]
    assert bundle.read_bytes() == before
    # the same file under another spelling (a relative path through a subfolder)
    (tmp / "sub").mkdir()
    assert main(["predict", str(bundle), str(data), "-o", str(tmp / "sub" / ".." / "model.npz")]) == 2
    assert bundle.read_bytes() == before


def test_output_folder_gets_the_default_name_inside(setup, capsys):
    _, bundle, rows, tmp = setup
    data = _csv(tmp, rows)
    folder = tmp / "preds"
    folder.mkdir()
    assert main(["predict", str(bundle), str(data), "-o", str(folder)]) == 0
    assert (folder / "rows_predictions.csv").is_file()
    assert "Traceback" not in capsys.readouterr().err
    assert [p.name for p in folder.iterdir()] == ["rows_predictions.csv"]   # no temporary left


def test_formula_cells_are_neutralised_and_numbers_kept(trained, tmp_path, capsys):
    """OWASP "CSV Injection": a cell starting with = + - @ tab or CR gets a leading quote, so a
    spreadsheet shows it as text; plain numbers such as -1.5 stay numbers."""
    t = trained["regression"]
    bundle = save_bundle(t["model"], tmp_path / "model.npz")
    rows = t["frame"].iloc[t["holdout"][:6]].reset_index(drop=True)
    rows["row_id"] = ["=1+2", "+cmd", "-1.5", "@SUM(A1)", "\tx", "plain"]
    data = _csv(tmp_path, rows)
    assert main(["predict", str(bundle), str(data)]) == 0
    out = pd.read_csv(tmp_path / "rows_predictions.csv", dtype={"row_id": str}, keep_default_na=False)
    assert out["row_id"].tolist() == ["'=1+2", "'+cmd", "-1.5", "'@SUM(A1)", "'\tx", "plain"]
    assert np.isfinite(out["predicted_outcome"].to_numpy(dtype=float)).all()
    assert (out["predicted_outcome"] < 0).any()          # negative predictions written as numbers


def test_an_output_below_a_file_is_one_line(setup, capsys):
    _, bundle, rows, tmp = setup
    data = _csv(tmp, rows)
    assert main(["predict", str(bundle), str(data), "-o", str(data / "x.csv")]) == 2
    lines = _stderr_lines(capsys)
    assert len(lines) == 1 and "is a file, so nothing can be written below it" in lines[0]
