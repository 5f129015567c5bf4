"""The search-space model: validation, conditional parameters, grid, round trips."""

from __future__ import annotations

import optuna
import pytest

from labbench.errors import SpecError
from labbench.search.space import (SETTINGS, Choices, Fixed, FloatRange, IntRange, SearchSpace,
                                   settings_to_config)

optuna.logging.set_verbosity(optuna.logging.WARNING)

WIDE = {
    "learning_rate": {"low": 1e-4, "high": 0.3, "log": True},
    "hidden_layers": {"low": 0, "high": 3},
    "hidden_units": {"low": 8, "high": 256, "log": True},
    "epochs": {"low": 10, "high": 150, "step": 10},
    "batch_size": {"choices": [32, 64, 128]},
    "activation": {"choices": ["relu", "tanh", "sigmoid"]},
    "optimizer": {"choices": ["sgd", "momentum", "adam"]},
    "momentum": {"low": 0.5, "high": 0.99},
    "l2": {"low": 1e-6, "high": 1e-2, "log": True, "off": True},
}


def sample(space: SearchSpace, n: int, seed: int = 0):
    study = optuna.create_study(sampler=optuna.samplers.RandomSampler(seed=seed))
    out = []
    for _ in range(n):
        trial = study.ask()
        settings = space.suggest(trial)
        out.append((dict(trial.params), settings))
        study.tell(trial, 0.0)
    return study, out


def test_every_setting_has_a_default_and_help():
    space = SearchSpace.default()
    assert set(space.entries) == set(SETTINGS)
    assert all(isinstance(s, Fixed) for s in space.entries.values())
    for info in SETTINGS.values():
        assert info.help.endswith(".") and "\n" not in info.help


def test_conditional_units_momentum_and_l2():
    space = SearchSpace.from_dict(WIDE, "t.toml")
    _, drawn = sample(space, 120)
    seen_layers = set()
    for params, settings in drawn:
        layers = params["hidden_layers"]
        seen_layers.add(layers)
        # units_i exists exactly when layer i exists
        assert {k for k in params if k.startswith("units_")} == {f"units_{i}" for i in range(1, layers + 1)}
        assert settings["hidden"] == [params[f"units_{i}"] for i in range(1, layers + 1)]
        # momentum is sampled only for the momentum optimizer
        assert ("momentum" in params) == (params["optimizer"] == "momentum")
        # l2 is sampled only when switched on; off means 0.0
        assert ("l2" in params) == params["l2_on"]
        assert settings["l2"] == (params["l2"] if params["l2_on"] else 0.0)
        assert settings["epochs"] % 10 == 0
        assert space.settings_from_params(params) == settings
    assert seen_layers == {0, 1, 2, 3}


def test_searched_and_log_scaled_names():
    space = SearchSpace.from_dict(WIDE)
    assert space.searched_params() == ["learning_rate", "hidden_layers", "units_1", "units_2",
                                       "units_3", "epochs", "batch_size", "activation", "optimizer",
                                       "momentum", "l2_on", "l2"]
    assert space.log_scaled_params() == ["learning_rate", "units_1", "units_2", "units_3", "l2"]
    narrow = SearchSpace.from_dict({"hidden_layers": {"low": 1, "high": 2}, "hidden_units": {"low": 4, "high": 8}})
    assert narrow.searched_params() == ["hidden_layers", "units_1", "units_2"]


def test_distributions_match_what_optuna_records():
    space = SearchSpace.from_dict(WIDE)
    study, _ = sample(space, 40, seed=3)
    dists = space.distributions()
    for trial in study.trials:
        for name, dist in trial.distributions.items():
            assert dists[name] == dist


