"""The thread bridge: the search controller and storage reads run off the GUI thread.

* ``SearchThread`` runs one search (the same ``SearchRunner`` and winner step ``labbench run``
  uses) in a ``QThread``; the runner's ``emit`` is the thread's ``event`` signal, so every event
  (a frozen dataclass) is queued to the GUI thread. Stop sets the cancel event and returns at
  once; the GUI never blocks in ``wait()`` (see PLATFORM.md: a blocked GUI thread cannot run the
  queued ``finished`` handler).
* ``Background`` runs short jobs (storage polls, importance) on one Python worker thread and
  hands the result back through a queued signal; at most one job per key is in flight.
"""

from __future__ import annotations

import logging
import threading
import traceback
from concurrent.futures import ThreadPoolExecutor
from typing import Any, Callable

from PySide6.QtCore import QObject, QThread, Signal

from labbench.errors import LabbenchError

log = logging.getLogger("labbench.gui")


class SearchThread(QThread):
    """Runs ``job(emit, cancel)`` on its own thread; events and the end come back as signals."""

    event = Signal(object)          # a labbench.search.events.Event
    failed = Signal(str)            # one-line message (a LabbenchError's text, or what broke)
    outcome = Signal(object)        # whatever job returned

    def __init__(self, job: Callable[[Callable[[Any], None], threading.Event], Any], parent=None):
        super().__init__(parent)
        self.job = job
        self.cancel = threading.Event()

    def run(self) -> None:  # the worker thread
        try:
            result = self.job(self.event.emit, self.cancel)
        except LabbenchError as exc:
            self.failed.emit(str(exc))
        except Exception as exc:  # a bug, not a user error: keep the details in the log
            log.error("the search stopped with an error:\n%s", traceback.format_exc())
            self.failed.emit(f"the search stopped with an unexpected error: {type(exc).__name__}: {exc}")
        else:
            self.outcome.emit(result)

    def stop(self) -> None:
        """Ask the search to stop (it finishes the epoch in progress); never blocks."""
        self.cancel.set()


class Background(QObject):
    """One worker thread for short reads; results arrive on the GUI thread via ``done``."""

    done = Signal(str, object, object)   # key, result, error message (None when it worked)

    def __init__(self, parent=None):
        super().__init__(parent)
        self._pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="labbench-read")
        self._busy: set[str] = set()
        self._lock = threading.Lock()
        self._closed = False

    def busy(self, key: str) -> bool:
        with self._lock:
            return key in self._busy

    def submit(self, key: str, fn: Callable[[], Any]) -> bool:
        """Run ``fn`` unless a job with this key is still running. Returns whether it was queued."""
        with self._lock:
            if self._closed or key in self._busy:
                return False
            self._busy.add(key)

        def work() -> None:
            try:
                result, error = fn(), None
            except LabbenchError as exc:
                result, error = None, str(exc)
            except Exception as exc:
                log.warning("background %s failed: %s", key, traceback.format_exc())
                result, error = None, f"{type(exc).__name__}: {exc}"
            with self._lock:
                self._busy.discard(key)
                closed = self._closed
            if not closed:
                self.done.emit(key, result, error)

        self._pool.submit(work)
        return True

    def close(self) -> None:
        with self._lock:
            self._closed = True
        self._pool.shutdown(wait=False, cancel_futures=True)
