"""labbench.search.optuna_adapter (Optuna's private API) against Optuna's public API.

Each function of the adapter is run next to the public call that does the same thing, on the same
SQLite storage, and what the storage holds afterwards (read back through ``study.get_trials()``,
``study.user_attrs``, the storage's public getters) must be identical. An Optuna release that
moves an internal the adapter uses fails here, not in a user's search. Reference: Optuna's own
public API (``Trial.report``, ``Trial.set_user_attr``, ``Study.set_user_attr``,
``Trial.should_prune``, ``BaseStorage`` getters, ``GridSampler.is_exhausted``).
"""

from __future__ import annotations

import math

import optuna
import pytest
from optuna.exceptions import UpdateFinishedTrialError
from optuna.trial import TrialState

from labbench.search import optuna_adapter as oa

optuna.logging.set_verbosity(optuna.logging.WARNING)


@pytest.fixture
def storage(tmp_path):
    return optuna.storages.RDBStorage(f"sqlite:///{tmp_path}/adapter.db")


def _study(storage, name="s", **kwargs):
    return optuna.create_study(study_name=name, storage=storage, **kwargs)


def test_optuna_is_the_pinned_release():
    # the adapter is written for (and tested on) the release pyproject.toml pins
    assert optuna.__version__.startswith("5.0.")


def test_identities_match_the_storage_public_getters(storage):
    study = _study(storage)
    trial = study.ask()
    other = study.ask()
    stored = study_storage = oa.study_storage(study)
    assert oa.study_id(study) == storage.get_study_id_from_name("s")
    assert study_storage.get_study_name_from_id(oa.study_id(study)) == "s"
    for asked in (trial, other):
        assert stored.get_trial(oa.trial_id(asked)).number == asked.number
    frozen = {t.number: oa.trial_id(t) for t in study.get_trials()}
    assert frozen == {trial.number: oa.trial_id(trial), other.number: oa.trial_id(other)}
    assert oa.rdb_backend(study_storage) is storage          # under Optuna's cache wrapper
    assert oa.rdb_backend(optuna.storages.InMemoryStorage()) is None


@pytest.mark.parametrize("make", ["rdb", "memory"])
def test_batched_values_read_back_as_reported(storage, make):
    store = storage if make == "rdb" else optuna.storages.InMemoryStorage()
    study = _study(store)
    values = [(1, 0.9), (2, 0.7), (3, float("inf")), (4, float("-inf")), (5, float("nan")),
              (7, -1e-300)]
    ours, theirs = study.ask(), study.ask()
    oa.write_intermediate_values(study, oa.trial_id(ours), values[:2])
    oa.write_intermediate_values(study, oa.trial_id(ours), values[2:])    # a second batch
    oa.write_intermediate_values(study, oa.trial_id(ours), [])
    for step, value in values:
        theirs.report(value, step=step)
    study.tell(ours, 1.0)
    study.tell(theirs, 1.0)
    a, b = study.get_trials()
    assert a.intermediate_values.keys() == b.intermediate_values.keys() == {s for s, _ in values}
    for step in a.intermediate_values:
        x, y = a.intermediate_values[step], b.intermediate_values[step]
        assert x == y or (math.isnan(x) and math.isnan(y))
    with pytest.raises(UpdateFinishedTrialError):           # as Trial.report after the tell
        oa.write_intermediate_values(study, oa.trial_id(ours), [(9, 1.0)])


@pytest.mark.parametrize("make", ["rdb", "memory"])
def test_batched_trial_attrs_read_back_as_set(storage, make):
    store = storage if make == "rdb" else optuna.storages.InMemoryStorage()
    study = _study(store)
    attrs = {"curve": {"epoch": [1, 2], "val_loss": [0.5, None]}, "end_reason": "", "n": 3,
             "text": "ü ✓", "flag": True}
    ours, theirs = study.ask(), study.ask()
    oa.write_user_attrs(ours, {"end_reason": "placeholder", "n": 1})
    oa.write_user_attrs(ours, attrs)                 # overwrites two keys, adds the others
    theirs.set_user_attr("end_reason", "placeholder")
    theirs.set_user_attr("n", 1)
    for key, value in attrs.items():
        theirs.set_user_attr(key, value)
    assert ours.user_attrs == theirs.user_attrs == attrs       # the asked trial's own copy
    study.tell(ours, 1.0)
    study.tell(theirs, 1.0)
    a, b = study.get_trials()
    assert a.user_attrs == b.user_attrs == attrs
    with pytest.raises(UpdateFinishedTrialError):
        oa.write_user_attrs(ours, {"late": 1})


