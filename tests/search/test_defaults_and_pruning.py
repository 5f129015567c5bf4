"""Issue 8: the default searched space, the per-trial pruning warm-up, and a search with nothing
to search."""

from __future__ import annotations

import threading

import optuna
import pytest

from labbench.search import events as ev
from labbench.search.runner import SearchRunner
from labbench.search.spec import load_spec, loads_spec
from labbench.search.strategy import (MIN_WARMUP, WARMUP_SHARE, PruneCheck, make_pruner,
                                      trial_warmup, warmup_epochs)
from runner_support import iris_csv, load, write_spec


def test_a_spec_without_a_space_section_searches_the_default_space(tmp_path):
    spec = loads_spec('[data]\npath = "t.csv"\ntarget = "y"\n', tmp_path)
    searched = set(spec.space.searched_params())
    # the settings a practitioner would otherwise pick by hand are searched
    assert {"learning_rate", "hidden_layers", "units_1", "batch_size", "activation"} <= searched
    assert spec.space.searched("l2")
    # ... and the epoch count is a maximum for early stopping, not searched
    assert not spec.space.searched("epochs")


def test_a_space_section_keeps_its_meaning_settings_left_out_are_fixed(tmp_path):
    spec = loads_spec('[data]\npath = "t.csv"\ntarget = "y"\n[space]\nlearning_rate = 0.01\n',
                      tmp_path)
    assert spec.space.searched_params() == []
    # the written spec carries the space explicitly, so reading it back gives the same space
    again = loads_spec(spec.to_toml(tmp_path), tmp_path)
    assert again.space == spec.space


def test_the_warm_up_scales_with_the_trials_own_maximum_epochs():
    assert trial_warmup(200) == 100 == WARMUP_SHARE * 200
    assert trial_warmup(4) == MIN_WARMUP
    assert trial_warmup(200) > trial_warmup(20)


def _study_with_fast_learners(tmp_path, spec_epochs: str):
    """Ten complete trials whose loss falls fast, then a slow starter (its loss at every early
    epoch is worse than theirs, but it ends lower)."""
    iris_csv(tmp_path)
    spec = load_spec(write_spec(tmp_path, pruner="median", space=f"epochs = {spec_epochs}"))
    study = optuna.create_study(storage=f"sqlite:///{tmp_path}/p.db", pruner=make_pruner(spec))
    for _ in range(10):
        t = study.ask()
        for step in range(1, 201):
            t.report(1.0 / step ** 0.5 + 0.5, step)
        study.tell(t, 0.0)
    return spec, study


def test_a_slow_starter_with_many_epochs_is_not_judged_at_the_start(tmp_path):
    spec, study = _study_with_fast_learners(tmp_path, "{ low = 10, high = 200 }")
    check = PruneCheck(study, study.pruner, warmup_epochs(spec))
    slow = study.ask()
    first_judged = None
    for step in range(1, 201):
        slow.report(3.0 - 2.9 * step / 200, step)        # worse than the others until late
        if check(slow, step, max_epochs=200):
            first_judged = step
            break
    # the old rule (30 % of the *shortest* trial, at least 3 epochs) pruned it at epoch 3; now it
    # is first judged at half of its own 200 epochs
    assert first_judged == trial_warmup(200) == 100


def test_a_short_trial_is_still_pruned_after_its_own_warm_up(tmp_path):
    spec, study = _study_with_fast_learners(tmp_path, "{ low = 10, high = 200 }")
    check = PruneCheck(study, study.pruner, warmup_epochs(spec))
    bad = study.ask()
    decisions = []
    for step in range(1, 21):
        bad.report(5.0, step)
        decisions.append(check(bad, step, max_epochs=20))
    assert not any(decisions[:trial_warmup(20) - 1]) and decisions[trial_warmup(20) - 1]


def test_the_median_pruner_waits_for_enough_complete_trials(tmp_path):
    iris_csv(tmp_path)
    spec = load_spec(write_spec(tmp_path, pruner="median"))
    pruner = make_pruner(spec)
    study = optuna.create_study(storage=f"sqlite:///{tmp_path}/q.db", pruner=pruner)
    for _ in range(pruner._n_startup_trials - 1):
        t = study.ask()
        for step in range(1, 11):
            t.report(0.1, step)
        study.tell(t, 0.0)
    t = study.ask()
    check = PruneCheck(study, pruner, warmup_epochs(spec))
    for step in range(1, 11):
        t.report(9.0, step)
        assert not check(t, step, max_epochs=10)


def _run(spec_path, db):
    events = []
    runner = SearchRunner(load_spec(spec_path), events.append, storage=f"sqlite:///{db}")
    return runner.run(threading.Event()), events


def test_a_search_with_nothing_searched_runs_one_trial_and_says_so(tmp_path):
    iris_csv(tmp_path)
    spec = write_spec(tmp_path, trials=6, space="epochs = 3\nhidden_units = 4")
    db = tmp_path / "s.db"
    outcome, events = _run(spec, db)
    assert outcome.trials_run == 1 and len(load(db).trials) == 1
    notices = [e.text for e in events if isinstance(e, ev.Notice)]
    assert any("Nothing is searched" in n and "one trial" in n for n in notices)
    # running it again adds nothing: the stored trial already holds the result
    outcome, events = _run(spec, db)
    assert outcome.trials_run == 0 and len(load(db).trials) == 1
    assert any("no new trial" in e.text for e in events if isinstance(e, ev.Notice))


@pytest.mark.parametrize("pruner", ["median", "halving", "hyperband"])
def test_every_pruner_gets_at_least_the_shortest_warm_up(tmp_path, pruner):
    iris_csv(tmp_path)
    spec = load_spec(write_spec(tmp_path, pruner=pruner, space="epochs = { low = 20, high = 60 }"))
    p = make_pruner(spec)
    got = getattr(p, "_n_warmup_steps", None) or getattr(p, "_min_resource", None)
    assert got == trial_warmup(20) == 10
