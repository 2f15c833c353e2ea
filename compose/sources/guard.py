"""A style reads only the data files it names: checks made before any source is opened.

Policy (README "What a style may read"):

- A source is a *regular local file*: checked with ``stat`` before opening, so a pipe (FIFO),
  a device (``/dev/zero``), a folder, a symlink loop, a missing file or an empty file is refused
  with one line naming the layer, the key and the file, and never waits or reads forever.
- *Remote and virtual sources* are refused unless the run allows them (``--allow-remote``, or
  :func:`compose.limits.use_limits` with ``allow_remote=True``): URLs, GDAL's ``/vsi*`` virtual
  file systems (``/vsicurl/``, ``/vsis3/``, ``/vsizip/``, ...), driver prefixes such as
  ``WMS:`` and GDAL XML wrapper files -- VRT (whose bands may point at a URL or any other
  file) and tile-service descriptions (WMS, WMTS, TMS) -- recognised by their content, not their
  name. Only drivers of plain single-file formats may open a source (:data:`RASTER_DRIVERS`,
  :data:`VECTOR_DRIVERS`).
- GDAL's configuration is pinned by :func:`configure_gdal` so no file can switch this on: VRT
  raw bands (which read any local file as pixels) are always off, folders are not listed when a
  file opens, network reads have a timeout and do not retry.

Nothing in a style file changes any of this.
"""
from __future__ import annotations

import contextlib
import errno
import functools
import os
import re
import stat
from collections.abc import Iterator
from pathlib import Path

from compose.errors import ComposeError, SourceError
from compose.limits import MAX_PATH_CHARS, current_limits

__all__ = ["is_remote", "read_regular_file", "check_source", "configure_gdal", "RASTER_DRIVERS",
           "VECTOR_DRIVERS", "GDAL_CONFIG", "allowed_drivers", "refuse_driver", "check_crs", "gdal_name",
           "as_source_error", "gdal_cache"]

#: Raster formats a source may be in when remote and virtual sources are not allowed: formats
#: whose dataset is one file (or a file with fixed sidecars) and that never fetch anything.
RASTER_DRIVERS = ("GTiff", "COG", "PNG", "JPEG", "GIF", "BMP", "WEBP", "JP2OpenJPEG", "GPKG",
                  "netCDF", "HDF5", "HDF5Image", "GRIB", "AAIGrid", "GRASSASCIIGrid", "XYZ",
                  "EHdr", "ENVI", "HFA", "SAGA", "RST", "RMF", "PCRaster", "SRTMHGT", "DTED",
                  "USGSDEM", "NITF", "ERS", "BT", "GSAG", "GSBG", "GS7BG", "SIGDEM", "ISG", "LCP",
                  "ILWIS", "NWT_GRD", "Leveller", "Terragen", "PNM", "MFF", "KRO", "BYN", "GTX")
#: Vector formats a source may be in without ``--allow-remote``.
VECTOR_DRIVERS = ("GPKG", "GeoJSON", "GeoJSONSeq", "FlatGeobuf", "SQLite", "TopoJSON", "CSV",
                  "KML", "LIBKML", "Parquet", "Arrow", "GPX")

#: GDAL configuration set for every run (environment, read by GDAL when it needs an option).
GDAL_CONFIG = {
    "GDAL_VRT_ENABLE_RAWRASTERBAND": "NO",      # a VRT raw band reads any file as pixels
    "GDAL_VRT_RAWRASTERBAND_ALLOWED_SOURCE": "SIBLING_OR_CHILD_OF_VRT_PATH",   # GDAL >= 3.10
    "GDAL_VRT_ENABLE_PYTHON": "NO",             # no Python code run from a VRT's pixel functions
    "VRT_ALLOW_MEM_DRIVER": "NO",               # no raw memory addresses from a VRT
    "GDAL_DISABLE_READDIR_ON_OPEN": "EMPTY_DIR",  # opening a file does not list its folder
    "GDAL_HTTP_TIMEOUT": "30",                  # seconds, for allowed remote sources
    "GDAL_HTTP_CONNECTTIMEOUT": "10",
    "GDAL_HTTP_MAX_RETRY": "0",
}

#: How much of a GDAL XML wrapper is searched for raw bands (bytes).
MAX_WRAPPER_BYTES = 16 << 20
_URL = re.compile(r"^[A-Za-z][A-Za-z0-9+.-]*://")
# a URL whose "//" a Path folded: "https:/host/x.tif"
_FOLDED = re.compile(r"\b(https?|ftps?|s3|gs|file):/(?!/)", re.I)
# driver-prefixed connection strings GDAL and OGR accept instead of a file name
_PREFIX = re.compile(r"^[A-Za-z][A-Za-z0-9_]*:(?![\\/])")
# the start of a GDAL XML wrapper: VRT, OGR VRT, WMS / TMS / WMTS service descriptions
_XML_ROOTS = re.compile(rb"<\s*(VRTDataset|OGRVRTDataSource|GDAL_WMS|GDAL_WMTS|TileMap|"
                        rb"WMS_Tile_Service|Capabilities|Services|GDAL_WCS|WCS_GDAL)\b", re.I)


