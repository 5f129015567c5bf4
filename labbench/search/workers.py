"""Worker processes that train trials for the controller.

Each worker is a ``spawn``-started process that prepares the spec's folds once, then trains the
trials it is handed. Messages are plain tuples:

controller → worker (its own inbox):  ("trial", number, settings) | None (quit)
worker → controller (one shared queue):
    ("ready", index, pid)
    ("fatal", index, error_class_name, message)      preparing failed (bad data / spec / a bug)
    ("epoch", index, number, epoch, train_loss, val_loss, val_metric)
    ("done", index, number, result_dict)             see ``objective.run_trial``
    ("error", index, number, message, traceback)     a bug while training (not the user's fault)
    ("died", index, exitcode)                        synthesised by ``poll`` when a process is gone

Stopping a trial after its current epoch: the controller writes the trial number into the
worker's shared ``stop`` value; the worker checks it after every epoch. A worker whose controller
has gone (killed) stops after the current epoch, or within a second when idle. Workers ignore SIGINT: a
Ctrl-C in a terminal reaches the whole process group, and only the controller decides what to do.
"""

from __future__ import annotations

import logging
import multiprocessing
import os
import pickle
import queue
import signal
import socket
import traceback
from dataclasses import dataclass, field
from typing import Any

log = logging.getLogger("labbench.search.workers")

_THREAD_VARS = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")


def worker_main(index: int, spec_blob: bytes, data_sha256: str, inbox, outbox, stop,
                threads: int, log_level: int) -> None:
    """Entry point of a worker process (module-level so ``spawn`` can import it)."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    for var in _THREAD_VARS:                 # before numpy is imported in this process
        os.environ.setdefault(var, str(threads))
    logging.basicConfig(level=log_level, format="%(levelname)s %(name)s[worker]: %(message)s")
    try:
        from labbench.errors import DataError, LabbenchError
        from labbench.search.objective import run_trial
        from labbench.search.prepare import prepare

        spec = pickle.loads(spec_blob)
        root = logging.getLogger("labbench")
        root.setLevel(max(log_level, logging.ERROR))   # the controller already said its warnings
        prepared = prepare(spec)
        root.setLevel(log_level)
        if data_sha256 and prepared.table.sha256 != data_sha256:
            raise DataError(f"{spec.data.path}: the file changed while the search was starting; "
                            "run the search again")
    except LabbenchError as exc:
        outbox.put(("fatal", index, type(exc).__name__, str(exc)))
        return
    except BaseException as exc:  # a bug: say what and where
        outbox.put(("fatal", index, "bug", f"{type(exc).__name__}: {exc}\n{traceback.format_exc()}"))
        return
    outbox.put(("ready", index, os.getpid()))
    seed = int(spec.evaluation.seed)
    parent = multiprocessing.parent_process()
    orphaned = (lambda: not parent.is_alive()) if parent is not None else (lambda: False)
    while True:
        try:
            message = inbox.get(timeout=1.0)
        except queue.Empty:
            if orphaned():        # the controller was killed: nobody will ever read our results
                return
            continue
        if message is None:
            break
        _, number, settings = message

        def send(values, number=number):
            outbox.put(("epoch", index, number, *values))

        try:
            result = run_trial(prepared, settings, seed=seed, on_epoch=send,
                               should_stop=lambda number=number: stop.value == number or orphaned())
        except Exception as exc:
            outbox.put(("error", index, number, f"{type(exc).__name__}: {exc}",
                        traceback.format_exc()))
            continue
        outbox.put(("done", index, number, result))


@dataclass
class _Slot:
    index: int
    process: Any
    inbox: Any
    stop: Any
    state: str = "starting"          # starting | idle | busy | gone
    number: int | None = None        # trial in hand
    pid: int | None = None
    restarts: int = 0
    info: dict = field(default_factory=dict)

    @property
    def label(self) -> str:
        return f"{socket.gethostname()}:{self.pid or self.process.pid}"


class WorkerPool:
    """``n`` worker processes, their inboxes, and the one queue they all answer on."""

    def __init__(self, spec: Any, n: int, *, data_sha256: str = "", threads: int | None = None,
                 max_restarts: int = 2):
        self._ctx = multiprocessing.get_context("spawn")
        self._blob = pickle.dumps(spec)
        self._sha = data_sha256
        # One BLAS thread per worker: the matrices of small networks are too small for threads to
        # pay (measured here: 2 OpenBLAS threads made a digits trial 5-9 x slower on a busy
        # 2-core machine); parallelism comes from the workers. An explicit
        # OPENBLAS_NUM_THREADS / OMP_NUM_THREADS in the environment still wins.
        self._threads = threads or 1
        self._max_restarts = max_restarts
        self.outbox = self._ctx.Queue()
        self.slots: list[_Slot] = []
        self.n = n

    # ---- lifecycle

    def _new_process(self, index: int):
        inbox = self._ctx.Queue()
        stop = self._ctx.Value("q", -1)
        level = logging.getLogger("labbench").getEffectiveLevel()
        process = self._ctx.Process(
            target=worker_main, name=f"labbench-worker-{index}", daemon=True,
            args=(index, self._blob, self._sha, inbox, self.outbox, stop, self._threads, level),
        )
        process.start()
        return process, inbox, stop

    def start(self) -> None:
        for index in range(self.n):
            process, inbox, stop = self._new_process(index)
            self.slots.append(_Slot(index, process, inbox, stop))

    def restart(self, slot: _Slot) -> bool:
        """Replace a dead worker; False when it has died too often (then it stays gone)."""
        self._reap(slot)
        if slot.restarts >= self._max_restarts:
            slot.state = "gone"
            return False
        slot.process, slot.inbox, slot.stop = self._new_process(slot.index)
        slot.restarts += 1
        slot.state, slot.number, slot.pid = "starting", None, None
        return True

    def shutdown(self, timeout: float = 5.0) -> None:
        """Ask every worker to quit, wait a little, then terminate what is left. Safe to repeat."""
        for slot in self.slots:
            if slot.process.is_alive():
                try:
                    slot.inbox.put_nowait(None)
                except Exception:
                    pass
        for slot in self.slots:
            slot.process.join(timeout)
            self._reap(slot)
            slot.state = "gone"
        self.outbox.cancel_join_thread()
        self.outbox.close()

    def _reap(self, slot: _Slot) -> None:
        process = slot.process
        if process.is_alive():
            process.terminate()
            process.join(2.0)
        if process.is_alive():
            process.kill()
            process.join(2.0)
        slot.inbox.cancel_join_thread()
        slot.inbox.close()

    # ---- work

    def idle(self) -> list[_Slot]:
        return [s for s in self.slots if s.state == "idle"]

    def busy(self) -> list[_Slot]:
        return [s for s in self.slots if s.state == "busy"]

    def alive(self) -> list[_Slot]:
        return [s for s in self.slots if s.state != "gone"]

    def assign(self, slot: _Slot, number: int, settings: dict) -> None:
        slot.state, slot.number = "busy", number
        slot.inbox.put(("trial", number, settings))

    def stop(self, slot: _Slot) -> None:
        """Ask the worker to stop its trial after the current epoch."""
        if slot.number is not None:
            slot.stop.value = slot.number

    def poll(self, timeout: float) -> tuple | None:
        """The next message, a synthesised ("died", index, exitcode), or None after ``timeout``."""
        try:
            return self.outbox.get(timeout=timeout)
        except queue.Empty:
            pass
        for slot in self.slots:
            if slot.state in ("starting", "idle", "busy") and slot.process.exitcode is not None:
                return ("died", slot.index, slot.process.exitcode)
        return None
