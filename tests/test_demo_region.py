"""Basic checks of the committed, invented demo region (demo_region/, made by generate.py).

The expected values are the demo region's own specification (invented numbers, no published
source); CRS facts are checked with pyproj and rasterio, the reference libraries.
"""

from __future__ import annotations

from pathlib import Path

import fiona
import numpy as np
import pytest
import rasterio
from pyproj import CRS

DEMO = Path(__file__).resolve().parents[1] / "demo_region"
GRIDDED = ["elevation.tif", "land_productivity.tif", "water_productivity.tif",
           "water_temperature.tif", "anomaly.tif", "landcover.tif"]
ALERT = 26.0   # deg C, the invented coral-stress alert threshold (demo_region/README.md)


def _read(name: str) -> tuple[np.ndarray, dict]:
    with rasterio.open(DEMO / name) as src:
        return src.read(1), dict(src.profile)


@pytest.fixture(scope="module")
def rasters() -> dict[str, tuple[np.ndarray, dict]]:
    return {name: _read(name) for name in GRIDDED}


@pytest.fixture(scope="module")
def elevation(rasters) -> np.ndarray:
    return rasters["elevation.tif"][0]


def test_crs_is_projected_utm_in_metres(rasters):
    for name, (_, prof) in rasters.items():
        crs = CRS.from_user_input(prof["crs"].to_wkt())
        assert crs.is_projected, name
        assert crs.to_epsg() == 32630, name
        assert crs.axis_info[0].unit_name == "metre", name   # pyproj's unit name


def test_grids_identical(rasters):
    ref = rasters["elevation.tif"][1]
    assert (ref["width"], ref["height"]) == (1500, 1500)
    assert ref["transform"].a == 30.0 and ref["transform"].e == -30.0
    for name, (arr, prof) in rasters.items():
        assert prof["transform"] == ref["transform"], name
        assert prof["crs"] == ref["crs"], name
        assert arr.shape == (ref["height"], ref["width"]), name


def test_elevation_range_and_sea(elevation, rasters):
    prof = rasters["elevation.tif"][1]
    assert prof["dtype"] == "float32" and prof["nodata"] == -9999.0
    assert -450.0 < elevation.min() < -300.0
    assert 1600.0 < elevation.max() < 2000.0
    sea = elevation < 0
    assert 0.2 < sea.mean() < 0.5


def test_productivity_complementary(elevation, rasters):
    land, lprof = rasters["land_productivity.tif"]
    water, wprof = rasters["water_productivity.tif"]
    assert np.isnan(lprof["nodata"]) and np.isnan(wprof["nodata"])
    lv, wv = ~np.isnan(land), ~np.isnan(water)
    assert not (lv & wv).any()                      # never both defined
    assert not (lv & (elevation < 0)).any()         # land values only on land
    assert not (wv & (elevation >= 0)).any()        # water values only on water
    gaps = ~lv & ~wv                                # cloud gaps, shared by both
    assert 0.02 < gaps.mean() < 0.12
    for arr in (land[lv], water[wv]):
        assert arr.min() >= 0.0 and arr.max() <= 12.0
    with rasterio.open(DEMO / "land_productivity.tif") as a, \
            rasterio.open(DEMO / "water_productivity.tif") as b:
        assert a.units == b.units == ("g C m-2 day-1",)


def test_water_temperature_threshold_share(elevation, rasters):
    temp, _ = rasters["water_temperature.tif"]
    assert np.isnan(temp[elevation >= 0]).all()
    valid = temp[~np.isnan(temp)]
    assert valid.size == (elevation < 0).sum()
    assert 14.0 <= valid.min() and valid.max() <= 30.0
    assert 0.10 <= (valid > ALERT).mean() <= 0.30


def test_anomaly_diverging(rasters):
    anom, _ = rasters["anomaly.tif"]
    valid = anom[~np.isnan(anom)]
    assert -4.6 < valid.min() < -2.0 and 2.0 < valid.max() < 4.6
    assert 0.3 < (valid > 0).mean() < 0.7


def test_landcover_classes(elevation, rasters):
    cover, prof = rasters["landcover.tif"]
    assert prof["dtype"] == "uint8" and prof["nodata"] == 0
    assert (cover[elevation < 0] == 0).all()
    assert (cover[elevation >= 0] > 0).all()
    counts = np.bincount(cover.ravel(), minlength=9)
    assert counts.size == 9                          # no class above 8
    land = counts[1:].sum()
    for value in range(1, 9):                        # each class present, 6-8 included
        assert counts[value] / land > 0.002, value


def test_vector_layers_and_attributes():
    path = DEMO / "vectors.gpkg"
    expected = {
        "coast": {"kind"}, "land": {"kind"}, "rivers": {"order", "name"},
        "roads": {"class"}, "boundary": {"name"}, "province": {"name"},
        "towns": {"name", "population", "kind"},
    }
    assert expected.keys() <= set(fiona.listlayers(path))
    for layer, props in expected.items():
        with fiona.open(path, layer=layer) as src:
            assert CRS.from_user_input(src.crs.to_wkt()).to_epsg() == 32630, layer
            assert props <= set(src.schema["properties"]), layer
            assert len(src) > 0, layer
    with fiona.open(path, layer="roads") as src:
        assert {f.properties["class"] for f in src} == {"main", "minor"}
    with fiona.open(path, layer="rivers") as src:
        assert all(isinstance(f.properties["order"], int) and f.properties["order"] >= 1
                   for f in src)


def _sample(z: np.ndarray, xy: np.ndarray) -> np.ndarray:
    with rasterio.open(DEMO / "elevation.tif") as src:
        rows, cols = rasterio.transform.rowcol(src.transform, xy[:, 0], xy[:, 1])
    return z[np.asarray(rows), np.asarray(cols)]


def test_towns_on_land(elevation):
    with fiona.open(DEMO / "vectors.gpkg", layer="towns") as src:
        feats = list(src)
    assert 15 <= len(feats) <= 25
    assert {f.properties["kind"] for f in feats} == {"city", "town", "village"}
    xy = np.array([f.geometry.coordinates for f in feats])
    assert (_sample(elevation, xy) >= 0).all()
    assert all(isinstance(f.properties["population"], int) for f in feats)
    assert len({f.properties["name"] for f in feats}) == len(feats)


def test_rivers_reach_water(elevation):
    with fiona.open(DEMO / "vectors.gpkg", layer="rivers") as src:
        lines = [np.asarray(f.geometry.coordinates) for f in src]
    starts = {tuple(np.round(ln[0], 3)) for ln in lines}
    ends = np.array([ln[-1] for ln in lines])
    wet = _sample(elevation, ends) < 0
    joins = np.array([tuple(np.round(e, 3)) in starts for e in ends])
    assert (wet | joins).all()                       # every reach flows on to water


def test_lonlat_copy():
    with rasterio.open(DEMO / "elevation_lonlat.tif") as src:
        assert CRS.from_user_input(src.crs.to_wkt()).is_geographic
        assert 250 <= src.width <= 350 and 250 <= src.height <= 350
