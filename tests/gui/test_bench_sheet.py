"""The run page as a bench sheet: the winner strip, the learning-curve band, the notebook, the
good-score ranges, plain words on screen, keyboard reach, remembered layout and pictures."""

from __future__ import annotations

import re
import subprocess
import sys
import xml.etree.ElementTree as ET

import numpy as np
import pyqtgraph as pg
import pytest
from PySide6.QtCore import QModelIndex, QSettings, Qt
from PySide6.QtGui import QImage
from PySide6.QtTest import QTest
from PySide6.QtWidgets import (QAbstractButton, QAbstractItemView, QApplication, QComboBox, QLabel,
                               QListWidget, QTabWidget, QWidget)

from labbench.gui import theme
from labbench.gui.axes import good_span, integer_ticks, loss_band, robust_range
from labbench.search import events as ev

SEARCHED = ("learning_rate", "activation", "units_1", "l2_on", "l2", "batch_size")
INTERNAL = re.compile(r"units_\d|l2_on|learning_rate|batch_size|hidden_units|hidden_layers|\bstudy\b")


def _curve(n: int, epochs: int) -> list[float]:
    return [1.2 / e + 0.04 * n + 0.01 * (n % 3) * e for e in range(1, epochs + 1)]


def _trial(n, state, value, *, epochs=6, lr=0.01, act="relu", units=16, batch=32):
    params = {"learning_rate": lr, "activation": act, "units_1": units, "l2_on": n % 2 == 0,
              "l2": 1e-4, "batch_size": batch}
    settings = {"hidden": [units], "activation": act, "optimizer": "adam", "learning_rate": lr,
                "batch_size": batch, "epochs": epochs, "l2": 1e-4 if n % 2 == 0 else 0.0}
    out = [ev.TrialStarted(n, params, settings)]
    for e, loss in enumerate(_curve(n, epochs), start=1):
        out.append(ev.EpochScored(n, e, loss * 0.9, loss, 0.5, epochs))
    if state != "running":
        folds = (value + 0.01, value - 0.02, value + 0.01) if value is not None else ()
        out.append(ev.TrialEnded(n, state, value, folds, 1.5, "", {}, epochs))
    return out


SCORES = [0.71, 0.64, 0.80, 0.77, None, 0.83, 0.69, 0.75, 0.82, None, 0.78, 0.73]
SUMMARY = {"trial_number": 5, "metric": "accuracy", "cv_mean": 0.83, "cv_std": 0.0173,
           "holdout_score": 0.8125, "holdout_rows": 80,
           "seed_spread": {"scores": [0.83, 0.81, 0.82], "mean": 0.82, "std": 0.01, "min": 0.81, "max": 0.83},
           "settings": {"hidden": [24], "activation": "tanh"}}


def _fill(w, *, winner=True, running=True):
    s = w.session
    events = [ev.SearchStarted("demo", "sqlite:///x.db", "accuracy", "maximize", 20, None, 0, SEARCHED,
                               ("learning_rate",))]
    best = None
    for n, v in enumerate(SCORES):
        state = "pruned" if v is None else "complete"
        events += _trial(n, state, v, lr=0.001 * (n + 1), act="tanh" if n % 2 else "relu",
                         units=4 + 4 * n, batch=32 if n % 3 else 64)
        if v is not None and (best is None or v > best):
            best = v
            events.append(ev.NewBest(n, v, 0.0173, (v + 0.01, v - 0.02, v + 0.01), {}))
    if running:
        events += _trial(len(SCORES), "running", None, epochs=3)
    if winner:
        events += [ev.SearchEnded("budget", {"complete": 10, "pruned": 2}, 5, 0.83), ev.WinnerReady(SUMMARY, ())]
    for e in events:
        s._on_event(e)
    s.flush()
    return s


def test_the_sheet_shows_the_winner_and_how_sure_we_are(make_window):
    w = make_window()
    s = _fill(w, running=False)
    sheet = w.watch.sheet
    text = sheet.headline.text()
    assert sheet.shown_number == 5 and sheet.shown_value == 0.83
    for expected in ("0.83", "± 0.0173", "trial 5", "mean of 3 folds", "hold-out 0.8125 on 80 rows",
                     "across 3 seeds 0.82 ± 0.01"):
        assert expected in text
    # the settings in words, not keys
    assert "1 layer of 24 units, tanh, adam, learning rate 0.006, batch 32, 6 epochs" in sheet.details_html
    assert "0.8125" in sheet.final_html
    assert sheet.findChild(QLabel, "panelTitle").text() == "<b>The winner</b>"
    # the fold bars start at zero
    assert sheet.fold_range[0] <= 0.0 < sheet.fold_range[1]
    assert s.book.best_number == 5


