"""Point labels keep off the lines of ``avoid`` (common cartographic practice, no source): the
first free position crossing no line, else the free position crossing the least length of them
(ties: the earlier position); without lines the placement is the greedy one as before."""
import dataclasses

import numpy as np
import pytest
import shapely
from affine import Affine

from compose.layers.draw import ANCHORS
from compose.layers.label_placement import POSITIONS, LinesToAvoid, place_labels
from compose.layers.label_text import measure_text

T = Affine(10.0, 0.0, 500000.0, 0.0, -10.0, 4000000.0)
W, H = 200, 100
SIZE, HALO, OFFSET = 12.0, 2.0, 3.0
PX, PY = 100.0, 50.0          # the labelled point, canvas pixels


def at(col, row):
    return tuple(T @ (col, row))


def line(*pixels):
    """A line through canvas pixel positions, in CRS coordinates."""
    return shapely.LineString([at(c, r) for c, r in pixels])


def place(items, **kw):
    return place_labels(items, T, W, H, size_px=SIZE, font="DejaVu Sans", weight="normal",
                        halo_px=HALO, offset_px=OFFSET, **kw)


def boxes(text):
    """Each position's box around (PX, PY), as place_labels makes it."""
    shape = measure_text(text, SIZE)
    g = HALO / 2
    out = {}
    for name, anchor, (ux, uy) in POSITIONS:
        fx, fy = ANCHORS[anchor]
        left = PX + ux * OFFSET - fx * shape.width
        bottom = PY + uy * OFFSET + fy * shape.height
        out[name] = (left - g, bottom - shape.height - g, left + shape.width + g, bottom + g)
    return out


ITEM = [(*at(PX, PY), "Kirkton", 1)]


def test_the_boxes_here_are_the_placement_s():
    (lab,) = place(ITEM).placed
    assert lab.position == "upper right"
    assert lab.box == pytest.approx(boxes("Kirkton")["upper right"])


def test_a_crossed_first_position_moves_to_the_next_free_one_crossing_nothing():
    b = boxes("Kirkton")
    ur, right = b["upper right"], b["right"]
    # a vertical line through the upper right box, above the right box
    x = (ur[0] + ur[2]) / 2
    road = line((x, 0), (x, right[1] - 1))
    assert ur[1] < right[1] - 1
    (lab,) = place(ITEM, avoid=[road]).placed
    assert lab.position == "right"
    # page furniture over the lower part of the right box (clear of the upper right box): the
    # next free position that crosses nothing
    furniture = (right[0], ur[3] + 1, right[2], right[3])
    (lab,) = place(ITEM, avoid=[road], blocked=[furniture]).placed
    assert lab.position == "upper left"
    # the same without the line: upper right, as always
    (lab,) = place(ITEM, blocked=[furniture]).placed
    assert lab.position == "upper right"


def _stripes(gap):
    """Horizontal lines every 4 px over the canvas except inside rows ``gap`` (one line there)."""
    r0, r1 = gap
    rows = [r + 0.5 for r in range(0, H, 4) if not r0 - 1 <= r + 0.5 <= r1 + 1]
    rows.append((r0 + r1) / 2)
    return [line((0, r), (W, r)) for r in rows]


def test_every_position_crossed_takes_the_least_crossed_one():
    b = boxes("Kirkton")
    below = b["below"]
    lines = _stripes((below[1], below[3]))
    avoid = LinesToAvoid(lines, T)
    crossed = {name: avoid.crossed(box) for name, box in b.items()}
    assert all(v > 0 for v in crossed.values())
    # lower right, lower left and below share their rows: a tie, the earliest position wins
    least = min(crossed.values())
    assert [n for n, v in crossed.items() if v == pytest.approx(least)] \
        == ["lower right", "lower left", "below"]
    (lab,) = place(ITEM, avoid=lines).placed
    assert lab.position == "lower right"
    # a short line more in each of the lower right and lower left boxes (outside below's box)
    lr, ll = b["lower right"], b["lower left"]
    assert lr[2] - 2 > below[2] and ll[0] + 2 < below[0]
    more = lines + [line((lr[2] - 2, lr[1]), (lr[2] - 2, lr[3])),
                    line((ll[0] + 2, ll[1]), (ll[0] + 2, ll[3]))]
    (lab,) = place(ITEM, avoid=more).placed
    assert lab.position == "below"
    assert lab.box == pytest.approx(below)
    # no free position at all: unplaced, as before
    p = place(ITEM, avoid=more, blocked=[(0, 0, W, H)])
    assert not p.placed and [it.text for it in p.unplaced] == ["Kirkton"]


def test_areas_are_kept_off_by_their_outline():
    ur = boxes("Kirkton")["upper right"]
    x = (ur[0] + ur[2]) / 2
    # a square whose left edge runs through the upper right box; its inside is no line
    lake = shapely.Polygon([at(x, 0), at(x + 60, 0), at(x + 60, 40), at(x, 40)])
    (lab,) = place(ITEM, avoid=[lake]).placed
    assert lab.position != "upper right"
    inside = shapely.Polygon([at(0, 0), at(W, 0), at(W, H), at(0, H)])   # outline off the boxes
    (lab,) = place(ITEM, avoid=[inside, shapely.Point(at(PX, PY))]).placed
    assert lab.position == "upper right"


