"""CSS Color 4 named colours as colour strings.

Reference: CSS Color Module Level 4 (W3C), section 6.1 "Named Colors" -- 148 names, as
implemented independently by the PyPI packages webcolors (its CSS3 list: the same names minus
``rebeccapurple``, which Level 4 added as #663399) and matplotlib (``matplotlib.colors.CSS4_COLORS``).
"""
from __future__ import annotations

import pytest

from compose.color.css_names import CSS_NAMES, css_named_color
from compose.color.parse import parse_color
from compose.errors import ColorError

webcolors = pytest.importorskip("webcolors")


def test_148_names():
    assert len(CSS_NAMES) == 148


def test_against_webcolors():
    names = set(webcolors.names("css3"))
    assert names | {"rebeccapurple"} == set(CSS_NAMES)
    for name in names:
        expected = tuple(webcolors.name_to_rgb(name, spec="css3"))
        assert CSS_NAMES[name] == expected, name
    assert CSS_NAMES["rebeccapurple"] == (0x66, 0x33, 0x99)     # CSS Color 4, 6.1


def test_against_matplotlib():
    from matplotlib.colors import CSS4_COLORS, to_rgb
    assert set(CSS4_COLORS) == set(CSS_NAMES)
    for name, value in CSS4_COLORS.items():
        assert parse_color(name) == pytest.approx(to_rgb(value), abs=1e-12), name


@pytest.mark.parametrize("text", ["SteelBlue", " steelblue ", "STEELBLUE"])
def test_case_insensitive(text):
    assert parse_color(text) == tuple(v / 255 for v in (70, 130, 180))


def test_not_a_name():
    assert css_named_color("transparent") is None
    with pytest.raises(ColorError, match="'steelbleu' is not a colour \\(did you mean 'steelblue'\\?\\)"):
        parse_color("steelbleu", "layer \"x\": stroke")
