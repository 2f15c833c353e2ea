"""RGB (or RGBA) GeoTIFF of the canvas: tiled, deflate, the canvas CRS and transform exactly; optionally
a Cloud Optimized GeoTIFF (GDAL's COG driver: 512 px tiles, overviews averaged down to a
screen's size, everything laid out so a reader fetches a region of one zoom with few range
requests)."""
from __future__ import annotations

import os
import zlib
from collections import deque
from concurrent.futures import Future, ThreadPoolExecutor
from pathlib import Path
from typing import Any, Literal

import numpy as np
import rasterio
from rasterio.enums import ColorInterp
from rasterio.windows import Window as RioWindow

from compose.canvas import Canvas
from compose.output.atomic import DIRECT_BYTES, DirectFile
from compose.page.dates import tiff_datetime

__all__ = ["GeoTiffWriter", "to_cog"]


#: Columns per GDAL write (a multiple of the 512 px tile width).
WRITE_COLUMNS = 2048

_isal: Any = None
_zlib_ng: Any = None
try:                                    # faster deflates, the same stream format
    from isal import isal_zlib as _isal
except ImportError:                     # pragma: no cover - isal is a dependency
    try:
        from zlib_ng import zlib_ng as _zlib_ng
    except ImportError:
        pass


def _zlib_compress(data) -> bytes:
    """A zlib stream (RFC 1950) of ``data`` at level 1: ISA-L's, else zlib-ng's, else zlib's."""
    return (_isal or _zlib_ng or zlib).compress(data, 1)


