"""Planned reads (compose.sources.blocks): a walk's windows read from blocks decoded once give the
same values as direct reads, hold about one row of blocks, and leave nothing behind.

The reference is GDAL itself (a direct windowed read of the file through rasterio)."""
from __future__ import annotations

import threading
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import pytest
import rasterio
from affine import Affine
from rasterio.env import get_gdal_config

from compose.canvas import Canvas, core_window
from compose.errors import SourceError
from compose.sources.blocks import PLANNED_GDAL_CACHE, BlockPlan, ReadAhead, planned_walk
from compose.sources.guard import gdal_cache
from compose.sources.raster import RasterSource

CRS = "EPSG:32631"
T = Affine(10, 0, 500000, 0, -10, 4000000)


def _tiled(path, data, *, nodata=None, mask=None, block=32):
    h, w = data.shape
    with rasterio.open(path, "w", driver="GTiff", height=h, width=w, count=1, dtype=data.dtype,
                       crs=CRS, transform=T, nodata=nodata, tiled=True, blockxsize=block,
                       blockysize=block, compress="deflate") as ds:
        ds.write(data, 1)
        if mask is not None:
            ds.write_mask(mask)
    return path


def _data(h=200, w=170):
    rng = np.random.default_rng(3)
    data = rng.normal(100, 30, (h, w)).astype("float32")
    data[40:60, 10:90] = -9999                     # no-data patch across block edges
    data[5, 5] = -9999 + 1e-4                      # near the no-data value: asks for the mask
    return data


def _canvas(row_off=0, col_off=0, w=150, h=180):
    return Canvas(CRS, T @ Affine.translation(col_off, row_off), w, h)


@pytest.mark.parametrize("offset", [(0, 0), (7, 13), (-9, -5)])
def test_planned_reads_equal_direct_reads(tmp_path, offset):
    path = _tiled(tmp_path / "a.tif", _data(), nodata=-9999)
    canvas = _canvas(*offset)
    wins = list(canvas.windows(40, margin=3))
    direct = RasterSource(path, layer="a")
    planned = RasterSource(path, layer="a")
    try:
        want = [direct.read_window(canvas, w) for w in wins]
        assert planned.plan(canvas, wins)
        got = [planned.read_window(canvas, w) for w in wins]
        plan = planned._plan
        assert plan.finished                       # every block dropped after its last read
        # every block the walk touches decoded exactly once
        touched = {key for w in wins for key, _, _ in plan._parts(
            (w.padded[0] + offset[0], w.padded[1] + offset[1], w.padded[2], w.padded[3]))}
        assert plan.decoded == len(touched)
    finally:
        direct.close()
        planned.close()
    for a, b in zip(want, got):
        np.testing.assert_array_equal(a, b)        # NaN where no data, in both


def test_planned_reads_with_a_mask_band_and_threads(tmp_path):
    data = _data()
    mask = np.full(data.shape, 255, np.uint8)
    mask[100:140, 30:160] = 0
    path = _tiled(tmp_path / "m.tif", data, mask=mask)
    canvas = _canvas(3, 2)
    wins = list(canvas.windows(32, margin=2))
    with RasterSource(path, layer="m") as direct:
        want = [direct.read_window(canvas, w) for w in wins]
    with RasterSource(path, layer="m") as src:
        assert src.plan(canvas, wins)
        with ThreadPoolExecutor(3) as pool:           # windows in any thread order
            got = list(pool.map(lambda w: src.read_window(canvas, w), wins))
        assert src._plan.finished
    for a, b in zip(want, got):
        np.testing.assert_array_equal(a, b)


