"""The runs as a notebook: one entry per trial, newest first, in sentences.

Each entry says the trial's number, its state in words, its score, its settings in words and why
it stopped. Picking an entry highlights that trial in the pictures (``picked``).
"""

from __future__ import annotations

from PySide6.QtCore import QSize, Qt, Signal
from PySide6.QtGui import QColor, QIcon, QPainter, QPixmap
from PySide6.QtWidgets import (QAbstractItemView, QHBoxLayout, QLabel, QListWidget, QListWidgetItem, QVBoxLayout,
                               QWidget)

from labbench.gui import core, theme
from labbench.gui.trialbook import TrialBook, TrialRecord
from labbench.gui.words import duration_text, num, settings_words, state_word, why_stopped

NUMBER_ROLE = Qt.ItemDataRole.UserRole + 7


def entry_text(rec: TrialRecord, book: TrialBook) -> str:
    """Three short lines: who and how it went, the score, the settings."""
    head = f"Trial {rec.number} — {state_word(rec.state)}"
    if rec.number == book.best_number:
        head += ", the winner" + (" so far" if book.ended is None else "")
    metric = core.metric_label(book.metric) if book.metric else "score"
    if rec.value is not None:
        score = f"{metric} {num(rec.value)}" + (f" ± {num(rec.cv_std)}" if rec.cv_std is not None else "")
    else:
        score = "no score"
    why = why_stopped(rec.state, rec.reason, len(rec.epochs), rec.epochs_total)
    took = duration_text(rec.duration_s) if rec.duration_s >= 1 else ""     # below a second: noise
    second = " · ".join(x for x in ((score if rec.value is not None else ""), why, took) if x)
    words = settings_words(rec.settings, rec.params)
    return "\n".join(x for x in (head, second, words) if x)


def _dot(colour: QColor) -> QIcon:
    pix = QPixmap(24, 24)
    pix.fill(Qt.GlobalColor.transparent)
    p = QPainter(pix)
    p.setRenderHint(QPainter.RenderHint.Antialiasing)
    p.setPen(Qt.PenStyle.NoPen)
    p.setBrush(colour)
    p.drawEllipse(5, 5, 14, 14)
    p.end()
    pix.setDevicePixelRatio(2)
    return QIcon(pix)


class Notebook(QWidget):
    """The list of trials; ``picked`` carries the trial number of the chosen entry (or None)."""

    picked = Signal(object)

    def __init__(self, parent=None):
        super().__init__(parent)
        lay = QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.setSpacing(2)
        head = QHBoxLayout()
        self.count = QLabel("")
        self.count.setObjectName("panelHint")
        head.addWidget(self.count, 1)
        lay.addLayout(head)
        self.list = QListWidget()
        self.list.setObjectName("notebook")
        self.list.setAccessibleName("Trials notebook")
        self.list.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        self.list.setWordWrap(True)
        self.list.setUniformItemSizes(False)
        self.list.setIconSize(QSize(12, 12))
        self.list.setVerticalScrollMode(QAbstractItemView.ScrollMode.ScrollPerPixel)
        self.list.setTabKeyNavigation(False)
        self.list.setSpacing(3)
        self.list.setAlternatingRowColors(True)
        lay.addWidget(self.list, 1)
        self.items: dict[int, QListWidgetItem] = {}
        self._texts: dict[int, tuple] = {}
        self._icons: dict[tuple, QIcon] = {}
        self._selected: int | None = None
        self._quiet = False
        self.list.itemSelectionChanged.connect(self._selection)

    def _icon(self, role: str) -> QIcon:
        colour = theme.state_colour(role)
        key = (role, colour.name())
        if key not in self._icons:
            self._icons[key] = _dot(colour)
        return self._icons[key]

    def refresh(self, book: TrialBook, changed: set[int] | None = None) -> None:
        for number in [n for n in self.items if n not in book.records]:
            self.list.takeItem(self.list.row(self.items.pop(number)))
            self._texts.pop(number, None)
        for rec in book.ordered():
            item = self.items.get(rec.number)
            if item is None:
                item = QListWidgetItem()
                item.setData(NUMBER_ROLE, rec.number)
                # newest first: an entry goes above every older one
                row = sum(1 for n in self.items if n > rec.number)
                self.list.insertItem(row, item)
                self.items[rec.number] = item
            role = "best" if rec.number == book.best_number else rec.state
            text = entry_text(rec, book)
            key = (text, role)
            if self._texts.get(rec.number) != key:
                self._texts[rec.number] = key
                item.setText(text)
                item.setIcon(self._icon(role))
                item.setToolTip(rec.reason if rec.reason else "")
        counts: dict[str, int] = {}
        for r in book.records.values():
            counts[r.state] = counts.get(r.state, 0) + 1
        text = " · ".join(f"{n} {state_word(s)}" for s, n in sorted(counts.items()))
        if self.count.text() != text:
            self.count.setText(text)

    def _selection(self) -> None:
        if self._quiet:
            return
        items = self.list.selectedItems()
        self._selected = int(items[0].data(NUMBER_ROLE)) if items else None
        self.picked.emit(self._selected)

    def select(self, number: int | None, emit: bool = True) -> None:
        self._selected = number
        self._quiet = not emit
        try:
            if number is None or number not in self.items:
                self.list.clearSelection()
            else:
                item = self.items[number]
                self.list.setCurrentItem(item)
                self.list.scrollToItem(item)
        finally:
            self._quiet = False
