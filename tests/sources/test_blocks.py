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
from compose.sources.blocks import PLANNED_GDAL_CACHE, BlockPlan, planned_walk
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
    # without read-ahead, which would hold the next reads' blocks as well
    monkeypatch.setattr("compose.sources.raster.READ_AHEAD", 0)
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
def test_read_ahead_same_values_each_block_once_and_ends(tmp_path, threads):
    path = _tiled(tmp_path / "r.tif", _data(), nodata=-9999)
    canvas = _canvas(4, 9)
    wins = list(canvas.windows(30, margin=4))
    with RasterSource(path, layer="r") as direct:
        want = [direct.read_window(canvas, w) for w in wins]
    with RasterSource(path, layer="r") as src:
        layer = type("Layer", (), {"source": src})()
        with planned_walk([layer], canvas, wins):
            plan = src._plan
            assert plan._ahead > 0 and not _ahead_threads()     # started by the first read
            if threads == 1:                # the owner's thread: no other handle opened
                got = [src.read_window(canvas, w) for w in wins]
            else:
                with ThreadPoolExecutor(threads) as pool:
                    got = list(pool.map(lambda w: src.read_window(canvas, w), wins))
            assert plan.finished
            touched = {key for w in wins for key, _, _ in plan._parts(
                (w.padded[0] + 4, w.padded[1] + 9, w.padded[2], w.padded[3]))}
            assert plan.decoded == len(touched)                 # each block once
        assert src._plan is None and not _ahead_threads()
        if threads == 1:
            assert src._others == []        # the read-ahead thread's GDAL handle closed
    for a, b in zip(want, got):
        np.testing.assert_array_equal(a, b)


def test_read_ahead_runs_ahead_of_the_reads_within_its_bound():
    shape, block = (640, 640), (32, 32)
    regions = [(r - 3, c - 3, 70, 70) for r in range(0, 640, 64) for c in range(0, 640, 64)]
    decoded_by = {}

    def decode(r, c, h, w):
        decoded_by[(r, c)] = threading.current_thread().name
        return np.full((h, w), r * 1000 + c, np.float32)

    plan = BlockPlan(block, shape, regions, ahead=3, decode=decode)
    try:
        first = regions[0]
        assert plan.claim(first)
        # the blocks of reads 1..3 are decoded ahead, nothing further
        ahead = {key for region in regions[1:4] for key, _, _ in plan._parts(region)}
        beyond = {key for region in regions[4:] for key, _, _ in plan._parts(region)} - ahead
        pause = threading.Event()
        for _ in range(500):
            with plan._lock:
                done = {k for k, b in plan._blocks.items() if b.data is not None}
            if ahead <= done:
                break
            pause.wait(0.01)
        pause.wait(0.05)                    # time to go further, were it to
        with plan._lock:
            held = set(plan._blocks)
        assert ahead <= held and not held & beyond
        out = np.empty((67, 67), np.float32)
        plan.read(first, out, decode)
        for region in regions[1:]:
            assert plan.claim(region)
            r0, c0 = max(region[0], 0), max(region[1], 0)
            out = np.empty((min(region[0] + 70, 640) - r0, min(region[1] + 70, 640) - c0),
                           np.float32)
            plan.read(region, out, decode)
            assert out[-1, -1] == (min(region[0] + 69, 639) // 32 * 32) * 1000 + \
                min(region[1] + 69, 639) // 32 * 32
        assert plan.finished and plan.decoded == 20 * 20
        assert "compose-read-ahead" in decoded_by.values()
    finally:
        plan.stop()
    assert not _ahead_threads()


def test_read_ahead_failure_is_raised_by_the_read_that_needs_the_block(tmp_path):
    # a block the read-ahead cannot decode is decoded again by the walk's read, which raises
    # (or, when the failure was passing, gets the block's values)
    shape, block = (64, 64), (32, 32)
    regions = [(0, 0, 32, 32), (0, 32, 32, 32), (32, 0, 32, 32), (32, 32, 32, 32)]
    calls = []

    def flaky(r, c, h, w):
        calls.append((r, c, threading.current_thread().name))
        if threading.current_thread().name == "compose-read-ahead":
            raise SourceError("layer \"x\": cannot read x.tif: a damaged block")
        return np.full((h, w), r + c, np.float32)

    plan = BlockPlan(block, shape, regions, ahead=2, decode=flaky)
    out = np.empty((32, 32), np.float32)
    for region in regions:
        assert plan.claim(region)
        plan.read(region, out, flaky)
        assert out[0, 0] == region[0] + region[1]
    plan.stop()
    assert plan.finished and plan.decoded == 4

    def broken(r, c, h, w):
        raise SourceError("layer \"x\": cannot read x.tif: a damaged block")

    plan = BlockPlan(block, shape, regions, ahead=2, decode=broken)
    try:
        assert plan.claim(regions[0])
        with pytest.raises(SourceError, match="damaged block"):
            plan.read(regions[0], out, broken)
        assert plan.claim(regions[1])
        with pytest.raises(SourceError, match="damaged block"):
            plan.read(regions[1], out, broken)
    finally:
        plan.stop()


def test_no_read_ahead_without_reads(tmp_path):
    # a walk whose windows run elsewhere (worker processes) claims nothing here: no thread
    path = _tiled(tmp_path / "n.tif", _data(), nodata=-9999)
    canvas = _canvas()
    wins = list(canvas.windows(50, margin=1))
    with RasterSource(path, layer="n") as src:
        layer = type("Layer", (), {"source": src})()
        with planned_walk([layer], canvas, wins):
            assert not _ahead_threads()
        assert src._plan is None and src._plan is None
