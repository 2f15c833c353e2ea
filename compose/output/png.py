"""A streaming PNG writer for 8-bit gray / RGB / RGBA images (ISO/IEC 15948:2004, W3C PNG).

Rows arrive in bands (as the renderer finishes a row of windows). Each band is filtered in numpy
(filter type 2, "Up", PNG section 9.2) and deflated on the writer's own threads, several bands at
once: every band is a raw deflate piece ending on a full flush (byte aligned, empty dictionary),
so the pieces concatenate into one zlib stream (RFC 1950/1951) whose Adler-32 is combined from
the pieces' own. Pieces are :data:`PIECE_ROWS` rows whatever the bands (a band is cut, or rows
are held until a piece is full), so the file is the same whatever the thread count and the
window size: it depends only on the pixels.

The deflate implementation is ISA-L's (python package ``isal``) at level 2: on the 8192 x 8192
benchmark map's filtered pieces 0.35 s of one core against 0.75 s at its level 3, for a stream
2.6 % larger (78.1 against 76.1 MB; 7.5 % above zlib level 6's, level 3's 4.7 %); on the
1500 x 1500 demo map (coast) level 2's stream is 2.1 % smaller than level 3's (measured, no
source). zlib-ng at level 3 runs at about 140 MB/s of one core and zlib at level 6 at 48 MB/s.
Without isal, zlib-ng at level 3; without either, the standard library's zlib at level 6 (a
level above 3, asked for by a caller, goes to zlib-ng). Memory holds at most ``2 x threads``
pieces in flight.
"""
from __future__ import annotations

import os
import struct
import threading
import zlib
from collections import deque
from concurrent.futures import Future, ThreadPoolExecutor
from pathlib import Path
from typing import Any

import numpy as np

from compose.output.atomic import DIRECT_BYTES, DirectFile
from compose.page.dates import png_time_chunk

_isal: Any = None
_zlib_ng: Any = None
try:                                    # faster deflates, the same stream format
    from isal import isal_zlib as _isal
except ImportError:                     # pragma: no cover - isal is a dependency
    pass
try:
    from zlib_ng import zlib_ng as _zlib_ng
except ImportError:                     # pragma: no cover - zlib-ng is a dependency
    pass
LEVEL, DEFLATE = (2, "isal") if _isal is not None else (3, "zlib-ng") if _zlib_ng is not None \
    else (6, "zlib")


#: Rows a deflate piece holds (the last piece: the rest); each piece ends on a full flush (about
#: 30 bytes, and a fresh 32 kB dictionary).
PIECE_ROWS = 256


def _deflater(level: int) -> Any:
    """The deflate module for ``level``: isal up to its highest level (3), else zlib-ng, else
    the standard library's zlib."""
    if _isal is not None and level <= 3:
        return _isal
    return _zlib_ng if _zlib_ng is not None else zlib

__all__ = ["PngWriter", "write_png", "adler32_combine", "LEVEL", "DEFLATE"]

_SIGNATURE = b"\x89PNG\r\n\x1a\n"
_ADLER_BASE = 65521


def _chunk(kind: bytes, data: bytes) -> bytes:
    return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF)


def _write_chunk(f, kind: bytes, *parts: bytes) -> None:
    """Write a chunk whose data is ``parts`` joined, without joining them (an IDAT piece is
    megabytes; the CRC runs over the type and the parts in turn, PNG section 5.3)."""
    crc = zlib.crc32(kind)
    for part in parts:
        crc = zlib.crc32(part, crc)
    f.write(struct.pack(">I", sum(len(p) for p in parts)) + kind)
    for part in parts:
        f.write(part)
    f.write(struct.pack(">I", crc & 0xFFFFFFFF))


def adler32_combine(adler1: int, adler2: int, len2: int) -> int:
    """Adler-32 of A + B from adler32(A), adler32(B) and len(B) (zlib's adler32_combine,
    RFC 1950 section 8.2 checksum)."""
    rem = len2 % _ADLER_BASE
    sum1 = adler1 & 0xFFFF
    sum2 = (rem * sum1) % _ADLER_BASE
    sum1 += (adler2 & 0xFFFF) + _ADLER_BASE - 1
    sum2 += ((adler1 >> 16) & 0xFFFF) + ((adler2 >> 16) & 0xFFFF) + _ADLER_BASE - rem
    sum1 %= _ADLER_BASE
    sum2 %= _ADLER_BASE
    return sum1 | (sum2 << 16)


