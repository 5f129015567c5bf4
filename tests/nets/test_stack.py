"""StackTrainer behaviour: reproducibility, stacked = alone, ragged members, callbacks, errors."""

from __future__ import annotations

import numpy as np
import pytest

from labbench.errors import DivergenceError, SpecError
from labbench.nets import EpochScores, NetConfig, StackTrainer, metrics

from _nets_helpers import task_data

RAGGED = [50, 37, 12]        # with batch 16: the shorter members have short and empty last batches


def _members(task, rng, sizes, k=3, d=4):
    Xs, ys = [], []
    for n in sizes:
        X, y, _ = task_data(task, rng, n=n, d=d, classes=k)
        Xs.append(X)
        ys.append(y)
    return Xs, ys


def _all_weights(trainer, member):
    return [a for layer in trainer.weights(member).layers for a in layer]


@pytest.mark.parametrize("dtype", ["float32", "float64"])
def test_same_seeds_give_identical_weights_bit_for_bit(dtype):
    rng = np.random.default_rng(0)
    Xs, ys = _members("multiclass", rng, RAGGED)
    config = NetConfig(hidden=(7, 5), optimizer="adam", batch_size=16, epochs=4, dtype=dtype, l2=0.01)
    runs = [StackTrainer(config, "multiclass", 3, Xs, ys, seeds=[1, 2, 3]) for _ in range(2)]
    histories = [t.run() for t in runs]
    for member in range(3):
        for a, b in zip(_all_weights(runs[0], member), _all_weights(runs[1], member)):
            assert a.dtype == np.dtype(dtype)
            assert np.array_equal(a, b)
    assert np.array_equal(histories[0][-1].train_loss, histories[1][-1].train_loss)
    other = StackTrainer(config, "multiclass", 3, Xs, ys, seeds=[1, 2, 4])
    other.run()
    assert not np.array_equal(_all_weights(other, 2)[0], _all_weights(runs[0], 2)[0])
    assert np.array_equal(_all_weights(other, 0)[0], _all_weights(runs[0], 0)[0])


@pytest.mark.parametrize("optimizer", ["sgd", "momentum", "adam"])
@pytest.mark.parametrize("task", ["regression", "binary", "multiclass"])
@pytest.mark.parametrize("dtype", ["float32", "float64"])
def test_stacked_members_equal_members_trained_alone(task, optimizer, dtype):
    rng = np.random.default_rng(1)
    k = 3 if task == "multiclass" else 1
    Xs, ys = _members(task, rng, RAGGED)
    Xv, yv = _members(task, rng, [9, 5, 7])
    config = NetConfig(hidden=(6, 5), optimizer=optimizer, batch_size=16, epochs=5, dtype=dtype,
                       l2=0.1, learning_rate=0.01)
    stack = StackTrainer(config, task, k, Xs, ys, Xv, yv, seeds=[3, 4, 5])
    stacked = stack.run()
    # members differ only by rounding (1 ulp at most in practice; mostly bit-identical)
    rtol = 1e-5 if dtype == "float32" else 1e-12
    for i in range(3):
        alone = StackTrainer(config, task, k, [Xs[i]], [ys[i]], [Xv[i]], [yv[i]], seeds=[3 + i])
        single = alone.run()
        for a, b in zip(_all_weights(stack, i), _all_weights(alone, 0)):
            np.testing.assert_allclose(a, b, rtol=rtol, atol=rtol * 1e-2)
        for s, one in zip(stacked, single):
            np.testing.assert_allclose(s.train_loss[i], one.train_loss[0], rtol=rtol)
            np.testing.assert_allclose(s.val_loss[i], one.val_loss[0], rtol=rtol)
            np.testing.assert_allclose(s.val_metric[i], one.val_metric[0], rtol=rtol)


def test_epoch_scores_are_the_losses_and_metric_of_the_member_outputs():
    rng = np.random.default_rng(2)
    Xs, ys = _members("binary", rng, [60, 55])
    Xv, yv = _members("binary", rng, [20, 25])
    config = NetConfig(hidden=(8,), epochs=3, dtype="float64", learning_rate=0.01)
    trainer = StackTrainer(config, "binary", 1, Xs, ys, Xv, yv, seeds=[0, 1], metric="accuracy")
    seen = []
    history = trainer.run(on_epoch=seen.append)
    assert [s.epoch for s in history] == [1, 2, 3] and seen == history
    last = history[-1]
    assert isinstance(last, EpochScores) and last.train_loss.shape == (2,)
    for i in range(2):
        p = trainer.predict_output(i, Xv[i])
        assert p.shape == (len(Xv[i]),) and np.all((p > 0) & (p < 1))
        eps = np.finfo(np.float64).eps
        p = np.clip(p, eps, 1 - eps)
        logloss = -np.mean(yv[i] * np.log(p) + (1 - yv[i]) * np.log(1 - p))
        assert last.val_loss[i] == pytest.approx(logloss, rel=1e-12)
        assert last.val_metric[i] == metrics.compute("accuracy", yv[i], trainer.predict_output(i, Xv[i]), "binary")


