"""The map and group families in the real window: a table without a target, a label column, the
model family on the Search page, and step 4 drawing a map winner."""

from __future__ import annotations

from PySide6.QtCore import Qt

from labbench.data import Preprocessor
from labbench.gui.data_page import NO_LABEL, NO_TARGET
from labbench.model import TrainedModel

from map_fixtures import STABILITY, sensor_rows, som_record

NAMES = ["temperature", "vibration", "current", "noise"]


def _sensors_csv(tmp_path, n=240):
    frame, label = sensor_rows(n)
    frame["state"] = label
    path = tmp_path / "sensors.csv"
    frame.to_csv(path, index=False)
    return path, frame


def test_no_target_and_a_label_column_on_the_data_page(make_window, tmp_path):
    path, _frame = _sensors_csv(tmp_path)
    w = make_window()
    assert w.open_path(str(path))
    d = w.data
    assert d.target_box.itemText(0) == NO_TARGET and d.target() == "state"
    assert not d.label_box.isEnabled()
    d.target_box.setCurrentText(NO_TARGET)
    assert d.target() is None and d.inferred_task == "unsupervised"
    assert d.label_box.isEnabled() and not d.task_box.isEnabled()
    assert d.task_box.currentText() == "auto (unsupervised)"
    d.label_box.setCurrentText("state")
    section = d.data_dict()
    # [data] without a target; the label is named, and is neither an input nor ignored
    assert "target" not in section and section["label"] == "state"
    assert "state" not in section.get("ignore", []) and "target_scaling" not in section
    header = d.preview_model.headerData(5, Qt.Orientation.Horizontal)
    assert header.endswith("· label")
    use = {name: u for name, _k, u in d._row_widgets()}
    assert not use["state"].isEnabled() and use["shift"].isEnabled()
    # back to a target: the label is dropped from the section
    d.target_box.setCurrentText("state")
    assert d.data_dict()["target"] == "state" and "label" not in d.data_dict()
    assert d.label() is None and d.label_box.currentText() in ("state", NO_LABEL)


def test_the_search_page_offers_each_familys_settings_table(make_window, tmp_path):
    from labbench.families import family_names, get_family

    path, _frame = _sensors_csv(tmp_path)
    w = make_window()
    assert w.open_path(str(path))
    sp = w.space
    names = [sp.family.itemData(i) for i in range(sp.family.count())]
    assert names == list(family_names())
    for name in names:
        sp.family.setCurrentIndex(sp.family.findData(name))
        fam = get_family(name)
        # one editor per setting of the family's table, labelled with its words
        assert list(sp.rows) == list(fam.settings)
        assert all(sp.rows[k].info.label == fam.settings[k].label for k in fam.settings)
        # the family's default space is what the editors show, and it passes the core's check
        assert not sp.check_space()
        assert (sp.model_dict() is None) == (name == "network")
        # the data page follows: a network needs a target, the maps learn without one
        assert (w.data.target() is not None) == fam.needs_target


def _map_model(frame, label_rows=None):
    X_frame = frame[NAMES]
    pre = Preprocessor(NAMES, []).fit(X_frame)
    record = som_record(pre.transform(X_frame), 5, 6, "hexagonal", groups=3)
    return TrainedModel(preprocessor=pre, weights=record, task="unsupervised", target="",
                        features=tuple(NAMES), kinds={n: "numeric" for n in NAMES}, classes=None,
                        settings={"epochs": 10}, metric="penalised_error",
                        scores={"holdout_measures": {"quantisation_error": 0.3, "topographic_error": 0.02,
                                                     "relative_error": 0.21, "units": 30},
                                "stability": STABILITY})


def test_step_four_draws_the_winner_of_a_map_search(make_window, tmp_path):
    path, frame = _sensors_csv(tmp_path)
    w = make_window()
    assert w.open_path(str(path))
    assert w.map_step.isHidden()                      # a network search: no map step
    w.data.target_box.setCurrentText(NO_TARGET)
    w.data.label_box.setCurrentText("state")
    # what the window's search leaves when a map family wins (SearchSession.result)
    w.session.result = {"model": _map_model(frame), "summary": None, "files": ()}
    w.update_map()
    assert not w.map_step.isHidden()
    page = w.maps
    assert page.data is not None and len(page.data.X) == len(frame)
    assert page.data.label_name == "state"
    assert page.hits.hits.sum() == len(frame)
    assert "5 × 6 hexagonal grid, 30 units in 3 groups" in page.head.text()
    assert "Not reproducible" in page.head.text()
    # the groups line up with the invented machine states (the label, never trained on)
    assert page.groups.cell_text("state (label)", 1).endswith("(100 %)")
    w.steps.setCurrentRow(0)
    w.act_map_step.trigger()                          # View ▸ Map and groups (Ctrl+4)
    assert w.stack.currentWidget() is page
    # Winner ▸ Save pictures takes the map's pictures along
    written = w.take.export_pictures(str(tmp_path / "pictures"))
    names = {p.rsplit("/", 1)[-1] for p in written}
    assert {"unit_distances.png", "rows_per_unit.svg", "the_groups.png", "the_rows_on_two_axes.svg"} <= names
    # a table without the map's columns: the page says what is missing instead of drawing
    other = tmp_path / "other.csv"
    frame.drop(columns=["noise"]).to_csv(other, index=False)
    assert w.open_path(str(other))
    w.update_map()
    assert page.data is None and "missing columns: noise" in page.head.text()


def test_the_winner_check_says_whether_the_groups_are_reproducible():
    from labbench.gui.winner_view import winner_html

    text = winner_html({"trial_number": 3, "metric": "penalised_error", "holdout_score": 0.25,
                        "stability": STABILITY})
    assert "Groups across seeds: Not reproducible" in text
    assert "different seeds give different groups" in text


def test_a_maps_settings_in_words_name_its_shape_and_what_was_searched():
    from labbench.gui.bench_sheet import sureness_lines
    from labbench.gui.trialbook import TrialRecord
    from labbench.gui.words import settings_words

    settings = {"rows": 5, "cols": 9, "topology": "hexagonal", "training": "online", "learning_rate": 0.0768,
                "final_learning_rate": 0.01, "decay": "exponential", "epochs": 20, "groups": 4, "unit_cost": 0.01}
    words = settings_words(settings, {"rows": 5, "learning_rate": 0.0768})
    assert words.startswith("5 × 9 hexagonal grid, 4 groups, ") and words.endswith(", 20 epochs")
    assert "0.0768" in words and "exponential" not in words and "0.01" not in words
    best = TrialRecord(number=2)
    best.fold_scores = (0.5, 0.6)
    lines = sureness_lines(best, {"trial_number": 2, "holdout_score": 0.55, "stability": STABILITY}, "x")
    assert lines[-1] == "across 5 seeds: not reproducible, groups agree 0.62"
    assert settings_words({"units": 5, "learning_rate": 0.3, "init": "rows", "epochs": 20, "unit_cost": 0.01},
                          {"units": 5}) == "5 units, 20 epochs"
    assert settings_words({"components": 2, "rule": "sanger", "epochs": 9, "unit_cost": 0.01}) == \
        "2 component(s) by Sanger's rule, 9 epochs"
