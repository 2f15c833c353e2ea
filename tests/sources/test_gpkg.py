"""GeoPackage feature tables read with sqlite3 (compose.sources.gpkg) against pyogrio's bulk read
of the same files (GDAL's GeoPackage driver: the reference), and the cases it leaves to pyogrio.

Outside reference: pyogrio.raw.read (GDAL), and the OGC GeoPackage Encoding Standard 1.2.1
(OGC 12-128r17) for the blob header (clause 2.1.3.1.1) and the column types (table 1).
"""
from __future__ import annotations

import sqlite3
from pathlib import Path

import numpy as np
import pyogrio
import pytest
import shapely

from compose.sources import gpkg
from compose.sources.vector import VectorSource
from tests.sources._files import write_vector

ROOT = Path(__file__).resolve().parents[2]
UTM = "EPSG:32630"


def _by_pyogrio(path, table):
    meta, _, wkb, columns = pyogrio.raw.read(path, layer=table, force_2d=True,
                                             datetime_as_string=True)
    return list(meta["fields"]), wkb, list(columns)


def _same(path: Path, table: str) -> None:
    """sqlite3's read of ``table`` is pyogrio's: the same fields, the same geometries (exactly,
    by their WKB through shapely), the same attribute values (as Python values)."""
    found = gpkg.open_table(path, table)
    assert found is not None, table
    wkb, columns = found.read()
    names, ref_wkb, ref_columns = _by_pyogrio(path, table)
    assert found.fields == names
    assert found.crs == pyogrio.read_info(path, layer=table)["crs"]
    ours = shapely.force_2d(shapely.from_wkb(wkb, on_invalid="ignore"))
    theirs = shapely.from_wkb(ref_wkb, on_invalid="ignore")
    assert len(ours) == len(theirs)
    assert list(shapely.is_missing(ours)) == list(shapely.is_missing(theirs))
    both = ~shapely.is_missing(ours)
    assert np.array_equal(shapely.to_wkb(ours[both]), shapely.to_wkb(theirs[both]))
    for mine, ref in zip(columns, ref_columns):
        assert mine.tolist() == ref.tolist()


@pytest.mark.parametrize("table", ["coast", "land", "rivers", "roads", "province", "boundary",
                                   "towns"])
def test_every_demo_table_reads_as_pyogrio_reads_it(table):
    _same(ROOT / "demo_region" / "vectors.gpkg", table)


def test_points_lines_polygons_nulls_and_types(tmp_path):
    path = write_vector(tmp_path / "mixed.gpkg", [
        ({"type": "Point", "coordinates": (500000.0, 5000000.0)}, {"name": "a", "n": 1, "x": 0.1}),
        ({"type": "LineString", "coordinates": [(500000.0, 5000000.0), (500010.5, 5000020.25)]},
         {"name": None, "n": -7, "x": 2.5}),
        (None, {"name": "ghost", "n": 3, "x": 1e300}),
        ({"type": "Polygon", "coordinates": [[(0.0, 0.0), (10.0, 0.0), (10.0, 10.0), (0.0, 0.0)],
                                             [(1.0, 1.0), (2.0, 1.0), (2.0, 2.0), (1.0, 1.0)]]},
         {"name": "é ü 水", "n": 2**40, "x": -0.0}),
        ({"type": "MultiLineString", "coordinates": [[(1.0, 2.0), (3.0, 4.0)],
                                                     [(5.0, 6.0), (7.0, 8.0), (9.0, 1.0)]]},
         {"name": "m", "n": 0, "x": 3.0}),
    ], crs=UTM, properties={"name": "str", "n": "int", "x": "float"})
    _same(path, "features")


def test_z_coordinates_are_dropped_as_pyogrio_drops_them(tmp_path):
    path = write_vector(tmp_path / "z.gpkg", [
        ({"type": "LineString", "coordinates": [(1.0, 2.0, 30.0), (3.0, 4.0, 50.0)]}, {"k": 1}),
        ({"type": "Point", "coordinates": (5.0, 6.0, 7.0)}, {"k": 2}),
    ], crs=UTM, properties={"k": "int"}, geometry="Unknown")
    _same(path, "features")
    source = VectorSource(path, layer="z", table="features")
    geoms, _ = source._read()
    assert not shapely.has_z(geoms).any()


def test_float32_columns_round_as_gdal_reads_them(tmp_path):
    """A FLOAT column is a 4-byte float (GeoPackage table 1): GDAL reads float32 values."""
    path = write_vector(tmp_path / "f.gpkg", [
        ({"type": "Point", "coordinates": (1.0, 2.0)}, {"k": 1}),
        ({"type": "Point", "coordinates": (3.0, 4.0)}, {"k": 2}),
    ], crs=UTM, properties={"k": "int"})
    with sqlite3.connect(path) as con:       # a column of the standard's FLOAT type, added
        con.execute('ALTER TABLE features ADD COLUMN "v" FLOAT DEFAULT 0.1')
    con.close()
    names, _, columns = _by_pyogrio(path, "features")
    assert names == ["k", "v"] and columns[1].dtype == np.float32
    _same(path, "features")


