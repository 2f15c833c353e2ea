"""The canvas from data: ``like``, ``width``, ``extent_crs`` and the notes on rounding.

Outside references: rasterio writes the source files (their grid is what ``like`` must copy),
pyproj transforms the lon/lat extent independently of the code under test.
"""
from __future__ import annotations

import numpy as np
import pyproj
import pytest
from affine import Affine

from compose.errors import SourceError, StyleError
from compose.style import load_style
from tests.sources._files import write_raster, write_vector

UTM = "EPSG:32631"


@pytest.fixture
def dem(tmp_path):
    data = np.random.default_rng(0).random((80, 120)).astype("float32") * 500
    return write_raster(tmp_path / "dem.tif", data, crs=UTM,
                        transform=Affine(25, 0, 500_000, 0, -25, 4_002_000))


def _style(tmp_path, map_body: str, layers: str | None = None):
    layers = layers if layers is not None else '''
[[layer]]
name = "terrain"
role = "ground"
kind = "relief"
source = "dem.tif"
'''
    path = tmp_path / "s.toml"
    path.write_text(f"[map]\n{map_body}\n{layers}")
    return load_style(path)


def test_like_copies_crs_extent_and_pixel(tmp_path, dem):
    plan = _style(tmp_path, 'like = "terrain"').canvas_plan()
    c = plan.canvas
    assert pyproj.CRS(c.crs) == pyproj.CRS(UTM)
    assert (c.width, c.height, c.pixel) == (120, 80, 25.0)
    assert c.bounds == (500_000, 4_000_000, 503_000, 4_002_000)
    assert plan.notes == ()


def test_like_with_a_south_up_source(tmp_path):
    data = np.zeros((80, 120), "float32")
    write_raster(tmp_path / "dem.tif", data, crs=UTM, transform=Affine(25, 0, 500_000, 0, 25, 4_000_000))
    c = _style(tmp_path, 'like = "terrain"').canvas()
    assert c.bounds == (500_000, 4_000_000, 503_000, 4_002_000) and c.transform.e == -25


def test_like_with_stated_pixel_and_crs(tmp_path, dem):
    c = _style(tmp_path, 'like = "terrain"\npixel = 50').canvas()
    assert (c.width, c.height) == (60, 40)
    c = _style(tmp_path, 'like = "terrain"\ncrs = "EPSG:3035"').canvas()
    assert pyproj.CRS(c.crs) == pyproj.CRS("EPSG:3035")
    # the footprint transformed to LAEA: its box is a little larger than the source (rotation)
    assert 120 <= c.width <= 140 and 80 <= c.height <= 100


def test_width_replaces_pixel(tmp_path, dem):
    plan = _style(tmp_path, 'crs = "EPSG:32631"\nextent = [500000, 4000000, 503000, 4002000]\n'
                            "width = 600").canvas_plan()
    assert plan.canvas.pixel == 5.0 and (plan.canvas.width, plan.canvas.height) == (600, 400)
    assert plan.notes == ()
    plan = _style(tmp_path, 'like = "terrain"\nwidth = 1000').canvas_plan()
    assert plan.canvas.width == 1000 and plan.canvas.pixel == 3.0
    assert plan.canvas.height == 667                        # 2000 / 3 = 666.7 rounded up
    assert plan.notes == ("map.extent: south edge moved from 4000000 to 3999999 to fit 667 whole "
                          "pixels of 3",)


def test_rounding_is_noted(tmp_path, dem):
    plan = _style(tmp_path, 'crs = "EPSG:32631"\nextent = [500000, 4000000, 503010, 4002010]\n'
                            "pixel = 30").canvas_plan()
    assert plan.canvas.width == 101
    assert plan.notes == ("map.extent: east edge moved from 503010 to 503030 to fit 101 whole "
                          "pixels of 30",)


def test_extent_in_another_crs(tmp_path, dem):
    lonlat = [3.0, 36.1, 3.05, 36.14]
    plan = _style(tmp_path, f'crs = "EPSG:32631"\nextent = {lonlat}\nextent_crs = "EPSG:4326"\n'
                            "pixel = 10").canvas_plan()
    t = pyproj.Transformer.from_crs("EPSG:4326", UTM, always_xy=True)
    xs, ys = t.transform([3.0, 3.05, 3.0, 3.05], [36.1, 36.1, 36.14, 36.14])
    west, south, east, north = plan.canvas.bounds
    assert west == pytest.approx(min(xs), abs=0.01) and north == pytest.approx(max(ys), abs=0.01)
    assert east >= max(xs) - 0.01 and south <= min(ys) + 0.01
    assert any("in EPSG:4326 is" in n for n in plan.notes)


