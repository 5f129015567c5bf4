"""Step 4 — taking the winner away: winner files, the settings on the clipboard, pictures, the
trials table, and the hand-off files of ``labbench.export`` (bundle, ONNX, report) when present.
"""

from __future__ import annotations

import importlib
import logging
from pathlib import Path
from typing import Any, Callable

from PySide6.QtCore import Qt, QUrl
from PySide6.QtGui import QDesktopServices, QGuiApplication
from PySide6.QtWidgets import QFileDialog, QMessageBox, QWidget

from labbench.errors import LabbenchError
from labbench.gui.offthread import off_process, off_thread

log = logging.getLogger("labbench.gui")


def export_api() -> Any | None:
    """``labbench.export`` when it offers the hand-off functions, else None (buttons stay off)."""
    try:
        return importlib.import_module("labbench.export")
    except ImportError:
        return None


def has(name: str) -> bool:
    api = export_api()
    return api is not None and callable(getattr(api, name, None))


def space_text(settings: dict, *, trial: int | None = None, score: str = "", family: str = "network") -> str:
    """The winning settings as a ``[space]`` section ``labbench run`` reads as is: every setting
    fixed, in the spec's own keys (hidden_layers / hidden_units, not the resolved list); another
    family's settings come with their ``[model]`` line."""
    import tomlkit

    from labbench.search.space import SearchSpace

    fixed = SearchSpace.default(family).fixed_at(settings).to_dict()
    head = "# the winning settings" + (f" (trial {trial}{', ' + score if score else ''})" if trial is not None
                                       else "") + "; every setting fixed\n"
    doc = {"model": {"family": family}, "space": fixed} if family != "network" else {"space": fixed}
    return head + tomlkit.dumps(doc)


