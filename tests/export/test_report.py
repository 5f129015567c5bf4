"""The HTML report of real (small) searches run through ``labbench run``, and of stored searches
with failed, diverged, single and regression trials.

Checks: the page parses with the standard library's html.parser and its tags balance; every
picture is an inline SVG that the standard library's XML parser (xml.etree) reads and that holds
real ``<text>``; the summary with the caution comes first; no stored key (``units_1``, ``l2_on``)
or library word ("study") is visible; the counts add up and match Optuna's own count of the stored
trials; the winner's numbers match winner.json; nothing is fetched from a network.
"""

from __future__ import annotations

import json
import re
import shutil
import subprocess
import sys
import xml.etree.ElementTree as ET
from html.parser import HTMLParser

import numpy as np
import pytest
from sklearn import datasets

from labbench.cli import main
from labbench.export import write_report
from labbench.export.report import SECTIONS

VOID = {"meta", "img", "br", "hr", "link", "input"}
INTERNAL = re.compile(r"units_\d|l2_on|\bstud(y|ies)\b|ped_anova|fanova", re.I)
SVG_NS = "{http://www.w3.org/2000/svg}"


class _Collect(HTMLParser):
    def __init__(self):
        super().__init__()
        self.stack, self.sections, self.bad, self.external = [], [], [], []
        self.svgs = 0
        self.text: list[str] = []            # what a reader sees (style sheets left out)

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        if tag == "section":
            self.sections.append(attrs.get("id"))
        if tag == "svg":
            self.svgs += 1
        for key in ("src", "href"):
            if (attrs.get(key) or "").startswith(("http:", "https:", "//")):
                self.external.append(attrs[key])
        if tag in ("script", "link", "iframe", "img"):
            self.external.append(tag)
        if tag not in VOID:
            self.stack.append(tag)

    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1] != tag:
            self.bad.append(tag)
        else:
            self.stack.pop()

    def handle_data(self, data):
        if "style" not in self.stack and "metadata" not in self.stack and data.strip():
            self.text.append(data.strip())


def _parse(text: str) -> _Collect:
    parser = _Collect()
    parser.feed(text)
    parser.close()
    return parser


def _svgs(text: str) -> list[ET.Element]:
    """Every inline picture, read by the standard library's XML parser (well-formed SVG)."""
    return [ET.fromstring(s) for s in re.findall(r"<svg\b.*?</svg>", text, re.S)]


def _svg_words(svg: ET.Element) -> str:
    return " ".join("".join(t.itertext()) for t in svg.iter(f"{SVG_NS}text"))


def _check_page(text: str) -> _Collect:
    """What every report must be: balanced, self-contained, summary first, real text, no keys."""
    parsed = _parse(text)
    assert parsed.bad == [] and parsed.stack == []
    assert parsed.sections == list(SECTIONS) and SECTIONS[0] == "summary"
    assert parsed.external == []
    visible = " ".join(parsed.text)
    assert INTERNAL.search(visible) is None, INTERNAL.search(visible)
    # the caution stands in the summary, before the data, the space and the trials
    caution = text.index("not a guarantee")
    assert text.index('<section id="summary"') < caution < text.index('<section id="data"')
    assert "people, money or safety" in text and "independent validation" in text
    assert "local rules of that field" in text
    svgs = _svgs(text)
    assert len(svgs) == parsed.svgs
    for svg in svgs:
        assert svg.tag == f"{SVG_NS}svg" and svg.get("role") == "img" and svg.get("aria-label")
        assert any(True for _ in svg.iter(f"{SVG_NS}text")), "a picture without real text"
    ids = re.findall(r'\bid="([^"]+)"', text)
    assert len(ids) == len(set(ids)), "two pictures share an element id"
    _check_counts(visible)
    return parsed


def _check_counts(visible: str) -> tuple[int, dict[str, int]]:
    found = re.findall(r"(\d+) trials? in this search: ([^.]*)\.", visible)
    assert found, "no count sentence"
    for total, terms in found:
        parts = [int(n) for n in re.findall(r"(\d+) [a-z]", terms)]
        assert sum(parts) == int(total), (total, terms)
    return int(found[0][0]), found[0][1]