@pytest.mark.parametrize("crs,extent,refused", [
    # EPSG's own range of a geographic CRS: longitude -180..180 degrees (here up to 360 too,
    # for maps across the antimeridian), latitude -90..90 (EPSG geodetic registry, EPSG:4326)
    ("EPSG:4326", [500000, 4000000, 503000, 4002000], True),      # metres written as degrees
    ("EPSG:4326", [3.0, 36.1, 3.05, 36.14], False),
    ("EPSG:4326", [170.0, -10.0, 190.0, 10.0], False),           # across the antimeridian
    ("EPSG:4326", [3.0, 89.0, 4.0, 91.0], True),
    ("EPSG:4258", [-200.0, 40.0, -190.0, 41.0], True),           # another geographic CRS
    ("EPSG:32631", [500000, 4000000, 503000, 4002000], False),   # projected: metres are fine
])
def test_a_geographic_extent_outside_longitude_and_latitude_is_refused(tmp_path, dem, crs, extent,
                                                                      refused):
    """A map in a geographic CRS whose extent is not a longitude / latitude range (most often
    metres of a projected CRS) is refused at map.extent when its sources are found not to
    overlap it; it used to end as "does not overlap the map extent" for the first layer read."""
    from compose.sources.raster import RasterSource

    body = f'crs = "{crs}"\nextent = {extent}\npixel = {(extent[2] - extent[0]) / 30}'
    canvas = _style(tmp_path, body).canvas()
    with RasterSource(dem, layer="terrain") as src:
        if refused:
            with pytest.raises(StyleError, match=rf"map\.extent: .* is not a longitude and "
                                                 rf"latitude range: {crs} is a geographic CRS"):
                src.check_overlap(canvas)
        else:
            try:
                src.check_overlap(canvas)
            except SourceError as exc:
                assert "does not overlap the map extent" in str(exc)


def test_no_overlap_names_the_maps_extent_beside_the_sources(tmp_path, dem):
    """The overlap error shows both boxes, so a map extent in the wrong units is seen at once."""
    style = _style(tmp_path, 'crs = "EPSG:32631"\nextent = [3, 36, 4, 37]\npixel = 0.01')
    from compose.sources.raster import RasterSource
    with RasterSource(dem, layer="terrain") as src:
        with pytest.raises(SourceError, match=r"does not overlap the map extent \(source bounds "
                                              r"500000, 4e\+06, 503000, 4\.002e\+06 in EPSG:32631; "
                                              r"the map's 3, 36, 4, 37 in EPSG:32631\)"):
            src.check_overlap(style.canvas())


@pytest.mark.parametrize("body,message", [
    ('like = "nothing"', 'map.like: no enabled layer named "nothing"; layers: terrain'),
    ('crs = "EPSG:32631"\nextent = [0, 0, 10, 10]\npixel = 1\nwidth = 10',
     "map: give pixel (CRS units per pixel) or width (pixels across), not both"),
    ('crs = "EPSG:32631"\nextent = [0, 0, 10, 10]', "map: missing key 'pixel'"),
])
def test_errors(tmp_path, dem, body, message):
    with pytest.raises(StyleError, match=message.replace("(", r"\(").replace(")", r"\)")):
        _style(tmp_path, body)


def test_like_a_vector_layer_is_an_error(tmp_path, dem):
    write_vector(tmp_path / "v.gpkg", [({"type": "Point", "coordinates": (3.0, 36.1)}, {"n": "a"})],
                 crs="EPSG:4326", properties={"n": "str"})
    lines = '''
[[layer]]
name = "towns"
role = "overlay"
kind = "points"
source = "v.gpkg"
'''
    with pytest.raises(StyleError, match='map.like: layer "towns" is a points layer'):
        _style(tmp_path, 'like = "towns"', lines)


def test_like_a_missing_file_names_the_layer(tmp_path):
    with pytest.raises(SourceError, match='layer "terrain": source not found'):
        _style(tmp_path, 'like = "terrain"').canvas()
