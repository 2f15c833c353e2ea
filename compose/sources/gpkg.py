"""GeoPackage feature tables read with Python's own sqlite3, without a GDAL (a fast path of
:class:`compose.sources.vector.VectorSource`).

A GeoPackage is an SQLite database (OGC GeoPackage Encoding Standard 1.2.1/1.3.0, OGC 12-128r17
and r18): ``gpkg_contents`` lists the tables, ``gpkg_geometry_columns`` each feature table's
geometry column and ``srs_id``, ``gpkg_spatial_ref_sys`` the CRSs, and every geometry is a
"GeoPackageBinary" blob: a header (clause 2.1.3.1.1: ``GP``, a version byte, a flags byte, the
``srs_id`` and an optional envelope) followed by the geometry as ISO WKB. Reading a table here
takes a few milliseconds and needs neither pyogrio nor its own copy of GDAL (about 0.1 s to
load beside rasterio's); it gives the same geometries and attribute values as pyogrio's bulk
read (tests/sources/test_gpkg.py reads every table both ways).

Only the plain case is read here; anything else returns None and the caller reads the file with
pyogrio as before: a file that is not a GeoPackage, a table that is not a feature table, a CRS
not given by an EPSG code, attributes of another type than integer, real or text (dates,
booleans, blobs), a NULL integer or real, a value of another type than its column's, a geometry
blob in the extended or an unknown encoding, or any SQLite error.
"""
from __future__ import annotations

import contextlib
import gc
import sqlite3
import struct
from collections.abc import Callable, Iterator
from pathlib import Path

import numpy as np

__all__ = ["GpkgTable", "open_table", "only_table"]

#: Declared column types read as integers / reals / text (GeoPackage 1.2.1, table 1, "GeoPackage
#: Data Types"; INT is SQLite's alias of INTEGER).
_INTEGER = ("INTEGER", "INT", "MEDIUMINT", "SMALLINT", "TINYINT")
_REAL = ("DOUBLE", "REAL")
#: FLOAT is a 4-byte float (table 1): GDAL reads it as float32, and so is it rounded here.
_FLOAT32 = ("FLOAT",)
#: Envelope contents indicator (flags bits 1-3) -> envelope bytes (clause 2.1.3.1.1).
_ENVELOPE = {0: 0, 1: 32, 2: 48, 3: 48, 4: 64}
#: "GPKG" (GeoPackage 1.2+) and "GP10"/"GP11" (1.0/1.1): SQLite application_id values.
_APPLICATION_IDS = (0x47504B47, 0x47503130, 0x47503131)


class _NotPlain(Exception):
    """The table is read by pyogrio instead."""


def _connect(path: Path) -> sqlite3.Connection:
    con = sqlite3.connect(f"{Path(path).resolve().as_uri()}?mode=ro", uri=True)
    con.execute("PRAGMA query_only = 1")
    return con


def _quote(name: str) -> str:
    return '"' + name.replace('"', '""') + '"'


def _base_type(declared: str | None) -> str:
    """A declared column type without its length, e.g. ``TEXT(20)`` -> ``TEXT``."""
    return (declared or "").split("(")[0].strip().upper()


