"""The reprojected read's compiled loops (compose/_kernels.c: grid_interp, span, bilinear_at)
give the numpy paths' numbers bit for bit.

The C source is compiled here (tests/test_kernels.py's ``compiled`` fixture: setuptools with
setup.py's flags, into a temporary folder), then the transform grid's interpolation and the
plain bilinear read are made both ways and compared bit for bit. The numpy paths are the
reference: tests/sources/test_grid.py checks the grid against pyproj's exact transform of every
pixel, tests/sources/test_raster.py the reads against analytic coordinates and GDAL's warper.
"""
from __future__ import annotations

import numpy as np
import pytest
from affine import Affine
from rasterio.transform import from_origin

from compose import kernels
from compose.canvas import Canvas
from compose.sources import resample as R
from compose.sources.grid import forget_recent, transform_grid
from compose.sources.raster import RasterSource
from tests.sources._files import write_raster
from tests.test_kernels import compiled  # noqa: F401  (the fixture: the C source built here)


@pytest.fixture
def use(compiled, monkeypatch):  # noqa: F811
    """use(True): the compiled loops; use(False): the numpy path."""
    monkeypatch.setattr(kernels, "_loaded", [compiled])

    def switch(on: bool) -> None:
        monkeypatch.setattr(kernels, "enabled", on)
    return switch


def _same_bits(a: np.ndarray, b: np.ndarray) -> None:
    """Equal bit for bit (float32 or float64), NaN where both are NaN."""
    assert a.dtype == b.dtype and a.shape == b.shape
    nan = np.isnan(a)
    np.testing.assert_array_equal(nan, np.isnan(b))
    view = np.uint32 if a.dtype == np.float32 else np.uint64
    np.testing.assert_array_equal(np.where(nan, 0, a).view(view), np.where(nan, 0, b).view(view))


# (canvas transform, width, height, canvas CRS, source CRS, source cell): a neighbouring UTM
# zone (a coarse grid) and a wide geographic read (a fine, strongly curved one)
GRIDS = [
    (Affine(30.0, 0, 500_000.0, 0, -30.0, 4_600_000.0), 700, 500, "EPSG:32631", "EPSG:32630", 30.0),
    (Affine(500.0, 0, -200_000.0, 0, -500.0, 6_500_000.0), 3000, 2000, "EPSG:32633", "EPSG:4326",
     0.004),
]


@pytest.mark.parametrize("case", range(len(GRIDS)))
def test_grid_interpolation_equals_the_numpy_path_bit_for_bit(use, case):
    transform, width, height, crs, src_crs, cell = GRIDS[case]
    grid = transform_grid(transform, width, height, 64, crs, src_crs, cell)
    assert grid is not None
    rows, cols = grid.x.shape
    right = int(grid.origin[0]) + (cols - 1) * grid.step      # the last node column, in pixels
    bottom = int(grid.origin[1]) + (rows - 1) * grid.step
    rng = np.random.default_rng(case)
    windows = [(0, 0, 1, 1), (-64, -64, 70, 90), (0, 0, height, width),
               (bottom - 50, right - 60, 50, 60),                 # up to the last nodes
               (3, 5, 1, 333), (7, 11, 250, 1)]
    windows += [(int(rng.integers(-64, height)), int(rng.integers(-64, width)), 129, 131)
                for _ in range(6)]
    inverse = ~Affine(cell, 0, 0.1, 0, -cell, 0.2)
    for r0, c0, h, w in windows:
        h, w = min(h, bottom - r0), min(w, right - c0)
        assert grid.covers(r0, c0, h, w)
        got = {}
        for on in (True, False):
            use(on)
            got[on] = grid.coords(r0, c0, h, w)
        for a, b in zip(got[True], got[False]):
            _same_bits(a, b)
    for on in (True, False):         # the positions in a source's cells (made afresh)
        use(on)
        forget_recent()
        got[on] = grid.cell_centres(inverse, 12, 34, 56, 78)
    for a, b in zip(got[True], got[False]):
        _same_bits(a, b)


def _positions(rng, shape, origin, scale, angle):
    """Cell-centre positions on a rotated, stretched grid of ``shape`` from ``origin``."""
    i, j = np.meshgrid(np.arange(shape[0], dtype=np.float64),
                       np.arange(shape[1], dtype=np.float64), indexing="ij")
    a = np.radians(angle)
    x = origin[0] + scale[0] * j * np.cos(a) - scale[1] * i * np.sin(a)
    y = origin[1] + scale[0] * j * np.sin(a) + scale[1] * i * np.cos(a)
    return x, y


