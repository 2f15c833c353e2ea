"""RasterSource.reopen: a process forked after a source was opened (the check's window helpers,
compose.api) reads through GDAL handles of its own, with the same values."""
from __future__ import annotations

import numpy as np
from affine import Affine

from compose.canvas import Canvas
from compose.sources.raster import RasterSource
from tests.sources._files import write_raster


def _source(tmp_path):
    data = np.arange(300 * 200, dtype=np.float32).reshape(300, 200)
    path = write_raster(tmp_path / "r.tif", data, crs="EPSG:32631",
                        transform=Affine(10, 0, 500000, 0, -10, 5000000))
    canvas = Canvas("EPSG:32631", Affine(10, 0, 500000, 0, -10, 5000000), 200, 300)
    return RasterSource(path, layer="r"), canvas


def test_a_reopened_source_reads_the_same_cells_through_a_new_handle(tmp_path):
    source, canvas = _source(tmp_path)
    try:
        (window,) = canvas.windows(512)
        before = source.read_window(canvas, window)
        handle = source._ds
        source.reopen()
        assert source._ds is not handle and not handle.closed     # the old one left alone
        assert np.array_equal(source.read_window(canvas, window), before, equal_nan=True)
    finally:
        source.close()