def _optuna_counts(study) -> dict[str, int]:
    """Outside reference: Optuna's own states of the stored trials."""
    from optuna.trial import TrialState

    trials = study.get_trials(deepcopy=False)
    return {"total": len(trials),
            "complete": sum(t.state == TrialState.COMPLETE for t in trials),
            "pruned": sum(t.state == TrialState.PRUNED for t in trials),
            "failed": sum(t.state == TrialState.FAIL for t in trials)}


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
        "[space]\nlearning_rate = { low = 1e-3, high = 0.1, log = true }\nhidden_layers = { low = 1, high = 2 }\n"
        "hidden_units = { low = 4, high = 12 }\nepochs = 6\n"
        'activation = { choices = ["relu", "tanh"] }\nl2 = { low = 1e-5, high = 1e-2, log = true, off = true }\n')
    assert main(["run", str(folder / "iris.toml"), "--quiet"]) == 0
    return folder


def test_report_of_a_finished_search(search, capsys):
    import optuna

    assert main(["report", str(search / "iris.toml")]) == 0
    path = search / "iris_out" / "iris_report.html"
    assert str(path) in capsys.readouterr().out
    text = path.read_text(encoding="utf-8")
    parsed = _check_page(text)
    visible = " ".join(parsed.text)
    study = optuna.load_study(study_name="iris", storage=f"sqlite:///{(search / 'iris.db').as_posix()}")
    ref = _optuna_counts(study)
    total, terms = _check_counts(visible)
    assert total == ref["total"] == 6
    assert f"{ref['complete']} finished + {ref['pruned']} stopped early + {ref['failed']} failed" in terms
    assert "6 trials; all 6 ran." in visible          # the budget shown is the budget run
    # climb, where good scores live, learning curves, fold scores, seed spread
    svgs = _svgs(text)
    assert len(svgs) == 5
    labels = [s.get("aria-label") for s in svgs]
    assert any("climbed" in lab for lab in labels) and any("seeds" in lab for lab in labels)
    winner = json.loads((search / "iris_out" / "winner.json").read_text())
    assert f"#{winner['trial_number']} of 6" in visible
    assert f"{winner['cv_mean']:.4g} ± {winner['cv_std']:.4g}" in visible
    assert f"{winner['holdout_score']:.4g}" in visible
    assert winner["data_sha256"] in text
    # the climb names the last new best: Optuna's own best trial and value (outside reference)
    climb = _svg_words(next(s for s in svgs if "climbed" in s.get("aria-label")))
    assert f"#{study.best_trial.number}: {study.best_value:.3g}" in climb
    # the fold bars carry the winner's fold scores as text
    folds = _svg_words(next(s for s in svgs if "each fold" in s.get("aria-label")))
    for score in winner["fold_scores"]:
        assert f"{score:.3g}" in folds
    # settings by the window's labels, in words; the log scale said in words
    assert "Learning rate" in visible and "on a log scale" in visible
    assert "Units in layer 1" in visible or "Units per layer" in visible
    assert "only 6" in visible.lower()          # importance hint from winner.json, without its method


def test_import_stays_light_and_pyplot_is_never_used(search, tmp_path):
    """matplotlib is loaded only when a report is drawn, and only its object API (no pyplot)."""
    code = ("import sys, labbench, labbench.export, labbench.cli\n"
            "assert 'matplotlib' not in sys.modules, 'import labbench loaded matplotlib'\n"
            "from labbench.export import write_report\n"
            f"write_report({str(search / 'iris.toml')!r}, {str(tmp_path / 'r.html')!r})\n"
            "assert 'matplotlib' in sys.modules and 'matplotlib.pyplot' not in sys.modules\n")
    subprocess.run([sys.executable, "-c", code], check=True, timeout=120)
    assert (tmp_path / "r.html").stat().st_size > 10_000


