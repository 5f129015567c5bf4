"""Part of the main window: finding the winner of a map or group family and drawing it on step 4.

The winner comes from the search just run in the window (``SearchSession.result["model"]``), or,
for a search opened from storage, from the bundle the search left beside its ``winner.json``
(``model.npz``, read with ``labbench.export.load_bundle``). Its rows are the table on the Data
page (every row of the file, the hold-out rows included); the label column chosen there is shown
beside the groups.
"""

from __future__ import annotations

import logging
from pathlib import Path
from typing import Any

from labbench.errors import LabbenchError
from labbench.gui import map_numbers as mn
from labbench.gui.map_page import EMPTY
from labbench.maps.record import PrototypeRecord, SubspaceRecord

log = logging.getLogger("labbench.gui")

MAP_STEP = 3


def is_map_model(model: Any) -> bool:
    return model is not None and isinstance(getattr(model, "record", None), (PrototypeRecord, SubspaceRecord))


def stability_of(model: Any, summary: dict | None) -> dict:
    """The scores to show: the model's own (MAPS.md: TrainedModel.scores), completed from the
    winner check's summary (its ``stability`` and hold-out measures, where it carries them)."""
    scores = dict(getattr(model, "scores", None) or {})
    s = dict(summary or {})
    for key in ("stability", "holdout_measures", "holdout_score", "trial_number", "picked"):
        if scores.get(key) is None:
            value = s.get(key) if s.get(key) is not None else (s.get("scores") or {}).get(key)
            if value is not None:
                scores[key] = value
    return scores


class MapWinnerMixin:
    """Part of ``MainWindow``: ``update_map`` after a search ends or a stored one is opened;
    ``pick_map_trial`` refits a trial picked from the trade-off front and draws it."""

    _map_key: tuple | None = None
    _bundle_cache: tuple | None = None
    _picked: tuple | None = None          # (the result it was picked after, model, summary)
    _front_reader = None
    _front_shown: int | None = None

    def _connect_maps(self) -> None:
        self.maps.front.pick_requested.connect(self.pick_map_trial)

    def pick_map_trial(self, number: int) -> bool:
        """Refit trial ``number`` (``labbench run SPEC --pick N``) and draw its map."""
        from labbench.gui.front_view import pick_trial

        spec = self.session.spec
        if spec is None or self.session.running:
            return False
        try:
            out = self.take._off("Refit the picked trial", f"Refitting trial {number} and writing its files…",
                                 lambda: pick_trial(spec, number), process=(pick_trial, spec, number))
        except LabbenchError as exc:
            from PySide6.QtWidgets import QMessageBox

            QMessageBox.warning(self, "Refit the picked trial", str(exc))
            return False
        summary, model, files = out
        self._picked = (id(self.session.result), model, summary)
        self._map_key = None
        self.update_map()
        self.statusBar().showMessage(f"Trial {number} refitted; its files are in {Path(files[0]).parent}"
                                     if files else f"Trial {number} refitted", 10000)
        return True

    def _read_front(self, shown: int | None) -> None:
        from labbench.gui.bridge import Background
        from labbench.gui.front_view import read_front

        url, name = self.session.url, self.session.study_name
        if not (url and name):
            return
        if self._front_reader is None:
            self._front_reader = Background(self)
            self._front_reader.done.connect(
                lambda _key, result, error: error is None and result is not None
                and self.maps.front.show_front(result[0], result[1], self._front_shown))
        self._front_shown = shown
        self._front_reader.submit("front", lambda: read_front(url, name))

    def _bundle_model(self) -> Any | None:
        """The bundle beside the stored winner check (a search opened from storage)."""
        files = list(getattr(self.session.book, "winner_files", ()) or ())
        if not files:
            return None
        path = Path(files[0]).parent / "model.npz"
        if not path.exists():
            return None
        stamp = (str(path), path.stat().st_mtime_ns)
        if self._bundle_cache is not None and self._bundle_cache[0] == stamp:
            return self._bundle_cache[1]
        try:
            from labbench.export import load_bundle

            model = load_bundle(path)
        except (LabbenchError, OSError, ValueError, KeyError) as exc:
            log.warning("the map bundle %s could not be read: %s", path, exc)
            model = None
        self._bundle_cache = (stamp, model)
        return model

    def map_model(self) -> Any | None:
        result = self.session.result or {}
        if self._picked is not None and self._picked[0] == id(self.session.result):
            return self._picked[1]
        model = result.get("model")
        if is_map_model(model):
            return model
        model = self._bundle_model()
        return model if is_map_model(model) else None

    def update_map(self) -> None:
        """Show or hide step 4 and draw the winner's map when there is one."""
        from labbench.families import get_family

        from labbench.gui.core import loss_label

        model = None if self.session.running else self.map_model()
        spec = self.session.spec
        family = getattr(spec.space, "family", None) if spec is not None else self.space.family_name()
        self.watch.curves.set_loss_label(loss_label(family))
        try:
            map_family = not getattr(get_family(self.space.family_name()), "needs_target", True)
        except LabbenchError:
            map_family = False
        self.map_step.setHidden(not (map_family or model is not None))
        if model is None:
            self._map_key = None
            self.maps.clear("The search is running; its winner is drawn here when it ends."
                            if self.session.running and map_family else EMPTY)
            return
        frame = self.data.frame
        label = self.data.label()
        key = (id(model), id(frame), label)
        if key == self._map_key:
            return
        self._map_key = key
        missing = [] if frame is None else [c for c in model.features if c not in frame.columns]
        if frame is None or missing:
            self.maps.clear("Open the table this map was trained on (Data page) to see its rows on the map"
                            + (f"; missing columns: {', '.join(missing)}" if missing else "."))
            return
        try:
            data = mn.from_model(model, frame, None if label is None else frame[label].to_numpy(), label or "")
        except (LabbenchError, ValueError, KeyError, TypeError) as exc:
            self.maps.clear(f"The rows of this table cannot be shown on the map: {exc}")
            return
        summary = self.session.book.winner
        if self._picked is not None and self._picked[1] is model:
            summary = self._picked[2]
        self.maps.show_model(data, stability_of(model, summary))
        shown = (model.scores or {}).get("trial_number", (summary or {}).get("trial_number"))
        self._read_front(shown)
