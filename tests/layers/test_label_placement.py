"""Label placement (greedy by priority, no overlaps, inside the canvas) and per-window drawing.

Text extents are checked against matplotlib's Agg renderer, the measure the placement is
specified to use. The placement rule itself is common practice, no source.
"""
import itertools

import numpy as np
import pytest
from affine import Affine
from matplotlib.backends.backend_agg import RendererAgg
from matplotlib.font_manager import FontProperties

from compose.canvas import Canvas
from compose.layers.draw import draw_text_shapes, measure_text
from compose.layers.label_placement import LabelItem, draw_labels, place_labels

T = Affine(10.0, 0.0, 500000.0, 0.0, -10.0, 4000000.0)
W, H = 200, 100
SIZE, HALO, OFFSET = 12.0, 2.0, 3.0
TOL = 1.0 / 255.0


def at(col, row):
    """CRS coordinates of canvas pixel position (col, row)."""
    return tuple(T @ (col, row))


def place(items, width=W, height=H, **kw):
    args = dict(size_px=SIZE, font="DejaVu Sans", weight="normal", halo_px=HALO,
                offset_px=OFFSET)
    args.update(kw)
    return place_labels(items, T, width, height, **args)


def overlaps(a, b):
    return a[0] < b[2] and b[0] < a[2] and a[1] < b[3] and b[1] < a[3]


def test_box_is_the_agg_text_extent_plus_halo():
    renderer = RendererAgg(1, 1, 72)
    prop = FontProperties(family="DejaVu Sans", weight="normal", size=SIZE)
    w, h, d = renderer.get_text_width_height_descent("Portsmouth", prop, False)
    shape = measure_text("Portsmouth", SIZE)
    assert shape.width >= w and shape.height >= h and shape.descent >= d
    assert shape.width == pytest.approx(w, abs=1.5) and shape.height == pytest.approx(h, abs=1.5)
    p = place([(*at(50, 50), "Portsmouth", 1)])
    (lab,) = p.placed
    c0, r0, c1, r1 = lab.box
    assert c1 - c0 == pytest.approx(shape.width + HALO)
    assert r1 - r0 == pytest.approx(shape.height + HALO)


def test_first_choice_is_upper_right_at_the_offset():
    (lab,) = place([(*at(50.5, 60.5), "Ayr", 0)]).placed
    assert (lab.position, lab.anchor) == ("upper right", "lower left")
    assert (lab.col, lab.row) == pytest.approx((53.5, 57.5))
    assert lab.box[0] == pytest.approx(53.5 - HALO / 2)
    assert lab.box[3] == pytest.approx(57.5 + HALO / 2)


