"""Fast PNG encoding for the page writers.

matplotlib's PDF and SVG writers embed raster images as PNG data made by Pillow at zlib level 6:
on the demo's 1500 x 1500 map that one encode took longer than the whole map compute. While a
page is written, :func:`fast_png` routes Pillow's plain PNG saves (8-bit gray, RGB or RGBA, no
options) to :func:`png_bytes`: filter type 2 ("Up", PNG section 9.2) in numpy and one deflate
stream at zlib-ng level 4 (the engine's PNG setting; about 3x faster than level 6 at a similar
size). An RGBA image whose alpha is 255 everywhere (the SVG writer's form of an opaque
raster) is stored as RGB: the same pixels, a quarter less to deflate, and the same file as the
PDF writer's RGB of it. Every other save goes to Pillow unchanged. The PDF writer reads the PNG's IDAT data back
as a Flate stream with PNG predictors (ISO 32000-1, 7.4.4.4), which any filter type satisfies.
"""
from __future__ import annotations

import contextlib
import hashlib
import struct
import threading
import types
import zlib
from typing import Any

import numpy as np

_deflate: types.ModuleType
try:                                    # a faster deflate, same stream format
    from zlib_ng import zlib_ng as _deflate
    LEVEL = 4
except ImportError:                     # pragma: no cover - zlib-ng is a dependency
    _deflate = zlib
    LEVEL = 6

__all__ = ["png_bytes", "fast_png", "PngRows", "remember", "LEVEL"]

_TYPES = {"L": (1, 0), "RGB": (3, 2), "RGBA": (4, 6)}
_lock = threading.Lock()
_users = 0
_saved: Any = None
_encoded: dict[tuple, bytes] = {}      # PNG files made in the current fast_png() block
_known: dict[tuple, bytes] = {}        # PNG files made beforehand (remember())


def _chunk(kind: bytes, data: bytes) -> bytes:
    return (struct.pack(">I", len(data)) + kind + data
            + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF))


def png_bytes(image: np.ndarray, dpi: float | None = None) -> bytes:
    """A whole PNG file of a uint8 image (H, W) gray, (H, W, 3) RGB or (H, W, 4) RGBA."""
    image = np.ascontiguousarray(image, dtype=np.uint8)
    channels = 1 if image.ndim == 2 else image.shape[2]
    color_type = {1: 0, 3: 2, 4: 6}[channels]
    h, w = image.shape[:2]
    rows = image.reshape(h, w * channels)
    filtered = np.empty((h, w * channels + 1), np.uint8)
    filtered[:, 0] = 2
    filtered[0, 1:] = rows[0]
    np.subtract(rows[1:], rows[:-1], out=filtered[1:, 1:])
    out = [b"\x89PNG\r\n\x1a\n",
           _chunk(b"IHDR", struct.pack(">IIBBBBB", w, h, 8, color_type, 0, 0, 0))]
    if dpi:
        ppm = int(round(dpi / 0.0254))
        out.append(_chunk(b"pHYs", struct.pack(">IIB", ppm, ppm, 1)))
    out.append(_chunk(b"IDAT", _deflate.compress(filtered.tobytes(), LEVEL)))
    out.append(_chunk(b"IEND", b""))
    return b"".join(out)


def _key(mode: str, shape: tuple, digest: bytes) -> tuple:
    return (mode, tuple(shape), digest)


class PngRows:
    """:func:`png_bytes` of an image handed over band by band, top to bottom, while the image
    is still being made (the same bytes: one deflate stream fed in pieces gives the stream of
    the whole). ``mode``: Pillow's name of the layout (``L``, ``RGB``, ``RGBA``) of ``channels``
    uint8 samples per pixel; :meth:`finish` returns the file and the key :func:`remember`
    files it under."""

    def __init__(self, width: int, mode: str):
        self.width, self.mode = int(width), mode
        self.channels = _TYPES[mode][0]
        self.height = 0
        self._z = _deflate.compressobj(LEVEL)
        self._parts: list[bytes] = []
        self._last: np.ndarray | None = None
        self._hash = hashlib.blake2b(digest_size=20)

    def add(self, rows: np.ndarray) -> None:
        """The next rows, (n, width[, channels]) uint8."""
        rows = np.ascontiguousarray(rows, dtype=np.uint8)
        n = rows.shape[0]
        if n == 0:
            return
        self._hash.update(rows.data)
        flat = rows.reshape(n, self.width * self.channels)
        filtered = np.empty((n, flat.shape[1] + 1), np.uint8)
        filtered[:, 0] = 2                                # "Up", as png_bytes
        if self._last is None:
            filtered[0, 1:] = flat[0]
        else:
            np.subtract(flat[0], self._last, out=filtered[0, 1:])
        np.subtract(flat[1:], flat[:-1], out=filtered[1:, 1:])
        self._last = flat[-1].copy()
        self._parts.append(self._z.compress(filtered.tobytes()))
        self.height += n

    def finish(self) -> tuple[tuple, bytes]:
        """(key, the whole PNG file)."""
        ihdr = struct.pack(">IIBBBBB", self.width, self.height, 8, _TYPES[self.mode][1], 0, 0, 0)
        data = b"".join([b"\x89PNG\r\n\x1a\n", _chunk(b"IHDR", ihdr),
                         _chunk(b"IDAT", b"".join(self._parts) + self._z.flush()),
                         _chunk(b"IEND", b"")])
        shape = (self.height, self.width) + ((self.channels,) if self.channels > 1 else ())
        return _key(self.mode, shape, self._hash.digest()), data


def remember(key: tuple, data: bytes) -> None:
    """File a PNG made beforehand (:class:`PngRows`) for the saves of its pixels in
    :func:`fast_png` blocks of this process."""
    with _lock:
        _known[key] = data


def _save(im, fp, filename) -> None:
    if im.mode in _TYPES and not im.encoderinfo:
        pixels = np.asarray(im)
        mode = im.mode
        if mode == "RGBA" and bool((pixels[..., 3] == 255).all()):     # opaque: RGB
            pixels, mode = np.ascontiguousarray(pixels[..., :3]), "RGB"
        # the PDF and the SVG of one page embed the same map: encode it once
        key = _key(mode, pixels.shape,
                   hashlib.blake2b(np.ascontiguousarray(pixels).data, digest_size=20).digest())
        with _lock:
            data = _encoded.get(key) or _known.get(key)
        if data is None:
            data = png_bytes(pixels)
            with _lock:
                if _users:
                    _encoded[key] = data
        fp.write(data)
        return
    _saved(im, fp, filename)


@contextlib.contextmanager
def fast_png():
    """Within the block, Pillow's plain PNG saves use :func:`png_bytes` (re-entrant and safe
    across threads: the first user installs it, the last restores Pillow's own)."""
    global _users, _saved
    from PIL import Image

    Image.preinit()             # registers PNG (init() would import every format's plugin)
    with _lock:
        if _users == 0:
            _saved = Image.SAVE["PNG"]
            Image.SAVE["PNG"] = _save
        _users += 1
    try:
        yield
    finally:
        with _lock:
            _users -= 1
            if _users == 0:
                Image.SAVE["PNG"] = _saved
                _encoded.clear()
