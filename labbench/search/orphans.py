"""Who runs a trial, and reclaiming the trials of a process that is provably gone.

Every trial a labbench process starts (a new one, or a queued one it takes over) is *claimed* in
the same breath: a first heartbeat and a system attr ``labbench_owner`` naming the process —
``host`` (host name), ``boot`` (the kernel's boot id), ``pidns`` (the process-id namespace), ``pid``
and ``start`` (the process's start time in clock ticks since boot, from ``/proc/<pid>/stat``).
The first heartbeat means a process killed right after creating a trial leaves a trial that goes
stale like any other, instead of one that stays RUNNING forever.

``reclaim_orphans`` fails and re-queues (with the storage's retry callback, same settings) the
RUNNING trials whose owner is on *this* machine — same host name, boot and pid namespace — and
is dead: its pid is gone, is a zombie, or now belongs to a process with another start time. No
grace period is needed for those. Trials of other machines, and of owners that cannot be checked
(no ``/proc``), still go by the heartbeat grace period (``optuna.storages.fail_stale_trials``).
A RUNNING trial with neither a heartbeat nor an owner (written by something that is not labbench,
or killed in the instant between creating and claiming it) is reclaimed once it is older than the
grace period. Every reclaimed trial gets a one-line ``end_reason``.
"""

from __future__ import annotations

import functools
import logging
import os
import socket
from datetime import timedelta
from typing import Any, Mapping

from labbench.search.optuna_adapter import (claim_trial, rdb_backend, running_heartbeats,
                                            starting_storage_class, study_id, study_storage,
                                            trial_id)

# optuna is imported inside the functions: ≈1 s (python -X importtime), and labbench.search.storage
# (imported by the window for its URL and heartbeat helpers) imports this module.

log = logging.getLogger("labbench.search.orphans")

OWNER_KEY = "labbench_owner"
#: A trial whose worker or process was killed is tried again this many times (same settings).
RETRIES = 1
#: The end reason a trial carries from its claim until it ends properly (a trial that is reclaimed
#: keeps it: its process stopped).
LOST = "the process running this trial stopped before it finished (no heartbeat); it is retried"


def _read(path: str) -> str:
    try:
        with open(path, encoding="ascii", errors="replace") as f:
            return f.read().strip()
    except OSError:
        return ""


def _stat(pid: int) -> tuple[str, str] | None:
    """(state letter, start time in ticks) of a process from /proc, or None when it is gone."""
    text = _read(f"/proc/{pid}/stat")
    if not text:
        return None
    fields = text[text.rfind(")") + 2:].split()   # the name in parentheses may hold spaces
    return fields[0], fields[19]                   # fields 3 and 22 of proc(5)


@functools.lru_cache(maxsize=1)
def _machine() -> dict[str, str]:
    ns = ""
    try:
        ns = os.readlink("/proc/self/ns/pid")
    except OSError:
        pass
    return {"host": socket.gethostname(), "boot": _read("/proc/sys/kernel/random/boot_id"),
            "pidns": ns}


def me() -> dict[str, Any]:
    """The owner record of this process."""
    stat = _stat(os.getpid())
    return {**_machine(), "pid": os.getpid(), "start": stat[1] if stat else ""}


def owner_text(owner: Mapping[str, Any]) -> str:
    return f"{owner.get('host', '?')}:{owner.get('pid', '?')}"


def owner_is_dead(owner: Any) -> bool:
    """True only when the owner is provably gone: same machine (host name, boot and pid
    namespace all known and equal to ours) and its pid is gone, a zombie or reused."""
    if not isinstance(owner, Mapping):
        return False
    here = _machine()
    if not here["boot"] or not here["pidns"]:
        return False                       # no /proc: cannot tell, the heartbeat decides
    if any(owner.get(key) != here[key] for key in ("host", "boot", "pidns")):
        return False
    try:
        pid = int(owner["pid"])
    except (KeyError, TypeError, ValueError):
        return False
    if pid == os.getpid():
        return False
    stat = _stat(pid)
    if stat is None:
        return True
    state, start = stat
    return state in ("Z", "X") or (bool(owner.get("start")) and start != str(owner["start"]))


