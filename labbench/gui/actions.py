"""The window's actions: menus, tool bar, shortcuts, and which actions are possible right now."""

from __future__ import annotations

from PySide6.QtCore import QSize, Qt
from PySide6.QtGui import QAction, QKeySequence
from PySide6.QtWidgets import QDialog, QDialogButtonBox, QInputDialog, QMessageBox, QTableWidget, \
    QTableWidgetItem, QToolBar, QVBoxLayout

from labbench.gui import theme
from labbench.gui.storage_list import masked
from labbench.gui.takeaway import has

STEPS = (("data", "Data", "1"), ("search", "Search", "2"), ("watch", "Run and watch", "3"))


class ActionsMixin:
    """Part of ``MainWindow``."""

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
        self.act_more = A("Run more trials…", self.run_more, "start", "Ctrl+Shift+M",
                          "Add trials beyond the budget to the stored search")
        self.act_undo = self.space.undo.createUndoAction(self, "Undo")
        self.act_undo.setShortcut(QKeySequence(QKeySequence.StandardKey.Undo))
        self.act_redo = self.space.undo.createRedoAction(self, "Redo")
        self.act_redo.setShortcut(QKeySequence(QKeySequence.StandardKey.Redo))
        for a in (self.act_undo, self.act_redo):
            a.setShortcutContext(Qt.ShortcutContext.ApplicationShortcut)
            a.setStatusTip(f"{a.text().split()[0]} the last change of a network setting on the Search page")
        self.act_shortcuts = A("Keyboard shortcuts", self.show_shortcuts, None, "F1",
                               "Every action with its keys")
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
        e = mb.addMenu("&Edit")
        e.addAction(self.act_undo)
        e.addAction(self.act_redo)
        s = mb.addMenu("&Search")
        for a in (self.act_start, self.act_stop, self.act_more, self.act_fresh):
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
        # step 4, the winner of a map or group family (there only when such a winner is)
        self.act_map_step = QAction("Map and groups", self)
        self.act_map_step.setShortcut(QKeySequence("Ctrl+4"))
        self.act_map_step.setStatusTip("The map and groups of a map or group family's winner")
        self.act_map_step.triggered.connect(
            lambda _c=False: not self.map_step.isHidden() and self.steps.setCurrentRow(3))
        v.addAction(self.act_map_step)
        from labbench.gui.cost import CostEstimate
        from labbench.gui.notices import make_dock

        self.notice_dock, self.notices = make_dock(self)
        self.session.notice.connect(self.notices.add)
        toggle = self.notice_dock.toggleViewAction()
        toggle.setText("Notices from the search")
        toggle.setShortcut(QKeySequence("Ctrl+Shift+N"))
        v.addSeparator()
        v.addAction(toggle)
        self.cost = CostEstimate(self)
        h = mb.addMenu("&Help")
        h.addAction(self.act_shortcuts)
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
        self.act_more.setEnabled(ok and not running and bool(book.records))
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
            self.where_label.setText(f"storage: {masked(where)}" if where else "")

    # ------------------------------------------------------------------ editing and validation

    def run_more(self, n: int | None = None) -> bool:
        """Add ``n`` trials to the stored search (asked for when not given): the explicit choice
        beside Start, which only continues the spec's own budget."""
        if self.session.running or self.validate():
            return False
        if n is None:
            n, ok = QInputDialog.getInt(self, "Run more trials", "Trials to add to the stored search:",
                                        10, 1, 100_000)
            if not ok:
                return False
        if (self.dirty or not self.spec_path) and not self.save_spec():
            return False
        from labbench.errors import LabbenchError

        try:
            self.session.start(self.current_spec(), more=int(n))
        except LabbenchError as exc:
            QMessageBox.warning(self, "Cannot start", str(exc))
            return False
        self.steps.setCurrentRow(2)
        self.update_actions()
        return True

    def shortcut_rows(self) -> list[tuple[str, str]]:
        """(action, keys) for every action of the menus that has keys, in menu order."""
        rows, seen = [], set()
        for top in self.menuBar().actions():
            menu = top.menu()
            if menu is None:
                continue
            for a in menu.actions():
                keys = a.shortcut().toString(QKeySequence.SequenceFormat.NativeText)
                if keys and id(a) not in seen:
                    seen.add(id(a))
                    rows.append((f"{top.text().replace('&', '')} ▸ {a.text().replace('&', '')}", keys))
        return rows

    def show_shortcuts(self) -> None:
        rows = self.shortcut_rows()
        dlg = QDialog(self)
        dlg.setWindowTitle("Keyboard shortcuts")
        lay = QVBoxLayout(dlg)
        table = QTableWidget(len(rows), 2)
        table.setHorizontalHeaderLabels(["Action", "Keys"])
        table.verticalHeader().hide()
        table.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
        for i, (what, keys) in enumerate(rows):
            table.setItem(i, 0, QTableWidgetItem(what))
            table.setItem(i, 1, QTableWidgetItem(keys))
        table.resizeColumnsToContents()
        table.horizontalHeader().setStretchLastSection(True)
        lay.addWidget(table)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Close)
        buttons.rejected.connect(dlg.reject)
        lay.addWidget(buttons)
        dlg.resize(520, 480)
        self.shortcuts_dialog = dlg
        dlg.open()
