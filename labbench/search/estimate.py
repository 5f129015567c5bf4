"""What a search will cost before it starts: trials × folds × epochs → minutes on this machine.

How (stated to the user beside the figure): one short calibration of the stacked engine on the
table's own shape — all folds trained together as ``StackTrainer`` does in a trial, the table's
input width, the middle of the searched layer sizes and batch sizes — times ``CALIBRATION_EPOCHS``
epochs on ``CALIBRATION_ROWS`` random rows per fold. One epoch's time grows with the rows (the
batches per epoch), so

    seconds per epoch  = calibrated seconds × training rows per fold / calibration rows
    minutes (at most)  = trials × repeats × epochs × seconds per epoch / parallel workers / 60

This is an upper bound: every trial is counted with all its epochs, while pruning stops the
lagging ones early. ``at_most_minutes`` is that figure; ``typical_minutes`` assumes half the
epochs (common practice for a median pruner that stops about half the trials halfway; a rough
guide, said as such).

Another family (e.g. the maps, which learn without a target) is calibrated the same way through
its own ``Family.stack``: the middle of each searched setting of its table, all folds stacked,
random rows of the table's width (``Shape.family``; ``shape_from(..., family=...)``).
"""

from __future__ import annotations

import math
import os
import time
from dataclasses import dataclass
from typing import Any, Mapping

import numpy as np

CALIBRATION_ROWS = 256
CALIBRATION_EPOCHS = 2
TRIAL_OVERHEAD_S = 0.3      # start, scoring and storage per trial (measured on the CLI, from memory)


@dataclass(frozen=True)
class Shape:
    """What the calibration needs to know about a search."""
    rows: int                   # rows of the table with a target
    inputs: int                 # input width after one-hot encoding
    outputs: int                # 1, or the number of classes
    task: str
    folds: int = 5
    repeats: int = 1
    holdout: float = 0.2
    trials: int | None = 40
    workers: int = 1
    hidden: tuple[int, ...] = (64,)
    batch_size: int = 64
    epochs: int = 200
    activation: str = "relu"
    family: str = "network"     # the model family (labbench.families) that trains
    settings: Mapping[str, Any] | None = None   # another family: its resolved middle settings


@dataclass(frozen=True)
class Estimate:
    seconds_per_epoch: float    # all folds of one trial together
    at_most_minutes: float | None
    typical_minutes: float | None
    trials: int | None

    def words(self) -> str:
        if self.at_most_minutes is None:
            return (f"about {_duration(self.seconds_per_epoch)} per epoch of a trial; "
                    "the time limit ends the search")
        most = _minutes(self.at_most_minutes)
        if most == "under a minute":      # "about under a minute, at most under a minute" says it twice
            span = "under a minute"
        else:
            span = f"about {_minutes(self.typical_minutes)}, at most {most}"
        return f"{span} for {self.trials} trial{'s' if self.trials != 1 else ''} on this machine"


def _duration(seconds: float) -> str:
    return f"{seconds * 1000:.0f} ms" if seconds < 1 else f"{seconds:.1f} s"


def _minutes(m: float | None) -> str:
    if m is None:
        return "?"
    if m < 1:
        return "under a minute"
    if m < 90:
        return f"{m:.0f} min"
    return f"{m / 60:.1f} h"


