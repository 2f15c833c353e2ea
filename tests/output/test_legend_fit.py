"""Shaded legend keys (the colours the reader sees under the relief) and over-tall legends on a
page (shrunk, or reflowed into columns, never an error)."""
from __future__ import annotations

import math
import textwrap

import numpy as np
import pytest
from PIL import Image

from compose.engine import prepare
from compose.output.legend import DPI, legend_layout, write_legend
from compose.ramps.relief import relief_colors
from compose.style import load_style
from tests.output._tiny import tiny_style


def test_shaded_bar_shows_the_multiply_composite_under_three_relief_tones(tmp_path):
    """Relief below, data blended with multiply (W3C Compositing 1, "multiply": B = Cb x Cs):
    the shaded bar's three stripes are the data colour times the relief colour of a 30 degree
    slope facing the sun, of flat ground and of a 30 degree slope facing away. (A mid-light tint,
    whose lit slopes are visibly lighter than its flat ground: all three stripes are shown.)"""
    path = tiny_style(tmp_path / "data", extra=False, overlays=False)
    text = path.read_text().replace('source = "dem.tif"\n',
                                    'source = "dem.tif"\ntint = { L = 80, C = 3, h = 85 }\n', 1)
    text = text.replace('ramp   = "land"\n',
                                    'ramp   = "land"\nlegend = { shaded = true }\n', 1)
    path.write_text(text)
    style = load_style(path)
    run_ = prepare(style)
    try:
        out = tmp_path / "legend.png"
        write_legend(out, style, run_.ramps, run_.layers)
        rgb = np.asarray(Image.open(out).convert("RGB")).astype(float)
        layout = legend_layout(style, run_.ramps, run_.layers)
        layers = {la.spec.name: la for la in run_.layers}
    finally:
        run_.close()
    relief = layers["relief"].spec.options
    tones8, shade = relief_colors(relief.tint, relief.shadow, relief.strength, relief.altitude)
    alt = relief.altitude
    want_s = [math.sin(math.radians(min(90, alt + 30))), math.sin(math.radians(alt)),
              math.sin(math.radians(alt - 30))]
    tones = np.array([tones8[np.argmin(np.abs(shade - s))] for s in want_s], float) / 255
    box = next(b for b in layout.bars if b.layer == "land-growth")
    lut = layers["land-growth"].lut
    h = box.y1 - box.y0
    for v in np.linspace(box.values[0], box.values[-1], 9)[1:-1]:
        col = int(np.floor(box.x_of(v)))
        c = np.asarray(lut.rgb8[lut.index(v)], float) / 255
        for k in range(3):
            row = int(box.y0 + h * (k + 0.5) / 3)
            want = np.round(tones[k] * c * 255)
            assert np.abs(rgb[row, col] - want).max() <= 3, (v, k, rgb[row, col], want)
    # the out-of-domain end square is shaded alike
    from compose.output.legend_layout import END_GAP, END_W
    col = int(box.x0 - (END_GAP + END_W / 2) * DPI)
    c = np.asarray(lut.rgb8[lut.outside_low_index], float) / 255
    for k in range(3):
        row = int(box.y0 + h * (k + 0.5) / 3)
        assert np.abs(rgb[row, col] - np.round(tones[k] * c * 255)).max() <= 3
    # and the stripes differ: shaded ground reads darker than flat ground
    mid_col = int(np.floor(box.x_of((box.values[0] + box.values[-1]) / 2)))
    flat_row, dark_row = int(box.y0 + h * 0.5), int(box.y0 + h * 5 / 6)
    assert rgb[dark_row, mid_col].sum() < rgb[flat_row, mid_col].sum() - 10


def _runs(rgb: np.ndarray, cols: list[int], y0: float, y1: float) -> list[list[int]]:
    """The rows from ``y0`` to ``y1`` (pixels; 3 left off each end, the frame) in runs of equal
    colour at the pixel columns ``cols``, top first."""
    runs: list[list[int]] = []
    for r in range(int(y0) + 3, int(y1) - 2):
        if runs and np.array_equal(rgb[r, cols], rgb[runs[-1][0], cols]):
            runs[-1].append(r)
        else:
            runs.append([r])
    return runs


