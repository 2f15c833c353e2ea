"""Page furniture judged as overlay: a corner box's edge against the map beneath it."""
from __future__ import annotations

import textwrap

import numpy as np

from compose.check import Report
from compose.page.contrast import with_furniture
from compose.page.layout import page_layout
from compose.style import load_style
from tests.output._tiny import tiny_style

PAGE = """
[page]
paper  = "A4"
legend = "top left"
{more}
"""


def _corner_box(tmp_path, rgb, more=""):
    """The result for the corner box's edge of the tiny style's page over a map of one colour."""
    path = tiny_style(tmp_path, extra=False)
    path.write_text(path.read_text() + textwrap.dedent(PAGE.format(more=more)))
    style = load_style(path)
    layout = page_layout(style, (40.0, 30.0))
    image = np.empty((layout.canvas.height, layout.canvas.width, 3), np.uint8)
    image[:] = rgb
    report = with_furniture(Report(style.name, (), ()), style, layout, image)
    return next(r for r in report.rules if r.layer == "page corner box")


def test_a_corner_box_on_a_dark_map_stands_apart_by_its_paper(tmp_path):
    """A paper box with an ink edge over a dark sea (sRGB 20, 30, 60): the ink line (#262626
    by default) is 1.08:1 against it, the white paper 16.4:1 (WCAG 2.1 contrast ratio). The box was
    failed (0 % of its edge reaching 3:1, fix: 'darken page.ink', which cannot help); it stands
    apart from the map by its paper, and passes."""
    result = _corner_box(tmp_path, (20, 30, 60))
    assert result.passed and result.value == 1.0, result.message


def test_a_corner_box_the_map_swallows_still_fails(tmp_path):
    """An ink (#707070) and a paper (#d0d0d0) both under 3:1 against a mid-grey map (#969696:
    about 1.7:1 and 1.9:1 by WCAG 2.1's formula): neither line nor paper tells the box apart."""
    result = _corner_box(tmp_path, (150, 150, 150), 'ink = "#707070"\ncolor = "#d0d0d0"')
    assert not result.passed and result.value == 0.0, result.message
