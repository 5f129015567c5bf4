"""Bookkeeping of one search run: the outcome, trials in flight, the best so far, time left.

Plain helpers the controller (``labbench.search.runner``) uses; nothing here talks to workers.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Mapping

from labbench.errors import SpecError
from labbench.search import ranking, states
from labbench.search.states import CANCELLED
from labbench.search.storage import LABBENCH_FORMAT, plain, versions
from labbench.search.orphans import LOST  # noqa: F401  (defined where trials are claimed)
from labbench.search.strategy import intermediate_sign

STATE_NAMES = states.KEY_OF_OPTUNA      # Optuna state name -> labbench key (labbench.search.states)


@dataclass(frozen=True)
class SearchOutcome:
    reason: str                          # "budget" | "time" | "cancelled" | "error"
    study_name: str
    storage: str                         # URL, passwords masked
    counts: Mapping[str, int]            # trials per state in storage (all runs)
    best_number: int | None
    best_value: float | None
    trials_run: int                      # trials this run finished
    elapsed_s: float
    message: str = ""
    url: str = field(default="", repr=False)   # the real URL (to reopen the study)

    @property
    def cancelled(self) -> bool:
        return self.reason == "cancelled"


@dataclass
class InFlight:
    """A trial this run has asked and handed to a worker, until it is told."""

    trial: Any
    slot: Any
    settings: dict
    started: float                       # asked; reset when the worker begins training it
    points: list = field(default_factory=list)
    stopping: str | None = None          # "pruned" | "cancelled" | "lost" (ended elsewhere)
    stop_epoch: int = 0
    training: bool = False
    unsaved: list = field(default_factory=list)   # (step, value) not yet written to storage
    saved_at: float = 0.0

    @property
    def number(self) -> int:
        return self.trial.number


def positive(value, name: str, kind=int):
    if value is None:
        return None
    try:
        number = kind(value)
    except (TypeError, ValueError):
        number = None
    if number is None or isinstance(value, bool) or not number > 0 or not math.isfinite(number):
        what = "a whole number of at least 1" if kind is int else "a number above 0"
        raise SpecError(f"{name}: {value!r} is not allowed; give {what}")
    return number


def study_attrs(spec, prepared) -> dict[str, Any]:
    """The study user attrs of the storage contract (DEVELOPERS.md, "What a study stores")."""
    table = prepared.table
    return plain({
        "spec_toml": spec.to_toml(),
        "spec_path": str(spec.source_path or ""),
        "data_sha256": table.sha256,
        "data_path": str(spec.data.path),
        "task": prepared.task,
        "metric": prepared.metric,
        "direction": prepared.direction,
        "classes": list(table.classes) if table.classes is not None else None,
        "label": getattr(table, "label", None),   # no target: the column shown beside the groups
        "n_rows": int(len(prepared.train_pos)),
        "n_holdout": int(len(prepared.holdout_pos)),
        "versions": versions(),
        "labbench_format": LABBENCH_FORMAT,
        "searched": spec.space.searched_params(),
        "log_scaled": spec.space.log_scaled_params(),
        "intermediate_sign": intermediate_sign(prepared.direction),
    })


def best_of(trials, direction: str) -> tuple | None:
    """(number, value, cv_std, fold_scores, params) of the best trial (labbench.search.ranking),
    or None."""
    t = ranking.best_trial(trials, direction)
    if t is None:
        return None
    return (t.number, float(t.value), float(t.user_attrs.get("cv_std") or 0.0),
            tuple(t.user_attrs.get("fold_scores") or ()), dict(t.params))


def count_states(trials) -> dict[str, int]:
    """Trials per state key, cancelled told apart from failed (labbench.search.states)."""
    return states.count(trials)


def eta(trials: int | None, minutes: float | None, finished: int, elapsed: float) -> float | None:
    """Seconds left: by the trial budget at the pace so far, capped by the time budget."""
    estimates = []
    if trials is not None and finished:
        estimates.append(max(0.0, (trials - finished) * elapsed / finished))
    if minutes is not None:
        estimates.append(max(0.0, 60.0 * minutes - elapsed))
    return min(estimates) if estimates else None
