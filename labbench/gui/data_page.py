"""Step 1 — the data: open a CSV, preview its first rows, say what to predict and from what."""

from __future__ import annotations

from pathlib import Path
from typing import Mapping

import pandas as pd
from PySide6.QtCore import Qt, QTimer, Signal
from PySide6.QtWidgets import (QAbstractItemView, QCheckBox, QComboBox, QFormLayout, QGroupBox,
                               QHBoxLayout, QHeaderView, QLabel, QLineEdit, QPushButton, QScrollArea, QSplitter,
                               QTableView, QTableWidget, QTableWidgetItem, QVBoxLayout, QWidget)

from labbench.gui import core, theme
from labbench.gui.bridge import Background
from labbench.gui.data_checks import ChecksMixin
from labbench.gui.data_spec import AUTO, NO_LABEL, NO_TARGET, SpecSectionMixin
from labbench.gui.data_preview import PREVIEW_ROWS, PreviewModel
from labbench.gui.profile import ProfileView
from labbench.gui.traps import TrapList

from labbench.nets.metrics import UNSUPERVISED  # Table.task of a table without a target
CHECK_DELAY_MS = 150     # the profile and the traps are recomputed this long after the last change
TARGET_SCALINGS = ("standard", "log", "none")


class DataPage(SpecSectionMixin, ChecksMixin, QWidget):
    """Reads the file with ``labbench.data.read_csv`` and asks the core for kinds and task."""

    changed = Signal()
    open_requested = Signal()
    target_mode = Signal(bool)     # the user chose a target (True) or "no target" (False)

    def __init__(self, parent=None):
        super().__init__(parent)
        self.path: str | None = None
        self.frame: pd.DataFrame | None = None
        self.inferred_kinds: dict[str, str] = {}
        self.inferred_task: str | None = None
        self.task_error = ""
        self.family = "network"        # the space page's model family: it decides the metrics offered
        self.read_warnings: list[str] = []
        self._explicit_kinds: set[str] = set()
        self._loading = False
        # [data] keys without a field of their own, carried through a rebuilt spec
        self.keep: list[str] = []
        self.thousands: str | None = None
        self.decimal: str | None = None
        self.markers: list[str] = []          # the missing markers the file was read with
        self.profiles: dict = {}
        self.traps: list = []
        self.checks = Background(self)
        self.checks.done.connect(self._checked)
        self._check_timer = QTimer(self)
        self._check_timer.setSingleShot(True)
        self._check_timer.setInterval(CHECK_DELAY_MS)
        self._check_timer.timeout.connect(self._check_now)
        self._check_serial = 0

        outer = QVBoxLayout(self)
        top = QHBoxLayout()
        self.open_button = QPushButton(theme.icon("open"), "Open CSV…")
        self.open_button.setToolTip("Choose a CSV file (you can also drop one onto the window)")
        self.open_button.clicked.connect(self.open_requested)
        top.addWidget(self.open_button)
        self.file_label = QLabel("No table yet: open a CSV file or drop one here.")
        self.file_label.setObjectName("fileLabel")
        self.file_label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        top.addWidget(self.file_label, 1)
        outer.addLayout(top)

        split = QSplitter(Qt.Orientation.Horizontal)
        self.preview = QTableView()
        self.preview_model = PreviewModel(self)
        self.preview.setModel(self.preview_model)
        self.preview.setAlternatingRowColors(True)
        self.preview.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectColumns)
        self.preview.horizontalHeader().setDefaultAlignment(Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignVCenter)
        self.preview.verticalHeader().setDefaultSectionSize(22)
        self.preview.setToolTip(f"The first {PREVIEW_ROWS} rows of the file, as read")
        left = QWidget()
        left_layout = QVBoxLayout(left)
        left_layout.setContentsMargins(0, 0, 0, 0)
        left_layout.addWidget(self.preview, 1)
        self.profile = ProfileView()
        left_layout.addWidget(self.profile)
        split.addWidget(left)

        side = QWidget()
        side_layout = QVBoxLayout(side)
        side_layout.setContentsMargins(0, 0, 0, 0)
        goal = QGroupBox("What to learn")
        form = QFormLayout(goal)
        self.target_box = QComboBox()
        self.target_box.setToolTip("The column the network learns to predict, or no target: the map and "
                                   "group families then find groups in the rows")
        self.label_box = QComboBox()
        self.label_box.setToolTip("Without a target: a column shown beside the groups (how they line up "
                                  "with it); never an input, never used in training")
        self.label_box.setAccessibleName("Label column shown beside the groups")
        self.task_box = QComboBox()
        self.task_box.setToolTip("Regression predicts a number; binary and multiclass predict a class label")
        self.metric_box = QComboBox()
        self.metric_box.setToolTip("The score every trial is judged by, averaged over the folds")
        self.missing_box = QComboBox()
        self.missing_box.addItems(["impute", "drop"])
        self.missing_box.setToolTip("Fill missing feature values (median or most frequent, learned per fold) or drop those rows")
        self.scaling_box = QComboBox()
        self.scaling_box.addItems(["standard", "minmax"])
        self.scaling_box.setToolTip("How numeric columns are scaled: to mean 0 and spread 1, or into 0…1")
        self.target_scaling_box = QComboBox()
        self.target_scaling_box.addItems(list(TARGET_SCALINGS))
        self.target_scaling_box.setToolTip("Regression only: how the target is scaled while training "
                                           "(log for positive amounts spread over many magnitudes)")
        self.markers_edit = QLineEdit()
        self.markers_edit.setPlaceholderText("e.g. n/a, unknown, -")
        self.markers_edit.setToolTip("Cells holding one of these words (comma separated) are read as "
                                     "missing, besides empty cells and the usual NA markers")
        form.addRow("Target column", self.target_box)
        form.addRow("Label column", self.label_box)
        form.addRow("Task", self.task_box)
        form.addRow("Score by", self.metric_box)
        form.addRow("Missing values", self.missing_box)
        form.addRow("Also missing", self.markers_edit)
        form.addRow("Scaling", self.scaling_box)
        form.addRow("Target scaling", self.target_scaling_box)
        self.task_note = QLabel("")
        self.task_note.setWordWrap(True)
        self.task_note.setObjectName("errorText")
        # the space is kept whether or not there is a message: nothing below moves
        self.task_note.setFixedHeight(2 * self.task_note.fontMetrics().lineSpacing() + 4)
        form.addRow(self.task_note)
        side_layout.addWidget(goal)
        self.trap_list = TrapList()
        self.trap_list.remedy.connect(self.apply_remedy)
        side_layout.addWidget(self.trap_list)

        cols = QGroupBox("Columns used as inputs")
        cols_layout = QVBoxLayout(cols)
        self.columns = QTableWidget(0, 4)
        self.columns.setHorizontalHeaderLabels(["Column", "Kind", "Use", "Flags"])
        self.columns.verticalHeader().hide()
        self.columns.horizontalHeader().setSectionResizeMode(0, QHeaderView.ResizeMode.Stretch)
        self.columns.setToolTip("Untick a column to leave it out (an id, a leak of the answer); "
                                "change a kind when numbers are really labels")
        cols_layout.addWidget(self.columns)
        self.column_notes = QLabel("")      # the core's notices: columns left out, reading warnings
        self.column_notes.setWordWrap(True)
        self.column_notes.setObjectName("columnNotes")
        self.column_notes.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        cols_layout.addWidget(self.column_notes)
        side_layout.addWidget(cols, 1)
        self.columns.currentCellChanged.connect(lambda row, *_a: self._show_profile_row(row))
        self.preview.horizontalHeader().sectionClicked.connect(self._show_profile_section)
        side_scroll = QScrollArea()          # fits a 768-pixel screen: the side scrolls, never clips
        side_scroll.setWidgetResizable(True)
        side_scroll.setFrameShape(QScrollArea.Shape.NoFrame)
        side.setMinimumHeight(560)
        side_scroll.setWidget(side)
        split.addWidget(side_scroll)
        split.setStretchFactor(0, 3)
        split.setStretchFactor(1, 2)
        outer.addWidget(split, 1)

        self.target_box.currentTextChanged.connect(self._target_changed)
        self.label_box.currentIndexChanged.connect(self._label_changed)
        self.task_box.currentIndexChanged.connect(self._task_changed)
        for box in (self.metric_box, self.missing_box, self.scaling_box, self.target_scaling_box):
            box.currentIndexChanged.connect(self._emit)
        self.markers_edit.editingFinished.connect(self._markers_edited)

    # ------------------------------------------------------------------ loading
    def load(self, path: str, *, missing_markers=(), thousands: str | None = None,
             decimal: str | None = None) -> None:
        """Read the file (raises the core's DataError) and fill the page."""
        from labbench.data import infer_kinds
        from labbench.data.reading import read_file

        from labbench.gui.offthread import off_thread

        read = off_thread(self.window(), "Open a table", f"Reading {Path(path).name}…",
                          lambda: read_file(path, missing_markers=tuple(missing_markers),
                                            thousands=thousands, decimal=decimal))
        frame = read.frame
        self.markers, self.thousands, self.decimal = list(missing_markers), thousands, decimal
        self.keep = []
        self.markers_edit.setText(", ".join(self.markers))
        self.read_warnings = [w.replace(str(path), Path(path).name) for w in read.warnings]
        kinds = infer_kinds(frame)
        self._loading = True
        try:
            self.path = str(Path(path).resolve())
            self.frame = frame
            self._explicit_kinds = set()
            self.inferred_kinds = dict(kinds)
            self.preview_model.set_frame(frame, kinds)
            for j, width in enumerate(self.preview_model.widths(self.preview.fontMetrics())):
                self.preview.setColumnWidth(j, width)
            self.file_label.setText(f"<b>{Path(path).name}</b> — {len(frame):,} rows × {frame.shape[1]} columns"
                                    f" <span style='color:gray'>({self.path})</span>")
            self.target_box.clear()
            self.target_box.addItem(NO_TARGET)
            self.target_box.addItems([str(c) for c in frame.columns])
            self.target_box.setCurrentIndex(frame.shape[1])
            self.label_box.clear()
            self.label_box.addItem(NO_LABEL)
            self.label_box.addItems([str(c) for c in frame.columns])
            self.label_box.setEnabled(False)
            self._fill_columns([])
        finally:
            self._loading = False
        self._target_changed(self.target_box.currentText())

    def _fill_columns(self, ignored: list[str], kinds: Mapping[str, str] | None = None) -> None:
        assert self.frame is not None
        self.columns.setRowCount(0)
        for name in map(str, self.frame.columns):
            row = self.columns.rowCount()
            self.columns.insertRow(row)
            item = QTableWidgetItem(name)
            item.setFlags(item.flags() & ~Qt.ItemFlag.ItemIsEditable)
            self.columns.setItem(row, 0, item)
            kind = QComboBox()
            kind.addItems(["numeric", "categorical"])
            kind.setCurrentText((kinds or {}).get(name, self.inferred_kinds.get(name, "numeric")))
            kind.setToolTip(f"inferred: {self.inferred_kinds.get(name, '?')}")
            kind.currentIndexChanged.connect(self._kinds_changed)
            self.columns.setCellWidget(row, 1, kind)
            use = QCheckBox()
            use.setChecked(name not in ignored)
            use.setToolTip(f"Use “{name}” as an input")
            use.toggled.connect(self._kinds_changed)
            self.columns.setCellWidget(row, 2, use)
            flags = QTableWidgetItem("")
            flags.setFlags(flags.flags() & ~Qt.ItemFlag.ItemIsEditable)
            self.columns.setItem(row, 3, flags)
        self.columns.resizeColumnToContents(1)
        self.columns.resizeColumnToContents(2)
        self._sync_roles()

    def _row_widgets(self):
        for row in range(self.columns.rowCount()):
            yield (self.columns.item(row, 0).text(), self.columns.cellWidget(row, 1),
                   self.columns.cellWidget(row, 2))

    def target(self) -> str | None:
        """The target column, or None for a table without a target."""
        text = self.target_box.currentText()
        return None if text in ("", NO_TARGET) else text

    def label(self) -> str | None:
        """The label column shown beside the groups (no target only), or None."""
        text = self.label_box.currentText()
        return None if self.target() is not None or text in ("", NO_LABEL) else text

    def _sync_roles(self) -> None:
        target, label = self.target(), self.label()
        roles = {}
        for name, kind, use in self._row_widgets():
            role = "target" if name == target else ("label" if name == label else "")
            use.setEnabled(not role)
            kind.setEnabled(not role)
            roles[name] = role or ("" if use.isChecked() else "ignored")
        self.preview_model.set_roles(roles)
        if not getattr(self, "_batch", False):     # set_data shows the notes once, at its end
            self._show_column_notes(target, [n for n, r in roles.items() if r == ""])
        self.target_scaling_box.setEnabled(self.effective_task() in (None, "regression"))
        self._check_timer.start()

    def _show_column_notes(self, target: str | None, features: list[str]) -> None:
        """The notices ``labbench run`` prints for these columns (one shared rule in the core)."""
        from labbench.data import screen_columns
        from labbench.errors import LabbenchError

        notes = list(self.read_warnings)
        if self.frame is not None and features and (target is None or target in self.frame.columns):
            rows = self.frame if target is None else self.frame[self.frame[target].notna()]
            try:
                notes += screen_columns(rows, features, Path(self.path or "").name,
                                        forced=self._explicit_kinds | set(self.keep))[1]
            except LabbenchError as exc:
                notes.append(str(exc))
        self.column_notes.setText("\n".join(notes))

    # ------------------------------------------------------------------ choices
    def _target_changed(self, text: str) -> None:
        if self._loading or self.frame is None or not text:
            return
        from labbench.data import infer_task

        target = self.target()
        if target is None:      # no target: the rows are grouped, nothing is predicted
            self.inferred_task, self.task_error = UNSUPERVISED, ""
        else:
            try:
                self.inferred_task, self.task_error = infer_task(self.frame[target]), ""
            except Exception as exc:  # the core's one-line DataError (a constant target, ...)
                self.inferred_task, self.task_error = None, str(exc)
        self._loading = True
        keep = self.task_box.currentData()
        self.task_box.clear()
        self.task_box.addItem(f"{AUTO} ({self.inferred_task or 'unknown'})", AUTO)
        if target is not None:
            for task in ("regression", "binary", "multiclass"):
                self.task_box.addItem(task, task)
        i = self.task_box.findData(keep) if keep else 0
        self.task_box.setCurrentIndex(max(i, 0))
        self.task_box.setEnabled(target is not None)
        self.label_box.setEnabled(target is None)
        self._loading = False
        if not getattr(self, "_batch", False):
            self.target_mode.emit(target is not None)
        self.task_note.setText(self.task_error)
        self._sync_roles()
        self._task_changed()

    def set_family(self, name: str) -> None:
        """The model family changed on the space page: offer its metrics."""
        if name != self.family:
            self.family = name
            if self.frame is not None:
                self._task_changed()

    def set_target_mode(self, has_target: bool) -> None:
        """Choose "no target", or (from "no target") the last column as the target."""
        if self.frame is None or (self.target() is not None) == has_target:
            return
        self.target_box.setCurrentIndex(self.target_box.count() - 1 if has_target else 0)

    def _label_changed(self, *_a) -> None:
        if not self._loading and self.frame is not None:
            self._sync_roles()
            self._emit()

    def task(self) -> str | None:
        data = self.task_box.currentData()
        return None if data in (None, AUTO) else str(data)

    def effective_task(self) -> str | None:
        return self.task() or self.inferred_task

    def _task_changed(self, *_a) -> None:
        if self._loading:
            return
        task = self.effective_task()
        keep = self.metric_box.currentData()
        self._loading = True
        self.metric_box.clear()
        try:
            from labbench.families import get_family

            fam = get_family(self.family)
            default = fam.default_metric(task) if task else None
            names = list(fam.metrics(task)) if task else core.metrics_for(None)
        except (ImportError, KeyError, ValueError, LookupError):   # not in this build's metric table
            default, names = None, []
        self.metric_box.addItem(f"{AUTO} ({core.metric_label(default) if default else '—'})", AUTO)
        for n in names:
            self.metric_box.addItem(core.metric_label(n), n)
        i = self.metric_box.findData(keep) if keep else 0
        self.metric_box.setCurrentIndex(max(i, 0))
        self._loading = False
        self._emit()

    def _kinds_changed(self, *_a) -> None:
        if not self._loading:
            self._sync_roles()
            self._emit()

    def _emit(self, *_a) -> None:
        if not self._loading and not getattr(self, "_batch", False):
            self.changed.emit()
