"""Where the page puts its map frame and panel: the side panel on a wide sheet, the bottom panel
on a tall one (ISO 216 A4, 210 x 297 mm), whichever leaves the larger map frame, and every piece
of furniture inside the sheet's margins without overlapping another or the frame."""
from __future__ import annotations

import itertools
import textwrap

import pytest

from compose.page.layout import page_layout, panel_side
from compose.style import load_style
from tests.output._tiny import tiny_style

PAGE = """
[page]
paper       = "A4"
orientation = "{orientation}"
title       = "Tiny page title"
subtitle    = "A test of the page"
credits     = "Data: generated in the test"
{more}
"""
LEGEND = (60.0, 80.0)          # mm: a legend of the demo's size in a 70 mm panel


def _style(tmp_path, orientation, more=""):
    path = tiny_style(tmp_path, extra=False)
    path.write_text(path.read_text() + textwrap.dedent(PAGE.format(orientation=orientation,
                                                                   more=more)))
    return load_style(path)


def _area(layout):
    return layout.frame[2] * layout.frame[3]


def _inside_and_apart(layout, margin=10.0):
    W, H = layout.size
    boxes = [(p.kind, p.box) for p in layout.pieces if not p.inside] + [("frame", layout.frame)]
    for kind, (x, y, w, h) in boxes:
        assert x >= margin - 1e-6 and y >= margin - 1e-6, kind
        assert x + w <= W - margin + 1e-6 and y + h <= H - margin + 1e-6, kind
    for (ka, a), (kb, b) in itertools.combinations(boxes, 2):
        apart = (a[0] + a[2] <= b[0] + 1e-6 or b[0] + b[2] <= a[0] + 1e-6
                 or a[1] + a[3] <= b[1] + 1e-6 or b[1] + b[3] <= a[1] + 1e-6)
        assert apart, (ka, kb)


def test_a_tall_sheet_puts_the_panel_under_the_map(tmp_path):
    """A4 portrait, a square map: beside a 70 mm side panel the frame was 114 mm wide with the
    sheet's lower half empty; under the map the panel leaves it far larger."""
    auto = _style(tmp_path / "a", "portrait")
    right = _style(tmp_path / "r", "portrait", 'panel = "right"')
    assert panel_side(auto) == "bottom" and panel_side(right) == "right"
    tall, side = page_layout(auto, LEGEND), page_layout(right, LEGEND)
    assert _area(tall) > 2 * _area(side)
    fx, fy, fw, fh = tall.frame
    for kind in ("legend", "scalebar", "north"):
        assert tall.piece(kind).box[1] >= fy + fh, kind          # under the frame
    _inside_and_apart(tall)
    _inside_and_apart(side)


def test_a_wide_sheet_keeps_the_side_panel(tmp_path):
    """A4 landscape (the demo's pages): the side panel leaves the larger frame, as before."""
    style = _style(tmp_path, "landscape")
    assert panel_side(style) == "right"
    layout = page_layout(style, LEGEND)
    assert layout.piece("legend").box[0] >= layout.frame[0] + layout.frame[2]
    _inside_and_apart(layout)


@pytest.mark.parametrize("side", ["left", "bottom"])
def test_a_stated_panel_side_is_kept(tmp_path, side):
    style = _style(tmp_path, "landscape", f'panel = "{side}"')
    assert panel_side(style) == side
    _inside_and_apart(page_layout(style, LEGEND))
