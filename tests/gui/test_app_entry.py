"""What `labbench`, `labbench FILE` and `labbench --demo` open (without entering the event loop)."""

from __future__ import annotations

import pytest
from PySide6.QtCore import QSettings

from labbench.errors import LabbenchError
from labbench.gui import app as gui_app
from labbench.search.spec import load_spec


def _window(tmp_path, qtbot, **kwargs):
    gui_app.make_app()
    settings = QSettings(str(tmp_path / "entry.ini"), QSettings.Format.IniFormat)
    w = gui_app.open_window(settings=settings, **kwargs)
    w.quiet_dialogs = True
    qtbot.addWidget(w)
    w.show()
    return w


def test_demo_opens_the_orchard_experiment(tmp_path, qtbot, dialogs):
    if not gui_app.DEMO_SPEC.exists():
        pytest.skip("demo_sets/orchard.toml is not written yet")
    w = _window(tmp_path, qtbot, demo=True)
    qtbot.waitUntil(lambda: w.data.frame is not None, timeout=30_000)
    assert w.current_spec() == load_spec(gui_app.DEMO_SPEC)
    assert w.data.target_box.currentText() == "grade" and not dialogs.shown


def test_a_csv_argument_opens_the_data_step(tmp_path, qtbot, iris_csv):
    w = _window(tmp_path, qtbot, spec=str(iris_csv))
    qtbot.waitUntil(lambda: w.data.frame is not None, timeout=30_000)
    assert w.steps.currentRow() == 0 and len(w.data.frame) == 150


def test_a_missing_file_is_a_one_line_error_before_any_window():
    with pytest.raises(LabbenchError, match="file not found"):
        gui_app.run_app(spec="/nowhere/at/all.toml")


def test_start_afresh_asks_first(make_window, dialogs, iris_csv, tmp_path):
    w = make_window()
    w.open_path(str(iris_csv))
    w.spec_path = str(tmp_path / "iris.toml")
    dialogs.answer = dialogs.answer.No
    assert w.start(fresh=True) is False
    assert dialogs.texts("question") and not w.session.running
