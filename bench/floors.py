"""Kernel floors for bench/render.py: each kernel of a render alone, on the same canvas, in the
cheapest plain form we know, written here WITHOUT compose's own code (numpy, matplotlib's Agg,
rasterio/GDAL, zlib/isal only).

Every function takes the benchmark folder and the canvas size and returns seconds (and, where
said, a second figure). They are floors to report beside the render, not targets to assert.
"""
from __future__ import annotations

import time
import zlib
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import numpy as np

__all__ = ["lines_agg", "horn_strips", "lut_gather", "composite_planar", "geotiff_read",
           "geotiff_write", "png_fast", "STRIP"]

STRIP = 64          # rows per strip for the pixel kernels
DPI = 72.0          # Agg at 72 dpi: one point is one pixel


def _lines_pixels(folder: Path, size: int):
    """All line vertices of lines.gpkg in canvas pixel space, read in bulk (not timed)."""
    import pyogrio
    import shapely

    _, _, wkb, _ = pyogrio.raw.read(folder / "lines.gpkg", return_fids=False)
    geoms = shapely.from_wkb(wkb)
    xy, index = shapely.get_coordinates(geoms, return_index=True)
    col = (xy[:, 0] - 400000.0) / 30.0
    row = (4600000.0 - xy[:, 1]) / 30.0
    return col, row, index


def lines_agg(folder: Path, size: int, width_px: float = 1.0) -> tuple[float, int]:
    """Every line drawn once by Agg on the whole canvas (antialiased, ``width_px`` wide), one
    ``draw_path`` per line: Agg then sorts each line's cells alone. One compound path of all the
    lines was 1.4-1.7 x slower on the 8192 benchmark here (3.4-4.8 s against 2.5-2.9 s, two
    alternating runs, 2026-12-03), so the floor is the cheaper form. Returns (seconds, vertices).
    Path building is included, reading is not. Canvases taller than 8192 rows are drawn in
    8192-row strips (the same paths, moved)."""
    from matplotlib.backends.backend_agg import RendererAgg
    from matplotlib.path import Path as MplPath
    from matplotlib.transforms import Affine2D

    col, row, index = _lines_pixels(folder, size)
    t0 = time.perf_counter()
    cuts = np.flatnonzero(np.r_[True, index[1:] != index[:-1], True])
    identity = Affine2D()
    strip = min(size, 8192)
    for r0 in range(0, size, strip):
        h = min(strip, size - r0)
        verts = np.column_stack([col, h - (row - r0)])
        renderer = RendererAgg(size, h, DPI)
        gc = renderer.new_gc()
        gc.set_antialiased(True)
        gc.set_snap(False)
        gc.set_linewidth(width_px)
        gc.set_foreground((0, 0, 0, 1))
        for a, b in zip(cuts[:-1], cuts[1:]):
            path = MplPath(verts[a:b], readonly=True)
            path.should_simplify = False
            renderer.draw_path(gc, path, identity)
        np.asarray(renderer.buffer_rgba())[..., 3].sum(dtype=np.uint64)   # touch the result
        del renderer
    return time.perf_counter() - t0, len(col)


def _dem_block(folder: Path, size: int) -> np.ndarray:
    """Up to 1024 rows of the benchmark DEM (the kernel loops over them to fill the canvas)."""
    import rasterio
    from rasterio.windows import Window

    with rasterio.open(folder / "dem.tif") as ds:
        return ds.read(1, window=Window(0, 0, size, min(1024, size)), out_dtype="float32")


