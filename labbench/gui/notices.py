"""What the search has to say, in the window: a trial that failed and why, a worker that stopped,
a fold too small, a space with nothing searched. Shown in a strip under the pages (a dock the
window remembers), one line each with the time; nothing here is only in the terminal.
"""

from __future__ import annotations

import time

from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (QDockWidget, QHBoxLayout, QLabel, QListWidget, QListWidgetItem,
                               QPushButton, QVBoxLayout, QWidget)

MAX_LINES = 500


class NoticeList(QWidget):
    added = Signal(str)

    def __init__(self, parent=None):
        super().__init__(parent)
        lay = QVBoxLayout(self)
        lay.setContentsMargins(4, 2, 4, 2)
        top = QHBoxLayout()
        self.summary = QLabel("No notices from the search.")
        self.summary.setObjectName("noticeSummary")
        top.addWidget(self.summary, 1)
        self.clear_button = QPushButton("Clear")
        self.clear_button.setToolTip("Remove the notices shown here (the log file keeps them)")
        self.clear_button.clicked.connect(self.clear)
        top.addWidget(self.clear_button)
        lay.addLayout(top)
        self.list = QListWidget()
        self.list.setObjectName("noticeList")
        self.list.setWordWrap(True)
        self.list.setFocusPolicy(Qt.FocusPolicy.TabFocus)
        lay.addWidget(self.list, 1)
        self.warnings = 0

    def add(self, text: str, level: str = "warning") -> None:
        mark = "⚠" if level == "warning" else "ℹ"
        item = QListWidgetItem(f"{time.strftime('%H:%M:%S')}  {mark}  {text}")
        item.setToolTip(text)
        self.list.addItem(item)
        while self.list.count() > MAX_LINES:
            self.list.takeItem(0)
        self.list.scrollToBottom()
        self.warnings += level == "warning"
        n = self.list.count()
        self.summary.setText(f"{n} notice{'s' if n != 1 else ''} from the search"
                             + (f", {self.warnings} to look at" if self.warnings else ""))
        self.added.emit(text)

    def texts(self) -> list[str]:
        return [self.list.item(i).toolTip() for i in range(self.list.count())]

    def clear(self) -> None:
        self.list.clear()
        self.warnings = 0
        self.summary.setText("No notices from the search.")


def make_dock(window) -> tuple[QDockWidget, NoticeList]:
    """The strip as a dock under the pages; it shows itself on the first warning."""
    notes = NoticeList()
    dock = QDockWidget("Notices", window)
    dock.setObjectName("noticeDock")
    dock.setWidget(notes)
    dock.setFeatures(QDockWidget.DockWidgetFeature.DockWidgetClosable
                     | QDockWidget.DockWidgetFeature.DockWidgetMovable)
    window.addDockWidget(Qt.DockWidgetArea.BottomDockWidgetArea, dock)
    dock.hide()
    notes.added.connect(lambda _t: dock.show())
    return dock, notes
