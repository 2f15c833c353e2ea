"""Relief in Web Mercator shaded on the true ground cell size: the cell sizes against pyproj's
geodesic distances, and the same slope shading alike at the equator and at 60 degrees north."""
from __future__ import annotations

import math

import numpy as np
import pytest
from affine import Affine
from pyproj import Geod, Transformer

from compose.layers.hillshade import multidirectional
from compose.layers.relief import ground_cell_size, ground_scale

R = 6378137.0                     # EPSG:3857 sphere radius (the WGS 84 semi-major axis)


def _tile(lat: float, zoom: int = 10, size: int = 256) -> Affine:
    """The transform of a 256 px Web Mercator tile whose top edge lies at ``lat`` degrees."""
    res = 2 * math.pi * R / 256 / 2 ** zoom                  # metres per pixel at this zoom
    y = R * math.log(math.tan(math.pi / 4 + math.radians(lat) / 2))   # Mercator y (sphere)
    return Affine(res, 0.0, 0.0, 0.0, -res, y)


@pytest.mark.parametrize("lat", [0.5, 45.0, 60.0, 75.0])
def test_ground_cell_size_matches_geodesic_distances(lat):
    """Adjacent pixel centres in a tile row are as far apart on the WGS 84 ellipsoid (pyproj
    Geod, Karney's geodesics) as ground_cell_size says, along the row and down the column
    (within 0.05 %: a pixel is a short chord)."""
    t = _tile(lat)
    dx, dy = ground_cell_size("EPSG:3857", t, 256, ground_scale("EPSG:3857"))
    to_geo = Transformer.from_crs("EPSG:3857", "EPSG:4326", always_xy=True)
    geod = Geod(ellps="WGS84")
    for row in (0, 128, 255):
        y = t.f + t.e * (row + 0.5)
        (lon0, lon1), (lat0, lat1) = to_geo.transform([t.c + 100.5 * t.a, t.c + 101.5 * t.a], [y, y])
        _, _, d = geod.inv(lon0, lat0, lon1, lat1)
        assert float(dx[row, 0]) == pytest.approx(d, rel=0.0005)
    y0, y1 = t.f + t.e * 127.5, t.f + t.e * 128.5
    (la, lb) = to_geo.transform([0.0, 0.0], [y0, y1])[1]
    _, _, d = geod.inv(0.0, la, 0.0, lb)
    assert dy == pytest.approx(d, rel=0.0005)


def test_a_utm_grid_keeps_its_nominal_cell_size():
    assert ground_scale("EPSG:32630") is None
    t = Affine(30.0, 0, 500000.0, 0, -30.0, 5000000.0)
    assert ground_cell_size("EPSG:32630", t, 10, None) == (30.0, 30.0)


def test_the_same_slope_shades_alike_at_every_latitude():
    """A plane rising 0.6 m per ground metre to the west and 0.6 to the north, sampled on a tile
    at the equator and at 60 degrees north: shaded on the ground cell size both give the
    closed-form shade of that plane (a slope facing away from the sun); on the projected cell
    size the northern one comes out flatter, so lighter."""
    shades, naive = [], []
    for lat in (0.5, 60.0):
        t = _tile(lat, zoom=12, size=64)
        dx, dy = ground_cell_size("EPSG:3857", t, 64, ground_scale("EPSG:3857"))
        cols = np.arange(64)[None, :]
        rows = np.arange(64)[:, None]
        east = cols * dx                                     # ground metres, per row's dx
        north = -(rows - 32) * dy
        dem = (-0.6 * east + 0.6 * north).astype(np.float32)
        shades.append(multidirectional(dem, dx, dy, 315, 45)[2:-2, 2:-2])
        naive.append(multidirectional(dem, abs(t.a), abs(t.e), 315, 45)[2:-2, 2:-2])
    # closed form (Lambert, sun at azimuth 315, altitude 45): n = (-p, -q, 1)/|.|, with p, q
    # the east and north gradients; light l = (sin az cos alt, cos az cos alt, sin alt)
    az, alt = math.radians(315), math.radians(45)
    light = np.array([math.sin(az) * math.cos(alt), math.cos(az) * math.cos(alt), math.sin(alt)])
    normal = np.array([0.6, -0.6, 1.0]) / math.sqrt(0.6 ** 2 + 0.6 ** 2 + 1)
    want = max(0.0, float(normal @ light))
    for s in shades:
        assert np.nanmax(np.abs(s - want)) < 0.01
    assert abs(float(np.nanmean(naive[1])) - want) > 0.02     # the old way: flatter at 60 N


def test_auto_stretch_samples_windows_across_rows_and_columns():
    # The "auto" stretch reads SAMPLE_WINDOWS windows; they must cover the canvas in both
    # directions (evenly spaced indices of the row-major list put 8 of 9 in the last column of a
    # 64 x 64 grid, so a map whose relief changes from west to east was measured on its east edge).
    # Common practice, no source: sample a surface on a regular lattice.
    from compose.layers.relief import SAMPLE_WINDOWS, spread_windows

    picked = spread_windows(64, 64, SAMPLE_WINDOWS)
    rows = sorted({i // 64 for i in picked})
    cols = sorted({i % 64 for i in picked})
    assert rows == [0, 32, 63] and cols == [0, 32, 63] and len(picked) == 9
    assert spread_windows(1, 1, 9) == [0]
    assert spread_windows(2, 5, 9) == [0, 2, 4, 5, 7, 9]
    assert all(0 <= i < 12 * 12 for i in spread_windows(12, 12, 9))