class GeoTiffWriter:
    """Write an RGB uint8 GeoTIFF window by window, or RGBA with ``alpha``.

    Tiles 512 x 512, DEFLATE at level 1 without a predictor, GDAL compressing on all cores: on
    the 8192 x 8192 benchmark map (hillshaded relief under a theme and lines) level 1 without a
    predictor took 1.9 s of CPU against 4.4 s for level 6 with horizontal differencing and made a
    file 7 % smaller (133 vs 144 MB); on the 1500 x 1500 demo map it is 15 % larger (3.35 vs
    2.92 MB) for a quarter of the CPU (bench/render.py; measured, no source). Band colour
    interpretation red, green, blue (and alpha).
    ``stream``: rows come north to south, whole width (:meth:`write` at column 0, each row
    after the last): GDAL lays the file out (georeferencing, tags, the tile arrays, no tile
    written) and the tiles are deflated here, ISA-L level 1 on ``threads`` threads (default
    all cores, at most 4), appended in order and entered in the file's tile arrays. On the 8192
    x 8192 benchmark map's RGB tiles ISA-L level 1 took 0.7 s of CPU for 135 MB against 2.7 s
    for GDAL's whole write at its level 1 (132 MB; measured, no source). The file is the same
    whatever the thread count. Not for a file that may outgrow 32-bit offsets in a classic
    TIFF (> 3.9 GB uncompressed) or whose layout GDAL made otherwise: then GDAL writes as
    without ``stream``.
    ``alpha``: a fourth band, alpha, from :meth:`write`'s ``alpha8``. Without it the file has
    three bands and is opaque everywhere (GDAL reads no mask): an alpha of 255 everywhere
    would say nothing more and cost a third more bytes to compress (on the 8192 x 8192
    benchmark map 3.2 s of CPU for RGBA against 2.7 s for RGB, same run, medians of 3;
    measured, no source).
    ``cog``: write a Cloud Optimized GeoTIFF instead: the windows go to a tiled GeoTIFF beside
    ``path`` (``path`` + ".tiles"), which :meth:`close` turns into the COG (overviews averaged)
    and removes.
    ``sync``: :meth:`close` also flushes the finished file to the disk (fsync), so a later
    fsync of it (an output set's commit) finds nothing left to write.
    """

    def __init__(self, path: Path, canvas: Canvas, tags: dict[str, str] | None = None,
                 cog: bool = False, alpha: bool = False, stream: bool = False,
                 threads: int | None = None, sync: bool = False):
        self.path = Path(path)
        self._sync = bool(sync)
        self.cog = cog
        self.alpha = bool(alpha)
        self.bands = 4 if self.alpha else 3
        self._closed = False
        self._tiles: _DeflatedTiles | None = None
        self._target = Path(str(path) + ".tiles") if cog else self.path
        profile = dict(driver="GTiff", width=canvas.width, height=canvas.height, count=self.bands,
                       dtype="uint8", crs=canvas.crs, transform=canvas.transform,
                       tiled=True, blockxsize=512, blockysize=512, compress="deflate",
                       zlevel=1, predictor=1, photometric="RGB", interleave="pixel", num_threads="all_cpus",
                       BIGTIFF="IF_SAFER")
        if stream:
            self._ds = self._open(profile, tags, sparse_ok=True)
            self._ds.close()        # the layout, no tile written
            ntiles = -(-canvas.width // _TILE) * -(-canvas.height // _TILE)
            found = _tile_arrays(self._target, ntiles)
            raw = canvas.width * canvas.height * self.bands
            if found is not None and (found[1] or raw <= _CLASSIC_LIMIT):
                self._tiles = _DeflatedTiles(self._target, canvas.width, canvas.height,
                                             self.bands, found[2],
                                             max(1, threads or min(4, os.cpu_count() or 1)))
                return
        self._ds = self._open(profile, tags)

    def _open(self, profile: dict, tags: dict[str, str] | None, **more):
        ds = rasterio.open(self._target, "w", **profile, **more)
        ds.colorinterp = [ColorInterp.red, ColorInterp.green, ColorInterp.blue,
                          ColorInterp.alpha][:self.bands]
        date = tiff_datetime()             # SOURCE_DATE_EPOCH's DateTime, or none
        if tags or date:
            ds.update_tags(**(tags or {}), **({"TIFFTAG_DATETIME": date} if date else {}))
        return ds

    def write(self, row: int, col: int, rgb8: np.ndarray, alpha8: np.ndarray | None = None) -> None:
        """Write uint8 RGB (h, w, 3) at (row, col) and, in a file with alpha, ``alpha8`` (h, w)
        (default opaque); ``alpha8`` given to a file without alpha is a ValueError.

        Written :data:`WRITE_COLUMNS` columns at a time (whole tiles, in the order a single
        write would send them: the file is the same byte for byte), so the band-interleaved
        copy GDAL takes is a few MB however wide the canvas (33.6 MB per 512-row band at 16384
        px written whole)."""
        if alpha8 is not None and not self.alpha:
            raise ValueError("alpha given to a GeoTIFF written without alpha")
        if self._tiles is not None:
            if col != 0 or rgb8.shape[1] != self._tiles.width or row != self._tiles.received:
                raise ValueError("a streamed GeoTIFF takes whole rows, north to south")
            self._tiles.rows(rgb8, alpha8)
            return
        h, w = rgb8.shape[:2]
        for c0 in range(0, w, WRITE_COLUMNS):
            c1 = min(c0 + WRITE_COLUMNS, w)
            data = np.empty((self.bands, h, c1 - c0), dtype=np.uint8)
            data[:3] = np.moveaxis(rgb8[:, c0:c1], -1, 0)
            if self.alpha:
                data[3] = 255 if alpha8 is None else alpha8[:, c0:c1]
            self._ds.write(data, window=RioWindow(col + c0, row, c1 - c0, h))

    def close(self) -> None:
        """Finish the file (for a COG: build it from the tiles and remove them); idempotent."""
        if self._closed:
            return
        self._closed = True
        if self._tiles is not None:
            try:
                self._tiles.close()
            except BaseException:
                if self.cog:
                    self._target.unlink(missing_ok=True)
                raise
        if not self._ds.closed:
            self._ds.close()
        if self.cog:
            try:
                to_cog(self._target, self.path)
            finally:
                self._target.unlink(missing_ok=True)
        if self._sync:
            fd = os.open(self.path, os.O_RDONLY)
            try:
                os.fsync(fd)
            finally:
                os.close(fd)

    def abort(self) -> None:
        """Stop after a failure elsewhere: close without finishing, remove a COG's tiles."""
        self._closed = True
        if self._tiles is not None:
            self._tiles.abort()
        if not self._ds.closed:
            self._ds.close()
        if self.cog:
            self._target.unlink(missing_ok=True)

    def __enter__(self) -> GeoTiffWriter:
        return self

    def __exit__(self, *exc) -> None:
        self.close()


# --- tiles deflated here -----------------------------------------------------------------------

_TILE = 512
_TILE_OFFSETS, _TILE_BYTE_COUNTS = 324, 325          # TIFF 6.0 section 15 (tiled images)
_TYPE_SIZE = {1: 1, 2: 1, 3: 2, 4: 4, 5: 8, 6: 1, 7: 1, 8: 2, 9: 4, 10: 8, 11: 4, 12: 8,
              16: 8, 17: 8, 18: 8}                   # TIFF 6.0 section 2, BigTIFF's 16-18
#: Largest uncompressed image (bytes) deflated here in a classic (32-bit offset) TIFF: deflate
#: grows incompressible data by well under 1 %, so its tiles still end below 4 GiB.
_CLASSIC_LIMIT = 3_900_000_000


def _tile_arrays(path: Path, tiles: int) -> tuple[str, bool, dict[int, tuple[int, str]]] | None:
    """Where a tiled TIFF keeps its tile offsets and byte counts: (byte order, BigTIFF or not,
    {tag: (file offset of the array, numpy dtype)}), or None if the file is not laid out as
    expected (one array of ``tiles`` LONG or LONG8 values each; TIFF 6.0, BigTIFF)."""
    with open(path, "rb") as f:
        head = f.read(16)
        order = {b"II": "<", b"MM": ">"}.get(head[:2])
        if order is None:
            return None
        endian: Literal["little", "big"] = "little" if order == "<" else "big"
        magic = int.from_bytes(head[2:4], endian)
        big = magic == 43
        if magic not in (42, 43):
            return None
        ifd = int.from_bytes(head[8:16] if big else head[4:8], endian)
        f.seek(ifd)
        count_size, entry_size, inline = (8, 20, 8) if big else (2, 12, 4)
        n = int.from_bytes(f.read(count_size), endian)
        table = f.read(n * entry_size)
    found: dict[int, tuple[int, str]] = {}
    for i in range(n):
        e = table[i * entry_size:(i + 1) * entry_size]
        tag, kind = int.from_bytes(e[0:2], endian), int.from_bytes(e[2:4], endian)
        if tag not in (_TILE_OFFSETS, _TILE_BYTE_COUNTS):
            continue
        count = int.from_bytes(e[4:12] if big else e[4:8], endian)
        value_at = ifd + count_size + i * entry_size + (12 if big else 8)
        if count != tiles or kind not in (4, 16):          # LONG or LONG8
            return None
        if tag == _TILE_OFFSETS and big and kind != 16:      # offsets past 4 GiB need LONG8
            return None
        size = _TYPE_SIZE[kind]
        where = value_at if count * size <= inline else int.from_bytes(
            e[12:20] if big else e[8:12], endian)
        found[tag] = (where, f"{order}u{size}")
    if len(found) != 2:
        return None
    return order, big, found


class _DeflatedTiles:
    """A tiled GeoTIFF's tiles deflated on threads of our own and appended to the file GDAL
    laid out (georeferencing, tags, empty tile arrays); rows arrive north to south."""

    def __init__(self, path: Path, width: int, height: int, bands: int,
                 arrays: dict[int, tuple[int, str]], threads: int):
        self.width, self.height, self.bands = width, height, bands
        self.across = -(-width // _TILE)
        down = -(-height // _TILE)
        self._arrays = arrays
        self._offsets = np.zeros(self.across * down, np.uint64)
        self._counts = np.zeros(self.across * down, np.uint64)
        self._buffer: np.ndarray | None = None     # rows of a tile row that came in pieces
        self._filled = 0            # rows of the current tile row in the buffer
        self.received = 0           # rows received
        self._tile = 0              # next tile to append
        # appended after GDAL's layout; a large file past the page cache
        # (compose.output.atomic.DirectFile)
        self._f = DirectFile(path, append=True, direct=width * height * bands >= DIRECT_BYTES)
        self._end = self._f.tell()
        self._pool = ThreadPoolExecutor(threads, thread_name_prefix="tif")
        self._threads = threads
        self._pending: deque[Future] = deque()

    def rows(self, rgb8: np.ndarray, alpha8: np.ndarray | None) -> None:
        """Rows (uint8 (h, width, 3), alpha (h, width) or None: opaque) after the last ones.
        A band that is a whole row of tiles (the render's 512-row bands) is deflated as it is
        (the caller leaves it unchanged); other bands are gathered into rows of tiles."""
        h = rgb8.shape[0]
        if self._filled == 0 and (h == _TILE or self.received + h == self.height) and h <= _TILE:
            self.received += h
            self._tile_row(rgb8, alpha8)
            return
        done = 0
        while done < h:
            if self._buffer is None:
                self._buffer = np.empty((_TILE, self.width, self.bands), np.uint8)
            take = min(h - done, _TILE - self._filled)
            dst = self._buffer[self._filled:self._filled + take]
            dst[..., :3] = rgb8[done:done + take]
            if self.bands == 4:
                dst[..., 3] = 255 if alpha8 is None else alpha8[done:done + take]
            self._filled += take
            self.received += take
            done += take
            if self._filled == _TILE or self.received == self.height:
                self._tile_row(self._buffer[:self._filled, ..., :3],
                               self._buffer[:self._filled, ..., 3] if self.bands == 4 else None)
                self._filled = 0

    def _tile_row(self, rgb8: np.ndarray, alpha8: np.ndarray | None) -> None:
        for c in range(0, self.width, _TILE):
            self._pending.append(self._pool.submit(_deflate_tile, rgb8, alpha8, c, self.bands))
            self._drain(2 * self._threads)
        self._drain(0)                           # the rows' arrays may be reused after this

    def _drain(self, keep: int) -> None:
        while len(self._pending) > keep:
            data = self._pending.popleft().result()
            self._f.write(data)
            self._offsets[self._tile] = self._end
            self._counts[self._tile] = len(data)
            self._end += len(data)
            self._tile += 1

    def close(self) -> None:
        try:
            if self.received != self.height:
                raise ValueError(f"GeoTIFF got {self.received} rows of {self.height}")
            self._drain(0)
            self._f.finish()
            for tag, values in ((_TILE_OFFSETS, self._offsets), (_TILE_BYTE_COUNTS, self._counts)):
                where, dtype = self._arrays[tag]
                if values.max(initial=0) > np.iinfo(np.dtype(dtype)).max:
                    raise ValueError("GeoTIFF tiles beyond the file's offset range")
                self._f.pwrite(values.astype(dtype).tobytes(), where)
        finally:
            self.abort()

    def abort(self) -> None:
        for f in self._pending:
            f.cancel()
        self._pending.clear()
        self._pool.shutdown(wait=True)
        self._f.abort()


def _deflate_tile(rgb8: np.ndarray, alpha8: np.ndarray | None, col: int, bands: int) -> bytes:
    """The 512 x 512 tile at column ``col`` of a row of tiles (``bands`` 3: RGB; 4: RGBA, alpha
    None meaning opaque; zeros right of and below the map), as a zlib stream (TIFF compression
    8, Adobe deflate; RFC 1950) at level 1."""
    rgb = rgb8[:, col:col + _TILE]
    h, w = rgb.shape[:2]
    if bands == 3 and (h, w) == (_TILE, _TILE):
        return _zlib_compress(np.ascontiguousarray(rgb))
    tile = np.zeros((_TILE, _TILE, bands), np.uint8)
    tile[:h, :w, :3] = rgb
    if bands == 4:
        tile[:h, :w, 3] = 255 if alpha8 is None else alpha8[:, col:col + _TILE]
    return _zlib_compress(tile)


def to_cog(source: Path, path: Path) -> None:
    """Copy a GeoTIFF to ``path`` as a Cloud Optimized GeoTIFF: 512 px tiles, DEFLATE with
    horizontal differencing, overviews by averaging down until the image fits one tile, all
    cores compressing (GDAL's COG driver, GDAL >= 3.1)."""
    from rasterio.shutil import copy

    copy(source, path, driver="COG", compress="DEFLATE", predictor="YES", blocksize=512,
         overviews="AUTO", overview_resampling="AVERAGE", num_threads="ALL_CPUS",
         bigtiff="IF_SAFER")
