"""Step 3 — run and watch: progress, the four live pictures, the best so far, every trial."""

from __future__ import annotations

from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (QGridLayout, QHBoxLayout, QLabel, QProgressBar, QPushButton,
                               QSplitter, QVBoxLayout, QWidget)

from labbench.gui import core, theme
from labbench.gui.best_panel import BestPanel
from labbench.gui.plots import CurvesPanel, ScoresPanel
from labbench.gui.plots_settings import ImportancePanel, SettingsPanel
from labbench.gui.trialbook import TrialBook
from labbench.gui.trials_table import TrialsTable


def duration_text(seconds: float | None) -> str:
    if seconds is None:
        return "unknown"
    seconds = int(round(seconds))
    if seconds < 60:
        return f"{seconds} s"
    minutes, s = divmod(seconds, 60)
    if minutes < 60:
        return f"{minutes} min {s:02d} s"
    hours, m = divmod(minutes, 60)
    return f"{hours} h {m:02d} min"


class WatchPage(QWidget):
    picked = Signal(object)     # trial number or None (from a plot click or the table)

    def __init__(self, parent=None):
        super().__init__(parent)
        outer = QVBoxLayout(self)
        outer.setContentsMargins(6, 6, 6, 6)
        bar = QHBoxLayout()
        self.start_button = QPushButton(theme.icon("start"), "Start")
        self.stop_button = QPushButton(theme.icon("stop"), "Stop")
        self.start_button.setObjectName("startButton")
        for b in (self.start_button, self.stop_button):
            b.setMinimumWidth(84)
            bar.addWidget(b)
        self.progress = QProgressBar()
        self.progress.setTextVisible(True)
        self.progress.setFormat("no search running")
        self.progress.setRange(0, 1)
        self.progress.setValue(0)
        self.progress.setMinimumWidth(120)
        bar.addWidget(self.progress, 2)
        self.time_left = QLabel("")
        self.time_left.setMinimumWidth(110)
        bar.addWidget(self.time_left)
        self.in_flight = QLabel("")
        self.in_flight.setObjectName("inFlight")
        self.in_flight.setMinimumWidth(120)
        bar.addWidget(self.in_flight, 3)
        outer.addLayout(bar)

        self.curves = CurvesPanel()
        self.scores = ScoresPanel()
        self.settings_plot = SettingsPanel()
        self.importance = ImportancePanel()
        self.best = BestPanel()
        self.table = TrialsTable()
        self.panels = [self.curves, self.scores, self.settings_plot, self.importance, self.best]

        plots = QWidget()
        grid = QGridLayout(plots)
        grid.setContentsMargins(0, 0, 0, 0)
        grid.setSpacing(6)
        grid.addWidget(self.curves, 0, 0)
        grid.addWidget(self.scores, 0, 1)
        grid.addWidget(self.settings_plot, 1, 0)
        grid.addWidget(self.importance, 1, 1)
        for i in range(2):
            grid.setColumnStretch(i, 1)
            grid.setRowStretch(i, 1)

        top = QSplitter(Qt.Orientation.Horizontal)
        top.addWidget(plots)
        top.addWidget(self.best)
        top.setStretchFactor(0, 4)
        top.setStretchFactor(1, 1)
        top.setSizes([1000, 370])
        self.split = QSplitter(Qt.Orientation.Vertical)
        self.split.addWidget(top)
        self.split.addWidget(self.table)
        self.split.setStretchFactor(0, 3)
        self.split.setStretchFactor(1, 1)
        self.split.setSizes([620, 220])
        outer.addWidget(self.split, 1)

        for p in (self.curves, self.scores, self.settings_plot):
            p.clicked.connect(self._clicked)
        self.table.picked.connect(self.picked)

    def _clicked(self, number: int) -> None:
        self.table.select(number)

    def reset(self) -> None:
        self.curves.reset()

    # ------------------------------------------------------------------ redraw (timer)
    def refresh(self, book: TrialBook, changed: set[int], selected: int | None, t: theme.Theme) -> None:
        for p in self.panels:
            p.refresh(book, changed, selected, t)
        self.table.refresh(book)
        self._progress(book)

    def _progress(self, book: TrialBook) -> None:
        p = book.progress
        if p is None:
            if book.ended is None and not book.records:
                self.progress.setRange(0, 1)
                self.progress.setValue(0)
                self.progress.setFormat("no search running")
            return
        if p.budget:
            self.progress.setRange(0, p.budget)
            self.progress.setValue(min(p.done, p.budget))
            self.progress.setFormat(f"{p.done} / {p.budget} trials")
        else:
            minutes = book.budget_minutes or 0
            total = int(minutes * 60) or 1
            self.progress.setRange(0, total)
            self.progress.setValue(min(int(p.elapsed_s), total))
            self.progress.setFormat(f"{p.done} trials in {duration_text(p.elapsed_s)}")
        if book.ended is not None:
            self.time_left.setText(f"took {duration_text(p.elapsed_s)}")
        else:
            self.time_left.setText(f"about {duration_text(p.eta_s)} left" if p.eta_s is not None
                                   else "estimating time left…")
        run = book.records.get(book.running_number) if book.running_number is not None else None
        if book.ended is not None:
            words = {"budget": "finished: the trial budget is used up",
                     "time": "finished: the time limit was reached",
                     "cancelled": "stopped by you", "error": "stopped by an error"}
            text = words.get(book.ended.reason, book.ended.reason)
            if book.stage is not None and book.winner is None:
                text += f" — {book.stage.text}"
            self.in_flight.setText(text)
        elif run is not None:
            loss = f", validation loss {run.val_loss[-1]:.4g}" if run.val_loss else ""
            total = f" of {run.epochs_total}" if run.epochs_total else ""
            self.in_flight.setText(f"training trial {run.number}: epoch {len(run.epochs)}{total}{loss}")
        else:
            self.in_flight.setText("picking the next settings…")

    def metric_word(self, book: TrialBook) -> str:
        return core.metric_label(book.metric) if book.metric else "score"
