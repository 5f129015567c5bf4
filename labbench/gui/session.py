"""One search as the window sees it: run it (events) or watch it in storage (polls), and redraw.

The session owns the ``TrialBook``, the worker thread of a running search, the background reader
(storage polls, importance) and the redraw timer. Everything it hands to the widgets happens on
the GUI thread; everything slow (the controller, ``get_trials``, importance) happens elsewhere.
"""

from __future__ import annotations

import logging
import time
from typing import Any

from PySide6.QtCore import QObject, QTimer, Signal

from labbench.gui import core, theme
import functools

from labbench.gui.bridge import Background, SearchProcess, SearchThread
from labbench.gui.search_job import budget_used, run_search, stored_winner, trials_to_run  # noqa: F401
from labbench.gui.trialbook import TrialBook
from labbench.search import events as ev

log = logging.getLogger("labbench.gui")

REDRAW_MS = 40          # the plots redraw at most this often, never per event
POLL_MS = 2000          # storage poll while watching a search run elsewhere
IMPORTANCE_S = 4.0      # importance is recomputed at most this often
SYNC_MS = 5000          # during a run, finished trials are checked against storage this often


class _Studies:
    """Optuna studies opened for reading, cached per (url, name); used on the reader thread only."""

    def __init__(self) -> None:
        self.cache: dict[tuple[str, str], Any] = {}

    def get(self, url: str, name: str):
        key = (url, name)
        if key not in self.cache:
            import optuna
            from labbench.search.storage import quiet_optuna_warnings
            from labbench.search.strategy import route_optuna_logging

            route_optuna_logging()
            quiet_optuna_warnings()
            from labbench.errors import SpecError
            from labbench.search.storage import mask_url

            from labbench.search.stored import read_storage

            storage = read_storage(url)
            try:
                self.cache[key] = optuna.load_study(study_name=name, storage=storage)
            except KeyError:
                raise SpecError(f"storage {mask_url(url)}: no search named '{name}' is stored "
                                "there yet") from None
        return self.cache[key]


