"""Trials of one shape trained as one stack (``labbench.search.together``, ``[search] together``).

The reference for every trial of a group is the same settings trained alone by
``objective.run_trial`` (the path a group of one takes): each must end with the same fold scores,
kept epoch and epochs run, whether it completes, runs out of patience, is stopped (pruned or
cancelled) or diverges while the others train on.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from labbench.errors import SpecError
from labbench.search import events as ev
from labbench.search.objective import run_trial
from labbench.search.prepare import prepare
from labbench.search.spec import load_spec
from labbench.search.together import AUTO, groups_of, run_together, together_count
from runner_support import diabetes_csv, iris_csv, load, write_spec
from test_runner import run

FIXED = """
learning_rate = { low = 0.001, high = 0.05, log = true }
l2 = { low = 1e-5, high = 1e-2, log = true }
hidden_layers = 1
hidden_units = 8
epochs = 12
patience = 3
batch_size = 16
activation = "tanh"
"""


def _settings(lr, l2=0.0, *, epochs=12, patience=3, optimizer="adam", momentum=0.9, hidden=(8,)):
    return {"hidden": list(hidden), "activation": "tanh", "optimizer": optimizer,
            "learning_rate": lr, "momentum": momentum, "l2": l2, "batch_size": 16,
            "epochs": epochs, "patience": patience, "init": "auto"}


def _alone(prepared, settings, stop_at=None):
    epochs = []

    def should_stop():
        return stop_at is not None and epochs and epochs[-1][0] >= stop_at

    result = run_trial(prepared, settings, seed=3, on_epoch=epochs.append, should_stop=should_stop,
                       dtype="float64")
    return result, epochs


def _together(prepared, trials, stop_at=None):
    results, epochs = {}, {n: [] for n, _ in trials}

    def should_stop(number):
        return stop_at is not None and number in stop_at and epochs[number][-1][0] >= stop_at[number]

    run_together(prepared, trials, seed=3, on_epoch=lambda n, v: epochs[n].append(v),
                 should_stop=should_stop, on_done=lambda n, r: results.setdefault(n, r),
                 dtype="float64")
    return results, epochs


def _same_result(got, want):
    assert got["end"] == want["end"] and got["epochs_run"] == want["epochs_run"]
    assert got.get("best_epoch") == want.get("best_epoch")
    np.testing.assert_allclose(got["fold_scores"], want["fold_scores"], rtol=1e-10)


def _same_curve(got, want):
    assert [v[0] for v in got] == [v[0] for v in want]
    for g, w in zip(got, want):
        np.testing.assert_allclose(g[1:3], w[1:3], rtol=1e-10)    # train and validation loss
        if math.isfinite(w[3]):                                   # the metric where alone had it
            assert g[3] == pytest.approx(w[3], rel=1e-10)


@pytest.fixture(scope="module")
def iris_prepared(tmp_path_factory):
    folder = tmp_path_factory.mktemp("iris")
    iris_csv(folder)
    return prepare(load_spec(write_spec(folder, space=FIXED)), fold_dtype="float64")


def test_each_trial_of_a_group_ends_as_it_would_alone(iris_prepared):
    # four learning rates: they run out of patience at different epochs, or run every epoch;
    # trial 12 is stopped after epoch 4 (as a pruned trial would be)
    trials = [(10, _settings(0.03, 1e-3)), (11, _settings(0.002)), (12, _settings(0.01, 1e-2)),
              (13, _settings(0.2, 1e-4))]
    results, epochs = _together(iris_prepared, trials, stop_at={12: 4})
    assert sorted(results) == [10, 11, 12, 13]
    assert results[12]["end"] == "stopped" and results[12]["epochs_run"] == 4
    for number, settings in trials:
        want, curve = _alone(iris_prepared, settings, stop_at=4 if number == 12 else None)
        _same_result(results[number], want)
        _same_curve(epochs[number], curve)
    assert len({r["epochs_run"] for r in results.values()}) > 1      # they ended apart
    cpu = [r["cpu_s"] for r in results.values()]
    assert all(c > 0 for c in cpu)


def test_a_diverging_trial_ends_alone_and_the_others_train_on(tmp_path):
    diabetes_csv(tmp_path)
    space = FIXED.replace('activation = "tanh"', 'activation = "relu"')
    spec = load_spec(write_spec(tmp_path, data="diabetes.csv", target="target", space=space))
    prepared = prepare(spec, fold_dtype="float64")
    blow = dict(_settings(1e4, optimizer="sgd", patience=0), activation="relu")
    calm = [dict(_settings(lr, optimizer="sgd", patience=0), activation="relu")
            for lr in (1e-3, 3e-3)]
    trials = [(1, calm[0]), (2, blow), (3, calm[1])]
    results, _ = _together(prepared, trials)
    want, _ = _alone(prepared, blow)
    assert want["end"] == "diverged"
    assert results[2]["end"] == "diverged" and results[2]["epochs_run"] == want["epochs_run"]
    assert "lower the learning rate" in results[2]["reason"]
    for number, settings in ((1, calm[0]), (3, calm[1])):
        _same_result(results[number], _alone(prepared, settings)[0])


def test_groups_follow_the_shape_and_keep_the_order_of_asking():
    from labbench.families import get_family

    family = get_family("network")
    trials = [(1, _settings(0.01)), (2, _settings(0.01, hidden=(4,))), (3, _settings(0.02)),
              (4, _settings(0.01, epochs=5)), (5, _settings(0.03, hidden=(4,)))]
    assert [[n for n, _ in g] for g in groups_of(family, trials)] == [[1, 3], [2, 5], [4]]
    maps = get_family("som")
    assert [[n for n, _ in g] for g in groups_of(maps, [(1, {}), (2, {})])] == [[1], [2]]


def test_together_is_automatic_for_a_fixed_shape_and_can_be_set(tmp_path):
    iris_csv(tmp_path)
    fixed = load_spec(write_spec(tmp_path, space=FIXED))
    searched = load_spec(write_spec(tmp_path, name="s.toml"))           # units and activation
    assert together_count(fixed) == AUTO and together_count(searched) == 1
    given = load_spec(write_spec(tmp_path, space=FIXED, extra_search="together = 2", name="g.toml"))
    assert together_count(given) == 2 and "together = 2" in given.to_toml()
    assert "together" not in fixed.to_toml()
    for bad, words in (("0", "whole number >= 1"), ("17", "more than labbench allows (16"),
                       ('"4"', "whole number")):
        path = write_spec(tmp_path, space=FIXED, extra_search=f"together = {bad}", name="b.toml")
        with pytest.raises(SpecError, match=r"search\.together") as info:
            load_spec(path)
        assert words in str(info.value) and "\n" not in str(info.value)


def test_a_search_of_one_shape_trains_its_trials_together_and_stores_each_alone(tmp_path):
    iris_csv(tmp_path)
    spec = write_spec(tmp_path, space=FIXED, trials=6, pruner="none")
    outcome, events = run(spec, tmp_path / "s.db")
    assert outcome.trials_run == 6 and outcome.counts["complete"] == 6
    started = events.of(ev.TrialStarted)
    ended = events.of(ev.TrialEnded)
    assert sorted(e.number for e in started) == list(range(6)) and len(ended) == 6
    # the first four start before any ends: one group of AUTO trials
    order = [(type(e).__name__, e.number) for e in events if isinstance(e, (ev.TrialStarted, ev.TrialEnded))]
    assert [kind for kind, _ in order[:AUTO]] == ["TrialStarted"] * AUTO
    prepared = prepare(load_spec(spec), fold_dtype="float32")
    for t in load(tmp_path / "s.db").trials:
        want = run_trial(prepared, t.user_attrs["settings"], seed=3, on_epoch=lambda v: None,
                         should_stop=lambda: False)
        assert t.user_attrs["epochs_run"] == want["epochs_run"]
        np.testing.assert_allclose(t.user_attrs["fold_scores"], want["fold_scores"], rtol=1e-5)


def test_a_seeded_search_with_groups_is_reproduced_and_pruning_ends_members(tmp_path):
    iris_csv(tmp_path)
    space = FIXED.replace("epochs = 12", "epochs = 30").replace("patience = 3", "patience = 0")
    space = space.replace("learning_rate = { low = 0.001, high = 0.05, log = true }",
                          "learning_rate = { choices = [1e-7, 0.05] }")
    spec = write_spec(tmp_path, space=space, trials=24, pruner="median", sampler="random")
    results = []
    for name in ("a.db", "b.db"):
        run(spec, tmp_path / name)
        results.append([(t.number, t.params, t.value, t.user_attrs["fold_scores"], t.state.name,
                         t.user_attrs["epochs_run"]) for t in load(tmp_path / name).trials])
    assert results[0] == results[1]
    # past the pruner's 10 start-up trials, a learning rate of 1e-7 is pruned within its group,
    # while the other trials of that group train every epoch
    hopeless = [r for r in results[0] if r[0] >= 12 and r[1]["learning_rate"] < 1e-5]
    assert hopeless and all(r[4] == "PRUNED" and r[5] < 30 for r in hopeless)
    for r in hopeless:
        group = [o for o in results[0] if o[0] // AUTO == r[0] // AUTO and o[1]["learning_rate"] > 1e-5]
        assert all(o[4] == "COMPLETE" and o[5] == 30 for o in group)


GROUP_FAULTS = '''
import multiprocessing, os
import labbench.search.together as together

_real = together._Together.run
MARK = {mark!r}


def run(self, on_epoch, should_stop, on_done):
    if multiprocessing.current_process().name.startswith("labbench-worker") \\
            and not os.path.exists(MARK):
        def dying(number, values):
            on_epoch(number, values)
            open(MARK, "w").close()
            os._exit(3)                       # the worker dies in the middle of its group
        return _real(self, dying, should_stop, on_done)
    return _real(self, on_epoch, should_stop, on_done)


together._Together.run = run
'''


def test_a_worker_dying_in_a_group_fails_and_retries_each_of_its_trials(tmp_path, monkeypatch):
    import os

    inject = tmp_path / "inject"
    inject.mkdir()
    (inject / "sitecustomize.py").write_text(GROUP_FAULTS.format(mark=str(tmp_path / "died")))
    monkeypatch.setenv("PYTHONPATH", os.pathsep.join(
        filter(None, [str(inject), os.environ.get("PYTHONPATH", "")])))
    iris_csv(tmp_path)
    spec = write_spec(tmp_path, space=FIXED, trials=3, sampler="random")
    outcome, events = run(spec, tmp_path / "s.db")
    trials = load(tmp_path / "s.db").trials
    failed = [t for t in trials if t.state.name == "FAIL"]
    done = [t for t in trials if t.state.name == "COMPLETE"]
    # the group of three died together: each trial failed once and was trained again, with the
    # same settings, on the fresh worker
    assert len(failed) == 3 and len(done) == 3
    assert all("stopped unexpectedly" in t.user_attrs["end_reason"]
               and "retried with the same settings" in t.user_attrs["end_reason"] for t in failed)
    assert sorted(str(t.params) for t in failed) == sorted(str(t.params) for t in done)
    assert outcome.reason == "budget" and outcome.counts["complete"] == 3
    assert any("stopped unexpectedly" in n.text for n in events.of(ev.Notice))


def test_together_one_from_the_command_line_trains_each_trial_alone(tmp_path):
    import subprocess

    from runner_support import cli

    iris_csv(tmp_path)
    spec = write_spec(tmp_path, space=FIXED, trials=3)
    for bad in ("0", "17"):
        done = subprocess.run(cli("run", str(spec), "--together", bad), capture_output=True,
                              text=True, timeout=120)
        assert done.returncode == 2 and "Traceback" not in done.stderr
        assert f"--together: {bad} is not allowed; give a whole number from 1 to 16" in done.stderr
    # through the same switch of the runner: with 1, each trial ends before the next starts
    outcome, events = run(spec, tmp_path / "one.db", together=1)
    order = [type(e).__name__ for e in events if isinstance(e, (ev.TrialStarted, ev.TrialEnded))]
    assert order == ["TrialStarted", "TrialEnded"] * 3 and outcome.counts["complete"] == 3


def test_a_family_without_stacked_configurations_trains_each_trial_alone(tmp_path):
    rng = np.random.default_rng(0)
    rows = "\n".join(f"{a:.3f},{b:.3f}" for a, b in rng.normal(size=(60, 2)))
    (tmp_path / "points.csv").write_text("u,v\n" + rows + "\n", encoding="utf-8")
    path = tmp_path / "map.toml"
    path.write_text('[data]\npath = "points.csv"\n[search]\ntrials = 4\ntogether = 4\n'
                    '[model]\nfamily = "som"\n', encoding="utf-8")
    spec = load_spec(path)
    assert spec.search.together == 4 and together_count(spec) == 1
