"""Batched writes of a trial's values and attrs, the study's attrs, and the heartbeat thread.

Optuna's public calls open one transaction per value; a search writes every epoch, so these write
many rows in one transaction through Optuna 5.0's storage models, falling back to the public calls
when the storage is not an RDB storage (or its internals moved).
"""

from __future__ import annotations

import json
import logging
import threading
from typing import Any, Mapping

log = logging.getLogger("labbench.search.trialstore")


def write_intermediate_values(study, trial_id: int, values: list[tuple[int, float]]) -> None:
    """Store a trial's new per-epoch values (step, value) in one transaction.

    Optuna's ``trial.report`` opens a transaction and looks the trial and the step up for every
    value (≈0.9 ms each with SQLite); a search reports every epoch, so that was the largest part of
    the controller's work. On an RDB storage this inserts the rows in one go (≈0.05 ms each) through
    Optuna 5.0's storage models; anything unexpected falls back to the public per-step call.
    """
    if not values:
        return
    backend = getattr(study._storage, "_backend", study._storage)
    try:
        from optuna.storages import RDBStorage
        from optuna.storages._rdb import models
        from optuna.storages._rdb.storage import _create_scoped_session

        if not isinstance(backend, RDBStorage):
            raise TypeError("not an RDB storage")
        with _create_scoped_session(backend.scoped_session, True) as session:
            trial = models.TrialModel.find_or_raise_by_id(trial_id, session)
            backend.check_trial_is_updatable(trial_id, trial.state)
            rows = []
            for step, value in values:
                stored, kind = models.TrialIntermediateValueModel.intermediate_value_to_stored_repr(
                    float(value))
                rows.append(models.TrialIntermediateValueModel(
                    trial_id=trial_id, step=int(step), intermediate_value=stored,
                    intermediate_value_type=kind))
            session.add_all(rows)
    except (ImportError, AttributeError, TypeError) as exc:
        log.debug("per-step intermediate values (%s)", exc)
        for step, value in values:
            study._storage.set_trial_intermediate_value(trial_id, int(step), float(value))


def write_user_attrs(trial, attrs: Mapping[str, Any]) -> None:
    """``trial.set_user_attr`` for several keys in one transaction (same fallback as above)."""
    study = trial.study
    backend = getattr(study._storage, "_backend", study._storage)
    try:
        from optuna.storages import RDBStorage
        from optuna.storages._rdb import models
        from optuna.storages._rdb.storage import _create_scoped_session

        if not isinstance(backend, RDBStorage):
            raise TypeError("not an RDB storage")
        model = models.TrialUserAttributeModel
        with _create_scoped_session(backend.scoped_session, True) as session:
            row = models.TrialModel.find_or_raise_by_id(trial._trial_id, session)
            backend.check_trial_is_updatable(trial._trial_id, row.state)
            existing = {a.key: a for a in model.where_trial_id(trial._trial_id, session)}
            for key, value in attrs.items():
                text = json.dumps(value)
                if key in existing:
                    existing[key].value_json = text
                else:
                    session.add(model(trial_id=trial._trial_id, key=key, value_json=text))
        trial._cached_frozen_trial.user_attrs.update(attrs)
    except (ImportError, AttributeError, TypeError) as exc:
        log.debug("per-key user attrs (%s)", exc)
        for key, value in attrs.items():
            trial.set_user_attr(key, value)


class HeartbeatThread:
    """Records a heartbeat for every trial in flight every ``interval`` seconds."""

    def __init__(self, storage, interval: float):
        self._storage, self._interval = storage, interval
        self._ids: set[int] = set()
        self._lock = threading.Lock()
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._beat, name="labbench-heartbeat", daemon=True)

    def start(self) -> None:
        self._thread.start()

    def add(self, trial_id: int) -> None:
        self._storage.record_heartbeat(trial_id)
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
                self._storage.record_heartbeat(trial_id)
            except Exception as exc:  # a busy database must not kill the search
                log.warning("heartbeat of trial id %s not recorded: %s", trial_id, exc)

    def _beat(self) -> None:
        while not self._stop.wait(self._interval):
            self.beat_now()

    def stop(self) -> None:
        self._stop.set()
        if self._thread.is_alive():
            self._thread.join(5.0)


def write_study_attrs(study, attrs: Mapping[str, Any]) -> None:
    """``study.set_user_attr`` for several keys in one transaction, so that another process
    joining the search sees all of them or none (same fallback as above)."""
    backend = getattr(study._storage, "_backend", study._storage)
    try:
        from optuna.storages import RDBStorage
        from optuna.storages._rdb import models
        from optuna.storages._rdb.storage import _create_scoped_session

        if not isinstance(backend, RDBStorage):
            raise TypeError("not an RDB storage")
        model = models.StudyUserAttributeModel
        with _create_scoped_session(backend.scoped_session) as session:
            rows = session.query(model).filter(model.study_id == study._study_id).all()
            existing = {a.key: a for a in rows}
            for key, value in attrs.items():
                text = json.dumps(value)
                if key in existing:
                    existing[key].value_json = text
                else:
                    session.add(model(study_id=study._study_id, key=key, value_json=text))
    except (ImportError, AttributeError, TypeError) as exc:
        log.debug("per-key study attrs (%s)", exc)
        for key, value in attrs.items():
            study.set_user_attr(key, value)
