"""Vector sources: features from anything OGR reads (GeoPackage, GeoJSON, Shapefile) via pyogrio;
a GeoPackage's plain feature tables with Python's sqlite3 instead (:mod:`compose.sources.gpkg`).

A :class:`VectorSource` checks its file, table and filter when it is made, reads the features on
the first :meth:`VectorSource.load` and reprojects them to the canvas CRS once (cached per CRS).
:meth:`Features.in_box` then cuts the features for one window.

Seam-free drawing: callers clip to the window's *padded* box grown by a margin at least as wide
as the widest stroke, halo or marker. A line crossing a window edge is then drawn from the same
coordinates in both windows, and the cut ends and the edges :func:`shapely.clip_by_rect` adds
to clipped polygons lie outside the area either window paints.
"""
from __future__ import annotations

import functools
import itertools
import threading
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
import shapely

from compose.canvas import Canvas
from compose.errors import SourceError, StyleError
from compose.sources.crs import no_overlap_error, plainly_usable, same_crs
from compose.sources.gpkg import only_table, open_table
from compose.sources.guard import check_crs, check_source, refuse_driver

if TYPE_CHECKING:
    import pyproj

__all__ = ["VectorSource", "Features", "Lines", "read_early", "forget_early"]

_POINT_TYPES = (0, 4)          # shapely type ids of Point and MultiPoint: kept whole, not cut


@dataclass
class _Opened:
    """What :func:`compose.sources.guard.refuse_driver` asks of an opened file."""

    driver: str | None
    name: str

    def close(self) -> None:
        pass


def _wkt(crs: str | None) -> str:
    """The WKT of a CRS as pyogrio reports it ("EPSG:32630" or WKT), "" for none."""
    if not crs:
        return ""
    import pyproj

    try:
        return pyproj.CRS.from_user_input(crs).to_wkt()
    except pyproj.exceptions.CRSError:
        return crs          # check_crs says it is not understood


def _first_line(exc: BaseException) -> str:
    text = str(exc).strip()
    return text.splitlines()[0] if text else type(exc).__name__


@dataclass(frozen=True, eq=False)
class Features:
    """Features in one CRS: parallel geometries and attribute rows, with a spatial index.

    geometries: object array of shapely 2 geometries (never None or empty), in file order;
    properties: one attribute dict per geometry; tree: an STRtree over ``geometries``, built on
    first use (the per-window cuts of :meth:`in_box` are drawn, never queried).
    """

    geometries: np.ndarray
    properties: list[dict]

    @classmethod
    def build(cls, geometries, properties) -> Features:
        """Make Features from geometries and their attribute dicts."""
        geoms = np.asarray(geometries, dtype=object).reshape(-1)
        props = list(properties)
        if len(props) != len(geoms):
            raise ValueError(f"{len(geoms)} geometries but {len(props)} property rows")
        return cls(geoms, props)

    @functools.cached_property
    def tree(self) -> shapely.STRtree:
        """STRtree over :attr:`geometries` (indices into it)."""
        return shapely.STRtree(self.geometries)

    def __len__(self) -> int:
        return len(self.geometries)

    def __reduce__(self):
        # geometries as one vectorised WKB array (exact coordinates): ~10x faster than pickling
        # them one by one (compose.drawer sends a render's features to its helper process)
        return (_features_from_wkb, (shapely.to_wkb(self.geometries), self.properties))

    @property
    def bounds(self) -> tuple[float, float, float, float]:
        """(west, south, east, north) of all geometries; NaNs when empty."""
        if len(self) == 0:
            return (float("nan"),) * 4
        return tuple(float(v) for v in shapely.total_bounds(self.geometries))

    def in_box(self, bounds: tuple[float, float, float, float]) -> Features:
        """Features whose geometry intersects the box ``(west, south, east, north)``, cut to it.

        Lines and polygons are cut with :func:`shapely.clip_by_rect` (vectorised; cut polygons
        gain edges along the box and may be invalid, which drawing tolerates); points and
        multipoints are kept whole. File order is kept; empty results are dropped.
        """
        west, south, east, north = (float(v) for v in bounds)
        if len(self) == 0:
            return self
        hits = np.sort(self.tree.query(shapely.box(west, south, east, north), predicate="intersects"))
        geoms = self.geometries[hits]
        kinds = shapely.get_type_id(geoms)
        cut = (kinds != _POINT_TYPES[0]) & (kinds != _POINT_TYPES[1])   # not np.isin: it sorts
        if cut.any():
            geoms = geoms.copy()
            geoms[cut] = shapely.clip_by_rect(geoms[cut], west, south, east, north)
        keep = ~shapely.is_empty(geoms)
        return Features.build(geoms[keep], [self.properties[i] for i in hits[keep]])


