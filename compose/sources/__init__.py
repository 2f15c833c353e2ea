"""compose.sources: the data a map is made from, read onto the canvas.

:class:`RasterSource` reprojects a raster band onto canvas windows (float32, NaN = no data);
:class:`VectorSource` loads features reprojected to the canvas CRS, and :class:`Features` cuts
them per window. :func:`cell_size_metres` gives a grid's pixel size in metres.
"""
from compose.sources.raster import RESAMPLING, SHRINK_LIMIT, RasterSource, cell_size_metres
from compose.sources.vector import Features, VectorSource

__all__ = ["RESAMPLING", "SHRINK_LIMIT", "RasterSource", "cell_size_metres", "Features", "VectorSource"]
