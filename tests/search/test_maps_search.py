"""The search side of the map and group families, built against a toy family without a target
(maps_toy.py, the MAPS.md contract): spec, preparation, trial measures, the trade-off front, the
winner's hold-out measures and stability across seeds, the user's pick, and the cost estimate.

Searches here are built with Optuna directly (each trial is ``objective.run_trial``, as a worker
runs it); the command line is tested in test_maps_cli.py.
"""

from __future__ import annotations

import json
import math
from itertools import combinations

import numpy as np
import optuna
import pandas as pd
import pytest
from optuna.distributions import CategoricalDistribution, IntDistribution
from sklearn.metrics import adjusted_rand_score
from sklearn.model_selection import KFold, train_test_split

import maps_toy
from labbench.errors import LabbenchError, SpecError
from labbench.families import get_family, register
from labbench.search import events
from labbench.search.front import front_text, non_dominated, trade_off_front
from labbench.search.objective import member_seeds, run_trial
from labbench.search.prepare import prepare
from labbench.search.spec import load_spec
from labbench.search.winner import finalize

optuna.logging.set_verbosity(optuna.logging.WARNING)

MEASURE_KEYS = {"quantisation_error", "topographic_error", "reconstruction_error",
                "relative_error", "units"}                       # MAPS.md: holdout_measures
STABILITY_KEYS = {"seeds", "ari_mean", "ari_min", "layout_mean", "layout_min", "verdict",
                  "message"}                                     # MAPS.md: stability


@pytest.fixture(autouse=True)
def _registered():
    register(maps_toy.FAMILY)


def blobs_csv(tmp_path, n=240, seed=1, name="blobs.csv"):
    """Invented readings: three clumps in three measurements, their kind as the label."""
    rng = np.random.default_rng(seed)
    kind = rng.integers(0, 3, n)
    centres = np.array([[0.0, 0.0, 0.0], [4.0, 4.0, 0.0], [0.0, 4.0, 4.0]])
    X = centres[kind] + rng.normal(0, 0.6, (n, 3))
    frame = pd.DataFrame(X.round(4), columns=["heat", "flow", "hum"])
    frame.insert(0, "reading", [f"r{i}" for i in range(n)])
    frame["kind"] = np.array(["cold", "wet", "fast"])[kind]
    path = tmp_path / name
    frame.to_csv(path, index=False)
    return path


def uniform_csv(tmp_path, n=300, seed=2):
    """Invented readings without any clumps: groups found in them are arbitrary."""
    rng = np.random.default_rng(seed)
    path = tmp_path / "uniform.csv"
    pd.DataFrame(rng.uniform(size=(n, 2)).round(5), columns=["u", "v"]).to_csv(path, index=False)
    return path


def write_spec(tmp_path, csv, data="", space="units = { low = 2, high = 6 }\nepochs = 3",
               evaluation="folds = 3\nholdout = 0.25\nseed = 5\nseed_spread = 3", family="toymap"):
    path = tmp_path / "maps.toml"
    path.write_text(f'[data]\npath = "{csv.name}"\n{data}\n[evaluation]\n{evaluation}\n'
                    f'[search]\ntrials = 4\nsampler = "random"\npruner = "none"\n'
                    f'[model]\nfamily = "{family}"\n[space]\n{space}\n')
    return path


def search(spec, prepared, settings_list):
    """A small real search: each trial is run_trial on the prepared folds, its attrs stored as
    the controller stores them (settings, fold_scores, cv_std, best_epoch, measures)."""
    study = optuna.create_study(direction=prepared.direction, study_name="maps")
    study.set_user_attr("metric", prepared.metric)
    study.set_user_attr("task", prepared.task)
    dists = {"units": IntDistribution(1, 40), "grid": CategoricalDistribution(("none", "line"))}
    for settings in settings_list:
        full = get_family("toymap").complete(settings)
        result = run_trial(prepared, full, seed=spec.evaluation.seed, on_epoch=lambda v: None,
                           should_stop=lambda: False)
        scores = result["fold_scores"]
        study.add_trial(optuna.trial.create_trial(
            params={k: full[k] for k in dists}, distributions=dists, value=float(np.mean(scores)),
            user_attrs={"settings": full, "fold_scores": scores, "best_epoch": result["best_epoch"],
                        "cv_std": float(np.std(scores, ddof=1)), "measures": result["measures"]}))
    return study


