"""Raster sources: any raster GDAL reads, reprojected onto canvas windows.

A :class:`RasterSource` opens its file once and keeps it open while the engine reads one canvas
window after another. Every read is a real reprojection (GDAL's warper through rasterio) onto
the window's grid, giving float32 values with NaN wherever there is no data: the file's nodata
value, NaN cells, the dataset mask, and everything outside the source.

Windowed reads are seam-free: a canvas read window by window equals the canvas read in one piece.
Two things would otherwise make a pixel's value depend on the window it was read in, and both
are pinned here:

- the approximate coordinate transformer (GDAL interpolates transformed coordinates along rows
  to within 1/8 pixel by default, so positions differ from window to window; on a noise raster
  that made windowed and whole reads differ by up to 8 % of the data range). Reads go through a
  ``WarpedVRT`` with a transformation error tolerance of ``1e-9`` pixels, which is exact for any
  practical purpose. (``rasterio.warp.reproject`` always uses the 1/8 pixel tolerance in rasterio
  1.4, and ``WarpedVRT(tolerance=0)`` fails when an output transform is given, hence 1e-9.)
- the kernel scale GDAL computes per processing chunk when shrinking. It is fixed with the
  warp options ``XSCALE`` / ``YSCALE``, measured at one reference point that is the same for
  every window (see :meth:`RasterSource.read`).

Real-world grids read like any other:

- south-up rasters (a positive y pixel size) are valid; their bounds are normalised and GDAL's
  warper turns them north-up;
- geographic grids with longitudes past 180 (the 0..360 convention) are read through a copy of
  their CRS whose longitudes wrap around the grid's own centre (PROJ ``+lon_wrap``), so a map
  west of the prime meridian finds its data at longitudes 180..360;
- of a multi-band file only the chosen band is warped (a one-band ``vrt://`` view of the file).

Units: values are the source's own; cell sizes in metres (:func:`cell_size_metres`).
"""
from __future__ import annotations

import contextlib
import functools
import math
import os
import threading
import warnings
from collections.abc import Iterator
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
import rasterio
from affine import Affine
from rasterio.crs import CRS
from rasterio.enums import Resampling
from rasterio.errors import RasterioError
from rasterio.vrt import WarpedVRT
from rasterio.warp import transform as warp_points
from rasterio.warp import transform_bounds
from rasterio.windows import Window as RioWindow

from compose.canvas import Canvas, Window
from compose.errors import SourceError, StyleError
from compose.sources.blocks import MAX_BLOCK_CELLS, BlockPlan, ReadAhead, Region, cells_by_block
from compose.sources.crs import degree_extent_problem, metre_projected, no_overlap_error
from compose.sources.grid import transform_grid
from compose.sources.guard import check_crs, check_source, gdal_name, refuse_driver
from compose.sources.resample import cut_block, grid_region, sample_grid
from compose.style.kinds import RESAMPLING  # the names a style may use, defined once

if TYPE_CHECKING:
    import pyproj

__all__ = ["RESAMPLING", "SHRINK_LIMIT", "RasterSource", "cell_size_metres"]


# Bilinear and cubic alias when a destination pixel spans more than this many source pixels;
# 'average' is used instead (common practice, no source).
SHRINK_LIMIT = 2.0

_SMOOTH = ("bilinear", "cubic")
_TOLERANCE = 1e-9            # transformation error tolerance, source pixels (see module docstring)
_THREADS = max(1, min(4, os.cpu_count() or 1))
#: A decimated band of at most this many cells (float32: 16 MB) is read once and kept.
REDUCED_CACHE = 1 << 22


def _first_line(exc: BaseException) -> str:
    """The first line of ``exc``'s message; for rasterio's "See previous exception for details",
    the first line of the GDAL error it was raised from (which names the block and the decoder
    that failed)."""
    text = str(exc).strip()
    cause = exc.__cause__ or exc.__context__
    if cause is not None and "previous exception" in text:
        return _first_line(cause)
    return text.splitlines()[0] if text else type(exc).__name__


def _wrapped_crs(crs: CRS, bounds: tuple[float, float, float, float]) -> CRS | None:
    """For a geographic grid reaching past longitude 180 (e.g. 0..360), its CRS with longitudes
    wrapped around the grid's centre (PROJ ``+lon_wrap``); None for any other grid."""
    if not crs.is_geographic:
        return None
    west, _, east, _ = bounds
    if east <= 180.0 + 1e-9:
        return None
    import pyproj

    with warnings.catch_warnings():     # a geographic CRS loses nothing the warper uses
        warnings.simplefilter("ignore", UserWarning)
        text = pyproj.CRS.from_user_input(crs.to_wkt()).to_proj4()
    text = " ".join(part for part in text.split() if not part.startswith("+lon_wrap"))
    return CRS.from_proj4(f"{text} +lon_wrap={(west + east) / 2.0!r}")