def test_batched_study_attrs_read_back_as_set(storage, tmp_path):
    ours, theirs = _study(storage, "ours"), _study(storage, "theirs")
    attrs = {"spec_toml": "[data]\npath = 'x.csv'\n", "labbench_format": 1, "space": [1, 2.5]}
    oa.write_study_attrs(ours, {"labbench_format": 0})
    oa.write_study_attrs(ours, attrs)
    theirs.set_user_attr("labbench_format", 0)
    for key, value in attrs.items():
        theirs.set_user_attr(key, value)
    fresh = optuna.storages.RDBStorage(f"sqlite:///{tmp_path}/adapter.db")   # another reader
    read = {n: optuna.load_study(study_name=n, storage=fresh).user_attrs for n in ("ours", "theirs")}
    assert read["ours"] == read["theirs"] == attrs


def _history(study, curves):
    for curve in curves:
        trial = study.ask()
        for step, value in enumerate(curve, start=1):
            trial.report(value, step=step)
        study.tell(trial, curve[-1])


@pytest.mark.parametrize("curve, expected", [([0.5, 0.4, 0.3], False), ([2.0, 1.9, 1.8], True)])
def test_prune_decision_on_noted_values_equals_should_prune(storage, curve, expected):
    pruner = optuna.pruners.MedianPruner(n_startup_trials=2, n_warmup_steps=0)
    study = _study(storage, pruner=pruner)
    _history(study, [[1.0, 0.8, 0.6], [1.1, 0.9, 0.7], [0.9, 0.7, 0.5]])
    ours, theirs = study.ask(), study.ask()
    for step, value in enumerate(curve, start=1):
        oa.note_intermediate_value(ours, step, value)
        theirs.report(value, step=step)
        assert oa.prune_decision(study.pruner, study, ours) == theirs.should_prune()
    assert bool(theirs.should_prune()) is expected
    # noted values are the asked trial's own copy only: nothing reached the storage
    assert oa.study_storage(study).get_trial(oa.trial_id(ours)).intermediate_values == {}
    # and they are the copy Trial.report keeps: reporting a noted step again is ignored
    with pytest.warns(UserWarning, match="already reported"):
        ours.report(99.0, step=1)


def test_claim_stores_what_the_public_calls_store(storage):
    study = _study(storage)
    ours, theirs = study.ask(), study.ask()
    owner = {"host": "h", "pid": 12, "start": "34"}
    oa.claim_trial(storage, oa.trial_id(ours), {"labbench_owner": owner}, {"end_reason": "lost"})
    storage.record_heartbeat(oa.trial_id(theirs))
    storage.set_trial_system_attr(oa.trial_id(theirs), "labbench_owner", owner)
    storage.set_trial_user_attr(oa.trial_id(theirs), "end_reason", "lost")
    a, b = (storage.get_trial(oa.trial_id(t)) for t in (ours, theirs))
    assert a.system_attrs == b.system_attrs and a.system_attrs["labbench_owner"] == owner
    assert a.user_attrs == b.user_attrs == {"end_reason": "lost"}
    beats, now = oa.running_heartbeats(storage, oa.study_id(study))
    assert set(beats) == {oa.trial_id(ours), oa.trial_id(theirs)}
    assert all(abs((now - beat).total_seconds()) < 60 for beat in beats.values())
    with pytest.raises(Exception):                    # a second first heartbeat: one row only
        oa.claim_trial(storage, oa.trial_id(ours), {}, {})
    study.tell(theirs, 1.0)                           # only RUNNING trials have a heartbeat here
    beats, _ = oa.running_heartbeats(storage, oa.study_id(study))
    assert set(beats) == {oa.trial_id(ours)}


def test_starting_storage_sees_every_trial_that_starts(tmp_path):
    started = []
    cls = oa.starting_storage_class(lambda store, tid: started.append(tid))
    store = cls(f"sqlite:///{tmp_path}/start.db")
    study = _study(store)
    first = study.ask()
    study.enqueue_trial({"x": 1.0})                   # WAITING: not started yet
    assert started == [oa.trial_id(first)]
    second = study.ask()                              # takes the queued trial over
    assert second.params == {} and oa.trial_id(second) != oa.trial_id(first)
    running = [oa.trial_id(t) for t in study.get_trials(states=(TrialState.RUNNING,))]
    assert sorted(started) == sorted(running) and len(started) == 2


