"""The four map and group families through the family interface: registry, settings tables,
search-space checks, sampling, stacks and the spec reader."""

from __future__ import annotations

import numpy as np
import optuna
import pytest

from labbench.errors import SpecError
from labbench.families import family_names, get_family
from labbench.maps import PrototypeRecord, SubspaceRecord
from labbench.search.space import SearchSpace
from labbench.search.spec import load_spec

MAP_FAMILIES = ("som", "competitive", "neural_gas", "hebbian")


def test_the_four_families_are_known_and_learn_without_a_target():
    assert set(MAP_FAMILIES) <= set(family_names())
    for name in MAP_FAMILIES:
        family = get_family(name)
        assert family.needs_target is False and family.label
        assert family.default_metric("unsupervised") == "penalised_error"
        assert family.metrics("unsupervised")[0] == "penalised_error"
        assert family.metrics("regression") == ()
    assert "topographic_error" in get_family("som").metrics("unsupervised")
    assert "topographic_error" not in get_family("competitive").metrics("unsupervised")
    assert get_family("hebbian").metrics("unsupervised") == ("penalised_error", "reconstruction_error")


@pytest.mark.parametrize("name", MAP_FAMILIES)
def test_the_default_space_is_valid_and_searches_something(name):
    family = get_family(name)
    space = SearchSpace.from_dict(family.default_space, "d.toml", name)
    assert space.searched_params()
    assert not space.searched("unit_cost")
    assert SearchSpace.from_dict(space.to_dict(), "d.toml", name) == space     # TOML round trip
    for info in family.settings.values():            # every setting explains itself
        assert info.help.endswith(".") and info.label


@pytest.mark.parametrize("family,space,key,words", [
    ("som", {"unit_cost": {"low": 0.0, "high": 0.1}}, "space.unit_cost", "fix unit_cost to one value"),
    ("competitive", {"unit_cost": {"choices": [0.01, 0.02]}}, "space.unit_cost", "fix unit_cost"),
    ("som", {"learning_rate": 0.1, "final_learning_rate": 0.5}, "space.final_learning_rate",
     "make final_learning_rate at most 0.1"),
    ("neural_gas", {"neighbourhood_range": {"low": 1.0, "high": 2.0},
                    "final_neighbourhood_range": {"low": 3.0, "high": 4.0}},
     "space.final_neighbourhood_range", "lower final_neighbourhood_range or raise neighbourhood_range"),
    ("som", {"radius": 2.0, "final_radius": 3.0}, "space.final_radius", "at most 2"),
    ("som", {"rows": 1, "cols": 1}, "space.cols", "at least two"),
    ("som", {"rows": 2, "cols": 3, "groups": 7}, "space.groups", "at most as many groups as units"),
    ("hebbian", {"rule": "oja", "components": 3}, "space.components", "components = 1"),
    ("som", {"training": "batch", "learning_rate": {"low": 0.1, "high": 0.5}}, "space.learning_rate",
     "training can never be"),
])
def test_impossible_spaces_are_one_line_errors(family, space, key, words):
    with pytest.raises(SpecError) as info:
        SearchSpace.from_dict(space, "maps.toml", family)
    message = str(info.value)
    assert message.startswith(f"maps.toml: {key}:") and words in message and "\n" not in message


def test_radius_zero_means_half_the_map_and_passes_the_check():
    SearchSpace.from_dict({"radius": 0.0, "final_radius": 3.0}, "maps.toml", "som")


def test_sampled_settings_resolve_to_a_complete_dict():
    space = SearchSpace.from_dict(get_family("som").default_space, "d.toml", "som")
    study = optuna.create_study(sampler=optuna.samplers.RandomSampler(seed=0))
    settings = space.suggest(study.ask())
    assert set(settings) == set(get_family("som").settings)
    assert 4 <= settings["rows"] <= 12 and settings["groups"] == 0 and settings["unit_cost"] == 0.01
    again = space.fixed_at(settings)                 # the winner's settings as a fixed space
    assert not again.searched_params()


def test_oja_samples_no_component_count():
    space = SearchSpace.from_dict({"rule": {"choices": ["oja", "sanger"]},
                                   "components": {"low": 1, "high": 4}}, "h.toml", "hebbian")
    oja = space.settings_from_params({"rule": "oja"})          # no "components" param needed
    assert oja["components"] == 1
    assert space.settings_from_params({"rule": "sanger", "components": 3})["components"] == 3


