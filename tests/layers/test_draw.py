"""Vector drawing: exact pixel geometry, coverage, seamless windows.

Pixel positions are predicted with rasterio's own transform helpers (``rasterio.transform.rowcol``
and ``xy``), the external reference for where a CRS coordinate falls on the grid. Areas are
checked against shapely's polygon area converted to pixels.
"""
import math

import numpy as np
import pytest
import shapely
from affine import Affine
from rasterio.transform import rowcol
from rasterio.transform import xy as pixel_xy

from compose.canvas import Canvas
from compose.errors import StyleError
from compose.layers.draw import draw_areas, draw_lines, draw_points, draw_texts, measure_text, to_pixels

# 10 m pixels, west edge 500000, north edge 4000000 (a UTM-like grid)
T = Affine(10.0, 0.0, 500000.0, 0.0, -10.0, 4000000.0)
W, H = 40, 30
TOL = 1.0 / 255.0   # one step of Agg's 8-bit coverage


def centre(row, col):
    """CRS coordinates of a pixel centre, from rasterio."""
    x, y = pixel_xy(T, row, col, offset="center")
    return float(x), float(y)


def test_to_pixels_matches_rasterio():
    pts = np.array([[500003.0, 3999999.0], [500155.5, 3999801.2]])
    rows, cols = rowcol(T, pts[:, 0], pts[:, 1])
    px = to_pixels(pts, T)
    np.testing.assert_array_equal(np.floor(px[:, 1]).astype(int), rows)
    np.testing.assert_array_equal(np.floor(px[:, 0]).astype(int), cols)


def test_to_pixels_is_affines_own_arithmetic():
    # the affine library's inverse applied point by point (a x + b y + c), bit for bit, for a
    # rotated and sheared grid too
    rng = np.random.default_rng(7)
    pts = rng.uniform((499000.0, 3998000.0), (501000.0, 4001000.0), (200, 2))
    for t in (T, T @ Affine.rotation(17.0) @ Affine.shear(3.0, -2.0)):
        px = to_pixels(pts, t)
        ref = np.array([~t @ (x, y) for x, y in pts])
        assert np.array_equal(px, ref)


def test_horizontal_line_covers_predicted_row_and_columns():
    # through the centres of row 12, from the left edge of column 5 to the left edge of column 31
    _, y = centre(12, 0)
    x0, x1 = T.c + 5 * T.a, T.c + 31 * T.a
    (row,), (c0,) = rowcol(T, [x0], [y])
    _, (c1,) = rowcol(T, [x1 - 1e-6], [y])
    cov = draw_lines([shapely.LineString([(x0, y), (x1, y)])], T, W, H, width_px=1.0, cap="butt")
    assert cov.dtype == np.float32 and cov.shape == (H, W)
    expected = np.zeros((H, W), np.float32)
    expected[row, c0:c1 + 1] = 1.0
    np.testing.assert_allclose(cov, expected, atol=TOL)
    assert (row, c0, c1) == (12, 5, 30)
    # the same line on a row boundary splits evenly over the two rows it straddles
    y_edge = T.f + 12 * T.e
    cov = draw_lines([shapely.LineString([(x0, y_edge), (x1, y_edge)])], T, W, H, width_px=1.0,
                     cap="butt")
    np.testing.assert_allclose(cov[11:13, 10], 0.5, atol=TOL)
    assert cov.sum() == pytest.approx(26.0, abs=52 * TOL)


def test_vertical_line_and_round_cap_extend():
    x, _ = centre(0, 7)
    y0, y1 = T.f + 4 * T.e, T.f + 20 * T.e
    butt = draw_lines([shapely.LineString([(x, y0), (x, y1)])], T, W, H, width_px=1, cap="butt")
    np.testing.assert_allclose(butt[4:20, 7], 1.0, atol=TOL)
    assert butt.sum() == pytest.approx(16.0, abs=0.05)
    square = draw_lines([shapely.LineString([(x, y0), (x, y1)])], T, W, H, width_px=1,
                        cap="square")
    assert square.sum() == pytest.approx(17.0, abs=0.05)   # half a width more at each end