def middle(raw: Any, default: Any) -> Any:
    """The middle of a searched setting (geometric for a log range) or its fixed value."""
    if isinstance(raw, Mapping):
        if "choices" in raw:
            vals = list(raw["choices"])
            return vals[len(vals) // 2] if vals else default
        low, high = float(raw["low"]), float(raw["high"])
        mid = math.sqrt(low * high) if raw.get("log") and low > 0 else (low + high) / 2
        return mid
    return raw if raw is not None else default


def shape_from(space: Mapping[str, Any], *, rows: int, inputs: int, outputs: int, task: str,
               folds: int, repeats: int, holdout: float, trials: int | None, workers: int,
               family: str = "network") -> Shape:
    """A ``Shape`` for a spec's [space] dict (the middle of each searched range)."""
    if family != "network":
        from labbench.families import get_family

        settings = middle_settings(space, family)
        if not get_family(family).needs_target:      # whatever task the caller guessed
            task, outputs = "unsupervised", 1
        return Shape(rows=rows, inputs=max(1, inputs), outputs=max(1, outputs), task=task,
                     folds=folds, repeats=repeats, holdout=holdout, trials=trials,
                     workers=max(1, workers), epochs=max(1, int(settings["epochs"])),
                     family=family, settings=settings)
    layers = int(round(float(middle(space.get("hidden_layers", 1), 1))))
    units_raw = space.get("hidden_units", 64)
    if isinstance(units_raw, (list, tuple)):
        hidden = tuple(int(u) for u in units_raw[:max(layers, 0)])
    else:
        units = int(round(float(middle(units_raw, 64))))
        hidden = (units,) * max(layers, 0)
    epochs = int(round(float(middle(space.get("epochs", 200), 200))))
    if isinstance(space.get("epochs"), Mapping):
        epochs = int(space["epochs"]["high"])       # the most a trial may run
    return Shape(rows=rows, inputs=max(1, inputs), outputs=max(1, outputs), task=task, folds=folds,
                 repeats=repeats, holdout=holdout, trials=trials, workers=max(1, workers),
                 hidden=hidden, batch_size=int(middle(space.get("batch_size", 64), 64)),
                 epochs=max(1, epochs), activation=str(middle(space.get("activation", "relu"), "relu")))


def middle_settings(space: Mapping[str, Any], family: str) -> dict[str, Any]:
    """Resolved settings of ``family`` at the middle of each searched setting of ``space`` (its
    default where ``space`` leaves it out); ``epochs`` = the most a trial may run."""
    from labbench.families import get_family

    model = get_family(family)
    out: dict[str, Any] = {}
    for name, info in model.settings.items():
        raw = space.get(name, info.default)
        value = middle(raw, info.default)
        if info.kind == "int" and isinstance(raw, Mapping) and "choices" not in raw:
            value = int(raw["high"]) if name == "epochs" else int(round(float(value)))
        out[name] = value
    out.setdefault("epochs", 1)
    return model.complete(out)


def calibrate(shape: Shape, seed: int = 0) -> float:
    """Seconds for one epoch of all folds together on ``CALIBRATION_ROWS`` rows per fold."""
    from labbench.nets import NetConfig, StackTrainer
    from threadpoolctl import threadpool_limits

    if shape.family != "network":
        return _calibrate_family(shape, seed)

    rng = np.random.default_rng(seed)
    n, d, k = CALIBRATION_ROWS, shape.inputs, shape.outputs
    X = rng.normal(size=(n, d)).astype(np.float32)
    if shape.task == "regression":
        y = rng.normal(size=n)
    else:
        y = rng.integers(0, max(2, k), size=n)
    cfg = NetConfig(hidden=shape.hidden, activation=shape.activation, optimizer="adam",
                    learning_rate=1e-3, batch_size=min(shape.batch_size, n), epochs=CALIBRATION_EPOCHS + 1)
    m = shape.folds
    with threadpool_limits(1):          # the workers train with one BLAS thread (pyproject)
        trainer = StackTrainer(cfg, shape.task, k if shape.task == "multiclass" else 1,
                               [X] * m, [y] * m, [X[:64]] * m, [y[:64]] * m, seeds=list(range(m)))
        stamps: list[float] = []
        # the first epoch warms allocations and caches; the ones after it are timed
        trainer.run(on_epoch=lambda _scores: stamps.append(time.perf_counter()))
        return (stamps[-1] - stamps[0]) / CALIBRATION_EPOCHS


def estimate(shape: Shape, seconds_calibrated: float) -> Estimate:
    train_rows = shape.rows * (1 - shape.holdout) * (shape.folds - 1) / shape.folds
    per_epoch = seconds_calibrated * max(train_rows, 1) / CALIBRATION_ROWS
    if shape.trials is None:
        return Estimate(per_epoch, None, None, None)
    parallel = max(1, min(shape.workers, os.cpu_count() or 1))
    per_trial = shape.repeats * (shape.epochs * per_epoch) + TRIAL_OVERHEAD_S
    at_most = shape.trials * per_trial / parallel / 60
    typical = shape.trials * (shape.repeats * shape.epochs * per_epoch / 2 + TRIAL_OVERHEAD_S) / parallel / 60
    return Estimate(per_epoch, at_most, typical, shape.trials)


def _calibrate_family(shape: Shape, seed: int) -> float:
    """``calibrate`` for another family: its own ``stack`` on random rows, folds stacked."""
    from labbench.families import get_family
    from threadpoolctl import threadpool_limits

    model = get_family(shape.family)
    rng = np.random.default_rng(seed)
    n, m = CALIBRATION_ROWS, shape.folds
    X = rng.normal(size=(n, shape.inputs))
    if shape.task == "regression":
        y = rng.normal(size=n)
    elif shape.task in ("binary", "multiclass"):
        y = rng.integers(0, max(2, shape.outputs), size=n)
    else:                                  # no target: the dummy zeros of labbench.data
        y = np.zeros(n)
    settings = dict(shape.settings or middle_settings({}, shape.family))
    with threadpool_limits(1):
        trainer = model.stack(settings, shape.task, shape.outputs, [X] * m, [y] * m,
                              [X[:64]] * m, [y[:64]] * m, seeds=list(range(m)),
                              metric=model.default_metric(shape.task),
                              epochs=CALIBRATION_EPOCHS + 1)
        stamps: list[float] = []
        trainer.run(on_epoch=lambda _scores: stamps.append(time.perf_counter()))
    return (stamps[-1] - stamps[0]) / max(1, len(stamps) - 1)
