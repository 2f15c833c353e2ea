"""Vector layers draw on a fixed grid of tiles (compose.layers.vector.TILE): the rendered map is
byte-identical for every window size made of whole tiles (256, 512, 1024 px and the whole canvas),
with lines (plain, dashed, with halos), polygon outlines and fills, and point markers."""
from __future__ import annotations

import numpy as np
import pytest

from compose.engine import ArraySink, prepare, run
from compose.layers.vector import TILE
from compose.render import render_style
from compose.style import load_style
from tests.sources._files import write_vector

UTM = "EPSG:32630"
X0, Y0, PX = 400000.0, 4600000.0, 30.0
W, H = 700, 560          # not a multiple of the tile: the last tiles end at the canvas edge


def _walks(rng, n, steps, sigma):
    """Random walks in CRS units: many sharp turns and self-crossings, some leaving the canvas."""
    start = rng.uniform([X0 - 20 * PX, Y0 - (H + 20) * PX], [X0 + (W + 20) * PX, Y0 + 20 * PX], (n, 2))
    return start[:, None, :] + np.cumsum(rng.normal(0, sigma, (n, steps, 2)), axis=1)


@pytest.fixture
def dense(tmp_path):
    rng = np.random.default_rng(11)
    lines = [({"type": "LineString", "coordinates": w.tolist()}, {"k": i % 3})
             for i, w in enumerate(_walks(rng, 400, 60, 8 * PX))]
    write_vector(tmp_path / "v.gpkg", lines, crs=UTM, properties={"k": "int"}, table="lines")
    polys = []
    for cx, cy in rng.uniform([X0, Y0 - H * PX], [X0 + W * PX, Y0], (40, 2)):
        a = np.sort(rng.uniform(0, 2 * np.pi, 9))
        r = rng.uniform(20, 90, 9) * PX
        ring = np.column_stack([cx + r * np.cos(a), cy + r * np.sin(a)])
        polys.append(({"type": "Polygon", "coordinates": [ring.tolist() + [ring[0].tolist()]]}, {"k": 0}))
    write_vector(tmp_path / "v.gpkg", polys, crs=UTM, properties={"k": "int"}, table="areas")
    pts = [({"type": "Point", "coordinates": p.tolist()}, {"k": 0})
           for p in rng.uniform([X0, Y0 - H * PX], [X0 + W * PX, Y0], (300, 2))]
    write_vector(tmp_path / "v.gpkg", pts, crs=UTM, properties={"k": "int"}, table="points")
    style = tmp_path / "dense.toml"
    style.write_text(f'''
[map]
name = "dense"
title = "dense"
crs = "{UTM}"
extent = [{X0}, {Y0 - H * PX}, {X0 + W * PX}, {Y0}]
pixel = {PX}
dpi = 150
background = "#f5f2e6"

[[layer]]
name = "areas"
role = "overlay"
kind = "areas"
source = "v.gpkg"
table = "areas"
fill = "#d8c8a0"
stroke = "#806040"
width = 0.8
halo = {{ color = "#ffffff", width = 2 }}

[[layer]]
name = "roads"
role = "overlay"
kind = "lines"
source = "v.gpkg"
table = "lines"
where = {{ k = [0, 1] }}
stroke = "#303030"
width = 0.6
halo = {{ color = "#ffffff", width = 1.8 }}

[[layer]]
name = "tracks"
role = "overlay"
kind = "lines"
source = "v.gpkg"
table = "lines"
where = {{ k = 2 }}
stroke = "#a03020"
width = 1.0
dash = [3, 2]
halo = {{ color = "#ffffff", width = 2.4 }}

[[layer]]
name = "edges"
role = "overlay"
kind = "lines"
source = "v.gpkg"
table = "areas"
stroke = "#2040a0"
width = 0.5

[[layer]]
name = "wells"
role = "overlay"
kind = "points"
source = "v.gpkg"
table = "points"
fill = "#2060c0"
stroke = "#ffffff"
size = 3
width = 0.6
''')
    return style


def _image(style, window):
    prepared = prepare(load_style(style))
    try:
        sink = ArraySink(prepared.canvas)
        run(prepared, [sink], measure=False, window=window)
        return sink.image
    finally:
        prepared.close()


def test_every_window_size_made_of_tiles_gives_the_same_pixels(dense):
    images = {w: _image(dense, w) for w in (TILE, 2 * TILE, 4 * TILE)}
    ink = (images[TILE] != images[TILE][0:1, 0:1]).any(axis=2).mean()
    assert ink > 0.3          # the layers drew (a blank map would pass the comparison)
    for w in (2 * TILE, 4 * TILE):
        np.testing.assert_array_equal(images[w], images[TILE])


def test_png_bytes_equal_for_256_and_512_px_windows(dense, tmp_path):
    out = {}
    for w in (256, 512):
        res = render_style(load_style(dense), tmp_path / f"out{w}", legend=False, html=False,
                           check=False, window=w)
        out[w] = res.outputs["png"].read_bytes()
    assert out[256] == out[512]


def test_windows_off_the_tile_grid_still_join(dense):
    # a window size that is not a multiple of the tile draws each window as a tile of its own:
    # its seams move, so antialiased coverage may differ where Agg cut a path at a raster edge
    # (our own tolerance, no source: almost all pixels equal)
    tiled, odd = _image(dense, TILE), _image(dense, 100)
    diff = np.abs(tiled.astype(int) - odd.astype(int)).max(axis=2)
    assert (diff > 1).mean() < 2e-3