# --------------------------------------------------------------------------------------------
# spec and preparation


def test_a_map_spec_has_no_target_and_keeps_its_label_when_written_back(tmp_path):
    csv = blobs_csv(tmp_path)
    spec = load_spec(write_spec(tmp_path, csv, 'label = "kind"\nignore = ["reading"]'))
    assert spec.data.target == "" and spec.data.label == "kind"
    d = spec.to_dict()
    assert "target" not in d["data"] and "target_scaling" not in d["data"]
    assert d["data"]["label"] == "kind" and d["model"] == {"family": "toymap"}
    again = write_spec(tmp_path, csv)
    again.write_text(spec.to_toml())
    assert load_spec(again).data == spec.data
    written_empty = write_spec(tmp_path, csv, 'target = ""')      # "" reads as no target too
    assert load_spec(written_empty).data.target == ""


@pytest.mark.parametrize("data, family, extra, words", [
    ('target = "kind"', "toymap", "",
     'data.target: the toymap family learns without a target; write label = "kind" to show it '
     "beside the groups"),
    ('label = "kind"', "network", "",
     'data.target: missing; the network family learns to predict a column: write target = "column '
     "name\" (label = \"kind\" is for the families that learn without a target)"),
    ('target = "kind"\nlabel = "heat"', "network", "",
     "data.label: is for the families that learn without a target"),
    ('task = "binary"', "toymap", "", 'data.task: "binary" but no target is named'),
    ('label = "kind"\nignore = ["kind"]', "toymap", "",
     'data.ignore: lists the label "kind", which is never an input'),
    ("", "toymap", 'metric = "rmse"',
     "evaluation.metric: \"rmse\" does not fit a table without a target; use one of "
     "quantisation_error, topographic_error, reconstruction_error, penalised_error"),
])
def test_target_and_family_that_do_not_go_together_are_one_line(tmp_path, data, family, extra, words):
    space = "" if family == "network" else "units = 3"
    path = write_spec(tmp_path, blobs_csv(tmp_path), data, space=space, family=family,
                      evaluation=f"folds = 3\n{extra}")
    with pytest.raises(SpecError) as info:
        load_spec(path)
    message = str(info.value)
    assert message.startswith(f"{path}: ") and "\n" not in message
    assert words in message, message


def test_prepare_splits_at_random_and_takes_the_familys_metric(tmp_path):
    spec = load_spec(write_spec(tmp_path, blobs_csv(tmp_path), 'label = "kind"\nignore = ["reading"]'))
    prepared = prepare(spec)
    assert prepared.task == "unsupervised" and not prepared.stratify
    assert prepared.metric == "penalised_error" and prepared.direction == "minimize"
    # reference: scikit-learn's train_test_split / KFold (shuffle=True), i.e. not stratified
    _, ref_hold = train_test_split(np.arange(240), test_size=0.25, random_state=5, shuffle=True)
    assert list(prepared.holdout_pos) == sorted(ref_hold)
    for (tr, va), (rtr, rva) in zip(prepared.folds, KFold(3, shuffle=True, random_state=5)
                                    .split(prepared.train_pos)):
        assert list(va) == list(rva)
    assert prepared.fold_arrays.target_scalers == ()
    assert prepared.fold_arrays.n_inputs == 3            # heat, flow, hum: not the label
    other = load_spec(write_spec(tmp_path, blobs_csv(tmp_path), evaluation='folds = 3\nmetric = "topographic_error"'))
    with pytest.raises(SpecError, match="'topographic_error' cannot score the toymap family on a "
                                        "table without a target; use one of quantisation_error, penalised_error"):
        prepare(other)