def test_the_band_is_drawn_from_every_trial(make_window):
    w = make_window()
    s = _fill(w, winner=False, running=False)
    epochs, low, mid, high = w.watch.curves.band_data
    curves = [_curve(n, 6) for n in range(len(SCORES))]
    # reference: numpy.percentile over every trial's loss at each epoch
    ref = np.percentile(np.asarray(curves), [10, 50, 90], axis=0)
    assert list(epochs) == [1, 2, 3, 4, 5, 6]
    assert low == pytest.approx(ref[0]) and mid == pytest.approx(ref[1]) and high == pytest.approx(ref[2])
    assert w.watch.curves.band_low.getData()[1] == pytest.approx(ref[0])
    # only the winner is a line (nothing runs, nothing is picked)
    assert w.watch.curves.shown == {"best": 5, "running": None, "selected": None}
    assert s.selected is None


def test_picking_a_notebook_entry_draws_that_trials_curve(make_window, qtbot):
    w = make_window()
    w.steps.setCurrentRow(2)
    s = _fill(w)
    notebook = w.watch.notebook
    item = notebook.items[7]
    notebook.list.scrollToItem(item)
    rect = notebook.list.visualItemRect(item)
    qtbot.mouseClick(notebook.list.viewport(), Qt.MouseButton.LeftButton, pos=rect.center())
    assert s.selected == 7
    s.flush()
    line = w.watch.curves.lines["selected"]
    assert w.watch.curves.shown["selected"] == 7
    assert list(line.getData()[1]) == pytest.approx(_curve(7, 6))
    assert line.opts["pen"].color().name() == theme.state_colour("selected").name()
    # the table follows the notebook, and the ranges ring the picked trial
    rows = w.watch.table.view.selectionModel().selectedRows()
    assert len(rows) == 1 and w.watch.table._selected == 7
    assert all(r.picked is not None for r in w.watch.story.ranges.rows)
    # the entry reads as a sentence
    assert item.text().splitlines()[0] == "Trial 7 — finished"
    assert "accuracy 0.75" in item.text() and "1 layer of 32 units, tanh" in item.text()


def _visible_words(root: QWidget) -> list[str]:
    out = []
    for wdg in [root] + root.findChildren(QWidget):
        out += [wdg.toolTip(), wdg.accessibleName(), wdg.accessibleDescription()]
        if isinstance(wdg, QLabel):
            out.append(wdg.text())
        if isinstance(wdg, QAbstractButton):
            out.append(wdg.text())
        if isinstance(wdg, QComboBox):
            out += [wdg.itemText(i) for i in range(wdg.count())]
        if isinstance(wdg, QTabWidget):
            out += [wdg.tabText(i) for i in range(wdg.count())] + [wdg.tabToolTip(i) for i in range(wdg.count())]
        if isinstance(wdg, QListWidget):
            out += [wdg.item(i).text() for i in range(wdg.count())]
            out += [wdg.item(i).toolTip() for i in range(wdg.count())]
        if isinstance(wdg, QAbstractItemView) and wdg.model() is not None:
            m = wdg.model()
            cols = m.columnCount(QModelIndex()) if not isinstance(wdg, QListWidget) else 1
            out += [str(m.headerData(c, Qt.Orientation.Horizontal) or "") for c in range(cols)]
            out += [str(m.index(r, c).data() or "") for r in range(m.rowCount(QModelIndex())) for c in range(cols)]
        if hasattr(wdg, "visible_words"):
            out += wdg.visible_words()
    for panel in (w for w in root.findChildren(QWidget) if isinstance(getattr(w, "plot", None), pg.PlotItem)):
        for name in ("left", "bottom"):
            out.append(panel.plot.getAxis(name).labelText)
    return [x for x in out if x]


