"""The network family behind the seam: names from their registries, old files still load."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from labbench.errors import SpecError
from labbench.families import family_names, get_family
from labbench.families.network import SETTINGS
from labbench.families.network_export import ACTIVATION_OPS, OUTPUTS
from labbench.nets.activations import ACTIVATIONS
from labbench.nets.config import INIT_NAMES, MOMENTUM_MAX, NetConfig
from labbench.nets.init import SCHEMES
from labbench.nets.losses import TASKS
from labbench.nets.metrics import METRICS
from labbench.nets.optim import OPTIMIZERS

OLD_BUNDLE = Path(__file__).resolve().parents[1] / "export" / "old_bundles" / "format1_regression.npz"


def test_choices_come_from_the_registries():
    assert SETTINGS["activation"].options == tuple(ACTIVATIONS)
    assert SETTINGS["optimizer"].options == tuple(OPTIMIZERS)
    assert SETTINGS["init"].options == INIT_NAMES == ("auto", *SCHEMES)
    assert tuple(OUTPUTS) == TASKS
    from labbench.data import roles
    from labbench.search import spec

    assert spec.TASKS is TASKS
    assert roles.TASKS == TASKS     # the data layer sits beside nets, so it keeps its own copy


def test_every_registered_activation_can_be_exported():
    # the ONNX operator table and the numpy script's table are written by hand (the script needs
    # nothing from labbench); this fails when an activation is registered without them
    from labbench.export import standalone

    assert set(ACTIVATION_OPS) == set(ACTIVATIONS)
    assert set(standalone.ACTIVATIONS) == set(ACTIVATIONS) | {"identity"}
    z = np.linspace(-3, 3, 13)
    for name, act in ACTIVATIONS.items():
        np.testing.assert_allclose(standalone.ACTIVATIONS[name](z), act.apply(z.copy()), rtol=1e-12)


def test_momentum_limit_is_the_same_in_the_engine_and_the_spec():
    from labbench.search.space import SearchSpace

    assert SETTINGS["momentum"].high == MOMENTUM_MAX == 0.999
    NetConfig(optimizer="momentum", momentum=MOMENTUM_MAX)
    SearchSpace.default().with_setting("momentum", MOMENTUM_MAX)
    with pytest.raises(SpecError, match="momentum"):
        NetConfig(optimizer="momentum", momentum=0.9995)
    with pytest.raises(SpecError, match="space.momentum: 0.9995 is outside the allowed range"):
        SearchSpace.default().with_setting("momentum", 0.9995)


def test_metrics_offered_are_the_registrys_for_the_task():
    family = get_family("network")
    for task in TASKS:
        assert set(family.metrics(task)) == {n for n, m in METRICS.items() if task in m.tasks}
        assert family.default_metric(task) in family.metrics(task)


def test_a_spec_without_a_model_section_is_a_network_and_writes_none(tmp_path):
    from labbench.search.spec import load_spec

    (tmp_path / "d.csv").write_text("a,y\n1,2\n")
    path = tmp_path / "s.toml"
    path.write_text('[data]\npath = "d.csv"\ntarget = "y"\n[space]\nlearning_rate = 0.01\n')
    spec = load_spec(path)
    assert spec.space.family == "network" and "network" in family_names()
    assert "[model]" not in spec.to_toml()
    path.write_text('[data]\npath = "d.csv"\ntarget = "y"\n[model]\nfamily = "network"\n')
    from labbench.families.network import DEFAULT_SPACE
    from labbench.search.space import SearchSpace

    # no [space]: the network's default searched space, as before families existed
    assert load_spec(path).space == SearchSpace.from_dict(DEFAULT_SPACE)


def test_a_bundle_written_before_families_loads_as_a_network():
    from labbench.export.bundle import bundle_metadata, load_bundle

    assert "family" not in bundle_metadata(OLD_BUNDLE)
    model = load_bundle(OLD_BUNDLE)
    assert model.family == "network" and type(model.weights).__name__ == "NetWeights"


def test_old_stored_settings_without_patience_and_init_still_train():
    family = get_family("network")
    old = {"hidden": [4], "activation": "tanh", "optimizer": "adam", "learning_rate": 0.01,
           "momentum": 0.9, "l2": 0.0, "batch_size": 8, "epochs": 2}
    assert family.complete(old)["patience"] == SETTINGS["patience"].default
    rng = np.random.default_rng(0)
    X, y = rng.normal(size=(20, 3)), rng.normal(size=20)
    fit = family.stack(old, "regression", 1, [X], [y], seeds=[1])
    fit.run()
    assert fit.record(0).forward(X).shape == (20,)


def test_the_readme_settings_table_is_the_network_table():
    """The README's [space] table lists the settings table's names, ranges and choices, in order."""
    readme = (Path(__file__).resolve().parents[2] / "README.md").read_text(encoding="utf-8")
    start = readme.index("| setting | default | allowed | meaning |")
    rows = []
    for line in readme[start:].splitlines()[2:]:
        if not line.startswith("| `"):
            break
        rows.append([cell.strip() for cell in line.strip("|").split("|")])
    assert [r[0].strip("`") for r in rows] == list(SETTINGS)
    for (name, _default, allowed, _meaning), info in zip(rows, SETTINGS.values()):
        if info.kind == "choice":
            assert allowed == ", ".join(info.options), name
        else:
            low, high = (float(x) for x in allowed.split(" to "))
            assert (low, high) == (info.low, info.high), name
