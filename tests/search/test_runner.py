"""The ask/tell runner through its Python API: events, stored attrs, reproducibility, pruning,
divergence, cancel from another thread."""

from __future__ import annotations

import math
import os
import threading

import numpy as np
import pytest

from labbench.search import events as ev
from labbench.search.runner import CANCELLED, SearchRunner
from labbench.search.spec import load_spec
from labbench.search.storage import Heartbeat
from runner_support import diabetes_csv, iris_csv, load, write_spec

STUDY_ATTRS = {"spec_toml", "spec_path", "data_sha256", "data_path", "task", "metric", "direction",
               "classes", "n_rows", "n_holdout", "versions", "labbench_format", "searched",
               "log_scaled"}
TRIAL_ATTRS = {"settings", "fold_scores", "cv_std", "curve", "duration_s", "epochs_run",
               "end_reason", "worker"}


class Recorder(list):
    def __call__(self, event):
        self.append(event)

    def of(self, kind):
        return [e for e in self if isinstance(e, kind)]


def run(spec_path, db, **kw):
    events = Recorder()
    cancel = kw.pop("cancel", None) or threading.Event()
    runner = SearchRunner(load_spec(spec_path), events, storage=f"sqlite:///{db}", **kw)
    outcome = runner.run(cancel)
    return outcome, events


def test_a_search_stores_the_contract_and_emits_the_events(tmp_path):
    iris_csv(tmp_path)
    spec = write_spec(tmp_path, trials=3)
    db = tmp_path / "s.db"
    outcome, events = run(spec, db)
    assert outcome.reason == "budget" and outcome.trials_run == 3
    assert isinstance(events[0], ev.SearchStarted) and isinstance(events[-1], ev.SearchEnded)
    assert events[0].metric == "balanced_accuracy" and events[0].direction == "maximize"
    assert set(events[0].searched) == {"learning_rate", "units_1", "activation"}
    assert events[0].log_scaled == ("learning_rate",)
    ended = events.of(ev.TrialEnded)
    assert [e.state for e in ended] == ["complete"] * 3
    study = load(db)
    assert STUDY_ATTRS <= set(study.user_attrs)
    assert study.user_attrs["classes"] == ["setosa", "versicolor", "virginica"]
    assert study.user_attrs["n_rows"] + study.user_attrs["n_holdout"] == 150
    for t in study.trials:
        assert t.state.name == "COMPLETE"
        assert TRIAL_ATTRS <= set(t.user_attrs)
        ua = t.user_attrs
        assert len(ua["fold_scores"]) == 3 and ua["end_reason"] == ""
        assert t.value == pytest.approx(np.mean(ua["fold_scores"]), abs=1e-12)
        assert ua["cv_std"] == pytest.approx(np.std(ua["fold_scores"], ddof=1), abs=1e-12)
        assert ua["curve"]["epoch"] == [1, 2, 3, 4] and ua["epochs_run"] == 4
        # intermediate values: the fold-mean validation loss, sign-flipped for a maximised metric
        assert [t.intermediate_values[s] for s in (1, 2, 3, 4)] == \
            pytest.approx([-v for v in ua["curve"]["val_loss"]], abs=1e-12)
        assert ua["settings"]["epochs"] == 4 and ua["settings"]["hidden"][0] == t.params["units_1"]
    scored = events.of(ev.EpochScored)
    assert len(scored) == 12 and {e.epochs_total for e in scored} == {4}
    best = events.of(ev.NewBest)[-1]
    assert best.value == max(t.value for t in study.trials)
    assert events.of(ev.Progress)[-1].done == 3
    assert outcome.counts["complete"] == 3 and outcome.best_value == best.value


def test_a_seeded_sequential_search_is_reproduced_exactly(tmp_path):
    """Same spec, one worker, seeded TPE (past its 10 random start-up trials) → same trials."""
    iris_csv(tmp_path)
    spec = write_spec(tmp_path, trials=12, pruner="median")
    results = []
    for name in ("a.db", "b.db"):
        run(spec, tmp_path / name)
        results.append([(t.params, t.value, t.user_attrs["fold_scores"], t.state.name)
                        for t in load(tmp_path / name).trials])
    assert len(results[0]) == 12
    assert results[0] == results[1]
    assert len({str(r[0]) for r in results[0]}) > 6      # the sampler really varied the settings