def test_filled_square_covers_predicted_rectangle():
    # pixel-aligned: columns 6..17, rows 3..10
    west, north = T @ (6, 3)
    east, south = T @ (18, 11)
    fill, stroke = draw_areas([shapely.box(west, south, east, north)], T, W, H, fill=True)
    assert stroke is None
    r0, c0 = rowcol(T, [west + 1], [north - 1])
    r1, c1 = rowcol(T, [east - 1], [south + 1])
    expected = np.zeros((H, W), np.float32)
    expected[r0[0]:r1[0] + 1, c0[0]:c1[0] + 1] = 1
    np.testing.assert_allclose(fill, expected, atol=TOL)
    # not aligned: the coverage sums to the area in pixels (shapely), within 1 %
    sq = shapely.box(500033.0, 3999712.5, 500128.0, 3999957.5)
    fill, _ = draw_areas([sq], T, W, H, fill=True)
    assert fill.sum() == pytest.approx(sq.area / (T.a * -T.e), rel=0.01)


def test_holes_and_overlaps_merge():
    outer = shapely.box(500050, 3999750, 500250, 3999950)          # 20 x 20 px
    hole = shapely.box(500100, 3999800, 500200, 3999900)           # 10 x 10 px
    # same winding for the hole as the exterior: orientation must be fixed before filling
    donut = shapely.Polygon(outer.exterior.coords, [hole.exterior.coords])
    fill, _ = draw_areas([donut], T, W, H)
    assert fill.sum() == pytest.approx(300.0, abs=0.5)
    a = shapely.box(500000, 3999800, 500100, 3999900)
    b = shapely.box(500050, 3999800, 500150, 3999900)
    fill, _ = draw_areas(shapely.MultiPolygon([a, b]), T, W, H)
    assert fill.max() <= 1.0 and fill.sum() == pytest.approx(150.0, abs=0.5)   # the union


def test_outline_of_area_and_empty_inputs():
    sq = shapely.box(500050, 3999750, 500250, 3999950)   # 20 x 20 px outline
    fill, outline = draw_areas([sq], T, W, H, fill=False, stroke_width_px=1.0, join="miter")
    assert fill is None
    assert outline.sum() == pytest.approx(80.0, abs=0.5)   # perimeter x width
    assert draw_lines([], T, W, H, width_px=2).sum() == 0
    assert draw_lines([shapely.LineString(), None], T, W, H, width_px=2).sum() == 0
    f, s = draw_areas([], T, W, H, stroke_width_px=1)
    assert f.sum() == 0 and s.sum() == 0


def test_thin_line_draws_fainter():
    _, y = centre(10, 0)
    line = shapely.LineString([(T.c + 2 * T.a, y), (T.c + 30 * T.a, y)])
    cov = draw_lines([line], T, W, H, width_px=0.4, cap="butt")
    np.testing.assert_allclose(cov[10, 5:25], 0.4, atol=TOL)
    assert cov.sum(axis=0)[5:25] == pytest.approx(np.full(20, 0.4), abs=TOL)


def test_halo_is_wider_than_stroke():
    line = shapely.LineString([centre(5, 3), centre(20, 35)])
    stroke = draw_lines([line], T, W, H, width_px=1.0)
    halo = draw_lines([line], T, W, H, width_px=3.0)
    assert halo.sum() > 2.5 * stroke.sum()
    assert np.all(halo >= stroke - TOL)
    assert np.count_nonzero(halo > 0.5) > np.count_nonzero(stroke > 0.5)


def test_dash_reduces_coverage_by_duty_cycle():
    _, y = centre(15, 0)
    line = shapely.LineString([(T.c + 2 * T.a, y), (T.c + 38 * T.a, y)])   # 36 px
    solid = draw_lines([line], T, W, H, width_px=2.0, cap="butt")
    dashed = draw_lines([line], T, W, H, width_px=2.0, cap="butt", dash_px=[6.0, 3.0])
    assert dashed.sum() / solid.sum() == pytest.approx(6.0 / 9.0, rel=0.01)
    # the pattern starts "on" at the first vertex
    np.testing.assert_allclose(dashed[15, 2:8], 1.0, atol=TOL)
    np.testing.assert_allclose(dashed[15, 8:11], 0.0, atol=TOL)
    # round a corner: an L of 20 + 16 px, the pattern continuing through the vertex
    x0, y0 = T.c + 5 * T.a, T.f + 5.5 * T.e
    ell = shapely.LineString([(x0, y0), (x0 + 20 * T.a, y0), (x0 + 20 * T.a, y0 + 16 * T.e)])
    solid = draw_lines([ell], T, W, H, width_px=1.0, cap="butt", join="miter")
    dashed = draw_lines([ell], T, W, H, width_px=1.0, cap="butt", join="miter",
                        dash_px=[6.0, 3.0])
    assert dashed.sum() / solid.sum() == pytest.approx(24.0 / 36.0, rel=0.02)
    # a dashed ring: 80 px perimeter, pattern 4 on 4 off -> half
    sq = shapely.box(500050, 3999750, 500250, 3999950)
    _, ring = draw_areas([sq], T, W, H, fill=False, stroke_width_px=1.0, dash_px=[4.0, 4.0],
                         cap="butt", join="miter")
    assert ring.sum() == pytest.approx(40.0, abs=0.5)
    with pytest.raises(StyleError):
        draw_lines([line], T, W, H, width_px=1, dash_px=[3.0])
    with pytest.raises(StyleError, match="is not a line cap"):
        draw_lines([line], T, W, H, width_px=1, cap="pointy")


