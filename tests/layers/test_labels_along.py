"""Labels along lines: upright, along the line's direction, repeated, clear of each other, not on
bends; drawn where placed."""
from __future__ import annotations

import numpy as np
import pytest
import shapely
from affine import Affine

from compose.layers.labels_along import draw_along, place_along

T = Affine(1.0, 0, 0, 0, -1.0, 400.0)      # 1 CRS unit per pixel, rows down from y = 400


def _line(*pts):
    return shapely.LineString([(x, 400 - r) for x, r in pts])     # given in (col, row)


@pytest.mark.parametrize("pts,angle", [
    (((20, 380), (380, 20)), 45.0),        # rising to the right: reads up at 45 degrees
    (((380, 20), (20, 380)), 45.0),        # the same line drawn the other way: still upright
    (((20, 100), (380, 100)), 0.0),
    (((200, 380), (200, 20)), 90.0),        # vertical: reads bottom to top
])
def test_label_follows_the_line_upright(pts, angle):
    placed, unplaced = place_along([(_line(*pts), "Riverside", 1)], T, 400, 400, size_px=12,
                                   spacing_px=1000)
    assert not unplaced and len(placed) == 1
    assert placed[0].angle == pytest.approx(angle, abs=0.5)
    assert -90 < placed[0].angle <= 90


def test_repeated_at_the_spacing_and_never_overlapping():
    line = _line((10, 200), (1990, 200))
    placed, _ = place_along([(line, "Long river", 1)], T, 2000, 400, size_px=12, spacing_px=400)
    assert len(placed) == 5                              # 2000 px of line, one every 400 px
    boxes = [p.box for p in placed]
    for i, a in enumerate(boxes):
        for b in boxes[i + 1:]:
            assert not (a[0] < b[2] and b[0] < a[2] and a[1] < b[3] and b[1] < a[3])
    # the text sits just above its line (rows up), not across it
    assert all(p.box[3] <= 200 + 1 for p in placed)


def test_a_tight_zigzag_gets_no_label():
    zig = _line(*[(20 + 8 * i, 200 + (12 if i % 2 else -12)) for i in range(40)])
    placed, unplaced = place_along([(zig, "Crooked", 1)], T, 400, 400, size_px=12)
    assert not placed and unplaced == ["Crooked"]


def test_drawn_where_placed():
    placed, _ = place_along([(_line((20, 100), (380, 100)), "Riverside", 1)], T, 400, 400,
                            size_px=14, spacing_px=1000, halo_px=2)
    text, halo = draw_along(placed, 0, 0, 400, 400, halo_px=2)
    rows, cols = np.nonzero(text > 0.5)
    b = placed[0].box
    assert rows.min() >= b[1] and rows.max() <= b[3] and cols.min() >= b[0] and cols.max() <= b[2]
    assert halo.sum() > text.sum()
    # a window beside the label draws nothing
    assert draw_along(placed, 0, 300, 400, 100)[0] is None


def test_label_layers_keep_clear_of_each_other(tmp_path):
    """A second labels layer on the same points places its labels away from the first's."""
    from compose.engine import prepare
    from compose.style import load_style
    from tests.output._tiny import tiny_style

    path = tiny_style(tmp_path, extra=False)
    text = path.read_text()
    second = text[text.index('[[layer]]\nname     = "town-names"'):].replace(
        '"town-names"', '"town-names-again"')
    path.write_text(text + "\n" + second)
    run_ = prepare(load_style(path))
    try:
        first, again = [la for la in run_.layers if la.spec.kind == "labels"]
        assert first.placement.placed
        for a in first.placement.placed:
            for b in again.placement.placed:
                assert not (a.box[0] < b.box[2] and b.box[0] < a.box[2]
                            and a.box[1] < b.box[3] and b.box[1] < a.box[3])
    finally:
        run_.close()


# --- curved text: glyph by glyph along a bending line ------------------------------------------

def _arc(cx, cy, r, a0, a1, n=200):
    """A circular arc in (col, row) pixels, angles in degrees counter-clockwise on screen."""
    t = np.radians(np.linspace(a0, a1, n))
    return _line(*zip(cx + r * np.cos(t), cy - r * np.sin(t)))