def test_pruning_stops_hopeless_trials_early(tmp_path):
    """A learning rate of 1e-7 cannot move the network in 20 epochs; the median pruner (after
    its start-up trials, and after each trial's own warm-up) must stop such trials, and only
    those."""
    from labbench.search.strategy import PRUNER_STARTUP_TRIALS

    iris_csv(tmp_path)
    space = """
learning_rate = { choices = [1e-7, 0.05, 0.04, 0.03] }
hidden_layers = 1
hidden_units = 8
epochs = 20
batch_size = 16
"""
    spec = write_spec(tmp_path, trials=PRUNER_STARTUP_TRIALS + 8, sampler="random",
                      pruner="median", space=space, seed=5)
    db = tmp_path / "s.db"
    run(spec, db)
    trials = load(db).trials
    pruned = [t for t in trials if t.state.name == "PRUNED"]
    assert pruned, [(t.params, t.state.name) for t in trials]
    for t in pruned:
        assert t.params["learning_rate"] == 1e-7
        assert t.user_attrs["epochs_run"] < 20 and "pruned after epoch" in t.user_attrs["end_reason"]
    good = [t for t in trials if t.params["learning_rate"] > 1e-7]
    assert good and all(t.state.name == "COMPLETE" for t in good)


def test_a_diverging_trial_fails_with_its_reason_and_the_search_goes_on(tmp_path):
    diabetes_csv(tmp_path)
    space = """
learning_rate = { choices = [1e-3, 10.0] }
optimizer = "sgd"
hidden_layers = 1
hidden_units = 8
epochs = 5
"""
    spec = write_spec(tmp_path, data="diabetes.csv", target="target", trials=6, sampler="grid",
                      space=space)
    db = tmp_path / "s.db"
    outcome, events = run(spec, db)
    by_lr = {t.params["learning_rate"]: t for t in load(db).trials}
    assert by_lr[10.0].state.name == "FAIL" and by_lr[10.0].user_attrs["end_reason"]
    assert by_lr[1e-3].state.name == "COMPLETE"
    # the grid has two points: the search stops there with a notice
    assert outcome.trials_run == 2 and outcome.reason == "budget"
    assert any("grid" in n.text for n in events.of(ev.Notice))


def test_an_exploding_validation_loss_fails_the_trial_and_never_becomes_the_winner(tmp_path):
    """Adam at learning rate 10 with two layers of 64: every loss stays finite, but the validation
    loss ends thousands of times above both its start and a constant prediction. Before this was
    caught, such a trial was stored COMPLETE with an RMSE in the thousands (on a target whose
    spread is ~77) and fed to the sampler."""
    from labbench.search.prepare import prepare
    from labbench.search.winner import finalize, pick_winner

    diabetes_csv(tmp_path)
    space = """
learning_rate = { choices = [1e-3, 10.0] }
hidden_layers = 2
hidden_units = 64
epochs = 6
"""
    spec = write_spec(tmp_path, data="diabetes.csv", target="target", trials=2, sampler="grid",
                      space=space)
    db = tmp_path / "s.db"
    outcome, events = run(spec, db)
    study = load(db)
    by_lr = {t.params["learning_rate"]: t for t in study.trials}
    bad, good = by_lr[10.0], by_lr[1e-3]
    assert bad.state.name == "FAIL" and bad.value is None
    assert "diverged" in bad.user_attrs["end_reason"] and "more than 1000 times" in bad.user_attrs["end_reason"]
    assert "best_epoch" not in bad.user_attrs
    assert good.state.name == "COMPLETE" and 1 <= good.user_attrs["best_epoch"] <= 6
    assert {e.number: e.state for e in events.of(ev.TrialEnded)}[bad.number] == "failed"
    assert all(e.number == good.number for e in events.of(ev.NewBest))
    assert outcome.counts["complete"] == 1
    assert pick_winner(study.trials, "minimize")[0].number == good.number
    summary, _ = finalize(load_spec(spec), study, prepare(load_spec(spec)), out_dir=tmp_path / "out",
                          seed_spread=0)
    assert summary["trial_number"] == good.number and summary["best_epoch"] == good.user_attrs["best_epoch"]


