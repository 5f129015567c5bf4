"""Step 2 — the search: which settings are searched and how, how trials are scored, the budget."""

from __future__ import annotations

import os
from typing import Any

from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QUndoStack
from PySide6.QtWidgets import (QCheckBox, QComboBox, QDoubleSpinBox, QFormLayout, QGridLayout,
                               QGroupBox, QHBoxLayout, QLabel, QLineEdit, QScrollArea, QSpinBox,
                               QVBoxLayout, QWidget)

from labbench.errors import LabbenchError
from labbench.families import DEFAULT as DEFAULT_FAMILY
from labbench.families import family_names, get_family
from labbench.gui.setting_row import SettingRow
from labbench.gui.space_parts import FAMILY_TIP, TIPS, SpaceEdit, error_label, family_label, key_of  # noqa: F401
from labbench.gui.wording import plain


class SpacePage(QWidget):
    changed = Signal()
    family_changed = Signal(str)     # the user picked another model family

    def __init__(self, parent=None):
        super().__init__(parent)
        from labbench.search.spec import PRUNERS, SAMPLERS

        self._together = None   # [search] together as the opened file says (no control of its own)

        outer = QVBoxLayout(self)
        outer.setContentsMargins(0, 0, 0, 0)
        scroll = QScrollArea()
        scroll.setWidgetResizable(True)
        scroll.setFrameShape(QScrollArea.Shape.NoFrame)
        outer.addWidget(scroll)
        inner = QWidget()
        scroll.setWidget(inner)
        page = QVBoxLayout(inner)

        self.banner = QLabel("")
        self.banner.setObjectName("errorBanner")
        self.banner.setWordWrap(True)
        self.banner.hide()
        page.addWidget(self.banner)

        fam = QHBoxLayout()
        fam_label = QLabel("Model family")
        self.family = QComboBox()
        self.family.setAccessibleName("Model family")
        for name in family_names():
            self.family.addItem(family_label(name), name)
        self.family.setToolTip(FAMILY_TIP)
        fam_label.setToolTip(FAMILY_TIP)
        fam_label.setBuddy(self.family)
        self.family_note = QLabel("")
        self.family_note.setObjectName("panelHint")
        self.family_note.setWordWrap(True)
        fam.addWidget(fam_label)
        fam.addWidget(self.family)
        fam.addWidget(self.family_note, 1)
        page.addLayout(fam)
        self.errors: dict[str, QLabel] = {}
        self.rows: dict[str, SettingRow] = {}
        self.net = QGroupBox("Network settings")
        self.grid = QGridLayout(self.net)
        self.grid.setColumnStretch(1, 1)
        self._family = ""
        self._build_rows(DEFAULT_FAMILY)
        self.family.currentIndexChanged.connect(self._family_chosen)
        page.addWidget(self.net)

        lower = QHBoxLayout()
        ev = QGroupBox("How each trial is scored")
        f = QFormLayout(ev)
        self.folds = self._spin(2, 50, 5)
        self.repeats = self._spin(1, 20, 1)
        self.holdout = QDoubleSpinBox()
        self.holdout.setRange(0.01, 0.89)
        self.holdout.setSingleStep(0.05)
        self.holdout.setDecimals(3)
        self.holdout.setValue(0.2)
        self.holdout.valueChanged.connect(self._changed)
        self.seed = self._spin(0, 2**31 - 1, 0)
        self.seed_spread = self._spin(0, 50, 5)
        for key, label, w in (("folds", "Folds", self.folds), ("repeats", "Repeats", self.repeats),
                              ("holdout", "Hold-out share", self.holdout), ("seed", "Seed", self.seed),
                              ("seed_spread", "Seeds for the spread check", self.seed_spread)):
            self._add(f, "evaluation", key, label, w)
        lower.addWidget(ev, 1)

        se = QGroupBox("Budget and method")
        g = QFormLayout(se)
        self.trials_on = QCheckBox()
        self.trials = self._spin(1, 100_000, 40)
        self.minutes_on = QCheckBox()
        self.minutes = QDoubleSpinBox()
        self.minutes.setRange(0.1, 10_000)
        self.minutes.setValue(10)
        self.minutes.setSuffix(" min")
        self.minutes.valueChanged.connect(self._changed)
        self.trials_on.setChecked(True)
        for box, w in ((self.trials_on, self.trials), (self.minutes_on, self.minutes)):
            box.toggled.connect(w.setEnabled)
            box.toggled.connect(self._changed)
        self.minutes.setEnabled(False)
        self.sampler = QComboBox()
        self.sampler.addItems(list(SAMPLERS))
        self.pruner = QComboBox()
        self.pruner.addItems(list(PRUNERS))
        for box in (self.sampler, self.pruner):
            box.currentIndexChanged.connect(self._changed)
        self.workers = self._spin(1, max(1, (os.cpu_count() or 1) * 2), 1)
        self.storage = QLineEdit()
        self.storage.setPlaceholderText("next to the spec file")
        self.name = QLineEdit()
        self.name.setPlaceholderText("the spec file's name")
        for w in (self.storage, self.name):
            w.textChanged.connect(self._changed)
        self._add(g, "search", "trials", "Trials", _pair(self.trials_on, self.trials))
        self._add(g, "search", "minutes", "Time limit", _pair(self.minutes_on, self.minutes))
        self._add(g, "search", "sampler", "Sampler", self.sampler)
        self._add(g, "search", "pruner", "Early stopping", self.pruner)
        self._add(g, "search", "workers", "Workers", self.workers)
        self._add(g, "search", "storage", "Storage URL", self.storage)
        self._add(g, "search", "name", "Search name", self.name)
        self.estimate = QLabel("Open a table to see how long the search will take.")
        self.estimate.setObjectName("costEstimate")
        self.estimate.setWordWrap(True)
        self.estimate.setToolTip("")
        g.addRow("Expected time", self.estimate)
        lower.addWidget(se, 1)
        page.addLayout(lower)
        page.addStretch(1)
        self._quiet = False
        self.undo = QUndoStack(self)
        self._defaults()
        self._last = self.space_dict()

    def _defaults(self) -> None:
        """Start from the spec's own defaults (labbench.search.spec), not from guesses here."""
        from labbench.search.spec import EvaluationSpec, SearchSettings

        self._quiet = True
        try:
            self._show_run_fields(EvaluationSpec(), SearchSettings())
            self._show_space(self.default_space_dict())
        finally:
            self._quiet = False

    def default_space_dict(self, family: str | None = None) -> dict[str, Any]:
        """The searched space the command line gives a spec of this family without [space]."""
        from labbench.search.space import SearchSpace

        name = family or self.family_name()
        if name == DEFAULT_FAMILY:
            from labbench.search.defaults import default_space_dict

            raw = default_space_dict()
        else:
            raw = dict(get_family(name).default_space)
        try:
            return SearchSpace.from_dict(raw, family=name).to_dict()
        except LabbenchError:
            return dict(raw)

    def _show_space(self, raw: dict[str, Any]) -> None:
        for name, value in raw.items():
            if name in self.rows:
                self.rows[name].set_raw(value)

    def use_default_space(self) -> None:
        """A new table: the searched space the command line uses for a spec without [space]."""
        self._quiet = True
        try:
            self._show_space(self.default_space_dict())
        finally:
            self._quiet = False
        self._last = self.space_dict()
        self.undo.clear()
        self.changed.emit()

    # ------------------------------------------------------------------ the model family
    def family_name(self) -> str:
        return self._family or DEFAULT_FAMILY

    def _build_rows(self, name: str) -> None:
        """One editor row per setting of the family's table (``Family.settings``)."""
        fam = get_family(name)
        while self.grid.count():
            widget = self.grid.takeAt(0).widget()
            if widget is not None:
                widget.setParent(None)
                widget.deleteLater()
        for key in [k for k in self.errors if k.startswith("space.")]:
            del self.errors[key]
        self.rows = {}
        for i, (key, info) in enumerate(fam.settings.items()):
            label = QLabel(info.label)
            label.setToolTip(info.help)
            row = SettingRow(info)
            row.setToolTip(info.help)
            label.setBuddy(row.mode)
            err = error_label()
            self.grid.addWidget(label, 2 * i, 0, Qt.AlignmentFlag.AlignTop)
            self.grid.addWidget(row, 2 * i, 1)
            self.grid.addWidget(err, 2 * i + 1, 1)
            row.changed.connect(lambda key=key: self._row_changed(key))
            self.rows[key] = row
            self.errors[f"space.{key}"] = err
        self._family = name
        self.net.setTitle(f"{fam.label or name} settings" if name != DEFAULT_FAMILY else "Network settings")
        needs = getattr(fam, "needs_target", True)
        self.family_note.setText("predicts the target column" if needs else
                                 "learns without a target: it groups the rows (the Data page's target is "
                                 "set to none; a label column may be shown beside the groups)")
        i = self.family.findData(name)
        if i >= 0 and self.family.currentIndex() != i:
            self.family.blockSignals(True)
            self.family.setCurrentIndex(i)
            self.family.blockSignals(False)

    def set_family(self, name: str, *, space: dict[str, Any] | None = None) -> None:
        """Show ``name``'s settings, at ``space`` (spec shape) or at the family's default space."""
        if name != self._family:
            self._build_rows(name)
        self._quiet = True
        try:
            self._show_space(space if space is not None else self.default_space_dict(name))
        finally:
            self._quiet = False
        self._last = self.space_dict()
        self.undo.clear()

    def _family_chosen(self, _index: int) -> None:
        name = self.family.currentData()
        if not name or name == self._family:
            return
        self.set_family(str(name))
        self.family_changed.emit(str(name))
        self._changed()

    def _row_changed(self, name: str) -> None:
        if self._quiet:
            return
        now = self.rows[name].raw()
        before = self._last.get(name)
        self._last[name] = now
        if now != before:
            self.undo.push(SpaceEdit(self, name, before, now))
        self._changed()

    def _put(self, name: str, raw) -> None:
        """Undo / redo: show ``raw`` in the setting's editors."""
        self._quiet = True
        try:
            self.rows[name].set_raw(raw)
        finally:
            self._quiet = False
        self._last[name] = self.rows[name].raw()
        self.changed.emit()

    def _show_run_fields(self, e, s) -> None:
        """Put evaluation settings ``e`` and search settings ``s`` into their fields."""
        self.folds.setValue(e.folds)
        self.repeats.setValue(e.repeats)
        self.holdout.setValue(e.holdout)
        self.seed.setValue(e.seed)
        self.seed_spread.setValue(e.seed_spread)
        self.trials_on.setChecked(s.trials is not None)
        if s.trials is not None:
            self.trials.setValue(s.trials)
        self.minutes_on.setChecked(s.minutes is not None)
        if s.minutes is not None:
            self.minutes.setValue(s.minutes)
        self.sampler.setCurrentText(s.sampler)
        self.pruner.setCurrentText(s.pruner)
        self.workers.setValue(s.workers)
        self._together = s.together
        self.storage.setText(s.storage or "")
        self.name.setText(s.name or "")

    # ------------------------------------------------------------------ building
    def _spin(self, low: int, high: int, value: int) -> QSpinBox:
        s = QSpinBox()
        s.setRange(low, high)
        s.setValue(value)
        s.valueChanged.connect(self._changed)
        return s

    def _add(self, form: QFormLayout, section: str, key: str, label: str, w: QWidget) -> None:
        tip = TIPS[key]
        lab = QLabel(label)
        lab.setToolTip(tip)
        w.setToolTip(tip)
        for child in w.findChildren(QWidget):
            child.setToolTip(tip)
        form.addRow(lab, w)
        err = error_label()
        form.addRow(err)
        self.errors[f"{section}.{key}"] = err

    def _changed(self, *_a) -> None:
        if not self._quiet:
            self.changed.emit()

    # ------------------------------------------------------------------ the spec sections
    def space_dict(self) -> dict[str, Any]:
        return {name: row.raw() for name, row in self.rows.items()}

    def model_dict(self) -> dict[str, Any] | None:
        """The [model] section: None for the network (a network spec reads as it always did)."""
        return None if self.family_name() == DEFAULT_FAMILY else {"family": self.family_name()}

    def evaluation_dict(self, metric: str | None) -> dict[str, Any]:
        d: dict[str, Any] = {"folds": self.folds.value(), "repeats": self.repeats.value(),
                             "holdout": round(self.holdout.value(), 4), "seed": self.seed.value(),
                             "seed_spread": self.seed_spread.value()}
        if metric:
            d["metric"] = metric
        return d

    def search_dict(self) -> dict[str, Any]:
        d: dict[str, Any] = {}
        if self.trials_on.isChecked():
            d["trials"] = self.trials.value()
        if self.minutes_on.isChecked():
            d["minutes"] = float(self.minutes.value())
        d.update(sampler=self.sampler.currentText(), pruner=self.pruner.currentText(),
                 workers=self.workers.value())
        if self._together is not None:
            d["together"] = self._together
        if self.storage.text().strip():
            d["storage"] = self.storage.text().strip()
        if self.name.text().strip():
            d["name"] = self.name.text().strip()
        return d

    def set_from_spec(self, spec) -> None:
        family = getattr(spec.space, "family", DEFAULT_FAMILY) or DEFAULT_FAMILY
        if family != self._family:
            self._build_rows(family)
        self._quiet = True
        try:
            for name, raw in spec.space.to_dict().items():
                if name in self.rows:
                    self.rows[name].set_raw(raw)
            self._show_run_fields(spec.evaluation, spec.search)
        finally:
            self._quiet = False
        self._last = self.space_dict()
        self.undo.clear()
        self.changed.emit()

    # ------------------------------------------------------------------ validation
    def check_space(self) -> dict[str, str]:
        """Per-setting messages from the core (each setting alone, then all together)."""
        from labbench.errors import SpecError
        from labbench.search.space import SearchSpace

        problems: dict[str, str] = {}
        raw = self.space_dict()
        family = self.family_name()
        for name, value in raw.items():
            try:
                SearchSpace.from_dict({name: value}, family=family)
            except SpecError as exc:
                problems[f"space.{name}"] = plain(str(exc))     # the window's words everywhere
        if not problems:
            try:
                SearchSpace.from_dict(raw, family=family)
            except SpecError as exc:
                k = key_of(str(exc))
                problems[f"{k[0]}.{k[1]}" if k else "space"] = plain(str(exc))
        return problems

    def show_problems(self, problems: dict[str, str]) -> None:
        loose = []
        for key, label in self.errors.items():
            text = plain(problems.get(key, ""))
            label.setText(text)
            label.setToolTip(text)
        for key, text in problems.items():
            if key not in self.errors:
                loose.append(plain(text))
        self.banner.setText("\n".join(loose))
        self.banner.setVisible(bool(loose))


def _pair(box: QCheckBox, w: QWidget) -> QWidget:
    holder = QWidget()
    lay = QHBoxLayout(holder)
    lay.setContentsMargins(0, 0, 0, 0)
    lay.addWidget(box)
    lay.addWidget(w, 1)
    return holder
