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
import copy
import json
import logging
import threading
import time
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


def _on_trial(storage, trial_id: int, work, change=None) -> None:
    """Run ``work(session, models)`` in one transaction on a trial that may still be written
    (Optuna's own check: a finished trial raises ``UpdateFinishedTrialError``), or, inside
    ``one_transaction``, queue it for that block's transaction. TypeError when the storage is not
    a database one (the callers then take the public, per-value calls)."""
    backend = rdb_backend(storage)
    if backend is None:
        raise TypeError("not an RDB storage")
    models, scoped = _models()
    queued = backend.__dict__.get("_deferred")
    if queued is not None:
        queued.append((trial_id, work, change))
        return
    try:
        with scoped(backend.scoped_session, True) as session:
            row = models.TrialModel.find_or_raise_by_id(trial_id, session)
            backend.check_trial_is_updatable(trial_id, row.state)
            work(session, models)
    except BaseException:
        _written(backend, trial_id)           # whatever happened: read it again
        raise
    _written(backend, trial_id, change)


def _written(backend, trial_id: int, change=None) -> None:
    """Tell a storage that keeps a read view (``starting_storage_class``) that a trial changed:
    ``change(frozen_trial)`` repeats the write on its copy, or (None) the trial is re-read."""
    mark = getattr(backend, "mark_written", None)
    if mark is not None:
        mark(trial_id, change)


def _json_copy(value):
    """A value as it reads back from the storage's JSON (tuples become lists ...)."""
    return json.loads(json.dumps(value))


def _upsert(session, model, owner: Mapping[str, int], rows, attrs: Mapping[str, Any]) -> None:
    existing = {a.key: a for a in rows}
    new = []
    for key, value in attrs.items():
        text = json.dumps(value)
        if key in existing:
            existing[key].value_json = text
        else:
            new.append({**owner, "key": key, "value_json": text})
    _insert_many(session, model, new)


def _insert_many(session, model, rows: list[dict]) -> None:
    """New rows in one executed statement (the ORM sends one INSERT ... RETURNING per row)."""
    import sqlalchemy

    if rows:
        session.execute(sqlalchemy.insert(model.__table__), rows)


def write_intermediate_values(study, trial_id: int, values: list[tuple[int, float]]) -> None:
    """Store a trial's new (step, value) pairs in one transaction (as ``trial.report`` would,
    one by one; steps must be new)."""
    if not values:
        return
    storage = study._storage

    def change(frozen):
        for step, value in values:
            frozen.intermediate_values[int(step)] = float(value)

    def work(session, models):
        value_model = models.TrialIntermediateValueModel
        rows = []
        for step, value in values:
            stored, kind = value_model.intermediate_value_to_stored_repr(float(value))
            rows.append({"trial_id": trial_id, "step": int(step), "intermediate_value": stored,
                         "intermediate_value_type": kind})
        _insert_many(session, value_model, rows)

    try:
        _on_trial(storage, trial_id, work, change)
    except (ImportError, AttributeError, TypeError) as exc:
        log.debug("per-step intermediate values (%s)", exc)
        for step, value in values:
            storage.set_trial_intermediate_value(trial_id, int(step), float(value))


def write_user_attrs(trial, attrs: Mapping[str, Any]) -> None:
    """``trial.set_user_attr`` for several keys in one transaction (the trial's own copy too)."""
    storage = trial.study._storage
    tid = trial._trial_id

    def change(frozen):
        frozen.user_attrs.update(_json_copy(dict(attrs)))

    def work(session, models):
        model = models.TrialUserAttributeModel
        _upsert(session, model, {"trial_id": tid}, model.where_trial_id(tid, session), attrs)

    try:
        _on_trial(storage, tid, work, change)
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

    def change(frozen):
        frozen.system_attrs.update(_json_copy(dict(system_attrs)))
        frozen.user_attrs.update(_json_copy(dict(user_attrs)))

    try:
        with scoped(backend.scoped_session) as session:
            session.add(models.TrialHeartbeatModel(trial_id=trial_id))
            for model, attrs in ((models.TrialSystemAttributeModel, system_attrs),
                                 (models.TrialUserAttributeModel, user_attrs)):
                _upsert(session, model, {"trial_id": trial_id},
                        model.where_trial_id(trial_id, session), attrs)
    except BaseException:
        _written(backend, trial_id)
        raise
    _written(backend, trial_id, change)


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


#: A storage with a read view re-reads every trial of the study at least this often (trials
#: other processes change); what this process writes is re-read at its next read.
READ_REFRESH_S = 2.0