def stitch(draw, canvas, size, margin):
    """Draw each window of ``canvas`` with its padded transform and put the cores together."""
    out = np.zeros((canvas.height, canvas.width), np.float32)
    for win in canvas.windows(size=size, margin=margin):
        _, _, h, w = win.padded
        out[win.core] = draw(canvas.window_transform(win), w, h)[win.inner]
    return out


def clip_to(geom, t, w, h):
    """Clip to the padded window in CRS units, as the vector source does."""
    west, north = t @ (0, 0)
    east, south = t @ (w, h)
    return shapely.clip_by_rect(geom, west, south, east, north)


LINE = shapely.LineString([(500013.0, 3999993.0), (500410.0, 3999803.0), (500660.0, 3999560.0)])
AREA = shapely.Polygon([(500105, 3999905), (500533, 3999888), (500380, 3999622)],
                       [[(500300, 3999850), (500400, 3999850), (500390, 3999780)]])


def lines_clipped(t, w, h):
    return draw_lines([clip_to(LINE, t, w, h)], t, w, h, width_px=3.0)


def lines_dashed(t, w, h):
    # dashes restart at each part's first vertex, so dashed lines go in unclipped
    return draw_lines([LINE], t, w, h, width_px=2.0, dash_px=[5.0, 2.5], cap="butt")


def areas_clipped(t, w, h):
    fill, outline = draw_areas([clip_to(AREA, t, w, h)], t, w, h, stroke_width_px=2.0)
    return fill * 0.5 + outline * 0.5


def areas_dashed(t, w, h):
    _, outline = draw_areas([AREA], t, w, h, fill=False, stroke_width_px=1.5, dash_px=[7, 3])
    return outline


def areas_unclipped(t, w, h):
    fill, outline = draw_areas([AREA], t, w, h, stroke_width_px=2.0)
    return fill * 0.5 + outline * 0.5


@pytest.mark.parametrize("draw", [lines_clipped, lines_dashed, areas_clipped, areas_unclipped,
                                  areas_dashed])
@pytest.mark.parametrize("size", [16, 25, 33])
def test_windows_stitch_without_seams(draw, size):
    # margin 4 px: more than half the widest stroke (1.5 px) plus Agg's 1 px stroke clip
    canvas = Canvas("EPSG:32631", T, 70, 50)
    whole = draw(canvas.transform, canvas.width, canvas.height)
    assert whole.sum() > 50
    np.testing.assert_allclose(stitch(draw, canvas, size, margin=4), whole, atol=TOL)


def test_points():
    pts = shapely.MultiPoint([centre(8, 8), centre(20, 28)])
    fill = draw_points([pts], T, W, H, size_px=6.0)
    assert fill.sum() == pytest.approx(2 * math.pi * 9.0, rel=0.01)
    assert fill[8, 8] == pytest.approx(1.0) and fill[20, 28] == pytest.approx(1.0)
    # a 5 px square on the centre of pixel (8, 8) spans columns and rows 6..10 exactly
    fill = draw_points(np.array([centre(8, 8)]), T, W, H, size_px=5.0, shape="square")
    expected = np.zeros((H, W), np.float32)
    expected[6:11, 6:11] = 1.0
    np.testing.assert_allclose(fill, expected, atol=TOL)
    # far-away points are skipped, not an error
    assert draw_points(np.array([[0.0, 0.0]]), T, W, H, size_px=4).sum() == 0
    with pytest.raises(StyleError, match="is not a point shape"):
        draw_points(pts, T, W, H, size_px=4, shape="star")


