"""compose.sources: the data a map is made from, read onto the canvas.

:class:`RasterSource` reprojects a raster band onto canvas windows (float32, NaN = no data);
:class:`VectorSource` loads features reprojected to the canvas CRS, and :class:`Features` cuts
them per window. :func:`cell_size_metres` gives a grid's pixel size in metres.
The names load on first use (rasterio for the rasters, shapely and pyproj for the vectors), so
importing a light submodule such as :mod:`compose.sources.guard` loads neither.
"""
from __future__ import annotations

import importlib
from typing import Any

__all__ = ["RESAMPLING", "SHRINK_LIMIT", "RasterSource", "cell_size_metres", "Features", "VectorSource"]

_WHERE = {"RESAMPLING": "raster", "SHRINK_LIMIT": "raster", "RasterSource": "raster",
          "cell_size_metres": "raster", "Features": "vector", "VectorSource": "vector"}


def __getattr__(name: str) -> Any:
    if name in _WHERE:
        return getattr(importlib.import_module(f"compose.sources.{_WHERE[name]}"), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
