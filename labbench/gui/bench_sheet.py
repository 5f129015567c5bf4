"""The head of the bench sheet: the current winner and how sure we are, in one strip.

Left: the cross-validated score with its spread over the folds, the hold-out score and the spread
across seeds once the winner check has run. Middle: the settings in words and what the winner
check said (the comparison with the hold-out, the runner-up, warnings, the caution). Right: the
winner's score in each fold, as bars that start at zero, and how far the best has climbed over
the trials (``ClimbStrip``).
"""

from __future__ import annotations

import html
import math
from typing import Any, Mapping

import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtWidgets import QHBoxLayout, QLabel, QSizePolicy, QTextBrowser, QVBoxLayout, QWidget

from labbench.gui import core, theme
from labbench.gui.panel import Panel
from labbench.gui.climb import ClimbStrip
from labbench.gui.trialbook import TrialBook
from labbench.gui.words import num, settings_words
from labbench.palette import colours


def _fin(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)


def sureness_lines(best, summary: Mapping[str, Any] | None, metric: str, running: bool = True) -> list[str]:
    """How sure we are, as short lines: folds, hold-out, seeds (what is known so far)."""
    lines = []
    folds = len(best.fold_scores)
    if folds:
        spread = f", spread ± {num(best.cv_std)}" if best.cv_std is not None else ""
        lines.append(f"mean of {folds} folds{spread}")
    s = summary or {}
    if s and s.get("trial_number") == best.number:
        if _fin(s.get("holdout_score")):
            rows = s.get("holdout_rows")
            lines.append(f"hold-out {num(s['holdout_score'])}"
                         + (f" on {rows} rows kept aside, scored once" if rows else ", scored once"))
        spread = s.get("seed_spread") or {}
        stability = s.get("stability") or {}
        if spread.get("scores"):
            lines.append(f"across {len(spread['scores'])} seeds {num(spread.get('mean'))} "
                         f"± {num(spread.get('std'))}")
        elif stability.get("verdict"):      # maps and groups: do other seeds give the same groups?
            verdict = str(stability["verdict"]).split(":")[0]
            ari = f", groups agree {num(stability['ari_mean'])}" if stability.get("ari_mean") is not None else ""
            lines.append(f"across {len(stability.get('seeds') or [])} seeds: {verdict}{ari}")
        else:
            lines.append("seed spread not measured")
    elif running:
        lines.append("hold-out and seed check: when the search ends")
    else:
        lines.append("no hold-out or seed check known for this search")
    return lines


def _captioned(text: str, widget: QWidget) -> QWidget:
    box = QWidget()
    lay = QVBoxLayout(box)
    lay.setContentsMargins(0, 0, 0, 0)
    lay.setSpacing(0)
    caption = QLabel(text)
    caption.setObjectName("panelHint")
    lay.addWidget(caption)
    lay.addWidget(widget, 1)
    return box


