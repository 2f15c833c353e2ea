"""RasterSource and cell_size_metres, on tiny real GeoTIFFs in tmp_path.

Outside references: pyproj (coordinate transformations, Geod distances) and rasterio's affine
transforms; the canvases are always in a different CRS from the files.
"""
from __future__ import annotations

import numpy as np
import pyproj
import pytest
import rasterio
from affine import Affine
from rasterio.transform import from_origin

from compose.canvas import Canvas
from compose.errors import SourceError, StyleError
from compose.sources.raster import RESAMPLING, RasterSource, cell_size_metres
from tests.sources._files import write_raster

UTM31 = "EPSG:32631"      # WGS 84 / UTM zone 31N: the files
LAEA = "EPSG:3035"        # ETRS89 / LAEA Europe: the canvases (central meridian 10 E, so rotated)
GEO = "EPSG:4326"

# A 20 km x 20 km file of 100 m cells in UTM 31N.
WEST, NORTH, CELL, N_CELLS = 480_000.0, 5_560_000.0, 100.0, 200
T_UTM = from_origin(WEST, NORTH, CELL, CELL)


def canvas_around(x: float, y: float, src_crs: str, dst_crs: str, pixel: float, width: int,
                  height: int) -> Canvas:
    """A canvas in dst_crs centred on the point (x, y) of src_crs."""
    cx, cy = pyproj.Transformer.from_crs(src_crs, dst_crs, always_xy=True).transform(x, y)
    west = round(cx - width * pixel / 2)
    north = round(cy + height * pixel / 2)
    return Canvas(dst_crs, Affine(pixel, 0, west, 0, -pixel, north), width, height)


def pixel_centres_in(canvas: Canvas, crs: str) -> tuple[np.ndarray, np.ndarray]:
    """The canvas's pixel centres transformed to ``crs`` by pyproj (outside reference)."""
    cols, rows = np.meshgrid(np.arange(canvas.width) + 0.5, np.arange(canvas.height) + 0.5)
    x, y = canvas.transform @ (cols, rows)
    return pyproj.Transformer.from_crs(canvas.crs, crs, always_xy=True).transform(x, y)


def nearest_expected(values: np.ndarray, invalid: np.ndarray, canvas: Canvas):
    """What nearest-neighbour reprojection must give, from pyproj + the file's inverse affine.

    Returns (expected, decidable): expected is NaN for invalid or outside cells; decidable drops
    pixel centres within 1e-4 cells (1 cm) of a cell edge: rasterio's and pyproj's wheels each
    bundle their own PROJ, and the two place points a few 1e-6 cells apart.
    """
    e, n = pixel_centres_in(canvas, UTM31)
    col, row = ~T_UTM @ (e, n)
    inside = (col >= 0) & (col < N_CELLS) & (row >= 0) & (row < N_CELLS)
    ci = np.clip(np.floor(col).astype(int), 0, N_CELLS - 1)
    ri = np.clip(np.floor(row).astype(int), 0, N_CELLS - 1)
    expected = np.where(inside & ~invalid[ri, ci], values[ri, ci].astype(np.float32), np.nan)
    frac = np.minimum(np.abs(col - np.round(col)), np.abs(row - np.round(row)))
    return expected, frac > 1e-4


# --- properties, reprojection accuracy --------------------------------------------------------

def test_properties_and_band_choice(tmp_path):
    a = np.zeros((N_CELLS, N_CELLS), np.int16)
    path = write_raster(tmp_path / "two.tif", [a, a + 1], crs=UTM31, transform=T_UTM, nodata=-1)
    with RasterSource(path, band=2, layer="t") as src:
        assert src.crs.to_epsg() == 32631
        assert src.bounds == (WEST, NORTH - N_CELLS * CELL, WEST + N_CELLS * CELL, NORTH)
        assert src.res == (CELL, CELL)
        assert src.nodata == -1 and src.dtype == "int16" and src.count == 2 and src.band == 2
        canvas = canvas_around(490_000, 5_550_000, UTM31, LAEA, 100, 20, 20)
        assert np.all(src.read_window(canvas, canvas.whole()) == 1)


