"""Step 4 — the map and its groups: the winner of a map or group family, drawn.

At the top, in words: what was trained (family, grid, units, groups), its held-out errors and the
stability verdict (do other seeds give the same groups?). Below, the pictures: the unit-distance
map, rows per unit and one column over the map in the first row; the groups' table and the rows on
two axes in the second. A Hebbian extractor shows its components and the rows on them instead.
"""

from __future__ import annotations

import html
from typing import Any, Mapping

from PySide6.QtCore import Qt
from PySide6.QtWidgets import QFrame, QLabel, QSplitter, QTabWidget, QVBoxLayout, QWidget

from labbench.gui import map_numbers as mn
from labbench.gui import theme
from labbench.gui.front_view import FrontPanel
from labbench.gui.map_tables import ComponentsPanel, GroupsPanel
from labbench.gui.map_views import DistancePanel, HitsPanel, PlanePanel, ProjectionPanel
from labbench.gui.words import num

FAMILY_WORDS = {"som": "Self-organising map", "competitive": "Competitive learning (winner takes all)",
                "neural_gas": "Neural gas (winner takes most)", "hebbian": "Hebbian features"}
MEASURE_WORDS = (("quantisation_error", "quantisation error"), ("topographic_error", "topographic error"),
                 ("reconstruction_error", "reconstruction error"), ("relative_error", "relative error"))
EMPTY = ("The map and its groups appear here when a search of a map or group family ends "
         "(self-organising map, competitive learning, neural gas, Hebbian features).")


def family_label(name: str) -> str:
    try:
        from labbench.families import get_family

        return get_family(name).label or FAMILY_WORDS.get(name, name)
    except Exception:           # a family not registered in this build: its own word
        return FAMILY_WORDS.get(name, name)


def verdict_key(verdict: str) -> str:
    """The palette role of a stability verdict (MAPS.md's three words)."""
    v = (verdict or "").lower()
    if v.startswith("not"):
        return "failed"
    if v.startswith("mostly"):
        return "running"
    return "best"


def head_html(data: mn.MapData, scores: Mapping[str, Any] | None, t: theme.Theme) -> str:
    """What was trained, how it did on the held-out rows, and whether it is reproducible."""
    e = html.escape
    rec = data.record
    fam = family_label(rec.family)
    if data.has_prototypes:
        shape = f"{rec.shape[0]} × {rec.shape[1]} {rec.topology} grid, " if data.is_map else ""
        what = f"{shape}{rec.n_units} units in {rec.n_groups} groups"
    else:
        what = f"{rec.n_components} component(s) of {len(data.names)} scaled columns"
    s = dict(scores or {})
    trial = s.get("trial_number")
    which = ""
    if trial is not None:
        which = f"trial {trial}, " + ("picked from the trade-off, " if s.get("picked") else "")
    parts = [f"<span style='font-size:14pt'><b>{e(fam)}</b></span> &nbsp; {e(what)} &nbsp; "
             f"<span style='color:{t.state('complete').name()}'>{e(which)}shown with {len(data.X):,} rows</span>"]
    measures = dict(s.get("holdout_measures") or {})
    shown = [f"{word} {num(measures[key])}" for key, word in MEASURE_WORDS
             if isinstance(measures.get(key), (int, float))]
    if shown:
        parts.append("Held-out rows: " + e(", ".join(shown)) + ".")
    elif s.get("holdout_score") is not None:
        parts.append(f"Held-out score {e(num(s.get('holdout_score')))}.")
    stab = s.get("stability") or {}
    if stab.get("verdict") or stab.get("message"):
        colour = t.state(verdict_key(str(stab.get("verdict", "")))).name()
        verdict = e(str(stab.get("verdict", "")).capitalize())
        if stab.get("message"):         # the search's own words (labbench.search) say it all
            parts.append(f"<b style='color:{colour}'>{verdict}.</b> {e(str(stab['message']))}")
        else:
            extra = []
            if stab.get("ari_mean") is not None:
                extra.append(f"groups agree between seeds at {num(stab['ari_mean'])} (adjusted Rand)")
            if stab.get("layout_mean") is not None:
                extra.append(f"layout agreement {num(stab['layout_mean'])}")
            parts.append(f"<b style='color:{colour}'>{verdict}</b>" + (f": {e('; '.join(extra))}" if extra else ""))
    else:
        parts.append("<i>Stability across seeds not measured (set seeds for the spread check above 1).</i>")
    return "<br>".join(parts)


