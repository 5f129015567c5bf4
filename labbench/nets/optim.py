"""Optimisers working in place on the flat parameter block of a whole stack.

All parameters of all stacked members live in one (m, P) array (see ``layout.py``), so an update
is a dozen numpy calls whatever the depth of the network. Update rules follow scikit-learn's
``neural_network/_stochastic_optimizers.py`` so runs can be compared step for step:

* sgd:      p -= lr · g
* momentum: v = μ v - lr · g ; p += v                        (heavy ball, not Nesterov)
* adam:     m = β1 m + (1-β1) g ; v = β2 v + (1-β2) g² ;
            p -= lr · sqrt(1-β2^t) / (1-β1^t) · m / (sqrt(v) + ε)   (β1 .9, β2 .999, ε 1e-8)

``step(grad, scale, active)`` receives the raw gradient sum of the batch (overwritten) and
``scale`` = 1 / rows of the batch, a float or an (m, 1) array when members had different row
counts. ``active`` (bool (m,), or None for all) marks members that had rows at all: the others
keep their parameters, optimiser state and step count unchanged.

To add an optimiser: subclass ``Optimizer``, implement ``_update`` and ``_state`` and register it in
``OPTIMIZERS`` (and its name in ``config.OPTIMIZER_NAMES``).
"""

from __future__ import annotations

import math

import numpy as np

from labbench.nets.config import NetConfig


class Optimizer:
    def __init__(self, params: np.ndarray, config: NetConfig):
        self.params = params
        self.lr = float(config.learning_rate)
        self._tmp = np.empty_like(params)

    def _state(self) -> list[np.ndarray]:
        return [self.params]

    def _update(self, grad: np.ndarray, scale, active: np.ndarray | None) -> None:
        raise NotImplementedError

    def step(self, grad: np.ndarray, scale, active: np.ndarray | None = None) -> None:
        if active is None:
            self._update(grad, scale, None)
            return
        idle = ~active
        saved = [a[idle].copy() for a in self._state()]
        self._update(grad, scale, active)
        for array, keep in zip(self._state(), saved):
            array[idle] = keep


class SGD(Optimizer):
    def _update(self, grad, scale, active):
        np.multiply(grad, scale * self.lr, out=grad)
        np.subtract(self.params, grad, out=self.params)


class Momentum(Optimizer):
    def __init__(self, params, config):
        super().__init__(params, config)
        self.mu = float(config.momentum)
        self.velocity = np.zeros_like(params)

    def _state(self):
        return [self.params, self.velocity]

    def _update(self, grad, scale, active):
        v = self.velocity
        np.multiply(v, self.mu, out=v)
        np.multiply(grad, scale * self.lr, out=grad)
        np.subtract(v, grad, out=v)
        np.add(self.params, v, out=self.params)


class Adam(Optimizer):
    beta1 = 0.9
    beta2 = 0.999
    eps = 1e-8

    def __init__(self, params, config):
        super().__init__(params, config)
        self.m1 = np.zeros_like(params)
        self.v = np.zeros_like(params)
        self.t = np.zeros(params.shape[0], dtype=np.int64)   # steps taken, per member
        self._uniform_t: int | None = 0                       # all members at the same t

    def _state(self):
        return [self.params, self.m1, self.v]

    def _rate(self, active):
        b1, b2 = self.beta1, self.beta2
        if active is None and self._uniform_t is not None:
            self._uniform_t += 1
            self.t += 1
            t = self._uniform_t
            return self.lr * math.sqrt(1.0 - b2**t) / (1.0 - b1**t)
        self.t += 1 if active is None else active
        first = self.t[0]
        self._uniform_t = int(first) if np.all(self.t == first) else None
        t = np.maximum(self.t, 1).astype(np.float64)
        rate = self.lr * np.sqrt(1.0 - b2**t) / (1.0 - b1**t)
        return rate.astype(self.params.dtype).reshape(-1, 1)

    def _update(self, grad, scale, active):
        b1, b2 = self.beta1, self.beta2
        m1, v, tmp, p = self.m1, self.v, self._tmp, self.params
        rate = self._rate(active)
        np.multiply(m1, b1, out=m1)
        np.multiply(grad, scale * (1.0 - b1), out=tmp)
        np.add(m1, tmp, out=m1)
        np.multiply(v, b2, out=v)
        np.multiply(grad, grad, out=grad)
        np.multiply(grad, (scale * scale) * (1.0 - b2), out=grad)
        np.add(v, grad, out=v)
        np.sqrt(v, out=tmp)
        np.add(tmp, self.eps, out=tmp)
        np.divide(m1, tmp, out=tmp)
        np.multiply(tmp, rate, out=tmp)
        np.subtract(p, tmp, out=p)


OPTIMIZERS: dict[str, type[Optimizer]] = {"sgd": SGD, "momentum": Momentum, "adam": Adam}


def make_optimizer(config: NetConfig, params: np.ndarray) -> Optimizer:
    return OPTIMIZERS[config.optimizer](params, config)
