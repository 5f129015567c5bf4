"""The views of a map or group winner (labbench.gui.map_page), drawn offscreen from records built
in tests/gui/map_fixtures.py, and step 4 of the real window."""

from __future__ import annotations

import numpy as np
import pytest

from labbench.gui import map_numbers as mn

from map_fixtures import (STABILITY, competitive_record, hebbian_record, scaled, sensor_rows,
                          som_record)

NAMES = ("temperature", "vibration", "current", "noise")
KINDS = {n: "numeric" for n in NAMES} | {"shift": "categorical"}


@pytest.fixture
def page(qtbot):
    from labbench.gui.app import make_app
    from labbench.gui.map_page import MapPage

    make_app()
    p = MapPage()
    p.resize(1200, 760)
    qtbot.addWidget(p)
    p.show()
    return p


def _data(record, n=300):
    frame, label = sensor_rows(n)
    X, centre, scale = scaled(frame)
    return mn.MapData(record, X, frame, NAMES, centre, scale, KINDS, label, "state")


def test_a_hexagonal_map_is_drawn_cell_by_cell(page):
    frame, _ = sensor_rows(300)
    X, _c, _s = scaled(frame)
    data = _data(som_record(X, 6, 8, "hexagonal", groups=3))
    page.show_model(data, {"holdout_measures": {"quantisation_error": 0.412, "topographic_error": 0.05},
                           "stability": STABILITY})
    rec = data.record
    assert [p.title for p in page.visible_panels()] == ["Unit distances", "Rows per unit", "One column over the map",
                                                        "The groups", "The rows on two axes"]
    # one hexagon per unit, the U-matrix values are the helper's
    assert page.distances.grid.cells.polygons.shape == (48, 6, 2)
    assert page.distances.values == pytest.approx(mn.u_matrix(rec.prototypes, (6, 8), "hexagonal"))
    # the group outlines are drawn (3 groups on 48 units)
    xs, _ys = page.distances.grid.borders.getData()
    assert xs is not None and len(xs) > 0
    # the hit counts written in the cells add up to the rows
    words = [w.textItem.toPlainText() for w in page.hits.grid.words]
    assert sum(int(w) for w in words) == 300 and page.hits.hits.sum() == 300
    # the head says what was trained and the stability verdict in words
    head = page.head.text()
    assert "6 × 8 hexagonal grid, 48 units in 3 groups" in head
    assert "quantisation error 0.412" in head and "Not reproducible." in head
    assert "different seeds give different groups" in head


def test_a_plane_is_in_the_columns_own_units_and_follows_the_chooser(page, qtbot):
    frame, _ = sensor_rows(300)
    X, _c, _s = scaled(frame)
    data = _data(som_record(X, 5, 5, "rectangular", groups=2))
    page.show_model(data)
    assert [page.plane.chooser.itemText(i) for i in range(page.plane.chooser.count())] == list(NAMES)
    page.plane.chooser.setCurrentText("noise")
    assert page.plane.values == pytest.approx(data.plane(3))
    # prototypes of the noise column lie within the noise readings (dB-like units, not z-scores)
    assert frame["noise"].min() - 1 <= page.plane.values.min() < page.plane.values.max() <= frame["noise"].max() + 1
    assert page.plane.grid.cells.polygons.shape == (25, 4, 2)
    assert [w.textItem.toPlainText() for w in page.plane.grid.key_words] == \
        [f"{page.plane.values.min():.4g}", f"{page.plane.values.max():.4g}"]


def test_the_groups_table_shows_sizes_profiles_and_the_label(page):
    frame, label = sensor_rows(300)
    X, _c, _s = scaled(frame)
    data = _data(som_record(X, 6, 8, "hexagonal", groups=3))
    page.show_model(data)
    _unit, group, _d = data.assignment()
    sizes = np.bincount(group, minlength=3)
    g = page.groups.order[0]
    assert sizes[g] == sizes.max()
    assert page.groups.cell_text("rows", 0) == "300"
    assert page.groups.cell_text("rows", 1) == f"{sizes[g]} ({sizes[g] / 300 * 100:.0f} %)"
    mean = frame["temperature"][group == g].mean()
    assert page.groups.cell_text("temperature", 1) == f"{mean:.4g}"
    # the invented states separate cleanly: each group is one state
    assert page.groups.cell_text("state (label)", 1).endswith("(100 %)")
    assert page.groups.cell_text("shift", 0) in ("day", "night")


