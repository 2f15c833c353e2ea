"""A draft's own reader of plain GeoTIFFs, so a draft of large aligned rasters needs no GDAL.

A block-sampled draft (:class:`compose.layers.early.BlockSample`) decodes about 16 whole blocks
of each large raster. Through rasterio that costs the import of rasterio and GDAL (about 55 ms
of the draft command's 0.3 s on the 8192 benchmark, before its first block is read) and the
opening of each file; the blocks themselves are a deflate stream and a predictor each, which
zlib (isal's, when installed) and numpy decode in about the same time as GDAL.

:func:`plain_source` answers a :class:`PlainSource` only for files this reader reads exactly as
GDAL does, else None (the layer then opens its :class:`compose.sources.raster.RasterSource` as
before): a little- or big-endian TIFF or BigTIFF of one image (no overviews, no mask, no
further image), one band, tiled or stripped, uncompressed (tiled) or deflate, predictor none,
horizontal (integers) or floating point (floats), of uint8, uint16, int16 or float32
cells (the types whose float32 values are exact and whose mask GDAL derives from the nodata
value alone), georeferenced by a pixel scale and one tie point of a pixel-is-area grid, its CRS
an EPSG code and nothing else (the GeoKeys of a CRS GDAL writes for ``EPSG:n``), with no
``.aux.xml``, ``.ovr`` or ``.msk`` beside it, the canvas's CRS the very string ``EPSG:n``, the
grid aligned with the full canvas and of more than :data:`compose.layers.early.DECIMATE_BLOCKS`
blocks over it. Anything else the source is asked (a warped read, a quantile sample, its CRS)
is answered by a :class:`RasterSource` opened on first use; a block whose decoding fails is
read by it too (its error message names GDAL's reason).

Formats: TIFF 6.0 (Adobe, 1992: the file header, image file directories, strips and tiles,
Predictor 2, deflate as compression 8 / 32946); TIFF Technical Note 3 (1995:
Predictor 3, floating point: each row's bytes split into planes, most significant first, then
differenced byte by byte); BigTIFF (the 16-byte header, 8-byte offsets and counts); the OGC
GeoTIFF 1.1 standard (19-008r4: ModelPixelScale, ModelTiepoint, the GeoKey directory, its
GTModelType, GTRasterType, ProjectedCRS and GeodeticCRS keys); GDAL's GDAL_NODATA tag (42113,
the nodata value as ASCII text). tests/layers/test_early_tiff.py compares every read with
rasterio's on files rasterio wrote.
"""
from __future__ import annotations

import contextlib
import functools
import math
import os
import struct
import threading
from pathlib import Path
from typing import Any

import numpy as np

__all__ = ["PlainTiff", "PlainSource", "plain_source"]

#: TIFF field types: (struct code, bytes).
_TYPES = {1: ("B", 1), 2: ("s", 1), 3: ("H", 2), 4: ("I", 4), 6: ("b", 1), 7: ("B", 1),
          8: ("h", 2), 9: ("i", 4), 11: ("f", 4), 12: ("d", 8), 16: ("Q", 8), 17: ("q", 8),
          18: ("Q", 8)}
#: (SampleFormat, BitsPerSample) -> numpy type read exactly as GDAL reads it into float32, and
#: whose GDAL mask is the nodata value alone (compose.sources.raster.RasterSource._mask_from_data)
_DTYPES = {(1, 8): "uint8", (1, 16): "uint16", (2, 16): "int16", (3, 32): "float32"}
#: GeoKeys a plain ``EPSG:n`` GeoTIFF holds (GDAL writes the citations and the units too)
_PLAIN_KEYS = {1024, 1025, 1026, 2048, 2049, 2054, 3072, 3076}
#: files GDAL reads beside a GeoTIFF that change what it is (PAM metadata, overviews, masks)
_SIDECARS = (".aux.xml", ".ovr", ".msk", ".AUX.XML", ".OVR", ".MSK")


class NotPlain(Exception):
    """The file is not one this reader reads exactly as GDAL does."""


@functools.cache
def _decompress():
    """zlib's decompress: isal's (a dependency, for the PNG writer), about twice as fast."""
    try:
        from isal import isal_zlib

        return isal_zlib.decompress
    except ImportError:         # pragma: no cover - isal is a dependency
        import zlib

        return zlib.decompress


