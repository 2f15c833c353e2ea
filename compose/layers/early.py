"""A draft check's raster reads, started when the layer is prepared, each on its own thread.

A draft (:mod:`compose.check.draft`) is one small window, but its raster layers still decode
every block of their files (a decimated read, or the full-resolution rows a relief samples):
on a large canvas that is most of the draft's time, and it does not depend on anything else
the render prepares. Starting these reads while the rest is prepared (vector sources read,
labels placed) lets GDAL's decoding run beside that work on another core. A read covers the
draft canvas with :data:`PAD` pixels of margin; the window's padded region is cut out of it
(reads are seam-free, so a pixel's value does not depend on the window it is read with).
"""
from __future__ import annotations

import math
import threading
from collections import deque
from collections.abc import Callable
from concurrent.futures import Future

import numpy as np

from compose.canvas import Canvas, Window

__all__ = ["PAD", "EarlyRead", "SAMPLE_BLOCKS", "DECIMATE_BLOCKS", "BlockSample",
           "sampled_cells", "SAMPLE_CACHE_BLOCKS", "SAMPLE_CACHE_BYTES"]

#: Margin of the early read, in canvas pixels: at least any layer's margin (the engine's window
#: margin is the largest of them); a window reaching further is read when painted instead.
PAD = 16


class EarlyRead:
    """``read(window)`` for the whole canvas (padded by :data:`PAD`), on the draft's reading
    thread (:func:`_submit`: one for all the layers' early reads, in the order they were made).
    ``source``: the layer's :class:`compose.sources.raster.RasterSource`, read through its own
    handle (:meth:`~compose.sources.raster.RasterSource.lent`; the layer takes the result
    instead of reading it meanwhile), so the reading thread opens no GDAL handle of its own."""

    def __init__(self, canvas: Canvas, read: Callable[[Window], np.ndarray],
                 source=None) -> None:
        self.window = canvas.whole(PAD)
        self.future: Future = Future()
        _submit(lambda: self._run(read, source))

    def _run(self, read, source=None) -> None:
        import contextlib

        from compose.timeline import span

        try:
            with span("draft early read"), (
                    source.lent() if source is not None else contextlib.nullcontext()):
                got = read(self.window)
            self.future.set_result(got)
        except BaseException as exc:        # re-raised where the paint takes it
            self.future.set_exception(exc)

    def take(self, window: Window) -> np.ndarray | None:
        """A copy of ``window``'s padded region (the last two axes), or None when it does not
        lie inside the early read; raises what the read raised."""
        r0, c0, h, w = window.padded
        R0, C0, H, W = self.window.padded
        if r0 < R0 or c0 < C0 or r0 + h > R0 + H or c0 + w > C0 + W:
            return None
        return np.array(self.future.result()[..., r0 - R0:r0 - R0 + h, c0 - C0:c0 - C0 + w])

    def wait(self) -> None:
        """Wait until the read is over (before its source is closed), ignoring its outcome."""
        try:
            self.future.exception()
        except BaseException:               # pragma: no cover - cancelled
            pass


#: Early reads waiting for the reading thread, and whether that thread is running.
_QUEUE: deque = deque()
_QUEUE_LOCK = threading.Lock()
_READER: list[bool] = [False]


def _submit(job: Callable[[], None]) -> None:
    """Run ``job`` on the draft's reading thread: one thread runs the early reads one after
    another (started when a read is queued, ending when none is left). The reads decode
    raster blocks with GDAL, which releases Python's lock, beside the vector reads' thread and
    the preparing thread; on a machine of two cores one reading thread leaves a core to the
    lines, which are read, cut and drawn one step after another while the rasters have until
    the walk to finish, where two reading threads (a theme's and its relief's) took turns with
    the lines on both cores."""
    with _QUEUE_LOCK:
        _QUEUE.append(job)
        if _READER[0]:
            return
        _READER[0] = True
    threading.Thread(target=_drain, name="draft-read", daemon=True).start()


def _drain() -> None:
    while True:
        with _QUEUE_LOCK:
            if not _QUEUE:
                _READER[0] = False
                return
            job = _QUEUE.popleft()
        job()


#: :meth:`BlockSample.cells` made so far (a few), by everything that decides them.
_CELLS: dict[tuple, tuple[np.ndarray, np.ndarray]] = {}
_CELLS_LOCK = threading.Lock()

