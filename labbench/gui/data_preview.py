"""The data page's preview of the file: the first rows, headers showing each column's name, kind
and role (target, label, ignored)."""

from __future__ import annotations

from typing import Any, Mapping

import pandas as pd
from PySide6.QtCore import QAbstractTableModel, QModelIndex, Qt
from PySide6.QtGui import QPalette

PREVIEW_ROWS = 200


class PreviewModel(QAbstractTableModel):
    """The first rows of the file, headers showing each column's name and kind."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.frame = pd.DataFrame()
        self.kinds: dict[str, str] = {}
        self.roles: dict[str, str] = {}
        self.text: list[list[str]] = []          # the shown cells, made once per file
        self.names: list[str] = []
        self.dim = QPalette().color(QPalette.ColorGroup.Disabled, QPalette.ColorRole.Text)

    def set_frame(self, frame: pd.DataFrame, kinds: Mapping[str, str]) -> None:
        self.beginResetModel()
        self.frame = frame.head(PREVIEW_ROWS)
        self.kinds = dict(kinds)
        self.names = [str(c) for c in self.frame.columns]
        missing = self.frame.isna().to_numpy()
        cells = self.frame.astype(str).to_numpy()
        cells[missing] = ""
        self.text = cells.tolist()
        self.endResetModel()

    def widths(self, metrics, limit: int = 260) -> list[int]:
        """Column widths from the longest shown text (instead of asking every cell)."""
        out = []
        for j, name in enumerate(self.names):
            longest = max((row[j] for row in self.text), key=len, default="")
            head = max(name, f"{self.kinds.get(name, '')} · ignored", key=len)
            out.append(min(limit, max(metrics.horizontalAdvance(longest), metrics.horizontalAdvance(head)) + 18))
        return out

    def set_roles(self, roles: Mapping[str, str]) -> None:
        self.roles = dict(roles)
        if self.frame.shape[1]:
            self.headerDataChanged.emit(Qt.Orientation.Horizontal, 0, self.frame.shape[1] - 1)
            self.dataChanged.emit(self.index(0, 0), self.index(self.rowCount() - 1, self.columnCount() - 1))

    def rowCount(self, parent=QModelIndex()) -> int:
        return 0 if parent.isValid() else len(self.frame)

    def columnCount(self, parent=QModelIndex()) -> int:
        return 0 if parent.isValid() else self.frame.shape[1]

    def data(self, index: QModelIndex, role: int = Qt.ItemDataRole.DisplayRole) -> Any:
        if not index.isValid():
            return None
        if role == Qt.ItemDataRole.DisplayRole:
            return self.text[index.row()][index.column()]
        col = self.names[index.column()]
        if role == Qt.ItemDataRole.TextAlignmentRole and self.kinds.get(col) == "numeric":
            return int(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
        if role == Qt.ItemDataRole.ForegroundRole and self.roles.get(col) == "ignored":
            return self.dim
        if role == Qt.ItemDataRole.ToolTipRole and self.text[index.row()][index.column()] == "":
            return "missing value"
        return None

    def headerData(self, section: int, orientation: Qt.Orientation, role: int = Qt.ItemDataRole.DisplayRole):
        if role != Qt.ItemDataRole.DisplayRole:
            return None
        if orientation == Qt.Orientation.Vertical:
            return str(section + 1)
        col = str(self.frame.columns[section])
        role_word = self.roles.get(col, "")
        tail = {"target": " · target", "label": " · label", "ignored": " · ignored"}.get(role_word, "")
        return f"{col}\n{self.kinds.get(col, '')}{tail}"