class BenchSheet(Panel):
    """The winner strip at the top of the run page."""

    def __init__(self, parent=None):
        super().__init__("The winner so far", "The finished trial with the best cross-validated score, how sure "
                         "we are of it (spread over the folds; after the search, the hold-out rows and the spread "
                         "across seeds), its settings in words, its score in each fold and how the best climbed trial by trial.", parent, short=" ")
        row = QHBoxLayout()
        row.setContentsMargins(0, 0, 0, 0)
        row.setSpacing(14)
        left = QVBoxLayout()
        left.setSpacing(0)
        self.headline = QLabel("No finished trial yet.")
        self.headline.setObjectName("sheetScore")
        self.headline.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.headline.setMinimumWidth(190)
        self.headline.setAlignment(Qt.AlignmentFlag.AlignTop | Qt.AlignmentFlag.AlignLeft)
        self.headline.setSizePolicy(QSizePolicy.Policy.Preferred, QSizePolicy.Policy.Ignored)
        left.addWidget(self.headline)
        row.addLayout(left, 0)
        # one read-only document for the settings and the winner check: new text lays out inside
        # it and never asks the window for a new layout (rich-text labels did, mid-search)
        self.text = QTextBrowser()
        self.text.setObjectName("sheetText")
        self.text.setFrameShape(QTextBrowser.Shape.NoFrame)
        self.text.setOpenLinks(False)
        self.text.setFocusPolicy(Qt.FocusPolicy.NoFocus)
        self.text.viewport().setAutoFillBackground(False)
        self.text.setMinimumWidth(60)
        row.addWidget(self.text, 3)
        self.folds = pg.PlotWidget()
        self.folds.setMinimumWidth(100)
        self.folds.setMaximumWidth(150)
        self.fold_plot = self.folds.getPlotItem()
        self.fold_plot.setMenuEnabled(False)
        self.fold_plot.setMouseEnabled(x=False, y=False)
        self.fold_plot.hideButtons()
        self.fold_bars = pg.BarGraphItem(x=[], height=[], width=0.6)
        self.fold_plot.addItem(self.fold_bars)
        self.fold_mean = pg.InfiniteLine(angle=0, movable=False)
        self.fold_plot.addItem(self.fold_mean)
        self.folds.setVisible(False)
        self.fold_box = _captioned("each fold (bars from zero)", self.folds)
        self.fold_box.setVisible(False)
        row.addWidget(self.fold_box, 1)
        self.climb = ClimbStrip()
        self.climb.setMinimumWidth(150)
        self.climb.setMaximumWidth(300)
        self.climb.plot.setLabel("bottom", None)
        self.climb.plot.showLabel("bottom", False)
        row.addWidget(_captioned("the best so far, trial by trial", self.climb), 2)
        self.strip = QWidget()
        self.strip.setLayout(row)
        self.body.addWidget(self.strip)
        self.details_html = ""
        self.final_html = ""
        self.fold_range: tuple[float, float] | None = None
        self._page = None
        self._folds_drawn = None
        self._drawn = None
        self.shown_number: int | None = None
        self.shown_value: float | None = None

    def picture_widget(self) -> QWidget:
        return self.strip

    def export_item(self):
        return self.fold_plot

    def refresh(self, book: TrialBook, changed: set[int], selected: int | None, t: theme.Theme) -> bool:
        key = (book.best_number, book.finished_version, id(book.winner), book.stage, selected,
               max(book.records, default=-1), t.background.name())
        if key == self._drawn:
            return False
        self._drawn = key
        self.climb.draw(book, selected, t)
        best = book.best()
        metric = core.metric_label(book.metric) if book.metric else "score"
        pal = colours(t.dark)
        running = book.ended is None and book.progress is not None
        done = not running and book.running_number is None
        title = "The winner" if done and best is not None else "The winner so far"
        if title != self.title:
            self.title = title
            self.findChild(QLabel, "panelTitle").setText(f"<b>{title}</b>")
        if best is None or best.value is None:
            self.headline.setText("No finished trial yet." if not book.records
                                  else "Waiting for the first trial to finish…")
            self.details_html = ""
            self.folds.setVisible(False)
            self.fold_box.setVisible(False)
            self.shown_number = self.shown_value = None
        else:
            self.shown_number, self.shown_value = best.number, best.value
            std = f" <span style='font-size:12pt'>± {best.cv_std:.4g}</span>" if best.cv_std is not None else ""
            lines = "<br>".join(html.escape(x) for x in sureness_lines(best, book.winner, metric, running))
            self.headline.setText(
                f"<span style='font-size:18pt; font-weight:600; color:{pal['best']}'>{best.value:.4g}</span>{std}"
                f"<br><b>{html.escape(metric)}</b>, trial {best.number}"
                f"<br><span style='color:{pal['muted']}'>{lines}</span>")
            words = html.escape(settings_words(best.settings, best.params))
            folds = ", ".join(f"{v:.4g}" for v in best.fold_scores)
            self.details_html = (f"<p style='margin:0'><b>Settings:</b> {words}.</p>"
                                 + (f"<p style='margin:2px 0 0 0; color:{pal['muted']}'>Per fold: {folds}</p>"
                                    if folds else ""))
            self._draw_folds(best.fold_scores, best.value, t)
        self.final_html = self._final_text(book)
        page = self.details_html + self.final_html
        if page != self._page:          # laying out the document again is the slow part
            self._page = page
            self.text.setHtml(page)
        return True

    def _draw_folds(self, scores, mean: float, t: theme.Theme) -> None:
        if not scores:
            self.folds.setVisible(False)
            return
        if self._folds_drawn == (tuple(scores), mean, t.background.name()):
            return
        self._folds_drawn = (tuple(scores), mean, t.background.name())
        self.folds.setVisible(True)
        self.fold_box.setVisible(True)
        self.folds.setBackground(t.background)
        self.style_plot(self.fold_plot, t)
        self.fold_plot.showGrid(x=False, y=True, alpha=t.grid_alpha)
        xs = list(range(1, len(scores) + 1))
        self.fold_bars.setOpts(x=xs, height=list(scores), width=0.6,
                               brush=pg.mkBrush(t.state("best", 170)), pen=pg.mkPen(None))
        self.fold_mean.setPen(pg.mkPen(t.foreground, width=1, style=Qt.PenStyle.DashLine))
        self.fold_mean.setValue(mean)
        # bars start at zero: their lengths compare the folds honestly
        low = min(0.0, min(scores), mean)
        high = max(0.0, max(scores), mean)
        pad = (high - low) * 0.1 or 0.05
        self.fold_range = (low - pad if low < 0 else -0.04 * (high - low), high + pad if high > 0 else 0.0)
        self.fold_plot.setYRange(*self.fold_range, padding=0)
        top = max(abs(v) for v in self.fold_range)
        marks = sorted({0.0, float(f"{max(scores, key=abs):.2g}")} if top else {0.0})
        self.fold_plot.getAxis("left").setTicks([[(v, f"{v:g}") for v in marks], []])
        self.fold_plot.setXRange(0.4, len(scores) + 0.6, padding=0)
        self.fold_plot.getAxis("bottom").setTicks([[(x, str(x)) for x in xs]])

    def _final_text(self, book: TrialBook) -> str:
        from labbench.gui.winner_view import winner_html

        if book.winner is not None:
            return winner_html(book.winner, book.metric, book.winner_files)
        if book.stage is not None and book.ended is not None:
            return f"<p><i>Checking the winner: {html.escape(book.stage.text)}</i></p>"
        return ""
