"""Scale bar and north arrow against pyproj's geodesy; the print-scale canvas; grid lines."""
from __future__ import annotations

import math
from types import SimpleNamespace

import numpy as np
import pytest
from pyproj import Geod, Proj, Transformer

from compose.canvas import Canvas
from compose.errors import StyleError
from compose.page.geometry import grid_lines, nice_length, north_angle, page_canvas, scale_bar


def _utm_canvas(lon: float, lat: float, half: float = 20000.0, pixel: float = 50.0) -> Canvas:
    x, y = Transformer.from_crs("EPSG:4326", "EPSG:32630", always_xy=True).transform(lon, lat)
    return Canvas.from_extent("EPSG:32630", (x - half, y - half, x + half, y + half), pixel)


def _bar_ground_metres(canvas: Canvas, frame_mm: float, bar_mm: float) -> float:
    """Geodesic length (WGS 84, pyproj Geod) of ``bar_mm`` of paper laid east-west through the
    map centre, computed here independently of compose."""
    west, south, east, north = canvas.bounds
    units = bar_mm * (east - west) / frame_mm
    cx, cy = (west + east) / 2, (south + north) / 2
    to_ll = Transformer.from_crs(canvas.crs, "EPSG:4326", always_xy=True)
    lon, lat = to_ll.transform([cx - units / 2, cx + units / 2], [cy, cy])
    return Geod(ellps="WGS84").inv(lon[0], lat[0], lon[1], lat[1])[2]


@pytest.mark.parametrize("lon,lat", [(1.5, 50.0), (-3.0, 45.0), (0.0, 10.0)])
def test_scale_bar_length_is_the_geodesic_distance_within_1_percent(lon, lat):
    canvas = _utm_canvas(lon, lat)
    frame_mm = 160.0
    bar = scale_bar(canvas, frame_mm, max_mm=50.0)
    assert 0 < bar.length_mm <= 50.0
    assert bar.metres == pytest.approx(_bar_ground_metres(canvas, frame_mm, bar.length_mm), rel=0.01)
    # a round length: 1, 2 or 5 times a power of ten (common practice, no source)
    mantissa = bar.length / 10 ** math.floor(math.log10(bar.length))
    assert round(mantissa, 9) in (1.0, 2.0, 5.0)


def test_imperial_scale_bar_in_miles():
    canvas = _utm_canvas(-3.0, 45.0)
    bar = scale_bar(canvas, 160.0, 50.0, units="imperial")
    assert bar.unit == "mi"
    assert bar.metres == pytest.approx(bar.length * 1609.344)      # 1959 international mile
    assert bar.metres == pytest.approx(_bar_ground_metres(canvas, 160.0, bar.length_mm), rel=0.01)


def test_geographic_canvas_says_where_the_scale_holds():
    canvas = Canvas.from_extent("EPSG:4326", (10.0, 40.0, 14.0, 44.0), 0.01)
    bar = scale_bar(canvas, 150.0, 50.0)
    assert "42.0\u00b0N" in bar.note
    assert bar.metres == pytest.approx(_bar_ground_metres(canvas, 150.0, bar.length_mm), rel=0.01)


@pytest.mark.parametrize("lon,lat", [(1.5, 50.0), (-7.5, 40.0), (-3.0, 60.0)])
def test_north_arrow_follows_grid_convergence(lon, lat):
    """On UTM 30N away from its central meridian (3 W) true north is turned from grid north by
    the meridian convergence pyproj reports (positive east of the central meridian, where true
    north lies counter-clockwise of grid up)."""
    canvas = _utm_canvas(lon, lat)
    expected = -Proj("EPSG:32630").get_factors(lon, lat).meridian_convergence
    assert north_angle(canvas) == pytest.approx(expected, abs=0.5)
    if lon != -3.0:
        assert abs(expected) > 1.0     # the test is away from the central meridian


def test_nice_length():
    assert nice_length(7.3) == 5
    assert nice_length(19.9) == 10
    assert nice_length(2000) == 2000
    assert nice_length(0.34) == pytest.approx(0.2)


def _map(**kw):
    base = dict(crs="EPSG:32630", extent=(500000.0, 5000000.0, 520000.0, 5010000.0), pixel=20.0,
                dpi=200.0)
    base.update(kw)
    return SimpleNamespace(**base)


def test_print_scale_sets_pixel_and_frame():
    canvas, frame = page_canvas(_map(), None, (250.0, 180.0), 100000.0)
    # 20 km at 1:100 000 is 200 mm; a pixel at 200 dpi is 0.127 mm of paper = 12.7 m of ground
    assert frame[0] == pytest.approx(200.0, abs=0.2)
    assert canvas.pixel == pytest.approx(12.7)
    assert canvas.dpi == 200.0
    assert canvas.width * canvas.pixel == pytest.approx(20000.0, rel=1e-3)


def test_without_scale_the_frame_fits_and_the_dpi_follows():
    canvas, frame = page_canvas(_map(), None, (150.0, 150.0), None)
    assert frame[0] == pytest.approx(150.0, abs=0.2) and frame[1] == pytest.approx(75.0, abs=0.2)
    assert canvas.pixel == 20.0
    # points mean the same on paper: canvas pixels per inch of frame
    assert canvas.dpi == pytest.approx(canvas.width / (frame[0] / 25.4))