def test_holdout_rows_never_reach_any_trial(tmp_path):
    """Poison the target of every hold-out row with 1e7 (diabetes targets are 25–346): a hold-out
    row in any fold's training or validation rows would push that fold's RMSE far above 1e3 (or
    make training diverge). Control: poisoning one *training* row instead is caught."""
    import pandas as pd

    from labbench.search.prepare import prepare

    space = "learning_rate = 0.01\nhidden_layers = 1\nhidden_units = 8\nepochs = 3"
    base = diabetes_csv(tmp_path)
    spec_path = write_spec(tmp_path, data="diabetes.csv", target="target", trials=1, space=space)
    split = prepare(load_spec(spec_path))
    frame = pd.read_csv(base)

    def search_with_poison(rows, tag):
        poisoned = frame.copy()
        poisoned.loc[rows, "target"] = 1e7
        poisoned.to_csv(tmp_path / f"{tag}.csv", index=False)
        path = write_spec(tmp_path, data=f"{tag}.csv", target="target", trials=1, space=space,
                          name=f"{tag}.toml")
        again = prepare(load_spec(path))
        assert np.array_equal(again.holdout_pos, split.holdout_pos)   # same split as unpoisoned
        run(path, tmp_path / f"{tag}.db")
        return load(tmp_path / f"{tag}.db", tag).trials[0]

    clean = search_with_poison(split.holdout_pos, "holdout")
    assert clean.state.name == "COMPLETE"
    assert max(clean.user_attrs["fold_scores"]) < 1e3
    leaked = search_with_poison(split.train_pos[:1], "leak")
    assert leaked.state.name == "FAIL" or max(leaked.user_attrs["fold_scores"]) > 1e4


def test_cancel_from_another_thread_ends_the_trial_as_failed(tmp_path):
    iris_csv(tmp_path)
    space = "learning_rate = { low = 0.001, high = 0.01 }\nhidden_layers = 1\nhidden_units = 8\n" \
            "epochs = 100000\npatience = 0\nbatch_size = 8"
    spec = write_spec(tmp_path, trials=5, space=space, workers=2)
    db = tmp_path / "s.db"
    cancel = threading.Event()
    events = Recorder()
    box = {}

    def watch(event):
        events(event)
        if isinstance(event, ev.EpochScored) and event.epoch >= 3:
            cancel.set()

    runner = SearchRunner(load_spec(spec), watch, storage=f"sqlite:///{db}")
    thread = threading.Thread(target=lambda: box.setdefault("outcome", runner.run(cancel)))
    thread.start()
    thread.join(120)
    assert not thread.is_alive()
    outcome = box["outcome"]
    assert outcome.reason == "cancelled" and outcome.cancelled
    assert events[-1].reason == "cancelled"
    trials = load(db).trials
    assert trials and all(t.state.name == "FAIL" for t in trials)
    assert all(t.user_attrs["end_reason"] == CANCELLED for t in trials)
    assert {e.state for e in events.of(ev.TrialEnded)} == {"cancelled"}
    # stopped after a handful of its 100000 epochs
    assert all(t.user_attrs["epochs_run"] < 1000 for t in trials)


def test_bad_budget_values_are_refused(tmp_path):
    from labbench.errors import SpecError

    iris_csv(tmp_path)
    spec = load_spec(write_spec(tmp_path))
    for kw, words in (({"trials": 0}, "--trials"), ({"minutes": -1}, "--minutes"),
                      ({"workers": 0}, "--workers")):
        with pytest.raises(SpecError, match=words):
            SearchRunner(spec, storage="sqlite:///x.db", **kw)


def test_time_budget_stops_asking(tmp_path):
    iris_csv(tmp_path)
    spec = write_spec(tmp_path, trials=10_000)
    outcome, events = run(spec, tmp_path / "s.db", minutes=0.05,
                          heartbeat=Heartbeat(10, 60))
    assert outcome.reason == "time"
    assert 0 < outcome.trials_run < 10_000
    assert math.isfinite(outcome.best_value)


FAULTS = '''
# Injected into the spawned worker processes of one test only (through PYTHONPATH).
import os
import labbench.search.objective as objective

_real = objective.run_trial


def run_trial(prepared, settings, **kw):
    if settings["hidden"] == [5]:
        raise TypeError("an injected bug")
    if settings["hidden"] == [6]:
        os._exit(3)
    return _real(prepared, settings, **kw)


objective.run_trial = run_trial
'''


