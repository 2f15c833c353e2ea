"""Questions about a CRS answered by rasterio's CRS (GDAL's OGR over PROJ), so the common cases
need no pyproj import (0.1-0.2 s of a check's start-up); GDAL's answers about a CRS string are
kept in the user's cache (:func:`_facts`), so a later process asks no GDAL about it either.

Each function answers only what GDAL answers the same way as pyproj and says so by its result;
the callers ask pyproj for everything else (its error messages, transformations, ellipsoids,
units other than the metre). ``value``: anything rasterio's ``CRS.from_user_input`` takes
("EPSG:32630", WKT, a PROJ string, a rasterio CRS); values are looked up once per text.
"""
from __future__ import annotations

import functools
import re
import threading
from typing import Any

__all__ = ["rio_crs", "plainly_usable", "same_crs", "metre_projected", "never_mercator",
           "before_threads", "imports_here_only"]

#: rasterio's CRS imported by one thread at a time (its modules import each other: a second
#: thread's import can meet one half initialised and fail)
_IMPORT = threading.Lock()
#: Set by :func:`imports_here_only`.
_HERE_ONLY = [False]


def _crs_class():
    with _IMPORT:
        from rasterio.crs import CRS
    return CRS


def imports_here_only() -> None:
    """Promise that this process imports rasterio only through this module from now on (a
    draft's marks process, :mod:`compose.layers.early_marks`, whose sources are plain
    GeoPackage tables in the canvas's own CRS): :func:`before_threads` then imports nothing,
    and a question that needs GDAL after all imports it here, one thread at a time."""
    _HERE_ONLY[0] = True


def before_threads() -> None:
    """Call before starting a thread that asks questions here: rasterio's CRS imported now, in
    the calling thread, so that thread and this one (whose layers may import rasterio next)
    never import it at once -- unless :func:`imports_here_only` was promised."""
    if not _HERE_ONLY[0]:
        _crs_class()


def _key(value: Any) -> str | None:
    if isinstance(value, str):
        return value
    to_wkt = getattr(value, "to_wkt", None)
    return to_wkt() if callable(to_wkt) else None


@functools.lru_cache(maxsize=64)
def _parsed(key: str):
    CRS = _crs_class()
    try:
        return CRS.from_user_input(key)
    except Exception:           # CRSError and GDAL's own: the caller asks pyproj instead
        return None


def rio_crs(value: Any):
    """rasterio's CRS of ``value``, or None when GDAL does not read it (or it is not hashable
    text: a dict of parameters)."""
    key = _key(value)
    return None if key is None else _parsed(key)


def _facts(value: str) -> dict:
    """GDAL's answers about the CRS string ``value`` (:func:`_gdal_usable`, :func:`_metre`,
    :func:`_never`), asked once per installed rasterio and kept in the user's cache
    (:func:`compose.user_cache.crs_facts`): the next process answers without importing
    rasterio (0.05 s of a draft's start-up)."""
    from compose.user_cache import crs_facts, remember_crs_facts

    got = crs_facts(value)
    if got is not None and set(got) == {"usable", "metre", "never", "degrees"} \
            and all(isinstance(v, bool) for v in got.values()):
        return got
    got = {"usable": _gdal_usable(value), "metre": _metre(value), "never": _never(value),
           "degrees": _degrees(value)}
    remember_crs_facts(value, got)
    return got


def _gdal_usable(value: Any) -> bool:
    crs = rio_crs(value)
    return crs is not None and bool(crs.is_geographic or crs.is_projected)


def plainly_usable(value: Any) -> bool:
    """True when GDAL reads ``value`` as a geographic or projected CRS (one data can be
    reprojected from and to), or when it is a string pyproj accepted as such for a canvas in
    this process (:func:`compose.user_cache.accepted`: answered without GDAL). False means "ask
    pyproj", not "unusable"."""
    from compose.user_cache import accepted

    if accepted(value):
        return True
    return _facts(value)["usable"] if isinstance(value, str) else _gdal_usable(value)


