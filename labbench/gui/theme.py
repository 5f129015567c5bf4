"""Colours, pens and icons of the window, derived from the running palette (light or dark).

The colours are labbench's own (``labbench.palette``, shared with the report): ink on a warm
paper, a bottle green for the winner, amber for the trial training now, violet for the trial the
user picked, a cool slate for pruned trials and a brick red for failures. ``own_palette`` turns
them into the window's QPalette, light or dark after the desktop's choice.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from PySide6.QtCore import QSize, Qt
from PySide6.QtGui import QColor, QIcon, QPainter, QPalette, QPixmap
from PySide6.QtSvg import QSvgRenderer
from PySide6.QtWidgets import QApplication

from labbench.assets import resource_dir
from labbench.palette import DARK, LIGHT
from labbench.search.states import WORDS as STATE_WORDS  # noqa: F401  (the one table of state words)

RESOURCES = resource_dir()        # the checkout's resources/, or the installed package's copy

# name -> (light-palette colour, dark-palette colour), from labbench.palette (shared with the report)
_STATE_COLOURS = {name: (LIGHT[name], DARK[name]) for name in
                  ("running", "best", "complete", "pruned", "failed", "cancelled", "waiting", "selected")}


def is_dark(palette: QPalette | None = None) -> bool:
    pal = palette or QApplication.palette()
    return pal.color(QPalette.ColorRole.Window).lightness() < 128


@dataclass(frozen=True)
class Theme:
    """Everything a plot needs to draw in the current palette."""

    background: QColor
    foreground: QColor
    grid_alpha: float
    dark: bool

    @classmethod
    def current(cls) -> "Theme":
        pal = QApplication.palette()
        dark = is_dark(pal)
        return cls(
            background=pal.color(QPalette.ColorRole.Base),
            foreground=pal.color(QPalette.ColorRole.Text),
            grid_alpha=0.18 if dark else 0.12,
            dark=dark,
        )

    def state(self, name: str, alpha: int = 255) -> QColor:
        light, dark = _STATE_COLOURS.get(name, _STATE_COLOURS["complete"])
        colour = QColor(dark if self.dark else light)
        colour.setAlpha(alpha)
        return colour


def _mix(a: str, b: str, share: float) -> QColor:
    ca, cb = QColor(a), QColor(b)
    return QColor(round(ca.red() * (1 - share) + cb.red() * share),
                  round(ca.green() * (1 - share) + cb.green() * share),
                  round(ca.blue() * (1 - share) + cb.blue() * share))


def own_palette(dark: bool) -> QPalette:
    """The window's QPalette from labbench's colours (paper and ink, the winner's green as accent)."""
    c = DARK if dark else LIGHT
    pal = QPalette()
    roles = QPalette.ColorRole
    for role, colour in ((roles.Window, c["panel"]), (roles.Base, c["paper"]), (roles.Button, c["panel"]),
                         (roles.Text, c["ink"]), (roles.WindowText, c["ink"]), (roles.ButtonText, c["ink"]),
                         (roles.ToolTipBase, c["paper"]), (roles.ToolTipText, c["ink"]),
                         (roles.PlaceholderText, c["muted"]), (roles.Link, c["best"]),
                         (roles.BrightText, c["failed"])):
        pal.setColor(role, QColor(colour))
    pal.setColor(roles.AlternateBase, _mix(c["paper"], c["rule"], 0.35))
    pal.setColor(roles.Highlight, _mix(c["paper"], c["best"], 0.30))
    pal.setColor(roles.HighlightedText, QColor(c["ink"]))
    pal.setColor(roles.Mid, QColor(c["rule"]))
    pal.setColor(roles.Midlight, _mix(c["panel"], c["paper"], 0.5))
    pal.setColor(roles.Dark, _mix(c["rule"], c["ink"], 0.3))
    for role in (roles.Text, roles.WindowText, roles.ButtonText):
        pal.setColor(QPalette.ColorGroup.Disabled, role, QColor(c["muted"]))
    return pal


def state_colour(name: str, alpha: int = 255) -> QColor:
    return Theme.current().state(name, alpha)


def pen_style(state: str) -> Qt.PenStyle:
    if state == "pruned":
        return Qt.PenStyle.DashLine
    if state in ("failed", "cancelled"):
        return Qt.PenStyle.DotLine
    return Qt.PenStyle.SolidLine


def icon(name: str, colour: QColor | None = None) -> QIcon:
    """An icon from resources/icons/NAME.svg, recoloured to the palette's text colour.

    The SVGs draw with ``currentColor``; the pixmaps are rendered at 1x and 2x so they stay crisp
    on high-DPI screens.
    """
    path = RESOURCES / "icons" / f"{name}.svg"
    if not path.exists():
        return QIcon()
    text = path.read_text(encoding="utf-8")
    if colour is None:
        colour = QApplication.palette().color(QPalette.ColorRole.WindowText)
    text = text.replace("currentColor", colour.name())
    renderer = QSvgRenderer(text.encode("utf-8"))
    result = QIcon()
    for size in (16, 20, 24, 32, 48):
        for scale in (1, 2):
            pix = QPixmap(QSize(size * scale, size * scale))
            pix.fill(Qt.GlobalColor.transparent)
            painter = QPainter(pix)
            renderer.render(painter)
            painter.end()
            pix.setDevicePixelRatio(scale)
            result.addPixmap(pix)
            if scale == 2:
                # a disabled look of our own: the same glyph at a third of its ink
                faded = QPixmap(pix.size())
                faded.fill(Qt.GlobalColor.transparent)
                p = QPainter(faded)
                p.setOpacity(0.35)
                p.drawPixmap(0, 0, pix)
                p.end()
                faded.setDevicePixelRatio(scale)
                result.addPixmap(faded, QIcon.Mode.Disabled)
    return result


def stylesheet() -> str:
    """resources/labbench.qss with its @colours taken from the running palette."""
    path = RESOURCES / "labbench.qss"
    if not path.exists():
        return ""
    pal = QApplication.palette()
    t = Theme.current()
    text = pal.color(QPalette.ColorRole.Text)
    window = pal.color(QPalette.ColorRole.Window)
    accent = t.state("best")
    soft = QColor(accent)
    soft.setAlpha(60)
    line = QColor(text)
    line.setAlpha(45)
    muted = QColor(text)
    muted.setAlpha(150)
    on_accent = QColor("#101010") if t.dark else QColor("#ffffff")
    base = pal.color(QPalette.ColorRole.Base)
    # the accent blended onto the base colour, opaque (a see-through chunk repaints its parent)
    solid = QColor(int(base.red() * 0.7 + accent.red() * 0.3), int(base.green() * 0.7 + accent.green() * 0.3),
                   int(base.blue() * 0.7 + accent.blue() * 0.3))

    def rgba(c: QColor) -> str:
        return f"rgba({c.red()}, {c.green()}, {c.blue()}, {c.alpha()})"

    colours = {"@accent_soft": rgba(soft), "@accent": accent.name(), "@line": rgba(line),
               "@muted": rgba(muted), "@error": t.state("failed").name(),
               "@on_accent": on_accent.name(), "@window": window.name(),
               "@accent_solid": solid.name()}
    qss = path.read_text(encoding="utf-8")
    for key in sorted(colours, key=len, reverse=True):
        qss = qss.replace(key, colours[key])
    return qss
