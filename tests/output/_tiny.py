"""A tiny real style (64 x 64 canvas) with every legend element, built in a test's tmp_path:
relief, twin fields (land / water on one scale), a stepped field, a threshold field, a class
raster with families, and line / point / label overlays over real GeoTIFFs and a GeoPackage."""
from __future__ import annotations

import textwrap
from pathlib import Path

import numpy as np
from affine import Affine

from tests.sources._files import write_raster, write_vector

CRS = "EPSG:32631"
WEST, NORTH, PIXEL, SIZE = 500000.0, 4001920.0, 30.0, 64

STYLE = """
[map]
name       = "tiny"
title      = "Tiny test map"
crs        = "EPSG:32631"
extent     = [500000, 4000000, 501920, 4001920]
pixel      = 30
dpi        = 150

[ramp.land]
kind    = "sequential"
domain  = [0, 10]
through = [{ L = 95, C = 12, h = 100 }, { L = 63, C = 36, h = 135 }, { L = 30, C = 22, h = 160 }]

[ramp.water]
twin = "land"
hue  = [190, 235]

[ramp.classes5]
kind    = "sequential"
domain  = [0, 10]
breaks  = [1, 2, 4, 7]
through = [{ L = 92, C = 15, h = 80 }, { L = 40, C = 35, h = 30 }]

[ramp.warmth]
kind   = "threshold"
domain = [0, 10]
at     = 6
below  = [{ L = 92, C = 10, h = 200 }, { L = 66, C = 28, h = 235 }]
above  = [{ L = 64, C = 55, h = 55 }, { L = 40, C = 50, h = 35 }]

[ramp.cover]
kind    = "qualitative"
classes = [
  { value = 1, label = "Forest",  color = { L = 40, C = 30, h = 145 }, family = "woody" },
  { value = 2, label = "Shrub",   color = { L = 62, C = 35, h = 115 }, family = "woody" },
  { value = 3, label = "Field",   color = { L = 88, C = 45, h = 98 } },
]

[[layer]]
name   = "relief"
role   = "ground"
kind   = "relief"
source = "dem.tif"

[[layer]]
name   = "land-growth"
role   = "theme"
kind   = "field"
source = "land.tif"
ramp   = "land"
nodata = "transparent"
blend  = "multiply"

[[layer]]
name   = "water-growth"
role   = "theme"
kind   = "field"
source = "water.tif"
ramp   = "water"
nodata = "transparent"
blend  = "multiply"
"""

EXTRA = """
[[layer]]
name    = "growth-classes"
role    = "theme"
kind    = "field"
source  = "land.tif"
ramp    = "classes5"
opacity = 0.2

[[layer]]
name    = "warmth"
role    = "theme"
kind    = "field"
source  = "water.tif"
ramp    = "warmth"
opacity = 0.2

[[layer]]
name    = "cover"
role    = "theme"
kind    = "classes"
source  = "cover.tif"
ramp    = "cover"
opacity = 0.2
"""

OVERLAYS = """
[[layer]]
name   = "coast"
role   = "overlay"
kind   = "lines"
source = "vectors.gpkg"
table  = "coast"
stroke = "#2f3a44"
width  = 0.8
halo   = { color = "#fbfaf6", width = 1.8 }

[[layer]]
name   = "towns"
role   = "overlay"
kind   = "points"
source = "vectors.gpkg"
table  = "towns"

[[layer]]
name     = "town-names"
role     = "overlay"
kind     = "labels"
source   = "vectors.gpkg"
table    = "towns"
text     = "name"
size     = 6
halo     = { color = "#ffffff", width = 1.2 }
"""


def _transform() -> Affine:
    return Affine(PIXEL, 0, WEST, 0, -PIXEL, NORTH)


def write_data(folder: Path) -> None:
    """The rasters and vectors the tiny style reads (land on the west half, water on the east)."""
    y, x = np.mgrid[0:SIZE, 0:SIZE].astype(np.float32)
    dem = 300 * np.exp(-((x - 20) ** 2 + (y - 30) ** 2) / 300.0) + 2 * x
    land = np.where(x < 34, x / 33 * 10, np.nan).astype(np.float32)
    water = np.where(x >= 34, (x - 34) / 29 * 10, np.nan).astype(np.float32)
    cover = np.where(x < 34, 1 + (y // 22), 0).astype(np.uint8)
    t = _transform()
    write_raster(folder / "dem.tif", dem.astype(np.float32), crs=CRS, transform=t, nodata=-9999.0)
    write_raster(folder / "land.tif", land, crs=CRS, transform=t, nodata=float("nan"))
    write_raster(folder / "water.tif", water, crs=CRS, transform=t, nodata=float("nan"))
    write_raster(folder / "cover.tif", cover, crs=CRS, transform=t, nodata=0)
    cx = WEST + 34 * PIXEL
    write_vector(folder / "vectors.gpkg",
                 [({"type": "LineString", "coordinates": [(cx, NORTH - 30), (cx, NORTH - 1890)]},
                   {"kind": "coast"})],
                 crs=CRS, properties={"kind": "str"}, table="coast")
    towns = [((WEST + 300, NORTH - 600), "Alpha"), ((WEST + 700, NORTH - 1400), "Beta")]
    write_vector(folder / "vectors.gpkg",
                 [({"type": "Point", "coordinates": p}, {"name": n}) for p, n in towns],
                 crs=CRS, properties={"name": "str"}, table="towns")


def tiny_style(folder: Path, *, extra: bool = True, overlays: bool = True) -> Path:
    """Write the data and the style into ``folder``; returns the style path."""
    folder.mkdir(parents=True, exist_ok=True)
    write_data(folder)
    text = STYLE + (EXTRA if extra else "") + (OVERLAYS if overlays else "")
    path = folder / "tiny.toml"
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path