def same_crs(a: Any, b: Any) -> bool:
    """True when GDAL finds ``a`` and ``b`` the same CRS (``OSRIsSame``), or when both are the
    same string, a CRS pyproj accepted for a canvas in this process (answered without GDAL);
    False when they differ or either is unreadable."""
    from compose.user_cache import accepted

    if isinstance(a, str) and a == b and accepted(a):
        return True
    ca, cb = rio_crs(a), rio_crs(b)
    return ca is not None and cb is not None and bool(ca == cb)


def _wkt1(value: Any) -> str | None:
    crs = rio_crs(value)
    return None if crs is None else crs.to_wkt()


def geographic_degrees(value: Any) -> bool:
    """True for a geographic CRS (coordinates are longitude and latitude in degrees), as GDAL
    reads it; False for any other or one GDAL does not read."""
    return _facts(value)["degrees"] if isinstance(value, str) else _degrees(value)


def _degrees(value: Any) -> bool:
    crs = rio_crs(value)
    return crs is not None and bool(crs.is_geographic)


def degree_extent_problem(crs: Any, extent) -> str | None:
    """The error to give when ``crs`` is geographic and the map's ``extent`` lies beyond
    longitudes -180..360 or latitudes -90..90 degrees (most often an extent written in a
    projected CRS's metres), else None. Asked only once a source is found not to overlap the
    map (it may ask GDAL: see :func:`_facts`)."""
    west, south, east, north = (float(v) for v in extent)
    if -180 <= west and east <= 360 and east - west <= 360 and -90 <= south and north <= 90:
        return None
    if not geographic_degrees(crs):
        return None
    box = ", ".join(f"{v:.6g}" for v in extent)
    return (f"map.extent: [{box}] is not a longitude and latitude range: {crs} is a geographic "
            f"CRS, in degrees (longitude -180..180, or up to 360; latitude -90..90). An extent "
            f"written in another CRS's units: give that CRS as map.extent_crs")


def no_overlap_error(here: str, path: Any, source_box: str, canvas) -> Exception:
    """The error of a source that misses the map: ``here`` (e.g. 'layer "coast"'), the file,
    its box as text (``source_box``, with its CRS) and the map's box beside it; a
    :class:`~compose.errors.StyleError` at map.extent instead when the map's extent is no
    longitude / latitude range of its geographic CRS (:func:`degree_extent_problem`)."""
    from compose.errors import SourceError, StyleError

    problem = degree_extent_problem(canvas.crs, canvas.bounds)
    if problem is not None:
        return StyleError(problem)
    box = ", ".join(f"{v:.6g}" for v in canvas.bounds)
    return SourceError(f"{here}: {path} does not overlap the map extent ({source_box}; the "
                       f"map's {box} in {canvas.crs})")


def metre_projected(value: Any) -> bool:
    """True for a projected, non-compound CRS whose linear unit is exactly the metre (then
    a cell's size in metres is the transform's cell size, as pyproj's axis unit factor 1 gives);
    False means "ask pyproj"."""
    return _facts(value)["metre"] if isinstance(value, str) else _metre(value)


def _metre(value: Any) -> bool:
    crs = rio_crs(value)
    if crs is None or not crs.is_projected:
        return False
    wkt = crs.to_wkt()
    if not wkt.startswith("PROJCS["):
        return False
    try:
        return float(crs.linear_units_factor[1]) == 1.0
    except Exception:
        return False


_PROJECTION = re.compile(r'PROJECTION\["([^"]*)"')


def never_mercator(value: Any) -> bool:
    """True when ``value`` is certainly not a Mercator-family projection with a latitude-only
    scale: geographic, or projected (not compound) by a method whose name lacks "mercator" or
    names a transverse one; False means "ask pyproj"."""
    return _facts(value)["never"] if isinstance(value, str) else _never(value)


def _never(value: Any) -> bool:
    crs = rio_crs(value)
    if crs is None:
        return False
    wkt = crs.to_wkt()
    if crs.is_geographic and wkt.startswith("GEOGCS["):
        return True
    if not wkt.startswith("PROJCS["):
        return False
    names = _PROJECTION.findall(wkt)
    if len(names) != 1:
        return False
    name = names[0].lower()
    return "mercator" not in name or "transverse" in name