def starting_storage_class(on_start: Callable[[Any, int], None], refresh_s: float | None = None):
    """An ``RDBStorage`` subclass that calls ``on_start(storage, trial_id)`` for every trial that
    starts running through it (a new RUNNING trial from ``study.ask``, or a WAITING one taken
    over), and keeps a read view for Optuna's cache of trials.

    The read view. Optuna wraps an RDB storage in a cache that, on EVERY read of the trial list
    (a sampler reads it 2-4 times per ask, the pruner, ``ask`` looking for a queued trial, ...),
    queries the database for every unfinished trial and every trial newer than the last finished
    one, and builds them again (≈2 ms each with SQLite in a search). Here that query
    (``_get_trials``) asks only for what can have changed: the trials this process wrote since
    they were last read (every write of a trial through this storage or this module marks it),
    and trials newer than any read so far (other processes' new trials). Trials that no one here
    touched keep their cached copy; every ``refresh_s`` seconds (default ``READ_REFRESH_S``) the
    full query runs, so changes other processes make to older trials (a shared PostgreSQL search)
    arrive within that time. With nothing written and nothing due, a read costs no query at all.
    Writes made here are repeated on the cached copy of an unfinished trial (``mark_written``
    with a change) instead of re-reading it, the trial's end included (state, values and the
    time stamp written), and ``get_trial`` of such a trial answers from that copy; a write that
    fails (say the trial was ended elsewhere) sends the trial back to the database for its next
    read. Trials this process runs or ended, their copies whole, are never built again from
    database rows, not even by the periodic query: one id query finds which newer trials are
    other processes' (``_read_some``). A search of one process therefore builds no trial from
    the database after its first read, and reads exactly what the full query would return
    (tests/search/test_optuna_adapter.py compares it with a fresh reader).
    """
    from optuna.storages import RDBStorage
    from optuna.trial import TrialState

    every = READ_REFRESH_S if refresh_s is None else float(refresh_s)

    class StartingStorage(RDBStorage):
        def _view(self):
            view = self.__dict__.get("_read_view")
            if view is None:
                view = self.__dict__["_read_view"] = {
                    "lock": threading.Lock(), "written": set(), "seen": {}, "full_at": {},
                    "copies": {}, "study_of": {}, "own": set(), "ended": set(), "touched": False}
            return view

        def mark_written(self, trial_id: int, change=None) -> None:
            """A trial changed through this process: ``change(frozen)`` repeats the write on the
            copy the cache holds (no read needed), or the trial is re-read at the next read."""
            view = self._view()
            with view["lock"]:
                view["touched"] = True
                frozen = view["copies"].get(int(trial_id))
                if change is not None and frozen is not None and int(trial_id) not in view["written"]:
                    change(frozen)
                else:
                    view["written"].add(int(trial_id))

        def read_fresh(self) -> None:
            """The next read of the trial list runs the full query: for decisions about other
            processes' trials (reclaiming orphans), which the view may hold up to ``refresh_s``
            seconds old."""
            self._view()["full_at"].clear()

        def __getstate__(self):
            state = super().__getstate__()
            state.pop("_read_view", None)
            return state

        def _get_trials(self, study_id, states, included_trial_ids, trial_id_greater_than):
            view = self._view()
            now = time.monotonic()
            seen = view["seen"].get(study_id)
            full = (states is not None or seen is None
                    or now - view["full_at"].get(study_id, -1e300) >= every)
            with view["lock"]:
                written, view["written"] = view["written"], set()
                touched, view["touched"] = view["touched"], False
            if full and (states is not None or seen is None):
                trials = super()._get_trials(study_id, states, included_trial_ids,
                                             trial_id_greater_than)
            elif full:
                # Optuna's own question (its unfinished trials, and every trial newer than the
                # last finished one it saw), less what this process holds whole
                trials = self._read_some(study_id, set(included_trial_ids), trial_id_greater_than,
                                         written)
                view["full_at"][study_id] = now
            elif not written and not touched:
                return []
            else:
                # the trials written here whose copy is not whole, and every trial newer than
                # all read so far (each older one has been returned once, so the cache's
                # bookkeeping stays whole)
                trials = self._read_some(study_id, set(), seen, written)
            returned = {t._trial_id for t in trials}
            with view["lock"]:
                for t in trials:         # the very objects Optuna's cache keeps
                    if t.state.is_finished():
                        view["copies"].pop(t._trial_id, None)
                        view["ended"].discard(t._trial_id)
                    else:
                        view["copies"][t._trial_id] = t
                        view["study_of"][t._trial_id] = study_id
            if trials:
                view["seen"][study_id] = max([-1 if seen is None else seen, *returned])
            elif seen is None:
                view["seen"][study_id] = -1
            left = written - returned      # written trials of another study (or not yet visible)
            if left:
                with view["lock"]:
                    view["written"] |= left
            return trials

        def _read_some(self, study_id, wanted: set, after, written: set) -> list:
            """The trials ``wanted`` and every trial with an id above ``after``. Those this
            process runs or ended, with every write of theirs repeated on their copy (so the
            copy is what the database holds), come from the copy; the rest (other processes'
            trials, copies not whole) are read. One small id query finds the newer ones."""
            view = self._view()
            newer = _ids_after(self, study_id, after)
            with view["lock"]:
                copies = view["copies"]
                kept = {i: copies[i] for i in wanted.union(newer)
                        if i in copies and i not in written and (i in view["own"] or i in view["ended"])}
            need = (wanted | written).union(newer) - set(kept)
            trials = super()._get_trials(study_id, None, need, max(need)) if need else []
            got = {t._trial_id for t in trials}
            trials += [t for i, t in kept.items() if i not in got]
            trials.sort(key=lambda t: t._trial_id)
            return trials

        def _create_new_trial(self, study_id, template_trial=None):
            # (Optuna's cached storage calls this one; ``create_new_trial`` goes through it too)
            frozen = super()._create_new_trial(study_id, template_trial)
            view = self._view()
            starts = template_trial is None or template_trial.state == TrialState.RUNNING
            with view["lock"]:      # Optuna's cache keeps this object: later writes update it
                view["copies"][frozen._trial_id] = frozen
                view["study_of"][frozen._trial_id] = study_id
                if starts:
                    view["own"].add(frozen._trial_id)
            if starts:
                on_start(self, frozen._trial_id)
            return frozen

        def get_trial(self, trial_id):
            # an unfinished trial this process keeps up to date (created or read here, every
            # write of it repeated on the copy, nothing failed since): the copy is what the
            # database holds, so no query (Optuna's cache asks for unfinished trials each time)
            # A trial this process runs is written only here while it runs (another process
            # that ends it, taking this one for dead, makes the next write here fail, which
            # sends the trial back to the database), so its copy needs no refresh time.
            view = self._view()
            with view["lock"]:
                frozen = view["copies"].get(trial_id)
                study_id = view["study_of"].get(trial_id)
                fresh = (frozen is not None and trial_id not in view["written"]
                         and (trial_id in view["own"] or time.monotonic()
                              - view["full_at"].get(study_id, -1e300) < every))
                if fresh:
                    return copy.deepcopy(frozen)
            return super().get_trial(trial_id)

        def set_trial_state_values(self, trial_id, state, values=None):
            when = []
            try:
                changed = _set_state_values(self, trial_id, state, values, when)
            except BaseException:
                self.mark_written(trial_id)
                raise
            if changed and state.is_finished() and when:
                # the end as written (state, values, the same time stamp) repeated on the copy:
                # the next read of the trial list needs no query for it
                def change(frozen, state=state, values=values, stamp=when[0]):
                    frozen.state = state
                    if values is not None:
                        frozen.values = [float(v) for v in values]
                    frozen.datetime_complete = stamp
                self.mark_written(trial_id, change)
                with self._view()["lock"]:
                    if int(trial_id) not in self._view()["written"]:
                        self._view()["ended"].add(int(trial_id))
            else:
                self.mark_written(trial_id)
            with self._view()["lock"]:
                if changed and state == TrialState.RUNNING:
                    self._view()["own"].add(int(trial_id))
                elif state.is_finished():
                    self._view()["own"].discard(int(trial_id))
            if changed and state == TrialState.RUNNING:   # a queued trial taken over
                on_start(self, trial_id)
            return changed

    def _set_trial_param(self, trial_id, param_name, param_value_internal, distribution,
                         previous_distribution):
        pending = self.__dict__.get("_deferred")
        if pending is None:
            try:
                RDBStorage._set_trial_param(self, trial_id, param_name, param_value_internal,
                                            distribution, previous_distribution)
            except BaseException:
                self.mark_written(trial_id)
                raise
            self.mark_written(trial_id, _param_change(param_name, param_value_internal,
                                                      distribution))
            return
        if previous_distribution is not None:
            # the study's earlier kind of this parameter is known (Optuna's cache passes it):
            # the row is added as Optuna's ``_set_trial_param_without_commit`` adds it, without
            # its look-up of the trial per parameter (``flush`` checks the trial once)
            def work(session, models):
                from optuna import distributions as dists

                dists.check_distribution_compatibility(previous_distribution, distribution)
                session.add(models.TrialParamModel(
                    trial_id=trial_id, param_name=param_name, param_value=param_value_internal,
                    distribution_json=dists.distribution_to_json(distribution)))
        else:
            args = (param_name, param_value_internal, distribution, previous_distribution)

            def work(session, models):
                self._set_trial_param_without_commit(session, trial_id, *args)
        pending.append((trial_id, work, _param_change(param_name, param_value_internal, distribution)))

    def flush(self) -> None:
        """Run the writes collected by ``one_transaction`` in one transaction."""
        pending = self.__dict__.pop("_deferred", None)
        if not pending:
            return
        models, scoped = _models()
        try:
            with scoped(self.scoped_session, True) as session:
                checked = set()
                for trial_id, work, _ in pending:
                    if trial_id not in checked:
                        row = models.TrialModel.find_or_raise_by_id(trial_id, session)
                        self.check_trial_is_updatable(trial_id, row.state)
                        checked.add(trial_id)
                    work(session, models)
        except BaseException:
            for trial_id, _, _ in pending:
                self.mark_written(trial_id)
            raise
        for trial_id, _, change in pending:
            self.mark_written(trial_id, change)

    StartingStorage._set_trial_param = _set_trial_param
    StartingStorage.flush = flush

    def _marking(name, change_of=None):
        def write(self, trial_id, *args, **kwargs):
            try:
                result = getattr(RDBStorage, name)(self, trial_id, *args, **kwargs)
            except BaseException:
                self.mark_written(trial_id)
                raise
            self.mark_written(trial_id, change_of(*args, **kwargs) if change_of else None)
            return result
        write.__name__ = name
        return write

    def _value_change(step, intermediate_value):
        def change(frozen):
            frozen.intermediate_values[int(step)] = float(intermediate_value)
        return change

    def _attr_change(which):
        def make(key, value):
            def change(frozen):
                getattr(frozen, which)[key] = _json_copy(value)
            return change
        return make

    for name, change_of in (("set_trial_param", _param_change),
                            ("set_trial_intermediate_value", _value_change),
                            ("set_trial_user_attr", _attr_change("user_attrs")),
                            ("set_trial_system_attr", _attr_change("system_attrs"))):
        setattr(StartingStorage, name, _marking(name, change_of))
    return StartingStorage


