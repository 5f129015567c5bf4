"""``labbench run`` / ``show`` / ``run --pick`` headless for a family without a target, in
subprocesses (the toy family of maps_toy.py registered with LABBENCH_FAMILIES, as any family
outside labbench is): an invented table, scikit-learn's iris with its species hidden as the
label, and the invented pump demo set."""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

import maps_toy
from labbench.families import family_names, get_family, register
from labbench.search.objective import run_trial
from labbench.search.prepare import prepare
from labbench.search.spec import load_spec
from labbench.search.workers import TRAIN_DTYPE
from runner_support import ROOT, iris_csv, load
from test_maps_search import blobs_csv

HERE = Path(__file__).resolve().parent


@pytest.fixture(autouse=True)
def _registered():
    register(maps_toy.FAMILY)


def labbench(*args, cwd: Path, family: str = "maps_toy:FAMILY") -> subprocess.CompletedProcess:
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join([str(ROOT), str(HERE)])
    env["LABBENCH_FAMILIES"] = family
    return subprocess.run([sys.executable, "-m", "labbench", *map(str, args)], env=env, cwd=cwd,
                          capture_output=True, text=True, timeout=600)


def test_run_show_and_pick_a_search_without_a_target(tmp_path):
    blobs_csv(tmp_path)
    spec = tmp_path / "groups.toml"
    spec.write_text('[data]\npath = "blobs.csv"\nignore = ["reading"]\nlabel = "kind"\n'
                    '[evaluation]\nfolds = 3\nholdout = 0.25\nseed = 2\nseed_spread = 3\n'
                    '[search]\ntrials = 6\nsampler = "random"\npruner = "none"\n'
                    '[model]\nfamily = "toymap"\n'
                    '[space]\nunits = { low = 2, high = 7 }\nepochs = 3\n'
                    'grid = { choices = ["none", "line"] }\n')
    run = labbench("run", spec, "--quiet", cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    assert "winner: trial" in run.stdout and "hold-out measures:" in run.stdout
    assert "stability (3 seeds):" in run.stdout
    out = tmp_path / "groups_out"
    summary = json.loads((out / "winner.json").read_text())
    assert summary["task"] == "unsupervised" and summary["label"] == "kind"
    assert summary["target"] == "" and summary["metric"] == "penalised_error"
    assert set(summary["holdout_measures"]) == {"quantisation_error", "topographic_error",
                                                "reconstruction_error", "relative_error", "units"}
    assert summary["stability"]["seeds"] == [2, 3, 4]
    assert (out / "model.npz").exists() and (out / "predict_with_numpy.py").exists()

    # every finished trial stored the fold means of its measures; the worker's numbers are what
    # the same settings give here again (same member seeds)
    study = load(tmp_path / "groups.db", "groups")
    assert study.user_attrs["task"] == "unsupervised" and study.user_attrs["label"] == "kind"
    done = [t for t in study.trials if t.state.name == "COMPLETE"]
    assert len(done) == 6
    prepared = prepare(load_spec(spec), fold_dtype=TRAIN_DTYPE)    # as the workers prepare
    for t in done:
        measures = t.user_attrs["measures"]
        assert measures["units"] == t.user_attrs["settings"]["units"]
        assert ("topographic_error" in measures) == (t.user_attrs["settings"]["grid"] == "line")
        # the pruner compared the metric (penalised error), not the held-out QE that always
        # falls with more units
        curve = t.user_attrs["curve"]
        assert t.intermediate_values == pytest.approx(dict(zip(curve["epoch"], curve["val_metric"])))
        assert curve["val_metric"] != curve["val_loss"]
    again = run_trial(prepared, done[0].user_attrs["settings"], seed=2, on_epoch=lambda v: None,
                      should_stop=lambda: False)
    assert again["measures"] == pytest.approx(done[0].user_attrs["measures"], rel=1e-12)

    show = labbench("show", spec, cwd=tmp_path)
    assert show.returncode == 0, show.stderr
    front = show.stdout.split("trade-off: ")[1].splitlines()
    numbers = [int(line.split()[0]) for line in front[2:] if line[:1].isdigit()]
    assert numbers and set(numbers) <= {t.number for t in done}
    assert f"labbench run {spec} --pick TRIAL" in show.stdout

    choice = next((n for n in numbers if n != summary["trial_number"]), numbers[0])
    pick = labbench("run", spec, "--pick", choice, "--quiet", cwd=tmp_path)
    assert pick.returncode == 0, pick.stderr
    assert pick.stdout.startswith(f"picked: trial {choice} of search 'groups'")
    picked = json.loads((out / f"trial_{choice}" / "winner.json").read_text())
    assert picked["trial_number"] == choice and picked["picked"]
    assert json.loads((out / "winner.json").read_text()) == summary     # the best's files stay

    bad = labbench("run", spec, "--pick", 99, cwd=tmp_path)
    assert bad.returncode == 2 and bad.stdout == ""
    assert bad.stderr.strip() == ("labbench: --pick 99: there is no trial 99 in search 'groups'; "
                                  "pick one of the finished trials: 0, 1, 2, 3, 4, 5")
    both = labbench("run", spec, "--pick", choice, "--trials", 2, cwd=tmp_path)
    assert both.returncode == 2 and "--pick refits a stored trial and runs no new one" in both.stderr


def test_iris_with_its_species_hidden_runs_headless(tmp_path):
    # scikit-learn's bundled iris data set (Fisher 1936), the species kept only as the label
    iris_csv(tmp_path)
    spec = tmp_path / "iris_groups.toml"
    spec.write_text('[data]\npath = "iris.csv"\nlabel = "species"\n'
                    '[evaluation]\nfolds = 3\nseed_spread = 2\n'
                    '[search]\ntrials = 3\nsampler = "random"\npruner = "none"\n'
                    '[model]\nfamily = "toymap"\n[space]\nunits = { low = 2, high = 5 }\n')
    run = labbench("run", spec, "--quiet", cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    summary = json.loads((tmp_path / "iris_groups_out" / "winner.json").read_text())
    assert summary["label"] == "species" and summary["task"] == "unsupervised"
    assert summary["train_rows"] == 120 and summary["holdout_rows"] == 30
    from labbench.export.bundle import bundle_metadata

    meta = bundle_metadata(tmp_path / "iris_groups_out" / "model.npz")
    assert meta["family"] == "toymap" and meta["task"] == "unsupervised"
    assert meta["features"] == ["sepal length (cm)", "sepal width (cm)", "petal length (cm)",
                                "petal width (cm)"]              # the species is never an input
    # 30 hold-out rows < 50: the seeds are compared on all 150 rows
    assert "all 150 rows" in summary["stability"]["message"]


def _pump_demo(tmp_path: Path, family: str | None = None) -> Path:
    demo = ROOT / "demo_sets"
    shutil.copy(demo / "pumps.csv", tmp_path / "pumps.csv")
    text = (demo / "pumps.toml").read_text()
    if family is not None:         # the toy's own [space] instead of the map's
        assert 'family = "som"' in text and text.count("\n[space]\n") == 1
        text = text.split("\n[space]\n")[0].replace('family = "som"', f'family = "{family}"')
        text += "[space]\nunits = { low = 3, high = 8 }\n"
    (tmp_path / "pumps.toml").write_text(text)
    return tmp_path / "pumps.toml"


def test_the_pump_demo_runs_headless_with_a_family_without_a_target(tmp_path):
    spec = _pump_demo(tmp_path, "toymap")
    run = labbench("run", spec, "--trials", 3, "--quiet", cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    summary = json.loads((tmp_path / "pumps_out" / "winner.json").read_text())
    assert summary["label"] == "state" and summary["train_rows"] == 800
    assert summary["stability"]["seeds"] == [0, 1, 2, 3, 4]


def test_the_pump_demo_runs_as_shipped_with_the_self_organising_map(tmp_path):
    if "som" not in family_names():
        pytest.skip("the som family (labbench.families.maps) is not on this branch yet")
    spec = _pump_demo(tmp_path)
    run = labbench("run", spec, "--trials", 2, "--quiet", cwd=tmp_path, family="")
    assert run.returncode == 0, run.stderr
    summary = json.loads((tmp_path / "pumps_out" / "winner.json").read_text())
    assert summary["label"] == "state" and summary["stability"]["layout_mean"] is not None
    assert get_family("som").needs_target is False and summary["settings"]["groups"] == 4
    assert np.isfinite(summary["holdout_measures"]["topographic_error"])
