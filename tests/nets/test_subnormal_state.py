"""Optimiser state that a zero gradient keeps shrinking is set to zero before it turns subnormal
(``optim.Optimizer.flush_steps``), without changing a single parameter.

Relu units that no row activates get an exactly zero gradient when there is no L2 term; a high
learning rate kills many of them. Their Adam first moment or momentum velocity is then multiplied
by 0.9 every step and, unflushed, ends in the subnormal range (below ``np.finfo(dtype).tiny``),
where it stays and every update pays the CPU's slow path for such numbers.
"""

from __future__ import annotations

import numpy as np
import pytest

from labbench.nets import NetConfig, StackTrainer


def _subnormal(array: np.ndarray) -> int:
    return int(np.count_nonzero((array != 0) & (np.abs(array) < np.finfo(array.dtype).tiny)))


def _data():
    from sklearn.datasets import make_classification

    X, y = make_classification(n_samples=600, n_features=10, random_state=0)
    return (X - X.mean(axis=0)) / X.std(axis=0), y


def _train(monkeypatch, flush_every: int, optimizer: str, batch: int, epochs: int) -> StackTrainer:
    monkeypatch.setattr(StackTrainer, "FLUSH_EVERY", flush_every)
    X, y = _data()
    config = NetConfig(hidden=(32,), activation="relu", optimizer=optimizer,
                       learning_rate=0.2 if optimizer == "adam" else 0.5, momentum=0.9,
                       batch_size=batch, epochs=epochs, l2=0.0, dtype="float32")
    trainer = StackTrainer(config, "binary", 1, [X, X[::-1]], [y, y[::-1]], seeds=[0, 1])
    trainer.run()
    return trainer


# batch 16: 38 batches an epoch, flushed inside the epoch; batch 64: 10 batches, flushed every
# 4 epochs
@pytest.mark.parametrize("optimizer, batch, epochs", [("adam", 16, 25), ("adam", 64, 80),
                                                      ("momentum", 16, 25)])
def test_state_is_flushed_before_it_turns_subnormal_and_no_parameter_changes(monkeypatch, optimizer,
                                                                              batch, epochs):
    plain = _train(monkeypatch, 0, optimizer, batch, epochs)
    flushed = _train(monkeypatch, 32, optimizer, batch, epochs)
    dead = int(np.count_nonzero(np.abs(flushed._gW[0]).sum(axis=1) == 0))
    assert dead > 0, "the setting must kill relu units, or it tests nothing"
    state_plain, state_flushed = plain._optimizer.state()[1:], flushed._optimizer.state()[1:]
    assert sum(_subnormal(a) for a in state_plain) > 0      # what happens without the flush
    assert [_subnormal(a) for a in state_flushed] == [0] * len(state_flushed)
    np.testing.assert_array_equal(flushed._params, plain._params)


def test_sgd_keeps_no_state_and_plans_no_flush():
    config = NetConfig(hidden=(4,), optimizer="sgd", batch_size=8, epochs=1)
    X, y = _data()
    trainer = StackTrainer(config, "binary", 1, [X[:40]], [y[:40]], seeds=[0])
    assert trainer._optimizer.flush_steps() == []
    trainer.run()
