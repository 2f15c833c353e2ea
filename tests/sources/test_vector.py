"""VectorSource and Features, on tiny real GeoPackages / Shapefiles in tmp_path.

Outside reference: pyproj's Transformer (EPSG:4326 -> UTM) and the canvas's inverse affine.
"""
from __future__ import annotations

import numpy as np
import pyproj
import pytest
import shapely
from affine import Affine

from compose.canvas import Canvas
from compose.errors import SourceError, StyleError
from compose.sources.vector import Features, VectorSource
from tests.sources._files import write_vector

GEO, UTM31 = "EPSG:4326", "EPSG:32631"
PROPS = {"name": "str", "kind": "int", "rank": "float"}
TO_UTM = pyproj.Transformer.from_crs(GEO, UTM31, always_xy=True)


def utm_canvas(lon: float, lat: float, pixel: float = 10.0, size: int = 200) -> Canvas:
    """A UTM 31N canvas with the point (lon, lat) at the centre of pixel (size/2, size/2)."""
    x, y = TO_UTM.transform(lon, lat)
    half = size // 2
    return Canvas(UTM31, Affine(pixel, 0, x - (half + 0.5) * pixel, 0, -pixel, y + (half + 0.5) * pixel),
                  size, size)


@pytest.fixture
def gpkg(tmp_path):
    features = [
        ({"type": "Point", "coordinates": (3.0, 50.0)}, {"name": "town", "kind": 1, "rank": 5.0}),
        ({"type": "LineString", "coordinates": [(2.99, 49.995), (3.01, 50.005)]},
         {"name": "road", "kind": 2, "rank": 1.0}),
        (None, {"name": "ghost", "kind": 2, "rank": 0.0}),
        ({"type": "Polygon", "coordinates": [[(2.995, 49.998), (3.005, 49.998), (3.005, 50.002),
                                              (2.995, 50.002), (2.995, 49.998)]]},
         {"name": "park", "kind": 3, "rank": 2.0}),
        ({"type": "Point", "coordinates": (3.002, 50.001, 12.0)}, {"name": "peak", "kind": 1, "rank": 9.0}),
    ]
    path = write_vector(tmp_path / "v.gpkg", features, crs=GEO, properties=PROPS, table="places")
    write_vector(path, [({"type": "Point", "coordinates": (4.0, 51.0)}, {"name": "x", "kind": 9, "rank": 0.0})],
                 crs=GEO, properties=PROPS, table="other")
    return path


def test_points_and_lines_land_where_pyproj_says(gpkg):
    canvas = utm_canvas(3.0, 50.0)
    features = VectorSource(gpkg, layer="places").load(canvas.crs)
    names = [p["name"] for p in features.properties]
    assert names == ["town", "road", "park", "peak"]            # file order, null geometry dropped
    inverse = ~canvas.transform
    # The town sits at the centre of pixel (100, 100) by construction of the canvas.
    col, row = inverse @ shapely.get_coordinates(features.geometries[0])[0]
    assert (int(col), int(row)) == (100, 100)
    assert col == pytest.approx(100.5, abs=1e-6) and row == pytest.approx(100.5, abs=1e-6)
    # Every vertex of the line and the 3-D peak (z dropped) against pyproj + inverse affine.
    for i, lonlat in ((1, [(2.99, 49.995), (3.01, 50.005)]), (3, [(3.002, 50.001)])):
        x, y = TO_UTM.transform(*np.array(lonlat).T)
        want = np.column_stack(inverse @ (x, y))
        got = np.column_stack(inverse @ tuple(shapely.get_coordinates(features.geometries[i]).T))
        np.testing.assert_allclose(got, want, atol=1e-6)        # 1e-6 px = 10 um
    assert not shapely.has_z(features.geometries).any()


def test_load_is_cached_per_crs(gpkg):
    src = VectorSource(gpkg, layer="places")
    assert src.load(UTM31) is src.load("EPSG:32631")
    assert src.load(GEO) is not src.load(UTM31)
    lonlat = src.load(GEO)
    assert shapely.get_coordinates(lonlat.geometries[0]).tolist() == [[3.0, 50.0]]


def test_default_table_is_the_first(gpkg):
    assert VectorSource(gpkg, layer="places").table == "places"
    other = VectorSource(gpkg, layer="x", table="other").load(GEO)
    assert [p["name"] for p in other.properties] == ["x"]


