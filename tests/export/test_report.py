"""The HTML report of a real (small) search run through ``labbench run``.

Checks: the file parses with the standard library's html.parser and its tags balance, every
section is there, every embedded image is a valid PNG (our reader written from the PNG
specification, and Qt's decoder when available), nothing is fetched from a network.
"""

from __future__ import annotations

import base64
import json
import shutil
from html.parser import HTMLParser

import numpy as np
import pandas as pd
import pytest
from sklearn import datasets

from labbench.cli import main
from labbench.export import write_report
from labbench.export.report import SECTIONS

from pngcheck import decode, decode_with_qt

VOID = {"meta", "img", "br", "hr", "link", "input"}


class _Collect(HTMLParser):
    def __init__(self):
        super().__init__()
        self.stack, self.sections, self.images, self.bad = [], [], [], []
        self.external = []

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        if tag == "section":
            self.sections.append(attrs.get("id"))
        if tag == "img":
            self.images.append(attrs.get("src", ""))
        for key in ("src", "href"):
            if attrs.get(key, "").startswith(("http:", "https:", "//")):
                self.external.append(attrs[key])
        if tag in ("script", "link", "iframe"):
            self.external.append(tag)
        if tag not in VOID:
            self.stack.append(tag)

    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1] != tag:
            self.bad.append(tag)
        else:
            self.stack.pop()


def _parse(text: str) -> _Collect:
    parser = _Collect()
    parser.feed(text)
    parser.close()
    return parser


@pytest.fixture(scope="module")
def search(tmp_path_factory):
    folder = tmp_path_factory.mktemp("report")
    bunch = datasets.load_iris(as_frame=True)      # source: scikit-learn's bundled iris data
    frame = bunch.frame.drop(columns=["target"])
    frame.insert(0, "plant_id", [f"p{i:03d}" for i in range(len(frame))])
    frame["species"] = np.asarray(bunch.target_names)[bunch.target]
    frame.to_csv(folder / "iris.csv", index=False)
    (folder / "iris.toml").write_text(
        '[data]\npath = "iris.csv"\ntarget = "species"\nignore = ["plant_id"]\n\n'
        "[evaluation]\nfolds = 3\nholdout = 0.2\nseed = 2\nseed_spread = 2\n\n"
        '[search]\ntrials = 6\nsampler = "random"\npruner = "none"\n\n'
        "[space]\nlearning_rate = { low = 1e-3, high = 0.1, log = true }\nhidden_units = { low = 4, high = 12 }\n"
        'epochs = 6\nactivation = { choices = ["relu", "tanh"] }\n')
    assert main(["run", str(folder / "iris.toml"), "--quiet"]) == 0
    return folder


def test_report_of_a_finished_search(search, capsys):
    assert main(["report", str(search / "iris.toml")]) == 0
    path = search / "iris_out" / "iris_report.html"
    assert str(path) in capsys.readouterr().out
    text = path.read_text(encoding="utf-8")
    parsed = _parse(text)
    assert parsed.bad == [] and parsed.stack == []
    assert parsed.sections == list(SECTIONS)
    assert parsed.external == []
    # score by trial, learning curves, one per searched setting (3); importance needs ≥ 10 trials
    assert len(parsed.images) >= 5
    for src in parsed.images:
        assert src.startswith("data:image/png;base64,")
        data = base64.b64decode(src.split(",", 1)[1], validate=True)
        img = decode(data)
        assert img.shape[0] > 50 and img.shape[1] > 50
        qt = decode_with_qt(data)
        if qt is not None:
            assert np.array_equal(qt, img)
    winner = json.loads((search / "iris_out" / "winner.json").read_text())
    assert f"Trial {winner['trial_number']} won" in text
    assert f"{winner['cv_mean']:.4g} ± {winner['cv_std']:.4g}" in text
    assert f"{winner['holdout_score']:.4g}" in text
    assert winner["data_sha256"] in text
    assert "not a guarantee" in text and "safety" in text
    assert "learning_rate" in text and "on a log scale" in text
    assert "only 6 trial(s) completed" in text.lower()


def test_report_from_url_and_without_winner_files(search, tmp_path):
    url = f"sqlite:///{(search / 'iris.db').as_posix()}"
    out = tmp_path / "by-url.html"
    assert main(["report", url, "--study", "iris", "-o", str(out)]) == 0
    assert "Trial " in out.read_text()      # winner.json found through the stored spec path
    moved = tmp_path / "kept"
    shutil.move(search / "iris_out", moved)
    try:
        path = write_report(str(search / "iris.toml"), tmp_path / "no-winner.html")
        text = path.read_text()
        assert "No winner.json was found" in text
        assert _parse(text).sections == list(SECTIONS)
    finally:
        shutil.move(moved, search / "iris_out")


