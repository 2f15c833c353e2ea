"""What a data file is, for a starter style: rasters (rasterio) and vector tables (fiona).

Raster facts come from the file's header and a decimated read of the chosen band (at most
:data:`SAMPLE_SIDE` pixels a side, nearest neighbour, so class values stay exact): CRS, bounds,
pixel size, dtype, nodata, value range and percentiles, sign, and the distinct values of an
integer band when there are few. Vector facts: one entry per table (GeoPackage layer) with its
geometry type, CRS, bounds, feature count and attribute fields.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from compose.errors import SourceError

__all__ = ["SAMPLE_SIDE", "MAX_CLASSES", "RasterFacts", "VectorFacts", "inspect_raster",
           "inspect_vector", "inspect_path", "RASTER_SUFFIXES", "VECTOR_SUFFIXES"]

#: Longest side of the decimated read used for value statistics, pixels.
SAMPLE_SIDE = 1024
#: An integer band with at most this many distinct values is read as classes.
MAX_CLASSES = 12

RASTER_SUFFIXES = (".tif", ".tiff", ".vrt", ".img", ".nc", ".jp2", ".asc")
VECTOR_SUFFIXES = (".gpkg", ".shp", ".geojson", ".json", ".fgb", ".gml", ".kml")


@dataclass(frozen=True, slots=True)
class RasterFacts:
    """One raster band. ``bounds`` (west, south, east, north) in ``crs``; ``res`` (x, y) CRS units;
    ``percentiles`` (p2, p50, p98) of the valid values; ``classes`` the distinct values of an
    integer band with at most :data:`MAX_CLASSES` of them (else empty); ``valid`` the share of
    valid pixels in the sample (0-1)."""

    path: Path
    crs: str
    crs_name: str
    linear_units: str | None
    bounds: tuple[float, float, float, float]
    res: tuple[float, float]
    width: int
    height: int
    count: int
    dtype: str
    nodata: float | None
    minimum: float
    maximum: float
    percentiles: tuple[float, float, float]
    classes: tuple[float, ...]
    valid: float

    @property
    def integer(self) -> bool:
        return np.issubdtype(np.dtype(self.dtype), np.integer)

    @property
    def signed(self) -> bool:
        """True when the bulk of the values lies on both sides of 0 (p2 < 0 < p98)."""
        return self.percentiles[0] < 0 < self.percentiles[2]


@dataclass(frozen=True, slots=True)
class VectorFacts:
    """One vector table: ``geometry`` as fiona names it (``LineString``, ``MultiPolygon``, ...),
    ``fields`` attribute name -> fiona type name (``str``, ``int``, ``float``...)."""

    path: Path
    table: str
    crs: str
    geometry: str
    count: int
    bounds: tuple[float, float, float, float]
    fields: dict[str, str] = field(default_factory=dict)
    tables_in_file: int = 1

    @property
    def shape(self) -> str:
        """``lines``, ``areas`` or ``points`` (``other`` for anything else)."""
        g = self.geometry.lower().replace("3d ", "")
        if "line" in g:
            return "lines"
        if "polygon" in g:
            return "areas"
        if "point" in g:
            return "points"
        return "other"


def _crs_text(crs) -> str:
    epsg = crs.to_epsg() if crs is not None else None
    return f"EPSG:{epsg}" if epsg else crs.to_wkt()


def inspect_raster(path: Path, band: int = 1) -> RasterFacts:
    """Facts of band ``band`` of the raster at ``path``; SourceError when unreadable or without CRS."""
    import rasterio
    from rasterio.enums import Resampling
    from rasterio.errors import RasterioError

    path = Path(path)
    try:
        with rasterio.open(path) as ds:
            if ds.crs is None:
                raise SourceError(f"{path}: no CRS; compose needs georeferenced rasters")
            scale = max(ds.width, ds.height) / SAMPLE_SIDE
            shape = (max(1, round(ds.height / max(scale, 1))), max(1, round(ds.width / max(scale, 1))))
            data = ds.read(band, out_shape=shape, resampling=Resampling.nearest, masked=True)
            left, bottom, right, top = ds.bounds
            bounds = (min(left, right), min(bottom, top), max(left, right), max(bottom, top))
            units = None if ds.crs.is_geographic else (ds.crs.linear_units or None)
            facts = dict(crs=_crs_text(ds.crs), crs_name=ds.crs.to_string(), linear_units=units,
                         bounds=bounds, res=(abs(ds.res[0]), abs(ds.res[1])), width=ds.width,
                         height=ds.height, count=ds.count, dtype=ds.dtypes[band - 1],
                         nodata=ds.nodatavals[band - 1])
    except (RasterioError, OSError) as exc:
        raise SourceError(f"{path}: cannot read as a raster: {str(exc).splitlines()[0]}") from None
    values = np.asarray(data.compressed(), dtype=np.float64)
    values = values[np.isfinite(values)]
    if values.size == 0:
        raise SourceError(f"{path}: band {band} has no valid values")
    p2, p50, p98 = (float(v) for v in np.percentile(values, [2, 50, 98]))
    classes: tuple[float, ...] = ()
    if np.issubdtype(np.dtype(facts["dtype"]), np.integer):
        distinct = np.unique(values)
        if distinct.size <= MAX_CLASSES:
            classes = tuple(float(v) for v in distinct)
    return RasterFacts(path=path, minimum=float(values.min()), maximum=float(values.max()),
                       percentiles=(p2, p50, p98), classes=classes,
                       valid=values.size / max(1, data.size), **facts)


def inspect_vector(path: Path) -> list[VectorFacts]:
    """Facts of every table of the vector file at ``path`` (empty tables included)."""
    import fiona
    from fiona.errors import FionaError

    path = Path(path)
    try:
        tables = fiona.listlayers(path)
        out = []
        for table in tables:
            with fiona.open(path, layer=table) as src:
                crs = src.crs
                bounds = tuple(float(v) for v in src.bounds) if len(src) else (0.0, 0.0, 0.0, 0.0)
                out.append(VectorFacts(path=path, table=table,
                                       crs=_crs_text(crs) if crs else "",
                                       geometry=str(src.schema.get("geometry") or "Unknown"),
                                       count=len(src), bounds=bounds,
                                       fields={k: str(v).split(":")[0]
                                               for k, v in src.schema["properties"].items()},
                                       tables_in_file=len(tables)))
    except (FionaError, OSError) as exc:
        raise SourceError(f"{path}: cannot read as vectors: {str(exc).splitlines()[0]}") from None
    if not out:
        raise SourceError(f"{path}: no tables")
    for f in out:
        if not f.crs:
            raise SourceError(f'{path}: table "{f.table}" has no CRS')
        if not all(math.isfinite(v) for v in f.bounds):
            raise SourceError(f'{path}: table "{f.table}" has no finite bounds')
    return out


def inspect_path(path: Path) -> RasterFacts | list[VectorFacts]:
    """Raster facts or the vector tables of ``path``, chosen by its suffix (then by trying)."""
    path = Path(path)
    if not path.exists():
        raise SourceError(f"data file not found: {path}")
    suffix = path.suffix.lower()
    if suffix in VECTOR_SUFFIXES:
        return inspect_vector(path)
    if suffix in RASTER_SUFFIXES:
        return inspect_raster(path)
    try:
        return inspect_raster(path)
    except SourceError:
        return inspect_vector(path)
