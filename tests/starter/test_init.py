"""``compose init``: from raw GeoTIFF / GeoPackage files to a starter style that renders and
passes the check, without editing it. The files are real (rasterio, fiona) and small."""
from __future__ import annotations

import json
import re
import tomllib

import numpy as np
import pytest
from affine import Affine
from click.testing import CliRunner

from compose.cli.main import cli
from compose.starter import inspect_path, starter_style
from compose.starter.style import nice_outward
from tests.sources._files import write_raster, write_vector

UTM = "EPSG:32630"
T = Affine(30, 0, 500_000, 0, -30, 4_809_000)


@pytest.fixture
def raw(tmp_path):
    """A DEM, a signed anomaly, a positive field, a 4-class raster, rivers and towns."""
    d = tmp_path / "data"
    d.mkdir()
    y, x = np.mgrid[0:300, 0:300].astype("float32")
    dem = 200 + 600 * np.exp(-((x - 150) ** 2 + (y - 140) ** 2) / 9000) + 40 * np.sin(x / 11) * np.cos(y / 13)
    write_raster(d / "z.tif", dem.astype("float32"), crs=UTM, transform=T, nodata=-9999.0)
    anomaly = (2.5 * np.sin(x / 40) * np.cos(y / 55)).astype("float32")
    write_raster(d / "anomaly.tif", anomaly, crs=UTM, transform=T, nodata=-9999.0)
    growth = (6 + 5 * np.sin(x / 60) * np.sin(y / 45)).astype("float32")
    write_raster(d / "growth.tif", growth, crs=UTM, transform=T)
    classes = (1 + (x // 75) % 4).astype("uint8")
    write_raster(d / "cover.tif", classes, crs=UTM, transform=T, nodata=0)
    lines = [({"type": "LineString", "coordinates": [(500_500, 4_808_500 - 800 * i), (508_500, 4_806_000 - 700 * i)]},
              {"name": f"R{i}"}) for i in range(4)]
    write_vector(d / "v.gpkg", lines, crs=UTM, properties={"name": "str"}, table="rivers",
                 geometry="LineString")
    towns = [({"type": "Point", "coordinates": (501_000 + 1500 * i, 4_807_500 - 1200 * i)},
              {"name": f"Town {i}", "population": 1000 * (i + 1)}) for i in range(5)]
    write_vector(d / "v.gpkg", towns, crs=UTM, properties={"name": "str", "population": "int"},
                 table="towns", geometry="Point")
    return d


def _init(tmp_path, *files, out="style.toml"):
    result = CliRunner().invoke(cli, ["init", *map(str, files), "--out", str(tmp_path / out)])
    assert result.exit_code == 0, result.output
    return result.output, tomllib.loads((tmp_path / out).read_text())


def test_init_then_render_passes_without_editing(tmp_path, raw):
    said, style = _init(tmp_path, raw / "z.tif", raw / "anomaly.tif", raw / "v.gpkg")
    assert re.search(r"z\.tif +-> relief \"z\" \(ground\): values .* look like heights", said)
    assert "diverging ramp centred on 0" in said and 'labels from "name"' in said
    out = tmp_path / "out"
    result = CliRunner().invoke(cli, ["render", str(tmp_path / "style.toml"), "--out", str(out)])
    assert result.exit_code == 0, result.output
    assert "check   passed" in result.output
    report = json.loads((out / "style.check.json").read_text())
    assert report["passed"] is True
    kinds = {l["name"]: (l["kind"], l["role"]) for l in style["layer"]}
    assert kinds == {"z": ("relief", "ground"), "anomaly": ("field", "theme"),
                     "rivers": ("lines", "overlay"), "towns": ("points", "overlay"),
                     "towns labels": ("labels", "overlay")}
    assert all("halo" in l for l in style["layer"] if l["kind"] in ("lines", "labels"))
    assert style["map"]["like"] == "z"


def test_choices_for_each_kind_of_data(tmp_path, raw):
    facts = [inspect_path(raw / n) for n in ("z.tif", "anomaly.tif", "growth.tif", "cover.tif")]
    assert facts[1].signed and not facts[2].signed and facts[3].classes == (1, 2, 3, 4)
    style = tomllib.loads(starter_style(facts, tmp_path / "s.toml").text)
    ramps = style["ramp"]
    assert ramps["anomaly"]["kind"] == "diverging" and ramps["anomaly"]["center"] == 0
    lo, hi = ramps["anomaly"]["domain"]
    assert lo == -hi and hi >= float(np.percentile(np.abs([facts[1].percentiles[0], facts[1].percentiles[2]]), 100))
    assert ramps["growth"]["kind"] == "sequential"
    assert ramps["growth"]["domain"][0] <= facts[2].percentiles[0]
    assert ramps["growth"]["domain"][1] >= facts[2].percentiles[2]
    assert ramps["cover"]["kind"] == "qualitative"
    assert [c["value"] for c in ramps["cover"]["classes"]] == [1, 2, 3, 4]
    layers = {l["name"]: l for l in style["layer"]}
    assert layers["cover"]["kind"] == "classes"
    # one theme at a time
    assert [n for n in ("anomaly", "growth", "cover") if layers[n].get("enabled", True)] == ["anomaly"]


def test_vectors_only(tmp_path, raw):
    _, style = _init(tmp_path, raw / "v.gpkg")
    assert style["map"]["crs"] == UTM and style["map"]["width"] == 1500
    result = CliRunner().invoke(cli, ["check", str(tmp_path / "style.toml")])
    assert result.exit_code == 0, result.output


def test_refuses_to_overwrite_and_names_missing_files(tmp_path, raw):
    _init(tmp_path, raw / "z.tif")
    again = CliRunner().invoke(cli, ["init", str(raw / "z.tif"), "--out", str(tmp_path / "style.toml")])
    assert again.exit_code == 2 and "output exists" in again.output
    missing = CliRunner().invoke(cli, ["init", str(raw / "nope.tif"), "--out", str(tmp_path / "x.toml")])
    assert missing.exit_code == 2 and "data file not found" in missing.output
    assert not (tmp_path / "x.toml").exists()


@pytest.mark.parametrize("lo,hi,expected", [(0.13, 11.7, (0, 12)), (-3.03, 3.01, (-4, 4)), (0, 3.03, (0, 3.5)),
                                            (212.0, 789.0, (200, 800)), (5.0, 5.0, (2.5, 7.5))])
def test_nice_outward(lo, hi, expected):
    assert nice_outward(lo, hi) == pytest.approx(expected)
