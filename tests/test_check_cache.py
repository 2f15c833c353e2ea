"""The check's cache of prepared inputs (compose.check_cache): a warm check gives the same report
as a cold one, reuses entries after a colour change, rebuilds after a change of a source or of a
key that moves geometry, ignores a damaged entry, and loads no geodata or drawing library."""
from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from compose import check_cache
from compose.api import check
from compose.check_cache import keys, store
from tests.check._maps import field, labels, lines, make_data, relief, style, write_style

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def data(tmp_path_factory):
    """name -> path of the checker tests' tiny GeoTIFFs / GeoPackages."""
    return make_data(tmp_path_factory.mktemp("sources"))


@pytest.fixture
def stores(monkeypatch):
    """Every CheckCache a check makes, to see its hits and misses."""
    made = []
    real = check_cache.CheckCache.__init__

    def init(self, *a, **kw):
        real(self, *a, **kw)
        made.append(self)
    monkeypatch.setattr(check_cache.CheckCache, "__init__", init)
    return made


def _doc(data, **over):
    layers = [relief(data["hills"]), field(data["gradient"], nodata="transparent"),
              lines(data["coast"], stroke="#203040", width=1.5, halo={"color": "#ffffff", "width": 3}),
              labels(data["towns"], halo={"color": "#ffffff", "width": 1.5})]
    for layer in layers:
        layer.update(over.get(layer["name"], {}))
    return style(layers)


def _json(report) -> str:
    return json.dumps(report.to_json(False), sort_keys=True)


def _counts(store) -> tuple[int, int]:
    return len(store.hits), len(store.recorders)


def test_warm_report_is_the_cold_one(tmp_path, data, stores):
    path = write_style(tmp_path, _doc(data))
    plain = check(path, cache=False)
    cold = check(path, cache=tmp_path / "cache")
    warm = check(path, cache=tmp_path / "cache")
    assert _counts(stores[0]) == (0, 4) and _counts(stores[1]) == (4, 0)
    assert _json(plain) == _json(cold) == _json(warm)
    draft_cold = check(path, cache=tmp_path / "cache", draft=True)
    draft_warm = check(path, cache=tmp_path / "cache", draft=True)
    assert _json(draft_cold) == _json(draft_warm)


def test_the_demo_style_warm_is_the_cold_report(tmp_path, stores):
    """The coast demo: every layer kind it draws (relief, two fields, lines, points, labels
    along lines and at points) is cached and replayed to the same report, full and draft."""
    for draft in (True, False):
        cold = check(ROOT / "styles" / "coast.toml", cache=tmp_path, draft=draft)
        warm = check(ROOT / "styles" / "coast.toml", cache=tmp_path, draft=draft)
        assert _json(cold) == _json(warm)
        assert stores[-1].recorders == [] and len(stores[-1].hits) == 10
    assert _json(warm) == _json(check(ROOT / "styles" / "coast.toml", cache=False))


def test_a_color_change_reuses_every_entry(tmp_path, data, stores):
    cache = tmp_path / "cache"
    check(write_style(tmp_path, _doc(data)), cache=cache)
    recolored = _doc(data, coast={"stroke": "#a03020", "halo": {"color": "#f0f0e0", "width": 3},
                                   "opacity": 0.8, "blend": "multiply"},
                      relief={"strength": 0.4, "tint": {"L": 90, "C": 8, "h": 80}},
                      towns={"color": "#552200"})
    recolored["ramp"]["land"]["through"][0] = {"L": 85, "C": 30, "h": 80}
    path = write_style(tmp_path, recolored, "recoloured")
    warm = check(path, cache=cache)
    assert _counts(stores[-1]) == (4, 0)
    assert _json(warm) == _json(check(path, cache=False))


def test_a_geometry_key_rebuilds_its_layer_only(tmp_path, data, stores):
    cache = tmp_path / "cache"
    check(write_style(tmp_path, _doc(data)), cache=cache)
    path = write_style(tmp_path, _doc(data, coast={"width": 2.5}), "wider")
    wider = check(path, cache=cache)
    assert [r.spec.name for r in stores[-1].recorders] == ["coast"]
    assert _json(wider) == _json(check(path, cache=False))
    path = write_style(tmp_path, _doc(data, relief={"shade": {"exaggeration": 3}}), "steeper")
    check(path, cache=cache)
    assert [r.spec.name for r in stores[-1].recorders] == ["relief"]