def test_a_source_naming_no_table_reads_the_one_table_through_sqlite(tmp_path):
    """A GeoPackage registering one feature table, named by no ``table`` key: it is the first
    table pyogrio lists (the reference), read here without pyogrio; a file of two tables is left
    to pyogrio, whose first table it takes as before."""
    one = write_vector(tmp_path / "one.gpkg", [
        ({"type": "LineString", "coordinates": [(1.0, 2.0), (3.0, 4.0)]}, {"k": 1}),
    ], crs=UTM, properties={"k": "int"})
    assert gpkg.only_table(one) == pyogrio.list_layers(one)[0][0] == "features"
    source = VectorSource(one, layer="one")
    assert source._gpkg is not None and source.table == "features"
    _same(one, "features")
    with sqlite3.connect(one) as con:       # a second registered (attribute) table
        con.execute("CREATE TABLE extra (id INTEGER PRIMARY KEY, v TEXT)")
        con.execute("INSERT INTO gpkg_contents (table_name, data_type, identifier) "
                    "VALUES ('extra', 'attributes', 'extra')")
    con.close()
    assert gpkg.only_table(one) is None
    two = VectorSource(one, layer="two")
    assert two._gpkg is None and two.table == pyogrio.list_layers(one)[0][0]
    assert gpkg.only_table(tmp_path / "missing.gpkg") is None


def test_what_is_left_to_pyogrio(tmp_path):
    """Dates, a NULL integer, a CRS without an EPSG code, a non-GeoPackage file, a table that is
    not there: None, and VectorSource reads them through pyogrio as before."""
    dated = write_vector(tmp_path / "d.gpkg", [
        ({"type": "Point", "coordinates": (1.0, 2.0)}, {"day": "2020-01-02"}),
    ], crs=UTM, properties={"day": "date"})
    assert gpkg.open_table(dated, "features") is None
    source = VectorSource(dated, layer="d", table="features")
    _, props = source._read()
    assert props == [{"day": "2020-01-02"}]
    nulls = write_vector(tmp_path / "n.gpkg", [
        ({"type": "Point", "coordinates": (1.0, 2.0)}, {"k": None}),
    ], crs=UTM, properties={"k": "int"})
    table = gpkg.open_table(nulls, "features")
    assert table is not None and table.read() is None
    assert gpkg.open_table(dated, "nothing") is None
    # a GeoJSON file (RFC 7946) is no SQLite database: pyogrio reads it
    other = write_vector(tmp_path / "g.geojson", [({"type": "Point", "coordinates": (1.0, 2.0)},
                                                   {"k": 1})], crs=UTM, properties={"k": "int"},
                         driver="GeoJSON", geometry="Point")
    assert gpkg.open_table(other, "g") is None
    local = write_vector(tmp_path / "l.gpkg", [({"type": "Point", "coordinates": (1.0, 2.0)},
                                                 {"k": 1})],
                         crs='LOCAL_CS["nowhere",UNIT["metre",1]]', properties={"k": "int"})
    assert gpkg.open_table(local, "features") is None


def test_the_blob_header(tmp_path):
    """GeoPackageBinary headers with each envelope size, little- and big-endian, read to the WKB
    that follows them (clause 2.1.3.1.1); the extended encoding is left to pyogrio."""
    wkb = shapely.to_wkb(shapely.Point(1.5, -2.5))
    for indicator, size in ((0, 0), (1, 32), (2, 48), (3, 48), (4, 64)):
        for order in (0, 1):
            flags = (indicator << 1) | order
            blob = b"GP\x00" + bytes([flags]) + b"\x00\x00\x7f\x80" + b"\x11" * size + wkb
            assert gpkg._wkb(blob) == wkb
    with pytest.raises(gpkg._NotPlain):
        gpkg._wkb(b"GP\x00\x21\x00\x00\x00\x00" + wkb)
    with pytest.raises(gpkg._NotPlain):
        gpkg._wkb(b"GP\x00\x0a\x00\x00\x00\x00" + wkb)      # indicator 5: invalid
    assert gpkg._wkb(None) is None


def test_the_blob_header_cut_by_sqlite_as_in_python():
    """SQLite cuts the header (gpkg._wkb_sql) to the bytes gpkg._wkb gives, for every flags
    byte the reader accepts (reserved and empty-geometry bits set or not), and NULL to None."""
    import sqlite3

    wkb = shapely.to_wkb(shapely.LineString([(0, 0), (3, 4)]))
    blobs = []
    for flags in range(256):
        size = gpkg._ENVELOPE.get((flags >> 1) & 0x07)
        if flags & 0x20 or size is None:
            continue
        blobs.append(b"GP\x00" + bytes([flags]) + b"\x00\x00\x7f\x80" + bytes(range(size)) + wkb)
    assert len(blobs) == 80
    con = sqlite3.connect(":memory:")
    con.execute("CREATE TABLE t (g BLOB)")
    con.executemany("INSERT INTO t VALUES (?)", [(b,) for b in blobs] + [(None,)])
    got = [row[0] for row in con.execute(f"SELECT {gpkg._wkb_sql('g')} FROM t ORDER BY rowid")]
    con.close()
    assert got == [gpkg._wkb(b) for b in blobs] + [None]
    assert all(g == wkb for g in got[:-1])


