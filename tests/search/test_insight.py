"""Insight helpers: best so far, counts, importance, seed spread, CV against hold-out."""

from __future__ import annotations

import math
import statistics

import optuna
import pytest

from labbench.search.insight import (best_so_far, compare_cv_holdout, counts_by_state,
                                     lead_inside_spread, param_importance, spread_stats)

optuna.logging.set_verbosity(optuna.logging.WARNING)


def synthetic_study(n: int, seed: int = 0) -> optuna.Study:
    """x decides the value, y does nothing (common practice for checking importance)."""
    study = optuna.create_study(sampler=optuna.samplers.RandomSampler(seed=seed))

    def objective(trial):
        x = trial.suggest_float("x", -3.0, 3.0)
        trial.suggest_float("y", -3.0, 3.0)
        return (x - 1.0) ** 2

    study.optimize(objective, n_trials=n)
    return study


@pytest.mark.parametrize("method", ["ped_anova", "fanova"])
def test_importance_ranks_the_parameter_that_matters_first(method):
    study = synthetic_study(60)
    result = param_importance(study, method, seed=0)
    values = result["values"]
    assert list(values) == ["x", "y"]
    assert values["x"] > 0.8                         # most of the importance (common practice)
    assert math.isclose(sum(values.values()), 1.0, rel_tol=1e-9)
    assert result["n_complete"] == 60


def test_importance_says_so_instead_of_numbers_with_few_trials():
    study = synthetic_study(6)
    result = param_importance(study)
    assert result["values"] == {}
    assert "Only 6 trial(s) completed" in result["message"]


def test_importance_with_nothing_searched():
    study = optuna.create_study()
    study.optimize(lambda t: 1.0, n_trials=12)
    result = param_importance(study)
    assert result["values"] == {} and "Nothing was searched" in result["message"]


def test_fanova_is_repeatable_with_a_seed():
    study = synthetic_study(30, seed=2)
    assert param_importance(study, "fanova", seed=5) == param_importance(study, "fanova", seed=5)


def test_best_so_far_both_directions():
    points = [(0, 0.5), (1, None), (2, 0.7), (3, 0.6), (4, float("nan")), (5, 0.9)]
    assert best_so_far(points, "maximize") == [(0, 0.5), (2, 0.7), (3, 0.7), (5, 0.9)]
    assert best_so_far(points, "minimize") == [(0, 0.5), (2, 0.5), (3, 0.5), (5, 0.5)]


def test_counts_by_state_from_a_real_study():
    study = optuna.create_study()
    for value, state in [(1.0, None), (None, optuna.trial.TrialState.PRUNED),
                         (None, optuna.trial.TrialState.FAIL), (2.0, None)]:
        t = study.ask()
        study.tell(t, value, state=state)
    t = study.ask()                                   # cancelled: stored as FAIL with its reason
    t.set_user_attr("end_reason", "cancelled by the user")
    study.tell(t, None, state=optuna.trial.TrialState.FAIL)
    study.ask()                                       # left running
    assert counts_by_state(study.get_trials(deepcopy=False)) == {
        "complete": 2, "pruned": 1, "failed": 1, "cancelled": 1, "running": 1, "waiting": 0}


def test_spread_stats_match_the_statistics_module():
    scores = [0.81, 0.84, 0.79, 0.86, 0.80]
    s = spread_stats(scores, [7, 8, 9, 10, 11])
    # reference: Python's statistics module (sample standard deviation)
    assert math.isclose(s["std"], statistics.stdev(scores))
    assert math.isclose(s["mean"], statistics.fmean(scores))
    assert (s["min"], s["max"]) == (0.79, 0.86) and math.isclose(s["range"], 0.07)
    assert spread_stats([])["mean"] is None


def test_lead_inside_or_outside_the_spread():
    spread = spread_stats([0.80, 0.83])
    inside = lead_inside_spread(0.85, 0.84, spread, "accuracy")
    assert inside["inside"] and "effectively tied" in inside["text"]
    outside = lead_inside_spread(0.85, 0.70, spread, "accuracy")
    assert not outside["inside"] and math.isclose(outside["lead"], 0.15)
    assert lead_inside_spread(0.85, None, spread, "accuracy")["lead"] is None


def test_cv_against_holdout():
    agree = compare_cv_holdout(0.80, 0.03, 0.83, "accuracy", "maximize")
    assert not agree["differs"] and "agrees" in agree["text"]
    worse = compare_cv_holdout(0.80, 0.01, 0.70, "accuracy", "maximize")
    assert worse["differs"] and "worse than the folds suggested" in worse["text"]
    # for an error metric a larger hold-out value is the worse side
    worse_err = compare_cv_holdout(1.0, 0.05, 1.5, "rmse", "minimize")
    assert worse_err["differs"] and "worse" in worse_err["text"]
    better = compare_cv_holdout(1.0, 0.05, 0.5, "rmse", "minimize")
    assert better["differs"] and "better" in better["text"]
    assert "\n" not in worse["text"]
