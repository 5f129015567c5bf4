"""The table of all trials: sortable, filterable by state, exportable as CSV."""

from __future__ import annotations

import csv
from pathlib import Path
from typing import Any

from PySide6.QtCore import (QAbstractTableModel, QModelIndex, QSortFilterProxyModel, Qt, Signal)
from PySide6.QtGui import QBrush
from PySide6.QtWidgets import (QAbstractItemView, QComboBox, QHBoxLayout, QHeaderView, QLabel,
                               QTableView, QVBoxLayout, QWidget)

from labbench.gui import core, theme
from labbench.gui.trialbook import TrialBook, TrialRecord
from labbench.numbers import number
from labbench.search import states

SORT_ROLE = Qt.ItemDataRole.UserRole + 1
_W = states.WORDS          # the one table of state words
FILTERS = [("every state", None), (_W["complete"], {"complete"}), (_W["pruned"], {"pruned"}),
           (f"{_W['failed']} or {_W['cancelled']}", {"failed", "cancelled"}),
           (f"{_W['running']} now", {"running", "waiting"})]


def _fmt(v: float | None, digits: int = 4) -> str:
    return number(v, digits, missing="")      # the one number format (labbench.numbers)


class TrialsModel(QAbstractTableModel):
    BASE = ["Trial", "State", "Score", "± std", "Epochs", "Seconds"]

    def __init__(self, parent=None):
        super().__init__(parent)
        self.rows: list[TrialRecord] = []
        self.params: list[str] = []
        self.best: int | None = None
        self._columns = list(self.BASE) + ["Why it stopped"]
        self.structure_changed = False

    def columns(self) -> list[str]:
        return self._columns

    def update_from(self, book: TrialBook, changed: set[int] | None = None) -> None:
        """Follow the book: new trials are inserted, changed ones repainted, never a full reset
        unless the searched settings (the columns) change."""
        params = core.searched_names(book)
        rows = book.ordered()
        old_best, self.best = self.best, book.best_number
        if params != self.params or len(rows) < len(self.rows) or \
                [r.number for r in rows[:len(self.rows)]] != [r.number for r in self.rows]:
            self.beginResetModel()
            self.params = params
            self._columns = self.BASE + [core.param_label(p) for p in params] + ["Why it stopped"]
            self.rows = rows
            self.endResetModel()
            self.structure_changed = True
            return
        if len(rows) > len(self.rows):
            self.beginInsertRows(QModelIndex(), len(self.rows), len(rows) - 1)
            self.rows = rows
            self.endInsertRows()
        self.rows = rows
        if not rows:
            return
        last = self.columnCount() - 1
        if changed is None:
            self.dataChanged.emit(self.index(0, 0), self.index(len(rows) - 1, last))
            return
        where = {r.number: i for i, r in enumerate(rows)}
        for number in set(changed) | {old_best, self.best}:
            i = where.get(number)
            if i is not None:
                self.dataChanged.emit(self.index(i, 0), self.index(i, last))

    def rowCount(self, parent=QModelIndex()) -> int:
        return 0 if parent.isValid() else len(self.rows)

    def columnCount(self, parent=QModelIndex()) -> int:
        return 0 if parent.isValid() else len(self.columns())

    def headerData(self, section, orientation, role=Qt.ItemDataRole.DisplayRole):
        if role == Qt.ItemDataRole.DisplayRole and orientation == Qt.Orientation.Horizontal:
            return self.columns()[section]
        return None

    def raw(self, rec: TrialRecord, col: int) -> Any:
        n = len(self.BASE)
        if col == 0:
            return rec.number
        if col == 1:
            return rec.state
        if col == 2:
            return rec.value
        if col == 3:
            return rec.cv_std
        if col == 4:
            return len(rec.epochs)
        if col == 5:
            return round(rec.duration_s, 2) if rec.duration_s else None
        if col < n + len(self.params):
            return rec.params.get(self.params[col - n])
        return rec.reason

    def data(self, index: QModelIndex, role=Qt.ItemDataRole.DisplayRole):
        if not index.isValid():
            return None
        rec, col = self.rows[index.row()], index.column()
        value = self.raw(rec, col)
        if role == Qt.ItemDataRole.DisplayRole:
            if col == 1:
                word = theme.STATE_WORDS.get(rec.state, rec.state)
                return word + (" · winner" if rec.number == self.best else "")
            if col == 4 and rec.epochs_total:
                return f"{value} / {rec.epochs_total}"
            if isinstance(value, float):
                return _fmt(value)
            return "" if value is None else str(value)
        if role == SORT_ROLE:
            if value is None:
                return float("-inf")
            return value if isinstance(value, (int, float)) else str(value)
        if role == Qt.ItemDataRole.ForegroundRole and col == 1:
            name = "best" if rec.number == self.best else rec.state
            return QBrush(theme.state_colour(name))
        if role == Qt.ItemDataRole.TextAlignmentRole and isinstance(value, (int, float)) and col != 1:
            return int(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
        if role == Qt.ItemDataRole.ToolTipRole and col == len(self.columns()) - 1 and rec.reason:
            return rec.reason
        return None


class StateFilter(QSortFilterProxyModel):
    def __init__(self, parent=None):
        super().__init__(parent)
        self.states: set[str] | None = None
        self.setSortRole(SORT_ROLE)

    def set_states(self, states: set[str] | None) -> None:
        self.beginFilterChange()
        self.states = states
        self.endFilterChange()

    def filterAcceptsRow(self, row: int, parent: QModelIndex) -> bool:
        if self.states is None:
            return True
        model: TrialsModel = self.sourceModel()
        return model.rows[row].state in self.states


class TrialsTable(QWidget):
    """Table + state filter; ``picked`` carries the trial number of the selected row."""

    picked = Signal(object)   # int or None

    def __init__(self, parent=None):
        super().__init__(parent)
        lay = QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        head = QHBoxLayout()
        self.count = QLabel("")
        self.count.setObjectName("panelHint")
        head.addWidget(self.count, 1)
        head.addWidget(QLabel("Show"))
        self.filter_box = QComboBox()
        for label, _s in FILTERS:
            self.filter_box.addItem(label)
        self.filter_box.setToolTip("Show only the trials in one state")
        self.filter_box.setAccessibleName("Trial state filter")
        head.addWidget(self.filter_box)
        lay.addLayout(head)
        self.model = TrialsModel(self)
        self.proxy = StateFilter(self)
        self.proxy.setSourceModel(self.model)
        self.view = QTableView()
        self.view.setModel(self.proxy)
        self.view.setSortingEnabled(True)
        self.view.sortByColumn(0, Qt.SortOrder.AscendingOrder)
        self.view.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.view.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        self.view.setAlternatingRowColors(True)
        self.view.setTabKeyNavigation(False)      # Tab leaves the table; arrows move inside it
        self.view.setAccessibleName("Trials table")
        self.view.verticalHeader().hide()
        self.view.verticalHeader().setDefaultSectionSize(22)
        self.view.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Interactive)
        self.view.horizontalHeader().setStretchLastSection(True)
        lay.addWidget(self.view)
        self.filter_box.currentIndexChanged.connect(lambda i: self.proxy.set_states(FILTERS[i][1]))
        self.view.selectionModel().selectionChanged.connect(self._selection)
        self.model.modelReset.connect(self._after_reset)
        self._selected: int | None = None

    def _after_reset(self) -> None:
        if self._selected is not None:
            self.select(self._selected, emit=False)

    def refresh(self, book: TrialBook, changed: set[int] | None = None) -> None:
        fresh = not self.model.rows
        self.model.update_from(book, changed)
        if self.model.structure_changed or (fresh and self.model.rows):
            # sized once per set of columns, from the header words (sizing to contents lays
            # out every cell and costs tens of milliseconds)
            self.model.structure_changed = False
            fm = self.view.horizontalHeader().fontMetrics()
            for col, name in enumerate(self.model.columns()[:-1]):
                self.view.setColumnWidth(col, max(64, fm.horizontalAdvance(name) + 28,
                                                  fm.horizontalAdvance("finished · winner") + 16 if col == 1 else 0))
        counts: dict[str, int] = {}
        for r in book.records.values():
            counts[r.state] = counts.get(r.state, 0) + 1
        parts = [f"{n} {theme.STATE_WORDS.get(s, s)}" for s, n in sorted(counts.items())]
        self.count.setText(" · ".join(parts))

    def _selection(self, *_a) -> None:
        rows = self.view.selectionModel().selectedRows()
        if not rows:
            self._selected = None
            self.picked.emit(None)
            return
        src = self.proxy.mapToSource(rows[0])
        self._selected = self.model.rows[src.row()].number
        self.picked.emit(self._selected)

    def select(self, number: int | None, emit: bool = True) -> None:
        """Select the row of a trial (e.g. after a click in a plot)."""
        self._selected = number
        sm = self.view.selectionModel()
        if number is None:
            sm.clearSelection()
            return
        for i, rec in enumerate(self.model.rows):
            if rec.number == number:
                idx = self.proxy.mapFromSource(self.model.index(i, 0))
                if idx.isValid():
                    if not emit:
                        sm.blockSignals(True)
                    self.view.selectRow(idx.row())
                    self.view.scrollTo(idx)
                    sm.blockSignals(False)
                return

    def export_csv(self, path: str | Path) -> Path:
        """Every trial (not only the shown ones), raw values, one row per trial."""
        path = Path(path)
        m = self.model
        headers = ["trial", "state", "score", "cv_std", "epochs_run", "duration_s"] + list(m.params) + ["note"]
        with path.open("w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(headers)
            for rec in m.rows:
                row = [m.raw(rec, c) for c in range(len(headers))]
                w.writerow(["" if v is None else v for v in row])
        return path
