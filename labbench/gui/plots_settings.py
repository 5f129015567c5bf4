"""Each searched setting against the score, and the parameter importance bars."""

from __future__ import annotations

import math
from typing import Any, Mapping

import pyqtgraph as pg
from PySide6.QtCore import Signal
from PySide6.QtWidgets import QScrollArea

from labbench.gui import core, theme
from labbench.gui.panel import Panel, centre_message, log_ticks, message_item
from labbench.gui.trialbook import TrialBook

MIN_WIDTH = 200     # a small picture narrower than this cannot show its axis labels
ROW_HEIGHT = 200


class SettingsPanel(Panel):
    """Small multiples: one scatter per searched setting, score on the vertical axis."""

    clicked = Signal(int)

    def __init__(self, parent=None):
        super().__init__("Settings against score", "Every searched setting against the score of the trials "
                         "that finished (log axis where the setting is searched on a log scale).", parent,
                         short="one picture per searched setting")
        self.layout_widget = pg.GraphicsLayoutWidget()
        self.scroll = QScrollArea()
        self.scroll.setWidgetResizable(True)
        self.scroll.setWidget(self.layout_widget)
        self.scroll.setFrameShape(QScrollArea.Shape.NoFrame)
        self.body.addWidget(self.scroll)
        self.plots: dict[str, tuple[pg.PlotItem, pg.ScatterPlotItem, pg.ScatterPlotItem]] = {}
        self.categories: dict[str, list] = {}
        self._structure = None
        self._drawn = None
        self._to_build: list[tuple[int, str]] = []
        self._dirty: list[str] = []
        self.columns = 3
        self._metric = "score"
        self.pool: list[tuple[pg.PlotItem, pg.ScatterPlotItem, pg.ScatterPlotItem]] = []
        self.placeholder = None

    def export_item(self):
        return self.layout_widget.scene()

    def ensure(self, n: int) -> None:
        """Have ``n`` small pictures made in advance (making one costs tens of milliseconds,
        too much in the middle of a search); the window calls this while the user edits."""
        t = theme.Theme.current()
        while len(self.pool) < n:
            plot = pg.PlotItem()
            plot.setMenuEnabled(False)
            self.style_plot(plot, t)
            dots = pg.ScatterPlotItem(size=8, pxMode=True, hoverable=True)
            dots.sigClicked.connect(lambda _i, pts, *_a: pts and self.clicked.emit(int(pts[0].data())))
            ring = pg.ScatterPlotItem(size=16, pxMode=True)
            plot.addItem(dots)
            plot.addItem(ring)
            self.pool.append((plot, dots, ring))

    def _rebuild(self, book: TrialBook, names: list[str], t: theme.Theme) -> None:
        self.layout_widget.clear()
        self._to_build = []
        self.plots.clear()
        self.categories.clear()
        self.layout_widget.setBackground(t.background)
        if not names:
            if self.placeholder is None:
                self.placeholder = pg.PlotItem()
                self.style_plot(self.placeholder, t)
                self._placeholder_msg = message_item("")
                self.placeholder.addItem(self._placeholder_msg, ignoreBounds=True)
                self.placeholder.setXRange(0, 1)
                self.placeholder.setYRange(0, 1)
            self.layout_widget.addItem(self.placeholder)
            centre_message(self.placeholder, self._placeholder_msg,
                           "No searched settings yet: every setting is fixed.")
            self.layout_widget.setMinimumHeight(ROW_HEIGHT)
            return
        self._to_build = list(enumerate(names))
        self._set_height(len(names))

    def _build_one(self, book: TrialBook, t: theme.Theme) -> None:
        """Place the next small picture (one per redraw tick), made in advance when possible."""
        i, name = self._to_build.pop(0)
        self.ensure(i + 1)
        plot, dots, ring = self.pool[i]
        plot.setTitle(core.param_label(name))
        self.style_plot(plot, t)
        plot.getAxis("bottom").setTicks(None)
        self._metric = core.metric_label(book.metric) if book.metric else "score"
        self._label(plot, i)
        dots.setData([], [])
        ring.setData([], [])
        plot.enableAutoRange()
        self.layout_widget.addItem(plot, row=i // self.columns, col=i % self.columns)
        self.plots[name] = (plot, dots, ring)

    def _label(self, plot: pg.PlotItem, i: int) -> None:
        if i % self.columns == 0:
            plot.setLabel("left", self._metric)
        else:
            plot.showLabel("left", False)

    def _set_height(self, n: int) -> None:
        self.layout_widget.setMinimumHeight(max(1, math.ceil(n / self.columns)) * ROW_HEIGHT)

    def resizeEvent(self, event) -> None:
        super().resizeEvent(event)
        columns = max(1, min(4, (self.width() - 40) // MIN_WIDTH))
        if columns == self.columns:
            return
        self.columns = columns
        if self.plots and not self._to_build:       # place the pictures again, in the new grid
            self.layout_widget.clear()
            for i, (plot, _d, _r) in enumerate(self.plots.values()):
                self._label(plot, i)
                self.layout_widget.addItem(plot, row=i // columns, col=i % columns)
            self._set_height(len(self.plots))

    def refresh(self, book: TrialBook, changed: set[int], selected: int | None, t: theme.Theme) -> bool:
        names = core.searched_names(book)
        structure = (tuple(names), book.structure_version, t.background.name())
        if structure != self._structure:
            self._structure = structure
            self._rebuild(book, names, t)
            self._drawn = None
        if self._to_build:
            self._build_one(book, t)
            self._drawn = None
            return True
        key = (book.finished_version, selected)
        if key != self._drawn:
            self._drawn = key
            self._dirty = list(self.plots)
        if not self._dirty:
            return False
        # one small picture per tick: redrawing them all at once made one long paint
        done = [r for r in book.ordered() if r.state == "complete" and r.value is not None]
        name = self._dirty.pop(0)
        self._draw_one(book, name, done, selected, t)
        return True

    def _draw_one(self, book: TrialBook, name: str, done, selected: int | None, t: theme.Theme) -> None:
        if name not in self.plots:
            return
        plot, dots, ring = self.plots[name]
        xs, ys, data, brushes = [], [], [], []
        sel_xy = None
        cats = self.categories.setdefault(name, [])
        for r in done:
            if name not in r.params:
                continue
            x = self._x(name, r.params[name], cats)
            if x is None:
                continue
            if name in book.log_scaled:
                if x <= 0:
                    continue
                x = math.log10(x)
            role = "best" if r.number == book.best_number else "complete"
            xs.append(x)
            ys.append(r.value)
            data.append(r.number)
            brushes.append(pg.mkBrush(t.state(role, 255 if role == "best" else 190)))
            if r.number == selected:
                sel_xy = (x, r.value)
        dots.setData(xs, ys, data=data, brush=brushes, pen=pg.mkPen(t.background, width=1))
        if sel_xy:
            ring.setData([sel_xy[0]], [sel_xy[1]], brush=pg.mkBrush(None),
                         pen=pg.mkPen(t.state("selected"), width=2.5))
        else:
            ring.setData([], [])
        if cats:
            plot.getAxis("bottom").setTicks([[(i, str(c)) for i, c in enumerate(cats)]])
            plot.setXRange(-0.5, len(cats) - 0.5, padding=0.05)
        elif name in book.log_scaled and xs:
            # x is drawn as log10(value); the labels show the values themselves
            plot.getAxis("bottom").setTicks([log_ticks(10 ** min(xs), 10 ** max(xs)), []])

    @staticmethod
    def _x(name: str, value: Any, cats: list) -> float | None:
        if isinstance(value, bool) or isinstance(value, str):
            if value not in cats:
                cats.append(value)
            return float(cats.index(value))
        try:
            return float(value)
        except (TypeError, ValueError):
            return None


class ImportancePanel(Panel):
    """Horizontal bars of parameter importance (from ``labbench.search.insight``)."""

    def __init__(self, parent=None):
        super().__init__("Which settings matter", "Parameter importance: how much of the score's variation "
                         "each searched setting explains, from the finished trials.", parent,
                         short="parameter importance")
        self.widget = pg.PlotWidget()
        self.plot: pg.PlotItem = self.widget.getPlotItem()
        self.plot.setMenuEnabled(False)
        self.plot.setMouseEnabled(x=False, y=False)
        self.plot.hideButtons()
        self.plot.setLabel("bottom", "importance (share)")
        self.body.addWidget(self.widget)
        self.bars = pg.BarGraphItem(x0=[], y=[], height=0.6, width=[])
        self.plot.addItem(self.bars)
        self.message = message_item("")
        self.plot.addItem(self.message, ignoreBounds=True)
        self.values: Mapping[str, float] = {}
        self.text = "Importance appears once enough trials have finished."
        self._drawn = None

    def export_item(self):
        return self.plot

    def show_result(self, values: Mapping[str, float] | None, message: str | None) -> None:
        """Set from the importance job: values (name -> share) or a plain message."""
        self.values = dict(values or {})
        self.text = message or ""
        self._drawn = None

    def refresh(self, book: TrialBook, changed: set[int], selected: int | None, t: theme.Theme) -> bool:
        key = (tuple(self.values.items()), self.text, t.background.name())
        if key == self._drawn:
            return False
        self._drawn = key
        self.widget.setBackground(t.background)
        self.style_plot(self.plot, t)
        names = sorted(self.values, key=lambda k: self.values[k])
        widths = [float(self.values[n]) for n in names]
        self.bars.setOpts(x0=[0.0] * len(names), y=list(range(len(names))), height=0.6, width=widths,
                          brush=pg.mkBrush(t.state("best", 200)), pen=pg.mkPen(None))
        self.plot.getAxis("left").setTicks([[(i, core.param_label(n)) for i, n in enumerate(names)]])
        if names:
            self.plot.setXRange(0, max(max(widths), 1e-9) * 1.08, padding=0)
            self.plot.setYRange(-0.6, len(names) - 0.4, padding=0)
        else:
            self.plot.setXRange(0, 1, padding=0)
            self.plot.setYRange(0, 1, padding=0)
        centre_message(self.plot, self.message, None if names else
                       (self.text or "Importance appears once enough trials have finished."))
        return True
