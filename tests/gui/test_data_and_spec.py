"""Bringing data and shaping the search in the real window (no search runs here)."""

from __future__ import annotations

import tomllib

import pytest
from PySide6.QtCore import QMimeData, QPointF, Qt, QUrl
from PySide6.QtGui import QDropEvent

from labbench.data import read_csv
from labbench.errors import DataError, SpecError
from labbench.gui.wording import plain
from labbench.search.space import SearchSpace
from labbench.search.spec import load_spec


def test_iris_preview_shows_rows_kinds_and_the_task(make_window, iris_csv):
    # Fisher's iris (scikit-learn's copy): 150 rows, 4 numeric measurements, 3 species.
    w = make_window()
    assert w.open_path(str(iris_csv))
    model = w.data.preview_model
    assert model.rowCount() == 150 and model.columnCount() == 5
    header = model.headerData(0, Qt.Orientation.Horizontal)
    assert header.startswith("sepal length (cm)") and "numeric" in header
    assert "categorical" in model.headerData(4, Qt.Orientation.Horizontal)
    assert w.data.target_box.currentText() == "species"          # the last column by default
    assert w.data.inferred_task == "multiclass"
    assert w.data.task_box.currentText() == "auto (multiclass)"
    assert "target" in model.headerData(4, Qt.Orientation.Horizontal)
    # the metric list holds only metrics for the task; auto names the task's default
    from labbench.nets.metrics import METRICS, default_metric

    names = [w.data.metric_box.itemData(i) for i in range(1, w.data.metric_box.count())]
    assert names and all("multiclass" in METRICS[n].tasks for n in names)
    assert METRICS[default_metric("multiclass")].label in w.data.metric_box.itemText(0)
    assert w.act_start.isEnabled()


def test_preview_is_capped_at_200_rows(make_window, orchard_csv):
    w = make_window()
    w.open_path(str(orchard_csv))
    assert len(read_csv(orchard_csv)) == 400
    assert w.data.preview_model.rowCount() == 200


@pytest.mark.parametrize("text", [
    "a,b,c\n1,2,3\n4,5\n",            # a ragged row
    "a,b,c\n",                        # a header and no rows
    "",                               # nothing at all
])
def test_a_bad_csv_shows_the_cores_message_and_nothing_breaks(make_window, dialogs, tmp_path, text):
    bad = tmp_path / "bad.csv"
    bad.write_text(text, encoding="utf-8")
    with pytest.raises(DataError) as expected:
        read_csv(bad)
    w = make_window()
    assert not w.open_path(str(bad))
    assert dialogs.texts("warning") == [str(expected.value)]
    assert w.data.frame is None and not w.act_start.isEnabled()


def test_a_constant_target_is_reported_and_blocks_start(make_window, tmp_path):
    path = tmp_path / "flat.csv"
    path.write_text("x,y\n1,a\n2,a\n3,a\n", encoding="utf-8")
    w = make_window()
    w.open_path(str(path))
    assert "single value" in w.data.task_note.text()
    assert not w.act_start.isEnabled()


def test_inline_validation_shows_the_space_error_next_to_the_setting(make_window, iris_csv):
    w = make_window()
    w.open_path(str(iris_csv))
    row = w.space.rows["learning_rate"]
    row.set_raw({"low": 0.1, "high": 0.001})
    with pytest.raises(SpecError) as expected:
        SearchSpace.from_dict({"learning_rate": {"low": 0.1, "high": 0.001}})
    label = w.space.errors["space.learning_rate"]
    # the core's message in the window's words: the field's label, no spec-file syntax
    assert label.text() == plain(str(expected.value))
    assert label.text().startswith("Learning rate: ") and "low =" not in label.text()
    assert not w.act_start.isEnabled()
    below = w.space.rows["hidden_layers"].mapTo(w, w.space.rows["hidden_layers"].rect().topLeft())
    row.set_raw({"low": 0.001, "high": 0.1, "log": True})
    assert label.text() == "" and w.act_start.isEnabled()
    # the message line keeps its space: the rows below did not move when it went away
    assert w.space.rows["hidden_layers"].mapTo(w, w.space.rows["hidden_layers"].rect().topLeft()) == below
    # text that is not a number goes to the core as text, and the core says what is wrong
    w.space.rows["epochs"].fixed.setText("ten")
    assert '"ten" is not a whole number' in w.space.errors["space.epochs"].text()


def test_a_cross_setting_rule_of_the_space_lands_on_its_setting(make_window, iris_csv):
    w = make_window()
    w.open_path(str(iris_csv))
    w.space.rows["momentum"].set_raw({"low": 0.5, "high": 0.9})   # but the optimizer is fixed to adam
    assert "momentum" in w.space.errors["space.momentum"].text()
    assert not w.act_start.isEnabled()


def test_grid_sampler_with_a_continuous_range_is_refused_before_start(make_window, iris_csv):
    w = make_window()
    w.open_path(str(iris_csv))
    w.space.rows["learning_rate"].set_raw({"low": 0.001, "high": 0.1})
    w.space.sampler.setCurrentText("grid")
    assert "grid" in w.problem_label.toolTip()
    assert not w.act_start.isEnabled()


