"""Resampling a source band at given source-pixel positions, in numpy.

Positions (u, v) are continuous source pixel coordinates (column, row; a cell spans [i, i + 1),
its centre at i + 0.5), one per output pixel, from :mod:`compose.sources.grid`. The rules follow
GDAL's warper, so results match ``gdalwarp`` closely:

- an output pixel is no data when the source cell containing its position is no data or lies
  outside the source (holes keep their shape);
- otherwise it is the kernel-weighted mean of the *valid* cells under the kernel (weights
  renormalised), no data if they weigh less than 1e-5;
- bilinear is the triangle kernel, cubic the Keys cubic convolution kernel (a = -0.5; R. Keys,
  "Cubic convolution interpolation for digital image processing", IEEE Trans. ASSP 29(6), 1981);
  both are widened by the shrink factor when one output pixel spans 1-2 source cells (GDAL's
  XSCALE / YSCALE);
- shrinking by more than 2 first averages whole blocks of ``floor(shrink)`` cells (anchored at
  the source's origin, so every window sees the same blocks), then interpolates bilinearly:
  the 'average' of a footprint, up to its rim.
"""
from __future__ import annotations

import math
import threading
from collections.abc import Callable

import numpy as np

from compose import kernels

__all__ = ["sample", "sample_centres", "sample_grid", "grid_region", "cut_block", "forget_taps", "Reader"]

#: read(row0, col0, height, width) -> float32 block of source cells, NaN = no data; the rectangle
#: may reach outside the source (those cells are NaN).
Reader = Callable[[int, int, int, int], np.ndarray]

_MIN_WEIGHT = 1e-5
_SNAP = 1.05      # common practice, no source


def _triangle(d: np.ndarray) -> np.ndarray:
    return np.maximum(np.float32(0), np.float32(1) - np.abs(d))


def _keys(d: np.ndarray) -> np.ndarray:
    a = np.float32(-0.5)
    d = np.abs(d)
    d2, d3 = d * d, d * d * d
    near = (a + 2) * d3 - (a + 3) * d2 + 1
    far = a * d3 - 5 * a * d2 + 8 * a * d - 4 * a
    return np.where(d <= 1, near, np.where(d < 2, far, np.float32(0))).astype(np.float32)


def _axis_taps(x: np.ndarray, support: float, widen: float):
    """Tap indices (n, ...) and weights for continuous centre coordinates ``x`` (cell i's centre
    at i) under a kernel of ``support`` cells widened by ``widen`` (>= 1)."""
    reach = support * widen
    n = 2 * int(math.ceil(reach))
    first = np.floor(x).astype(np.intp) - int(math.ceil(reach)) + 1
    return first, n, reach


#: Source cells one strip of a block-mean reduction reads at once (64 MB of float32).
_REDUCE_CELLS = 1 << 24


