"""Vector layers drawn in a helper process, ahead of the window walk.

Agg's line and area drawing (:mod:`compose.layers.draw`) holds Python's GIL, so window threads
sharing one prepared render cannot draw lines on one core while another colours rasters: on the
8192 x 8192 benchmark Agg is about a quarter of the compute's CPU and two window threads gained
only 1.1x over one. :class:`DrawAhead` moves the drawing of the ``lines``, ``areas`` and
``points`` layers into one worker process with a GIL of its own. It draws the windows in walk
order, a few windows ahead of the threads, and hands each window's paints back as Agg's 8-bit
coverage (the same ``alpha / 255`` float32 the layer returns in this process, so the render is
byte-identical with or without it; tested). The window threads keep the rasters, the
compositing and the measuring.

The worker gets the prepared vector layers once (features as WKB, vectorised) and runs the same
``layer.paint`` the threads would. It writes each window's coverage into a slot of memory shared
with this process (a ring of :data:`SLOTS` windows, a file in ``/dev/shm`` both map; unlinked
once the helper has mapped it) and sends back only where it lies, so the coverage is not pickled,
piped and unpickled (on the 8192 bench about 0.1 s of CPU over both processes for 256 windows of
268 kB; a helper task that finds no free slot, or a system without ``/dev/shm``, sends it
through the pipe as before). It starts beside the walk (the threads draw the first
windows themselves until it is up), and if it cannot start or fails, a window's layers are drawn
in the calling thread as without it.

The process itself is forked from this one by :func:`warm` when the window threads' mapper is
made, before the render is prepared and before any other thread runs: it has this process's
imports already, holds none of the render's arrays (it gets the layers it draws pickled, as
above) and dies with this process. Where that cannot be (another thread runs, no ``fork``), it
is forked from multiprocessing's fork server, a fresh interpreter that imports :data:`PRELOAD`
(on the 8192 benchmark 0.2 CPU-s more, with a resource tracker beside it).
"""
from __future__ import annotations

import mmap
import os
import tempfile
import threading
from collections.abc import Callable, Iterable
from typing import TYPE_CHECKING, Any

import numpy as np

from compose.forking import can_fork, die_with_parent
from compose.heap import no_huge_pages, trim
from compose.layers.base import Paint

if TYPE_CHECKING:
    from concurrent.futures import Future

__all__ = ["DrawAhead", "DRAWN_KINDS", "AHEAD", "warm", "discard_warm"]

#: Layer kinds drawn by the helper process: their paints are flat-coloured Agg coverage and a
#: pure function of the window and the prepared features.
DRAWN_KINDS = ("lines", "areas", "points")
#: Windows the helper process may draw beyond the one the walk waits for (each window's
#: coverage is a few hundred kB).
AHEAD = 8

#: Windows whose coverage may wait in memory shared with the helper (see the module's text): the
#: windows drawn ahead, those the threads are taking, and some to spare.
SLOTS = AHEAD + 8
#: Coverage planes a layer of each drawn kind may paint (halo and stroke; fill, halo, stroke;
#: ring and marker), for the size of a shared slot.
_PARTS = {"lines": 2, "areas": 3, "points": 2}
#: Where the shared slots' file is made (a RAM file system on Linux).
SHARED_DIR = "/dev/shm"

#: Modules the helper processes' server imports once (a helper is forked from it ready to draw).
PRELOAD = ["compose.engine", "compose.parallel", "compose.drawer", "compose.layers.vector"]

#: The forked helper's name as the system shows it (/proc/PID/comm; at most 15 bytes).
HELPER_NAME = b"compose-drawer"

_LAYERS: dict[int, Any] = {}     # in the helper process: layer index -> prepared layer
_SHARED: list = []               # in the helper process: [the slots' mmap, bytes per slot]


def _init(payload: bytes, shared: tuple[str, int, int] | None = None) -> None:
    """In the helper process: the layers to draw; ``shared``: (path, slots, bytes per slot) of
    the file whose slots the coverage is written to."""
    from compose.layers.draw import eight_bit_coverage
    from compose.packing import unpack

    eight_bit_coverage()        # Agg's bytes are what goes back: no float32 copy and back
    # its fork server may have started before the render's malloc settings (compose.heap)
    no_huge_pages()
    _LAYERS.clear()
    _LAYERS.update(unpack(payload))
    _SHARED.clear()
    if shared is not None:
        path, slots, size = shared
        with open(path, "r+b") as f:
            _SHARED.extend([mmap.mmap(f.fileno(), slots * size), size])


