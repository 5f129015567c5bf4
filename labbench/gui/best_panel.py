"""The current best configuration; after the search, the winner's hold-out check and seed spread."""

from __future__ import annotations

import html
import json
from typing import Any, Mapping

import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtWidgets import QLabel, QTextBrowser

from labbench.gui import core, theme
from labbench.gui.panel import Panel
from labbench.gui.trialbook import TrialBook

SETTING_ORDER = ("hidden", "activation", "optimizer", "learning_rate", "momentum", "l2",
                 "batch_size", "epochs")
SETTING_WORDS = {"hidden": "Hidden layers (units)", "activation": "Activation", "optimizer": "Optimizer",
                 "learning_rate": "Learning rate", "momentum": "Momentum", "l2": "L2 penalty",
                 "batch_size": "Batch size", "epochs": "Epochs"}


def show_value(key: str, value: Any) -> str:
    if key == "hidden":
        return " × ".join(str(u) for u in value) if value else "none (linear)"
    if isinstance(value, float):
        return f"{value:.4g}"
    return str(value)


def settings_text(settings: Mapping[str, Any]) -> str:
    """The winning settings as TOML-like lines (what "Copy settings" puts on the clipboard)."""
    lines = []
    for key in SETTING_ORDER:
        if key in settings:
            lines.append(f"{key} = {json.dumps(settings[key])}")
    for key, value in settings.items():
        if key not in SETTING_ORDER:
            lines.append(f"{key} = {json.dumps(value)}")
    return "\n".join(lines) + "\n"


class BestPanel(Panel):
    def __init__(self, parent=None):
        super().__init__("Best so far", "The finished trial with the best cross-validated score; after the "
                         "search, its check on the hold-out rows and across seeds.", parent, short=" ")
        self.headline = QLabel("No finished trial yet.")
        self.headline.setObjectName("bestHeadline")
        self.headline.setWordWrap(True)
        self.headline.setFixedHeight(50)
        self.headline.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.body.addWidget(self.headline)
        self.folds = pg.PlotWidget()
        self.folds.setFixedHeight(130)
        self.fold_plot = self.folds.getPlotItem()
        self.fold_plot.setMenuEnabled(False)
        self.fold_plot.setMouseEnabled(x=False, y=False)
        self.fold_plot.hideButtons()
        self.fold_plot.setLabel("bottom", "fold")
        self.fold_bars = pg.BarGraphItem(x=[], height=[], width=0.6)
        self.fold_plot.addItem(self.fold_bars)
        self.fold_mean = pg.InfiniteLine(angle=0, movable=False)
        self.fold_plot.addItem(self.fold_mean)
        self.folds.setVisible(False)
        self.body.addWidget(self.folds)
        # one read-only document for the settings and the winner check: new text lays out inside
        # it and never asks the window for a new layout (rich-text labels did, mid-search)
        self.text = QTextBrowser()
        self.text.setFrameShape(QTextBrowser.Shape.NoFrame)
        self.text.setOpenLinks(False)
        self.text.viewport().setAutoFillBackground(False)
        self.body.addWidget(self.text, 1)
        self.details_html = ""
        self.final_html = ""
        self._drawn = None
        self.shown_number: int | None = None
        self.shown_value: float | None = None

    def export_item(self):
        return self.fold_plot

    def refresh(self, book: TrialBook, changed: set[int], selected: int | None, t: theme.Theme) -> bool:
        key = (book.best_number, book.finished_version, id(book.winner), book.stage,
               t.background.name())
        if key == self._drawn:
            return False
        self._drawn = key
        best = book.best()
        metric = core.metric_label(book.metric) if book.metric else "score"
        if best is None or best.value is None:
            self.headline.setText("No finished trial yet." if not book.records
                                  else "Waiting for the first trial to finish…")
            self.details_html = ""
            self.folds.setVisible(False)
            self.shown_number = self.shown_value = None
        else:
            self.shown_number, self.shown_value = best.number, best.value
            std = f" ± {best.cv_std:.4g}" if best.cv_std is not None else ""
            self.headline.setText(
                f"<span style='font-size:15pt; font-weight:600'>{best.value:.4g}{std}</span>"
                f"<br>{html.escape(metric)}, trial {best.number}"
                + (f", mean over {len(best.fold_scores)} folds" if best.fold_scores else ""))
            rows = "".join(
                f"<tr><td style='padding-right:12px'>{html.escape(SETTING_WORDS.get(k, k))}</td>"
                f"<td><b>{html.escape(show_value(k, best.settings[k]))}</b></td></tr>"
                for k in SETTING_ORDER if k in best.settings)
            if not rows:
                rows = "".join(f"<tr><td style='padding-right:12px'>{html.escape(core.param_label(k))}</td>"
                               f"<td><b>{html.escape(show_value(k, v))}</b></td></tr>"
                               for k, v in best.params.items())
            folds = ", ".join(f"{v:.4g}" for v in best.fold_scores)
            self.details_html = (f"<table>{rows}</table>"
                                 + (f"<p>Per fold: {folds}</p>" if folds else ""))
            self._draw_folds(best.fold_scores, best.value, t)
        self.final_html = self._final_text(book)
        rule = "<hr>" if self.final_html and self.details_html else ""
        self.text.setHtml(self.details_html + rule + self.final_html)
        return True

    def _draw_folds(self, scores, mean: float, t: theme.Theme) -> None:
        if not scores:
            self.folds.setVisible(False)
            return
        self.folds.setVisible(True)
        self.folds.setBackground(t.background)
        self.style_plot(self.fold_plot, t)
        xs = list(range(1, len(scores) + 1))
        self.fold_bars.setOpts(x=xs, height=list(scores), width=0.6,
                               brush=pg.mkBrush(t.state("best", 170)), pen=pg.mkPen(None))
        self.fold_mean.setPen(pg.mkPen(t.foreground, width=1, style=Qt.PenStyle.DashLine))
        self.fold_mean.setValue(mean)
        low = min(min(scores), mean)
        high = max(max(scores), mean)
        pad = (high - low) * 0.25 or abs(high) * 0.05 or 0.05
        self.fold_plot.setYRange(low - pad, high + pad, padding=0)
        self.fold_plot.setXRange(0.4, len(scores) + 0.6, padding=0)
        self.fold_plot.getAxis("bottom").setTicks([[(x, str(x)) for x in xs]])

    def _final_text(self, book: TrialBook) -> str:
        from labbench.gui.winner_view import winner_html

        if book.winner is not None:
            return winner_html(book.winner, book.metric)
        if book.stage is not None and book.ended is not None:
            return f"<p><i>Checking the winner: {html.escape(book.stage.text)}</i></p>"
        return ""