def test_where_value_and_list(gpkg):
    one = VectorSource(gpkg, layer="p", where={"kind": 1}).load(UTM31)
    assert [p["name"] for p in one.properties] == ["town", "peak"]
    some = VectorSource(gpkg, layer="p", where={"name": ["road", "park"], "kind": [2, 3]}).load(UTM31)
    assert [p["name"] for p in some.properties] == ["road", "park"]
    both = VectorSource(gpkg, layer="p", where={"kind": 1, "rank": 9}).load(UTM31)   # 9 == 9.0
    assert [p["name"] for p in both.properties] == ["peak"]


def test_in_box_cuts_and_drops(gpkg):
    canvas = utm_canvas(3.0, 50.0)
    features = VectorSource(gpkg, layer="places").load(canvas.crs)
    x, y = TO_UTM.transform(3.0, 50.0)
    box = (x - 200, y - 200, x + 200, y + 200)     # cuts the road and the park, keeps the peak
    cut = features.in_box(box)
    assert [p["name"] for p in cut.properties] == ["town", "road", "park", "peak"]
    assert isinstance(cut, Features) and len(cut) == 4
    west, south, east, north = shapely.total_bounds(cut.geometries[1:3])
    assert west >= box[0] - 1e-6 and east <= box[2] + 1e-6 and south >= box[1] - 1e-6 and north <= box[3] + 1e-6
    far = features.in_box((x + 5000, y + 5000, x + 6000, y + 6000))
    assert len(far) == 0 and far.properties == []
    # a point exactly on the box edge is kept (points are not cut)
    on_edge = features.in_box((x, y - 10, x + 10, y + 10))
    assert "town" in [p["name"] for p in on_edge.properties]


def test_in_box_is_seam_free_for_lines():
    # A line crossing the edge x = 10 between two windows: each window cuts it to its box grown
    # by a margin; inside the shared strip both pieces are the same line, and the pieces inside
    # the two cores add up to the whole line (no gap, no overlap).
    line = shapely.LineString([(0, 3), (10, 7.3), (20, 4.1)])
    features = Features.build([line], [{"id": 1}])
    margin = 2.0
    left = features.in_box((0 - margin, 0 - margin, 10 + margin, 10 + margin)).geometries[0]
    right = features.in_box((10 - margin, 0 - margin, 20 + margin, 10 + margin)).geometries[0]
    strip = shapely.box(10 - margin, 0, 10 + margin, 10)
    a, b = left.intersection(strip), right.intersection(strip)
    assert a.equals_exact(b, 1e-9) or a.normalize().equals_exact(b.normalize(), 1e-9)
    in_cores = left.intersection(shapely.box(0, 0, 10, 10)).length + \
        right.intersection(shapely.box(10, 0, 20, 10)).length
    assert in_cores == pytest.approx(line.length, rel=1e-12)


def test_check_overlap(gpkg):
    src = VectorSource(gpkg, layer="places")
    src.check_overlap(utm_canvas(3.0, 50.0))
    with pytest.raises(SourceError, match=r'layer "places": .*v\.gpkg does not overlap'):
        src.check_overlap(utm_canvas(1.0, 45.0))
    empty = VectorSource(gpkg, layer="places", where={"kind": 42})
    with pytest.raises(SourceError, match=r'layer "places": no features in table "places" of .*v\.gpkg where kind'):
        empty.check_overlap(utm_canvas(3.0, 50.0))


# --- errors --------------------------------------------------------------------------------

def test_missing_file(tmp_path):
    with pytest.raises(SourceError, match=r'layer "coast": source not found: .*none\.gpkg'):
        VectorSource(tmp_path / "none.gpkg", layer="coast")


def test_unreadable_file(tmp_path):
    bad = tmp_path / "bad.gpkg"
    bad.write_bytes(b"\x00not a geopackage")
    with pytest.raises(SourceError, match=r'layer "coast": cannot read .*bad\.gpkg'):
        VectorSource(bad, layer="coast")


def test_no_crs(tmp_path):
    # A GeoPackage table written without a CRS has an undefined spatial reference.
    path = write_vector(tmp_path / "bare.gpkg", [({"type": "Point", "coordinates": (1.0, 2.0)}, {"name": "a"})],
                        crs=None, properties={"name": "str"}, geometry="Point")
    with pytest.raises(SourceError, match=r'layer "coast": .*bare\.gpkg has no CRS'):
        VectorSource(path, layer="coast")


