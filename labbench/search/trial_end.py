"""How the controller takes in a trial's epochs and ends it: a mixin of ``SearchRunner``.

Each epoch: the fold-mean values join the trial's curve, the validation loss is reported (in
batches, see ``_report``; for a family without a target the metric, see ``_judged``) and the
pruner is asked. When the worker is done, or the trial is
pruned, cancelled, lost or diverged, ``_finish`` writes the trial's attrs, tells Optuna, and
emits ``TrialEnded`` (and ``NewBest``, ``Progress``). The attributes it uses (``study``, ``spec``,
``pool``, ``beats``, ``should_prune``, ``emit``, ``best``, ...) are set by ``SearchRunner.run``.
"""

from __future__ import annotations

import logging
import math
import time
from typing import Any, Mapping

from optuna.exceptions import UpdateFinishedTrialError
from optuna.trial import TrialState

from labbench.search import events as ev
from labbench.search.bookkeeping import CANCELLED, LOST, InFlight, eta
from labbench.search.objective import curve_attr, cv_summary
from labbench.search.optuna_adapter import note_intermediate_value, one_transaction, trial_id
from labbench.search.ranking import is_better
from labbench.search.states import key_of
from labbench.search.storage import plain, write_intermediate_values, write_user_attrs

SAVE_EVERY_S = 1.0        # per-epoch values reach the storage at least this often

log = logging.getLogger("labbench.search.runner")


