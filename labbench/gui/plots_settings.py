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

COLUMNS = 3
ROW_HEIGHT = 210


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
        self.placeholder = None

    def export_item(self):
        return self.layout_widget.scene()

    def _rebuild(self, book: TrialBook, names: list[str], t: theme.Theme) -> None:
        self.layout_widget.clear()
        self._to_build = []
        self.plots.clear()
        self.categories.clear()
        self.layout_widget.setBackground(t.background)
        if not names:
            self.placeholder = self.layout_widget.addPlot()
            self.style_plot(self.placeholder, t)
            msg = message_item("")
            self.placeholder.addItem(msg, ignoreBounds=True)
            self.placeholder.setXRange(0, 1)
            self.placeholder.setYRange(0, 1)
            centre_message(self.placeholder, msg, "No searched settings yet: every setting is fixed.")
            self.layout_widget.setMinimumHeight(ROW_HEIGHT)
            return
        self.placeholder = None
        self._to_build = list(enumerate(names))
        rows = math.ceil(len(names) / COLUMNS)
        self.layout_widget.setMinimumHeight(rows * ROW_HEIGHT)

    def _build_one(self, book: TrialBook, t: theme.Theme) -> None:
        """Add the next small picture (one per redraw tick: creating plots is not cheap)."""
        i, name = self._to_build.pop(0)
        if i and i % COLUMNS == 0:
            self.layout_widget.nextRow()
        plot = self.layout_widget.addPlot(title=core.param_label(name))
        plot.setMenuEnabled(False)
        self.style_plot(plot, t)
        if i % COLUMNS == 0:
            plot.setLabel("left", core.metric_label(book.metric) if book.metric else "score")
        dots = pg.ScatterPlotItem(size=8, pxMode=True, hoverable=True)
        dots.sigClicked.connect(lambda _i, pts, *_a: pts and self.clicked.emit(int(pts[0].data())))
        ring = pg.ScatterPlotItem(size=16, pxMode=True)
        plot.addItem(dots)
        plot.addItem(ring)
        self.plots[name] = (plot, dots, ring)

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
        if key == self._drawn:
            return False
        self._drawn = key
        done = [r for r in book.ordered() if r.state == "complete" and r.value is not None]
        for name, (plot, dots, ring) in self.plots.items():
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
        return True

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
