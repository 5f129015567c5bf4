"""Live pictures of a search: learning curves and the score of every trial.

Each panel is redrawn by the window's timer (``refresh``), never per event. Curves are created
once per trial and updated with ``setData``; styles are only re-applied when a trial's role
(running, best, selected, state) changes.
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import QCheckBox

from labbench.gui import core, theme
from labbench.gui.panel import Panel, centre_message, curve_pen, integer_spacing, message_item
from labbench.gui.trialbook import TrialBook


def legend_html(t: theme.Theme) -> str:
    """The line styles in words, coloured as drawn (the panel's subtitle)."""
    def part(state: str, mark: str, word: str) -> str:
        return f"<span style='color:{t.state(state).name()}'><b>{mark}</b></span>&nbsp;{word}"

    return "&nbsp; ".join([part("running", "━", "training"), part("best", "━", "best"),
                           part("pruned", "╌", "pruned"), part("failed", "┈", "failed")])


class CurvesPanel(Panel):
    """Validation loss per epoch, one line per trial."""

    def __init__(self, parent=None):
        super().__init__("Learning curves", "Validation loss after each epoch (mean over the folds), one line "
                         "per trial: amber is training now, green is the best, dashed were pruned (stopped early), "
                         "dotted failed or were cancelled.", parent, short="validation loss per epoch")
        self.hint.setTextFormat(Qt.TextFormat.RichText)
        self._theme_legend = None
        self.widget = pg.PlotWidget()
        self.plot: pg.PlotItem = self.widget.getPlotItem()
        self.plot.setLabel("bottom", "epoch")
        self.plot.setLabel("left", "validation loss")
        self.plot.setMenuEnabled(False)
        self.body.addWidget(self.widget)
        self.log_box = QCheckBox("log")
        self.log_box.setToolTip("Draw the loss on a logarithmic axis (helps when early epochs are far higher)")
        self.log_box.toggled.connect(lambda on: self.plot.setLogMode(y=on))
        self.controls.addWidget(self.log_box)
        self.curves: dict[int, pg.PlotDataItem] = {}
        self._styles: dict[int, tuple] = {}
        self.message = message_item("")
        self.plot.addItem(self.message, ignoreBounds=True)
        self._theme_key = None
        self._longest = 0

    def export_item(self):
        return self.plot

    def reset(self) -> None:
        self._longest = 0
        self.plot.enableAutoRange(x=True)
        for c in self.curves.values():
            self.plot.removeItem(c)
        self.curves.clear()
        self._styles.clear()

    def refresh(self, book: TrialBook, changed: set[int], selected: int | None, t: theme.Theme) -> bool:
        key = (t.background.name(), t.foreground.name())
        if key != self._theme_key:
            self._theme_key = key
            self.widget.setBackground(t.background)
            self.style_plot(self.plot, t)
            self._styles.clear()
            self.hint.setText(legend_html(t))
        for number in list(self.curves):
            if number not in book.records:
                self.plot.removeItem(self.curves.pop(number))
                self._styles.pop(number, None)
        for number in changed:
            rec = book.records.get(number)
            if rec is None:
                continue
            curve = self.curves.get(number)
            if curve is None:
                curve = self.curves[number] = pg.PlotDataItem(name=f"trial {number}")
                curve.setCurveClickable(True)
                curve.sigClicked.connect(lambda item, *_a, n=number: self.clicked.emit(n))
                self.plot.addItem(curve)
            curve.setData(np.asarray(rec.epochs, float), np.asarray(rec.val_loss, float))
        # a fixed epoch axis (the longest trial) is drawn once, not on every new point
        longest = max((r.epochs_total or len(r.epochs) for r in book.records.values()), default=0)
        if longest and longest != self._longest:
            self._longest = longest
            self.plot.setXRange(1, max(2, longest), padding=0.02)
        for number, curve in self.curves.items():
            rec = book.records[number]
            role = (rec.state, number == book.best_number, number == book.running_number, number == selected)
            if self._styles.get(number) != role:
                pen, z, smooth = curve_pen(t, rec.state, best=role[1], running=role[2], selected=role[3])
                curve.setPen(pen)
                curve.setZValue(z)
                curve.curve.opts["antialias"] = smooth
                curve.opts["antialias"] = smooth
                self._styles[number] = role
        centre_message(self.plot, self.message,
                       None if any(len(r.epochs) for r in book.records.values())
                       else "Learning curves appear here once the first epoch is scored.")

    clicked = Signal(int)


class ScoresPanel(Panel):
    """Cross-validated score of every finished trial in order, with the best-so-far line."""

    clicked = Signal(int)

    def __init__(self, parent=None):
        super().__init__("Score by trial", "Cross-validated score of each finished trial in the order they "
                         "ran; the green line is the best so far.", parent, short="the line is the best so far")
        self.widget = pg.PlotWidget()
        self.plot: pg.PlotItem = self.widget.getPlotItem()
        self.plot.setLabel("bottom", "trial")
        self.plot.setLabel("left", "score")
        self.plot.setMenuEnabled(False)
        self.body.addWidget(self.widget)
        self.dots = pg.ScatterPlotItem(size=8, pxMode=True, hoverable=True, tip=self._tip)
        self.dots.sigClicked.connect(self._on_click)
        self.best_line = pg.PlotDataItem(stepMode=None)
        self.ring = pg.ScatterPlotItem(size=16, pxMode=True, symbol="o")
        self.plot.addItem(self.best_line)
        self.plot.addItem(self.dots)
        self.plot.addItem(self.ring)
        self.message = message_item("")
        self.plot.addItem(self.message, ignoreBounds=True)
        self._drawn = None
        self._tips: dict[int, str] = {}

    def export_item(self):
        return self.plot

    def _tip(self, x, y, data):
        return self._tips.get(int(data), f"trial {int(x)}: {y:.4g}")

    def _on_click(self, _item, points, *_a):
        if len(points):
            self.clicked.emit(int(points[0].data()))

    def refresh(self, book: TrialBook, changed: set[int], selected: int | None, t: theme.Theme) -> bool:
        key = (book.finished_version, selected, t.background.name())
        if key == self._drawn:
            return False
        self._drawn = key
        self.widget.setBackground(t.background)
        self.style_plot(self.plot, t)
        if book.metric:
            self.plot.setLabel("left", core.metric_label(book.metric))
        done = [r for r in book.ordered() if r.state == "complete" and r.value is not None]
        spots = []
        self._tips.clear()
        for r in done:
            role = "best" if r.number == book.best_number else "complete"
            colour = t.state(role, 255 if role == "best" else 200)
            spots.append({"pos": (r.number, r.value), "data": r.number, "brush": pg.mkBrush(colour),
                          "pen": pg.mkPen(t.background, width=1), "size": 11 if role == "best" else 8})
            self._tips[r.number] = f"trial {r.number}: {r.value:.4g}"
        self.dots.setData(spots)
        integer_spacing(self.plot.getAxis("bottom"), max((r.number for r in done), default=0))
        xs, ys = core.best_so_far(done, book.direction)
        self.best_line.setData(xs, ys, stepMode=None, connect="finite")
        self.best_line.setPen(pg.mkPen(t.state("best"), width=2))
        sel = book.records.get(selected) if selected is not None else None
        if sel is not None and sel.value is not None:
            self.ring.setData([sel.number], [sel.value], brush=pg.mkBrush(None),
                              pen=pg.mkPen(t.state("selected"), width=2.5))
        else:
            self.ring.setData([], [])
        centre_message(self.plot, self.message,
                       None if done else "Each finished trial adds a dot here.")
        return True
