"""The thread bridge: the search controller and storage reads run off the GUI thread.

* ``SearchThread`` runs one search (the same ``SearchRunner`` and winner step ``labbench run``
  uses) in a ``QThread``. Stop sets the cancel event and returns at once; the GUI never blocks
  in ``wait()`` (see PLATFORM.md: a blocked GUI thread cannot run the queued ``finished``
  handler).
* ``Background`` runs short jobs (storage polls, importance) on one Python worker thread; at most
  one job per key is in flight.

No Qt signal is emitted from a thread other than the GUI thread. Work threads put what they have
(events, results, errors) into a ``Mailbox``, a plain ``queue.SimpleQueue``, and a timer on the
GUI thread empties it every ``Mailbox.EVERY_MS`` and emits the signals there. Emitting from a
work thread takes a Qt lock and then needs the interpreter lock to copy the arguments, while the
GUI thread, deleting a widget during garbage collection, holds the interpreter lock and waits
for Qt locks of the same pool: the two threads then wait for each other forever (seen in the
test suite: a window of an earlier test collected while 50,000 events crossed).
"""

from __future__ import annotations

import logging
import os
import queue
import threading
import traceback
from concurrent.futures import ThreadPoolExecutor
from typing import Any, Callable

from PySide6.QtCore import QObject, QThread, QTimer, Signal

from labbench.errors import LabbenchError

log = logging.getLogger("labbench.gui")


class Mailbox:
    """What work threads hand to the GUI thread: ``post(signal, *args)`` from any thread; a timer
    on the GUI thread (the owner's) emits them there, in order (see the module text)."""

    EVERY_MS = 20

    def __init__(self, owner: QObject):
        self._box: queue.SimpleQueue = queue.SimpleQueue()
        self._timer = QTimer(owner)
        self._timer.setInterval(self.EVERY_MS)
        self._timer.timeout.connect(self.deliver)
        self._timer.start()

    def post(self, signal, *args: Any) -> None:
        self._box.put((signal, args))

    def deliver(self) -> None:
        """Emit everything posted so far (GUI thread only)."""
        while True:
            try:
                signal, args = self._box.get_nowait()
            except queue.Empty:
                return
            signal.emit(*args)

    def stop(self) -> None:
        self._timer.stop()


class SearchThread(QThread):
    """Runs ``job(emit, cancel)`` on its own thread; events and the end come back as signals,
    emitted on the GUI thread (``Mailbox``). Everything the job posted is delivered before the
    thread's ``finished`` reaches any handler connected after construction."""

    event = Signal(object)          # a labbench.search.events.Event
    failed = Signal(str)            # one-line message (a LabbenchError's text, or what broke)
    outcome = Signal(object)        # whatever job returned

    def __init__(self, job: Callable[[Callable[[Any], None], threading.Event], Any], parent=None):
        super().__init__(parent)
        self.job = job
        self.cancel = threading.Event()
        self.mail = Mailbox(self)
        self.finished.connect(self._last_delivery)     # first: before the owner's handler

    def _last_delivery(self) -> None:
        self.mail.deliver()
        self.mail.stop()

    def _emit_event(self, event: Any) -> None:        # the job's ``emit``, on the work thread
        self.mail.post(self.event, event)

    def run(self) -> None:  # the worker thread
        try:
            result = self.job(self._emit_event, self.cancel)
        except LabbenchError as exc:
            self.mail.post(self.failed, str(exc))
        except Exception as exc:  # a bug, not a user error: keep the details in the log
            log.error("the search stopped with an error:\n%s", traceback.format_exc())
            self.mail.post(self.failed, f"the search stopped with an unexpected error: "
                                        f"{type(exc).__name__}: {exc}")
        else:
            self.mail.post(self.outcome, result)

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
        self.mail = Mailbox(self)

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
                if not self._closed:      # delivered on the GUI thread (Mailbox)
                    self.mail.post(self.done, key, result, error)

        self._pool.submit(work)
        return True

    def submit_process(self, key: str, fn: Callable[..., Any], *args: Any) -> bool:
        """Run a picklable ``fn(*args)`` in a helper process (spawned on first use).

        For CPU-bound Python (parameter importance): in a thread of this process it would hold
        the interpreter lock against the GUI thread, and its first call imports modules.
        """
        from concurrent.futures import ProcessPoolExecutor
        import multiprocessing as mp

        with self._lock:
            if self._closed or key in self._busy:
                return False
            self._busy.add(key)
            try:
                if getattr(self, "_procs", None) is None:
                    self._procs = ProcessPoolExecutor(max_workers=1, mp_context=mp.get_context("spawn"),
                                                      initializer=_be_nice)
                future = self._procs.submit(fn, *args)
            except Exception as exc:   # no helper process (e.g. a script without a main guard)
                self._busy.discard(key)
                log.warning("helper process for %s not started: %s", key, exc)
                return False

        def finished(f) -> None:
            try:
                result, error = f.result(), None
            except LabbenchError as exc:
                result, error = None, str(exc)
            except Exception as exc:
                result, error = None, f"{type(exc).__name__}: {exc}"
            with self._lock:
                self._busy.discard(key)
                if not self._closed:      # delivered on the GUI thread (Mailbox)
                    self.mail.post(self.done, key, result, error)

        future.add_done_callback(finished)
        return True

    def close(self) -> None:
        with self._lock:
            self._closed = True
        self.mail.stop()
        self._pool.shutdown(wait=False, cancel_futures=True)
        procs = getattr(self, "_procs", None)
        if procs is not None:      # an importance job takes well under a second: let it end
            procs.shutdown(wait=True, cancel_futures=True)


