"""The legend PNG, read back with an independent decoder (Pillow) and compared with the lookup
tables the map is drawn through."""
from __future__ import annotations

import numpy as np
import pytest
from PIL import Image

from compose.engine import prepare
from compose.output.legend import DPI, WIDTH, legend_layout, pretty_name, write_legend
from compose.output.legend_layout import END_GAP, END_W
from compose.style import load_style
from tests.output._tiny import tiny_style

TOL = 2  # 8-bit codes: the bar is drawn from the LUT, resampled near 1:1 (brief: within 2/255)


@pytest.fixture(scope="module")
def drawn(tmp_path_factory):
    """(layout, layers by name, decoded RGB image) of the tiny style's legend."""
    tmp_path = tmp_path_factory.mktemp("legend")
    style = load_style(tiny_style(tmp_path / "data"))
    run_ = prepare(style)
    try:
        path = tmp_path / "tiny.legend.png"
        write_legend(path, style, run_.ramps, run_.layers)
        with Image.open(path) as im:
            rgb = np.asarray(im.convert("RGB"))
        layout = legend_layout(style, run_.ramps, run_.layers)
        yield layout, {la.spec.name: la for la in run_.layers}, rgb
    finally:
        run_.close()


def test_png_size_ratio_and_not_blank(drawn):
    layout, _, rgb = drawn
    h, w = rgb.shape[:2]
    assert (w, h) == layout.pixels
    assert w == round(WIDTH * DPI)
    assert h / w == pytest.approx(layout.height / layout.width, abs=2 / w)
    packed = (rgb[..., 0].astype(np.uint32) << 16) | (rgb[..., 1].astype(np.uint32) << 8) | rgb[..., 2]
    assert len(np.unique(packed)) > 200                      # bars, swatches, text: not a blank image
    assert (rgb < 250).any(axis=-1).mean() > 0.05


def test_continuous_bars_show_the_lut_color_at_each_value(drawn):
    layout, layers, rgb = drawn
    checked = 0
    for box in layout.bars:
        lut = layers[box.layer].lut
        if lut.stepped:
            continue
        row = int((box.y0 + box.y1) / 2)
        lo, hi = box.values[0], box.values[-1]
        marks = [v for v in (getattr(lut.ramp, "at", None),) if v is not None]
        for v in np.linspace(lo, hi, 23)[1:-1]:
            if any(abs(v - m) < 0.02 * (hi - lo) for m in marks):
                continue   # the threshold edge: neighbouring columns straddle the hue change
            col = int(np.floor(box.x_of(v)))
            got = rgb[row, col].astype(int)
            want = lut.rgb8[lut.index(v)].astype(int)
            assert np.abs(got - want).max() <= TOL, (box.layer, v, got, want)
            checked += 1
    assert checked >= 50


def test_stepped_bar_shows_each_class_color(drawn):
    layout, layers, rgb = drawn
    box = next(b for b in layout.bars if b.layer == "growth-classes")
    lut = layers["growth-classes"].lut
    assert lut.stepped and len(box.xs) == lut.n + 1
    row = int((box.y0 + box.y1) / 2)
    for k in range(lut.n):
        col = int((box.xs[k] + box.xs[k + 1]) / 2)
        assert np.abs(rgb[row, col].astype(int) - lut.rgb8[k].astype(int)).max() <= TOL
    # equal-width blocks, breaks at the class edges (labelled on the axis)
    widths = np.diff(box.xs)
    assert np.allclose(widths, widths[0])
    assert box.values == pytest.approx((0, 1, 2, 4, 7, 10))


def test_twins_share_one_scale_and_are_stacked(drawn):
    layout, _, _ = drawn
    land = next(b for b in layout.bars if b.layer == "land-growth")
    water = next(b for b in layout.bars if b.layer == "water-growth")
    assert (land.x0, land.x1, land.values, land.xs) == (water.x0, water.x1, water.values, water.xs)
    assert water.y0 > land.y1 and water.y0 - land.y1 < 0.2 * DPI   # stacked directly beneath


