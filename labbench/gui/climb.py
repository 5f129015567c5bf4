"""How far the best has climbed: the best score so far after each trial as a staircase, a dot
where a trial beat the one before it. It sits in the bench sheet beside the winner."""

from __future__ import annotations

import pyqtgraph as pg
from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import QVBoxLayout, QWidget

from labbench.gui import core, theme
from labbench.gui.axes import robust_range
from labbench.gui.panel import Panel, centre_message, integer_axis, message_item
from labbench.gui.trialbook import TrialBook
from labbench.palette import colours


class ClimbStrip(QWidget):
    """How far the best has climbed: the best score so far after each trial as a staircase, a dot
    where a trial beat the one before it (the latest few carry their number), the picked trial
    as a dashed line. Sits in the bench sheet beside the winner."""

    clicked = Signal(int)

    def __init__(self, parent=None):
        super().__init__(parent)
        lay = QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        self.widget = pg.PlotWidget()
        lay.addWidget(self.widget)
        self.plot: pg.PlotItem = self.widget.getPlotItem()
        self.plot.setMenuEnabled(False)
        self.plot.setMouseEnabled(x=False, y=False)
        self.plot.hideButtons()
        self.plot.setLabel("bottom", "trial")
        self.climb = pg.PlotDataItem()
        self.milestones = pg.ScatterPlotItem(size=9, pxMode=True, hoverable=True, tip=self._tip)
        self.milestones.sigClicked.connect(lambda _i, pts, *_a: len(pts) and self.clicked.emit(int(pts[0].data())))
        self.picked_line = pg.InfiniteLine(angle=90, movable=False)
        self.picked_line.setVisible(False)
        for item in (self.climb, self.picked_line, self.milestones):
            self.plot.addItem(item)
        self.labels: list[pg.TextItem] = []
        self.message = message_item("")
        self.plot.addItem(self.message, ignoreBounds=True)
        self.clip_note = pg.TextItem("", anchor=(1, 1))
        self.plot.addItem(self.clip_note, ignoreBounds=True)
        self._tips: dict[int, str] = {}
        self.outside = 0
        self._theme = None
        self._view = None

    def _tip(self, x, y, data):
        return self._tips.get(int(data), f"trial {int(x)}: {y:.4g}")

    def draw(self, book: TrialBook, selected: int | None, t: theme.Theme) -> None:
        pal = colours(t.dark)
        if self._theme != t.background.name():
            self._theme = t.background.name()
            self.widget.setBackground(t.background)
            Panel.style_plot(self.plot, t)
        done = [r for r in book.ordered() if r.state == "complete" and r.value is not None]
        xs, ys = core.best_so_far(done, book.direction)
        last = max((r.number for r in book.records.values()), default=0)
        if xs:
            # a staircase to the latest trial: the best holds until a trial beats it
            self.climb.setData(*_steps(list(xs) + [float(max(last, xs[-1]))], list(ys) + [ys[-1]]))
        else:
            self.climb.setData([], [])
        self.climb.setPen(pg.mkPen(pal["climb"], width=2.2))
        miles = _milestones(xs, ys)
        self._tips = {int(n): f"trial {int(n)} became the best: {v:.4g}" for n, v in miles}
        self.milestones.setData([{"pos": (n, v), "data": int(n), "brush": pg.mkBrush(pal["milestone"]),
                                  "pen": pg.mkPen(t.background, width=1), "size": 8} for n, v in miles])
        span = max(1.0, float(last))
        shown: list = []              # the latest few milestones carry their trial number,
        for n, v in reversed(miles):  # never two so close that their labels overlap
            if len(shown) < 3 and all(abs(n - m) > 0.2 * span for m, _v in shown):
                shown.append((n, v))
        while len(self.labels) < len(shown):
            label = pg.TextItem("", color=pal["milestone"])
            self.plot.addItem(label, ignoreBounds=True)
            self.labels.append(label)
        for i, label in enumerate(self.labels):
            if i >= len(shown):
                label.setVisible(False)
                continue
            n, v = shown[i]
            # to the left of the dot (the staircase runs on to the right), or to its right near
            # the left edge (never cut off)
            label.setAnchor((-0.1, -0.05) if n < 0.2 * span else (1.1, -0.05))
            label.setText(f"#{int(n)}", color=pal["milestone"])
            label.setPos(n, v)
            label.setVisible(True)
        self.outside = 0
        if xs:
            # the view follows the middle of the scores, so one disastrous early trial does not
            # flatten the climb; a note counts the early bests left below it
            low, high, _ = robust_range([r.value for r in done], 5, 95, pad=0.1)
            top, bottom = max(ys), min(ys)
            high = max(high, top + 0.12 * ((top - low) or abs(top) * 0.05 or 0.05))
            low = min(low, ys[-1])
            self.outside = sum(1 for y in ys if y < low or y > high)
            if bottom >= low:
                low = min(low, bottom)
            if self._view != (low, high, last):     # a new range re-lays the axes: only when it moved
                self._view = (low, high, last)
                self.plot.setYRange(low, high, padding=0)
                self.plot.setXRange(-0.5, max(1, last) + 0.5, padding=0)
                integer_axis(self.plot.getAxis("bottom"), 0, max(1, last))
            self.clip_note.setText(f"{self.outside} early best{'s' if self.outside != 1 else ''} below"
                                   if self.outside else "")
            self.clip_note.setColor(t.foreground)
            self.clip_note.setPos(max(1, last) + 0.5, high)
        sel = book.records.get(selected) if selected is not None else None
        self.picked_line.setVisible(sel is not None)
        if sel is not None:
            self.picked_line.setPen(pg.mkPen(pal["selected"], width=1.5, style=Qt.PenStyle.DashLine))
            self.picked_line.setValue(sel.number)
        centre_message(self.plot, self.message, None if done else "The best score climbs here as trials finish.")


def _milestones(xs, ys) -> list[tuple[float, float]]:
    out, prev = [], None
    for x, y in zip(xs, ys):
        if prev is None or y != prev:
            out.append((x, y))
        prev = y
    return out


def _steps(xs, ys):
    """A staircase through (x, y): the level holds until the next x."""
    sx, sy = [], []
    for i, (x, y) in enumerate(zip(xs, ys)):
        if i:
            sx.append(x)
            sy.append(sy[-1])
        sx.append(x)
        sy.append(y)
    return sx, sy