def test_unknown_table_lists_tables(gpkg):
    with pytest.raises(StyleError, match=r'layer "coast": table "roads" not in .*v\.gpkg \(tables: places, other\)'):
        VectorSource(gpkg, layer="coast", table="roads")


def test_unknown_where_key_lists_attributes(gpkg):
    with pytest.raises(StyleError, match=r'layer "coast": where\.class: no attribute "class" in table "places" '
                                         r'of .*v\.gpkg \(attributes: name, kind, rank\)'):
        VectorSource(gpkg, layer="coast", where={"class": 1})


def test_file_metadata_is_read_once_per_file_version(tmp_path, monkeypatch):
    import pyogrio

    # a date column: no plain table (compose.sources.gpkg), so pyogrio lists the file's tables
    one = [({"type": "Point", "coordinates": (3.0, 50.0)}, {"name": "a", "kind": 1, "rank": 1.0,
                                                           "day": "2020-01-02"})]
    props = {**PROPS, "day": "date"}
    path = write_vector(tmp_path / "m.gpkg", one, crs=GEO, properties=props, table="first")
    calls = []
    real = pyogrio.list_layers
    monkeypatch.setattr(pyogrio, "list_layers", lambda p: calls.append(p) or real(p))
    assert VectorSource(path, layer="x").table == "first"
    assert VectorSource(path, layer="y").table == "first"     # the same file: listed once
    assert len(calls) == 1
    path.unlink()                                             # a new file at the same path
    write_vector(path, one + one, crs=GEO, properties=props, table="second")
    assert VectorSource(path, layer="z").table == "second" and len(calls) == 2


def test_an_early_read_without_a_tolerance_is_read_once_and_taken(tmp_path, monkeypatch):
    """compose.sources.vector.read_early for a full check (no draft tolerance): the early thread
    reads the file once and ends, and the source asking for the same table takes those features
    instead of reading again (the early read once waited for its own result, forever, and the
    layer read the file itself)."""
    import threading
    import time

    from compose.sources import vector
    from compose.sources.gpkg import GpkgTable

    feats = [({"type": "LineString", "coordinates": [(0.0, 0.0), (1.0, float(i))]}, {"n": i})
             for i in range(5)]
    path = write_vector(tmp_path / "e.gpkg", feats, crs=GEO, properties={"n": "int"})
    plain = VectorSource(path, layer="plain")._read()
    reads = []      # the file's geometries read: in bulk as features, or as flat lines
    real, flat = VectorSource._bulk, GpkgTable.read_lines
    monkeypatch.setattr(VectorSource, "_bulk", lambda self: reads.append(1) or real(self))
    monkeypatch.setattr(GpkgTable, "read_lines", lambda self, *a: reads.append(2) or flat(self, *a))
    vector.read_early(path, layer="early")
    time.sleep(0.3)             # the early thread gets there first, as in a check
    geoms, props = VectorSource(path, layer="taken")._read()
    assert props == plain[1]
    assert np.array_equal(shapely.to_wkb(geoms), shapely.to_wkb(plain[0]))
    assert len(reads) == 1
    for t in threading.enumerate():
        if t.name == "early-vectors":
            t.join(5.0)
            assert not t.is_alive()
    vector.forget_early()


def test_an_early_read_is_taken_by_the_source_asking_for_it_and_only_by_it(tmp_path):
    """compose.sources.vector.read_early: the features a later source of the same file, table,
    filter and draft tolerance takes are the ones it would read (simplified with GEOS's
    Douglas-Peucker as compose.sources.vector.simplified does when the draft asked for it and
    the file is in the draft's CRS); a source asking for something else reads on its own."""
    from compose.sources import vector

    rng = np.random.default_rng(5)
    walks = np.cumsum(rng.normal(0, 30.0, (20, 50, 2)), axis=1) + 500000.0
    feats = [({"type": "LineString", "coordinates": [tuple(p) for p in w]}, {"name": f"l{i}"})
             for i, w in enumerate(walks)]
    path = write_vector(tmp_path / "w.gpkg", feats, crs="EPSG:32631", properties={"name": "str"})
    plain = VectorSource(path, layer="plain")._read()
    vector.read_early(path, layer="early", simplify=60.0, crs="EPSG:32631")
    other = VectorSource(path, layer="other")                # no tolerance: its own read
    assert other._read()[1] == plain[1] and other.simplified is None
    assert np.array_equal(shapely.to_wkb(other._read()[0]), shapely.to_wkb(plain[0]))
    taken = VectorSource(path, layer="taken", simplified=60.0)
    geoms, props = taken._read()
    assert taken.simplified == 60.0 and props == plain[1]
    want, keep = vector.simplified(plain[0], 60.0)
    assert keep is not None and keep.all()
    assert np.array_equal(shapely.to_wkb(geoms), shapely.to_wkb(want))
    assert shapely.get_num_coordinates(geoms).sum() < shapely.get_num_coordinates(plain[0]).sum()
    taken.release()
    assert taken.simplified is None                          # read again: as the file is
    assert np.array_equal(shapely.to_wkb(taken._read()[0]), shapely.to_wkb(plain[0]))
    vector.forget_early()


