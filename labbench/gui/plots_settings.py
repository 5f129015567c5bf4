"""Where the good scores live: for each searched setting, where in its range the best quarter of
the trials sits, with what moved the score. (How far the best climbed: ``climb.ClimbStrip``.)

``GoodRanges`` paints one row per searched setting: the range the search tried as a quiet track,
a short tick for every finished trial, the span of the top quarter of the trials as a thick bar,
the winner as a diamond and the picked trial as a ring. The share of the score's variation each
setting explains (parameter importance, from ``labbench.search.insight``) sits at the right end.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Mapping

from PySide6.QtCore import QPointF, QRectF, QSize, Qt, Signal
from PySide6.QtGui import QColor, QFont, QPainter, QPen, QPolygonF
from PySide6.QtWidgets import QScrollArea, QSizePolicy, QWidget

from labbench.gui import core, theme
from labbench.gui.axes import good_span, integer_ticks, log_ticks
from labbench.gui.panel import Panel
from labbench.gui.trialbook import TrialBook
from labbench.gui.words import num
from labbench.palette import colours
from labbench.search.insight import MIN_TRIALS_FOR_IMPORTANCE

ROW_H = 36
LABEL_W = 130
SHARE_W = 92


@dataclass
class RangeRow:
    """One searched setting, ready to paint (positions are 0..1 along the track)."""

    name: str
    label: str
    kind: str                          # "int" | "float" | "log" | "choice"
    ticks: list[tuple[float, str]]
    trials: list[float] = field(default_factory=list)
    good: tuple[float, float] | None = None
    good_text: str = ""
    good_choices: list[int] = field(default_factory=list)
    winner: float | None = None
    picked: float | None = None
    share: float | None = None


def _kind(name: str, values: list[Any], log_scaled) -> str:
    if any(isinstance(v, (str, bool)) for v in values):
        return "choice"
    if name in log_scaled:
        return "log"
    if values and all(isinstance(v, int) for v in values):
        return "int"
    return "float"


def build_rows(book: TrialBook, selected: int | None, shares: Mapping[str, float]) -> list[RangeRow]:
    """The rows of ``GoodRanges`` from the book (pure; tested directly)."""
    rows = []
    done = [r for r in book.ordered() if r.state == "complete" and r.value is not None]
    for name in core.searched_names(book):
        tried = [r.params[name] for r in book.ordered() if name in r.params]
        if not tried:
            continue
        kind = _kind(name, tried, book.log_scaled)
        row = RangeRow(name, core.param_label(name), kind, [], share=shares.get(name))
        cats: list = []
        if kind == "choice":
            for v in tried:
                if v not in cats:
                    cats.append(v)
            n = len(cats)

            def pos(v, cats=cats, n=n):
                return (cats.index(v) + 0.5) / n
            row.ticks = [(pos(c), "on" if c is True else "off" if c is False else str(c)) for c in cats]
        else:
            vals = [float(v) for v in tried]
            lo, hi = min(vals), max(vals)
            if kind == "log" and lo > 0:
                a, b = math.log10(lo), math.log10(hi)

                def pos(v, a=a, b=b):
                    return 0.5 if b == a else (math.log10(float(v)) - a) / (b - a)
                row.ticks = [(pos(v), f"{v:g}") for v in log_ticks(lo, hi, 5)]
            else:
                def pos(v, lo=lo, hi=hi):
                    return 0.5 if hi == lo else (float(v) - lo) / (hi - lo)
                if kind == "int":
                    row.ticks = [(pos(v), str(v)) for v in integer_ticks(lo, hi, 6)]
                else:
                    row.ticks = [(pos(v), num(v, 3)) for v in (lo, (lo + hi) / 2, hi)]
        pairs = [(r.params[name], r.value) for r in done if name in r.params]
        row.trials = [pos(v) for v, _ in pairs]
        if pairs:
            if kind == "choice":
                top = good_span(list(range(len(pairs))), [s for _, s in pairs], book.direction)
                ranked = sorted(pairs, key=lambda p: p[1], reverse=book.direction == "maximize")[:top[2]]
                chosen = []
                for v, _ in ranked:
                    if v not in chosen:
                        chosen.append(v)
                row.good_choices = [cats.index(v) for v in chosen]
                row.good_text = ", ".join("on" if v is True else "off" if v is False else str(v) for v in chosen)
            else:
                lo_v, hi_v, _k = good_span([float(v) for v, _ in pairs], [s for _, s in pairs], book.direction)
                row.good = (pos(lo_v), pos(hi_v))
                digits = 2 if kind == "log" else 3
                row.good_text = (num(int(lo_v)) if kind == "int" else num(lo_v, digits)) if lo_v == hi_v else \
                    f"{num(int(lo_v)) if kind == 'int' else num(lo_v, digits)} to " \
                    f"{num(int(hi_v)) if kind == 'int' else num(hi_v, digits)}"
        best = book.best()
        if best is not None and name in best.params:
            row.winner = pos(best.params[name])
        sel = book.records.get(selected) if selected is not None else None
        if sel is not None and name in sel.params:
            row.picked = pos(sel.params[name])
        rows.append(row)
    return rows


class GoodRanges(QWidget):
    """Paints the rows; its height follows the number of searched settings."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.rows: list[RangeRow] = []
        self.note = ""
        self.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Minimum)

    def set_rows(self, rows: list[RangeRow], note: str) -> None:
        self.rows, self.note = rows, note
        self.setToolTip(note)
        self.setMinimumHeight(self.sizeHint().height())
        self.updateGeometry()
        self.update()

    def sizeHint(self) -> QSize:
        return QSize(420, 24 + ROW_H * max(1, len(self.rows)) + 34)

    def visible_words(self) -> list[str]:
        out = [r.label for r in self.rows] + [t for r in self.rows for _p, t in r.ticks]
        return out + [r.good_text for r in self.rows] + [self.note]

    def paintEvent(self, _event) -> None:
        t = theme.Theme.current()
        pal = colours(t.dark)
        p = QPainter(self)
        p.setRenderHint(QPainter.RenderHint.Antialiasing)
        p.fillRect(self.rect(), t.background)
        small = QFont(self.font())
        small.setPointSizeF(max(7.0, self.font().pointSizeF() * 0.85))
        x0, x1 = LABEL_W, self.width() - SHARE_W - 14
        track_w = max(40, x1 - x0)
        muted = QColor(pal["muted"])
        p.setPen(muted)
        p.setFont(small)
        p.drawText(QRectF(4, 2, LABEL_W, 18), Qt.AlignmentFlag.AlignLeft, "setting")
        p.drawText(QRectF(x0, 2, track_w, 18), Qt.AlignmentFlag.AlignLeft, "the range tried")
        p.drawText(QRectF(x1 + 8, 2, SHARE_W, 18), Qt.AlignmentFlag.AlignLeft, "moved the score")
        for i, row in enumerate(self.rows):
            y = 24 + i * ROW_H
            mid = y + 12
            p.setFont(self.font())
            p.setPen(t.foreground)
            p.drawText(QRectF(4, y, LABEL_W - 8, 22), Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignVCenter,
                       row.label)
            p.setPen(Qt.PenStyle.NoPen)
            p.setBrush(QColor(pal["range"]))
            p.drawRoundedRect(QRectF(x0, mid - 3, track_w, 6), 3, 3)
            p.setPen(QPen(QColor(pal["complete"]), 1))
            for v in row.trials:
                x = x0 + v * track_w
                p.drawLine(QPointF(x, mid - 7), QPointF(x, mid + 7))
            good = QColor(pal["good_span"])
            good.setAlpha(200)
            p.setPen(Qt.PenStyle.NoPen)
            p.setBrush(good)
            if row.good is not None:
                a, b = row.good
                p.drawRoundedRect(QRectF(x0 + a * track_w - 3, mid - 5, max(6.0, (b - a) * track_w + 6), 10), 4, 4)
            n = max(1, len(row.ticks))
            for k in row.good_choices:
                c = row.ticks[k][0]
                p.drawRoundedRect(QRectF(x0 + (c - 0.5 / n) * track_w + 4, mid - 5, track_w / n - 8, 10), 4, 4)
            if row.winner is not None:
                x = x0 + row.winner * track_w
                p.setBrush(QColor(pal["milestone"]))
                p.setPen(QPen(t.background, 1))
                p.drawPolygon(QPolygonF([QPointF(x, mid - 8), QPointF(x + 6, mid), QPointF(x, mid + 8),
                                         QPointF(x - 6, mid)]))
            if row.picked is not None:
                x = x0 + row.picked * track_w
                p.setBrush(Qt.BrushStyle.NoBrush)
                p.setPen(QPen(QColor(pal["selected"]), 2.2))
                p.drawEllipse(QPointF(x, mid), 8, 8)
            p.setFont(small)
            p.setPen(muted)
            for pos, text in row.ticks:
                x = x0 + pos * track_w
                p.drawText(QRectF(x - 40, mid + 8, 80, 14), Qt.AlignmentFlag.AlignHCenter, text)
            if row.share is not None:
                w = max(2.0, row.share * (SHARE_W - 40))
                p.setPen(Qt.PenStyle.NoPen)
                p.setBrush(QColor(pal["best"]))
                p.drawRect(QRectF(x1 + 8, mid - 4, w, 8))
                p.setPen(t.foreground)
                p.drawText(QRectF(x1 + 12 + w, y, 40, 22), Qt.AlignmentFlag.AlignVCenter,
                           f"{round(100 * row.share)} %")
        if self.note:
            p.setFont(small)
            p.setPen(muted)
            y = 24 + len(self.rows) * ROW_H + 2
            p.drawText(QRectF(4, y, self.width() - 8, 30), Qt.TextFlag.TextWordWrap, self.note)
        p.end()


