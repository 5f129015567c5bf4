"""Hand-off of map and group models: bundle = numpy-only script = ONNX (onnxruntime), the
``labbench predict`` table, and a corpus of tampered bundles.

Outside references named at each check: scipy.spatial.distance.cdist (distances), scikit-learn's
KMeans.predict (best units of k-means prototypes), scikit-learn's PCA.transform (projection),
onnxruntime (the ONNX graph), minisom's distance_map (the U-matrix).
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from labbench.cli import main
from labbench.data import read_csv
from labbench.errors import BundleError
from labbench.export import export_onnx, load_bundle, save_bundle, write_snippet
from labbench.export.bundle import bundle_arrays
from labbench.families import maps_export
from labbench.maps import PrototypeRecord
from maps_support import (FEATURES, KINDS_OF_MODEL, invented_rows, make_model,  # noqa: F401
                          map_families)

pytestmark = pytest.mark.usefixtures("map_families")


@pytest.fixture(scope="module")
def frames():
    return invented_rows(150, 1), invented_rows(40, 2)


def _feeds(session, frame: pd.DataFrame) -> dict:
    names = json.loads(session.get_modelmeta().custom_metadata_map["inputs"])
    feeds = {}
    for col in FEATURES:
        values = frame[[col]]
        if col == "shift":
            feeds[names[col]] = values.fillna("").to_numpy().astype(str)
        else:
            feeds[names[col]] = values.to_numpy(np.float64)
    return feeds


@pytest.mark.parametrize("kind", KINDS_OF_MODEL)
def test_bundle_script_and_onnx_agree(kind, frames, tmp_path):
    ort = pytest.importorskip("onnxruntime")       # reference runtime: onnxruntime
    train, new = frames
    model = make_model(kind, train)
    folder = tmp_path / "out"
    bundle = save_bundle(model, folder / "model.npz")
    loaded = load_bundle(bundle)
    assert loaded.task == "unsupervised" and loaded.family == model.family
    assert loaded.classes is None and loaded.target == "" and loaded.target_scaler is None
    want = model.predict(new)
    got = loaded.predict(new)
    pd.testing.assert_frame_equal(got, want)            # bit for bit after the round trip
    assert list(got.index) == list(new.index)

    # 1. the numpy-only script, run as a user would (no PYTHONPATH: it needs nothing of labbench)
    data = tmp_path / "new rows.csv"
    new.iloc[:, ::-1].to_csv(data, index=False)
    script = write_snippet(bundle)
    out = tmp_path / "script.csv"
    env = {"PATH": "/usr/bin:/bin"}
    done = subprocess.run([sys.executable, str(script), str(data), str(out)], capture_output=True,
                          text=True, cwd=tmp_path, timeout=120, env=env)
    assert done.returncode == 0, done.stderr
    by_script = pd.read_csv(out, dtype={"reading_id": str})
    same = read_csv(data)                          # the file as labbench reads it
    reference = loaded.predict(same)
    assert list(by_script.columns) == ["reading_id"] + list(reference.columns)
    assert list(by_script["reading_id"]) == list(new["reading_id"])

    # 2. ONNX through onnxruntime
    session = ort.InferenceSession(str(export_onnx(loaded, folder / "model.onnx")))
    feeds = _feeds(session, new)
    outputs = [o.name for o in session.get_outputs()]
    results = dict(zip(outputs, session.run(outputs, feeds)))
    scaled = loaded.preprocessor.transform(new.loc[:, list(FEATURES)])
    if kind == "hebbian":
        assert outputs == ["components"]
        np.testing.assert_allclose(results["components"], loaded.output(new), atol=1e-5, rtol=0)
        for j in range(2):
            np.testing.assert_allclose(by_script[f"component_{j + 1}"], reference[f"component_{j + 1}"],
                                       atol=1e-5, rtol=0)
        from sklearn.decomposition import PCA          # reference: scikit-learn's PCA projection

        pca = PCA(n_components=2).fit(loaded.preprocessor.transform(train.loc[:, list(FEATURES)]))
        np.testing.assert_allclose(reference.to_numpy(), pca.transform(scaled) + pca.mean_ @ pca.components_.T,
                                   atol=1e-10)
        return
    assert outputs == ["distances", "unit", "group", "distance"]
    assert results["unit"].dtype == np.int64 and results["group"].dtype == np.int64
    np.testing.assert_allclose(results["distances"], loaded.output(new), atol=1e-5, rtol=0)
    for frame in (by_script, pd.DataFrame({k: results[k] for k in ("unit", "group", "distance")})):
        assert list(frame["unit"]) == list(reference["unit"])          # ties: the lowest number
        assert list(frame["group"]) == list(reference["group"])
        np.testing.assert_allclose(frame["distance"], reference["distance"], atol=1e-5, rtol=0)
    # reference: scipy's cdist gives the same distances; argmin's first index is the unit
    from scipy.spatial.distance import cdist

    d = cdist(scaled, loaded.record.prototypes)
    np.testing.assert_allclose(loaded.output(new), d, atol=1e-9)
    assert list(reference["unit"]) == list(np.argmin(d, axis=1))
    assert list(reference["group"]) == list(loaded.record.unit_group[np.argmin(d, axis=1)])
    if kind == "neural_gas":          # the duplicated unit 5 of unit 2 never wins a tie
        assert (reference["unit"] == 2).any() and not (reference["unit"] == 5).any()
        assert not (results["unit"] == 5).any()
    if kind == "competitive":         # reference: scikit-learn's KMeans assigns the same centres
        from sklearn.cluster import KMeans

        km = KMeans(n_clusters=5, n_init=10, random_state=0).fit(
            loaded.preprocessor.transform(train.loc[:, list(FEATURES)]))
        assert list(reference["unit"]) == list(km.predict(scaled))


def test_ties_break_to_the_lowest_unit_everywhere(frames, tmp_path):
    """Every row equally far from every unit (all prototypes identical): unit 0 everywhere."""
    ort = pytest.importorskip("onnxruntime")       # reference runtime: onnxruntime
    train, new = frames
    model = make_model("competitive", train)
    same = PrototypeRecord("competitive", np.tile(model.record.prototypes[:1], (4, 1)), [0, 1, 2, 3])
    import dataclasses

    model = dataclasses.replace(model, weights=same)
    bundle = save_bundle(model, tmp_path / "model.npz")
    session = ort.InferenceSession(str(export_onnx(model, tmp_path / "model.onnx")))
    unit, group = session.run(["unit", "group"], _feeds(session, new))
    assert set(unit.tolist()) == {0} and set(group.tolist()) == {0}
    assert set(model.predict(new)["unit"]) == {0}
    data = tmp_path / "rows.csv"
    new.to_csv(data, index=False)
    out = tmp_path / "s.csv"
    done = subprocess.run([sys.executable, str(write_snippet(bundle)), str(data), str(out)],
                          capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    assert set(pd.read_csv(out)["unit"]) == {0}


def test_onnx_description_names_the_map_outputs(frames, tmp_path):
    onnx = pytest.importorskip("onnx")
    train, _ = frames
    model = make_model("som_hex", train)
    proto = onnx.load(str(export_onnx(model, tmp_path / "m.onnx")))
    doc = proto.doc_string
    assert "self-organising map of 12 units on a 4 x 3 hexagonal grid in 3 group(s)" in doc
    for word in ("distances [N, 12]", "unit [N] (int64)", "group [N] (int64)", "distance [N]",
                 "row = unit // 3", "not a guarantee", "independent validation"):
        assert word in doc, word
    assert "predicts" not in doc and "label [N]" not in doc
    heb = proto = onnx.load(str(export_onnx(make_model("hebbian", train), tmp_path / "h.onnx")))
    assert "components [N, 2]" in heb.doc_string and "not a guarantee" in heb.doc_string


def test_an_input_column_named_like_an_output_gets_a_suffix(tmp_path):
    ort = pytest.importorskip("onnxruntime")       # reference runtime: onnxruntime
    from labbench.data import Preprocessor
    from labbench.model import TrainedModel

    frame = pd.DataFrame({"group": [1.0, 2.0, 3.0, 4.0], "distance": [0.5, 0.1, 0.3, 0.2]})
    pre = Preprocessor(["group", "distance"], []).fit(frame)
    record = PrototypeRecord("competitive", pre.transform(frame)[[0, 3]])
    model = TrainedModel(preprocessor=pre, weights=record, task="unsupervised", target="",
                         features=("group", "distance"), kinds={"group": "numeric", "distance": "numeric"},
                         classes=None)
    session = ort.InferenceSession(str(export_onnx(model, tmp_path / "m.onnx")))
    assert [i.name for i in session.get_inputs()] == ["group_2", "distance_2"]
    unit, = session.run(["unit"], {"group_2": frame[["group"]].to_numpy(), "distance_2": frame[["distance"]].to_numpy()})
    assert unit.tolist() == model.predict(frame)["unit"].tolist()
    assert unit[0] == 0 and unit[3] == 1           # each prototype's own row


def test_labbench_predict_writes_unit_group_distance(frames, tmp_path, capsys):
    train, new = frames
    for kind, columns in (("som_rect", ["unit", "group", "distance"]),
                          ("hebbian", ["component_1", "component_2"])):
        model = make_model(kind, train)
        bundle = save_bundle(model, tmp_path / f"{kind}.npz")
        data = tmp_path / "rows.csv"
        new.assign(notes="x").to_csv(data, index=False)
        out = tmp_path / f"{kind}_pred.csv"
        assert main(["predict", str(bundle), str(data), "-o", str(out)]) == 0
        got = pd.read_csv(out, dtype={"reading_id": str})
        assert list(got.columns) == ["reading_id"] + columns
        want = model.predict(read_csv(data))
        for col in columns:
            np.testing.assert_allclose(got[col], want[col], rtol=1e-12)
        if kind == "som_rect":
            assert got["unit"].dtype.kind == "i" and got["group"].dtype.kind == "i"
            assert set(got["group"]) <= {0, 1, 2}
        assert "wrote 40 prediction(s)" in capsys.readouterr().out


def test_predict_bad_input_is_one_line(frames, tmp_path, capsys):
    train, new = frames
    bundle = save_bundle(make_model("som_rect", train), tmp_path / "m.npz")
    data = tmp_path / "short.csv"
    new.drop(columns=["casing_c"]).to_csv(data, index=False)
    out = tmp_path / "p.csv"
    assert main(["predict", str(bundle), str(data), "-o", str(out)]) == 2
    err = [line for line in capsys.readouterr().err.splitlines() if line.strip()]
    assert len(err) == 1 and "casing_c" in err[0] and str(data) in err[0]
    assert not out.exists()
    bad = tmp_path / "text.csv"
    new.assign(inlet_bar=["high"] + ["1.0"] * (len(new) - 1)).to_csv(bad, index=False)
    assert main(["predict", str(bundle), str(bad), "-o", str(out)]) == 2
    err = [line for line in capsys.readouterr().err.splitlines() if line.strip()]
    assert len(err) == 1 and "inlet_bar" in err[0] and "line 2" in err[0]
    assert not out.exists()


def test_predict_proba_is_refused_for_a_map(frames):
    model = make_model("competitive", frames[0])
    with pytest.raises(BundleError, match="not class probabilities; use predict"):
        model.predict_proba(frames[1])


# -- tampered bundles ----------------------------------------------------------------------------

def _write(path: Path, arrays: dict) -> Path:
    with open(path, "wb") as handle:
        np.savez(handle, **arrays)
    return path


def _meta(arrays: dict, change) -> dict:
    meta = json.loads(arrays["meta"].tobytes().decode())
    change(meta)
    return {**arrays, "meta": np.frombuffer(json.dumps(meta).encode(), np.uint8)}


def _set(path, value):
    def change(meta):
        target = meta
        for key in path[:-1]:
            target = target[key]
        target[path[-1]] = value
    return change


@pytest.mark.parametrize("kind, change, expected", [
    ("som_rect", lambda a: a.pop("prototypes"), "lacks the entry 'prototypes'"),
    ("som_rect", lambda a: a.update(prototypes=a["prototypes"][:, :-1]), "'prototypes' has 5 columns but"),
    ("som_rect", lambda a: a.update(prototypes=a["prototypes"].astype(np.float32)), "expected float64"),
    ("som_rect", lambda a: a.update(prototypes=np.full_like(a["prototypes"], np.inf)), "NaN or infinite"),
    ("som_rect", lambda a: a.update(prototypes=a["prototypes"][:-1]), "'maps.units' says 12"),
    ("som_rect", lambda a: a.pop("unit_group"), "lacks the entry 'unit_group'"),
    ("som_rect", lambda a: a.update(unit_group=a["unit_group"][:-1]), "one group per unit"),
    ("som_rect", lambda a: a.update(unit_group=a["unit_group"] + 5), "outside 0 to 2"),
    ("som_rect", lambda a: a.update(unit_group=np.minimum(a["unit_group"], 1)), "group(s) 2 without a unit"),
    ("som_rect", lambda a: a.update(unit_group=a["unit_group"].astype(np.float64)), "expected int64"),
    ("som_rect", lambda a: a.update(components=np.ones((1, 6))), "must not hold 'components'"),
    ("hebbian", lambda a: a.pop("components"), "lacks the entry 'components'"),
    ("hebbian", lambda a: a.update(components=a["components"][:, 1:]), "'components' has 5 columns"),
])
def test_tampered_entries(kind, change, expected, frames, tmp_path):
    arrays = dict(bundle_arrays(make_model(kind, frames[0])))
    change(arrays)
    path = _write(tmp_path / "tampered.npz", arrays)
    with pytest.raises(BundleError) as err:
        load_bundle(path)
    text = str(err.value)
    assert "\n" not in text and text.startswith(str(path)) and expected in text
    assert text.endswith("save the model again from labbench")


@pytest.mark.parametrize("kind, change, expected", [
    ("som_rect", _set(["maps", "shape"], [4, 4]), "4 x 4 does not match the 12 prototypes"),
    ("som_rect", _set(["maps", "shape"], None), "needs its grid"),
    ("som_rect", _set(["maps", "topology"], "triangular"), "'maps.topology' is 'triangular'"),
    ("som_rect", _set(["maps", "groups"], 0), "'maps.groups' is 0"),
    ("som_rect", _set(["maps", "kind"], "components"), "expected 'prototypes'"),
    ("som_rect", lambda m: m.pop("maps"), "lacks the 'maps' entry"),
    ("som_rect", _set(["task"], "regression"), "does not fit the som family, which learns without a target"),
    ("som_rect", _set(["classes"], ["a", "b"]), "must not list classes"),
    ("competitive", _set(["maps", "topology"], "hexagonal"), "topology' is given without a grid"),
    ("hebbian", _set(["maps", "rule"], "plain"), "'maps.rule' is 'plain'"),
    ("hebbian", _set(["maps", "components"], 3), "'maps.components' says 3"),
])
def test_tampered_metadata(kind, change, expected, frames, tmp_path):
    arrays = _meta(dict(bundle_arrays(make_model(kind, frames[0]))), change)
    path = _write(tmp_path / "meta.npz", arrays)
    with pytest.raises(BundleError) as err:
        load_bundle(path)
    text = str(err.value)
    assert "\n" not in text and str(path) in text and expected in text


def test_a_network_bundle_cannot_claim_no_target(trained, tmp_path):
    arrays = _meta(dict(bundle_arrays(trained["binary"]["model"])),
                   lambda m: m.update(task="unsupervised", classes=None))
    path = _write(tmp_path / "net.npz", arrays)
    with pytest.raises(BundleError, match="does not fit the network family, which needs a target"):
        load_bundle(path)


def test_bundle_holds_plain_arrays_and_the_grid(frames, tmp_path):
    model = make_model("som_hex", frames[0])
    path = save_bundle(model, tmp_path / "m.npz")
    with np.load(path, allow_pickle=False) as f:
        kinds = {key: f[key].dtype.kind for key in f.files}
        meta = json.loads(f["meta"].tobytes().decode())
        assert f["unit_group"].dtype == np.int64 and f["prototypes"].dtype == np.float64
    assert set(kinds.values()) <= {"f", "U", "u", "i"}
    assert meta["format_version"] == 3 and meta["family"] == "som" and meta["task"] == "unsupervised"
    assert meta["maps"] == {"kind": "prototypes", "units": 12, "groups": 3, "shape": [4, 3],
                            "topology": "hexagonal", "extra": {"training": "batch"}}
    assert "not a guarantee" in meta["caution"]
    loaded = load_bundle(path).record
    assert loaded.shape == (4, 3) and loaded.topology == "hexagonal" and loaded.extra == {"training": "batch"}


# -- the U-matrix --------------------------------------------------------------------------------

@pytest.mark.parametrize("topology", ["rectangular", "hexagonal"])
def test_u_matrix_matches_minisom(topology):
    """Reference: minisom's MiniSom.distance_map(scaling="mean") (mean distance to the grid
    neighbours, divided by its maximum); minisom indexes weights[x = column, y = row] and shifts
    its even rows against the odd ones as labbench's hexagonal grid does."""
    minisom = pytest.importorskip("minisom")
    rows, cols, d = 5, 4, 3
    P = np.random.default_rng(7).normal(size=(rows * cols, d))
    record = PrototypeRecord("som", P, None, (rows, cols), topology)
    som = minisom.MiniSom(cols, rows, d, topology=topology, random_seed=0)
    som._weights = P.reshape(rows, cols, d).transpose(1, 0, 2).copy()
    reference = som.distance_map(scaling="mean").T            # back to [row, column]
    mine = maps_export.u_matrix(record)
    assert mine.shape == (rows, cols)
    np.testing.assert_allclose(mine / mine.max(), reference, rtol=1e-12)
    # and by hand for one inner unit of the rectangular grid: its 8 surrounding units
    if topology == "rectangular":
        u = 1 * cols + 1
        nb = [r * cols + c for r in (0, 1, 2) for c in (0, 1, 2) if (r, c) != (1, 1)]
        assert mine[1, 1] == pytest.approx(np.linalg.norm(P[nb] - P[u], axis=1).mean(), rel=1e-12)
