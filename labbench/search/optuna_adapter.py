"""Every use of Optuna's private API in labbench, in one place (Optuna is pinned to 5.0.*).

Rule: no other module touches an underscored Optuna name (``trial._trial_id``, ``study._storage``,
``optuna.storages._rdb``, a sampler's private attributes ...); they call the functions here.
``tests/search/test_optuna_adapter.py`` compares each one with Optuna's public API on the same
SQLite storage, so an Optuna release that moves these internals fails a test instead of quietly
corrupting a search.

Why private API at all: speed and atomicity. Optuna's public calls open one transaction per value
(``trial.report`` ≈ 0.9 ms each with SQLite, once per epoch), ``trial.should_prune()`` re-reads the
study (≈ 5 ms), and a trial's claim (heartbeat + owner + end reason) must be one transaction. The
batched writes fall back to the public per-value calls when the storage is not an RDB storage (or
its models moved); the other functions have no fallback — their tests are the guard.
"""

from __future__ import annotations

import contextlib
import json
import logging
from typing import Any, Callable, Mapping

# optuna is imported inside the functions: ≈1 s (python -X importtime), and labbench.search.storage
# (imported by the window for its URL and heartbeat helpers) imports this module.

log = logging.getLogger("labbench.search.optuna_adapter")


# --------------------------------------------------------------------------------------------
# Identities


def trial_id(trial) -> int:
    """The storage's id of a trial (``Trial`` or ``FrozenTrial``); not its ``number``."""
    return trial._trial_id


def study_storage(study):
    """The storage object a study reads and writes through (Optuna may wrap it in a cache)."""
    return study._storage


def study_id(study) -> int:
    """The storage's id of a study."""
    return study._study_id


def rdb_backend(storage):
    """The ``RDBStorage`` behind ``storage`` (unwrapping Optuna's cache), or None."""
    from optuna.storages import RDBStorage

    backend = getattr(storage, "_backend", storage)
    return backend if isinstance(backend, RDBStorage) else None


# --------------------------------------------------------------------------------------------
# An asked trial's own copy (what its pruner reads)


def note_intermediate_value(trial, step: int, value: float) -> None:
    """Put a per-epoch value into the asked trial's own copy only (``trial.report`` does this and
    also writes it; labbench writes in batches with ``write_intermediate_values``)."""
    trial._cached_frozen_trial.intermediate_values[int(step)] = float(value)


def prune_decision(pruner, study, trial) -> bool:
    """What ``trial.should_prune()`` decides, but with ``study`` standing in for the trial's study
    (labbench passes one with a cached list of complete trials)."""
    return bool(pruner.prune(study, trial._get_latest_trial()))


# --------------------------------------------------------------------------------------------
# Batched writes (one transaction instead of one per value)


def _models():
    from optuna.storages._rdb import models
    from optuna.storages._rdb.storage import _create_scoped_session

    return models, _create_scoped_session


@contextlib.contextmanager
def _trial_transaction(storage, trial_id: int):
    """``(session, models)`` of one transaction on a trial that may still be written (Optuna's
    own check: a finished trial raises ``UpdateFinishedTrialError``). TypeError when the storage
    is not a database one (the callers then take the public, per-value calls)."""
    backend = rdb_backend(storage)
    if backend is None:
        raise TypeError("not an RDB storage")
    models, scoped = _models()
    with scoped(backend.scoped_session, True) as session:
        row = models.TrialModel.find_or_raise_by_id(trial_id, session)
        backend.check_trial_is_updatable(trial_id, row.state)
        yield session, models


def _upsert(session, model, owner: Mapping[str, int], rows, attrs: Mapping[str, Any]) -> None:
    existing = {a.key: a for a in rows}
    for key, value in attrs.items():
        text = json.dumps(value)
        if key in existing:
            existing[key].value_json = text
        else:
            session.add(model(**owner, key=key, value_json=text))


def write_intermediate_values(study, trial_id: int, values: list[tuple[int, float]]) -> None:
    """Store a trial's new (step, value) pairs in one transaction (as ``trial.report`` would,
    one by one; steps must be new)."""
    if not values:
        return
    storage = study._storage
    try:
        with _trial_transaction(storage, trial_id) as (session, models):
            value_model = models.TrialIntermediateValueModel
            rows = []
            for step, value in values:
                stored, kind = value_model.intermediate_value_to_stored_repr(float(value))
                rows.append(value_model(trial_id=trial_id, step=int(step),
                                        intermediate_value=stored, intermediate_value_type=kind))
            session.add_all(rows)
    except (ImportError, AttributeError, TypeError) as exc:
        log.debug("per-step intermediate values (%s)", exc)
        for step, value in values:
            storage.set_trial_intermediate_value(trial_id, int(step), float(value))


