"""The whole pipeline on tiny real files: seams, georeferencing, outputs."""
from __future__ import annotations

import numpy as np
import pyproj
import pytest
import rasterio
from affine import Affine
from PIL import Image

from compose.engine import ArraySink, prepare, render_array, run
from compose.render import render_style
from compose.style import load_style
from tests.sources._files import write_vector

UTM = "EPSG:32630"


def _render(style, window):
    run_ = prepare(load_style(style))
    try:
        sink = ArraySink(run_.canvas)
        stats = run(run_, [sink], window=window)
        return sink.image, stats
    finally:
        run_.close()


def test_windows_equal_one_piece(tiny_region):
    """A canvas rendered in windows equals the same canvas rendered whole (no seams)."""
    whole, s1 = _render(tiny_region, 4096)
    tiled, s2 = _render(tiny_region, 64)
    diff = np.abs(whole.astype(int) - tiled.astype(int))
    # Rasters match exactly; antialiased strokes may differ by one 8-bit code where the
    # sub-pixel position of a vertex rounds differently relative to another window origin.
    assert diff.max() <= 1, f"seam: max difference {diff.max()} codes"
    assert (diff > 0).mean() < 1e-2
    for a, b in zip(s1.layers, s2.layers):
        assert a.covered == pytest.approx(b.covered, rel=1e-4)


def test_outputs_georeferenced_and_equal(tiny_region, tmp_path):
    """GeoTIFF CRS/transform/size equal the canvas; PNG pixels equal the GeoTIFF's RGB."""
    style = load_style(tiny_region)
    result = render_style(style, tmp_path / "out", legend=False)
    canvas = style.canvas()
    with rasterio.open(result.outputs["tif"]) as ds:
        assert ds.crs == rasterio.crs.CRS.from_user_input(UTM)
        assert ds.transform == canvas.transform
        assert (ds.width, ds.height) == (canvas.width, canvas.height)
        rgb = np.moveaxis(ds.read([1, 2, 3]), 0, -1)
    png = np.asarray(Image.open(result.outputs["png"]).convert("RGB"))
    np.testing.assert_array_equal(png, rgb)
    assert result.outputs["check"].exists()


def test_line_lands_where_pyproj_says(tmp_path):
    """A line given in EPSG:4326 lands on the canvas pixels that pyproj + the inverse affine predict."""
    lon, lat0, lat1 = -3.0, 45.02, 45.08
    write_vector(tmp_path / "l.gpkg", [({"type": "LineString", "coordinates": [(lon, lat0), (lon, lat1)]},
                                        {"k": "a"})], crs="EPSG:4326", properties={"k": "str"}, table="l")
    t = pyproj.Transformer.from_crs("EPSG:4326", UTM, always_xy=True)
    xa, ya = t.transform(lon, lat0)
    xb, yb = t.transform(lon, lat1)
    x0, y0 = np.floor(min(xa, xb) / 30) * 30 - 3000, np.floor(ya / 30) * 30 - 600
    (tmp_path / "l.toml").write_text(f'''
[map]
crs = "{UTM}"
extent = [{x0}, {y0}, {x0 + 6000}, {y0 + 8400}]
pixel = 30
dpi = 72
background = "#ffffff"
[[layer]]
name = "l"
role = "overlay"
kind = "lines"
source = "l.gpkg"
stroke = "#000000"
width = 1
''')
    img, _ = render_array(load_style(tmp_path / "l.toml"))
    dark = img[..., 0] < 128
    inv = ~Affine(30, 0, x0, 0, -30, y0 + 8400)
    for frac in (0.25, 0.5, 0.75):
        lat = lat0 + frac * (lat1 - lat0)
        x, y = t.transform(lon, lat)
        col, row = inv @ (x, y)
        r = int(row)
        cols = np.flatnonzero(dark[r])
        assert cols.size >= 1
        assert abs(cols.mean() + 0.5 - col) < 0.75, (cols, col)


def test_quantile_steps_come_from_the_layer_data(tiny_region):
    """step_method = "quantile": each of the 4 classes covers about a quarter of the valid pixels
    (definition of quartiles; tolerance for ties and resampling at the coarse sample)."""
    text = tiny_region.read_text().replace('domain = [0, 12]', 'domain = [0, 12]\nsteps = 4\nstep_method = "quantile"')
    tiny_region.write_text(text)
    run_ = prepare(load_style(tiny_region))
    try:
        field = run_.layers[1]
        assert field.lut.stepped and field.lut.n == 4
        window = run_.canvas.whole()
        values = field.source.read_window(run_.canvas, window)
        idx = field.lut.index(values[np.isfinite(values)])
        shares = np.bincount(idx, minlength=4)[:4] / idx.size
        np.testing.assert_allclose(shares, 0.25, atol=0.05)
    finally:
        run_.close()


def test_area_fill_and_outline(tmp_path):
    """An areas layer: the fill covers the square's pixels (its area in pixels, within 2 %),
    the outline and halo draw on its edge only."""
    x0, y0 = 500000.0, 4000000.0
    sq = {"type": "Polygon", "coordinates": [[(x0 + 300, y0 + 300), (x0 + 1500, y0 + 300),
                                             (x0 + 1500, y0 + 1500), (x0 + 300, y0 + 1500),
                                             (x0 + 300, y0 + 300)]]}
    write_vector(tmp_path / "a.gpkg", [(sq, {"k": "a"})], crs=UTM, properties={"k": "str"}, table="a")
    (tmp_path / "a.toml").write_text(f'''
[map]
crs = "{UTM}"
extent = [{x0}, {y0}, {x0 + 1800}, {y0 + 1800}]
pixel = 30
dpi = 72
background = "#ffffff"
[[layer]]
name = "a"
role = "overlay"
kind = "areas"
source = "a.gpkg"
fill = "#000000"
stroke = "#ff0000"
width = 2
halo = {{ color = "#00ff00", width = 6 }}
''')
    img, stats = render_array(load_style(tmp_path / "a.toml"), measure=True)
    parts = stats.layer("a").parts
    assert set(parts) == {"fill", "halo", "stroke"}
    assert parts["fill"].weights.sum() == pytest.approx(40 * 40, rel=0.02)
    centre = img[30, 30]
    assert tuple(centre) == (0, 0, 0)
    assert (img[50, 20:40, 0] > 150).all()       # red stroke on the southern edge (row 50)
    assert tuple(img[2, 2]) == (255, 255, 255)   # untouched background
