"""The search controller: ask/tell over worker processes, pruning, budgets, cancel, heartbeats.

``SearchRunner(spec, emit, ...).run(cancel)`` runs in the calling thread (the command line's main
thread, or the window's worker QThread) and never trains anything itself: trials are trained in
``spawn``-started worker processes (``labbench.search.workers``) that receive only plain settings
and send back one message per epoch. The controller

* reclaims orphaned trials at its start and every heartbeat interval (``orphans``: trials of a
  dead process on this machine at once, others once their heartbeat is stale; FAIL with a reason
  + a WAITING retry with the same settings), and asks Optuna for a trial when a worker has room,
* records heartbeats for its trials in flight from a small thread,
* reports every epoch's fold-mean validation loss (step = epoch; sign-flipped for a maximised
  metric, see ``strategy``), asks ``should_prune`` and tells the worker to stop a pruned trial,
* tells COMPLETE / PRUNED / FAIL with the trial attrs of the storage contract,
* emits the events of ``labbench.search.events`` through ``emit``,
* stops asking when the trial budget (trials added by this run) or the time budget runs out.

Each worker holds its training trial plus ``prefetch`` (default: ``PREFETCH`` = 1 asked trial for
a single worker, ``PREFETCH_SEVERAL`` = 1 each for several) queued behind it, so the sampler
and the storage work while the worker trains; storage therefore shows up to
``workers × (1 + prefetch)`` trials RUNNING, of which ``workers`` train. With ``together`` > 1
(``labbench.search.together``) each of those is a group: up to ``together`` trials asked at
once and handed over in groups of one shape, each group trained as one stack. The depth is fixed (never
timed), so a seeded one-worker search stays reproducible: the asks and tells come in
the order of the worker's messages, and the sampler sees each result ``prefetch`` asks later.
``TrialStarted`` is emitted when a worker begins training a trial; a queued trial cancelled
before it began ends with a ``TrialEnded`` (state "cancelled", 0 epochs) and no ``TrialStarted``.

Cancel is cooperative: set the ``cancel`` event (or press Ctrl-C in a terminal) and the trials in
flight stop after their current epoch and are told FAIL with ``end_reason`` "cancelled by the
user"; the run ends with ``SearchEnded(reason="cancelled")`` and returns normally.
"""

from __future__ import annotations

import logging
import os
import threading
import time

import optuna
from optuna.trial import TrialState

from labbench import errors
from labbench.errors import LabbenchError, SpecError
from labbench.search import events as ev
from labbench.search.bookkeeping import (CANCELLED, LOST, STATE_NAMES, InFlight, SearchOutcome,
                                         best_of, count_states, positive, study_attrs)
from labbench.search.objective import one_line
from labbench.search.optuna_adapter import one_transaction, trial_id
from labbench.search.orphans import reclaim_orphans, retry_later
from labbench.search.prepare import prepare
from labbench.search.storage import (Heartbeat, HeartbeatThread, mask_url, open_storage,
                                     open_study, plain, resolve_url, write_user_attrs)
from labbench.search.together import groups_of, together_count
from labbench.search.strategy import PruneCheck, intermediate_sign, make_pruner, make_sampler, \
    route_optuna_logging, warmup_epochs
from labbench.search.trial_end import TrialEndings
from labbench.search.workers import TRAIN_DTYPE, WorkerPool

__all__ = ["SearchRunner", "SearchOutcome", "CANCELLED", "STATE_NAMES"]

log = logging.getLogger("labbench.search.runner")

#: Asked trials queued behind a single worker's training one. Three reached the overhead goal on
#: the orchard demo (200 trials, one worker, paired rounds: 0.007 against 0.25 of the training
#: time outside training, medians; benchmarks/bench_search.py) but did not shorten the run, and
#: the sampler then sees every result three asks later; so one, as before (a worker idles only
#: when its trials are shorter than the controller's ≈25 ms per trial).
PREFETCH = 1
#: The same with several workers: deeper queues leave more trials behind one worker while
#: another has run out at the end of the budget.
PREFETCH_SEVERAL = 1

