"""What the window knows about a search: one record per trial, fed by events or by storage polls.

No Qt here. The book is only touched on the GUI thread; plots and tables read it on their redraw
timer and use ``version`` / ``changed`` to redraw only what moved. It stores what the core sent; the
numbers it shows (best so far, counts, importance) come from ``labbench.search.insight``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Iterable, Mapping

from labbench.search import events as ev


@dataclass
class TrialRecord:
    number: int
    state: str = "running"            # running | complete | pruned | failed | cancelled | waiting
    value: float | None = None
    params: dict[str, Any] = field(default_factory=dict)
    settings: dict[str, Any] = field(default_factory=dict)
    epochs: list[int] = field(default_factory=list)
    val_loss: list[float] = field(default_factory=list)
    train_loss: list[float] = field(default_factory=list)
    val_metric: list[float] = field(default_factory=list)
    epochs_total: int = 0
    fold_scores: tuple[float, ...] = ()
    cv_std: float | None = None
    duration_s: float = 0.0
    reason: str = ""
    worker: str = ""

    @property
    def finished(self) -> bool:
        return self.state not in ("running", "waiting")


@dataclass(frozen=True)
class TrialSnapshot:
    """One trial as read from storage (built off the GUI thread by the storage watcher)."""

    number: int
    state: str
    value: float | None
    params: Mapping[str, Any]
    settings: Mapping[str, Any]
    epochs: tuple[int, ...]
    val_loss: tuple[float, ...]
    fold_scores: tuple[float, ...]
    cv_std: float | None
    duration_s: float
    reason: str
    epochs_total: int = 0
    worker: str = ""


class TrialBook:
    """The trials of one search, in the order the core numbered them."""

    def __init__(self) -> None:
        self.clear()

    def clear(self) -> None:
        self.records: dict[int, TrialRecord] = {}
        self.metric = ""
        self.direction = "maximize"
        self.searched: tuple[str, ...] = ()
        self.log_scaled: tuple[str, ...] = ()
        self.storage = ""
        self.study_name = ""
        self.budget_trials: int | None = None
        self.budget_minutes: float | None = None
        self.existing = 0
        self.best_number: int | None = None
        self.best_event: ev.NewBest | None = None
        self.progress: ev.Progress | None = None
        self.ended: ev.SearchEnded | None = None
        self.stage: ev.FinalStage | None = None
        self.winner: Mapping[str, Any] | None = None
        self.winner_files: tuple[str, ...] = ()
        self.notices: list[ev.Notice] = []
        self.running_number: int | None = None
        self.version = 0
        self.finished_version = 0       # bumps when a trial ends or the best changes (not per epoch)
        self.structure_version = 0      # bumps when searched settings / direction change
        self.changed: set[int] = set()

    # ------------------------------------------------------------------ events
    def apply(self, event: ev.Event) -> None:
        handler = getattr(self, "_on_" + type(event).__name__, None)
        if handler is not None:
            handler(event)
            self.version += 1
            if not isinstance(event, (ev.EpochScored, ev.Progress, ev.TrialStarted)):
                self.finished_version += 1

    def _record(self, number: int) -> TrialRecord:
        rec = self.records.get(number)
        if rec is None:
            rec = self.records[number] = TrialRecord(number)
        self.changed.add(number)
        return rec

    def _on_SearchStarted(self, e: ev.SearchStarted) -> None:
        self.metric, self.direction = e.metric, e.direction
        self.searched, self.log_scaled = tuple(e.searched), tuple(e.log_scaled)
        self.storage, self.study_name = e.storage, e.study_name
        self.budget_trials, self.budget_minutes = e.budget_trials, e.budget_minutes
        self.existing = e.existing_trials
        self.ended = None
        self.winner = None
        self.stage = None
        self.progress = None
        self.structure_version += 1

    def _on_TrialStarted(self, e: ev.TrialStarted) -> None:
        rec = self._record(e.number)
        rec.state = "running"
        rec.params = dict(e.params)
        rec.settings = dict(e.settings)
        rec.epochs_total = int(e.settings.get("epochs", 0) or 0)
        rec.epochs, rec.val_loss, rec.train_loss, rec.val_metric = [], [], [], []
        self.running_number = e.number

    def _on_EpochScored(self, e: ev.EpochScored) -> None:
        rec = self._record(e.number)
        rec.epochs.append(e.epoch)
        rec.val_loss.append(e.val_loss)
        rec.train_loss.append(e.train_loss)
        rec.val_metric.append(e.val_metric)
        rec.epochs_total = e.epochs_total
        self.running_number = e.number

    def _on_TrialEnded(self, e: ev.TrialEnded) -> None:
        rec = self._record(e.number)
        rec.state = e.state
        rec.value = e.value
        rec.fold_scores = tuple(e.fold_scores)
        rec.duration_s = e.duration_s
        rec.reason = e.reason
        if e.params:
            rec.params = dict(e.params)
        if self.running_number == e.number:
            self.running_number = None

    def _on_NewBest(self, e: ev.NewBest) -> None:
        self.best_number = e.number
        self.best_event = e
        rec = self._record(e.number)
        rec.cv_std = e.cv_std
        if e.fold_scores:
            rec.fold_scores = tuple(e.fold_scores)

    def _on_Notice(self, e: ev.Notice) -> None:
        self.notices.append(e)

    def _on_Progress(self, e: ev.Progress) -> None:
        self.progress = e

    def _on_SearchEnded(self, e: ev.SearchEnded) -> None:
        self.ended = e
        self.running_number = None
        if e.best_number is not None:
            self.best_number = e.best_number

    def _on_FinalStage(self, e: ev.FinalStage) -> None:
        self.stage = e

    def _on_WinnerReady(self, e: ev.WinnerReady) -> None:
        self.winner = dict(e.summary)
        self.winner_files = tuple(e.files)

    # ------------------------------------------------------------------ storage
    def merge_snapshots(self, snaps: Iterable[TrialSnapshot], *, best_number: int | None) -> None:
        """Bring the book in line with what storage holds (watch mode, resume)."""
        for s in snaps:
            rec = self.records.get(s.number)
            if rec is not None and _same(rec, s):
                continue
            rec = self._record(s.number)
            rec.state, rec.value = s.state, s.value
            rec.params, rec.settings = dict(s.params), dict(s.settings)
            rec.epochs, rec.val_loss = list(s.epochs), list(s.val_loss)
            rec.fold_scores, rec.cv_std = tuple(s.fold_scores), s.cv_std
            rec.duration_s, rec.reason, rec.worker = s.duration_s, s.reason, s.worker
            rec.epochs_total = s.epochs_total or int(s.settings.get("epochs", 0) or 0)
        if best_number != self.best_number:
            self.best_number = best_number
        self.version += 1
        self.finished_version += 1

    # ------------------------------------------------------------------ reading
    def ordered(self) -> list[TrialRecord]:
        return [self.records[k] for k in sorted(self.records)]

    def best(self) -> TrialRecord | None:
        return self.records.get(self.best_number) if self.best_number is not None else None

    def take_changed(self) -> set[int]:
        out, self.changed = self.changed, set()
        return out


def _same(rec: TrialRecord, s: TrialSnapshot) -> bool:
    return (
        rec.state == s.state
        and rec.value == s.value
        and len(rec.epochs) == len(s.epochs)
        and rec.fold_scores == tuple(s.fold_scores)
        and rec.cv_std == s.cv_std
        and rec.duration_s == s.duration_s
    )
