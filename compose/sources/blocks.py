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
tiles per raster, in whichever thread order the windows run. Reads the plan does not know (a
window of another walk, a reprojected read) go to GDAL directly.

With ``ahead`` reads of read-ahead, a thread of the plan's own decodes the blocks of the next
``ahead`` reads (in the walk's order, counted from the latest read claimed) before they are
asked for, through a GDAL handle of its own: the walking threads then mostly copy cells out of
blocks already decoded, and the decoding (2 ms per 1 MB deflate block here) runs on another
core beside the walk's compute. It starts at the first read claimed (so a walk whose windows run
in other processes starts none) and ends when the plan is stopped. A block it fails to decode
is decoded again by the read that needs it, which raises the error where the walk sees it.

The values are the same either way: a planned read assembles the window from blocks finished by
the same per-pixel steps (no-data and mask to NaN) as a direct read of the window, whichever
thread decoded them.
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
from compose.sources.guard import gdal_cache

__all__ = ["BlockPlan", "Region", "MAX_BLOCK_CELLS", "PLANNED_GDAL_CACHE", "READ_AHEAD",
           "planned_walk", "planned"]

#: (row, col, height, width) of a read, in source cells, as asked for (may reach outside)
Region = tuple[int, int, int, int]

#: Blocks of more cells than this (e.g. strips as wide as a huge source) are not planned.
MAX_BLOCK_CELLS = 1 << 20

#: Reads whose blocks a walk's plan decodes ahead (:class:`BlockPlan` ``ahead``): a window
#: needs one or two new blocks per raster and takes several times as long to compute as to
#: decode them, so a few windows ahead keep the decoding off the walk however its threads
#: are scheduled, for a few more blocks held (our choice).
READ_AHEAD = 4


class _Block:
    __slots__ = ("top", "data", "ready", "ahead")

    def __init__(self, ahead: bool = False) -> None:
        self.top = 0                        # source row of data[0]
        self.data: np.ndarray | None = None
        self.ready = threading.Event()
        self.ahead = ahead                  # decoded by the read-ahead thread


