"""Early stopping on a shared best epoch, and divergence by an exploding validation loss."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from labbench.errors import DivergenceError
from labbench.nets import NetConfig, StackTrainer
from labbench.nets.stopping import EXPLODE_FACTOR


def _weights(trainer: StackTrainer, member: int) -> list[np.ndarray]:
    return [a for layer in trainer.weights(member).layers for a in layer]


def _noisy_folds(rng, n_folds=3, n=60, d=5):
    """Small noisy regression folds: a wide network overfits them within a few dozen epochs."""
    w = rng.normal(size=d)
    Xs, ys, Xv, yv = [], [], [], []
    for _ in range(n_folds):
        X, Z = rng.normal(size=(n, d)), rng.normal(size=(n // 2, d))
        Xs.append(X), ys.append(X @ w + rng.normal(scale=2.0, size=n))
        Xv.append(Z), yv.append(Z @ w + rng.normal(scale=2.0, size=n // 2))
    return Xs, ys, Xv, yv


CONFIG = NetConfig(hidden=(64,), optimizer="adam", learning_rate=0.01, batch_size=8, epochs=300,
                   patience=5, dtype="float64")


def test_patience_stops_and_restores_the_weights_of_the_best_epoch():
    Xs, ys, Xv, yv = _noisy_folds(np.random.default_rng(0), n_folds=1)
    trainer = StackTrainer(CONFIG, "regression", 1, Xs, ys, Xv, yv, seeds=[7])
    history = trainer.run()
    best = int(trainer.best_epoch[0])
    # it stopped early: `patience` epochs after the best one, well before the maximum
    assert trainer.stopped_early and len(history) == best + CONFIG.patience < CONFIG.epochs
    assert trainer.best_val_loss[0] == history[best - 1].val_loss[0]
    assert trainer.best_val_metric[0] == history[best - 1].val_metric[0]
    # the kept weights are exactly those of a run that simply stopped at that epoch
    plain = replace(CONFIG, epochs=best, patience=0)
    reference = StackTrainer(plain, "regression", 1, Xs, ys, Xv, yv, seeds=[7])
    reference.run()
    for a, b in zip(_weights(trainer, 0), _weights(reference, 0)):
        assert np.array_equal(a, b)
    # and not those of the last epoch trained
    last = StackTrainer(replace(plain, epochs=len(history)),
                        "regression", 1, Xs, ys, Xv, yv, seeds=[7])
    last.run()
    assert not np.array_equal(_weights(trainer, 0)[0], _weights(last, 0)[0])
    assert trainer.run() == []        # a stopped trainer does not train on


def test_the_folds_share_the_epoch_of_their_lowest_mean_validation_loss():
    Xs, ys, Xv, yv = _noisy_folds(np.random.default_rng(3), n_folds=3)
    trainer = StackTrainer(CONFIG, "regression", 1, Xs, ys, Xv, yv, seeds=[1, 2, 3])
    history = trainer.run()
    mean_loss = np.array([s.val_loss.mean() for s in history])
    shared = int(np.argmin(mean_loss)) + 1              # numpy's argmin: the first minimum
    assert (trainer.best_epoch == shared).all()
    np.testing.assert_array_equal(trainer.best_val_metric, history[shared - 1].val_metric)
    # every epoch after it failed to improve the mean, and there were `patience` of them
    assert len(history) == shared + CONFIG.patience
    # the folds' own best epochs differ (so the shared rule is not a per-fold choice in disguise)
    per_fold = np.argmin(np.array([s.val_loss for s in history]), axis=0) + 1
    assert len(set(per_fold.tolist())) > 1


def test_patience_zero_trains_every_epoch_and_keeps_the_last():
    Xs, ys, Xv, yv = _noisy_folds(np.random.default_rng(0), n_folds=1)
    config = replace(CONFIG, epochs=40, patience=0)
    trainer = StackTrainer(config, "regression", 1, Xs, ys, Xv, yv, seeds=[7])
    history = trainer.run()
    assert len(history) == 40 and (trainer.best_epoch == 40).all()
    assert trainer.best_val_metric[0] == history[-1].val_metric[0]


def test_no_validation_rows_trains_all_epochs_whatever_the_patience():
    Xs, ys, _, _ = _noisy_folds(np.random.default_rng(0), n_folds=1)
    config = replace(CONFIG, epochs=25)
    trainer = StackTrainer(config, "regression", 1, Xs, ys, seeds=[7])
    assert len(trainer.run()) == 25 and (trainer.best_epoch == 25).all()


@pytest.mark.parametrize("task", ["regression", "multiclass"])
def test_a_stacked_group_with_patience_ends_exactly_as_it_would_alone(task):
    """Two seed groups of two folds each (the seed-spread layout); they stop at different epochs.
    Each group's weights, kept epoch and scores equal those of the group trained alone."""
    rng = np.random.default_rng(5)
    Xs, ys, Xv, yv = _noisy_folds(rng, n_folds=2)
    k = 1
    if task == "multiclass":
        k = 3
        ys = [np.digitize(y, [-1.0, 1.0]) for y in ys]
        yv = [np.digitize(y, [-1.0, 1.0]) for y in yv]
    seeds = [[1, 2], [31, 32]]
    config = replace(CONFIG, learning_rate=0.003)
    stack = StackTrainer(config, task, k, Xs * 2, ys * 2, Xv * 2, yv * 2,
                         seeds=seeds[0] + seeds[1], groups=[0, 0, 1, 1])
    stack.run()
    assert stack.best_epoch[0] == stack.best_epoch[1] and stack.best_epoch[2] == stack.best_epoch[3]
    assert stack.best_epoch[0] != stack.best_epoch[2]    # the groups really chose differently
    for g in range(2):
        alone = StackTrainer(config, task, k, Xs, ys, Xv, yv, seeds=seeds[g])
        alone.run()
        for j in range(2):
            i = 2 * g + j
            assert stack.best_epoch[i] == alone.best_epoch[j]
            # float64: stacking changes rounding only (see test_stack.py)
            np.testing.assert_allclose(stack.best_val_metric[i], alone.best_val_metric[j], rtol=1e-10)
            for a, b in zip(_weights(stack, i), _weights(alone, j)):
                np.testing.assert_allclose(a, b, rtol=1e-10, atol=1e-12)