def test_plan_holds_about_one_row_of_blocks():
    # a walk of 64 px windows (margin 3) over 32 px blocks of a 64 x 640 px source
    shape, block = (640, 640), (32, 32)
    regions = [(r - 3, c - 3, 70, 70) for r in range(0, 640, 64) for c in range(0, 640, 64)]
    plan = BlockPlan(block, shape, regions)
    held = []

    def decode(r, c, h, w):
        return np.full((h, w), r * 1000 + c, np.float32)

    for region in regions:
        assert plan.claim(region)
        out = np.empty((min(region[0] + 70, 640) - max(region[0], 0),
                        min(region[1] + 70, 640) - max(region[1], 0)), np.float32)
        plan.read(region, out, decode)
        assert out[-1, -1] == (min(region[0] + 69, 639) // 32 * 32) * 1000 + \
            min(region[1] + 69, 639) // 32 * 32
        held.append(plan.held_bytes)
    assert plan.finished and plan.held_bytes == 0
    assert plan.decoded == 20 * 20                 # each block once
    # about one row of blocks (the next window row's first blocks, decoded for this row's
    # margin) and the strips of finished blocks the next row's margin reaches into; keeping
    # whole blocks until their last read would hold 2.2 rows here
    block_row = 640 * 32 * 4
    assert max(held) <= 1.5 * block_row


def test_unplanned_reads_go_to_gdal(tmp_path):
    path = _tiled(tmp_path / "u.tif", _data(), nodata=-9999)
    canvas = _canvas()
    wins = list(canvas.windows(50, margin=1))
    with RasterSource(path, layer="u") as src:
        assert src.plan(canvas, wins)
        other = list(canvas.windows(64, margin=1))[0]      # not a window of the walk
        src.read_window(canvas, other)
        assert src._plan.decoded == 0
        assert not src.plan(canvas.coarser(40), wins)       # not aligned: not planned
        assert src._plan is None


def test_walk_bounds_gdal_cache_and_restores_it(tmp_path):
    path = _tiled(tmp_path / "w.tif", _data(), nodata=-9999)
    canvas = _canvas()
    wins = list(canvas.windows(50, margin=1))
    before = int(get_gdal_config("GDAL_CACHEMAX"))
    with RasterSource(path, layer="w") as src:
        layer = type("Layer", (), {"source": src})()
        with planned_walk([layer], canvas, wins) as every:
            assert every
            assert int(get_gdal_config("GDAL_CACHEMAX")) == min(before, PLANNED_GDAL_CACHE)
            assert src._plan is not None
        assert src._plan is None
    assert int(get_gdal_config("GDAL_CACHEMAX")) == before
    with gdal_cache(before * 2):                   # never raised
        assert int(get_gdal_config("GDAL_CACHEMAX")) == before


def test_core_reads_hold_no_block_across_window_rows(tmp_path, monkeypatch):
    # windows aligned with the blocks: a layer reading window cores only needs each block in
    # one window, so no block outlives its window row (padded reads keep the next row's);
    # without read-ahead, which would hold the next windows' blocks as well
    monkeypatch.setattr("compose.sources.blocks.READ_AHEAD", 0)
    path = _tiled(tmp_path / "c.tif", _data(), nodata=-9999, block=32)
    canvas = Canvas(CRS, T, 160, 192)
    wins = list(canvas.windows(32, margin=3))
    with RasterSource(path, layer="c") as src:
        # blocks touched: the cores' 5 x 6; the margins reach one more row and column of blocks
        for core, held_after_rows, blocks in ((True, 0, 5 * 6), (False, 1, 6 * 7)):
            layer = type("Layer", (), {"source": src, "core_reads": core})()
            with planned_walk([layer], canvas, wins):
                plan = src._plan
                most = 0
                for win in wins:
                    read = core_window(win) if core else win
                    src.read_window(canvas, read)
                    if win.col + win.width == canvas.width:      # a window row done
                        most = max(most, plan.held_bytes)
                assert plan.finished
                assert plan.decoded == blocks           # every block once
            assert (most > 0) == bool(held_after_rows)


def _ahead_threads() -> list[threading.Thread]:
    return [t for t in threading.enumerate() if t.name == "compose-read-ahead"]


@pytest.mark.parametrize("threads", [1, 3])
@pytest.mark.parametrize("aligned", [True, False])
def test_read_ahead_same_values_and_ends(tmp_path, threads, aligned):
    # the walk's windows read ahead on a thread of their own equal direct reads, aligned
    # (from the planned blocks, each decoded once) or resampled (a canvas half a cell off)
    path = _tiled(tmp_path / "r.tif", _data(), nodata=-9999)
    canvas = _canvas(4, 9) if aligned else _canvas(4.5, 9.5)
    wins = list(canvas.windows(30, margin=4))
    with RasterSource(path, layer="r") as direct:
        want = [direct.read_window(canvas, w) for w in wins]
    assert np.isfinite(want[len(want) // 2]).any()     # the canvas does see the data
    with RasterSource(path, layer="r") as src:
        layer = type("Layer", (), {"source": src})()
        layer.options = type("Options", (), {"resampling": "bilinear"})()
        with planned_walk([layer], canvas, wins) as every:
            # resampled reads are planned too where the compiled resampling knows their cells
            from compose import kernels
            assert every == (aligned or kernels.get() is not None)
            ahead = src._ahead
            assert ahead is not None and not _ahead_threads()    # started by the first read
            if threads == 1:                # the owner's thread: no other handle opened
                got = [src.read_window(canvas, w) for w in wins]
            else:
                with ThreadPoolExecutor(threads) as pool:
                    got = list(pool.map(lambda w: src.read_window(canvas, w), wins))
            if every:
                assert src._plan.finished
            if aligned:
                plan = src._plan
                touched = {key for w in wins for key, _, _ in plan._parts(
                    (w.padded[0] + 4, w.padded[1] + 9, w.padded[2], w.padded[3]))}
                assert plan.decoded == len(touched)             # each block once
            assert ahead.taken <= ahead.made <= len(wins) - 1   # taken whenever made first
        assert src._plan is None and src._ahead is None and not _ahead_threads()
        if threads == 1:
            assert src._others == []        # the read-ahead thread's GDAL handle closed
    for a, b in zip(want, got):
        np.testing.assert_array_equal(a, b)


def test_read_ahead_reads_ahead_of_the_takes_within_its_bound():
    made = []

    def read(key):
        made.append(key)
        return np.full(3, key, np.float32)

    ahead = ReadAhead(range(10), read, ahead=3)
    try:
        assert ahead.take(0) is None        # nothing made yet: the caller reads it itself
        wait = threading.Event()
        for _ in range(500):
            if ahead.made == 3:
                break
            wait.wait(0.01)
        wait.wait(0.05)                     # time to go further, were it to
        assert made == [1, 2, 3]            # reads 1..3, nothing further
        for key in (1, 2, 3):
            assert ahead.take(key)[0] == key
        # the rest: made ahead, or left to the taker when it got there first
        rest = [ahead.take(key) for key in range(4, 10)]
        assert all(got is None or got[0] == key for key, got in zip(range(4, 10), rest))
        assert made == sorted(set(made)) and set(made) <= set(range(1, 10))  # in order, once
        assert ahead.take(3) is None        # not a read to come
    finally:
        ahead.stop()
    assert not _ahead_threads()


def test_read_ahead_failure_is_read_again_by_the_taker():
    # a read the thread fails to make is made by the one who takes it, which raises its error
    # (or gets the values, when the failure was passing); the thread stops at the failure
    def flaky(key):
        if threading.current_thread().name == "compose-read-ahead":
            raise SourceError('layer "x": cannot read x.tif: a damaged block')
        return key

    def read_here(ahead, key):
        got = ahead.take(key)
        return flaky(key) if got is None else got

    ahead = ReadAhead(range(6), flaky, ahead=2)
    try:
        assert [read_here(ahead, k) for k in range(6)] == list(range(6))
        assert ahead.made == 0
    finally:
        ahead.stop()

    def broken(key):
        raise SourceError('layer "x": cannot read x.tif: a damaged block')

    ahead = ReadAhead(range(6), broken, ahead=2)
    try:
        for key in range(3):
            with pytest.raises(SourceError, match="damaged block"):
                got = ahead.take(key)
                assert got is None
                broken(key)
    finally:
        ahead.stop()


def test_no_read_ahead_without_reads(tmp_path):
    # a walk whose windows run elsewhere (worker processes) takes nothing here: no thread
    path = _tiled(tmp_path / "n.tif", _data(), nodata=-9999)
    canvas = _canvas()
    wins = list(canvas.windows(50, margin=1))
    with RasterSource(path, layer="n") as src:
        layer = type("Layer", (), {"source": src})()
        layer.options = type("Options", (), {"resampling": "bilinear"})()
        with planned_walk([layer], canvas, wins):
            assert src._ahead is not None and not _ahead_threads()
        assert src._ahead is None


@pytest.mark.parametrize("threads", [1, 3])
def test_planned_reprojected_reads_equal_direct_reads(tmp_path, threads, monkeypatch):
    # a canvas on the neighbouring UTM zone's grid (about 3.5 degrees of rotation), reaching
    # beyond the file: the compiled resampling knows each window's cells before reading them,
    # so the walk is planned, every block touched is decoded once and dropped after its last
    # read, and the values are a direct read's (GDAL's own windowed reads of the file)
    import pyproj

    from compose import kernels
    if kernels.get() is None:
        pytest.skip("compose._kernels not built")
    path = _tiled(tmp_path / "r.tif", _data(), nodata=-9999)
    cx, cy = pyproj.Transformer.from_crs(CRS, "EPSG:32632", always_xy=True).transform(
        500850.0, 3999000.0)                      # the file's centre
    canvas = Canvas("EPSG:32632", Affine(10, 0, round(cx) - 900, 0, -10, round(cy) + 1050),
                    180, 210)
    wins = list(canvas.windows(40, margin=3))
    direct = RasterSource(path, layer="r")
    planned = RasterSource(path, layer="r")
    try:
        want = [direct.read_window(canvas, w) for w in wins]
        assert planned.plan(canvas, wins, "bilinear")
        plan = planned._plan
        regions = list(plan._pending.elements())
        with ThreadPoolExecutor(threads) as pool:
            got = list(pool.map(lambda w: planned.read_window(canvas, w), wins))
        assert plan.finished
        touched = {key for region in regions for key, _, _ in plan._parts(region)}
        assert plan.decoded == len(touched) > 1
        assert not planned.plan(canvas, wins)                  # no resampling named: not planned
        assert not planned.plan(canvas, wins, "cubic")         # not the compiled path
        monkeypatch.setattr(kernels, "enabled", False)
        assert not planned.plan(canvas, wins, "bilinear")      # the numpy path: not planned
    finally:
        direct.close()
        planned.close()
    for a, b in zip(want, got):
        np.testing.assert_array_equal(a, b)        # NaN where no data, in both
    every = np.concatenate([a.ravel() for a in want])
    assert np.isnan(every).any() and np.isfinite(every).mean() > 0.5