def test_overlays_are_listed_topmost_first(drawn):
    """The style draws its layers in file order, first lowest (coast lines, then towns, then
    their names on top); a legend lists the topmost layer first (common practice, no source),
    and the style has no legend order of its own to respect."""
    from compose.output.legend_layout import OverlaysBlock

    layout, _, _ = drawn
    block = next(b for b in layout.blocks if isinstance(b, OverlaysBlock))
    assert [la.spec.name for la in block.layers] == ["town-names", "towns", "coast"]


def test_end_squares_show_the_outside_colors_set_off_by_a_gap(drawn):
    layout, layers, rgb = drawn
    box = next(b for b in layout.bars if b.layer == "warmth")
    lut = layers["warmth"].lut
    row = int((box.y0 + box.y1) / 2)
    centre = (END_GAP + END_W / 2) * DPI
    low = rgb[row, int(box.x0 - centre)].astype(int)
    high = rgb[row, int(box.x1 + centre)].astype(int)
    assert np.abs(low - lut.rgb8[lut.outside_low_index]).max() <= TOL
    assert np.abs(high - lut.rgb8[lut.outside_high_index]).max() <= TOL
    # the squares stand apart from the bar: paper in the gap between them
    gap = END_GAP / 2 * DPI
    assert rgb[row, int(box.x0 - gap)].min() >= 250 and rgb[row, int(box.x1 + gap)].min() >= 250


@pytest.mark.parametrize("name, pretty", [("land-productivity", "Land productivity"),
                                          ("town_names", "Town names"), ("sst", "Sst")])
def test_titles_come_from_layer_names(name, pretty):
    assert pretty_name(name) == pretty


def _text_boxes(fig):
    """Every text of a drawn legend figure with its box in pixels, as matplotlib's Agg renderer
    lays it out."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    agg = FigureCanvasAgg(fig)
    agg.draw()
    renderer = agg.get_renderer()
    return [(t.get_text(), t.get_window_extent(renderer)) for ax in fig.axes for t in ax.texts
            if t.get_text().strip()]


@pytest.mark.parametrize("breaks,fmt", [
    ("[12500, 25000, 37500, 50000, 62500, 75000, 87500]", ",.0f"),
    ("[1, 2, 4, 7]", ".3f"),
])
def test_axis_labels_never_overlap(tmp_path, breaks, fmt):
    """Class edges of wide numbers ("10,000" at every tenth of the bar) printed over one
    another; labels that would touch their neighbour are left out (the ends always kept), and no
    two texts of the legend overlap, measured by matplotlib's own renderer."""
    from compose.output.legend import legend_figure

    path = tiny_style(tmp_path / "data")
    text = path.read_text()
    text = text.replace('domain  = [0, 10]\nbreaks  = [1, 2, 4, 7]',
                        f'domain  = [0, 100000]\nbreaks  = {breaks}'.replace(
                            "100000", "100000" if "12500" in breaks else "10"))
    text = text.replace('ramp    = "classes5"\n',
                        f'ramp    = "classes5"\nlegend  = {{ format = "{fmt}" }}\n')
    path.write_text(text)
    style = load_style(path)
    run_ = prepare(style)
    try:
        fig, _ = legend_figure(style, run_.ramps, run_.layers)
        boxes = _text_boxes(fig)
    finally:
        run_.close()
    labels = [s for s, _ in boxes]
    assert ("0" if fmt == ",.0f" else "0.000") in labels
    assert ("100,000" if fmt == ",.0f" else "10.000") in labels      # both ends kept
    for (sa, a), (sb, b) in __import__("itertools").combinations(boxes, 2):
        assert not a.overlaps(b), (sa, sb)


def test_a_mark_writes_its_number_as_the_axis_does(tmp_path):
    """The threshold's mark over the bar and the tick under it in the layer's legend.format
    ("threshold 6.0" over "6.0"; the mark said "threshold 6" over "6.0")."""
    from compose.output.legend import legend_figure

    path = tiny_style(tmp_path / "data")
    path.write_text(path.read_text().replace(
        'ramp    = "warmth"\n', 'ramp    = "warmth"\nlegend  = { format = ".1f" }\n'))
    style = load_style(path)
    run_ = prepare(style)
    try:
        fig, _ = legend_figure(style, run_.ramps, run_.layers)
        labels = [s for s, _ in _text_boxes(fig)]
    finally:
        run_.close()
    assert "threshold 6.0" in labels and "6.0" in labels and "threshold 6" not in labels
