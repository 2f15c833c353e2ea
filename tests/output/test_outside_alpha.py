"""``map.outside = "transparent"``: NAME.tif (plain or COG) carries alpha 0 where no raster layer
has data and 255 where one has; the RGB and the PNG stay as drawn; any worker count agrees.

Outside references: GDAL's COG driver recognises the file (IMAGE_STRUCTURE LAYOUT=COG), and the
footprint is checked against the DEM reprojected onto the canvas by rasterio/GDAL's warper
(nearest neighbour), away from its edge pixels.
"""
from __future__ import annotations

import numpy as np
import pyproj
import rasterio
from affine import Affine
from rasterio.warp import Resampling, reproject

from compose.parallel import ThreadMapper
from compose.render import render_style
from compose.style import load_style
from tests.sources._files import write_raster, write_vector

UTM = "EPSG:32630"


def _style(tmp_path, outside: str) -> object:
    """A DEM covering only the east part of the canvas, and a line crossing the whole canvas."""
    lon0, lat0, step = -3.30, 45.00, 0.0008
    y, x = np.mgrid[0:120, 0:150].astype("float32")
    dem = 300 + 150 * np.sin(x / 13.0) * np.cos(y / 19.0)
    dem[50:60, 100:110] = -9999                     # a hole of no data inside
    write_raster(tmp_path / "dem.tif", dem.astype("float32"), crs="EPSG:4326",
                 transform=Affine(step, 0, lon0, 0, -step, lat0), nodata=-9999)
    t = pyproj.Transformer.from_crs("EPSG:4326", UTM, always_xy=True)
    x0, y0 = t.transform(lon0 - 0.03, lat0 - 0.09)
    x0, y0 = round(x0 / 30) * 30, round(y0 / 30) * 30
    extent = [x0, y0, x0 + 30 * 260, y0 + 30 * 200]
    line = {"type": "LineString", "coordinates": [(lon0 - 0.05, lat0 - 0.05), (lon0 + 0.2, lat0 - 0.05)]}
    write_vector(tmp_path / "v.gpkg", [(line, {"kind": "road"})], crs="EPSG:4326",
                 properties={"kind": "str"}, table="lines")
    path = tmp_path / f"{outside}.toml"
    path.write_text(f'''
[map]
name = "{outside}"
crs = "{UTM}"
extent = {extent}
pixel = 30
dpi = 150
background = "#f4f1ea"
outside = "{outside}"

[[layer]]
name = "relief"
role = "ground"
kind = "relief"
source = "dem.tif"

[[layer]]
name = "road"
role = "overlay"
kind = "lines"
source = "v.gpkg"
stroke = "#303030"
width = 1.0
''')
    return load_style(path)


def _dem_on_canvas(tmp_path, style) -> np.ndarray:
    canvas = style.canvas()
    out = np.full((canvas.height, canvas.width), np.nan, np.float32)
    with rasterio.open(tmp_path / "dem.tif") as ds:
        reproject(rasterio.band(ds, 1), out, dst_transform=canvas.transform, dst_crs=canvas.crs,
                  dst_nodata=np.nan, resampling=Resampling.nearest)
    return out


def test_cog_alpha_is_zero_outside_the_data_and_opaque_inside(tmp_path):
    style = _style(tmp_path, "transparent")
    res = render_style(style, tmp_path / "out", legend=False, html=False, check=False, cog=True,
                       window=64)
    with rasterio.open(res.outputs["tif"]) as ds:
        assert ds.tags(ns="IMAGE_STRUCTURE").get("LAYOUT") == "COG"
        assert ds.count == 4 and ds.colorinterp[3].name == "alpha"
        rgba = ds.read()
    alpha = rgba[3]
    assert set(np.unique(alpha).tolist()) == {0, 255}
    dem = _dem_on_canvas(tmp_path, style)
    valid = np.isfinite(dem)
    # away from the data's edge (bilinear reading and the hillshade kernel reach 2 px)
    from scipy import ndimage

    inside = ndimage.binary_erosion(valid, iterations=3)
    outside = ~ndimage.binary_dilation(valid, iterations=3)
    assert inside.sum() > 1000 and outside.sum() > 1000
    assert (alpha[inside] == 255).all()
    assert (alpha[outside] == 0).all()          # the road crosses it: still outside the data
    # the pixels are the map as drawn: the same RGB as a render without the alpha, same PNG
    plain = render_style(_style(tmp_path, "background"), tmp_path / "plain", legend=False,
                         html=False, check=False, cog=True, window=64)
    with rasterio.open(plain.outputs["tif"]) as ds:
        opaque = ds.read()
    # (an opaque map is written as RGB: three bands, no alpha)
    assert opaque.shape[0] == 3
    np.testing.assert_array_equal(opaque, rgba[:3])
    # worker threads give the same file
    again = render_style(style, tmp_path / "threads", legend=False, html=False, check=False,
                         cog=True, mapper=ThreadMapper(2, in_flight=3), window=64)
    with rasterio.open(again.outputs["tif"]) as ds:
        np.testing.assert_array_equal(ds.read(), rgba)


def test_outside_takes_only_its_two_values(tmp_path):
    import pytest

    from compose.errors import StyleError

    path = tmp_path / "s.toml"
    _style(tmp_path, "transparent")
    text = (tmp_path / "transparent.toml").read_text().replace('outside = "transparent"',
                                                               'outside = "clear"')
    path.write_text(text)
    with pytest.raises(StyleError, match="outside"):
        load_style(path)