def _stamp(path: Path) -> tuple[int, ...]:
    """What identifies a file's version for the metadata memo: (mtime ns, size, inode); a
    source that is not a local file gets a stamp of its own each time (never memoised)."""
    try:
        st = Path(path).stat()
    except OSError:
        return (next(_UNIQUE),)
    return (st.st_mtime_ns, st.st_size, st.st_ino)


_UNIQUE = itertools.count()

@dataclass(frozen=True, eq=False)
class Lines:
    """Single-part lines in one CRS, flat: what a lines layer draws, without shapely.

    xy: (N, 2) float64 coordinates, every line's vertices in turn; starts: (n + 1,) int64
    offsets of the lines in ``xy`` (each of 2 vertices or more); rows: (n,) int64 the table
    row each line is (its attributes), or None for the parts of a cut (:meth:`cut`).
    Memory: 16 bytes a vertex, 16 a line.
    """

    xy: np.ndarray
    starts: np.ndarray
    rows: np.ndarray | None = None

    @classmethod
    def of_counts(cls, xy: np.ndarray, counts: np.ndarray,
                  keep: np.ndarray | None = None) -> Lines:
        """Lines from every row's vertices (``counts`` per row, 0 for an empty row) keeping the
        rows ``keep`` (bool, default all) that are not empty."""
        keep = counts > 0 if keep is None else keep & (counts > 0)
        if not keep.all():
            xy = xy[np.repeat(keep, counts)]
        kept = counts[keep]
        return cls(xy, np.concatenate([[0], np.cumsum(kept)]).astype(np.int64),
                   np.flatnonzero(keep))

    @classmethod
    def of_geometries(cls, geoms: np.ndarray, rows: np.ndarray | None = None) -> Lines:
        """Lines from single-part shapely LineStrings (none empty)."""
        xy, index = shapely.get_coordinates(geoms, return_index=True)
        counts = np.bincount(index, minlength=len(geoms))
        return cls(xy, np.concatenate([[0], np.cumsum(counts)]).astype(np.int64), rows)

    def __len__(self) -> int:
        return len(self.starts) - 1

    def geometries(self) -> np.ndarray:
        """The lines as shapely LineStrings (the same coordinates)."""
        if len(self) == 0:
            return np.empty(0, dtype=object)
        return shapely.from_ragged_array(shapely.GeometryType.LINESTRING, self.xy,
                                         (self.starts,))

    @functools.cached_property
    def boxes(self) -> np.ndarray:
        """(n, 4) float64 (min x, min y, max x, max y) of each line (made once)."""
        box = np.empty((len(self), 4))
        if len(self):
            first = self.starts[:-1]
            for k, (col, f) in enumerate(((0, np.minimum), (1, np.minimum),
                                          (0, np.maximum), (1, np.maximum))):
                box[:, k] = f.reduceat(self.xy[:, col], first)
        return box

    def simplified(self, tolerance: float) -> Lines:
        """The lines simplified within ``tolerance`` (CRS units) as :func:`simplified` does
        (GEOS's Douglas-Peucker, empties dropped), the same coordinates."""
        if len(self) == 0:
            return self
        geoms = _thinned(self.geometries(), tolerance)
        keep = ~shapely.is_empty(geoms)
        rows = None if self.rows is None else self.rows[keep]
        return Lines.of_geometries(geoms[keep], rows)

    def overlaps(self, bounds: tuple[float, float, float, float]) -> bool:
        """Whether any line intersects the box ``(west, south, east, north)`` (as shapely's
        ``intersects``: touching counts)."""
        west, south, east, north = (float(v) for v in bounds)
        b = self.boxes
        meet = (b[:, 0] <= east) & (b[:, 2] >= west) & (b[:, 1] <= north) & (b[:, 3] >= south)
        if not meet.any():
            return False
        inside = (b[:, 0] >= west) & (b[:, 2] <= east) & (b[:, 1] >= south) & (b[:, 3] <= north)
        if inside.any():
            return True
        x, y = self.xy[:, 0], self.xy[:, 1]
        if ((x >= west) & (x <= east) & (y >= south) & (y <= north)).any():
            return True
        some = np.flatnonzero(meet)
        part = Lines._pick(self, some)
        return bool(shapely.intersects(part.geometries(),
                                       shapely.box(west, south, east, north)).any())

    def _pick(self, which: np.ndarray) -> Lines:
        """The lines ``which`` (ascending indices)."""
        n = self.starts[which + 1] - self.starts[which]
        idx = np.arange(int(n.sum())) + np.repeat(self.starts[which] - (np.cumsum(n) - n), n)
        rows = None if self.rows is None else self.rows[which]
        return Lines(self.xy[idx], np.concatenate([[0], np.cumsum(n)]).astype(np.int64), rows)

    def cut(self, bounds: tuple[float, float, float, float]) -> Lines | None:
        """The parts of the lines inside the box ``(west, south, east, north)``, in order, as
        :meth:`Features.in_box` cuts them and a drawing splits them into single parts: a line
        strictly inside the box whole (its coordinates as they are), one outside it dropped,
        one crossing its edge cut by :func:`shapely.clip_by_rect` and split into its lines (a
        point where it only touches the box dropped). None when a cut gives anything else
        (then cut the features with shapely)."""
        west, south, east, north = (float(v) for v in bounds)
        b = self.boxes
        inside = (b[:, 0] > west) & (b[:, 2] < east) & (b[:, 1] > south) & (b[:, 3] < north)
        if inside.all():
            return Lines(self.xy, self.starts)
        outside = (b[:, 2] < west) | (b[:, 0] > east) | (b[:, 3] < south) | (b[:, 1] > north)
        edge = np.flatnonzero(~inside & ~outside)
        parts, owner = np.empty(0, dtype=object), np.empty(0, np.int64)
        if len(edge):
            geoms = Lines._pick(self, edge).geometries()
            hit = shapely.intersects(geoms, shapely.box(west, south, east, north))
            cut = shapely.clip_by_rect(geoms[hit], west, south, east, north)
            owner = edge[hit]
            keep = ~shapely.is_empty(cut)
            parts, owner = cut[keep], owner[keep]
            while len(parts) and (shapely.get_type_id(parts) >= 4).any():   # multi-part
                parts, index = shapely.get_parts(parts, return_index=True)
                owner = owner[index]
            kind = shapely.get_type_id(parts) if len(parts) else np.empty(0, np.int64)
            if not np.isin(kind, (0, 1)).all():
                return None
            keep = (kind == 1) & ~shapely.is_empty(parts)
            parts, owner = parts[keep], owner[keep]
        whole = np.flatnonzero(inside)
        cut_lines = Lines.of_geometries(parts)
        if not len(whole) and not len(cut_lines):
            return Lines(np.empty((0, 2)), np.zeros(1, np.int64))
        # every part in line order (a cut line's parts in their own order: a stable sort)
        line = np.concatenate([whole, owner])
        order = np.argsort(line, kind="stable")
        n = np.concatenate([self.starts[whole + 1] - self.starts[whole],
                            np.diff(cut_lines.starts)])[order]
        # their vertices: runs of consecutive whole lines one slice each, the cut parts between
        # them, joined in one copy
        breaks = np.flatnonzero(np.diff(whole) != 1) + 1
        run_first = np.concatenate([[0], breaks]).astype(np.int64) if len(whole) else \
            np.empty(0, np.int64)
        run_end = np.concatenate([breaks, [len(whole)]]).astype(np.int64) if len(whole) else \
            np.empty(0, np.int64)
        items = np.concatenate([whole[run_first], owner])
        pieces = []
        for k in np.argsort(items, kind="stable").tolist():
            if k < len(run_first):
                a, b = whole[run_first[k]], whole[run_end[k] - 1] + 1
                pieces.append(self.xy[self.starts[a]:self.starts[b]])
            else:
                k -= len(run_first)
                pieces.append(cut_lines.xy[cut_lines.starts[k]:cut_lines.starts[k + 1]])
        return Lines(np.concatenate(pieces), np.concatenate([[0], np.cumsum(n)]).astype(np.int64))

    @property
    def bounds(self) -> tuple[float, float, float, float]:
        """(west, south, east, north) of all lines; NaNs when there are none."""
        if len(self.xy) == 0:
            return (float("nan"),) * 4
        lo, hi = self.xy.min(axis=0), self.xy.max(axis=0)
        return (float(lo[0]), float(lo[1]), float(hi[0]), float(hi[1]))