def test_texts_inside_their_box_and_halo_wider():
    size = 14.0
    x, y = centre(15, 20)
    text, halo = draw_texts([(x, y, "Halo", "center")], T, W * 2, H, size_px=size, halo_px=2.0)
    shape = measure_text("Halo", size)
    rows, cols = np.nonzero(text > 0)
    # the box is centred on the point (col 20.5, row 15.5)
    assert cols.min() >= 20.5 - shape.width / 2 - 1 and cols.max() < 20.5 + shape.width / 2 + 1
    assert rows.min() >= 15.5 - shape.height / 2 - 1
    assert rows.max() < 15.5 + shape.height / 2 + 1
    assert halo.sum() > text.sum() and np.all(halo >= text - TOL)
    assert np.count_nonzero(halo) > np.count_nonzero(text)
    t2, h2 = draw_texts([(x, y, "Halo")], T, W * 2, H, size_px=size)
    np.testing.assert_array_equal(t2, text)
    assert h2 is None
    with pytest.raises(StyleError, match="not found"):
        measure_text("x", 10.0, font="No Such Font Family 123")


def test_eight_bit_coverage_is_the_float_coverage_times_255():
    # Reference: the float32 coverage is Agg's 8-bit coverage k / 255 (this module's contract);
    # the 8-bit switch (the drawing helper process's) hands back exactly those k, and uint8
    # zeros where nothing is drawn.
    from compose.layers import draw

    line = shapely.LineString([centre(3, 2), centre(25, 37), centre(5, 30)])
    square = shapely.Polygon([centre(r, c) for r, c in ((4, 4), (4, 20), (20, 20), (20, 4))])
    far = shapely.LineString([(0.0, 0.0), (1.0, 1.0)])
    calls = [
        lambda: draw_lines([line], T, W, H, width_px=1.7),
        lambda: draw_lines([line], T, W, H, width_px=2.0, dash_px=[4.0, 2.5]),
        lambda: draw_lines([far], T, W, H, width_px=1.0),
        lambda: draw_areas([square], T, W, H, fill=True, stroke_width_px=1.3),
        lambda: draw_points(np.array([centre(8, 8)]), T, W, H, size_px=6.5),
    ]

    def flat(result):
        return [a for a in (result if isinstance(result, tuple) else (result,)) if a is not None]

    floats = [flat(c()) for c in calls]
    draw.eight_bit_coverage(True)
    try:
        bytes_ = [flat(c()) for c in calls]
    finally:
        draw.eight_bit_coverage(False)
    for fs, bs in zip(floats, bytes_, strict=True):
        for f, b in zip(fs, bs, strict=True):
            assert f.dtype == np.float32 and b.dtype == np.uint8 and b.flags.c_contiguous
            np.testing.assert_array_equal(np.divide(b, np.float32(255), dtype=np.float32), f)
    assert bytes_[0][0].any() and not bytes_[2][0].any()


def test_a_kept_renderer_draws_what_a_new_one_draws():
    # Renderers are kept per thread and size (compose.layers.draw._renderer): one cleared after
    # other drawing gives the bytes a new renderer gives, for strokes (two widths on one
    # renderer) and for fills with outlines.
    from compose.layers import draw as drawing
    from compose.layers.agg import Path

    rng = np.random.default_rng(15)
    walk = np.cumsum(rng.normal(0.0, 6.0, (60, 2)), axis=0) + (35.0, 25.0)
    path = Path(walk, [Path.MOVETO] + [Path.LINETO] * 59)
    other = Path(walk[::-1] * 0.7 + 5.0, [Path.MOVETO] + [Path.LINETO] * 59)
    box = shapely.Polygon([(3, 3), (60, 8), (50, 45), (6, 40)]).buffer(-1.5)
    transform = Affine(1.0, 0, 0, 0, -1.0, 50)
    drawing._KEPT.__dict__.clear()          # this thread's kept renderers: none
    fresh = drawing.stroke_path(path, 70, 50, [1.5, 3.0])
    fresh_area = drawing.draw_areas([box], transform, 70, 50, fill=True, stroke_width_px=2.0)
    kept = drawing._KEPT.renderers[(70, 50)]
    drawing.stroke_path(other, 70, 50, [6.0])
    again = drawing.stroke_path(path, 70, 50, [1.5, 3.0])
    again_area = drawing.draw_areas([box], transform, 70, 50, fill=True, stroke_width_px=2.0)
    assert drawing._KEPT.renderers[(70, 50)] is kept            # the same renderer, reused
    drawing.stroke_path(path, 1025, 1024, [1.5])                 # too large to keep
    assert (1025, 1024) not in drawing._KEPT.renderers
    assert all(a.any() for a in fresh + list(fresh_area))
    for a, b in zip(fresh + list(fresh_area), again + list(again_area), strict=True):
        np.testing.assert_array_equal(a, b)