def test_without_lines_to_avoid_the_placement_is_the_old_one():
    rng = np.random.default_rng(7)
    items = [(*at(float(c), float(r)), f"Town {i}", float(p)) for i, (c, r, p) in
             enumerate(zip(rng.uniform(0, W, 30), rng.uniform(0, H, 30), rng.integers(0, 5, 30)))]
    old = place(items, blocked=[(80, 30, 120, 60)])
    assert len(old.placed) > 5 and any(lab.position != "upper right" for lab in old.placed)
    far = [line((-500, -500), (-400, -450))]          # off the canvas: crosses no box
    for avoid in (None, [], far, LinesToAvoid([], T)):
        new = place(items, blocked=[(80, 30, 120, 60)], avoid=avoid)
        assert [dataclasses.astuple(a)[:-1] for a in new.placed] \
            == [dataclasses.astuple(a)[:-1] for a in old.placed]
        assert new.unplaced == old.unplaced


def test_long_lines_are_cut_into_pieces_with_the_same_length():
    xs = np.linspace(0, W, 500)
    wiggle = line(*zip(xs, PY - 8 + 3 * np.sin(xs / 3)))
    avoid = LinesToAvoid([wiggle], T)
    assert len(avoid) > 10
    box = (30.0, 20.0, 170.0, 70.0)
    inverse = ~T
    cut = shapely.clip_by_rect(shapely.transform(wiggle, lambda xy: np.array(
        [inverse @ (x, y) for x, y in xy])), *box)
    assert avoid.crossed(box) == pytest.approx(cut.length, rel=1e-9)
    assert avoid.crossed((0.0, 90.0, 10.0, 99.0)) == 0.0


def test_a_labels_layer_keeps_off_the_lines_of_the_layers_it_avoids(tmp_path):
    """The layer reads the avoided lines layer as that layer reads it (source, table, where), on
    the full canvas and on a draft's, and places its labels off them."""
    from compose.engine import prepare
    from compose.style import load_style
    from tests.check._maps import labels, lines, make_data, style, write_style

    data = make_data(tmp_path / "sources")

    def placed(avoid, **kw):
        doc = style([lines(data["coast"]), labels(data["towns"], avoid=avoid, priority="pop")])
        st = load_style(write_style(tmp_path, doc, f"s{len(avoid)}"))
        canvas = kw.pop("canvas", None)
        prepared = prepare(st, canvas=canvas(st) if canvas else None, **kw)
        try:
            (layer,) = [la for la in prepared.layers if la.spec.kind == "labels"]
            coast = LinesToAvoid(_coast(data, prepared.canvas), prepared.canvas.transform)
            return {lab.text: (lab.position, coast.crossed(lab.box)) for lab in layer.placement.placed}
        finally:
            prepared.close()

    before, after = placed([]), placed(["coast"])
    assert set(before) == set(after) == {"Alpha", "Beta", "Gamma"}
    assert before["Alpha"][0] == "upper right" and before["Alpha"][1] > 0
    assert after["Alpha"][0] != "upper right" and after["Alpha"][1] == 0
    assert all(after[t][1] <= before[t][1] for t in after)
    # a draft's coarser canvas: the same lines kept off there too
    draft = placed(["coast"], canvas=lambda st: st.canvas().coarser(48), draft=True)
    assert set(draft) == {"Alpha", "Beta", "Gamma"}
    assert all(crossed == 0 for _, crossed in draft.values())
    assert placed([], canvas=lambda st: st.canvas().coarser(48), draft=True)["Alpha"][1] > 0


def _coast(data, canvas):
    from compose.sources.vector import VectorSource

    return VectorSource(data["coast"], layer="coast").load(canvas.crs).geometries


def test_lines_to_avoid_cut_in_bulk_as_line_by_line():
    # the pieces made in bulk are those of cutting each line alone every _PIECE segments,
    # vertex for vertex: lines of 1 to 70 vertices (around the piece size), a ring, a point
    import shapely
    from affine import Affine

    from compose.layers.label_placement import _PIECE, LinesToAvoid
    from compose.layers.paths import to_pixels

    transform = Affine(2.0, 0.0, 10.0, 0.0, -2.0, 300.0)
    lines = [shapely.LineString(np.c_[np.arange(n) * 1.5, np.sqrt(np.arange(n)) * 7])
             for n in (2, 3, _PIECE, _PIECE + 1, _PIECE + 2, 2 * _PIECE, 2 * _PIECE + 1, 70)]
    lines.append(shapely.LinearRing([(0, 0), (5, 0), (5, 5), (0, 0)]))
    lines.append(shapely.Point(3, 3))               # no line: left out
    want = []
    for line in lines[:-1]:
        px = to_pixels(shapely.get_coordinates(line), transform)
        want += [px[s:s + _PIECE + 1] for s in range(0, len(px) - 1, _PIECE)]
    got = LinesToAvoid(lines, transform).pieces
    assert len(got) == len(want)
    for piece, coords in zip(got, want, strict=True):
        np.testing.assert_array_equal(shapely.get_coordinates(piece), coords)
