"""Starting the window: ``run_app`` is what ``labbench``, ``labbench SPEC.toml`` and ``--demo`` call."""

from __future__ import annotations

import logging
import sys
from pathlib import Path

from PySide6.QtCore import QCoreApplication, QSettings, Qt, QTimer
from PySide6.QtGui import QGuiApplication
from PySide6.QtWidgets import QApplication, QMessageBox

from labbench.assets import demo_dir
from labbench.errors import LabbenchError

ORGANIZATION = "labbench"
APPLICATION = "labbench"
DEMO_SPEC = demo_dir() / "orchard.toml"   # the checkout's demo_sets, or the installed copy

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


KILL_AFTER_S = 20.0     # a search that has not stopped this long after SIGTERM is ended by force


def end_for_logout(window) -> None:
    """What SIGTERM (a desktop logout, ``kill``) does: stop the search as Stop does (the trials in
    flight are stored as stopped), then close; a search process that does not end in
    ``KILL_AFTER_S`` is terminated with its training processes, so nothing outlives the window
    holding the database."""
    session = window.session
    log.warning("SIGTERM: stopping the search and closing the window")
    if session.running:
        window._close_when_stopped = True
        session.stop()
        QTimer.singleShot(int(KILL_AFTER_S * 1000), lambda: _force_end(window))
    else:
        window.close()
        QApplication.quit()


def _force_end(window) -> None:
    thread = window.session.thread
    proc = getattr(thread, "_proc", None)
    if proc is not None and proc.is_alive():
        log.warning("the search process did not stop in %.0f s; ending it", KILL_AFTER_S)
        _end_tree(proc.pid)
    QApplication.quit()


def _end_tree(pid: int) -> None:
    """SIGTERM to a process and its descendants (then SIGKILL to those still there)."""
    import os
    import signal
    import time

    def children(p: int) -> list[int]:
        out = []
        for d in Path("/proc").glob("[0-9]*"):
            try:
                if int((d / "stat").read_text().rsplit(")", 1)[1].split()[1]) == p:
                    out.append(int(d.name))
            except (OSError, ValueError, IndexError):
                continue
        return out

    todo, tree = [pid], []
    while todo:
        p = todo.pop()
        tree.append(p)
        todo.extend(children(p))
    for sig in (signal.SIGTERM, signal.SIGKILL):
        for p in tree:
            try:
                os.kill(p, sig)
            except (ProcessLookupError, PermissionError):
                pass
        time.sleep(0.5)


def install_sigterm(app: QApplication, window) -> None:
    """Route SIGTERM into the event loop (a wake-up socket, so a waiting loop notices it at once)."""
    import signal
    import socket

    from PySide6.QtCore import QSocketNotifier

    if not hasattr(signal, "SIGTERM"):
        return
    reader, writer = socket.socketpair()
    reader.setblocking(False)
    writer.setblocking(False)
    signal.set_wakeup_fd(writer.fileno(), warn_on_full_buffer=False)
    fired: list[int] = []
    signal.signal(signal.SIGTERM, lambda signum, _frame: fired.append(signum))
    notifier = QSocketNotifier(reader.fileno(), QSocketNotifier.Type.Read, app)

    def woke() -> None:
        try:
            reader.recv(64)
        except OSError:
            pass
        if fired:
            fired.clear()
            end_for_logout(window)

    notifier.activated.connect(woke)
    app._labbench_sigterm = (reader, writer, notifier)      # kept alive with the application


def run_app(spec: str | None = None, demo: bool = False) -> int:
    if spec and not Path(spec).exists():
        raise LabbenchError(f"{spec}: file not found; give a spec file (.toml) or a CSV table")
    app = make_app()
    window = open_window(spec, demo)
    install_sigterm(app, window)
    window.show()
    return int(app.exec())
