"""The trade-off of a search without a target, and picking a trial from it.

More units always lower the held-out quantisation error, so the map page shows, beside the
winner of the default (penalised) objective, the finished trials that no other beats on units
and held-out error (and topographic error, for a map) at once: ``labbench.search.front``'s front,
the same one ``labbench show`` prints. Each finished trial is a dot (units across, held-out
error up), the front's trials are joined in the winner's green; a click on a front trial or a
row picks it, and "Refit and show" refits that trial on all training rows, checks it on the
hold-out rows and writes its files (what ``labbench run SPEC --pick N`` does) into
``<spec name>_out/trial_N``, then draws it.
"""

from __future__ import annotations

from typing import Any, Sequence

import pyqtgraph as pg
from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (QAbstractItemView, QHBoxLayout, QHeaderView, QPushButton, QTableWidget,
                               QTableWidgetItem, QVBoxLayout, QWidget)

from labbench.gui import theme
from labbench.gui.panel import Panel, centre_message, integer_axis, message_item
from labbench.gui.words import num
from labbench.palette import colours


def read_front(url: str, name: str) -> tuple[list, list]:
    """(every candidate, the front) of a stored search (runs on a reader thread)."""
    import optuna

    from labbench.search import front
    from labbench.search.storage import quiet_optuna_warnings
    from labbench.search.stored import read_storage

    quiet_optuna_warnings()
    study = optuna.load_study(study_name=name, storage=read_storage(url))
    trials = study.get_trials(deepcopy=False)
    every = [c for c in (front.candidate(t) for t in trials) if c is not None]
    return every, front.trade_off_front(trials)


def pick_trial(spec: Any, number: int) -> tuple[dict, Any, list[str]]:
    """Refit and check stored trial ``number`` and write its files into ``<spec>_out/trial_N``
    (what ``labbench run SPEC --pick N`` does); runs in a helper process. Returns (summary,
    model, files)."""
    import optuna

    from labbench.search import ending
    from labbench.search.storage import quiet_optuna_warnings, resolve_url
    from labbench.search.stored import read_storage

    quiet_optuna_warnings()
    study = optuna.load_study(study_name=spec.study_name(), storage=read_storage(resolve_url(spec)))
    picked = getattr(ending, "picked_dir", None)       # the one rule, shared with the CLI
    folder = picked(spec, number) if picked is not None else ending.out_dir(spec) / f"trial_{number}"
    return ending.finish_search(spec, study, None, folder, trial_number=number)


