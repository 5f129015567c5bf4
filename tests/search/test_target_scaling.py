"""Regression targets are trained in scaled units and scored in their own units, through the
ordinary search path: spec -> prepare -> trial (objective.run_trial) / refit (winner.refit).

Longley: NIST StRD "Longley" (linear regression, higher difficulty); the data from
statsmodels.datasets.longley. It has 16 rows and the search's hold-out would take some away, so
the Longley checks use the refit on given rows: the prepared spec with its training rows set to
all 16 (``dataclasses.replace``), then ``winner.refit`` exactly as the search's finalize calls it.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from sklearn.datasets import load_diabetes
from sklearn.metrics import mean_squared_error
from statsmodels.datasets import longley

from labbench.model import TrainedModel
from labbench.search.objective import member_seeds, run_trial
from labbench.search.prepare import prepare
from labbench.search.spec import loads_spec
from labbench.search.winner import holdout_score, refit

# NIST StRD Longley certified parameters (from memory; the same values as
# tests/nets/test_longley.py, cross-checked with numpy.linalg.lstsq below): intercept, then
# GNPDEFL, GNP, UNEMP, ARMED, POP, YEAR.
CERTIFIED = np.array([-3482258.63459582, 15.0618722713733, -0.358191792925910e-01,
                      -2.02022980381683, -1.03322686717359, -0.511041056535807e-01,
                      1829.15146461355])
COLUMNS = ["GNPDEFL", "GNP", "UNEMP", "ARMED", "POP", "YEAR"]


def _spec(tmp_path, csv, target, target_scaling=None, folds=2, holdout=0.2):
    line = f'target_scaling = "{target_scaling}"' if target_scaling else ""   # absent: the default
    text = f"""
[data]
path = "{csv}"
target = "{target}"
task = "regression"
{line}