class StoryPanel(Panel):
    """Where the good scores live in every searched setting, and what moved the score."""

    clicked = Signal(int)

    def __init__(self, parent=None):
        super().__init__("Where the good scores live", "For each searched setting: the range the search tried, a "
                         "tick per finished trial and a bar over the values of the best quarter of the trials; "
                         "the diamond is the winner, the ring the trial you picked. At the right: the share of "
                         "the score's variation each setting explains (parameter importance), once enough "
                         "trials have finished.", parent, short=" ")
        self.hint.setTextFormat(Qt.TextFormat.RichText)
        self.ranges = GoodRanges()
        self.scroll = QScrollArea()
        self.scroll.setWidgetResizable(True)
        self.scroll.setFrameShape(QScrollArea.Shape.NoFrame)
        self.scroll.setFocusPolicy(Qt.FocusPolicy.NoFocus)
        self.scroll.setWidget(self.ranges)
        self.body.addWidget(self.scroll)
        self.values: dict[str, float] = {}
        self.text = ""
        self._drawn = None

    def picture_widget(self) -> QWidget:
        return self.ranges

    def ensure(self, n: int) -> None:
        """Nothing to make in advance (kept for the window, which calls it while the user edits)."""

    def show_result(self, values: Mapping[str, float] | None, message: str | None) -> None:
        """Set from the importance job: shares (name -> share) or the core's message."""
        self.values = dict(values or {})
        self.text = message or ""
        self._drawn = None

    def importance_note(self, book: TrialBook) -> str:
        done = sum(1 for r in book.records.values() if r.state == "complete")
        if not core.searched_names(book):
            return "Nothing is searched: every setting is fixed."
        if done < MIN_TRIALS_FOR_IMPORTANCE:
            return (f"Too early to say which settings moved the score: {done} finished trial"
                    f"{'s' if done != 1 else ''}, at least {MIN_TRIALS_FOR_IMPORTANCE} are needed.")
        if self.values:
            return (f"Moved the score: the share of the score's variation each setting explains, "
                    f"from {done} finished trials.")
        if self.text.startswith("Parameter importance could not be computed"):
            return "Which settings moved the score could not be worked out from these trials."
        return self.text or "Working out which settings moved the score…"

    def refresh(self, book: TrialBook, changed: set[int], selected: int | None, t: theme.Theme) -> bool:
        key = (book.finished_version, book.structure_version, selected, tuple(self.values.items()), self.text,
               t.background.name())
        if key == self._drawn:
            return False
        self._drawn = key
        pal = colours(t.dark)
        done = sum(1 for r in book.records.values() if r.state == "complete")
        shares = self.values if done >= MIN_TRIALS_FOR_IMPORTANCE else {}
        self.ranges.set_rows(build_rows(book, selected, shares), self.importance_note(book))
        self.hint.setText(
            f"<span style='color:{pal['complete']}'><b>|</b></span>&nbsp;a finished trial&nbsp; "
            f"<span style='color:{pal['good_span']}'><b>▬</b></span>&nbsp;the best quarter&nbsp; "
            f"<span style='color:{pal['milestone']}'><b>◆</b></span>&nbsp;winner&nbsp; "
            f"<span style='color:{pal['selected']}'><b>○</b></span>&nbsp;picked")
        return True
