"""A real search of a map family driven through the window, from the invented pump readings (no
target; the pump's recorded state as the label) to the map on step 4."""

from __future__ import annotations

import numpy as np
import pytest

from labbench.gui.data_page import NO_TARGET
from tests.gui.conftest import ROOT

pytest.importorskip("labbench.families.maps")      # the map families
pytest.importorskip("labbench.search.front")       # tables without a target and the trade-off front
pytestmark = pytest.mark.slow
LONG = 180_000     # ms; generous, the machine is shared


def _pumps(tmp_path, rows=300):
    src = ROOT / "demo_sets" / "pumps.csv"
    if not src.exists():
        pytest.skip("the pumps demo set is not in this checkout")
    lines = src.read_text(encoding="utf-8").splitlines(keepends=True)
    out = tmp_path / "pumps.csv"
    out.write_text("".join(lines[:rows + 1]), encoding="utf-8")
    return out


def test_a_som_search_ends_on_its_map(make_window, tmp_path, qtbot):
    from labbench.maps.record import PrototypeRecord

    w = make_window()
    assert w.open_path(str(_pumps(tmp_path)))
    # picking the family on the Search page drops the target on the Data page
    sp = w.space
    sp.family.setCurrentIndex(sp.family.findData("som"))
    assert w.data.target_box.currentText() == NO_TARGET
    w.data.label_box.setCurrentText("state")
    for name, _kind, use in w.data._row_widgets():
        if name == "reading_id":
            use.setChecked(False)
    sp.rows["rows"].set_raw(3)
    sp.rows["cols"].set_raw({"choices": [3, 4]})
    sp.rows["epochs"].set_raw(4)
    sp.rows["groups"].set_raw(3)
    sp.trials.setValue(3)
    sp.folds.setValue(2)
    sp.seed_spread.setValue(2)
    sp.pruner.setCurrentText("none")
    w.spec_path = str(tmp_path / "pumps.toml")
    assert not w.validate(), w.problem_label.toolTip()
    assert w.watch.curves.plot.getAxis("left").labelText == "quantisation error"
    assert w.start()
    qtbot.waitUntil(lambda: not w.session.running and w.session.synced, timeout=LONG)
    model = (w.session.result or {}).get("model")
    assert model is not None and isinstance(model.record, PrototypeRecord)

    # the window moved on to its map: every row of the table on the winner's grid
    assert not w.map_step.isHidden() and w.stack.currentWidget() is w.maps
    page = w.maps
    rows, cols = model.record.shape
    assert rows == 3 and cols in (3, 4)
    assert page.distances.grid.cells.polygons.shape[0] == rows * cols
    assert page.hits.hits.sum() == 300 and len(page.data.X) == 300
    assert page.data.label_name == "state"
    stab = model.scores.get("stability") or {}
    if stab.get("verdict"):
        assert str(stab["verdict"]).capitalize() in page.head.text()
    # the trade-off front of the stored trials, with the winner ringed; picking another trial
    # refits it (labbench run --pick) and draws its map
    front = page.front
    qtbot.waitUntil(lambda: bool(front.front), timeout=30_000)
    assert 1 <= len(front.front) <= 3 and len(front.every) == 3
    assert front.table.rowCount() == len(front.front)
    assert front.shown == w.session.book.winner["trial_number"]
    others = [p.number for p in front.every if p.number != front.shown]
    w.take.use_processes = False
    assert w.pick_map_trial(others[0])
    assert (tmp_path / "pumps_out" / f"trial_{others[0]}" / "model.npz").exists()
    picked = w.map_model()
    assert picked is not model and page.data.record is picked.record
    assert f"trial {others[0]}, picked from the trade-off" in page.head.text()
    # opened again later: the map comes from the bundle the search left beside winner.json
    w2 = make_window("again.ini")
    assert w2.open_path(str(tmp_path / "pumps.toml"))
    qtbot.waitUntil(lambda: w2.maps.data is not None, timeout=30_000)
    assert not w2.map_step.isHidden()
    assert w2.maps.data.record.shape == model.record.shape
    assert np.allclose(w2.maps.data.record.prototypes, model.record.prototypes, atol=1e-12)
    assert w2.maps.hits.hits.sum() == 300
    # the saved spec is a map spec: no target, the label, the family
    text = (tmp_path / "pumps.toml").read_text(encoding="utf-8")
    assert 'family = "som"' in text and 'label = "state"' in text and "target" not in text.split("[evaluation]")[0]


@pytest.mark.parametrize("family", ["competitive", "neural_gas", "hebbian"])
def test_the_other_families_on_iris_with_its_species_hidden(family, make_window, iris_csv, qtbot):
    # Fisher's iris (scikit-learn's copy): the species is the label, never trained on
    from labbench.maps.record import PrototypeRecord, SubspaceRecord

    w = make_window()
    assert w.open_path(str(iris_csv))
    sp = w.space
    sp.family.setCurrentIndex(sp.family.findData(family))
    w.data.label_box.setCurrentText("species")
    assert w.data.target() is None
    sp.rows["epochs"].set_raw(3)
    sp.trials.setValue(2)
    sp.folds.setValue(2)
    sp.seed_spread.setValue(0)
    sp.pruner.setCurrentText("none")
    w.spec_path = str(iris_csv.with_suffix(".toml"))
    assert not w.validate(), w.problem_label.toolTip()
    assert w.start()
    qtbot.waitUntil(lambda: not w.session.running and w.session.synced, timeout=LONG)
    model = (w.session.result or {}).get("model")
    assert model is not None and model.family == family
    page = w.maps
    assert w.stack.currentWidget() is page and page.data is not None and len(page.data.X) == 150
    assert "not measured" in page.head.text()                 # no seeds asked for
    if family == "hebbian":
        assert isinstance(model.record, SubspaceRecord)
        assert page.components.table.columnCount() == model.record.n_components
        assert "species:" in page.projection.hint.text()
    else:
        assert isinstance(model.record, PrototypeRecord)
        assert list(page.hits.bars.opts["height"]) == list(page.hits.hits) and page.hits.hits.sum() == 150
        assert page.groups.cell_text("species (label)", 0).endswith("(33 %)")   # 50 of each species