def test_fixed_settings_and_defaults():
    space = SearchSpace.from_dict({"hidden_layers": 2, "hidden_units": 16, "learning_rate": 1})
    study, drawn = sample(space, 1)
    params, settings = drawn[0]
    assert params == {}
    assert settings == {"hidden": [16, 16], "activation": "relu", "optimizer": "adam",
                        "learning_rate": 1.0, "momentum": 0.9, "l2": 0.0, "batch_size": 64,
                        "epochs": 200, "patience": 10, "init": "auto"}
    assert isinstance(settings["learning_rate"], float)


def test_to_dict_round_trips_and_fixed_at_fixes_everything():
    space = SearchSpace.from_dict(WIDE)
    assert SearchSpace.from_dict(space.to_dict()) == space
    _, drawn = sample(space, 30, seed=1)
    for params, settings in drawn:
        fixed = space.fixed_at(settings)
        assert fixed.searched_params() == []
        assert all(isinstance(s, Fixed) for s in fixed.entries.values())
        assert SearchSpace.from_dict(fixed.to_dict()) == fixed
        _, again = sample(fixed, 1)
        assert again[0][1] == settings


def test_grid_values():
    space = SearchSpace.from_dict({"hidden_layers": {"choices": [1, 2]},
                                   "hidden_units": {"choices": [8, 32]},
                                   "batch_size": {"low": 16, "high": 64, "step": 16},
                                   "l2": {"choices": [0, 1e-3]}})
    grid = space.grid()
    assert grid == {"hidden_layers": [1, 2], "units_1": [8, 32], "units_2": [8, 32],
                    "batch_size": [16, 32, 48, 64], "l2": [0.0, 1e-3]}
    # Optuna's own grid sampler accepts it and covers every point (optuna.samplers.GridSampler)
    study = optuna.create_study(sampler=optuna.samplers.GridSampler(grid, seed=0))
    seen = set()
    for _ in range(2 * 2 * 2 * 4 * 2):
        trial = study.ask()
        s = space.suggest(trial)
        seen.add((tuple(s["hidden"]), s["batch_size"], s["l2"]))
        try:
            study.tell(trial, 0.0)
        except RuntimeError:       # Optuna 5's GridSampler calls study.stop() on the last tell
            assert study.sampler.is_exhausted(study)
    assert len(seen) == 2 * 4 * 2 + 4 * 4 * 2        # 1 layer: 2 units; 2 layers: 4 unit pairs
    with pytest.raises(SpecError, match=r"space\.learning_rate: the grid sampler cannot search"):
        SearchSpace.from_dict({"learning_rate": {"low": 0.01, "high": 0.1}}).grid()
    with pytest.raises(SpecError, match=r"space\.epochs: the grid sampler would try 991 values"):
        SearchSpace.from_dict({"epochs": {"low": 10, "high": 1000}}).grid()


@pytest.mark.parametrize("raw, message", [
    ({"learning_rate": {"low": 0.1, "high": 0.1}}, "low = 0.1 must be smaller than high = 0.1"),
    ({"learning_rate": {"low": 0.01}}, "needs both low and high (missing high)"),
    ({"hidden_units": {"low": 0, "high": 8}}, "space.hidden_units.low: 0 is outside the allowed range 1 to 4096"),
    ({"hidden_units": {"low": 4, "high": 64, "log": True, "step": 4}}, "log = true works with step = 1 only"),
    ({"momentum": 1.5}, "space.momentum: 1.5 is outside the allowed range 0.0 to 0.999"),
    ({"l2": {"low": -1.0, "high": 1.0}}, "space.l2.low: -1.0 is outside the allowed range"),
    ({"learning_rate": {"low": 1e-3, "high": 0.1, "log": "yes"}}, 'space.learning_rate.log: "yes" is not allowed'),
    ({"batch_size": {"choices": [32, 32]}}, "lists a value twice"),
    ({"batch_size": True}, "space.batch_size: true is not a whole number"),
    ({"activation": {"choices": ["relu"], "low": 1}}, "choices cannot be mixed with low"),
    ({"optimizer": {"low": 1, "high": 2}}, "write a name or { choices = [...] }"),
    ({"epochs": {"low": 5, "high": 10, "off": True}}, "unknown key off"),
    ({"hidden_layers": 0, "hidden_units": {"low": 8, "high": 16}}, "is searched but hidden_layers is 0"),
    ({"hidden_layers": {"low": 1, "high": 2}, "hidden_units": [8, 8]}, "needs hidden_layers = 2 (fixed)"),
    ({"hidden_layers": 1, "hidden_units": [8, 8]}, "needs hidden_layers = 2 (fixed)"),
    ({"Learning_rate": 0.1}, "space.Learning_rate: unknown setting; known settings are learning_rate"),
])
def test_invalid_space_names_key_value_and_rule(raw, message):
    with pytest.raises(SpecError) as info:
        SearchSpace.from_dict(raw, "exp.toml")
    text = str(info.value)
    assert text.startswith("exp.toml: space.") and "\n" not in text
    assert message in text, text