class GpkgTable:
    """One feature table of a GeoPackage: ``driver`` ("GPKG"), ``crs`` ("EPSG:n"), ``fields``
    (attribute names in the table's order) and :meth:`read`."""

    driver = "GPKG"

    def __init__(self, path: Path, table: str, crs: str, geometry: str, key: str | None,
                 fields: list[str], kinds: list[str], geometry_type: str = ""):
        self.path = Path(path)
        #: the geometry type the table declares (``gpkg_geometry_columns``), upper case
        self.geometry_type = geometry_type
        self.table = table
        self.crs = crs
        self.geometry = geometry
        self.key = key
        self.fields = fields
        self._kinds = kinds

    def _select(self, cols: str) -> str:
        """SQL selecting ``cols`` (quoted, comma-separated) of every row, in the table's order
        (its integer primary key, SQLite's rowid)."""
        order = f" ORDER BY {_quote(self.key)}" if self.key else ""
        return f"SELECT {cols} FROM {_quote(self.table)}{order}"

    def _all_rows(self, cols: str) -> list:
        """Every row's ``cols`` (:meth:`_select`), fetched at once; raises sqlite3.Error."""
        con = _connect(self.path)
        try:
            return con.execute(self._select(cols)).fetchall()
        finally:
            con.close()

    def read(self) -> tuple[np.ndarray, list[np.ndarray]] | None:
        """(WKB per feature, an object array with None for a NULL geometry; attribute columns,
        int64 / float64 / object arrays as pyogrio gives them), in the table's order (its integer
        primary key, SQLite's rowid), or None when the table is not plain after all."""
        geometry = _quote(self.geometry)
        cols = ", ".join([f"substr({geometry}, 1, 8)", _wkb_sql(geometry),
                          *(_quote(c) for c in self.fields)])
        try:
            rows = self._all_rows(cols)
            for head in {row[0] for row in rows}:     # each distinct header checked once
                _header(head)
            wkb = np.empty(len(rows), dtype=object)
            wkb[:] = [row[1] for row in rows]
            columns = [_column([row[j + 2] for row in rows], kind)
                       for j, kind in enumerate(self._kinds)]
        except (sqlite3.Error, _NotPlain, struct.error):
            return None
        return wkb, columns

    def read_lines(self, columns: tuple[str, ...] = (), thin: Callable | None = None
                   ) -> tuple[np.ndarray, np.ndarray, list[np.ndarray]] | None:
        """Every row's geometry as a 2D LineString's coordinates, in bulk: (xy, counts, the
        ``columns``' values as :meth:`read` gives them) in the table's order; xy: (N, 2)
        float64, every row's vertices in turn; counts: (rows,) int64 vertices per row (0: an
        empty LineString). Rows are fetched in batches (:data:`_BATCH`), their headers checked
        as arrays and their coordinates joined into one buffer, with no shapely (10,000 lines
        of 100 vertices: about half the time of :meth:`read` and shapely's WKB parse, a third
        in a fresh process). None (read the table with
        :meth:`read` instead) unless the table has rows, every geometry is a standard blob
        (:func:`_header`) and all share their first 8 bytes (flags, srs_id), each holds a
        little-endian ISO WKB LineString without Z or M of 0 or 2 and more vertices and
        nothing after them (WKB: OGC 06-103r4, clause 8.2.6); or on any SQLite error. The
        coordinates may be NaN or infinite. ``thin``: (xy, counts) -> (xy, counts) of the same
        rows, applied to each batch as it arrives (a draft's simplification: the whole table's
        coordinates are then never held at once, nor the fresh memory they take faulted in)."""
        cols = ", ".join([_quote(self.geometry), *(_quote(c) for c in columns)])
        try:
            con = _connect(self.path)
            try:
                first = con.execute(self._select(_quote(self.geometry)) + " LIMIT 1").fetchone()
                size = _header(first[0]) if first is not None else None
                if size is None or first[0][size:size + 5] != b"\x01\x02\x00\x00\x00":
                    return None                 # no rows, or not LineStrings: no bulk read
                h = size + 9                    # the WKB's byte order, type and count
                con.execute(f"PRAGMA mmap_size = {_MMAP_BYTES}")
                cursor = con.execute(self._select(cols))
                parts, counts_of, coords, others = [], [], bytearray(), []
                with _no_collection():
                    while rows := cursor.fetchmany(_BATCH):
                        blobs = [row[0] for row in rows]
                        counts = _line_counts(blobs, first[0][:8], size)
                        if counts is None:
                            return None
                        got = b"".join([b[h:] for b in blobs])
                        if thin is None:
                            coords += got
                        else:                   # thinned batch by batch: little memory
                            xy, counts = thin(np.frombuffer(got, "<f8").reshape(-1, 2), counts)
                            parts.append(xy)
                        counts_of.append(counts)
                        if columns:
                            others += [row[1:] for row in rows]
            finally:
                con.close()
            counts = np.concatenate(counts_of)
            if thin is None:
                xy = np.frombuffer(coords, "<f8").reshape(-1, 2)
            else:
                xy = np.concatenate(parts) if parts else np.empty((0, 2))
            values = [_column([row[j] for row in others], self._kinds[self.fields.index(c)])
                      for j, c in enumerate(columns)]
        except (sqlite3.Error, _NotPlain, TypeError, ValueError):
            return None
        return xy, counts, values

    def read_columns(self) -> list[np.ndarray] | None:
        """The attribute columns as :meth:`read` gives them, without the geometries (None when
        the table is not plain after all)."""
        if not self.fields:
            return []
        cols = ", ".join(_quote(c) for c in self.fields)
        try:
            rows = self._all_rows(cols)
            return [_column([row[j] for row in rows], kind) for j, kind in enumerate(self._kinds)]
        except (sqlite3.Error, _NotPlain):
            return None