def horn_strips(folder: Path, size: int, dx: float = 30.0) -> float:
    """Horn (1981) hillshade of a size x size DEM in STRIP-row strips, scratch allocated once,
    one thread: 3x3 weighted differences, Lambert with the sun at azimuth 315, altitude 45."""
    block = _dem_block(folder, size)
    n = block.shape[0]
    w = size
    zen, az = np.radians(45.0), np.radians(315.0)
    cz, sz = np.float32(np.cos(zen)), np.float32(np.sin(zen))
    a_x, a_y = np.float32(np.sin(az)), np.float32(np.cos(az))
    v = np.empty((STRIP, w), np.float32)     # vertical [1 2 1] of the column differences
    hz = np.empty((STRIP, w), np.float32)
    t1 = np.empty((STRIP + 2, w), np.float32)
    p = np.empty((STRIP, w), np.float32)
    q = np.empty((STRIP, w), np.float32)
    out = np.empty((STRIP, w), np.float32)
    padded = np.pad(block, 1, mode="edge")
    t0 = time.perf_counter()
    for r0 in range(0, size, STRIP):
        a = r0 % (n - STRIP) if n > STRIP else 0
        z = padded[a:a + STRIP + 2]
        # d/dx: column differences summed down [1 2 1]
        np.subtract(z[:, 2:], z[:, :-2], out=t1)
        np.add(t1[:-2], t1[2:], out=v)
        v += t1[1:-1]
        v += t1[1:-1]
        # d/dy: row differences summed across [1 2 1]
        np.subtract(z[2:, 1:-1], z[:-2, 1:-1], out=hz)
        hz *= 2
        hz += z[2:, :-2]
        hz -= z[:-2, :-2]
        hz += z[2:, 2:]
        hz -= z[:-2, 2:]
        np.multiply(v, np.float32(1 / (8 * dx)), out=p)          # east gradient
        np.multiply(hz, np.float32(-1 / (8 * dx)), out=q)        # north gradient (rows run south)
        # shade = (cz + sz (-p a_x - q a_y)) / sqrt(1 + p^2 + q^2)
        np.multiply(p, p, out=v)
        np.multiply(q, q, out=hz)
        v += hz
        v += 1
        np.sqrt(v, out=v)
        np.multiply(p, -sz * a_x, out=out)
        np.multiply(q, -sz * a_y, out=hz)
        out += hz
        out += cz
        out /= v
        np.clip(out, 0, 1, out=out)
    return time.perf_counter() - t0


def _in_threads(fn, size: int, threads: int) -> float:
    starts = list(range(0, size, STRIP))
    t0 = time.perf_counter()
    if threads == 1:
        fn(starts)
    else:
        chunks = [starts[i::threads] for i in range(threads)]
        with ThreadPoolExecutor(threads) as pool:
            list(pool.map(fn, chunks))
    return time.perf_counter() - t0


def lut_gather(size: int, threads: int = 1) -> float:
    """Lookup-table gather: uint16 index strips -> packed RGBA uint32, STRIP rows at a time."""
    rng = np.random.default_rng(1)
    table = rng.integers(0, 2**32, 1025, dtype=np.uint32)
    index = rng.integers(0, 1025, (STRIP, size)).astype(np.uint16)

    def work(starts):
        out = np.empty((STRIP, size), np.uint32)
        for _ in starts:
            np.take(table, index, out=out)

    return _in_threads(work, size, threads)


def composite_planar(size: int, threads: int = 1, layers: int = 3) -> float:
    """Premultiplied 'over' of ``layers`` planar float32 (3, STRIP, size) layers onto a background:
    out = src + out * (1 - alpha), STRIP rows at a time."""
    rng = np.random.default_rng(2)
    srcs = [rng.random((3, STRIP, size), dtype=np.float32) for _ in range(layers)]
    inv = [rng.random((STRIP, size), dtype=np.float32) for _ in range(layers)]

    def work(starts):
        out = np.empty((3, STRIP, size), np.float32)
        for _ in starts:
            out[...] = 1.0
            for s, k in zip(srcs, inv):
                out *= k
                out += s

    return _in_threads(work, size, threads)


def geotiff_read(path: Path) -> float:
    """Read a float32 GeoTIFF band in 512-row strips with GDAL's decoding threads; seconds."""
    import rasterio
    from rasterio.windows import Window

    t0 = time.perf_counter()
    with rasterio.open(path, num_threads="all_cpus") as ds:
        for r0 in range(0, ds.height, 512):
            ds.read(1, window=Window(0, r0, ds.width, min(512, ds.height - r0)))
    return time.perf_counter() - t0


