"""A titled frame around one picture, with its own "Save picture…" button (PNG or SVG)."""

from __future__ import annotations

import textwrap
from pathlib import Path

import pyqtgraph as pg
from PySide6.QtWidgets import (QFileDialog, QGraphicsItem, QFrame, QHBoxLayout, QLabel, QSizePolicy, QToolButton,
                               QVBoxLayout, QWidget)

from labbench.gui import theme

pg.setConfigOptions(antialias=True)


class Panel(QFrame):
    """Header (title, hint, extra controls, save button) over one content widget."""

    def __init__(self, title: str, hint: str, parent: QWidget | None = None, short: str = ""):
        super().__init__(parent)
        self.setObjectName("panel")
        self.setFrameShape(QFrame.Shape.StyledPanel)
        self.title = title
        outer = QVBoxLayout(self)
        outer.setContentsMargins(8, 6, 8, 8)
        outer.setSpacing(4)
        head = QHBoxLayout()
        head.setSpacing(8)
        label = QLabel(f"<b>{title}</b>")
        label.setObjectName("panelTitle")
        label.setToolTip(hint)
        head.addWidget(label)
        self.hint = QLabel(short or hint)
        self.hint.setToolTip(hint)
        self.hint.setObjectName("panelHint")
        self.hint.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        head.addWidget(self.hint, 1)
        self.controls = QHBoxLayout()
        self.controls.setSpacing(6)
        head.addLayout(self.controls)
        self.save_button = QToolButton()
        self.save_button.setIcon(theme.icon("picture"))
        self.save_button.setToolTip(f"Save the picture “{title}” as PNG or SVG")
        self.save_button.setAccessibleName(f"Save picture {title}")
        self.save_button.clicked.connect(self.ask_export)
        head.addWidget(self.save_button)
        outer.addLayout(head)
        self.body = QVBoxLayout()
        self.body.setContentsMargins(0, 0, 0, 0)
        outer.addLayout(self.body, 1)
        self.last_dir = ""

    # ---- drawing helpers shared by the plot panels
    @staticmethod
    def style_plot(item: pg.PlotItem, t: theme.Theme) -> None:
        fg = t.foreground
        for name in ("left", "bottom"):
            axis = item.getAxis(name)
            axis.setPen(pg.mkPen(fg))
            axis.setTextPen(pg.mkPen(fg))
            # scores read as they are, no "(x0.001)": no range ever switches the prefix on
            axis.setSIPrefixEnableRanges(((float("inf"), float("inf")),))
            axis.enableAutoSIPrefix(False)
            # an axis is redrawn from a pixmap until its range changes: replaying its text on
            # every frame was the largest share of a live redraw
            axis.setCacheMode(QGraphicsItem.CacheMode.DeviceCoordinateCache)
        item.showGrid(x=True, y=True, alpha=t.grid_alpha)

    def export_item(self):
        """The graphics item or scene the exporters write (subclasses override)."""
        raise NotImplementedError

    def export(self, path: str | Path) -> Path:
        """Write the picture; the suffix picks the format (.svg, anything else a raster image)."""
        from pyqtgraph import exporters

        path = Path(path)
        path.parent.mkdir(parents=True, exist_ok=True)
        item = self.export_item()
        if path.suffix.lower() == ".svg":
            exporters.SVGExporter(item).export(str(path))
        else:
            exp = exporters.ImageExporter(item)
            # twice the on-screen size so the picture stays sharp when printed or zoomed
            width = max(int(exp.params["width"]) * 2, 600)
            exp.params["width"] = width
            exp.params["background"] = theme.Theme.current().background
            exp.export(str(path))
        if not path.exists():        # QImage.save reports failure only by returning False
            raise OSError(f"{path}: the picture could not be written")
        return path

    def ask_export(self) -> None:
        name = self.title.lower().replace(" ", "_").replace("/", "_")
        start = str(Path(self.last_dir or Path.home()) / f"{name}.png")
        path, chosen = QFileDialog.getSaveFileName(
            self, f"Save picture “{self.title}”", start, "PNG picture (*.png);;SVG drawing (*.svg)")
        if not path:
            return
        if not Path(path).suffix:
            path += ".svg" if "svg" in chosen.lower() else ".png"
        self.last_dir = str(Path(path).parent)
        self.export(path)
        win = self.window()
        if hasattr(win, "statusBar"):
            win.statusBar().showMessage(f"Picture saved to {path}", 6000)


def message_item(text: str) -> pg.TextItem:
    item = pg.TextItem(text, anchor=(0.5, 0.5), color=theme.Theme.current().foreground)
    return item


def centre_message(plot: pg.PlotItem, item: pg.TextItem, text: str | None) -> None:
    """Show ``text`` in the middle of an otherwise empty plot, or hide it (None)."""
    if not text:
        item.setVisible(False)
        return
    wrapped = "\n".join(textwrap.wrap(text, 46)) or text
    item.setText(wrapped, color=theme.Theme.current().foreground)
    vb = plot.getViewBox()
    (x0, x1), (y0, y1) = vb.viewRange()
    item.setPos((x0 + x1) / 2, (y0 + y1) / 2)
    item.setVisible(True)


def curve_pen(t: theme.Theme, state: str, *, best: bool, running: bool, selected: bool):
    """Pen of a learning curve by its trial's role (selected > running > best > state)."""
    if selected:
        return pg.mkPen(t.state("selected"), width=3.2), 40, True
    if running:
        return pg.mkPen(t.state("running"), width=2.6), 30, True
    if best:
        return pg.mkPen(t.state("best"), width=2.6), 20, True
    alpha = 150 if state == "complete" else 130
    # the many background lines are drawn without antialiasing: a third of the paint time
    return pg.mkPen(t.state(state, alpha), width=1, style=theme.pen_style(state)), 0, False


def log_ticks(low: float, high: float) -> list[tuple[float, str]]:
    """Ticks at 1, 2, 5 × 10^k between two positive values, placed at log10 (axis drawn in log10)."""
    import math

    if not (low > 0 and high > 0):
        return []
    lo, hi = math.floor(math.log10(min(low, high))), math.ceil(math.log10(max(low, high)))
    out = []
    steps = (1, 2, 5) if hi - lo <= 2 else (1,)      # wide spans: one tick per decade
    for k in range(lo, hi + 1):
        for m in steps:
            v = m * 10.0 ** k
            if low / 1.5 <= v <= high * 1.5:
                out.append((math.log10(v), f"{v:g}"))
    if len(out) < 2:
        out = [(math.log10(v), f"{v:.2g}") for v in (low, high)]
    return out


def integer_spacing(axis, largest: int) -> None:
    """Whole-number ticks for trial numbers and epochs (pyqtgraph's own above 60)."""
    step = 1 if largest <= 12 else 2 if largest <= 25 else 5 if largest <= 60 else None
    if step is None:
        axis.setTickSpacing()
    else:
        axis.setTickSpacing(step, step)
