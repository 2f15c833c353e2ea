"""A draft's own reader of plain GeoTIFFs (compose.layers.early_tiff) reads what GDAL reads.

Every file here is written by rasterio (GDAL's GeoTIFF driver: the TIFF 6.0 layout, Adobe's
Technical Note 3 floating-point predictor, BigTIFF, OGC GeoTIFF keys); the reference values are
rasterio's own reads of it through compose.sources.raster.RasterSource.
"""
from __future__ import annotations

import json
from types import SimpleNamespace

import numpy as np
import pytest

from compose.canvas import Canvas
from compose.check.draft import draft_canvas

TRANSFORM = (30.0, 0.0, 400000.0, 0.0, -30.0, 4600000.0)


def _write(path, data, crs="EPSG:32630", nodata=None, transform=TRANSFORM, **options):
    import rasterio
    from affine import Affine

    h, w = data.shape
    with rasterio.open(path, "w", driver="GTiff", width=w, height=h, count=1,
                       dtype=data.dtype.name, crs=crs, transform=Affine(*transform),
                       nodata=nodata, **options) as ds:
        ds.write(data, 1)
    return path


def _data(dtype, h=300, w=200, seed=0):
    rng = np.random.default_rng(seed)
    yy, xx = np.mgrid[0:h, 0:w]
    if np.dtype(dtype).kind == "f":
        return (np.sin(xx / 17.0) * 300 + yy * 0.7 + rng.normal(0, 5, (h, w))).astype(dtype)
    info = np.iinfo(dtype)
    # smooth ramps (the predictor's differences small) and noise that wraps the differences
    smooth = (xx * 3 + yy) % (int(info.max) - int(info.min) + 1) + int(info.min)
    noise = rng.integers(int(info.min), int(info.max) + 1, (h, w))
    return np.where(rng.random((h, w)) < 0.2, noise, smooth).astype(dtype)


CASES = {
    # name: (dtype, nodata, creation options)
    "float32 floating-point predictor, tiles": (
        "float32", -9999.0, dict(tiled=True, blockxsize=64, blockysize=64, compress="deflate",
                                 predictor=3)),
    "float32 floating-point predictor, big-endian": (
        "float32", None, dict(tiled=True, blockxsize=32, blockysize=48, compress="deflate",
                              predictor=3, ENDIANNESS="BIG")),
    "float32 deflate strips, NaN nodata": (
        "float32", float("nan"), dict(compress="deflate", blockysize=16)),
    "float32 uncompressed tiles, BigTIFF": (
        "float32", None, dict(tiled=True, blockxsize=64, blockysize=32, BIGTIFF="YES")),
    "uint16 horizontal predictor, BigTIFF": (
        "uint16", 0, dict(tiled=True, blockxsize=64, blockysize=64, compress="deflate",
                          predictor=2, BIGTIFF="YES")),
    "int16 horizontal predictor, big-endian strips": (
        "int16", -32768, dict(compress="deflate", predictor=2, blockysize=7, ENDIANNESS="BIG")),
    "uint8 horizontal predictor, tiles": (
        "uint8", 255, dict(tiled=True, blockxsize=16, blockysize=16, compress="deflate",
                           predictor=2)),
}


@pytest.mark.parametrize("case", sorted(CASES))
def test_plain_files_read_as_gdal_reads_them(tmp_path, case):
    from rasterio.crs import CRS

    from compose.layers.early_tiff import PlainSource, PlainTiff
    from compose.sources.raster import RasterSource

    dtype, nodata, options = CASES[case]
    data = _data(dtype)
    if nodata is not None:
        data[::13, ::7] = nodata                     # no data here and there
    if dtype == "float32":
        data[5:9, 100:140] = np.nan                  # NaN cells, nodata or not
    path = _write(tmp_path / "a.tif", data, nodata=nodata, **options)
    spec = SimpleNamespace(source=path, name="a", options=SimpleNamespace(band=1))
    tiff = PlainTiff(path)
    plain = PlainSource(tiff, spec, decimate=True)
    gdal = RasterSource(path, layer="a")
    try:
        assert CRS.from_user_input(tiff.crs) == gdal.crs
        assert plain.transform == gdal.transform
        assert plain.block_shape == gdal.block_shape and plain.shape == gdal.shape
        assert plain.dtype == gdal.dtype and plain.mask_flags == gdal.mask_flags
        assert (plain.nodata is None) == (gdal.nodata is None)
        if nodata is not None:
            assert np.array_equal(plain.nodata, gdal.nodata, equal_nan=True)
        bh, bw = plain.block_shape
        h, w = plain.shape
        for r in range(0, h, bh):
            for c in range(0, w, bw):
                size = (min(bh, h - r), min(bw, w - c))
                got = plain.block_cells(r, c, *size)
                want = gdal.block_cells(r, c, *size)
                assert got.dtype == np.float32
                assert np.array_equal(got, want, equal_nan=True), (r, c)
                # some rows only (a draft's sample): those rows decoded, the rest NaN
                rows = np.arange(1, size[0], 3)
                some = plain.block_cells(r, c, *size, rows=rows)
                assert np.array_equal(some[rows], want[rows], equal_nan=True)
                assert np.isnan(np.delete(some, rows, axis=0)).all()
        rng = np.random.default_rng(1)
        rows, cols = rng.integers(-3, h + 3, (40, 30)), rng.integers(-3, w + 3, (40, 30))
        assert np.array_equal(plain.cells_at(rows, cols), gdal.cells_at(rows, cols),
                              equal_nan=True)
        # no data was met (the nodata value, NaN cells)
        whole = np.isnan(plain.block_cells(0, 0, h, w))
        assert whole.any() == (nodata is not None or dtype == "float32")
    finally:
        plain.close()
        gdal.close()


