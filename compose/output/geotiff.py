"""RGBA GeoTIFF of the canvas: tiled, deflate, the canvas CRS and transform exactly."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import rasterio
from rasterio.enums import ColorInterp
from rasterio.windows import Window as RioWindow

from compose.canvas import Canvas

__all__ = ["GeoTiffWriter"]


class GeoTiffWriter:
    """Write an RGBA uint8 GeoTIFF window by window.

    Tiles 512 x 512, DEFLATE with horizontal differencing (PREDICTOR=2), GDAL compressing on all
    cores. Band colour interpretation red, green, blue, alpha.
    """

    def __init__(self, path: Path, canvas: Canvas, tags: dict[str, str] | None = None):
        self.path = Path(path)
        profile = dict(driver="GTiff", width=canvas.width, height=canvas.height, count=4,
                       dtype="uint8", crs=canvas.crs, transform=canvas.transform,
                       tiled=True, blockxsize=512, blockysize=512, compress="deflate",
                       predictor=2, photometric="RGB", interleave="pixel", num_threads="all_cpus",
                       BIGTIFF="IF_SAFER")
        self._ds = rasterio.open(self.path, "w", **profile)
        self._ds.colorinterp = [ColorInterp.red, ColorInterp.green, ColorInterp.blue, ColorInterp.alpha]
        if tags:
            self._ds.update_tags(**tags)

    def write(self, row: int, col: int, rgb8: np.ndarray, alpha8: np.ndarray | None = None) -> None:
        """Write uint8 RGB (h, w, 3) at (row, col); alpha defaults to opaque."""
        h, w = rgb8.shape[:2]
        data = np.empty((4, h, w), dtype=np.uint8)
        data[:3] = np.moveaxis(rgb8, -1, 0)
        data[3] = 255 if alpha8 is None else alpha8
        self._ds.write(data, window=RioWindow(col, row, w, h))

    def close(self) -> None:
        if not self._ds.closed:
            self._ds.close()

    def __enter__(self) -> "GeoTiffWriter":
        return self

    def __exit__(self, *exc) -> None:
        self.close()