def test_save_then_reopen_gives_the_identical_spec(make_window, iris_csv, tmp_path):
    w = make_window()
    w.open_path(str(iris_csv))
    sp = w.space
    sp.rows["learning_rate"].set_raw({"low": 0.0003, "high": 0.3, "log": True})
    sp.rows["hidden_layers"].set_raw({"low": 1, "high": 2})
    sp.rows["hidden_units"].set_raw({"choices": [8, 32, 128]})
    sp.rows["activation"].set_raw({"choices": ["relu", "tanh"]})
    sp.rows["l2"].set_raw({"low": 1e-6, "high": 0.01, "log": True, "off": True})
    sp.rows["epochs"].set_raw(17)
    sp.folds.setValue(4)
    sp.repeats.setValue(2)
    sp.holdout.setValue(0.25)
    sp.seed.setValue(11)
    sp.minutes_on.setChecked(True)
    sp.minutes.setValue(3.5)
    sp.pruner.setCurrentText("halving")
    sp.name.setText("iris-try")
    w.data.missing_box.setCurrentText("drop")
    w.data.metric_box.setCurrentIndex(w.data.metric_box.findData("accuracy"))
    for name, kind, use in w.data._row_widgets():
        if name == "petal width (cm)":
            use.setChecked(False)
        if name == "sepal width (cm)":
            kind.setCurrentText("categorical")
    before = w.current_spec()
    path = tmp_path / "iris.toml"
    w.spec_path = str(path)
    assert w.save_spec() == str(path.resolve())
    on_disk = load_spec(path)
    assert on_disk == before
    assert on_disk.data.ignore == ("petal width (cm)",)
    assert on_disk.data.kinds == {"sepal width (cm)": "categorical"}
    assert on_disk.evaluation.metric == "accuracy" and on_disk.search.minutes == 3.5

    other = make_window("other.ini")
    assert other.open_path(str(path))
    again = other.current_spec()
    assert again == before
    assert tomllib.loads(again.to_toml(tmp_path)) == tomllib.loads(path.read_text(encoding="utf-8"))


def test_opening_the_demo_spec_round_trips(make_window, tmp_path):
    from tests.gui.conftest import ROOT

    demo = ROOT / "demo_sets" / "orchard.toml"
    if not demo.exists():
        pytest.skip("demo_sets/orchard.toml is not written yet")
    w = make_window()
    assert w.open_path(str(demo))
    assert w.current_spec() == load_spec(demo)


def test_recent_files_and_drop_open(make_window, iris_csv, orchard_csv, qtbot):
    w = make_window()
    w.open_path(str(iris_csv))
    w.open_path(str(orchard_csv))
    assert w.recent_files()[:2] == [str(orchard_csv.resolve()), str(iris_csv.resolve())]
    assert [a.text().split("  ")[1] for a in w.recent_menu.actions()[:2]] == ["orchard.csv", "iris.csv"]
    # the settings file is the test's own, never the user's
    assert w.settings.fileName().endswith("settings.ini")

    mime = QMimeData()
    mime.setUrls([QUrl.fromLocalFile(str(iris_csv))])
    drop = QDropEvent(QPointF(10, 10), Qt.DropAction.CopyAction, mime, Qt.MouseButton.LeftButton,
                      Qt.KeyboardModifier.NoModifier)
    w.dropEvent(drop)
    assert w.data.path == str(iris_csv.resolve())


def test_geometry_is_remembered(make_window):
    w = make_window("geo.ini")
    w.resize(795, 703)
    w.close()
    again = make_window("geo.ini")
    assert (again.size().width(), again.size().height()) == (795, 703)


def test_usual_shortcuts(make_window):
    from PySide6.QtGui import QKeySequence

    w = make_window()
    assert w.act_open_csv.shortcut() == QKeySequence(QKeySequence.StandardKey.Open)
    assert w.act_save.shortcut() == QKeySequence(QKeySequence.StandardKey.Save)
    assert w.act_quit.shortcut() == QKeySequence(QKeySequence.StandardKey.Quit)
    # every evaluation and search setting explains itself in one sentence
    for key, label in w.space.errors.items():
        if key.startswith(("evaluation.", "search.")):
            from labbench.gui.space_page import TIPS

            tip = TIPS[key.split(".")[1]]
            assert tip.endswith(".") and tip.count(". ") == 0


def test_a_together_count_in_the_file_survives_the_window(make_window, iris_csv, tmp_path):
    # [search] together has no control of its own (automatic by default); a value written in the
    # file must not be lost when the window saves the spec again
    w = make_window()
    w.open_path(str(iris_csv))
    path = tmp_path / "iris.toml"
    w.spec_path = str(path)
    w.save_spec()
    text = path.read_text(encoding="utf-8").replace("[search]\n", "[search]\ntogether = 3\n")
    path.write_text(text, encoding="utf-8")
    other = make_window("other.ini")
    assert other.open_path(str(path))
    assert other.current_spec().search.together == 3
    other.spec_path = str(path)
    other.save_spec()
    assert load_spec(path).search.together == 3
