"""What a cache entry of the check is keyed by (:mod:`compose.check_cache`): style values with
their colours blanked, file stamps of sources and of compose's painting modules, the versions of
the libraries that shape coverage, the canvas and a lookup table's index layout.

A stamp is common practice, as make does: a file is unchanged while its path, size and
modification time in nanoseconds are. Nothing here imports a geodata or drawing library (a warm
check imports none of them): library versions come from the installed distributions' metadata
folders, found on ``sys.path`` without importing the libraries.
"""
from __future__ import annotations

import dataclasses
import functools
import hashlib
import importlib.util
import json
import os
import re
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np

from compose.check_cache.store import CACHE_VERSION

__all__ = ["COLOR_KEYS", "COLOR_ONLY", "LIBRARIES", "plain", "source_stamp", "code_stamp",
           "library_versions", "canvas_key", "lut_key", "digest"]

#: Option names whose 3-number values are colours (replaced by a placeholder in the key).
COLOR_KEYS = frozenset({"stroke", "fill", "color", "tint", "shadow", "nodata", "background",
                        "ink"})
#: Options of a kind that only change its colours, never its coverage or indices.
COLOR_ONLY = {"relief": frozenset({"strength"})}
#: Import name -> distribution name of the libraries whose results a cached layer holds: numpy
#: (all the arithmetic), matplotlib (Agg's antialiased coverage, glyph outlines), rasterio and
#: pyogrio (each with its own GDAL: raster reads, resampling, decimated reads; vector reads),
#: shapely (GEOS: clipping, simplifying, label geometry) and pyproj (PROJ: reprojected vectors).
LIBRARIES = {"numpy": "numpy", "matplotlib": "matplotlib", "rasterio": "rasterio",
             "pyogrio": "pyogrio", "shapely": "shapely", "pyproj": "pyproj"}


def _is_rgb(value: Any) -> bool:
    return (isinstance(value, (tuple, list)) and len(value) == 3
            and all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in value))


def plain(value: Any, name: str | None = None, skip: frozenset[str] = frozenset()) -> Any:
    """A JSON-able copy of a style value with colours replaced by ``"colour"`` (``skip``: field
    names of a dataclass left out)."""
    if name is not None and name in COLOR_KEYS and _is_rgb(value):
        return "colour"
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return {"@": type(value).__name__,
                **{f.name: plain(getattr(value, f.name), f.name)
                   for f in dataclasses.fields(value) if f.name not in skip}}
    if isinstance(value, Mapping):
        return {str(k): plain(v, str(k)) for k, v in value.items()}
    if isinstance(value, (tuple, list)):
        return [plain(v) for v in value]
    if isinstance(value, float):
        return repr(value)
    if value is None or isinstance(value, (bool, int, str)):
        return value
    return repr(value)


def _stat(path: Path) -> list | None:
    try:
        st = os.stat(path)
    except OSError:
        return None
    return [str(path), st.st_size, st.st_mtime_ns]


def source_stamp(source: Path) -> list | None:
    """(path, size, mtime_ns) of a source and of the sidecar files that change what it reads
    (a ``.ovr`` overview file, a GeoPackage's ``-wal`` journal); None when the source cannot be
    stat'ed (the layer then reports its own error)."""
    main = _stat(Path(source))
    if main is None:
        return None
    side = [s for s in (_stat(Path(f"{source}{ext}")) for ext in (".ovr", "-wal")) if s]
    return [main] + side


def code_stamp() -> list:
    """:data:`CACHE_VERSION`, then size and mtime of the modules that paint (an edited module is
    a new cache)."""
    pkg = Path(__file__).resolve().parents[1]
    files = sorted([*(pkg / "layers").glob("*.py"), *(pkg / "sources").glob("*.py"),
                    pkg / "engine.py", pkg / "canvas.py", pkg / "ramps" / "lut.py"])
    return [CACHE_VERSION] + [s[1:] for s in map(_stat, files) if s]


def _normal(name: str) -> str:
    """A distribution name normalised as its metadata folder spells it (lower case, runs of
    ``-``, ``_`` and ``.`` as one ``_``; Python Packaging User Guide, "Recording installed
    projects" and "Names and normalization")."""
    return re.sub(r"[-_.]+", "_", name).lower()


@functools.lru_cache(maxsize=8)
def _listing(folder: str) -> tuple[str, ...]:
    try:
        return tuple(os.listdir(folder))
    except OSError:
        return ()


def _library_version(module: str, dist: str) -> list:
    """[version, bundled shared libraries] of one installed library, found without importing
    it: the version from its ``NAME-VERSION.dist-info`` folder beside the package (the Python
    Packaging User Guide, "Recording installed projects"), and the names of the shared libraries
    a wheel bundles in ``NAME.libs`` (they carry their own versions: ``libgdal-*.so.36.3.10.3``).
    None for the version when no metadata folder is found (e.g. an unusual install); a library
    that is not installed at all is ``[None, []]``."""
    try:
        spec = importlib.util.find_spec(module)
    except (ImportError, ValueError):
        spec = None
    if spec is None or not spec.origin:
        return [None, []]
    locations = list(spec.submodule_search_locations or [])
    package = Path(locations[0] if locations else spec.origin)
    site = str(package.parent)
    want = _normal(dist)
    version = None
    for entry in _listing(site):
        name, _, rest = entry.partition("-")
        if entry.endswith(".dist-info") and rest and _normal(name) == want:
            version = rest[:-len(".dist-info")]
            break
    libs = sorted(e for e in _listing(str(package.parent / f"{package.name}.libs"))
                  if ".so" in e or e.endswith((".dylib", ".dll")))
    return [version, libs]


def library_versions() -> dict[str, list]:
    """Import name -> ``[version, bundled shared libraries]`` of every library in
    :data:`LIBRARIES` (see :func:`_library_version`): an upgrade of any of them is a new cache,
    so coverage drawn or read by an older one is never replayed."""
    return {module: _library_version(module, dist) for module, dist in LIBRARIES.items()}


def canvas_key(canvas) -> list:
    """A canvas's CRS, transform, size and dpi."""
    return [str(canvas.crs), [repr(float(v)) for v in tuple(canvas.transform)[:6]],
            canvas.width, canvas.height, repr(float(canvas.dpi))]


def lut_key(lut) -> list:
    """What decides a lookup table's indices (not its colours)."""
    def arr(a):
        a = np.asarray(a, dtype=float)
        return hashlib.sha256(a.tobytes()).hexdigest()[:16] + f"/{a.size}"
    return [lut.kind, arr(lut.values), arr(lut.edges), lut.stepped, lut.step_method,
            repr(lut.origin), repr(lut.width), repr(lut.split), lut.n]


def digest(obj: Any) -> str:
    """40 hex digits of the SHA-256 of ``obj`` as sorted JSON."""
    return hashlib.sha256(json.dumps(obj, sort_keys=True).encode()).hexdigest()[:40]