def _to8(alpha: np.ndarray) -> np.ndarray:
    """Agg's 8-bit coverage as it is (uint8); Agg coverage as float32 (k / 255) back to its
    8-bit k, or the float32 itself if it is not such a coverage (then sent as it is)."""
    if alpha.dtype == np.uint8:
        return alpha
    a8 = np.rint(alpha * np.float32(255)).astype(np.uint8)
    if np.array_equal(np.divide(a8, np.float32(255), dtype=np.float32), alpha):
        return a8
    return alpha


def _draw(window, slot: int | None = None) -> list[tuple[int, list[tuple[str, Any, Any]]]]:
    """In the helper process: every drawn layer's paints of ``window`` as (part, coverage,
    colour); with ``slot``, 8-bit coverage that fits is written to that shared slot and given
    as (byte offset in the slot, shape) instead."""
    out = []
    at = 0
    for li, layer in _LAYERS.items():
        canvas = layer.canvas
        _, _, h, w = window.padded
        paints = layer.paint(window, canvas.window_transform(window), h, w)
        items: list[tuple[str, Any, Any]] = []
        for p in paints:
            alpha = _to8(p.alpha)
            if (slot is not None and _SHARED and alpha.dtype == np.uint8
                    and at + alpha.nbytes <= _SHARED[1]):
                start = slot * _SHARED[1] + at
                np.frombuffer(_SHARED[0], np.uint8, alpha.size, start).reshape(alpha.shape)[...] = alpha
                items.append((p.part, (at, alpha.shape), p.color))
                at += alpha.nbytes
            else:
                items.append((p.part, alpha, p.color))
        out.append((li, items))
    return out


def _for_drawing(layer):
    """What of ``layer`` the helper needs (its ``for_drawing``, else the layer itself)."""
    method = getattr(layer, "for_drawing", None)
    return method() if method is not None else layer


def _paint(part: str, alpha: np.ndarray, color) -> Paint:
    if alpha.dtype == np.uint8:
        alpha = np.divide(alpha, np.float32(255), dtype=np.float32)
    return Paint(part, alpha, color=color)