#: Blocks of a file a sampled draft read decodes (about; see :class:`BlockSample`): 16, one
#: block row's worth of a 16 x 16-block file (8192 x 8192 in 512 px tiles); on six maps of 256
#: blocks the draft's measures stay about as near the full check's as with 32 (see
#: tests/layers/test_early.py), and each block is about 2.6 ms of decoding.
SAMPLE_BLOCKS = 16

#: GDAL's block cache while a sample's blocks are read (:meth:`BlockSample._small_cache`):
#: this many of the file's blocks (at 8 bytes a cell, the widest type), at least
#: :data:`SAMPLE_CACHE_BYTES`.
SAMPLE_CACHE_BLOCKS = 2
SAMPLE_CACHE_BYTES = 4 << 20

#: Files of at most this many blocks over the canvas are read decimated (every block decoded,
#: GDAL's averages), not sampled: cheap enough (the demo's 1500 x 1500 files in 256 px tiles
#: are 36 blocks), and nothing is estimated from a sample.
DECIMATE_BLOCKS = 64


def distinct(a: np.ndarray) -> np.ndarray:
    """The distinct values of ``a`` (integers, any shape), ascending, (n,): as ``np.unique(a)``,
    which in numpy 2.4 asks ``np.ma`` whether ``a`` is masked, importing numpy.ma on first use
    (about 6 ms of a draft's start, on its reading thread)."""
    s = np.sort(a, axis=None)
    if s.size < 2:
        return s
    keep = np.empty(s.size, bool)
    keep[0] = True
    np.not_equal(s[1:], s[:-1], out=keep[1:])
    return s[keep]


def _coprime_step(m: int) -> int:
    """A step coprime with ``m`` near m / 2.618 (the golden ratio squared), so the blocks a
    block row samples move along the row from one block row to the next and every block column
    gets its share (1 when m <= 2)."""
    for a in range(max(1, round(m / 2.618)), m + 1):
        if math.gcd(a, m) == 1:
            return a
    return 1


def sampled_cells(full_shape: tuple[int, int], factor: int, rows: np.ndarray, cols: np.ndarray,
                  block: tuple[int, int], origin: tuple[int, int], every: int
                  ) -> tuple[np.ndarray, np.ndarray]:
    """Full-canvas cells (rows, cols: int64 arrays of shape (len(rows), len(cols)); -1 where a
    draft pixel lies outside the canvas) that a block-sampled draft reads for its pixels.

    full_shape: (height, width) of the full canvas; factor: full-canvas pixels per draft pixel;
    rows, cols: draft pixel indices (may reach past the draft's edges); block: (bh, bw) cells of
    the file's blocks and origin: the full-canvas cell where a block starts (both canvas cells,
    the file aligned with the canvas); every: 1 in ``every`` blocks of each block row is read.

    A draft pixel's cell is the centre of its factor x factor block (as a draft relief samples
    shades), moved inside its file block by at most one cell so its 3 x 3 neighbourhood stays in
    that block. Block (i, j) is read when (a i + j) mod every == 0 (``a`` coprime with
    ``every``): evenly spread, every block row reads its share of blocks and the columns read
    shift from row to row. A pixel over a block not read takes the cell at the same place in the
    nearest block read in its own block row (same rows, so per-row ground distances stay
    right), the nearer of two equally near ones to the west; none inside the canvas: its own.
    """
    h_full, w_full = full_shape
    bh, bw = block
    orow, ocol = origin

    def centre(idx, size, n, o):
        cell = idx.astype(np.int64) * factor + factor // 2
        inside = (cell >= 0) & (cell < n)
        off = (cell - o) % size
        if size >= 3:           # keep the 3 x 3 neighbourhood inside the block
            cell = cell + np.where(off == 0, 1, 0) - np.where(off == size - 1, 1, 0)
        return np.where(inside, cell, -1)

    r = centre(np.asarray(rows), bh, h_full, orow)
    c = centre(np.asarray(cols), bw, w_full, ocol)
    out_c = np.broadcast_to(c, (len(r), len(c))).copy()
    if every <= 1:
        out_r = np.broadcast_to(r[:, None], out_c.shape).copy()
        out_r[:, c < 0] = -1
        out_c[r < 0, :] = -1
        return out_r, out_c
    a = _coprime_step(every)
    bj = (c - ocol) // bw                       # block column of each pixel (ignored where c < 0)
    last = (w_full - 1 - ocol) // bw
    first = (0 - ocol) // bw
    done_rows: dict[int, int] = {}              # block row -> the first row mapped in it
    for i, cell in enumerate(r):
        if cell < 0:
            out_c[i, :] = -1
            continue
        bi = (int(cell) - orow) // bh
        if bi in done_rows:                     # a row of the same block row: the same columns
            out_c[i] = out_c[done_rows[bi]]
            continue
        done_rows[bi] = i
        phase = (-a * bi) % every               # block columns j read in this row: j = phase mod every
        read = np.arange(first + ((phase - first) % every), last + 1, every)
        if read.size == 0:
            continue                            # no block of this row is read: the pixels' own
        away = (c >= 0) & ((bj - phase) % every != 0)     # over a block not read
        if not away.any():
            continue
        js = bj[away]
        # candidates: nearest first, the western one of two equally near
        order = np.argsort(np.abs(read[None, :] - js[:, None]) * 2 + (read[None, :] > js[:, None]),
                           axis=1, kind="stable")
        moved = c[away].copy()
        done = np.zeros(js.size, bool)
        for k in range(read.size):
            target = read[order[:, k]]
            cand = c[away] + (target - js) * bw
            ok = ~done & (cand >= 0) & (cand < w_full)
            moved[ok] = cand[ok]
            done |= ok
            if done.all():
                break
        out_c[i, away] = moved
    out_r = np.broadcast_to(r[:, None], out_c.shape).copy()
    out_r[out_c < 0] = -1
    out_c[out_r < 0] = -1
    return out_r, out_c