def test_the_two_axes_view_draws_rows_prototypes_and_grid_links(page):
    frame, _ = sensor_rows(300)
    X, _c, _s = scaled(frame)
    data = _data(som_record(X, 4, 5, "rectangular", groups=3))
    page.show_model(data)
    proj = page.projection
    assert proj.n_drawn == 300 and len(proj.rows.data) == 300
    assert len(proj.protos.data) == 20
    xs, _ys = proj.mesh.getData()
    assert len(xs) == 2 * len(mn.mesh_pairs((4, 5), "rectangular"))
    assert "principal axis" in proj.plot.getAxis("bottom").labelText


def test_competitive_units_get_bars_and_no_grid_views(page):
    frame, _ = sensor_rows(300)
    X, _c, _s = scaled(frame)
    data = _data(competitive_record(X, 4))
    page.show_model(data)
    assert [p.title for p in page.visible_panels()] == ["Rows per unit", "The groups", "The rows on two axes"]
    heights = page.hits.bars.opts["height"]
    unit, _g, _d = data.assignment()
    assert list(heights) == list(np.bincount(unit, minlength=4))
    xs, _ys = page.projection.mesh.getData()
    assert xs is None or len(xs) == 0
    assert "4 units in 4 groups" in page.head.text()
    # a map shown next is drawn as a grid again, first row on top, no axes
    page.show_model(_data(som_record(X, 3, 4, "rectangular", groups=2)))
    vb = page.hits.grid.plot.getViewBox()
    assert vb.yInverted() and not page.hits.grid.plot.getAxis("left").isVisible()
    assert page.hits.bars.scene() is None and len(page.hits.grid.words) > 0


def test_hebbian_components_and_their_projection(page):
    frame, _ = sensor_rows(200)
    X, _c, _s = scaled(frame)
    rec = hebbian_record(X, 2)
    page.show_model(_data(rec, 200), {"stability": {}})
    assert [p.title for p in page.visible_panels()] == ["The learned components", "The rows on two axes"]
    tab = page.components.table
    assert tab.columnCount() == 2 and tab.rowCount() == 4
    assert tab.item(2, 1).text() == f"{rec.components[1, 2]:+.3f}"
    assert "Sanger's rule" in page.components.hint.text()
    assert page.projection.n_drawn == 200
    assert page.projection.plot.getAxis("bottom").labelText == "component 1"
    assert "not measured" in page.head.text()


def test_a_map_picture_saves_with_its_title(page, tmp_path):
    frame, _ = sensor_rows(120)
    X, _c, _s = scaled(frame)
    page.show_model(_data(som_record(X, 4, 4, "hexagonal", groups=2), 120))
    out = page.distances.export(tmp_path / "distances.svg")
    text = out.read_text(encoding="utf-8")
    assert "Unit distances" in text and text.count("<path") + text.count("<polygon") > 10
    png = page.hits.export(tmp_path / "hits.png")
    assert png.stat().st_size > 5000


def test_a_map_without_groups_is_drawn_in_one_ink_and_by_the_label(page):
    frame, _ = sensor_rows(300)
    X, _c, _s = scaled(frame)
    rec = som_record(X, 5, 5, "rectangular", groups=3)
    rec.unit_group = np.arange(25)               # groups = 0: every unit its own group
    data = _data(rec)
    assert data.ungrouped
    page.show_model(data)
    xs, _ys = page.distances.grid.borders.getData()
    assert xs is None or len(xs) == 0            # no regions to outline
    fills = {f.name() for f, h in zip(page.hits.grid.cells.fills, page.hits.hits) if h == page.hits.hits.max()}
    assert len(fills) == 1                       # the busiest units share one colour
    assert "state:" in page.projection.hint.text()
    assert "busiest units" in page.groups.hint.text()


def test_numbers_leave_cells_too_small_to_hold_them(page, qtbot):
    frame, _ = sensor_rows(300)
    X, _c, _s = scaled(frame)
    page.show_model(_data(som_record(X, 12, 12, "hexagonal", groups=4)))
    grid = page.hits.grid
    assert len(grid.words) > 0
    page.resize(700, 500)                        # 144 hexagons in a third of 700 pixels
    qtbot.waitUntil(lambda: not grid.words_fit, timeout=3000)
    assert not any(w.isVisible() for w in grid.words)
    page.resize(2400, 1600)
    qtbot.waitUntil(lambda: grid.words_fit, timeout=3000)
    assert all(w.isVisible() for w in grid.words)
