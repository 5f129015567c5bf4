"""The spec file: defaults, round trip, overrides, and the corpus of malformed files."""

from __future__ import annotations

import dataclasses
import tomllib
from pathlib import Path

import pytest

from labbench.errors import SpecError
from labbench.search.space import FloatRange, IntRange, Choices, Fixed
from labbench.search.spec import (DEFAULT_TRIALS, Spec, check_metric, load_spec, loads_spec,
                                  save_spec)

HERE = Path(__file__).parent
BAD = sorted((HERE / "bad_specs").glob("*.toml"))
ROOT = HERE.parent.parent

# The example from the issue, verbatim in shape.
EXAMPLE = """
[data]
path = "orchard.csv"          # relative to the spec file
target = "grade"
ignore = ["tree_id"]

[evaluation]
folds = 5
repeats = 1
holdout = 0.2
seed = 7

[search]
trials = 40
sampler = "tpe"
pruner = "median"
workers = 1

[space]
learning_rate = { low = 1e-4, high = 0.3, log = true }
hidden_layers = { low = 1, high = 2 }
hidden_units  = { low = 8, high = 256, log = true }
epochs        = { low = 10, high = 150 }
batch_size    = { choices = [32, 64, 128] }
activation    = { choices = ["relu", "tanh", "sigmoid"] }
optimizer     = "adam"
l2            = { low = 1e-6, high = 1e-2, log = true }
"""


@pytest.fixture
def example(tmp_path) -> Path:
    p = tmp_path / "orchard.toml"
    p.write_text(EXAMPLE, encoding="utf-8")
    return p


def test_example_loads_with_its_values(example):
    spec = load_spec(example)
    assert spec.data.path == str(example.parent / "orchard.csv")   # relative to the spec file
    assert spec.data.target == "grade" and spec.data.ignore == ("tree_id",)
    assert spec.data.task is None and spec.data.missing == "impute" and spec.data.scaling == "standard"
    assert (spec.evaluation.folds, spec.evaluation.holdout, spec.evaluation.seed) == (5, 0.2, 7)
    assert spec.evaluation.metric is None and spec.evaluation.seed_spread == 5
    assert (spec.search.trials, spec.search.sampler, spec.search.pruner) == (40, "tpe", "median")
    assert spec.space["learning_rate"] == FloatRange(1e-4, 0.3, log=True)
    assert spec.space["hidden_layers"] == IntRange(1, 2)
    assert spec.space["batch_size"] == Choices((32, 64, 128))
    assert spec.space["optimizer"] == Fixed("adam")
    assert spec.study_name() == "orchard"


def test_defaults_when_sections_are_left_out(tmp_path):
    spec = loads_spec('[data]\npath = "a.csv"\ntarget = "y"\n', tmp_path, "x.toml")
    assert spec.search.trials == DEFAULT_TRIALS and spec.search.minutes is None
    assert spec.evaluation.folds == 5 and spec.search.workers == 1
    # no [space] section: the default searched space (tests/search/test_defaults_and_pruning.py)
    assert spec.space.searched_params()
    # a [space] section leaves every setting it does not name fixed at its default
    spec = loads_spec('[data]\npath = "a.csv"\ntarget = "y"\n[space]\n', tmp_path, "x.toml")
    assert not spec.space.searched_params()
    # a time budget alone leaves the trial count open
    spec = loads_spec('[data]\npath = "a.csv"\ntarget = "y"\n[search]\nminutes = 2\n', tmp_path)
    assert spec.search.trials is None and spec.search.minutes == 2.0


def test_round_trip_in_place_and_elsewhere(example, tmp_path):
    spec = load_spec(example)
    again = loads_spec(spec.to_toml(), example.parent, str(example))
    assert again == spec
    # saved into another folder the data path is rewritten relative to that folder
    other = tmp_path / "elsewhere" / "copy.toml"
    saved = save_spec(spec, other)
    written = tomllib.loads(other.read_text(encoding="utf-8"))
    assert written["data"]["path"] == "../orchard.csv"
    assert load_spec(other) == spec == saved
    # every optional key survives too
    full = spec.with_data(task="multiclass", kinds={"soil": "categorical"}, missing="drop",
                          scaling="minmax").with_evaluation(metric="macro_f1", seed_spread=0) \
        .with_search(minutes=3.5, storage="sqlite:///x.db", name="trees", sampler="random")
    assert loads_spec(full.to_toml(), example.parent) == full


def test_overrides_are_checked(example):
    spec = load_spec(example)
    changed = spec.with_search(trials=7, workers=2)
    assert (changed.search.trials, changed.search.workers) == (7, 2)
    assert spec.search.trials == 40                   # the original is untouched
    with pytest.raises(SpecError, match=r"search\.workers: 0 is not allowed"):
        spec.with_search(workers=0)
    only_time = spec.with_search(trials=None, minutes=1)
    assert only_time.search.trials is None and only_time.search.minutes == 1.0
    with pytest.raises(SpecError, match="no budget left"):
        spec.with_search(trials=None)
    assert spec.with_search(name="other").study_name() == "other"