def test_worker_bugs_and_crashes_fail_the_trial_with_a_notice_and_the_search_goes_on(
        tmp_path, monkeypatch):
    inject = tmp_path / "inject"
    inject.mkdir()
    (inject / "sitecustomize.py").write_text(FAULTS)
    monkeypatch.setenv("PYTHONPATH", os.pathsep.join(                # keep a worktree's path
        filter(None, [str(inject), os.environ.get("PYTHONPATH", "")])))
    iris_csv(tmp_path)
    space = "learning_rate = 0.01\nhidden_layers = 1\nhidden_units = { choices = [5, 6, 7] }\n" \
            "epochs = 2"
    spec = write_spec(tmp_path, trials=4, sampler="grid", space=space)
    db = tmp_path / "s.db"
    outcome, events = run(spec, db)
    trials = load(db).trials
    by_units = {t.params["units_1"]: t for t in trials}
    assert by_units[5].state.name == "FAIL"
    assert "internal error" in by_units[5].user_attrs["end_reason"]
    assert "TypeError: an injected bug" in by_units[5].user_attrs["end_reason"]
    # the killed worker's trial is tried once more with the same settings, then left failed
    crashed = [t for t in trials if t.params["units_1"] == 6]
    assert [t.state.name for t in crashed] == ["FAIL", "FAIL"]
    assert crashed[0].params == crashed[1].params
    assert all("exit code 3" in t.user_attrs["end_reason"] for t in crashed)
    assert "retried with the same settings" in crashed[0].user_attrs["end_reason"]
    assert "retried" not in crashed[1].user_attrs["end_reason"]
    assert by_units[7].state.name == "COMPLETE"          # on a fresh worker after the crash
    notices = " ".join(n.text for n in events.of(ev.Notice))
    assert "internal error" in notices and "stopped unexpectedly" in notices
    assert outcome.reason == "budget"


def test_the_cached_prune_check_decides_as_optunas_own_should_prune(tmp_path):
    """PruneCheck (median pruner on a cached list of complete trials) against Optuna's
    ``Trial.should_prune`` on the same study, at every step of many synthetic trials."""
    import optuna

    from labbench.search.strategy import PruneCheck

    rng = np.random.default_rng(0)
    study = optuna.create_study(storage=f"sqlite:///{tmp_path}/p.db",
                                pruner=optuna.pruners.MedianPruner(n_startup_trials=3,
                                                                   n_warmup_steps=2))
    check = PruneCheck(study, study.pruner, warmup=2)
    decisions = 0
    for _ in range(25):
        trial = study.ask()
        level = rng.uniform(0.5, 2.0)
        pruned = False
        for step in range(1, 11):
            trial.report(level / step + rng.normal(0, 0.02), step=step)
            mine, theirs = check(trial, step), trial.should_prune()
            assert mine == theirs, (trial.number, step)
            decisions += theirs
            if theirs:
                study.tell(trial, state=optuna.trial.TrialState.PRUNED)
                pruned = True
                break
        if not pruned:
            study.tell(trial, level)
        check.invalidate()
    assert decisions > 0                      # the comparison covered both answers


def test_queue_depth_is_fixed_by_the_worker_count_and_time_budgets_count_the_queue(tmp_path):
    """A worker keeps one asked trial queued (a fixed depth, so a seeded search replays: test
    above), also with several; under a time budget a trial is queued only if it would
    start before the end behind the trials queued ahead of it (arithmetic by hand)."""
    import time

    from labbench.search.runner import PREFETCH, PREFETCH_SEVERAL

    iris_csv(tmp_path)
    spec = load_spec(write_spec(tmp_path, trials=5))
    assert SearchRunner(spec, workers=1).prefetch == PREFETCH == 1
    assert SearchRunner(spec, workers=2).prefetch == PREFETCH_SEVERAL == 1
    assert SearchRunner(spec, workers=2, prefetch=0).prefetch == 0
    timed = SearchRunner(spec, minutes=1.0)
    timed.t0 = time.monotonic() - 15.0         # 15 s of a 60 s budget gone
    timed.durations = [20.0, 20.0]             # trials take 20 s
    assert timed._time_for_another(1)          # starts at ≈35 s
    assert timed._time_for_another(2)          # ≈55 s
    assert not timed._time_for_another(3)      # ≈75 s: after the end
