"""The model-family interface: what one kind of model tells the rest of labbench.

A family is one module holding one ``Family`` subclass. It declares, once:

* ``settings``: its table of ``SettingInfo`` (kind, range, default, help, condition). The spec
  reader (``[space]``), the window's editor, the error messages and the docs table read it;
* ``default_space``: the searched space a spec without ``[space]`` gets (spec shape);
* ``needs_target``: whether the data needs a target column (a supervised family);
* ``metrics(task)``: the objectives it can be scored by (names of ``labbench.nets.metrics``);
* ``stack(...)``: how it trains a stack of members (folds, or seeds × folds) on prepared arrays
  and reports per-epoch values (a ``Training``);
* its trained-model record (what ``Training.record(member)`` returns, kept in
  ``labbench.model.TrainedModel.weights``): an object with ``forward(X)`` and a ``family`` name;
* how that record is exported: ``bundle_entries`` / ``from_bundle`` (the ``.npz`` bundle),
  ``numpy_source`` (the numpy-only script), ``onnx_body`` (the ONNX graph).

The search, the winner refit and the exporters talk to this interface only. The base class gives
the plain behaviour for a family whose settings are independent (each searched setting is one
parameter of the sampler); a family with linked settings overrides ``expand`` / ``resolve``.
"""

from __future__ import annotations

from typing import Any, Callable, Mapping, Protocol, Sequence

import numpy as np

from labbench.families.settings import (Choices, Fixed, FloatRange, Setting, SettingInfo,
                                        spec_error)

#: Every resolved settings dict holds ``epochs`` (the most epochs one trial trains: the runner's
#: progress and the pruner's warm-up read it); a family without an ``epochs`` setting trains this.
ONE_EPOCH = 1


class Training(Protocol):
    """A stack of members being trained (``labbench.nets.StackTrainer`` is one)."""

    best_epoch: np.ndarray                   # (m,) the epoch each member's kept state is from
    best_val_metric: np.ndarray | None       # (m,) the metric at that epoch (None: no val rows)

    def run(self, on_epoch: Callable[[Any], bool | None] | None = None) -> list:
        """Train; ``on_epoch(scores)`` gets a ``labbench.nets.EpochScores`` after each epoch
        (``epoch``, per-member ``train_loss``, ``val_loss``, ``val_metric``) and returning False
        stops after that epoch. Raises ``DivergenceError`` when training blows up."""

    def record(self, member: int) -> Any:
        """The trained-model record of one member (what a bundle stores)."""


def switch_param(name: str) -> str:
    """The sampler parameter that turns a ``can_be_off`` setting on or off (l2 -> "l2_on")."""
    return f"{name}_on"