def test_no_internal_key_reaches_the_run_page(make_window):
    w = make_window()
    _fill(w)
    w.watch.notebook.select(3)
    w.session.flush()
    words = _visible_words(w.watch)
    assert any("Units, layer 1" in x for x in words)          # the searched settings are there...
    leaks = [x for x in words if INTERNAL.search(x)]
    assert leaks == []                                         # ...under their labels only


def test_integer_settings_and_trial_axes_get_whole_ticks(make_window):
    assert integer_ticks(4.0, 48.0) == [10, 20, 30, 40]
    assert integer_ticks(1, 3) == [1, 2, 3]
    assert integer_ticks(0.2, 0.8) == [0]       # no whole number inside: one honest mark
    w = make_window()
    _fill(w)
    rows = {r.label: r for r in w.watch.story.ranges.rows}
    for label in ("Units, layer 1", "Batch size"):
        assert rows[label].kind == "int"
        assert rows[label].ticks and all(re.fullmatch(r"\d+", text) for _p, text in rows[label].ticks)
    ticks = w.watch.sheet.climb.plot.getAxis("bottom")._tickLevels[0]
    assert ticks and all(float(v).is_integer() for v, _t in ticks)
    epochs = w.watch.curves.plot.getAxis("bottom")._tickLevels[0]
    assert epochs and all(float(v).is_integer() for v, _t in epochs)


def test_outliers_do_not_flatten_the_pictures(make_window):
    values = list(np.linspace(0.5, 0.6, 40)) + [250.0]
    low, high, outside = robust_range(values)
    assert high < 1.0 and outside == 1
    # good span: the best quarter of 8 trials is 2 trials (common practice: top quartile)
    assert good_span([1, 2, 3, 4, 5, 6, 7, 8], [0.1, 0.9, 0.2, 0.8, 0.3, 0.4, 0.5, 0.6], "maximize") == (2, 4, 2)
    assert good_span([1, 2, 3, 4], [4.0, 1.0, 3.0, 2.0], "minimize") == (2, 2, 1)
    w = make_window()
    s = w.session
    events = [ev.SearchStarted("demo", "sqlite:///x.db", "accuracy", "maximize", 20, None, 0,
                               ("learning_rate",), ("learning_rate",))]
    for n in range(12):
        events += _trial(n, "complete", 0.7 + 0.01 * n)
    events += [ev.TrialStarted(12, {"learning_rate": 0.5}, {"epochs": 3}),
               ev.EpochScored(12, 1, 900.0, 900.0, 0.1, 3)]
    for e in events:
        s._on_event(e)
    s.flush()
    (_x0, _x1), (y0, y1) = w.watch.curves.plot.getViewBox().viewRange()
    assert y1 < 10 and w.watch.curves.clip_note.isVisible()
    assert "outside this view" in w.watch.curves.clip_note.toPlainText()


def test_band_of_ragged_curves():
    epochs, low, mid, high = loss_band([[3.0, 2.0, 1.0], [5.0, 4.0], [1.0]])
    # epoch 3 was reached by one trial only: no band there
    assert list(epochs) == [1.0, 2.0]
    assert mid == pytest.approx([3.0, 3.0]) and low[0] == pytest.approx(np.percentile([3, 5, 1], 10))


def test_tab_reaches_every_control_and_leaves_the_lists(make_window, qtbot):
    w = make_window()
    w.steps.setCurrentRow(2)
    _fill(w)
    page = w.watch
    w.activateWindow()
    qtbot.waitUntil(lambda: QApplication.activeWindow() is w, timeout=5000)
    # a tab widget hands its focus to its tab bar, which is in the list itself
    controls = [c for c in page.findChildren(QWidget)
                if c.isVisible() and c.isEnabled() and c.focusPolicy() & Qt.FocusPolicy.TabFocus
                and not isinstance(c, QTabWidget)]
    assert page.notebook.list in controls and page.curves.log_box in controls
    page.start_button.setFocus() if page.start_button.isEnabled() else page.curves.log_box.setFocus()
    seen = []
    for _ in range(3 * len(controls) + 20):
        fw = QApplication.focusWidget()
        assert fw is not None
        seen.append(fw)
        QTest.keyClick(fw, Qt.Key.Key_Tab)
    missing = [f"{type(c).__name__} {c.objectName() or c.accessibleName() or c.toolTip()[:40]} in "
               f"{type(c.parent()).__name__} {c.parent().objectName()}"
               for c in controls if c not in seen]
    assert missing == []
    # Tab moves out of the notebook and out of the table (arrows move inside them)
    page.notebook.list.setFocus()
    QTest.keyClick(page.notebook.list, Qt.Key.Key_Tab)
    assert QApplication.focusWidget() is not page.notebook.list
    page.lower.setCurrentIndex(1)
    page.table.view.setFocus()
    assert QApplication.focusWidget() is page.table.view
    QTest.keyClick(page.table.view, Qt.Key.Key_Tab)
    assert QApplication.focusWidget() is not page.table.view