def test_priority_order_and_no_overlap():
    x, y = at(100, 50)
    items = [(x, y, "Low", 1), (x, y, "Highest", 5), (x, y, "Middle", 3)]
    p = place(items)
    assert [lab.text for lab in p.placed] == ["Highest", "Middle", "Low"]
    # with a 3 px offset "right" (box centred on the row) overlaps "upper right", so the second
    # label goes upper left and the third lower right
    assert [lab.position for lab in p.placed] == ["upper right", "upper left", "lower right"]
    for a, b in itertools.combinations(p.placed, 2):
        assert not overlaps(a.box, b.box)
    # many labels around one spot: every placed box stays clear of the others
    crowd = [(*at(100 + i % 3, 50 + i // 3), f"Place {i}", i % 4) for i in range(12)]
    p = place(crowd)
    assert p.placed and len(p.placed) + len(p.unplaced) == 12
    for a, b in itertools.combinations(p.placed, 2):
        assert not overlaps(a.box, b.box)
    prios = [lab.priority for lab in p.placed]
    assert prios == sorted(prios, reverse=True)


def test_higher_priority_wins_whatever_the_input_order():
    # two points so close that only one label fits on this small canvas
    a, b = (*at(10, 20), "Alpha", 2.0), (*at(12, 21), "Beta", 7.0)
    for items in ([a, b], [b, a]):
        p = place(items, width=60, height=24)
        assert [lab.text for lab in p.placed] == ["Beta"]
        assert [it.text for it in p.unplaced] == ["Alpha"]
        assert p.unplaced[0] == LabelItem(*a)


def test_labels_stay_on_the_canvas():
    p = place([(*at(250, 50), "Outside", 9), (*at(195, 50), "Edge", 1),
               (*at(5, 5), "Corner", 1)])
    by_text = {lab.text: lab for lab in p.placed}
    assert [it.text for it in p.unplaced] == ["Outside"]
    assert by_text["Edge"].position == "upper left"     # no room to the right
    assert by_text["Corner"].position == "lower right"  # no room above
    for lab in p.placed:
        c0, r0, c1, r1 = lab.box
        assert c0 >= 0 and r0 >= 0 and c1 <= W and r1 <= H
    p = place([(*at(5, 5), "A label far too long for this canvas", 1), (*at(5, 5), "", 3)])
    assert not p.placed and len(p.unplaced) == 2


def test_windows_agree_with_the_whole_canvas():
    canvas = Canvas("EPSG:32631", T, W, H)
    items = [(*at(20 + 37 * i % 170, 15 + 23 * i % 80), f"Town {i}", i) for i in range(14)]
    p = place(items)
    assert len(p.placed) >= 8
    text, halo = draw_labels(p, canvas.transform, W, H)
    assert halo is not None and halo.sum() > text.sum() > 0
    for size in (32, 50, 64):
        st_text = np.zeros((H, W), np.float32)
        st_halo = np.zeros((H, W), np.float32)
        for win in canvas.windows(size=size, margin=3):
            _, _, h, w = win.padded
            t, hl = draw_labels(p, canvas.window_transform(win), w, h)
            st_text[win.core] = t[win.inner]
            st_halo[win.core] = hl[win.inner]
        np.testing.assert_allclose(st_text, text, atol=TOL)
        np.testing.assert_allclose(st_halo, halo, atol=TOL)
    # all ink lies inside the placed boxes
    inside = np.zeros((H, W), bool)
    for lab in p.placed:
        c0, r0, c1, r1 = lab.box
        inside[int(np.floor(r0)):int(np.ceil(r1)), int(np.floor(c0)):int(np.ceil(c1))] = True
    assert not np.any(halo[~inside] > TOL)   # one 8-bit step of antialiasing slack


def test_no_halo_and_empty():
    p = place([(*at(50, 50), "Kirk", 1)], halo_px=0.0)
    text, halo = draw_labels(p, T, W, H)
    assert halo is None and text.sum() > 0
    text, halo = draw_text_shapes([], 10, 10, halo_px=1.0)
    assert text.sum() == 0 and halo.sum() == 0
    empty = place([])
    assert empty.placed == () and empty.unplaced == ()


# --- area labels: centred at the pole of inaccessibility --------------------------------------

def _u_shape():
    """A U in canvas pixels 0..400 (rows down): two 90 px arms joined by a 90 px base at the
    bottom; the centroid lies in the notch, outside the polygon."""
    import shapely
    px = [(20, 20), (110, 20), (110, 290), (290, 290), (290, 20), (380, 20), (380, 380),
          (20, 380)]
    return shapely.Polygon([T @ p for p in px])


def test_area_label_sits_inside_a_concave_polygon():
    import shapely

    from compose.layers.label_placement import area_anchor

    u = _u_shape()
    assert not u.contains(u.centroid)                   # the reason for the pole
    pole, part = area_anchor(u, tolerance=1.0)
    assert part is not None and u.contains(pole)
    # the pole is the inside point farthest from the edge: as far as the widest inner circle
    # (the bottom corners of the U: 90 px half-way in), checked against a brute-force grid
    grid = [shapely.Point(T @ (c, r)) for c in range(20, 381, 5) for r in range(20, 381, 5)]
    best = max(u.exterior.distance(p) for p in grid if u.contains(p))
    assert u.exterior.distance(pole) >= best - 10.0      # within one grid step (5 px = 50 m)
    p = place([LabelItem(pole.x, pole.y, "Lake name", 1.0, part)], width=400, height=400,
              offset_px=OFFSET)
    (lab,) = p.placed
    assert lab.position == "inside"
    c0, r0, c1, r1 = lab.box
    box = shapely.Polygon([T @ (c0, r0), T @ (c1, r0), T @ (c1, r1), T @ (c0, r1)])
    assert u.contains(box)
    # centred on the pole
    pc, pr = ~T @ (pole.x, pole.y)
    assert (c0 + c1) / 2 == pytest.approx(pc, abs=0.5)
    assert (r0 + r1) / 2 == pytest.approx(pr, abs=0.5)


def test_area_label_too_big_for_its_area_falls_back_beside_the_pole():
    import shapely

    from compose.layers.label_placement import area_anchor

    small = shapely.Polygon([T @ p for p in [(90, 40), (110, 40), (110, 60), (90, 60)]])
    pole, part = area_anchor(small, 0.5)
    p = place([LabelItem(pole.x, pole.y, "A long name", 1.0, part)], offset_px=OFFSET)
    assert p.placed and p.placed[0].position != "inside"