class SearchSession(QObject):
    changed = Signal()            # running / watching / winner state changed
    failed = Signal(str)          # a one-line message for a dialog
    finished = Signal(object)     # the run_search result (dict) or None after an error
    notice = Signal(str, str)     # text, "info" | "warning": for the window's notice strip

    def __init__(self, view, parent=None):
        super().__init__(parent)
        self.view = view
        self.book = TrialBook()
        self.selected: int | None = None
        self.thread: SearchThread | None = None
        self.result: dict[str, Any] | None = None
        self.spec = None
        self.url: str | None = None
        self.study_name: str | None = None
        self.watching = False
        self.in_process = False      # True: the controller in a QThread of this process
        self._quiet_missing = False
        self.reader = Background(self)
        self.reader.done.connect(self._read_done)
        self.studies = _Studies()
        self._drawn = None
        self._imp_key = None
        self._seen: dict[int, tuple] = {}
        self.synced = False
        self._imp_at = 0.0
        self.redraw = QTimer(self)
        self.redraw.setInterval(REDRAW_MS)
        self.redraw.timeout.connect(self.draw)
        self.redraw.start()
        self.poll = QTimer(self)
        self.poll.setInterval(POLL_MS)
        self.poll.timeout.connect(self._poll)
        self.sync = QTimer(self)             # during a run: stored attrs of the finished trials
        self.sync.setInterval(SYNC_MS)
        self.sync.timeout.connect(self._sync)
        self.imp_timer = QTimer(self)
        self.imp_timer.setInterval(1000)
        self.imp_timer.timeout.connect(self._maybe_importance)
        self.imp_timer.start()
        view.picked.connect(self.select)

    # ------------------------------------------------------------------ state
    @property
    def running(self) -> bool:
        return self.thread is not None

    def select(self, number: int | None) -> None:
        self.selected = number

    def _reset(self) -> None:
        self.book.clear()
        self.view.reset()
        self.view.importance.show_result({}, "")
        self.result = None
        self._imp_key = None
        self._seen: dict[int, tuple] = {}
        self.selected = None
        self.synced = False          # True once the book was checked against storage at the end

    # ------------------------------------------------------------------ running
    def start(self, spec, *, fresh: bool = False, in_process: bool | None = None,
              more: int | None = None) -> None:
        """Run the search. By default the controller runs in a child process (``SearchProcess``)
        so its Python work never competes with the event loop; ``in_process=True`` runs it in a
        worker QThread of this process instead."""
        from labbench.search.storage import resolve_url

        if self.running:
            return
        self.stop_watching()
        url, name = resolve_url(spec), spec.study_name()
        if fresh or (url, name) != (self.url, self.study_name) or self.book.study_name != name:
            self._reset()
        else:
            # the same search continues: its stored trials stay on show while it restarts (the
            # new run's events and the "earlier" read bring them up to date)
            self.result = None
            self.book.winner = None
        self.spec = spec
        self.url, self.study_name = url, name
        in_process = self.in_process if in_process is None else in_process
        job = functools.partial(run_search, spec, fresh=fresh, more=more)
        self.thread = SearchThread(job, self) if in_process else SearchProcess(job, self)
        self.thread.event.connect(self._on_event)
        self.thread.failed.connect(self._on_failed)
        self.thread.outcome.connect(self._on_outcome)
        self.thread.finished.connect(self._on_thread_finished)
        self.thread.start()
        self.sync.start()
        self.changed.emit()

    def stop(self) -> None:
        if self.thread is not None:
            self.thread.stop()
            self.changed.emit()

    @property
    def stopping(self) -> bool:
        return self.thread is not None and self.thread.cancel.is_set()

    def _on_event(self, event: ev.Event) -> None:
        self.book.apply(event)
        if isinstance(event, ev.Notice):
            self.notice.emit(event.text, event.level)
        elif isinstance(event, ev.TrialEnded) and event.state == "failed":
            self.notice.emit(f"trial {event.number} failed: {event.reason or 'no reason given'}", "warning")
        if isinstance(event, ev.SearchStarted) and event.existing_trials and self.url:
            url, name = self.url, event.study_name
            # the trials of earlier runs come from storage (new ones arrive as events)
            self.reader.submit("earlier", lambda: core.read_study(self.studies.get(url, name)))
        if isinstance(event, ev.WinnerReady):
            # the winner check ends with the core's importance over every trial: show that one
            imp = dict(event.summary.get("importance") or {})
            self.view.importance.show_result(dict(imp.get("values") or {}), str(imp.get("message") or ""))
            done = sum(1 for r in self.book.records.values() if r.state == "complete")
            self._imp_key = (self.url, self.study_name, done)
            self._drawn = None
        if isinstance(event, (ev.SearchEnded, ev.WinnerReady)):
            self.changed.emit()

    def _on_failed(self, message: str) -> None:
        self.result = None
        self.notice.emit(f"the search stopped: {message}", "warning")
        self.failed.emit(message)

    def _on_outcome(self, result: dict) -> None:
        self.result = result

    def _sync(self) -> None:
        if self.running and self.url and self.study_name and self.book.study_name:
            url, name = self.url, self.study_name
            self.reader.submit("sync", lambda: core.read_study(self.studies.get(url, name)))

    def _on_thread_finished(self) -> None:
        self.sync.stop()
        thread, self.thread = self.thread, None
        if thread is not None:
            thread.deleteLater()
        if self.book.winner is None:
            self._imp_key, self._imp_at = None, 0.0   # one last importance read, with every trial
        if self.url and self.study_name and self.book.study_name:
            # the stored attrs (std across folds, durations) complete what the events carried
            url, name = self.url, self.study_name
            self.reader.submit("final", lambda: core.read_study(self.studies.get(url, name)))
        self.finished.emit(self.result)
        self.changed.emit()

    # ------------------------------------------------------------------ watching storage
    def watch(self, url: str, name: str, spec=None, *, quiet: bool = False) -> None:
        """Show (and keep polling) the trials a storage holds for one search.

        ``quiet``: a storage without that search yet is not an error (an experiment never run).
        """
        if self.running:
            return
        self._reset()
        self._quiet_missing = quiet
        self.url, self.study_name, self.spec = url, name, spec
        self.watching = True
        self.studies.cache.pop((url, name), None)
        self._poll()
        self.poll.start()
        self.reader.submit("winner", lambda: stored_winner(url, name, spec))
        self.changed.emit()

    def stop_watching(self) -> None:
        self.poll.stop()
        self.watching = False

    def _poll(self) -> None:
        if self.url and self.study_name:
            url, name = self.url, self.study_name
            self.reader.submit("poll", lambda: core.read_study(self.studies.get(url, name)))

    def _read_done(self, key: str, result, error: str | None) -> None:
        if key == "warm":
            return
        if key == "winner":
            summary, files = result if error is None and result else (None, ())
            if summary is not None and not self.running and self.book.winner is None:
                self.book.winner, self.book.winner_files = summary, files
                self.book.version += 1
                self.book.finished_version += 1
                self._drawn = None
                imp = dict(summary.get("importance") or {})
                if imp.get("values") and hasattr(self.view, "importance"):
                    self.view.importance.show_result(dict(imp["values"]), str(imp.get("message") or ""))
                self.changed.emit()
            return
        if key == "importance":
            values, message = result if error is None else ({}, f"Importance could not be read: {error}")
            self.view.importance.show_result(values, message)
            self._drawn = None
            return
        if error is not None:
            if key == "final":
                log.warning("reading the search back from storage failed: %s", error)
                self.synced = True
            if key == "poll":
                self.stop_watching()
                if not (self._quiet_missing and "no search named" in error):
                    self.failed.emit(error)
                self.url = self.url if self.spec is not None else None
            return
        snaps, best, attrs = result
        if key == "final":
            self.book.merge_snapshots(snaps, best_number=best)
            self.synced = True
            self.changed.emit()
            return
        if key == "sync":
            # finished trials only: what is training is the events' business
            done = [x for x in snaps if x.state not in ("running", "waiting")
                    and (x.number not in self.book.records or self.book.records[x.number].finished)]
            self.book.merge_snapshots(done, best_number=self.book.best_number)
            return
        if key == "earlier":
            known = set(self.book.records)
            self.book.merge_snapshots([s for s in snaps if s.number not in known],
                                      best_number=self.book.best_number if self.book.best_number
                                      is not None else best)
            return
        if key == "poll" and self.watching:
            self.synced = True
            b = self.book
            searched = tuple(attrs.get("searched") or ())
            if (searched, attrs.get("direction")) != (b.searched, b.direction):
                b.searched, b.log_scaled = searched, tuple(attrs.get("log_scaled") or ())
                b.structure_version += 1
            b.metric = str(attrs.get("metric", "") or "")
            b.direction = str(attrs.get("direction", "maximize") or "maximize")
            b.storage, b.study_name = self.url or "", self.study_name or ""
            b.merge_snapshots(core.changed_only(snaps, self._seen), best_number=best)

    # ------------------------------------------------------------------ importance
    def _maybe_importance(self) -> None:
        if not (self.url and self.study_name):
            return
        done = sum(1 for r in self.book.records.values() if r.state == "complete")
        if not done:        # never open a storage before the runner has created it
            return
        key = (self.url, self.study_name, done)
        if key == self._imp_key or time.monotonic() - self._imp_at < IMPORTANCE_S:
            return
        if self.reader.busy("importance"):
            return
        self._imp_key, self._imp_at = key, time.monotonic()
        url, name = self.url, self.study_name
        self.reader.submit_process("importance", core.importance_of, url, name)

    # ------------------------------------------------------------------ drawing
    def draw(self) -> None:
        t = theme.Theme.current()
        key = (self.book.version, self.selected, t.background.name())
        if key == self._drawn:
            return
        pending = self.view.refresh(self.book, self.book.take_changed(), self.selected, t)
        # a picture that waited for its turn is drawn on the next tick
        self._drawn = None if pending else key

    def flush(self) -> None:
        """Bring every picture up to date now (before exporting, and in tests)."""
        t = theme.Theme.current()
        for _ in range(12):
            if not self.view.refresh(self.book, self.book.take_changed(), self.selected, t):
                break
        self._drawn = (self.book.version, self.selected, t.background.name())

    def warm_up(self) -> None:
        """Import the search machinery on the reader thread once the window is up, so that
        starting a search never stalls the event loop on a first import."""
        def imports():
            import optuna  # noqa: F401
            import sqlalchemy  # noqa: F401

            from labbench.search import commands, insight, runner, spec_edit, storage, winner  # noqa: F401
            from labbench.gui import search_job  # noqa: F401
            try:
                import labbench.export  # noqa: F401
            except ImportError:
                pass
            return True

        self.reader.submit("warm", imports)

    def close(self) -> None:
        self.redraw.stop()
        self.poll.stop()
        self.sync.stop()
        self.imp_timer.stop()
        self.reader.close()
