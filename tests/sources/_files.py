"""Builders for the tiny real GeoTIFFs and GeoPackages the source tests read (made in tmp_path)."""
from __future__ import annotations

from pathlib import Path

import fiona
import numpy as np
import rasterio


def write_raster(path: Path, bands, *, crs, transform, nodata=None, mask=None) -> Path:
    """Write a GeoTIFF with one band per 2-D array in ``bands`` (or one 2-D array).

    mask: optional uint8 (H, W) per-dataset mask (0 = no data, 255 = valid) written as the
    file's internal mask band.
    """
    arrays = [np.asarray(bands)] if np.ndim(bands) == 2 else [np.asarray(b) for b in bands]
    height, width = arrays[0].shape
    with rasterio.open(path, "w", driver="GTiff", height=height, width=width, count=len(arrays),
                       dtype=arrays[0].dtype, crs=crs, transform=transform, nodata=nodata) as ds:
        for i, a in enumerate(arrays, start=1):
            ds.write(a, i)
        if mask is not None:
            ds.write_mask(np.asarray(mask, dtype=np.uint8))
    return Path(path)


def write_vector(path: Path, features, *, crs, properties, table="features", driver="GPKG",
                 geometry="Unknown") -> Path:
    """Write ``features`` = [(geojson-like geometry or None, {attr: value}), ...] to a vector file."""
    schema = {"geometry": geometry, "properties": dict(properties)}
    # mode "w" with a new table name adds that table to an existing GeoPackage
    with fiona.open(path, "w", driver=driver, layer=table, crs=crs, schema=schema) as dst:
        for geom, props in features:
            dst.write({"geometry": geom, "properties": props})
    return Path(path)
