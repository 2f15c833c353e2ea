"""GeoTIFF output: the canvas CRS, transform and size exactly, written window by window."""
import numpy as np
import pytest
import rasterio

from compose.canvas import Canvas
from compose.output.geotiff import GeoTiffWriter


def test_geotiff_round_trip(tmp_path):
    # Outside reference: rasterio/GDAL reads back CRS, transform, size, tiling and compression.
    canvas = Canvas.from_extent("EPSG:32630", (500000, 4000000, 500000 + 30 * 700, 4000000 + 30 * 600), 30)
    rng = np.random.default_rng(2)
    img = rng.integers(0, 256, (canvas.height, canvas.width, 3), dtype=np.uint8)
    path = tmp_path / "m.tif"
    with GeoTiffWriter(path, canvas, tags={"TIFFTAG_SOFTWARE": "compose"}) as w:
        for win in canvas.windows(256):
            w.write(win.row, win.col, img[win.core])
    with rasterio.open(path) as ds:
        assert ds.crs == rasterio.crs.CRS.from_user_input("EPSG:32630")
        assert ds.transform == canvas.transform
        # three bands, red, green, blue, and no mask: GDAL reads the file as opaque everywhere
        assert (ds.width, ds.height, ds.count) == (canvas.width, canvas.height, 3)
        assert [c.name for c in ds.colorinterp] == ["red", "green", "blue"]
        assert ds.mask_flag_enums[0] == [rasterio.enums.MaskFlags.all_valid]
        assert ds.profile["tiled"] and ds.profile["compress"] == "deflate"
        data = ds.read()
    np.testing.assert_array_equal(np.moveaxis(data, 0, -1), img)


def test_geotiff_with_alpha(tmp_path):
    # Outside reference: rasterio/GDAL reads a fourth band with colour interpretation alpha and
    # takes it as the dataset's mask (GDAL's RFC 15 mask flags: per-dataset, alpha).
    canvas = Canvas.from_extent("EPSG:32630", (500000, 4000000, 500000 + 30 * 300, 4000000 + 30 * 200), 30)
    rng = np.random.default_rng(5)
    img = rng.integers(0, 256, (canvas.height, canvas.width, 3), dtype=np.uint8)
    alpha = np.where(rng.random((canvas.height, canvas.width)) < 0.5, 0, 255).astype(np.uint8)
    path = tmp_path / "a.tif"
    with GeoTiffWriter(path, canvas, alpha=True) as w:
        w.write(0, 0, img[:100], alpha[:100])
        w.write(100, 0, img[100:])                    # alpha not given: opaque
    with rasterio.open(path) as ds:
        assert ds.count == 4 and ds.colorinterp[3].name == "alpha"
        assert rasterio.enums.MaskFlags.alpha in ds.mask_flag_enums[0]
        data = ds.read()
    np.testing.assert_array_equal(np.moveaxis(data[:3], 0, -1), img)
    np.testing.assert_array_equal(data[3, :100], alpha[:100])
    assert (data[3, 100:] == 255).all()
    with GeoTiffWriter(tmp_path / "b.tif", canvas) as w, pytest.raises(ValueError, match="alpha"):
        w.write(0, 0, img[:100], alpha[:100])


