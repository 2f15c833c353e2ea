"""RGB (or RGBA) GeoTIFF of the canvas: tiled, deflate, the canvas CRS and transform exactly; optionally
a Cloud Optimized GeoTIFF (GDAL's COG driver: 512 px tiles, overviews averaged down to a
screen's size, everything laid out so a reader fetches a region of one zoom with few range
requests)."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import rasterio
from rasterio.enums import ColorInterp
from rasterio.windows import Window as RioWindow

from compose.canvas import Canvas

__all__ = ["GeoTiffWriter", "to_cog"]


#: Columns per GDAL write (a multiple of the 512 px tile width).
WRITE_COLUMNS = 2048


class GeoTiffWriter:
    """Write an RGB uint8 GeoTIFF window by window, or RGBA with ``alpha``.

    Tiles 512 x 512, DEFLATE at level 1 without a predictor, GDAL compressing on all cores: on
    the 8192 x 8192 benchmark map (hillshaded relief under a theme and lines) level 1 without a
    predictor took 1.9 s of CPU against 4.4 s for level 6 with horizontal differencing and made a
    file 7 % smaller (133 vs 144 MB); on the 1500 x 1500 demo map it is 15 % larger (3.35 vs
    2.92 MB) for a quarter of the CPU (bench/render.py; measured, no source). Band colour
    interpretation red, green, blue (and alpha).
    ``alpha``: a fourth band, alpha, from :meth:`write`'s ``alpha8``. Without it the file has
    three bands and is opaque everywhere (GDAL reads no mask): an alpha of 255 everywhere
    would say nothing more and cost a third more bytes to compress (on the 8192 x 8192
    benchmark map 3.2 s of CPU for RGBA against 2.7 s for RGB, same run, medians of 3;
    measured, no source).
    ``cog``: write a Cloud Optimized GeoTIFF instead: the windows go to a tiled GeoTIFF beside
    ``path`` (``path`` + ".tiles"), which :meth:`close` turns into the COG (overviews averaged)
    and removes.
    """

    def __init__(self, path: Path, canvas: Canvas, tags: dict[str, str] | None = None,
                 cog: bool = False, alpha: bool = False):
        self.path = Path(path)
        self.cog = cog
        self.alpha = bool(alpha)
        self.bands = 4 if self.alpha else 3
        self._target = Path(str(path) + ".tiles") if cog else self.path
        profile = dict(driver="GTiff", width=canvas.width, height=canvas.height, count=self.bands,
                       dtype="uint8", crs=canvas.crs, transform=canvas.transform,
                       tiled=True, blockxsize=512, blockysize=512, compress="deflate",
                       zlevel=1, predictor=1, photometric="RGB", interleave="pixel", num_threads="all_cpus",
                       BIGTIFF="IF_SAFER")
        self._ds = rasterio.open(self._target, "w", **profile)
        self._ds.colorinterp = [ColorInterp.red, ColorInterp.green, ColorInterp.blue,
                                ColorInterp.alpha][:self.bands]
        if tags:
            self._ds.update_tags(**tags)

    def write(self, row: int, col: int, rgb8: np.ndarray, alpha8: np.ndarray | None = None) -> None:
        """Write uint8 RGB (h, w, 3) at (row, col) and, in a file with alpha, ``alpha8`` (h, w)
        (default opaque); ``alpha8`` given to a file without alpha is a ValueError.

        Written :data:`WRITE_COLUMNS` columns at a time (whole tiles, in the order a single
        write would send them: the file is the same byte for byte), so the band-interleaved
        copy GDAL takes is a few MB however wide the canvas (33.6 MB per 512-row band at 16384
        px written whole)."""
        if alpha8 is not None and not self.alpha:
            raise ValueError("alpha given to a GeoTIFF written without alpha")
        h, w = rgb8.shape[:2]
        for c0 in range(0, w, WRITE_COLUMNS):
            c1 = min(c0 + WRITE_COLUMNS, w)
            data = np.empty((self.bands, h, c1 - c0), dtype=np.uint8)
            data[:3] = np.moveaxis(rgb8[:, c0:c1], -1, 0)
            if self.alpha:
                data[3] = 255 if alpha8 is None else alpha8[:, c0:c1]
            self._ds.write(data, window=RioWindow(col + c0, row, c1 - c0, h))

    def close(self) -> None:
        """Finish the file (for a COG: build it from the tiles and remove them); idempotent."""
        if self._ds.closed:
            return
        self._ds.close()
        if self.cog:
            try:
                to_cog(self._target, self.path)
            finally:
                self._target.unlink(missing_ok=True)

    def abort(self) -> None:
        """Stop after a failure elsewhere: close without finishing, remove a COG's tiles."""
        if not self._ds.closed:
            self._ds.close()
        if self.cog:
            self._target.unlink(missing_ok=True)

    def __enter__(self) -> GeoTiffWriter:
        return self

    def __exit__(self, *exc) -> None:
        self.close()


def to_cog(source: Path, path: Path) -> None:
    """Copy a GeoTIFF to ``path`` as a Cloud Optimized GeoTIFF: 512 px tiles, DEFLATE with
    horizontal differencing, overviews by averaging down until the image fits one tile, all
    cores compressing (GDAL's COG driver, GDAL >= 3.1)."""
    from rasterio.shutil import copy

    copy(source, path, driver="COG", compress="DEFLATE", predictor="YES", blocksize=512,
         overviews="AUTO", overview_resampling="AVERAGE", num_threads="ALL_CPUS",
         bigtiff="IF_SAFER")
