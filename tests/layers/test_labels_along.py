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