def test_a_source_reads_the_same_features_either_way(monkeypatch):
    """The demo's rivers as the check reads them, with and without the sqlite3 path."""
    path = ROOT / "demo_region" / "vectors.gpkg"
    fast = VectorSource(path, layer="rivers", table="rivers", where={"order": [2, 3, 4]})
    assert fast._gpkg is not None
    monkeypatch.setattr("compose.sources.vector.open_table", lambda *a: None)
    slow = VectorSource(path, layer="rivers", table="rivers", where={"order": [2, 3, 4]})
    assert slow._gpkg is None
    (g1, p1), (g2, p2) = fast._read(), slow._read()
    assert p1 == p2 and np.array_equal(shapely.to_wkb(g1), shapely.to_wkb(g2))


def _walks(n: int, seed: int = 3) -> list[list[tuple[float, float]]]:
    """Random walks of 2 to 40 vertices around (500 km, 5000 km): invented lines."""
    rng = np.random.default_rng(seed)
    out = []
    for _ in range(n):
        steps = rng.normal(0, 50.0, (int(rng.integers(2, 40)), 2)).cumsum(axis=0)
        out.append([(500000.0 + x, 5000000.0 + y) for x, y in steps])
    return out


def test_lines_read_in_bulk_are_the_coordinates_pyogrio_reads(tmp_path):
    """read_lines: every row's vertices in table order, as GDAL's read of the same file gives
    them (the reference: pyogrio.raw.read, its WKB's coordinates through shapely), and the asked
    attribute columns as read() gives them."""
    walks = _walks(60)
    path = write_vector(tmp_path / "l.gpkg", [
        ({"type": "LineString", "coordinates": w}, {"k": i % 3, "name": f"n{i}"})
        for i, w in enumerate(walks)], crs=UTM, properties={"k": "int", "name": "str"},
        geometry="LineString")
    table = gpkg.open_table(path, "features")
    assert table is not None and table.geometry_type == "LINESTRING"
    got = table.read_lines(("name",))
    assert got is not None
    xy, counts, (names,) = got
    _, ref_wkb, ref_columns = _by_pyogrio(path, "features")
    ref_xy, index = shapely.get_coordinates(shapely.from_wkb(ref_wkb), return_index=True)
    assert np.array_equal(xy, ref_xy)
    assert counts.tolist() == np.bincount(index).tolist() == [len(w) for w in walks]
    assert names.tolist() == ref_columns[1].tolist()


def test_lines_in_bulk_leave_anything_else_to_read(tmp_path):
    """Z coordinates, a NULL geometry, a MultiLineString, points: read_lines gives None (the
    table is read with read(), as before)."""
    line = {"type": "LineString", "coordinates": [(1.0, 2.0), (3.0, 4.0)]}
    cases = {
        "z": [({"type": "LineString", "coordinates": [(1.0, 2.0, 3.0), (3.0, 4.0, 5.0)]}, {"k": 1})],
        "null": [(line, {"k": 1}), (None, {"k": 2})],
        "multi": [(line, {"k": 1}), ({"type": "MultiLineString",
                                      "coordinates": [[(1.0, 2.0), (3.0, 4.0)]]}, {"k": 2})],
        "points": [({"type": "Point", "coordinates": (1.0, 2.0)}, {"k": 1})],
    }
    for name, features in cases.items():
        path = write_vector(tmp_path / f"{name}.gpkg", features, crs=UTM, properties={"k": "int"})
        table = gpkg.open_table(path, "features")
        assert table is not None and table.read_lines() is None, name
        assert table.read() is not None


def test_lines_with_a_nan_coordinate_are_read_as_features(tmp_path):
    """A NaN coordinate: the flat read leaves the table to shapely's (VectorSource.lines None),
    which keeps the line as GDAL reads it."""
    path = write_vector(tmp_path / "nan.gpkg", [
        ({"type": "LineString", "coordinates": [(1.0, 2.0), (3.0, 4.0)]}, {"k": 1}),
        ({"type": "LineString", "coordinates": [(1.0, 2.0), (float("nan"), 4.0)]}, {"k": 2}),
    ], crs=UTM, properties={"k": "int"}, geometry="LineString")
    source = VectorSource(path, layer="nan")
    assert source._gpkg.read_lines() is not None and source.lines(UTM) is None
    assert len(source.load(UTM)) == 2