def _reduce(read: Reader, r0: int, c0: int, h: int, w: int, fy: int, fx: int,
            cells: tuple[int, int] | None = None) -> np.ndarray:
    """Block means (over valid cells) of fy x fx source cells: reduced cells r0.., c0..
    ``cells``: the source's (height, width), when known: blocks wholly outside it are no data
    without being read. Read in strips of whole block rows (at most about
    :data:`_REDUCE_CELLS` cells each, one block row at the least), so memory stays bounded
    however far the shrink; each block's mean is the same as from one read."""
    out = np.full((h, w), np.nan, np.float32)
    rr0, rr1, cc0, cc1 = r0, r0 + h, c0, c0 + w
    if cells is not None:
        rr0, rr1 = max(rr0, 0), min(rr1, -(-int(cells[0]) // fy))
        cc0, cc1 = max(cc0, 0), min(cc1, -(-int(cells[1]) // fx))
    if rr1 <= rr0 or cc1 <= cc0:
        return out
    n = cc1 - cc0
    step = max(1, _REDUCE_CELLS // (n * fx * fy))
    for a in range(rr0, rr1, step):
        b = min(a + step, rr1)
        block = read(a * fy, cc0 * fx, (b - a) * fy, n * fx).reshape(b - a, fy, n, fx)
        valid = np.isfinite(block)
        total = np.where(valid, block, np.float32(0)).sum(axis=(1, 3), dtype=np.float64)
        count = valid.sum(axis=(1, 3))
        with np.errstate(invalid="ignore", divide="ignore"):
            out[a - r0:b - r0, cc0 - c0:cc1 - c0] = np.where(count > 0, total / count, np.nan)
    return out


def sample(read: Reader, u: np.ndarray, v: np.ndarray, method: str,
           shrink: tuple[float, float] = (1.0, 1.0),
           reduce: Callable[[int, int, int, int, int, int], np.ndarray] | None = None,
           cells: tuple[int, int] | None = None) -> np.ndarray:
    """Values at positions (u, v) (float64 (h, w) each): float32 (h, w), NaN = no data.

    method: 'nearest', 'bilinear' or 'cubic' ('average' is bilinear after block averaging);
    shrink: source cells per output pixel along (x, y), from the canvas's scale point;
    reduce(r0, c0, h, w, fy, fx): the block means of fy x fx source cells, reduced cells r0..,
    c0.. (default: read the cells and average them here); a reader of decimated blocks (GDAL's
    averaging read, overviews) is faster where exact means are not needed (the draft check);
    cells: the source's (height, width) in cells, when known (the default reduction then reads
    nothing outside it).
    """
    # kernels widen with the shrink, except within _SNAP of 1 (a grid in a neighbouring
    # projection shrinks by ~1e-3; widening by that changes nothing visible and costs 4x)
    sx, sy = (1.0 if float(s) <= _SNAP else float(s) for s in shrink)
    if method != "nearest" and max(sx, sy) > 2.0:
        fx, fy = int(math.floor(sx)), int(math.floor(sy))
        # positions in reduced cells; the rest of the shrink widens the bilinear kernel
        uu, vv = u / fx, v / fy
        cmin, cmax = np.floor(np.nanmin(uu)) - 3, np.floor(np.nanmax(uu)) + 4
        rmin, rmax = np.floor(np.nanmin(vv)) - 3, np.floor(np.nanmax(vv)) + 4
        r0, c0 = int(rmin), int(cmin)
        h, w = int(rmax - rmin), int(cmax - cmin)
        reduced = (reduce(r0, c0, h, w, fy, fx) if reduce is not None
                   else _reduce(read, r0, c0, h, w, fy, fx, cells))

        def read_reduced(rr, cc, hh, ww):
            return cut_block(reduced, rr - r0, cc - c0, hh, ww)

        return _sample(read_reduced, uu, vv, "bilinear", (sx / fx, sy / fy))
    if method == "average":
        method = "bilinear"
    return _sample(read, u, v, method, (sx, sy))


def sample_centres(read: Reader, x: np.ndarray, y: np.ndarray, method: str,
                   shrink: tuple[float, float] = (1.0, 1.0),
                   reduce: Callable[[int, int, int, int, int, int], np.ndarray] | None = None,
                   cells: tuple[int, int] | None = None) -> np.ndarray:
    """:func:`sample` at cell-centre coordinates (``x``, ``y`` = u - 0.5, v - 0.5: cell i's
    centre at i), e.g. from :meth:`compose.sources.grid.TransformGrid.cell_centres`. Plain
    bilinear reads (no widening) take a path of few passes: 4 gathers from offset views of the
    cells, weights and indices made once; the values are those of :func:`sample`. With
    :mod:`compose.kernels` built, that path is two compiled passes without the GIL (the cells'
    span, then taps, lerps and the no-data renormalisation per position; the same bits)."""
    sx, sy = (1.0 if float(v) <= _SNAP else float(v) for v in shrink)
    if method != "bilinear" or (sx, sy) != (1.0, 1.0):
        return sample(read, x + 0.5, y + 0.5, method, shrink, reduce, cells)
    k = kernels.get()
    if k is not None:
        return _bilinear_compiled(k, read, x, y)
    row0, col0, bh, bw, base, dx, dy = _taps(x, y)
    flat = read(row0, col0, bh, bw).reshape(-1)
    out = _bilinear(flat, base, dx, dy, bw)
    bad = np.flatnonzero(np.isnan(out))
    if bad.size:                             # no data under the kernel: renormalise over valid cells
        valid = np.isfinite(flat)
        filled = np.where(valid, flat, np.float32(0))
        xb, yb = x.reshape(-1)[bad], y.reshape(-1)[bad]
        sub = _weighted(filled, base.reshape(-1)[bad], dx.reshape(-1)[bad], dy.reshape(-1)[bad],
                        2, 2, bw, _triangle, (1.0, 1.0), valid.astype(np.float32))
        # the cell containing each position (u = x + 0.5)
        centre = ((np.floor(yb + 0.5).astype(np.intp) - row0) * bw
                  + (np.floor(xb + 0.5).astype(np.intp) - col0))
        sub[~valid.take(centre)] = np.nan
        out.reshape(-1)[bad] = sub
    return out


def sample_grid(read: Reader, grid, inverse, row0: int, col0: int, height: int, width: int,
                method: str, shrink: tuple[float, float] = (1.0, 1.0),
                reduce: Callable[[int, int, int, int, int, int], np.ndarray] | None = None,
                cells: tuple[int, int] | None = None) -> np.ndarray:
    """:func:`sample_centres` at the positions of a window's pixel centres in a source's cells
    from a transform grid (``grid``: :class:`compose.sources.grid.TransformGrid`, ``inverse``:
    the source's CRS -> pixel affine; the window: rows row0.., cols col0..): float32 (height,
    width). A plain bilinear read with :mod:`compose.kernels` built makes the positions on the
    fly in two compiled passes without the GIL (their span, then the read; no arrays of
    positions); otherwise :meth:`~compose.sources.grid.TransformGrid.cell_centres` gives them.
    The same values either way. ``cells``: the source's (height, width), see :func:`sample`."""
    region = grid_region(grid, inverse, row0, col0, height, width, method, shrink)
    k = kernels.get()
    if region is None or k is None:
        x, y = grid.cell_centres(inverse, row0, col0, height, width)
        return sample_centres(read, x, y, method, shrink, reduce, cells)
    r0, c0, bh, bw = region
    nx, ny = grid.cell_nodes(inverse)
    uoff, voff = grid.offsets(row0, col0)
    block = np.ascontiguousarray(read(r0, c0, bh, bw), np.float32)
    out = np.empty((height, width), np.float32)
    k.grid_bilinear(nx, ny, uoff, voff, float(grid.step), block, r0, c0, out)
    return out


def grid_region(grid, inverse, row0: int, col0: int, height: int, width: int, method: str,
                shrink: tuple[float, float] = (1.0, 1.0)) -> tuple[int, int, int, int] | None:
    """The source cells (row, col, height, width; may reach outside the source) that
    :func:`sample_grid` reads for this window when it takes the compiled path, or None when
    it does not (no build, other methods, widened kernels): a walk can plan those reads
    (:class:`compose.sources.blocks.BlockPlan`). The cells around the positions at the corners
    of the pixels inside every node cell, a cell more on every side (``grid_span``)."""
    sx, sy = (1.0 if float(v) <= _SNAP else float(v) for v in shrink)
    k = kernels.get()
    if k is None or method != "bilinear" or (sx, sy) != (1.0, 1.0):
        return None
    nx, ny = grid.cell_nodes(inverse)
    uoff, voff = grid.offsets(row0, col0)
    xl, xh, yl, yh = k.grid_span(nx, ny, uoff, voff, float(grid.step), height, width)
    c0, r0 = int(xl), int(yl)
    bh, bw = int(yh) + 2 - r0, int(xh) + 2 - c0
    if bh * bw >= 2**31 - bw - 2:       # beyond the kernel's int32 indices
        return None
    return r0, c0, bh, bw


#: (x, y, their taps) of the latest positions :func:`sample_centres` was given that could not
#: be changed (read-only arrays, e.g. :meth:`compose.sources.grid.TransformGrid.cell_centres`'s):
#: rasters on the same grid sampled at the same positions share their taps.
_recent_taps: list[tuple[np.ndarray, np.ndarray, tuple]] = []
_RECENT_TAPS = 3
_taps_lock = threading.Lock()


def _taps(x: np.ndarray, y: np.ndarray) -> tuple:
    """Bilinear taps of cell-centre positions (x, y): (row0, col0, bh, bw) of the cells they
    need, the flat index of each first tap (cell centre left / above) in that block, and the
    float32 fractions dx, dy from it. Remembered for read-only positions."""
    shared = not (x.flags.writeable or y.flags.writeable)
    if shared:
        with _taps_lock:
            for px, py, taps in _recent_taps:
                if px is x and py is y:
                    return taps
    fx, fy = np.floor(x), np.floor(y)               # the first tap (cell centre left / above)
    col0, row0 = int(fx.min()), int(fy.min())
    bh, bw = int(fy.max()) + 2 - row0, int(fx.max()) + 2 - col0
    dx = np.empty(x.shape, np.float32)
    dy = np.empty(y.shape, np.float32)
    np.subtract(x, fx, out=dx, casting="same_kind")  # float64 difference, then float32
    np.subtract(y, fy, out=dy, casting="same_kind")
    fy *= bw                                          # flat index of the first tap (exact:
    fy += fx                                          # integers far below 2**53)
    fy -= row0 * bw + col0
    base = fy.astype(np.intp)
    del fx, fy
    for arr in (base, dx, dy):
        arr.flags.writeable = False
    taps = (row0, col0, bh, bw, base, dx, dy)
    if shared:
        with _taps_lock:
            if len(_recent_taps) >= _RECENT_TAPS:
                del _recent_taps[0]
            _recent_taps.append((x, y, taps))
    return taps


def forget_taps() -> None:
    """Drop the remembered taps (:func:`sample_centres`; a walk's end)."""
    with _taps_lock:
        _recent_taps.clear()


def _lerp2(a: np.ndarray, b: np.ndarray, c: np.ndarray, d: np.ndarray,
           dx: np.ndarray, dy: np.ndarray) -> np.ndarray:
    """Bilinear interpolation of four taps (a top-left, b top-right, c bottom-left, d
    bottom-right) at fractions dx, dy in [0, 1) from the top-left: two lerps along x, one along
    y, in place in the taps' own arrays (which it overwrites)."""
    b -= a
    b *= dx
    a += b
    d -= c
    d *= dx
    c += d
    c -= a
    c *= dy
    return a + c


def _bilinear_compiled(k, read: Reader, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """:func:`sample_centres`' plain bilinear read by the compiled loops ``k``
    (:mod:`compose.kernels`): the span of the positions (the cells :func:`_taps` reads), then
    per position its taps, the float32 lerps and, where they give NaN, the renormalisation over
    valid cells, each step as the numpy path takes it."""
    x = np.ascontiguousarray(x, np.float64)
    y = np.ascontiguousarray(y, np.float64)
    if x.shape != y.shape or x.size == 0:
        raise ValueError("positions x and y must have one shape and at least one element")
    xl, xh, yl, yh = k.span(x, y)
    col0, row0 = int(xl), int(yl)
    cells = np.ascontiguousarray(read(row0, col0, int(yh) + 2 - row0, int(xh) + 2 - col0),
                                 np.float32)
    out = np.empty(x.shape, np.float32)
    k.bilinear_at(cells, row0, col0, x, y, out)
    return out


def _bilinear(flat: np.ndarray, base: np.ndarray, dx: np.ndarray, dy: np.ndarray,
              bw: int) -> np.ndarray:
    """:func:`_lerp2` of the 4 taps of each first tap ``base`` in ``flat`` (float32 cells of a
    block ``bw`` wide), shaped like ``base`` (the numpy path)."""
    return _lerp2(flat.take(base), flat[1:].take(base), flat[bw:].take(base),
                  flat[bw + 1:].take(base), dx, dy)


def cut_block(block: np.ndarray, r: int, c: int, h: int, w: int) -> np.ndarray:
    """Rows r.., columns c.. of ``block`` (may reach outside: NaN there), float32 (h, w)."""
    out = np.full((h, w), np.nan, np.float32)
    r0, c0 = max(r, 0), max(c, 0)
    r1, c1 = min(r + h, block.shape[0]), min(c + w, block.shape[1])
    if r1 > r0 and c1 > c0:
        out[r0 - r:r1 - r, c0 - c:c1 - c] = block[r0:r1, c0:c1]
    return out


def _sample(read: Reader, u: np.ndarray, v: np.ndarray, method: str,
            widen: tuple[float, float]) -> np.ndarray:
    ci = np.floor(u).astype(np.intp)        # the cell containing each position
    ri = np.floor(v).astype(np.intp)
    if method == "nearest":
        row0, col0 = int(ri.min()), int(ci.min())
        block = read(row0, col0, int(ri.max()) - row0 + 1, int(ci.max()) - col0 + 1)
        return block.reshape(-1).take((ri - row0) * block.shape[1] + (ci - col0))
    support, kernel = (1.0, _triangle) if method == "bilinear" else (2.0, _keys)
    x, y = u - 0.5, v - 0.5                 # centre coordinates: cell i's centre at i
    fx, nx, _ = _axis_taps(x, support, widen[0])
    fy, ny, _ = _axis_taps(y, support, widen[1])
    row0, col0 = int(fy.min()), int(fx.min())
    bh, bw = int(fy.max()) + ny - row0, int(fx.max()) + nx - col0
    flat = read(row0, col0, bh, bw).reshape(-1)
    base = (fy - row0) * bw + (fx - col0)
    dx = (x - fx).astype(np.float32)         # distance from the first tap, in cells
    dy = (y - fy).astype(np.float32)
    plain = method == "bilinear" and widen == (1.0, 1.0)
    if plain:                               # two lerps: 4 gathers, no kernel evaluation
        out = _lerp2(flat.take(base), flat.take(base + 1), flat.take(base + bw),
                     flat.take(base + bw + 1), dx, dy)
    else:
        out = _weighted(flat, base, dx, dy, nx, ny, bw, kernel, widen, None)
    bad = np.flatnonzero(np.isnan(out))
    if bad.size:                             # no data under the kernel: renormalise over valid cells
        valid = np.isfinite(flat)
        filled = np.where(valid, flat, np.float32(0))
        sub = _weighted(filled, base.reshape(-1)[bad], dx.reshape(-1)[bad], dy.reshape(-1)[bad],
                        nx, ny, bw, kernel, widen, valid.astype(np.float32))
        centre = (ri.reshape(-1)[bad] - row0) * bw + (ci.reshape(-1)[bad] - col0)
        sub[~valid.take(centre)] = np.nan
        out.reshape(-1)[bad] = sub
    return out


def _weighted(flat, base, dx, dy, nx, ny, bw, kernel, widen, valid):
    """Kernel-weighted sum over nx x ny taps; with ``valid`` (0/1 per cell) the weights of
    invalid cells drop out and the sum is renormalised (NaN below _MIN_WEIGHT)."""
    wx = [kernel((dx - k) / np.float32(widen[0])) for k in range(nx)]
    wy = [kernel((dy - k) / np.float32(widen[1])) for k in range(ny)]
    acc = np.zeros(base.shape, np.float32)
    norm = np.zeros(base.shape, np.float32)
    for ky in range(ny):
        for kx in range(nx):
            idx = base + (ky * bw + kx)
            wk = wy[ky] * wx[kx]
            if valid is not None:
                wk *= valid.take(idx)
            acc += wk * flat.take(idx)
            norm += wk
    with np.errstate(invalid="ignore", divide="ignore"):
        out = acc / norm
    out[np.abs(norm) < _MIN_WEIGHT] = np.nan
    return out
