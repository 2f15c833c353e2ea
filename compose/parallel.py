"""Window tasks on every core of this machine, or on a dask.distributed cluster.

The engine renders a canvas as independent window tasks (:class:`compose.engine.WindowTask`)
and merges their results in window order (rows band by band into the sinks, statistics by
addition). A *mapper* decides where the tasks run; both here keep a bounded number of tasks in
flight and hand results back in order, so memory stays bounded and outputs are byte-identical
to a one-worker render:

- :class:`ThreadMapper` -- ``N`` threads of this process sharing the prepared render (the
  default of ``--workers``): numpy, GDAL and the encoders release Python's GIL, Agg's line
  drawing holds it, so one thread draws lines while the other does pixel work.
- :class:`ProcessMapper` -- ``N`` worker processes of this machine. Each worker prepares the
  render once from the pickled style, then renders the windows it is given (every process
  pays the start-up and the preparation, and holds its own copy).
- :class:`ClusterMapper` -- a dask.distributed scheduler (``pip install compose-maps[cluster]``).
  The style is sent to the workers once; each worker thread prepares its own render the first
  time it gets a window of this walk and reads the sources itself, from the same paths or URLs:
  they must be reachable from every worker (a shared file system or object storage).

Results travel packed (:func:`pack`): statistics histograms are mostly zeros and go as their
non-zero entries.
"""
from __future__ import annotations

import os
import threading
import uuid
from collections import deque
from collections.abc import Callable, Iterable, Iterator
from typing import Any

from compose.packing import pack, unpack

__all__ = ["ThreadMapper", "ProcessMapper", "ClusterMapper", "mapper_for", "pack", "unpack", "ordered",
           "default_workers", "auto_workers", "window_task", "AUTO_PIXELS", "AUTO_WORKERS"]

#: Canvases from this many pixels up use every core when no worker count is given (below it,
#: starting worker processes costs more than it saves; measured by bench/render.py).
AUTO_PIXELS = 4096 * 4096
#: At most this many worker processes unless asked for more (each holds a prepared render and
#: its window, some 0.3-0.4 GB on the benchmark style).
AUTO_WORKERS = 8


# --- ordering -------------------------------------------------------------------------------

def ordered(submit: Callable[[Any], Any], items: Iterable, in_flight: int,
            result: Callable[[Any], Any] = lambda f: f.result()) -> Iterator:
    """Submit ``items`` (``submit(item) -> future``) keeping at most ``in_flight`` unfinished,
    and yield their results in the order of ``items``."""
    pending: deque = deque()
    try:
        for item in items:
            pending.append(submit(item))
            while len(pending) >= max(1, in_flight):
                yield result(pending.popleft())
        while pending:
            yield result(pending.popleft())
    finally:
        for f in pending:
            f.cancel()