def test_scale_too_large_for_the_page_is_a_style_error():
    # thousands in thin-space groups (U+2009), as the page's scale line writes them
    with pytest.raises(StyleError, match="page: the map at 1:10\u2009000"):
        page_canvas(_map(), None, (250.0, 180.0), 10000.0)


def test_grid_lines_of_a_graticule_cross_the_canvas():
    canvas = _utm_canvas(-3.0, 45.0)
    lines = grid_lines(canvas, "EPSG:4326", 0.1)
    meridians = [v for axis, v, _ in lines if axis == "x"]
    parallels = [v for axis, v, _ in lines if axis == "y"]
    assert any(abs(v + 3.0) < 1e-9 for v in meridians)
    assert any(abs(v - 45.0) < 1e-9 for v in parallels)
    # the -3 meridian is the zone's central meridian: a vertical line through the centre column
    pts = next(p for axis, v, p in lines if axis == "x" and abs(v + 3.0) < 1e-9)
    assert pts[:, 0] == pytest.approx(canvas.width / 2, abs=0.5)


def test_central_meridian_reaches_the_top_and_bottom_edges():
    # In Transverse Mercator a line of constant northing is farthest north on the central
    # meridian (parallels bow poleward away from it: Snyder 1987, "Map Projections -- A Working
    # Manual", Professional Paper 1395, p. 48 figure); the meridian through the highest latitude of the top
    # edge must still cross that edge so its tick and label are drawn.
    canvas = _utm_canvas(-3.0, 45.0)
    pts = next(p for axis, v, p in grid_lines(canvas, "EPSG:4326", 0.1)
               if axis == "x" and abs(v + 3.0) < 1e-9)
    assert pts[:, 1].min() < 0.0 < canvas.height < pts[:, 1].max()


def _demo_canvas() -> Canvas:
    """The demo's map: 45 km of UTM zone 30N at 45 N, 1500 px, in a 155.6 mm frame."""
    return Canvas.from_extent("EPSG:32630", (480000.0, 4980000.0, 525000.0, 5025000.0), 30.0)


def test_imperial_bar_labels_every_mile():
    """The demo's map with a bar in miles (52 mm of room, about 1:290 000): 5 miles in parts
    of one mile, each labelled, as the metric bar labels each of its 2 km. The labels stopped at
    "0" and "5" (parts under 6 mm were never labelled, though "1" is 2 mm wide)."""
    bar = scale_bar(_demo_canvas(), 155.6, 52.0, units="imperial")
    assert (bar.unit, bar.length, bar.segments) == ("mi", 5.0, 5)
    assert [bar.label(i) for i in bar.marks] == ["0", "1", "2", "3", "4", "5"]
    metric = scale_bar(_demo_canvas(), 155.6, 52.0)
    assert [metric.label(i) for i in metric.marks] == ["0", "2", "4", "6", "8", "10"]


def _drawn_labels(bar) -> list:
    """The bar drawn on a page figure: its labels' extents (matplotlib's own text layout)."""
    from matplotlib.figure import Figure

    from compose.page.draw import _Page
    from compose.page.layout import Piece

    layout = SimpleNamespace(size=(120.0, 40.0), scalebar=bar, pieces=())
    page = SimpleNamespace(ink=(0.1, 0.1, 0.1), color=(1.0, 1.0, 1.0), scale=None)
    fig = Figure(figsize=(120 / 25.4, 40 / 25.4), dpi=300)
    p = _Page(fig, layout, page)
    p.scalebar(Piece("scalebar", (5.0, 15.0, bar.length_mm + 8.0, 11.0)))
    renderer = fig.canvas.get_renderer() if hasattr(fig.canvas, "get_renderer") else None
    if renderer is None:
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        renderer = FigureCanvasAgg(fig).get_renderer()
    texts = [t for t in p.ax.texts if t.get_text() not in (bar.unit,) and t.get_va() == "bottom"]
    return [(t.get_text(), t.get_window_extent(renderer)) for t in texts]


@pytest.mark.parametrize("units", ["metric", "imperial"])
def test_bar_labels_never_touch_and_divide_the_bar(units):
    """Over frames from 40 to 400 mm wide (scales of about 1:110 000 to 1:1 100 000) and rooms
    of 20 to 60 mm: the labels as matplotlib lays them out keep apart, there are at least three
    (0, a division, the end) at equal round steps, and the last one is the bar's length."""
    canvas = _demo_canvas()
    for frame in (40.0, 70.0, 110.0, 155.6, 230.0, 400.0):
        for room in (20.0, 35.0, 52.0, 60.0):
            bar = scale_bar(canvas, frame, room, units=units)
            labels = _drawn_labels(bar)
            assert len(labels) >= 3, (frame, room, [t for t, _ in labels])
            values = [float(t.replace("\u2212", "-")) for t, _ in labels]
            assert values[0] == 0 and values[-1] == pytest.approx(bar.length)
            steps = np.diff(values)
            assert np.allclose(steps, steps[0]), values
            for (_, a), (_, b) in zip(labels, labels[1:]):
                assert a.x1 < b.x0, (frame, room, values)        # apart, left to right