def test_a_changed_source_is_read_again(tmp_path, data, stores):
    import shutil

    import numpy as np
    import rasterio

    src = tmp_path / "field.tif"
    shutil.copy(data["gradient"], src)
    doc = style([field(src)])
    path = write_style(tmp_path, doc)
    before = check(path, cache=tmp_path / "cache")
    with rasterio.open(src, "r+") as ds:
        ds.write(ds.read(1) * np.float32(0.5), 1)      # half the values: a new histogram
    os.utime(src, ns=(1, 1))                    # even with an older time: size + mtime differ
    after = check(path, cache=tmp_path / "cache")
    assert _counts(stores[-1]) == (0, 1)
    assert _json(after) == _json(check(path, cache=False)) != _json(before)


def test_library_versions_are_the_installed_distributions():
    """The versions the key holds are those the standard library's importlib.metadata reports
    for the installed distributions (found here without importing the libraries themselves)."""
    from importlib.metadata import version

    found = keys.library_versions()
    assert set(found) == {"numpy", "matplotlib", "rasterio", "pyogrio", "shapely", "pyproj"}
    for module, dist in keys.LIBRARIES.items():
        assert found[module][0] == version(dist), module
    # rasterio's wheel bundles its GDAL: the shared library's name carries GDAL's version
    import rasterio
    libs = found["rasterio"][1]
    if libs:
        assert any(rasterio.__gdal_version__ in name for name in libs if "gdal" in name)


def test_an_upgraded_library_misses_the_cache(tmp_path, data, stores, monkeypatch):
    """Coverage drawn by another matplotlib (or read by another GDAL, or computed by another
    numpy) is never replayed: a changed version is a miss for every layer."""
    cache = tmp_path / "cache"
    path = write_style(tmp_path, _doc(data))
    cold = check(path, cache=cache)
    real = keys.library_versions()
    for module in ("matplotlib", "rasterio", "numpy"):
        changed = {**real, module: ["0.0.1", real[module][1]]}
        monkeypatch.setattr(check_cache, "library_versions", lambda changed=changed: changed)
        assert _json(check(path, cache=cache)) == _json(cold)
        assert _counts(stores[-1]) == (0, 4), module
    monkeypatch.setattr(check_cache, "library_versions", keys.library_versions)
    check(path, cache=cache)
    assert _counts(stores[-1]) == (4, 0)


def test_a_damaged_entry_is_rebuilt(tmp_path, data, stores):
    cache = tmp_path / "cache"
    path = write_style(tmp_path, _doc(data))
    cold = check(path, cache=cache)
    entries = sorted((cache / "check").glob("*.entry"))
    assert len(entries) == 4
    entries[0].write_bytes(entries[0].read_bytes()[:200])          # cut short
    entries[1].write_bytes(b"\0" * 64)                              # garbage
    data_ = bytearray(entries[2].read_bytes())
    data_[-20:] = b"x" * 20                                         # a broken deflate stream
    entries[2].write_bytes(bytes(data_))
    again = check(path, cache=cache)
    assert _counts(stores[-1]) == (1, 3)
    assert _json(again) == _json(cold)
    assert _counts((check(path, cache=cache), stores[-1])[1]) == (4, 0)   # rewritten


def test_clearing_the_cache(tmp_path, monkeypatch):
    monkeypatch.delenv("COMPOSE_CACHE")
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "xdg"))
    (tmp_path / "xdg" / "compose" / "check").mkdir(parents=True)
    (tmp_path / "xdg" / "compose" / "check" / "a.entry").write_bytes(b"x")
    out = subprocess.run([sys.executable, "-c", "from compose.cli.main import main\n"
                          "main(['check', '--clear-cache'])"],
                         capture_output=True, text=True, cwd=ROOT, env=dict(os.environ))
    assert out.returncode == 0 and "removed 1" in out.stdout
    assert not list((tmp_path / "xdg" / "compose" / "check").iterdir())


def test_a_warm_check_loads_no_geodata_or_drawing_library(tmp_path, data):
    path = write_style(tmp_path, _doc(data))
    code = (f"import os\nos.environ['COMPOSE_CACHE'] = {str(tmp_path)!r}\n"  # the CRS memo too
            f"import compose.api, sys, json\ncompose.api.check({str(path)!r})\n"
            "print(json.dumps(sorted(sys.modules)))")
    runs = [subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT,
                           check=True) for _ in range(2)]
    cold, warm = (json.loads(r.stdout.strip().splitlines()[-1]) for r in runs)

    def heavy(loaded):
        return sorted({m.split(".")[0] for m in loaded} & {"matplotlib", "rasterio", "shapely",
                                                            "pyogrio", "fiona", "osgeo", "pyproj"})
    # cold: pyproj only to accept the canvas CRS once (this fresh cache's CRS memo), no pyogrio
    # (the GeoPackage's one table read through sqlite3, compose.sources.gpkg)
    assert heavy(cold) == ["matplotlib", "pyproj", "rasterio", "shapely"]
    assert heavy(warm) == []