def test_groups_must_name_every_member():
    Xs, ys, Xv, yv = _noisy_folds(np.random.default_rng(0), n_folds=2)
    with pytest.raises(ValueError, match="groups"):
        StackTrainer(CONFIG, "regression", 1, Xs, ys, Xv, yv, seeds=[1, 2], groups=[0])


def _diabetes():
    from sklearn.datasets import load_diabetes   # scikit-learn's bundled diabetes set
    from sklearn.preprocessing import StandardScaler

    X, y = load_diabetes(return_X_y=True)
    X = StandardScaler().fit_transform(X)
    return [X[:350]], [y[:350]], [X[350:]], [y[350:]]


def test_an_exploding_validation_loss_is_divergence_not_a_score():
    Xs, ys, Xv, yv = _diabetes()
    # Adam with a learning rate of 100 on a raw target (mean ~152): the losses stay finite, but
    # the validation RMSE ends far above the target's own spread (~77)
    config = NetConfig(hidden=(64,), optimizer="adam", learning_rate=100.0, epochs=30)
    with pytest.raises(DivergenceError) as info:
        StackTrainer(config, "regression", 1, Xs, ys, Xv, yv, seeds=[0], metric="rmse").run()
    text = str(info.value)
    assert f"more than {EXPLODE_FACTOR:g} times" in text and "constant prediction" in text
    assert "lower the learning rate (now 100)" in text and "\n" not in text
    assert info.value.epoch is not None and f"epoch {info.value.epoch}" in text


