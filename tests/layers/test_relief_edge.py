"""The relief at the canvas edge reads the terrain beyond it: no frame of wrong shade.

A relief rendered on a canvas must equal, pixel for pixel, the same part of a relief rendered on
a larger canvas around it (edges included): the hillshade kernel sees real neighbours at the
canvas edge exactly as it does at a seam between windows.
"""
from __future__ import annotations

import numpy as np
from affine import Affine

from compose.canvas import Canvas
from compose.engine import render_array
from compose.style import load_style
from tests.sources._files import write_raster


def test_relief_edge_equals_interior_of_a_larger_canvas(tmp_path):
    y, x = np.mgrid[0:200, 0:200].astype("float32")
    dem = 400 + 150 * np.sin(x / 9.0) * np.cos(y / 13.0) + 3 * x
    write_raster(tmp_path / "dem.tif", dem, crs="EPSG:32630",
                 transform=Affine(30, 0, 500_000, 0, -30, 4_806_000))
    (tmp_path / "r.toml").write_text('''
[map]
crs = "EPSG:32630"
extent = [501500, 4801500, 504500, 4804500]
pixel = 30

[[layer]]
name = "relief"
role = "ground"
kind = "relief"
source = "dem.tif"
strength = 1.0
shade = { exaggeration = 3, stretch = "none" }   # a fixed shading: the edge alone is tested
''')
    style = load_style(tmp_path / "r.toml")
    small = style.canvas()
    assert small.width == small.height == 100
    pad = 10
    big = Canvas(small.crs, small.transform @ Affine.translation(-pad, -pad),
                 small.width + 2 * pad, small.height + 2 * pad, small.dpi)
    a, _ = render_array(style, canvas=small)
    b, _ = render_array(style, canvas=big)
    np.testing.assert_array_equal(a, b[pad:-pad, pad:-pad])