class FrontPanel(Panel):
    pick_requested = Signal(int)

    def __init__(self):
        super().__init__("The trade-off", "Every finished trial by its unit count (across) and held-out error "
                         "(up). More units always lower the error, so no single number picks the map: the "
                         "green trials are the front, those no other trial beats on units and held-out error "
                         "(and, for a map, topographic error) at once. Pick one (a click or a row) and refit "
                         "it to see its map; the search's own winner is ringed.", short=" ")
        self.hint.setTextFormat(Qt.TextFormat.RichText)
        holder = QWidget()
        lay = QHBoxLayout(holder)
        lay.setContentsMargins(0, 0, 0, 0)
        self.widget = pg.PlotWidget()
        self.plot: pg.PlotItem = self.widget.getPlotItem()
        self.plot.setMenuEnabled(False)
        self.plot.hideButtons()
        self.plot.setLabel("bottom", "units")
        self.others = pg.ScatterPlotItem(size=6, pxMode=True)
        self.line = pg.PlotDataItem()
        self.front_dots = pg.ScatterPlotItem(size=10, pxMode=True)
        self.front_dots.sigClicked.connect(self._dot_clicked)
        self.ring = pg.ScatterPlotItem(size=18, pxMode=True, symbol="o")
        for item in (self.others, self.line, self.front_dots, self.ring):
            self.plot.addItem(item)
        self.message = message_item("")
        self.plot.addItem(self.message, ignoreBounds=True)
        self.widget.setMinimumSize(220, 160)
        lay.addWidget(self.widget, 5)
        side = QVBoxLayout()
        self.table = QTableWidget(0, 4)
        self.table.setHorizontalHeaderLabels(["trial", "units", "error", "score"])
        self.table.horizontalHeaderItem(2).setToolTip("The held-out error (fold mean)")
        self.table.horizontalHeaderItem(3).setToolTip("The trial's score: the search's objective, cross-validated")
        self.table.verticalHeader().hide()
        self.table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.table.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.table.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        self.table.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
        self.table.itemSelectionChanged.connect(self._row_picked)
        self.table.verticalHeader().setDefaultSectionSize(20)
        font = self.table.font()
        font.setPointSizeF(font.pointSizeF() * 0.92)
        self.table.setFont(font)
        side.addWidget(self.table, 1)
        self.refit = QPushButton("Refit and show trial")
        self.refit.setToolTip("Refit the picked trial on all training rows, check it on the hold-out rows, "
                              "write its files into <spec>_out/trial_N and draw its map")
        self.refit.setEnabled(False)
        self.refit.clicked.connect(lambda: self.picked is not None and self.pick_requested.emit(self.picked))
        side.addWidget(self.refit)
        lay.addLayout(side, 4)
        self.body.addWidget(holder)
        self.front: list = []
        self.every: list = []
        self.picked: int | None = None
        self.shown: int | None = None

    def show_front(self, every: Sequence[Any], front: Sequence[Any], shown: int | None) -> None:
        """Draw the candidates and the front; ``shown``: the trial whose map is drawn."""
        t = theme.Theme.current()
        c = colours(t.dark)
        self.style_plot(self.plot, t)
        self.widget.setBackground(t.background)
        self.every, self.front, self.shown = list(every), list(front), shown
        if not self.front:
            for item in (self.others, self.front_dots, self.ring):
                item.setData([], [])
            self.line.setData([], [])
            self.table.setRowCount(0)
            centre_message(self.plot, self.message, "No finished trial with held-out measures yet.")
            self.hint.setText(" ")
            return
        centre_message(self.plot, self.message, None)
        on_front = {p.number for p in self.front}
        rest = [p for p in self.every if p.number not in on_front]
        self.others.setData([p.units for p in rest], [p.error for p in rest], pen=None,
                            brush=pg.mkBrush(c["complete"] + "90"))
        xs, ys = [p.units for p in self.front], [p.error for p in self.front]
        self.line.setData(xs, ys, pen=pg.mkPen(c["best"], width=1.5), stepMode=None)
        self.front_dots.setData(xs, ys, data=[p.number for p in self.front], pen=pg.mkPen(c["ink"], width=1),
                                brush=pg.mkBrush(c["best"]))
        ring = [p for p in self.every if p.number == shown]
        self.ring.setData([p.units for p in ring], [p.error for p in ring], pen=pg.mkPen(c["selected"], width=2),
                          brush=pg.mkBrush(0, 0, 0, 0))
        self.plot.setLabel("left", self.front[0].error_name.replace("_", " "))
        units = [p.units for p in self.every]
        integer_axis(self.plot.getAxis("bottom"), min(units), max(units))
        self.table.blockSignals(True)
        self.table.setRowCount(len(self.front))
        for r, p in enumerate(self.front):
            for j, text in enumerate((str(p.number), str(p.units), num(p.error), num(p.value))):
                item = QTableWidgetItem(text)
                item.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
                self.table.setItem(r, j, item)
        self.table.blockSignals(False)
        self.hint.setText(f"{len(self.front)} of {len(self.every)} finished trials on the front")
        self.plot.getViewBox().autoRange(padding=0.08)

    def pick(self, number: int | None) -> None:
        self.picked = number
        self.refit.setEnabled(number is not None and number != self.shown)
        self.refit.setText(f"Refit and show trial {number}" if number is not None else "Refit and show trial")
        rows = [r for r, p in enumerate(self.front) if p.number == number]
        if rows and self.table.currentRow() != rows[0]:
            self.table.blockSignals(True)
            self.table.selectRow(rows[0])
            self.table.blockSignals(False)

    def _row_picked(self) -> None:
        r = self.table.currentRow()
        if 0 <= r < len(self.front):
            self.pick(self.front[r].number)

    def _dot_clicked(self, _item, points, *_a) -> None:
        if len(points):
            self.pick(int(points[0].data()))


__all__ = ["FrontPanel", "read_front", "pick_trial"]
