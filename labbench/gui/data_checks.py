"""The data page's checks: the traps with their remedies and the column profiles, computed on a
reader thread from ``labbench.data.profile`` (the command line's rules) a moment after a change."""

from __future__ import annotations

from pathlib import Path
from typing import Any, Mapping


class ChecksMixin:
    """Part of ``DataPage``."""

    # ------------------------------------------------------------------ traps and profiles
    def apply_remedy(self, change: Mapping[str, Any]) -> None:
        """One click on a trap's remedy: the [data] section changes, the page shows it."""
        from labbench.data.profile import apply_remedy

        d = self.data_dict()
        if d is None:
            return
        d = apply_remedy(d, dict(change))
        if "kinds" in change:
            self._explicit_kinds |= set(change["kinds"])
        self.set_data(d, self.metric())

    def _markers_edited(self) -> None:
        words = [w.strip() for w in self.markers_edit.text().split(",") if w.strip()]
        if words == self.markers or self.frame is None:
            return
        d = self.data_dict()
        d.pop("missing_markers", None)
        if words:
            d["missing_markers"] = words
        self.set_data(d, self.metric())

    def _check_now(self) -> None:
        """Profiles and traps of the current choice, computed on the reader thread."""
        if self.frame is None or not self.target_box.currentText():
            return
        from labbench.data.profile import find_traps, profile_columns

        frame, target = self.frame, self.target()         # None: a table without a target
        kinds = {name: kind.currentText() for name, kind, _use in self._row_widgets()}
        features = [n for n, _k, use in self._row_widgets()
                    if n not in (target, self.label()) and use.isChecked()]
        task, effective = self.task(), self.effective_task()
        forced = set(self._explicit_kinds) | set(self.keep)
        where = Path(self.path or "table").name
        self._check_serial += 1
        serial = self._check_serial

        def work():
            profiles = profile_columns(frame, kinds, target, effective, features=features, forced=forced)
            traps = find_traps(frame, target, features, task=task, forced=forced, where=where,
                               profiles=profiles)
            return serial, profiles, traps

        if not self.checks.submit("check", work):
            self._check_timer.start()          # one is still running: try again shortly

    def _checked(self, key: str, result, error) -> None:
        if key != "check" or error is not None or result is None:
            return
        serial, profiles, traps = result
        if serial != self._check_serial:
            return                               # an older choice; a newer check is coming
        self.profiles, self.traps = profiles, traps
        self.trap_list.show_traps(traps)
        for row in range(self.columns.rowCount()):
            name = self.columns.item(row, 0).text()
            p = profiles.get(name)
            item = self.columns.item(row, 3)
            if item is not None:
                item.setText(", ".join(p.flags) if p else "")
                item.setToolTip("\n".join(p.why) if p else "")
        self.columns.resizeColumnToContents(3)
        shown = self.profile.shown
        if shown is None and self.columns.rowCount():
            shown = self.target()
        self.profile.show_profile(profiles.get(shown) if shown else None)

    def _show_profile_row(self, row: int) -> None:
        item = self.columns.item(row, 0) if row >= 0 else None
        if item is not None:
            self.profile.show_profile(self.profiles.get(item.text()))

    def _show_profile_section(self, section: int) -> None:
        if self.frame is not None and 0 <= section < self.frame.shape[1]:
            self.profile.show_profile(self.profiles.get(str(self.frame.columns[section])))

    def close(self) -> bool:
        self.checks.close()
        return super().close()