# ------------------------------------------------------------------------------------------
# the controller in a child process

NICE = 5    # the search (and the training processes it starts, which inherit it) yields the CPU
            # to the window when both want it; alone on the machine it runs at full speed


def _be_nice() -> None:
    try:
        os.nice(NICE)
    except (AttributeError, OSError):   # not on this platform / not allowed
        pass


def _child_main(job, queue, stop, parent_pid: int) -> None:  # runs in the spawned process
    """Run ``job(emit, cancel)``; events, the result or the error go back through ``queue``.

    ``cancel`` (a threading.Event here) is set when the window asks (``stop``) or when the
    window's process is gone (killed): the search then ends its trials as "cancelled".
    """
    import os
    import pickle
    import time

    _be_nice()
    cancel = threading.Event()
    _forward_warnings(queue)
    _stop_on_sigterm(cancel)

    def watch() -> None:
        while not cancel.is_set():
            if stop.wait(0.05):
                cancel.set()
                return
            if os.getppid() != parent_pid:      # the window was killed: nobody reads the queue
                queue.cancel_join_thread()
                cancel.set()
                return

    threading.Thread(target=watch, name="labbench-watch-window", daemon=True).start()
    try:
        result = job(lambda e: queue.put(("event", e)), cancel)
        try:
            blob = pickle.dumps(result)
        except Exception as exc:  # a result that cannot travel: keep what can
            log.warning("the search result could not be sent to the window: %s", exc)
            blob = pickle.dumps({k: v for k, v in result.items() if k != "model"})
        queue.put(("done", blob))
    except LabbenchError as exc:
        queue.put(("failed", str(exc)))
    except BaseException as exc:
        log.error("the search stopped with an error:\n%s", traceback.format_exc())
        queue.put(("failed", f"the search stopped with an unexpected error: {type(exc).__name__}: {exc}"))
    finally:
        time.sleep(0.05)


class _NoticeHandler(logging.Handler):
    """The core's warnings (rows dropped, a fold too small, a column left out) as Notice events:
    in the window they belong in its notice strip, not only in a terminal nobody watches."""

    def __init__(self, queue):
        super().__init__(logging.WARNING)
        self.queue = queue

    def emit(self, record: logging.LogRecord) -> None:
        try:
            from labbench.search import events as ev

            text = record.getMessage().strip().splitlines()[0] if record.getMessage().strip() else ""
            if text:
                self.queue.put(("event", ev.Notice(text, "warning")))
        except Exception:       # a notice must never stop the search
            pass


def _forward_warnings(queue) -> None:
    root = logging.getLogger("labbench")
    root.addHandler(_NoticeHandler(queue))
    if root.level == logging.NOTSET or root.level > logging.WARNING:
        root.setLevel(logging.WARNING)


def _stop_on_sigterm(cancel: threading.Event) -> None:
    """SIGTERM (a desktop logout signals every process of the session) ends the trials in flight
    as stopped, like the window's Stop, instead of killing the search with them RUNNING."""
    import signal

    try:
        signal.signal(signal.SIGTERM, lambda _s, _f: cancel.set())
    except (ValueError, OSError, AttributeError):    # not the main thread / not this platform
        pass


class _EitherSet:
    """``is_set`` / ``set`` over the process-shared stop flag (what ``SearchThread.cancel`` offers)."""

    def __init__(self, event):
        self._event = event

    def is_set(self) -> bool:
        return self._event.is_set()

    def set(self) -> None:
        self._event.set()


class SearchProcess(SearchThread):
    """Like ``SearchThread`` but ``job`` runs in a spawned process; this QThread only relays.

    The controller is busy Python (Optuna's sampler, pruner, storage); in the window's process it
    competes with the GUI thread for the interpreter lock and the event loop stalls (see
    benchmarks/bench_gui.py). ``job`` must be picklable (a module-level function + partial).
    """

    def __init__(self, job, parent=None):
        import multiprocessing as mp

        super().__init__(job, parent)
        ctx = mp.get_context("spawn")
        self._queue = ctx.Queue()
        self._stop = ctx.Event()
        self.cancel = _EitherSet(self._stop)
        self._proc = ctx.Process(target=_child_main, name="labbench-search",
                                 args=(job, self._queue, self._stop, os.getpid()))

    def run(self) -> None:  # the relay thread
        import pickle
        import queue as queue_mod

        try:
            self._proc.start()
        except Exception as exc:
            self.mail.post(self.failed, f"the search process could not start: "
                                        f"{type(exc).__name__}: {exc}")
            return
        ended = False
        while not ended:
            try:
                kind, payload = self._queue.get(timeout=0.2)
            except queue_mod.Empty:
                if not self._proc.is_alive():
                    try:
                        kind, payload = self._queue.get(timeout=1.0)
                    except queue_mod.Empty:
                        self.mail.post(self.failed, f"the search process stopped unexpectedly "
                                                    f"(exit code {self._proc.exitcode}); the "
                                                    "trials so far are stored")
                        break
                else:
                    continue
            if kind == "event":
                self.mail.post(self.event, payload)
            elif kind == "done":
                self.mail.post(self.outcome, pickle.loads(payload))
                ended = True
            else:
                self.mail.post(self.failed, str(payload))
                ended = True
        self._proc.join(30.0)
        self._queue.close()