def _polyline_distance(line, col, row):
    return shapely.distance(line, shapely.Point(col, 400 - row))


@pytest.mark.parametrize("reverse", [False, True])
def test_glyphs_follow_a_bend_upright_and_smooth(reverse):
    """On a half circle (straight text has no room) each glyph sits on the line, upright, turned
    a little from its neighbour, spaced at its advance width."""
    from compose.layers.labels_along import MAX_TURN, glyph_run

    arc = _arc(200, 300, 150, 170, 10)                  # an arch over the canvas middle
    if reverse:
        arc = arc.reverse()
    size = 12.0
    placed, unplaced = place_along([(arc, "Curving river name", 1)], T, 400, 400, size_px=size,
                                   spacing_px=2000)
    assert not unplaced and len(placed) == 1
    lab = placed[0]
    run = glyph_run("Curving river name", size)
    angles = np.array([g.angle for g in lab.glyphs])
    assert np.all(np.abs(angles) <= 90)                 # upright
    assert np.max(np.abs(np.diff(angles))) <= MAX_TURN  # a smooth stretch
    assert np.ptp(angles) > 40                          # and it really bends with the line
    # reads left to right over the arch whichever way the line was drawn
    assert lab.glyphs[0].col < lab.glyphs[-1].col
    for g, adv in zip(lab.glyphs, run.advance):
        u = np.array([np.cos(np.radians(g.angle)), -np.sin(np.radians(g.angle))])
        mid = np.array([g.col, g.row]) + u * adv / 2    # the glyph's baseline middle
        assert _polyline_distance(arc, *g.foot) <= 0.5 * size        # its foot on the line
        assert _polyline_distance(arc, *mid) <= 0.9 * size           # the glyph beside it
    # neighbours keep their advance widths along the bend (the baseline curve, not the chord)
    mids = np.array([[g.col, g.row] for g in lab.glyphs])
    gaps = np.hypot(*np.diff(mids, axis=0).T)
    assert gaps == pytest.approx(np.diff(run.x), rel=0.1, abs=0.6)


def test_a_hairpin_gets_no_curved_label():
    """A bend tighter than the glyph-to-glyph turn limit is refused."""
    hairpin = _arc(200, 200, 14, 0, 300)
    placed, unplaced = place_along([(hairpin, "Sharpbend", 1)], T, 400, 400, size_px=12)
    assert not placed and unplaced == ["Sharpbend"]


def test_crossing_lines_never_share_glyph_room():
    """Names on lines that cross: no glyph box of one label meets a glyph box of another."""
    lines = [(_arc(200, 320, 170, 175, 5), "Northbend water", 2),
             (_line((30, 60), (370, 340)), "Diagonal road name", 1),
             (_line((30, 340), (370, 60)), "Other diagonal name", 1),
             (_arc(200, 80, 120, 185, 355), "Southbend water", 1)]
    placed, unplaced = place_along(lines, T, 400, 400, size_px=11, spacing_px=180)
    assert len({p.text for p in placed}) >= 3
    boxes = [(i, b) for i, p in enumerate(placed) for b in p.glyph_boxes]
    for k, (i, a) in enumerate(boxes):
        for j, b in boxes[k + 1:]:
            if i != j:
                assert not (a[0] < b[2] and b[0] < a[2] and a[1] < b[3] and b[1] < a[3])


def test_every_demo_river_name_is_placed():
    """The coast demo: every named main river gets its name along its drawn course."""
    from pathlib import Path

    from compose.engine import prepare
    from compose.style import load_style

    style = Path(__file__).resolve().parents[2] / "styles" / "coast.toml"
    run_ = prepare(load_style(style))
    try:
        layer = next(la for la in run_.layers if la.spec.name == "river names")
        assert layer.along_unplaced == []
        assert len({lab.text for lab in layer.along}) >= 7
        for lab in layer.along:
            assert all(-90 <= g.angle <= 90 for g in lab.glyphs)
    finally:
        run_.close()
