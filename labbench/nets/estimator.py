"""``NetClassifier`` and ``NetRegressor``: the engine behind scikit-learn's estimator conventions.

The constructor only stores its arguments (the ``NetConfig`` fields plus ``random_state``);
``get_params`` / ``set_params`` derive from its signature; ``fit`` checks the inputs, trains one
network with ``StackTrainer`` and sets the fitted attributes, all ending in ``_``: ``weights_``
(``NetWeights``), ``n_features_in_``, ``loss_curve_`` (training loss per epoch), ``n_iter_``
(epochs run), and ``classes_`` for the classifier. Bad settings raise ``ValueError`` at ``fit``.
``fit_folds(estimator, X, y, splits)`` fits one copy per split of a cross-validation, all trained
as one stack, each ending as its own ``fit`` would.

Early stopping (``patience > 0``, off by default like scikit-learn's ``early_stopping=False``):
``validation_fraction`` of the rows (per class for the classifier) are held back, chosen with the
estimator's random state; training stops after ``patience`` epochs without a better loss on them
and keeps the weights of the best epoch (``best_epoch_``; ``validation_loss_`` per epoch).
scikit-learn is not imported here; it stays an optional companion (its estimator checks are run
in tests/nets/test_estimator_checks.py).
"""

from __future__ import annotations

import inspect
import numbers

import numpy as np

from labbench.errors import SpecError
from labbench.nets.checks import (check_class_target, check_regression_target, check_X, check_y,
                                  not_fitted)
from labbench.nets.config import NetConfig
from labbench.nets.metrics import accuracy, r2
from labbench.nets.stack import StackTrainer

_CONFIG_FIELDS = tuple(NetConfig.__dataclass_fields__)


class _NetEstimator:
    _estimator_type = ""

    def __init__(self, hidden=(64,), activation="relu", optimizer="adam", learning_rate=1e-3,
                 momentum=0.9, l2=0.0, batch_size=64, epochs=30, patience=0,
                 validation_fraction=0.1, init="auto", dtype="float32", random_state=None):
        self.hidden = hidden
        self.activation = activation
        self.optimizer = optimizer
        self.learning_rate = learning_rate
        self.momentum = momentum
        self.l2 = l2
        self.batch_size = batch_size
        self.epochs = epochs
        self.patience = patience
        self.validation_fraction = validation_fraction
        self.init = init
        self.dtype = dtype
        self.random_state = random_state

    # ------------------------------------------------------------ parameters
    @classmethod
    def _get_param_names(cls) -> list[str]:
        signature = inspect.signature(cls.__init__)
        return sorted(p.name for p in signature.parameters.values() if p.name != "self")

    def get_params(self, deep: bool = True) -> dict:
        return {name: getattr(self, name) for name in self._get_param_names()}

    def set_params(self, **params):
        valid = self._get_param_names()
        for key, value in params.items():
            if key not in valid:
                raise ValueError(f"Invalid parameter {key!r} for estimator {type(self).__name__}; "
                                 f"valid parameters are {', '.join(valid)}")
            setattr(self, key, value)
        return self

    def __repr__(self) -> str:
        defaults = {p.name: p.default for p in inspect.signature(type(self).__init__).parameters.values()}
        changed = [f"{k}={v!r}" for k, v in self.get_params().items()
                   if not (isinstance(v, type(defaults[k])) and v == defaults[k])]
        return f"{type(self).__name__}({', '.join(changed)})"

    def __sklearn_is_fitted__(self) -> bool:
        return hasattr(self, "weights_")

    def __sklearn_tags__(self):
        # Only scikit-learn calls this, so importing it here keeps it optional for labbench.
        from sklearn.utils import ClassifierTags, InputTags, RegressorTags, Tags, TargetTags

        classifier = self._estimator_type == "classifier"
        return Tags(
            estimator_type=self._estimator_type,
            target_tags=TargetTags(required=True, single_output=True, multi_output=False),
            classifier_tags=ClassifierTags(multi_class=True, multi_label=False) if classifier else None,
            regressor_tags=None if classifier else RegressorTags(),
            input_tags=InputTags(two_d_array=True, sparse=False, allow_nan=False),
        )

    # ------------------------------------------------------------ fitting
    def _config(self) -> NetConfig:
        try:
            return NetConfig(**{name: getattr(self, name) for name in _CONFIG_FIELDS})
        except SpecError as exc:
            raise ValueError(f"{type(self).__name__}: {exc}") from None

    def _seed(self) -> int:
        state = self.random_state
        if state is None:
            return int(np.random.randint(0, 2**31 - 1))
        if isinstance(state, numbers.Integral):
            return int(state)
        if isinstance(state, np.random.RandomState):
            return int(state.randint(0, 2**31 - 1))
        if isinstance(state, np.random.Generator):
            return int(state.integers(0, 2**31 - 1))
        raise ValueError(f"random_state: {state!r} is not None, an int, a RandomState or a Generator")

    def _train(self, X, codes, task: str, n_outputs: int) -> None:
        _train_stacked([self], [X], [codes], task, n_outputs)

    def _prepare(self, X, y):
        """Checked inputs for ``fit``: (X, targets as trained on, task, outputs, fitted extras)."""
        raise NotImplementedError

    def _split(self, codes, task: str, seed: int) -> tuple[np.ndarray, np.ndarray]:
        """(training rows, validation rows): ``validation_fraction`` held back, per class when classifying."""
        frac = self.validation_fraction
        if isinstance(frac, bool) or not isinstance(frac, numbers.Real) or not 0 < frac < 1:
            raise ValueError(f"{type(self).__name__}: validation_fraction {frac!r} must be between 0 and 1")
        n = codes.shape[0]
        if n < 2:
            raise ValueError(f"{type(self).__name__}: patience needs at least 2 rows to hold some back")
        rng = np.random.default_rng([seed, 1])
        strata = [np.arange(n)] if task == "regression" else [np.flatnonzero(codes == c) for c in np.unique(codes)]
        val = np.concatenate([rng.permutation(rows)[:int(round(frac * rows.size))] for rows in strata])
        if val.size == 0:
            val = rng.permutation(n)[:1]
        elif val.size == n:
            val = val[1:]
        keep = np.ones(n, bool)
        keep[val] = False
        return np.flatnonzero(keep), np.sort(val)

    def _output(self, X) -> np.ndarray:
        if not hasattr(self, "weights_"):
            raise not_fitted(self)
        X = check_X(X, self, reset=False)
        # float64 arithmetic: predictions of a subset equal those of the whole to ~1e-16
        return self.weights_.astype(np.float64).forward(X)