@pytest.mark.parametrize("case", ["inside", "holes", "edges", "beyond", "on cells", "halves",
                                  "all beyond", "infinite"])
def test_bilinear_read_equals_the_numpy_path_bit_for_bit(use, case):
    """sample_centres' plain bilinear read: positions -> the cells' span -> taps -> lerps -> the
    no-data renormalisation, compiled against numpy."""
    rng = np.random.default_rng(7)
    src = rng.uniform(-500.0, 3000.0, (80, 90)).astype(np.float32)
    if case in ("holes", "edges", "beyond", "on cells", "halves"):
        src[rng.random(src.shape) < 0.15] = np.nan         # no-data cells
        src[30:41, 20:26] = np.nan                          # and a hole
    if case == "infinite":
        src[rng.random(src.shape) < 0.05] = np.inf
        src[rng.random(src.shape) < 0.05] = -np.inf

    def read(r, c, h, w):
        return R.cut_block(src, r, c, h, w)

    x, y = _positions(rng, (47, 53), (12.3, 2.9), (1.21, 0.93), 11.0)
    if case == "edges":                      # on the source's first and last cell centres
        x[:, 0], y[0, :], x[:, -1], y[-1, :] = 0.0, 0.0, src.shape[1] - 1.0, src.shape[0] - 1.0
    elif case == "beyond":                   # reaching past the source on every side
        x, y = _positions(rng, (60, 70), (-9.75, -6.5), (1.6, 1.7), -8.0)
    elif case == "all beyond":
        x, y = x + 200.0, y - 300.0
    elif case == "on cells":                 # whole cells: fractions 0
        x, y = np.round(x), np.round(y)
    elif case == "halves":                   # on cell edges (u = x + 0.5 whole) and near them
        x = np.floor(x) + 0.5
        y = np.floor(y) + np.where(rng.random(y.shape) < 0.5, 0.5, 0.5 - 1e-12)
    got = {}
    for on in (True, False):
        use(on)
        R.forget_taps()
        with np.errstate(invalid="ignore"):
            got[on] = R.sample_centres(read, x, y, "bilinear")
    _same_bits(got[True], got[False])
    if case == "all beyond":
        assert np.isnan(got[False]).all()
    elif case == "inside":
        assert not np.isnan(got[False]).any()
    else:
        assert np.isfinite(got[False]).any()
    if case in ("holes", "beyond", "infinite"):
        assert np.isnan(got[False]).any()
    # strided and read-only positions read alike
    use(True)
    wide = np.stack([x, y], axis=-1)
    xs, ys = wide[..., 0], wide[..., 1]
    xs.flags.writeable = False
    with np.errstate(invalid="ignore"):
        _same_bits(R.sample_centres(read, xs, ys, "bilinear"), got[False])


def test_compiled_reads_refuse_taps_outside_their_cells_and_nan_positions(compiled):  # noqa: F811
    cells = np.zeros((4, 5), np.float32)
    out = np.empty(1, np.float32)
    for x, y in ((4.0, 1.0), (-0.5, 1.0), (1.0, 3.0), (1.0, -1.0)):   # a tap beyond
        with pytest.raises(ValueError):
            compiled.bilinear_at(cells, 0, 0, np.array([x]), np.array([y]), out)
    compiled.bilinear_at(cells, 0, 0, np.array([3.0]), np.array([2.0]), out)
    assert out[0] == 0.0
    with pytest.raises(ValueError):
        compiled.span(np.array([1.0, np.nan]), np.array([1.0, 2.0]))
    assert compiled.span(np.array([-1.5, 2.25]), np.array([3.0, 0.5])) == (-2.0, 2.0, 0.0, 3.0)


def test_reprojected_raster_read_equals_the_numpy_path_bit_for_bit(use, tmp_path):
    # A GeoTIFF in UTM 31N with no-data cells and a hole, read onto a canvas in UTM 32N (about
    # 4 degrees of rotation) that reaches beyond the file: every window of a walk alike
    rng = np.random.default_rng(3)
    data = rng.normal(500.0, 200.0, (150, 160)).astype(np.float32)
    data[rng.random(data.shape) < 0.05] = -9999.0
    data[60:80, 40:47] = -9999.0
    path = write_raster(tmp_path / "dem.tif", data, crs="EPSG:32631",
                        transform=from_origin(600_000.0, 5_000_000.0, 30.0, 30.0), nodata=-9999.0)
    import pyproj

    cx, cy = pyproj.Transformer.from_crs("EPSG:32631", "EPSG:32632", always_xy=True).transform(
        602_400.0, 4_997_750.0)                   # the file's centre
    canvas = Canvas("EPSG:32632", Affine(30.0, 0, round(cx) - 2550.0, 0, -30.0, round(cy) + 2400.0),
                    170, 160)
    got = {}
    with RasterSource(path, layer="dem") as src:
        for on in (True, False):
            use(on)
            R.forget_taps()
            got[on] = [src.read_window(canvas, w, "bilinear") for w in canvas.windows(64, 5)]
    for a, b in zip(got[True], got[False]):
        _same_bits(a, b)
    every = np.concatenate([a.ravel() for a in got[False]])
    assert np.isnan(every).any() and np.isfinite(every).mean() > 0.5