#: A draft check's lines and outlines are simplified to this many of its pixels (lines: vertices
#: within it of the last one kept dropped, then Douglas-Peucker, see :func:`_thinned`; areas:
#: Douglas-Peucker keeping their topology; GEOS): a draft pixel spans many of the full canvas's,
#: and thousands of vertices inside one pixel only make Agg sort crossings (10,000 lines of 100
#: vertices on the 8192 benchmark's 384 x 384 draft: 4.6 s to draw, 0.9 s simplified to half a
#: pixel; the coverage sum moved 2 %).
#: One pixel (a line moves by at most the width of a 1 px stroke) took the benchmark's whole
#: draft check from 3.1 to 2.3 s in one process (loaded machine), with its overlay contrast
#: 0.560 either way (full check 0.559) and every example style's verdicts unchanged.
DRAFT_TOLERANCE = 1.0


def _thinned(lines: np.ndarray, tolerance: float) -> np.ndarray:
    """Lines (LineStrings, LinearRings, MultiLineStrings) simplified within ``tolerance`` (CRS
    units) for a draft: first every vertex within ``tolerance`` of the last one kept dropped
    (GEOS's repeated-point removal: one pass; a line's ends stay), then Douglas-Peucker (GEOS)
    on what is left. A dense line (the 8192 benchmark's 100 vertices of 0.45 draft pixels each)
    keeps 1 vertex in 9 instead of 1 in 7 for Douglas-Peucker alone, at half its cost (1 M
    vertices: 0.022 instead of 0.040 s); it moves by up to 3 ``tolerance`` instead of 1 (1.8
    draft pixels at most on the benchmark; see :data:`DRAFT_TOLERANCE`). Rings are only
    simplified (a ring thinned to fewer than 4 vertices is no ring)."""
    thin = shapely.get_type_id(lines) != 2
    if thin.any():
        lines = lines.copy()
        lines[thin] = shapely.remove_repeated_points(lines[thin], tolerance)
    return shapely.simplify(lines, tolerance, preserve_topology=False)


