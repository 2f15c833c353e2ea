"""Hillshade against Horn (1981) and the Lambertian closed form.

Gold values: /work/shared/references.md section 6 (Horn, "Hill shading and the reflectance map",
Proc. IEEE 69(1), 1981; table computed there from the closed form, tagged CALC). The Horn 3x3
operator is exact for any plane, so planar DEMs must reproduce the closed form to rounding.
"""
import math

import numpy as np
import pytest

import compose.layers.hillshade as hs
from compose.layers.hillshade import (
    STRETCH_TARGET,
    centre_gradient,
    flat_normalised,
    hillshade,
    horn_gradient,
    multidirectional,
    shade_gradient,
    shade_spread,
    stretch_factor,
)

DX = DY = 30.0


def closed_form(slope, aspect, azimuth=315.0, altitude=45.0):
    """max(0, cos Z cos S + sin Z sin S cos(az - aspect)), Z = 90 - altitude (references.md §6)."""
    z, s = math.radians(90.0 - altitude), math.radians(slope)
    return max(0.0, math.cos(z) * math.cos(s)
               + math.sin(z) * math.sin(s) * math.cos(math.radians(azimuth - aspect)))


def plane(slope, aspect, shape=(7, 9), dx=DX, dy=DY):
    """A planar DEM with rows running north -> south (row 0 north).

    aspect is the downslope compass direction, so the gradient is
    (dz/dx, dz/dy) = -tan(slope) * (sin aspect, cos aspect); the north coordinate of row r is -r*dy.
    """
    t = math.tan(math.radians(slope))
    p, q = -t * math.sin(math.radians(aspect)), -t * math.cos(math.radians(aspect))
    rows, cols = np.mgrid[0:shape[0], 0:shape[1]].astype(np.float64)
    return p * cols * dx + q * (-rows * dy) + 100.0


# (slope, aspect, shade) -- references.md §6 table (Horn 1981; CALC)
TABLE = [
    (0.0, 0.0, 0.707107),     # flat: cos 45
    (30.0, 315.0, 0.965926),  # faces the sun: cos 15
    (45.0, 270.0, 0.853553),  # faces W: 0.5 + 0.5 cos 45
    (20.0, 180.0, 0.493453),  # faces S (a plane rising to the north)
    (45.0, 135.0, 0.0),       # faces away: terminator
]


@pytest.mark.parametrize("slope, aspect, expected", TABLE)
def test_planes_match_reference_table(slope, aspect, expected):
    shade = hillshade(plane(slope, aspect), DX, DY)
    inner = shade[1:-1, 1:-1]   # edges are replicated, so only the interior is planar
    assert shade.dtype == np.float32
    np.testing.assert_allclose(inner, expected, atol=1e-6)
    np.testing.assert_allclose(inner, closed_form(slope, aspect), atol=1e-6)


@pytest.mark.parametrize("slope", [5.0, 33.0, 60.0])
@pytest.mark.parametrize("aspect", [0.0, 45.0, 100.0, 200.0, 290.0])
@pytest.mark.parametrize("azimuth, altitude", [(315.0, 45.0), (90.0, 30.0), (200.0, 70.0)])
def test_planes_match_closed_form(slope, aspect, azimuth, altitude):
    shade = hillshade(plane(slope, aspect), DX, DY, azimuth, altitude)
    np.testing.assert_allclose(shade[1:-1, 1:-1], closed_form(slope, aspect, azimuth, altitude),
                               atol=1e-6)


def test_plane_rising_north_has_positive_dz_dy_and_faces_south():
    # z grows toward row 0 (north): dz/dy (north) must be positive and the slope face south
    dem = np.array([[3.0] * 5, [2.0] * 5, [1.0] * 5, [0.0] * 5])
    p, q = horn_gradient(dem, 1.0, 1.0)
    np.testing.assert_allclose(p, 0.0, atol=1e-7)
    np.testing.assert_allclose(q[1:-1], 1.0, atol=1e-6)
    south = hillshade(plane(20.0, 180.0), DX, DY)
    north = hillshade(plane(20.0, 0.0), DX, DY)
    np.testing.assert_allclose(south[1:-1, 1:-1], 0.493453, atol=1e-6)  # references.md §6
    np.testing.assert_allclose(north[1:-1, 1:-1], closed_form(20.0, 0.0), atol=1e-6)
    assert north[3, 4] > south[3, 4]   # a NW sun lights the north face more


