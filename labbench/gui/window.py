"""The main window: three steps (data, search, run and watch) under one menu bar and tool bar."""

from __future__ import annotations

import logging
from pathlib import Path
from typing import Any

from PySide6.QtCore import QSettings, QSize, Qt
from PySide6.QtGui import QAction, QKeySequence
from PySide6.QtWidgets import (QFileDialog, QHBoxLayout, QInputDialog, QLabel, QListWidget,
                               QListWidgetItem, QMainWindow, QMessageBox, QStackedWidget, QToolBar,
                               QWidget)

from labbench.errors import LabbenchError, SpecError
from labbench.gui import theme
from labbench.gui.data_page import DataPage
from labbench.gui.session import SearchSession
from labbench.gui.space_page import SpacePage, key_of
from labbench.gui.takeaway import Takeaway, has
from labbench.gui.watch_page import WatchPage

log = logging.getLogger("labbench.gui")

MAX_RECENT = 8
STEPS = (("data", "Data", "1"), ("search", "Search", "2"), ("watch", "Run and watch", "3"))


class MainWindow(QMainWindow):
    def __init__(self, settings: QSettings | None = None, parent=None):
        super().__init__(parent)
        self.settings = settings if settings is not None else QSettings()
        self.quiet_dialogs = False        # tests switch off the "written to ..." dialogs
        self.spec_path: str | None = None
        self.dirty = False
        self._close_when_stopped = False
        self.setWindowTitle("labbench")
        self.setWindowIcon(theme.icon("labbench", theme.state_colour("best")))
        self.setAcceptDrops(True)

        self.data = DataPage()
        self.space = SpacePage()
        self.watch = WatchPage()
        self.session = SearchSession(self.watch, self)
        self.take = Takeaway(self)

        self.steps = QListWidget()
        self.steps.setObjectName("stepList")
        self.steps.setFixedWidth(188)
        self.steps.setFocusPolicy(Qt.FocusPolicy.TabFocus)
        self.steps.setIconSize(QSize(20, 20))
        self.stack = QStackedWidget()
        for (key, label, num), page in zip(STEPS, (self.data, self.space, self.watch)):
            item = QListWidgetItem(theme.icon(f"step_{key}"), f"{num}  {label}")
            item.setSizeHint(QSize(178, 40))
            self.steps.addItem(item)
            self.stack.addWidget(page)
        self.steps.currentRowChanged.connect(self.stack.setCurrentIndex)
        central = QWidget()
        lay = QHBoxLayout(central)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.setSpacing(0)
        lay.addWidget(self.steps)
        lay.addWidget(self.stack, 1)
        self.setCentralWidget(central)
        self.steps.setCurrentRow(0)

        self.problem_label = QLabel("")
        self.problem_label.setObjectName("statusProblem")
        self.statusBar().addPermanentWidget(self.problem_label)
        self.where_label = QLabel("")
        self.statusBar().addPermanentWidget(self.where_label)

        self._make_actions()
        self._make_menus()
        self.data.open_requested.connect(self.open_csv_dialog)
        self.data.changed.connect(self._edited)
        self.space.changed.connect(self._edited)
        self.watch.start_button.clicked.connect(self.act_start.trigger)
        self.watch.stop_button.clicked.connect(self.act_stop.trigger)
        self.session.changed.connect(self.update_actions)
        self.session.failed.connect(self._search_failed)
        self.session.finished.connect(self._search_finished)
        self._restore()
        self.validate()
        self.update_actions()
        self.session.warm_up()

    # ------------------------------------------------------------------ actions and menus
    def _action(self, text: str, slot, icon: str | None = None, shortcut=None, tip: str = "") -> QAction:
        a = QAction(theme.icon(icon) if icon else theme.icon("blank"), text, self)
        if shortcut is not None:
            a.setShortcut(QKeySequence(shortcut))
        if tip:
            a.setStatusTip(tip)
            a.setToolTip(tip)
        a.triggered.connect(lambda _checked=False: slot())
        return a

    def _make_actions(self) -> None:
        A = self._action
        K = QKeySequence.StandardKey
        self.act_open_csv = A("Open CSV…", self.open_csv_dialog, "open", K.Open, "Read a table from a CSV file")
        self.act_open_spec = A("Open experiment…", self.open_spec_dialog, "open_spec", "Ctrl+Shift+O",
                               "Open a spec file (.toml) with its data, search and stored trials")
        self.act_watch = A("Watch a stored search…", self.watch_dialog, "watch", "Ctrl+Shift+W",
                           "Show the trials kept in a database, also while other machines run them")
        self.act_save = A("Save experiment", self.save_spec, "save", K.Save, "Save everything as the spec file")
        self.act_save_as = A("Save experiment as…", lambda: self.save_spec(ask=True), "save", K.SaveAs,
                             "Save everything as a new spec file")
        self.act_quit = A("Quit", self.close, None, K.Quit, "Close labbench")
        self.act_start = A("Start", self.start, "start", "Ctrl+R",
                           "Start the search (or continue the one stored for this experiment)")
        self.act_fresh = A("Start afresh…", lambda: self.start(fresh=True), "start", "Ctrl+Shift+R",
                           "Delete the stored trials of this experiment and start over")
        self.act_stop = A("Stop", self.stop, "stop", "Ctrl+.", "Stop after the current epoch; the trials so far stay stored")
        self.act_copy = A("Copy winning settings", self.take.copy_settings, "copy", "Ctrl+Shift+C",
                          "Put the best settings on the clipboard as TOML lines")
        self.act_winner = A("Save winner files…", self.take.save_winner, "winner", None,
                            "Write winner.json and winner.toml (every setting fixed) to a folder")
        self.act_table = A("Save trials table…", self.take.export_table, "table", None,
                           "Write every trial as a CSV table")
        self.act_pictures = A("Save all pictures…", self.take.export_pictures, "picture", None,
                              "Write every picture as PNG and SVG to a folder")
        self.act_bundle = A("Save model bundle…", self.take.save_bundle, "bundle", None,
                            "Save the refit winner with its preprocessing as one .npz file")
        self.act_onnx = A("Export ONNX…", self.take.export_onnx, "onnx", None,
                          "Write the refit winner as an ONNX model")
        self.act_report = A("Write report…", self.take.write_report, "report", None,
                            "Write one self-contained HTML report of this search")
        self.act_open_report = A("Open report", self.take.open_report, "open_report", None,
                                 "Open the last written report in the browser")

    def _make_menus(self) -> None:
        mb = self.menuBar()
        f = mb.addMenu("&File")
        for a in (self.act_open_csv, self.act_open_spec, self.act_watch):
            f.addAction(a)
        self.recent_menu = f.addMenu("Recent files")
        f.addSeparator()
        f.addAction(self.act_save)
        f.addAction(self.act_save_as)
        f.addSeparator()
        f.addAction(self.act_quit)
        s = mb.addMenu("&Search")
        for a in (self.act_start, self.act_stop, self.act_fresh):
            s.addAction(a)
        w = mb.addMenu("&Winner")
        for a in (self.act_copy, self.act_winner, self.act_table, self.act_pictures):
            w.addAction(a)
        w.addSeparator()
        for a in (self.act_bundle, self.act_onnx, self.act_report, self.act_open_report):
            w.addAction(a)
        v = mb.addMenu("&View")
        for i, (_key, label, num) in enumerate(STEPS):
            a = QAction(label, self)
            a.setShortcut(QKeySequence(f"Ctrl+{num}"))
            a.triggered.connect(lambda _c=False, i=i: self.steps.setCurrentRow(i))
            v.addAction(a)
        h = mb.addMenu("&Help")
        h.addAction(self._action("About labbench", self._about))

        tb = QToolBar("Main")
        tb.setObjectName("mainToolBar")
        tb.setIconSize(QSize(20, 20))
        tb.setToolButtonStyle(Qt.ToolButtonStyle.ToolButtonTextBesideIcon)
        for a in (self.act_open_csv, self.act_open_spec, self.act_save):
            tb.addAction(a)
        tb.addSeparator()
        tb.addAction(self.act_start)
        tb.addAction(self.act_stop)
        tb.addSeparator()
        tb.addAction(self.act_copy)
        tb.addAction(self.act_winner)
        tb.addSeparator()
        for a in (self.act_bundle, self.act_onnx, self.act_report):
            tb.addAction(a)
        self.addToolBar(tb)
        self._fill_recent()

    def update_actions(self) -> None:
        running, book = self.session.running, self.session.book
        ok = not self.problem_label.text() and self.data.frame is not None
        self.act_start.setEnabled(ok and not running)
        self.act_fresh.setEnabled(ok and not running)
        self.act_stop.setEnabled(running and not self.session.stopping)
        self.watch.start_button.setEnabled(self.act_start.isEnabled())
        self.watch.stop_button.setEnabled(self.act_stop.isEnabled())
        for a in (self.act_open_csv, self.act_open_spec, self.act_watch):
            a.setEnabled(not running)
        self.act_copy.setEnabled(book.best_number is not None or book.winner is not None)
        self.act_winner.setEnabled(book.winner is not None and self.session.spec is not None and not running)
        self.act_table.setEnabled(bool(book.records))
        self.act_pictures.setEnabled(bool(book.records))
        model = (self.session.result or {}).get("model") is not None
        self.act_bundle.setEnabled(model and has("save_bundle"))
        self.act_onnx.setEnabled(model and has("export_onnx"))
        self.act_report.setEnabled(has("write_report") and bool(self.session.url) and not running
                                   and book.best_number is not None)
        self.act_open_report.setEnabled(bool(self.take.report_path))
        for a, why in ((self.act_bundle, "after a search has checked its winner"),
                       (self.act_onnx, "after a search has checked its winner"),
                       (self.act_report, "once a search has a finished trial")):
            a.setToolTip(a.statusTip() + ("" if a.isEnabled() else f" (available {why})"))
        where = self.session.book.storage or self.session.url or ""   # the runner's is masked
        if where != getattr(self, "_where", None):
            self._where = where
            self.where_label.setText(f"storage: {_masked(where)}" if where else "")

    # ------------------------------------------------------------------ editing and validation
    def _edited(self) -> None:
        self.dirty = True
        self.validate()
        self._title()

    def _title(self) -> None:
        name = Path(self.spec_path).name if self.spec_path else (
            Path(self.data.path).name if self.data.path else "new experiment")
        self.setWindowTitle(f"{name}{' •' if self.dirty else ''} — labbench")

    def spec_dict(self) -> dict[str, Any] | None:
        data = self.data.data_dict()
        if data is None:
            return None
        return {"data": data, "evaluation": self.space.evaluation_dict(self.data.metric()),
                "search": self.space.search_dict(), "space": self.space.space_dict()}

    def current_spec(self):
        """The Spec the window shows (raises the core's SpecError), or None without data."""
        from labbench.search.spec import spec_from_dict

        d = self.spec_dict()
        if d is None:
            return None
        base = str(Path(self.spec_path).resolve().parent) if self.spec_path else str(Path.cwd())
        return spec_from_dict(d, base, self.spec_path)

    def validate(self) -> dict[str, str]:
        problems = self.space.check_space()
        if not problems and self.data.frame is not None:
            try:
                self.current_spec()
            except SpecError as exc:
                k = key_of(str(exc))
                problems[f"{k[0]}.{k[1]}" if k else "spec"] = str(exc)
        if self.data.task_error:
            problems["data.target"] = self.data.task_error
        if not problems and self.data.frame is not None:
            try:
                n = len(self.current_spec().space.searched_params())
                self.watch.settings_plot.ensure(n)      # made now, not in the middle of a search
            except LabbenchError:
                pass
        self.space.show_problems({k: v for k, v in problems.items() if not k.startswith("data.")})
        first = next(iter(problems.values()), "")
        self.problem_label.setText(("⚠ " + first[:120]) if first else "")
        self.problem_label.setToolTip("\n".join(problems.values()))
        self.update_actions()
        return problems

    # ------------------------------------------------------------------ files
    def _start_dir(self) -> str:
        return str(self.settings.value("last_dir", str(Path.home())))

    def open_csv_dialog(self) -> None:
        path, _ = QFileDialog.getOpenFileName(self, "Open a CSV table", self._start_dir(),
                                              "Tables (*.csv *.tsv *.txt);;All files (*)")
        if path:
            self.open_path(path)

    def open_spec_dialog(self) -> None:
        path, _ = QFileDialog.getOpenFileName(self, "Open an experiment", self._start_dir(),
                                              "Spec files (*.toml);;All files (*)")
        if path:
            self.open_path(path)

    def open_path(self, path: str) -> bool:
        """Open a CSV, a spec (.toml) or a SQLite storage (.db); errors go to a dialog."""
        if self.session.running:
            return False
        suffix = Path(path).suffix.lower()
        try:
            if suffix == ".toml":
                self.open_spec(path)
            elif suffix in (".db", ".sqlite", ".sqlite3"):
                self.watch_storage(f"sqlite:///{Path(path).resolve().as_posix()}")
            else:
                self.open_csv(path)
        except LabbenchError as exc:
            QMessageBox.warning(self, "Cannot open this file", str(exc))
            return False
        self.settings.setValue("last_dir", str(Path(path).resolve().parent))
        self._remember(path)
        return True

    def open_csv(self, path: str) -> None:
        self.setCursor(Qt.CursorShape.WaitCursor)
        try:
            self.data.load(path)
        finally:
            self.unsetCursor()
        self.spec_path = None
        self.dirty = True
        self.steps.setCurrentRow(0)
        self.validate()
        self._title()
        self.statusBar().showMessage(f"Read {path}: pick the target column and the inputs", 8000)

    def open_spec(self, path: str) -> None:
        from labbench.search.spec import load_spec
        from labbench.search.storage import resolve_url

        spec = load_spec(path)
        self.data.set_from_spec(spec.data, spec.evaluation.metric)
        self.space.set_from_spec(spec)
        self.spec_path = str(Path(path).resolve())
        self.dirty = False
        self.validate()
        self._title()
        url = resolve_url(spec)
        if _storage_exists(url):
            self.session.watch(url, spec.study_name(), spec, quiet=True)
            self.steps.setCurrentRow(2)
            self.statusBar().showMessage("Showing the trials stored for this experiment; Start continues the search", 10000)
        self.update_actions()

    def save_spec(self, ask: bool = False) -> str | None:
        from labbench.search.spec import save_spec

        try:
            spec = self.current_spec()
        except SpecError as exc:
            QMessageBox.warning(self, "The experiment has a problem", str(exc))
            return None
        if spec is None:
            QMessageBox.information(self, "Nothing to save yet", "Open a CSV table first.")
            return None
        path = self.spec_path
        if ask or not path:
            base = Path(self.data.path or self._start_dir())
            start = str(base.with_suffix(".toml")) if base.suffix else str(base / "experiment.toml")
            path, _ = QFileDialog.getSaveFileName(self, "Save the experiment", start, "Spec files (*.toml)")
            if not path:
                return None
            if not path.endswith(".toml"):
                path += ".toml"
        try:
            save_spec(spec, path)
        except OSError as exc:
            QMessageBox.warning(self, "Cannot save", f"{path}: {exc.strerror or exc}")
            return None
        self.spec_path = str(Path(path).resolve())
        self.dirty = False
        self._title()
        self._remember(path)
        self.statusBar().showMessage(f"Experiment saved to {path}", 6000)
        return self.spec_path

    # ------------------------------------------------------------------ storage
    def watch_dialog(self) -> None:
        url, ok = QInputDialog.getText(self, "Watch a stored search",
                                       "Storage URL (e.g. sqlite:///path/search.db or postgresql+psycopg://user@host/db):")
        if ok and url.strip():
            try:
                self.watch_storage(url.strip())
            except LabbenchError as exc:
                QMessageBox.warning(self, "Cannot open the storage", str(exc))

    def watch_storage(self, url: str, name: str | None = None) -> None:
        from labbench.gui.storage_list import study_names

        names = study_names(url)
        if name is None:
            if not names:
                raise SpecError(f"storage {_masked(url)}: holds no search yet")
            name = names[0]
            if len(names) > 1:
                name, ok = QInputDialog.getItem(self, "Which search?", "Searches in this storage:", names, 0, False)
                if not ok:
                    return
        self.session.watch(url, name)
        self.steps.setCurrentRow(2)
        self.statusBar().showMessage(f"Watching search “{name}”: refreshed every few seconds", 8000)

    # ------------------------------------------------------------------ run
    def start(self, fresh: bool = False) -> bool:
        if self.session.running:
            return False
        problems = self.validate()
        if problems:
            self.steps.setCurrentRow(1)
            QMessageBox.warning(self, "Fix the search first", next(iter(problems.values())))
            return False
        if fresh:
            if QMessageBox.question(self, "Start afresh?", "Delete every stored trial of this experiment "
                                    "and start a new search under the same name?") != QMessageBox.StandardButton.Yes:
                return False
        if self.dirty or not self.spec_path:
            if not self.save_spec():
                return False
        try:
            spec = self.current_spec()
            self.session.start(spec, fresh=fresh)
        except LabbenchError as exc:
            QMessageBox.warning(self, "Cannot start", str(exc))
            return False
        self.steps.setCurrentRow(2)
        self.statusBar().showMessage("Search started", 4000)
        self.update_actions()
        return True

    def stop(self) -> None:
        self.session.stop()
        self.statusBar().showMessage("Stopping after the current epoch…")

    def _search_failed(self, message: str) -> None:
        if self._close_when_stopped:
            return
        QMessageBox.warning(self, "The search stopped", message)

    def _search_finished(self, result) -> None:
        if self._close_when_stopped:
            self.close()
            return
        book = self.session.book
        if book.ended is not None:
            words = {"budget": "Search finished", "time": "Time limit reached",
                     "cancelled": "Search stopped; start again to continue it",
                     "error": "The search stopped by an error"}
            self.statusBar().showMessage(words.get(book.ended.reason, "Search ended"), 10000)
        self.update_actions()

    # ------------------------------------------------------------------ window life
    def _restore(self) -> None:
        geometry = self.settings.value("geometry")
        if geometry is not None:
            self.restoreGeometry(geometry)
        else:
            self.resize(1360, 860)
        state = self.settings.value("window_state")
        if state is not None:
            self.restoreState(state)

    def closeEvent(self, event) -> None:
        if self.session.running:
            if not self._close_when_stopped:
                answer = QMessageBox.question(
                    self, "A search is running",
                    "Stop the search and close? The finished trials stay stored; the trial in "
                    "training is stopped and marked, and Start continues the search later.")
                if answer != QMessageBox.StandardButton.Yes:
                    event.ignore()
                    return
                self._close_when_stopped = True
                self.session.stop()
                self.statusBar().showMessage("Stopping the search, then closing…")
            event.ignore()          # closed again from _search_finished once the thread is done
            return
        self.settings.setValue("geometry", self.saveGeometry())
        self.settings.setValue("window_state", self.saveState())
        self.settings.sync()
        self.session.close()
        super().closeEvent(event)

    def dragEnterEvent(self, event) -> None:
        urls = event.mimeData().urls()
        if urls and urls[0].isLocalFile() and not self.session.running:
            event.acceptProposedAction()

    def dropEvent(self, event) -> None:
        urls = event.mimeData().urls()
        if urls and urls[0].isLocalFile():
            event.acceptProposedAction()
            self.open_path(urls[0].toLocalFile())

    # ------------------------------------------------------------------ recent files
    def recent_files(self) -> list[str]:
        value = self.settings.value("recent_files", [])
        if isinstance(value, str):
            value = [value]
        return [str(v) for v in (value or [])]

    def _remember(self, path: str) -> None:
        path = str(Path(path).resolve())
        files = [path] + [p for p in self.recent_files() if p != path]
        self.settings.setValue("recent_files", files[:MAX_RECENT])
        self._fill_recent()

    def _fill_recent(self) -> None:
        self.recent_menu.clear()
        files = self.recent_files()
        for i, p in enumerate(files):
            a = self.recent_menu.addAction(f"&{i + 1}  {Path(p).name}  —  {Path(p).parent}")
            a.triggered.connect(lambda _c=False, p=p: self.open_path(p))
        self.recent_menu.setEnabled(bool(files))

    def _about(self) -> None:
        from labbench import __version__

        QMessageBox.about(self, "About labbench",
                          f"<b>labbench {__version__}</b><p>Tune small neural networks on tabular data: "
                          "cross-validated search, a hold-out check, the seed spread, and files to take "
                          "the winner away.</p>")


def _masked(url: str) -> str:
    from labbench.search.storage import mask_url

    return mask_url(url)


def _storage_exists(url: str) -> bool:
    """Whether a storage URL points at something already there (a SQLite file that exists)."""
    if url.startswith("sqlite") and ":///" in url:
        return Path(url.split(":///", 1)[1]).exists()
    return True
