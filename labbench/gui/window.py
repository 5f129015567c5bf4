"""The main window: three steps (data, search, run and watch) under one menu bar and tool bar."""

from __future__ import annotations

import logging
from pathlib import Path
from typing import Any

from PySide6.QtCore import QSettings, QSize, Qt, QTimer
from PySide6.QtWidgets import (QApplication, QHBoxLayout, QLabel, QListWidget, QListWidgetItem, QMainWindow,
                               QMessageBox, QStackedWidget, QWidget)

from labbench.errors import LabbenchError, SpecError
from labbench.gui import theme
from labbench.gui.actions import STEPS, ActionsMixin
from labbench.gui.data_page import DataPage
from labbench.gui.files import FilesMixin
from labbench.gui.map_page import MapPage
from labbench.gui.map_winner import MapWinnerMixin
from labbench.gui.session import SearchSession
from labbench.gui.space_page import SpacePage, key_of
from labbench.gui.takeaway import Takeaway
from labbench.gui.watch_page import WatchPage

log = logging.getLogger("labbench.gui")

HIDDEN_STOP_MS = 30_000    # a closed window waits this long for its search to stop, then ends it


class MainWindow(ActionsMixin, FilesMixin, MapWinnerMixin, QMainWindow):
    """Steps on the left (data, search, run and watch); menus and tool bar in ``actions``,
    opening and saving in ``files``, the running search in ``session``."""

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
        self.maps = MapPage()

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
        # step 4 shows the winner of a map or group family; hidden for the networks
        self.map_step = QListWidgetItem(theme.icon("step_map"), "4  Map and groups")
        self.map_step.setSizeHint(QSize(178, 40))
        self.steps.addItem(self.map_step)
        self.stack.addWidget(self.maps)
        self.map_step.setHidden(True)
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
        self.data.target_mode.connect(self._target_mode)
        self.space.family_changed.connect(self._family_changed)
        self.space.changed.connect(self._edited)
        self.watch.start_button.clicked.connect(self.act_start.trigger)
        self.watch.stop_button.clicked.connect(self.act_stop.trigger)
        self.session.changed.connect(self.update_actions)
        self.session.failed.connect(self._search_failed)
        self.session.finished.connect(self._search_finished)
        self.session.changed.connect(self.update_map)
        self.space.family_changed.connect(lambda _name: self.update_map())
        self.data.changed.connect(self.update_map)
        self._connect_maps()
        self._restore()
        self.validate()
        self.update_actions()
        self.session.warm_up()

    # ------------------------------------------------------------------ actions and menus
    def _edited(self) -> None:
        self.dirty = True
        self.validate()
        self._title()

    def _target_mode(self, has_target: bool) -> None:
        """A target chosen or dropped on the Data page: the family follows when it must (a network
        needs a target; the map and group families learn without one)."""
        from labbench.families import family_names, get_family

        if get_family(self.space.family_name()).needs_target == has_target:
            return
        want = "network" if has_target else next(
            (n for n in family_names() if not getattr(get_family(n), "needs_target", True)), None)
        if want is None:
            return
        self.space.set_family(want)
        self.data.set_family(want)
        self.statusBar().showMessage(f"Model family: {get_family(want).label or want}", 6000)

    def _family_changed(self, name: str) -> None:
        """Another family picked on the Search page: the Data page's target follows when it must."""
        from labbench.families import get_family

        self.data.set_family(name)
        self.data.set_target_mode(bool(getattr(get_family(name), "needs_target", True)))

    def _title(self) -> None:
        name = Path(self.spec_path).name if self.spec_path else (
            Path(self.data.path).name if self.data.path else "new experiment")
        self.setWindowTitle(f"{name}{' •' if self.dirty else ''} — labbench")

    def spec_dict(self) -> dict[str, Any] | None:
        data = self.data.data_dict()
        if data is None:
            return None
        d = {"data": data, "evaluation": self.space.evaluation_dict(self.data.metric()),
             "search": self.space.search_dict(), "space": self.space.space_dict()}
        model = self.space.model_dict()
        if model is not None:
            d["model"] = model
        return d

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
        self.update_map()
        if self.maps.data is not None and self.steps.currentRow() == 2:
            self.steps.setCurrentRow(3)       # the search of a map family ended: its map
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
            self.resize(self._first_size())
        state = self.settings.value("window_state")
        if state is not None:
            self.restoreState(state)
        for name in self.watch.splitters():
            sizes = self.settings.value(f"splitter/{name}")
            if isinstance(sizes, (list, tuple)):
                try:
                    self.watch.saved_sizes[name] = [int(v) for v in sizes]
                except (TypeError, ValueError):
                    pass
        log_on = self.settings.value("curves/log_scale", False)
        self.watch.curves.log_box.setChecked(str(log_on).lower() in ("true", "1"))

    def _first_size(self) -> QSize:
        """1360 × 860 where it fits, else the screen's free area (a 1366 × 768 laptop)."""
        screen = self.screen() or QApplication.primaryScreen()
        want = QSize(1360, 860)
        if screen is None:
            return want
        free = screen.availableGeometry().size()
        return QSize(min(want.width(), free.width()), min(want.height(), free.height() - 30))

    def remember_layout(self) -> None:
        self.settings.setValue("geometry", self.saveGeometry())
        self.settings.setValue("window_state", self.saveState())
        for name, sizes in self.watch.current_sizes().items():
            self.settings.setValue(f"splitter/{name}", sizes)
        self.settings.setValue("curves/log_scale", self.watch.curves.log_box.isChecked())
        self.settings.sync()

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
                self.remember_layout()
                self.session.stop()
                # the window goes at once; the search winds down behind it (the trial in training
                # is stopped and marked) and the window closes for good once it has
                self.hide()
                QTimer.singleShot(HIDDEN_STOP_MS, self._give_up_waiting)
            event.ignore()          # closed again from _search_finished once the thread is done
            return
        if not self._close_when_stopped:
            self.remember_layout()
        if self._front_reader is not None:
            self._front_reader.close()
        self.session.close()
        super().closeEvent(event)

    def _give_up_waiting(self) -> None:
        """A search that has not wound down long after the window was closed is ended hard."""
        proc = getattr(self.session.thread, "_proc", None)
        if proc is not None and proc.is_alive():
            log.warning("the search did not stop within %d s of closing; ending it", HIDDEN_STOP_MS // 1000)
            proc.terminate()

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
    def _about(self) -> None:
        from labbench import __version__

        QMessageBox.about(self, "About labbench",
                          f"<b>labbench {__version__}</b><p>Tune small neural networks on tabular data: "
                          "cross-validated search, a hold-out check, a seed-spread check, and files to take "
                          "the winner away.</p>")