def horn_reference(dem, dx, dy):
    """Straight float64 transcription of the references.md §6 formulas, edges by np.pad('edge')."""
    z = np.pad(np.asarray(dem, np.float64), 1, mode="edge")
    a, b, c = z[:-2, :-2], z[:-2, 1:-1], z[:-2, 2:]
    d, f = z[1:-1, :-2], z[1:-1, 2:]
    g, h, i = z[2:, :-2], z[2:, 1:-1], z[2:, 2:]
    dx = np.asarray(dx, np.float64).reshape(-1, 1) if np.ndim(dx) else dx
    return ((c + 2 * f + i) - (a + 2 * d + g)) / (8 * dx), ((a + 2 * b + c) - (g + 2 * h + i)) / (8 * dy)


def test_gradient_matches_padded_reference_including_edges():
    rng = np.random.default_rng(1)
    dem = rng.normal(500, 40, (23, 17))
    p, q = horn_gradient(dem, 25.0, 30.0)
    rp, rq = horn_reference(dem, 25.0, 30.0)
    assert p.shape == dem.shape and p.dtype == np.float32
    np.testing.assert_allclose(p, rp, atol=1e-5)
    np.testing.assert_allclose(q, rq, atol=1e-5)


def test_exaggeration_scales_tan_slope():
    t = 0.3
    base = plane(math.degrees(math.atan(t)), 250.0)
    steeper = plane(math.degrees(math.atan(2 * t)), 250.0)
    np.testing.assert_allclose(hillshade(base, DX, DY, exaggeration=2.0),
                               hillshade(steeper, DX, DY), atol=1e-6)


def test_dx_per_row():
    rng = np.random.default_rng(2)
    dem = rng.normal(200, 30, (12, 10))
    dx = np.linspace(20.0, 31.0, 12).reshape(-1, 1)   # e.g. cos(latitude) shrinking cells
    p, q = horn_gradient(dem, dx, DY)
    rp, rq = horn_reference(dem, dx, DY)
    np.testing.assert_allclose(p, rp, atol=1e-5)
    np.testing.assert_allclose(q, rq, atol=1e-5)
    shade = hillshade(dem, dx, DY)
    for r in range(12):   # each row only uses its own dx
        np.testing.assert_array_equal(shade[r], hillshade(dem, float(dx[r, 0]), DY)[r])
    # a surface of constant east gradient 0.2 in metres whatever the row's cell size:
    # Horn's p is exact when dx changes linearly with the row
    cols = np.arange(10.0)
    east = 0.2 * cols[None, :] * dx
    np.testing.assert_allclose(horn_gradient(east, dx, DY)[0][1:-1, 1:-1], 0.2, atol=1e-6)
    with pytest.raises(ValueError):
        horn_gradient(dem, np.ones((5, 1)), DY)


def test_nan_cells_stay_nan_without_eating_neighbours():
    dem = plane(30.0, 315.0, shape=(9, 11))
    dem[4, 5] = np.nan
    dem[0, 0] = np.nan          # at a corner, where edges are replicated too
    dem[6:8, 8] = np.nan        # a two-cell hole
    shade = hillshade(dem, DX, DY)
    nan = np.isnan(dem)
    assert np.array_equal(np.isnan(shade), nan)
    # the reflection through the centre keeps planes exact beside holes
    inner = np.zeros_like(nan)
    inner[1:-1, 1:-1] = True
    np.testing.assert_allclose(shade[inner & ~nan], 0.965926, atol=1e-6)  # references.md §6
    p, q = horn_gradient(dem, DX, DY)
    assert np.array_equal(np.isnan(p), nan) and np.array_equal(np.isnan(q), nan)


