"""Fast PNG encoding for the page writers.

matplotlib's PDF and SVG writers embed raster images as PNG data made by Pillow at zlib level 6:
on the demo's 1500 x 1500 map that one encode took longer than the whole map compute. While a
page is written, :func:`fast_png` routes Pillow's plain PNG saves (8-bit gray, RGB or RGBA, no
options) to :func:`png_bytes`: filter type 2 ("Up", PNG section 9.2) in numpy and one deflate
stream by ISA-L at level 2 (the demo's page raster, 1500 x 1500 RGB: 25 ms and 2.62 MB against
zlib-ng level 4's 219 ms and 2.44 MB, measured here; zlib-ng level 4 without isal), fed in
blocks of :data:`BLOCK` rows whatever the pieces the image came in, so a file made band by band
is byte for byte the file of the whole. An RGBA image whose alpha is 255 everywhere (the SVG writer's form of an opaque
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
    from isal import isal_zlib as _deflate
    LEVEL = 2
except ImportError:                     # pragma: no cover - isal is a dependency
    try:
        from zlib_ng import zlib_ng as _deflate
        LEVEL = 4
    except ImportError:
        _deflate = zlib
        LEVEL = 6

#: rows of filtered image data per piece handed to the deflate stream (ISA-L's output depends
#: on how its input is cut, so it is always cut the same way)
BLOCK = 256

__all__ = ["png_bytes", "fast_png", "PngRows", "remember", "deferred", "filled", "png_of",
           "known_png", "idat", "PLACEHOLDER", "LEVEL", "BLOCK"]

_TYPES = {"L": (1, 0), "RGB": (3, 2), "RGBA": (4, 6)}
_lock = threading.Lock()
_users = 0
_saved: Any = None
_encoded: dict[tuple, bytes] = {}      # PNG files made in the current fast_png() block
_known: dict[tuple, bytes] = {}        # PNG files made beforehand (remember())
_held: list[tuple[np.ndarray, bytes]] = []     # ... and the arrays they were made of


def _chunk(kind: bytes, data: bytes) -> bytes:
    return (struct.pack(">I", len(data)) + kind + data
            + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF))


def png_bytes(image: np.ndarray, dpi: float | None = None) -> bytes:
    """A whole PNG file of a uint8 image (H, W) gray, (H, W, 3) RGB or (H, W, 4) RGBA."""
    image = np.ascontiguousarray(image, dtype=np.uint8)
    channels = 1 if image.ndim == 2 else image.shape[2]
    rows = PngRows(image.shape[1], {1: "L", 3: "RGB", 4: "RGBA"}[channels], hashed=False)
    rows.add(image)
    return rows.file(dpi)


def _key(mode: str, shape: tuple, digest: bytes) -> tuple:
    return (mode, tuple(shape), digest)


class PngRows:
    """:func:`png_bytes` of an image handed over band by band, top to bottom, while the image
    is still being made (the same bytes: the filtered rows go to one deflate stream in blocks
    of :data:`BLOCK` rows however the bands cut them). ``mode``: Pillow's name of the layout
    (``L``, ``RGB``, ``RGBA``) of ``channels`` uint8 samples per pixel; :meth:`finish` returns
    the file and the key :func:`remember` files it under (``hashed``: False when no key is
    wanted)."""

    def __init__(self, width: int, mode: str, hashed: bool = True):
        self.width, self.mode = int(width), mode
        self.channels = _TYPES[mode][0]
        self.height = 0
        self._z = _deflate.compressobj(LEVEL)
        self._parts: list[bytes] = []
        self._pending: list[np.ndarray] = []        # filtered rows not yet deflated
        self._waiting = 0
        self._last: np.ndarray | None = None
        self._hash = hashlib.blake2b(digest_size=20) if hashed else None

    def add(self, rows: np.ndarray) -> None:
        """The next rows, (n, width[, channels]) uint8."""
        rows = np.ascontiguousarray(rows, dtype=np.uint8)
        n = rows.shape[0]
        if n == 0:
            return
        if self._hash is not None:
            self._hash.update(rows.data)
        flat = rows.reshape(n, self.width * self.channels)
        filtered = np.empty((n, flat.shape[1] + 1), np.uint8)
        filtered[:, 0] = 2                                # "Up" (PNG section 9.2)
        if self._last is None:
            filtered[0, 1:] = flat[0]
        else:
            np.subtract(flat[0], self._last, out=filtered[0, 1:])
        np.subtract(flat[1:], flat[:-1], out=filtered[1:, 1:])
        self._last = flat[-1].copy()
        self._pending.append(filtered)
        self._waiting += n
        self.height += n
        self._deflate(final=False)

    def _deflate(self, final: bool) -> None:
        if not self._pending or (self._waiting < BLOCK and not final):
            return
        data = (self._pending[0] if len(self._pending) == 1
                else np.concatenate(self._pending))
        whole = self._waiting if final else self._waiting - self._waiting % BLOCK
        for r in range(0, whole, BLOCK):
            self._parts.append(self._z.compress(data[r:min(r + BLOCK, whole)].tobytes()))
        self._pending = [data[whole:]] if whole < self._waiting else []
        self._waiting -= whole

    def file(self, dpi: float | None = None) -> bytes:
        """The whole PNG file (``dpi``: its pHYs chunk); call once, after the last rows."""
        self._deflate(final=True)
        ihdr = struct.pack(">IIBBBBB", self.width, self.height, 8, _TYPES[self.mode][1], 0, 0, 0)
        out = [b"\x89PNG\r\n\x1a\n", _chunk(b"IHDR", ihdr)]
        if dpi:
            ppm = int(round(dpi / 0.0254))
            out.append(_chunk(b"pHYs", struct.pack(">IIB", ppm, ppm, 1)))
        out += [_chunk(b"IDAT", b"".join(self._parts) + self._z.flush()), _chunk(b"IEND", b"")]
        return b"".join(out)

    def finish(self) -> tuple[tuple, bytes]:
        """(key, the whole PNG file)."""
        data = self.file()
        shape = (self.height, self.width) + ((self.channels,) if self.channels > 1 else ())
        digest = self._hash.digest() if self._hash is not None else b""
        return _key(self.mode, shape, digest), data


def remember(key: tuple, data: bytes, pixels: np.ndarray | None = None) -> None:
    """File a PNG made beforehand (:class:`PngRows`) for the saves of its pixels in
    :func:`fast_png` blocks of this process; ``pixels``: the array it was made of, finished and
    never changed again, found by :func:`known_png` (and :func:`png_of`) without reading it."""
    with _lock:
        _known[key] = data
        if pixels is not None:
            _held.append((pixels, data))


def known_png(pixels: np.ndarray) -> bytes | None:
    """The PNG file :func:`remember` filed with this very array object (not a copy or another
    view of it), else None."""
    with _lock:
        return next((data for held, data in _held if held is pixels), None)


def idat(png: bytes) -> bytes:
    """The image data of a PNG file: its IDAT chunks' contents joined (PNG section 11.2.4), what
    matplotlib's PDF writer embeds as a Flate stream with PNG predictors."""
    out, at = [], 8
    while at + 8 <= len(png):
        length, kind = struct.unpack(">I4s", png[at:at + 8])
        if kind == b"IDAT":
            out.append(png[at + 8:at + 8 + length])
        elif kind == b"IEND":
            break
        at += 12 + length
    return b"".join(out)