def test_the_least_recently_used_entries_go_first(tmp_path):
    folder = tmp_path / "check"
    folder.mkdir()
    for i, name in enumerate("abcd"):
        (folder / f"{name}.entry").write_bytes(b"x" * 100)
        os.utime(folder / f"{name}.entry", ns=(10**18 + i, 10**18 + i))
    os.utime(folder / "a.entry")                # read just now: the most recently used
    assert check_cache.trim_cache(folder, max_bytes=250) == 2
    assert sorted(p.name for p in folder.iterdir()) == ["a.entry", "d.entry"]


def test_a_damaged_raw_array_is_noticed(tmp_path):
    """Noisy indices are stored without deflate; a flipped byte in them still makes a miss."""
    import numpy as np

    index = np.random.default_rng(1).integers(0, 1 << 16, (1024, 1024), dtype=np.uint16)
    alpha = np.zeros((1024, 1024), np.uint8)
    meta = {"version": check_cache.CACHE_VERSION, "slots": 1, "shape": [1024, 1024]}
    path = tmp_path / "x.entry"
    store.save_entry(path, meta, {"a0": alpha, "i0": index})
    meta_back, arrays = store.load_entry(path)
    assert meta_back == meta and np.array_equal(arrays["i0"], index)
    raw = bytearray(path.read_bytes())
    assert b'"raw"' in raw                       # the indices were stored as they are
    raw[-1000] ^= 0xFF
    path.write_bytes(bytes(raw))
    assert store.load_entry(path) is None


def test_labels_follow_the_furniture_inside_the_frame(tmp_path):
    """Labels keep clear of page furniture inside the map frame, whose size follows the legend:
    with furniture inside, the labels' key follows the page, layers and ramps; with all of it in
    the panel (the example styles) it does not, so a ramp's colours stay out of it."""
    from compose.style import load_style

    base = (ROOT / "styles" / "coast.toml").read_text(encoding="utf-8")

    def furniture(text: str):
        path = tmp_path / "coast.toml"
        for src in ("water_productivity", "land_productivity", "elevation"):
            text = text.replace(f"../demo_region/{src}.tif", str(ROOT / "demo_region" / f"{src}.tif"))
        path.write_text(text.replace('extends = "base.toml"',
                                     f'extends = "{ROOT / "styles" / "base.toml"}"'), "utf-8")
        style = load_style(path)
        return check_cache.CheckCache(tmp_path, style, style.canvas(), keep_clear=print)._furniture

    assert furniture(base) is None
    corner = base.replace("[page]\n", '[page]\nlegend = "bottom left"\n')
    inside = furniture(corner)
    assert inside is not None
    assert furniture(corner.replace("strength = 0.25", "strength = 0.3")) == inside   # a colour
    assert furniture(corner.replace('legend = "bottom left"', 'legend = "top right"')) != inside


def test_a_cold_check_reads_each_vector_source_once_early_and_a_warm_one_not_at_all(
        tmp_path, monkeypatch):
    """Vector layers' features are read on threads while the check imports and prepares the
    rest (compose.sources.vector.read_early) and taken by the layers instead of read again (as
    many reads as without them); the layers whose entries the cache holds are not read at all.
    The demo's GeoPackage tables are read through compose.sources.gpkg: counting its bulk reads
    (as features, or as flat lines) counts the file reads."""
    import compose.api
    from compose.sources import gpkg

    calls = []
    real, flat = gpkg.GpkgTable.read, gpkg.GpkgTable.read_lines
    monkeypatch.setattr(gpkg.GpkgTable, "read", lambda self: calls.append(self.table) or real(self))
    monkeypatch.setattr(gpkg.GpkgTable, "read_lines",
                        lambda self, *a: calls.append(self.table) or flat(self, *a))
    demo = Path(__file__).resolve().parents[1] / "styles" / "coast.toml"
    cold = check(demo, cache=tmp_path)
    early = sorted(calls)
    calls.clear()
    with monkeypatch.context() as m:
        m.setattr(compose.api, "_read_vectors_early", lambda specs, draft=None, style=None: False)
        check(demo, cache=False)
    assert early and early == sorted(calls)
    calls.clear()
    warm = check(demo, cache=tmp_path)
    assert calls == []
    assert json.dumps(warm.to_json(False)) == json.dumps(cold.to_json(False))