def test_the_explosion_bound_is_relative_to_the_start_or_a_constant(monkeypatch):
    """Without the bound the same run finishes with finite, absurd scores (what the issue saw);
    the bound fires at the first epoch whose validation loss passes 1e3 × the lower of the loss
    before training and the loss of predicting the training mean (numpy reference below)."""
    import labbench.nets.stopping as stopping

    Xs, ys, Xv, yv = _diabetes()
    config = NetConfig(hidden=(64,), optimizer="adam", learning_rate=100.0, epochs=30)
    start = StackTrainer(config, "regression", 1, Xs, ys, Xv, yv, seeds=[0])
    before = start._validation_loss()[0]
    constant = 0.5 * np.mean((yv[0] - np.mean(ys[0])) ** 2)     # half squared error of the mean
    np.testing.assert_allclose(start._constant_loss()[0], constant, rtol=1e-6)
    start_loss = min(before, constant)
    free = StackTrainer(config, "regression", 1, Xs, ys, Xv, yv, seeds=[0], metric="rmse")
    monkeypatch.setattr(stopping, "EXPLODE_FACTOR", np.inf)
    history = free.run()
    monkeypatch.undo()
    losses = np.array([s.val_loss[0] for s in history])
    assert np.isfinite(losses).all() and history[-1].val_metric[0] > 1e3   # RMSE > 1000
    first = int(np.argmax(losses > EXPLODE_FACTOR * start_loss)) + 1
    with pytest.raises(DivergenceError) as info:
        StackTrainer(config, "regression", 1, Xs, ys, Xv, yv, seeds=[0]).run()
    assert info.value.epoch == first


def test_a_healthy_run_never_comes_near_the_bound():
    Xs, ys, Xv, yv = _diabetes()
    config = NetConfig(hidden=(64,), optimizer="adam", learning_rate=0.01, epochs=60)
    trainer = StackTrainer(config, "regression", 1, Xs, ys, Xv, yv, seeds=[0])
    reference = min(trainer._validation_loss()[0], trainer._constant_loss()[0])
    worst = max(s.val_loss[0] for s in trainer.run())
    assert worst < 10 * reference < EXPLODE_FACTOR * reference


def _rmse(y, pred):
    # the RMSE written out (common practice), independent of labbench.nets.metrics
    return float(np.sqrt(np.mean((np.asarray(y, np.float64) - pred) ** 2)))


def test_the_metric_is_skipped_between_needed_epochs_and_exact_where_it_counts():
    # The validation loss is computed every epoch; the metric every METRIC_EVERY epochs, at the
    # last epoch and at every epoch a group keeps, NaN elsewhere (an honest curve).
    Xs, ys, Xv, yv = _noisy_folds(np.random.default_rng(3), n_folds=2)
    trainer = StackTrainer(CONFIG, "regression", 1, Xs, ys, Xv, yv, seeds=[1, 2], metric="rmse")
    history = trainer.run()
    every = trainer.metric_every
    assert every > 1 and all(np.isfinite(s.val_loss).all() for s in history)
    best = float("inf")
    for s in history:
        improved = s.val_loss.mean() < best
        best = min(best, s.val_loss.mean())
        assert np.isfinite(s.val_metric).all() == (improved or s.epoch % every == 0), s.epoch
    # the kept epoch's score equals the metric of the kept weights, computed from scratch
    for i in range(2):
        pred = trainer.predict_output(i, Xv[i])
        assert trainer.best_val_metric[i] == pytest.approx(_rmse(yv[i], pred), rel=1e-9)


def test_without_patience_a_run_stopped_at_a_skipped_epoch_still_scores_it():
    Xs, ys, Xv, yv = _noisy_folds(np.random.default_rng(0), n_folds=2)
    config = replace(CONFIG, epochs=40, patience=0)
    trainer = StackTrainer(config, "regression", 1, Xs, ys, Xv, yv, seeds=[7, 8], metric="rmse")
    history = trainer.run(on_epoch=lambda s: s.epoch < 7)      # 7 is not a multiple of 5
    assert len(history) == 7 and (trainer.best_epoch == 7).all()
    for i in range(2):
        pred = trainer.predict_output(i, Xv[i])
        assert trainer.best_val_metric[i] == pytest.approx(_rmse(yv[i], pred), rel=1e-9)
    # metric_every=1 gives every epoch, equal to the skipped run's values where both have them
    full = StackTrainer(config, "regression", 1, Xs, ys, Xv, yv, seeds=[7, 8], metric="rmse",
                        metric_every=1).run(on_epoch=lambda s: s.epoch < 7)
    for a, b in zip(history, full):
        assert np.isfinite(b.val_metric).all()
        if np.isfinite(a.val_metric).all():
            assert np.array_equal(a.val_metric, b.val_metric)
