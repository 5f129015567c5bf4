"""From a spec to the arrays a search trains on: table, task, metric, hold-out, folds.

Order matters and is fixed here once for the runner and the winner refit alike:

1. load the table with the spec's data settings;
2. resolve the task (spec override or inferred) and the metric (spec or the task's default);
3. split off the hold-out FIRST (``evaluation.seed``), so its rows never reach any fold;
4. make the folds on the training rows only and fit one preprocessor per fold (``FoldArrays``);
   for regression also one target scaler per fold (``data.target_scaling``), so the networks
   train on a scaled target while every score is computed in the target's own units.

A table without a target (the map and group families) has the task "unsupervised": its hold-out
and folds are drawn at random (nothing to stratify on), and its metric is the family's default
(``Family.default_metric``) unless the spec names one the family offers.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass
from typing import Any

import numpy as np

from labbench.search.space import spec_error
from labbench.search.spec import Spec, check_metric

log = logging.getLogger("labbench.search.prepare")


@dataclass(frozen=True)
class Prepared:
    table: Any                         # labbench.data.Table
    task: str                          # "regression" | "binary" | "multiclass" | "unsupervised"
    metric: str
    direction: str                     # "maximize" | "minimize"
    train_pos: np.ndarray              # positions into the table: the rows the search sees
    holdout_pos: np.ndarray            # positions into the table: locked away until the end
    folds: tuple                       # (train, val) positions into train_pos, one pair per fold
    fold_arrays: Any                   # labbench.data.FoldArrays (rows = positions into the table)
    target_scaling: str = "standard"   # regression: how the refit scales the target (spec key)
    family: str = "network"            # the model family (labbench.families) that trains

    @property
    def model(self):
        """The ``labbench.families.Family`` that trains on these folds."""
        from labbench.families import get_family

        return get_family(self.family)

    @property
    def n_outputs(self) -> int:
        return len(self.table.classes) if self.task == "multiclass" else 1

    @property
    def n_classes(self) -> int | None:
        return len(self.table.classes) if self.table.classes is not None else None

    @property
    def stratify(self) -> bool:
        return self.table.classes is not None       # classes only (not regression, no target)


def metric_direction(metric: str) -> str:
    from labbench.nets.metrics import METRICS

    return METRICS[metric].direction


class LazyFoldArrays:
    """The ``FoldArrays`` made at the first use of one of their attributes. The search's
    controller never trains (its workers prepare their own folds), so its process holds the
    fold inputs only if the winner's seed spread needs them (measured: the folds and their
    preparation were the command process's peak memory on a 100,000 × 50 table)."""

    def __init__(self, make):
        self._make = make
        self._value = None

    def materialize(self):
        if self._value is None:
            self._value = self._make()
            self._make = None
        return self._value

    def __getattr__(self, name: str):
        if name.startswith("_"):            # pickling and copying look these up first
            raise AttributeError(name)
        return getattr(self.materialize(), name)


def prepare(spec: Spec, fold_dtype=None, *, lazy_folds: bool = False) -> Prepared:
    """Load and split the spec's data. Raises DataError / SpecError with one-line messages.
    ``fold_dtype``: the dtype of the folds' inputs (``prepare_folds``; default float64).
    ``lazy_folds``: prepare the fold inputs only when first used (``LazyFoldArrays``); the same
    checks run first, so bad data is still reported here."""
    from labbench.data import check_folds, holdout_split, load_table, make_folds, prepare_folds

    d, e = spec.data, spec.evaluation
    table = load_table(d.path, d.target, ignore=d.ignore, kinds=dict(d.kinds) or None,
                       task=d.task, missing=d.missing, missing_markers=d.missing_markers,
                       thousands=d.thousands, decimal=d.decimal, keep=d.keep, label=d.label)
    task = table.task
    metric = e.metric or spec.space.model.default_metric(task)
    if e.metric:
        check_metric(metric, task, spec.source_path)
    offered = spec.space.model.metrics(task)
    if metric not in offered:           # the family scores itself with these objectives only
        what = "a table without a target" if not table.has_target else f"a {task} task"
        raise spec_error(spec.source_path, "evaluation.metric", f"{metric!r} cannot score the "
                         f"{spec.space.family} family on {what}; use one of " + ", ".join(offered))
    check_folds(table, e.folds, e.holdout)
    stratify = table.classes is not None
    train_pos, holdout_pos = holdout_split(table.y, e.holdout, seed=e.seed, stratify=stratify)
    train_pos = np.asarray(train_pos, dtype=np.int64)
    holdout_pos = np.asarray(holdout_pos, dtype=np.int64)
    folds = make_folds(table.y[train_pos], e.folds, repeats=e.repeats, seed=e.seed,
                       stratify=stratify)
    def make():
        return prepare_folds(table, train_pos, folds, d.scaling, d.target_scaling, dtype=fold_dtype)

    if lazy_folds and table.task == "regression":   # prepare_folds' one check of the target
        from labbench.data import TargetScaler

        TargetScaler(d.target_scaling, table.target).fit(table.y, f"{table.path}: ")
    fold_arrays = LazyFoldArrays(make) if lazy_folds else make()
    log.info("%s: %d training rows, %d hold-out rows, %d folds", d.path, len(train_pos),
             len(holdout_pos), len(folds))
    return Prepared(table=table, task=task, metric=metric, direction=metric_direction(metric),
                    train_pos=train_pos, holdout_pos=holdout_pos, folds=tuple(folds),
                    fold_arrays=fold_arrays, target_scaling=d.target_scaling,
                    family=spec.space.family)