class Takeaway:
    """The actions' bodies; ``window`` gives the session, dialogs' parent and the status bar."""

    def __init__(self, window: QWidget):
        self.window = window
        self.last_dir = ""
        self.report_path: str | None = None
        self.busy = ""
        self.use_processes = True      # a script without a main guard cannot spawn: False

    # ------------------------------------------------------------------ helpers
    @property
    def session(self):
        return self.window.session

    def _status(self, text: str) -> None:
        self.window.statusBar().showMessage(text, 8000)

    def _ask_dir(self, title: str) -> str | None:
        path = QFileDialog.getExistingDirectory(self.window, title, self.last_dir or str(Path.home()))
        if path:
            self.last_dir = path
        return path or None

    def _ask_file(self, title: str, name: str, filters: str) -> str | None:
        start = str(Path(self.last_dir or Path.home()) / name)
        path, _ = QFileDialog.getSaveFileName(self.window, title, start, filters)
        if path:
            self.last_dir = str(Path(path).parent)
        return path or None

    def _wrote(self, what: str, paths) -> None:
        paths = [str(p) for p in paths]
        self._status(f"{what}: {', '.join(paths)}")
        box = QMessageBox(QMessageBox.Icon.Information, what, f"{what}:\n" + "\n".join(paths),
                          QMessageBox.StandardButton.Ok, self.window)
        folder = box.addButton("Open folder", QMessageBox.ButtonRole.ActionRole)
        box.exec()
        if box.clickedButton() is folder and paths:
            QDesktopServices.openUrl(QUrl.fromLocalFile(str(Path(paths[0]).parent)))

    def _guard(self, what: str, fn: Callable[[], Any]) -> Any:
        try:
            return fn()
        except LabbenchError as exc:
            QMessageBox.warning(self.window, what, str(exc))
        except OSError as exc:
            QMessageBox.warning(self.window, what, f"{exc.filename or ''}: {exc.strerror or exc}")
        return None

    def _off(self, title: str, text: str, fn: Callable[[], Any], process: tuple | None = None) -> Any:
        """``fn`` off the GUI thread with progress; one such job at a time. ``process``:
        (function, *args) to run in a helper process instead, when that can start here."""
        if self.busy:
            raise LabbenchError(f"{self.busy} is still being written; wait for it to finish")
        self.busy = title
        try:
            if process is not None and self.use_processes:
                return off_process(self.window, title, text, *process)
            return off_thread(self.window, title, text, fn)
        finally:
            self.busy = ""

    # ------------------------------------------------------------------ winner
    def summary(self) -> dict | None:
        return self.session.book.winner

    def save_winner(self, folder: str | None = None) -> list[str] | None:
        """winner.json + winner.toml (written by the core's ``write_winner_files``)."""
        from labbench.search.winner import write_winner_files

        summary, spec = self.summary(), self.session.spec
        if summary is None or spec is None:
            return None
        folder = folder or self._ask_dir("Folder for winner.json and winner.toml")
        if not folder:
            return None
        files = self._guard("Save winner files", lambda: self._off("Save winner files", "Writing winner.json and winner.toml…",
            lambda: write_winner_files(spec, summary, Path(folder))))
        if files and not self.window.quiet_dialogs:
            self._wrote("Winner files saved", files)
        return files

    def copy_settings(self) -> str | None:
        summary = self.summary()
        best = self.session.book.best()
        settings = (summary or {}).get("settings") or (best.settings if best else None)
        if not settings:
            return None
        number = (summary or {}).get("trial_number", best.number if best else None)
        spec = self.session.spec
        family = getattr(spec.space, "family", "network") if spec is not None else "network"
        text = space_text(dict(settings), trial=number, family=family or "network")
        QGuiApplication.clipboard().setText(text)
        self._status("The winning settings are on the clipboard")
        return text

    def export_table(self, path: str | None = None) -> str | None:
        path = path or self._ask_file("Save the trials table", "trials.csv", "CSV table (*.csv)")
        if not path:
            return None
        self.session.flush()
        out = self._guard("Save the trials table", lambda: self.window.watch.table.export_csv(path))
        if out:
            self._status(f"Trials table saved to {out}")
        return str(out) if out else None

    def export_pictures(self, folder: str | None = None) -> list[str]:
        """Every picture as PNG and SVG into one folder."""
        folder = folder or self._ask_dir("Folder for the pictures (PNG and SVG)")
        if not folder:
            return []
        written: list[str] = []
        self.session.flush()
        maps = getattr(self.window, "maps", None)
        extra = maps.visible_panels() if maps is not None and maps.data is not None else []
        for panel in list(self.window.watch.panels) + extra:      # a map winner: its pictures too
            stem = panel.title.lower().replace(" ", "_")
            for suffix in (".png", ".svg"):
                p = self._guard("Save pictures", lambda: panel.export(Path(folder) / f"{stem}{suffix}"))
                if p:
                    written.append(str(p))
        self._status(f"{len(written)} pictures saved to {folder}")
        return written

    # ------------------------------------------------------------------ hand-off (labbench.export)
    def _model(self):
        result = self.session.result or {}
        return result.get("model")

    def save_bundle(self, path: str | None = None) -> list[str] | None:
        api, model = export_api(), self._model()
        if api is None or model is None:
            return None
        path = path or self._ask_file("Save the model bundle", "winner.npz", "Model bundle (*.npz)")
        if not path:
            return None
        def write():
            bundle = api.save_bundle(model, path)
            return [bundle, api.write_snippet(bundle)]   # the numpy-only loader beside it

        out = self._guard("Save model bundle", lambda: self._off("Save model bundle", f"Writing {Path(path).name}…", write))
        return self._report_written("Model bundle saved", out, path)

    def export_onnx(self, path: str | None = None) -> list[str] | None:
        api, model = export_api(), self._model()
        if api is None or model is None:
            return None
        path = path or self._ask_file("Export ONNX", "winner.onnx", "ONNX model (*.onnx)")
        if not path:
            return None
        out = self._guard("Export ONNX", lambda: self._off(
            "Export ONNX", f"Building and checking {Path(path).name}…",
            lambda: api.export_onnx(model, path), process=(api.export_onnx, model, path)))
        return self._report_written("ONNX model written", out, path)

    def write_report(self, path: str | None = None) -> list[str] | None:
        api, s = export_api(), self.session
        if api is None or not (s.url and s.study_name):
            return None
        path = path or self._ask_file("Write the report", "report.html", "HTML report (*.html)")
        if not path:
            return None
        self.window.setCursor(Qt.CursorShape.WaitCursor)
        try:
            out = self._guard("Write report", lambda: api.write_report(s.url, path, study=s.study_name))
        finally:
            self.window.unsetCursor()
        files = self._report_written("Report written", out, path)
        if files:
            self.report_path = str(path)
            self.window.update_actions()
        return files

    def open_report(self) -> bool:
        if not self.report_path or not Path(self.report_path).exists():
            return False
        return QDesktopServices.openUrl(QUrl.fromLocalFile(self.report_path))

    def _report_written(self, what: str, out, path) -> list[str] | None:
        if out is None and not Path(path).exists():
            return None
        files = [str(p) for p in out] if isinstance(out, (list, tuple)) else [str(out or path)]
        if not self.window.quiet_dialogs:
            self._wrote(what, files)
        else:
            self._status(f"{what}: {', '.join(files)}")
        return files