def test_all_nan():
    assert np.isnan(hillshade(np.full((4, 4), np.nan), DX, DY)).all()


def test_strips_equal_whole_array(monkeypatch):
    rng = np.random.default_rng(3)
    dem = rng.normal(300, 50, (37, 29)).astype(np.float32)
    dem[10:13, 4:7] = np.nan
    dem[36, 0] = np.nan
    dx = np.linspace(25, 30, 37)
    monkeypatch.setattr(hs, "STRIP_ROWS", 1000)
    whole = [hillshade(dem, dx, DY), multidirectional(dem, dx, DY, directions=5),
             *horn_gradient(dem, dx, DY)]
    for rows in (1, 4, 11):
        monkeypatch.setattr(hs, "STRIP_ROWS", rows)
        strips = [hillshade(dem, dx, DY), multidirectional(dem, dx, DY, directions=5),
                  *horn_gradient(dem, dx, DY)]
        for w, s in zip(whole, strips):
            np.testing.assert_array_equal(w, s)


def test_centres_only_equal_the_side_by_side_array_bit_for_bit():
    """centre_gradient and shade_gradient (a draft's relief shades only the centres of its 3 x 3
    neighbourhoods laid side by side) give exactly horn_gradient's and multidirectional's values
    at the centres [1::3, 1::3] of the side-by-side array -- which the tests above hold to Horn
    (1981) -- NaN neighbours (the reflection), NaN centres, per-row dx and several suns
    included; a plane keeps its closed-form shade (references.md section 6)."""
    rng = np.random.default_rng(11)
    for trial in range(24):
        h, w = (int(v) for v in rng.integers(1, 40, 2))
        dem = (rng.normal(0, 60, (3 * h, 3 * w)) + 300).astype(np.float32)
        if trial % 2:
            dem[rng.random(dem.shape) < 0.1] = np.nan
        dx = rng.uniform(10, 40, (3 * h, 1)) if trial % 3 == 2 else float(rng.uniform(10, 40))
        dx_centres = dx[1::3] if np.ndim(dx) else dx
        p, q = centre_gradient(dem.reshape(h, 3, w, 3), dx_centres, DY)
        p_all, q_all = horn_gradient(dem, dx, DY)
        np.testing.assert_array_equal(p, p_all[1::3, 1::3])
        np.testing.assert_array_equal(q, q_all[1::3, 1::3])
        for n in (1, 3):
            k = float(rng.uniform(0.5, 20))
            np.testing.assert_array_equal(
                shade_gradient(p, q, 300.0, 40.0, k, n),
                multidirectional(dem, dx, DY, 300.0, 40.0, k, n)[1::3, 1::3])
    flat = plane(30.0, 315.0, shape=(6, 9)).astype(np.float32)
    p, q = centre_gradient(flat.reshape(2, 3, 3, 3), DX, DY)
    np.testing.assert_allclose(shade_gradient(p, q), 0.965926, atol=1e-6)  # references.md §6
    with pytest.raises(ValueError):
        centre_gradient(flat, DX, DY)


def test_percentile_is_numpys_bit_for_bit():
    """The stretch's 95th percentile (hs._percentile, which spares numpy's masked-array
    import) equals numpy.percentile's default method (Hyndman and Fan 1996, definition 7)
    exactly, at any size, rank and ties."""
    rng = np.random.default_rng(5)
    for trial in range(400):
        n = int(rng.integers(1, 2000))
        values = np.abs(rng.normal(0, rng.uniform(0.01, 5), n)).astype(
            np.float32 if trial % 2 else np.float64)
        if trial % 5 == 0:
            values = np.round(values, 1)
        for q in (95.0, 0.0, 100.0, 50.0, float(rng.uniform(0, 100))):
            assert hs._percentile(values, q) == float(np.percentile(values, q)), (n, q)
    with pytest.raises(ValueError):
        hs._percentile(np.array([], np.float32), 95.0)