def test_an_early_read_leaves_no_first_import_of_rasterio_to_its_thread(tmp_path):
    """rasterio's modules import each other, so when two threads import it for the first time at
    once, one can meet a module half initialised and fail (ImportError "partially initialized
    module 'rasterio.env'": about 1 cold ``compose check`` in 10, while the early vector thread
    asked rasterio about a CRS and the main thread imported the layers). read_early imports it
    in the calling thread first; a fresh process records which thread imported rasterio."""
    import subprocess
    import sys
    import textwrap

    feats = [({"type": "LineString", "coordinates": [(0.0, 0.0), (1.0, 1.0)]}, {"n": 1})]
    path = write_vector(tmp_path / "e.gpkg", feats, crs=GEO, properties={"n": "int"})
    code = textwrap.dedent(f"""
        import sys, threading
        seen = []
        class Watch:
            def find_spec(self, name, path=None, target=None):
                if name == "rasterio":
                    seen.append(threading.current_thread().name)
                return None
        sys.meta_path.insert(0, Watch())
        from compose.sources import vector
        assert "rasterio" not in sys.modules, "imported before the early read"
        vector.read_early({str(path)!r}, layer="early")
        for t in threading.enumerate():
            if t.name == "early-vectors":
                t.join(10.0)
        print(seen[0] if seen else "none")
    """)
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          timeout=60)
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == "MainThread"


def _random_lines(n: int, seed: int, span: float = 1000.0) -> np.ndarray:
    """Invented random walks (2 to 30 vertices) over a square of ``span`` metres."""
    rng = np.random.default_rng(seed)
    out = []
    for _ in range(n):
        start = rng.uniform(0, span, 2)
        out.append(shapely.LineString(start + rng.normal(0, span / 20, (int(rng.integers(2, 30)), 2))
                                      .cumsum(axis=0)))
    return np.array(out, dtype=object)


def test_flat_lines_cut_as_shapely_cuts_and_splits_them():
    """Lines.cut against the reference: shapely's clip_by_rect of each line meeting the box
    (GEOS), split into single lines in order (points where a line only touches dropped) --
    the same coordinates, bit for bit; overlaps as shapely's intersects."""
    from compose.sources.vector import Lines

    geoms = _random_lines(400, seed=11)
    lines = Lines.of_geometries(geoms)
    for box in ((200.0, 250.0, 700.0, 800.0), (-1e6, -1e6, 1e6, 1e6), (5e3, 5e3, 6e3, 6e3)):
        cut = lines.cut(box)
        hits = shapely.intersects(geoms, shapely.box(*box))
        ref = shapely.clip_by_rect(geoms[hits], *box)
        ref = ref[~shapely.is_empty(ref)]
        while len(ref) and (shapely.get_type_id(ref) >= 4).any():
            ref = shapely.get_parts(ref)
        ref = ref[shapely.get_type_id(ref) == 1] if len(ref) else ref
        assert cut is not None and len(cut) == len(ref)
        ref_xy, index = shapely.get_coordinates(ref, return_index=True)
        assert np.array_equal(cut.xy, ref_xy)
        assert np.diff(cut.starts).tolist() == np.bincount(index, minlength=len(ref)).tolist()
        assert lines.overlaps(box) == bool(hits.any())


