"""Learning curves as a band: the 10-90 % spread of every trial's validation loss per epoch,
shaded, with its middle line; only three trials are drawn as lines (the best, the one training
now and the one the user picked).

Redrawn by the window's timer (``refresh``), never per event; the band is recomputed only when
a trial ends or on every few epochs of the running trial.
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import QCheckBox

from labbench.gui import theme
from labbench.gui.axes import loss_band, robust_range
from labbench.gui.panel import Panel, centre_message, integer_axis, message_item
from labbench.gui.trialbook import TrialBook
from labbench.palette import colours

ROLES = ("best", "running", "selected")


def legend_html(t: theme.Theme) -> str:
    """The key in words, coloured as drawn (the panel's subtitle)."""
    band = colours(t.dark)["band"]

    def part(colour: str, mark: str, word: str) -> str:
        return f"<span style='color:{colour}'><b>{mark}</b></span>&nbsp;{word}"

    return "&nbsp; ".join([part(band, "▆", "10–90 % of all trials"),
                           part(t.state("best").name(), "━", "winner so far"),
                           part(t.state("running").name(), "━", "training now"),
                           part(t.state("selected").name(), "━", "picked")])


class CurvesPanel(Panel):
    """Validation loss per epoch: the band of all trials and three lines."""

    clicked = Signal(int)

    def __init__(self, parent=None):
        super().__init__("How the trials learned", "Validation loss after each epoch (mean over the folds). The shaded "
                         "band holds the middle 80 % of all trials at each epoch, the thin line through it is "
                         "their median; the winner so far, the trial training now and the trial you picked in "
                         "the notebook are drawn as lines.", parent, short=" ")
        self.hint.setTextFormat(Qt.TextFormat.RichText)
        self.widget = pg.PlotWidget()
        self.plot: pg.PlotItem = self.widget.getPlotItem()
        self.plot.setLabel("bottom", "epoch")
        self.plot.setLabel("left", "validation loss")
        self.plot.setMenuEnabled(False)
        self.body.addWidget(self.widget)
        self.log_box = QCheckBox("log scale")
        self.log_box.setToolTip("Draw the loss on a logarithmic axis (helps when early epochs are far higher)")
        self.log_box.toggled.connect(self._log)
        self.controls.addWidget(self.log_box)
        self.band_low = pg.PlotDataItem()
        self.band_high = pg.PlotDataItem()
        self.band = pg.FillBetweenItem(self.band_low, self.band_high)
        self.band_mid = pg.PlotDataItem()
        for item in (self.band_low, self.band_high, self.band, self.band_mid):
            self.plot.addItem(item)
        self.lines: dict[str, pg.PlotDataItem] = {}
        self.shown: dict[str, int | None] = {r: None for r in ROLES}
        for z, role in enumerate(ROLES):
            line = pg.PlotDataItem(name=role)
            line.setZValue(20 + 10 * z)
            line.setCurveClickable(True)
            line.sigClicked.connect(lambda *_a, r=role: self.shown[r] is not None and
                                    self.clicked.emit(self.shown[r]))
            self.plot.addItem(line)
            self.lines[role] = line
        self.message = message_item("")
        self.plot.addItem(self.message, ignoreBounds=True)
        self.clip_note = pg.TextItem("", anchor=(1, 0))
        self.plot.addItem(self.clip_note, ignoreBounds=True)
        self.band_data: tuple = (np.array([]),) * 4
        self._styled: dict[str, tuple] = {}
        self._theme_key = None
        self._band_key = None
        self._view = None
        self._drawn = None

    def export_item(self):
        return self.plot

    def _log(self, on: bool) -> None:
        self.plot.setLogMode(y=on)
        self._view = None
        self._drawn = None

    def set_loss_label(self, text: str) -> None:
        """The left axis: what the curves are (the family's held-out loss)."""
        if self.plot.getAxis("left").labelText != text:
            self.plot.setLabel("left", text)

    def reset(self) -> None:
        self._band_key = self._view = self._drawn = None
        for line in self.lines.values():
            line.setData([], [])
        self.shown = {r: None for r in ROLES}
        self._styled = {}

    def refresh(self, book: TrialBook, changed: set[int], selected: int | None, t: theme.Theme) -> bool:
        key = (t.background.name(), t.foreground.name())
        if key != self._theme_key:
            self._theme_key = key
            self.widget.setBackground(t.background)
            self.style_plot(self.plot, t)
            self.hint.setText(legend_html(t))
            pal = colours(t.dark)
            band = pg.mkColor(pal["band"])
            band.setAlpha(95 if t.dark else 80)
            self.band.setBrush(pg.mkBrush(band))
            self.band_low.setPen(pg.mkPen(None))
            self.band_high.setPen(pg.mkPen(None))
            self.band_mid.setPen(pg.mkPen(pal["band_mid"], width=1, style=Qt.PenStyle.DashLine))
            self.clip_note.setColor(t.foreground)
            self._band_key = None
        running = book.records.get(book.running_number) if book.running_number is not None else None
        # the band follows finished trials at once and the running one every 5 epochs
        band_key = (book.finished_version, len(running.epochs) // 5 if running else -1)
        if band_key != self._band_key:
            self._band_key = band_key
            curves = [r.val_loss for r in book.ordered() if r.val_loss]
            epochs, low, mid, high = loss_band(curves)
            self.band_data = (epochs, low, mid, high)
            self.band_low.setData(epochs, low)
            self.band_high.setData(epochs, high)
            self.band_mid.setData(epochs, mid)
            self._view = None
        roles = {"best": book.best_number, "running": book.running_number, "selected": selected}
        for role, number in roles.items():
            rec = book.records.get(number) if number is not None else None
            line = self.lines[role]
            if rec is None or not rec.val_loss:
                if self.shown[role] is not None or line.xData is not None and len(line.xData):
                    line.setData([], [])
                self.shown[role] = None
                continue
            restyle = self.shown[role] != number or self._styled.get(role) != (rec.state, key)
            if restyle:
                width = 3.0 if role == "selected" else 2.4
                style = theme.pen_style(rec.state) if role == "selected" else Qt.PenStyle.SolidLine
                line.setPen(pg.mkPen(t.state(role), width=width, style=style))
                self._styled[role] = (rec.state, key)
            if restyle or number in changed:
                line.setData(np.asarray(rec.epochs, float), np.asarray(rec.val_loss, float))
                self.shown[role] = number
        self._set_view(book)
        centre_message(self.plot, self.message,
                       None if any(len(r.epochs) for r in book.records.values())
                       else "The band of learning curves grows here once the first epochs are scored.")
        return False

    def _set_view(self, book: TrialBook) -> None:
        """Axes from the robust spread of every loss value, so a few wild epochs do not flatten
        the band; a note says how many points fall outside."""
        longest = max((r.epochs_total or len(r.epochs) for r in book.records.values()), default=0)
        n_points = sum(len(r.val_loss) for r in book.records.values())
        view_key = (longest, n_points // 25, self.log_box.isChecked(), book.finished_version)
        if view_key == self._view or not n_points:
            return
        self._view = view_key
        values = [v for r in book.records.values() for v in r.val_loss]
        if self.log_box.isChecked():
            values = [float(np.log10(v)) for v in values if v > 0]
        low, high, outside = robust_range(values, 2.0, 98.0, pad=0.08)
        self.plot.setYRange(low, high, padding=0)
        if longest:
            self.plot.setXRange(1, max(2, longest), padding=0.02)
            integer_axis(self.plot.getAxis("bottom"), 1, max(2, longest))
        if outside:
            self.clip_note.setText(f"{outside} of {len(values)} points lie outside this view")
            self.clip_note.setPos(max(2, longest), high)
            self.clip_note.setVisible(True)
        else:
            self.clip_note.setVisible(False)
