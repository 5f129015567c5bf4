"""The pictures of a trained map or group model, each a ``Panel`` (title, key, save button).

* ``DistancePanel`` - the unit-distance map (U-matrix): paper inside a region, ink on the ridges,
  the groups' regions outlined;
* ``HitsPanel`` - rows per unit: each cell tinted in its group's colour by how many rows it takes
  (bars per unit for the families without a grid);
* ``PlanePanel`` - one input column over the map (a chooser), in the column's own units;
* ``ProjectionPanel`` - the rows on the first two principal axes, coloured by group, with the
  prototypes (and a map's grid links between neighbouring prototypes); for Hebbian features the
  rows on the first two learned components.

The numbers come from ``labbench.gui.map_numbers``; the group table and the Hebbian components are
in ``labbench.gui.map_tables``.
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtGui import QColor
from PySide6.QtWidgets import QComboBox

from labbench.gui import map_numbers as mn
from labbench.gui import theme
from labbench.gui.map_cells import GridPlot, key_stops
from labbench.gui.panel import Panel, centre_message, integer_axis, message_item
from labbench.gui.words import num
from labbench.palette import colours

MAX_POINTS = 4000       # rows drawn in the 2-D view (an even sample beyond; the picture says so)


def mix(a: str | QColor, b: str | QColor, share: float) -> QColor:
    ca, cb = QColor(a), QColor(b)
    s = min(1.0, max(0.0, share))
    return QColor(round(ca.red() * (1 - s) + cb.red() * s), round(ca.green() * (1 - s) + cb.green() * s),
                  round(ca.blue() * (1 - s) + cb.blue() * s))


def ink_on(fill: QColor, dark: bool = False) -> QColor:
    """Dark ink on a light fill, light paper on a dark one (whatever the window's palette)."""
    light = 0.299 * fill.red() + 0.587 * fill.green() + 0.114 * fill.blue() > 140
    c = colours(False)
    return QColor(c["ink"] if light else c["paper"])


def swatch(colour: str, text: str) -> str:
    return f"<span style='color:{colour}'><b>■</b></span>&nbsp;{text}"


class _GridPanel(Panel):
    """A panel holding one ``GridPlot`` (or a message when the model has no grid)."""

    def __init__(self, title: str, hint: str):
        super().__init__(title, hint, short=" ")
        self.hint.setTextFormat(Qt.TextFormat.RichText)
        self.grid = GridPlot()
        self.body.addWidget(self.grid)
        self.message = message_item("")
        self.grid.plot.addItem(self.message, ignoreBounds=True)

    def say(self, text: str | None) -> None:
        centre_message(self.grid.plot, self.message, text)


class DistancePanel(_GridPanel):
    def __init__(self):
        super().__init__("Unit distances", "How far each unit's prototype lies from its neighbours' on the "
                         "grid (the U-matrix, Ultsch 1990), in the scaled inputs. Cells in the paper's colour sit "
                         "inside a region of similar rows; cells in the ink's colour are ridges between "
                         "regions. Thick lines outline the groups.")
        self.values = np.zeros(0)

    def show_data(self, data: mn.MapData) -> None:
        rec = data.record
        t = theme.Theme.current()
        if not data.is_map:
            self.values = np.zeros(0)
            self.grid.draw(np.zeros((0, 4, 2)), np.zeros((0, 3)))
            self.say("Only a self-organising map has a grid; these units have no neighbours to compare.")
            self.hint.setText("no grid")
            return
        self.say(None)
        self.values = mn.u_matrix(rec.prototypes, rec.shape, rec.topology)
        stops = mn.distance_stops(t.dark)
        low, high = float(self.values.min()), float(self.values.max())
        polys = mn.cell_polygons(rec.shape, rec.topology)
        borders = mn.group_borders(rec.shape, rec.topology, rec.unit_group) if 1 < rec.n_groups < rec.n_units \
            else None
        self.grid.draw(polys, mn.ramp(self.values, stops), borders=borders,
                       key=(key_stops(stops), num(low), num(high), "mean distance to the neighbours"))
        self.hint.setText(f"{'bright' if t.dark else 'dark'}: a ridge between regions")


class HitsPanel(_GridPanel):
    def __init__(self):
        super().__init__("Rows per unit", "How many rows have each unit as their best-matching unit, written "
                         "in the cell; the cell is tinted in its group's colour, the stronger the more rows "
                         "it takes. Dotted cells take no row.")
        self.bars = pg.BarGraphItem(x=[], height=[], width=0.8)
        self.hits = np.zeros(0, dtype=int)

    def show_data(self, data: mn.MapData) -> None:
        rec = data.record
        t = theme.Theme.current()
        unit, _group, _d = data.assignment()
        self.hits = mn.hit_counts(unit, rec.n_units)
        group_col = mn.group_colours(rec.n_groups, t.dark)
        if data.ungrouped:          # every unit its own group: one ink, by the rows it takes
            group_col = [colours(t.dark)["complete"]] * rec.n_groups
        paper = colours(t.dark)["paper"]
        top = max(1, int(self.hits.max()))
        fills = [mix(paper, group_col[g], 0.12 + 0.78 * h / top) for g, h in zip(rec.unit_group, self.hits)]
        empty = self.hits == 0
        self.say(None)
        vb = self.grid.plot.getViewBox()
        if data.is_map:
            self.grid.plot.removeItem(self.bars)
            vb.invertY(True)                        # back from the bars of a family without a grid
            vb.setAspectLocked(True)
            self.grid.plot.hideAxis("bottom")
            self.grid.plot.hideAxis("left")
            polys = mn.cell_polygons(rec.shape, rec.topology)
            rgb = np.array([[c.red(), c.green(), c.blue()] for c in fills])
            words = [str(int(h)) if h else "" for h in self.hits]
            self.grid.draw(polys, rgb, words=words, word_colours=[ink_on(c, t.dark) for c in fills],
                           dashed=empty)
        else:
            self.grid.draw(np.zeros((0, 4, 2)), np.zeros((0, 3)))
            vb.invertY(False)
            vb.setAspectLocked(False)
            self.grid.plot.showAxis("bottom")
            self.grid.plot.showAxis("left")
            self.grid.plot.setLabel("bottom", "unit")
            self.grid.plot.setLabel("left", "rows")
            if self.bars.scene() is None:
                self.grid.plot.addItem(self.bars)
            self.bars.setOpts(x=np.arange(1, rec.n_units + 1), height=self.hits, width=0.8,
                              brushes=[pg.mkBrush(group_col[g]) for g in rec.unit_group],
                              pen=pg.mkPen(t.foreground, width=0.5))
            integer_axis(self.grid.plot.getAxis("bottom"), 1, rec.n_units)
            self.grid.plot.getViewBox().autoRange(padding=0.04)
        self.hint.setText(f"{len(data.X):,} rows on {rec.n_units} units, {int(empty.sum())} empty")


class PlanePanel(_GridPanel):
    def __init__(self):
        super().__init__("One column over the map", "The prototypes' values of one input column, in the "
                         "column's own units: amber where the column is high, slate blue where it is low. "
                         "Columns that change together paint the same regions. Pick the column above the map.")
        self.chooser = QComboBox()
        self.chooser.setToolTip("The input column painted on the map")
        self.chooser.setAccessibleName("Column shown on the map")
        self.chooser.currentIndexChanged.connect(self._draw)
        self.controls.addWidget(self.chooser)
        self.data: mn.MapData | None = None
        self.values = np.zeros(0)

    def show_data(self, data: mn.MapData) -> None:
        self.data = data
        keep = self.chooser.currentText()
        self.chooser.blockSignals(True)
        self.chooser.clear()
        self.chooser.addItems(list(data.names))
        i = self.chooser.findText(keep)
        self.chooser.setCurrentIndex(max(i, 0))
        self.chooser.blockSignals(False)
        self.chooser.setEnabled(data.is_map)
        self._draw()

    def _draw(self, *_a) -> None:
        data = self.data
        if data is None:
            return
        if not data.is_map:
            self.values = np.zeros(0)
            self.grid.draw(np.zeros((0, 4, 2)), np.zeros((0, 3)))
            self.say("Only a self-organising map has a grid to paint a column on; the group table "
                     "shows each group's values.")
            self.hint.setText("no grid")
            return
        self.say(None)
        rec, j = data.record, max(0, self.chooser.currentIndex())
        t = theme.Theme.current()
        self.values = data.plane(j)
        stops = mn.plane_stops(t.dark)
        low, high = float(self.values.min()), float(self.values.max())
        polys = mn.cell_polygons(rec.shape, rec.topology)
        borders = mn.group_borders(rec.shape, rec.topology, rec.unit_group) if 1 < rec.n_groups < rec.n_units \
            else None
        name = data.names[j]
        self.grid.draw(polys, mn.ramp(self.values, stops), borders=borders,
                       key=(key_stops(stops), num(low), num(high), name))
        self.hint.setText(" ")
        self.hint.setToolTip(f"{name}: from {num(low)} (slate blue) to {num(high)} (amber)")


class ProjectionPanel(Panel):
    def __init__(self):
        super().__init__("The rows on two axes", "Every row placed on the two directions along which the scaled "
                         "rows spread most (principal components), coloured by its group; the prototypes are "
                         "the ringed dots, a map's neighbouring prototypes joined by lines.", short=" ")
        self.hint.setTextFormat(Qt.TextFormat.RichText)
        self.widget = pg.PlotWidget()
        self.plot: pg.PlotItem = self.widget.getPlotItem()
        self.plot.setMenuEnabled(False)
        self.plot.hideButtons()
        self.body.addWidget(self.widget)
        self.mesh = pg.PlotDataItem(connect="pairs")
        self.rows = pg.ScatterPlotItem(size=5, pxMode=True)
        self.protos = pg.ScatterPlotItem(size=10, pxMode=True, symbol="o")
        self.mesh.setZValue(5)
        self.protos.setZValue(10)
        for item in (self.rows, self.mesh, self.protos):
            self.plot.addItem(item)
        self.widget.setMinimumSize(220, 180)
        self.n_drawn = 0

    def show_data(self, data: mn.MapData) -> None:
        t = theme.Theme.current()
        self.style_plot(self.plot, t)
        self.widget.setBackground(t.background)
        c = colours(t.dark)
        X = data.X
        pick = np.arange(len(X))
        if len(X) > MAX_POINTS:
            pick = np.linspace(0, len(X) - 1, MAX_POINTS).round().astype(int)
        rec = data.record
        if data.has_prototypes and data.ungrouped:
            rows, (protos,), share = mn.projection(X, rec.prototypes)
            self.rows.setData(rows[pick, 0], rows[pick, 1], brush=self._label_brushes(data, pick, c),
                              pen=None, size=5)
            self.protos.setData(protos[:, 0], protos[:, 1], brush=pg.mkBrush(c["paper"]),
                                pen=pg.mkPen(c["ink"], width=1.4), size=8)
            pairs = mn.mesh_pairs(rec.shape, rec.topology)
            self.mesh.setData(protos[pairs].reshape(-1, 2)[:, 0], protos[pairs].reshape(-1, 2)[:, 1],
                              pen=pg.mkPen(c["muted"], width=1.0))
            self._axes(share)
            self.hint.setText((self._label_key(data, c) or "the units are not merged into groups")
                              + self._sample_note(len(X), len(pick)))
        elif data.has_prototypes:
            rows, (protos,), share = mn.projection(X, rec.prototypes)
            _unit, group, _d = data.assignment()
            cols = mn.group_colours(rec.n_groups, t.dark)
            palette = [pg.mkBrush(mix(c["paper"], col, 0.8)) for col in cols]     # one brush per group
            brushes = [palette[g] for g in group[pick]]
            self.rows.setData(rows[pick, 0], rows[pick, 1], brush=brushes, pen=None, size=5)
            self.protos.setData(protos[:, 0], protos[:, 1], brush=[pg.mkBrush(cols[g]) for g in rec.unit_group],
                                pen=pg.mkPen(c["ink"], width=1.4), size=10)
            if data.is_map:
                pairs = mn.mesh_pairs(rec.shape, rec.topology)
                self.mesh.setData(protos[pairs].reshape(-1, 2)[:, 0], protos[pairs].reshape(-1, 2)[:, 1],
                                  pen=pg.mkPen(c["muted"], width=1.0))
            else:
                self.mesh.setData([], [])
            self._axes(share)
            shown = [swatch(cols[g], f"group {g + 1}") for g in range(min(rec.n_groups, 8))]
            more = f" … {rec.n_groups} groups" if rec.n_groups > 8 else ""
            self.hint.setText("&nbsp; ".join(shown) + more + self._sample_note(len(X), len(pick)))
        else:
            Y = rec.forward(X)
            y2 = Y[:, 1] if Y.shape[1] > 1 else np.zeros(len(Y))
            brushes = self._label_brushes(data, pick, c)
            self.rows.setData(Y[pick, 0], y2[pick], brush=brushes, pen=None, size=5)
            self.protos.setData([], [])
            self.mesh.setData([], [])
            self.plot.setLabel("bottom", "component 1")
            self.plot.setLabel("left", "component 2" if Y.shape[1] > 1 else "(one component)")
            self.hint.setText((self._label_key(data, c) or "every row on the learned components")
                              + self._sample_note(len(X), len(pick)))
        self.n_drawn = len(pick)
        self.plot.getViewBox().autoRange(padding=0.05)

    def _axes(self, share) -> None:
        self.plot.setLabel("bottom", f"principal axis 1 ({share[0] * 100:.0f} % of the spread)")
        self.plot.setLabel("left", f"axis 2 ({share[1] * 100:.0f} %)")

    @staticmethod
    def _sample_note(n: int, drawn: int) -> str:
        return f"; {drawn:,} of {n:,} rows drawn" if drawn < n else ""

    def _label_values(self, data: mn.MapData):
        if data.label is None:
            return None, []
        import pandas as pd

        lab = pd.Series(np.asarray(data.label, dtype=object)).astype("string").fillna("(missing)")
        values = list(lab.value_counts().index[:12])
        return lab, values

    def _label_brushes(self, data: mn.MapData, pick: np.ndarray, c: dict):
        lab, values = self._label_values(data)
        if lab is None:
            return [pg.mkBrush(c["complete"])] * len(pick)
        cols = mn.group_colours(len(values), theme.Theme.current().dark)
        brush = {v: pg.mkBrush(cols[i]) for i, v in enumerate(values)}
        other = pg.mkBrush(c["muted"])
        return [brush.get(v, other) for v in lab.iloc[pick]]

    def _label_key(self, data: mn.MapData, c: dict) -> str:
        lab, values = self._label_values(data)
        if lab is None:
            return ""
        cols = mn.group_colours(len(values), theme.Theme.current().dark)
        return f"{data.label_name or 'label'}: " + "&nbsp; ".join(
            swatch(cols[i], str(v)) for i, v in enumerate(values[:8]))
