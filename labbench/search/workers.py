"""Worker processes that train trials for the controller.

Each worker is a ``spawn``-started process that prepares the spec's folds once, then trains the
trials it is handed. Each worker has its own two-way pipe to the controller, and nothing else is
shared but lock-free numbers (the ``stop`` ring of trial numbers, the ``halt`` flag): a worker
killed at any moment can break only its own pipe, never block the controller or another worker.
Messages are plain tuples:

controller → worker:  ("trials", [(number, settings), ...]) | None (quit)
                      (trials of one shape trained as one stack: ``labbench.search.together``)
worker → controller:
    ("ready", index, pid)
    ("fatal", index, error_class_name, message)      preparing failed (bad data / spec / a bug)
    ("started", index, number)                       the worker began training that trial
                                                     (each trial of a group, when the group begins)
    ("epoch", index, number, epoch, train_loss, val_loss, val_metric)
    ("done", index, number, result_dict)             see ``objective.run_trial``
    ("error", index, number, message, traceback)     a bug while training (not the user's fault)
    ("died", index, exitcode, why)                   synthesised by ``poll``: the process is gone

``poll`` waits on every worker's pipe and process sentinel at once
(``multiprocessing.connection.wait``), reads what a dead worker sent before it died, then reports
its death. A watchdog kills a worker that holds a trial and has sent nothing for
``max(silent_s, 10 × its longest gap so far)`` seconds (``LABBENCH_WATCHDOG`` sets ``silent_s``,
default 300 s); it is then reported as died. ``restart`` replaces a dead worker at most
``max_restarts`` times.

A worker may hold one group more than the one it trains (the controller asks the next trials
while the current ones train, so sampling and storage work overlap with training).

Stopping: the controller writes a trial number into the worker's ``stop`` ring (that trial stops
after its current epoch; the others of its group train on), or sets its ``halt`` flag (cancel:
the running trials stop after their epoch and queued ones are handed back untrained,
``epochs_run`` 0). A worker whose controller has
gone (killed) stops after the current epoch, or within a second when idle. Workers ignore SIGINT:
a Ctrl-C in a terminal reaches the whole process group, and only the controller decides.
"""

from __future__ import annotations

import collections
import logging
import multiprocessing
import multiprocessing.connection
import os
import pickle
import signal
import socket
import time
import traceback
from dataclasses import dataclass, field
from typing import Any

from labbench.errors import DataError, LabbenchError
from labbench.search.prepare import prepare
from labbench.search.together import run_together

log = logging.getLogger("labbench.search.workers")

_THREAD_VARS = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")
#: Trial numbers to stop, written round by the controller: more than a worker ever holds.
STOP_RING = 64
WATCHDOG_ENV = "LABBENCH_WATCHDOG"


class _ControllerGone(Exception):
    pass


#: The dtype trials train in (``objective.run_trial``'s default): the fold inputs are prepared in
#: it (half the memory of float64; the values the engine would convert them to anyway, and a
#: stack too large for an epoch block then trains on these very arrays, ``labbench.nets.stack``).
TRAIN_DTYPE = "float32"


def _limit_blas(threads: int) -> None:
    """Limit the BLAS already loaded to ``threads`` threads. Importing this module loads numpy
    (and its BLAS reads the thread variables then), so setting them in ``worker_main`` came too
    late: each worker ran OpenBLAS with a thread per core, and the engine's own one-thread limit
    (``labbench.nets.blas``) stands aside when the variables are set. Measured: two workers took
    ~4 × the CPU per trial of one and a run with two workers was 2 × SLOWER than with one."""
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:
        return
    threadpool_limits(limits=max(1, threads), user_api="blas")


