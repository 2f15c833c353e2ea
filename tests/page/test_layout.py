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


def _block(layout, grid=0.0):
    """The box (x0, y0, x1, y1) mm of the map frame with its grid labels' room and the panel's
    pieces (everything but the band lines and the pieces inside the frame)."""
    fx, fy, fw, fh = layout.frame
    boxes = [(fx - grid, fy - grid, fw + 2 * grid, fh + 2 * grid)]
    boxes += [p.box for p in layout.pieces
              if not p.inside and p.kind not in ("title", "subtitle", "credits", "caution")]
    return (min(b[0] for b in boxes), min(b[1] for b in boxes),
            max(b[0] + b[2] for b in boxes), max(b[1] + b[3] for b in boxes))


def _centred(style, layout, side, grid=0.0):
    """The free room around the map frame shared evenly: across the margins (a side panel
    moving with the frame: frame and panel together in the middle; a bottom panel spans the
    margins, the frame is centred over it), and down between the bands for a side panel (a
    bottom panel takes the room under the frame)."""
    from compose.page.layout import page_room

    W, H = layout.size
    t, r, b, left = style.page.margin
    (rx, ry, rw, rh), _, _ = page_room(style, side)
    fx, fy, fw, fh = layout.frame
    if side == "bottom":
        assert fx + fw / 2 == pytest.approx((left + W - r) / 2, abs=0.01)
        assert fy == pytest.approx(ry, abs=0.01)
        return
    x0, y0, x1, y1 = _block(layout, grid)
    assert x0 - left == pytest.approx(W - r - x1, abs=0.01)            # as much room each side
    assert fy - ry == pytest.approx(ry + rh - fy - fh, abs=0.01)       # above as below
    # the band lines start where the map and its panel start (they fit from there)
    assert layout.piece("title").box[0] == pytest.approx(x0, abs=0.01)


@pytest.mark.parametrize("orientation", ["portrait", "landscape"])
@pytest.mark.parametrize("panel", ["auto", "right", "left", "bottom"])
def test_every_paper_centres_the_map_in_its_margins(tmp_path, orientation, panel):
    """On every paper the page offers (ISO 216 A0-A8, B0-B8, ANSI letter and legal), in both
    orientations and with the panel on every side, the map frame and its panel share the free
    room evenly on both sides. Before, they were packed to the top-left corner: on A4 landscape
    (the demo's pages) the 35 mm left free across all sat right of the panel."""
    from compose.errors import StyleError
    from compose.page.spec import PAPER_SIZES

    path = tiny_style(tmp_path, extra=False)
    text = path.read_text()
    laid = 0
    for paper in PAPER_SIZES:
        page = PAGE.format(orientation=orientation, more=f'panel = "{panel}"')
        path.write_text(text + textwrap.dedent(page).replace('"A4"', f'"{paper}"'))
        try:
            style = load_style(path)
            layout = page_layout(style, LEGEND)
        except StyleError:          # the smallest sheets leave no room for a map
            continue
        laid += 1
        _centred(style, layout, panel_side(style))
        _inside_and_apart(layout)
    assert laid >= 14               # A0-A6, B0-B6 (and letter, legal): not a vacuous loop


@pytest.mark.parametrize("extent", ["wide", "tall"])
@pytest.mark.parametrize("orientation", ["portrait", "landscape"])
@pytest.mark.parametrize("more", ['panel = "right"', 'panel = "left"', 'panel = "bottom"',
                                  'legend = "off"\nnorth = "top right"\nscalebar = "bottom left"',
                                  'scale = 20000', 'grid = { step = 500 }'])
def test_a_map_of_any_shape_sits_centred(tmp_path, extent, orientation, more):
    """A map three times wider than tall, or taller than wide, leaves room above and below, or
    to the sides; with a print scale (1:20 000, the 1.9 km map 96 mm wide) it leaves room both
    ways; furniture inside the frame, or none beside it, centres the frame alone."""
    box = {"wide": [500000, 4001280, 501920, 4001920], "tall": [500000, 4000000, 500640, 4001920]}
    style = _style(tmp_path, orientation, more)
    style = load_style(style.path, overrides={"map.extent": box[extent]})
    layout = page_layout(style, LEGEND)
    _centred(style, layout, panel_side(style), 5.0 if "grid" in more else 0.0)
    _inside_and_apart(layout)