def _ids_after(storage, study_id: int, after: int | None) -> list[int]:
    """Ids of the study's trials with an id above ``after`` (one small query)."""
    models, scoped = _models()
    trial = models.TrialModel
    with scoped(storage.scoped_session) as session:
        query = session.query(trial.trial_id).filter(trial.study_id == study_id)
        if after is not None and after > -1:
            query = query.filter(trial.trial_id > after)
        return [int(i) for (i,) in query.all()]


def _set_state_values(storage, trial_id, state, values, when: list) -> bool:
    """``RDBStorage.set_trial_state_values`` (Optuna 5.0, the same statements), with the time
    stamp it writes appended to ``when`` so the caller can repeat the write on its copy."""
    from datetime import datetime

    import sqlalchemy.exc
    from optuna.trial import TrialState

    models, scoped = _models()
    try:
        with scoped(storage.scoped_session) as session:
            trial = models.TrialModel.find_or_raise_by_id(trial_id, session, for_update=True)
            storage.check_trial_is_updatable(trial_id, trial.state)
            if values is not None:
                for objective, v in enumerate(values):
                    storage._set_trial_value_without_commit(session, trial, objective, v)
            if state == TrialState.RUNNING and trial.state != TrialState.WAITING:
                return False
            trial.state = state
            now = datetime.now()
            if state == TrialState.RUNNING:
                trial.datetime_start = now
            if state.is_finished():
                trial.datetime_complete = now
        when.append(now)
    except sqlalchemy.exc.IntegrityError:
        return False
    return True


def _param_change(param_name: str, param_value_internal: float, distribution):
    def change(frozen):
        frozen.params[param_name] = distribution.to_external_repr(param_value_internal)
        frozen.distributions[param_name] = distribution
    return change


@contextlib.contextmanager
def one_transaction(study):
    """Within the block, the parameters a trial's suggestions store and the writes of this
    module (``write_user_attrs``, ``write_intermediate_values``) are collected and run in ONE
    transaction at its end (Optuna writes each parameter in its own; a commit costs ≈1 ms, far
    more on a loaded machine). Trials' own copies change at once, as usual. An error of the
    writes (a parameter whose kind changed within the study, a trial finished elsewhere) is
    raised at the end of the block, and nothing of the block is written. A storage without this
    ability (not made by ``starting_storage_class``) writes as usual."""
    backend = rdb_backend(study._storage)
    if backend is None or not hasattr(backend, "flush") or "_deferred" in backend.__dict__:
        yield
        return
    backend.__dict__["_deferred"] = []
    try:
        yield
    except BaseException:
        pending = backend.__dict__.pop("_deferred", None) or ()
        for trial_id, _, _ in pending:
            backend.mark_written(trial_id)
        raise
    backend.flush()


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