# --------------------------------------------------------------------------------------------
# trials


def test_a_trial_carries_the_fold_means_of_its_measures(tmp_path):
    spec = load_spec(write_spec(tmp_path, blobs_csv(tmp_path), 'label = "kind"\nignore = ["reading"]'))
    prepared = prepare(spec)
    settings = get_family("toymap").complete({"units": 3, "epochs": 4, "grid": "line"})
    result = run_trial(prepared, settings, seed=5, on_epoch=lambda v: None, should_stop=lambda: False)
    m = result["measures"]
    assert set(m) == {"quantisation_error", "relative_error", "topographic_error", "units"}
    assert m["units"] == 3
    # the same members trained again, their held-out errors recomputed from the definitions
    # (numpy): QE = mean distance of a validation row to its nearest prototype; relative = QE
    # over the mean distance to the fold's training mean
    fa = prepared.fold_arrays
    again = get_family("toymap").stack(settings, "unsupervised", 1, fa.X_train, fa.y_train,
                                       fa.X_val, fa.y_val, seeds=member_seeds(5, 3),
                                       metric=prepared.metric)
    again.run()
    qe, rel = [], []
    for i in range(3):
        P, V = again.record(i).prototypes, fa.X_val[i]
        d = np.linalg.norm(V[:, None, :] - P[None, :, :], axis=2).min(axis=1)
        qe.append(d.mean())
        rel.append(d.mean() / np.linalg.norm(V - fa.X_train[i].mean(axis=0), axis=1).mean())
    assert m["quantisation_error"] == pytest.approx(np.mean(qe), rel=1e-12)
    assert m["relative_error"] == pytest.approx(np.mean(rel), rel=1e-12)
    assert result["fold_scores"] == pytest.approx(list(again.best_val_metric), rel=1e-12)
    json.dumps(m, allow_nan=False)                       # storable as a trial attr


# --------------------------------------------------------------------------------------------
# the trade-off front


def test_non_dominated_agrees_with_optunas_pareto_front():
    # reference: Optuna's multi-objective study, whose best_trials are the Pareto front
    rng = np.random.default_rng(7)
    for trial in range(5):
        pts = np.column_stack([rng.integers(1, 6, 40), rng.integers(0, 8, 40) / 8.0,
                               rng.integers(0, 4, 40) / 4.0])        # many ties on purpose
        study = optuna.create_study(directions=["minimize"] * 3)
        for p in pts:
            study.add_trial(optuna.trial.create_trial(values=list(p)))
        reference = sorted(t.number for t in study.best_trials)
        assert sorted(np.flatnonzero(non_dominated(pts))) == reference


def _trial(number, units, qe, te, value, state="COMPLETE", settings=None):
    measures = {"quantisation_error": qe, "topographic_error": te, "relative_error": qe / 2,
                "units": units}
    attrs = {"measures": measures, "settings": settings or {"units": units, "n": number}}
    if state != "COMPLETE":
        return optuna.trial.create_trial(state=getattr(optuna.trial.TrialState, state),
                                         user_attrs=attrs)
    return optuna.trial.create_trial(value=value, user_attrs=attrs)


