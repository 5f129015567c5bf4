"""Drawing a map's grid: one filled cell per unit (square or hexagon), optional words in the cells,
the outline of each group's region, and a colour key under the grid. Shapes and colours come
from ``labbench.gui.map_numbers``; this module only paints them (pyqtgraph)."""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QPointF, QRectF, Qt
from PySide6.QtGui import QColor, QPainter, QPen, QPicture, QPolygonF

from labbench.gui import theme
from labbench.gui.words import num

KEY_STEPS = 24          # swatches in the colour key
MAX_CELL_WORDS = 400    # more units than this: no numbers in the cells (they would not fit)


class CellsItem(pg.GraphicsObject):
    """Filled polygons with a thin outline, painted once into a QPicture."""

    def __init__(self):
        super().__init__()
        self.picture = QPicture()
        self._rect = QRectF()
        self.polygons = np.zeros((0, 4, 2))
        self.fills: list[QColor] = []

    def set_cells(self, polygons: np.ndarray, fills: list[QColor], outline: QColor,
                  dashed: np.ndarray | None = None) -> None:
        self.prepareGeometryChange()
        self.polygons, self.fills = np.asarray(polygons, dtype=np.float64), list(fills)
        pic = QPicture()
        p = QPainter(pic)
        p.setRenderHint(QPainter.RenderHint.Antialiasing)
        pen = QPen(outline, 0)
        pen.setCosmetic(True)
        faint = QPen(outline, 0, Qt.PenStyle.DotLine)
        faint.setCosmetic(True)
        for i, (poly, fill) in enumerate(zip(self.polygons, self.fills)):
            p.setPen(faint if dashed is not None and dashed[i] else pen)
            p.setBrush(fill)
            p.drawPolygon(QPolygonF([QPointF(float(x), float(y)) for x, y in poly]))
        p.end()
        self.picture = pic
        if len(self.polygons):
            lo, hi = self.polygons.reshape(-1, 2).min(axis=0), self.polygons.reshape(-1, 2).max(axis=0)
            self._rect = QRectF(lo[0], lo[1], hi[0] - lo[0], hi[1] - lo[1])
        else:
            self._rect = QRectF()
        self.update()

    def paint(self, painter, *_args) -> None:
        painter.drawPicture(0, 0, self.picture)

    def boundingRect(self) -> QRectF:
        return QRectF(self._rect)


