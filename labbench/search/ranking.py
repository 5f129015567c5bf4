""""The best trial": the one rule, used by the runner, the winner check, ``labbench show``, the
report and the window.

* Only a **finished** trial (state key ``complete``) with a **finite** value takes part; a pruned
  trial's last step, a failed or cancelled trial, a NaN or infinite value never wins.
* Better by the study's direction; **ties go to the earlier trial number**.
* The **runner-up** is the best trial whose settings differ from the winner's (a trial that
  repeats the winner's settings is the same model, not a rival).

Works on Optuna ``FrozenTrial`` objects and on any record with ``number``, ``state`` (a key or an
Optuna state), ``value`` and optionally ``settings`` / ``params`` (the report's rows, the
window's records).
"""

from __future__ import annotations

import json
import math
from typing import Any, Iterable, Sequence

from labbench.search.states import trial_key


def scored(trial: Any) -> bool:
    """Does the trial take part in the ranking (finished, finite value)?"""
    value = getattr(trial, "value", None)
    if value is None or isinstance(value, bool):
        return False
    try:
        finite = math.isfinite(float(value))
    except (TypeError, ValueError):
        return False
    return finite and trial_key(trial) == "complete"


def ranked(trials: Iterable[Any], direction: str) -> list[Any]:
    """The scored trials, best first, ties to the earlier number."""
    sign = -1.0 if direction == "maximize" else 1.0
    return sorted((t for t in trials if scored(t)), key=lambda t: (sign * float(t.value), t.number))


def best_trial(trials: Iterable[Any], direction: str) -> Any | None:
    """The best scored trial, or None."""
    order = ranked(trials, direction)
    return order[0] if order else None


def settings_key(trial: Any) -> str:
    """What makes two trials the same model: their settings (else their searched parameters)."""
    attrs = getattr(trial, "user_attrs", None) or {}
    settings = attrs.get("settings") if isinstance(attrs, dict) else None
    if settings is None:
        settings = getattr(trial, "settings", None) or None
    if settings is None:
        settings = getattr(trial, "params", None) or {}
    return json.dumps(settings, sort_keys=True, default=str)


def distinct(trials: Iterable[Any], direction: str) -> list[Any]:
    """Scored trials best first, only the first (best) of each distinct settings."""
    seen: set[str] = set()
    out = []
    for t in ranked(trials, direction):
        key = settings_key(t)
        if key not in seen:
            seen.add(key)
            out.append(t)
    return out


def best_and_runner_up(trials: Sequence[Any] | Iterable[Any], direction: str) -> tuple[Any, Any]:
    """``(best, best with different settings)``; either may be None."""
    order = distinct(trials, direction)
    return (order[0] if order else None), (order[1] if len(order) > 1 else None)


def is_better(value: float | None, than: float | None, direction: str) -> bool:
    """Would a new trial with ``value`` (a later number) beat the best so far, ``than``? Strictly
    better only: on a tie the earlier trial stays best."""
    if value is None or not math.isfinite(float(value)):
        return False
    if than is None:
        return True
    return float(value) > float(than) if direction == "maximize" else float(value) < float(than)