def test_the_front_keeps_the_trials_nothing_beats_at_once():
    study = optuna.create_study()
    for t in [
        _trial(0, 4, 1.0, 0.1, 0.5),
        _trial(1, 4, 0.9, 0.2, 0.6),        # better error, worse topography: both stay
        _trial(2, 9, 0.95, 0.3, 0.7),       # worse than trial 1 in all three: out
        _trial(3, 16, 0.5, 0.05, 0.4, settings={"units": 16}),
        _trial(4, 16, 0.5, 0.05, 0.4, settings={"units": 16}),   # the same model again: once
        _trial(5, 1, 0.1, 0.0, None, state="PRUNED"),            # not finished: never on it
        _trial(6, 2, 2.0, 0.0, 0.9),
    ]:
        study.add_trial(t)
    study.add_trial(optuna.trial.create_trial(value=0.1, user_attrs={"fold_scores": [0.1]}))
    front = trade_off_front(study.trials)
    assert [p.number for p in front] == [6, 1, 0, 3]
    assert front[0].topographic == 0.0 and front[1].error == 0.9
    text = front_text(study.trials, "penalised_error", "pick with --pick TRIAL")
    lines = text.splitlines()
    assert lines[0].startswith("trade-off: 4 trial(s) that no other finished trial beats on units, "
                               "held-out quantisation error and topographic error at once")
    assert lines[1].split() == ["trial", "units", "quantisation", "error", "topographic", "error",
                                "relative", "error", "penalised", "error"]
    assert lines[2].split() == ["6", "2", "2.000", "0", "1.000", "0.9000"]
    assert lines[-1] == "pick with --pick TRIAL"
    # Hebbian features: components and the reconstruction error (no topography)
    hebbian = optuna.create_study()
    for n, (c, rec) in enumerate([(2, 0.4), (3, 0.2), (4, 0.25)]):
        hebbian.add_trial(optuna.trial.create_trial(value=rec, user_attrs={"measures": {
            "reconstruction_error": rec, "relative_error": rec, "units": c}, "settings": {"c": c}}))
    assert [p.number for p in trade_off_front(hebbian.trials)] == [0, 1]
    text = front_text(hebbian.trials)
    assert "beats on components and held-out reconstruction error at once" in text
    assert text.splitlines()[1].split()[:4] == ["trial", "components", "reconstruction", "error"]
    # without measures (a network search) there is no front to show
    network = optuna.create_study()
    network.add_trial(optuna.trial.create_trial(value=0.8, user_attrs={"fold_scores": [0.8]}))
    assert trade_off_front(network.trials) == [] and front_text(network.trials, "rmse") == ""


def test_the_ari_stand_in_agrees_with_scikit_learn():
    # reference: sklearn.metrics.adjusted_rand_score (the stand-in is used until the engine's
    # labbench.maps.stability lands; the engine's own is checked by its tests)
    rng = np.random.default_rng(3)
    for _ in range(20):
        a, b = rng.integers(0, 5, 80), rng.integers(0, 4, 80)
        b[:40] = a[:40]
        assert maps_toy.adjusted_rand_index(a, b) == pytest.approx(adjusted_rand_score(a, b), abs=1e-12)
    assert maps_toy.adjusted_rand_index([0, 0, 1, 1], [5, 5, 2, 2]) == 1.0


# --------------------------------------------------------------------------------------------
# the winner