def default_workers() -> int:
    """Every core this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:              # pragma: no cover - not Linux
        return max(1, os.cpu_count() or 1)


# --- the worker side --------------------------------------------------------------------------

_local = threading.local()          # per worker thread: {walk key: Prepared}


def _prepared(key: str, payload: bytes):
    cache = getattr(_local, "prepared", None)
    if cache is None:
        cache = _local.prepared = {}
    if key not in cache:
        from compose.engine import prepare

        for old in cache.values():      # one walk at a time per worker thread
            old.close()
        cache.clear()
        style, canvas, draft, ramps, blocked = unpack(payload)
        # the ramps (a series' shared breaks) and the boxes labels keep clear of (page
        # furniture) as the client decided them, so every worker draws what one process would
        cache[key] = prepare(style, ramps=ramps, canvas=canvas, draft=draft, blocked=blocked)
    return cache[key]


def window_task(key: str, payload: bytes, window, options: dict) -> bytes:
    """Render one window where this runs: ``payload`` is the packed (style, canvas, draft, ramps,
    label keep-clear boxes) of the walk
    ``key`` (prepared once per worker thread); returns the packed WindowResult."""
    from compose.engine import render_window

    return pack(render_window(_prepared(key, payload), window, **options))


_POOL_WALK: tuple[str, bytes] | None = None


def _pool_init(key: str, payload: bytes) -> None:
    global _POOL_WALK
    _POOL_WALK = (key, payload)


def _pool_task(window, options: dict) -> bytes:
    assert _POOL_WALK is not None
    return window_task(_POOL_WALK[0], _POOL_WALK[1], window, options)


def _walk_payload(task) -> tuple[str, bytes]:
    prepared = task.prepared
    return uuid.uuid4().hex, pack((prepared.style, prepared.canvas, prepared.draft,
                                   prepared.ramps, prepared.blocked))


# --- mappers ----------------------------------------------------------------------------------

class ThreadMapper:
    """Run window tasks on ``workers`` threads of this process (``mapper(task, windows)``).

    The threads share the prepared render (nothing to start or prepare again): numpy, GDAL's
    reads and the encoders release Python's GIL. Agg's drawing does not, so with
    ``draw_process`` (the default) the ``lines``, ``areas`` and ``points`` layers are drawn by a
    helper process a few windows ahead (:class:`compose.drawer.DrawAhead`, same bytes) while the
    threads do the pixel work. Raster sources read through a GDAL handle per thread
    (:class:`compose.sources.raster.RasterSource`). ``in_flight``: windows submitted and not yet
    handed back (default 2 per thread).
    """

    def __init__(self, workers: int, in_flight: int | None = None, draw_process: bool = True):
        self.workers = max(1, int(workers))
        self.in_flight = in_flight or 2 * self.workers
        self.draw_process = draw_process
        if draw_process:
            from compose.drawer import warm

            warm()          # the helper's imports beside the render's preparation

    def __call__(self, task, windows: Iterable) -> Iterator:
        import dataclasses
        from concurrent.futures import ThreadPoolExecutor

        drawer = None
        from compose.engine import WindowTask

        if self.draw_process and isinstance(task, WindowTask):
            from compose.drawer import DrawAhead

            windows = list(windows)
            drawer = DrawAhead.start(task.prepared, windows, task.only)
            if drawer is not None:
                task = dataclasses.replace(task, drawn=drawer)
        try:
            with ThreadPoolExecutor(self.workers, thread_name_prefix="compose-window") as pool:
                for res in ordered(lambda w: pool.submit(task, w), windows, self.in_flight):
                    if drawer is not None:
                        drawer.walked(res.window)
                    yield res
        finally:
            if drawer is not None:
                drawer.close()


class ProcessMapper:
    """Run window tasks on ``workers`` processes of this machine (``mapper(task, windows)``).

    ``in_flight``: windows submitted and not yet handed back (default 2 per worker).
    """

    def __init__(self, workers: int, in_flight: int | None = None):
        self.workers = max(1, int(workers))
        self.in_flight = in_flight or 2 * self.workers

    def __call__(self, task, windows: Iterable) -> Iterator:
        import multiprocessing
        from concurrent.futures import ProcessPoolExecutor

        key, payload = _walk_payload(task)
        ctx = multiprocessing.get_context("forkserver")
        ctx.set_forkserver_preload(["compose.engine", "compose.parallel"])
        options = task.options
        with ProcessPoolExecutor(self.workers, mp_context=ctx, initializer=_pool_init,
                                 initargs=(key, payload)) as pool:
            yield from ordered(lambda w: pool.submit(_pool_task, w, options), windows,
                               self.in_flight, lambda f: unpack(f.result()))


class ClusterMapper:
    """Run window tasks on a dask.distributed cluster (``mapper(task, windows)``).

    ``address``: the scheduler's address (``tcp://host:8786``) or a ``distributed.Client``;
    ``in_flight``: windows submitted and not yet handed back (default 2 per worker thread, at
    least 4). Finished rows go to the writers in order, so the client holds at most
    ``in_flight`` windows.
    """

    def __init__(self, address, in_flight: int | None = None):
        self.address = address
        self.in_flight = in_flight

    def __call__(self, task, windows: Iterable) -> Iterator:
        try:
            from distributed import Client
        except ImportError:
            from compose.errors import ComposeError

            raise ComposeError("--cluster needs dask.distributed: pip install "
                               "'compose-maps[cluster]'") from None
        own = not isinstance(self.address, Client)
        if own:
            try:
                client = Client(self.address, timeout=30)
            except (OSError, TimeoutError, ValueError) as exc:
                from compose.errors import ComposeError

                raise ComposeError(f"--cluster: cannot reach the scheduler at {self.address}: "
                                   + (str(exc).strip().splitlines()[0] if str(exc).strip()
                                      else type(exc).__name__)) from None
        else:
            client = self.address
        try:
            key, payload = _walk_payload(task)
            [shared] = client.scatter([payload], broadcast=True, hash=False)
            threads = sum(client.nthreads().values()) or 1
            in_flight = self.in_flight or max(4, 2 * threads)
            options = task.options

            def submit(window):
                return client.submit(window_task, key, shared, window, options, pure=False)

            def result(future):
                data = future.result()
                future.release()
                return unpack(data)

            yield from ordered(submit, windows, in_flight, result)
        finally:
            if own:
                client.close()


def auto_workers() -> int:
    """Window threads of a render given no worker count: every core but one, at most
    :data:`AUTO_WORKERS`. The core left is the one the drawing helper process
    (:mod:`compose.drawer`, which a :class:`ThreadMapper` starts for lines, areas and points)
    and the PNG and GeoTIFF encoders' threads share: with 1 window thread the 8192 x 8192 bench
    render already keeps 2 cores busy, and a second window thread only contends with them."""
    return max(1, min(default_workers() - 1, AUTO_WORKERS))


def mapper_for(pixels: int, workers: int | None = None, cluster=None):
    """The mapper for a render of ``pixels`` pixels: a :class:`ClusterMapper` for ``cluster``;
    else a :class:`ThreadMapper` for ``workers`` > 1, or, with no ``workers`` for canvases of
    at least :data:`AUTO_PIXELS` on 2 cores or more, one of :func:`auto_workers` threads (with
    the drawing helper: one thread and the helper on 2 cores); None (this thread, lines drawn
    here) otherwise. Threads, not processes: they share the prepared render (no second start-up
    and preparation, one copy in memory). On the 2-core benchmark machine (load about 3,
    alternating, 8192 x 8192 bare render) 1 thread with the helper took 4.63-5.84 s (median
    4.66), 2 threads with it 4.36-9.18 s (median 6.1), 1 thread drawing itself 5.39-6.70 s."""
    if cluster:
        return ClusterMapper(cluster)
    if workers is None:     # every core but one (the helper's and the encoders'), if 2 or more
        if pixels < AUTO_PIXELS or default_workers() < 2:
            return None
        return ThreadMapper(auto_workers())
    return ThreadMapper(workers) if workers > 1 else None