@pytest.mark.parametrize("case", range(len(GRIDS)))
def test_grid_read_equals_the_numpy_path_bit_for_bit(use, case):
    """sample_grid's compiled read (positions made on the fly from the nodes, the cells' span
    from the corners of every node cell's pixels) against numpy's positions and read."""
    transform, width, height, crs, src_crs, cell = GRIDS[case]
    grid = transform_grid(transform, width, height, 64, crs, src_crs, cell)
    assert grid is not None
    # a source of 0.9 canvas pixels under part of the canvas: windows inside it, across its
    # edges and beyond it; no-data cells and a hole
    x0, y0 = float(grid.x.min()), float(grid.y.max())
    span_x = float(grid.x.max()) - x0
    size = span_x / (0.9 * width)
    inverse = ~Affine(size, 0, x0 + 0.2 * span_x, 0, -size, y0 - 0.1 * span_x)
    rng = np.random.default_rng(11 + case)
    src = rng.uniform(-50.0, 50.0, (int(0.6 * height / 0.9), int(0.6 * width / 0.9)))
    src = src.astype(np.float32)
    src[rng.random(src.shape) < 0.05] = np.nan
    src[40:60, 70:95] = np.nan

    def read(r, c, h, w):
        return R.cut_block(src, r, c, h, w)

    rows, cols = grid.x.shape
    right = int(grid.origin[0]) + (cols - 1) * grid.step
    bottom = int(grid.origin[1]) + (rows - 1) * grid.step
    windows = [(0, 0, height, width), (-64, -64, 200, 300), (bottom - 77, right - 99, 77, 99),
               (1, 2, 1, 1), (5, 7, 1, 400)]
    windows += [(int(rng.integers(-64, height - 64)), int(rng.integers(-64, width - 64)), 131,
                 129) for _ in range(8)]
    seen = []
    for r0, c0, h, w in windows:
        got = {}
        for on in (True, False):
            use(on)
            forget_recent()
            R.forget_taps()
            with np.errstate(invalid="ignore"):
                got[on] = R.sample_grid(read, grid, inverse, r0, c0, h, w, "bilinear")
        _same_bits(got[True], got[False])
        seen.append(got[False])
        use(True)                # the span read covers the positions' own span
        xs, ys = grid.cell_centres(inverse, r0, c0, h, w)
        nx, ny = grid.cell_nodes(inverse)
        uoff, voff = grid.offsets(r0, c0)
        xl, xh, yl, yh = kernels.get().grid_span(nx, ny, uoff, voff, float(grid.step), h, w)
        assert (xl, yl) == (np.floor(xs.min()) - 1, np.floor(ys.min()) - 1)
        assert (xh, yh) == (np.floor(xs.max()) + 1, np.floor(ys.max()) + 1)
    every = np.concatenate([a.ravel() for a in seen])
    assert np.isnan(every).any() and np.isfinite(every).mean() > 0.2


def test_grid_read_refuses_cells_that_miss_its_taps(compiled):  # noqa: F811
    nodes = np.add.outer(np.arange(5.0), np.zeros(5))      # rows 0..4 of 16 px: y = row / 16
    cells = np.zeros((3, 3), np.float32)
    out = np.empty((8, 8), np.float32)
    compiled.grid_bilinear(nodes.T.copy(), nodes.copy(), 0.5, 0.5, 16.0, cells, 0, 0, out)
    with pytest.raises(ValueError):                          # the cells start a row too low
        compiled.grid_bilinear(nodes.T.copy(), nodes.copy(), 0.5, 0.5, 16.0, cells, 1, 0, out)
    with pytest.raises(ValueError):                          # a pixel before the first node
        compiled.grid_bilinear(nodes.T.copy(), nodes.copy(), -8.0, 0.5, 16.0, cells, 0, 0, out)