def test_the_map_winner_is_refit_scored_on_the_holdout_and_checked_across_seeds(tmp_path):
    spec = load_spec(write_spec(tmp_path, blobs_csv(tmp_path), 'label = "kind"\nignore = ["reading"]',
                                evaluation="folds = 3\nholdout = 0.25\nseed = 5\nseed_spread = 3"))
    prepared = prepare(spec)
    study = search(spec, prepared, [{"units": 3, "grid": "line", "epochs": 4},
                                    {"units": 6, "grid": "none", "epochs": 4},
                                    {"units": 2, "grid": "none", "epochs": 4}])
    seen = []
    summary, model = finalize(spec, study, prepared, emit=seen.append, out_dir=tmp_path / "out")
    best = min(study.trials, key=lambda t: t.value)
    assert summary["trial_number"] == best.number and not summary["picked"]
    assert model.task == "unsupervised" and model.target == "" and model.classes is None
    assert model.target_scaler is None and model.family == "toymap"
    assert model.features == ("heat", "flow", "hum") and summary["label"] == "kind"
    s = model.scores
    assert set(s["holdout_measures"]) == MEASURE_KEYS and set(s["stability"]) == STABILITY_KEYS
    assert s["cv_mean"] == best.value and s["trial_number"] == best.number

    # hold-out measures from the definitions (numpy), on the hold-out rows scaled by the refit's
    # own preprocessor: QE, relative error, and the penalised error the search ranks by
    settings = best.user_attrs["settings"]
    frame = prepared.table.frame
    H = model.preprocessor.transform(frame.iloc[prepared.holdout_pos])
    T = model.preprocessor.transform(frame.iloc[prepared.train_pos])
    P = model.record.prototypes
    d = np.linalg.norm(H[:, None, :] - P[None, :, :], axis=2).min(axis=1)
    held = s["holdout_measures"]
    assert held["quantisation_error"] == pytest.approx(d.mean(), rel=1e-12)
    rel = d.mean() / np.linalg.norm(H - T.mean(axis=0), axis=1).mean()
    assert held["relative_error"] == pytest.approx(rel, rel=1e-12)
    assert held["units"] == settings["units"] and held["reconstruction_error"] is None
    expected = rel + 0.01 * settings["units"] + (held["topographic_error"] or 0.0)
    assert s["holdout_score"] == pytest.approx(expected, rel=1e-12)

    # stability: the same settings retrained with seeds 5, 6, 7 on all training rows; ARI between
    # every pair's groups on the 60 hold-out rows (reference: sklearn.metrics.adjusted_rand_score)
    stable = s["stability"]
    assert stable["seeds"] == [5, 6, 7]
    fit = get_family("toymap").stack(settings, "unsupervised", 1, [T] * 3, [np.zeros(len(T))] * 3,
                                     seeds=[member_seeds(x, 1)[0] for x in (5, 6, 7)],
                                     epochs=best.user_attrs["best_epoch"])
    fit.run()
    groups = [fit.record(i).assign(H)[1] for i in range(3)]
    ari = [adjusted_rand_score(groups[i], groups[j]) for i, j in combinations(range(3), 2)]
    assert stable["ari_mean"] == pytest.approx(np.mean(ari), abs=1e-12)
    assert stable["ari_min"] == pytest.approx(np.min(ari), abs=1e-12)
    assert "60 hold-out rows" in stable["message"]
    assert stable["verdict"] in ("reproducible", "mostly reproducible", "not reproducible")
    if settings["grid"] == "line":
        assert -1.0 <= stable["layout_mean"] <= 1.0
    else:
        assert stable["layout_mean"] is None
    assert [e.stage for e in seen if isinstance(e, events.FinalStage)] == [
        "refit", "holdout", "stability", "importance", "files"]
    written = json.loads((tmp_path / "out" / "winner.json").read_text())
    assert written["stability"] == stable and written["holdout_measures"] == held
    assert written["task"] == "unsupervised" and written["seed_spread"] is None


def test_groups_that_do_not_come_back_are_said_in_plain_words(tmp_path):
    spec = load_spec(write_spec(tmp_path, uniform_csv(tmp_path), "",
                                evaluation="folds = 3\nholdout = 0.2\nseed = 0\nseed_spread = 3"))
    prepared = prepare(spec)
    study = search(spec, prepared, [{"units": 10, "grid": "none", "epochs": 1}])
    seen = []
    summary, model = finalize(spec, study, prepared, emit=seen.append, out_dir=tmp_path / "o")
    stable = model.scores["stability"]
    assert stable["ari_mean"] < 0.7     # ten units cut a uniform square anywhere
    assert stable["verdict"] == "not reproducible"
    notices = [e.text for e in seen if isinstance(e, events.Notice) and e.level == "warning"]
    assert notices == [stable["message"]] and stable["message"] in summary["warnings"]
    assert "the groups are not reproducible" in stable["message"]