@contextlib.contextmanager
def _no_collection() -> Iterator[None]:
    """Python's cyclic garbage collector paused (when it runs) while a bulk read makes a row
    tuple and a bytes object per feature, none of them in a cycle: its collections, triggered
    by the count of new objects, traverse everything the process holds (10,000 rows: 8 ms
    steady instead of 8-14 ms)."""
    was = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was:
            gc.enable()


def _line_counts(blobs: list, head: bytes, size: int) -> np.ndarray | None:
    """Vertices of each blob's LineString (int64), or None unless every blob starts with
    ``head`` (8 bytes: flags, srs_id), has a ``size``-byte GeoPackageBinary header and holds a
    little-endian 2D ISO WKB LineString of 0 or 2 and more vertices and nothing after them."""
    h = size + 9
    heads = np.frombuffer(b"".join([b[:h] for b in blobs]), np.uint8)
    if len(heads) != h * len(blobs):        # a blob too short (or not bytes: raised)
        return None
    heads = heads.reshape(len(blobs), h)
    kind = heads[:, size + 1:size + 5].copy().view("<u4").ravel()
    counts = heads[:, size + 5:h].copy().view("<u4").ravel().astype(np.int64)
    lengths = np.fromiter(map(len, blobs), np.int64, len(blobs))
    if ((heads[:, :8] != np.frombuffer(head, np.uint8)).any() or (heads[:, size] != 1).any()
            or (kind != 2).any() or (counts == 1).any() or (lengths != h + 16 * counts).any()):
        return None
    return counts


#: Rows :meth:`GpkgTable.read_lines` fetches at a time: each batch's blobs (about 0.8 MB for
#: lines of 100 vertices) are freed before the next arrives, so the next reuses their memory
#: instead of the process faulting in fresh pages for every row of the table (on this kind of
#: VM each fresh page is a host fault: 10,000 rows in a fresh process, 13,100 -> 5,600 minor
#: faults and 0.05 -> 0.03 s).
_BATCH = 512


#: Bytes of a GeoPackage that SQLite maps into memory for :meth:`GpkgTable.read_lines`: its
#: pages read in place instead of copied through its page cache.
_MMAP_BYTES = 1 << 40


def _column(values: list, kind: str) -> np.ndarray:
    if kind == "int":
        if not all(type(v) is int for v in values):
            raise _NotPlain("not all integers")
        return np.array(values, dtype=np.int64).reshape(len(values))
    if kind in ("real", "float32"):
        if not all(type(v) is float or type(v) is int for v in values):
            raise _NotPlain("not all reals")
        out = np.array(values, dtype=np.float64).reshape(len(values))
        return out.astype(np.float32) if kind == "float32" else out
    if not all(v is None or type(v) is str for v in values):
        raise _NotPlain("not all text")
    out = np.empty(len(values), dtype=object)
    out[:] = values
    return out


def _header(blob) -> int | None:
    """The length of a GeoPackageBinary blob's header (its first 8 bytes or more: magic,
    version, flags, srs_id, then the envelope the flags announce), None for NULL; raises
    :class:`_NotPlain` for anything but a standard blob with a known envelope."""
    if blob is None:
        return None
    if not isinstance(blob, bytes) or len(blob) < 8 or blob[:2] != b"GP" or blob[2] != 0:
        raise _NotPlain("not a GeoPackageBinary blob")
    flags = blob[3]
    if flags & 0x20:                            # an extended GeoPackage geometry
        raise _NotPlain("extended geometry type")
    envelope = _ENVELOPE.get((flags >> 1) & 0x07)
    if envelope is None:
        raise _NotPlain("invalid envelope indicator")
    return 8 + envelope