def test_report_errors_are_one_line(search, tmp_path, capsys):
    url = f"sqlite:///{(search / 'iris.db').as_posix()}"
    assert main(["report", url, "--study", "nope", "-o", str(tmp_path / "x.html")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "no search named 'nope'" in err[0]
    assert main(["report", str(tmp_path / "absent.toml")]) == 2
    assert len(capsys.readouterr().err.strip().splitlines()) == 1


def test_report_from_an_open_study(search, tmp_path):
    import optuna

    study = optuna.load_study(study_name="iris", storage=f"sqlite:///{(search / 'iris.db').as_posix()}")
    path = write_report(study, tmp_path / "open.html")
    assert _parse(path.read_text()).sections == list(SECTIONS)


# -- issue 9: outputs never onto inputs, unsafe names, searches with failed and diverged trials --


def test_report_into_a_folder_and_never_onto_an_input(search, tmp_path, capsys):
    folder = tmp_path / "reports"
    folder.mkdir()
    assert main(["report", str(search / "iris.toml"), "-o", str(folder)]) == 0
    assert (folder / "iris_report.html").is_file()
    assert "Traceback" not in capsys.readouterr().err
    for victim in (search / "iris.toml", search / "iris.csv", search / "iris.db"):
        before = victim.read_bytes()
        assert main(["report", str(search / "iris.toml"), "-o", str(victim)]) == 2
        err = capsys.readouterr().err.strip().splitlines()
        assert len(err) == 1 and "never overwrites an input" in err[0], err
        assert victim.read_bytes() == before


def _study(name: str, direction: str, metric: str, spec_path=None):
    import optuna

    optuna.logging.set_verbosity(optuna.logging.WARNING)
    study = optuna.create_study(direction=direction, study_name=name)
    study.set_user_attr("metric", metric)
    study.set_user_attr("direction", direction)
    study.set_user_attr("searched", ["learning_rate", "activation"])
    study.set_user_attr("log_scaled", ["learning_rate"])
    if spec_path is not None:
        study.set_user_attr("spec_path", str(spec_path))
    return study


def _add(study, state, value=None, lr=0.01, act="relu", **attrs):
    from optuna.distributions import CategoricalDistribution, FloatDistribution
    from optuna.trial import create_trial

    dist = {"learning_rate": FloatDistribution(1e-4, 10.0, log=True),
            "activation": CategoricalDistribution(["relu", "tanh"])}
    study.add_trial(create_trial(state=state, value=value, distributions=dist, user_attrs=attrs,
                                 params={"learning_rate": lr, "activation": act}))


def test_a_search_name_with_dot_dot_stays_inside_the_output_folder(tmp_path):
    from optuna.trial import TrialState

    study = _study("../../escape/x", "minimize", "rmse", spec_path=tmp_path / "exp.toml")
    _add(study, TrialState.COMPLETE, 1.0, fold_scores=[1.0, 1.0], cv_std=0.0)
    path = write_report(study)
    assert path.parent == tmp_path / "exp_out" and path.is_file()
    assert path.name == "escape_x_report.html"
    assert "../../escape/x" in path.read_text()      # the name inside the report is unchanged


def test_report_draws_a_search_with_failed_and_diverged_trials(tmp_path):
    """Issue 9, finding 4: the report crashed on a search whose trials diverged. A diverging
    network can end with a finite but enormous score (r2 near -1.8e308) or loss; the charts must
    still draw, and failed trials without any curve or score are listed, not drawn."""
    from optuna.trial import TrialState

    study = _study("mixed", "maximize", "r2")
    curve = {"epoch": [1, 2, 3], "train_loss": [3.0, 2.0, 1.0], "val_loss": [3.0, 2.0, 1.5],
             "val_metric": [0.1, 0.3, 0.5]}
    _add(study, TrialState.COMPLETE, 0.5, curve=curve, fold_scores=[0.49, 0.51], cv_std=0.014)
    _add(study, TrialState.COMPLETE, -1.75e308, lr=5.0, act="tanh", fold_scores=[-1.75e308] * 2,
         curve={"epoch": [1, 2], "train_loss": [1e30, 1.7e308], "val_loss": [1e300, 1.75e308],
                "val_metric": [-1e300, -1.75e308]})
    _add(study, TrialState.FAIL, lr=9.0, end_reason="training diverged at epoch 2: the training "
         "loss of model 1 of 3 became nan", fold_scores=[], epochs_run=2,
         curve={"epoch": [1, 2], "train_loss": [1e38, None], "val_loss": [None, None],
                "val_metric": [None, None]})
    _add(study, TrialState.FAIL, lr=3.0, fold_scores=[float("nan"), 0.2], cv_std=float("nan"),
         end_reason="the metric is not a finite number on every fold")
    _add(study, TrialState.FAIL, lr=2.0)                       # a worker died: no attrs at all
    _add(study, TrialState.PRUNED, 0.1, lr=0.5, curve=curve)
    path = write_report(study, tmp_path / "mixed.html")
    text = path.read_text()
    parsed = _parse(text)
    assert parsed.sections == list(SECTIONS) and parsed.bad == []
    assert len(parsed.images) >= 2
    for src in parsed.images:
        decode(base64.b64decode(src.split(",", 1)[1], validate=True))
    assert "training diverged at epoch 2" in text and text.count("failed") >= 3
