"""Real searches driven through the window: run to the end, take the winner away, stop, resume,
close mid-search, watch a storage. Every check reads the truth back from the Optuna storage.
"""

from __future__ import annotations

import csv
import html.parser
import json
import tomllib
import xml.etree.ElementTree as ET

import optuna
import pytest
from PySide6.QtGui import QGuiApplication, QImage

from labbench.gui import theme
from labbench.search.spec import load_spec
from tests.gui.conftest import small_search

pytestmark = pytest.mark.slow
LONG = 180_000     # ms; generous, the machine is shared


def study_of(db, name):
    return optuna.load_study(study_name=name, storage=f"sqlite:///{db}")


def test_a_short_search_end_to_end(make_window, orchard_csv, tmp_path, qtbot):
    w = make_window()
    assert w.open_path(str(orchard_csv))
    small_search(w, epochs=3, trials=4, folds=3, seed_spread=2, spec_path=tmp_path / "orchard.toml")
    assert w.start()
    assert w.session.running and not w.act_start.isEnabled() and w.act_stop.isEnabled()
    qtbot.waitUntil(lambda: not w.session.running and w.session.synced, timeout=LONG)
    w.session.flush()

    # the spec the window ran is the file it saved (what `labbench run orchard.toml` would run)
    assert load_spec(tmp_path / "orchard.toml") == w.session.spec
    study = study_of(tmp_path / "orchard.db", "orchard")
    trials = study.get_trials()
    assert len(trials) == 4 and all(t.state.name == "COMPLETE" for t in trials)

    # the band holds every stored learning curve; the winner's is drawn as a line
    from labbench.gui.axes import loss_band

    curves = w.watch.curves
    stored = [t.user_attrs["curve"]["val_loss"] for t in trials]
    for drawn, expected in zip(curves.band_data, loss_band(stored)):
        assert list(drawn) == pytest.approx(list(expected))
    x, y = curves.lines["best"].getData()
    assert list(y) == pytest.approx(study_of(tmp_path / "orchard.db", "orchard").best_trial.user_attrs["curve"]["val_loss"])
    assert sorted(w.watch.notebook.items) == [t.number for t in trials]

    # the best panel shows the winner as the storage has it
    best = study.best_trial
    panel = w.watch.best
    assert (panel.shown_number, panel.shown_value) == (best.number, best.value)
    assert f"{best.value:.4g}" in panel.headline.text()
    assert f"{best.user_attrs['cv_std']:.4g}" in panel.headline.text()
    for score in best.user_attrs["fold_scores"]:
        assert f"{score:.4g}" in panel.details_html
    summary = w.session.book.winner
    assert summary["trial_number"] == best.number and summary["cv_mean"] == best.value
    assert f"{summary['holdout_score']:.4g}" in panel.final_html
    out = tmp_path / "orchard_out"
    assert json.loads((out / "winner.json").read_text())["trial_number"] == best.number
    # the window leaves the files labbench run leaves, and says where
    for name in ("winner.json", "winner.toml", "model.npz", "predict_with_numpy.py"):
        assert (out / name).exists(), name
    assert "Written to" in panel.final_html and str(out) in panel.final_html

    # the table: every trial, sortable, filterable; picking a row highlights it in the plots
    table = w.watch.table
    assert table.proxy.rowCount() == 4
    table.filter_box.setCurrentText("stopped early")
    assert table.proxy.rowCount() == 0
    table.filter_box.setCurrentText("every state")
    table.select(trials[0].number)
    assert w.session.selected == trials[0].number
    w.session.flush()
    pen = curves.lines["selected"].opts["pen"]
    assert pen.color().name() == theme.state_colour("selected").name()
    assert curves.shown["selected"] == trials[0].number
    assert w.watch.sheet.climb.picked_line.value() == trials[0].number

    # take the winner away
    pictures = w.take.export_pictures(str(tmp_path / "pics"))
    assert len(pictures) == 2 * len(w.watch.panels)
    for p in pictures:
        if p.endswith(".png"):
            img = QImage(p)
            assert not img.isNull() and img.width() >= 600
        else:
            assert ET.parse(p).getroot().tag.endswith("svg")
    table_csv = w.take.export_table(str(tmp_path / "trials.csv"))
    with open(table_csv, newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert [int(r["trial"]) for r in rows] == [t.number for t in trials]
    assert [float(r["score"]) for r in rows] == pytest.approx([t.value for t in trials])
    assert "learning_rate" in rows[0]

    files = w.take.save_winner(str(tmp_path / "elsewhere"))
    assert sorted(p.rsplit("/", 1)[1] for p in files) == ["winner.json", "winner.toml"]
    fixed = load_spec(tmp_path / "elsewhere" / "winner.toml")
    assert not fixed.space.searched_params()
    text = w.take.copy_settings()
    assert QGuiApplication.clipboard().text() == text
    # the clipboard is a [space] section `labbench run` reads as is (it once held `hidden = [128]`,
    # which the spec reader refuses): pasted under the spec's [data], it fixes every setting to
    # the winner's
    pasted = (tmp_path / "orchard.toml").read_text(encoding="utf-8").split("[space]")[0] + text
    (tmp_path / "pasted.toml").write_text(pasted, encoding="utf-8")
    spec = load_spec(tmp_path / "pasted.toml")
    assert not spec.space.searched_params()
    assert spec.space == spec.space.fixed_at(summary["settings"])
    assert spec.space.fixed_at(summary["settings"]).to_dict() == tomllib.loads(text)["space"]

    assert w.act_bundle.isEnabled() and w.act_onnx.isEnabled() and w.act_report.isEnabled()
    from labbench.data import read_csv
    from labbench.export import load_bundle

    made = w.take.save_bundle(str(tmp_path / "winner.npz"))
    assert any(m.endswith(".npz") for m in made)
    frame = read_csv(orchard_csv)
    model = w.session.result["model"]
    assert list(load_bundle(tmp_path / "winner.npz").predict(frame)) == list(model.predict(frame))
    onnx_file = w.take.export_onnx(str(tmp_path / "winner.onnx"))[0]
    import onnx

    onnx.checker.check_model(onnx.load(onnx_file), full_check=True)
    report = w.take.write_report(str(tmp_path / "report.html"))[0]
    html.parser.HTMLParser().feed(open(report, encoding="utf-8").read())
    assert w.act_open_report.isEnabled()


def test_stop_mid_search_leaves_nothing_running_and_resumes(make_window, orchard_csv, tmp_path, qtbot):
    spec_path = tmp_path / "long.toml"
    w = make_window()
    w.open_path(str(orchard_csv))
    small_search(w, epochs=400, trials=30, folds=3, spec_path=spec_path)
    assert w.start()
    qtbot.waitUntil(lambda: any(r.epochs for r in w.session.book.records.values()), timeout=LONG)
    w.watch.stop_button.click()
    assert not w.act_stop.isEnabled()               # pressed once, it waits for the epoch
    qtbot.waitUntil(lambda: not w.session.running, timeout=LONG)
    assert w.session.book.ended.reason == "cancelled"

    study = study_of(tmp_path / "long.db", "long")
    states = [t.state.name for t in study.get_trials()]
    assert "RUNNING" not in states and "WAITING" not in states
    stopped = [t for t in study.get_trials() if t.user_attrs.get("end_reason") == "cancelled by the user"]
    assert stopped and all(t.user_attrs["epochs_run"] < 400 for t in stopped)
    before = len(states)

    # resume later, from a fresh window: it shows what is stored, then continues the search
    again = make_window("again.ini")
    assert again.open_path(str(spec_path))
    qtbot.waitUntil(lambda: again.session.synced, timeout=LONG)
    assert len(again.session.book.records) == before
    again.space.rows["epochs"].set_raw(2)
    # resuming continues the same budget: the trials stored count against it (not the cancelled)
    from labbench.gui.search_job import budget_used

    used = budget_used(again.current_spec())
    assert used == len([t for t in study.get_trials() if t not in stopped])
    again.space.trials.setValue(used + 2)
    assert again.start()
    qtbot.waitUntil(lambda: not again.session.running and again.session.synced, timeout=LONG)
    numbers = sorted(t.number for t in study_of(tmp_path / "long.db", "long").get_trials())
    assert numbers == list(range(before + 2))
    assert sorted(again.watch.notebook.items) == numbers

    # and a third window can watch the storage file itself
    watcher = make_window("watch.ini")
    assert watcher.open_path(str(tmp_path / "long.db"))
    qtbot.waitUntil(lambda: watcher.session.synced, timeout=LONG)
    assert sorted(watcher.session.book.records) == numbers
    watcher.session.flush()
    assert sorted(watcher.watch.notebook.items) == numbers


def test_closing_during_a_search_asks_then_stops_cleanly(make_window, dialogs, orchard_csv, tmp_path, qtbot):
    w = make_window()
    w.open_path(str(orchard_csv))
    small_search(w, epochs=400, trials=30, folds=3, spec_path=tmp_path / "closing.toml")
    assert w.start()
    qtbot.waitUntil(lambda: any(r.epochs for r in w.session.book.records.values()), timeout=LONG)
    dialogs.answer = dialogs.answer.No
    w.close()
    assert w.isVisible() and w.session.running and not w.session.stopping    # said no: keeps going
    dialogs.answer = dialogs.answer.Yes
    w.close()
    assert len(dialogs.texts("question")) == 2
    qtbot.waitUntil(lambda: not w.isVisible(), timeout=LONG)
    qtbot.waitUntil(lambda: not w.session.running, timeout=LONG)     # the search winds down after
    states = [t.state.name for t in study_of(tmp_path / "closing.db", "closing").get_trials()]
    assert states and "RUNNING" not in states