def _wkb(blob) -> bytes | None:
    """The ISO WKB inside a GeoPackageBinary blob (None for NULL; an empty geometry keeps its
    WKB, which reads as empty)."""
    size = _header(blob)
    return None if size is None else blob[size:]


#: A blob of the bytes 0-255 in order: ``instr`` of a one-byte blob in it is that byte + 1.
_BYTES = "X'" + bytes(range(256)).hex() + "'"


def _wkb_sql(column: str) -> str:
    """SQL giving what :func:`_wkb` gives of the GeoPackageBinary blob in ``column`` (quoted),
    for a blob whose header :func:`_header` accepts: the header cut by SQLite as it reads the
    row instead of by Python row by row (10,000 blobs of 100 vertices: 0.036 -> 0.024 CPU-s)."""
    flags = f"instr({_BYTES}, substr({column}, 4, 1)) - 1"
    envelope = " ".join(f"WHEN {code} THEN {size}" for code, size in _ENVELOPE.items())
    return f"substr({column}, 9 + CASE (({flags}) >> 1) & 7 {envelope} END)"


def _is_gpkg(path: Path) -> bool:
    """SQLite's header: the magic string, and the application_id at offset 68 (big-endian)."""
    try:
        with open(path, "rb") as f:
            head = f.read(100)
    except OSError:
        return False
    return len(head) == 100 and head.startswith(b"SQLite format 3\0") and \
        int.from_bytes(head[68:72], "big") in _APPLICATION_IDS


def only_table(path: Path) -> str | None:
    """The name of the one table a GeoPackage registers (``gpkg_contents`` has a single row,
    a feature table): the first table a reader lists, so a style naming no ``table`` reads it;
    None otherwise (or on any error)."""
    path = Path(path)
    if not _is_gpkg(path):
        return None
    try:
        con = _connect(path)
        try:
            rows = con.execute("SELECT table_name, data_type FROM gpkg_contents").fetchall()
        finally:
            con.close()
    except sqlite3.Error:
        return None
    if len(rows) != 1 or rows[0][1] != "features" or not isinstance(rows[0][0], str):
        return None
    return rows[0][0]


def open_table(path: Path, table: str) -> GpkgTable | None:
    """The feature table ``table`` of the GeoPackage at ``path``, or None when it is not read
    here (see the module's docstring)."""
    path = Path(path)
    try:
        with open(path, "rb") as f:
            head = f.read(100)
    except OSError:
        return None
    # SQLite's header: the magic string, and the application_id at offset 68 (big-endian)
    if len(head) < 100 or not head.startswith(b"SQLite format 3\0") or \
            int.from_bytes(head[68:72], "big") not in _APPLICATION_IDS:
        return None
    try:
        con = _connect(path)
        try:
            found = con.execute(
                "SELECT g.column_name, g.srs_id, s.organization, s.organization_coordsys_id, "
                "g.geometry_type_name "
                "FROM gpkg_contents c JOIN gpkg_geometry_columns g ON g.table_name = c.table_name "
                "JOIN gpkg_spatial_ref_sys s ON s.srs_id = g.srs_id "
                "WHERE c.table_name = ? AND c.data_type = 'features'", (table,)).fetchall()
            if len(found) != 1:
                return None
            geometry, _srs, org, code, declared_type = found[0]
            info = con.execute(f"PRAGMA table_info({_quote(table)})").fetchall()
        finally:
            con.close()
    except sqlite3.Error:
        return None
    if not isinstance(org, str) or org.upper() != "EPSG" or not isinstance(code, int) or code <= 0:
        return None
    key = None
    fields, kinds = [], []
    for _cid, name, declared, _notnull, _default, pk in info:
        base = _base_type(declared)
        if name == geometry:
            continue
        if pk == 1 and base in _INTEGER and sum(1 for row in info if row[5]) == 1:
            key = name                      # the feature id: no attribute (as in pyogrio)
            continue
        if base in _INTEGER:
            kinds.append("int")
        elif base in _REAL:
            kinds.append("real")
        elif base in _FLOAT32:
            kinds.append("float32")
        elif base == "TEXT":
            kinds.append("text")
        else:
            return None
        fields.append(str(name))
    if key is None:
        return None
    return GpkgTable(path, table, f"EPSG:{code}", str(geometry), key, fields, kinds,
                     str(declared_type or "").upper())