def _snapshot(study):
    """Everything a sampler or pruner reads of each trial (Optuna's public FrozenTrial fields)."""
    return [(t.number, t.state, t.values, t.params, t.user_attrs, t.system_attrs,
             t.intermediate_values) for t in study.get_trials(deepcopy=False)]


def test_the_read_view_reads_what_a_fresh_reader_reads(tmp_path):
    # Reference: a study loaded through a plain RDBStorage (Optuna's own public reads, no view)
    # after every kind of write a search makes, with no refresh due in between.
    url = f"sqlite:///{tmp_path}/view.db"
    cls = oa.starting_storage_class(lambda store, tid: None, refresh_s=3600)
    study = _study(cls(url))

    def fresh():
        return optuna.load_study(study_name="s", storage=optuna.storages.RDBStorage(url))

    assert _snapshot(study) == _snapshot(fresh())
    for k in range(4):
        trial = study.ask()
        trial.suggest_float("x", 0, 1)
        assert _snapshot(study) == _snapshot(fresh())
        oa.write_user_attrs(trial, {"settings": {"k": k}})
        oa.write_intermediate_values(study, oa.trial_id(trial), [(1, 0.5), (2, 0.25)])
        trial.report(0.1, 3)
        assert _snapshot(study) == _snapshot(fresh())
        if k % 2:
            study.tell(trial, float(k))
        else:
            study.tell(trial, state=TrialState.PRUNED)
        assert _snapshot(study) == _snapshot(fresh())


def test_the_read_view_builds_no_trial_of_its_own_from_the_database(tmp_path, monkeypatch):
    # A one-process search: every trial is created, written and ended through the view, so
    # neither the read after a write nor the periodic refresh (refresh_s=0: every read) needs
    # to build a trial from database rows, and what it returns still equals a fresh reader's.
    from optuna.storages import RDBStorage

    url = f"sqlite:///{tmp_path}/own.db"
    cls = oa.starting_storage_class(lambda store, tid: None, refresh_s=0)
    study = _study(cls(url))
    study.get_trials()
    built = []
    original = RDBStorage._build_frozen_trial_from_trial_model
    monkeypatch.setattr(RDBStorage, "_build_frozen_trial_from_trial_model",
                        lambda self, model: built.append(model.trial_id) or original(self, model))
    for k in range(5):
        trial = study.ask()
        trial.suggest_float("x", 0, 1)
        oa.write_user_attrs(trial, {"settings": {"k": k}})
        oa.write_intermediate_values(study, oa.trial_id(trial), [(1, 0.5)])
        study.tell(trial, float(k)) if k % 2 else study.tell(trial, state=TrialState.PRUNED)
        study.get_trials()
    assert built == []
    monkeypatch.undo()
    fresh = optuna.load_study(study_name="s", storage=optuna.storages.RDBStorage(url))
    assert _snapshot(study) == _snapshot(fresh)
    assert [t.datetime_complete for t in study.get_trials()] == \
        [t.datetime_complete for t in fresh.get_trials()]


def test_the_read_view_never_loses_trials_another_process_starts(tmp_path):
    # Another process (another storage object) creates a trial between two of ours, then ends
    # it; ours finishes first. The view sees the other's trial and, after the refresh time, its
    # end (Optuna's cache skips trials older than the last finished one it saw: none may be
    # skipped before it was read once).
    url = f"sqlite:///{tmp_path}/shared.db"
    cls = oa.starting_storage_class(lambda store, tid: None, refresh_s=3600)
    view_storage = cls(url)
    study = _study(view_storage)
    other = optuna.load_study(study_name="s", storage=optuna.storages.RDBStorage(url))
    first = study.ask()
    assert len(study.get_trials()) == 1
    theirs = other.ask()
    ours = study.ask()
    study.tell(ours, 1.0)
    study.tell(first, 2.0)
    assert [t.number for t in study.get_trials()] == [0, 1, 2]
    other.tell(theirs, 3.0)
    assert study.get_trials()[1].state == TrialState.RUNNING     # not refreshed yet
    view_storage._view()["full_at"].clear()                       # the refresh time has come
    assert _snapshot(study) == _snapshot(other)
    assert study.get_trials()[1].value == 3.0