# --------------------------------------------------------------------------------------------
# Claiming (hooked into the storage)


def claiming_storage_class():
    """``RDBStorage`` that claims every trial it starts (see the module text)."""
    return starting_storage_class(claim)


def claim(storage, tid: int) -> None:
    """First heartbeat, owner and a default end reason of a trial, in one transaction."""
    try:
        claim_trial(storage, tid, {OWNER_KEY: me()}, {"end_reason": LOST})
    except Exception as exc:  # e.g. a heartbeat row exists already: fall back
        log.debug("claim in one go failed (%s); per call", exc)
        storage.record_heartbeat(tid)
        storage.set_trial_system_attr(tid, OWNER_KEY, me())
        storage.set_trial_user_attr(tid, "end_reason", LOST)


# --------------------------------------------------------------------------------------------
# Reclaiming


def orphans(study) -> list[tuple[Any, str]]:
    """(frozen trial, reason) of every RUNNING trial of the study that can be reclaimed now."""
    from optuna.trial import TrialState

    backend = rdb_backend(study_storage(study))
    if backend is None:
        return []
    fresh = getattr(backend, "read_fresh", None)
    if fresh is not None:          # other processes' claims, not the read view's older copies
        fresh()
    running = study.get_trials(deepcopy=False, states=(TrialState.RUNNING,))
    if not running:
        return []
    beats, now = running_heartbeats(backend, study_id(study))
    grace = timedelta(seconds=int(getattr(backend, "grace_period", None) or 120))
    found = []
    for trial in running:
        owner = trial.system_attrs.get(OWNER_KEY)
        if owner_is_dead(owner):
            found.append((trial, f"the process running it ({owner_text(owner)}) ended before "
                                 "the trial finished; it is retried"))
        elif (trial_id(trial) not in beats and owner is None and trial.datetime_start is not None
              and now - trial.datetime_start.replace(tzinfo=None) > grace):
            found.append((trial, "the process that started it never recorded a heartbeat "
                                 "(it stopped or is not labbench); it is retried"))
    return found


def fail_and_retry(study, trial, reason: str) -> bool:
    """FAIL the trial with ``reason`` and queue a copy with the same settings through the
    storage's retry callback (which stops after ``RETRIES`` retries). False when another
    process ended it first."""
    from optuna.exceptions import UpdateFinishedTrialError
    from optuna.trial import TrialState

    storage, tid = study_storage(study), trial_id(trial)
    try:
        storage.set_trial_user_attr(tid, "end_reason", reason)
        if not storage.set_trial_state_values(tid, state=TrialState.FAIL):
            return False
    except UpdateFinishedTrialError:
        return False
    retry = getattr(storage, "get_heartbeat_stale_trial_callback", lambda: None)()
    if retry is not None:
        retry(study, storage.get_trial(tid))
    return True


def retry_later(study, tid: int, *, queue: bool = False) -> bool:
    """Whether a failed trial is within its ``RETRIES`` retries; with ``queue`` (once it is
    FAIL), queue the copy with the same settings through the storage's retry callback."""
    storage = study_storage(study)
    trial = storage.get_trial(tid)
    if len(trial.system_attrs.get("retry_history", ())) >= RETRIES:
        return False
    retry = getattr(storage, "get_heartbeat_stale_trial_callback", lambda: None)()
    if retry is None:
        return False
    if queue:
        retry(study, trial)
    return True


def reclaim_orphans(study) -> list[int]:
    """Reclaim what ``orphans`` finds, then what the heartbeat grace period has made stale
    (Optuna's ``fail_stale_trials``, with a reason written first). Returns the trial numbers."""
    import optuna

    done = []
    try:
        for trial, reason in orphans(study):
            if fail_and_retry(study, trial, reason):
                log.info("trial %d reclaimed: %s", trial.number, reason)
                done.append(trial.number)
    except Exception as exc:                  # a busy database must not end the search
        log.warning("could not look for orphaned trials: %s", exc)
    optuna.storages.fail_stale_trials(study)
    return done