def _rgb_strips(tif: Path, strip: int = 512):
    """(row0, rgb (h, w, 3) uint8) strips of a rendered RGB(A) GeoTIFF."""
    import rasterio
    from rasterio.windows import Window

    with rasterio.open(tif) as ds:
        for r0 in range(0, ds.height, strip):
            h = min(strip, ds.height - r0)
            yield r0, np.ascontiguousarray(np.moveaxis(
                ds.read([1, 2, 3], window=Window(0, r0, ds.width, h)), 0, -1))


def geotiff_write(tif: Path, out: Path, zlevel: int | None = None) -> float:
    """Write the rendered pixels as an RGB GeoTIFF: deflate, tiled 512, GDAL NUM_THREADS=ALL_CPUS
    (optionally at ``zlevel``); seconds of writing only (the strips are read beforehand when
    they fit in 1 GB, else read as we go and that time is subtracted)."""
    import rasterio
    from rasterio.windows import Window

    with rasterio.open(tif) as src:
        profile = dict(driver="GTiff", width=src.width, height=src.height, count=3, dtype="uint8",
                       crs=src.crs, transform=src.transform, tiled=True, blockxsize=512,
                       blockysize=512, compress="deflate", predictor=2, photometric="RGB",
                       num_threads="all_cpus")
    if zlevel is not None:
        profile["zlevel"] = zlevel
    reading = 0.0
    t0 = time.perf_counter()
    with rasterio.open(out, "w", **profile) as dst:
        it = _rgb_strips(tif)
        while True:
            t = time.perf_counter()
            item = next(it, None)
            reading += time.perf_counter() - t
            if item is None:
                break
            r0, rgb = item
            dst.write(np.moveaxis(rgb, -1, 0), window=Window(0, r0, rgb.shape[1], rgb.shape[0]))
    total = time.perf_counter() - t0 - reading
    out.unlink()
    return total


def _up_filter(rgb: np.ndarray, prev: np.ndarray) -> np.ndarray:
    rows = rgb.reshape(rgb.shape[0], -1)
    out = np.empty((rows.shape[0], rows.shape[1] + 1), np.uint8)
    out[:, 0] = 2
    np.subtract(rows[0], prev, out=out[0, 1:])
    np.subtract(rows[1:], rows[:-1], out=out[1:, 1:])
    return out


def png_fast(tif: Path, threads: int = 2, level: int = 3, impl: str = "isal") -> tuple[float, float]:
    """PNG data stream of the rendered pixels: numpy 'Up' filter + a fast raw deflate (``impl``:
    "isal" or "zlib-ng") at ``level``, ``threads`` strips compressed at once (each ends on a
    full flush so the pieces concatenate).

    Returns (seconds of filtering + deflating, size / zlib-6 size on every 4th strip)."""
    if impl == "isal":
        from isal import isal_zlib
    else:
        from zlib_ng import zlib_ng as isal_zlib

    strips = list(_rgb_strips(tif))      # read before timing

    def one(item):
        (r0, rgb), prev_row = item
        data = _up_filter(rgb, prev_row).tobytes()
        c = isal_zlib.compressobj(level, isal_zlib.DEFLATED, -15)
        return c.compress(data) + c.flush(isal_zlib.Z_FULL_FLUSH)

    prevs = [np.zeros(strips[0][1].shape[1] * 3, np.uint8)] + [s[1][-1].reshape(-1) for s in strips[:-1]]
    t0 = time.perf_counter()
    with ThreadPoolExecutor(threads) as pool:
        sizes = [len(b) for b in pool.map(one, zip(strips, prevs))]
    seconds = time.perf_counter() - t0
    sample = range(0, len(strips), 4)
    fast = sum(sizes[i] for i in sample)
    slow = 0
    for i in sample:
        z = zlib.compressobj(6, zlib.DEFLATED, -15)
        slow += len(z.compress(_up_filter(strips[i][1], prevs[i]).tobytes()) + z.flush(zlib.Z_FULL_FLUSH))
    return seconds, fast / slow