class NetClassifier(_NetEstimator):
    """A small neural network classifier (binary: one sigmoid output; else softmax)."""

    _estimator_type = "classifier"

    def fit(self, X, y):
        X, codes, task, k, extras = self._prepare(X, y)
        self._train(X, codes, task, k)
        self.__dict__.update(extras)
        return self

    def _prepare(self, X, y):
        X = check_X(X, self, reset=True)
        y = check_class_target(check_y(y, X.shape[0], self))
        classes, codes = np.unique(y, return_inverse=True)
        if classes.shape[0] < 2:
            raise ValueError(f"{type(self).__name__} needs at least 2 classes; y has 1 class ({classes[0]!r})")
        task = "binary" if classes.shape[0] == 2 else "multiclass"
        return X, codes.ravel(), task, 1 if task == "binary" else int(classes.shape[0]), {"classes_": classes}

    def predict_proba(self, X) -> np.ndarray:
        out = self._output(X)
        if out.ndim == 1:
            return np.column_stack([1.0 - out, out])
        return out

    def predict(self, X) -> np.ndarray:
        out = self._output(X)
        index = (out >= 0.5).astype(np.int64) if out.ndim == 1 else np.argmax(out, axis=1)
        return self.classes_[index]

    def score(self, X, y, sample_weight=None) -> float:
        """Mean accuracy on (X, y); ``sample_weight`` weights the rows when given."""
        correct = (self.predict(X) == np.asarray(y).ravel()).astype(np.float64)
        if sample_weight is None:
            return accuracy(correct, np.ones_like(correct))
        return float(np.average(correct, weights=sample_weight))


