"""Optimisers working in place on the flat parameter block of a whole stack.

All parameters of all stacked members live in one (m, P) array (see ``layout.py``), so an update
is a dozen numpy calls whatever the depth of the network. Update rules follow scikit-learn's
``neural_network/_stochastic_optimizers.py`` so runs can be compared step for step:

* sgd:      p -= lr · g
* momentum: v = μ v - lr · g ; p += v                        (heavy ball, not Nesterov)
* adam:     m = β1 m + (1-β1) g ; v = β2 v + (1-β2) g² ;
            p -= lr · sqrt(1-β2^t) / (1-β1^t) · m / (sqrt(v) + ε)   (β1 .9, β2 .999, ε 1e-8)
            (v is kept rescaled by a constant, which saves a call; see ``Adam``)

Like the activations, an optimiser describes its update as a list of ``(numpy function,
arguments)`` steps (``steps(grad, scale, j)``) that the trainer builds once per batch position ``j``
of an epoch and runs every epoch. ``grad`` holds the raw gradient sum of the batch (it is
overwritten); ``scale`` = 1 / rows of the batch, a float, or an (m, 1) array when members had
different row counts. ``active`` (bool (steps, m)) tells which members have rows at each batch
position: a member without rows keeps its parameters and state (the trainer saves and restores
them) and an Adam member counts only the steps it took. ``begin_epoch()`` runs before each epoch.

Subnormal state. A weight whose gradient is exactly zero (a relu unit that no row activates,
without L2) has its momentum or first moment multiplied by β1 or μ every step. It falls into
the subnormal range below ``np.finfo(dtype).tiny``, where x·0.9 rounds back to x near the
bottom of that range, so it stays there for good. Arithmetic on subnormal numbers takes a slow
path on x86 CPUs: measured, 5 folds with about 2 in 3 relu units dead trained 1.3–1.5 × slower.
``flush_steps()`` sets to zero every state value below ``tiny / eps`` (1e-31 in float32, 1e-292
in float64), long before it gets there. That changes no parameter: in float32 such a first
moment moves a weight by less than lr · 1e-23 (the denominator is at least κ ε), under half a
unit in the last place of any weight larger than lr · 2e-16; such a velocity is under half a unit
of any weight larger than 2e-24; and a second moment that small is lost next to κ ε already. The
trainer runs these steps every ``StackTrainer.FLUSH_EVERY`` batches (a test compares the
parameters with and without, bit for bit).

To add an optimiser: subclass ``Optimizer``, implement ``steps`` (and ``state``/``begin_epoch`` if
it keeps state, ``decaying`` if that state shrinks geometrically under a zero gradient), register
it in ``OPTIMIZERS`` (``config.OPTIMIZER_NAMES`` and the search's choices follow).
"""

from __future__ import annotations

import math

import numpy as np

from typing import TYPE_CHECKING

from labbench.nets.activations import Steps

if TYPE_CHECKING:       # config reads OPTIMIZERS' names, so the import runs one way only
    from labbench.nets.config import NetConfig


class Optimizer:
    def __init__(self, params: np.ndarray, config: NetConfig, active: np.ndarray,
                 learning_rate: np.ndarray | None = None, momentum: np.ndarray | None = None):
        self.params = params
        # one rate per member (stacked configurations) as an (m, 1) column, else the config's
        self.lr = float(config.learning_rate) if learning_rate is None else \
            np.asarray(learning_rate, dtype=np.float64).reshape(-1, 1)
        self._momentum = momentum
        self.active = np.asarray(active, dtype=bool)     # (steps per epoch, m)
        self._tmp = np.empty_like(params)

    def state(self) -> list[np.ndarray]:
        """Arrays whose rows belong to one member each (kept as they are for idle members)."""
        return [self.params]

    def begin_epoch(self) -> None:
        return None

    def take_rows(self, old: "Optimizer", members: np.ndarray) -> None:
        """Continue from ``old``'s state for these of its members (the trainer dropped others)."""
        for new, prev in zip(self.state()[1:], old.state()[1:]):
            new[...] = prev[members]

    def steps(self, grad: np.ndarray, scale, j: int) -> Steps:
        raise NotImplementedError

    def decaying(self) -> list[tuple[np.ndarray, bool]]:
        """State arrays multiplied by a factor below 1 at each step where the gradient is zero,
        each with whether its values are never negative (no absolute value needed)."""
        return []

    def flush_steps(self) -> Steps:
        """Steps setting to zero the values of the decaying state below ``tiny / eps`` (see the
        module's text): they would otherwise end up subnormal, which makes every step slower."""
        arrays = self.decaying()
        if not arrays:
            return []
        info = np.finfo(self.params.dtype)
        floor = float(info.tiny / info.eps)
        below = np.empty(self.params.shape, dtype=bool)
        steps: Steps = []
        for array, nonnegative in arrays:
            if nonnegative:
                steps.append((np.less, (array, floor, below)))
            else:
                steps += [(np.abs, (array, self._tmp)), (np.less, (self._tmp, floor, below))]
            steps.append((np.copyto, (array, 0, "same_kind", below)))
        return steps

    def _coef(self, value):
        return value if np.isscalar(value) else np.asarray(value, dtype=self.params.dtype)


