"""Choosing a stored search to watch: recent storages and a file picker, no URL typed by hand."""

from __future__ import annotations

from pathlib import Path

from PySide6.QtWidgets import (QComboBox, QDialog, QDialogButtonBox, QFileDialog, QHBoxLayout, QLabel,
                               QPushButton, QVBoxLayout)

from labbench.gui.storage_list import masked

MAX_RECENT = 8


def recent_storages(settings) -> list[str]:
    value = settings.value("recent_storages", [])
    if isinstance(value, str):
        value = [value]
    return [str(v) for v in (value or [])]


def remember_storage(settings, url: str) -> None:
    """Kept without a password (the settings file is no place for one)."""
    from labbench.search.spec import without_password

    url = without_password(url)
    urls = [url] + [u for u in recent_storages(settings) if u != url]
    settings.setValue("recent_storages", urls[:MAX_RECENT])


def sqlite_url(path: str) -> str:
    return f"sqlite:///{Path(path).resolve().as_posix()}"


class StorageDialog(QDialog):
    """A combo box of recent storages (editable, for a database server's URL) and "Choose file…"."""

    def __init__(self, settings, start_dir: str, parent=None):
        super().__init__(parent)
        self.setWindowTitle("Watch a stored search")
        self.start_dir = start_dir
        lay = QVBoxLayout(self)
        lay.addWidget(QLabel("A storage file (.db) from a search, or a database server's address:"))
        row = QHBoxLayout()
        self.box = QComboBox()
        self.box.setEditable(True)
        self.box.setMinimumWidth(420)
        for url in recent_storages(settings):
            self.box.addItem(masked(url), url)
        self.box.lineEdit().setPlaceholderText("postgresql+psycopg://user@host/db")
        row.addWidget(self.box, 1)
        pick = QPushButton("Choose file…")
        pick.setToolTip("Pick a SQLite storage file (.db) written by a search")
        pick.clicked.connect(self.choose_file)
        row.addWidget(pick)
        lay.addLayout(row)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok | QDialogButtonBox.StandardButton.Cancel)
        buttons.accepted.connect(self.accept)
        buttons.rejected.connect(self.reject)
        lay.addWidget(buttons)

    def choose_file(self) -> None:
        path, _ = QFileDialog.getOpenFileName(self, "Choose a storage file", self.start_dir,
                                              "Search storage (*.db *.sqlite *.sqlite3);;All files (*)")
        if path:
            url = sqlite_url(path)
            self.box.insertItem(0, masked(url), url)
            self.box.setCurrentIndex(0)

    def url(self) -> str:
        text = self.box.currentText().strip()
        i = self.box.currentIndex()
        if i >= 0 and self.box.itemText(i) == text and self.box.itemData(i):
            return str(self.box.itemData(i))        # the full URL behind a masked one
        if text and "://" not in text and Path(text).suffix.lower() in (".db", ".sqlite", ".sqlite3"):
            return sqlite_url(text)                 # a file path typed or pasted
        return text
