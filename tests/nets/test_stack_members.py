"""Ending some stacked configurations while the others train on (``drop_groups``, ``on_diverged``).

The reference is the same configuration trained alone in its own stack, as in
tests/nets/test_stack.py: a member left in a stack after others were dropped must follow that
path exactly (to float rounding).
"""

from __future__ import annotations

import numpy as np
import pytest

from labbench.errors import DivergenceError
from labbench.nets import NetConfig, StackTrainer

from _nets_helpers import task_data

SIZES = [50, 37, 45]                     # folds of unequal length: ragged last batches
CONFIGS = [(0.01, 0.1, 0.9), (0.003, 0.0, 0.5), (0.03, 0.01, 0.0), (0.02, 0.0, 0.8)]


def _folds(task, seed=5):
    rng = np.random.default_rng(seed)
    data = [task_data(task, rng, n=n, d=4, classes=3) for n in SIZES]
    val = [task_data(task, rng, n=n, d=4, classes=3) for n in (9, 5, 7)]
    return [d[0] for d in data], [d[1] for d in data], [v[0] for v in val], [v[1] for v in val]


def _weights(trainer, member):
    return [a for layer in trainer.weights(member).layers for a in layer]


def _stacked(base, task, k, folds, configs):
    Xs, ys, Xv, yv = folds
    members = [(c, f) for c in range(len(configs)) for f in range(len(Xs))]
    return StackTrainer(base, task, k, [Xs[f] for _, f in members], [ys[f] for _, f in members],
                        [Xv[f] for _, f in members], [yv[f] for _, f in members],
                        seeds=[10 + f for _, f in members], groups=[c for c, _ in members],
                        learning_rate=[configs[c][0] for c, _ in members],
                        l2=[configs[c][1] for c, _ in members],
                        momentum=[configs[c][2] for c, _ in members])


def _alone(base, task, k, folds, config, epochs=None):
    lr, l2, mu = config
    solo = NetConfig(hidden=base.hidden, optimizer=base.optimizer, batch_size=base.batch_size,
                     epochs=epochs or base.epochs, dtype=base.dtype, patience=base.patience,
                     learning_rate=lr, l2=l2, momentum=mu)
    Xs, ys, Xv, yv = folds
    trainer = StackTrainer(solo, task, k, Xs, ys, Xv, yv, seeds=[10, 11, 12])
    return trainer, trainer.run()


def _same(stack, members, alone, rtol):
    assert list(stack.best_epoch[members]) == list(alone.best_epoch)
    np.testing.assert_allclose(stack.best_val_loss[members], alone.best_val_loss, rtol=rtol)
    for i, f in zip(members, range(3)):
        for a, b in zip(_weights(stack, i), _weights(alone, f)):
            np.testing.assert_allclose(a, b, rtol=rtol, atol=rtol * 1e-2)


@pytest.mark.parametrize("optimizer", ["sgd", "momentum", "adam"])
@pytest.mark.parametrize("dtype, rtol", [("float32", 1e-5), ("float64", 1e-12)])
@pytest.mark.parametrize("task, k", [("binary", 1), ("multiclass", 3)])
def test_configurations_left_after_a_drop_end_as_they_would_alone(optimizer, dtype, rtol, task, k):
    base = NetConfig(hidden=(6, 5), optimizer=optimizer, batch_size=16, epochs=7, dtype=dtype,
                     patience=3)
    folds = _folds(task)
    stack = _stacked(base, task, k, folds, CONFIGS)
    seen = []

    def each(scores):
        seen.append((scores.epoch, tuple(stack.groups)))
        if scores.epoch == 2:
            stack.drop_groups([1])              # as if configuration 1 were pruned here
        if scores.epoch == 4:
            stack.drop_groups([3, 0])

    stack.run(on_epoch=each)
    assert stack.n_members == 3 and stack.groups == (2, 2, 2)
    assert seen[1][1] == (0,) * 3 + (1,) * 3 + (2,) * 3 + (3,) * 3
    assert seen[2][1] == (0,) * 3 + (2,) * 3 + (3,) * 3
    alone, _ = _alone(base, task, k, folds, CONFIGS[2])
    _same(stack, [0, 1, 2], alone, rtol)


