"""The groups and the Hebbian components as tables on paper.

* ``GroupsPanel`` - one column per group (its colour, its size and share of the rows, the label most
  of its rows carry when a label column is named) and one row per input column: the group's mean
  in the column's own units (a categorical column: its most frequent value and that share). A
  cell is tinted amber when the group sits above all rows' mean, slate blue below (by how many
  standard deviations), so a group's profile reads at a glance.
* ``ComponentsPanel`` - the weights of each learned Hebbian component per scaled input column,
  tinted the same way (amber positive, slate negative).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from PySide6.QtCore import Qt
from PySide6.QtGui import QBrush, QColor
from PySide6.QtWidgets import QAbstractItemView, QHeaderView, QTableWidget, QTableWidgetItem

from labbench.gui import map_numbers as mn
from labbench.gui import theme
from labbench.gui.map_views import ink_on, mix, swatch
from labbench.gui.panel import Panel
from labbench.gui.words import num
from labbench.palette import colours

MAX_GROUPS = 12         # the largest groups get a column; the note says how many are left out


def _table() -> QTableWidget:
    t = QTableWidget(0, 0)
    t.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
    t.setSelectionMode(QAbstractItemView.SelectionMode.NoSelection)
    t.setAlternatingRowColors(False)
    t.setShowGrid(True)
    t.verticalHeader().setDefaultSectionSize(22)
    t.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
    t.verticalHeader().setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
    t.setMinimumSize(240, 140)
    font = t.font()
    font.setPointSizeF(font.pointSizeF() * 0.92)      # a dense sheet of numbers, like the notebook's
    t.setFont(font)
    return t


def _cell(text: str, fill: QColor | None = None, tip: str = "", right: bool = True) -> QTableWidgetItem:
    item = QTableWidgetItem(text)
    if fill is not None:
        item.setBackground(QBrush(fill))
        item.setForeground(QBrush(ink_on(fill)))
    if tip:
        item.setToolTip(tip)
    if right:
        item.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
    return item


def tint(z: float | None, dark: bool) -> QColor | None:
    """Amber above the middle, slate blue below, paper at it; full colour at 2 standard deviations."""
    if z is None or not np.isfinite(z):
        return None
    c = colours(dark)
    return mix(c["paper"], c["running"] if z > 0 else c["pruned"], min(1.0, abs(z) / 2.0) * 0.85)


class GroupsPanel(Panel):
    def __init__(self):
        super().__init__("The groups", "Each group's size and, for every input column, its mean in the "
                         "column's own units (a text column: its most frequent value). Amber cells lie above "
                         "the mean of all rows, slate blue below; the stronger, the further (full colour at "
                         "two standard deviations). A label column, never used in training, shows which "
                         "value most of a group's rows carry.", short=" ")
        self.hint.setTextFormat(Qt.TextFormat.RichText)
        self.table = _table()
        self.body.addWidget(self.table)
        self.order: list[int] = []

    def show_data(self, data: mn.MapData) -> None:
        rec = data.record
        t = theme.Theme.current()
        _unit, group, _d = data.assignment()
        g_all = rec.n_groups
        sizes = mn.group_sizes(group, g_all)
        self.order = [int(g) for g in np.argsort(-sizes, kind="stable")[:MAX_GROUPS]]
        cols = mn.group_colours(g_all, t.dark)
        profiles = mn.group_profiles(data.frame, group, g_all, data.kinds)
        mix_rows = mn.label_mix(data.label, group, g_all) if data.label is not None else None
        tab = self.table
        tab.clear()
        heads = ["all rows"] + [f"group {g + 1}" for g in self.order]
        tab.setColumnCount(len(heads))
        tab.setHorizontalHeaderLabels(heads)
        for j, g in enumerate(self.order, start=1):
            tab.horizontalHeaderItem(j).setForeground(QBrush(QColor(cols[g])))
        names = ["rows"] + ([f"{data.label_name or 'label'} (label)"] if mix_rows else []) + \
            [p["column"] for p in profiles]
        tab.setRowCount(len(names))
        tab.setVerticalHeaderLabels(names)
        if mix_rows:
            tab.verticalHeaderItem(1).setToolTip("The label column: shown beside the groups, never used in training")
        n = max(1, len(group))
        tab.setItem(0, 0, _cell(f"{len(group):,}"))
        paper = colours(t.dark)["paper"]
        for j, g in enumerate(self.order, start=1):
            share = sizes[g] / n
            tab.setItem(0, j, _cell(f"{sizes[g]:,} ({share * 100:.0f} %)", mix(paper, cols[g], 0.25 + 0.6 * share)))
        r = 1
        if mix_rows:
            lab = pd.Series(np.asarray(data.label, dtype=object)).astype("string").dropna()
            top = lab.value_counts()
            tab.setItem(r, 0, _cell(f"{top.index[0]} ({top.iloc[0] / max(1, len(lab)) * 100:.0f} %)" if len(top) else "—"))
            for j, g in enumerate(self.order, start=1):
                m = mix_rows[g]
                tab.setItem(r, j, _cell("—" if m is None else f"{m[0]} ({m[1] * 100:.0f} %)"))
            r += 1
        for p in profiles:
            self._profile_row(r, p, data.frame[p["column"]], group, t.dark)
            r += 1
        left = g_all - len(self.order)
        shown = "&nbsp; ".join(swatch(cols[g], f"group {g + 1}") for g in self.order[:8])
        if data.ungrouped:
            self.hint.setText(f"every unit is its own group (groups = 0); the {len(self.order)} busiest units")
        else:
            self.hint.setText(f"{g_all} groups" + (f"; the {len(self.order)} largest shown" if left else "")
                              + (f" &nbsp;{shown}" if g_all <= 8 else ""))

    def _profile_row(self, r: int, p: dict, column: pd.Series, group: np.ndarray, dark: bool) -> None:
        tab = self.table
        if p["kind"] == "numeric":
            v = pd.to_numeric(column, errors="coerce").to_numpy(dtype=np.float64)
            sd = float(np.nanstd(v)) if np.isfinite(v).any() else 0.0
            tab.setItem(r, 0, _cell(num(p["all"])))
            for j, g in enumerate(self.order, start=1):
                m = p["groups"][g]
                z = None if m is None or sd == 0 else (m - p["all"]) / sd
                tip = "" if z is None else f"{num(z, 2)} standard deviations from all rows' mean"
                tab.setItem(r, j, _cell("—" if m is None else num(m), tint(z, dark), tip))
        else:
            tab.setItem(r, 0, _cell(str(p["all"]), right=False))
            for j, g in enumerate(self.order, start=1):
                m, s = p["groups"][g], p["share"][g]
                tab.setItem(r, j, _cell("—" if m is None else f"{m} ({s * 100:.0f} %)", right=False))

    def cell_text(self, row_name: str, column: int) -> str:
        for r in range(self.table.rowCount()):
            if self.table.verticalHeaderItem(r).text() == row_name:
                item = self.table.item(r, column)
                return item.text() if item is not None else ""
        raise KeyError(row_name)


class ComponentsPanel(Panel):
    def __init__(self):
        super().__init__("The learned components", "The weight of every scaled input column in each component "
                         "the Hebbian rule learned (Oja's rule for one, Sanger's for several). Amber weights "
                         "are positive, slate negative; a column with weights near 0 hardly moves that component.",
                         short=" ")
        self.hint.setTextFormat(Qt.TextFormat.RichText)
        self.table = _table()
        self.body.addWidget(self.table)

    def show_data(self, data: mn.MapData) -> None:
        rec = data.record
        W = np.asarray(rec.components)
        t = theme.Theme.current()
        tab = self.table
        tab.clear()
        tab.setColumnCount(W.shape[0])
        tab.setHorizontalHeaderLabels([f"component {i + 1}" for i in range(W.shape[0])])
        tab.setRowCount(W.shape[1])
        tab.setVerticalHeaderLabels(list(data.names))
        top = float(np.abs(W).max()) or 1.0
        for i in range(W.shape[0]):
            for j in range(W.shape[1]):
                w = float(W[i, j])
                tab.setItem(j, i, _cell(f"{w:+.3f}", tint(2.0 * w / top, t.dark)))
        gram = W @ W.T
        off = float(np.abs(gram - np.eye(len(gram))).max()) if len(gram) else 0.0
        rule = {"oja": "Oja's rule", "sanger": "Sanger's rule", "hebb": "the plain Hebbian rule"}.get(
            getattr(rec, "rule", ""), "a Hebbian rule")
        self.hint.setText(f"{rule}; W·Wᵀ within {num(off, 2)} of the identity")
