"""Legend keys of raster layers: title, units, number format, which classes to show, and the
no-data swatch only for layers with no-data pixels on the map."""
from __future__ import annotations

import pytest

from compose.engine import prepare
from compose.errors import StyleError
from compose.output.legend import legend_figure
from compose.output.legend_layout import ClassesBlock, RampsBlock, _unsigned_zero, legend_layout
from compose.style import load_style
from tests.output._tiny import tiny_style


def _prepared(tmp_path, land_key="", cover_key=""):
    path = tiny_style(tmp_path)
    text = path.read_text()
    text = text.replace('ramp   = "land"\n', f'ramp   = "land"\n{land_key}\n', 1)
    text = text.replace('ramp    = "cover"\n', f'ramp    = "cover"\n{cover_key}\n', 1)
    path.write_text(text)
    return prepare(load_style(path))


def test_title_units_and_format(tmp_path):
    run_ = _prepared(tmp_path, 'legend = { title = "Growth", units = "g m\u207b\u00b2", format = ".1f" }')
    try:
        blocks = legend_layout(run_.style, run_.ramps, run_.layers).blocks
        ramps = [b for b in blocks if isinstance(b, RampsBlock) and "land-growth" in
                 [la.spec.name for la in b.layers]][0]
        assert ramps.title == "Growth (g m\u207b\u00b2)"
        assert ramps.fmt(2.5) == "2.5" and ramps.fmt(-3) == "\u22123.0"
        legend_figure(run_.style, run_.ramps, run_.layers)      # draws with the keys
    finally:
        run_.close()


def test_signed_format_writes_zero_without_a_sign(tmp_path):
    # common practice, no source: a diverging scale's centre reads 0, not +0.0 or -0.0
    run_ = _prepared(tmp_path, 'legend = { format = "+.1f" }')
    try:
        ramps = [b for b in legend_layout(run_.style, run_.ramps, run_.layers).blocks
                 if isinstance(b, RampsBlock) and "land-growth" in
                 [la.spec.name for la in b.layers]][0]
        assert [ramps.fmt(v) for v in (0.0, 0.04, -0.04, 2.5, -3)] == \
            ["0.0", "0.0", "0.0", "+2.5", "\u22123.0"]
    finally:
        run_.close()
    assert _unsigned_zero("+0.0e+00") == "0.0e+00" and _unsigned_zero("+0%") == "0%"
    assert _unsigned_zero("+10.0") == "+10.0" and _unsigned_zero("  +0.0") == "  0.0"


def test_classes_shown_and_nodata_only_where_seen(tmp_path):
    run_ = _prepared(tmp_path, cover_key='legend = { show = [1, 3] }')
    try:
        cover = [b for b in legend_layout(run_.style, run_.ramps, run_.layers).blocks
                 if isinstance(b, ClassesBlock)][0]
        assert [c.value for kind, c in cover.rows if kind == "class"] == [1, 3]
        with_nd = legend_layout(run_.style, run_.ramps, run_.layers, nodata_seen=None)
        without = legend_layout(run_.style, run_.ramps, run_.layers, nodata_seen=set())
        assert any(b.swatches for b in with_nd.blocks if hasattr(b, "swatches"))
        assert not any(b.swatches for b in without.blocks if hasattr(b, "swatches"))
        assert without.height < with_nd.height
    finally:
        run_.close()


def test_bad_format_names_the_key(tmp_path):
    with pytest.raises(StyleError, match='legend.format'):
        _prepared(tmp_path, 'legend = { format = "%d" }')