def test_dropped_configuration_keeps_its_kept_epoch_scores_until_dropped():
    # what the search reads for a configuration just before it is dropped: its kept epoch and
    # the validation losses there, equal to its own run stopped at that epoch
    base = NetConfig(hidden=(6,), optimizer="adam", batch_size=16, epochs=6, dtype="float64",
                     patience=2)
    folds = _folds("binary", seed=8)
    stack = _stacked(base, "binary", 1, folds, CONFIGS[:3])
    got = {}

    def each(scores):
        if scores.epoch == 3:
            rows = np.flatnonzero(np.asarray(stack.groups) == 0)
            got["epoch"] = stack.best_epoch[rows].copy()
            got["loss"] = stack.best_val_loss[rows].copy()
            stack.drop_groups([0])

    stack.run(on_epoch=each)
    alone, _ = _alone(base, "binary", 1, folds, CONFIGS[0], epochs=3)
    assert list(got["epoch"]) == list(alone.best_epoch)
    np.testing.assert_allclose(got["loss"], alone.best_val_loss, rtol=1e-12)


def test_a_diverging_configuration_ends_alone_when_the_caller_takes_it():
    base = NetConfig(hidden=(8,), optimizer="sgd", batch_size=16, epochs=6, dtype="float64",
                     patience=0)
    folds = _folds("regression", seed=3)
    Xs, ys, Xv, yv = folds
    folds = (Xs, [y * 1e3 for y in ys], Xv, [y * 1e3 for y in yv])
    configs = [(1e-6, 0.0, 0.0), (1e6, 0.0, 0.0), (3e-6, 0.0, 0.0)]
    stack = _stacked(base, "regression", 1, folds, configs)
    ended = []
    history = stack.run(on_diverged=lambda label, error: ended.append((label, error)))
    assert [label for label, _ in ended] == [1]
    error = ended[0][1]
    assert isinstance(error, DivergenceError) and f"epoch {error.epoch}" in str(error)
    assert "of 3 became" in str(error) or "rose to" in str(error)      # numbered within its folds
    assert "(now 1e+06)" in str(error)                                  # its own learning rate
    assert len(history) == 6 and history[-1].train_loss.shape == (6,)
    assert stack.groups == (0,) * 3 + (2,) * 3
    for label, rows in ((0, [0, 1, 2]), (2, [3, 4, 5])):
        alone, _ = _alone(base, "regression", 1, folds, configs[label])
        _same(stack, rows, alone, 1e-12)
    # without the callback the whole stack raises, as before
    with pytest.raises(DivergenceError):
        _stacked(base, "regression", 1, folds, configs).run()


def test_every_configuration_diverging_ends_the_run_and_keep_needs_whole_groups():
    base = NetConfig(hidden=(8,), optimizer="sgd", batch_size=16, epochs=6, dtype="float64")
    Xs, ys, Xv, yv = _folds("regression", seed=3)
    folds = (Xs, [y * 1e3 for y in ys], Xv, [y * 1e3 for y in yv])
    stack = _stacked(base, "regression", 1, folds, [(1e6, 0.0, 0.0), (1e7, 0.0, 0.0)])
    ended = []
    stack.run(on_diverged=lambda label, error: ended.append(label))
    assert sorted(ended) == [0, 1]
    stack = _stacked(base, "regression", 1, folds, [(1e-3, 0.0, 0.0), (2e-3, 0.0, 0.0)])
    with pytest.raises(ValueError, match="whole groups"):
        stack.keep_members([0, 1, 3, 4, 5])
    with pytest.raises(ValueError, match="at least one"):
        stack.keep_members([])