def test_values_near_the_nodata_value_are_masked_by_gdal(tmp_path):
    """A block holding a value within GDAL's tolerance of the nodata value but not equal to it
    is read through GDAL (whose mask decides it); the values are GDAL's."""
    from compose.layers.early_tiff import PlainSource, PlainTiff
    from compose.sources.raster import RasterSource

    data = _data("float32")
    data[3, 4] = -9999.0
    data[70, 70] = np.float32(-9999.0) + np.float32(0.001)      # 1e-7 relative: near
    path = _write(tmp_path / "near.tif", data, nodata=-9999.0, tiled=True, blockxsize=64,
                  blockysize=64, compress="deflate", predictor=3)
    spec = SimpleNamespace(source=path, name="a", options=SimpleNamespace(band=1))
    plain = PlainSource(PlainTiff(path), spec, decimate=True)
    gdal = RasterSource(path, layer="a")
    try:
        rows = np.array([2, 3, 40])                 # rows without the near value, then with it
        for r, c in ((0, 0), (64, 64)):
            want = gdal.block_cells(r, c, 64, 64)
            assert np.array_equal(plain.block_cells(r, c, 64, 64, rows=rows)[rows], want[rows],
                                  equal_nan=True)
            assert plain._real is None
        assert np.array_equal(plain.block_cells(64, 64, 64, 64, rows=rows + 4)[rows + 4],
                              gdal.block_cells(64, 64, 64, 64)[rows + 4], equal_nan=True)
        for r, c in ((0, 0), (64, 64)):
            assert np.array_equal(plain.block_cells(r, c, 64, 64), gdal.block_cells(r, c, 64, 64),
                                  equal_nan=True)
        assert plain._real is not None                # the near block was read by GDAL
    finally:
        plain.close()
        gdal.close()


def _refused(tmp_path, name, data, **write):
    from compose.layers.early_tiff import NotPlain, PlainTiff

    path = _write(tmp_path / f"{name}.tif", data, **write)
    with pytest.raises(NotPlain):
        PlainTiff(path).close()
    return path


def test_files_gdal_reads_differently_are_left_to_gdal(tmp_path):
    import rasterio

    data = _data("float32")
    tiles = dict(tiled=True, blockxsize=32, blockysize=32, compress="deflate")
    # overviews (a further image), a type whose mask GDAL reads apart, another compression,
    # a rotated grid (ModelTransformation), a CRS that is not an EPSG code, pixel-is-point
    path = _write(tmp_path / "ovr.tif", data, **tiles)
    with rasterio.open(path, "r+") as ds:
        ds.build_overviews([2, 4])
    from compose.layers.early_tiff import NotPlain, PlainTiff

    with pytest.raises(NotPlain):
        PlainTiff(path)
    _refused(tmp_path, "int32", _data("int32"), **tiles)
    _refused(tmp_path, "lzw", data, **dict(tiles, compress="lzw"))
    _refused(tmp_path, "rotated", data, transform=(30.0, 2.0, 400000.0, 2.0, -30.0, 4600000.0),
             **tiles)
    _refused(tmp_path, "custom", data, crs="+proj=tmerc +lat_0=0 +lon_0=10 +k=1 +x_0=0 +y_0=0 "
             "+ellps=GRS80 +units=m +no_defs", **tiles)
    point = _write(tmp_path / "point.tif", data, **tiles)
    with rasterio.open(point, "r+") as ds:
        ds.update_tags(AREA_OR_POINT="Point")
    with pytest.raises(NotPlain):
        PlainTiff(point)
    # GDAL writes EPSG:4326 with its ellipsoid's keys besides the code: left to GDAL too
    _refused(tmp_path, "geo", data, crs="EPSG:4326",
             transform=(0.01, 0.0, 5.0, 0.0, -0.01, 45.0), **tiles)
    # the same data with none of these is plain
    PlainTiff(_write(tmp_path / "plain.tif", data, **tiles)).close()