def _zlib_header(level: int) -> bytes:
    """CMF/FLG of a zlib stream with a 32 KiB window, FLEVEL as zlib sets it (RFC 1950 2.2)."""
    flevel = 0 if level < 2 else 1 if level < 6 else 2 if level == 6 else 3
    cmf, flg = 0x78, flevel << 6
    flg += 31 - ((cmf << 8) | flg) % 31
    return bytes([cmf, flg])


_SCRATCH = threading.local()     # per deflating thread: the array its pieces are filtered into


def _scratch(n: int, width: int) -> np.ndarray:
    """A uint8 (n, width) array of the calling thread's, kept for its next piece: a piece's
    filtered rows (6.3 MB at 8192 px) are above the heap's mmap threshold (compose.heap), so
    a new array per piece is mapped, its pages faulted in and zeroed by the kernel, unmapped."""
    buf = getattr(_SCRATCH, "buf", None)
    if buf is None or buf.size < n * width:
        buf = _SCRATCH.buf = np.empty(n * width, np.uint8)
    return buf[:n * width].reshape(n, width)


def _filter_up(rows: np.ndarray, prev: np.ndarray, out: np.ndarray | None = None) -> np.ndarray:
    """Scanlines with filter type 2 (Up): each byte minus the byte above, modulo 256; uint8
    (n, 1 + row bytes), handed to deflate as it is (no bytes copy: 25 MB a band at 16384 px);
    into ``out`` when given."""
    n = rows.shape[0]
    if out is None:
        out = np.empty((n, rows.shape[1] + 1), dtype=np.uint8)
    out[:, 0] = 2
    np.subtract(rows[0], prev, out=out[0, 1:])
    if n > 1:
        np.subtract(rows[1:], rows[:-1], out=out[1:, 1:])
    return out


def _piece(rows: np.ndarray, prev: np.ndarray, level: int, reuse: bool = False
           ) -> tuple[tuple[bytes, bytes], int, int]:
    """(raw deflate piece ending on a full flush, as its two parts; adler32 of the filtered
    bytes; their length). ``reuse``: filter into the calling thread's scratch array (see
    :func:`_scratch`; for the writer's own threads, which end with it)."""
    out = _scratch(rows.shape[0], rows.shape[1] + 1) if reuse else None
    data = _filter_up(rows, prev, out)
    deflate = _deflater(level)
    z = deflate.compressobj(level, deflate.DEFLATED, -15, 9)
    return (z.compress(data), z.flush(deflate.Z_FULL_FLUSH)), deflate.adler32(data), data.nbytes


