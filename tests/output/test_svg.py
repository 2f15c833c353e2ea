"""The SVG plotting helper of the review page: well-formed SVG (parsed by the standard library's
XML parser), data mapped onto the axes box, round ticks."""
from __future__ import annotations

import xml.etree.ElementTree as ET

from compose.output.svg import Figure, nice_ticks, svg_uri

NS = "{http://www.w3.org/2000/svg}"


def test_a_plot_is_well_formed_svg_with_data_in_place():
    fig = Figure(200, 100)
    ax = fig.axes(20, 10, 180, 90, (0, 10), (0, 1))
    ax.frame([0, 5, 10], [0, 1], "x & y <units>", "share", "#000000", "#eeeeee")
    ax.bars([0, 5], [1, 6], [0.5, 1.0], ["#ff0000", "#00ff00"])
    ax.dot(5, 0.5, 3, "#0000ff")
    root = ET.fromstring(fig.svg())                 # raises on malformed XML or bad escapes
    assert root.tag == NS + "svg" and root.get("width") == "200.0"
    circle = root.find(NS + "circle")
    assert (float(circle.get("cx")), float(circle.get("cy"))) == (100.0, 50.0)
    assert any(t.text == "x & y <units>" for t in root.iter(NS + "text"))
    assert svg_uri(fig.svg()).startswith("data:image/svg+xml;base64,")


def test_log_axis_and_ticks():
    fig = Figure(100, 100)
    ax = fig.axes(0, 0, 100, 100, (1, 100), (0, 1), xlog=True)
    assert abs(ax.x(10) - 50.0) < 1e-9
    assert nice_ticks(0, 100) == [0, 20, 40, 60, 80, 100]
    assert nice_ticks(0, 37, 4) == [0, 10, 20, 30]


def test_colors_to_hex_at_once_match_one_at_a_time():
    """compose.output.html_plots._hexes gives _hex's "#rrggbb" (CSS Color Module Level 4
    hex notation) for every row: random colours inside and outside [0, 1] (clipped) and every
    8-bit code and half step between codes (rounded half to even, as Python's round)."""
    import numpy as np

    from compose.output.html_plots import _hex, _hexes

    rng = np.random.default_rng(1)
    codes = np.arange(256, dtype=float)[:, None] * np.ones(3)
    rgb = np.concatenate([rng.random((20000, 3)) * 1.2 - 0.1, codes / 255, (codes + 0.5) / 255])
    assert _hexes(rgb) == [_hex(c) for c in rgb]
    assert _hexes([[1.0, 0.5, 0.0]]) == ["#ff8000"]      # 0.5 * 255 = 127.5 -> 128 (even)
