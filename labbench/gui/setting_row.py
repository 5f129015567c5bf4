"""One network setting in the space editor: fixed, a range (low/high, log) or a list of choices.

The row turns what the user typed into the TOML-style value the spec would hold (numbers where the
text is a number, the text itself otherwise) and lets ``SearchSpace.from_dict`` judge it; the
core's ``SpecError`` text is shown under the row.
"""

from __future__ import annotations

from typing import Any

from PySide6.QtCore import Signal
from PySide6.QtWidgets import (QCheckBox, QComboBox, QHBoxLayout, QLabel, QLineEdit, QSizePolicy,
                               QStackedWidget, QWidget)

FIXED, RANGE, CHOICES = "fixed", "searched: range", "searched: choices"


def number_text(value: Any) -> str:
    if isinstance(value, bool):
        return str(value).lower()
    if isinstance(value, float):
        return repr(value)
    return str(value)


def parse_number(text: str, kind: str) -> Any:
    """A number when the text is one (int for whole-number settings), else the stripped text."""
    t = text.strip()
    if kind == "int":
        try:
            return int(t)
        except ValueError:
            pass
    try:
        return float(t)
    except ValueError:
        return t


def parse_list(text: str, kind: str) -> list:
    return [parse_number(p, kind) for p in text.replace(";", ",").split(",") if p.strip()]


