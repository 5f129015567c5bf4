"""A titled frame around one picture, with its own "Save picture…" button (PNG or SVG).

A saved picture is the panel as a reader sees it: its title, its key (the coloured words under
the title) and the picture, drawn with real text. The drawing happens on the GUI thread (tens of
milliseconds); encoding and writing the file happen on a helper thread when saved from the
button, so a slow disk never stalls the window.
"""

from __future__ import annotations

import textwrap
import threading
from pathlib import Path

import pyqtgraph as pg
from PySide6.QtCore import QBuffer, QByteArray, QIODevice, QPoint, QPointF, QRectF, QSize, Qt, QTimer
from PySide6.QtGui import QFont, QImage, QPainter, QTextDocument
from PySide6.QtSvg import QSvgGenerator
from PySide6.QtWidgets import (QFileDialog, QGraphicsItem, QFrame, QHBoxLayout, QLabel, QSizePolicy, QToolButton,
                               QVBoxLayout, QWidget)

from labbench.gui import theme

pg.setConfigOptions(antialias=True)

PICTURE_SCALE = 2          # a PNG has twice the on-screen pixels: sharp in print and when zoomed
TITLE_PT = 13              # title and key sizes in a saved picture, whatever the screen's font
KEY_PT = 10


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
        self.writers: list[threading.Thread] = []

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

    def picture_widget(self) -> QWidget:
        """The widget drawn under the title in a saved picture (subclasses may override)."""
        item = self.body.itemAt(0)
        return item.widget() if item is not None else self

    def key_html(self) -> str:
        return self.hint.text() if self.hint.textFormat() != Qt.TextFormat.PlainText else self.hint.text()

    # ---- saving
    def _paint(self, painter: QPainter, width: float) -> None:
        t = theme.Theme.current()
        painter.fillRect(QRectF(0, 0, width, self._picture_height()), t.background)
        painter.setPen(t.foreground)
        font = QFont(self.font())
        font.setPointSizeF(TITLE_PT)
        font.setBold(True)
        painter.setFont(font)
        title_h = painter.fontMetrics().height()
        painter.drawText(QRectF(10, 6, width - 20, title_h), Qt.AlignmentFlag.AlignLeft, self.title)
        doc = self._key_doc(width)
        painter.save()
        painter.translate(6, 8 + title_h)
        doc.drawContents(painter)
        painter.restore()
        widget = self.picture_widget()
        painter.save()
        painter.translate(QPointF(0, 12 + title_h + doc.size().height()))
        QWidget.render(widget, painter, QPoint(0, 0))
        painter.restore()

    def _key_doc(self, width: float) -> QTextDocument:
        doc = QTextDocument()
        f = QFont(self.font())
        f.setPointSizeF(KEY_PT)
        doc.setDefaultFont(f)
        colour = theme.Theme.current().foreground.name()
        doc.setHtml(f"<div style='color:{colour}'>{self.key_html()}</div>")
        doc.setTextWidth(width - 12)
        return doc

    def _picture_height(self) -> float:
        width = self.picture_widget().width()
        font = QFont(self.font())
        font.setPointSizeF(TITLE_PT)
        font.setBold(True)
        from PySide6.QtGui import QFontMetrics

        return 12 + QFontMetrics(font).height() + self._key_doc(width).size().height() + \
            self.picture_widget().height()

    def picture_bytes(self, suffix: str) -> bytes | QImage:
        """The picture as SVG bytes, or for PNG as a QImage (drawn here, on the GUI thread;
        the PNG encoding is left to whoever writes it, which may be a helper thread)."""
        widget = self.picture_widget()
        width, height = widget.width(), int(self._picture_height()) + 1
        data = QByteArray()
        buf = QBuffer(data)
        buf.open(QIODevice.OpenModeFlag.WriteOnly)
        if suffix == ".svg":
            gen = QSvgGenerator()
            gen.setOutputDevice(buf)
            gen.setSize(QSize(width, height))
            gen.setViewBox(QRectF(0, 0, width, height))
            gen.setResolution(widget.logicalDpiX())
            gen.setTitle(self.title)
            painter = QPainter(gen)
            self._paint(painter, width)
            painter.end()
        else:
            image = QImage(width * PICTURE_SCALE, height * PICTURE_SCALE, QImage.Format.Format_ARGB32)
            image.setDevicePixelRatio(PICTURE_SCALE)
            image.fill(theme.Theme.current().background)
            painter = QPainter(image)
            painter.setRenderHint(QPainter.RenderHint.Antialiasing)
            painter.setRenderHint(QPainter.RenderHint.TextAntialiasing)
            self._paint(painter, width)
            painter.end()
            buf.close()
            return image
        buf.close()
        return bytes(data.data())

    def export(self, path: str | Path) -> Path:
        """Write the picture now; the suffix picks the format (.svg, anything else PNG)."""
        path = Path(path)
        path.parent.mkdir(parents=True, exist_ok=True)
        _write(path, self.picture_bytes(".svg" if path.suffix.lower() == ".svg" else ".png"))
        return path

    def export_in_background(self, path: str | Path, done=None) -> threading.Thread:
        """Draw now, write on a helper thread; ``done(path, error)`` is called on that thread."""
        path = Path(path)
        data = self.picture_bytes(".svg" if path.suffix.lower() == ".svg" else ".png")

        def write() -> None:
            error = None
            try:
                path.parent.mkdir(parents=True, exist_ok=True)
                _write(path, data)
            except OSError as exc:
                error = f"{path}: {exc.strerror or exc}"
            if done is not None:
                done(path, error)

        thread = threading.Thread(target=write, name="labbench-picture", daemon=True)
        thread.start()
        self.writers = [w for w in self.writers if w.is_alive()] + [thread]
        return thread

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
        win = self.window()
        bar = win.statusBar() if hasattr(win, "statusBar") else None
        outcome: list[str | None] = []
        thread = self.export_in_background(path, lambda _p, error: outcome.append(error))
        if bar is None:
            return
        bar.showMessage(f"Saving the picture to {path}…")

        def report() -> None:      # on the GUI thread: the helper thread only leaves its outcome
            if thread.is_alive():
                QTimer.singleShot(100, report)
                return
            error = outcome[0] if outcome else "the picture could not be written"
            bar.showMessage(f"Picture saved to {path}" if error is None else f"Not saved: {error}", 8000)

        QTimer.singleShot(100, report)


def _write(path: Path, data: bytes | QImage) -> None:
    """Write SVG bytes, or encode and write a QImage as PNG (QImage.save only returns False)."""
    if isinstance(data, QImage):
        if not data.save(str(path), "PNG"):
            raise OSError(0, "the picture could not be written", str(path))
    else:
        path.write_bytes(data)


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


def integer_axis(axis, low: float, high: float) -> list[int]:
    """Whole-number ticks on a pyqtgraph axis (trial numbers, epochs); returns them."""
    from labbench.gui.axes import integer_ticks

    ticks = integer_ticks(low, high)
    axis.setTicks([[(float(v), str(v)) for v in ticks], []])
    return ticks
