"""Worker processes that train trials for the controller.

Each worker is a ``spawn``-started process that prepares the spec's folds once, then trains the
trials it is handed. Messages are plain tuples:

controller → worker (its own inbox):  ("trial", number, settings) | None (quit)
worker → controller (one shared queue):
    ("ready", index, pid)
    ("fatal", index, error_class_name, message)      preparing failed (bad data / spec / a bug)
    ("started", index, number)                       the worker began training that trial
    ("epoch", index, number, epoch, train_loss, val_loss, val_metric)
    ("done", index, number, result_dict)             see ``objective.run_trial``
    ("error", index, number, message, traceback)     a bug while training (not the user's fault)
    ("died", index, exitcode)                        synthesised by ``poll`` when a process is gone

A worker's inbox may hold one trial more than the one it trains (the controller asks the next
trial while the current one trains, so sampling and storage work overlap with training).

Stopping: the controller writes a trial number into the worker's shared ``stop`` value (that trial
stops after its current epoch), or sets its ``halt`` flag (cancel: the running trial stops after its
epoch and queued ones are handed back untrained, ``epochs_run`` 0). A worker whose controller has
gone (killed) stops after the current epoch, or within a second when idle. Workers ignore SIGINT:
a Ctrl-C in a terminal reaches the whole process group, and only the controller decides.
"""

from __future__ import annotations

import logging
import multiprocessing
import os
import pickle
import queue
import signal
import socket
import time
import traceback
from dataclasses import dataclass, field
from typing import Any

log = logging.getLogger("labbench.search.workers")

_THREAD_VARS = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")


def worker_main(index: int, spec_blob: bytes, data_sha256: str, inbox, outbox, stop, halt,
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
        if halt.value:
            outbox.put(("done", index, number, {"end": "stopped", "reason": "", "fold_scores": [],
                                                "epochs_run": 0, "duration_s": 0.0}))
            continue
        outbox.put(("started", index, number))

        def send(values, number=number):
            outbox.put(("epoch", index, number, *values))

        def should_stop(number=number) -> bool:
            return stop.value == number or bool(halt.value) or orphaned()

        cpu = time.process_time()
        try:
            result = run_trial(prepared, settings, seed=seed, on_epoch=send, should_stop=should_stop)
            result["cpu_s"] = time.process_time() - cpu     # the worker's CPU for this trial
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
    halt: Any
    state: str = "starting"          # starting | ready | gone
    numbers: list = field(default_factory=list)   # trials handed to it, oldest (training) first
    pid: int | None = None
    restarts: int = 0

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
        halt = self._ctx.Value("b", 0)
        level = logging.getLogger("labbench").getEffectiveLevel()
        process = self._ctx.Process(
            target=worker_main, name=f"labbench-worker-{index}", daemon=True,
            args=(index, self._blob, self._sha, inbox, self.outbox, stop, halt, self._threads,
                  level),
        )
        process.start()
        return process, inbox, stop, halt

    def start(self) -> None:
        for index in range(self.n):
            self.slots.append(_Slot(index, *self._new_process(index)))

    def restart(self, slot: _Slot) -> bool:
        """Replace a dead worker; False when it has died too often (then it stays gone)."""
        self._reap(slot)
        if slot.restarts >= self._max_restarts:
            slot.state = "gone"
            return False
        slot.process, slot.inbox, slot.stop, slot.halt = self._new_process(slot.index)
        slot.restarts += 1
        slot.state, slot.numbers, slot.pid = "starting", [], None
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

    def with_room(self, depth: int) -> list[_Slot]:
        """Ready workers holding fewer than ``depth`` trials (training + queued)."""
        return [s for s in self.slots if s.state == "ready" and len(s.numbers) < depth]

    def alive(self) -> list[_Slot]:
        return [s for s in self.slots if s.state != "gone"]

    def assign(self, slot: _Slot, number: int, settings: dict) -> None:
        slot.numbers.append(number)
        slot.inbox.put(("trial", number, settings))

    def release(self, slot: _Slot, number: int) -> None:
        """The worker is done with that trial (finished, stopped or failed)."""
        if number in slot.numbers:
            slot.numbers.remove(number)

    def stop(self, slot: _Slot, number: int) -> None:
        """Ask the worker to stop that trial after its current epoch."""
        slot.stop.value = number

    def halt(self, slot: _Slot) -> None:
        """Cancel: stop the running trial after its epoch, hand queued ones back untrained."""
        slot.halt.value = 1

    def poll(self, timeout: float) -> tuple | None:
        """The next message, a synthesised ("died", index, exitcode), or None after ``timeout``."""
        try:
            return self.outbox.get(timeout=timeout)
        except queue.Empty:
            pass
        for slot in self.slots:
            if slot.state in ("starting", "ready") and slot.process.exitcode is not None:
                return ("died", slot.index, slot.process.exitcode)
        return None
