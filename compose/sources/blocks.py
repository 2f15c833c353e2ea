"""Planned reads: every source block decoded once per window walk, shared by the window threads.

A window walk reads each raster window by window, and a padded window (core + margin) reaches
into the blocks (tiles) of its neighbours: with 512 px tiles and 512 px windows every tile is
touched by up to nine windows, in three window rows. GDAL's block cache can only avoid decoding
a tile nine times by keeping about three rows of tiles per GDAL handle, and every window thread
has its own handle (some 192 MB for two float32 rasters at 8192 px and two threads).

A :class:`BlockPlan` knows the walk in advance (the source region of every window, see
:meth:`compose.sources.raster.RasterSource.plan`): it counts, for every block, the reads still
to come and the rows of the block they need. A block is decoded by the first read that needs it
(once, whichever thread gets there first), kept while reads are still to come, cut down to the
rows those reads need (a finished tile row keeps only the strip the next window row's margin
reaches into) and dropped after its last read. In a row-major walk that holds about one row of
tiles per raster, in whichever thread order the windows run. A reprojected walk is planned
too where the compiled resampling knows each window's cells before reading them
(:func:`compose.sources.resample.grid_region`). Reads the plan does not know (a window of
another walk, a reprojected read by another path) go to GDAL directly.

The values are the same either way: a planned read assembles the window from blocks finished by
the same per-pixel steps (no-data and mask to NaN) as a direct read of the window.

A :class:`ReadAhead` reads the walk's next windows before they are asked for: one thread per
walk makes the reads of the next :data:`READ_AHEAD` windows of every raster layer (in the walk's
order, counted from the latest read a layer asked for) through GDAL handles of its own --
decoding blocks, and for a reprojected raster the transform grid's positions and the resampling
too, which rasters on the same grid then share (:mod:`compose.sources.grid`) -- so the walking
threads mostly take finished windows while the reading runs on another core beside the compute.
It starts at the first read asked for (a walk whose windows run in other processes starts
none) and ends when the walk does. A read it fails to make is made again by the layer that
asks for it, which raises the error where the walk sees it. The values are the same: the same
function reads the window, in whichever thread.
"""
from __future__ import annotations

import contextlib
import threading
from collections import Counter, deque
from collections.abc import Callable, Iterable, Iterator
from typing import Any

import numpy as np

from compose.canvas import core_window
from compose.heap import trim
from compose.sources.grid import forget_recent
from compose.sources.guard import gdal_cache
from compose.sources.resample import forget_taps

__all__ = ["BlockPlan", "ReadAhead", "Region", "MAX_BLOCK_CELLS", "PLANNED_GDAL_CACHE",
           "READ_AHEAD", "planned_walk", "planned", "cells_by_block"]

#: (row, col, height, width) of a read, in source cells, as asked for (may reach outside)
Region = tuple[int, int, int, int]

#: Blocks of more cells than this (e.g. strips as wide as a huge source) are not planned.
MAX_BLOCK_CELLS = 1 << 20


class _Block:
    __slots__ = ("top", "data", "ready")

    def __init__(self) -> None:
        self.top = 0                        # source row of data[0]
        self.data: np.ndarray | None = None
        self.ready = threading.Event()


