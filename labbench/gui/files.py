"""The window's files: open a CSV, a spec or a storage; save the spec; recent files."""

from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import Qt
from PySide6.QtWidgets import QFileDialog, QInputDialog, QMessageBox

from labbench.errors import LabbenchError, SpecError
from labbench.gui.storage_list import masked, storage_exists

MAX_RECENT = 8


class FilesMixin:
    """Part of ``MainWindow``."""

    def _start_dir(self) -> str:
        return str(self.settings.value("last_dir", str(Path.home())))

    def open_csv_dialog(self) -> None:
        path, _ = QFileDialog.getOpenFileName(self, "Open a CSV table", self._start_dir(),
                                              "Tables (*.csv *.tsv *.txt);;All files (*)")
        if path:
            self.open_path(path)

    def open_spec_dialog(self) -> None:
        path, _ = QFileDialog.getOpenFileName(self, "Open an experiment", self._start_dir(),
                                              "Spec files (*.toml);;All files (*)")
        if path:
            self.open_path(path)

    def open_path(self, path: str) -> bool:
        """Open a CSV, a spec (.toml) or a SQLite storage (.db); errors go to a dialog."""
        if self.session.running:
            return False
        suffix = Path(path).suffix.lower()
        try:
            if suffix == ".toml":
                self.open_spec(path)
            elif suffix in (".db", ".sqlite", ".sqlite3"):
                self.watch_storage(f"sqlite:///{Path(path).resolve().as_posix()}")
            else:
                self.open_csv(path)
        except LabbenchError as exc:
            QMessageBox.warning(self, "Cannot open this file", str(exc))
            return False
        except OSError as exc:       # e.g. no permission: the core names files it could read
            QMessageBox.warning(self, "Cannot open this file", f"{path}: {exc.strerror or exc}")
            return False
        self.settings.setValue("last_dir", str(Path(path).resolve().parent))
        self._remember(path)
        return True

    def open_csv(self, path: str) -> None:
        self.setCursor(Qt.CursorShape.WaitCursor)
        try:
            self.data.load(path)
        finally:
            self.unsetCursor()
        self.space.use_default_space()      # a new table starts from a searched space, as the CLI does
        from labbench.families import get_family

        self.data.set_family(self.space.family_name())
        self.data.set_target_mode(bool(getattr(get_family(self.space.family_name()), "needs_target", True)))
        self.spec_path = None
        self.dirty = True
        self.steps.setCurrentRow(0)
        self.validate()
        self._title()
        self.statusBar().showMessage(f"Read {path}: pick the target column and the inputs", 8000)

    def open_spec(self, path: str) -> None:
        from labbench.search.spec import load_spec
        from labbench.search.storage import resolve_url

        spec = load_spec(path)
        self.data.family = getattr(spec.space, "family", "network") or "network"
        self.data.set_from_spec(spec.data, spec.evaluation.metric)
        self.space.set_from_spec(spec)
        self.spec_path = str(Path(path).resolve())
        self.dirty = False
        self.validate()
        self._title()
        url = resolve_url(spec)
        if storage_exists(url):
            self.session.watch(url, spec.study_name(), spec, quiet=True)
            self.steps.setCurrentRow(2)
            self.statusBar().showMessage("Showing the trials stored for this experiment; Start continues the search", 10000)
        self.update_actions()

    def save_spec(self, ask: bool = False) -> str | None:
        from labbench.search.spec import save_spec

        try:
            spec = self.current_spec()
        except SpecError as exc:
            QMessageBox.warning(self, "The experiment has a problem", str(exc))
            return None
        if spec is None:
            QMessageBox.information(self, "Nothing to save yet", "Open a CSV table first.")
            return None
        path = self.spec_path
        if ask or not path:
            base = Path(self.data.path or self._start_dir())
            start = str(base.with_suffix(".toml")) if base.suffix else str(base / "experiment.toml")
            path, _ = QFileDialog.getSaveFileName(self, "Save the experiment", start, "Spec files (*.toml)")
            if not path:
                return None
            if not path.endswith(".toml"):
                path += ".toml"
        try:
            if not self._save_in_place(spec, path):
                save_spec(spec, path)
        except OSError as exc:
            QMessageBox.warning(self, "Cannot save", f"{path}: {exc.strerror or exc}")
            return None
        self.spec_path = str(Path(path).resolve())
        self.dirty = False
        self._title()
        self._remember(path)
        self.statusBar().showMessage(f"Experiment saved to {path}", 6000)
        return self.spec_path

    def _save_in_place(self, spec, path: str) -> bool:
        """Save over an existing spec file changing only the keys that changed (comments, order
        and style survive: ``labbench.search.spec_edit``). False when there is no such file or it
        does not read as a spec (then the whole file is written)."""
        from labbench.errors import LabbenchError
        from labbench.fileio import write_text
        from labbench.search.spec import load_spec
        from labbench.search.spec_edit import updated_text

        p = Path(path)
        if not p.is_file():
            return False
        try:
            text = p.read_text(encoding="utf-8-sig")
            old = load_spec(p)
        except (LabbenchError, OSError, UnicodeDecodeError):
            return False
        base = p.resolve().parent
        new_text = updated_text(text, old.to_dict(base, keep_password=True),
                                spec.to_dict(base, keep_password=True))
        if new_text != text:
            write_text(p, new_text)
        return True

    # ------------------------------------------------------------------ storage
    def watch_dialog(self) -> None:
        from labbench.gui.storage_dialog import StorageDialog

        dlg = StorageDialog(self.settings, self._start_dir(), self)
        if dlg.exec() != StorageDialog.DialogCode.Accepted or not dlg.url():
            return
        try:
            self.watch_storage(dlg.url())
        except LabbenchError as exc:
            QMessageBox.warning(self, "Cannot open the storage", str(exc))

    def watch_storage(self, url: str, name: str | None = None) -> None:
        from labbench.gui.storage_list import study_names

        names = study_names(url)
        if name is None:
            if not names:
                raise SpecError(f"storage {masked(url)}: holds no search yet")
            name = names[0]
            if len(names) > 1:
                name, ok = QInputDialog.getItem(self, "Which search?", "Searches in this storage:", names, 0, False)
                if not ok:
                    return
        from labbench.gui.storage_dialog import remember_storage

        self.session.watch(url, name)
        remember_storage(self.settings, url)
        self.steps.setCurrentRow(2)
        self.statusBar().showMessage(f"Watching search “{name}”: refreshed every few seconds", 8000)

    # ------------------------------------------------------------------ run
    def recent_files(self) -> list[str]:
        value = self.settings.value("recent_files", [])
        if isinstance(value, str):
            value = [value]
        return [str(v) for v in (value or [])]

    def _remember(self, path: str) -> None:
        path = str(Path(path).resolve())
        files = [path] + [p for p in self.recent_files() if p != path]
        self.settings.setValue("recent_files", files[:MAX_RECENT])
        self._fill_recent()

    def _fill_recent(self) -> None:
        self.recent_menu.clear()
        files = self.recent_files()
        for i, p in enumerate(files):
            a = self.recent_menu.addAction(f"&{i + 1}  {Path(p).name}  —  {Path(p).parent}")
            a.triggered.connect(lambda _c=False, p=p: self.open_path(p))
        self.recent_menu.setEnabled(bool(files))