def test_a_picked_trial_is_refit_instead_of_the_best(tmp_path):
    spec = load_spec(write_spec(tmp_path, blobs_csv(tmp_path), 'ignore = ["reading"]\nlabel = "kind"',
                                evaluation="folds = 3\nseed_spread = 0"))
    prepared = prepare(spec)
    study = search(spec, prepared, [{"units": 3}, {"units": 8}])
    worst = max(study.trials, key=lambda t: t.value)
    summary, model = finalize(spec, study, prepared, out_dir=tmp_path / "p", trial_number=worst.number)
    assert summary["trial_number"] == worst.number and summary["picked"]
    assert model.record.n_units == 8 and model.scores["stability"] is None
    assert (tmp_path / "p" / "winner.toml").read_text().startswith("# The settings you picked")
    study.add_trial(optuna.trial.create_trial(state=optuna.trial.TrialState.PRUNED))
    with pytest.raises(LabbenchError) as info:
        finalize(spec, study, prepared, out_dir=tmp_path / "p", trial_number=2)
    assert str(info.value) == ("--pick 2: trial 2 is not a finished trial with a score (stopped "
                               "early) in search 'maps'; pick one of the finished trials: 0, 1")
    with pytest.raises(LabbenchError, match="--pick 9: there is no trial 9 in search 'maps'"):
        finalize(spec, study, prepared, out_dir=tmp_path / "p", trial_number=9)


def test_the_cost_estimate_calibrates_another_family():
    from labbench.search.estimate import calibrate, estimate, shape_from

    shape = shape_from({"units": {"low": 2, "high": 9}, "epochs": {"low": 2, "high": 7}},
                       rows=500, inputs=4, outputs=1, task="unsupervised", folds=3, repeats=1,
                       holdout=0.2, trials=10, workers=1, family="toymap")
    assert shape.family == "toymap" and shape.epochs == 7
    guessed = shape_from({}, rows=50, inputs=2, outputs=3, task="regression", folds=2, repeats=1,
                         holdout=0.2, trials=1, workers=1, family="toymap")
    assert guessed.task == "unsupervised" and guessed.outputs == 1   # a map has no target task
    assert shape.settings == {"units": 6, "epochs": 7, "grid": "none", "unit_cost": 0.01}
    seconds = calibrate(shape)
    assert seconds > 0 and math.isfinite(seconds)
    assert estimate(shape, seconds).words().endswith("for 10 trials on this machine")


def test_subspace_agreement_is_the_mean_cosine_of_the_principal_angles():
    # reference: scipy.linalg.subspace_angles (Björck & Golub 1973)
    from scipy.linalg import subspace_angles

    from labbench.search.map_winner import subspace_agreement

    rng = np.random.default_rng(4)
    for c in (1, 2, 3):
        a, b = rng.normal(size=(c, 6)), rng.normal(size=(c, 6))
        expected = np.cos(subspace_angles(a.T, b.T)).mean()
        assert subspace_agreement(a, b) == pytest.approx(expected, abs=1e-12)
        assert subspace_agreement(a, 3.0 * a[::-1]) == pytest.approx(1.0, abs=1e-12)


def test_the_runner_sends_each_trials_measures_with_its_end(tmp_path, monkeypatch):
    # the worker processes learn the toy family the way any family outside labbench is learnt
    monkeypatch.setenv("LABBENCH_FAMILIES", "maps_toy:FAMILY")
    from labbench.search.runner import SearchRunner
    from runner_support import load

    spec = load_spec(write_spec(tmp_path, blobs_csv(tmp_path), 'label = "kind"\nignore = ["reading"]',
                                space="units = { low = 2, high = 6 }\nepochs = 2"))
    seen = []
    SearchRunner(spec, seen.append, storage=f"sqlite:///{tmp_path / 'r.db'}", trials=3).run()
    ended = [e for e in seen if isinstance(e, events.TrialEnded)]
    stored = {t.number: t for t in load(tmp_path / "r.db", spec.study_name()).trials}
    assert len(ended) == 3
    for e in ended:
        assert e.state == "complete"
        assert e.measures == stored[e.number].user_attrs["measures"]
        assert e.measures["units"] == stored[e.number].user_attrs["settings"]["units"]
