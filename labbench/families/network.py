"""The multilayer network family: settings table, search-space rules and training.

Its record is ``labbench.nets.NetWeights``; its exporters live in
``labbench.families.network_export``. Resolved settings look like::

    {"hidden": [64, 32], "activation": "relu", "optimizer": "adam", "learning_rate": 0.001,
     "momentum": 0.9, "l2": 0.0, "batch_size": 64, "epochs": 30, "patience": 10, "init": "auto"}

Settings dicts stored by older versions lack ``patience`` and ``init``; readers take the defaults.

Sampler parameters: the units of hidden layer i are the parameter ``units_i`` and exist only when
that layer exists; ``momentum`` is sampled only when the optimizer is "momentum"; an L2 range
with ``off = true`` first samples ``l2_on`` and samples ``l2`` only when it is on.
"""

from __future__ import annotations

import dataclasses
from typing import Any, Callable, Mapping

from labbench.families import network_export
from labbench.families.base import Family
from labbench.families.settings import Fixed, Setting, SettingInfo, spec_error
from labbench.nets import NetConfig, StackTrainer
from labbench.nets.config import (ACTIVATION_NAMES, INIT_NAMES, MAX_HIDDEN_LAYERS, MOMENTUM_MAX,
                                  OPTIMIZER_NAMES)

MAX_LAYERS = MAX_HIDDEN_LAYERS

SETTINGS: dict[str, SettingInfo] = {
    s.name: s
    for s in (
        SettingInfo("learning_rate", "Learning rate", "float", 1e-3,
                    "Step size of the optimizer; too large diverges, too small learns slowly.",
                    low=1e-8, high=10.0),
        SettingInfo("hidden_layers", "Hidden layers", "int", 1,
                    "Number of hidden layers (0 gives a linear or logistic model).",
                    low=0, high=MAX_LAYERS),
        SettingInfo("hidden_units", "Units per layer", "int", 64,
                    "Neurons in each hidden layer; a range is sampled separately for every layer.",
                    low=1, high=4096, per_layer=True),
        SettingInfo("epochs", "Epochs", "int", 200,
                    "The most full passes over the training rows of each fold; patience may stop sooner.",
                    low=1, high=100_000),
        SettingInfo("patience", "Patience", "int", 10,
                    "Epochs without a better mean validation loss of the folds before training stops; "
                    "the weights of the best epoch are kept and the refit trains that many epochs. "
                    "0 turns early stopping off.",
                    low=0, high=100_000),
        SettingInfo("batch_size", "Batch size", "int", 64,
                    "Rows per gradient step; smaller batches give noisier, more frequent steps.",
                    low=1, high=1_000_000),
        SettingInfo("activation", "Activation", "choice", "relu",
                    "Non-linearity applied after every hidden layer.",
                    options=ACTIVATION_NAMES),
        SettingInfo("optimizer", "Optimizer", "choice", "adam",
                    "How the weights are updated from the gradients.",
                    options=OPTIMIZER_NAMES),
        SettingInfo("momentum", "Momentum", "float", 0.9,
                    "Share of the previous step kept in the next one (used by the momentum optimizer only).",
                    low=0.0, high=MOMENTUM_MAX, when=("optimizer", ("momentum",))),
        SettingInfo("l2", "L2 penalty", "float", 0.0,
                    "Weight-decay strength that pulls weights towards zero; 0 turns it off.",
                    low=0.0, high=1000.0, can_be_off=True),
        SettingInfo("init", "Initial weights", "choice", "auto",
                    "How the starting weights are drawn: auto (chosen by measurement: Glorot for relu "
                    "and tanh, He for sigmoid), glorot (uniform) or he (normal).",
                    options=INIT_NAMES),
    )
}

#: The keys of a resolved settings dict, in order.
SETTINGS_KEYS = ("hidden", "activation", "optimizer", "learning_rate", "momentum", "l2",
                 "batch_size", "epochs", "patience", "init")

#: The searched space of a spec without ``[space]`` (see labbench.search.defaults for why).
DEFAULT_SPACE: dict[str, Any] = {
    "learning_rate": {"low": 1e-4, "high": 0.1, "log": True},
    "hidden_layers": {"low": 1, "high": 2},
    "hidden_units": {"low": 16, "high": 256, "log": True},
    "epochs": 200,
    "batch_size": {"choices": [32, 64, 128]},
    "activation": {"choices": ["relu", "tanh"]},
    "optimizer": "adam",
    "l2": {"low": 1e-6, "high": 1e-2, "log": True, "off": True},
}


def settings_to_config(settings: Mapping[str, Any], dtype: str = "float32") -> NetConfig:
    """The network configuration (``labbench.nets.NetConfig``) for resolved settings."""
    return NetConfig(
        hidden=tuple(int(u) for u in settings["hidden"]),
        activation=str(settings["activation"]),
        optimizer=str(settings["optimizer"]),
        learning_rate=float(settings["learning_rate"]),
        momentum=float(settings["momentum"]),
        l2=float(settings["l2"]),
        batch_size=int(settings["batch_size"]),
        epochs=int(settings["epochs"]),
        patience=int(settings.get("patience", SETTINGS["patience"].default)),
        init=str(settings.get("init", SETTINGS["init"].default)),
        dtype=dtype,
    )