def test_flat_lines_simplified_as_shapely_simplifies_them():
    """Lines.simplified: GEOS's repeated-point removal, then its Douglas-Peucker, per line
    (shapely's functions, the reference), as the features' draft simplification does."""
    from compose.sources.vector import Lines, simplified

    geoms = _random_lines(200, seed=5)
    got = Lines.of_geometries(geoms).simplified(40.0)
    ref = shapely.simplify(shapely.remove_repeated_points(geoms, 40.0), 40.0,
                           preserve_topology=False)
    assert np.array_equal(shapely.to_wkb(simplified(geoms, 40.0)[0]), shapely.to_wkb(ref))
    assert np.array_equal(got.xy, shapely.get_coordinates(ref))
    assert len(got) == len(ref)


def test_a_lines_layer_reads_flat_or_as_features_to_the_same_parts(tmp_path):
    """A lines layer of a plain GeoPackage table of LineStrings reads them flat (no shapely
    features): the same parts in pixel space as through its features (the reference: shapely's
    cut), on the full canvas and on a draft (simplified by an early read, or after the cut),
    with a ``where`` filter; a source in another CRS than the canvas reads features."""
    from compose.check.draft import draft_canvas
    from compose.layers.base import Context
    from compose.layers.vector import LinesLayer, _VectorLayer
    from compose.sources.vector import DRAFT_TOLERANCE, read_early
    from compose.style import load_style

    walks = _random_lines(300, 7, 3000.0)
    write_vector(tmp_path / "w.gpkg", [
        ({"type": "LineString", "coordinates": shapely.get_coordinates(g).tolist()}, {"k": i % 3})
        for i, g in enumerate(walks)], crs="EPSG:32630", properties={"k": "int"},
        geometry="LineString")
    (tmp_path / "s.toml").write_text("""
[map]
name = "w"
crs = "EPSG:32630"
extent = [500, 500, 2500, 2500]
pixel = 2
dpi = 150

[[layer]]
name = "w"
role = "overlay"
kind = "lines"
source = "w.gpkg"
where = { k = [0, 2] }
stroke = "#000000"
width = 0.5
""")
    style = load_style(tmp_path / "s.toml")
    spec = style.layers[0]

    def parts(draft: bool, flat: bool, early: bool):
        c = draft_canvas(style.canvas()) if draft else style.canvas()
        if early:
            read_early(spec.source, layer="w", table=None, where=spec.options.where,
                       simplify=c.pixel * DRAFT_TOLERANCE if draft else None, crs=c.crs)
        keep = LinesLayer._lines_read
        if not flat:
            LinesLayer._lines_read = _VectorLayer._lines_read
        try:
            layer = LinesLayer(spec, Context(canvas=c, ramps={}, style=style, draft=draft))
            assert (layer._lines is not None) == flat
            (got,), _ = layer._pixel_parts()
        finally:
            LinesLayer._lines_read = keep
        return got.xy, got.starts

    for draft in (False, True):
        for early in (False, True):
            a, b = parts(draft, True, early), parts(draft, False, early)
            assert len(a[1]) > 100 and np.array_equal(a[0], b[0]) and np.array_equal(a[1], b[1])
    other = VectorSource(spec.source, layer="w")
    assert other.lines("EPSG:32631") is None and other.lines("EPSG:32630") is not None


def test_lines_read_thinned_batch_by_batch_are_the_lines_thinned_whole(tmp_path, monkeypatch):
    """A draft's lines simplified as they are read, a few rows at a time
    (compose.sources.gpkg.GpkgTable.read_lines' ``thin``), are the lines read whole and then
    simplified (GEOS, per line: the reference), with a ``where`` filter."""
    from compose.sources import gpkg as gpkg_module
    from compose.sources.vector import Lines

    walks = _random_lines(50, 21, 3000.0)
    rows = [({"type": "LineString", "coordinates": shapely.get_coordinates(g).tolist()},
             {"k": i % 3}) for i, g in enumerate(walks)]
    path = write_vector(tmp_path / "t.gpkg", rows, crs="EPSG:32630", properties={"k": "int"},
                        geometry="LineString")
    monkeypatch.setattr(gpkg_module, "_BATCH", 4)
    source = VectorSource(path, layer="t", where={"k": [0, 1]})
    whole = source._read_lines()
    thinned = source._read_lines(90.0)
    assert whole is not None and thinned is not None and len(whole) == len(thinned) == 34
    ref = Lines.of_geometries(shapely.simplify(shapely.remove_repeated_points(
        whole.geometries(), 90.0), 90.0, preserve_topology=False))
    assert np.array_equal(thinned.xy, ref.xy) and np.array_equal(thinned.starts, ref.starts)
    assert np.array_equal(thinned.rows, whole.rows)