def test_bilinear_matches_analytic_coordinates(tmp_path):
    # Band 1 holds each cell centre's easting, band 2 its northing (offset to keep float32
    # precise). The fields are linear in the file's CRS, so bilinear interpolation reproduces
    # them exactly and the result at each canvas pixel centre must equal that centre's UTM
    # coordinates as pyproj computes them. Tolerance 0.01 m = 1e-4 cell: float32 rounding of
    # values up to 1e4 (ulp 1e-3) in GDAL's weighted sum.
    centres = (np.arange(N_CELLS) + 0.5) * CELL
    east, north = np.meshgrid(WEST + centres - 490_000, NORTH - centres - 5_550_000)
    path = write_raster(tmp_path / "coords.tif", [east.astype(np.float32), north.astype(np.float32)],
                        crs=UTM31, transform=T_UTM)
    canvas = canvas_around(490_000, 5_550_000, UTM31, LAEA, 60.0, 150, 120)
    e, n = pixel_centres_in(canvas, UTM31)
    # read() warps exactly (GDAL, tolerance 1e-9 px); read_window() goes through the canvas's
    # shared transform grid, whose stated bound is ERROR_PX source cells (compose.sources.grid).
    from compose.sources.grid import ERROR_PX

    for band, expected in ((1, e - 490_000), (2, n - 5_550_000)):
        with RasterSource(path, band=band, layer="coords") as src:
            exact = src.read(canvas.crs, canvas.transform, canvas.width, canvas.height, "bilinear")
            got = src.read_window(canvas, canvas.whole(), "bilinear")
        assert got.dtype == np.float32 and got.shape == (120, 150)
        np.testing.assert_allclose(exact, expected, rtol=0, atol=0.01)
        np.testing.assert_allclose(got, expected, rtol=0, atol=ERROR_PX * CELL + 0.01)


# --- no data ------------------------------------------------------------------------------------

def _ramp() -> np.ndarray:
    return np.arange(N_CELLS * N_CELLS, dtype=np.float32).reshape(N_CELLS, N_CELLS) / 100.0


def _holes() -> np.ndarray:
    invalid = np.zeros((N_CELLS, N_CELLS), bool)
    invalid[40:46, 50:58] = True
    invalid[120, 130] = True
    invalid[150:190, 60:63] = True
    return invalid


@pytest.mark.parametrize("how", ["file nodata", "NaN", "mask"])
def test_nodata_nan_and_mask_become_nan(tmp_path, how):
    values, invalid = _ramp(), _holes()
    data = values.copy()
    kwargs = {}
    if how == "file nodata":
        data[invalid] = -9999.0
        kwargs["nodata"] = -9999.0
    elif how == "NaN":
        data[invalid] = np.nan
    else:
        data[invalid] = 5000.0           # a plausible value: only the mask says it is no data
        kwargs["mask"] = np.where(invalid, 0, 255).astype(np.uint8)
    path = write_raster(tmp_path / "holes.tif", data, crs=UTM31, transform=T_UTM, **kwargs)
    # The canvas straddles the file's east edge, so part of it is outside the source.
    canvas = canvas_around(WEST + 16_000, 5_550_000, UTM31, LAEA, 70.0, 160, 260)
    with RasterSource(path, layer="holes") as src:
        near = src.read_window(canvas, canvas.whole(), "nearest")
        smooth = src.read_window(canvas, canvas.whole(), "bilinear")
    expected, decidable = nearest_expected(values, invalid, canvas)
    assert np.isnan(expected).sum() > 1000            # the outside part is really there
    np.testing.assert_array_equal(near[decidable], expected[decidable])
    # Bilinear uses only valid cells: every value it produces lies within the valid data.
    finite = smooth[np.isfinite(smooth)]
    assert finite.size > 0.5 * smooth.size
    assert finite.min() >= values[~invalid].min() - 1e-3 and finite.max() <= values[~invalid].max() + 1e-3
    assert np.all(np.isnan(smooth[np.isnan(expected) & decidable & _outside(canvas)]))


def _outside(canvas: Canvas) -> np.ndarray:
    """Canvas pixels whose centre is more than one cell outside the file (pyproj)."""
    e, n = pixel_centres_in(canvas, UTM31)
    col, row = ~T_UTM @ (e, n)
    return (col < -1) | (col > N_CELLS + 1) | (row < -1) | (row > N_CELLS + 1)


