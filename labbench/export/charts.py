"""Plain charts for the HTML report, drawn on ``png.Canvas``: points/lines against x, and
horizontal bars. Tick labels, axis titles and legends use the built-in bitmap font, so a chart is
one self-contained PNG.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Sequence

import numpy as np

from labbench.export import font
from labbench.export.png import Canvas, Color
from labbench.numbers import tick as format_tick     # axis labels: the one number formatting

# An own palette: muted, distinguishable, readable on white.
INK: Color = (40, 40, 40)
GRID: Color = (228, 228, 228)
AXIS: Color = (120, 120, 120)
FAINT: Color = (185, 195, 205)
PALETTE: tuple[Color, ...] = (
    (31, 95, 160), (214, 110, 30), (60, 150, 80), (180, 50, 60),
    (120, 90, 170), (120, 120, 120), (20, 150, 160), (170, 140, 20),
)
SCALE = 2  # font scale: 10 × 14 px letters


@dataclass
class Series:
    x: Sequence[float]
    y: Sequence[float]
    color: Color = PALETTE[0]
    style: str = "points"        # "points" | "hollow" | "line" | "step"
    width: int = 2
    label: str = ""


@dataclass
class _Axis:
    lo: float
    hi: float
    log: bool = False
    categories: Sequence[str] | None = None
    ticks: list[float] = field(default_factory=list)
    labels: list[str] = field(default_factory=list)


def nice_step(span: float, count: int = 5) -> float:
    """A 1/2/2.5/5 × 10^k step giving about ``count`` intervals over ``span`` (common practice)."""
    raw = span / max(count, 1)
    power = 10.0 ** math.floor(math.log10(raw))
    for mult in (1.0, 2.0, 2.5, 5.0, 10.0):
        if raw <= mult * power * 1.0001:
            return mult * power
    return 10.0 * power


def fit_text(text: str, room: float) -> tuple[str, int]:
    """The text and font scale that fit ``room`` pixels: scale 2, else 1, else shortened."""
    if font.text_size(text, SCALE)[0] <= room:
        return text, SCALE
    if font.text_size(text, 1)[0] <= room:
        return text, 1
    keep = max(int(room // font.ADVANCE) - 2, 1)
    return text[:keep] + "..", 1


# Axes span at most ±LIMIT: a diverging trial can end with a finite score near the float limit
# (r2 of -1.7e308), and the padded span of such a range overflows to infinity.
LIMIT = 1e300


def _finite(values: Sequence[float]) -> np.ndarray:
    arr = np.asarray(values, dtype=float).ravel()
    return np.clip(arr[np.isfinite(arr)], -LIMIT, LIMIT)


def _make_axis(values: np.ndarray, log: bool, categories: Sequence[str] | None,
               include_zero: bool = False) -> _Axis:
    if categories is not None:
        n = len(categories)
        return _Axis(-0.5, n - 0.5, categories=categories, ticks=list(range(n)),
                     labels=[str(c) for c in categories])
    if log:
        values = values[values > 0]
    if values.size == 0:
        values = np.array([1.0, 10.0]) if log else np.array([0.0, 1.0])
    if include_zero and not log:
        values = np.append(values, 0.0)
    values = np.clip(values, -LIMIT, LIMIT)
    lo, hi = float(values.min()), float(values.max())
    if log:
        a, b = math.floor(math.log10(lo)), math.ceil(math.log10(hi))
        if b == a:
            b += 1
        ticks = [10.0**k for k in range(a, b + 1)]
        step = max(1, math.ceil(len(ticks) / 7))
        ticks = ticks[::step]
        if b - a <= 2:  # few decades: 2× and 5× ticks too, where the data are
            ticks = sorted(m * t for t in ticks for m in (1, 2, 5) if lo / 1.5 <= m * t <= hi * 1.5)
        return _Axis(math.log10(lo) - 0.05 * (b - a), math.log10(hi) + 0.05 * (b - a), log=True,
                     ticks=[math.log10(t) for t in ticks], labels=[f"{t:g}" for t in ticks])
    if hi == lo:
        pad = abs(lo) * 0.1 or 1.0
        lo, hi = lo - pad, hi + pad
    step = nice_step(hi - lo)
    margin = 0.04 * (hi - lo)
    lo, hi = lo - margin, hi + margin
    first = math.ceil(lo / step - 1e-9) * step
    ticks = [first + i * step for i in range(int((hi - first) / step + 1e-9) + 1)]
    ticks = [0.0 if abs(t) < step * 1e-9 else t for t in ticks]
    return _Axis(lo, hi, ticks=ticks, labels=[format_tick(t, step) for t in ticks])


def xy_chart(series: Sequence[Series], *, x_label: str, y_label: str, x_log: bool = False,
             x_categories: Sequence[str] | None = None, y_range: tuple[float, float] | None = None,
             width: int = 720, height: int = 300) -> bytes:
    """Points and/or lines against x. ``x_categories``: x holds positions 0..k-1 of those labels;
    ``y_range``: the y values to show (others are clipped at the plot's edge)."""
    xs = np.concatenate([_finite(s.x) for s in series]) if series else np.zeros(0)
    ys = np.concatenate([_finite(s.y) for s in series]) if series else np.zeros(0)
    if y_range is not None:
        ys = np.asarray(y_range, dtype=float)
    ax_x = _make_axis(xs, x_log, x_categories)
    ax_y = _make_axis(ys, False, None)
    y_label_w = max((font.text_size(t, SCALE)[0] for t in ax_y.labels), default=0)
    legend = [s for s in series if s.label]
    left = y_label_w + 14 + 22
    top = 14 + (22 if legend else 0)
    right, bottom = 16, 50
    canvas = Canvas(width, height)
    px0, py0, px1, py1 = left, top, width - right, height - bottom
    clip = (px0, py0, px1, py1)

    def to_px(v, axis: _Axis, a: float, b: float, flip: bool) -> np.ndarray:
        v = np.clip(np.asarray(v, dtype=float), -LIMIT, LIMIT)
        if axis.log:
            with np.errstate(divide="ignore", invalid="ignore"):
                v = np.where(v > 0, np.log10(np.where(v > 0, v, 1.0)), np.nan)
        frac = (v - axis.lo) / (axis.hi - axis.lo)
        return b - frac * (b - a) if flip else a + frac * (b - a)

    for tick, label in zip(ax_y.ticks, ax_y.labels):
        y = float(to_px(tick, _Axis(ax_y.lo, ax_y.hi), py0, py1, True))
        canvas.rect(px0, y, px1, y, GRID)
        canvas.text(px0 - 6, y - 7, label, INK, SCALE, anchor="right")
    x_tick_axis = _Axis(ax_x.lo, ax_x.hi)
    for tick, label in zip(ax_x.ticks, ax_x.labels):
        x = float(to_px(tick, x_tick_axis, px0, px1, False))
        canvas.rect(x, py1, x, py1 + 4, AXIS)
        canvas.text(x, py1 + 8, label, INK, SCALE, anchor="center")
    canvas.rect(px0, py0, px0, py1, AXIS)
    canvas.rect(px0, py1, px1, py1, AXIS)
    text, scale = fit_text(x_label, px1 - px0)
    canvas.text((px0 + px1) / 2, height - 18, text, INK, scale, anchor="center")
    text, scale = fit_text(y_label, py1 - py0 + top // 2)
    canvas.text(4 if scale == SCALE else 8, (py0 + py1) / 2, text, INK, scale, anchor="center", vertical=True)

    for s in series:
        x = to_px(s.x, ax_x, px0, px1, False)
        y = to_px(s.y, ax_y, py0, py1, True)
        if s.style in ("line", "step"):
            if s.style == "step" and len(x) > 1:
                x = np.repeat(x, 2)[1:]
                y = np.repeat(y, 2)[:-1]
            canvas.polyline(x, y, s.color, s.width, clip)
        else:
            canvas.markers(x, y, s.color, size=3 + 2 * s.width, hollow=s.style == "hollow", clip=clip)

    lx = px0 + 4
    room = sum(20 + font.text_size(s.label, SCALE)[0] + 18 for s in legend)
    scale = SCALE if room <= width - lx else 1
    for s in legend:
        canvas.rect(lx, 8, lx + 14, 20, s.color)
        canvas.text(lx + 20, 7 if scale == SCALE else 11, s.label, INK, scale)
        lx += 20 + font.text_size(s.label, scale)[0] + 18
    return canvas.to_png()


def bar_chart(labels: Sequence[str], values: Sequence[float], *, x_label: str,
              width: int = 720, color: Color = PALETTE[0]) -> bytes:
    """Horizontal bars, one row per label, longest first as given; values ≥ 0."""
    values = [max(float(v), 0.0) if math.isfinite(float(v)) else 0.0 for v in values]
    row = 26
    label_w = max((font.text_size(str(t), SCALE)[0] for t in labels), default=0)
    left, right, top, bottom = label_w + 16, 70, 10, 44
    height = top + bottom + row * max(len(labels), 1)
    canvas = Canvas(width, height)
    px0, px1 = left, width - right
    vmax = max(values, default=0.0) or 1.0
    axis = _make_axis(np.array([0.0, vmax]), False, None, include_zero=True)
    axis.lo = 0.0
    span = axis.hi - axis.lo
    for tick, label in zip(axis.ticks, axis.labels):
        x = px0 + (tick - axis.lo) / span * (px1 - px0)
        canvas.rect(x, top, x, height - bottom, GRID)
        canvas.text(x, height - bottom + 6, label, INK, SCALE, anchor="center")
    for i, (label, value) in enumerate(zip(labels, values)):
        y = top + i * row
        canvas.text(px0 - 8, y + 6, str(label), INK, SCALE, anchor="right")
        x = px0 + value / span * (px1 - px0)
        canvas.rect(px0, y + 4, max(x, px0 + 1), y + row - 5, color)
        canvas.text(x + 6, y + 6, f"{value:.3f}", INK, SCALE)
    canvas.rect(px0, top, px0, height - bottom, AXIS)
    canvas.text((px0 + px1) / 2, height - 18, x_label, INK, SCALE, anchor="center")
    return canvas.to_png()
