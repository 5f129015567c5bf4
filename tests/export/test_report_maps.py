"""The report of a map search: the groups section (objective, held-out measures, stability in
words, group sizes and profiles, the U-matrix picture) and the caution.

The search is an in-memory Optuna study with stored trials (what maps-search writes), its
winner.json and the saved winner ``model.npz`` in the output folder, and the data file beside
the spec. References: pandas groupby means of the same rows (the profiles), the data file's own
row count (the sizes), xml.etree (well-formed SVG).
"""

from __future__ import annotations

import dataclasses
import json
import re
import xml.etree.ElementTree as ET

import numpy as np
import pytest

from labbench.export import save_bundle, write_report
from labbench.export.report import MAP_SECTIONS
from labbench.export.report_maps import stability_words
from labbench.numbers import number
from maps_support import invented_rows, make_model, map_families  # noqa: F401 (the fixture)
from test_report import _check_counts, _parse, _svg_words, _svgs

pytestmark = pytest.mark.usefixtures("map_families")

STABILITY = {"seeds": [0, 1, 2, 3, 4], "ari_mean": 0.93, "ari_min": 0.88, "layout_mean": 0.97,
             "layout_min": 0.95, "verdict": "reproducible",
             "message": "Different seeds give the same groups."}
MEASURES = {"quantisation_error": 0.412, "topographic_error": 0.05, "reconstruction_error": None,
            "relative_error": 0.31, "units": 12}


def _map_search(tmp_path, kind="som_rect", with_rows=True, label=True):
    import optuna
    from optuna.distributions import IntDistribution
    from optuna.trial import TrialState, create_trial

    frame = invented_rows(120, 3)
    frame["state"] = np.where(frame["inlet_bar"] > 2.6, "surge", "steady")
    data = tmp_path / "pumps.csv"
    frame.to_csv(data, index=False)
    spec_path = tmp_path / "pumps.toml"
    label_line = 'label = "state"\n' if label else ""
    spec_text = (f'[data]\npath = "pumps.csv"\nignore = ["reading_id"]\n{label_line}'
                 '[model]\nfamily = "som"\n[space]\nrows = { low = 2, high = 4 }\n')
    spec_path.write_text(spec_text)
    optuna.logging.set_verbosity(optuna.logging.WARNING)
    study = optuna.create_study(direction="minimize", study_name="pumps")
    for key, value in {"metric": "penalised_error", "direction": "minimize", "task": "unsupervised",
                       "spec_toml": spec_text, "spec_path": str(spec_path),
                       "data_path": str(data if with_rows else tmp_path / "gone.csv"),
                       "n_rows": 96, "n_holdout": 24, "searched": ["rows"]}.items():
        study.set_user_attr(key, value)
    curve = {"epoch": [1, 2, 3], "train_loss": [0.9, 0.6, 0.5], "val_loss": [1.0, 0.7, 0.55],
             "val_metric": [0.6, 0.45, 0.4]}
    for rows, value in ((2, 0.45), (3, 0.40), (4, 0.43)):
        study.add_trial(create_trial(
            state=TrialState.COMPLETE, value=value, params={"rows": rows},
            distributions={"rows": IntDistribution(2, 4)},
            user_attrs={"settings": {"rows": rows, "columns": 4, "epochs": 3}, "curve": curve,
                        "fold_scores": [value - 0.01, value + 0.01], "cv_std": 0.014, "epochs_run": 3}))
    out = tmp_path / "pumps_out"
    out.mkdir()
    model = make_model(kind, frame.drop(columns=["state"]).iloc[:96])
    model = dataclasses.replace(model, scores={
        "cv_mean": 0.40, "cv_std": 0.014, "holdout_score": 0.42,
        "holdout_measures": MEASURES, "stability": STABILITY}, settings={"rows": 3, "columns": 4})
    save_bundle(model, out / "model.npz")
    (out / "winner.json").write_text(json.dumps({
        "study_name": "pumps", "trial_number": 1, "metric": "penalised_error", "task": "unsupervised",
        "family": "som", "cv_mean": 0.40, "cv_std": 0.014, "fold_scores": [0.39, 0.41],
        "holdout_score": 0.42, "holdout_rows": 24, "train_rows": 96,
        "settings": {"rows": 3, "columns": 4, "epochs": 3}}))
    return study, model, frame


def _check(text: str):
    parsed = _parse(text)
    assert parsed.bad == [] and parsed.stack == [] and parsed.external == []
    assert parsed.sections == list(MAP_SECTIONS)
    caution = text.index("not a guarantee")
    assert text.index('<section id="summary"') < caution < text.index('<section id="groups"')
    assert "people, money or safety" in text and "independent validation" in text
    for svg in _svgs(text):
        assert svg.get("role") == "img" and svg.get("aria-label")
    _check_counts(" ".join(parsed.text))
    return parsed