def test_layout_and_log_choice_are_remembered(make_window, tmp_path):
    w = make_window("layout.ini")
    w.steps.setCurrentRow(2)
    page = w.watch
    page.body.setSizes([700, 300])
    wanted = page.body.sizes()
    page.curves.log_box.setChecked(True)
    w.close()
    settings = QSettings(str(tmp_path / "layout.ini"), QSettings.Format.IniFormat)
    settings.remove("geometry")      # the offscreen screen is small; open the second at the same size
    settings.sync()
    again = make_window("layout.ini")
    again.steps.setCurrentRow(2)
    got = again.watch.body.sizes()
    assert got[0] / sum(got) == pytest.approx(wanted[0] / sum(wanted), abs=0.02)
    assert again.watch.curves.log_box.isChecked()
    assert settings.value("curves/log_scale") in (True, "true")


def test_the_window_fits_a_small_laptop_screen(make_window):
    w = make_window()
    w.steps.setCurrentRow(2)
    hint = w.minimumSizeHint()
    # 1366 x 768 less a desktop panel and the title bar (common practice: ~60 px)
    assert hint.width() <= 1366 and hint.height() <= 708


def test_pictures_keep_title_and_key(make_window, tmp_path):
    w = make_window()
    w.steps.setCurrentRow(2)
    _fill(w)
    for panel in w.watch.panels:
        svg = panel.export(tmp_path / "p.svg")
        text = svg.read_text(encoding="utf-8")
        root = ET.fromstring(text)
        assert root.tag.endswith("svg")
        words = " ".join(t for t in root.itertext())
        assert panel.title in words                              # the title is real text
        png = panel.export(tmp_path / "p.png")
        img = QImage(str(png))
        assert not img.isNull() and img.width() >= 2 * panel.picture_widget().width()
    key = " ".join(ET.fromstring((tmp_path / "p.svg").read_text()).itertext())
    assert w.watch.panels[-1].title == "The winner"
    curves_svg = w.watch.curves.export(tmp_path / "c.svg").read_text(encoding="utf-8")
    assert "10–90 % of all trials" in " ".join(ET.fromstring(curves_svg).itertext())
    assert key


def test_the_palette_is_plain_data():
    code = ("import sys, labbench.palette as p; assert 'PySide6' not in sys.modules; "
            "assert set(p.LIGHT) == set(p.DARK); "
            "assert all(v.startswith('#') and len(v) == 7 for v in list(p.LIGHT.values()) + list(p.DARK.values())); "
            "print(len(p.LIGHT))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert int(out.stdout) >= 10


def test_every_page_fits_a_narrow_window(make_window):
    w = make_window()
    for row in range(3):
        w.steps.setCurrentRow(row)
        # half of a 1600-pixel screen, less the window frame (common practice: side-by-side windows)
        assert w.minimumSizeHint().width() <= 795


def test_the_last_experiment_comes_back(tmp_path, qtbot, dialogs, orchard_csv):
    from labbench.gui import app as gui_app

    spec = tmp_path / "orchard.toml"
    spec.write_text('[data]\npath = "orchard.csv"\ntarget = "grade"\nignore = ["crate_id"]\n', encoding="utf-8")
    gui_app.make_app()
    settings = QSettings(str(tmp_path / "last.ini"), QSettings.Format.IniFormat)
    settings.setValue("recent_files", [str(tmp_path / "gone.toml"), str(spec)])   # the first was deleted
    w = gui_app.open_window(settings=settings)
    w.quiet_dialogs = True
    qtbot.addWidget(w)
    w.show()
    qtbot.waitUntil(lambda: w.data.frame is not None, timeout=30_000)
    assert w.spec_path == str(spec) and w.data.target_box.currentText() == "grade"