def _thin_rows(xy: np.ndarray, counts: np.ndarray, tolerance: float
               ) -> tuple[np.ndarray, np.ndarray]:
    """Rows of lines (``counts`` vertices each in ``xy``, 0 for an empty row) simplified within
    ``tolerance`` as :meth:`Lines.simplified` does (:func:`_thinned`): (their vertices, their
    counts: 0 for an empty row or a line simplified away). Compiled when it can be
    (``compose._kernels.thin_lines``: GEOS's steps, the same float64 operations, so the same
    vertices; 1 M vertices 0.030 -> 0.004 s), else, and for rows it declines (a coordinate not
    finite), shapely's."""
    from compose import kernels

    compiled = kernels.get()
    if compiled is not None and len(xy):
        xy = np.ascontiguousarray(xy, dtype=np.float64)
        out = np.empty_like(xy)
        thinned = np.empty(len(counts), np.int64)
        got = compiled.thin_lines(xy, np.ascontiguousarray(counts, dtype=np.int64),
                                  float(tolerance), out, thinned)
        if got is not None:
            # a copy: the whole of ``out`` (all of the batch's vertices' size) is freed now and
            # the next batch reuses its memory, instead of fresh pages each batch (8192
            # benchmark: 5,400 -> 2,100 page faults in a draft's marks process's read)
            return out[:got].copy(), thinned
    return _thin_rows_shapely(xy, counts, tolerance)


def _thin_rows_shapely(xy: np.ndarray, counts: np.ndarray, tolerance: float
                       ) -> tuple[np.ndarray, np.ndarray]:
    """:func:`_thin_rows` by shapely (GEOS)."""
    full = counts > 0
    if not full.any():
        return xy, counts
    starts = np.concatenate([[0], np.cumsum(counts[full])]).astype(np.int64)
    geoms = _thinned(shapely.from_ragged_array(shapely.GeometryType.LINESTRING, xy, (starts,)),
                     tolerance)
    out, index = shapely.get_coordinates(geoms, return_index=True)
    thinned = np.zeros_like(counts)
    thinned[full] = np.bincount(index, minlength=int(full.sum()))
    return out, thinned


def simplified(geoms: np.ndarray, tolerance: float) -> tuple[np.ndarray, np.ndarray | None]:
    """(geometries, which to keep) with lines and polygon rings simplified within ``tolerance``
    (CRS units; Douglas-Peucker, GEOS; polygons keep valid topology, points stay; empties are
    not kept); (geoms, None) when there is nothing to simplify."""
    if len(geoms) == 0:
        return geoms, None
    kinds = shapely.get_type_id(geoms)
    lines = np.isin(kinds, (1, 2, 5))           # LineString, LinearRing, MultiLineString
    areas = np.isin(kinds, (3, 6))              # Polygon, MultiPolygon
    if not (lines.any() or areas.any()):
        return geoms, None
    geoms = geoms.copy()
    if lines.any():
        geoms[lines] = _thinned(geoms[lines], tolerance)
    if areas.any():
        geoms[areas] = shapely.simplify(geoms[areas], tolerance, preserve_topology=True)
    return geoms, ~shapely.is_empty(geoms)