class _Slots:
    """The shared slots on this side: a file in :data:`SHARED_DIR` of ``count`` slots of
    ``size`` bytes, mapped here; which are free."""

    def __init__(self, count: int, size: int):
        size = -(-size // mmap.PAGESIZE) * mmap.PAGESIZE
        fd, self.path = tempfile.mkstemp(prefix="compose-draw-", dir=SHARED_DIR)
        try:
            os.ftruncate(fd, count * size)
            self.map = mmap.mmap(fd, count * size)
        except BaseException:
            os.close(fd)
            self.unlink()
            raise
        os.close(fd)
        self.count, self.size = count, size
        self.free = list(range(count - 1, -1, -1))

    def unlink(self) -> None:
        try:
            os.unlink(self.path)
        except OSError:
            pass

    def coverage(self, slot: int, at: int, shape: tuple[int, ...]) -> np.ndarray:
        """The 8-bit coverage the helper left at ``at`` in ``slot`` (a view: convert it before
        the slot is freed)."""
        count = int(np.prod(shape))
        return np.frombuffer(self.map, np.uint8, count, slot * self.size + at).reshape(shape)


def _serve(conn, other, parent: int) -> None:
    """The forked helper process: import :data:`PRELOAD` (what this process lacks of it), then
    run ``(function, args)`` requests from ``conn`` in order, sending back ``(True, result)`` or
    ``(False, exception)``, until None or the end of the pipe."""
    import gc
    import importlib
    import signal

    other.close()
    # the objects inherited from the parent are never collected here: a collection would write
    # to every one of them (copying the pages this process shares with its parent)
    gc.freeze()
    signal.signal(signal.SIGINT, signal.SIG_IGN)        # the parent ends it
    # not the parent's handler (the command turns SIGTERM into an exception and a message)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    if not die_with_parent(parent, HELPER_NAME):       # named for ps, top and /proc
        return
    try:
        for name in PRELOAD:
            importlib.import_module(name)
    except Exception:       # pragma: no cover - its requests fail: the threads draw
        pass
    while True:
        try:
            message = conn.recv()
        except (EOFError, OSError):
            return
        if message is None:
            return
        fn, args = message
        try:
            reply = (True, fn(*args))
        except BaseException as exc:        # noqa: BLE001 - handed back
            reply = (False, exc)
        try:
            conn.send(reply)
        except (EOFError, OSError):
            return
        except Exception as exc:            # a result or an error that does not pickle
            try:
                conn.send((False, RuntimeError(f"the drawing helper could not send back: {exc!r}")))
            except Exception:               # pragma: no cover - the parent draws
                return


class _Helper:
    """A helper process forked from this one (:func:`warm`), with a pipe both ways: requests go
    in order, replies come back in order."""

    def __init__(self):
        import multiprocessing

        ctx = multiprocessing.get_context("fork")
        mine, theirs = ctx.Pipe()
        self.process = ctx.Process(target=_serve, args=(theirs, mine, os.getpid()), daemon=True,
                                   name="compose-drawer")
        self.process.start()
        theirs.close()
        self.conn = mine

    def close(self) -> None:
        """Ask the process to end and reap it (killed if it does not end within seconds)."""
        try:
            self.conn.send(None)
        except (OSError, ValueError):
            pass
        self.conn.close()
        self.process.join(10)
        if self.process.is_alive():     # pragma: no cover - a helper stuck in a window
            self.process.kill()
            self.process.join()


class _Pool:
    """The executor :class:`DrawAhead` submits to, over a :class:`_Helper`: ``submit`` returns a
    :class:`~concurrent.futures.Future`, resolved by a reader thread as replies come (in order);
    every pending future fails once the helper is gone."""

    def __init__(self, helper: _Helper):
        from collections import deque

        self._helper = helper
        self._pending: deque = deque()
        self._lock = threading.Lock()
        self._broken = False
        self._reader = threading.Thread(target=self._read, daemon=True, name="compose-drawer-read")
        self._reader.start()

    def submit(self, fn: Callable[..., Any], *args: Any) -> Future:
        from concurrent.futures import Future

        future: Future = Future()
        with self._lock:
            if self._broken:
                raise RuntimeError("the drawing helper process ended")
            self._pending.append(future)
            try:
                self._helper.conn.send((fn, args))
            except BaseException:
                self._pending.pop()
                self._broken = True
                raise
        return future

    def _read(self) -> None:
        conn = self._helper.conn
        while True:
            try:
                ok, value = conn.recv()
            except (EOFError, OSError, ValueError):
                break
            with self._lock:
                future = self._pending.popleft() if self._pending else None
            if future is None or not future.set_running_or_notify_cancel():
                continue
            if ok:
                future.set_result(value)
            else:
                future.set_exception(value)
        with self._lock:
            self._broken = True
            pending = list(self._pending)
            self._pending.clear()
        for future in pending:
            if future.set_running_or_notify_cancel():
                future.set_exception(RuntimeError("the drawing helper process ended"))

    def shutdown(self, wait: bool = True, cancel_futures: bool = False) -> None:
        if cancel_futures:
            with self._lock:
                pending = list(self._pending)
            for future in pending:
                future.cancel()
        with self._lock:
            self._broken = True
        self._helper.close()
        if wait:
            self._reader.join()


#: The helper forked by :func:`warm`, waiting for its walk (taken by :class:`DrawAhead`).
_WARM: list[_Helper] = []


def warm() -> None:
    """Make the helper process ready before the walk, beside whatever this process does next
    (e.g. preparing the render). Where it can (:func:`compose.forking.can_fork`: no other thread yet) the
    helper is forked from this process now: it has this process's imports already and loads
    only the rest of :data:`PRELOAD` (no interpreter start and no server process: on the 8192
    benchmark the server cost 0.2 CPU-s); it shares this process's pages as they are at the
    fork, before the render reads anything. Else the server the helper is forked from later is
    started (it imports :data:`PRELOAD`). Never raises."""
    if not _WARM and can_fork():
        try:
            _WARM.append(_Helper())
            return
        except Exception:       # pragma: no cover - no fork here: the server below
            pass
    try:
        import multiprocessing
        from multiprocessing import forkserver

        multiprocessing.get_context("forkserver").set_forkserver_preload(PRELOAD)
        forkserver.ensure_running()
    except Exception:       # pragma: no cover - no forkserver here: DrawAhead.start says so
        pass


def _take_warm() -> _Helper | None:
    """The helper :func:`warm` forked, if it is still up (then it is no longer waiting)."""
    while _WARM:
        helper = _WARM.pop()
        if helper.process.is_alive():
            return helper
        helper.close()
    return None


def discard_warm() -> None:
    """End the helper :func:`warm` forked when no walk will take it."""
    while _WARM:
        _WARM.pop().close()


class DrawAhead:
    """Draw the vector layers of ``prepared`` (indices in ``only``, default all) for ``windows``
    in a helper process; :meth:`paints` returns a window's paints of one layer.

    Thread-safe: window threads may ask for different windows at once. Use :meth:`start`, which
    returns None when there is nothing to draw, and :meth:`close` when the walk ends.
    """

    def __init__(self, prepared, layers: list[int], windows: Iterable, ahead: int = AHEAD,
                 wait: bool = False):
        self.layers = frozenset(layers)
        self._windows = list(windows)
        self._index = {w: i for i, w in enumerate(self._windows)}
        self._ahead = max(1, int(ahead))
        self._futures: dict[int, Any] = {}
        self._used: dict[int, int] = {}
        self._next = 0
        self._lock = threading.Lock()
        self._closed = False
        self._executor: Any = None
        # the executor once the helper is up; None before, and once closed or broken
        self._pool: Any = None
        self._prepared = prepared
        # the first window given to the helper, and the last one the threads drew themselves
        # (their layers need this process's copy of the features until it is done)
        self._first: int | None = None
        self._last_here = -1
        #: whether this process's copy of the drawn layers' features was dropped
        self.released = False
        #: windows whose paints the helper process drew
        self.served = 0
        #: windows whose coverage came through the shared slots
        self.shared = 0
        #: whether the helper is the one :func:`warm` forked from this process
        self.forked = False
        self._slots: _Slots | None = None
        self._slot: dict[int, int] = {}         # window index -> its shared slot
        # the helper starts beside the walk: until it is up, the threads draw themselves
        self._starter = threading.Thread(target=self._start, args=(prepared,), daemon=True,
                                         name="compose-drawer-start")
        self._starter.start()
        if wait:
            self._starter.join()

    def _start(self, prepared) -> None:
        import multiprocessing
        from concurrent.futures import ProcessPoolExecutor

        from compose.packing import pack

        executor: Any = None
        slots = None
        try:
            # lines go as their parts in pixel space (LinesLayer.for_drawing), not as features
            payload = pack({li: _for_drawing(prepared.layers[li]) for li in sorted(self.layers)})
            try:
                size = sum(_PARTS.get(prepared.layers[li].spec.kind, 3) for li in self.layers) \
                    * max((w.padded[2] * w.padded[3] for w in self._windows), default=0)
                slots = _Slots(SLOTS, size) if size else None
            except OSError:     # no shared memory here: the coverage comes through the pipe
                slots = None
            helper = _take_warm()
            if helper is not None:      # forked by warm(): ready, with this process's imports
                executor = _Pool(helper)
                self.forked = True
            else:
                ctx = multiprocessing.get_context("forkserver")
                ctx.set_forkserver_preload(PRELOAD)
                executor = ProcessPoolExecutor(1, mp_context=ctx)
            # the layers go as a task, not as the worker's initializer arguments, which both
            # processes would keep for the whole walk (the features' WKB: 17 MB for 1 M vertices)
            shared = (slots.path, slots.count, slots.size) if slots is not None else None
            try:
                executor.submit(_init, payload, shared).result()   # up, layers unpacked
            finally:
                if slots is not None:
                    slots.unlink()      # mapped by both processes now (or never)
            del payload
        except Exception:       # no helper here (e.g. no forkserver): the threads draw
            if executor is not None:
                executor.shutdown(wait=False, cancel_futures=True)
            return
        with self._lock:
            if not self._closed:
                self._executor = self._pool = executor
                self._slots = slots
                return
        executor.shutdown(wait=True, cancel_futures=True)

    @classmethod
    def start(cls, prepared, windows: Iterable, only: frozenset[int] | None = None,
              ahead: int = AHEAD, wait: bool = False) -> DrawAhead | None:
        """A DrawAhead for the drawn kinds among ``prepared``'s layers (None when there are none).
        The helper process starts on a thread of its own; ``wait``: return only once it is up
        (or failed to start)."""
        layers = [li for li, layer in enumerate(prepared.layers)
                  if layer.spec.kind in DRAWN_KINDS and (only is None or li in only)]
        if not layers:
            discard_warm()
            return None
        return cls(prepared, layers, windows, ahead, wait)

    def _submit_through(self, last: int) -> None:
        while self._next <= min(last, len(self._windows) - 1) and self._pool is not None:
            slots = self._slots
            slot = slots.free.pop() if slots is not None and slots.free else None
            self._futures[self._next] = self._pool.submit(_draw, self._windows[self._next], slot)
            if slot is not None:
                self._slot[self._next] = slot
            if self._first is None:
                self._first = self._next
            self._next += 1

    def walked(self, window) -> None:
        """The walk handed ``window``'s result on, and every window before it (results come in
        window order). Once the windows the threads drew themselves are all done, this process's
        copy of the drawn layers' features is dropped (the helper has its own): a window the
        threads must still draw (the helper failed) reads them again."""
        if self.released:
            return
        with self._lock:
            i = self._index.get(window)
            if (i is None or self._pool is None or self._first is None
                    or i < max(self._first - 1, self._last_here)):
                return
            self.released = True
        for li in sorted(self.layers):
            release = getattr(self._prepared.layers[li], "release", None)
            if release is not None:
                release()
        trim()

    def paints(self, window, li: int) -> list[Paint] | None:
        """Layer ``li``'s paints of ``window`` drawn by the helper process (waiting for them), or
        None when the caller should draw them itself (not a drawn layer, a window the helper
        was not given -- it was not up yet -- or the helper failed)."""
        if li not in self.layers:
            return None
        with self._lock:
            i = self._index.get(window)
            if i is None or self._pool is None:
                if i is not None:
                    self._last_here = max(self._last_here, i)
                return None
            # windows before this one that were never given to the helper are drawn by the
            # threads (the helper came up after the walk had passed them)
            self._next = max(self._next, i) if i not in self._futures else self._next
            try:
                self._submit_through(i + self._ahead)
            except Exception:   # the helper is gone: the threads draw from now on
                self._pool = None
            future = self._futures.get(i)
            if future is None:
                self._last_here = max(self._last_here, i)
        if future is None:
            return None
        try:
            drawn = dict(future.result())
            slot, slots = self._slot.get(i), self._slots
            paints = []
            for part, alpha, color in drawn[li]:
                if isinstance(alpha, tuple):            # in the window's shared slot
                    if slot is None or slots is None:   # (closed meanwhile)
                        raise RuntimeError("the shared slots are gone")
                    alpha = slots.coverage(slot, *alpha)
                paints.append(_paint(part, alpha, color))     # converted: a copy of its own
        except Exception:       # the helper failed: this thread draws (and raises what it raises)
            with self._lock:
                self._last_here = max(self._last_here, i)
            return None
        finally:
            with self._lock:
                self._used[i] = self._used.get(i, 0) + 1
                if self._used[i] >= len(self.layers):
                    self._futures.pop(i, None)
                    self._used.pop(i, None)
                    slot = self._slot.pop(i, None)
                    if slot is not None and self._slots is not None:
                        self._slots.free.append(slot)
        with self._lock:
            self.served += 1
            if slot is not None:
                self.shared += 1
        return paints

    def close(self) -> None:
        """Stop the helper process (windows not drawn yet are dropped); idempotent."""
        with self._lock:
            self._closed = True
            self._pool = None
            executor, self._executor = self._executor, None
            futures = list(self._futures.values())
            self._futures.clear()
        for f in futures:
            f.cancel()
        if executor is not None:
            executor.shutdown(wait=True, cancel_futures=True)
        # (the map itself goes with the object: a thread may still be converting a window)
        with self._lock:
            self._slots = None
            self._slot.clear()
