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