#: Geometry types a GeoPackage table declares (``gpkg_geometry_columns``) whose rows are read as
#: flat lines when they are all LineStrings (:meth:`VectorSource.lines`).
_LINE_TABLES = ("LINESTRING", "GEOMETRY")

class _Pending:
    """The result of a read a thread of :func:`read_early` makes (what a
    ``concurrent.futures.Future`` gives here, without importing that package and logging: about
    2 ms of a draft's marks process)."""

    __slots__ = ("_done", "_value", "_error")

    def __init__(self) -> None:
        self._done = threading.Event()
        self._value: Any = None
        self._error: BaseException | None = None

    def set_result(self, value: Any) -> None:
        self._value = value
        self._done.set()

    def set_exception(self, error: BaseException) -> None:
        self._error = error
        self._done.set()

    def exception(self) -> BaseException | None:
        """The read's error (None when it succeeded), once it is over."""
        self._done.wait()
        return self._error

    def result(self) -> Any:
        """The read's result once it is over (its error raised)."""
        self._done.wait()
        if self._error is not None:
            raise self._error
        return self._value


#: Reads started by :func:`read_early`, by (path, file version, table, filter).
_EARLY: dict[tuple, _Pending] = {}
_EARLY_LOCK = threading.Lock()


def _early_key(path, table, where, simplify) -> tuple:
    items = tuple(sorted((str(k), repr(v)) for k, v in dict(where or {}).items()))
    return (str(Path(path)), _stamp(Path(path)), table, items, simplify)


def read_early(path, *, layer: str, table: str | None = None,
               where: Mapping[str, object] | None = None, simplify: float | None = None,
               crs=None) -> None:
    """Start reading the features of ``path`` (its ``table``, ``where`` filter) on a thread of
    their own; a :class:`VectorSource` of the same file version, table, filter and
    ``simplified`` made later takes them instead of reading again (a check starts its vector
    reads while it imports and prepares the rest: SQLite's reads and shapely's parsing and
    simplification run beside that work). ``simplify``: a draft's tolerance in the units of
    ``crs`` (its canvas CRS), applied here when the file is in that CRS (:func:`simplified`).
    Errors are left to that source's own read; a read nobody takes is dropped by
    :func:`forget_early`."""
    # The thread's read asks rasterio about the file's CRS (compose.sources.crs). Import it
    # here, in the calling thread, so that thread and this one (whose layers import rasterio
    # next) never import rasterio at once: its modules import each other, and a second thread's
    # import can then meet one half initialised and fail (ImportError "partially initialized
    # module 'rasterio.env'", about 1 cold check in 10 before this). (Not in a draft's marks
    # process that asks GDAL nothing: compose.sources.crs.imports_here_only.)
    from compose.sources.crs import before_threads

    before_threads()

    key = _early_key(path, table, where, simplify)
    future = _Pending()
    with _EARLY_LOCK:
        if key in _EARLY:
            return
        _EARLY[key] = future

    def run() -> None:
        try:
            source = VectorSource(path, layer=layer, table=table, where=where)
            source._early = None    # the early read itself: never wait for its own future
            same = simplify is not None and crs is not None and same_crs(crs, source._crs_text)
            lines = source._read_lines(simplify if same else None)
            if lines is not None:   # a plain table of lines: flat (VectorSource.lines)
                future.set_result((lines, simplify if same else None))
                return
            raw = source._read()
            done = None
            if same:
                geoms, keep = simplified(raw[0], simplify)
                if keep is not None:
                    raw = (geoms[keep], [p for p, k in zip(raw[1], keep) if k])
                done = simplify
            future.set_result((raw, done))
        except BaseException as exc:        # the source's own read reports it
            future.set_exception(exc)

    threading.Thread(target=run, name="early-vectors", daemon=True).start()


def forget_early() -> None:
    """Drop the early reads nobody took (they finish on their own)."""
    with _EARLY_LOCK:
        _EARLY.clear()


@functools.lru_cache(maxsize=32)
def _tables(path: str, stamp: tuple) -> tuple[str, ...]:
    """The tables of a vector file, read once per file version in a process (layers of a style
    often share a file: a demo's eight vector layers open one GeoPackage)."""
    import pyogrio
    return tuple(str(t) for t in pyogrio.list_layers(path)[:, 0])


