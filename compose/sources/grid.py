"""One coarse transform grid per canvas and source CRS, shared by every raster and window.

Reprojecting a raster needs, for every canvas pixel centre, its position in the source's CRS.
Transforming every pixel exactly is slow (PROJ per pixel), and GDAL's own approximation depends
on the chunk being warped, so windows would not join. Instead the canvas (grown by a pad for the
windows' margins) gets nodes every ``step`` pixels, transformed exactly once with pyproj (not
at all in the source's own CRS); any pixel's position is the bilinear interpolation of its
cell's four nodes. Nodes sit on the
canvas's own grid, so a pixel gets the same position in every window: windows join exactly.

Error bound: after building, the exact transform of every cell's centre is compared with the
interpolation; the grid is refined (step halved, down to 2 px) until the largest difference is at
most :data:`ERROR_PX` source pixels for the source that uses it (0.125 px, the tolerance GDAL's
warper uses by default). While it is cheap (steps down to 16 px) the grid is refined further, to
:data:`ACCURACY_PX` (1e-5 px): the error shrinks with the square of the step, so on map-sized
canvases positions are then exact for any practical purpose.
"""
from __future__ import annotations

import math
import threading
from dataclasses import dataclass, field

import numpy as np
from affine import Affine

from compose import kernels
from compose.sources.crs import same_crs

__all__ = ["ERROR_PX", "ACCURACY_PX", "RECENT", "TransformGrid", "transform_grid", "forget_recent"]

#: Largest accepted interpolation error, in source pixels.
ERROR_PX = 0.125
#: Error aimed at while the step is at least _CHEAP_STEP pixels.
ACCURACY_PX = 1e-5
#: Results of :meth:`TransformGrid.cell_centres` kept per grid (4 MB each for a 512 px window
#: with its margin): a walk reads every raster of a window in turn (compose.sources.blocks).
RECENT = 3
_FIRST_STEP = 64
_CHEAP_STEP = 16
_MIN_STEP = 2

_lock = threading.Lock()
_cache: dict[tuple, TransformGrid] = {}
# the grid chosen for (canvas, pad, CRSs, source cell size), or None: every window asks again
_chosen: dict[tuple, TransformGrid | None] = {}
# id(crs) -> (crs, its text): a CRS's WKT takes milliseconds to make, and every window asks
_wkts: dict[int, tuple[object, str]] = {}


def _wkt(crs) -> str:
    hit = _wkts.get(id(crs))
    if hit is not None and hit[0] is crs:
        return hit[1]
    wkt = _text(crs)
    with _lock:
        if len(_wkts) > 64:
            _wkts.clear()
        _wkts[id(crs)] = (crs, wkt)       # the CRS kept alive, so its id is not reused
    return wkt


