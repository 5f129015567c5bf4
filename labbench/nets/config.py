"""The settings of one network (``NetConfig``) and what one epoch reports (``EpochScores``).

``NetConfig`` checks its own values when it is built, so a bad setting fails at once with a
``SpecError`` naming the key, the value and what is allowed — deep code trusts a config.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from labbench.errors import SpecError
from labbench.nets.activations import ACTIVATIONS
from labbench.nets.init import SCHEMES
from labbench.nets.optim import OPTIMIZERS

# Names come from their registries (one source each): add an activation to
# ``activations.ACTIVATIONS``, an optimiser to ``optim.OPTIMIZERS``, a start to ``init.SCHEMES``.
ACTIVATION_NAMES = tuple(ACTIVATIONS)
OPTIMIZER_NAMES = tuple(OPTIMIZERS)
INIT_NAMES = ("auto", *SCHEMES)
DTYPE_NAMES = ("float32", "float64")
MAX_HIDDEN_LAYERS = 3
#: The largest momentum allowed, inclusive (0 <= momentum <= MOMENTUM_MAX), here and in the
#: search's settings table (labbench.families.network reads it): at 1 the heavy ball never forgets
#: a step, and above 0.999 the step size grows past a thousand times the learning rate.
MOMENTUM_MAX = 0.999

#: What ``init = "auto"`` draws for each hidden activation, chosen by measurement
#: (benchmarks/bench_init.py; table in DEVELOPERS.md): Glorot beat He for relu (+1.3 accuracy
#: points on the reference workload, ahead on digits, breast_cancer and diabetes too) and for
#: tanh; He's larger start won for sigmoid (+2.6 points on the reference workload; ties on digits
#: and breast_cancer, 0.4 RMSE behind on diabetes inside the spread).
INIT_FOR_ACTIVATION = {"relu": "glorot", "tanh": "glorot", "sigmoid": "he"}


def _choice(key: str, value: Any, allowed: tuple[str, ...]) -> None:
    if value not in allowed:
        raise SpecError(f"{key}: {value!r} is not known; use one of {', '.join(allowed)}")


def _positive(key: str, value: Any, *, allow_zero: bool = False, integer: bool = False) -> None:
    kinds = (int, np.integer) if integer else (int, float, np.integer, np.floating)
    what = "a whole number" if integer else "a number"
    if isinstance(value, bool) or not isinstance(value, kinds) or not math.isfinite(float(value)):
        raise SpecError(f"{key}: {value!r} is not {what}; give a finite value")
    if value < 0 or (value == 0 and not allow_zero):
        bound = "zero or more" if allow_zero else "more than zero"
        raise SpecError(f"{key}: {value!r} is out of range; it must be {bound}")


@dataclass(frozen=True)
class NetConfig:
    """Everything that defines how one network is built and trained (not the data, not the random seeds)."""

    hidden: tuple[int, ...] = (64,)     # 0 to 3 layers; () = linear / logistic baseline
    activation: str = "relu"            # "relu" | "tanh" | "sigmoid"
    optimizer: str = "adam"             # "sgd" | "momentum" | "adam"
    learning_rate: float = 1e-3
    momentum: float = 0.9               # used by "momentum" only
    l2: float = 0.0                     # penalty alpha, scikit-learn's convention alpha/(2 n)·Σw²
    batch_size: int = 64
    epochs: int = 30                    # the most epochs; fewer when patience stops training
    patience: int = 0                   # epochs without a better validation loss before stopping; 0 = off
    init: str = "auto"                  # "auto" (INIT_FOR_ACTIVATION) | "glorot" | "he"
    dtype: str = "float32"              # or "float64"

    def __post_init__(self) -> None:
        hidden = self.hidden
        if isinstance(hidden, (int, np.integer)) and not isinstance(hidden, bool):
            hidden = (int(hidden),)
        try:
            hidden = tuple(hidden)
        except TypeError:
            raise SpecError(f"hidden: {self.hidden!r} is not a list of layer widths; give e.g. [64] or []") from None
        if len(hidden) > MAX_HIDDEN_LAYERS:
            raise SpecError(
                f"hidden: {len(hidden)} layers given, at most {MAX_HIDDEN_LAYERS} are supported; "
                "give 0 to 3 layer widths"
            )
        for width in hidden:
            if isinstance(width, bool) or not isinstance(width, (int, np.integer)) or width < 1:
                raise SpecError(f"hidden: layer width {width!r} is not a whole number of at least 1")
        object.__setattr__(self, "hidden", tuple(int(w) for w in hidden))
        _choice("activation", self.activation, ACTIVATION_NAMES)
        _choice("optimizer", self.optimizer, OPTIMIZER_NAMES)
        _choice("init", self.init, INIT_NAMES)
        _choice("dtype", self.dtype, DTYPE_NAMES)
        _positive("learning_rate", self.learning_rate)
        _positive("l2", self.l2, allow_zero=True)
        _positive("batch_size", self.batch_size, integer=True)
        _positive("epochs", self.epochs, integer=True)
        _positive("patience", self.patience, allow_zero=True, integer=True)
        _positive("momentum", self.momentum, allow_zero=True)
        if self.momentum > MOMENTUM_MAX:
            raise SpecError(f"momentum: {self.momentum!r} is out of range; it must be from 0 to {MOMENTUM_MAX}")

    @property
    def init_scheme(self) -> str:
        """The initialisation actually used: "auto" resolves by ``INIT_FOR_ACTIVATION`` (Glorot for
        relu and tanh, He for sigmoid)."""
        if self.init != "auto":
            return self.init
        return INIT_FOR_ACTIVATION[self.activation]

    def to_dict(self) -> dict[str, Any]:
        """Plain Python values (hidden as a list), e.g. for study attributes or a bundle."""
        return {
            "hidden": list(self.hidden),
            "activation": self.activation,
            "optimizer": self.optimizer,
            "learning_rate": float(self.learning_rate),
            "momentum": float(self.momentum),
            "l2": float(self.l2),
            "batch_size": int(self.batch_size),
            "epochs": int(self.epochs),
            "patience": int(self.patience),
            "init": self.init,
            "dtype": self.dtype,
        }


@dataclass(frozen=True)
class EpochScores:
    """What one epoch of a stack reports, one entry per stacked member."""

    epoch: int                           # 1-based
    train_loss: np.ndarray               # (m,) mean data loss over the epoch's mini-batches
    val_loss: np.ndarray | None          # (m,) data loss on each member's validation rows
    val_metric: np.ndarray | None        # (m,) the chosen metric on the validation rows

    def subset(self, members: np.ndarray) -> "EpochScores":
        """The scores of these members only."""
        return EpochScores(self.epoch, self.train_loss[members],
                           None if self.val_loss is None else self.val_loss[members],
                           None if self.val_metric is None else self.val_metric[members])