def test_report_from_url_and_without_winner_files(search, tmp_path):
    url = f"sqlite:///{(search / 'iris.db').as_posix()}"
    out = tmp_path / "by-url.html"
    assert main(["report", url, "--search", "iris", "-o", str(out)]) == 0
    assert "Trial " in out.read_text()      # winner.json found through the stored spec path
    moved = tmp_path / "kept"
    shutil.move(search / "iris_out", moved)
    try:
        path = write_report(str(search / "iris.toml"), tmp_path / "no-winner.html")
        text = path.read_text()
        assert "No winner.json was found" in text
        _check_page(text)
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
    _check_page(path.read_text())


def test_a_regression_search(tmp_path):
    """scikit-learn's diabetes data (regression): RMSE, lower is better, a quantity as target."""
    bunch = datasets.load_diabetes(as_frame=True)   # source: scikit-learn's bundled diabetes data
    bunch.frame.iloc[:200].to_csv(tmp_path / "diabetes.csv", index=False)
    (tmp_path / "diabetes.toml").write_text(
        '[data]\npath = "diabetes.csv"\ntarget = "target"\n\n'
        "[evaluation]\nfolds = 3\nholdout = 0.2\nseed = 1\n\n"
        '[search]\ntrials = 4\nsampler = "random"\npruner = "none"\n\n'
        "[space]\nlearning_rate = { low = 1e-3, high = 0.05, log = true }\nhidden_units = { low = 4, high = 16 }\n"
        "epochs = 8\n")
    assert main(["run", str(tmp_path / "diabetes.toml"), "--quiet"]) == 0
    text = write_report(str(tmp_path / "diabetes.toml")).read_text()
    parsed = _check_page(text)
    visible = " ".join(parsed.text)
    assert "RMSE" in visible and "lower is better" in visible and "a quantity (regression)" in visible
    assert len(_svgs(text)) >= 4


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
    _add(study, TrialState.FAIL, lr=0.2, end_reason="cancelled by the user", epochs_run=1)
    path = write_report(study, tmp_path / "mixed.html")
    text = path.read_text()
    parsed = _check_page(text)
    visible = " ".join(parsed.text)
    assert "7 trials in this search: 2 finished + 1 stopped early + 3 failed + 1 stopped by you." in visible
    assert _optuna_counts(study) == {"total": 7, "complete": 2, "pruned": 1, "failed": 4}
    svgs = {s.get("aria-label").split(" ")[0]: s for s in _svgs(text)}
    assert len(svgs) == 3                      # the climb, the ranges, the learning curves
    climb = next(s for s in _svgs(text) if "climbed" in s.get("aria-label"))
    assert "beyond the axis (drawn at its edge)" in _svg_words(climb)   # the diverged score
    assert "failed" in _svg_words(climb) and "stopped early" in _svg_words(climb)
    assert "training diverged at epoch 2" in text and text.count("failed") >= 3


def test_report_of_a_single_trial(tmp_path):
    """One finished trial, no curve, no winner files: the page still has every part."""
    from optuna.trial import TrialState

    study = _study("single", "minimize", "rmse")
    _add(study, TrialState.COMPLETE, 2.5, fold_scores=[2.4, 2.6], cv_std=0.14,
         settings={"hidden": [8], "activation": "relu", "optimizer": "adam", "learning_rate": 0.01,
                   "batch_size": 32, "epochs": 50, "patience": 10, "init": "he", "l2": 0.0})
    text = write_report(study, tmp_path / "one.html").read_text()
    parsed = _check_page(text)
    visible = " ".join(parsed.text)
    assert "1 trial in this search: 1 finished + 0 stopped early + 0 failed." in visible
    assert "1 hidden layer of 8 units, relu activation, adam optimizer, learning rate 0.01" in visible
    assert "L2 penalty off" in visible and "he initial weights" in visible
    assert "up to 50 epochs, stopping after 10 without a better validation loss" in visible
    assert len(_svgs(text)) == 2               # the climb and the ranges; no curve was stored