class NetworkFamily(Family):
    name = "network"
    label = "Multilayer network"
    needs_target = True
    settings = SETTINGS
    default_space = DEFAULT_SPACE

    # ---- the search space

    def check_space(self, space: Any) -> None:
        e, src = space.entries, space.source
        layers, units = e["hidden_layers"], e["hidden_units"]
        if isinstance(units, Fixed) and isinstance(units.value, tuple):
            if not isinstance(layers, Fixed) or layers.value != len(units.value):
                raise spec_error(src, "space.hidden_units", f"a list of {len(units.value)} unit counts "
                                 f"needs hidden_layers = {len(units.value)} (fixed); write one number "
                                 "or a range to use the same rule for every layer")
        if space.searched("hidden_units") and max(space.values_of("hidden_layers")) == 0:
            raise spec_error(src, "space.hidden_units", "is searched but hidden_layers is 0; fix it "
                             "to a number or allow hidden_layers above 0")
        super().check_space(space)

    def expand(self, name: str, setting: Setting, space: Any) -> dict[str, Setting]:
        if name == "hidden_units":
            return {f"units_{i}": setting
                    for i in range(1, max(space.values_of("hidden_layers")) + 1)}
        return super().expand(name, setting, space)

    def resolve(self, space: Any, get: Callable[[str, Setting], Any]) -> dict[str, Any]:
        # The order of the sampler calls is kept as it always was (a seeded search repeats).
        got: dict[str, Any] = {}

        def val(name: str) -> Any:
            got[name] = self.resolve_one(space, name, get, got)
            return got[name]

        layers = int(val("hidden_layers"))
        units = space["hidden_units"]
        if isinstance(units, Fixed):
            u = units.value
            hidden = [int(x) for x in u] if isinstance(u, tuple) else [int(u)] * layers
        else:
            hidden = [int(get(f"units_{i}", units)) for i in range(1, layers + 1)]
        activation, optimizer = str(val("activation")), str(val("optimizer"))
        momentum, l2 = float(val("momentum")), float(val("l2"))
        return {
            "hidden": hidden, "activation": activation, "optimizer": optimizer,
            "learning_rate": float(val("learning_rate")), "momentum": momentum, "l2": l2,
            "batch_size": int(val("batch_size")), "epochs": int(val("epochs")),
            "patience": int(val("patience")), "init": str(val("init")),
        }

    def fixed_dict(self, settings: Mapping[str, Any]) -> dict[str, Any]:
        hidden = [int(u) for u in settings["hidden"]]
        return {
            "learning_rate": float(settings["learning_rate"]),
            "hidden_layers": len(hidden),
            "hidden_units": hidden,
            "epochs": int(settings["epochs"]),
            "batch_size": int(settings["batch_size"]),
            "activation": str(settings["activation"]),
            "optimizer": str(settings["optimizer"]),
            "momentum": float(settings["momentum"]),
            "l2": float(settings["l2"]),
            "patience": int(settings.get("patience", SETTINGS["patience"].default)),
            "init": str(settings.get("init", SETTINGS["init"].default)),
        }

    def complete(self, settings: Mapping[str, Any]) -> dict[str, Any]:
        out = dict(settings)
        for key in ("patience", "init"):
            out.setdefault(key, SETTINGS[key].default)
        return out

    # ---- training

    def stack(self, settings, task, n_outputs, X_train, y_train, X_val=None, y_val=None, *,
              seeds, metric=None, target_inverse=None, groups=None, dtype="float32", epochs=None):
        config = settings_to_config(settings, dtype=dtype)
        if epochs is not None:
            config = dataclasses.replace(config, epochs=int(epochs))
        return _NetworkStack(config, task, n_outputs, X_train, y_train, X_val, y_val,
                             seeds=seeds, metric=metric, target_inverse=target_inverse,
                             groups=groups)

    # ---- configurations trained together: one shape, own learning rate, L2, momentum and seeds

    shape_settings = ("hidden_layers", "hidden_units", "activation", "optimizer", "batch_size",
                      "epochs", "patience", "init")

    def together_key(self, settings):
        full = self.complete(settings)
        return (tuple(int(u) for u in full["hidden"]), str(full["activation"]),
                str(full["optimizer"]), int(full["batch_size"]), int(full["epochs"]),
                int(full["patience"]), str(full["init"]))

    def stack_together(self, settings, task, n_outputs, X_train, y_train, X_val, y_val, *,
                       seeds, metric=None, target_inverse=None, dtype="float32"):
        keys = {self.together_key(s) for s in settings}
        if len(keys) != 1:
            raise ValueError("configurations trained together need one shape")
        config = settings_to_config(settings[0], dtype=dtype)
        k, n = len(X_train), len(settings)

        def each(values):
            return [v for _ in range(n) for v in values]

        def per(name):
            return [float(s[name]) for s in settings for _ in range(k)]

        return _NetworkStack(config, task, n_outputs, each(X_train), each(y_train), each(X_val),
                             each(y_val), seeds=each(seeds), metric=metric,
                             target_inverse=None if target_inverse is None else each(target_inverse),
                             groups=[c for c in range(n) for _ in range(k)],
                             learning_rate=per("learning_rate"), l2=per("l2"),
                             momentum=per("momentum"))

    # ---- export (labbench.families.network_export)

    def bundle_entries(self, record):
        return network_export.bundle_entries(record)

    def from_bundle(self, arrays, meta, name, n_inputs, n_outputs):
        return network_export.from_bundle(arrays, meta, name, n_inputs, n_outputs)

    def onnx_body(self, record, h, n_inputs, node, const, net_type, task):
        return network_export.onnx_body(record, h, node, const, task)

    def onnx_dtype(self, record):
        import numpy as np

        return np.asarray(record.layers[0][0]).dtype


class _NetworkStack(StackTrainer):
    """``StackTrainer`` as a family ``Training``: ``record(member)`` is its ``weights``."""

    def record(self, member: int):
        return self.weights(member)


FAMILY = NetworkFamily()