class PlainTiff:
    """The first image of a plain GeoTIFF (see the module docstring), read block by block with
    ``os.pread`` (threads may read at once). Raises :class:`NotPlain` for anything else."""

    def __init__(self, path: str | Path) -> None:
        self.path = str(path)
        self.fd = os.open(self.path, os.O_RDONLY)
        try:
            self._parse()
        except BaseException:
            os.close(self.fd)
            self.fd = -1
            raise

    def _read(self, offset: int, size: int) -> bytes:
        got = os.pread(self.fd, size, offset)
        if len(got) != size:
            raise NotPlain("truncated")
        return got

    def _parse(self) -> None:
        head = self._read(0, 16) if os.fstat(self.fd).st_size >= 16 else b""
        if head[:2] not in (b"II", b"MM"):
            raise NotPlain("not a TIFF")
        e = "<" if head[:2] == b"II" else ">"
        self.order = e
        magic = struct.unpack(e + "H", head[2:4])[0]
        if magic == 42:
            big, first = False, struct.unpack(e + "I", head[4:8])[0]
        elif magic == 43 and struct.unpack(e + "HH", head[4:8]) == (8, 0):
            big, first = True, struct.unpack(e + "Q", head[8:16])[0]
        else:
            raise NotPlain("not a TIFF")
        count_fmt, entry, off_fmt = ("Q", 20, "Q") if big else ("H", 12, "I")
        csize = struct.calcsize(count_fmt)
        n = struct.unpack(e + count_fmt, self._read(first, csize))[0]
        raw = self._read(first + csize, n * entry + struct.calcsize(off_fmt))
        if struct.unpack(e + off_fmt, raw[n * entry:])[0] != 0:
            raise NotPlain("more than one image (overviews or a mask)")
        inline = 8 if big else 4
        tags: dict[int, tuple] = {}
        for i in range(n):
            item = raw[i * entry:(i + 1) * entry]
            if big:
                tag, typ, count = struct.unpack(e + "HHQ", item[:12])
                value = item[12:]
            else:
                tag, typ, count = struct.unpack(e + "HHI", item[:8])
                value = item[8:]
            if typ not in _TYPES:
                raise NotPlain(f"tag {tag} of type {typ}")
            code, size = _TYPES[typ]
            nbytes = size * count
            if nbytes > inline:
                value = self._read(struct.unpack(e + off_fmt, value)[0], nbytes)
            value = value[:nbytes]
            if typ == 2:
                tags[tag] = (value.split(b"\0", 1)[0].decode("latin-1"),)
            else:
                tags[tag] = struct.unpack(f"{e}{count}{code}", value)
        self._image(tags)
        self._geo(tags)

    def _image(self, tags: dict[int, tuple]) -> None:
        def one(tag: int, default=None):
            v = tags.get(tag)
            if v is None:
                if default is None:
                    raise NotPlain(f"no tag {tag}")
                return default
            if len(v) != 1:
                raise NotPlain(f"tag {tag} has {len(v)} values")
            return v[0]

        self.width, self.height = int(one(256)), int(one(257))
        if one(277, 1) != 1 or one(254, 0) != 0 or 330 in tags or 338 in tags:
            raise NotPlain("not one band of one full-resolution image")
        bits, fmt = one(258), one(339, 1)
        dtype = _DTYPES.get((fmt, bits))
        if dtype is None:
            raise NotPlain(f"sample format {fmt}, {bits} bits")
        self.dtype = dtype
        self.compression = one(259, 1)
        self.predictor = one(317, 1)
        if self.compression not in (1, 8, 32946) or one(266, 1) != 1:
            raise NotPlain(f"compression {self.compression}")
        floating = fmt == 3
        if (self.predictor, floating) not in ((1, False), (1, True), (2, False), (3, True)):
            raise NotPlain(f"predictor {self.predictor}")
        if 322 in tags:
            self.tiled = True
            bw, bh = int(one(322)), int(one(323))
            offsets, counts = tags.get(324), tags.get(325)
            across = -(-self.width // bw)
            blocks = across * -(-self.height // bh)
        else:
            self.tiled = False
            bw, bh = self.width, min(int(one(278, 2 ** 32 - 1)), self.height)
            offsets, counts = tags.get(273), tags.get(279)
            across = 1
            blocks = -(-self.height // bh)
            if self.compression == 1:
                raise NotPlain("uncompressed strips (GDAL may split them into other blocks)")
        if offsets is None or counts is None or len(offsets) != blocks or len(counts) != blocks \
                or min(counts) <= 0 or bw <= 0 or bh <= 0:
            raise NotPlain("blocks")
        self.block = (bh, bw)
        self.across = across
        self.offsets, self.counts = offsets, counts
        nodata = tags.get(42113)
        self.nodata: float | None = None
        if nodata is not None:
            text = nodata[0].strip()
            try:
                value = float(text)
            except ValueError:
                raise NotPlain(f"nodata {text!r}") from None
            if dtype != "float32" and not (value.is_integer() and
                                           np.iinfo(dtype).min <= value <= np.iinfo(dtype).max):
                raise NotPlain(f"nodata {text!r} for {dtype}")
            self.nodata = value

    def _geo(self, tags: dict[int, tuple]) -> None:
        if 34264 in tags or 33550 not in tags or 33922 not in tags or 34735 not in tags:
            raise NotPlain("georeferencing other than one tie point and a pixel scale")
        sx, sy = tags[33550][:2]
        tie = tags[33922]
        if len(tie) != 6 or not (sx > 0 and sy > 0) or not all(map(math.isfinite, tie)):
            raise NotPlain("tie point")
        from affine import Affine

        i, j, _, x, y, _ = tie
        # as GDAL's GeoTIFF reader makes the geotransform of a pixel-is-area grid
        self.transform = Affine(sx, 0.0, x - i * sx, 0.0, -sy, y + j * sy)
        keys = tags[34735]
        if len(keys) < 4 or keys[0] != 1 or len(keys) < 4 + 4 * keys[3]:
            raise NotPlain("GeoKey directory")
        geo: dict[int, int] = {}
        for k in range(keys[3]):
            key, where, count, value = keys[4 + 4 * k:8 + 4 * k]
            if key not in _PLAIN_KEYS:
                raise NotPlain(f"GeoKey {key}")
            if where == 0 and count == 1:
                geo[key] = value
            elif key not in (1026, 2049):           # citations: names only
                raise NotPlain(f"GeoKey {key}")
        citations = tags.get(34737, ("",))[0]
        # a citation that defines a CRS ("... = PROJCS[...]", "Projection Name = ...") rather
        # than naming it: GDAL reads the CRS from that text, so the EPSG code alone may not hold
        if "=" in citations or "[" in citations:
            raise NotPlain("a CRS in a citation")
        model, raster = geo.get(1024), geo.get(1025, 1)
        if raster != 1:
            raise NotPlain("pixel is point")
        if model == 1 and 2048 not in geo:
            code = geo.get(3072)
            units = {3076: 9001, 2054: 9102}
        elif model == 2 and 3072 not in geo and 3076 not in geo:
            code = geo.get(2048)
            units = {2054: 9102}
        else:
            raise NotPlain("model type")
        if code is None or not 1024 <= code <= 32766 \
                or any(geo.get(k, v) != v for k, v in units.items()):
            raise NotPlain("CRS other than an EPSG code")
        self.crs = f"EPSG:{code}"

    def block_values(self, index: int, need: np.ndarray | None = None) -> np.ndarray:
        """Block ``index`` (row-major over the blocks) in the file's type, native byte order:
        (block rows, block columns) for tiles, (rows of the strip, width) for strips; with
        ``need`` (row numbers in the block, ascending) only those rows, (len(need), columns):
        the whole block is inflated, but only they are undone from the predictor."""
        bh, bw = self.block
        rows = bh if self.tiled else min(bh, self.height - index * bh)
        raw = self._read(int(self.offsets[index]), int(self.counts[index]))
        if self.compression != 1:
            raw = _decompress()(raw)
        item = np.dtype(self.dtype).itemsize
        if len(raw) < rows * bw * item:
            raise ValueError(f"block {index}: {len(raw)} bytes, {rows * bw * item} expected")
        raw = raw[:rows * bw * item]
        if self.predictor == 3:
            # planes of each row, most significant byte first, differenced byte by byte
            planes = np.frombuffer(raw, np.uint8).reshape(rows, item * bw)
            if need is not None:
                planes = planes[need]
            sums = np.cumsum(planes, axis=1, dtype=np.uint8).reshape(-1, item, bw)
            native = sums[:, ::-1] if np.little_endian else sums
            return np.ascontiguousarray(native.transpose(0, 2, 1)).view(self.dtype) \
                .reshape(-1, bw)
        order: Any = self.order
        values = np.frombuffer(raw, np.dtype(self.dtype).newbyteorder(order)).reshape(rows, bw)
        if need is not None:
            values = values[need]
        values = values.astype(self.dtype)          # native order, writable
        if self.predictor == 2:
            values = np.cumsum(values, axis=1, dtype=self.dtype)
        return values

    def close(self) -> None:
        if self.fd >= 0:
            os.close(self.fd)
            self.fd = -1


class PlainSource:
    """What a block-sampled draft asks of a :class:`RasterSource`, answered from a
    :class:`PlainTiff`; anything else from a RasterSource opened on first use (the same
    arguments). Values as ``RasterSource._cells_into`` gives them: float32, NaN for the nodata
    value (and NaN cells); a block holding a value within GDAL's tolerance of the nodata value
    but not equal to it (whose mask only GDAL decides) is read by the RasterSource."""

    #: no GDAL handle to bound the cache of (compose.layers.early.BlockSample._small_cache)
    gdal = False

    def __init__(self, tiff: PlainTiff, spec, decimate: bool) -> None:
        self.tiff = tiff
        self.spec = spec
        self.path = Path(spec.source)
        self.band = 1
        self.layer = spec.name
        self.key = "source"
        self.decimate = decimate
        self._real = None
        self._lock = threading.Lock()

    # --- answered here ---------------------------------------------------------------------
    @property
    def transform(self):
        return self.tiff.transform

    @property
    def nodata(self) -> float | None:
        return self.tiff.nodata

    @property
    def dtype(self) -> str:
        return self.tiff.dtype

    @property
    def shape(self) -> tuple[int, int]:
        return self.tiff.height, self.tiff.width

    @property
    def block_shape(self) -> tuple[int, int]:
        return self.tiff.block

    @property
    def overview_factors(self) -> list[int]:
        return []

    @property
    def mask_flags(self) -> frozenset[str]:
        return frozenset({"nodata"} if self.tiff.nodata is not None else {"all_valid"})

    def aligned_offset(self, canvas) -> tuple[int, int] | None:
        """As :meth:`RasterSource.aligned_offset`; the same CRS: the canvas's is ``EPSG:n``."""
        st = self.tiff.transform
        transform = canvas.transform
        if canvas.crs != self.tiff.crs:
            return None
        px = max(abs(st.a), abs(st.e))
        if any(abs(a - b) > 1e-9 * px for a, b in ((transform.a, st.a), (transform.e, st.e),
                                                   (transform.b, st.b), (transform.d, st.d))):
            return None
        col = (transform.c - st.c) / st.a
        row = (transform.f - st.f) / st.e
        if abs(col - round(col)) > 1e-6 or abs(row - round(row)) > 1e-6:
            return None
        return int(round(row)), int(round(col))

    def aligned_with(self, canvas) -> bool:
        return self.aligned_offset(canvas) is not None

    def block_cells(self, row: int, col: int, height: int, width: int,
                    rows: np.ndarray | None = None) -> np.ndarray:
        """The file's cells of a region inside it, float32 (height, width), NaN = no data.
        ``rows`` (a block's own region only: its rows to read, ascending, from 0): only those
        rows are decoded, the others are NaN (see :meth:`PlainTiff.block_values`)."""
        t = self.tiff
        bh, bw = t.block
        if rows is None or row % bh or col % bw or height > bh or width > bw:
            return self._cells(row, col, height, width)
        rows = np.asarray(rows, np.int64)
        out = np.full((height, width), np.nan, np.float32)
        got = self._block((row // bh) * t.across + col // bw, row, col, rows)
        out[rows] = got[:, :width]
        return out

    def _cells(self, row: int, col: int, height: int, width: int) -> np.ndarray:
        t = self.tiff
        bh, bw = t.block
        out = np.empty((height, width), np.float32)
        for br in range(row // bh, (row + height - 1) // bh + 1):
            for bc in range(col // bw, (col + width - 1) // bw + 1):
                r0, c0 = max(row, br * bh), max(col, bc * bw)
                r1, c1 = min(row + height, (br + 1) * bh), min(col + width, (bc + 1) * bw)
                block = self._block(br * t.across + bc, br * bh, bc * bw)
                out[r0 - row:r1 - row, c0 - col:c1 - col] = \
                    block[r0 - br * bh:r1 - br * bh, c0 - bc * bw:c1 - bc * bw]
        return out

    def _block(self, index: int, row: int, col: int, rows: np.ndarray | None = None
               ) -> np.ndarray:
        """Block ``index`` (its first cell at (row, col)) as float32 with NaN for no data;
        ``rows``: only those rows of it. A row's values do not depend on the others read with
        it: GDAL's mask, asked for when a value lies near the nodata value, differs from the
        value test only on such values, and a row holding one is read by GDAL here."""
        t = self.tiff
        try:
            data = t.block_values(index, rows).astype(np.float32, copy=False)
        except Exception:           # GDAL's reading names the reason (or reads what this cannot)
            got = self._from_gdal(row, col)
            return got if rows is None else got[rows]
        nodata = t.nodata
        if nodata is not None and not math.isnan(nodata):
            nd = np.float32(nodata)
            if self._near_nodata(data, nd):
                got = self._from_gdal(row, col)
                return got if rows is None else got[rows]
            data[data == nd] = np.nan
        return data

    @staticmethod
    def _near_nodata(data: np.ndarray, nd) -> bool:
        """As :meth:`RasterSource._near_nodata`: a value within 1e-5 relative of the nodata
        value but not equal to it."""
        tol = np.float32(max(abs(float(nd)) * 1e-5, 1e-30))
        lo, hi = float(data.min(initial=np.inf)), float(data.max(initial=-np.inf))
        if lo > float(nd) + 2 * float(tol) or hi < float(nd) - 2 * float(tol):
            return False
        near = np.abs(data - nd) <= tol
        return bool(near.any() and (data[near] != nd).any())

    def _from_gdal(self, row: int, col: int) -> np.ndarray:
        bh, bw = self.tiff.block
        h, w = self.shape
        got = np.full((bh, bw), np.nan, np.float32)
        got[:min(bh, h - row), :min(bw, w - col)] = self.real.block_cells(
            row, col, min(bh, h - row), min(bw, w - col))
        return got

    def cells_at(self, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
        """As :meth:`RasterSource.cells_at`: each block needed decoded once."""
        from compose.sources.blocks import cells_by_block

        return cells_by_block(rows, cols, self.shape, self.block_shape, self._cells)

    def plan(self, canvas, windows=(), resampling=None) -> bool:
        """As :meth:`RasterSource.plan` of a decimating source: no planned reads."""
        return False

    def read_ahead(self, ahead, canvas=None) -> None:
        """A decimating source's reads are never read ahead (compose.sources.blocks)."""

    def let_go(self) -> None:
        """No handles of other threads to close."""

    @contextlib.contextmanager
    def lent(self):
        """Reads from any thread share the file (``os.pread``): nothing to lend."""
        yield

    # --- anything else: GDAL's ------------------------------------------------------------
    @property
    def real(self):
        """The layer's :class:`RasterSource`, opened on first use."""
        with self._lock:
            if self._real is None:
                from compose.sources.raster import RasterSource

                self._real = RasterSource(self.spec.source, self.spec.options.band,
                                          layer=self.spec.name, decimate=self.decimate)
            return self._real

    def __getattr__(self, name: str):
        if name.startswith("__") or name in ("tiff", "spec", "_real", "_lock"):
            raise AttributeError(name)
        return getattr(self.real, name)

    def close(self) -> None:
        self.tiff.close()
        if self._real is not None:
            self._real.close()

    def __repr__(self) -> str:
        return f"PlainSource({str(self.path)!r}, layer={self.layer!r})"


def plain_source(spec, draft, full) -> PlainSource | None:
    """A :class:`PlainSource` for raster layer ``spec`` of a draft (``draft``: its canvas,
    ``full``: the full one) when its file is plain (see the module docstring), aligned with the
    full canvas and of more blocks over it than a decimated read takes; else None."""
    from compose.layers.early import DECIMATE_BLOCKS
    from compose.sources.guard import check_source, is_remote

    if full is None or getattr(spec.options, "band", 1) != 1 or not isinstance(full.crs, str):
        return None
    path = str(spec.source)
    if is_remote(path) or any(os.path.exists(path + s) for s in _SIDECARS):
        return None
    check_source(path, f'layer "{spec.name}"', "source")       # the same refusals, first
    try:
        tiff = PlainTiff(path)
    except (NotPlain, OSError, struct.error, ValueError, OverflowError):
        return None
    source = PlainSource(tiff, spec, decimate=True)
    bh, bw = tiff.block
    blocks = -(-full.height // bh) * -(-full.width // bw)
    if source.aligned_offset(full) is None or blocks <= DECIMATE_BLOCKS \
            or not _overlaps(tiff, draft):
        tiff.close()
        return None
    return source


def _overlaps(tiff: PlainTiff, canvas) -> bool:
    """Whether the file's footprint overlaps ``canvas.bounds`` (the same CRS)."""
    t = tiff.transform
    west, north = t.c, t.f
    east, south = west + t.a * tiff.width, north + t.e * tiff.height
    w, s, e, n = canvas.bounds
    return west < e and east > w and south < n and north > s