@functools.lru_cache(maxsize=64)
def _info(path: str, table: str, stamp: tuple) -> dict:
    """pyogrio's metadata of one table (driver, CRS, fields), once per file version (read only)."""
    import pyogrio
    return pyogrio.read_info(path, layer=table)


def _features_from_wkb(wkb: np.ndarray, properties: list[dict]) -> Features:
    return Features(shapely.from_wkb(wkb), properties)


class VectorSource:
    """Features of one table of a vector file, optionally filtered by attribute values.

    path: the file; layer: the style layer's name (for messages); table: the layer inside the
    file (default its first); where: ``{attribute: value | [values]}``, keeping features whose
    attribute equals the value or one of the values (plain ``==``, so 1 matches 1.0 but not "1").

    Raises :class:`SourceError` when the file is missing, unreadable or has no CRS, and
    :class:`StyleError` when ``table`` is not in the file or a ``where`` key is not an attribute.
    """

    def __init__(self, path: Path, *, layer: str, table: str | None = None,
                 where: Mapping[str, object] | None = None,
                 simplified: float | None = None) -> None:
        self.path = Path(path)
        self.layer = layer
        here = f'layer "{layer}"'
        local_only = check_source(path, here)
        # a GeoPackage's plain feature table: read with sqlite3, no pyogrio (compose.sources.gpkg)
        # (a style naming no table: the file's one registered table, if that is all it has)
        name = table if table is not None else only_table(self.path)
        self._gpkg = open_table(self.path, name) if name is not None else None
        if self._gpkg is not None:
            self.table = str(name)
            info = {"driver": self._gpkg.driver, "crs": self._gpkg.crs,
                    "fields": self._gpkg.fields}
        else:
            self.table, info = self._pyogrio_info(table, here)
        if self._gpkg is None:      # read by sqlite3: no GDAL driver opens the file
            refuse_driver(_Opened(info.get("driver"), str(self.path)), local_only, "vector",
                          here, "source")
        text = info.get("crs") or ""
        attributes = [str(f) for f in info.get("fields", [])]
        if not text:
            raise SourceError(f"{here}: {self.path} has no CRS")
        if not plainly_usable(text):        # else pyproj judges it (and names what it is)
            check_crs(_wkt(text), here, self.path)
        self._crs_text = text
        self._crs: pyproj.CRS | None = None
        self.attributes = attributes
        self.where: dict[str, tuple] = {}
        for key, value in dict(where or {}).items():
            if key not in attributes:
                raise StyleError(f'{here}: where.{key}: no attribute "{key}" in table "{self.table}" '
                                 f"of {self.path} (attributes: {', '.join(attributes) or 'none'})")
            values = value if isinstance(value, (list, tuple, set, frozenset)) else [value]
            self.where[key] = tuple(values)
        self._raw: tuple[np.ndarray, list[dict]] | None = None
        self._early = _early_key(path, table, where, simplified)
        #: the tolerance the features read were simplified with (see :func:`read_early`)
        self.simplified: float | None = None
        self._cache: dict[str, Features] = {}
        self._lines: Lines | None = None        # see lines
        #: the tolerance the lines read were simplified with (see :meth:`lines`)
        self.lines_simplified: float | None = None

    @property
    def crs(self) -> pyproj.CRS:
        """The source's CRS (pyproj's, made on first use)."""
        if self._crs is None:
            import pyproj

            self._crs = pyproj.CRS.from_wkt(_wkt(self._crs_text))
        return self._crs

    def _pyogrio_info(self, table: str | None, here: str) -> tuple[str, dict]:
        """(table, pyogrio's metadata of it): the file's first table when ``table`` is None."""
        from pyogrio.errors import DataLayerError, DataSourceError

        try:
            tables = list(_tables(str(self.path), _stamp(self.path)))   # memo per file version
        except (DataSourceError, DataLayerError, OSError) as exc:
            raise SourceError(f"{here}: cannot read {self.path}: {_first_line(exc)}") from None
        if not tables:
            raise SourceError(f"{here}: cannot read {self.path}: no tables in the file")
        if table is not None and table not in tables:
            raise StyleError(f'{here}: table "{table}" not in {self.path} '
                             f"(tables: {', '.join(tables)})")
        table = table if table is not None else tables[0]
        try:
            info = _info(str(self.path), table, _stamp(self.path))
        except (DataSourceError, DataLayerError, OSError) as exc:
            raise SourceError(f"{here}: cannot read {self.path}: {_first_line(exc)}") from None
        return table, info

    def _bulk(self) -> tuple[list[str], np.ndarray, list[np.ndarray]]:
        """(attribute names, WKB per feature, attribute columns) of the whole table, 2D."""
        got = self._gpkg.read() if self._gpkg is not None else None
        if got is not None:
            return list(self._gpkg.fields), got[0], got[1]    # type: ignore[union-attr]
        import pyogrio

        try:
            meta, _, wkb, columns = pyogrio.raw.read(self.path, layer=self.table, force_2d=True,
                                                     datetime_as_string=True)
        except (pyogrio.errors.DataSourceError, pyogrio.errors.DataLayerError, OSError) as exc:
            raise SourceError(f'layer "{self.layer}": cannot read {self.path}: '
                              f"{_first_line(exc)}") from None
        return list(meta["fields"]), wkb, list(columns)

    def _read(self) -> tuple[np.ndarray, list[dict]]:
        """Every kept feature in one bulk read (pyogrio: WKB and attribute columns as arrays,
        ~10x faster than feature by feature); attribute rows as plain Python values."""
        if self._raw is None:
            with _EARLY_LOCK:
                early = _EARLY.pop(self._early, None)
            if early is not None and early.exception() is None:
                got, self.simplified = early.result()
                if isinstance(got, Lines):      # read flat (see lines): the same features
                    got = (got.geometries(), self._attribute_rows(got.rows))
                self._raw = got
                return self._raw
        if self._raw is None:
            names, wkb, columns = self._bulk()
            arr = shapely.from_wkb(wkb, on_invalid="ignore") if len(wkb) else np.empty(0, object)
            if self._gpkg is not None and len(arr):     # 2D, as pyogrio's force_2d reads
                extra = shapely.has_z(arr)
                if hasattr(shapely, "has_m"):
                    extra |= shapely.has_m(arr)
                if extra.any():
                    arr = shapely.force_2d(arr)
            keep = ~shapely.is_missing(arr) & ~shapely.is_empty(arr)
            values = [np.asarray(c, dtype=object) if c.dtype.kind == "O" else c for c in columns]
            for key, allowed in self.where.items():
                col = values[names.index(key)]
                keep &= np.array([v in allowed for v in col.tolist()], dtype=bool)
            rows = zip(*[c[keep].tolist() for c in values]) if names else ([] for _ in range(int(keep.sum())))
            self._raw = (arr[keep], [dict(zip(names, r)) for r in rows])
        return self._raw

    def _read_lines(self, simplify: float | None = None) -> Lines | None:
        """Every kept feature as flat :class:`Lines` (rows: their table rows), read in bulk
        (:meth:`compose.sources.gpkg.GpkgTable.read_lines`), simplified within ``simplify``
        (CRS units) as :meth:`Lines.simplified` does, batch by batch as they are read; None
        unless the source is a plain GeoPackage table of LineStrings only whose kept vertices
        are finite."""
        gpkg = self._gpkg
        if gpkg is None or gpkg.geometry_type not in _LINE_TABLES:
            return None
        thin = None if simplify is None else functools.partial(_thin_rows, tolerance=simplify)
        got = gpkg.read_lines(tuple(self.where), thin)
        if got is None:
            return None
        xy, counts, columns = got
        keep = counts > 0
        for allowed, col in zip(self.where.values(), columns):   # as _read filters
            values = np.asarray(col, dtype=object) if col.dtype.kind == "O" else col
            keep &= np.array([v in allowed for v in values.tolist()], dtype=bool)
        lines = Lines.of_counts(xy, counts, keep)
        # NaN or infinite coordinates (NaN stays NaN through min and max): as features
        return lines if np.isfinite(lines.boxes).all() else None

    def _attribute_rows(self, rows: np.ndarray | None) -> list[dict]:
        """The attribute dicts of table rows ``rows`` (as :meth:`_read` makes them)."""
        got = self._gpkg.read_columns() if self._gpkg is not None else None
        if got is not None:
            names, columns = list(self._gpkg.fields), got    # type: ignore[union-attr]
        else:
            names, _, columns = self._bulk()
        values = [np.asarray(c, dtype=object) if c.dtype.kind == "O" else c for c in columns]
        rows = np.arange(0) if rows is None else rows
        if not names:
            return [{} for _ in range(len(rows))]
        return [dict(zip(names, r)) for r in zip(*[c[rows].tolist() for c in values])]

    def lines(self, crs) -> Lines | None:
        """Every kept feature as flat :class:`Lines` in ``crs``, the source's own CRS: the
        features :meth:`load` gives, as coordinates (a lines layer draws them without
        shapely); simplified already when an early read (:func:`read_early`) did
        (:attr:`lines_simplified`: its tolerance, as :attr:`simplified` for :meth:`load`).
        None when the source is not read so (not a plain GeoPackage table of LineStrings
        only, see :meth:`_read_lines`) or is in another CRS: use :meth:`load`. Kept until
        :meth:`release`."""
        text = crs.to_wkt() if hasattr(crs, "to_wkt") else crs
        if self._gpkg is None or self._gpkg.geometry_type not in _LINE_TABLES \
                or not same_crs(text, self._crs_text):
            return None
        if self._lines is None:
            with _EARLY_LOCK:
                early = _EARLY.pop(self._early, None)
            got = early.result() if early is not None and early.exception() is None else None
            if got is not None and isinstance(got[0], Lines):
                self._lines, self.lines_simplified = got
            elif got is not None:               # read as features: not a table of lines
                self._raw, self.simplified = got
                return None
            else:                               # (an early read's error: reported by load)
                self._lines, self.lines_simplified = self._read_lines(), None
        return self._lines

    def check_lines_overlap(self, lines: Lines, canvas: Canvas) -> None:
        """:meth:`check_overlap` for the source's :meth:`lines`: the same errors."""
        here = f'layer "{self.layer}"'
        if len(lines) == 0:
            filt = "".join(f" where {k} in {list(v)}" for k, v in self.where.items())
            raise SourceError(f'{here}: no features in table "{self.table}" of {self.path}{filt}')
        if not lines.overlaps(canvas.bounds):
            box = ", ".join(f"{v:.6g}" for v in lines.bounds)
            raise no_overlap_error(here, self.path, f"features span {box} in {canvas.crs}",
                                   canvas)

    def load(self, crs) -> Features:
        """All kept features reprojected to ``crs`` (any CRS pyproj understands), cached per CRS.

        Coordinates go through one vectorised pyproj Transformer call (always_xy, so x is
        easting / longitude). A feature with a coordinate the target CRS cannot represent
        (outside its domain) is dropped.
        """
        text = crs.to_wkt() if hasattr(crs, "to_wkt") else crs
        key = text if isinstance(text, str) else repr(text)
        if key in self._cache:
            return self._cache[key]
        geoms, props = self._read()
        # the same CRS as GDAL sees it: nothing to move, and no pyproj (compose.sources.crs)
        if len(geoms) and not same_crs(text, self._crs_text):
            import pyproj

            target = pyproj.CRS.from_user_input(text)
            tr = pyproj.Transformer.from_crs(self.crs, target, always_xy=True)

            def move(xy: np.ndarray) -> np.ndarray:
                x, y = tr.transform(xy[:, 0], xy[:, 1], errcheck=False)
                return np.column_stack([x, y])

            geoms = shapely.transform(geoms, move)
            coords, index = shapely.get_coordinates(geoms, return_index=True)
            bad = np.unique(index[~np.isfinite(coords).all(axis=1)])
            if bad.size:
                keep = np.ones(len(geoms), bool)
                keep[bad] = False
                geoms, props = geoms[keep], [p for p, k in zip(props, keep) if k]
        features = Features.build(geoms, props)
        self._cache[key] = features
        return features

    def release(self) -> None:
        """Drop the features read and reprojected so far (a layer that kept its own cut of them
        frees a second copy of every geometry); a later :meth:`load` reads the file again."""
        self._raw = None
        self.simplified = None
        self._cache.clear()
        self._lines = None
        self.lines_simplified = None

    def check_overlap(self, canvas: Canvas) -> None:
        """Raise :class:`SourceError` if no kept feature intersects the canvas."""
        features = self.load(canvas.crs)
        here = f'layer "{self.layer}"'
        if len(features) == 0:
            filt = "".join(f" where {k} in {list(v)}" for k, v in self.where.items())
            raise SourceError(f'{here}: no features in table "{self.table}" of {self.path}{filt}')
        hits = features.tree.query(shapely.box(*canvas.bounds), predicate="intersects")
        if hits.size == 0:
            box = ", ".join(f"{v:.6g}" for v in features.bounds)
            raise no_overlap_error(here, self.path, f"features span {box} in {canvas.crs}",
                                   canvas)

    def __repr__(self) -> str:
        return f"VectorSource({str(self.path)!r}, table={self.table!r}, layer={self.layer!r})"
