"""A small RGB raster canvas and a PNG encoder, numpy + zlib only (no plotting library, no Qt).

The PNG file is written by hand from its chunks (signature, IHDR, IDAT, IEND; each chunk is
length + type + data + CRC-32), 8-bit truecolour, no interlace, filter type 0 on every row —
the layout the PNG specification (ISO/IEC 15948) defines.
"""

from __future__ import annotations

import struct
import zlib

import numpy as np

from labbench.export import font

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"

Color = tuple[int, int, int]


def _chunk(kind: bytes, data: bytes) -> bytes:
    crc = zlib.crc32(kind + data) & 0xFFFFFFFF
    return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", crc)


def encode_png(pixels: np.ndarray) -> bytes:
    """Encode an (h, w, 3) uint8 array as PNG bytes."""
    if pixels.ndim != 3 or pixels.shape[2] != 3 or pixels.dtype != np.uint8:
        raise ValueError("encode_png wants an (h, w, 3) uint8 array")
    height, width, _ = pixels.shape
    header = struct.pack(">IIBBBBB", width, height, 8, 2, 0, 0, 0)  # 8-bit, truecolour
    raw = np.zeros((height, 1 + width * 3), dtype=np.uint8)        # filter byte 0 per row
    raw[:, 1:] = pixels.reshape(height, width * 3)
    return (
        PNG_SIGNATURE
        + _chunk(b"IHDR", header)
        + _chunk(b"IDAT", zlib.compress(raw.tobytes(), 9))
        + _chunk(b"IEND", b"")
    )


class Canvas:
    """An RGB image to draw on; coordinates are (x right, y down) in pixels."""

    def __init__(self, width: int, height: int, background: Color = (255, 255, 255)):
        self.width = int(width)
        self.height = int(height)
        self.pixels = np.empty((self.height, self.width, 3), dtype=np.uint8)
        self.pixels[:, :] = background

    # -- primitives ------------------------------------------------------------------------
    def rect(self, x0: float, y0: float, x1: float, y1: float, color: Color) -> None:
        """Fill the rectangle between two corners (inclusive), clipped to the canvas."""
        xa, xb = sorted((int(round(x0)), int(round(x1))))
        ya, yb = sorted((int(round(y0)), int(round(y1))))
        xa, ya = max(xa, 0), max(ya, 0)
        xb, yb = min(xb, self.width - 1), min(yb, self.height - 1)
        if xa <= xb and ya <= yb:
            self.pixels[ya : yb + 1, xa : xb + 1] = color

    def _stamp(self, xs: np.ndarray, ys: np.ndarray, color: Color, width: int,
               clip: tuple[int, int, int, int] | None) -> None:
        x0, y0, x1, y1 = clip if clip else (0, 0, self.width - 1, self.height - 1)
        half = (width - 1) // 2
        for dx in range(-half, width - half):
            for dy in range(-half, width - half):
                px, py = xs + dx, ys + dy
                keep = (px >= x0) & (px <= x1) & (py >= y0) & (py <= y1)
                self.pixels[py[keep], px[keep]] = color

    def polyline(self, xs, ys, color: Color, width: int = 1,
                 clip: tuple[int, int, int, int] | None = None) -> None:
        """Straight segments through the points (NaN points break the line)."""
        xs = np.asarray(xs, dtype=float)
        ys = np.asarray(ys, dtype=float)
        for i in range(len(xs) - 1):
            a, b = (xs[i], ys[i]), (xs[i + 1], ys[i + 1])
            if not np.all(np.isfinite(a + b)):
                continue
            steps = int(max(abs(b[0] - a[0]), abs(b[1] - a[1]))) + 1
            t = np.linspace(0.0, 1.0, steps + 1)
            px = np.round(a[0] + (b[0] - a[0]) * t).astype(int)
            py = np.round(a[1] + (b[1] - a[1]) * t).astype(int)
            self._stamp(px, py, color, width, clip)

    def markers(self, xs, ys, color: Color, size: int = 5, hollow: bool = False,
                clip: tuple[int, int, int, int] | None = None) -> None:
        """Square markers centred on the points; hollow ones show only the outline."""
        xs = np.asarray(xs, dtype=float)
        ys = np.asarray(ys, dtype=float)
        ok = np.isfinite(xs) & np.isfinite(ys)
        px = np.round(xs[ok]).astype(int)
        py = np.round(ys[ok]).astype(int)
        half = size // 2
        x0, y0, x1, y1 = clip if clip else (0, 0, self.width - 1, self.height - 1)
        for dx in range(-half, half + 1):
            for dy in range(-half, half + 1):
                if hollow and abs(dx) != half and abs(dy) != half:
                    continue
                qx, qy = px + dx, py + dy
                keep = (qx >= x0) & (qx <= x1) & (qy >= y0) & (qy <= y1)
                self.pixels[qy[keep], qx[keep]] = color

    def text(self, x: float, y: float, text: str, color: Color = (40, 40, 40), scale: int = 2,
             anchor: str = "left", vertical: bool = False) -> None:
        """Draw text with the built-in font. ``anchor``: left / center / right of the point
        (x, y is the top edge); ``vertical`` turns it 90° counter-clockwise (y-axis titles)."""
        mask = font.text_mask(text, scale)
        if vertical:
            mask = np.rot90(mask)
        h, w = mask.shape
        if anchor == "center":
            x -= w / 2 if not vertical else w / 2
            if vertical:
                y -= h / 2
        elif anchor == "right":
            x -= w
        x, y = int(round(x)), int(round(y))
        ys, xs = np.nonzero(mask)
        xs, ys = xs + x, ys + y
        keep = (xs >= 0) & (xs < self.width) & (ys >= 0) & (ys < self.height)
        self.pixels[ys[keep], xs[keep]] = color

    def to_png(self) -> bytes:
        return encode_png(self.pixels)