class MapPage(QWidget):
    def __init__(self, parent=None):
        super().__init__(parent)
        outer = QVBoxLayout(self)
        outer.setContentsMargins(6, 6, 6, 6)
        outer.setSpacing(6)
        self.head_frame = QFrame()
        self.head_frame.setObjectName("panel")
        hl = QVBoxLayout(self.head_frame)
        hl.setContentsMargins(10, 6, 10, 6)
        self.head = QLabel(EMPTY)
        self.head.setObjectName("mapHead")
        self.head.setWordWrap(True)
        self.head.setTextFormat(Qt.TextFormat.RichText)
        self.head.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        hl.addWidget(self.head)
        outer.addWidget(self.head_frame)

        self.distances = DistancePanel()
        self.hits = HitsPanel()
        self.plane = PlanePanel()
        self.groups = GroupsPanel()
        self.projection = ProjectionPanel()
        self.components = ComponentsPanel()
        self.front = FrontPanel()
        self.right = QTabWidget()
        self.right.setObjectName("mapTabs")
        self.right.addTab(self.projection, "Rows on two axes")
        self.right.addTab(self.front, "Trade-off")
        self.right.setTabToolTip(0, "Every row on the two directions of most spread, coloured by group")
        self.right.setTabToolTip(1, "The trials no other beats on units and held-out error; pick one to see its map")
        self.top = QSplitter(Qt.Orientation.Horizontal)
        for p in (self.distances, self.hits, self.plane):
            self.top.addWidget(p)
        self.bottom = QSplitter(Qt.Orientation.Horizontal)
        for p in (self.groups, self.components, self.right):
            self.bottom.addWidget(p)
        self.bottom.setStretchFactor(0, 3)
        self.bottom.setStretchFactor(1, 3)
        self.bottom.setStretchFactor(2, 2)
        self.split = QSplitter(Qt.Orientation.Vertical)
        self.split.addWidget(self.top)
        self.split.addWidget(self.bottom)
        self.split.setSizes([330, 300])
        for s in (self.top, self.bottom, self.split):
            s.setChildrenCollapsible(False)
        outer.addWidget(self.split, 1)
        self.panels = [self.distances, self.hits, self.plane, self.groups, self.components, self.projection,
                       self.front]
        self.data: mn.MapData | None = None
        # the pictures answer the mouse; Tab walks the controls and skips them (as on the run page)
        import pyqtgraph as pg

        for view in self.findChildren(pg.GraphicsView):
            view.setFocusPolicy(Qt.FocusPolicy.NoFocus)
            view.viewport().setFocusPolicy(Qt.FocusPolicy.NoFocus)
        self.clear()

    def clear(self, text: str = EMPTY) -> None:
        self.data = None
        if self.head.text() != html.escape(text):      # called on every change of the session
            self.head.setText(html.escape(text))
        self.split.hide()

    def show_model(self, data: mn.MapData, scores: Mapping[str, Any] | None = None) -> None:
        """Draw every view of ``data`` (a map or group model and the rows to show it with)."""
        self.data = data
        t = theme.Theme.current()
        self.head.setText(head_html(data, scores, t))
        prototypes = data.has_prototypes
        self.top.setVisible(prototypes)
        self.distances.setVisible(data.is_map)
        self.plane.setVisible(data.is_map)
        self.groups.setVisible(prototypes)
        self.components.setVisible(not prototypes)
        self.split.show()
        self.split.setSizes([330, 300] if data.is_map else [190, 440])
        self.bottom.setSizes([660, 0, 400] if prototypes else [0, 480, 600])
        if prototypes:
            for p in (self.hits, self.groups):
                p.show_data(data)
            if data.is_map:
                self.distances.show_data(data)
                self.plane.show_data(data)
        else:
            self.components.show_data(data)
        self.projection.show_data(data)

    def visible_panels(self) -> list:
        return [p for p in self.panels if p.isVisibleTo(self)]