@dataclass(frozen=True, eq=False)
class TransformGrid:
    """Source-CRS coordinates of canvas nodes; :meth:`coords` interpolates pixel centres.

    transform: the canvas's affine (pixel -> canvas CRS); origin: canvas pixel (col, row) of node
    (0, 0); step: node spacing in pixels; x, y: (rows, cols) node coordinates in the source CRS
    (NaN where the transformation failed); error: the largest difference at cell centres, in
    source-CRS units.
    """

    transform: Affine
    origin: tuple[float, float]
    step: int
    x: np.ndarray
    y: np.ndarray
    error: float
    # inverse source affine (tuple) -> the nodes in that source's cell-centre coordinates
    _cells: dict = field(default_factory=dict, repr=False, compare=False)
    # (inverse, row0, col0, height, width) -> the latest cell_centres made (read-only arrays)
    _recent: dict = field(default_factory=dict, repr=False, compare=False)

    def covers(self, row0: int, col0: int, height: int, width: int) -> bool:
        """True when the pixel rectangle lies inside the grid's nodes."""
        c0, r0 = self.origin
        rows, cols = self.x.shape
        return (col0 >= c0 and row0 >= r0 and col0 + width <= c0 + (cols - 1) * self.step
                and row0 + height <= r0 + (rows - 1) * self.step)

    def coords(self, row0: int, col0: int, height: int, width: int) -> tuple[np.ndarray, np.ndarray]:
        """Source-CRS (x, y), float64 (height, width), of the centres of the canvas pixels
        rows row0.., cols col0.. (separable bilinear interpolation of the nodes)."""
        return (self._interpolate(self.x, row0, col0, height, width),
                self._interpolate(self.y, row0, col0, height, width))

    def cell_centres(self, inverse: Affine, row0: int, col0: int, height: int,
                     width: int) -> tuple[np.ndarray, np.ndarray]:
        """Positions of the same pixel centres in a source's cells, float64 (height, width) each:
        (column, row) with cell i's centre at i (``inverse``: the source's CRS -> pixel affine).
        The nodes are mapped through ``inverse`` once per source and interpolated like
        :meth:`coords` (the affine map commutes with the interpolation), so every raster read
        through this grid costs two interpolations and no per-pixel arithmetic of its own.
        The latest :data:`RECENT` results are kept and given again (the same read-only arrays)
        to the next raster on the same grid that asks for the same window."""
        key = tuple(inverse)
        memo = (key, int(row0), int(col0), int(height), int(width))
        with _lock:
            hit = self._recent.get(memo)
        if hit is not None:
            return hit
        nodes = self.cell_nodes(inverse)
        got = (self._interpolate(nodes[0], row0, col0, height, width),
               self._interpolate(nodes[1], row0, col0, height, width))
        for arr in got:
            arr.flags.writeable = False
        with _lock:
            while len(self._recent) >= RECENT:
                del self._recent[next(iter(self._recent))]     # the oldest
            self._recent[memo] = got
        return got

    def cell_nodes(self, inverse: Affine) -> tuple[np.ndarray, np.ndarray]:
        """The nodes in a source's cells (``inverse``: the source's CRS -> pixel affine), float64
        (rows, cols) each: (column, row) with cell i's centre at i; made once per source."""
        key = tuple(inverse)
        nodes = self._cells.get(key)
        if nodes is None:
            a, b, c, d, e, f = key[:6]
            nodes = self._cells[key] = (a * self.x + b * self.y + (c - 0.5),
                                        d * self.x + e * self.y + (f - 0.5))
        return nodes

    def offsets(self, row0: int, col0: int) -> tuple[float, float]:
        """(uoff, voff): pixel column j, row i of a window from row0, col0 lies at node
        coordinates ((j + uoff) / step, (i + voff) / step) (its centre, from node (0, 0))."""
        c0, r0 = self.origin
        return col0 + 0.5 - c0, row0 + 0.5 - r0

    def _interpolate(self, nodes: np.ndarray, row0: int, col0: int, height: int,
                     width: int) -> np.ndarray:
        """``nodes`` interpolated bilinearly at the centres of pixels rows row0.., cols col0..:
        along each node row at the pixels' columns first, then between node rows, one run of
        pixel rows per node cell (two passes over the output, no gathers). Compiled in one pass
        without the GIL when :mod:`compose.kernels` is built (the same float64 operations in the
        same order, so the same bits)."""
        uoff, voff = self.offsets(row0, col0)
        compiled = kernels.get()
        if compiled is not None:
            out = np.empty((height, width), np.float64)
            compiled.grid_interp(np.ascontiguousarray(nodes, np.float64), uoff, voff,
                                 float(self.step), out)
            return out
        u = (np.arange(width) + uoff) / self.step
        v = (np.arange(height) + voff) / self.step
        j = np.minimum(np.floor(u).astype(np.intp), nodes.shape[1] - 2)
        i = np.minimum(np.floor(v).astype(np.intp), nodes.shape[0] - 2)
        s = (u - j)[None, :]
        t = v - i
        band = nodes[i[0]:i[-1] + 2]                            # node rows this window needs
        across = band[:, j] * (1.0 - s) + band[:, j + 1] * s    # (node rows, width)
        rise = across[1:] - across[:-1]
        out = np.empty((height, width), np.float64)
        cuts = [0, *(np.flatnonzero(np.diff(i)) + 1).tolist(), height]
        for a, b in zip(cuts[:-1], cuts[1:]):                   # pixel rows a..b in one node cell
            k = int(i[a] - i[0])
            rows = out[a:b]
            np.multiply(t[a:b, None], rise[k], out=rows)
            rows += across[k]
        return out