class BlockPlan:
    """The blocks a known list of reads needs, decoded once and dropped after their last read.

    ``block``: (height, width) of the source's blocks; ``shape``: (height, width) of the source;
    ``regions``: the reads to come (:data:`Region`, duplicates allowed), in the order a walk
    makes them (any order works; read-ahead follows this one). ``ahead``: reads whose blocks a
    thread of the plan decodes ahead of the latest read claimed, with ``decode`` (a function
    like :meth:`read`'s, called from that thread; ``on_exit`` is called there when it ends);
    0: no read-ahead. Thread-safe; :meth:`stop` ends the read-ahead.
    """

    def __init__(self, block: tuple[int, int], shape: tuple[int, int], regions: Iterable[Region],
                 *, ahead: int = 0, decode: Callable[[int, int, int, int], np.ndarray] | None = None,
                 on_exit: Callable[[], None] | None = None):
        self.bh, self.bw = (int(v) for v in block)
        self.height, self.width = (int(v) for v in shape)
        self._regions = list(regions)
        # region -> indices (in walk order) of the reads of it still to come
        self._pending: dict[Region, deque[int]] = {}
        # block -> Counter of (first row, end row) a read still to come needs of it
        self._need: dict[tuple[int, int], Counter] = {}
        for i, region in enumerate(self._regions):
            self._pending.setdefault(region, deque()).append(i)
            for key, rows, _ in self._parts(region):
                self._need.setdefault(key, Counter())[rows] += 1
        self._blocks: dict[tuple[int, int], _Block] = {}
        self._lock = threading.Lock()
        #: blocks decoded so far (a test's and the bench's measure of work)
        self.decoded = 0
        # read-ahead: regions [_cursor, _goal) are the thread's to decode
        self._ahead = int(ahead) if decode is not None else 0
        self._decode = decode
        self._on_exit = on_exit
        self._wake = threading.Condition(self._lock)
        self._cursor = 0
        self._goal = 0
        self._thread: threading.Thread | None = None
        self._stopped = False

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
        """True (and counted) when ``region`` is a read this plan still waits for; the
        read-ahead then moves on to the reads after it."""
        with self._lock:
            waiting = self._pending.get(region)
            if not waiting:
                return False
            i = waiting.popleft()
            if self._ahead and not self._stopped:
                self._cursor = max(self._cursor, i + 1)
                goal = min(i + 1 + self._ahead, len(self._regions))
                if goal > self._goal:
                    self._goal = goal
                    if self._thread is None:
                        self._thread = threading.Thread(target=self._read_ahead, daemon=True,
                                                        name="compose-read-ahead")
                        self._thread.start()
                    self._wake.notify()
            return True

    def _read_ahead(self) -> None:
        """The read-ahead thread: decode the blocks of the regions from the cursor to the goal
        that nothing holds or decodes yet, one block at a time, until stopped."""
        decode = self._decode
        assert decode is not None
        try:
            while True:
                with self._lock:
                    while not self._stopped and self._cursor >= self._goal:
                        self._wake.wait()
                    if self._stopped:
                        return
                    region = self._regions[self._cursor]
                    self._cursor += 1
                for key, _, _ in self._parts(region):
                    with self._lock:
                        if self._stopped:
                            return
                        if key in self._blocks or key not in self._need:
                            continue            # held, being decoded, or no read needs it now
                        blk = self._blocks[key] = _Block(ahead=True)
                    if not self._fill(key, blk, decode):
                        return                  # the read that needs it decodes it again
        finally:
            if self._on_exit is not None:
                self._on_exit()

    def _fill(self, key: tuple[int, int], blk: _Block, decode) -> bool:
        """Decode block ``key`` into ``blk`` (registered by the caller); False (the block
        forgotten, its waiters woken) when the decode raised and it came from the read-ahead."""
        br, bc = key
        r0, c0 = br * self.bh, bc * self.bw
        try:
            data = decode(r0, c0, min(self.bh, self.height - r0), min(self.bw, self.width - c0))
        except BaseException:
            with self._lock:
                if self._blocks.get(key) is blk:
                    self._blocks.pop(key)
            blk.ready.set()
            if blk.ahead:
                return False
            raise
        with self._lock:
            blk.top, blk.data = r0, data
            self.decoded += 1
        blk.ready.set()
        return True

    def stop(self) -> None:
        """End the read-ahead (waits for the block it is decoding); the plan's reads go on
        without it."""
        with self._lock:
            self._stopped = True
            self._wake.notify_all()
            thread = self._thread
        if thread is not None and thread is not threading.current_thread():
            thread.join()

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
        while True:
            with self._lock:
                found = self._blocks.get(key)
                mine = found is None
                blk = self._blocks[key] = _Block() if found is None else found
            if mine:
                self._fill(key, blk, decode)
            else:
                blk.ready.wait()
            with self._lock:
                if blk.data is not None:
                    return blk.top, blk.data
                if not blk.ahead:           # its decode failed in another read's thread
                    raise RuntimeError("a block of this read failed to decode in another thread")
            # the read-ahead failed on it: decode it here, where its error is raised

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


#: GDAL's block cache during a walk whose every raster read is planned (bytes): planned reads
#: keep their own blocks, so GDAL's copy of each is never read again.
PLANNED_GDAL_CACHE = 16 << 20


@contextlib.contextmanager
def planned_walk(layers, canvas, windows) -> Iterator[bool]:
    """During a window walk over ``windows`` of ``canvas``: plan the raster reads of every
    layer with a raster ``source`` (:meth:`RasterSource.plan`; the windows' cores for a layer
    whose ``core_reads`` is true, their padded regions otherwise); when all of them are planned,
    bound GDAL's block cache to :data:`PLANNED_GDAL_CACHE` meanwhile. Yields whether the
    reads are planned; forgets the plans (and their blocks) at the end."""
    sources: list[Any] = []
    planned = []
    cores = None
    for layer in layers:
        s: Any = getattr(layer, "source", None)
        if not callable(getattr(s, "plan", None)):
            continue
        sources.append(s)
        if getattr(layer, "core_reads", False):     # the layer reads window cores only
            cores = cores if cores is not None else [core_window(w) for w in windows]
            planned.append(s.plan(canvas, cores))
        else:
            planned.append(s.plan(canvas, windows))
    every = bool(planned) and all(planned)
    try:
        if every:
            with gdal_cache(PLANNED_GDAL_CACHE):
                yield True
        else:
            yield False
    finally:
        for s in sources:
            s.plan(None)


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