def write_user_attrs(trial, attrs: Mapping[str, Any]) -> None:
    """``trial.set_user_attr`` for several keys in one transaction (the trial's own copy too)."""
    storage = trial.study._storage
    tid = trial._trial_id
    try:
        with _trial_transaction(storage, tid) as (session, models):
            model = models.TrialUserAttributeModel
            _upsert(session, model, {"trial_id": tid}, model.where_trial_id(tid, session), attrs)
        trial._cached_frozen_trial.user_attrs.update(attrs)
    except (ImportError, AttributeError, TypeError) as exc:
        log.debug("per-key user attrs (%s)", exc)
        for key, value in attrs.items():
            trial.set_user_attr(key, value)


def write_study_attrs(study, attrs: Mapping[str, Any]) -> None:
    """``study.set_user_attr`` for several keys in one transaction, so that another process
    joining the search sees all of them or none."""
    try:
        backend = rdb_backend(study._storage)
        if backend is None:
            raise TypeError("not an RDB storage")
        models, scoped = _models()
        model = models.StudyUserAttributeModel
        sid = study._study_id
        with scoped(backend.scoped_session) as session:
            rows = session.query(model).filter(model.study_id == sid).all()
            _upsert(session, model, {"study_id": sid}, rows, attrs)
    except (ImportError, AttributeError, TypeError) as exc:
        log.debug("per-key study attrs (%s)", exc)
        for key, value in attrs.items():
            study.set_user_attr(key, value)


def claim_trial(backend, trial_id: int, system_attrs: Mapping[str, Any],
                user_attrs: Mapping[str, Any]) -> None:
    """A first heartbeat plus system and user attrs of a trial, in one transaction (raises when
    that fails, e.g. a heartbeat row exists already; the caller falls back to public calls)."""
    models, scoped = _models()
    with scoped(backend.scoped_session) as session:
        session.add(models.TrialHeartbeatModel(trial_id=trial_id))
        for model, attrs in ((models.TrialSystemAttributeModel, system_attrs),
                             (models.TrialUserAttributeModel, user_attrs)):
            _upsert(session, model, {"trial_id": trial_id}, model.where_trial_id(trial_id, session),
                    attrs)


def running_heartbeats(backend, study_id: int):
    """(trial id → last heartbeat of every RUNNING trial of the study, the database's clock now),
    both naive UTC as Optuna stores them."""
    import sqlalchemy
    from optuna.trial import TrialState

    models, scoped = _models()
    beat = models.TrialHeartbeatModel
    with scoped(backend.scoped_session) as session:
        now = session.execute(sqlalchemy.func.now()).scalar()
        rows = (session.query(beat.trial_id, beat.heartbeat)
                .join(models.TrialModel, models.TrialModel.trial_id == beat.trial_id)
                .filter(models.TrialModel.study_id == study_id)
                .filter(models.TrialModel.state == TrialState.RUNNING).all())
    return {int(tid): when for tid, when in rows}, now.replace(tzinfo=None)


# --------------------------------------------------------------------------------------------
# Hooks into Optuna's classes


def starting_storage_class(on_start: Callable[[Any, int], None]):
    """An ``RDBStorage`` subclass that calls ``on_start(storage, trial_id)`` for every trial that
    starts running through it: a new RUNNING trial (``study.ask``), or a WAITING one taken over."""
    from optuna.storages import RDBStorage
    from optuna.trial import TrialState

    class StartingStorage(RDBStorage):
        def _create_new_trial(self, study_id, template_trial=None):
            # (Optuna's cached storage calls this one; ``create_new_trial`` goes through it too)
            frozen = super()._create_new_trial(study_id, template_trial)
            if template_trial is None or template_trial.state == TrialState.RUNNING:
                on_start(self, frozen._trial_id)
            return frozen

        def set_trial_state_values(self, trial_id, state, values=None):
            changed = super().set_trial_state_values(trial_id, state, values)
            if changed and state == TrialState.RUNNING:   # a queued trial taken over
                on_start(self, trial_id)
            return changed

    return StartingStorage


def grid_points_started(sampler, study) -> bool:
    """Whether every point of a ``GridSampler``'s grid has a trial that started (running or
    finished). Optuna's public ``is_exhausted`` counts running points as open."""
    from optuna.trial import TrialState

    started = {
        t.system_attrs["grid_id"]
        for t in study.get_trials(deepcopy=False)
        if "grid_id" in t.system_attrs and t.state != TrialState.WAITING
        and sampler._same_search_space(t.system_attrs["search_space"])
    }
    return len(started) >= sampler._n_min_trials