def test_class_raster_exact_with_nearest(tmp_path):
    rng = np.random.default_rng(7)
    classes = rng.integers(1, 12, size=(N_CELLS, N_CELLS)).astype(np.uint8)
    invalid = _holes()
    classes[invalid] = 255
    path = write_raster(tmp_path / "cover.tif", classes, crs=UTM31, transform=T_UTM, nodata=255)
    canvas = canvas_around(490_000, 5_550_000, UTM31, LAEA, 45.0, 200, 200)
    with RasterSource(path, layer="cover") as src:
        got = src.read_window(canvas, canvas.whole(), "nearest")
    expected, decidable = nearest_expected(classes, invalid, canvas)
    np.testing.assert_array_equal(got[decidable], expected[decidable])


def test_class_raster_exact_with_mode(tmp_path):
    # Classes in blocks of 8 x 8 cells (800 m), read shrunk 2.5x: every value is one of the
    # classes, and a canvas pixel whose centre lies well inside a block gets that block's class.
    rng = np.random.default_rng(3)
    blocks = rng.integers(1, 9, size=(N_CELLS // 8, N_CELLS // 8)).astype(np.uint8)
    classes = np.kron(blocks, np.ones((8, 8), np.uint8))
    path = write_raster(tmp_path / "blocks.tif", classes, crs=UTM31, transform=T_UTM, nodata=0)
    canvas = canvas_around(490_000, 5_550_000, UTM31, LAEA, 250.0, 60, 60)
    with RasterSource(path, layer="blocks") as src:
        got = src.read_window(canvas, canvas.whole(), "mode")
    assert set(np.unique(got[np.isfinite(got)])) <= set(range(1, 9))
    e, n = pixel_centres_in(canvas, UTM31)
    col, row = ~T_UTM @ (e, n)
    bc, br = col / 8, row / 8
    # "well inside": at least 2 cells from the block's edges (the footprint's half-width is
    # 1.25 cells, a little more when rotated).
    deep = (np.abs(bc - np.floor(bc) - 0.5) < 0.5 - 2 / 8) & (np.abs(br - np.floor(br) - 0.5) < 0.5 - 2 / 8)
    assert deep.sum() > 50
    want = blocks[np.floor(br).astype(int)[deep], np.floor(bc).astype(int)[deep]]
    np.testing.assert_array_equal(got[deep], want.astype(np.float32))


# --- automatic average when shrinking ----------------------------------------------------------

def _checkerboard(tmp_path):
    board = (np.add.outer(np.arange(N_CELLS), np.arange(N_CELLS)) % 2).astype(np.float32)
    return write_raster(tmp_path / "board.tif", board, crs=UTM31, transform=T_UTM)


def test_shrink_over_2x_averages_instead_of_aliasing(tmp_path):
    # A 0/1 checkerboard shrunk 4x: the mean over a 4 x 4 cell footprint is 0.5 up to the partial
    # cells at its rim (rotated footprint), so |value - 0.5| stays far below the 0.5 of aliasing.
    path = _checkerboard(tmp_path)
    canvas = canvas_around(490_000, 5_550_000, UTM31, LAEA, 400.0, 30, 30)
    with RasterSource(path, layer="board") as src:
        assert min(src.shrink(canvas.crs, canvas.transform, (canvas.transform @ (15, 15)))) > 3.9
        got = {m: src.read_window(canvas, canvas.whole(), m) for m in RESAMPLING}
    assert np.nanmax(np.abs(got["bilinear"] - 0.5)) < 0.1
    np.testing.assert_array_equal(got["bilinear"], got["average"])
    np.testing.assert_array_equal(got["cubic"], got["average"])
    assert set(np.unique(got["nearest"])) <= {0.0, 1.0}          # 'nearest' stays as asked
    assert set(np.unique(got["mode"])) <= {0.0, 1.0}             # so does 'mode'


def test_a_far_shrink_reads_only_the_source_and_in_strips(tmp_path):
    # 3 canvas pixels of 8 km over a 20 km source of 100 m cells (shrink ~80): block means are
    # taken of the source's own cells only (before, the 7 spare reduced cells around the window
    # were read too: 80 x 80 cells each, a 1 x 1 canvas of a 30 m DEM at 45 km asked GBs), in
    # strips of at most _REDUCE_CELLS cells (one block row at the least), with the same values
    from compose.sources import resample

    path = _checkerboard(tmp_path)
    canvas = canvas_around(490_000, 5_550_000, UTM31, LAEA, 8000.0, 3, 3)
    results = []
    for limit in (resample._REDUCE_CELLS, 1):
        with RasterSource(path, layer="board") as src:
            asked = []
            read = src._read_cells

            def spy(r, c, h, w, read=read, asked=asked):
                asked.append((r, c, h, w))
                return read(r, c, h, w)

            src._read_cells = spy
            old, resample._REDUCE_CELLS = resample._REDUCE_CELLS, limit
            try:
                got = src.read_window(canvas, canvas.whole(), "bilinear")
            finally:
                resample._REDUCE_CELLS = old
        assert asked
        for r, c, h, w in asked:     # whole blocks of the source's cells, no more
            assert r >= 0 and c >= 0 and r < N_CELLS and c < N_CELLS
            assert h <= N_CELLS + 80 and w <= N_CELLS + 80
        if limit == 1:
            assert len(asked) > 1 and max(h for _, _, h, _ in asked) <= 80
        results.append(got)
        inside = np.isfinite(got)
        assert inside.any() and np.all(np.abs(got[inside] - 0.5) < 0.05)   # the board's mean
    np.testing.assert_array_equal(results[0], results[1])


def test_shrink_under_2x_keeps_bilinear(tmp_path):
    path = _checkerboard(tmp_path)
    canvas = canvas_around(490_000, 5_550_000, UTM31, LAEA, 150.0, 60, 60)
    with RasterSource(path, layer="board") as src:
        bilinear = src.read_window(canvas, canvas.whole(), "bilinear")
        average = src.read_window(canvas, canvas.whole(), "average")
    assert not np.allclose(bilinear, average)


# --- seams ---------------------------------------------------------------------------------

@pytest.mark.parametrize("pixel,resampling", [(50.0, "bilinear"), (100.0, "bilinear"), (100.0, "cubic"),
                                              (300.0, "bilinear"), (70.0, "nearest")])
@pytest.mark.parametrize("via", ["read_window", "read"])
def test_windowed_read_equals_whole_read(tmp_path, pixel, resampling, via):
    # Noise is the hardest case: any window-dependent shift of the sampling positions or of the
    # kernel width shows at once. Source in EPSG:4326 (0.001 deg cells), canvas in UTM 31N;
    # at 100 m the source is shrunk 1.4x in x (kernel widened), at 300 m 4.2x ('average').
    # Tolerance 1e-4 of the data range for differences in GDAL's arithmetic (none seen).
    # via="read": plain read() on each window's grid (no scale_at), as a caller may do.
    rng = np.random.default_rng(1)
    data = (rng.random((400, 600)) * 100).astype(np.float32)
    data[100:110, 200:230] = np.nan
    path = write_raster(tmp_path / "noise.tif", data, crs=GEO, transform=from_origin(2.7, 50.2, 0.001, 0.001))
    size = int(16_000 / pixel)
    canvas = canvas_around(3.0, 50.0, GEO, UTM31, pixel, int(size * 1.2), size)
    with RasterSource(path, layer="noise") as src:
        if via == "read_window":
            whole = src.read_window(canvas, canvas.whole(), resampling)
        else:
            whole = src.read(canvas.crs, canvas.transform, canvas.width, canvas.height, resampling)
        tiled = np.full_like(whole, -1.0)
        for window in canvas.windows(size=23, margin=4):
            if via == "read_window":
                part = src.read_window(canvas, window, resampling)
            else:
                _, _, h, w = window.padded
                part = src.read(canvas.crs, canvas.window_transform(window), w, h, resampling)
            assert part.shape == window.padded[2:]
            tiled[window.core] = part[window.inner]
    assert np.isfinite(whole).mean() > 0.9
    np.testing.assert_array_equal(np.isnan(tiled), np.isnan(whole))
    np.testing.assert_allclose(tiled, whole, rtol=0, atol=1e-4 * 100, equal_nan=True)


# --- errors --------------------------------------------------------------------------------

def test_missing_file(tmp_path):
    with pytest.raises(SourceError, match=r'layer "relief": source not found: .*nothing\.tif'):
        RasterSource(tmp_path / "nothing.tif", layer="relief")


def test_unreadable_file(tmp_path):
    bad = tmp_path / "bad.tif"
    bad.write_text("not a raster")
    with pytest.raises(SourceError, match=r'layer "relief": cannot read .*bad\.tif: '):
        RasterSource(bad, layer="relief")


def test_no_crs(tmp_path):
    path = write_raster(tmp_path / "nocrs.tif", np.zeros((4, 4), np.float32), crs=None, transform=T_UTM)
    with pytest.raises(SourceError, match=r'layer "relief": .*nocrs\.tif has no CRS'):
        RasterSource(path, layer="relief")


def test_band_out_of_range(tmp_path):
    path = write_raster(tmp_path / "one.tif", np.zeros((4, 4), np.float32), crs=UTM31, transform=T_UTM)
    with pytest.raises(SourceError, match=r'layer "relief": band 3 not in 1\.\.1: .*one\.tif'):
        RasterSource(path, band=3, layer="relief")


def test_no_overlap(tmp_path):
    path = write_raster(tmp_path / "here.tif", np.zeros((4, 4), np.float32), crs=UTM31, transform=T_UTM)
    far = canvas_around(15.0, 60.0, GEO, LAEA, 100.0, 50, 50)         # Sweden, file in Belgium
    near = canvas_around(WEST + 200, NORTH - 200, UTM31, LAEA, 100.0, 50, 50)
    with RasterSource(path, layer="relief") as src:
        src.check_overlap(near)
        with pytest.raises(SourceError, match=r'layer "relief": .*here\.tif does not overlap'):
            src.check_overlap(far)


def test_unknown_resampling(tmp_path):
    path = write_raster(tmp_path / "one.tif", np.zeros((4, 4), np.float32), crs=UTM31, transform=T_UTM)
    with RasterSource(path, layer="relief") as src:
        with pytest.raises(StyleError, match=r'layer "relief": resampling: "lanczos"'):
            src.read(UTM31, T_UTM, 4, 4, "lanczos")


def test_close_is_idempotent(tmp_path):
    path = write_raster(tmp_path / "one.tif", np.zeros((4, 4), np.float32), crs=UTM31, transform=T_UTM)
    src = RasterSource(path, layer="relief")
    with src:
        pass
    src.close()


# --- cell size in metres ---------------------------------------------------------------------

def test_cell_size_geographic_against_geodesic():
    # Outside reference: pyproj.Geod (Karney's geodesics on WGS 84) between neighbouring cell
    # centres. The requirement is 0.5 %; the ellipsoid's radii of curvature agree to ~1e-9 at
    # 0.01 degree spacing, so 1e-6 is asserted (dy at the grid's centre latitude, as documented).
    geod = pyproj.Geod(ellps="WGS84")
    step = 0.01
    transform = from_origin(3.0, 70.0, step, step)            # rows from 70 N down to 0
    height = 7000
    dx, dy = cell_size_metres(GEO, transform, height)
    assert np.shape(dx) == (height, 1) and np.isscalar(dy)
    rows = np.arange(0, height, 250)
    lat = 70.0 - (rows + 0.5) * step
    _, _, along = geod.inv(np.full_like(lat, 3.0), lat, np.full_like(lat, 3.0 + step), lat)
    np.testing.assert_allclose(dx[rows, 0], along, rtol=1e-6)
    mid = 70.0 - height / 2 * step
    _, _, down = geod.inv(3.0, mid + step / 2, 3.0, mid - step / 2)
    np.testing.assert_allclose(dy, down, rtol=1e-6)


def test_cell_size_geographic_dy_near_equator():
    # Near the equator the meridian radius of curvature is ~0.56 % below the mean radius
    # 6371008.8 m (IUGG mean radius of GRS 80 / WGS 84, from memory), so a sphere would miss the
    # 0.5 % requirement; the ellipsoidal dy matches pyproj.Geod.
    geod = pyproj.Geod(ellps="WGS84")
    _, dy = cell_size_metres(GEO, from_origin(10.0, 1.0, 0.001, 0.001), 2000)
    _, _, down = geod.inv(10.0, 0.0005, 10.0, -0.0005)
    np.testing.assert_allclose(dy, down, rtol=1e-6)
    sphere = np.radians(0.001) * 6371008.8
    assert abs(sphere / down - 1) > 0.005


def test_cell_size_projected_units():
    assert cell_size_metres(UTM31, from_origin(0, 0, 30, 25), 10) == (30.0, 25.0)
    # EPSG:2263 (NAD83 / New York Long Island) is in US survey feet: 1 ftUS = 1200/3937 m
    # (NIST, the US survey foot definition of 1893).
    dx, dy = cell_size_metres("EPSG:2263", from_origin(0, 0, 10, 10), 10)
    assert dx == pytest.approx(10 * 1200 / 3937, rel=1e-9) and dy == pytest.approx(10 * 1200 / 3937, rel=1e-9)


def test_aligned_grid_fast_path_equals_warp(tmp_path):
    """A canvas on the source's own grid is read directly; it must equal GDAL's nearest warp."""
    from affine import Affine as _Affine
    from rasterio.enums import Resampling as _R
    from rasterio.vrt import WarpedVRT as _VRT

    from tests.sources._files import write_raster as _write

    rng = np.random.default_rng(11)
    data = rng.normal(size=(40, 50)).astype("float32")
    data[5, 7] = -9999
    src_t = _Affine(30, 0, 500000, 0, -30, 4100000)
    path = _write(tmp_path / "a.tif", data, crs="EPSG:32630", transform=src_t, nodata=-9999)
    # a grid offset by whole pixels and reaching outside the source on two sides
    t = _Affine(30, 0, 500000 - 3 * 30, 0, -30, 4100000 + 2 * 30)
    with RasterSource(path, layer="x") as src:
        assert src._aligned_offset(src.crs, t) == (-2, -3)
        fast = src.read("EPSG:32630", t, 45, 30, "bilinear")
    with rasterio.open(path) as ds, _VRT(ds, crs="EPSG:32630", transform=t, width=45, height=30,
                                          resampling=_R.nearest, nodata=np.nan, dtype="float32",
                                          src_nodata=-9999) as vrt:
        ref = vrt.read(1)
    np.testing.assert_array_equal(np.isnan(fast), np.isnan(ref))
    np.testing.assert_array_equal(fast[~np.isnan(fast)], ref[~np.isnan(ref)])
    assert np.isnan(fast[2 + 5, 3 + 7])


@pytest.mark.parametrize("case", ["near-nodata", "nan-nodata", "internal-mask", "uint8", "no-nodata",
                                  "far-from-nodata"])
@pytest.mark.parametrize("inside", [False, True])
def test_aligned_read_masks_like_gdal(tmp_path, case, inside):
    """The aligned read skips GDAL's mask band when the data says it all; every case must equal
    rasterio's masked read (GDAL's own mask: nodata within its float tolerance, internal masks)."""
    from affine import Affine as _Affine

    rng = np.random.default_rng(5)
    data = rng.normal(size=(30, 40)).astype("float32") * 100
    nodata, mask = -9999.0, None
    data[3, 4] = -9999.0
    if case == "near-nodata":           # one ulp away: GDAL's tolerance masks it too
        data[6, 7] = np.nextafter(np.float32(-9999.0), np.float32(0))
    elif case == "nan-nodata":
        nodata = float("nan")
        data[3, 4] = np.nan
    elif case == "internal-mask":
        nodata = None
        mask = np.full(data.shape, 255, np.uint8)
        mask[10:12, 5:9] = 0
    elif case == "uint8":
        data = rng.integers(0, 255, data.shape).astype("uint8")
        data[3, 4] = 7
        nodata = 7
    elif case == "far-from-nodata":     # a nodata value no cell comes near (the usual DEM)
        data[3, 4] = 12.5
    else:
        nodata = None
    src_t = _Affine(30, 0, 500000, 0, -30, 4100000)
    path = write_raster(tmp_path / "m.tif", data, crs="EPSG:32630", transform=src_t,
                        nodata=nodata, mask=mask)
    with rasterio.open(path) as ds:
        ref = ds.read(1, masked=True).astype("float32").filled(np.nan)
    if inside:                          # rows 1..29, columns 2..39 of the source
        t = _Affine(30, 0, 500000 + 2 * 30, 0, -30, 4100000 - 1 * 30)
        with RasterSource(path, layer="x") as src:
            got = src.read("EPSG:32630", t, 38, 29, "bilinear")
        np.testing.assert_array_equal(got, ref[1:30, 2:40])
        return
    t = _Affine(30, 0, 500000 - 2 * 30, 0, -30, 4100000 + 1 * 30)   # reaches outside, aligned
    with RasterSource(path, layer="x") as src:
        got = src.read("EPSG:32630", t, 44, 33, "bilinear")
    want = np.full((33, 44), np.nan, np.float32)
    want[1:31, 2:42] = ref
    np.testing.assert_array_equal(got, want)