def _grid_tasks(fr: np.ndarray, fc: np.ndarray, ok: np.ndarray, block: tuple[int, int]
                ) -> tuple[dict[tuple[int, int], list], np.ndarray, np.ndarray]:
    """How to cut the cells (fr, fc) (file cells, (h, w) int64) where ``ok`` out of the file's
    blocks (``block``: (rows, cols) of a block) a grid at a time: the rows whose ``ok`` cells all
    lie on one file row (``whole``, (h,) bool; ``row``: that file row, (h,)) are grouped by their
    block row and their columns (rows alike: the draft's rows in one row of blocks), each group's
    columns split by block column; returns ({(block row, block column): [(draft rows, draft
    columns), ...]}, whole, row), both index arrays ascending. Every ``ok`` cell of a whole row
    is in one task, once."""
    bh, bw = block
    big = np.iinfo(np.int64).max
    row = np.where(ok, fr, big).min(axis=1)
    whole = ok.any(axis=1) & (row == np.where(ok, fr, -1).max(axis=1))
    groups: dict[tuple, list[int]] = {}
    for ri in np.flatnonzero(whole).tolist():
        groups.setdefault((int(row[ri]) // bh, fc[ri].tobytes(), ok[ri].tobytes()), []).append(ri)
    tasks: dict[tuple[int, int], list] = {}
    for (b_row, _, _), members in groups.items():
        rows_i = np.array(members)
        js = np.flatnonzero(ok[members[0]])
        b_col = fc[members[0], js] // bw
        order = np.argsort(b_col, kind="stable")
        js, b_col = js[order], b_col[order]
        cut = np.flatnonzero(np.r_[True, b_col[1:] != b_col[:-1], True])
        for k0, k1 in zip(cut[:-1], cut[1:]):
            tasks.setdefault((b_row, int(b_col[k0])), []).append((rows_i, js[k0:k1]))
    return tasks, whole, row


class BlockSample:
    """A draft's reads of an aligned, tiled file without overviews at the draft's scale, from an
    evenly spread sample of whole blocks (see :func:`sampled_cells`): each block read is decoded
    once; the rest of the file is never touched.

    A decimated read (GDAL's block averages) of such a file decodes every block, about 1 CPU-s
    per 8192 x 8192 float32 deflate file. Instead each draft pixel takes one full-resolution
    cell (the field's value there, the relief's shade from that cell's own 3 x 3 neighbourhood,
    as a full check paints it) from the blocks read. The draft's raster pixels are then the full
    map's own values, but over the blocks not read they come from the nearest block read in the
    same block row: the draft is a mosaic of the map's blocks, and every share or percentile a
    rule judges is estimated from 1 in ``every`` blocks (about :data:`SAMPLE_BLOCKS`) of the
    map instead of all of it -- its error is that of a sample of whole blocks spread evenly over
    the canvas, largest for maps whose themes change from one region to another. Overlays are
    drawn where they are, over the mosaic. Rasters aligned alike sample the same blocks, so a
    theme and its relief stay paired cell by cell.
    """

    def __init__(self, source, canvas: Canvas, full: Canvas, factor: int, every: int) -> None:
        self.source = source
        self.canvas = canvas
        self.full = full
        self.factor = factor
        self.every = every
        self.offset = source.aligned_offset(full)
        assert self.offset is not None
        bh, bw = source.block_shape
        orow, ocol = self.offset
        # full-canvas cell where a file block starts
        self.origin = ((-orow) % bh, (-ocol) % bw)
        self.block = (bh, bw)

    @classmethod
    def of(cls, source, canvas: Canvas, full: Canvas | None, factor: int,
           target: int = SAMPLE_BLOCKS) -> BlockSample | None:
        """The sample for ``source`` read onto the draft ``canvas`` of ``full`` (``factor`` full
        pixels a draft pixel), or None when a decimated read is cheap or right: the file is not
        aligned with the full canvas, has an overview at the draft's scale, or has at most
        :data:`DECIMATE_BLOCKS` blocks over the canvas."""
        if full is None or factor < 2 or source.aligned_offset(full) is None:
            return None
        if any(f <= factor for f in source.overview_factors):
            return None
        bh, bw = source.block_shape
        blocks = -(-full.height // bh) * -(-full.width // bw)
        if blocks <= DECIMATE_BLOCKS:
            return None
        across = -(-full.width // bw)
        every = min(across, max(2, round(blocks / target)))
        return cls(source, canvas, full, factor, every)

    def cells(self, window: Window) -> tuple[np.ndarray, np.ndarray]:
        """Full-canvas (rows, cols) of the padded ``window``'s draft pixels (-1: outside),
        read-only; made once for every layer whose files are tiled and aligned alike (a theme
        and its relief: the same cells, see :func:`sampled_cells`)."""
        r0, c0, h, w = window.padded
        key = ((self.full.height, self.full.width), self.factor, (r0, c0, h, w), self.block,
               self.origin, self.every)
        with _CELLS_LOCK:
            got = _CELLS.get(key)
            if got is None:
                got = sampled_cells(key[0], self.factor, np.arange(r0, r0 + h),
                                    np.arange(c0, c0 + w), self.block, self.origin, self.every)
                for a in got:
                    a.flags.writeable = False
                if len(_CELLS) >= 8:
                    _CELLS.clear()
                _CELLS[key] = got
        return got

    def _small_cache(self):
        """GDAL's block cache bounded to :data:`SAMPLE_CACHE_BLOCKS` of this file's blocks
        meanwhile (:func:`compose.sources.guard.gdal_cache`): each block read is decoded once and
        kept here as long as needed, so GDAL's copy is never read again; bounded, GDAL's
        buffers of the blocks before are freed for the next instead of each block's landing
        in fresh memory (the 8192 benchmark's 32 blocks: 32 MB, some 8000 page faults)."""
        if not getattr(self.source, "gdal", True):     # read without GDAL (early_tiff)
            import contextlib

            return contextlib.nullcontext()
        from compose.sources.guard import gdal_cache

        bh, bw = self.block
        return gdal_cache(max(SAMPLE_CACHE_BYTES, SAMPLE_CACHE_BLOCKS * bh * bw * 8))

    def read(self, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
        """:meth:`_read` under :meth:`_small_cache`."""
        with self._small_cache():
            return self._read(rows, cols)

    def _read(self, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
        """float32 values of full-canvas cells (any shape; -1 or outside the file: NaN), as
        :meth:`RasterSource.cells_at <compose.sources.raster.RasterSource.cells_at>` reads
        them. Rows of a 2-D grid whose cells lie on one file row (the draft's own cells,
        :meth:`cells`) are cut out of their blocks a grid of rows by columns at a time, each
        block decoded once; any other cell is read by ``cells_at`` (which decodes its blocks
        once more)."""
        orow, ocol = self.offset
        rows = np.asarray(rows, np.int64)
        cols = np.asarray(cols, np.int64)
        bad = (rows < 0) | (cols < 0)
        fr, fc = np.where(bad, -1, rows + orow), np.where(bad, -1, cols + ocol)
        if rows.ndim != 2:
            return self.source.cells_at(fr, fc)
        fh, fw = self.source.shape
        ok = ~bad & (fr >= 0) & (fr < fh) & (fc >= 0) & (fc < fw)
        tasks, whole_rows, lo = _grid_tasks(fr, fc, ok, self.block)
        rest = ~whole_rows[:, None] & ok
        if rest.any():
            out = self.source.cells_at(np.where(rest, fr, -1), np.where(rest, fc, -1))
        else:
            out = np.full(rows.shape, np.nan, np.float32)
        bh, bw = self.block
        for (b_row, b_col) in sorted(tasks):
            br, bc = b_row * bh, b_col * bw
            need = distinct(np.concatenate([lo[rows_i] for rows_i, _ in tasks[(b_row, b_col)]]))
            block = self.source_block(br, bc, min(bh, fh - br), min(bw, fw - bc), need - br)
            for rows_i, js in tasks[(b_row, b_col)]:
                cut_out = block.take(lo[rows_i] - br, axis=0).take(fc[rows_i[0], js] - bc, axis=1)
                if rows_i[-1] - rows_i[0] + 1 == rows_i.size and js[-1] - js[0] + 1 == js.size:
                    out[rows_i[0]:rows_i[-1] + 1, js[0]:js[-1] + 1] = cut_out
                else:
                    out[np.ix_(rows_i, js)] = cut_out
        return out

    def source_block(self, row: int, col: int, height: int, width: int,
                     rows: np.ndarray | None = None) -> np.ndarray:
        """The file's cells of a block (file cells), float32, C-contiguous: decoded once per
        call of :meth:`neighbourhoods` for all the centres in it. ``rows``: the only rows of
        the block that are read (ascending, from 0), or None: all; a source read without GDAL
        (:class:`compose.layers.early_tiff.PlainSource`) then decodes only those rows' values
        (its other rows: NaN), GDAL every row."""
        if rows is not None and not getattr(self.source, "gdal", True):
            return self.source.block_cells(row, col, height, width, rows=rows)
        return np.ascontiguousarray(self.source.block_cells(row, col, height, width))

    def values(self, window: Window) -> np.ndarray:
        """The padded ``window``'s draft values: float32 (padded height, padded width)."""
        return self.read(*self.cells(window))

    def neighbourhoods(self, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
        """:meth:`_neighbourhoods` under :meth:`_small_cache`."""
        with self._small_cache():
            return self._neighbourhoods(rows, cols)

    def _neighbourhoods(self, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
        """The 3 x 3 neighbourhoods of full-canvas cells (rows, cols: int arrays (h, w), -1: no
        cell) laid side by side: float32 (3 h, 3 w), element (3 i + a, 3 j + b) the value of cell
        (rows[i, j] + a - 1, cols[i, j] + b - 1) -- exactly :meth:`read` of those cells, NaN
        where the centre is -1.

        :meth:`read` of the 9 h w cells sorts every one of them by block (about 0.3 CPU-s for
        the 8192 benchmark's 373 x 373 draft); here only the centres are grouped by block, each
        block needed is decoded once and its neighbourhoods are gathered whole. A neighbourhood
        that does not lie inside its centre's block and the file (none of those
        :meth:`cells` gives on blocks of 3 x 3 cells or more) is read by :meth:`read`."""
        rows = np.asarray(rows, np.int64)
        cols = np.asarray(cols, np.int64)
        h, w = rows.shape
        out = np.full((h, 3, w, 3), np.nan, np.float32)
        orow, ocol = self.offset
        bh, bw = self.block
        fh, fw = self.source.shape
        fr, fc = rows + orow, cols + ocol                   # file cells of the centres
        blk_r, blk_c = fr // bh, fc // bw
        fast = ((rows >= 1) & (cols >= 1) & (fr >= 1) & (fc >= 1)
                & (fr + 1 < fh) & (fc + 1 < fw)
                & ((fr - 1) // bh == blk_r) & ((fr + 1) // bh == blk_r)
                & ((fc - 1) // bw == blk_c) & ((fc + 1) // bw == blk_c))
        step = np.array([-1, 0, 1])
        flat = out.reshape(-1)
        # rows whose centres all lie on one file row (each row of the draft's own cells): their
        # neighbourhoods are cut out of a block whole, a grid of rows by columns at a time
        tasks, whole_rows, lo = _grid_tasks(fr, fc, fast, self.block)
        idx = np.flatnonzero(fast & ~whole_rows[:, None])
        kept: dict[tuple[int, int], np.ndarray] = {}     # blocks the rest needs too
        rest = set(zip((blk_r.ravel()[idx]).tolist(), (blk_c.ravel()[idx]).tolist()))
        for (b_row, b_col) in sorted(tasks):
            br, bc = b_row * bh, b_col * bw
            need = None if (b_row, b_col) in rest else distinct(np.concatenate(
                [lo[rows_i] for rows_i, _ in tasks[(b_row, b_col)]])[:, None] + step) - br
            block = self.source_block(br, bc, min(bh, fh - br), min(bw, fw - bc), need)
            if (b_row, b_col) in rest:
                kept[(b_row, b_col)] = block
            for rows_i, js in tasks[(b_row, b_col)]:
                r3 = (lo[rows_i][:, None] + step).ravel() - br
                c3 = (fc[rows_i[0], js][:, None] + step).ravel() - bc
                cut_out = block.take(r3, axis=0).take(c3, axis=1).reshape(
                    rows_i.size, 3, js.size, 3)
                if rows_i[-1] - rows_i[0] + 1 == rows_i.size and js[-1] - js[0] + 1 == js.size:
                    out[rows_i[0]:rows_i[-1] + 1, :, js[0]:js[-1] + 1, :] = cut_out
                else:
                    out[np.ix_(rows_i, np.arange(3), js, np.arange(3))] = cut_out
        if idx.size:        # the rest of the centres: grouped by block, each gathered alone
            bid = blk_r.ravel()[idx] * (-(-fw // bw)) + blk_c.ravel()[idx]
            order = np.argsort(bid, kind="stable")
            idx, bid = idx[order], bid[order]
            starts = np.flatnonzero(np.r_[True, bid[1:] != bid[:-1]])
            ends = np.r_[starts[1:], bid.size]
            # element (i, a, j, b) of ``out``: i 9w + a 3w + j 3 + b; the centre (i, j) of flat
            # index k = i w + j at 9 w i + 3 j = 3 k + 6 w i, its stencil at (a, b) 3 w a + b
            # further; a block's cells gathered with one flat take (the same values)
            spots = ((step[:, None] + 1) * 3 * w + (step[None, :] + 1)).ravel()    # (9,)
            fr_all, fc_all = fr.ravel()[idx], fc.ravel()[idx]
            dest = 3 * idx + 6 * w * (idx // w)
            for s0, s1 in zip(starts, ends):
                r, c = fr_all[s0:s1], fc_all[s0:s1]
                br, bc = int(r[0]) // bh * bh, int(c[0]) // bw * bw
                nh, nw = min(bh, fh - br), min(bw, fw - bc)
                got = kept.pop((br // bh, bc // bw), None)
                block = got if got is not None else self.source_block(br, bc, nh, nw)
                near = (step[:, None] * nw + step[None, :]).ravel()          # (9,)
                at = (r - br) * nw + (c - bc)
                flat[(dest[s0:s1, None] + spots).ravel()] = \
                    block.ravel().take((at[:, None] + near).ravel())
        slow = np.flatnonzero(~fast & (rows >= 0) & (cols >= 0))
        if slow.size:
            r3 = rows.ravel()[slow][:, None, None] + step[:, None]
            c3 = cols.ravel()[slow][:, None, None] + step[None, :]
            i, j = np.divmod(slow, w)
            flat[(i * 9 * w + j * 3)[:, None, None] + (step[:, None] + 1) * 3 * w
                 + (step[None, :] + 1)] = self.read(*np.broadcast_arrays(r3, c3))
        return out.reshape(3 * h, 3 * w)