def test_metric_is_checked_against_a_task_known_later(example):
    check_metric("balanced_accuracy", "multiclass")
    check_metric("rmse", None)                       # task unknown yet: only the name is checked
    with pytest.raises(SpecError, match=r"evaluation\.metric: \"rmse\" does not fit a binary task"):
        check_metric("rmse", "binary", "orchard.toml")


@pytest.mark.parametrize("path", BAD, ids=[p.stem for p in BAD])
def test_bad_spec_gives_one_clear_line(path):
    expected = path.read_text(encoding="utf-8").splitlines()[0].removeprefix("# expect: ")
    with pytest.raises(SpecError) as info:
        load_spec(path)
    message = str(info.value)
    assert "\n" not in message
    assert message.startswith(f"{path}: ")           # names the file first
    assert expected in message, message


def test_bad_spec_corpus_is_large_enough():
    assert len(BAD) >= 12


def test_missing_file_is_a_spec_error(tmp_path):
    with pytest.raises(SpecError, match="spec file not found"):
        load_spec(tmp_path / "nope.toml")


@pytest.mark.parametrize("name", ["orchard", "bakery"])
def test_demo_specs_load(name):
    spec = load_spec(ROOT / "demo_sets" / f"{name}.toml")
    assert Path(spec.data.path).is_file()
    assert loads_spec(spec.to_toml(), Path(spec.source_path).parent) == spec


def test_spec_is_a_plain_frozen_value(example):
    spec = load_spec(example)
    with pytest.raises(dataclasses.FrozenInstanceError):
        spec.search = None                            # type: ignore[misc]
    assert isinstance(spec, Spec)


def test_target_scaling_defaults_to_standard_and_round_trips(tmp_path):
    # a spec written before the key existed (no target_scaling) gets the documented default
    old = loads_spec('[data]\npath = "a.csv"\ntarget = "y"\n', tmp_path, "x.toml")
    assert old.data.target_scaling == "standard"
    for method in ("log", "none", "standard"):
        spec = old.with_data(target_scaling=method)
        assert tomllib.loads(spec.to_toml())["data"]["target_scaling"] == method
        assert loads_spec(spec.to_toml(tmp_path), tmp_path) == spec
# -- issue 9: limits, with a memory estimate ------------------------------------------------------


def test_limits_stop_specs_that_would_hang_before_anything_runs():
    """``repeats = 100000`` and ``seed_spread = 1000000`` were accepted and then hung."""
    import time

    from labbench.search.spec import loads_spec

    for key, value in (("repeats", 100_000), ("seed_spread", 1_000_000), ("folds", 10_000)):
        text = f'[data]\npath = "x.csv"\ntarget = "y"\n[evaluation]\n{key} = {value}\n'
        started = time.perf_counter()
        with pytest.raises(SpecError, match=rf"evaluation\.{key}: {value} is more than"):
            loads_spec(text, ".", "s.toml")
        assert time.perf_counter() - started < 5


def test_memory_estimate_names_the_key_to_lower():
    from labbench.search.limits import check_memory, memory_estimate
    from labbench.search.spec import loads_spec

    text = ('[data]\npath = "x.csv"\ntarget = "y"\n[evaluation]\nfolds = 5\nseed_spread = {s}\n'
            "[search]\nworkers = {w}\n[space]\nhidden_layers = 3\n"
            "hidden_units = {{ low = 8, high = 2048, log = true }}\n")
    spec = loads_spec(text.format(s=0, w=1), ".", "s.toml")
    est = memory_estimate(spec)
    # 2 hidden-to-hidden blocks of 2048 × 2049 float32 weights, 4 arrays each (weights, gradient,
    # Adam's two moments), 5 fold networks: arithmetic done by hand
    assert est["per_net"] == 4 * 4 * 2 * 2048 * 2049
    assert est["trial"] == est["per_net"] * 5
    gb = 1024 ** 3
    check_memory(spec, available=64 * gb)                       # fits
    with pytest.raises(SpecError, match=r"space\.hidden_units: 5 networks of 3 hidden layers of "
                                        r"2048 units need at least 0\.6 GB, more than 80% of the "
                                        r"0\.5 GB"):
        check_memory(spec, available=gb // 2)
    with pytest.raises(SpecError, match=r"search\.workers: 8 workers"):
        check_memory(loads_spec(text.format(s=0, w=8), ".", "s.toml"), available=4 * gb)
    with pytest.raises(SpecError, match=r"evaluation\.seed_spread: 20 seeds × 5 folds"):
        check_memory(loads_spec(text.format(s=20, w=1), ".", "s.toml"), available=4 * gb)