def test_train_loss_is_the_mean_loss_over_the_epoch_batches():
    # full batch: the epoch's training loss is the loss at the weights before its single step
    rng = np.random.default_rng(3)
    X, y, _ = task_data("multiclass", rng, n=30)
    config = NetConfig(hidden=(4,), batch_size=30, epochs=1, dtype="float64", l2=0.0)
    trainer = StackTrainer(config, "multiclass", 3, [X], [y], seeds=[0])
    before = trainer.loss_and_gradient()[0][0]
    assert trainer.run()[0].train_loss[0] == pytest.approx(before, rel=1e-12)


def test_on_epoch_returning_false_stops_and_run_continues_later():
    rng = np.random.default_rng(4)
    X, y, _ = task_data("regression", rng, n=40)
    trainer = StackTrainer(NetConfig(hidden=(4,), epochs=10), "regression", 1, [X], [y], seeds=[0])
    history = trainer.run(on_epoch=lambda s: s.epoch < 3)
    assert [s.epoch for s in history] == [1, 2, 3]
    assert [s.epoch for s in trainer.run()] == list(range(4, 11))
    assert history[0].val_loss is None and history[0].val_metric is None


def test_divergence_raises_a_clear_error_naming_the_epoch():
    rng = np.random.default_rng(5)
    X, y, _ = task_data("regression", rng, n=64)
    config = NetConfig(hidden=(16,), optimizer="sgd", learning_rate=1e6, epochs=20)
    trainer = StackTrainer(config, "regression", 1, [X, X], [y * 1e3, y], seeds=[0, 1])
    with pytest.raises(DivergenceError) as info:
        trainer.run()
    err = info.value
    assert err.epoch is not None and f"epoch {err.epoch}" in str(err)
    assert "lower the learning rate" in str(err) and "\n" not in str(err)
    assert err.member in (0, 1)


@pytest.mark.parametrize("task, k, shape", [("regression", 1, (11,)), ("binary", 1, (11,)), ("multiclass", 4, (11, 4))])
def test_prediction_shapes_and_no_hidden_layer(task, k, shape):
    rng = np.random.default_rng(6)
    X, y, _ = task_data(task, rng, n=30, classes=k)
    trainer = StackTrainer(NetConfig(hidden=(), epochs=2), task, k, [X], [y], seeds=[0])
    trainer.run()
    out = trainer.predict_output(0, X[:11])
    assert out.shape == shape and out.dtype == np.float32
    if task == "multiclass":
        np.testing.assert_allclose(out.sum(axis=1), 1, rtol=1e-6)
    w = trainer.weights(0)
    assert len(w.layers) == 1 and w.output == {"regression": "identity", "binary": "sigmoid", "multiclass": "softmax"}[task]


def test_float32_is_the_default_and_float64_on_request():
    rng = np.random.default_rng(7)
    X, y, _ = task_data("binary", rng, n=20)
    for dtype in (None, "float64"):
        config = NetConfig(epochs=1) if dtype is None else NetConfig(epochs=1, dtype=dtype)
        trainer = StackTrainer(config, "binary", 1, [X], [y], seeds=[0])
        trainer.run()
        assert trainer.weights(0).layers[0][0].dtype == np.dtype(dtype or "float32")


@pytest.mark.parametrize("settings, key", [
    (dict(hidden=(8, 8, 8, 8)), "hidden"), (dict(hidden=(0,)), "hidden"), (dict(activation="gelu"), "activation"),
    (dict(optimizer="rmsprop"), "optimizer"), (dict(learning_rate=0.0), "learning_rate"),
    (dict(learning_rate=float("nan")), "learning_rate"), (dict(l2=-1.0), "l2"), (dict(batch_size=0), "batch_size"),
    (dict(epochs=2.5), "epochs"), (dict(momentum=1.0), "momentum"), (dict(init="lecun"), "init"),
    (dict(dtype="float16"), "dtype"),
])
def test_bad_settings_raise_spec_errors_naming_the_key(settings, key):
    with pytest.raises(SpecError) as info:
        NetConfig(**settings)
    assert str(info.value).startswith(f"{key}:") and "\n" not in str(info.value)


def test_config_normalises_hidden_and_resolves_init():
    assert NetConfig(hidden=[32, 16]).hidden == (32, 16)
    # "auto" as measured by benchmarks/bench_init.py
    assert NetConfig(activation="relu").init_scheme == "glorot"
    assert NetConfig(activation="tanh").init_scheme == "glorot"
    assert NetConfig(activation="sigmoid").init_scheme == "he"
    assert NetConfig(activation="relu", init="he").init_scheme == "he"
    assert NetConfig(hidden=[3]).to_dict()["hidden"] == [3]


