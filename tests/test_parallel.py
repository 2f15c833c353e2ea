"""Window tasks on worker processes and on a dask.distributed cluster: the same bytes and the same
statistics as one process; statistics merge by addition; packed results round-trip exactly."""
from __future__ import annotations

import dataclasses
from concurrent.futures import Future

import numpy as np
import pytest

from compose.engine import WindowTask, prepare, render_window
from compose.parallel import ClusterMapper, ProcessMapper, ThreadMapper, ordered, pack, unpack, window_task
from compose.render import render_style
from compose.style import load_style

WINDOW = 96     # the tiny canvas (300 x 260) in 12 windows


def _stats_equal(a, b) -> None:
    """Two Statistics hold exactly the same numbers."""
    assert (a.width, a.height, a.background) == (b.width, b.height, b.background)
    for la, lb in zip(a.layers, b.layers, strict=True):
        assert (la.name, la.covered, la.nodata_weight) == (lb.name, lb.covered, lb.nodata_weight)
        if la.value_lightness is not None:
            np.testing.assert_array_equal(la.value_lightness, lb.value_lightness)
        assert la.parts.keys() == lb.parts.keys()
        for key in la.parts:
            for f in dataclasses.fields(la.parts[key]):
                x, y = getattr(la.parts[key], f.name), getattr(lb.parts[key], f.name)
                if isinstance(x, np.ndarray):
                    np.testing.assert_array_equal(x, y)
                else:
                    assert x == y


def _render(style, out, mapper):
    res = render_style(style, out, overwrite=True, legend=False, html=False, mapper=mapper,
                       window=WINDOW)
    return {k: res.outputs[k].read_bytes() for k in ("png", "tif")}, res.statistics


def test_pack_round_trip_keeps_every_number():
    rng = np.random.default_rng(2)
    sparse = np.zeros((64, 101))
    sparse[rng.integers(0, 64, 30), rng.integers(0, 101, 30)] = rng.random(30)
    dense = rng.random((40, 40)).astype(np.float32)
    obj = {"s": sparse, "d": dense, "i": np.arange(5000, dtype=np.int64) % 7 == 0, "n": None}
    back = unpack(pack(obj))
    np.testing.assert_array_equal(back["s"], sparse)
    assert back["s"].dtype == sparse.dtype and back["d"].dtype == np.float32
    np.testing.assert_array_equal(back["d"], dense)
    np.testing.assert_array_equal(back["i"], obj["i"])
    assert len(pack(sparse)) < sparse.nbytes / 4


def test_ordered_keeps_order_and_bounds_work_in_flight():
    submitted, live = [], []

    def submit(item):
        f = Future()
        f.set_result(item * 10)
        submitted.append(item)
        live.append(item)
        return f

    def result(f):
        live.pop(0)
        return f.result()

    out = []
    for value in ordered(submit, range(10), 3, result):
        assert len(live) <= 2            # at most 3 in flight, one just handed back
        out.append(value)
    assert out == [i * 10 for i in range(10)] and submitted == list(range(10))


