"""Starting the window: ``run_app`` is what ``labbench``, ``labbench SPEC.toml`` and ``--demo`` call."""

from __future__ import annotations

import logging
import sys
from pathlib import Path

from PySide6.QtCore import QCoreApplication, QSettings, Qt, QTimer
from PySide6.QtGui import QGuiApplication
from PySide6.QtWidgets import QApplication, QMessageBox

from labbench.errors import LabbenchError

ORGANIZATION = "labbench"
APPLICATION = "labbench"
DEMO_SPEC = Path(__file__).resolve().parents[2] / "demo_sets" / "orchard.toml"

log = logging.getLogger("labbench.gui")


def make_app(argv: list[str] | None = None) -> QApplication:
    """The QApplication with labbench's names, high-DPI rounding and style sheet."""
    app = QApplication.instance()
    if app is None:
        QGuiApplication.setHighDpiScaleFactorRoundingPolicy(Qt.HighDpiScaleFactorRoundingPolicy.PassThrough)
        app = QApplication(argv if argv is not None else sys.argv[:1])
    QCoreApplication.setOrganizationName(ORGANIZATION)
    QCoreApplication.setApplicationName(APPLICATION)
    if app.property("labbench_styled"):      # styling again would re-polish every live widget
        return app
    app.setProperty("labbench_styled", True)
    import pyqtgraph as pg

    from labbench.gui.theme import Theme, is_dark, own_palette, stylesheet

    app.setStyle("Fusion")
    app.setPalette(own_palette(is_dark(app.palette())))
    app.setStyleSheet(stylesheet())
    t = Theme.current()
    pg.setConfigOptions(antialias=True, background=t.background, foreground=t.foreground)
    return app


def open_window(spec: str | None = None, demo: bool = False, settings: QSettings | None = None):
    """Build the main window and open ``spec`` (a .toml, a CSV or a .db) once it is shown."""
    from labbench.gui.window import MainWindow

    window = MainWindow(settings)
    target = str(DEMO_SPEC) if demo else spec
    if target is None:
        # no file named: the last experiment comes back (a spec file that still exists)
        last = [p for p in window.recent_files() if p.lower().endswith(".toml") and Path(p).is_file()]
        target = last[0] if last else None
    if demo and not DEMO_SPEC.exists():
        QTimer.singleShot(0, lambda: QMessageBox.warning(
            window, "No demo set", f"{DEMO_SPEC}: the demo spec is missing; run the demo_sets "
            "generator or open a CSV of your own"))
    elif target:
        QTimer.singleShot(0, lambda: window.open_path(target))
    return window


def run_app(spec: str | None = None, demo: bool = False) -> int:
    if spec and not Path(spec).exists():
        raise LabbenchError(f"{spec}: file not found; give a spec file (.toml) or a CSV table")
    app = make_app()
    window = open_window(spec, demo)
    window.show()
    return int(app.exec())