#: what a save of an image whose pixels are not finished writes instead of its PNG file
#: (:func:`deferred`); 3 x 24 bytes, so its base64 text stands alone, without padding
PLACEHOLDER = b"compose: the map raster's PNG file is put here when the map is finished."[:72]
_deferred: tuple[int, int] | None = None


@contextlib.contextmanager
def deferred(width: int, height: int):
    """Within the block (and a :func:`fast_png` block), a plain PNG save of a ``width`` x
    ``height`` image writes :data:`PLACEHOLDER` instead of the file: a page drawn while its
    map is still being walked, whose image :func:`filled` puts in once the map is done."""
    global _deferred
    with _lock:
        _deferred = (int(width), int(height))
    try:
        yield
    finally:
        with _lock:
            _deferred = None


def filled(text: bytes, png: bytes) -> bytes | None:
    """``text`` (a file that embeds base64 PNG data, as SVG does) with the base64 text of
    :data:`PLACEHOLDER` replaced by that of the PNG file ``png``; None unless the placeholder
    is in it exactly once."""
    import base64

    mark = base64.b64encode(PLACEHOLDER)
    if text.count(mark) != 1:
        return None
    return text.replace(mark, base64.b64encode(png))


def png_of(pixels: np.ndarray) -> bytes:
    """The PNG file :func:`fast_png` saves of ``pixels`` (H, W, 3) RGB uint8: the one
    :func:`remember` filed for them (for this array object: without reading it), else
    :func:`png_bytes`."""
    known = known_png(pixels)
    if known is not None:
        return known
    pixels = np.ascontiguousarray(pixels, dtype=np.uint8)
    key = _key("RGB", pixels.shape, hashlib.blake2b(pixels.data, digest_size=20).digest())
    with _lock:
        data = _encoded.get(key) or _known.get(key)
    return data if data is not None else png_bytes(pixels)


def _save(im, fp, filename) -> None:
    if _deferred is not None and im.size == _deferred and im.mode in ("RGB", "RGBA"):
        fp.write(PLACEHOLDER)
        return
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