def test_a_check_recording_its_cache_walks_with_helpers_and_writes_the_same_entries(tmp_path):
    """A cold check with the cache (its first run after a change of sources or geometry) is
    walked by helper processes too (compose.api._Helpers): each helper sends its windows' paints
    with their statistics and the check records them in window order, so the entries are the
    bytes a walk in one process writes, and the warm report is the cold one (our own invariant).
    In a fresh process, as a command runs it (this one may have threads that forbid forking)."""
    code = """
import json, sys
from pathlib import Path
import compose, compose.page.process as process
started = []
real = process.Forked.__init__
process.Forked.__init__ = lambda self, fn: started.append(1) or real(self, fn)
style = compose.load_style(sys.argv[1], overrides={"map.pixel": 60})
one, two = Path(sys.argv[2]) / "one", Path(sys.argv[2]) / "two"
cold1 = json.dumps(compose.check(style, cache=one, workers=1).to_json(False))
cold2 = json.dumps(compose.check(style, cache=two, workers=2).to_json(False))
helpers = len(started)
warm = json.dumps(compose.check(style, cache=two, workers=2).to_json(False))
def entries(root):
    return {p.name: p.read_bytes() for p in root.rglob("*.entry")}
e1, e2 = entries(one), entries(two)
print(json.dumps({"same_report": cold1 == cold2 == warm, "helpers": helpers,
                  "after_warm": len(started), "entries": len(e1), "same_entries": e1 == e2}))
"""
    demo = Path(__file__).resolve().parents[1] / "styles" / "coast.toml"
    out = subprocess.run([sys.executable, "-c", code, str(demo), str(tmp_path)],
                         capture_output=True, text=True, check=True)
    got = json.loads(out.stdout.strip().splitlines()[-1])
    assert got["same_report"] and got["entries"] >= 5 and got["same_entries"]
    if sys.platform.startswith("linux"):
        assert got["helpers"] == 1 and got["after_warm"] == 1     # a warm check walks alone


def test_labels_follow_the_sources_of_the_lines_they_avoid(tmp_path, data, stores):
    """A labels layer with ``avoid`` is keyed by the avoided layers' sources and their options
    other than colours: a changed lines file places its labels again; a recoloured line does
    not."""
    import shutil

    coast = tmp_path / "coast.gpkg"
    shutil.copy(data["coast"], coast)
    cache = tmp_path / "cache"

    def doc(**over):
        d = _doc(data, **over)
        d["layer"][2]["source"] = str(coast)
        d["layer"][3]["avoid"] = ["coast"]
        return d

    path = write_style(tmp_path, doc())
    cold = check(path, cache=cache)
    assert _counts(stores[-1]) == (0, 4)
    warm = check(path, cache=cache)
    assert _counts(stores[-1]) == (4, 0) and _json(warm) == _json(cold)
    check(write_style(tmp_path, doc(coast={"stroke": "#a03020"}), "recoloured"), cache=cache)
    assert _counts(stores[-1]) == (4, 0)
    check(write_style(tmp_path, doc(coast={"width": 2.5}), "wider"), cache=cache)
    assert sorted(r.spec.name for r in stores[-1].recorders) == ["coast", "towns"]
    os.utime(coast, ns=(1, 1))                  # the avoided source changed (its mtime)
    again = check(path, cache=cache)
    assert sorted(r.spec.name for r in stores[-1].recorders) == ["coast", "towns"]
    assert _json(again) == _json(check(path, cache=False))


def test_the_labels_key_names_each_avoided_source(tmp_path, data):
    """CheckCache.key: the avoided layer's source stamp is part of a labels layer's key (and a
    source that cannot be stat'ed leaves the layer uncached, to report its own error)."""
    import shutil
    from types import SimpleNamespace

    from compose.style import load_style

    coast = tmp_path / "coast.gpkg"
    shutil.copy(data["coast"], coast)
    d = _doc(data)
    d["layer"][2]["source"] = str(coast)
    d["layer"][3]["avoid"] = ["coast"]
    style = load_style(write_style(tmp_path, d))
    ctx = SimpleNamespace(ramps={})

    def key():
        cache = check_cache.CheckCache(tmp_path, style, style.canvas(), keep_clear=None)
        return cache.key(style.layers[-1], ctx)[0]

    first = key()
    assert first is not None and key() == first
    os.utime(coast, ns=(1, 1))
    second = key()
    assert second is not None and second != first
    coast.unlink()
    assert key() is None