class TrialEndings:
    """Per-epoch values and the end of each trial (see the module text)."""

    def _epoch(self, flight: InFlight, epoch, train_loss, val_loss, val_metric) -> None:
        flight.points.append((int(epoch), float(train_loss), float(val_loss), float(val_metric)))
        judged = self._judged(val_loss, val_metric)
        if math.isfinite(judged):
            self._report(flight, int(epoch), self.sign * float(judged))
        self.emit(ev.EpochScored(flight.number, int(epoch), float(train_loss), float(val_loss),
                                 float(val_metric), int(flight.settings["epochs"])))
        most = int(flight.settings["epochs"])
        if self.stop_reason != "cancelled" and self.should_prune(flight.trial, int(epoch), most):
            flight.stopping, flight.stop_epoch = "pruned", int(epoch)
            self.pool.stop(flight.slot, flight.number)

    def _judged(self, val_loss: float, val_metric: float) -> float:
        """What the pruner compares each epoch: the fold-mean validation loss; for a family
        without a target (the maps) the metric itself, since their held-out loss (quantisation
        error) always falls with more units and a pruner comparing it would stop the small maps
        the (penalised) metric may prefer."""
        if getattr(self, "_by_metric", None) is None:
            self._by_metric = not self.spec.space.model.needs_target
        return float(val_metric) if self._by_metric else float(val_loss)

    def _report(self, flight: InFlight, step: int, value: float) -> None:
        """``trial.report`` in batches: the trial's own copy (what the pruner reads) now, the
        storage at most every ``SAVE_EVERY_S`` seconds and before the trial is told; pruning
        decisions are the same, a watcher of the database sees the values a second later."""
        note_intermediate_value(flight.trial, step, value)
        flight.unsaved.append((step, value))
        now = time.monotonic()
        if now - flight.saved_at >= SAVE_EVERY_S:
            flight.saved_at = now
            try:
                self._save_values(flight)
            except UpdateFinishedTrialError:   # marked stale by another process meanwhile
                log.warning("trial %d was ended elsewhere (its heartbeat went stale); stopping "
                            "it here", flight.number)
                flight.stopping = "lost"
                self.pool.stop(flight.slot, flight.number)

    def _save_values(self, flight: InFlight) -> None:
        values, flight.unsaved = flight.unsaved, []
        write_intermediate_values(self.study, trial_id(flight.trial), values)

    def _done(self, flight: InFlight, result: Mapping[str, Any]) -> None:
        self.worker_cpu_s += float(result.get("cpu_s", 0.0))
        if flight.stopping == "pruned":
            by_metric = bool(getattr(self, "_by_metric", False))
            last = flight.points[-1][3 if by_metric else 2] if flight.points else float("nan")
            what = f"validation {self.prepared.metric}".replace("_", " ") if by_metric \
                else "validation loss"
            reason = (f"pruned after epoch {flight.stop_epoch}: {what} {last:.4g} was "
                      f"behind the other trials at that epoch ({self.spec.search.pruner} pruner)")
            self._finish(flight, "PRUNED", reason=reason, epochs_run=flight.stop_epoch)
        elif flight.stopping == "cancelled":
            self._finish(flight, "FAIL", reason=CANCELLED)
        elif flight.stopping == "lost":
            self._finish(flight, "FAIL", reason=LOST)
        elif result["end"] == "diverged":
            self._finish(flight, "FAIL", reason=result["reason"], epochs_run=result["epochs_run"])
        else:
            scores = [float(s) for s in result["fold_scores"]]
            mean, _ = cv_summary(scores)
            if not scores or not math.isfinite(mean):
                self._finish(flight, "FAIL", reason="the metric is not a finite number on every "
                             "fold", fold_scores=scores, epochs_run=result["epochs_run"])
            else:
                self._finish(flight, "COMPLETE", value=mean, fold_scores=scores,
                             epochs_run=result["epochs_run"], best_epoch=result.get("best_epoch"),
                             measures=result.get("measures"))

    # ------------------------------------------------------------------------------------
    # ending trials

    def _finish(self, flight: InFlight, state: str, *, value: float | None = None,
                reason: str = "", fold_scores=(), epochs_run: int | None = None,
                best_epoch: int | None = None, measures: Mapping[str, Any] | None = None) -> None:
        trial = flight.trial
        duration = time.monotonic() - flight.started if flight.training else 0.0
        points = [p for p in flight.points if epochs_run is None or p[0] <= epochs_run]
        runs = epochs_run if epochs_run is not None else (points[-1][0] if points else 0)
        _, std = cv_summary(list(fold_scores))
        attrs = {"curve": curve_attr(points), "fold_scores": [float(s) for s in fold_scores],
                 "cv_std": float(std) if math.isfinite(std) else None,
                 "duration_s": float(duration), "epochs_run": int(runs), "end_reason": reason}
        if best_epoch is not None:             # the epoch the fold scores (and the refit) use
            attrs["best_epoch"] = int(best_epoch)
        if measures is not None:               # a map family: fold means of its measures + units
            attrs["measures"] = dict(measures)
        try:
            with one_transaction(self.study):  # the last values and the attrs: one commit
                self._save_values(flight)
                write_user_attrs(trial, plain(attrs))
        except UpdateFinishedTrialError:       # failed as stale by another process meanwhile
            log.warning("trial %d was already finished elsewhere; its result is dropped",
                        trial.number)
        self.study.tell(trial, values=value if state == "COMPLETE" else None,
                        state=getattr(TrialState, state), skip_if_finished=True)
        self.should_prune.invalidate()
        self.in_flight.pop(trial.number, None)
        self.beats.discard(trial_id(trial))
        self.finished += 1
        if flight.training:
            self.durations.append(duration)
        shown = key_of(state, reason)          # the one state table (labbench.search.states)
        self.emit(ev.TrialEnded(trial.number, shown, value, tuple(attrs["fold_scores"]), duration,
                                reason, dict(trial.params), int(runs), attrs.get("measures")))
        if state == "COMPLETE" and self._better(value):
            self.best = (trial.number, float(value), attrs["cv_std"] or 0.0,
                         tuple(attrs["fold_scores"]), dict(trial.params))
            self._emit_best(self.best)
        elapsed = self._elapsed()
        self.emit(ev.Progress(self.finished, self.trials, elapsed, eta(self.trials, self.minutes, self.finished, elapsed)))

    def _abandon_in_flight(self, reason: str) -> None:
        """Tell every trial still in flight FAIL (cancel deadline passed, or an error)."""
        for flight in list(self.in_flight.values()):
            why = CANCELLED if flight.stopping == "cancelled" else reason
            try:
                self._finish(flight, "FAIL", reason=why)
            except Exception as exc:  # keep going: the others must not stay RUNNING either
                log.error("could not end trial %d: %s", flight.number, exc)

    # ------------------------------------------------------------------------------------
    # bookkeeping

    def _better(self, value: float) -> bool:
        return is_better(value, None if self.best is None else self.best[1], self.direction)

    def _emit_best(self, best: tuple) -> None:
        number, value, std, folds, params = best
        self.emit(ev.NewBest(number, value, std, folds, params))