def test_one_transaction_stores_what_the_writes_store_one_by_one(tmp_path):
    # Reference: the same suggestions on a plain RDBStorage (Optuna writes each parameter in
    # its own transaction); stored trials must read back identical (params and distributions).
    cls = oa.starting_storage_class(lambda store, tid: None)
    ours = _study(cls(f"sqlite:///{tmp_path}/deferred.db"), sampler=optuna.samplers.RandomSampler(seed=3))
    plain = _study(optuna.storages.RDBStorage(f"sqlite:///{tmp_path}/plain.db"),
                   sampler=optuna.samplers.RandomSampler(seed=3))

    def suggest(trial):
        return (trial.suggest_float("lr", 1e-4, 1e-1, log=True), trial.suggest_int("units", 8, 64),
                trial.suggest_categorical("act", ["relu", "tanh"]))

    for _ in range(3):
        a, b = ours.ask(), plain.ask()
        with oa.one_transaction(ours):
            got = suggest(a)
            assert a.params == dict(zip(("lr", "units", "act"), got))   # the trial's own copy
            oa.write_user_attrs(a, {"settings": list(got)})
            oa.write_intermediate_values(ours, oa.trial_id(a), [(1, 0.5)])
        b.set_user_attr("settings", list(got))
        b.report(0.5, 1)
        assert got == suggest(b)
        ours.tell(a, 1.0)
        plain.tell(b, 1.0)
    fresh = optuna.load_study(study_name="s", storage=optuna.storages.RDBStorage(
        f"sqlite:///{tmp_path}/deferred.db"))
    for x, y in zip(fresh.get_trials(), plain.get_trials()):
        assert x.params == y.params and x.distributions == y.distributions
        assert x.user_attrs == y.user_attrs and x.intermediate_values == y.intermediate_values
    # a parameter that changes kind within the study fails as Optuna's own write does
    trial = ours.ask()
    with pytest.raises(ValueError):
        with oa.one_transaction(ours):
            trial.suggest_int("lr", 1, 3)


def test_a_trial_ended_by_another_process_is_seen_as_ended_after_a_failed_write(tmp_path):
    # The runner's order when a trial was failed elsewhere (a stale heartbeat): its write raises
    # UpdateFinishedTrialError, then tell(skip_if_finished=True) must see the trial finished (the
    # read view must not answer from its copy) and return quietly, as on a plain storage.
    url = f"sqlite:///{tmp_path}/stale.db"
    cls = oa.starting_storage_class(lambda store, tid: None, refresh_s=3600)
    study = _study(cls(url))
    trial = study.ask()
    other = optuna.load_study(study_name="s", storage=optuna.storages.RDBStorage(url))
    other.tell(trial.number, state=TrialState.FAIL)
    with pytest.raises(UpdateFinishedTrialError):
        oa.write_user_attrs(trial, {"end_reason": "x"})
    study.tell(trial, 1.0, skip_if_finished=True)
    assert study.get_trials()[0].state == TrialState.FAIL


def test_grid_points_started_against_is_exhausted(storage):
    from labbench.search.strategy import _grid_sampler

    grid = {"a": [0, 1], "b": [0, 1]}
    sampler = _grid_sampler(grid, seed=0)
    study = _study(storage, sampler=sampler)
    trials = []
    for _ in range(4):
        assert not oa.grid_points_started(sampler, study)
        trial = study.ask()
        trial.suggest_categorical("a", grid["a"])
        trial.suggest_categorical("b", grid["b"])
        trials.append(trial)
    # all four points started: Optuna's public check still counts the running ones as open
    assert oa.grid_points_started(sampler, study) and not sampler.is_exhausted(study)
    for trial in trials:
        study.tell(trial, 0.0)
    assert oa.grid_points_started(sampler, study) and sampler.is_exhausted(study)
    seen = {(t.params["a"], t.params["b"]) for t in study.get_trials()}
    assert seen == {(a, b) for a in grid["a"] for b in grid["b"]}


def test_no_other_module_uses_optuna_private_api():
    """The adapter rule of DEVELOPERS.md: private Optuna names only in optuna_adapter.py."""
    import re
    from pathlib import Path

    import labbench

    private = re.compile(r"\._trial_id\b|_cached_frozen_trial|_get_latest_trial|\._study_id\b|"
                         r"\._storage\b|optuna\.storages\._|_same_search_space|_n_min_trials|"
                         r"\._create_new_trial\b")
    root = Path(labbench.__file__).parent
    found = [f"{path.relative_to(root)}:{n}: {line.strip()}"
             for path in sorted(root.rglob("*.py")) if path.name != "optuna_adapter.py"
             for n, line in enumerate(path.read_text(encoding="utf-8").splitlines(), start=1)
             if private.search(line)]
    assert found == []
