"""Decimated reads (``RasterSource(decimate=True)``, the draft check's reads): GDAL's averaging
read of whole blocks against block means computed here cell by cell in numpy, and the draft's
canvas read through them against the exact path."""
from __future__ import annotations

import numpy as np
import pytest
from affine import Affine

from compose.canvas import Canvas
from compose.sources.raster import RasterSource
from tests.sources._files import write_raster

CRS = "EPSG:32631"
ORIGIN = Affine(10.0, 0, 500000.0, 0, -10.0, 4000000.0)


def _terrain(h: int = 96, w: int = 80) -> np.ndarray:
    y, x = np.mgrid[0:h, 0:w].astype(np.float32)
    return (100 + 3 * x + 2 * y + 20 * np.sin(x / 7) * np.cos(y / 5)).astype(np.float32)


def _block_means(values: np.ndarray, invalid: np.ndarray, f: int) -> np.ndarray:
    """Reference: the mean of the valid cells of every f x f block (NaN where none), in float64."""
    h, w = values.shape
    out = np.full((h // f, w // f), np.nan)
    for r in range(h // f):
        for c in range(w // f):
            block = values[r * f:(r + 1) * f, c * f:(c + 1) * f]
            ok = ~invalid[r * f:(r + 1) * f, c * f:(c + 1) * f]
            if ok.any():
                out[r, c] = block[ok].astype(np.float64).mean()
    return out


@pytest.mark.parametrize("how", ["plain", "file nodata", "mask"])
def test_decimated_blocks_equal_block_means(tmp_path, how):
    values = _terrain()
    invalid = np.zeros(values.shape, bool)
    kwargs = {}
    if how == "file nodata":           # a whole no-data block, GDAL must skip -9999 cells
        invalid[8:16, 16:24] = True
        values = values.copy()
        values[invalid] = -9999
        kwargs["nodata"] = -9999
    elif how == "mask":
        invalid[40:48, :] = True
        kwargs["mask"] = np.where(invalid, 0, 255).astype(np.uint8)
    path = write_raster(tmp_path / "dem.tif", values, crs=CRS, transform=ORIGIN, **kwargs)
    ref = _block_means(values, invalid, 4)
    with RasterSource(path, layer="relief", decimate=True) as src:
        got = src._read_reduced(-1, -2, ref.shape[0] + 2, ref.shape[1] + 4, 4, 4)
    assert np.isnan(got[0]).all() and np.isnan(got[:, :2]).all()      # outside the source
    inner = got[1:1 + ref.shape[0], 2:2 + ref.shape[1]]
    np.testing.assert_array_equal(np.isnan(inner), np.isnan(ref))
    np.testing.assert_allclose(inner[~np.isnan(ref)], ref[~np.isnan(ref)], rtol=1e-6)


def test_draft_grid_read_is_close_to_the_exact_read(tmp_path):
    """A canvas 4 times coarser than the source, read window by window: the decimated path
    agrees with the exact (numpy block mean) path on smooth data."""
    values = _terrain()
    path = write_raster(tmp_path / "dem.tif", values, crs=CRS, transform=ORIGIN)
    canvas = Canvas.from_extent(CRS, (500000.0, 4000000.0 - 960, 500000.0 + 800, 4000000.0), 40.0)
    win = canvas.whole(2)
    with RasterSource(path, layer="relief") as exact, \
            RasterSource(path, layer="relief", decimate=True) as fast:
        a = exact.read_window(canvas, win, "bilinear")
        b = fast.read_window(canvas, win, "bilinear")
    assert a.shape == b.shape == (canvas.height + 4, canvas.width + 4)
    both = np.isfinite(a) & np.isfinite(b)
    assert both[2:-2, 2:-2].all()
    np.testing.assert_allclose(b[both], a[both], rtol=1e-5)