class GridPlot(pg.PlotWidget):
    """A map's grid on paper: cells, words, group outlines and a colour key (no axes)."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.plot: pg.PlotItem = self.getPlotItem()
        self.plot.hideAxis("left")
        self.plot.hideAxis("bottom")
        self.plot.setMenuEnabled(False)
        self.plot.hideButtons()
        vb = self.plot.getViewBox()
        vb.setAspectLocked(True)
        vb.invertY(True)            # the first row of the grid at the top, as it is numbered
        vb.setMouseEnabled(False, False)
        self.cells = CellsItem()
        self.plot.addItem(self.cells)
        self.borders = pg.PlotDataItem(connect="pairs")
        self.borders.setZValue(5)
        self.plot.addItem(self.borders)
        self.words: list[pg.TextItem] = []
        self.key_cells = CellsItem()
        self.plot.addItem(self.key_cells)
        self.key_words: list[pg.TextItem] = []
        self.setMinimumSize(180, 160)
        self.words_fit = True
        vb.sigResized.connect(self._fit_words)
        vb.sigRangeChanged.connect(self._fit_words)

    def _fit_words(self, *_a) -> None:
        """Numbers in the cells only while a cell is wide enough to hold them."""
        if not self.words:
            return
        px, _py = self.plot.getViewBox().viewPixelSize()
        widest = max(item.textItem.boundingRect().width() for item in self.words)
        fit = px > 0 and (1.0 / px) >= widest + 4          # a cell is one grid unit wide
        if fit != self.words_fit or any(item.isVisible() != fit for item in self.words[:1]):
            self.words_fit = fit
            for item in self.words:
                item.setVisible(fit)

    def clear_words(self) -> None:
        for item in self.words + self.key_words:
            self.plot.removeItem(item)
        self.words, self.key_words = [], []

    def draw(self, polygons: np.ndarray, rgb: np.ndarray, *, words: list[str] | None = None,
             word_colours: list[QColor] | None = None, borders: np.ndarray | None = None,
             dashed: np.ndarray | None = None, key: tuple | None = None) -> None:
        """Cells filled with ``rgb`` (k, 3); ``words`` written in the cells; ``borders`` (E, 2, 2)
        drawn thick; ``key`` = (stops rgb (n, 3), low text, high text, caption) under the grid."""
        t = theme.Theme.current()
        self.setBackground(t.background)        # paper or slate, after the window's palette
        self.clear_words()
        outline = QColor(t.foreground)
        outline.setAlpha(70)
        fills = [QColor(int(r), int(g), int(b)) for r, g, b in rgb]
        self.cells.set_cells(polygons, fills, outline, dashed)
        if borders is not None and len(borders):
            pen = pg.mkPen(t.foreground, width=2.4)
            self.borders.setData(borders[:, :, 0].ravel(), borders[:, :, 1].ravel(), pen=pen)
        else:
            self.borders.setData([], [])
        if words is not None and len(words) <= MAX_CELL_WORDS:
            centres = polygons.mean(axis=1)
            for i, (w, (x, y)) in enumerate(zip(words, centres)):
                if not w:
                    continue
                colour = word_colours[i] if word_colours is not None else t.foreground
                item = pg.TextItem(w, anchor=(0.5, 0.5), color=colour)
                item.setPos(float(x), float(y))
                item.setZValue(10)
                self.plot.addItem(item)
                self.words.append(item)
        bottom = self._key(polygons, key, t)
        self.words_fit = True
        vb = self.plot.getViewBox()
        if len(polygons):
            lo, hi = polygons.reshape(-1, 2).min(axis=0), polygons.reshape(-1, 2).max(axis=0)
            vb.setRange(xRange=(lo[0] - 0.1, hi[0] + 0.1), yRange=(lo[1] - 0.1, max(hi[1], bottom) + 0.1),
                        padding=0)
        else:
            vb.autoRange(padding=0.04)
        self._fit_words()

    def _key(self, polygons: np.ndarray, key: tuple | None, t: theme.Theme) -> float:
        """Draw the key under the grid; returns the lowest y it needs (its words included)."""
        if key is None or not len(polygons):
            self.key_cells.set_cells(np.zeros((0, 4, 2)), [], t.foreground)
            return float(polygons[:, :, 1].max()) if len(polygons) else 0.0
        stops, low_text, high_text, caption = key
        lo = polygons.reshape(-1, 2).min(axis=0)
        hi = polygons.reshape(-1, 2).max(axis=0)
        width = hi[0] - lo[0]
        y0 = hi[1] + 0.35
        h = max(0.18, 0.05 * (hi[1] - lo[1] + 1))
        x = np.linspace(lo[0], hi[0], len(stops) + 1)
        polys = np.array([[[x[i], y0], [x[i + 1], y0], [x[i + 1], y0 + h], [x[i], y0 + h]]
                          for i in range(len(stops))])
        edge = QColor(t.foreground)
        edge.setAlpha(0)
        self.key_cells.set_cells(polys, [QColor(int(r), int(g), int(b)) for r, g, b in stops], edge)
        # the caption is the panel's (its title or chooser); under the swatches only the two ends
        for text, anchor, px in ((low_text, (0, 0), lo[0]), (high_text, (1, 0), hi[0])):
            item = pg.TextItem(text, anchor=anchor, color=t.foreground)
            item.setPos(float(px), float(y0 + h))
            self.plot.addItem(item)
            self.key_words.append(item)
        # the words below the swatches: about one line of text, in grid units (the grid's height
        # in pixels is unknown here; 1/9 of the grid's extent holds a line at every size used)
        return float(y0 + h + max(0.55, 0.11 * max(width, hi[1] - lo[1])))


def key_stops(stops: tuple[str, ...]) -> np.ndarray:
    """KEY_STEPS colours running through ``stops`` (for the key under a grid)."""
    from labbench.gui.map_numbers import ramp

    return ramp(np.linspace(0.0, 1.0, KEY_STEPS), stops, 0.0, 1.0)


def value_words(values: np.ndarray) -> list[str]:
    return [num(float(v)) for v in values]