def test_cloud_optimized_geotiff(tmp_path):
    # Outside reference: GDAL itself recognises the layout (IMAGE_STRUCTURE LAYOUT=COG, GDAL's
    # COG driver documentation) and reads back the same pixels, tiles and overviews.
    canvas = Canvas.from_extent("EPSG:32630", (500000, 4000000, 500000 + 30 * 1300, 4000000 + 30 * 1100), 30)
    rng = np.random.default_rng(3)
    img = rng.integers(0, 256, (canvas.height, canvas.width, 3), dtype=np.uint8)
    path = tmp_path / "m.tif"
    with GeoTiffWriter(path, canvas, tags={"TIFFTAG_SOFTWARE": "compose"}, cog=True) as w:
        for win in canvas.windows(512):
            w.write(win.row, win.col, img[win.core])
    assert not (tmp_path / "m.tif.tiles").exists()
    with rasterio.open(path) as ds:
        assert ds.tags(ns="IMAGE_STRUCTURE").get("LAYOUT") == "COG"
        assert ds.transform == canvas.transform and ds.crs == rasterio.crs.CRS.from_user_input("EPSG:32630")
        assert ds.block_shapes[0] == (512, 512) and ds.overviews(1) == [2, 4]
        assert ds.tags().get("TIFFTAG_SOFTWARE") == "compose"
        data = ds.read()
    np.testing.assert_array_equal(np.moveaxis(data[:3], 0, -1), img)


def test_cog_abort_leaves_nothing(tmp_path):
    canvas = Canvas.from_extent("EPSG:32630", (500000, 4000000, 500000 + 30 * 100, 4000000 + 30 * 100), 30)
    w = GeoTiffWriter(tmp_path / "x.tif", canvas, cog=True)
    w.abort()
    assert list(tmp_path.iterdir()) == []


def test_wide_bands_written_in_column_chunks_same_file(tmp_path, monkeypatch):
    # Reference: the same band written by one GDAL call; the chunked writes give the same file,
    # byte for byte, and the same pixels and alpha.
    import compose.output.geotiff as geotiff

    canvas = Canvas.from_extent("EPSG:32630", (500000, 4000000, 500000 + 30 * 1300, 4000000 + 30 * 700), 30)
    rng = np.random.default_rng(4)
    img = rng.integers(0, 4, (canvas.height, canvas.width, 3), dtype=np.uint8).cumsum(axis=1, dtype=np.uint8)
    alpha = np.where(rng.random((canvas.height, canvas.width)) < 0.3, 0, 255).astype(np.uint8)

    def write(path):
        with GeoTiffWriter(path, canvas, alpha=True) as w:
            for r in range(0, canvas.height, 512):
                w.write(r, 0, img[r:r + 512], alpha[r:r + 512])
        return path.read_bytes()

    monkeypatch.setattr(geotiff, "WRITE_COLUMNS", 512)       # 3 chunks per band, the last partial
    chunked = write(tmp_path / "chunked.tif")
    monkeypatch.setattr(geotiff, "WRITE_COLUMNS", 1 << 20)   # one write per band
    whole = write(tmp_path / "whole.tif")
    assert chunked == whole
    with rasterio.open(tmp_path / "chunked.tif") as ds:
        data = ds.read()
    np.testing.assert_array_equal(np.moveaxis(data[:3], 0, -1), img)
    np.testing.assert_array_equal(data[3], alpha)