class Family:
    """Base class of a model family; see the module docstring for what a subclass declares."""

    name: str = ""
    label: str = ""
    needs_target: bool = True
    settings: Mapping[str, SettingInfo] = {}
    default_space: Mapping[str, Any] = {}
    #: numpy-only source appended to the standalone prediction script; it must define
    #: ``FORWARD[<name>] = function(model, X)`` (the network's forward is built in).
    numpy_source: str = ""

    # ---- objectives

    def metrics(self, task: str) -> tuple[str, ...]:
        """Names of the metrics that can score this family on ``task`` (registry order)."""
        from labbench.nets.metrics import METRICS

        return tuple(n for n, info in METRICS.items() if task in info.tasks)

    def default_metric(self, task: str) -> str:
        from labbench.nets.metrics import default_metric

        return default_metric(task)

    # ---- the search space (labbench.search.space.SearchSpace asks these)

    def check_space(self, space: Any) -> None:
        """Raise a SpecError for settings that cannot go together. The base checks conditions:
        a searched setting whose ``when`` can never hold."""
        for name, info in self.settings.items():
            if info.when is None or not space.searched(name):
                continue
            other, values = info.when
            if not set(space.values_of(other)) & set(values):
                allowed = ", ".join(f'"{v}"' for v in values)
                raise spec_error(space.source, f"space.{name}", f"is searched but {other} can never "
                                 f"be {allowed}; fix {name} to a value or add {allowed} to the "
                                 f"{other} choices")

    def expand(self, name: str, setting: Setting, space: Any) -> dict[str, Setting]:
        """Sampler parameters of one searched setting (a ``can_be_off`` range adds its switch)."""
        if isinstance(setting, FloatRange) and setting.off:
            return {switch_param(name): Choices((True, False)),
                    name: FloatRange(setting.low, setting.high, setting.log)}
        return {name: setting}

    def resolve_one(self, space: Any, name: str, get: Callable[[str, Setting], Any],
                    resolved: Mapping[str, Any]) -> Any:
        """One setting's value for a trial: fixed, sampled, its default when its condition does
        not hold, or 0.0 when its switch is off."""
        s, info = space[name], self.settings[name]
        if isinstance(s, Fixed):
            return s.value
        if info.when is not None and resolved.get(info.when[0]) not in info.when[1]:
            return info.default
        if isinstance(s, FloatRange) and s.off:
            on = get(switch_param(name), Choices((True, False)))
            return get(name, FloatRange(s.low, s.high, s.log)) if on else 0.0
        return get(name, s)

    def resolve(self, space: Any, get: Callable[[str, Setting], Any]) -> dict[str, Any]:
        """The resolved settings dict of one trial, in table order (plus ``epochs``)."""
        out: dict[str, Any] = {}
        for name in self.settings:
            out[name] = self.resolve_one(space, name, get, out)
        out.setdefault("epochs", ONE_EPOCH)
        return out

    def fixed_dict(self, settings: Mapping[str, Any]) -> dict[str, Any]:
        """The spec-shaped ``[space]`` with every setting fixed at resolved ``settings``."""
        full = self.complete(settings)
        return {name: full[name] for name in self.settings}

    def complete(self, settings: Mapping[str, Any]) -> dict[str, Any]:
        """``settings`` with the defaults of settings it lacks (dicts stored by older versions)."""
        out = {name: info.default for name, info in self.settings.items()}
        out.update(settings)
        return out

    # ---- training

    def stack(self, settings: Mapping[str, Any], task: str, n_outputs: int,
              X_train: Sequence[np.ndarray], y_train: Sequence[np.ndarray],
              X_val: Sequence[np.ndarray] | None = None, y_val: Sequence[np.ndarray] | None = None,
              *, seeds: Sequence[int], metric: str | None = None,
              target_inverse: Sequence[Any] | None = None, groups: Sequence[int] | None = None,
              dtype: str = "float32", epochs: int | None = None) -> Training:
        """A ``Training`` of one member per (X, y) pair, with the same arguments as
        ``labbench.nets.StackTrainer``; ``epochs`` overrides the settings' most epochs (refit)."""
        raise NotImplementedError

    # ---- configurations trained together (labbench.search.together)

    #: The settings that make a network's shape: configurations equal in all of them can train
    #: as one stack. Empty: the family trains one configuration per stack.
    shape_settings: tuple[str, ...] = ()

    def together_key(self, settings: Mapping[str, Any]) -> Any:
        """A hashable key equal for configurations that can train as one stack, or None when
        this one trains alone (the base class: always alone)."""
        return None

    def stack_together(self, settings: Sequence[Mapping[str, Any]], task: str, n_outputs: int,
                       X_train: Sequence[np.ndarray], y_train: Sequence[np.ndarray],
                       X_val: Sequence[np.ndarray], y_val: Sequence[np.ndarray], *,
                       seeds: Sequence[int], metric: str | None = None,
                       target_inverse: Sequence[Any] | None = None,
                       dtype: str = "float32") -> Training:
        """One ``Training`` of several configurations with equal ``together_key``: the k given
        folds once per configuration (members ``c·k … c·k + k - 1``, group label ``c``), each
        configuration's folds with these k seeds. The training has ``drop_groups`` and its
        ``run`` takes ``on_diverged`` (see ``labbench.nets.StackTrainer``)."""
        raise NotImplementedError(f"the {self.name} family trains one configuration at a time")

    # ---- export

    def bundle_entries(self, record: Any) -> tuple[dict[str, np.ndarray], dict[str, Any]]:
        """(arrays, metadata entries) of the record for the ``.npz`` bundle; plain arrays only."""
        raise NotImplementedError

    def from_bundle(self, arrays: Mapping[str, np.ndarray], meta: Mapping[str, Any], name: str,
                    n_inputs: int, n_outputs: int) -> Any:
        """The record rebuilt from a bundle, checked; ``BundleError`` (naming ``name``) else."""
        raise NotImplementedError

    def onnx_body(self, record: Any, h: str, n_inputs: int, node: Callable, const: Callable,
                  net_type: int, task: str) -> str:
        """ONNX nodes from the scaled inputs ``h`` [N, n_inputs] to the record's output [N, outputs]
        (regression value in training units, P(second class), or class probabilities);
        returns the output's tensor name. ``node(op, inputs, output, **attrs)`` adds a node,
        ``const(name, array)`` an initializer."""
        from labbench.errors import LabbenchError

        raise LabbenchError(f"the {self.name} family has no ONNX export")

    def onnx_dtype(self, record: Any) -> np.dtype:
        """The dtype the record computes in (ONNX casts the scaled inputs to it)."""
        return np.dtype(np.float64)
