"""Trial states: the one table from a stored trial's state to labbench's key and its word.

A **key** is what labbench stores and passes around (events, ``winner.json``'s counts, the
report's rows, the window's records); a **word** is what a person reads (CLI, report, window).
Optuna knows no "cancelled": a trial the user cancelled is stored as FAIL with the end reason
``CANCELLED`` and is told apart here, once.

=========  ============  ===========  ==========================================================
key        Optuna state  word         meaning
=========  ============  ===========  ==========================================================
complete   COMPLETE      finished     trained on every fold; its CV score counts
pruned     PRUNED        pruned       stopped by the pruner: behind the others at the same epoch
failed     FAIL          failed       raised an error or diverged; no score
cancelled  FAIL (*)      cancelled    stopped by the user; never counted as a result
running    RUNNING       training     being trained now
waiting    WAITING       queued       asked for, not started
=========  ============  ===========  ==========================================================
"""

from __future__ import annotations

from typing import Any, Iterable

CANCELLED = "cancelled by the user"        # the end reason stored for a cancelled trial

KEY_OF_OPTUNA = {"COMPLETE": "complete", "PRUNED": "pruned", "FAIL": "failed",
                 "RUNNING": "running", "WAITING": "waiting"}
WORDS = {"complete": "finished", "pruned": "stopped early", "failed": "failed",
         "cancelled": "stopped by you", "running": "training", "waiting": "queued"}
MEANINGS = {
    "complete": "trained on every fold; its cross-validated score counts",
    "pruned": "stopped by the pruner: its validation loss was behind the other trials at the "
              "same epoch",
    "failed": "raised an error or diverged; it has no score",
    "cancelled": "stopped by the user; never counted as a result",
    "running": "being trained now",
    "waiting": "asked for, not started yet",
}
KEYS = tuple(WORDS)                          # display order
FINISHED = frozenset({"complete", "pruned", "failed", "cancelled"})


def key_of(state: Any, reason: str | None = "") -> str:
    """The key of an Optuna state (a ``TrialState``, its name, or already a key)."""
    name = getattr(state, "name", state)
    name = str(name)
    key = KEY_OF_OPTUNA.get(name.upper(), name.lower())
    if key == "failed" and str(reason or "").lower().startswith("cancel"):
        return "cancelled"
    return key if key in WORDS else "failed"


def trial_key(trial: Any) -> str:
    """The key of a trial: an Optuna ``FrozenTrial`` (its end reason tells a cancel apart) or any
    record with a ``state`` (a key or an Optuna state)."""
    attrs = getattr(trial, "user_attrs", None) or {}
    reason = attrs.get("end_reason") if isinstance(attrs, dict) else ""
    reason = reason or getattr(trial, "end_reason", "") or getattr(trial, "reason", "")
    return key_of(trial.state, reason)


def word(key_or_state: Any) -> str:
    """The word shown for a key (or an Optuna state)."""
    return WORDS[key_of(key_or_state)]


def count(trials: Iterable[Any]) -> dict[str, int]:
    """Trials per key, every key present, in display order."""
    counts = dict.fromkeys(KEYS, 0)
    for t in trials:
        counts[trial_key(t)] += 1
    return counts


def counts_text(counts: dict[str, int]) -> str:
    """``3 finished, 1 pruned`` (keys with no trial left out)."""
    return ", ".join(f"{n} {WORDS.get(k, k)}" for k, n in counts.items() if n)
