"""The search-space model: which settings of a model family are fixed and which are searched.

Each setting of the family's table (``family.settings``; the network's is ``SETTINGS``) is either
``Fixed(value)`` or searched as ``FloatRange``, ``IntRange`` or ``Choices``. The space turns an
Optuna trial into the family's resolved settings dict (``family.resolve``; the network's shape is
described in ``labbench.families.network``). The family says how a searched setting becomes
sampler parameters (``family.expand``: the network's ``units_i``, ``l2_on``) and which settings
cannot go together (``family.check_space``).

Validation happens once, here, at the edge: every problem is a one-line ``SpecError`` naming the
file, the dotted key, the value and what is allowed.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping

from labbench.families import DEFAULT, get_family
from labbench.families.base import switch_param
from labbench.families.network import settings_to_config
from labbench.search.settings import (MAX_LAYERS, SETTINGS, SETTINGS_KEYS, Choices, Fixed,
                                      FloatRange, IntRange, Setting, SettingInfo, parse_setting,
                                      show, spec_error)

__all__ = ["SearchSpace", "Fixed", "FloatRange", "IntRange", "Choices", "Setting", "SettingInfo",
           "SETTINGS", "SETTINGS_KEYS", "MAX_LAYERS", "settings_to_config", "show", "spec_error"]

L2_SWITCH = switch_param("l2")
GRID_MAX_VALUES = 100          # an integer range longer than this is refused by grid()


# --------------------------------------------------------------------------------------------
# the space


@dataclass(frozen=True)
class SearchSpace:
    """Every setting of one family, fixed or searched. Build with ``from_dict``; settings left
    out get their defaults (fixed)."""

    entries: Mapping[str, Setting] = field(default_factory=dict)
    source: str | None = field(default=None, compare=False)
    family: str = DEFAULT

    # ---- building and writing

    @property
    def model(self):
        """The ``labbench.families.Family`` these settings belong to."""
        return get_family(self.family)

    @property
    def settings_table(self) -> Mapping[str, SettingInfo]:
        return self.model.settings

    @classmethod
    def from_dict(cls, d: Mapping[str, Any] | None, source: str | None = None,
                  family: str = DEFAULT) -> "SearchSpace":
        table = get_family(family, source).settings
        d = dict(d or {})
        unknown = [k for k in d if k not in table]
        if unknown:
            raise spec_error(source, f"space.{unknown[0]}", "unknown setting; known settings are "
                             + ", ".join(table))
        entries = {name: (parse_setting(info, d[name], source) if name in d else Fixed(info.default))
                   for name, info in table.items()}
        space = cls(entries, source, family)
        space.model.check_space(space)
        return space

    @classmethod
    def default(cls, family: str = DEFAULT) -> "SearchSpace":
        return cls.from_dict({}, family=family)

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
        return SearchSpace.from_dict(d, self.source, self.family)

    def fixed_at(self, settings: Mapping[str, Any]) -> "SearchSpace":
        """Every setting fixed to the given resolved settings (e.g. the winner's)."""
        return SearchSpace.from_dict(self.model.fixed_dict(settings), self.source, self.family)

    def __getitem__(self, name: str) -> Setting:
        return self.entries[name]

    def __contains__(self, name: str) -> bool:
        return name in self.entries

    # ---- questions the window and the runner ask

    def searched(self, name: str) -> bool:
        return not isinstance(self.entries[name], Fixed)

    def values_of(self, name: str) -> tuple:
        """Every value a setting can take (() for a continuous range)."""
        s = self.entries[name]
        if isinstance(s, Fixed):
            return (s.value,)
        if isinstance(s, Choices):
            return s.values
        return tuple(range(s.low, s.high + 1, s.step)) if isinstance(s, IntRange) else ()

    _values = values_of         # the name labbench.search.limits uses

    def _param_settings(self) -> dict[str, Setting]:
        """Sampler parameter -> its Setting (a switch is Choices((True, False))), display order."""
        out: dict[str, Setting] = {}
        model = self.model
        for name, s in self.entries.items():
            if not isinstance(s, Fixed):
                out.update(model.expand(name, s, self))
        return out

    def _owner(self, param: str) -> str:
        """The setting a sampler parameter belongs to (units_2 -> hidden_units, l2_on -> l2)."""
        if param in self.entries:
            return param
        model = self.model
        for name, s in self.entries.items():
            if not isinstance(s, Fixed) and param in model.expand(name, s, self):
                return name
        return param

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

        return {param: dist(s) for param, s in self._param_settings().items()}

    def searched_params(self) -> list[str]:
        """Optuna parameter names a trial may sample (some only conditionally)."""
        return list(self._param_settings())

    def log_scaled_params(self) -> list[str]:
        return [p for p, s in self._param_settings().items() if getattr(s, "log", False)]

    def grid(self) -> dict[str, list]:
        """Parameter -> values for Optuna's grid sampler. Continuous ranges cannot be gridded."""
        out: dict[str, list] = {}
        for param, s in self._param_settings().items():
            name = self._owner(param)
            if isinstance(s, FloatRange):
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

    # ---- sampling

    def suggest(self, trial: Any) -> dict[str, Any]:
        """Sample one trial's settings through Optuna's ``trial.suggest_*`` calls."""

        def get(param: str, s: Setting) -> Any:
            if isinstance(s, FloatRange):
                return trial.suggest_float(param, s.low, s.high, log=s.log)
            if isinstance(s, IntRange):
                return trial.suggest_int(param, s.low, s.high, step=s.step, log=s.log)
            return trial.suggest_categorical(param, list(s.values))

        return self.model.resolve(self, get)

    def settings_from_params(self, params: Mapping[str, Any]) -> dict[str, Any]:
        """The settings a finished trial trained with, from its Optuna params."""

        def get(param: str, s: Setting) -> Any:
            if param not in params:
                raise spec_error(self.source, "space", f"the trial has no value for {param}; it was "
                                 "made with a different search space")
            v = params[param]
            if isinstance(s, Choices) and s.values == (True, False):
                return bool(v)
            if isinstance(s, IntRange):
                return int(v)
            if isinstance(s, FloatRange):
                return float(v)
            return v

        return self.model.resolve(self, get)