def forget_recent() -> None:
    """Drop every grid's kept :meth:`TransformGrid.cell_centres` results (a walk's end)."""
    with _lock:
        for grid in _cache.values():
            grid._recent.clear()


def _text(crs) -> str:
    """A CRS as text for the grid cache's key (a string as written, else its WKT)."""
    return crs if isinstance(crs, str) else crs.to_wkt()


def _build(transform: Affine, width: int, height: int, pad: int, crs_from, crs_to,
           step: int) -> TransformGrid:
    c0, r0 = -pad, -pad
    nx = math.ceil((width + 2 * pad) / step) + 1
    ny = math.ceil((height + 2 * pad) / step) + 1
    cols = c0 + np.arange(nx) * float(step)
    rows = r0 + np.arange(ny) * float(step)
    if same_crs(crs_from, crs_to):
        tr = None           # the canvas's own CRS: its coordinates as they are, no PROJ call
    else:
        import pyproj

        tr = pyproj.Transformer.from_crs(pyproj.CRS.from_user_input(crs_from).to_wkt(),
                                         pyproj.CRS.from_user_input(crs_to).to_wkt(),
                                         always_xy=True)

    def exact(cc, rr):
        ex, ey = transform @ (cc, rr)
        x, y = (ex, ey) if tr is None else tr.transform(ex, ey, errcheck=False)
        x, y = np.asarray(x, float), np.asarray(y, float)
        bad = ~(np.isfinite(x) & np.isfinite(y))
        x[bad] = np.nan
        y[bad] = np.nan
        return x, y

    cc, rr = np.meshgrid(cols, rows)
    x, y = exact(cc, rr)
    # the interpolation's error at every cell centre (where bilinear interpolation is worst)
    mx, my = exact(cc[:-1, :-1] + step / 2, rr[:-1, :-1] + step / 2)
    ix = (x[:-1, :-1] + x[1:, :-1] + x[:-1, 1:] + x[1:, 1:]) / 4
    iy = (y[:-1, :-1] + y[1:, :-1] + y[:-1, 1:] + y[1:, 1:]) / 4
    err = np.hypot(ix - mx, iy - my)
    error = float(np.nanmax(err)) if np.isfinite(err).any() else math.inf
    return TransformGrid(transform, (float(c0), float(r0)), step, x, y, error)


def transform_grid(transform: Affine, width: int, height: int, pad: int, canvas_crs, source_crs,
                   source_pixel: float) -> TransformGrid | None:
    """The shared grid of a canvas (``transform``, ``width`` x ``height`` pixels, grown by ``pad``
    pixels on every side) onto ``source_crs``, fine enough for sources of ``source_pixel`` CRS
    units (error <= ERROR_PX of them). None when no step down to 2 px meets the bound or nodes
    fail to transform (the caller then warps exactly)."""
    key_base = (tuple(transform), int(width), int(height), int(pad), _wkt(canvas_crs),
                _wkt(source_crs))
    chosen_key = key_base + (float(source_pixel),)
    with _lock:
        if chosen_key in _chosen:
            return _chosen[chosen_key]
    grid = _choose(key_base, transform, width, height, pad, canvas_crs, source_crs,
                   float(source_pixel))
    with _lock:
        if len(_chosen) > 32:
            _chosen.clear()
        _chosen[chosen_key] = grid
    return grid


def _choose(key_base: tuple, transform: Affine, width: int, height: int, pad: int, canvas_crs,
            source_crs, source_pixel: float) -> TransformGrid | None:
    limit = ERROR_PX * source_pixel
    aim = ACCURACY_PX * source_pixel
    step = _FIRST_STEP
    while step >= _MIN_STEP:
        key = key_base + (step,)
        with _lock:
            grid = _cache.get(key)
        if grid is None:
            grid = _build(transform, width, height, pad, canvas_crs, source_crs, step)
            with _lock:
                if len(_cache) > 32:
                    _cache.clear()
                _cache[key] = grid
        if np.isnan(grid.x).any():
            return None
        if grid.error <= aim or (grid.error <= limit and step // 2 < _CHEAP_STEP):
            return grid
        step //= 2
    return None