def test_multidirectional():
    dem = plane(45.0, 135.0)
    np.testing.assert_array_equal(multidirectional(dem, DX, DY, directions=1),
                                  hillshade(dem, DX, DY))
    # Four suns at 315, 45, 135, 225 with weights 1, 0.5, 0, 0.5 (our documented choice): a face
    # at the main sun's terminator is lit by the side suns:
    # 0.5*0 + 0.25*(0.5 + 0.5*cos 90) + 0 + 0.25*0.5 = 0.25 (CALC from the closed form)
    np.testing.assert_allclose(multidirectional(dem, DX, DY, directions=4)[1:-1, 1:-1], 0.25,
                               atol=1e-6)
    flat = np.full((5, 5), 10.0)
    for n in (1, 2, 3, 6):
        np.testing.assert_allclose(multidirectional(flat, DX, DY, altitude=30.0, directions=n),
                                   0.5, atol=1e-6)
    rng = np.random.default_rng(4)
    rough = rng.normal(0, 100, (20, 20))
    shade = multidirectional(rough, DX, DY, directions=7)
    assert shade.dtype == np.float32 and shade.min() >= 0.0 and shade.max() <= 1.0
    with pytest.raises(ValueError):
        multidirectional(rough, DX, DY, directions=0)


def test_flat_normalised():
    shade = hillshade(plane(0.0, 0.0), DX, DY, altitude=35.0)
    np.testing.assert_allclose(flat_normalised(shade, 35.0), 1.0, atol=1e-6)
    s = np.array([0.0, 0.25, math.sin(math.radians(35.0)), 0.9, np.nan], np.float32)
    out = flat_normalised(s, 35.0)
    assert out.dtype == np.float32
    np.testing.assert_allclose(out[:4], [0.0, 0.25 / math.sin(math.radians(35.0)), 1.0, 1.0],
                               atol=1e-6)
    assert np.isnan(out[4])


# --- normalised shading (shade.stretch = "auto") ---------------------------------------------

def _hills(amplitude: float, n: int = 96):
    y, x = np.mgrid[0:n, 0:n].astype(np.float32)
    return (100 + amplitude * np.sin(x / 8.0) * np.cos(y / 11.0)).astype(np.float32)


def test_stretch_lifts_gentle_terrain_to_the_target_at_any_cell_size():
    for cell in (10.0, 30.0, 90.0):
        dem = _hills(8.0)
        k = stretch_factor([(dem, cell, cell)])
        assert k > 1
        assert shade_spread([(dem, cell, cell)], exaggeration=k) == pytest.approx(
            STRETCH_TARGET, abs=0.01)
    # coarser cells: gentler slopes, a larger factor
    assert stretch_factor([(_hills(8.0), 90.0, 90.0)]) > stretch_factor([(_hills(8.0), 10.0, 10.0)])


def test_stretch_leaves_rugged_terrain_and_flat_ground_alone():
    assert stretch_factor([(_hills(300.0), 30.0, 30.0)]) == 1.0
    assert stretch_factor([(np.full((40, 40), 5.0, np.float32), 30.0, 30.0)]) == 1.0
    assert stretch_factor([(np.full((8, 8), np.nan, np.float32), 30.0, 30.0)]) == 1.0


def test_stretch_keeps_horn_shading_of_planes():
    # the factor only scales elevations: a plane facing the sun, stretched, is the same plane
    # made steeper, so Horn's closed form (references.md section 6) still holds at tan S * k
    dem = plane(20.0, 135.0)
    k = 1.7
    got = hillshade(dem, 30.0, 30.0, exaggeration=k)[2, 2]
    slope = math.degrees(math.atan(k * math.tan(math.radians(20.0))))
    assert got == pytest.approx(closed_form(slope, 135.0, 315.0, 45.0), abs=1e-5)