def _band_view(path: Path, band: int, count: int):
    """A one-band view of band ``band`` of a multi-band file, so the warper touches no other
    band (GDAL's ``vrt://`` connection, GDAL >= 3.1); None when the file has one band or its
    name cannot be written in that syntax."""
    if count == 1 or any(ch in str(path) for ch in "?&") or str(path).startswith("/vsi"):
        return None
    try:
        return rasterio.open(f"vrt://{path}?bands={int(band)}")
    except (RasterioError, OSError):
        return None


def _grid_centre(transform: Affine, width: int, height: int) -> tuple[float, float]:
    return transform @ (width / 2.0, height / 2.0)


class RasterSource:
    """An open raster (anything GDAL reads) read onto canvas windows. Opened once, kept open.

    path: the file; band: 1-based band number; layer: the style layer's name and key: the style
    key that named the file, both only for error messages (``layer "relief": source not found: ...``).
    decimate: read canvases coarser than the source (by 2 or more source cells a pixel) from
    GDAL's decimated reads (block averages in GDAL, from overviews where the file has them)
    instead of reading every cell and averaging here: several times faster, not bit-identical
    to the exact path (blocks straddling no-data may come out as no data); for the draft check.

    Raises :class:`SourceError` when the file is missing or unreadable, has no CRS, or has no
    band ``band``.
    """

    def __init__(self, path: Path, band: int = 1, *, layer: str, key: str = "source",
                 decimate: bool = False) -> None:
        self.path = Path(path)
        self.decimate = bool(decimate)
        self.layer = layer
        self.key = key
        self._ds = None
        where = f'layer "{layer}"'
        local_only = check_source(path, where, key)
        try:
            ds = rasterio.open(gdal_name(path))
        except (RasterioError, OSError) as exc:
            raise SourceError(f"{where}: cannot read {self.path}: {_first_line(exc)} (damaged, "
                              f"truncated or not a raster)") from None
        refuse_driver(ds, local_only, "raster", where, key)
        if ds.crs is None or not ds.crs.to_wkt():
            ds.close()
            raise SourceError(f"{where}: {self.path} has no CRS")
        try:
            check_crs(ds.crs.to_wkt(), where, self.path)
        except SourceError:
            ds.close()
            raise
        if not isinstance(band, (int, np.integer)) or isinstance(band, bool) or not 1 <= band <= ds.count:
            count = ds.count
            ds.close()
            raise SourceError(f"{where}: band {band} not in 1..{count}: {self.path}")
        self._ds = ds
        self.band = int(band)
        # the dataset the warper reads (one band only) and the CRS it is read in (wrapped
        # longitudes for 0..360 grids); band numbers below refer to ``self._warp_ds``
        self._wrap_crs = _wrapped_crs(ds.crs, self.bounds)
        self._view = _band_view(self.path, self.band, ds.count)
        self._warp_band = 1 if self._view is not None else self.band
        self._scales: dict[tuple, tuple[float, float] | None] = {}
        self._reduced: dict[tuple[int, int], np.ndarray] = {}     # (fy, fx) -> reduced band
        # what the reads ask of the file, looked up once (GDAL calls, not from other threads)
        self._meta = {"crs": ds.crs, "nodata": ds.nodatavals[self.band - 1],
                      "dtype": ds.dtypes[self.band - 1], "transform": ds.transform,
                      "flags": {f.name for f in ds.mask_flag_enums[self.band - 1]},
                      "shape": (ds.height, ds.width)}
        # GDAL datasets are not shared between threads: other threads read through handles
        # of their own, opened on first use (window tasks on threads, compose.parallel)
        self._owner = threading.get_ident()
        self._local = threading.local()
        self._others: list = []
        self._lock = threading.Lock()
        self._same: dict[str, bool] = {}      # CRS text -> the source's own CRS?
        self._plan: BlockPlan | None = None
        self._ahead: ReadAhead | None = None        # the walk's windows read ahead
        self._ahead_canvas: Canvas | None = None

    def _handles(self):
        """(dataset, one-band view or None) for reading in the calling thread."""
        if threading.get_ident() == self._owner:
            return self._ds, self._view
        mine = getattr(self._local, "handles", None)
        if mine is None:
            ds = rasterio.open(gdal_name(self.path))
            view = _band_view(self.path, self.band, ds.count) if self._view is not None else None
            mine = self._local.handles = (ds, view)
            with self._lock:
                self._others.append(mine)
        return mine

    # --- what the file is -------------------------------------------------------------------
    @property
    def crs(self) -> CRS:
        """The source's CRS."""
        return self._meta["crs"]

    @property
    def bounds(self) -> tuple[float, float, float, float]:
        """(west, south, east, north) in the source's own CRS (west < east, south < north for
        south-up and east-to-west grids too)."""
        left, bottom, right, top = self._ds.bounds
        return (min(left, right), min(bottom, top), max(left, right), max(bottom, top))

    @property
    def res(self) -> tuple[float, float]:
        """(x, y) cell size in the source CRS's units, both positive."""
        return tuple(abs(float(v)) for v in self._ds.res)

    @property
    def read_crs(self) -> CRS:
        """The CRS the source is warped from: its own, or for a geographic grid reaching past
        longitude 180 the same CRS with longitudes wrapped around the grid's centre."""
        return self._wrap_crs if self._wrap_crs is not None else self._meta["crs"]

    @property
    def nodata(self) -> float | None:
        """The file's nodata value for the band, or None."""
        return self._meta["nodata"]

    @property
    def mask_flags(self) -> frozenset[str]:
        """GDAL's mask flags of the band, by name: ``all_valid``, ``per_dataset``, ``alpha``,
        ``nodata``."""
        return frozenset(self._meta["flags"])

    @property
    def dtype(self) -> str:
        """The band's data type name (numpy spelling), e.g. ``"uint8"``."""
        return self._meta["dtype"]

    @property
    def count(self) -> int:
        """Number of bands in the file."""
        return self._ds.count

    @property
    def transform(self) -> Affine:
        """Affine pixel -> source CRS transform."""
        return self._meta["transform"]

    # --- geometry checks --------------------------------------------------------------------
    def check_overlap(self, canvas: Canvas) -> None:
        """Raise :class:`SourceError` if the source's footprint misses ``canvas.bounds``.

        The footprint is transformed to the canvas CRS (densified edges); where that fails
        (a footprint outside the canvas CRS's domain) the canvas is transformed to the source
        CRS instead. When neither direction can be computed nothing is raised. A map in a
        geographic CRS whose extent is no longitude / latitude range raises :class:`StyleError`
        at map.extent instead (:func:`compose.sources.crs.degree_extent_problem`).
        """
        for src, dst, box, target in ((self.read_crs, canvas.crs, self.bounds, canvas.bounds),
                                      (canvas.crs, self.read_crs, canvas.bounds, self.bounds)):
            try:
                moved = transform_bounds(src, dst, *box, densify_pts=21)
            except (RasterioError, ValueError):
                continue
            if not all(map(math.isfinite, moved)):
                continue
            w, s, e, n = moved
            if w < target[2] and e > target[0] and s < target[3] and n > target[1]:
                return
            box = ", ".join(f"{v:.6g}" for v in self.bounds)
            raise no_overlap_error(f'layer "{self.layer}"', self.path,
                                   f"source bounds {box} in {self.crs}", canvas)
        # neither direction computed: a geographic map's extent out of its range is still said
        if (problem := degree_extent_problem(canvas.crs, canvas.bounds)) is not None:
            raise StyleError(problem)

    def shrink(self, crs, transform: Affine, at: tuple[float, float] | None = None
               ) -> tuple[float, float] | None:
        """Source pixels spanned by one destination pixel, (along source x, along source y).

        Measured at the point ``at`` (destination CRS; default the grid origin) by transforming
        the destination pixel there into source pixel coordinates. None if the point cannot be
        transformed. Values above 1 mean the source is shrunk.
        """
        x, y = at if at is not None else (transform.c, transform.f)
        col = np.array([transform.a, transform.d]) / 2.0
        row = np.array([transform.b, transform.e]) / 2.0
        xs = [x - col[0], x + col[0], x - row[0], x + row[0]]
        ys = [y - col[1], y + col[1], y - row[1], y + row[1]]
        try:
            sx, sy = warp_points(CRS.from_user_input(crs), self.read_crs, xs, ys)
        except (RasterioError, ValueError):
            return None
        inv = ~self._meta["transform"]
        pc = np.array([inv @ p for p in zip(sx, sy)])       # (4, 2) source (col, row)
        dcol, drow = pc[1] - pc[0], pc[3] - pc[2]
        along_x = abs(dcol[0]) + abs(drow[0])
        along_y = abs(dcol[1]) + abs(drow[1])
        if not (math.isfinite(along_x) and math.isfinite(along_y)) or along_x <= 0 or along_y <= 0:
            return None
        return float(along_x), float(along_y)

    # --- reading ----------------------------------------------------------------------------
    def read(self, crs, transform: Affine, width: int, height: int, resampling: str = "bilinear",
             *, scale_at: tuple[float, float] | None = None) -> np.ndarray:
        """Reproject the band onto a grid: float32 (height, width), NaN where there is no data.

        crs / transform / width / height: the destination grid (any CRS rasterio understands).
        resampling: one of :data:`RESAMPLING`; 'bilinear' and 'cubic' become 'average' when a
        destination pixel spans more than :data:`SHRINK_LIMIT` source pixels.
        scale_at: the point (destination CRS) where that shrink is measured and the warp kernel
        scale is fixed. Reads that must join without seams need the same point: the default, the
        centre of the source's footprint, is the same for every window of a canvas;
        :meth:`read_window` passes the canvas centre instead, which is better when the source is
        much larger than the canvas (a global grid under a regional map).
        """
        if resampling not in RESAMPLING:
            raise StyleError(f'layer "{self.layer}": resampling: "{resampling}" is not one of '
                             f"{', '.join(RESAMPLING)}")
        width, height = int(width), int(height)
        offset = self._aligned_offset(crs, transform)
        if offset is not None:
            return self._read_aligned(offset, width, height)
        dst_crs = CRS.from_user_input(crs)
        scale = None
        for at in (scale_at, self._centre_in(dst_crs), _grid_centre(transform, width, height)):
            if at is not None and scale is None:
                scale = self.shrink(dst_crs, transform, at)
        method = resampling
        extras: dict[str, object] = {"NUM_THREADS": _THREADS}
        if scale is not None:
            if method in _SMOOTH and max(scale) > SHRINK_LIMIT:
                method = "average"
            extras["XSCALE"] = repr(1.0 / scale[0])
            extras["YSCALE"] = repr(1.0 / scale[1])
        nodata = self.nodata
        if nodata is None and np.issubdtype(np.dtype(self.dtype), np.floating):
            nodata = float("nan")
        kwargs: dict[str, object] = {} if nodata is None else {"src_nodata": nodata}
        if self._wrap_crs is not None:
            kwargs["src_crs"] = self._wrap_crs
        ds, view = self._handles()
        source = view if view is not None else ds
        try:
            with WarpedVRT(source, crs=dst_crs, transform=transform, width=width, height=height,
                           resampling=Resampling[method], tolerance=_TOLERANCE, nodata=np.nan,
                           dtype="float32", **kwargs, **extras) as vrt:
                out = vrt.read(self._warp_band, out_dtype="float32")
        except RasterioError as exc:
            raise SourceError(f'layer "{self.layer}": cannot read {self.path}: '
                              f"{_first_line(exc)}") from None
        return out

    def _same_crs(self, crs) -> bool:
        """Whether ``crs`` (anything rasterio's CRS takes) is the source's CRS; decided once per
        CRS text (comparing CRSs is a GDAL call, too slow to repeat for every window)."""
        key = crs if isinstance(crs, str) else crs.to_wkt()
        same = self._same.get(key)
        if same is None:
            same = self._same[key] = bool(CRS.from_user_input(crs) == self.crs)
        return same

    def _aligned_offset(self, crs, transform: Affine) -> tuple[int, int] | None:
        """(row, col) of the grid's origin in source pixels when the grid is the source's own
        (same CRS, pixel size and orientation, whole-pixel offset), else None."""
        st = self._meta["transform"]
        if not self._same_crs(crs):
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

    def _read_aligned(self, offset: tuple[int, int], width: int, height: int) -> np.ndarray:
        """Plain windowed read for a grid aligned with the source (no resampling needed); a read
        the walk's :class:`compose.sources.blocks.BlockPlan` expects comes from its blocks."""
        row, col = offset
        r0, c0 = max(row, 0), max(col, 0)
        r1, c1 = min(row + height, self._ds.height), min(col + width, self._ds.width)
        inside = (r0, c0, r1, c1) == (row, col, row + height, col + width)
        # a read inside the source fills every cell below: no NaN fill first
        out = (np.empty((height, width), dtype=np.float32) if inside
               else np.full((height, width), np.nan, dtype=np.float32))
        if r1 <= r0 or c1 <= c0:
            return out
        dest = out[r0 - row:r1 - row, c0 - col:c1 - col]
        plan = self._plan
        region = (row, col, height, width)
        if plan is not None and plan.claim(region):
            plan.read(region, dest, self._cells)
        else:
            self._cells_into(RioWindow(c0, r0, c1 - c0, r1 - r0), dest)
        return out

    def _cells(self, row: int, col: int, height: int, width: int) -> np.ndarray:
        """Source cells inside the source: float32 (height, width), NaN = no data."""
        out = np.empty((height, width), dtype=np.float32)
        self._cells_into(RioWindow(col, row, width, height), out)
        return out

    def _cells_into(self, win: RioWindow, dest: np.ndarray) -> None:
        """Read the cells of ``win`` (inside the source) into ``dest`` (float32, NaN = no data);
        per pixel, so a region read whole or block by block gets the same values."""
        nodata = self.nodata
        numeric = nodata is not None and not (isinstance(nodata, float) and math.isnan(nodata))
        ds = self._handles()[0]
        try:
            if dest.flags.c_contiguous:
                ds.read(self.band, window=win, out=dest)
                data = dest
            else:
                data = ds.read(self.band, window=win, out_dtype="float32")
            # the dataset mask is needed unless it is only the nodata value (or nothing), which
            # the data says itself: NaN is already NaN, a number is compared below; only values
            # within GDAL's tolerance of the nodata value but not equal to it ask for the mask
            mask = None
            from_data = self._mask_from_data
            near = self._near_nodata(data) if numeric and from_data else None
            if not from_data or near:
                mask = ds.read_masks(self.band, window=win)
        except RasterioError as exc:
            raise SourceError(f'layer "{self.layer}": cannot read {self.path}: '
                              f"{_first_line(exc)}") from None
        if mask is not None:
            invalid = mask == 0
            if numeric:
                invalid |= data == np.float32(nodata)
            data[invalid] = np.nan
        elif near is not None:      # None: no value within reach of the nodata value at all
            data[data == np.float32(nodata)] = np.nan
        if data is not dest:
            dest[...] = data

    def aligned_with(self, canvas: Canvas) -> bool:
        """Whether ``canvas``'s grid is the source's own (same CRS, cell size and orientation,
        whole-cell offset): its windows are then plain reads, each pixel from its own cell."""
        return self._aligned_offset(canvas.crs, canvas.transform) is not None

    # --- a draft's block sample (compose.layers.early.BlockSample) ---------------------------
    def aligned_offset(self, canvas: Canvas) -> tuple[int, int] | None:
        """(row, col) of ``canvas``'s origin in source cells when its grid is the source's own,
        else None."""
        return self._aligned_offset(canvas.crs, canvas.transform)

    @property
    def block_shape(self) -> tuple[int, int]:
        """(rows, cols) of the band's blocks (tiles, or strips a whole row wide)."""
        bh, bw = self._ds.block_shapes[self.band - 1]
        return int(bh), int(bw)

    @property
    def shape(self) -> tuple[int, int]:
        """(rows, cols) of the file's cells."""
        return int(self._ds.height), int(self._ds.width)

    def block_cells(self, row: int, col: int, height: int, width: int) -> np.ndarray:
        """The file's cells of a region inside it (a block: :attr:`block_shape`), float32
        (height, width), NaN = no data, as :meth:`cells_at` reads them."""
        return self._cells(row, col, height, width)

    @property
    def overview_factors(self) -> list[int]:
        """Decimation factors of the band's overviews (internal or ``.ovr``), none: []."""
        return list(self._ds.overviews(self.band))

    def cells_at(self, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
        """float32 values of the source cells (rows, cols) (integer arrays of one shape; outside
        the source: NaN), read a whole block at a time, each block needed decoded once."""
        return cells_by_block(rows, cols, (self._ds.height, self._ds.width), self.block_shape,
                              self._cells)

    # --- planned reads (compose.sources.blocks) ----------------------------------------------
    def plan(self, canvas: Canvas | None, windows: list[Window] = (),
             resampling: str | None = None) -> bool:
        """Expect the padded reads of ``windows`` of ``canvas`` (a window walk): each source block
        is then decoded once and shared by the window threads (:class:`BlockPlan`). True when
        the walk's reads are planned: the canvas is aligned with the source, or every window is
        read with ``resampling`` through the canvas's transform grid by the compiled path (whose
        cells are known before the read: :func:`compose.sources.resample.grid_region`), the
        reads exact (not decimated) and the blocks tile-sized. ``plan(None)`` forgets the plan."""
        self._plan = None
        if canvas is None or self.decimate or not windows:
            return False
        crs = canvas.crs
        bh, bw = self._ds.block_shapes[self.band - 1]
        if bh * bw > MAX_BLOCK_CELLS:
            return False
        aligned = self._aligned_offset(crs, canvas.transform) is not None
        if not aligned and resampling is None:
            return False
        regions: list[Region] = []
        for win in windows:
            if aligned:
                offset = self._aligned_offset(crs, canvas.window_transform(win))
                if offset is None:
                    return False
                _, _, height, width = win.padded
                regions.append((offset[0], offset[1], height, width))
                continue
            assert resampling is not None
            region = self._grid_region(canvas, win, resampling)
            if region is None:
                return False
            regions.append(region)
        self._plan = BlockPlan((bh, bw), (self._ds.height, self._ds.width), regions)
        return True

    def read_ahead(self, ahead: ReadAhead | None, canvas: Canvas | None = None) -> None:
        """Take the reads of ``canvas``'s windows that ``ahead`` makes (its keys: ``(this
        source, window, resampling)``, read by :meth:`read_ahead_key`) from it; None: no more."""
        self._ahead, self._ahead_canvas = ahead, canvas

    def read_ahead_key(self, canvas: Canvas, window: Window, resampling: str) -> np.ndarray:
        """A read made by a :class:`ReadAhead`'s thread: :meth:`read_window` made now."""
        return self._read_window(canvas, window, resampling)

    def let_go(self) -> None:
        """Close the calling thread's own GDAL handles (a read-ahead thread ending), if any."""
        mine = getattr(self._local, "handles", None)
        if mine is None or threading.get_ident() == self._owner:
            return
        self._local.handles = None
        with self._lock:
            if mine in self._others:
                self._others.remove(mine)
        ds, view = mine
        if view is not None:
            view.close()
        ds.close()

    @property
    def _mask_from_data(self) -> bool:
        """True when the band's mask is its nodata value alone (or every pixel is valid) and
        the values survive the float32 read exactly (float32 or small integer bands)."""
        names = self._meta["flags"]
        small = np.dtype(self.dtype) in (np.dtype(t) for t in
                                          ("float32", "uint8", "int8", "uint16", "int16"))
        return small and names in ({"nodata"}, {"all_valid"})

    def _near_nodata(self, data: np.ndarray) -> bool | None:
        """Any value close to (within 1e-5 relative of) the nodata value but not equal to it;
        None when no value is even that close, so none equals it either."""
        nd = np.float32(self.nodata)
        tol = np.float32(max(abs(float(nd)) * 1e-5, 1e-30))
        # every value far from it (the usual case; a margin of 2 tol keeps float32 rounding of
        # the test below on the safe side): no pass making temporaries. NaN anywhere: test all.
        lo, hi = float(data.min(initial=np.inf)), float(data.max(initial=-np.inf))
        if lo > float(nd) + 2 * float(tol) or hi < float(nd) - 2 * float(tol):
            return None
        near = np.abs(data - nd) <= tol
        return bool(near.any() and (data[near] != nd).any())

    def _centre_in(self, crs: CRS) -> tuple[float, float] | None:
        """The centre of the source's footprint in ``crs``, or None if it cannot be transformed."""
        west, south, east, north = self.bounds
        try:
            (x,), (y,) = warp_points(self.read_crs, crs, [(west + east) / 2], [(south + north) / 2])
        except (RasterioError, ValueError):
            return None
        return (x, y) if math.isfinite(x) and math.isfinite(y) else None

    def read_window(self, canvas: Canvas, window: Window, resampling: str = "bilinear") -> np.ndarray:
        """Read the *padded* region of ``window``: float32 (padded height, padded width), NaN = no data.

        Reprojected reads go through the canvas's shared transform grid
        (:mod:`compose.sources.grid`, error <= 0.125 source pixels) and numpy resampling
        (:mod:`compose.sources.resample`); 'mode', 'average' without shrinking and grids the
        shared transform cannot serve (longitudes wrapped past 180, nodes outside the CRS's
        domain) are warped exactly by GDAL instead. Either way windows join without seams.
        A window of a walk read ahead (:meth:`plan`) is taken as the read-ahead made it.
        """
        ahead = self._ahead
        if ahead is not None and canvas == self._ahead_canvas:
            got = ahead.take((self, window, resampling))
            if got is not None:
                return got
        return self._read_window(canvas, window, resampling)

    def _read_window(self, canvas: Canvas, window: Window, resampling: str) -> np.ndarray:
        """:meth:`read_window`, made here and now."""
        row0, col0, height, width = window.padded
        centre = _grid_centre(canvas.transform, canvas.width, canvas.height)
        fast = self._grid_read(canvas, window, resampling, centre)
        if fast is not None:
            return fast
        return self.read(canvas.crs, canvas.window_transform(window), width, height, resampling,
                         scale_at=centre)

    def _grid_read(self, canvas: Canvas, window: Window, resampling: str,
                   centre: tuple[float, float]) -> np.ndarray | None:
        setup = self._grid_setup(canvas, window, resampling)
        if setup is None:
            return None
        grid, inv, scale = setup
        row0, col0, height, width = window.padded
        return sample_grid(self._read_cells, grid, inv, row0, col0, height, width, resampling,
                           scale, reduce=self._read_reduced if self.decimate else None,
                           cells=self._meta["shape"])

    def _grid_region(self, canvas: Canvas, window: Window, resampling: str) -> Region | None:
        """The source cells (row, col, height, width; may reach outside) a read of ``window``
        through the transform grid asks for (:func:`compose.sources.resample.grid_region`), or
        None when it takes another path."""
        setup = self._grid_setup(canvas, window, resampling)
        if setup is None:
            return None
        grid, inv, scale = setup
        row0, col0, height, width = window.padded
        return grid_region(grid, inv, row0, col0, height, width, resampling, scale)

    def _grid_setup(self, canvas: Canvas, window: Window, resampling: str):
        """(transform grid, the source's inverse affine, source cells per canvas pixel along x
        and y) of a read of ``window`` through the canvas's shared transform grid, or None when
        that read takes another path (aligned, warped exactly by GDAL)."""
        if resampling not in RESAMPLING or resampling == "mode" or self._wrap_crs is not None:
            return None
        row0, col0, height, width = window.padded
        if self._aligned_offset(canvas.crs, canvas.window_transform(window)) is not None:
            return None                       # read() takes the plain aligned path
        pad = max(64, -(-window.margin // 64) * 64)
        grid = transform_grid(canvas.transform, canvas.width, canvas.height, pad, canvas.crs,
                              self.crs, min(self.res))
        if grid is None or not grid.covers(row0, col0, height, width):
            return None
        inv = ~self._meta["transform"]
        key = (id(grid), canvas.width, canvas.height)
        scale = self._scales.get(key)
        if scale is None:
            # source cells one canvas pixel spans along the canvas's x and y at its centre (the
            # lengths of the pixel's edges in source cells: rotation alone does not shrink)
            r, c = canvas.height // 2, canvas.width // 2
            x, y = grid.coords(r, c, 2, 2)
            u = inv.a * x + inv.b * y + inv.c
            v = inv.d * x + inv.e * y + inv.f
            scale = self._scales[key] = (float(np.hypot(u[0, 1] - u[0, 0], v[0, 1] - v[0, 0])),
                                         float(np.hypot(u[1, 0] - u[0, 0], v[1, 0] - v[0, 0])))
        if resampling == "average" and max(scale) <= SHRINK_LIMIT:
            return None
        return grid, inv, scale

    def _read_cells(self, row: int, col: int, height: int, width: int) -> np.ndarray:
        """Source cells rows row.., cols col.. (may reach outside): float32, NaN = no data."""
        return self._read_aligned((row, col), width, height)

    def _read_reduced(self, r0: int, c0: int, h: int, w: int, fy: int, fx: int) -> np.ndarray:
        """Means of blocks of fy x fx source cells (reduced cells r0.., c0.., may reach outside)
        from a decimated GDAL read (average resampling; overviews when the file has them):
        float32 (h, w), NaN = no data. A last block cut by the source's edge is averaged over
        the cells it has (GDAL's scaling of that partial block, not exact). A reduced band of
        at most :data:`REDUCED_CACHE` cells is read once and kept (a draft reads it a dozen
        times: terrain samples, then every layer's window)."""
        ds = self._ds
        rh, rw = -(-ds.height // fy), -(-ds.width // fx)
        if rh * rw <= REDUCED_CACHE:
            whole = self._reduced.get((fy, fx))
            if whole is None:
                whole = self._reduced[(fy, fx)] = self._decimated(0, 0, rh, rw, fy, fx)
            return cut_block(whole, r0, c0, h, w)
        out = np.full((h, w), np.nan, dtype=np.float32)
        rr0, rr1 = max(r0, 0), min(r0 + h, rh)
        cc0, cc1 = max(c0, 0), min(c0 + w, rw)
        if rr1 > rr0 and cc1 > cc0:
            out[rr0 - r0:rr1 - r0, cc0 - c0:cc1 - c0] = self._decimated(rr0, cc0, rr1 - rr0,
                                                                       cc1 - cc0, fy, fx)
        return out

    def _decimated(self, r0: int, c0: int, h: int, w: int, fy: int, fx: int) -> np.ndarray:
        """Reduced cells r0..r0+h, c0..c0+w (inside the source) from one GDAL read."""
        ds = self._handles()[0]
        sr0, sr1 = r0 * fy, min((r0 + h) * fy, ds.height)
        sc0, sc1 = c0 * fx, min((c0 + w) * fx, ds.width)
        win = RioWindow(sc0, sr0, sc1 - sc0, sr1 - sr0)
        try:
            data = ds.read(self.band, window=win, out_shape=(h, w), resampling=Resampling.average,
                           out_dtype="float32")
            flags = ds.mask_flag_enums[self.band - 1]
            if any(f.name in ("per_dataset", "alpha") for f in flags):
                data[ds.read_masks(self.band, window=win, out_shape=(h, w)) == 0] = np.nan
        except RasterioError as exc:
            raise SourceError(f'layer "{self.layer}": cannot read {self.path}: '
                              f"{_first_line(exc)}") from None
        nodata = self.nodata
        if nodata is not None and not (isinstance(nodata, float) and math.isnan(nodata)):
            data[data == np.float32(nodata)] = np.nan
        return data

    # --- lifetime ---------------------------------------------------------------------------
    @contextlib.contextmanager
    def lent(self) -> Iterator[None]:
        """The calling thread reads through the source's own handle while the block runs, as the
        thread that opened it does, which must not read meanwhile (if it does, it reads through
        a handle of its own): for a read handed to another thread while the opening thread
        waits for its result (a draft's early read, :mod:`compose.layers.early`). A thread's
        first GDAL handle also sets up GDAL's and PROJ's state for that thread: about 10 ms of
        CPU here, which such a thread then spares."""
        owner, self._owner = self._owner, threading.get_ident()
        try:
            yield
        finally:
            self._owner = owner

    def reopen(self) -> None:
        """Read through handles of this process's own from now on: in a process forked after
        the source was opened (the check's window helpers, compose.api), whose inherited GDAL
        handles share their file offsets with the parent's. The inherited handles are kept
        aside, neither used nor closed (closing them could flush state the parent still uses)."""
        _INHERITED.append((self._ds, self._view, self._others))
        self._ds = rasterio.open(gdal_name(self.path))
        self._view = (_band_view(self.path, self.band, self._ds.count)
                      if self._view is not None else None)
        self._owner = threading.get_ident()
        self._local = threading.local()
        self._others = []
        self._lock = threading.Lock()
        self._plan = None
        self._ahead = None              # its thread is the parent's: not in this process

    def close(self) -> None:
        """Close the file (idempotent)."""
        self._plan = None
        self._ahead = None
        for ds, view in getattr(self, "_others", ()):
            if view is not None:
                view.close()
            ds.close()
        if getattr(self, "_others", None):
            self._others.clear()
        if getattr(self, "_view", None) is not None:
            self._view.close()
        if self._ds is not None:
            self._ds.close()

    def __enter__(self) -> RasterSource:
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def __repr__(self) -> str:
        return f"RasterSource({str(self.path)!r}, band={self.band}, layer={self.layer!r})"


#: Handles a forked process inherited and replaced (:meth:`RasterSource.reopen`), kept alive.
_INHERITED: list = []


def _horizontal(crs) -> pyproj.CRS:
    """pyproj's CRS of ``crs`` (a compound one's first part), made once per CRS text."""
    key = crs.to_wkt() if isinstance(crs, CRS) else crs
    try:
        return _horizontal_of(key)
    except TypeError:                   # not hashable (a dict of CRS parameters): not cached
        return _horizontal_of.__wrapped__(key)


@functools.lru_cache(maxsize=32)
def _horizontal_of(crs) -> pyproj.CRS:
    # cached: building a pyproj CRS for every window of a render costs more than its hillshade's
    # cell size (pyproj CRS objects are safe to share between threads, pyproj >= 3.1)
    import pyproj

    crs = pyproj.CRS.from_user_input(crs)
    if crs.is_compound:
        crs = crs.sub_crs_list[0]
    return crs


def cell_size_metres(crs, transform: Affine, height: int) -> tuple[float | np.ndarray, float]:
    """Pixel size in metres of a north-up grid: (dx, dy), both positive.

    Projected (or other linear) CRS: the transform's cell size times the axis unit's metre
    factor; both scalars.

    Geographic CRS: the cell size in angle is turned into ground distance on the CRS's own
    ellipsoid, with the radius of curvature of the parallel N cos(phi) for dx and of the
    meridian M for dy, N = a / sqrt(1 - e^2 sin^2 phi), M = a (1 - e^2) / (1 - e^2 sin^2 phi)^1.5
    (standard geodesy; J. P. Snyder, Map Projections - A Working Manual, 1987, chapter 4;
    equation numbers from memory, not re-read). dx varies with latitude and is returned as an
    array of shape (height, 1), one value per row at the row's centre latitude;
    dy is a scalar at the grid's centre latitude (M changes by under 0.2 % over 10 degrees).
    A sphere of mean radius 6371008.8 m would be up to 0.56 % off in dy at the equator.
    A projected CRS in metres is answered by rasterio's CRS, without importing pyproj.
    """
    if metre_projected(crs):
        return abs(transform.a), abs(transform.e)
    crs = _horizontal(crs)
    axis = crs.axis_info[0]
    factor = float(axis.unit_conversion_factor)        # metres per unit, or radians per unit
    if not crs.is_geographic:
        return abs(transform.a) * factor, abs(transform.e) * factor
    ell = crs.ellipsoid
    a = float(ell.semi_major_metre)
    b = float(ell.semi_minor_metre)
    e2 = 1.0 - (b / a) ** 2
    rows = np.arange(int(height), dtype=float)[:, None] + 0.5
    lat = (transform.f + transform.e * rows) * factor       # radians, (h, 1)
    s2 = np.sin(lat) ** 2
    n = a / np.sqrt(1.0 - e2 * s2)
    dx = abs(transform.a) * factor * n * np.cos(lat)
    mid = (transform.f + transform.e * (int(height) / 2.0)) * factor
    m = a * (1.0 - e2) / (1.0 - e2 * math.sin(mid) ** 2) ** 1.5
    dy = abs(transform.e) * factor * m
    return dx, float(dy)