def test_statistics_merge_by_addition_in_any_grouping(tiny_region):
    # The render's statistics are the sum of its windows' statistics however they are grouped.
    prepared = prepare(load_style(tiny_region))
    try:
        parts = [render_window(prepared, w).statistics for w in prepared.windows(WINDOW)]
        forward = prepared.template.empty_like()
        for s in parts:
            forward.merge(s)
        halves = [prepared.template.empty_like(), prepared.template.empty_like()]
        for i, s in enumerate(parts):
            halves[i * 2 // len(parts)].merge(s)
        grouped = prepared.template.empty_like().merge(halves[0])
        grouped.merge(halves[1])
        empty = prepared.template.empty_like()
        for la, lb in zip(forward.layers, grouped.layers):
            assert la.covered == pytest.approx(lb.covered, rel=1e-12)
            for key in la.parts:
                np.testing.assert_allclose(la.parts[key].weights, lb.parts[key].weights, rtol=1e-12)
        # adding nothing changes nothing
        again = prepared.template.empty_like().merge(forward)
        again.merge(empty)
        _stats_equal(again, forward)
    finally:
        prepared.close()


def test_two_worker_processes_give_the_same_bytes_and_statistics(tiny_region, tmp_path):
    style = load_style(tiny_region)
    one, stats_one = _render(style, tmp_path / "one", None)
    two, stats_two = _render(style, tmp_path / "two", ProcessMapper(2))
    assert one["png"] == two["png"] and one["tif"] == two["tif"]
    _stats_equal(stats_one, stats_two)


def test_a_worker_keeps_labels_clear_of_what_the_client_blocked(tiny_region):
    # A worker process or cluster worker prepares the render again from the packed walk: it must
    # place labels clear of the same page-furniture boxes the client's prepare decided (here the
    # whole canvas, so no label is drawn), not place them afresh without the furniture.
    style = load_style(tiny_region)
    prepared = prepare(style, keep_clear=lambda *_: [(0.0, 0.0, 300.0, 260.0)])
    free = prepare(style)
    try:
        assert prepared.blocked and not prepared.unplaced_labels == free.unplaced_labels
        task = WindowTask(prepared)
        key, payload = "walk-blocked", pack((style, prepared.canvas, prepared.draft,
                                             prepared.ramps, prepared.blocked))
        for w in prepared.windows(WINDOW):
            here = render_window(prepared, w, **task.options)
            there = unpack(window_task(key, payload, w, task.options))
            np.testing.assert_array_equal(here.rgb8, there.rgb8)
    finally:
        prepared.close()
        free.close()


def test_two_worker_threads_give_the_same_bytes_and_statistics(tiny_region, tmp_path):
    style = load_style(tiny_region)
    one, stats_one = _render(style, tmp_path / "one", None)
    two, stats_two = _render(style, tmp_path / "two", ThreadMapper(2, in_flight=3))
    assert one["png"] == two["png"] and one["tif"] == two["tif"]
    _stats_equal(stats_one, stats_two)


def test_raster_sources_read_through_a_handle_per_thread(tiny_region):
    """Window tasks on other threads never touch the GDAL dataset of the thread that opened it."""
    from concurrent.futures import ThreadPoolExecutor

    prepared = prepare(load_style(tiny_region))
    try:
        windows = prepared.windows(WINDOW)
        here = [render_window(prepared, w).rgb8 for w in windows]
        with ThreadPoolExecutor(2) as pool:
            there = list(pool.map(lambda w: render_window(prepared, w).rgb8, windows))
        for a, b in zip(here, there, strict=True):
            np.testing.assert_array_equal(a, b)
        sources = [la.source for la in prepared.layers if hasattr(la.source, "_others")]
        assert sources and all(1 <= len(s._others) <= 2 for s in sources)
        own = {id(s._ds) for s in sources}
        assert not own & {id(h[0]) for s in sources for h in s._others}
    finally:
        prepared.close()
    assert all(not s._others for s in sources)      # closed with the render


def test_local_cluster_gives_the_same_bytes_and_statistics(tiny_region, tmp_path):
    distributed = pytest.importorskip("distributed")
    style = load_style(tiny_region)
    one, stats_one = _render(style, tmp_path / "one", None)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False,
                                  dashboard_address=None) as cluster, \
            distributed.Client(cluster) as client:
        mapper = ClusterMapper(client, in_flight=3)
        two, stats_two = _render(style, tmp_path / "cluster", mapper)
        assert len(client.nthreads()) == 2
    assert one["png"] == two["png"] and one["tif"] == two["tif"]
    _stats_equal(stats_one, stats_two)


def test_mapper_choice():
    from compose.parallel import AUTO_PIXELS, mapper_for

    assert mapper_for(AUTO_PIXELS - 1) is None                    # small maps: this thread
    assert mapper_for(10, workers=1) is None
    assert mapper_for(10, workers=3).workers == 3                  # asked for: honoured
    assert isinstance(mapper_for(10, workers=2), ThreadMapper)
    auto = mapper_for(AUTO_PIXELS)
    assert auto is None or 1 <= auto.workers <= 8
    assert isinstance(mapper_for(10, cluster="tcp://127.0.0.1:1"), ClusterMapper)


def test_default_workers_leave_a_core_to_the_drawing_helper_for_large_maps(monkeypatch):
    import compose.parallel as par

    # every core but one, which the drawing helper and the encoders share
    monkeypatch.setattr(par, "default_workers", lambda: 2)
    auto = par.mapper_for(par.AUTO_PIXELS)
    assert isinstance(auto, ThreadMapper) and auto.workers == 1 and auto.draw_process
    assert par.mapper_for(par.AUTO_PIXELS - 1) is None            # small maps: this thread
    monkeypatch.setattr(par, "default_workers", lambda: 4)
    auto = par.mapper_for(par.AUTO_PIXELS)
    assert isinstance(auto, ThreadMapper) and auto.workers == 3
    monkeypatch.setattr(par, "default_workers", lambda: 64)
    assert par.mapper_for(par.AUTO_PIXELS).workers == par.AUTO_WORKERS
    monkeypatch.setattr(par, "default_workers", lambda: 1)
    assert par.mapper_for(par.AUTO_PIXELS) is None