#: GDAL's block cache per process, MB, unless the environment sets ``GDAL_CACHEMAX``. GDAL's own
#: default is 5 % of the machine's memory (1.2 GB on 24 GB), which a render fills with every
#: source block it ever read, so the process grew with the canvas (1.77 GB at 8192 x 8192 for
#: bench/render.py's style). The window walk re-reads three rows of 512 px tiles of each raster
#: through one GDAL handle per window thread: at 8192 px, 2 threads x 2 rasters x 3 rows x 16
#: tiles of 1 MB = 192 MB; 256 MB renders that style as fast as GDAL's default (19 s both on a
#: loaded machine; 128 MB took 33 s) at 0.84 GB (measured with /usr/bin/time -v; our choice).
GDAL_CACHE_MB = 256


def configure_gdal() -> None:
    """Pin :data:`GDAL_CONFIG` in the environment (overriding what was there); bound GDAL's
    block cache to :data:`GDAL_CACHE_MB` unless ``GDAL_CACHEMAX`` is set already."""
    os.environ.update(GDAL_CONFIG)
    os.environ.setdefault("GDAL_CACHEMAX", str(GDAL_CACHE_MB))


configure_gdal()


@contextlib.contextmanager
def gdal_cache(max_bytes: int) -> Iterator[None]:
    """Bound GDAL's block cache (process-wide) to at most ``max_bytes`` meanwhile (never
    raised above what it is); GDAL drops blocks past the new bound."""
    from rasterio.env import get_gdal_config, set_gdal_config

    before = get_gdal_config("GDAL_CACHEMAX")
    try:
        before = int(before)
    except (TypeError, ValueError):
        before = None
    if before is not None and before <= max_bytes:
        yield
        return
    set_gdal_config("GDAL_CACHEMAX", int(max_bytes))
    try:
        yield
    finally:
        set_gdal_config("GDAL_CACHEMAX", before if before is not None else GDAL_CACHE_MB << 20)


def is_remote(source: str) -> bool:
    """True when ``source`` names something other than a plain local file: a URL, a ``/vsi*``
    virtual path or a driver-prefixed connection string (``WMS:...``, ``GPKG:...``)."""
    text = str(source).strip()
    return bool(_URL.match(text) or text.startswith("/vsi") or _FOLDED.match(text)
                or (_PREFIX.match(text) and not re.match(r"^[A-Za-z]:", text)))


def gdal_name(source: str | Path) -> str:
    """The name to hand GDAL for ``source``: as written, with the ``//`` of a URL restored
    where a :class:`~pathlib.Path` folded it (``/vsicurl/https:/host`` -> ``https://host``)."""
    text = str(source)
    if not is_remote(text):
        return text
    return _FOLDED.sub(r"\1://", text)


def _reason(exc: OSError) -> str:
    if exc.errno == errno.ELOOP:
        return "a symbolic link loop"
    if exc.errno == errno.ENAMETOOLONG:
        return "file name too long"
    if exc.errno == errno.ENOENT:
        return "not found"
    return exc.strerror or str(exc)


def _kind(mode: int) -> str:
    if stat.S_ISDIR(mode):
        return "a folder"
    if stat.S_ISFIFO(mode):
        return "a pipe (FIFO)"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "not a plain file"


def _stat_regular(path: str | Path, what: str, error: type[ComposeError]) -> os.stat_result:
    text = str(path)
    if "\x00" in text:
        raise error(f"{what}: the file name holds a NUL character")
    if len(text) > MAX_PATH_CHARS:
        raise error(f"{what}: file name too long ({len(text):,} characters)")
    try:
        st = os.stat(text)
    except OSError as exc:
        shown = text if len(text) <= 300 else text[:140] + " ... " + text[-140:]
        raise error(f"{what} {_reason(exc)}: {shown}") from None
    if not stat.S_ISREG(st.st_mode):
        raise error(f"{what} is not a regular file ({_kind(st.st_mode)}): {text}")
    return st


def read_regular_file(path: str | Path, what: str, max_bytes: int,
                      error: type[ComposeError] = SourceError) -> bytes:
    """The bytes of the regular file ``path`` (at most ``max_bytes``), refusing pipes, devices,
    folders and larger files before reading; ``what`` names the file in messages."""
    st = _stat_regular(path, what, error)
    if st.st_size > max_bytes:
        raise error(f"{what} {path} is {st.st_size / 1e6:.1f} MB; at most "
                    f"{max_bytes / 1e6:.1f} MB is read")
    try:
        with open(path, "rb") as f:    # a regular file: reading cannot block
            data = f.read(max_bytes + 1)
    except OSError as exc:
        raise error(f"cannot read {what} {path}: {_reason(exc)}") from None
    if len(data) > max_bytes:
        raise error(f"{what} {path} grew past {max_bytes / 1e6:.1f} MB while being read")
    return data