def _stripes(rgb: np.ndarray, box) -> list[np.ndarray]:
    """The colours of a bar's stripes at 7 columns: [(7, 3) per stripe], top first (runs under
    3 px, a boundary between stripes, left out)."""
    cols = [int(np.floor(box.x_of(v))) for v in np.linspace(box.values[0], box.values[-1], 9)[1:-1]]
    return [rgb[run[len(run) // 2], cols] for run in _runs(rgb, cols, box.y0, box.y1)
            if len(run) >= 3]


def test_a_shaded_key_shows_only_stripes_the_reader_can_tell_apart(tmp_path):
    """A near-white relief tint at a low strength (the coast demo's: L* 97.5, strength 0.25)
    lights slopes to within 1/255 of flat ground's colour: a "lit slope" stripe would claim a
    difference nobody sees. Every pair of neighbouring stripes drawn must differ by CIEDE2000 >= 2
    (colour-science's implementation of Sharma, Wu & Dalal 2005; the threshold of 2 is common
    practice, no source), and the caption names what each stripe stands for."""
    import colour

    path = tiny_style(tmp_path / "data", extra=False, overlays=False)
    text = path.read_text().replace('source = "dem.tif"\n',
                                    'source = "dem.tif"\ntint = { L = 97.5, C = 1, h = 85 }\n'
                                    'strength = 0.25\nblend = "multiply"\n', 1)
    text = text.replace('ramp   = "land"\n', 'ramp   = "land"\nlegend = { shaded = true }\n', 1)
    path.write_text(text)
    style = load_style(path)
    run_ = prepare(style)
    try:
        out = tmp_path / "legend.png"
        write_legend(out, style, run_.ramps, run_.layers)
        rgb = np.asarray(Image.open(out).convert("RGB")).astype(float) / 255
        layout = legend_layout(style, run_.ramps, run_.layers)
    finally:
        run_.close()
    box = next(b for b in layout.bars if b.layer == "land-growth")
    stripes = _stripes(rgb, box)
    lab = [colour.XYZ_to_Lab(colour.sRGB_to_XYZ(s)) for s in stripes]
    assert len(stripes) >= 2
    for a, b in zip(lab, lab[1:]):
        assert np.median(colour.delta_E(a, b, method="CIE 2000")) >= 2.0
    block = next(b for b in layout.blocks if getattr(b, "seen", None) is not None)
    assert block.note == "stripes: lit slope and flat ground, shaded slope"
    assert len(stripes) == 2


def test_striped_swatches_have_no_seam_of_paper_between_stripes():
    """Two-stripe swatches at 400 heights over a legend-sized figure: every row inside each
    frame is one of its stripes' colours. Agg snaps each patch to whole pixels, and stripes cut
    at a fractional row left a row of paper between them at some heights (2 of these 400; in
    the cover demo, its Wetland and Settlement swatches)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    from compose.output.legend import _swatch

    tones = np.array([[0.35, 0.6, 0.6], [0.29, 0.51, 0.51]])
    want = {tuple(int(v) for v in np.round(t * 255)) for t in tones}
    height = 4.875
    for shift in np.arange(0, 0.2, 0.0101):
        fig = Figure(figsize=(3.6, height), dpi=DPI, facecolor="white")
        ax = fig.add_axes((0, 0, 1, 1))
        ax.set_axis_off()
        ax.set_autoscale_on(False)
        tops = [0.1 + shift + i * 0.205 for i in range(20)]
        for y in tops:
            _swatch(ax, 0.32, y, 0.3, 0.145, (0.5, 0.5, 0.5), lambda rgb: tones[None])
        ax.set_xlim(0, 3.6)
        ax.set_ylim(height, 0)
        canvas = FigureCanvasAgg(fig)
        canvas.draw()
        rgb = np.asarray(canvas.buffer_rgba())[:, :, :3].astype(int)
        for y in tops:
            rows = rgb[int(y * DPI) + 3:int((y + 0.145) * DPI) - 2, int(0.47 * DPI)]
            assert {tuple(int(v) for v in r) for r in rows} <= want, (shift, y)


MANY = """
[ramp.many]
kind    = "qualitative"
classes = [
{classes}
]

[[layer]]
name   = "many-classes"
role   = "theme"
kind   = "classes"
source = "cover.tif"
ramp   = "many"
opacity = 0.3

[page]
paper       = "A5"
orientation = "landscape"
margin      = 8
title       = "A page with a long legend"
"""


def _many_style(tmp_path, n):
    path = tiny_style(tmp_path / "data", extra=False, overlays=True)
    classes = ",\n".join(
        f'  {{ value = {i}, label = "Class number {i}", '
        f'color = {{ L = {45 + (i * 37) % 40}, C = 12, h = {(i * 47) % 360} }} }}'
        for i in range(1, n + 1))
    path.write_text(path.read_text() + textwrap.dedent(MANY).replace("{classes}", classes))
    return load_style(path)


@pytest.mark.parametrize("n", [8, 40])
def test_an_over_tall_legend_is_shrunk_or_reflowed_into_columns(tmp_path, n):
    """A5 landscape: 8 classes fit by shrinking the legend a little; 40 classes reflow into
    columns. The legend stays inside the panel above the scale bar, every class is listed once,
    and with columns the type is shrunk less than it would be without."""
    from compose.page.layout import MIN_SCALE, PANEL_WIDTH, page_layout
    from compose.page.write import _layout, fit_legend

    style = _many_style(tmp_path, n)
    run_ = prepare(style)
    try:
        legend = fit_legend(style, run_.ramps, run_.layers)
        plain = legend_layout(style, run_.ramps, run_.layers, width=PANEL_WIDTH / 25.4)
    finally:
        run_.close()
    layout = _layout(style, legend)
    piece = layout.piece("legend")
    bar = layout.piece("scalebar")
    x, y, w, h = piece.box
    assert w <= PANEL_WIDTH + 0.01
    assert y + h <= bar.box[1] + 0.01                       # above the scale bar, no overlap
    block = next(b for b in legend.blocks if getattr(b, "layer", None) is not None
                 and b.layer.spec.name == "many-classes")
    columns = block.columns or [block.rows]
    labels = [item.label for col in columns for kind, item in col if kind == "class"]
    assert sorted(labels) == sorted(f"Class number {i}" for i in range(1, n + 1))
    unshrunk = page_layout(style, (plain.width * 25.4, plain.height * 25.4)).piece("legend")
    if n == 8:
        assert len(columns) == 1 and MIN_SCALE <= piece.scale < 1
        assert piece.scale == pytest.approx(unshrunk.scale)
    else:
        assert len(columns) >= 2
        assert unshrunk.scale < MIN_SCALE and piece.scale > unshrunk.scale
        heights = [len(c) for c in columns]
        assert max(heights) - min(heights) <= 2            # about equally tall


def test_the_shrunk_legend_draws_its_type_smaller(tmp_path):
    """The page draws a shrunk legend with its type, strokes and markers scaled alike."""
    from matplotlib.figure import Figure

    from compose.page.draw import shrink_artists

    fig = Figure()
    ax = fig.add_axes((0, 0, 1, 1))
    t = ax.text(0, 0, "Label", fontsize=8)
    line, = ax.plot([0, 1], [0, 1], lw=2.0, marker="o", ms=4.0)
    shrink_artists(ax, 0.5)
    assert t.get_fontsize() == 4 and line.get_linewidth() == 1.0 and line.get_markersize() == 2.0


def test_a_family_broken_between_columns_keeps_its_heading():
    """Reflowed into two columns, "Farmed" ended one column with "Cropland" and its "Pasture"
    topped the next with no heading: every class must stand under its own family's heading."""
    from types import SimpleNamespace

    from compose.output.legend_layout import split_rows

    def cls(name, fam):
        return ("class", SimpleNamespace(label=name, family=fam))

    rows = [("family", "woody"), cls("Conifer", "woody"), cls("Broadleaf", "woody"),
            cls("Shrub", "woody"), ("family", "farmed"), cls("Crop", "farmed"),
            cls("Pasture", "farmed"), ("family", "other"), cls("Wetland", "other"),
            cls("Settlement", "other"), cls("Rock", "other")]
    for n in (2, 3, 4):
        cols = split_rows(rows, n)
        assert [r for c in cols for r in c if r[0] == "class"] == \
            [r for r in rows if r[0] == "class"]                  # every class once, in order
        for col in cols:
            heading = None
            for kind, item in col:
                if kind == "family":
                    heading = item
                else:
                    assert heading == item.family, (n, item.label)


def _text_boxes(legend) -> list:
    """(text, extent in inches) of every text the legend draws, as matplotlib lays it out."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    from compose.output.legend import draw_legend

    fig = Figure(figsize=(legend.width, legend.height), dpi=DPI)
    ax = fig.add_axes((0, 0, 1, 1))
    draw_legend(ax, legend)
    renderer = FigureCanvasAgg(fig).get_renderer()
    return [(t.get_text(), t.get_window_extent(renderer).transformed(fig.dpi_scale_trans.inverted()))
            for t in ax.texts if t.get_text()]


def test_class_columns_keep_their_labels_apart(tmp_path):
    """The land-cover demo on US letter, upright: its legend goes under the map in two columns,
    and "Broadleaf forest" ran into the next column's "Other" heading (0.03 inch apart: a
    column's family headings stand 0.12 inch left of its swatches, in the room the gap between
    columns was to give). Texts side by side now keep at least an em of the label type apart
    (common practice, no source)."""
    from compose.demo import styles_dir
    from compose.output.legend_layout import FONT
    from compose.page.write import fit_legend

    path = tmp_path / "letter.toml"
    path.write_text(f'extends = "{(styles_dir() / "cover.toml").as_posix()}"\n'
                    '[page]\npaper = "letter"\norientation = "portrait"\n', encoding="utf-8")
    style = load_style(path)
    run_ = prepare(style)
    try:
        legend = fit_legend(style, run_.ramps, run_.layers)
    finally:
        run_.close()
    block = next(b for b in legend.blocks if getattr(b, "columns", None))
    assert len(block.columns) >= 2                       # the case: reflowed into columns
    boxes = _text_boxes(legend)
    em = FONT / 72.0
    for i, (ta, a) in enumerate(boxes):
        for tb, b in boxes[i + 1:]:
            if min(a.y1, b.y1) - max(a.y0, b.y0) > 0.2 * em:       # on one line
                gap = max(b.x0 - a.x1, a.x0 - b.x1)
                assert gap >= em, (ta, tb, round(gap, 3))


def test_a_bottom_panel_gives_the_legend_its_width(tmp_path):
    """The land-cover demo on A4, upright: the legend goes under the map, where the panel has
    127 mm left of the scale bar; it was held to the side panel's 70 mm, so its two columns
    were shrunk to 76 % (8 pt labels printed at 6.1 pt) with the panel's right half empty. Now it
    is laid out across that room: its labels print at 6.5 pt or more, inside the panel, clear
    of the scale bar, and apart from each other."""
    from compose.demo import styles_dir
    from compose.output.legend_layout import FONT
    from compose.page.layout import PANEL_WIDTH
    from compose.page.write import _layout, fit_legend

    path = tmp_path / "upright.toml"
    path.write_text(f'extends = "{(styles_dir() / "cover.toml").as_posix()}"\n'
                    '[page]\npaper = "A4"\norientation = "portrait"\n', encoding="utf-8")
    style = load_style(path)
    run_ = prepare(style)
    try:
        legend = fit_legend(style, run_.ramps, run_.layers)
    finally:
        run_.close()
    layout = _layout(style, legend)
    piece, bar = layout.piece("legend"), layout.piece("scalebar")
    assert piece.box[1] >= layout.frame[1] + layout.frame[3]           # under the map
    assert FONT * piece.scale >= 6.5, piece.scale
    assert piece.box[2] > PANEL_WIDTH                                   # the room is used
    assert piece.box[0] + piece.box[2] <= bar.box[0]                    # clear of the bar
    boxes = _text_boxes(legend)
    em = FONT / 72.0
    for i, (ta, a) in enumerate(boxes):
        for tb, b in boxes[i + 1:]:
            if min(a.y1, b.y1) - max(a.y0, b.y0) > 0.2 * em:
                assert max(b.x0 - a.x1, a.x0 - b.x1) >= em, (ta, tb)


def test_a_narrow_bottom_panel_never_squashes_the_legend(tmp_path):
    """A6 upright: the bottom panel leaves about 11 mm left of the scale bar. The legend was laid
    out that narrow and shrunk (its colour bars squashed to stubs, its labels past them); it is
    never laid out narrower than the side panel's 70 mm, so this page is refused with the
    message that says what to change, as it was before bottom panels gave their width."""
    from compose.demo import styles_dir
    from compose.errors import StyleError
    from compose.page.write import fit_legend

    path = tmp_path / "a6.toml"
    path.write_text(f'extends = "{(styles_dir() / "coast.toml").as_posix()}"\n'
                    '[page]\npaper = "A6"\norientation = "portrait"\nmargin = 5\n'
                    'title = "Productivity"\ncredits = "Data: invented"\n', encoding="utf-8")
    style = load_style(path)
    run_ = prepare(style)
    try:
        with pytest.raises(StyleError, match="page.legend: the legend needs shrinking"):
            fit_legend(style, run_.ramps, run_.layers)
    finally:
        run_.close()