class SettingRow(QWidget):
    """Editors for one ``SettingInfo``; ``raw()`` gives the TOML-style value."""

    changed = Signal()

    def __init__(self, info, parent=None):
        super().__init__(parent)
        self.info = info
        lay = QHBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        self.mode = QComboBox()
        self.mode.setAccessibleName(f"{info.label}: fixed or searched")
        modes = [FIXED, CHOICES] if info.kind == "choice" else [FIXED, RANGE, CHOICES]
        self.mode.addItems(modes)
        self.mode.setToolTip("Fixed: every trial uses one value. Searched: each trial picks a value "
                             "from a range or from a list.")
        lay.addWidget(self.mode)
        self.stack = QStackedWidget()
        self.stack.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Preferred)
        lay.addWidget(self.stack, 1)

        # fixed
        if info.kind == "choice":
            self.fixed = QComboBox()
            self.fixed.addItems(list(info.options))
            self.fixed.currentIndexChanged.connect(self.changed)
        else:
            self.fixed = QLineEdit()
            if info.name == "hidden_units":
                self.fixed.setPlaceholderText("e.g. 64, or 64, 32 for one count per layer")
            self.fixed.textChanged.connect(self.changed)
        self.fixed.setAccessibleName(f"{info.label} value")
        self.stack.addWidget(self.fixed)

        # range
        self.range_box = QWidget()
        r = QHBoxLayout(self.range_box)
        r.setContentsMargins(0, 0, 0, 0)
        self.low, self.high = QLineEdit(), QLineEdit()
        self.low.setAccessibleName(f"{info.label} low")
        self.high.setAccessibleName(f"{info.label} high")
        self.log = QCheckBox("log scale")
        self.log.setToolTip("Sample evenly in orders of magnitude (good for rates and penalties)")
        self.off = QCheckBox("may be off")
        self.off.setToolTip("Let some trials switch the penalty off (0) instead of sampling a value")
        for label, w in (("from", self.low), ("to", self.high)):
            r.addWidget(QLabel(label))
            r.addWidget(w, 1)
            w.textChanged.connect(self.changed)
        r.addWidget(self.log)
        self.log.toggled.connect(self.changed)
        if info.can_be_off:
            r.addWidget(self.off)
            self.off.toggled.connect(self.changed)
        else:
            self.off.hide()
        if info.kind != "choice":
            self.stack.addWidget(self.range_box)

        # choices
        self.option_boxes: list[QCheckBox] = []
        if info.kind == "choice":
            self.choices_box = QWidget()
            c = QHBoxLayout(self.choices_box)
            c.setContentsMargins(0, 0, 0, 0)
            for option in info.options:
                box = QCheckBox(option)
                box.setChecked(True)
                box.toggled.connect(self.changed)
                self.option_boxes.append(box)
                c.addWidget(box)
            c.addStretch(1)
        else:
            self.choices_box = QLineEdit()
            self.choices_box.setPlaceholderText("values separated by commas, e.g. 16, 32, 64")
            self.choices_box.setAccessibleName(f"{info.label} choices")
            self.choices_box.textChanged.connect(self.changed)
        self.stack.addWidget(self.choices_box)
        self.mode.currentIndexChanged.connect(self._mode_changed)
        self.set_raw(info.default)

    def _mode_changed(self, index: int) -> None:
        self.stack.setCurrentIndex(index)
        self.changed.emit()

    # ------------------------------------------------------------------ values
    def raw(self) -> Any:
        kind, mode = self.info.kind, self.mode.currentText()
        if mode == FIXED:
            if kind == "choice":
                return self.fixed.currentText()
            text = self.fixed.text()
            if self.info.name == "hidden_units" and "," in text:
                return parse_list(text, kind)
            return parse_number(text, kind)
        if mode == RANGE:
            d: dict[str, Any] = {"low": parse_number(self.low.text(), kind),
                                 "high": parse_number(self.high.text(), kind)}
            if self.log.isChecked():
                d["log"] = True
            if self.info.can_be_off and self.off.isChecked():
                d["off"] = True
            return d
        if kind == "choice":
            return {"choices": [b.text() for b in self.option_boxes if b.isChecked()]}
        return {"choices": parse_list(self.choices_box.text(), kind)}

    def set_raw(self, raw: Any) -> None:
        """Show a TOML-style value (``SearchSpace.to_dict()[name]``)."""
        blockers = [w.blockSignals(True) for w in self._inputs()]
        try:
            if isinstance(raw, dict) and "choices" in raw:
                self.mode.setCurrentText(CHOICES)
                values = list(raw["choices"])
                if self.info.kind == "choice":
                    for b in self.option_boxes:
                        b.setChecked(b.text() in values)
                else:
                    self.choices_box.setText(", ".join(number_text(v) for v in values))
            elif isinstance(raw, dict):
                self.mode.setCurrentText(RANGE)
                self.low.setText(number_text(raw.get("low", "")))
                self.high.setText(number_text(raw.get("high", "")))
                self.log.setChecked(bool(raw.get("log", False)))
                self.off.setChecked(bool(raw.get("off", False)))
            else:
                self.mode.setCurrentText(FIXED)
                if self.info.kind == "choice":
                    self.fixed.setCurrentText(str(raw))
                elif isinstance(raw, (list, tuple)):
                    self.fixed.setText(", ".join(number_text(v) for v in raw))
                else:
                    self.fixed.setText(number_text(raw))
            if not self.low.text() and self.info.kind != "choice":
                self._suggest_range(raw)
            self.stack.setCurrentIndex(self.mode.currentIndex())
        finally:
            for w, b in zip(self._inputs(), blockers):
                w.blockSignals(b)
        self.changed.emit()

    def _suggest_range(self, raw: Any) -> None:
        """Pre-fill a sensible range so switching to "range" starts from something (common practice)."""
        suggestions = {"learning_rate": (1e-4, 1e-1, True), "hidden_units": (8, 128, True),
                       "hidden_layers": (1, 3, False), "epochs": (10, 60, False),
                       "batch_size": (16, 256, True), "momentum": (0.5, 0.99, False),
                       "l2": (1e-6, 1e-2, True)}
        low, high, log = suggestions.get(self.info.name, (self.info.low, self.info.high, False))
        self.low.setText(number_text(low))
        self.high.setText(number_text(high))
        self.log.setChecked(log)

    def _inputs(self):
        return [self.mode, self.fixed, self.low, self.high, self.log, self.off,
                *self.option_boxes, *([self.choices_box] if isinstance(self.choices_box, QLineEdit) else [])]

    def searched(self) -> bool:
        return self.mode.currentText() != FIXED
