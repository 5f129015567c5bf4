"""The data page's [data] section: the spec's keys from the page's choices, and the page from a
spec's section (part of ``DataPage``)."""

from __future__ import annotations

from pathlib import Path
from typing import Any, Mapping

AUTO = "auto"
NO_TARGET = "(no target: find groups)"   # the map and group families learn without a target
NO_LABEL = "(none)"


class SpecSectionMixin:
    """Part of ``DataPage``."""

    # ------------------------------------------------------------------ spec
    def metric(self) -> str | None:
        data = self.metric_box.currentData()
        return None if data in (None, AUTO) else str(data)

    def data_dict(self) -> dict[str, Any] | None:
        """The [data] section (path absolute), or None before a file is loaded."""
        if self.frame is None or not self.path:
            return None
        target, label = self.target(), self.label()
        ignore, kinds = [], {}
        for name, kind, use in self._row_widgets():
            if name in (target, label):
                continue
            if not use.isChecked():
                ignore.append(name)
            elif kind.currentText() != self.inferred_kinds.get(name) or name in self._explicit_kinds:
                kinds[name] = kind.currentText()
        d: dict[str, Any] = {"path": self.path}
        if target is not None:          # no target: [data] without one (MAPS.md)
            d["target"] = target
        elif label is not None:
            d["label"] = label
        if ignore:
            d["ignore"] = ignore
        if self.task():
            d["task"] = self.task()
        if kinds:
            d["kinds"] = kinds
        d["missing"] = self.missing_box.currentText()
        d["scaling"] = self.scaling_box.currentText()
        if target is not None:
            d["target_scaling"] = self.target_scaling_box.currentText()
        if self.markers:
            d["missing_markers"] = list(self.markers)
        if self.thousands is not None:
            d["thousands"] = self.thousands
        if self.decimal is not None:
            d["decimal"] = self.decimal
        keep = [c for c in self.keep if c not in ignore and c not in (target, label)]
        if keep:
            d["keep"] = keep
        return d

    def set_from_spec(self, data, metric: str | None) -> None:
        """Show a loaded spec's [data] (the file is read again; DataError propagates)."""
        self.set_data({"path": data.path, "target": data.target or None,
                       "label": getattr(data, "label", None), "ignore": list(data.ignore),
                       "task": data.task, "kinds": dict(data.kinds), "missing": data.missing,
                       "scaling": data.scaling, "target_scaling": data.target_scaling,
                       "missing_markers": list(data.missing_markers), "thousands": data.thousands,
                       "decimal": data.decimal, "keep": list(data.keep)}, metric)

    def set_data(self, d: Mapping[str, Any], metric: str | None = None) -> None:
        """Show a [data] section (a dict with the spec's keys; the file is read again)."""
        self._batch = True
        try:
            self._set_data(d, metric)
        finally:
            self._batch = False
        self._sync_roles()
        self._emit()

    def _set_data(self, d: Mapping[str, Any], metric: str | None) -> None:
        markers = list(d.get("missing_markers") or ())
        same_file = (self.frame is not None and self.path == str(Path(d["path"]).resolve())
                     and (markers, d.get("thousands"), d.get("decimal"))
                     == (self.markers, self.thousands, self.decimal))
        if not same_file:       # read again only when the file or how it is read changed
            self.load(d["path"], missing_markers=tuple(markers), thousands=d.get("thousands"),
                      decimal=d.get("decimal"))
        kinds = dict(d.get("kinds") or {})
        self._explicit_kinds = set(kinds)
        self.keep = list(d.get("keep") or ())
        self._loading = True
        target = d.get("target") or NO_TARGET
        self.target_box.setCurrentText(target)
        self.label_box.setCurrentText(d.get("label") or NO_LABEL)
        self._loading = False
        self._target_changed(target)
        self._loading = True
        self._fill_columns(list(d.get("ignore") or ()), kinds)
        self.task_box.setCurrentIndex(max(self.task_box.findData(d.get("task") or AUTO), 0))
        self.missing_box.setCurrentText(d.get("missing", "impute"))
        self.scaling_box.setCurrentText(d.get("scaling", "standard"))
        self.target_scaling_box.setCurrentText(d.get("target_scaling", "standard"))
        self._loading = False
        self._task_changed()
        self._loading = True
        self.metric_box.setCurrentIndex(max(self.metric_box.findData(metric or AUTO), 0))
        self._loading = False
