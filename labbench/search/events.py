"""The event stream: what the search runner tells its consumers (command line, window, tests).

Every event is a frozen dataclass of plain Python values (ints, floats, strings, tuples, dicts of
those) so it can cross threads and processes and be put on a Qt signal as-is. The runner calls one
``emit(event)`` callable from its controller thread; consumers must not block in it.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Callable, Mapping


@dataclass(frozen=True)
class Event:
    """Base class of all search events."""


@dataclass(frozen=True)
class SearchStarted(Event):
    study_name: str
    storage: str                 # storage URL (passwords masked)
    metric: str                  # e.g. "balanced_accuracy"
    direction: str               # "maximize" | "minimize"
    budget_trials: int | None    # trials this run will add (None: until time runs out)
    budget_minutes: float | None
    existing_trials: int         # trials already in storage when this run started (resume)
    searched: tuple[str, ...] = ()   # names of the searched settings, in display order
    log_scaled: tuple[str, ...] = ()  # searched settings on a log scale


@dataclass(frozen=True)
class TrialStarted(Event):
    number: int
    params: Mapping[str, Any]    # the sampled values, Optuna param names
    settings: Mapping[str, Any]  # the full resolved settings the network trains with


@dataclass(frozen=True)
class EpochScored(Event):
    number: int                  # trial number
    epoch: int                   # 1-based
    train_loss: float            # fold mean
    val_loss: float              # fold mean (what the pruner sees)
    val_metric: float            # fold mean of the search metric
    epochs_total: int


@dataclass(frozen=True)
class TrialEnded(Event):
    number: int
    state: str                   # "complete" | "pruned" | "failed" | "cancelled"
    value: float | None          # CV mean of the metric (complete only)
    fold_scores: tuple[float, ...] = ()
    duration_s: float = 0.0
    reason: str = ""             # why pruned/failed/cancelled, one line
    params: Mapping[str, Any] = field(default_factory=dict)
    epochs_run: int = 0
    # a family without a target (maps): fold means of its measures and "units" (the trial attr
    # "measures"); None for the network
    measures: Mapping[str, Any] | None = None


@dataclass(frozen=True)
class NewBest(Event):
    number: int
    value: float
    cv_std: float
    fold_scores: tuple[float, ...]
    params: Mapping[str, Any]


@dataclass(frozen=True)
class Notice(Event):
    """A warning or information line for the user (not an error of the search itself)."""

    text: str
    level: str = "warning"       # "info" | "warning"


@dataclass(frozen=True)
class Progress(Event):
    done: int                    # trials finished by this run
    budget: int | None
    elapsed_s: float
    eta_s: float | None          # estimate of the time left, None when unknown


@dataclass(frozen=True)
class SearchEnded(Event):
    reason: str                  # "budget" | "time" | "cancelled" | "error"
    counts: Mapping[str, int]    # trials per state in storage
    best_number: int | None
    best_value: float | None
    message: str = ""


@dataclass(frozen=True)
class FinalStage(Event):
    """Progress of the after-search work (refit, hold-out, seed spread, importance, files)."""

    stage: str                   # "refit" | "holdout" | "seed_spread" | "stability" (maps) |
                                 # "importance" | "files"
    text: str


@dataclass(frozen=True)
class WinnerReady(Event):
    summary: Mapping[str, Any]   # the same dict that is written to winner.json
    files: tuple[str, ...] = ()  # paths written


Emit = Callable[[Event], None]


def ignore(event: Event) -> None:
    """An ``emit`` that drops everything (for library use without a consumer)."""