class SearchRunner(TrialEndings):
    """One run of a search (see the module text). ``emit`` receives every event, in order.

    After ``run`` the runner keeps ``prepared`` (the spec's data, as the trials saw it) and
    ``study`` (the Optuna study) for the after-search work (``labbench.search.winner.finalize``).
    """

    def __init__(self, spec, emit: ev.Emit = ev.ignore, *, storage: str | None = None,
                 trials: int | None = None, minutes: float | None = None,
                 workers: int | None = None, fresh: bool = False,
                 heartbeat: Heartbeat | None = None, stop_timeout_s: float = 60.0,
                 prefetch: int | None = None, together: int | None = None):
        self.spec = spec
        self.emit = emit
        self.storage_override = storage
        self.trials = positive(trials, "--trials") if trials is not None else spec.search.trials
        self.minutes = (positive(minutes, "--minutes", float) if minutes is not None
                        else spec.search.minutes)
        self.workers = positive(workers, "--workers") if workers is not None else spec.search.workers
        if self.trials is None and self.minutes is None:
            raise SpecError("search: no budget; give trials or minutes")
        self.fresh = fresh
        self.heartbeat = heartbeat or Heartbeat.from_env()
        self.stop_timeout_s = stop_timeout_s
        if prefetch is None:
            prefetch = PREFETCH if self.workers == 1 else PREFETCH_SEVERAL
        self.prefetch = max(0, int(prefetch))
        # trials asked at once, trained in groups of one shape (labbench.search.together)
        self.together = (positive(together, "--together") if together is not None
                         else together_count(spec))
        self.poll_s = 0.05

    # ------------------------------------------------------------------------------------
    # setup

    def run(self, cancel: threading.Event | None = None) -> SearchOutcome:
        self.cancel = cancel if cancel is not None else threading.Event()
        self.t0 = time.monotonic()
        route_optuna_logging()
        # the controller never trains: its fold inputs are made only if the winner needs them
        prepared = self.prepared = prepare(self.spec, fold_dtype=TRAIN_DTYPE, lazy_folds=True)
        self.direction = prepared.direction
        self.sign = intermediate_sign(prepared.direction)
        self.url = resolve_url(self.spec, self.storage_override)
        storage = open_storage(self.url, self.heartbeat)
        self.sampler = make_sampler(self.spec)
        self.pruner = make_pruner(self.spec)
        name = self.spec.study_name()
        self.study, resumed = open_study(
            storage, name, url=self.url, direction=prepared.direction,
            attrs=study_attrs(self.spec, prepared), sampler=self.sampler, pruner=self.pruner,
            fresh=self.fresh)
        reclaimed = reclaim_orphans(self.study)
        if reclaimed:
            log.info("reclaimed %d trial(s) of stopped processes: %s", len(reclaimed),
                     ", ".join(map(str, reclaimed)))
        existing = self.study.get_trials(deepcopy=False)
        self.best = best_of(existing, self.direction)
        fixed_only = self._nothing_searched(existing)
        self.asked = self.finished = 0
        self.owed = 0        # retries this run queued for its own dead workers' trials
        self.in_flight: dict[int, InFlight] = {}      # trial number -> its state here
        self.durations: list[float] = []
        self.worker_cpu_s = 0.0        # CPU the workers spent training this run's trials
        self.next_stale_check = 0.0
        self.should_prune = PruneCheck(self.study, self.pruner, warmup_epochs(self.spec),
                                       refresh_s=float(self.heartbeat.interval))
        self.stop_reason: str | None = None
        self.message = ""
        self.deadline: float | None = None
        self.interrupts = 0
        self.emit(ev.SearchStarted(
            study_name=name, storage=mask_url(self.url), metric=prepared.metric,
            direction=prepared.direction, budget_trials=self.trials,
            budget_minutes=self.minutes, existing_trials=len(existing),
            searched=tuple(self.spec.space.searched_params()),
            log_scaled=tuple(self.spec.space.log_scaled_params())))
        if fixed_only:
            self.emit(ev.Notice(fixed_only, "info"))
        if resumed:
            log.info("resuming study %s (%d trials stored)", name, len(existing))
        if self.best is not None:
            self._emit_best(self.best)
        if self.workers > (os.cpu_count() or 1):
            self.emit(ev.Notice(f"{self.workers} workers on {os.cpu_count()} CPU cores: trials "
                                "will share cores and each will run slower", "info"))
        self.emit(ev.Progress(0, self.trials, 0.0, None))

        self.pool = WorkerPool(self.spec, self.workers, data_sha256=prepared.table.sha256)
        self.beats = HeartbeatThread(storage, self.heartbeat.interval)
        error: BaseException | None = None
        try:
            self.pool.start()
            self.beats.start()
            self._loop()
        except KeyboardInterrupt:            # outside the loop (while starting): a normal cancel
            self.cancel.set()
            self.stop_reason = "cancelled"
        except BaseException as exc:
            error = exc
            self.stop_reason = "error"
            self.message = one_line(str(exc)) if isinstance(exc, LabbenchError) else \
                one_line(f"{type(exc).__name__}: {exc}")
        finally:
            try:
                self._abandon_in_flight("the search stopped: " + self.message if error else CANCELLED)
            finally:
                self.beats.stop()
                self.pool.shutdown()
        reclaim_orphans(self.study)       # what a process killed meanwhile left, for the next run
        outcome = self._outcome()
        self.emit(ev.SearchEnded(reason=outcome.reason, counts=outcome.counts,
                                 best_number=outcome.best_number, best_value=outcome.best_value,
                                 message=outcome.message))
        if error is not None:
            raise error
        return outcome

    def _nothing_searched(self, existing) -> str:
        """With every setting fixed, more than one trial would train the same model again: the
        budget becomes one trial (none when one is already complete); returns the notice."""
        if self.spec.space.searched_params():
            return ""
        done = any(t.state == TrialState.COMPLETE for t in existing)
        self.trials, self.minutes = (0 if done else 1), None
        return ("Nothing is searched (every setting is fixed), so " +
                ("the stored trial already holds the result: no new trial is run" if done else
                 "one trial is run instead of the budget") +
                "; give a setting a range or choices in [space] to search it")

    # ------------------------------------------------------------------------------------
    # the loop

    def _loop(self) -> None:
        while True:
            try:
                if self._step():
                    return
            except KeyboardInterrupt:
                self.interrupts += 1
                log.info("interrupted: stopping the trials in flight")
                self.cancel.set()
                if self.interrupts > 1:       # a second Ctrl-C: do not wait for the epoch
                    self.deadline = time.monotonic()

    def _elapsed(self) -> float:
        return time.monotonic() - self.t0

    def _budget_left(self) -> bool:
        owed = self.owed and self._retry_waiting()   # a dead worker's retry runs beyond the budget
        if self.trials is not None and self.asked >= self.trials and not owed:
            self.stop_reason = "budget"
            return False
        if self.minutes is not None and self._elapsed() >= 60.0 * self.minutes:
            self.stop_reason = "time"
            return False
        if (hasattr(self.sampler, "all_started") and self.sampler.all_started(self.study)
                and not self._retry_waiting()):
            self.stop_reason = "budget"
            self.emit(ev.Notice("every point of the grid has been tried", "info"))
            return False
        return True

    def _retry_waiting(self) -> bool:
        """A trial queued again (its worker died) waits to be asked: its grid point counts as
        started, yet it has not trained."""
        return any(t.state == TrialState.WAITING for t in self.study.get_trials(deepcopy=False))

    def _step(self) -> bool:
        """One turn of the controller; True when the run is over."""
        if self.cancel.is_set() and self.stop_reason != "cancelled":
            self.stop_reason = "cancelled"
            if self.deadline is None:
                self.deadline = time.monotonic() + self.stop_timeout_s
            for flight in self.in_flight.values():
                flight.stopping = "cancelled"
            for slot in self.pool.alive():
                self.pool.halt(slot)
        if self.stop_reason is None:
            self._fill_workers()
        if self.stop_reason is not None and not self.in_flight:
            return True
        if self.deadline is not None and time.monotonic() >= self.deadline:
            return True                      # the finally block tells what is left FAIL
        if not self.pool.alive():
            self._no_workers_left()
            return True
        message = self.pool.poll(self.poll_s)
        if message is not None:
            self._handle(message)
        return False

    def _fill_workers(self) -> None:
        """Hand each ready worker a trial, plus ``prefetch`` queued ones so that asking (the
        sampler, the storage) overlaps with training instead of keeping the worker waiting. The
        order of asks and tells is fixed by the order of the workers' messages, so a sequential
        search stays reproducible; the sampler just sees the last result one trial later."""
        for depth in range(1, 2 + self.prefetch):
            for slot in self.pool.with_room(depth):
                if depth > 1 and not (self._time_for_another(depth - 1) and self._enough_left()):
                    return
                if not self._budget_left():
                    return
                self._start_trials(slot)
                if self.stop_reason is not None:     # the budget ran out within the group
                    return

    def _enough_left(self) -> bool:
        """Queue a trial behind another only while the trials left keep every other worker busy
        too: at the end of the budget a trial queued behind a busy worker would wait while
        another worker idles (with two workers that tail cost up to one trial's time)."""
        if self.trials is None:
            return True
        return self.trials - self.asked > len(self.pool.alive())

    def _time_for_another(self, ahead: int = 1) -> bool:
        """Queue a trial only when the time budget will probably not end before it starts
        (behind ``ahead`` trials that train first)."""
        if self.minutes is None:
            return True
        durations = self.durations[-10:]
        typical = sum(durations) / len(durations) if durations else 0.0
        return self._elapsed() + ahead * typical < 60.0 * self.minutes

    def _start_trials(self, slot) -> None:
        """Ask up to ``together`` trials (within the budget), then hand them to ``slot`` in groups
        of one shape (``labbench.search.together``; the first group trains first)."""
        now = time.monotonic()
        if now >= self.next_stale_check:   # a trial goes stale in whole heartbeat intervals
            self.beats.beat_now()
            reclaim_orphans(self.study)
            self.next_stale_check = now + self.heartbeat.interval
        size = self.together
        if size > 1 and self.trials is not None:   # the last trials spread over the workers
            size = min(size, -(-(self.trials - self.asked) // max(1, len(self.pool.alive()))))
        asked = [self._ask(slot)]
        while len(asked) < size and self._budget_left():
            asked.append(self._ask(slot))
        for group in groups_of(self.prepared.model, [(f.number, f.settings) for f in asked]):
            self.pool.assign(slot, [(number, plain(settings)) for number, settings in group])

    def _ask(self, slot) -> InFlight:
        trial = self.study.ask()
        self.asked += 1
        if self.trials is not None and self.asked > self.trials and self.owed:
            self.owed -= 1           # a retry this run owed (asked pops queued trials first)
        try:
            with one_transaction(self.study):   # the trial's params and attrs: one commit
                settings = self.spec.space.suggest(trial)
                write_user_attrs(trial, {"settings": plain(settings), "worker": slot.label,
                                         "end_reason": LOST})   # overwritten when it ends here
        except ValueError as exc:             # a parameter changed kind/choices within the study
            self.study.tell(trial, state=optuna.trial.TrialState.FAIL, skip_if_finished=True)
            raise SpecError(
                f"{self.spec.source_path or 'spec'}: space: {one_line(str(exc))}; the stored search "
                "used this name differently, run with --fresh or set another [search] name"
            ) from None
        self.beats.add(trial_id(trial))
        flight = self.in_flight[trial.number] = InFlight(trial, slot, settings, time.monotonic())
        return flight

    def _handle(self, message: tuple) -> None:
        kind, index = message[0], message[1]
        slot = self.pool.slots[index]
        number = message[2] if kind in ("started", "epoch", "done", "error") else None
        flight = self.in_flight.get(number) if number is not None else None
        if flight is not None and flight.slot is not slot:
            flight = None                      # a message of a worker that has been replaced
        if kind == "ready":
            slot.state, slot.pid = "ready", message[2]
        elif kind == "started":
            if flight is not None:
                flight.training, flight.started = True, time.monotonic()
                flight.saved_at = flight.started     # first batch of values after SAVE_EVERY_S
                self.emit(ev.TrialStarted(number, dict(flight.trial.params), plain(flight.settings)))
        elif kind == "epoch":
            _, _, number, epoch, train_loss, val_loss, val_metric = message
            if flight is not None and flight.stopping is None:
                self._epoch(flight, epoch, train_loss, val_loss, val_metric)
        elif kind == "done":
            self.pool.release(slot, number)
            if flight is not None:
                self._done(flight, message[3])
        elif kind == "error":
            _, _, number, text, trace = message
            self.pool.release(slot, number)
            log.error("trial %s: error in the worker process:\n%s", number, trace)
            if flight is not None:
                reason = f"internal error while training (not caused by your settings): {text}"
                self._finish(flight, "FAIL", reason=reason)
                self.emit(ev.Notice(f"trial {number} failed by an internal error: {one_line(text)} "
                                    "— please report it with the log (labbench -v run ...)"))
        elif kind == "died":
            self._died(slot, exitcode=message[2], detail=message[3])
        elif kind == "fatal":
            _, _, cls_name, text = message
            cls = getattr(errors, cls_name, None)
            if isinstance(cls, type) and issubclass(cls, LabbenchError):
                raise cls(text)
            log.error("a worker process could not start:\n%s", text)
            raise RuntimeError(f"a worker process could not start: {one_line(text)}")

    def _died(self, slot, *, exitcode, detail: str) -> None:
        """A worker process ended without being asked: fail the trials of its training group and
        queue each again with the same settings (``orphans.RETRIES`` times), hand its queued
        groups to the new worker, or end them when it cannot be restarted."""
        why = f"its worker process stopped unexpectedly (exit code {exitcode}"
        why += f"; {detail})" if detail else ")"
        # The worker takes its groups in order, so the first group handed over was training
        # (its "started" messages may have died with the process); the others never began.
        groups = [[self.in_flight[n] for n in group if n in self.in_flight]
                  for group in slot.numbers]
        restarted = self.pool.restart(slot)
        training, queued_groups = (groups[0], groups[1:]) if groups else ([], [])
        for first in training:
            again = first.stopping is None and retry_later(self.study, trial_id(first.trial))
            self._finish(first, "FAIL", reason=why + ("; it is retried with the same settings"
                                                      if again else ""))
            if again:
                retry_later(self.study, trial_id(first.trial), queue=True)
                self.owed += 1
        for group in queued_groups:                 # not begun: hand them over again
            again = [f for f in group if restarted and f.stopping is None]
            if again:
                self.pool.assign(slot, [(f.number, plain(f.settings)) for f in again])
            for queued in (f for f in group if f not in again):
                if queued.stopping:
                    self._finish(queued, "FAIL", reason=CANCELLED)
                else:                               # never trained: queue it for whoever is left
                    self._finish(queued, "FAIL", reason=why + "; not trained, queued again")
                    retry_later(self.study, trial_id(queued.trial), queue=True)
                    self.owed += 1
        if self.stop_reason == "budget" and self._retry_waiting():
            self.stop_reason = None      # every trial was asked ahead; the retry is still owed
        number = slot.index + 1
        if restarted:
            text = (f"worker process {number} stopped unexpectedly (exit code {exitcode}"
                    + (f"; {detail}" if detail else "") + "); started a new one")
        else:
            text = (f"worker process {number} stopped unexpectedly {slot.restarts + 1} times "
                    f"(last exit code {exitcode}); it is not started again")
        self.emit(ev.Notice(text))

    def _no_workers_left(self) -> None:
        """Every worker died too often: end the search here (what completed still counts)."""
        self.stop_reason = "error"
        self.message = (f"every worker process stopped unexpectedly, each {self.pool.max_restarts + 1}"
                        " times; the search ends here (see the log with labbench -v run ...)")

    def _outcome(self) -> SearchOutcome:
        trials = self.study.get_trials(deepcopy=False)
        counts = count_states(trials)
        best = best_of(trials, self.direction)
        reason = self.stop_reason or "budget"
        message = self.message
        if not message:
            message = {"budget": "the trial budget is used up", "time": "the time budget ran out",
                       "cancelled": "cancelled by the user"}.get(reason, "")
        return SearchOutcome(reason=reason, study_name=self.study.study_name,
                             storage=mask_url(self.url), counts=counts,
                             best_number=best[0] if best else None,
                             best_value=best[1] if best else None, trials_run=self.finished,
                             elapsed_s=self._elapsed(), message=message, url=self.url)
