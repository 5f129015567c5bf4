"""One column at a glance: missing share, distinct values, a small histogram and its flags.

The numbers come from ``labbench.data.profile`` (computed off the GUI thread); this only draws.
"""

from __future__ import annotations

from PySide6.QtCore import QRectF, Qt
from PySide6.QtGui import QPainter, QPalette
from PySide6.QtWidgets import QGroupBox, QHBoxLayout, QLabel, QVBoxLayout, QWidget


class Bars(QWidget):
    """A histogram as plain bars (numbers: bins left to right; text: the most frequent values)."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.counts: tuple[int, ...] = ()
        self.labels: tuple[str, ...] = ()
        self.setMinimumSize(160, 70)
        self.setMouseTracking(True)

    def set_bars(self, counts, labels) -> None:
        self.counts, self.labels = tuple(counts), tuple(labels)
        tip = "\n".join(f"{lab}: {c:,}" for lab, c in zip(self.labels, self.counts))
        self.setToolTip(tip)
        self.update()

    def paintEvent(self, _event) -> None:
        p = QPainter(self)
        p.setRenderHint(QPainter.RenderHint.Antialiasing)
        r = self.rect().adjusted(2, 2, -2, -2)
        axis = self.palette().color(QPalette.ColorRole.Mid)
        p.setPen(axis)
        p.drawLine(r.bottomLeft(), r.bottomRight())
        if not self.counts:
            return
        top = max(self.counts) or 1
        n = len(self.counts)
        w = r.width() / n
        colour = self.palette().color(QPalette.ColorRole.Highlight)
        p.setPen(Qt.PenStyle.NoPen)
        p.setBrush(colour)
        for i, c in enumerate(self.counts):
            h = (r.height() - 2) * c / top
            p.drawRect(QRectF(r.left() + i * w + 1, r.bottom() - h, max(1.0, w - 2), h))


class ProfileView(QGroupBox):
    def __init__(self, parent=None):
        super().__init__("Column profile", parent)
        lay = QHBoxLayout(self)
        lay.setContentsMargins(6, 4, 6, 4)
        text = QVBoxLayout()
        self.title = QLabel("Pick a column to see its profile.")
        self.title.setObjectName("profileTitle")
        self.facts = QLabel("")
        self.facts.setWordWrap(True)
        self.flags = QLabel("")
        self.flags.setWordWrap(True)
        self.flags.setObjectName("profileFlags")
        for w in (self.title, self.facts, self.flags):
            w.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
            text.addWidget(w)
        text.addStretch(1)
        lay.addLayout(text, 3)
        self.bars = Bars()
        lay.addWidget(self.bars, 2)
        self.setFixedHeight(112)
        self.shown: str | None = None

    def show_profile(self, p) -> None:
        if p is None:
            self.shown = None
            self.title.setText("Pick a column to see its profile.")
            self.facts.setText("")
            self.flags.setText("")
            self.bars.set_bars((), ())
            return
        self.shown = p.name
        self.title.setText(f"<b>{p.name}</b> · {p.kind}")
        self.facts.setText(f"{p.missing_share:.1%} missing · {p.distinct:,} different value"
                           f"{'' if p.distinct == 1 else 's'}")
        self.flags.setText("; ".join(f"⚑ {f}: {w}" for f, w in zip(p.flags, p.why)) or "no flags")
        self.bars.set_bars(p.counts, p.labels)