@pytest.mark.parametrize("alpha", [False, True])
def test_streamed_tiles_read_back_by_gdal_and_libtiff(tmp_path, alpha):
    # Outside references: GDAL (rasterio) and libtiff (through Pillow) read the tiles deflated
    # here, with GDAL's georeferencing, tags and band meaning; the same pixels as GDAL's own
    # write of them. Rows come in bands of 100 (not a tile's 512), the map is not a whole
    # number of tiles; the file is the same byte for byte with 1 or 3 threads deflating.
    from PIL import Image

    canvas = Canvas.from_extent("EPSG:32630", (500000, 4000000, 500000 + 30 * 1300, 4000000 + 30 * 1100), 30)
    rng = np.random.default_rng(6)
    img = rng.integers(0, 4, (canvas.height, canvas.width, 3), dtype=np.uint8).cumsum(axis=1, dtype=np.uint8)
    a8 = np.where(rng.random((canvas.height, canvas.width)) < 0.3, 0, 255).astype(np.uint8)
    tags = {"TIFFTAG_SOFTWARE": "compose", "TIFFTAG_DOCUMENTNAME": "m"}

    def write(path, stream, threads=None, rows=100, sync=False):
        w = GeoTiffWriter(path, canvas, tags=tags, alpha=alpha, stream=stream, threads=threads,
                          sync=sync)
        assert (w._tiles is not None) == stream
        with w:
            for r in range(0, canvas.height, rows):
                w.write(r, 0, img[r:r + rows], a8[r:r + rows] if alpha else None)
        return path

    streamed = write(tmp_path / "s.tif", True, threads=3)
    assert write(tmp_path / "s1.tif", True, threads=1).read_bytes() == streamed.read_bytes()
    # synced as it is closed: the same file
    assert write(tmp_path / "s3.tif", True, sync=True).read_bytes() == streamed.read_bytes()
    # whole rows of tiles (deflated as they come) give the same file as rows gathered
    assert write(tmp_path / "s2.tif", True, rows=512).read_bytes() == streamed.read_bytes()
    # past the page cache (compose.output.atomic.DirectFile, the threshold lowered so this
    # small map takes that path): the same file
    import compose.output.geotiff as geotiff

    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(geotiff, "DIRECT_BYTES", 0)
        assert write(tmp_path / "s4.tif", True, sync=True).read_bytes() == streamed.read_bytes()
    gdal = write(tmp_path / "g.tif", False)
    with rasterio.open(streamed) as s, rasterio.open(gdal) as g:
        assert s.profile == g.profile and s.tags() == g.tags() and s.colorinterp == g.colorinterp
        assert s.crs == rasterio.crs.CRS.from_user_input("EPSG:32630")
        assert s.transform == canvas.transform
        assert s.profile["compress"] == "deflate" and s.block_shapes[0] == (512, 512)
        data = s.read()
        np.testing.assert_array_equal(data, g.read())
    np.testing.assert_array_equal(np.moveaxis(data[:3], 0, -1), img)
    if alpha:
        np.testing.assert_array_equal(data[3], a8)
    with Image.open(streamed) as im:
        assert im.mode == ("RGBA" if alpha else "RGB")
        np.testing.assert_array_equal(np.asarray(im), np.moveaxis(data, 0, -1))


def test_streamed_rows_in_order_and_all_of_them(tmp_path):
    canvas = Canvas.from_extent("EPSG:32630", (500000, 4000000, 500000 + 30 * 600, 4000000 + 30 * 600), 30)
    img = np.zeros((canvas.height, canvas.width, 3), np.uint8)
    w = GeoTiffWriter(tmp_path / "a.tif", canvas, stream=True)
    with pytest.raises(ValueError, match="whole rows"):
        w.write(100, 0, img[100:200])                   # not the next row
    with pytest.raises(ValueError, match="whole rows"):
        w.write(0, 0, img[:100, :300])                  # not the whole width
    w.write(0, 0, img[:100])
    with pytest.raises(ValueError, match="100 rows of 600"):
        w.close()


def test_cog_from_streamed_tiles(tmp_path):
    # Outside reference: GDAL's COG driver reads the streamed tiles and lays out a COG
    # (IMAGE_STRUCTURE LAYOUT=COG) with the same pixels.
    canvas = Canvas.from_extent("EPSG:32630", (500000, 4000000, 500000 + 30 * 1300, 4000000 + 30 * 1100), 30)
    rng = np.random.default_rng(7)
    img = rng.integers(0, 256, (canvas.height, canvas.width, 3), dtype=np.uint8)
    path = tmp_path / "m.tif"
    with GeoTiffWriter(path, canvas, cog=True, stream=True) as w:
        for r in range(0, canvas.height, 512):
            w.write(r, 0, img[r:r + 512])
    assert not (tmp_path / "m.tif.tiles").exists()
    with rasterio.open(path) as ds:
        assert ds.tags(ns="IMAGE_STRUCTURE").get("LAYOUT") == "COG"
        np.testing.assert_array_equal(np.moveaxis(ds.read(), 0, -1), img)