class BlockPlan:
    """The blocks a known list of reads needs, decoded once and dropped after their last read.

    ``block``: (height, width) of the source's blocks; ``shape``: (height, width) of the source;
    ``regions``: the reads to come (:data:`Region`, duplicates allowed, any order). Thread-safe.
    """

    def __init__(self, block: tuple[int, int], shape: tuple[int, int], regions: Iterable[Region]):
        self.bh, self.bw = (int(v) for v in block)
        self.height, self.width = (int(v) for v in shape)
        self._pending: Counter = Counter()
        # block -> Counter of (first row, end row) a read still to come needs of it
        self._need: dict[tuple[int, int], Counter] = {}
        for region in regions:
            self._pending[region] += 1
            for key, rows, _ in self._parts(region):
                self._need.setdefault(key, Counter())[rows] += 1
        self._blocks: dict[tuple[int, int], _Block] = {}
        self._lock = threading.Lock()
        #: blocks decoded so far (a test's and the bench's measure of work)
        self.decoded = 0

    def _parts(self, region: Region):
        """(block key, (row0, row1), (col0, col1)) of every block the region covers, in source
        cells, clipped to the source."""
        row, col, h, w = region
        r0, r1 = max(row, 0), min(row + h, self.height)
        c0, c1 = max(col, 0), min(col + w, self.width)
        if r1 <= r0 or c1 <= c0:
            return
        for br in range(r0 // self.bh, (r1 - 1) // self.bh + 1):
            b0 = br * self.bh
            rows = (max(r0, b0), min(r1, b0 + self.bh))
            for bc in range(c0 // self.bw, (c1 - 1) // self.bw + 1):
                a0 = bc * self.bw
                yield (br, bc), rows, (max(c0, a0), min(c1, a0 + self.bw))

    def claim(self, region: Region) -> bool:
        """True (and counted) when ``region`` is a read this plan still waits for."""
        with self._lock:
            if self._pending.get(region, 0) > 0:
                self._pending[region] -= 1
                return True
            return False

    def read(self, region: Region, out: np.ndarray,
             decode: Callable[[int, int, int, int], np.ndarray]) -> None:
        """Fill ``out`` (the region clipped to the source, float32) from the blocks, decoding a
        missing block with ``decode(row, col, height, width)`` (source cells, inside the source);
        then count the read as done. Call only after :meth:`claim` returned True."""
        row, col, h, w = region
        r0, c0 = max(row, 0), max(col, 0)
        parts = list(self._parts(region))
        try:
            for key, (a0, a1), (b0, b1) in parts:
                top, data = self._get(key, decode)
                left = key[1] * self.bw
                out[a0 - r0:a1 - r0, b0 - c0:b1 - c0] = data[a0 - top:a1 - top, b0 - left:b1 - left]
        finally:
            self._done(parts)

    def _get(self, key: tuple[int, int], decode) -> tuple[int, np.ndarray]:
        with self._lock:
            found = self._blocks.get(key)
            mine = found is None
            blk = self._blocks[key] = _Block() if found is None else found
        if mine:
            br, bc = key
            r0, c0 = br * self.bh, bc * self.bw
            try:
                data = decode(r0, c0, min(self.bh, self.height - r0), min(self.bw, self.width - c0))
            except BaseException:
                with self._lock:
                    self._blocks.pop(key, None)
                blk.ready.set()
                raise
            with self._lock:
                blk.top, blk.data = r0, data
                self.decoded += 1
            blk.ready.set()
        else:
            blk.ready.wait()
        with self._lock:
            if blk.data is None:            # its decode failed in another thread
                raise RuntimeError("a block of this read failed to decode in another thread")
            return blk.top, blk.data

    def _done(self, parts) -> None:
        """One read is over: forget its needs; cut blocks down to the rows still needed, drop
        blocks nothing needs any more."""
        with self._lock:
            for key, rows, _ in parts:
                need = self._need.get(key)
                if need is None:
                    continue
                need[rows] -= 1
                if need[rows] <= 0:
                    del need[rows]
                blk = self._blocks.get(key)
                if not need:
                    del self._need[key]
                    self._blocks.pop(key, None)
                    continue
                if blk is None or blk.data is None:
                    continue
                lo = min(r for r, _ in need)
                hi = max(r for _, r in need)
                if lo > blk.top or hi < blk.top + blk.data.shape[0]:
                    blk.data = blk.data[lo - blk.top:hi - blk.top].copy()
                    blk.top = lo

    @property
    def held_bytes(self) -> int:
        """Bytes of decoded blocks held now."""
        with self._lock:
            return sum(b.data.nbytes for b in self._blocks.values() if b.data is not None)

    @property
    def finished(self) -> bool:
        """Every planned read done (and every block dropped)."""
        with self._lock:
            return not any(self._pending.values()) and not self._blocks


#: Windows a :class:`ReadAhead` reads ahead of the latest one asked for: a window takes several
#: times as long to compute as to read (aligned: decode one or two new blocks per raster), so a
#: few keep the reading off the walk however its threads are scheduled, for a few windows' values
#: held (our choice).
READ_AHEAD = 4


class _Slot:
    __slots__ = ("ready", "value")

    def __init__(self) -> None:
        self.ready = threading.Event()
        self.value: Any = None              # None: not read (failed); the taker reads it itself


class ReadAhead:
    """The reads of a known list of windows made ahead on a thread of its own.

    ``keys``: the reads to come, in the walk's order (hashable, duplicates allowed); ``read``:
    makes the read of a key (called from the read-ahead thread; ``on_exit`` is called there when
    it ends); ``ahead``: how many reads past the latest one taken it makes. :meth:`take` gives a
    read's value, or None when the caller is to make the read itself (the read-ahead did not get
    to it, or it failed). Thread-safe; :meth:`stop` ends the thread.
    """

    def __init__(self, keys: Iterable, read: Callable[[Any], Any], ahead: int = READ_AHEAD,
                 on_exit: Callable[[], None] | None = None):
        self._keys = list(keys)
        self._pending: dict[Any, deque[int]] = {}
        for i, key in enumerate(self._keys):
            self._pending.setdefault(key, deque()).append(i)
        self._read = read
        self._ahead = max(int(ahead), 0)
        self._on_exit = on_exit
        self._lock = threading.Lock()
        self._wake = threading.Condition(self._lock)
        self._slots: dict[int, _Slot] = {}  # reads made or being made, not yet taken
        self._cursor = 0                    # the next read the thread may make
        self._goal = 0                      # ... up to this one (excluded)
        self._thread: threading.Thread | None = None
        self._stopped = False
        #: reads made by the thread, and of them taken (a test's and the bench's measure)
        self.made = 0
        self.taken = 0

    def take(self, key) -> Any:
        """The value of the read ``key`` (waiting while the thread makes it), or None when the
        caller is to read it itself; either way the read counts as done and the thread moves
        on to the ones after it."""
        with self._lock:
            waiting = self._pending.get(key)
            if not waiting:
                return None
            i = waiting.popleft()
            slot = self._slots.pop(i, None)
            if not self._stopped and self._ahead:
                self._cursor = max(self._cursor, i + 1)     # never made now if not yet begun
                goal = min(i + 1 + self._ahead, len(self._keys))
                if goal > self._goal:
                    self._goal = goal
                    if self._thread is None:
                        self._thread = threading.Thread(target=self._run, daemon=True,
                                                        name="compose-read-ahead")
                        self._thread.start()
                    self._wake.notify()
        if slot is None:
            return None
        slot.ready.wait()
        if slot.value is not None:
            with self._lock:
                self.taken += 1
        return slot.value

    def _run(self) -> None:
        try:
            while True:
                with self._lock:
                    while not self._stopped and self._cursor >= self._goal:
                        self._wake.wait()
                    if self._stopped:
                        return
                    i = self._cursor
                    self._cursor += 1
                    slot = self._slots[i] = _Slot()
                try:
                    value = self._read(self._keys[i])
                except BaseException:
                    with self._lock:
                        self._stopped = True        # the takers read the rest themselves
                    slot.ready.set()                # value None: its taker reads it
                    return
                with self._lock:
                    slot.value = value
                    self.made += 1
                slot.ready.set()
        finally:
            if self._on_exit is not None:
                self._on_exit()

    def stop(self) -> None:
        """End the thread (after the read it is making) and forget the reads not taken."""
        with self._lock:
            self._stopped = True
            self._wake.notify_all()
            thread = self._thread
        if thread is not None and thread is not threading.current_thread():
            thread.join()
        with self._lock:
            self._slots.clear()


#: GDAL's block cache during a walk whose every raster read is planned (bytes): planned reads
#: keep their own blocks, so GDAL's copy of each is never read again.
PLANNED_GDAL_CACHE = 16 << 20


@contextlib.contextmanager
def planned_walk(layers, canvas, windows) -> Iterator[bool]:
    """During a window walk over ``windows`` of ``canvas``: plan the raster reads of every
    layer with a raster ``source`` (:meth:`RasterSource.plan`; the windows' cores for a layer
    whose ``core_reads`` is true, their padded regions otherwise); when all of them are planned,
    bound GDAL's block cache to :data:`PLANNED_GDAL_CACHE` meanwhile. The same reads, with each
    layer's ``options.resampling``, are read ahead (:class:`ReadAhead`: window by window, each
    window's layers in order) unless the source decimates. Yields whether the reads are
    planned; forgets the plans (their blocks, the read-ahead) at the end."""
    sources: list[Any] = []
    planned = []
    reads: list[tuple[Any, list, str]] = []         # (source, its windows, resampling)
    cores = None
    for layer in layers:
        s: Any = getattr(layer, "source", None)
        if not callable(getattr(s, "plan", None)):
            continue
        sources.append(s)
        mine = windows
        if getattr(layer, "core_reads", False):     # the layer reads window cores only
            cores = mine = cores if cores is not None else [core_window(w) for w in windows]
        resampling = getattr(getattr(layer, "options", None), "resampling", None)
        planned.append(s.plan(canvas, mine, resampling if isinstance(resampling, str) else None))
        if (isinstance(resampling, str) and callable(getattr(s, "read_ahead", None))
                and not getattr(s, "decimate", False)):
            reads.append((s, mine, resampling))
    every = bool(planned) and all(planned)
    ahead = None
    if reads and READ_AHEAD > 0:
        keys = [(s, mine[i], resampling) for i in range(len(windows)) for s, mine, resampling in reads]
        readers = [s for s, _, _ in reads]

        def let_go() -> None:
            for s in readers:
                s.let_go()

        ahead = ReadAhead(keys, lambda key: key[0].read_ahead_key(canvas, key[1], key[2]),
                          READ_AHEAD * len(reads), on_exit=let_go)
        for s in readers:
            s.read_ahead(ahead, canvas)
    try:
        if every:
            with gdal_cache(PLANNED_GDAL_CACHE):
                yield True
        else:
            yield False
    finally:
        if ahead is not None:
            for s, _, _ in reads:
                s.read_ahead(None)
            ahead.stop()
        for s in sources:
            s.plan(None)
        forget_recent()                 # positions and taps rasters on one grid shared
        forget_taps()


def planned(layers, canvas, windows, results: Iterable) -> Iterator:
    """``results`` (a lazy walk over ``windows``, e.g. a mapper's) under :func:`planned_walk`:
    the reads are planned at the first result asked for and forgotten after the last."""
    row = None
    with planned_walk(layers, canvas, windows):
        for res in results:
            if res.window.row != row:       # a window row done: free memory back to the system
                row = res.window.row
                trim()
            yield res
    trim()


def cells_by_block(rows, cols, shape: tuple[int, int], block: tuple[int, int],
                   cells: Callable[[int, int, int, int], np.ndarray]) -> np.ndarray:
    """float32 values of a source's cells (rows, cols) (integer arrays of one shape; outside the
    source's ``shape`` (height, width): NaN), each block of ``block`` (rows, columns) cells that
    holds one of them read once, whole, by ``cells(row, col, height, width)`` (float32 (height,
    width) of the cells from (row, col)). :meth:`RasterSource.cells_at
    <compose.sources.raster.RasterSource.cells_at>` and the plain GeoTIFF reader's
    (:class:`compose.layers.early_tiff.PlainSource`) read this way."""
    rows = np.asarray(rows, np.int64)
    cols = np.asarray(cols, np.int64)
    out = np.full(rows.shape, np.nan, np.float32)
    H, W = shape
    ok = (rows >= 0) & (rows < H) & (cols >= 0) & (cols < W)
    if not ok.any():
        return out
    bh, bw = block
    flat = np.flatnonzero(ok.ravel())
    r, c = rows.ravel()[flat], cols.ravel()[flat]
    bid = (r // bh) * (-(-W // bw)) + c // bw
    order = np.argsort(bid, kind="stable")
    flat, r, c, bid = flat[order], r[order], c[order], bid[order]
    starts = np.flatnonzero(np.r_[True, bid[1:] != bid[:-1]])
    ends = np.r_[starts[1:], bid.size]
    dest = out.ravel()
    for s0, s1 in zip(starts, ends):
        br, bc = int(r[s0]) // bh * bh, int(c[s0]) // bw * bw
        block_values = cells(br, bc, min(bh, H - br), min(bw, W - bc))
        dest[flat[s0:s1]] = block_values[r[s0:s1] - br, c[s0:s1] - bc]
    return out
