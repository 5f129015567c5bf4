"""Step 3 — run and watch, laid out as a bench sheet.

At the top the current winner and how sure we are; below it, on the left, how the trials learned
(a band of every trial's learning curve) and how the search went (the best's climb and where the
good scores live in each setting's range); on the right the notebook, one entry per trial (with
the compact table as a second view).
"""

from __future__ import annotations

from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QPainter, QPalette, QPen
from PySide6.QtWidgets import (QHBoxLayout, QLabel, QPushButton, QSizePolicy, QSplitter, QTabWidget,
                               QVBoxLayout, QWidget)

from labbench.gui import core, theme
from labbench.gui.bench_sheet import BenchSheet
from labbench.gui.notebook import Notebook
from labbench.gui.plots import CurvesPanel
from labbench.gui.plots_settings import StoryPanel
from labbench.gui.trialbook import TrialBook
from labbench.gui.trials_table import TrialsTable
from labbench.gui.words import duration_text


class BudgetBar(QWidget):
    """Trials done against the budget. Drawn by ``paintEvent`` after ``update()``: unlike
    QProgressBar, a new value never repaints synchronously (which also repainted the plots
    behind its rounded corners in the middle of a search)."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.setAttribute(Qt.WidgetAttribute.WA_OpaquePaintEvent)
        self.setMinimumSize(120, 24)
        self.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Fixed)
        self._value, self._maximum, self._text = 0, 1, ""
        self.setAccessibleName("Search progress")

    def set(self, value: int, maximum: int, text: str) -> None:
        if (value, maximum, text) != (self._value, self._maximum, self._text):
            self._value, self._maximum, self._text = value, max(1, maximum), text
            self.setAccessibleDescription(text)
            self.update()

    def value(self) -> int:
        return self._value

    def maximum(self) -> int:
        return self._maximum

    def format(self) -> str:
        return self._text

    def paintEvent(self, _event) -> None:
        t = theme.Theme.current()
        pal = self.palette()
        p = QPainter(self)
        p.fillRect(self.rect(), pal.color(QPalette.ColorRole.Window))
        box = self.rect().adjusted(0, 0, -1, -1)
        p.setRenderHint(QPainter.RenderHint.Antialiasing)
        p.setPen(QPen(t.state("complete", 110), 1))
        p.setBrush(pal.color(QPalette.ColorRole.Base))
        p.drawRoundedRect(box, 4, 4)
        share = min(1.0, self._value / self._maximum)
        if share > 0:
            fill = box.adjusted(2, 2, -2, -2)
            fill.setWidth(max(4, int(fill.width() * share)))
            p.setPen(Qt.PenStyle.NoPen)
            p.setBrush(t.state("best", 95))
            p.drawRoundedRect(fill, 3, 3)
        p.setPen(pal.color(QPalette.ColorRole.Text))
        p.drawText(box, Qt.AlignmentFlag.AlignCenter, self._text)
        p.end()


class WatchPage(QWidget):
    picked = Signal(object)     # trial number or None (from a picture, the notebook or the table)

    def __init__(self, parent=None):
        super().__init__(parent)
        outer = QVBoxLayout(self)
        outer.setContentsMargins(6, 6, 6, 6)
        outer.setSpacing(6)
        bar = QHBoxLayout()
        self.start_button = QPushButton(theme.icon("start"), "Start")
        self.stop_button = QPushButton(theme.icon("stop"), "Stop")
        self.start_button.setObjectName("startButton")
        self.start_button.setToolTip("Start the search (or continue the stored one)")
        self.stop_button.setToolTip("Stop after the current epoch; the finished trials stay stored")
        for b in (self.start_button, self.stop_button):
            b.setMinimumWidth(84)
            bar.addWidget(b)
        self.progress = BudgetBar()
        self.progress.set(0, 1, "no search running")
        bar.addWidget(self.progress, 2)
        self.time_left = QLabel("")
        self.time_left.setFixedWidth(130)          # text changes never re-lay out the page
        bar.addWidget(self.time_left)
        self.in_flight = QLabel("")
        self.in_flight.setObjectName("inFlight")
        self.in_flight.setMinimumWidth(120)
        self.in_flight.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Fixed)
        bar.addWidget(self.in_flight, 3)
        outer.addLayout(bar)

        self.sheet = BenchSheet()
        self.curves = CurvesPanel()
        self.story = StoryPanel()
        self.notebook = Notebook()
        self.table = TrialsTable()
        # older names kept for the session and the take-away actions
        self.best = self.sheet
        self.importance = self.story
        self.settings_plot = self.story
        self.panels = [self.curves, self.story, self.sheet]

        self.lower = QTabWidget()
        self.lower.setObjectName("runsTabs")
        self.lower.addTab(self.notebook, "Notebook")
        self.lower.addTab(self.table, "Table")
        self.lower.setTabToolTip(0, "One entry per trial, newest first, in words")
        self.lower.setTabToolTip(1, "Every trial in a sortable table (save it as CSV from the Winner menu)")

        self.left = QSplitter(Qt.Orientation.Vertical)
        self.left.setObjectName("leftSplit")
        self.left.addWidget(self.curves)
        self.left.addWidget(self.story)
        self.left.setSizes([300, 320])
        self.left.setChildrenCollapsible(False)
        self.body = QSplitter(Qt.Orientation.Horizontal)
        self.body.setObjectName("bodySplit")
        self.body.addWidget(self.left)
        self.body.addWidget(self.lower)
        self.body.setStretchFactor(0, 3)
        self.body.setStretchFactor(1, 2)
        self.body.setSizes([700, 420])
        self.body.setChildrenCollapsible(False)
        self.split = QSplitter(Qt.Orientation.Vertical)
        self.split.setObjectName("pageSplit")
        self.split.addWidget(self.sheet)
        self.split.addWidget(self.body)
        self.split.setStretchFactor(0, 0)
        self.split.setStretchFactor(1, 1)
        self.split.setSizes([150, 620])
        self.split.setChildrenCollapsible(False)
        self.sheet.setMinimumHeight(128)
        self.curves.setMinimumHeight(150)
        self.story.setMinimumHeight(120)
        self.lower.setMinimumWidth(260)
        outer.addWidget(self.split, 1)

        # the pictures answer the mouse; Tab walks the controls and skips them
        import pyqtgraph as pg

        for view in self.findChildren(pg.GraphicsView):
            view.setFocusPolicy(Qt.FocusPolicy.NoFocus)
            view.viewport().setFocusPolicy(Qt.FocusPolicy.NoFocus)
        self.saved_sizes: dict[str, list[int]] = {}
        self._sized = False
        self._turn = 0
        self._picking = False
        for p in (self.curves, self.story, self.sheet.climb):
            p.clicked.connect(self.select)
        self.notebook.picked.connect(self._from_notebook)
        self.table.picked.connect(self._from_table)

    def splitters(self) -> dict[str, QSplitter]:
        """The splitters whose sizes the window remembers."""
        return {"page": self.split, "body": self.body, "left": self.left}

    def current_sizes(self) -> dict[str, list[int]]:
        """Sizes to remember: the saved ones while the page has never been shown."""
        if self.saved_sizes and not self._sized:
            return dict(self.saved_sizes)
        return {name: s.sizes() for name, s in self.splitters().items()}

    def showEvent(self, event) -> None:
        super().showEvent(event)
        if not self._sized:
            # applied once the page has its real size: before that a splitter squeezes them into
            # whatever width it has and the proportions are lost
            self._sized = True
            for name, splitter in self.splitters().items():
                sizes = self.saved_sizes.get(name)
                if sizes and len(sizes) == splitter.count():
                    splitter.setSizes(sizes)

    def select(self, number: int | None) -> None:
        """Pick a trial (from a click in a picture): the notebook and the table follow."""
        self.notebook.select(number)

    def _from_notebook(self, number) -> None:
        if self._picking:
            return
        self._picking = True
        self.table.select(number, emit=False)
        self._picking = False
        self.picked.emit(number)

    def _from_table(self, number) -> None:
        if self._picking:
            return
        self._picking = True
        self.notebook.select(number, emit=False)
        self._picking = False
        self.picked.emit(number)

    def reset(self) -> None:
        self.curves.reset()

    # ------------------------------------------------------------------ redraw (timer)
    def refresh(self, book: TrialBook, changed: set[int], selected: int | None, t: theme.Theme) -> bool:
        """Redraw what changed; returns True when a picture is still waiting for its turn.

        The learning curves follow every tick; of the other pictures at most one redraws per
        tick (round robin), so one pass of the event loop never paints them all at once.
        """
        self.curves.refresh(book, changed, selected, t)
        others = self.panels[1:]
        drew = None
        for i in range(len(others)):
            p = others[(self._turn + i) % len(others)]
            if p.refresh(book, changed, selected, t):
                drew = (self._turn + i) % len(others)
                break
        pending = drew is not None
        if drew is not None:
            self._turn = drew + 1
        self.notebook.refresh(book, changed)
        self.table.refresh(book, changed)
        self._progress(book)
        return pending

    def _bar(self, low: int, high: int, value: int, text: str) -> None:
        self.progress.set(value - low, high - low, text)

    @staticmethod
    def _set(label: QLabel, text: str) -> None:
        if label.text() != text:
            label.setText(text)

    def _progress(self, book: TrialBook) -> None:
        p = book.progress
        if p is None:
            if book.ended is None:
                n = len(book.records)
                self._bar(0, 1, 0, f"{n} trials stored" if n else "no search running")
                self._set(self.time_left, "")
                running = sum(1 for r in book.records.values() if r.state == "running")
                self._set(self.in_flight, f"{running} trial(s) training elsewhere" if running else "")
            return
        if p.budget:
            self._bar(0, p.budget, min(p.done, p.budget), f"{p.done} / {p.budget} trials")
        else:
            total = int((book.budget_minutes or 0) * 60) or 1
            self._bar(0, total, min(int(p.elapsed_s), total),
                      f"{p.done} trials in {duration_text(p.elapsed_s)}")
        if book.ended is not None:
            self._set(self.time_left, f"took {duration_text(p.elapsed_s)}")
        else:
            self._set(self.time_left, f"about {duration_text(p.eta_s)} left" if p.eta_s is not None
                      else "estimating time left…")
        run = book.records.get(book.running_number) if book.running_number is not None else None
        if book.ended is not None:
            words = {"budget": "finished: the trial budget is used up",
                     "time": "finished: the time limit was reached",
                     "cancelled": "stopped by you", "error": "stopped by an error"}
            text = words.get(book.ended.reason, book.ended.reason)
            if book.stage is not None and book.winner is None:
                text += f" — {book.stage.text}"
            self._set(self.in_flight, text)
        elif run is not None:
            loss = f", validation loss {run.val_loss[-1]:.4g}" if run.val_loss else ""
            total = f" of {run.epochs_total}" if run.epochs_total else ""
            self._set(self.in_flight, f"training trial {run.number}: epoch {len(run.epochs)}{total}{loss}")
        else:
            self._set(self.in_flight, "picking the next settings…")

    def metric_word(self, book: TrialBook) -> str:
        return core.metric_label(book.metric) if book.metric else "score"