def worker_main(index: int, spec_blob: bytes, data_sha256: str, conn, stop, halt,
                threads: int, log_level: int) -> None:
    """Entry point of a worker process (module-level so ``spawn`` can import it)."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    for var in _THREAD_VARS:                 # for libraries loaded from here on
        os.environ.setdefault(var, str(threads))
    _limit_blas(int(os.environ.get("OPENBLAS_NUM_THREADS") or threads))
    logging.basicConfig(level=log_level, format="%(levelname)s %(name)s[worker]: %(message)s")

    def put(message) -> None:
        try:
            conn.send(message)
        except (OSError, EOFError, ValueError):   # the controller's end is closed: it has gone
            raise _ControllerGone from None

    try:
        _serve(index, spec_blob, data_sha256, conn, put, stop, halt, log_level)
    except _ControllerGone:
        return
    finally:
        conn.close()


def _serve(index, spec_blob, data_sha256, conn, put, stop, halt, log_level) -> None:
    try:
        spec = pickle.loads(spec_blob)
        root = logging.getLogger("labbench")
        root.setLevel(max(log_level, logging.ERROR))   # the controller already said its warnings
        prepared = prepare(spec, fold_dtype=TRAIN_DTYPE)
        root.setLevel(log_level)
        if data_sha256 and prepared.table.sha256 != data_sha256:
            raise DataError(f"{spec.data.path}: the file changed while the search was starting; "
                            "run the search again")
    except LabbenchError as exc:
        put(("fatal", index, type(exc).__name__, str(exc)))
        return
    except BaseException as exc:  # a bug: say what and where
        put(("fatal", index, "bug", f"{type(exc).__name__}: {exc}\n{traceback.format_exc()}"))
        return
    put(("ready", index, os.getpid()))
    seed = int(spec.evaluation.seed)
    parent = multiprocessing.parent_process()
    orphaned = (lambda: not parent.is_alive()) if parent is not None else (lambda: False)
    while True:
        try:
            if not conn.poll(1.0):
                if orphaned():    # the controller was killed: nobody will ever read our results
                    return
                continue
            message = conn.recv()
        except (EOFError, OSError):
            return
        if message is None:
            break
        _, trials = message
        if halt.value:
            for number, _ in trials:
                put(("done", index, number, {"end": "stopped", "reason": "", "fold_scores": [],
                                             "epochs_run": 0, "duration_s": 0.0}))
            continue
        for number, _ in trials:
            put(("started", index, number))
        pending = [number for number, _ in trials]

        def send(number, values):
            put(("epoch", index, number, *values))

        def should_stop(number) -> bool:
            return number in stop[:] or bool(halt.value) or orphaned()

        def done(number, result):
            pending.remove(number)
            put(("done", index, number, result))

        try:
            run_together(prepared, trials, seed=seed, on_epoch=send, should_stop=should_stop,
                         on_done=done)
        except _ControllerGone:
            raise
        except Exception as exc:
            for number in pending:
                put(("error", index, number, f"{type(exc).__name__}: {exc}",
                     traceback.format_exc()))


@dataclass
class _Slot:
    index: int
    process: Any
    conn: Any
    stop: Any
    halt: Any
    state: str = "starting"          # starting | ready | dead (not reported yet) | gone
    numbers: list = field(default_factory=list)   # groups of trials handed to it, oldest
    #                                               (training) first: [[number, ...], ...]
    pid: int | None = None
    restarts: int = 0
    heard: float = field(default_factory=time.monotonic)   # last message (or start)
    longest_gap: float = 0.0
    why: str = ""                    # set when the watchdog killed it
    stops: int = 0                   # numbers written into its stop ring so far

    @property
    def label(self) -> str:
        return f"{socket.gethostname()}:{self.pid or self.process.pid}"


class WorkerPool:
    """``n`` worker processes, each with its own pipe (see the module text)."""

    def __init__(self, spec: Any, n: int, *, data_sha256: str = "", threads: int | None = None,
                 max_restarts: int = 2, silent_s: float | None = None):
        self._ctx = multiprocessing.get_context("spawn")
        self._blob = pickle.dumps(spec)
        self._sha = data_sha256
        # One BLAS thread per worker: the matrices of small networks are too small for threads to
        # pay (measured here: 2 OpenBLAS threads made a digits trial 5-9 x slower on a busy
        # 2-core machine); parallelism comes from the workers. An explicit
        # OPENBLAS_NUM_THREADS / OMP_NUM_THREADS in the environment still wins.
        self._threads = threads or 1
        self.max_restarts = max_restarts
        if silent_s is None:
            silent_s = float(os.environ.get(WATCHDOG_ENV, "") or 300.0)
        self.silent_s = silent_s
        self._pending: collections.deque = collections.deque()
        self.slots: list[_Slot] = []
        self.n = n

    # ---- lifecycle

    def _new_process(self, index: int):
        mine, theirs = self._ctx.Pipe(duplex=True)
        # No locks: a worker killed while touching these must not leave anything held.
        stop = self._ctx.RawArray("q", [-1] * STOP_RING)
        halt = self._ctx.RawValue("b", 0)
        level = logging.getLogger("labbench").getEffectiveLevel()
        process = self._ctx.Process(
            target=worker_main, name=f"labbench-worker-{index}", daemon=True,
            args=(index, self._blob, self._sha, theirs, stop, halt, self._threads, level),
        )
        process.start()
        theirs.close()         # only the worker holds its end: its death closes the pipe
        return process, mine, stop, halt

    def start(self) -> None:
        for index in range(self.n):
            self.slots.append(_Slot(index, *self._new_process(index)))

    def restart(self, slot: _Slot) -> bool:
        """Replace a dead worker; False when it has died too often (then it stays gone)."""
        self._reap(slot)
        if slot.restarts >= self.max_restarts:
            slot.state = "gone"
            return False
        slot.process, slot.conn, slot.stop, slot.halt = self._new_process(slot.index)
        slot.restarts += 1
        slot.state, slot.numbers, slot.pid, slot.why, slot.stops = "starting", [], None, "", 0
        slot.heard, slot.longest_gap = time.monotonic(), 0.0
        return True

    def shutdown(self, timeout: float = 5.0) -> None:
        """Ask every worker to quit, wait a little, then terminate what is left. Safe to repeat."""
        for slot in self.slots:
            if slot.process.is_alive():
                try:
                    slot.conn.send(None)
                except (OSError, ValueError):
                    pass
        end = time.monotonic() + timeout
        for slot in self.slots:
            slot.process.join(max(0.0, end - time.monotonic()))
            self._reap(slot)
            slot.state = "gone"

    def _reap(self, slot: _Slot) -> None:
        process = slot.process
        if process.is_alive():
            process.terminate()
            process.join(2.0)
        if process.is_alive():
            process.kill()
            process.join(2.0)
        slot.conn.close()

    # ---- work

    def with_room(self, depth: int) -> list[_Slot]:
        """Ready workers holding fewer than ``depth`` groups of trials (training + queued)."""
        return [s for s in self.slots if s.state == "ready" and len(s.numbers) < depth]

    def alive(self) -> list[_Slot]:
        return [s for s in self.slots if s.state != "gone"]

    def assign(self, slot: _Slot, trials: list[tuple[int, dict]]) -> None:
        """Hand the worker a group of trials of one shape (``labbench.search.together``)."""
        slot.numbers.append([number for number, _ in trials])
        if not slot.numbers[:-1]:
            slot.heard = time.monotonic()      # the watchdog counts from the hand-over
        try:
            slot.conn.send(("trials", trials))
        except (OSError, ValueError):          # it died meanwhile: poll reports it
            log.debug("worker %d: pipe closed while handing over trials %s", slot.index,
                      [number for number, _ in trials])

    def release(self, slot: _Slot, number: int) -> None:
        """The worker is done with that trial (finished, stopped or failed)."""
        for group in slot.numbers:
            if number in group:
                group.remove(number)
                if not group:
                    slot.numbers.remove(group)
                return

    def stop(self, slot: _Slot, number: int) -> None:
        """Ask the worker to stop that trial after its current epoch."""
        slot.stop[slot.stops % STOP_RING] = number
        slot.stops += 1

    def halt(self, slot: _Slot) -> None:
        """Cancel: stop the running trial after its epoch, hand queued ones back untrained."""
        slot.halt.value = 1

    def poll(self, timeout: float) -> tuple | None:
        """The next message, a synthesised ("died", index, exitcode, why), or None after
        ``timeout``. Never blocks longer than ``timeout``, whatever the workers do."""
        if not self._pending:
            self._gather(timeout)
        return self._pending.popleft() if self._pending else None

    def _gather(self, timeout: float) -> None:
        watched = [s for s in self.slots if s.state in ("starting", "ready")]
        by_handle = {}
        for slot in watched:
            by_handle[slot.conn] = slot
            by_handle[slot.process.sentinel] = slot
        ready = multiprocessing.connection.wait(list(by_handle), timeout) if by_handle else []
        if not by_handle:
            time.sleep(timeout)
        ended = []
        for handle in ready:
            slot = by_handle[handle]
            self._drain(slot)
            if handle is slot.process.sentinel and slot not in ended:
                ended.append(slot)
        for slot in ended:
            self._drain(slot)                  # what it sent just before it ended
            slot.process.join(1.0)
            slot.state = "dead"
            self._pending.append(("died", slot.index, slot.process.exitcode, slot.why))
        self._watchdog()

    def _drain(self, slot: _Slot) -> None:
        try:
            while slot.conn.poll():
                message = slot.conn.recv()
                now = time.monotonic()
                if slot.numbers:
                    slot.longest_gap = max(slot.longest_gap, now - slot.heard)
                slot.heard = now
                self._pending.append(message)
        except (EOFError, OSError, pickle.UnpicklingError):
            pass                               # the worker died mid-message; its sentinel tells

    def _watchdog(self) -> None:
        now = time.monotonic()
        for slot in self.slots:
            if slot.state not in ("starting", "ready") or not (slot.numbers or
                                                                slot.state == "starting"):
                continue
            limit = max(self.silent_s, 10.0 * slot.longest_gap)
            if slot.state == "starting":       # importing and preparing the data: allow more
                limit = max(10.0 * self.silent_s, 120.0)
            if now - slot.heard > limit and slot.process.is_alive():
                slot.why = f"it sent nothing for {now - slot.heard:.0f} s (watchdog)"
                log.warning("worker %d: %s; stopping it", slot.index + 1, slot.why)
                slot.process.kill()