[evaluation]
folds = {folds}
holdout = {holdout}
seed = 4
"""
    return loads_spec(text, tmp_path, str(tmp_path / "exp.toml"))


@pytest.fixture(scope="module")
def longley_csv(tmp_path_factory):
    folder = tmp_path_factory.mktemp("longley")
    frame = longley.load_pandas().data
    assert list(frame.columns) == ["TOTEMP", *COLUMNS]
    frame.to_csv(folder / "longley.csv", index=False)
    return folder


def _longley_refit(folder, settings, dtype, target_scaling=None):
    prepared = prepare(_spec(folder, "longley.csv", "TOTEMP", target_scaling))
    everything = np.arange(len(prepared.table.y))
    prepared = dataclasses.replace(prepared, train_pos=everything)    # the refit on all 16 rows
    pre, weights, target = refit(prepared, settings, seed=0, scaling="standard", dtype=dtype)
    return prepared, pre, weights, target


def _coefficients(pre, weights, target):
    """Intercept and slopes in original units: undo the input and the target standardisation."""
    assert target.method == "standard"
    (W, b), = weights.layers
    slopes = W[:, 0].astype(np.float64) * target.scale / np.asarray(pre.scale_)
    intercept = target.center + target.scale * float(b[0]) - np.sum(slopes * np.asarray(pre.center_))
    return np.r_[intercept, slopes]


def _lstsq(prepared):
    X = prepared.table.frame.loc[:, COLUMNS].to_numpy(np.float64)
    A = np.column_stack([np.ones(len(X)), X])
    coef, *_ = np.linalg.lstsq(A, prepared.table.y, rcond=None)      # source: numpy.linalg.lstsq
    rmse = math.sqrt(np.mean((A @ coef - prepared.table.y) ** 2))
    return coef, rmse


def _fitted(prepared, pre, weights, target):
    model = TrainedModel(preprocessor=pre, weights=weights, task="regression", target="TOTEMP",
                         features=tuple(prepared.table.features), kinds=dict(prepared.table.kinds),
                         classes=None, target_scaler=target)
    return model.predict(prepared.table.frame)


def test_longley_heavy_ball_reaches_the_certified_coefficients(longley_csv):
    # The default target_scaling ("standard"), float64, full batch, learning rate 0.1 and momentum
    # 0.99 (ordinary choices). Heavy ball contracts every mode at sqrt(momentum) = 0.995 per step
    # when lr * eigenvalue lies in [(1 - sqrt(m))², (1 + sqrt(m))²] (Polyak 1964; checked below on
    # the standardised Hessian). 8000 steps shrink the start's error by 0.995^8000 ~ 1e-17, so
    # float64 rounding sets the limit: ~ condition (1.2e4) · eps ~ 3e-12 on the standardised
    # weights, amplified a little by the cancellation in the intercept; 1e-9 relative demands nine
    # correct digits of every coefficient with a margin (measured: ~1e-14).
    settings = dict(hidden=[], activation="relu", optimizer="momentum", learning_rate=0.1,
                    momentum=0.99, l2=0.0, batch_size=16, epochs=8000)
    prepared, pre, weights, target = _longley_refit(longley_csv, settings, "float64")
    Xs = pre.transform(prepared.table.frame)
    eig = np.linalg.eigvalsh(Xs.T @ Xs / len(Xs))
    root = math.sqrt(settings["momentum"])
    assert (1 - root) ** 2 <= 0.1 * eig[0] and 0.1 * max(eig[-1], 1.0) <= (1 + root) ** 2
    coef, rmse = _lstsq(prepared)
    np.testing.assert_allclose(coef, CERTIFIED, rtol=1e-8)    # numpy.linalg.lstsq vs NIST (from memory)
    np.testing.assert_allclose(_coefficients(pre, weights, target), CERTIFIED, rtol=1e-9)   # NIST StRD
    # fitted values in TOTEMP's own units: RMSE equals numpy.linalg.lstsq's (228.6, from memory)
    fitted = _fitted(prepared, pre, weights, target)
    assert math.isclose(math.sqrt(np.mean((fitted - prepared.table.y) ** 2)), rmse, rel_tol=1e-10)
    assert 228 < rmse < 229


def test_longley_adam_at_an_ordinary_learning_rate_needs_the_scaled_target(longley_csv):
    # The search's own dtype (float32) and Adam at learning rate 0.01, full batch.
    settings = dict(hidden=[], activation="relu", optimizer="adam", learning_rate=0.01,
                    momentum=0.9, l2=0.0, batch_size=16, epochs=10000)
    prepared, pre, weights, target = _longley_refit(longley_csv, settings, "float32")
    assert target.method == "standard"        # no target_scaling key in the spec: the default
    coef, rmse = _lstsq(prepared)
    # Adam takes steps of about the learning rate along every direction, so along the nearly flat
    # directions of this ill-conditioned design (condition number ~1.2e4 once standardised) it
    # closes in slowly; how close 10,000 steps get depends on the start (measured: 1.3e-2
    # relative from the default Glorot start, 6e-6 from He's). Those directions barely change
    # the fit, which is why the fitted values below agree with least squares to ~2e-7. The tight
    # check of the certified values is the float64 test above (1e-9).
    np.testing.assert_allclose(_coefficients(pre, weights, target), CERTIFIED, rtol=2e-2)   # NIST StRD
    # fitted values: float32 outputs z (|z| < 3) carry ~2e-7 absolute, times sd(TOTEMP) ~ 3,500
    # that is < 1e-3 per value, < 1e-5 of the RMSE of 228.6 (numpy.linalg.lstsq)
    fitted = _fitted(prepared, pre, weights, target)
    assert math.isclose(math.sqrt(np.mean((fitted - prepared.table.y) ** 2)), rmse, rel_tol=1e-5)

    # The same run on the raw target (target_scaling = "none"), as before this option existed:
    # Adam's steps are ~ the learning rate in size, so 10,000 steps of 0.01 cannot carry the
    # bias to ~65,000: the fit stays ~300 times worse than least squares (issue 8: ~65,000).
    prepared, pre, weights, target = _longley_refit(longley_csv, settings, "float32", "none")
    fitted = _fitted(prepared, pre, weights, target)
    assert math.sqrt(np.mean((fitted - prepared.table.y) ** 2)) > 100 * rmse


@pytest.fixture(scope="module")
def diabetes_csv(tmp_path_factory):
    # scikit-learn's bundled diabetes data set (Efron et al. 2004); target 25..346, positive
    folder = tmp_path_factory.mktemp("diabetes")
    d = load_diabetes(as_frame=True)
    frame = d.data.copy()
    frame["progression"] = d.target.to_numpy()
    frame.to_csv(folder / "diabetes.csv", index=False)
    return folder


SETTINGS = dict(hidden=[8], activation="tanh", optimizer="adam", learning_rate=0.01, momentum=0.9,
                l2=0.0, batch_size=32, epochs=15)


@pytest.mark.parametrize("scaling", ["standard", "log"])
def test_fold_scores_are_in_the_targets_own_units(diabetes_csv, scaling):
    from labbench.nets import StackTrainer
    from labbench.search.space import settings_to_config

    prepared = prepare(_spec(diabetes_csv, "diabetes.csv", "progression", scaling, folds=3))
    fa = prepared.fold_arrays
    result = run_trial(prepared, SETTINGS, seed=4, on_epoch=lambda values: None,
                       should_stop=lambda: False)                 # the trial code of the search
    assert result["end"] == "complete"
    # the same fold models again (same seeds), to see their validation outputs
    trainer = StackTrainer(settings_to_config(SETTINGS), "regression", 1, fa.X_train, fa.y_train,
                           fa.X_val, fa.y_val, seeds=member_seeds(4, fa.n_folds),
                           target_inverse=fa.target_inverse)
    trainer.run()
    y = prepared.table.y
    for i in range(fa.n_folds):
        predicted = fa.target_scalers[i].inverse(trainer.weights(i).forward(fa.X_val[i]))
        # source: scikit-learn's mean_squared_error on the unscaled predictions and targets
        want = math.sqrt(mean_squared_error(y[fa.val_rows[i]], predicted))
        assert math.isclose(result["fold_scores"][i], want, rel_tol=1e-5)
        assert want > 10             # target units (sd 77); in scaled units it would be ~1


def test_refit_and_holdout_are_in_the_targets_own_units(diabetes_csv):
    prepared = prepare(_spec(diabetes_csv, "diabetes.csv", "progression", "log"))
    pre, weights, target = refit(prepared, SETTINGS, seed=4, scaling="standard")
    # the target scaler of the refit is fitted on all training rows (numpy reference)
    assert target.method == "log"
    assert math.isclose(target.center, float(np.mean(np.log(prepared.table.y[prepared.train_pos]))),
                        rel_tol=1e-12)
    model = TrainedModel(preprocessor=pre, weights=weights, task="regression", target="progression",
                         features=tuple(prepared.table.features), kinds=dict(prepared.table.kinds),
                         classes=None, metric="rmse", target_scaler=target)
    rows = prepared.holdout_pos
    predicted = model.predict(prepared.table.frame.iloc[rows])
    # source: scikit-learn's mean_squared_error against the hold-out targets as read
    want = math.sqrt(mean_squared_error(prepared.table.y[rows], predicted))
    assert math.isclose(holdout_score(model, prepared), want, rel_tol=1e-12)
    # and the values are the target's: the model beats predicting the training mean (numpy std)
    assert want < float(np.std(prepared.table.y[rows]))


def test_seed_spread_and_summary_scores_share_the_trials_units(diabetes_csv, tmp_path):
    import optuna

    from labbench.search.winner import finalize

    spec = _spec(diabetes_csv, "diabetes.csv", "progression", folds=3)
    prepared = prepare(spec)
    study = optuna.create_study(direction="minimize", study_name="units")
    for rate in (0.01, 0.03):
        trial = study.ask()
        settings = {**SETTINGS, "learning_rate": rate}
        result = run_trial(prepared, settings, seed=spec.evaluation.seed, on_epoch=lambda v: None,
                           should_stop=lambda: False)
        trial.set_user_attr("settings", settings)
        trial.set_user_attr("fold_scores", result["fold_scores"])
        study.tell(trial, float(np.mean(result["fold_scores"])))
    summary, model = finalize(spec, study, prepared, out_dir=tmp_path, seed_spread=2,
                              importance="ped_anova")
    assert model.target_scaler.method == "standard"
    # the spread's first seed is the search's own: it repeats the winning trial's CV value, so
    # both are in the same (the target's) units
    assert math.isclose(summary["seed_spread"]["scores"][0], study.best_value, rel_tol=1e-6)
    rows = prepared.holdout_pos
    want = math.sqrt(mean_squared_error(prepared.table.y[rows],       # source: scikit-learn
                                        model.predict(prepared.table.frame.iloc[rows])))
    assert math.isclose(summary["holdout_score"], want, rel_tol=1e-12)
    assert 0.5 < summary["holdout_score"] / summary["cv_mean"] < 2     # same units, same scale