class SGD(Optimizer):
    def steps(self, grad, scale, j):
        return [(np.multiply, (grad, self._coef(scale * self.lr), grad)),
                (np.subtract, (self.params, grad, self.params))]


class Momentum(Optimizer):
    def __init__(self, params, config, active, **per_member):
        super().__init__(params, config, active, **per_member)
        self.mu = float(config.momentum) if self._momentum is None else \
            np.asarray(self._momentum, dtype=params.dtype).reshape(-1, 1)
        self.velocity = np.zeros_like(params)

    def state(self):
        return [self.params, self.velocity]

    def decaying(self):
        return [(self.velocity, False)]

    def steps(self, grad, scale, j):
        v = self.velocity
        return [(np.multiply, (v, self.mu, v)),
                (np.multiply, (grad, self._coef(scale * self.lr), grad)),
                (np.subtract, (v, grad, v)),
                (np.add, (self.params, v, self.params))]


class Adam(Optimizer):
    """Adam in eleven numpy calls per step instead of twelve, by one exact rescaling.

    With g0 = scale (1-β1) g (the term m grows by), the second moment is kept as
    V = v (1-β1)² / (1-β2), whose recursion is V = β2 V + g0²: the square of a term already at
    hand. Then sqrt(v) + ε = (sqrt(V) + κ ε) / κ with κ = (1-β1) / sqrt(1-β2), so the step is
    rate_t κ · m / (sqrt(V) + κ ε): scikit-learn's update up to rounding (tests compare the
    two to 1e-10). Measured: two moments in one (2, m, P) block, updated in one call each, were
    slower than these in-place calls on (m, P) arrays.
    """
    beta1 = 0.9
    beta2 = 0.999
    eps = 1e-8

    def __init__(self, params, config, active, **per_member):
        super().__init__(params, config, active, **per_member)
        self.m1 = np.zeros_like(params)
        self.v = np.zeros_like(params)              # holds V (see above)
        self._kappa = (1.0 - self.beta1) / math.sqrt(1.0 - self.beta2)   # a Python float: a numpy
        # float64 scalar would make numpy compute a float32 block in float64
        self.t = np.zeros(params.shape[0], dtype=np.int64)     # steps taken so far, per member
        per_rate = not np.isscalar(self.lr)
        width = 1 if self.active.all() and not per_rate else params.shape[0]
        self._rates = np.zeros((self.active.shape[0], width, 1), dtype=params.dtype)

    def state(self):
        return [self.params, self.m1, self.v]

    def decaying(self):
        return [(self.m1, False), (self.v, True)]

    def take_rows(self, old, members):
        super().take_rows(old, members)
        self.t = old.t[members].copy()

    def begin_epoch(self):
        # step count of each member at each batch position of this epoch -> bias-corrected rate
        t = self.t[None, :] + np.cumsum(self.active, axis=0)
        self.t = t[-1].copy()
        t = np.maximum(t[:, :self._rates.shape[1]], 1).astype(np.float64)
        lr = self.lr if np.isscalar(self.lr) else self.lr[:, 0]
        rates = lr * self._kappa * np.sqrt(1.0 - self.beta2**t) / (1.0 - self.beta1**t)
        self._rates[...] = rates[..., None]

    def steps(self, grad, scale, j):
        m1, v, tmp, p = self.m1, self.v, self._tmp, self.params
        return [
            (np.multiply, (m1, self.beta1, m1)),
            (np.multiply, (grad, self._coef(scale * (1.0 - self.beta1)), tmp)),
            (np.add, (m1, tmp, m1)),
            (np.multiply, (v, self.beta2, v)),
            (np.multiply, (tmp, tmp, tmp)),
            (np.add, (v, tmp, v)),
            (np.sqrt, (v, tmp)),
            (np.add, (tmp, self._kappa * self.eps, tmp)),
            (np.divide, (m1, tmp, tmp)),
            (np.multiply, (tmp, self._rates[j], tmp)),
            (np.subtract, (p, tmp, p)),
        ]


OPTIMIZERS: dict[str, type[Optimizer]] = {"sgd": SGD, "momentum": Momentum, "adam": Adam}


def make_optimizer(config: NetConfig, params: np.ndarray, active: np.ndarray, *,
                   learning_rate: np.ndarray | None = None,
                   momentum: np.ndarray | None = None) -> Optimizer:
    """``learning_rate`` / ``momentum``: one value per member (stacked configurations), or None
    for the config's."""
    return OPTIMIZERS[config.optimizer](params, config, active, learning_rate=learning_rate,
                                        momentum=momentum)
