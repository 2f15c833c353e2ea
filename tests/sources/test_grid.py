"""The shared transform grid against the exact transform (pyproj, per pixel)."""
import numpy as np
import pyproj
from affine import Affine

from compose.sources.grid import ERROR_PX, transform_grid


def _exact(transform, crs_from, crs_to, rows, cols):
    x, y = transform @ (cols + 0.5, rows + 0.5)
    return pyproj.Transformer.from_crs(crs_from, crs_to, always_xy=True).transform(x, y)


def test_grid_within_its_bound_on_a_wide_reprojection():
    # A 3000 x 2000 px canvas at 500 m in UTM zone 33N read from a 0.004 degree geographic grid
    # (about 300-450 m cells): strongly curved, far from linear over the canvas. Outside
    # reference: pyproj's exact transform of every sampled pixel centre.
    canvas_t = Affine(500.0, 0, -200_000.0, 0, -500.0, 6_500_000.0)
    cell = 0.004
    grid = transform_grid(canvas_t, 3000, 2000, 64, "EPSG:32633", "EPSG:4326", cell)
    assert grid is not None and grid.error <= ERROR_PX * cell
    rng = np.random.default_rng(5)
    for r0, c0, h, w in [(0, 0, 40, 50), (-64, -64, 30, 30), (1950, 2940, 114, 124),
                         (int(rng.integers(0, 1900)), int(rng.integers(0, 2900)), 64, 64)]:
        x, y = grid.coords(r0, c0, h, w)
        rows, cols = np.mgrid[r0:r0 + h, c0:c0 + w]
        ex, ey = _exact(canvas_t, "EPSG:32633", "EPSG:4326", rows, cols)
        err = np.hypot(x - ex, y - ey) / cell
        assert err.max() <= ERROR_PX


def test_grid_positions_do_not_depend_on_the_window():
    canvas_t = Affine(30.0, 0, 500_000.0, 0, -30.0, 4_600_000.0)
    grid = transform_grid(canvas_t, 700, 500, 64, "EPSG:32631", "EPSG:32630", 30.0)
    whole = grid.coords(0, 0, 500, 700)
    part = grid.coords(123, 321, 77, 99)
    np.testing.assert_array_equal(part[0], whole[0][123:200, 321:420])
    np.testing.assert_array_equal(part[1], whole[1][123:200, 321:420])


def test_grid_is_shared():
    canvas_t = Affine(30.0, 0, 500_000.0, 0, -30.0, 4_600_000.0)
    a = transform_grid(canvas_t, 700, 500, 64, "EPSG:32631", "EPSG:32630", 30.0)
    b = transform_grid(canvas_t, 700, 500, 64, "EPSG:32631", "EPSG:32630", 30.0)
    assert a is b


def test_cell_centres_kept_for_the_next_raster_on_the_grid(monkeypatch):
    # two rasters on one grid reading one window get the same read-only positions, made once;
    # reference: the positions of the grid's own coordinates through the source's inverse
    # affine (rasterio's Affine), per pixel
    from compose.sources.grid import RECENT, forget_recent
    from compose.sources.resample import forget_taps, sample_centres

    canvas_t = Affine(30.0, 0, 500_000.0, 0, -30.0, 4_600_000.0)
    grid = transform_grid(canvas_t, 700, 500, 64, "EPSG:32631", "EPSG:32630", 30.0)
    inv = ~Affine(30.0, 0, 150_000.0, 0, -30.0, 4_700_000.0)
    x, y = grid.cell_centres(inv, 10, 20, 60, 70)
    again = grid.cell_centres(inv, 10, 20, 60, 70)
    assert again[0] is x and again[1] is y
    assert not (x.flags.writeable or y.flags.writeable)
    gx, gy = grid.coords(10, 20, 60, 70)
    np.testing.assert_allclose(x, inv.a * gx + inv.b * gy + inv.c - 0.5, rtol=0, atol=1e-6)
    np.testing.assert_allclose(y, inv.d * gx + inv.e * gy + inv.f - 0.5, rtol=0, atol=1e-6)
    for k in range(RECENT):                 # later windows push it out
        grid.cell_centres(inv, 100 + k, 20, 60, 70)
    fresh = grid.cell_centres(inv, 10, 20, 60, 70)
    assert fresh[0] is not x
    np.testing.assert_array_equal(fresh[0], x)
    np.testing.assert_array_equal(fresh[1], y)
    forget_recent()
    assert grid.cell_centres(inv, 10, 20, 60, 70)[0] is not fresh[0]

    # the numpy path's taps made for read-only positions serve the next raster: the same
    # values as sampling writable copies of the positions (the compiled path keeps no taps;
    # tests/sources/test_resample_kernels.py compares the two)
    from compose import kernels
    monkeypatch.setattr(kernels, "enabled", False)
    rng = np.random.default_rng(2)
    cells = rng.normal(0, 1, (400, 400)).astype(np.float32)
    cells[::7, ::5] = np.nan

    def reader(data):
        def read(r, c, h, w):
            out = np.full((h, w), np.nan, np.float32)
            r0, c0 = max(r, 0), max(c, 0)
            r1, c1 = min(r + h, data.shape[0]), min(c + w, data.shape[1])
            out[r0 - r:r1 - r, c0 - c:c1 - c] = data[r0:r1, c0:c1]
            return out
        return read

    x, y = fresh
    shared = [x - x.min() + 3.25, y - y.min() + 5.5]    # inside the cells
    for arr in shared:
        arr.flags.writeable = False
    for data in (cells, cells * 2 + 1):                 # the second raster takes the taps kept
        want = sample_centres(reader(data), shared[0].copy(), shared[1].copy(), "bilinear")
        got = sample_centres(reader(data), *shared, "bilinear")
        np.testing.assert_array_equal(got, want)
    from compose.sources import resample
    assert any(px is shared[0] for px, _, _ in resample._recent_taps)
    forget_taps()
    assert not resample._recent_taps