def test_validation_in_several_chunks_scores_every_row():
    # a wide layer makes the validation pass run in chunks of rows (work arrays kept small)
    rng = np.random.default_rng(8)
    Xs, ys = _members("multiclass", rng, [40, 30])
    Xv, yv = _members("multiclass", rng, [1500, 1100])
    trainer = StackTrainer(NetConfig(hidden=(3000,), epochs=1), "multiclass", 3, Xs, ys, Xv, yv, seeds=[0, 1])
    last = trainer.run()[-1]
    for i in range(2):
        out = trainer.predict_output(i, Xv[i])
        assert last.val_metric[i] == pytest.approx(metrics.compute("balanced_accuracy", yv[i], out, "multiclass", 3))
        expected = -np.mean(np.log(np.clip(out[np.arange(len(yv[i])), yv[i]], 1e-7, 1)))
        assert last.val_loss[i] == pytest.approx(expected, rel=1e-5)


@pytest.mark.parametrize("task", ["binary", "multiclass"])
def test_batches_gathered_by_index_train_exactly_as_the_epoch_block(task, monkeypatch):
    # Large stacks gather each batch by index instead of copying a shuffled epoch block (memory);
    # both paths must give the same numbers bit for bit, ragged members included.
    rng = np.random.default_rng(7)
    k = 3 if task == "multiclass" else 1
    Xs, ys = _members(task, rng, RAGGED)
    Xv, yv = _members(task, rng, [9, 5, 7])
    config = NetConfig(hidden=(6,), batch_size=16, epochs=4, l2=0.01, learning_rate=0.01)
    block = StackTrainer(config, task, k, Xs, ys, Xv, yv, seeds=[3, 4, 5])
    assert not block._by_index
    monkeypatch.setattr(StackTrainer, "BLOCK_BYTES", 0)
    indexed = StackTrainer(config, task, k, Xs, ys, Xv, yv, seeds=[3, 4, 5])
    assert indexed._by_index
    for a, b in zip(block.run(), indexed.run()):
        assert np.array_equal(a.train_loss, b.train_loss) and np.array_equal(a.val_loss, b.val_loss)
    for member in range(3):
        for a, b in zip(_all_weights(block, member), _all_weights(indexed, member)):
            assert np.array_equal(a, b)


@pytest.mark.parametrize("optimizer", ["sgd", "momentum", "adam"])
@pytest.mark.parametrize("dtype", ["float32", "float64"])
def test_stacked_configurations_train_each_member_exactly_as_its_solo_run(optimizer, dtype):
    # Configurations of one shape with their own learning rate, L2 and momentum, stacked with
    # their folds (one group per configuration): every member follows the path of the same
    # configuration trained alone (as test_stacked_members_equal_members_trained_alone).
    rng = np.random.default_rng(5)
    Xs, ys = _members("binary", rng, RAGGED)
    Xv, yv = _members("binary", rng, [9, 5, 7])
    configs = [(0.01, 0.1, 0.9), (0.003, 0.0, 0.5), (0.03, 0.01, 0.0)]   # (lr, l2, momentum)
    members = [(c, f) for c in range(3) for f in range(3)]               # 3 configurations × 3 folds
    base = NetConfig(hidden=(6, 5), optimizer=optimizer, batch_size=16, epochs=5, dtype=dtype,
                     patience=2)
    stack = StackTrainer(base, "binary", 1, [Xs[f] for _, f in members], [ys[f] for _, f in members],
                         [Xv[f] for _, f in members], [yv[f] for _, f in members],
                         seeds=[10 + f for _, f in members], groups=[c for c, _ in members],
                         learning_rate=[configs[c][0] for c, _ in members],
                         l2=[configs[c][1] for c, _ in members],
                         momentum=[configs[c][2] for c, _ in members])
    stacked = stack.run()
    rtol = 1e-5 if dtype == "float32" else 1e-12
    for c, (lr, l2, mu) in enumerate(configs):
        solo_config = NetConfig(hidden=(6, 5), optimizer=optimizer, batch_size=16, epochs=5,
                                dtype=dtype, patience=2, learning_rate=lr, l2=l2, momentum=mu)
        alone = StackTrainer(solo_config, "binary", 1, Xs, ys, Xv, yv, seeds=[10, 11, 12])
        single = alone.run()
        rows = [i for i, (cc, _) in enumerate(members) if cc == c]
        assert list(stack.best_epoch[rows]) == list(alone.best_epoch)
        for i, f in zip(rows, range(3)):
            for a, b in zip(_all_weights(stack, i), _all_weights(alone, f)):
                np.testing.assert_allclose(a, b, rtol=rtol, atol=rtol * 1e-2)
            for s, one in zip(stacked, single):
                np.testing.assert_allclose(s.train_loss[i], one.train_loss[f], rtol=rtol)
                np.testing.assert_allclose(s.val_loss[i], one.val_loss[f], rtol=rtol)
    # the configurations really differ
    assert not np.allclose(_all_weights(stack, 0)[0], _all_weights(stack, 3)[0])
    with pytest.raises(ValueError, match="learning_rate"):
        StackTrainer(base, "binary", 1, Xs, ys, seeds=[1, 2, 3], learning_rate=[0.1, 0.2])
