"""The "check before Start" box of the data page: each trap with its reason and one-click remedies.

The traps come from ``labbench.data.profile.find_traps`` (the command line's rules); this widget
only shows them. Its height is fixed, so a trap appearing never moves the rows under the mouse.
"""

from __future__ import annotations

from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (QFrame, QGridLayout, QGroupBox, QLabel, QPushButton, QScrollArea,
                               QSizePolicy, QVBoxLayout, QWidget)

HEIGHT = 120


class TrapList(QGroupBox):
    remedy = Signal(object)          # the ``change`` dict of the remedy pressed

    def __init__(self, parent=None):
        super().__init__("Check before Start", parent)
        self.setObjectName("trapBox")
        outer = QVBoxLayout(self)
        outer.setContentsMargins(6, 4, 6, 4)
        self.scroll = QScrollArea()
        self.scroll.setWidgetResizable(True)
        self.scroll.setFrameShape(QFrame.Shape.NoFrame)
        self.scroll.setFixedHeight(HEIGHT)
        self.scroll.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        outer.addWidget(self.scroll)
        self.inner = QWidget()
        self.rows = QVBoxLayout(self.inner)
        self.rows.setContentsMargins(0, 0, 0, 0)
        self.rows.setSpacing(6)
        self.scroll.setWidget(self.inner)
        self.traps: list = []
        self.buttons: list[QPushButton] = []
        self.show_traps([], waiting=True)

    def show_traps(self, traps, *, waiting: bool = False) -> None:
        self.traps = list(traps)
        self.buttons = []
        while self.rows.count():
            item = self.rows.takeAt(0)
            if item.widget() is not None:
                item.widget().deleteLater()
        if not traps:
            text = ("Open a table to check it." if waiting else
                    "Nothing found: no id-like column, no stray text, no column that gives the answer away.")
            quiet = QLabel(text)
            quiet.setWordWrap(True)
            quiet.setObjectName("trapNone")
            self.rows.addWidget(quiet)
        for trap in traps:
            card = QFrame()
            card.setObjectName("trapCard")
            lay = QVBoxLayout(card)
            lay.setContentsMargins(4, 2, 4, 2)
            lay.setSpacing(2)
            reason = QLabel(f"<b>{trap.kind.capitalize()}</b> — {trap.reason}")
            reason.setWordWrap(True)
            reason.setTextFormat(Qt.TextFormat.RichText)
            lay.addWidget(reason)
            line = QGridLayout()          # two buttons a row: a narrow side panel never clips one
            line.setContentsMargins(0, 0, 0, 0)
            row = col = 0
            for r in trap.remedies:
                b = QPushButton(r.label)
                b.setToolTip(f"{r.label} (changes the data settings; Start uses them)")
                b.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Fixed)
                b.clicked.connect(lambda _c=False, ch=r.change: self.remedy.emit(dict(ch)))
                if len(r.label) > 24:           # a long label gets a row of its own
                    if col:
                        row, col = row + 1, 0
                    line.addWidget(b, row, 0, 1, 2)
                    row += 1
                else:
                    line.addWidget(b, row, col)
                    row, col = (row + 1, 0) if col else (row, 1)
                self.buttons.append(b)
            lay.addLayout(line)
            self.rows.addWidget(card)
        self.rows.addStretch(1)
        self.setTitle(f"Check before Start ({len(traps)})" if traps else "Check before Start")
