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
    slope facing the sun, of flat ground and of a 30 degree slope facing away."""
    path = tiny_style(tmp_path / "data", extra=False, overlays=False)
    text = path.read_text().replace('ramp   = "land"\n',
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
