"""A streaming PNG writer for 8-bit RGB / grey images (ISO/IEC 15948:2004, W3C PNG).

Rows arrive in bands (as the renderer finishes a row of windows), are filtered in numpy
(filter type 2, "Up", per PNG section 9.2) and deflated with zlib; memory holds one band.
"""
from __future__ import annotations

import struct
import zlib
from pathlib import Path

import numpy as np

__all__ = ["PngWriter", "write_png"]

_SIGNATURE = b"\x89PNG\r\n\x1a\n"


def _chunk(kind: bytes, data: bytes) -> bytes:
    return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF)


class PngWriter:
    """Write a PNG of ``width`` x ``height`` with ``channels`` (1 grey, 3 RGB, 4 RGBA) band by band.

    ``dpi`` is stored in a pHYs chunk; the sRGB chunk (rendering intent perceptual) says the
    pixels are sRGB. Use as a context manager; :meth:`write_rows` takes uint8 (rows, width[, c]).
    """

    def __init__(self, path: Path, width: int, height: int, channels: int = 3,
                 dpi: float | None = None, level: int = 6):
        self.path = Path(path)
        self.width, self.height, self.channels = int(width), int(height), int(channels)
        self._rows = 0
        self._prev = np.zeros(self.width * self.channels, dtype=np.uint8)
        self._z = zlib.compressobj(level, zlib.DEFLATED, 15, 9)
        self._f = open(self.path, "wb")
        color_type = {1: 0, 3: 2, 4: 6}[self.channels]
        self._f.write(_SIGNATURE)
        self._f.write(_chunk(b"IHDR", struct.pack(">IIBBBBB", self.width, self.height, 8,
                                                   color_type, 0, 0, 0)))
        self._f.write(_chunk(b"sRGB", b"\x00"))
        if dpi:
            ppm = int(round(dpi / 0.0254))
            self._f.write(_chunk(b"pHYs", struct.pack(">IIB", ppm, ppm, 1)))

    def write_rows(self, rows: np.ndarray) -> None:
        """Append rows (uint8, shape (n, width) or (n, width, channels)), north to south."""
        rows = np.ascontiguousarray(rows, dtype=np.uint8).reshape(rows.shape[0], -1)
        if rows.shape[1] != self.width * self.channels:
            raise ValueError("row width does not match the PNG header")
        n = rows.shape[0]
        out = np.empty((n, rows.shape[1] + 1), dtype=np.uint8)
        out[:, 0] = 2  # filter type Up
        np.subtract(rows[0], self._prev, out=out[0, 1:])
        if n > 1:
            np.subtract(rows[1:], rows[:-1], out=out[1:, 1:])
        self._prev = rows[-1].copy()
        self._f.write(_chunk(b"IDAT", self._z.compress(out.tobytes())))
        self._rows += n

    def close(self) -> None:
        """Finish the stream; raises ValueError if fewer rows than the header promised."""
        if self._f.closed:
            return
        try:
            if self._rows != self.height:
                raise ValueError(f"PNG got {self._rows} rows, header says {self.height}")
            self._f.write(_chunk(b"IDAT", self._z.flush()))
            self._f.write(_chunk(b"IEND", b""))
        finally:
            self._f.close()

    def __enter__(self) -> "PngWriter":
        return self

    def __exit__(self, exc_type, exc, tb) -> None:
        if exc_type is None:
            self.close()
        else:
            self._f.close()


def write_png(path: Path, image: np.ndarray, dpi: float | None = None) -> None:
    """Write a whole uint8 image (H, W) or (H, W, C) as PNG in one go."""
    image = np.asarray(image, dtype=np.uint8)
    channels = 1 if image.ndim == 2 else image.shape[2]
    with PngWriter(path, image.shape[1], image.shape[0], channels, dpi=dpi) as w:
        for r in range(0, image.shape[0], 512):
            w.write_rows(image[r:r + 512])