def _looks_like_wrapper(path: str) -> bool:
    try:
        with open(path, "rb") as f:
            head = f.read(4096)
    except OSError:
        return False
    stripped = head.lstrip(b"\xef\xbb\xbf \t\r\n")
    return stripped.startswith(b"<") and bool(_XML_ROOTS.search(head))


def _has_raw_band(path: str) -> bool:
    try:
        with open(path, "rb") as f:
            text = f.read(MAX_WRAPPER_BYTES)
    except OSError:
        return False
    return b"vrtrawrasterband" in text.lower()


def check_source(source: str | Path, where: str, key: str = "source") -> bool:
    """Check a source before it is opened; True when only the plain local formats
    (:func:`allowed_drivers`) may open it, False when the run allows remote sources.

    ``where`` names the layer (``layer "coast"``) and ``key`` the style key for messages.
    Raises :class:`SourceError` for a remote or virtual source when the run does not allow
    them, and for anything but a non-empty regular local file.
    """
    text = str(source)
    allow = current_limits().allow_remote
    if is_remote(text):
        if allow:
            return False
        raise SourceError(f"{where}: {key} {text!r} is a remote or virtual source; compose reads "
                          f"only local files unless run with --allow-remote")
    st = _stat_regular(text, f"{where}: {key}", SourceError)
    if st.st_size == 0:
        raise SourceError(f"{where}: {key} is an empty file: {text}")
    if _looks_like_wrapper(text):
        if _has_raw_band(text):      # refused in any case: a raw band reads any file as pixels
            raise SourceError(f"{where}: {key} {text} is a VRT with a raw band "
                              f"(VRTRawRasterBand), which can read any file as pixels; refused")
        if allow:
            return False
        raise SourceError(f"{where}: {key} {text} is a GDAL XML wrapper (VRT or tile service) "
                          f"that may read other files or the network; allowed only with "
                          f"--allow-remote")
    return not allow


@functools.lru_cache(maxsize=2)
def allowed_drivers(kind: str) -> list[str]:
    """The drivers of ``kind`` ('raster' or 'vector') that exist in this GDAL and may open a
    local source."""
    from rasterio.env import Env

    with Env() as env:
        present = env.drivers()
    names = RASTER_DRIVERS if kind == "raster" else VECTOR_DRIVERS
    allowed = [n for n in names if n in present]
    if kind == "vector":   # the .shp/.dbf/.shx file set: one file with fixed sidecars
        allowed += [n for n in present if n.endswith(" Shapefile")]
    return allowed


def refuse_driver(dataset, local_only: bool, kind: str, where: str, key: str = "source") -> None:
    """Close ``dataset`` (rasterio or fiona) and raise :class:`SourceError` when ``local_only``
    and its driver is not one of the plain formats of ``kind`` ('raster' or 'vector')."""
    if not local_only:
        return
    driver = getattr(dataset, "driver", None)
    if driver in allowed_drivers(kind):
        return
    name = getattr(dataset, "name", None) or getattr(dataset, "path", "")
    dataset.close()
    raise SourceError(f"{where}: {key} {name} is in the {driver} format, which may read other "
                      f"files or the network; allowed only with --allow-remote")


def check_crs(wkt: str, where: str, path) -> None:
    """Raise :class:`SourceError` unless ``wkt`` (WKT, or any text pyproj's ``from_user_input``
    takes) is a geographic or projected CRS (an engineering or local CRS has no relation to the
    earth, so nothing can be reprojected). What GDAL reads as geographic or projected passes
    without importing pyproj (:mod:`compose.sources.crs`); pyproj judges the rest."""
    from compose.sources.crs import plainly_usable

    if plainly_usable(wkt):
        return
    import pyproj
    from pyproj.exceptions import CRSError

    try:
        crs = pyproj.CRS.from_user_input(wkt)
    except CRSError:
        raise SourceError(f"{where}: {path} has a CRS pyproj does not understand") from None
    if crs.is_engineering or not (crs.is_geographic or crs.is_projected):
        raise SourceError(f"{where}: {path} has a {crs.type_name} ({crs.name}), which cannot be "
                          f"reprojected onto the map; it needs a geographic or projected CRS")


def as_source_error(exc: BaseException, spec) -> BaseException:
    """A read error of a data library (rasterio, fiona, pyogrio) or the OS met while painting
    layer ``spec`` as a one-line :class:`SourceError` naming the layer and its file (a file that
    changed, was truncated or vanished mid-render); any other exception unchanged."""
    library = type(exc).__module__.split(".")[0] in ("rasterio", "fiona", "pyogrio")
    if isinstance(exc, ComposeError) or not (library or isinstance(exc, OSError)):
        return exc
    if isinstance(exc, OSError) and exc.errno in (errno.ENOSPC, errno.EDQUOT, errno.EROFS):
        return exc
    text = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
    return SourceError(f'layer "{spec.name}": cannot read {spec.source}: {text} (was the file '
                       f"changed, truncated or removed while rendering?)")