class PngWriter:
    """Write a PNG of ``width`` x ``height`` with ``channels`` (1 gray, 3 RGB, 4 RGBA) band by band.

    ``dpi`` is stored in a pHYs chunk; the sRGB chunk (rendering intent perceptual) says the
    pixels are sRGB. ``threads``: bands deflated at once (default: all cores, at most 4).
    ``sync``: :meth:`close` also flushes the file to the disk (fsync), so a later fsync of it
    (an output set's commit) finds nothing left to write.
    Use as a context manager; :meth:`write_rows` takes uint8 (rows, width[, c]).
    """

    def __init__(self, path: Path, width: int, height: int, channels: int = 3,
                 dpi: float | None = None, level: int | None = None, threads: int | None = None,
                 sync: bool = False):
        self.path = Path(path)
        self._sync = bool(sync)
        self.width, self.height, self.channels = int(width), int(height), int(channels)
        self.level = LEVEL if level is None else int(level)
        self._rows = 0
        self._prev = np.zeros(self.width * self.channels, dtype=np.uint8)
        self._adler = 1
        self._threads = max(1, threads or min(4, os.cpu_count() or 1))
        self._pool = ThreadPoolExecutor(self._threads, thread_name_prefix="png") if self._threads > 1 else None
        self._pending: deque[Future] = deque()
        self._held: list[np.ndarray] = []       # rows of a piece not full yet
        # large images past the page cache (compose.output.atomic.DirectFile)
        self._f = DirectFile(self.path, direct=self.width * self.height * self.channels
                             >= DIRECT_BYTES)
        color_type = {1: 0, 3: 2, 4: 6}[self.channels]
        self._f.write(_SIGNATURE)
        self._f.write(_chunk(b"IHDR", struct.pack(">IIBBBBB", self.width, self.height, 8,
                                                   color_type, 0, 0, 0)))
        self._f.write(_chunk(b"sRGB", b"\x00"))
        if dpi:
            ppm = int(round(dpi / 0.0254))
            self._f.write(_chunk(b"pHYs", struct.pack(">IIB", ppm, ppm, 1)))
        self._f.write(png_time_chunk())     # SOURCE_DATE_EPOCH's tIME, or nothing
        self._header = _zlib_header(self.level)

    def _emit(self, piece: tuple[tuple[bytes, bytes], int, int]) -> None:
        parts, adler, length = piece
        self._adler = adler32_combine(self._adler, adler, length)
        header, self._header = self._header, b""
        _write_chunk(self._f, b"IDAT", header, *parts)

    def _drain(self, keep: int) -> None:
        """Write pieces in order until at most ``keep`` are pending, and every finished piece
        at the front (written as they come, not left for the end)."""
        while self._pending and (len(self._pending) > keep or self._pending[0].done()):
            self._emit(self._pending.popleft().result())

    def write_rows(self, rows: np.ndarray) -> None:
        """Append rows (uint8, shape (n, width) or (n, width, channels)), north to south.

        With threads, whole pieces of ``rows`` are deflated later on the writer's threads,
        read where they lie (not copied; a partial piece is): the caller must not change the
        rows it handed over until :meth:`close` returns. Every caller hands over fresh rows."""
        rows = np.ascontiguousarray(rows, dtype=np.uint8).reshape(rows.shape[0], -1)
        if rows.shape[1] != self.width * self.channels:
            raise ValueError("row width does not match the PNG header")
        if rows.shape[0] == 0:
            return
        self._rows += rows.shape[0]
        if self._held:
            held = sum(len(h) for h in self._held)
            take = min(PIECE_ROWS - held, rows.shape[0])
            self._held.append(rows[:take].copy())
            rows = rows[take:]
            if held + take < PIECE_ROWS:
                return
            self._submit(np.concatenate(self._held))
            self._held = []
        full = rows.shape[0] - rows.shape[0] % PIECE_ROWS
        for r in range(0, full, PIECE_ROWS):
            self._submit(rows[r:r + PIECE_ROWS])
        if full < rows.shape[0]:
            self._held = [rows[full:].copy()]     # the caller may reuse its band

    def _submit(self, rows: np.ndarray) -> None:
        """Deflate one piece (on the writer's threads when it has them)."""
        prev, self._prev = self._prev, rows[-1].copy()
        if self._pool is None:
            self._emit(_piece(rows, prev, self.level))
            return
        self._pending.append(self._pool.submit(_piece, rows, prev, self.level, True))
        self._drain(2 * self._threads)

    def close(self) -> None:
        """Finish the stream; raises ValueError if fewer rows than the header promised."""
        if self._f.closed:
            return
        try:
            if self._rows != self.height:
                raise ValueError(f"PNG got {self._rows} rows, header says {self.height}")
            if self._held:
                self._submit(np.concatenate(self._held))
                self._held = []
            self._drain(0)
            deflate = _deflater(self.level)
            tail = deflate.compressobj(self.level, deflate.DEFLATED, -15, 9).flush(deflate.Z_FINISH)
            self._f.write(_chunk(b"IDAT", self._header + tail + struct.pack(">I", self._adler)))
            self._f.write(_chunk(b"IEND", b""))
            self._f.close(sync=self._sync)
        finally:
            self.abort()

    def abort(self) -> None:
        """Stop without finishing the file (the caller removes it); idempotent."""
        if self._pool is not None:
            for f in self._pending:
                f.cancel()
            self._pending.clear()
            self._pool.shutdown(wait=True)
            self._pool = None
        self._f.abort()

    def __enter__(self) -> PngWriter:
        return self

    def __exit__(self, exc_type, exc, tb) -> None:
        if exc_type is None:
            self.close()
        else:
            self.abort()


def write_png(path: Path, image: np.ndarray, dpi: float | None = None) -> None:
    """Write a whole uint8 image (H, W) or (H, W, C) as PNG in one go."""
    image = np.asarray(image, dtype=np.uint8)
    channels = 1 if image.ndim == 2 else image.shape[2]
    with PngWriter(path, image.shape[1], image.shape[0], channels, dpi=dpi) as w:
        for r in range(0, image.shape[0], 512):
            w.write_rows(image[r:r + 512])