def test_only_large_aligned_plain_files_of_a_draft_are_read_without_gdal(tmp_path):
    from compose.layers.early_tiff import PlainSource, plain_source

    data = _data("float32", 640, 640)
    path = _write(tmp_path / "dem.tif", data, tiled=True, blockxsize=64, blockysize=64,
                  compress="deflate", predictor=3)
    spec = SimpleNamespace(source=path, name="relief", options=SimpleNamespace(band=1))
    full = Canvas.from_extent("EPSG:32630", (400000, 4600000 - 640 * 30, 400000 + 640 * 30,
                                             4600000), 30)
    draft = draft_canvas(full, 100)
    got = plain_source(spec, draft, full)
    assert isinstance(got, PlainSource)              # 100 blocks of 64 x 64 cells
    got.close()
    # the same CRS spelt otherwise, a grid shifted by half a cell, few blocks, a sidecar
    other = Canvas.from_extent("epsg:32630", full.bounds, 30)
    assert plain_source(spec, draft_canvas(other, 100), other) is None
    half = Canvas.from_extent("EPSG:32630", tuple(v + 15 for v in full.bounds), 30)
    assert plain_source(spec, draft_canvas(half, 100), half) is None
    small = _write(tmp_path / "small.tif", data, tiled=True, blockxsize=128, blockysize=128,
                   compress="deflate")
    assert plain_source(SimpleNamespace(source=small, name="s", options=spec.options), draft,
                        full) is None                # 25 blocks: decimated by GDAL
    (tmp_path / "dem.tif.aux.xml").write_text("<PAMDataset></PAMDataset>")
    assert plain_source(spec, draft, full) is None


def test_a_draft_reads_the_same_report_with_or_without_gdal(tmp_path, monkeypatch):
    """The benchmark's kind of style (a relief and a field of plain tiled float32 files, more
    blocks than a decimated read takes, lines): its draft report read through the plain reader
    is the one read through rasterio, value for value."""
    import compose.layers.early_tiff as early_tiff
    from compose.api import check
    from compose.engine import prepare
    from compose.style import load_style
    from tests.layers.test_early import _big_style

    style_path = _big_style(tmp_path, n=1024, tile=64)
    style = load_style(style_path)
    prepared = prepare(style, canvas=draft_canvas(style.canvas()), draft=True)
    try:
        kinds = {la.spec.kind: type(la.source).__name__ for la in prepared.layers
                 if la.spec.kind in ("relief", "field")}
        assert kinds == {"relief": "PlainSource", "field": "PlainSource"}
    finally:
        prepared.close()
    plain = check(style_path, draft=True, cache=False).to_json(False)
    monkeypatch.setattr(early_tiff, "plain_source", lambda *args: None)
    gdal = check(style_path, draft=True, cache=False).to_json(False)
    assert json.dumps(plain) == json.dumps(gdal)


@pytest.mark.parametrize("text", [b"=", b"["])
def test_a_citation_that_defines_the_crs_is_left_to_gdal(tmp_path, text):
    """GeoTIFF 1.1 (OGC 19-008r4) GTCitationGeoKey holds text; GDAL writes the CRS's name there
    ("WGS 84 / UTM zone 30N|WGS 84|"), but other writers put a definition ("... = PROJCS[...]")
    that GDAL reads the CRS from. A citation with "=" or "[" is refused by the plain reader,
    a name is kept (the file's bytes patched in place, same length)."""
    from compose.layers.early_tiff import NotPlain, PlainTiff

    data = _data("float32")
    path = _write(tmp_path / "named.tif", data, tiled=True, blockxsize=32, blockysize=32,
                  compress="deflate")
    PlainTiff(path).close()                         # GDAL's own citation: a name
    raw = path.read_bytes()
    at = raw.find(b"WGS 84 / UTM zone 30N")
    assert at > 0
    patched = tmp_path / "defined.tif"
    patched.write_bytes(raw[:at + 6] + text + raw[at + 7:])
    with pytest.raises(NotPlain, match="citation"):
        PlainTiff(patched).close()
