"""One trial: the k (× repeats) fold models of one configuration trained together.

This runs inside a worker process. It asks the model family (``labbench.families``; the network's
is a ``labbench.nets.StackTrainer``) to train over the prepared folds (one stacked member per fold), hands the fold means of every epoch to a callback, and stops
after an epoch when told to (pruned or cancelled). With ``patience`` the folds share ONE kept
epoch (``best_epoch``: the best of their mean validation loss, see ``labbench.nets.stopping``) and
the fold scores are the metric at that epoch; with patience 0 it is the last epoch. The trial
value is the mean of the fold scores; the refit trains ``best_epoch`` epochs.

A family that learns without a target (the map and group families) also reports, per fold, the
measures of its kept epoch (``Training.measures()``: quantisation, topographic, reconstruction
and relative error on each fold's validation rows) and its ``units``; the trial carries their
fold means (``measures`` in the result, then the trial attr of the same name), which the
trade-off front of ``labbench.search.front`` reads.

It also holds the small helpers the controller uses to turn those values into the trial user
attrs of the storage contract (curve downsampled to at most 200 points, fold scores, spread).
"""

from __future__ import annotations

import math
import time
from typing import Any, Callable, Mapping, Sequence

CURVE_POINTS = 200

#: A worker hands these back: (epoch, train_loss, val_loss, val_metric), fold means.
EpochValues = tuple[int, float, float, float]


def member_seeds(seed: int, n_members: int) -> list[int]:
    """One training seed per stacked member, derived from ``evaluation.seed`` only.

    The same settings therefore train identically in every trial (a retried trial repeats its
    result, and two configurations are compared on the same initial draws).
    """
    import numpy as np

    return [int(s) for s in np.random.SeedSequence(int(seed)).generate_state(n_members)]


def _mean(values: Any) -> float:
    if values is None:
        return float("nan")
    import numpy as np

    return float(np.mean(np.asarray(values, dtype=np.float64)))


def run_trial(
    prepared: Any,
    settings: Mapping[str, Any],
    *,
    seed: int,
    on_epoch: Callable[[EpochValues], None],
    should_stop: Callable[[], bool],
    dtype: str = "float32",
) -> dict[str, Any]:
    """Train one configuration on every fold; returns a plain dict (safe to send between processes).

    ``end`` is "complete" (all epochs ran, or patience ended training), "stopped" (``should_stop``
    said so after an epoch) or "diverged" (NaN/inf or exploding loss; ``reason`` says where). Other
    exceptions propagate (they are bugs). ``best_epoch`` is the epoch whose fold scores are given.
    """
    from labbench.errors import DivergenceError

    started = time.perf_counter()
    folds = prepared.fold_arrays
    n_members = len(folds.X_train)
    trainer = prepared.model.stack(
        settings, prepared.task, prepared.n_outputs,
        folds.X_train, folds.y_train, folds.X_val, folds.y_val,
        seeds=member_seeds(seed, n_members), metric=prepared.metric,
        target_inverse=folds.target_inverse,    # regression: scores in the target's own units
        dtype=dtype,
    )
    state = {"epochs": 0, "last": None, "stopped": False}

    def each_epoch(scores) -> bool:
        state["epochs"] = int(scores.epoch)
        state["last"] = scores
        on_epoch((int(scores.epoch), _mean(scores.train_loss), _mean(scores.val_loss),
                  _mean(scores.val_metric)))
        if should_stop():
            state["stopped"] = True
            return False
        return True

    try:
        trainer.run(on_epoch=each_epoch)
    except DivergenceError as exc:
        return {"end": "diverged", "reason": one_line(str(exc)), "fold_scores": [],
                "epochs_run": int(getattr(exc, "epoch", None) or state["epochs"]),
                "duration_s": time.perf_counter() - started}
    best = trainer.best_val_metric
    fold_scores = [] if state["last"] is None or best is None else [float(v) for v in best]
    out = {"end": "stopped" if state["stopped"] else "complete", "reason": "",
           "fold_scores": fold_scores, "epochs_run": state["epochs"],
           "best_epoch": int(trainer.best_epoch[0]) if state["last"] is not None else 0,
           "duration_s": time.perf_counter() - started}
    measures = fold_measures(trainer) if state["last"] is not None else None
    if measures is not None:
        out["measures"] = measures
    return out


def fold_measures(trainer: Any) -> dict[str, float | int | None] | None:
    """The fold means of a Training's extra measures at its kept epoch, plus ``units``; None for
    a family without them (the network). Non-finite means become None (JSON has no NaN)."""
    get = getattr(trainer, "measures", None)
    if get is None:
        return None
    out: dict[str, float | int | None] = {
        name: _finite_or_none(_mean(values)) for name, values in get().items()}
    units = getattr(trainer, "units", None)
    if units is not None:
        out["units"] = int(units)
    return out


# --------------------------------------------------------------------------------------------
# controller-side helpers


def one_line(text: str, limit: int = 300) -> str:
    line = " ".join(str(text).split())
    return line if len(line) <= limit else line[: limit - 1] + "…"


def cv_summary(fold_scores: Sequence[float]) -> tuple[float, float]:
    """(mean, sample standard deviation) of the fold scores; std 0 for a single fold."""
    n = len(fold_scores)
    if n == 0:
        return float("nan"), float("nan")
    mean = math.fsum(fold_scores) / n
    if n == 1:
        return mean, 0.0
    var = math.fsum((s - mean) ** 2 for s in fold_scores) / (n - 1)
    return mean, math.sqrt(var)


def _finite_or_none(x: float) -> float | None:
    return float(x) if math.isfinite(x) else None


def curve_attr(points: Sequence[EpochValues], max_points: int = CURVE_POINTS) -> dict[str, list]:
    """The ``curve`` trial attr: fold means per epoch, at most ``max_points`` epochs kept.

    The first and last epochs are always kept; the rest are evenly spaced. Non-finite values
    become None (JSON has no NaN).
    """
    n = len(points)
    if n > max_points:
        step = (n - 1) / (max_points - 1)
        keep = sorted({round(i * step) for i in range(max_points)})
        points = [points[i] for i in keep]
    return {
        "epoch": [int(p[0]) for p in points],
        "train_loss": [_finite_or_none(p[1]) for p in points],
        "val_loss": [_finite_or_none(p[2]) for p in points],
        "val_metric": [_finite_or_none(p[3]) for p in points],
    }
