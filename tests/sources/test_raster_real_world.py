"""Real-world grids: south-up files, 0..360 longitudes, multi-band files, the canvas edge.

Every file is a real GeoTIFF written by rasterio in tmp_path; every read is a real reprojection.
Outside references: rasterio's own writer (a south-up file is the north-up array flipped with a
positive y pixel size) and pyproj for where a canvas pixel lies.
"""
from __future__ import annotations

import numpy as np
import pyproj
from affine import Affine
from rasterio.transform import from_origin

from compose.canvas import Canvas
from compose.sources.raster import RasterSource
from tests.sources._files import write_raster

UTM31 = "EPSG:32631"
LAEA = "EPSG:3035"
GEO = "EPSG:4326"


def _noise(shape, seed=3) -> np.ndarray:
    return (np.random.default_rng(seed).random(shape) * 100).astype(np.float32)


def _canvas_around(x, y, src_crs, dst_crs, pixel, width, height) -> Canvas:
    cx, cy = pyproj.Transformer.from_crs(src_crs, dst_crs, always_xy=True).transform(x, y)
    return Canvas(dst_crs, Affine(pixel, 0, round(cx - width * pixel / 2), 0, -pixel,
                                  round(cy + height * pixel / 2)), width, height)


# --- south-up -----------------------------------------------------------------------------

def test_south_up_reads_like_the_north_up_copy(tmp_path):
    data = _noise((120, 150))
    west, north, cell = 480_000.0, 5_560_000.0, 100.0
    north_up = write_raster(tmp_path / "n.tif", data, crs=UTM31,
                            transform=from_origin(west, north, cell, cell))
    south = north - 120 * cell
    south_up = write_raster(tmp_path / "s.tif", data[::-1], crs=UTM31,
                            transform=Affine(cell, 0, west, 0, cell, south))
    # a reprojected canvas (LAEA) and one on the files' own CRS at another pixel size
    canvases = [_canvas_around(487_000, 5_554_000, UTM31, LAEA, 80, 90, 70),
                Canvas(UTM31, Affine(70, 0, west + 1_000, 0, -70, north - 500), 80, 60)]
    with RasterSource(north_up, layer="n") as n, RasterSource(south_up, layer="s") as s:
        assert s.bounds == n.bounds == (west, south, west + 150 * cell, north)
        assert s.res == n.res == (cell, cell)
        for canvas in canvases:
            s.check_overlap(canvas)                      # used to say "does not overlap"
            for method in ("nearest", "bilinear"):
                a = n.read_window(canvas, canvas.whole(), method)
                b = s.read_window(canvas, canvas.whole(), method)
                assert np.isfinite(a).mean() > 0.9
                np.testing.assert_allclose(b, a, rtol=0, atol=1e-3, equal_nan=True)


# --- 0..360 longitudes --------------------------------------------------------------------

def test_longitudes_0_to_360_wrap_for_a_map_across_the_prime_meridian(tmp_path):
    # a global 1-degree grid from 0 to 360 whose value is the cell's west longitude
    lon = np.arange(360, dtype=np.float32)
    data = np.tile(lon, (180, 1))
    path = write_raster(tmp_path / "g360.tif", data, crs=GEO, transform=from_origin(0, 90, 1, 1))
    canvas = Canvas(GEO, Affine(0.5, 0, -20, 0, -0.5, 60), 80, 60)     # 20 W .. 20 E
    with RasterSource(path, layer="global") as src:
        src.check_overlap(canvas)
        got = src.read_window(canvas, canvas.whole(), "nearest")
    assert np.isfinite(got).all()
    # pixel centres by the canvas's affine; expected cell = floor(lon mod 360)
    centres = canvas.transform.c + canvas.transform.a * (np.arange(80) + 0.5)
    np.testing.assert_array_equal(got[0], np.floor(centres % 360))


def test_longitudes_0_to_360_under_a_projected_map(tmp_path):
    data = np.tile(np.arange(360, dtype=np.float32), (180, 1))
    path = write_raster(tmp_path / "g360.tif", data, crs=GEO, transform=from_origin(0, 90, 1, 1))
    canvas = _canvas_around(-5.0, 50.0, GEO, LAEA, 20_000, 60, 40)
    with RasterSource(path, layer="global") as src:
        got = src.read_window(canvas, canvas.whole(), "nearest")
    cols, rows = np.meshgrid(np.arange(60) + 0.5, np.arange(40) + 0.5)
    x, y = canvas.transform @ (cols, rows)
    lon, _ = pyproj.Transformer.from_crs(LAEA, GEO, always_xy=True).transform(x, y)
    expected = np.floor(lon % 360)
    near_edge = np.abs(lon - np.round(lon)) < 1e-6
    assert np.isfinite(got).all()
    np.testing.assert_array_equal(got[~near_edge], expected[~near_edge])


def test_longitudes_minus_180_to_180_unchanged(tmp_path):
    data = np.tile(np.arange(-180, 180, dtype=np.float32), (180, 1))
    path = write_raster(tmp_path / "g180.tif", data, crs=GEO, transform=from_origin(-180, 90, 1, 1))
    canvas = Canvas(GEO, Affine(1, 0, -20, 0, -1, 60), 40, 30)
    with RasterSource(path, layer="global") as src:
        assert src.read_crs == src.crs
        got = src.read_window(canvas, canvas.whole(), "nearest")
    np.testing.assert_array_equal(got[0], np.arange(-20, 20))


# --- multi-band ---------------------------------------------------------------------------

def test_multi_band_warps_only_the_chosen_band(tmp_path):
    bands = [_noise((100, 100), seed=s) for s in (1, 2, 3)]
    path = write_raster(tmp_path / "three.tif", bands, crs=UTM31,
                        transform=from_origin(480_000, 5_560_000, 100, 100), nodata=-9999.0)
    single = write_raster(tmp_path / "one.tif", bands[1], crs=UTM31,
                          transform=from_origin(480_000, 5_560_000, 100, 100), nodata=-9999.0)
    canvas = _canvas_around(485_000, 5_555_000, UTM31, LAEA, 90, 60, 50)
    with RasterSource(path, band=2, layer="three") as src, RasterSource(single, layer="one") as one:
        assert src._view is not None and src._view.count == 1      # what the warper is handed
        assert src.nodata == -9999.0 and src.count == 3
        got = src.read_window(canvas, canvas.whole(), "bilinear")
        want = one.read_window(canvas, canvas.whole(), "bilinear")
    np.testing.assert_array_equal(got, want)


# --- the canvas edge is padded like a seam -----------------------------------------------

def test_padding_reaches_past_the_canvas_edge(tmp_path):
    data = np.arange(100 * 100, dtype=np.float32).reshape(100, 100)
    path = write_raster(tmp_path / "ramp.tif", data, crs=UTM31,
                        transform=from_origin(480_000, 5_560_000, 100, 100))
    canvas = Canvas(UTM31, Affine(100, 0, 482_000, 0, -100, 5_558_000), 30, 20)
    window = next(canvas.windows(size=1024, margin=2))
    assert window.padded == (-2, -2, 24, 34)
    with RasterSource(path, layer="r") as src:
        got = src.read_window(canvas, window, "nearest")
    # the file's rows 18..41 and columns 18..51: real data beyond the canvas edge
    np.testing.assert_array_equal(got, data[18:42, 18:52])