class NetRegressor(_NetEstimator):
    """A small neural network regressor (identity output, squared error)."""

    _estimator_type = "regressor"

    def fit(self, X, y):
        X, y, task, k, _ = self._prepare(X, y)
        self._train(X, y, task, k)
        return self

    def _prepare(self, X, y):
        X = check_X(X, self, reset=True)
        return X, check_regression_target(check_y(y, X.shape[0], self)), "regression", 1, {}

    def predict(self, X) -> np.ndarray:
        return self._output(X)

    def score(self, X, y, sample_weight=None) -> float:
        """R² of the predictions on (X, y) (unweighted unless ``sample_weight`` is given)."""
        y = np.asarray(y, dtype=np.float64).ravel()
        pred = self.predict(X)
        if sample_weight is None:
            return r2(y, pred)
        w = np.asarray(sample_weight, dtype=np.float64)
        mean = np.average(y, weights=w)
        total = float(np.sum(w * (y - mean) ** 2))
        residual = float(np.sum(w * (y - pred) ** 2))
        if total == 0.0:
            return 1.0 if residual == 0.0 else 0.0
        return 1.0 - residual / total


def _train_stacked(models: list[_NetEstimator], Xs, targets, task: str, n_outputs: int) -> None:
    """Fit each of ``models`` (same settings) on its own rows, all as one stack. Each member ends as
    its own ``fit`` would end it: its own seed, its own held-back rows and its own early stop
    (one stopping group per member), its curves cut at the epoch its own run would have stopped."""
    config = models[0]._config()
    seeds = [model._seed() for model in models]
    if not config.patience:
        trainer = StackTrainer(config, task, n_outputs, Xs, targets, seeds=seeds)
    else:
        parts = [model._split(t, task, seed) for model, t, seed in zip(models, targets, seeds)]
        trainer = StackTrainer(config, task, n_outputs, [X[f] for X, (f, _) in zip(Xs, parts)],
                               [t[f] for t, (f, _) in zip(targets, parts)],
                               [X[v] for X, (_, v) in zip(Xs, parts)],
                               [t[v] for t, (_, v) in zip(targets, parts)], seeds=seeds,
                               groups=list(range(len(models))))
    history = trainer.run()
    for i, model in enumerate(models):
        n_iter = len(history)
        if config.patience:        # alone, it would have stopped `patience` epochs after its best
            n_iter = min(n_iter, int(trainer.best_epoch[i]) + int(config.patience))
            model.validation_loss_ = [float(s.val_loss[i]) for s in history[:n_iter]]
            model.best_epoch_ = int(trainer.best_epoch[i])
        model.weights_ = trainer.weights(i)
        model.loss_curve_ = [float(s.train_loss[i]) for s in history[:n_iter]]
        model.n_iter_ = n_iter


def fit_folds(estimator: _NetEstimator, X, y, splits) -> list[_NetEstimator]:
    """Fit one copy of ``estimator`` per split, the copies trained together as one stack.

    ``splits``: (training rows, other rows) index pairs, e.g. ``list(KFold(5).split(X, y))``;
    the other rows are not used. Copy i ends as ``clone(estimator).fit(X[train_i], y[train_i])``
    would (same settings and ``random_state``; equal up to rounding), so scoring each copy on its
    split's other rows is the usual cross-validation, in about 0.4 x the time of a loop of fits
    (``benchmarks/bench_engine.py``). Splits whose classes differ from the others' (a fold
    missing a class) are fitted in a stack of their own.
    """
    splits = list(splits)
    if not splits:
        raise ValueError("fit_folds needs at least one split")
    X, y = np.asarray(X) if not hasattr(X, "iloc") else X, np.asarray(y)
    models = [type(estimator)(**estimator.get_params()) for _ in splits]
    prepared = []
    for model, split in zip(models, splits):
        rows = np.asarray(split[0])
        prepared.append(model._prepare(X[rows] if not hasattr(X, "iloc") else X.iloc[rows], y[rows]))
    # stack the splits that agree on the task and classes
    kinds: dict[tuple, list[int]] = {}
    for i, (_, _, task, k, extras) in enumerate(prepared):
        classes = extras.get("classes_")
        key = (task, k, None if classes is None else tuple(classes.tolist()))
        kinds.setdefault(key, []).append(i)
    for (task, k, _), members in kinds.items():
        _train_stacked([models[i] for i in members], [prepared[i][0] for i in members],
                       [prepared[i][1] for i in members], task, k)
        for i in members:
            models[i].__dict__.update(prepared[i][4])
    return models
