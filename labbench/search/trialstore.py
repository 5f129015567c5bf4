"""The heartbeat thread of a search's trials in flight.

(The batched writes of a trial's values and attrs that used to live here are in
``labbench.search.optuna_adapter``, with the rest of Optuna's private API.)
"""

from __future__ import annotations

import logging
import threading

log = logging.getLogger("labbench.search.trialstore")


class HeartbeatThread:
    """Records a heartbeat for every trial in flight every ``interval`` seconds."""

    def __init__(self, storage, interval: float):
        self._beats_to, self._interval = storage, interval
        self._ids: set[int] = set()
        self._lock = threading.Lock()
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._beat, name="labbench-heartbeat", daemon=True)

    def start(self) -> None:
        self._thread.start()

    def add(self, trial_id: int) -> None:
        self._beats_to.record_heartbeat(trial_id)
        with self._lock:
            self._ids.add(trial_id)

    def discard(self, trial_id: int) -> None:
        with self._lock:
            self._ids.discard(trial_id)

    def beat_now(self) -> None:
        """Record every heartbeat now (the controller does this before it fails stale trials,
        so a starved heartbeat thread on a busy machine never makes its own trials look stale)."""
        with self._lock:
            ids = list(self._ids)
        for trial_id in ids:
            try:
                self._beats_to.record_heartbeat(trial_id)
            except Exception as exc:  # a busy database must not kill the search
                log.warning("heartbeat of trial id %s not recorded: %s", trial_id, exc)

    def _beat(self) -> None:
        while not self._stop.wait(self._interval):
            self.beat_now()

    def stop(self) -> None:
        self._stop.set()
        if self._thread.is_alive():
            self._thread.join(5.0)