def test_kinds_are_built_from_toml_values():
    space = SearchSpace.from_dict({"learning_rate": {"low": 1, "high": 2},
                                   "epochs": {"low": 10.0, "high": 20},
                                   "hidden_units": {"choices": [8, 16]}})
    assert space["learning_rate"] == FloatRange(1.0, 2.0)
    assert space["epochs"] == IntRange(10, 20)
    assert space["hidden_units"] == Choices((8, 16))
    assert space.with_setting("epochs", 12)["epochs"] == Fixed(12)


def test_settings_to_config():
    config = settings_to_config({"hidden": [8, 4], "activation": "tanh", "optimizer": "momentum",
                                 "learning_rate": 0.01, "momentum": 0.8, "l2": 1e-4,
                                 "batch_size": 16, "epochs": 3}, dtype="float64")
    assert config.hidden == (8, 4) and config.activation == "tanh" and config.dtype == "float64"
    assert (config.momentum, config.l2, config.batch_size, config.epochs) == (0.8, 1e-4, 16, 3)
    # settings stored before patience and init existed: the defaults
    assert (config.patience, config.init) == (10, "auto")
    config = settings_to_config({"hidden": [8], "activation": "relu", "optimizer": "adam",
                                 "learning_rate": 0.01, "momentum": 0.9, "l2": 0.0,
                                 "batch_size": 16, "epochs": 3, "patience": 0, "init": "he"})
    assert (config.patience, config.init, config.init_scheme) == (0, "he", "he")


def test_patience_and_init_are_searchable_settings():
    space = SearchSpace.from_dict({"patience": {"low": 0, "high": 20}, "init": {"choices": ["glorot", "he"]}})
    assert set(space.searched_params()) == {"patience", "init"}
    settings = space.settings_from_params({"patience": 7, "init": "he"})
    assert (settings["patience"], settings["init"]) == (7, "he")
    with pytest.raises(SpecError, match="space.patience"):
        SearchSpace.from_dict({"patience": -1})
    with pytest.raises(SpecError, match="space.init"):
        SearchSpace.from_dict({"init": "zeros"})


def test_fixed_at_a_linear_model():
    space = SearchSpace.from_dict(WIDE)
    settings = {"hidden": [], "activation": "tanh", "optimizer": "sgd", "learning_rate": 0.01,
                "momentum": 0.9, "l2": 0.0, "batch_size": 32, "epochs": 20}
    fixed = space.fixed_at(settings)
    assert fixed.to_dict()["hidden_layers"] == 0 and fixed.to_dict()["hidden_units"] == []
    assert SearchSpace.from_dict(fixed.to_dict()) == fixed
    # settings stored before patience and init existed read as the defaults
    assert fixed.settings_from_params({}) == {**settings, "patience": 10, "init": "auto"}
    newer = {**settings, "patience": 0, "init": "he"}
    assert space.fixed_at(newer).settings_from_params({}) == newer
