"""The contours layer kind: isolines of a raster at an interval, drawn like lines.

Positions are checked against the analytic isolines of synthetic surfaces (a plane: a straight
line at x = (level - b) / a; a cone: a circle of radius = level), not against our own numbers.
"""
from __future__ import annotations

import numpy as np
import pytest
from affine import Affine

from compose.engine import ArraySink, prepare, render_array, run
from compose.layers.contours import contour_levels, isolines
from compose.style import load_style
from compose.style.kinds import LAYER_KINDS
from tests.sources._files import write_raster

CRS = "EPSG:32631"


def test_isolines_of_a_plane_are_straight_at_the_analytic_position():
    # z = 3 col + 10 at pixel centres: the level-40 isoline is the column x = (40 - 10) / 3 = 10
    rows, cols = np.mgrid[0:40, 0:60].astype(float)
    lines = isolines(3 * cols + 10, 40.0)
    pts = np.concatenate(lines)
    np.testing.assert_allclose(pts[:, 0], 10.0, atol=1e-9)
    assert pts[:, 1].min() == 0 and pts[:, 1].max() == 39


def test_isolines_of_a_cone_are_circles_of_the_level_radius():
    # z = distance from (50, 50): the isoline at level L is the circle of radius L. Linear
    # interpolation along cell edges cuts a chord of the curve: error < 1/(8 L) px here.
    rows, cols = np.mgrid[0:101, 0:101].astype(float)
    z = np.hypot(cols - 50, rows - 50)
    for level in (7.5, 20.0, 41.0):
        pts = np.concatenate(isolines(z, level))
        r = np.hypot(pts[:, 0] - 50, pts[:, 1] - 50)
        np.testing.assert_allclose(r, level, atol=1 / (8 * level) + 1e-6)


def test_no_isolines_through_nodata():
    z = np.tile(np.arange(20, dtype=float), (10, 1))
    z[:, 8:12] = np.nan
    pts = np.concatenate(isolines(z, 10.0)) if isolines(z, 10.0) else np.zeros((0, 2))
    assert pts.size == 0


def test_levels():
    assert contour_levels(95, 420, 100) == [(100, 1), (200, 2), (300, 3), (400, 4)]
    assert contour_levels(-5, 5, 10, base=5) == [(-5, -1), (5, 0)]
    assert contour_levels(float("nan"), 5, 10) == []
    with pytest.raises(ValueError, match="larger interval"):
        contour_levels(0, 1e9, 1)


def test_the_kind_is_one_registry_entry():
    kind = LAYER_KINDS["contours"]
    assert kind.raster and kind.legend == "line" and kind.measure == "ink"
    assert {"interval", "index", "index_width", "stroke", "width", "halo"} <= set(kind.keys)
    assert kind.required == ("interval",)


@pytest.fixture
def cone(tmp_path):
    """A cone DEM: height = distance from the centre in metres (30 m pixels), and its style."""
    n, px = 161, 30.0
    rows, cols = np.mgrid[0:n, 0:n].astype("float32")
    z = np.hypot(cols - 80, rows - 80) * px           # centre at pixel (80, 80)
    x0, y0 = 500000.0, 5000000.0
    write_raster(tmp_path / "cone.tif", z, crs=CRS, transform=Affine(px, 0, x0, 0, -px, y0))
    centre = (x0 + 80.5 * px, y0 - 80.5 * px)
    style = tmp_path / "c.toml"
    style.write_text(f'''
[map]
name = "cone"
crs = "{CRS}"
extent = [{x0}, {y0 - n * px}, {x0 + n * px}, {y0}]
pixel = {px}
dpi = 150
background = "#ffffff"

[[layer]]
name = "contours"
role = "overlay"
kind = "contours"
source = "cone.tif"
interval = 300
index = 5
stroke = "#c00000"
width = 0.5
index_width = 1.5
''')
    return style, centre, px


def test_rendered_contours_lie_on_the_analytic_circles(cone):
    style, (cx, cy), px = cone
    img, stats = render_array(load_style(style), measure=True)
    ink = img[..., 1] < 200                             # red strokes on white
    rows, cols = np.nonzero(ink)
    # canvas pixel centre -> metres from the cone's centre
    x0 = cx - 80.5 * px
    r = np.hypot((cols + 0.5) * px + x0 - cx, cy - (5000000.0 - (rows + 0.5) * px))
    # every inked pixel is within the stroke's reach of a multiple of 300 m
    off = np.abs(r - 300 * np.round(r / 300))
    assert off.max() <= 2.0 * px
    # each circle up to the edge is drawn: 300, 600, ... 2100 m
    assert all(((np.abs(r - lv) < px)).sum() > 2 * np.pi * lv / px * 0.5 for lv in range(300, 2101, 300))
    # the index line (1500 m, k = 5) is heavier than its neighbours
    near = {lv: (np.abs(r - lv) < 2 * px).sum() / lv for lv in (1200, 1500, 1800)}
    assert near[1500] > 1.5 * max(near[1200], near[1800])
    s = stats.layer("contours")
    assert "stroke" in s.parts and s.covered > 0


def test_windows_join_without_seams(cone):
    style, _, _ = cone
    prepared = prepare(load_style(style))
    try:
        images = []
        for size in (4096, 37):
            sink = ArraySink(prepared.canvas)
            run(prepared, [sink], measure=False, window=size)
            images.append(sink.image.astype(int))
    finally:
        prepared.close()
    diff = np.abs(images[0] - images[1])
    assert diff.mean() < 0.05 and diff.max() <= 64


def test_the_legend_shows_a_line_sample(cone):
    from compose.output.legend_layout import OverlaysBlock, legend_layout

    style, _, _ = cone
    prepared = prepare(load_style(style))
    try:
        layout = legend_layout(prepared.style, prepared.ramps, prepared.layers)
    finally:
        prepared.close()
    blocks = [b for b in layout.blocks if isinstance(b, OverlaysBlock)]
    assert [la.spec.name for b in blocks for la in b.layers] == ["contours"]


def test_the_checker_judges_contours_like_lines(cone):
    import compose

    style = cone[0]
    text = style.read_text().replace("[[layer]]", """[[layer]]
name = "relief"
role = "ground"
kind = "relief"
source = "cone.tif"

[[layer]]""", 1)
    style.write_text(text)
    report = compose.check(style)
    mine = {r.rule for r in report.rules if r.layer == "contours"}
    assert "overlay-contrast" in mine
