"""The hand-written PNG encoder, the bitmap font and the charts."""

from __future__ import annotations

import numpy as np
import pytest

from labbench.export import charts, font
from labbench.export.png import Canvas, encode_png

from pngcheck import decode, decode_with_qt


def test_encoder_round_trip_and_independent_decoder():
    rng = np.random.default_rng(1)
    pixels = rng.integers(0, 256, size=(17, 23, 3), dtype=np.uint8)
    data = encode_png(pixels)
    assert np.array_equal(decode(data), pixels)
    qt = decode_with_qt(data)
    if qt is not None:
        assert np.array_equal(qt, pixels)
    with pytest.raises(ValueError):
        encode_png(pixels.astype(np.float32))


def test_canvas_primitives_land_where_asked():
    c = Canvas(40, 30)
    c.rect(2, 3, 5, 4, (255, 0, 0))
    assert (c.pixels[3:5, 2:6] == (255, 0, 0)).all() and (c.pixels[5, 2] == 255).all()
    c.polyline([0, 39], [20, 20], (0, 0, 255))
    assert (c.pixels[20, :, 2] == 255).all() and (c.pixels[20, :, 0] == 0).all()
    c.markers([10], [10], (0, 200, 0), size=5, hollow=True)
    assert tuple(c.pixels[8, 10]) == (0, 200, 0) and tuple(c.pixels[10, 10]) == (255, 255, 255)
    c.rect(-10, -10, 100, 0, (1, 2, 3))             # clipped, no error
    assert (c.pixels[0] == (1, 2, 3)).all()


def test_font_covers_printable_ascii_with_distinct_glyphs():
    seen = {}
    for code in range(32, 127):
        mask = font.glyph(chr(code))
        assert mask.shape == (font.GLYPH_H, font.GLYPH_W)
        seen.setdefault(mask.tobytes(), []).append(chr(code))
    assert all(len(chars) == 1 for chars in seen.values()), [c for c in seen.values() if len(c) > 1]
    assert font.text_mask("ab", 2).shape == (14, 22)
    assert font.text_size("abc") == (17, 7)


@pytest.mark.parametrize("span, step", [(1.0, 0.2), (7.0, 2.0), (0.9, 0.2), (12.0, 2.5), (430.0, 100.0)])
def test_nice_steps(span, step):
    # common practice: ticks on 1, 2, 2.5 or 5 times a power of ten, about five intervals
    assert charts.nice_step(span) == pytest.approx(step)


def test_charts_draw_their_series():
    png = charts.xy_chart([charts.Series([0, 1, 2], [1.0, 3.0, 2.0], (200, 10, 10), "line", label="a"),
                           charts.Series([0, 2], [2.0, 2.0], (10, 200, 10), "points")],
                          x_label="epoch", y_label="loss", width=300, height=200)
    img = decode(png)
    assert img.shape == (200, 300, 3)
    colours = {tuple(p) for p in img.reshape(-1, 3)}
    assert (200, 10, 10) in colours and (10, 200, 10) in colours
    bars = decode(charts.bar_chart(["lr", "units"], [0.7, 0.3], x_label="share", width=300))
    assert (np.all(bars == charts.PALETTE[0], axis=2).sum()) > 100
    log_png = decode(charts.xy_chart([charts.Series([1e-4, 1e-1], [0, 1])], x_label="lr", y_label="s", x_log=True))
    cats_png = decode(charts.xy_chart([charts.Series([0, 1], [0, 1])], x_label="act", y_label="s",
                                      x_categories=["relu", "tanh"]))
    assert log_png.shape == cats_png.shape == (300, 720, 3)
