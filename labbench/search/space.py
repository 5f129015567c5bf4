"""The search-space model: which network settings are fixed and which are searched, and how.

Each known setting (``SETTINGS``) is either ``Fixed(value)`` or searched as ``FloatRange``,
``IntRange`` or ``Choices``. The space turns an Optuna trial into a resolved settings dict::

    {"hidden": [64, 32], "activation": "relu", "optimizer": "adam", "learning_rate": 0.001,
     "momentum": 0.9, "l2": 0.0, "batch_size": 64, "epochs": 30, "patience": 10, "init": "auto"}

Settings dicts stored by older versions lack ``patience`` and ``init``; readers take the defaults
(``SETTINGS[name].default``).

Conditional Optuna parameters: the units of hidden layer i are the parameter ``units_i`` and exist
only when that layer exists; ``momentum`` is sampled only when the optimizer is "momentum"; an L2
range with ``off = true`` first samples ``l2_on`` and samples ``l2`` only when it is on.

Validation happens once, here, at the edge: every problem is a one-line ``SpecError`` naming the
file, the dotted key, the value and what is allowed.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Callable, Mapping

from labbench.search.settings import (MAX_LAYERS, SETTINGS, SETTINGS_KEYS, Choices, Fixed,
                                      FloatRange, IntRange, Setting, SettingInfo, parse_setting,
                                      show, spec_error)

__all__ = ["SearchSpace", "Fixed", "FloatRange", "IntRange", "Choices", "Setting", "SettingInfo",
           "SETTINGS", "SETTINGS_KEYS", "MAX_LAYERS", "settings_to_config", "show", "spec_error"]

L2_SWITCH = "l2_on"
GRID_MAX_VALUES = 100          # an integer range longer than this is refused by grid()


# --------------------------------------------------------------------------------------------
# the space


@dataclass(frozen=True)
class SearchSpace:
    """Every known setting, fixed or searched. Build with ``from_dict``; settings left out get
    their defaults (fixed)."""

    entries: Mapping[str, Setting] = field(default_factory=dict)
    source: str | None = field(default=None, compare=False)

    # ---- building and writing

    @classmethod
    def from_dict(cls, d: Mapping[str, Any] | None, source: str | None = None) -> "SearchSpace":
        d = dict(d or {})
        unknown = [k for k in d if k not in SETTINGS]
        if unknown:
            raise spec_error(source, f"space.{unknown[0]}", "unknown setting; known settings are "
                             + ", ".join(SETTINGS))
        entries = {name: (parse_setting(info, d[name], source) if name in d else Fixed(info.default))
                   for name, info in SETTINGS.items()}
        space = cls(entries, source)
        space._check_together()
        return space

    @classmethod
    def default(cls) -> "SearchSpace":
        return cls.from_dict({})

    def to_dict(self) -> dict[str, Any]:
        """TOML-ready: bare values for fixed settings, inline tables for searched ones."""
        out: dict[str, Any] = {}
        for name, s in self.entries.items():
            if isinstance(s, Fixed):
                out[name] = list(s.value) if isinstance(s.value, tuple) else s.value
            elif isinstance(s, Choices):
                out[name] = {"choices": list(s.values)}
            else:
                item: dict[str, Any] = {"low": s.low, "high": s.high}
                if s.log:
                    item["log"] = True
                if isinstance(s, IntRange) and s.step != 1:
                    item["step"] = s.step
                if isinstance(s, FloatRange) and s.off:
                    item["off"] = True
                out[name] = item
        return out

    def with_setting(self, name: str, raw: Any) -> "SearchSpace":
        """A copy with one setting replaced (raw TOML-style value), validated as a whole."""
        d = self.to_dict()
        d[name] = raw
        return SearchSpace.from_dict(d, self.source)

    def fixed_at(self, settings: Mapping[str, Any]) -> "SearchSpace":
        """Every setting fixed to the given resolved settings (e.g. the winner's)."""
        hidden = [int(u) for u in settings["hidden"]]
        d = {
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
        return SearchSpace.from_dict(d, self.source)

    def __getitem__(self, name: str) -> Setting:
        return self.entries[name]

    def _check_together(self) -> None:
        e, src = self.entries, self.source
        layers, units = e["hidden_layers"], e["hidden_units"]
        if isinstance(units, Fixed) and isinstance(units.value, tuple):
            if not isinstance(layers, Fixed) or layers.value != len(units.value):
                raise spec_error(src, "space.hidden_units", f"a list of {len(units.value)} unit counts "
                                 f"needs hidden_layers = {len(units.value)} (fixed); write one number "
                                 "or a range to use the same rule for every layer")
        if self.searched("hidden_units") and self._max_layers() == 0:
            raise spec_error(src, "space.hidden_units", "is searched but hidden_layers is 0; fix it "
                             "to a number or allow hidden_layers above 0")
        if self.searched("momentum") and "momentum" not in self._values("optimizer"):
            raise spec_error(src, "space.momentum", 'is searched but optimizer can never be "momentum"; '
                             'fix momentum to a number or add "momentum" to the optimizer choices')

    # ---- questions the window and the runner ask

    def searched(self, name: str) -> bool:
        return not isinstance(self.entries[name], Fixed)

    def _values(self, name: str) -> tuple:
        s = self.entries[name]
        if isinstance(s, Fixed):
            return (s.value,)
        if isinstance(s, Choices):
            return s.values
        return tuple(range(s.low, s.high + 1, s.step)) if isinstance(s, IntRange) else ()

    def _max_layers(self) -> int:
        return max(self._values("hidden_layers"))

    def distributions(self) -> dict[str, Any]:
        """Optuna distribution of every parameter a trial may sample, in display order."""
        from optuna.distributions import (CategoricalDistribution, FloatDistribution,
                                          IntDistribution)

        def dist(s: Setting):
            if isinstance(s, FloatRange):
                return FloatDistribution(s.low, s.high, log=s.log)
            if isinstance(s, IntRange):
                return IntDistribution(s.low, s.high, log=s.log, step=s.step)
            return CategoricalDistribution(list(s.values))

        out: dict[str, Any] = {}
        for name in SETTINGS:
            s = self.entries[name]
            if isinstance(s, Fixed):
                continue
            if name == "hidden_units":
                for i in range(1, self._max_layers() + 1):
                    out[f"units_{i}"] = dist(s)
            elif isinstance(s, FloatRange) and s.off:
                out[L2_SWITCH] = CategoricalDistribution([True, False])
                out[name] = dist(s)
            else:
                out[name] = dist(s)
        return out

    def searched_params(self) -> list[str]:
        """Optuna parameter names a trial may sample (some only conditionally)."""
        return list(self.distributions())

    def log_scaled_params(self) -> list[str]:
        return [n for n, d in self.distributions().items() if getattr(d, "log", False)]

    def grid(self) -> dict[str, list]:
        """Parameter -> values for Optuna's grid sampler. Continuous ranges cannot be gridded."""
        out: dict[str, list] = {}
        for param, s in self._param_settings().items():
            name = _setting_of(param)
            if param == L2_SWITCH:
                out[param] = [True, False]
            elif isinstance(s, FloatRange):
                raise spec_error(self.source, f"space.{name}", "the grid sampler cannot search a "
                                 "continuous range; write { choices = [...] } or use another sampler")
            elif isinstance(s, IntRange):
                values = list(range(s.low, s.high + 1, s.step))
                if len(values) > GRID_MAX_VALUES:
                    raise spec_error(self.source, f"space.{name}", f"the grid sampler would try "
                                     f"{len(values)} values; write {{ choices = [...] }} with a few")
                out[param] = values
            else:
                out[param] = list(s.values)
        return out

    def _param_settings(self) -> dict[str, Setting]:
        out: dict[str, Setting] = {}
        for param in self.distributions():
            s = self.entries[_setting_of(param)]
            out[param] = FloatRange(s.low, s.high, s.log) if isinstance(s, FloatRange) else s
        return out

    # ---- sampling

    def suggest(self, trial: Any) -> dict[str, Any]:
        """Sample one trial's settings through Optuna's ``trial.suggest_*`` calls."""

        def get(param: str, s: Setting) -> Any:
            if param == L2_SWITCH:
                return trial.suggest_categorical(param, [True, False])
            if isinstance(s, FloatRange):
                return trial.suggest_float(param, s.low, s.high, log=s.log)
            if isinstance(s, IntRange):
                return trial.suggest_int(param, s.low, s.high, step=s.step, log=s.log)
            return trial.suggest_categorical(param, list(s.values))

        return self._resolve(get)

    def settings_from_params(self, params: Mapping[str, Any]) -> dict[str, Any]:
        """The settings a finished trial trained with, from its Optuna params."""

        def get(param: str, s: Setting) -> Any:
            if param not in params:
                raise spec_error(self.source, "space", f"the trial has no value for {param}; it was "
                                 "made with a different search space")
            v = params[param]
            if param == L2_SWITCH:
                return bool(v)
            if isinstance(s, IntRange):
                return int(v)
            if isinstance(s, FloatRange):
                return float(v)
            return v

        return self._resolve(get)

    def _resolve(self, get: Callable[[str, Setting], Any]) -> dict[str, Any]:
        e = self.entries

        def val(name: str) -> Any:
            s = e[name]
            return s.value if isinstance(s, Fixed) else get(name, s)

        layers = int(val("hidden_layers"))
        units = e["hidden_units"]
        if isinstance(units, Fixed):
            u = units.value
            hidden = [int(x) for x in u] if isinstance(u, tuple) else [int(u)] * layers
        else:
            hidden = [int(get(f"units_{i}", units)) for i in range(1, layers + 1)]
        activation = str(val("activation"))
        optimizer = str(val("optimizer"))
        mom = e["momentum"]
        if isinstance(mom, Fixed):
            momentum = mom.value
        elif optimizer == "momentum":
            momentum = get("momentum", mom)
        else:
            momentum = SETTINGS["momentum"].default
        l2s = e["l2"]
        if isinstance(l2s, FloatRange) and l2s.off:
            l2 = get("l2", FloatRange(l2s.low, l2s.high, l2s.log)) if get(L2_SWITCH, l2s) else 0.0
        else:
            l2 = val("l2")
        return {
            "hidden": hidden,
            "activation": activation,
            "optimizer": optimizer,
            "learning_rate": float(val("learning_rate")),
            "momentum": float(momentum),
            "l2": float(l2),
            "batch_size": int(val("batch_size")),
            "epochs": int(val("epochs")),
            "patience": int(val("patience")),
            "init": str(val("init")),
        }


def _setting_of(param: str) -> str:
    if param.startswith("units_"):
        return "hidden_units"
    return "l2" if param == L2_SWITCH else param


def settings_to_config(settings: Mapping[str, Any], dtype: str = "float32"):
    """The network configuration (``labbench.nets.NetConfig``) for resolved settings."""
    from labbench.nets import NetConfig

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