@pytest.mark.parametrize("name,settings", [
    ("som", {"rows": 3, "cols": 4, "epochs": 3, "groups": 3}),
    ("competitive", {"units": 4, "epochs": 3, "conscience": 1.0}),
    ("neural_gas", {"units": 4, "epochs": 3}),
    ("hebbian", {"components": 2, "epochs": 3}),
])
def test_a_family_stack_trains_folds_and_reports_every_epoch(name, settings):
    family = get_family(name)
    rng = np.random.default_rng(0)
    X = rng.normal(size=(200, 4))
    folds = [np.arange(200) % 4 == f for f in range(4)]
    X_train = [X[~f] for f in folds]
    X_val = [X[f] for f in folds]
    dummies = [np.zeros(len(x)) for x in X_train]           # y does not exist for these families
    full = family.complete(settings)
    training = family.stack(full, "unsupervised", 1, X_train, dummies, X_val,
                            [np.zeros(len(x)) for x in X_val], seeds=[1, 2, 3, 4], dtype="float32")
    seen = []
    history = training.run(on_epoch=seen.append)
    assert [s.epoch for s in seen] == [1, 2, 3] and history == seen
    last = seen[-1]
    assert last.train_loss.shape == last.val_loss.shape == last.val_metric.shape == (4,)
    assert np.all(training.best_epoch == 3)
    np.testing.assert_array_equal(training.best_val_metric, last.val_metric)
    measures = training.measures()
    np.testing.assert_array_equal(measures["penalised_error"], last.val_metric)
    units = training.units
    record = training.record(2)
    assert record.family == name
    if name == "hebbian":
        assert isinstance(record, SubspaceRecord) and units == 2
        np.testing.assert_allclose(measures["penalised_error"],
                                   measures["reconstruction_error"] + 0.01 * 2)
    else:
        assert isinstance(record, PrototypeRecord) and record.n_units == units
        extra = measures["topographic_error"] if name == "som" else 0.0
        np.testing.assert_allclose(measures["penalised_error"],
                                   measures["relative_error"] + extra + 0.01 * units)
    if name == "som":
        assert record.shape == (3, 4) and record.n_groups == 3


def test_the_caller_can_stop_after_an_epoch_and_the_refit_has_no_held_out_rows():
    family = get_family("competitive")
    X = np.random.default_rng(1).normal(size=(100, 3))
    full = family.complete({"units": 3, "epochs": 10})
    t = family.stack(full, "unsupervised", 1, [X, X], [None, None], [X, X], [None, None],
                     seeds=[1, 2])
    t.run(on_epoch=lambda scores: scores.epoch < 2)
    assert np.all(t.best_epoch == 2) and t.epoch == 2
    refit = family.stack(full, "unsupervised", 1, [X], [None], seeds=[5], epochs=4)
    history = refit.run()
    assert len(history) == 4 and history[-1].val_loss is None and refit.best_val_metric is None
    assert refit.measures() == {} and refit.record(0).n_units == 3


def test_a_map_spec_round_trips_through_the_spec_reader(tmp_path):
    (tmp_path / "machines.csv").write_text("speed,heat\n1,2\n3,4\n5,6\n")
    spec_file = tmp_path / "som.toml"
    spec_file.write_text('[data]\npath = "machines.csv"\n[model]\nfamily = "som"\n[space]\n'
                         'rows = { low = 3, high = 6 }\ncols = 5\ntopology = "hexagonal"\n'
                         'learning_rate = { low = 0.05, high = 0.8, log = true }\ngroups = 4\n')
    try:
        spec = load_spec(spec_file)
    except SpecError as exc:          # the reader learns "no target" in another branch of issue 12
        if "target" in str(exc):
            pytest.skip(f"this spec reader still needs a target: {exc}")
        raise
    assert spec.space.family == "som" and spec.space.searched_params() == ["rows", "learning_rate"]
    assert spec.space.to_dict()["topology"] == "hexagonal" and spec.space.to_dict()["groups"] == 4
    again = tmp_path / "again.toml"
    again.write_text(spec.to_toml(tmp_path))
    assert load_spec(again).space == spec.space


def _prepared(name: str, X: np.ndarray, k: int = 3):
    """What a search trial reads of its prepared data: folds, the family, task and metric."""
    from types import SimpleNamespace

    parts = np.arange(len(X)) % k
    folds = SimpleNamespace(X_train=[X[parts != f] for f in range(k)],
                            y_train=[np.zeros(int((parts != f).sum())) for f in range(k)],
                            X_val=[X[parts == f] for f in range(k)],
                            y_val=[np.zeros(int((parts == f).sum())) for f in range(k)],
                            target_inverse=None)
    family = get_family(name)
    return SimpleNamespace(fold_arrays=folds, model=family, task="unsupervised", n_outputs=1,
                           metric=family.default_metric("unsupervised"))


def test_a_search_trial_trains_a_map_and_reports_every_epoch():
    from labbench.search.objective import run_trial

    X = np.random.default_rng(2).normal(size=(150, 3))
    prepared = _prepared("som", X)
    settings = get_family("som").complete({"rows": 3, "cols": 3, "epochs": 4})
    epochs = []
    out = run_trial(prepared, settings, seed=0, on_epoch=epochs.append, should_stop=lambda: False)
    assert out["end"] == "complete" and out["best_epoch"] == 4 and len(out["fold_scores"]) == 3
    assert [e[0] for e in epochs] == [1, 2, 3, 4]
    assert all(0.0 < s < 2.0 for s in out["fold_scores"])


def test_a_search_trial_of_the_plain_hebbian_rule_fails_with_its_reason():
    # the search turns DivergenceError into a failed trial with its reason (labbench.search.objective)
    from labbench.search.objective import run_trial

    X = np.random.default_rng(3).normal(size=(300, 4)) * np.array([3.0, 2.0, 1.0, 0.5])
    prepared = _prepared("hebbian", X)
    settings = get_family("hebbian").complete({"rule": "hebb", "components": 2, "epochs": 5,
                                               "learning_rate": 0.01})
    out = run_trial(prepared, settings, seed=0, on_epoch=lambda e: None, should_stop=lambda: False)
    assert out["end"] == "diverged" and "no decay term" in out["reason"]
