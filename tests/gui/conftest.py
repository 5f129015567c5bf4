"""Fixtures for driving the real window offscreen.

Every window gets its own QSettings file under tmp_path, so no test touches the user's settings.
Dialogs that would block (QMessageBox) are replaced by recorders; tests read what they said.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest
from PySide6.QtCore import QSettings

ROOT = Path(__file__).resolve().parents[2]


class Dialogs:
    """Stands in for QMessageBox's static functions; ``answer`` is what question() returns."""

    def __init__(self):
        from PySide6.QtWidgets import QMessageBox

        self.shown: list[tuple[str, str, str]] = []
        self.answer = QMessageBox.StandardButton.Yes

    def _record(self, kind):
        def show(parent, title, text, *args, **kwargs):
            self.shown.append((kind, title, text))
            return self.answer if kind == "question" else 0x00000400  # Ok

        return show

    def texts(self, kind: str | None = None) -> list[str]:
        return [t for k, _title, t in self.shown if kind is None or k == kind]


@pytest.fixture
def dialogs(monkeypatch):
    from PySide6.QtWidgets import QMessageBox

    d = Dialogs()
    for kind in ("warning", "information", "question", "critical"):
        monkeypatch.setattr(QMessageBox, kind, staticmethod(d._record(kind)))
    return d


@pytest.fixture
def make_window(qtbot, tmp_path, dialogs):
    """Build main windows with test-only settings; each is closed (searches stopped) afterwards."""
    from labbench.gui.app import make_app
    from labbench.gui.window import MainWindow

    make_app()
    made = []

    def make(settings_name: str = "settings.ini"):
        settings = QSettings(str(tmp_path / settings_name), QSettings.Format.IniFormat)
        w = MainWindow(settings)
        w.quiet_dialogs = True
        if settings.value("geometry") is None:
            w.resize(1280, 820)
        qtbot.addWidget(w)
        w.show()
        made.append(w)
        return w

    yield make
    for w in made:
        if w.session.running:
            w.session.stop()
            qtbot.waitUntil(lambda w=w: not w.session.running, timeout=60_000)


@pytest.fixture
def orchard_csv(tmp_path) -> Path:
    """The invented orchard demo table (cut to its first 400 rows to keep the tests quick)."""
    src = ROOT / "demo_sets" / "orchard.csv"
    if not src.exists():
        import subprocess
        import sys

        subprocess.run([sys.executable, str(ROOT / "demo_sets" / "make_demo_sets.py"), str(tmp_path)],
                       check=True)
        src = tmp_path / "orchard.csv"
    lines = src.read_text(encoding="utf-8").splitlines(keepends=True)
    out = tmp_path / "orchard.csv"
    out.write_text("".join(lines[:401]), encoding="utf-8")
    return out


@pytest.fixture
def iris_csv(tmp_path) -> Path:
    """Fisher's iris data as shipped by scikit-learn (150 rows, 4 measurements, 3 species)."""
    from sklearn.datasets import load_iris

    frame = load_iris(as_frame=True).frame
    frame["species"] = frame.pop("target").map({0: "setosa", 1: "versicolor", 2: "virginica"})
    path = tmp_path / "iris.csv"
    frame.to_csv(path, index=False)
    return path


def small_search(w, *, epochs=3, trials=4, folds=3, seed_spread=0, spec_path=None):
    """Set a small space in the window (as a user would, through the editors)."""
    for name, _kind, use in w.data._row_widgets():
        if name == "crate_id":
            use.setChecked(False)
    w.data.target_box.setCurrentText("grade")
    sp = w.space
    sp.rows["epochs"].set_raw(epochs)
    sp.rows["learning_rate"].set_raw({"low": 0.003, "high": 0.05, "log": True})
    sp.rows["hidden_units"].set_raw({"choices": [4, 8, 16]})
    sp.rows["batch_size"].set_raw(64)
    sp.trials.setValue(trials)
    sp.folds.setValue(folds)
    sp.seed_spread.setValue(seed_spread)
    sp.pruner.setCurrentText("none")
    if spec_path is not None:
        w.spec_path = str(spec_path)
    return w


def copy_file(src: Path, dst: Path) -> Path:
    shutil.copy(src, dst)
    return dst