def test_report_of_a_map_search(tmp_path):
    study, model, frame = _map_search(tmp_path)
    text = write_report(study, tmp_path / "r.html").read_text()
    parsed = _check(text)
    visible = " ".join(parsed.text)
    assert "Group the rows of pumps.csv without a target, with a self-organising map" in visible
    assert "The map and its groups" in visible
    assert f"groups agree across 5 seeds {number(0.93, 3)} (reproducible)" in visible
    # the held-out measures and the stability result in words
    assert "quantisation error" in visible and number(0.412) in visible and "topographic error" in visible
    assert stability_words(STABILITY) in visible
    assert (f"adjusted Rand index of {number(0.93, 3)} on average (lowest pair {number(0.88, 3)}"
            in visible)
    assert "Verdict: reproducible" in visible and "common practice" in visible
    # group sizes: every row of the data file, counted per group (reference: the model's own
    # placement of the file's rows, counted with numpy)
    groups = model.predict(frame)["group"].to_numpy()
    sizes = np.bincount(groups, minlength=3)
    assert f"Every one of the {len(frame)} rows of the data file" in visible
    section = text[text.index('<section id="groups"'):text.index('<section id="data"')]
    units = np.bincount(model.record.unit_group, minlength=3)
    for j in range(3):
        assert re.search(rf'<td class="num">{j}</td><td class="num">{units[j]}</td>'
                         rf'<td class="num">{sizes[j]}</td>', section), j
    # profiles: column means per group in original units (reference: pandas groupby)
    means = frame.assign(g=groups).groupby("g")[["inlet_bar", "motor_amp", "casing_c"]].mean()
    for col in means.columns:
        row = re.search(rf"<td>{col}</td>((?:<td[^>]*>[^<]*</td>)+)</tr>", section).group(1)
        cells = re.findall(r">([^<]*)</td>", row)
        assert cells == [number(float(means.loc[j, col])) for j in range(3)], col
    assert "state (label, not used in training)" in visible
    assert "label (shown beside the groups, not used in training)" in visible
    # the U-matrix: a well-formed SVG with real text, a hit count per unit that adds up
    umatrix = [s for s in _svgs(text) if "U-matrix" in s.get("aria-label")]
    assert len(umatrix) == 1
    words = _svg_words(umatrix[0])
    assert "U-height" in words and all(f"group {j}" in words for j in range(3))
    hits = np.bincount(model.predict(frame)["unit"], minlength=12)
    ET.fromstring(ET.tostring(umatrix[0]))
    assert "U-matrix (Ultsch 1990)" in visible and sum(hits) == len(frame)
    assert "Predict" not in visible.split("The map and its groups")[0]


def test_report_without_the_data_file_draws_profiles_from_prototypes(tmp_path):
    study, model, frame = _map_search(tmp_path, "som_hex", with_rows=False, label=False)
    text = write_report(study, tmp_path / "r.html").read_text()
    parsed = _check(text)
    visible = " ".join(parsed.text)
    assert "Rows per group not counted: the data file cannot be read from here." in visible
    assert "These profiles come from the prototypes, not from rows" in visible
    # reference: the mean prototype of group 0 through the inverse of the standard scaling
    state = model.preprocessor.to_state()
    rec = model.record
    mean0 = rec.prototypes[rec.unit_group == 0].mean(axis=0)[0] * state["scale"][0] + state["center"][0]
    assert number(float(mean0)) in visible
    assert any("U-matrix" in s.get("aria-label") for s in _svgs(text))


@pytest.mark.parametrize("kind", ["competitive", "hebbian"])
def test_report_of_other_map_families(tmp_path, kind):
    study, model, frame = _map_search(tmp_path, kind)
    text = write_report(study, tmp_path / "r.html").read_text()
    visible = " ".join(_check(text).text)
    assert not any("U-matrix" in s.get("aria-label") for s in _svgs(text))
    if kind == "hebbian":
        assert "The components" in visible and "component 2" in visible
    else:
        assert "no grid, so there is no U-matrix" in visible


def test_report_of_a_map_search_without_its_model(tmp_path):
    study, _, _ = _map_search(tmp_path)
    (tmp_path / "pumps_out" / "model.npz").unlink()
    text = write_report(study, tmp_path / "r.html").read_text()
    visible = " ".join(_check(text).text)
    assert "The saved winner (model.npz beside winner.json) was not found" in visible
    assert stability_words(None).startswith("Stability across seeds: not measured")
    assert "Stability across seeds: not measured" in visible     # winner.json holds none here


def test_scores_missing_from_the_model_come_from_winner_json(tmp_path):
    study, model, _ = _map_search(tmp_path)
    out = tmp_path / "pumps_out"
    save_bundle(dataclasses.replace(model, scores={"cv_mean": 0.40}), out / "model.npz")
    summary = json.loads((out / "winner.json").read_text())
    summary.update(stability=STABILITY, holdout_measures=MEASURES, picked=True)
    (out / "winner.json").write_text(json.dumps(summary))
    visible = " ".join(_check(write_report(study, tmp_path / "r.html").read_text()).text)
    assert stability_words(STABILITY) in visible and number(0.412) in visible
    assert "This is the trial you picked" in visible


def test_a_map_whose_units_are_their_own_groups():
    """A 6 x 8 hexagonal map without merged groups: no borders, no group names on the picture,
    one hit count per unit (they add up to the rows)."""
    from labbench.export.report_maps import u_matrix_picture
    from labbench.maps import PrototypeRecord

    rng = np.random.default_rng(4)
    record = PrototypeRecord("som", rng.normal(size=(48, 3)), None, (6, 8), "hexagonal")
    hits = rng.integers(0, 9, 48)
    svg = ET.fromstring(u_matrix_picture(record, hits))
    words = _svg_words(svg)
    assert "group" not in words and "U-height" in words
    from collections import Counter

    numbers = Counter(int(w) for w in words.split() if w.isdigit())   # hit counts (+ axis ticks)
    assert not Counter(hits.tolist()) - numbers                           # every unit's count drawn
