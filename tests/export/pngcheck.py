"""A PNG reader for the tests, written from the PNG specification (ISO/IEC 15948): chunk layout
(length, type, data, CRC-32 over type + data), IHDR fields, zlib-compressed IDAT scanlines with a
filter byte per row. Only what labbench writes (8-bit RGB, filter 0, no interlace) is decoded."""

from __future__ import annotations

import struct
import zlib

import numpy as np

SIGNATURE = b"\x89PNG\r\n\x1a\n"   # source: the PNG specification, section 5.2


def decode(data: bytes) -> np.ndarray:
    assert data[:8] == SIGNATURE, "PNG signature"
    pos, chunks = 8, []
    while pos < len(data):
        (length,) = struct.unpack(">I", data[pos:pos + 4])
        kind, body = data[pos + 4:pos + 8], data[pos + 8:pos + 8 + length]
        (crc,) = struct.unpack(">I", data[pos + 8 + length:pos + 12 + length])
        assert zlib.crc32(kind + body) & 0xFFFFFFFF == crc, f"CRC of {kind!r}"
        chunks.append((kind, body))
        pos += 12 + length
    kinds = [k for k, _ in chunks]
    assert kinds[0] == b"IHDR" and kinds[-1] == b"IEND"
    width, height, depth, colour, comp, filt, interlace = struct.unpack(">IIBBBBB", chunks[0][1])
    assert (depth, colour, comp, filt, interlace) == (8, 2, 0, 0, 0)
    raw = zlib.decompress(b"".join(b for k, b in chunks if k == b"IDAT"))
    assert len(raw) == height * (1 + 3 * width)
    rows = np.frombuffer(raw, np.uint8).reshape(height, 1 + 3 * width)
    assert np.all(rows[:, 0] == 0), "filter type 0 on every row"
    return rows[:, 1:].reshape(height, width, 3)


def decode_with_qt(data: bytes) -> np.ndarray | None:
    """The same picture decoded by Qt's PNG reader (an independent decoder), or None without Qt."""
    try:
        from PySide6.QtGui import QImage
    except ImportError:
        return None
    image = QImage()
    assert image.loadFromData(data, "PNG"), "Qt cannot read the PNG"
    image = image.convertToFormat(QImage.Format.Format_RGB888)
    h, w, stride = image.height(), image.width(), image.bytesPerLine()
    buf = np.frombuffer(image.constBits(), np.uint8, count=h * stride).reshape(h, stride)
    return buf[:, : 3 * w].reshape(h, w, 3).copy()