def _drawn_extents(style, layout):
    """(text, (x0, y0, x1, y1) mm) of every text the page draws, as matplotlib lays it out."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    from compose.page.draw import page_figure

    fig = page_figure(style, layout, None)
    renderer = FigureCanvasAgg(fig).get_renderer()
    ax = next(a for a in fig.axes if a.texts)
    to_mm = ax.transData.inverted()
    out = []
    for t in ax.texts:
        (xa, ya), (xb, yb) = to_mm.transform(t.get_window_extent(renderer).get_points())
        out.append((t.get_text(), t.get_position(), (min(xa, xb), min(ya, yb), max(xa, xb),
                                                     max(ya, yb))))
    return out


@pytest.mark.parametrize("crs", ["projected", "geographic"])
@pytest.mark.parametrize("place", ["panel", "bottom right", "bottom left"])
def test_the_scale_lines_stay_in_their_piece(tmp_path, crs, place):
    """The lines under the scale bar ("Scale about 1:12 000 at the map centre", and on a map
    in degrees where the scale holds) ran past the piece: out of a corner's paper box over the
    map (seen on the demo's page with the bar at bottom right), under the panel's north arrow.
    Every text of the scale bar now lies inside its piece, and clear of the north arrow."""
    more = f'scalebar = "{place}"'
    style = _style(tmp_path, "landscape", more)
    if crs == "geographic":
        style = load_style(style.path, overrides={"map.crs": "EPSG:4326", "map.pixel": 0.01,
                                                  "map.extent": [2.0, 44.0, 6.0, 48.0]})
    layout = page_layout(style, LEGEND)
    bar, north = layout.piece("scalebar"), layout.piece("north")
    x, y, w, h = bar.box
    texts = [(s, box) for s, (px, py), box in _drawn_extents(style, layout)
             if x <= px <= x + w and y <= py <= y + h]
    assert len(texts) >= 4                      # labels, unit, at least one line under the bar
    if crs == "geographic":
        assert any(s.startswith("Scale true at") for s, _ in texts)
    nx, ny, nw, nh = north.box
    for s, (x0, y0, x1, y1) in texts:
        assert x - 1e-6 <= x0 and x1 <= x + w + 1e-6 and y - 1e-6 <= y0 and y1 <= y + h, (s, bar.box)
        assert x1 <= nx or x0 >= nx + nw or y1 <= ny or y0 >= ny + nh, (s, north.box)
    _inside_and_apart(layout)


def test_grid_labels_along_an_edge_keep_apart(tmp_path):
    """A grid every 60 m on the tiny 1.9 km map (33 lines a side, 4.9 mm apart on A4):
    a label was written at every line, each 8 mm wide, running into the next. Now every
    k-th line is labelled, the same lines on both sides, k the least that keeps the labels as
    matplotlib lays them out apart along each edge; every line keeps its tick."""
    style = _style(tmp_path, "landscape", "grid = { step = 60 }")
    layout = page_layout(style, LEGEND)
    fx, fy, fw, fh = layout.frame
    texts = _drawn_extents(style, layout)
    edges = {"top": [], "bottom": [], "left": [], "right": []}
    for s, (px, py), box in texts:
        if not any(ch.isdigit() for ch in s):
            continue
        if fx - 0.1 <= px <= fx + fw + 0.1 and py < fy:
            edges["top"].append((px, box))
        elif fx - 0.1 <= px <= fx + fw + 0.1 and py > fy + fh and py < fy + fh + 5:
            edges["bottom"].append((px, box))
        elif fy - 0.1 <= py <= fy + fh + 0.1 and px < fx:
            edges["left"].append((py, box))
        elif fy - 0.1 <= py <= fy + fh + 0.1 and fx + fw < px < fx + fw + 5:
            edges["right"].append((py, box))
    for name, labels in edges.items():
        assert len(labels) >= 3, name
        labels.sort(key=lambda t: t[0])
        along = 0 if name in ("top", "bottom") else 1
        for (_, a), (_, b) in zip(labels, labels[1:]):
            assert b[along] - a[along + 2] >= 0.9, (name, a, b)      # 1 mm, font metrics aside


def test_a_band_line_too_long_says_how_much_more_it_needs(tmp_path):
    """The coast demo's title on A6 upright with 5 mm margins: 94.6 mm of text at 9 pt against
    95 mm of room less the 2 % the fit keeps for the writers' metrics. The error said "95 mm long
    even at 9 pt, the page leaves 95 mm": the room it needs must read larger than the room
    left."""
    import re

    from compose.demo import styles_dir
    from compose.errors import StyleError

    path = tmp_path / "a6.toml"
    path.write_text(f'extends = "{(styles_dir() / "coast.toml").as_posix()}"\n'
                    '[page]\npaper = "A6"\norientation = "portrait"\nmargin = 5\n',
                    encoding="utf-8")
    style = load_style(path)
    with pytest.raises(StyleError, match=r"^page\.title|^map\.title") as caught:
        page_layout(style, LEGEND)
    need, left = (float(v) for v in re.findall(r"([0-9.]+) mm", str(caught.value))[:2])
    assert need > left, str(caught.value)
