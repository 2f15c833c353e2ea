"""A draft check's lines, areas and points prepared and drawn in a forked process.

A draft (:mod:`compose.check.draft`) is one window of at most 384 px a side. Its mark layers'
work -- reading the features (SQLite, WKB parsing), simplifying them, cutting them to the canvas
and drawing them with Agg -- is mostly Python or holds Python's lock, so on threads it only
takes turns with the check's own imports and preparing instead of running beside them. Here it
runs in a process forked as soon as the style is loaded: by ``compose check --draft`` before
the checker's, the engine's and the raster layers' modules are imported (:func:`start_early`),
else by the check itself (:meth:`MarksAhead.start`), before the rasters' early reads
(:mod:`compose.layers.early`) start. The process builds each layer as the check would (the same
early read, :func:`read_ahead`, the same class and draft context) and sends back, in turn: the
layers' margins (the check prepares its walk with them), copies of the layers for drawing (a
lines layer's parts in pixel space, through a memory file both processes share) and its paints
of all but the first tile (:func:`_bands`), which the check's process draws meanwhile when it
gets to it first -- when it is still busy with its rasters the process draws it too. The
check's layer for it (:meth:`MarksAhead.make_layer`) hands the tiles put together out for the
window that is the whole canvas: the same coverage, byte for byte, because a vector layer draws
a window made of whole tiles tile by tile whatever its margin, with nothing in the margin
(:class:`compose.layers.vector.LinesLayer`), and the walk paints it in its turn, after the
rasters. Anything else -- another window, another transform, a process that failed or could not
be forked -- builds the layer in the check's own process, as without this module (so a bad
source is reported by the same code, with the same message).
"""
from __future__ import annotations

import dataclasses
import functools
import os
import select
import threading
import time
from collections.abc import Callable
from typing import Any

import numpy as np

__all__ = ["MARK_KINDS", "MarksAhead", "read_ahead", "start_early", "start_command", "drop_early"]

#: Layer kinds drawn ahead (labels stay in the check's process: they are placed among each
#: other and the page's furniture while preparing).
MARK_KINDS = ("lines", "areas", "points")


#: Bytes of the mark layers' source files (each file once) from which they are drawn ahead:
#: a process costs its fork and the imports only it makes (shapely, the drawing modules: about
#: 0.1 CPU-s), and the demo's 0.5 MB GeoPackage is read and drawn in less; the 8192 benchmark's
#: 21 MB of lines take about 0.3 CPU-s.
MIN_BYTES = 4 << 20


#: Seconds the check waits for the process's first byte before it ends the process and builds
#: the layers itself (a draft's marks take well under a second for the 8192 benchmark's 1 M
#: vertices; this only guards against a process that never answers).
PATIENCE = 300.0


def _source_bytes(specs) -> int:
    """Bytes of the distinct local files ``specs`` read (0 for anything not a local file)."""
    import os

    total = 0
    for path in {str(spec.source) for spec in specs}:
        try:
            total += os.stat(path).st_size
        except (OSError, ValueError):
            pass
    return total


def read_ahead(spec, draft=None) -> None:
    """Start reading the features of vector layer ``spec`` on a thread of its own
    (:func:`compose.sources.vector.read_early`); a ``draft`` canvas's lines, areas and points
    simplified there too, as its layers ask."""
    from compose.sources.vector import DRAFT_TOLERANCE, read_early

    o = spec.options
    simplify = draft.pixel * DRAFT_TOLERANCE if draft is not None and spec.kind != "labels" \
        else None
    read_early(spec.source, layer=spec.name, table=getattr(o, "table", None),
               where=getattr(o, "where", None), simplify=simplify,
               crs=None if draft is None else draft.crs)


def _draw_all(style, canvas, specs, send: Callable[[Any], None],
              hand_over: Callable[[bytes], Any], claim: Callable[..., bool],
              free: bool = False) -> list:
    """In the forked process: each layer of ``specs`` built on the draft ``canvas`` as the check
    builds it. ``send`` hands over their margins (the check prepares and walks its rasters with
    them meanwhile), then copies of them for drawing (:meth:`LinesLayer.for_drawing
    <compose.layers.vector.LinesLayer.for_drawing>`: a lines layer's parts in pixel space),
    packed, through ``hand_over`` (shared memory: the bytes wait there, however busy the check
    is), so the check's process draws the first tile (:func:`_bands`) while this one draws the
    rest; returns (window, each layer's paints of it) of the rest. Agg holds Python's lock: two
    processes draw at once. The first tile goes to whichever process is free for it first
    (``claim``): when the check's process is still busy with its rasters, this one draws it too
    and returns it first. The layers are handed over only once the check's process has claimed
    it (``claim(False)``: whether it is taken, asked before each window of the rest and at the
    end): when this one draws it, they never are (on the 8192 benchmark 1.8 MB pickled and
    written, 3-4 ms). ``free``: the layers need no
    GDAL (:func:`_asks_gdal_nothing`), so rasterio is not imported for them."""
    import gc

    from compose.layers.base import Context
    from compose.packing import pack
    from compose.style.kinds import layer_class
    from compose.timeline import span

    gc.disable()            # a short-lived process: its memory goes when it ends
    if free:
        from compose.sources.crs import imports_here_only

        imports_here_only()
    with span("marks ahead imports"):
        for spec in specs:  # imported first: an import beside the reads only takes turns
            layer_class(spec.kind)
    from compose.layers import draw

    # each tile size is drawn once here: a renderer kept for another tile of its size
    # (compose.layers.draw._renderer) would only keep its cell blocks from the next renderer,
    # which then takes fresh pages (8192 benchmark: 6,800 instead of 9,200 page faults in all
    # with compose.sources.vector._thin_rows's copy, at about 3 us each on this kind of VM; the
    # same bytes: a new renderer draws as a cleared one)
    draw.KEPT_PIXELS = 0
    for spec in specs:
        read_ahead(spec, canvas)
    ctx = Context(canvas=canvas, ramps={}, style=style, draft=True)
    layers: list = []
    try:
        for spec in specs:
            with span(f"marks ahead {spec.kind} {spec.name}"):
                layers.append(layer_class(spec.kind)(spec, ctx))
        send(("margins", [layer.margin for layer in layers]))
        _, rest = _bands(canvas)
        handed = False

        def hand_over_layers() -> None:
            nonlocal handed
            with span("marks ahead hand over"):     # (the style's tables pickle as dicts)
                send(("layers", hand_over(pack([layer.for_drawing() for layer in layers]))))
            handed = True

        pieces = []
        for window in rest:
            if not handed and claim(False):     # the check's process waits for them
                hand_over_layers()
            with span("marks ahead paint"):
                pieces += _paint(layers, canvas, [window])
        if claim():             # the check's process had not begun the first tile: drawn here
            mine, _ = _bands(canvas)
            with span("marks ahead paint first tile"):
                pieces = _paint(layers, canvas, mine) + pieces
        elif not handed:
            hand_over_layers()
    finally:
        for layer in layers:
            layer.close()
    return pieces


def _bands(canvas) -> tuple[list, list]:
    """Windows of ``canvas`` made of whole tiles (:data:`compose.layers.vector.TILE`), which a
    vector layer draws tile by tile as it draws the whole canvas (the same tiles, the same
    bytes): (the first tile, the rest of its tile row and the tile rows below it). A draft of
    384 px a side is 2 x 2 tiles, the first about half its pixels."""
    from compose.canvas import Window
    from compose.layers.vector import TILE

    h, w = canvas.height, canvas.width
    rest = []
    if w > TILE:
        rest.append(Window(0, TILE, min(TILE, h), w - TILE, 0, h, w))
    if h > TILE:
        rest.append(Window(TILE, 0, h - TILE, w, 0, h, w))
    return [Window(0, 0, min(TILE, h), min(TILE, w), 0, h, w)], rest


def _paint(layers, canvas, windows) -> list[tuple[Any, list]]:
    """(window, each layer's paints of it) for ``windows`` of ``canvas`` (no margin)."""
    out = []
    for window in windows:
        _, _, h, w = window.padded
        transform = canvas.window_transform(window)
        out.append((window, [layer.paint(window, transform, h, w) for layer in layers]))
    return out


def _put_together(canvas, margin: int, pieces: list) -> list:
    """One layer's paints of the whole ``canvas`` padded by ``margin`` from its paints of
    windows of whole tiles (window, paints) in the order of their tiles (row by row): each
    part's cores put in place, nothing in the margin, the parts in the order they first appear
    (as the layer's paint of the whole canvas lists them)."""
    h, w = canvas.height, canvas.width
    parts: dict[str, tuple[Any, np.ndarray]] = {}
    for window, paints in pieces:
        r, c, n, k = window.row, window.col, window.height, window.width
        for p in paints:
            slot = parts.get(p.part)
            if slot is None:
                slot = parts[p.part] = (p, np.zeros((h + 2 * margin, w + 2 * margin),
                                                    p.alpha.dtype))
            slot[1][margin + r:margin + r + n, margin + c:margin + c + k] = p.alpha[:n, :k]
    return [dataclasses.replace(p, alpha=alpha) for p, alpha in parts.values()]


def _pickled(obj) -> bytes:
    import pickle

    return pickle.dumps(obj, protocol=pickle.HIGHEST_PROTOCOL)


def _write(fd: int, message) -> None:
    """Pickle ``message`` and write it whole to ``fd``, its length first."""
    data = _pickled(message)
    view = memoryview(len(data).to_bytes(8, "little") + data)
    while view:
        view = view[os.write(fd, view):]


#: Where the bytes handed over start in the memory file (its first byte: :meth:`_Job.claim`).
_DATA = 4096


class _Job:
    """``fn(send, hand_over)`` run in a process forked from this one (which has no other thread
    running: :func:`compose.forking.can_fork`), dying with it. ``send(message)`` hands a small
    message over (a pipe); ``hand_over(data)`` puts bytes where this process reads them
    (:meth:`taken`: a memory file both share, so the process never waits for this one to read
    them) and returns what :meth:`taken` needs; what ``fn`` returns (or raises) is the last
    message (``("done", where)``, its bytes handed over: :meth:`result`). :meth:`receive`
    reads the next message; :meth:`abort` ends the process."""

    def __init__(self, fn: Callable[..., Any]) -> None:
        from compose.forking import die_with_parent

        r, w = os.pipe()
        self._memory: int | None = os.memfd_create("compose-marks", os.MFD_CLOEXEC)
        parent = os.getpid()
        pid = os.fork()
        if pid == 0:                                    # pragma: no cover - the child
            os.close(r)
            status = 0
            try:
                if die_with_parent(parent, b"compose-marks"):
                    def send(message) -> None:
                        _write(w, message)

                    end = [_DATA]           # where the next bytes handed over go

                    def hand_over(data: bytes) -> tuple[int, int]:
                        view = memoryview(data)
                        at = end[0]
                        done = 0
                        while done < len(view):
                            done += os.pwrite(self._memory, view[done:],  # type: ignore
                                              at + done)
                        end[0] = at + len(view)
                        return at, len(view)
                    try:
                        result = fn(send, hand_over, self.claim)
                        # through the memory file: the process ends now, however busy the
                        # check is (its paints are more than a pipe holds: a write to the pipe
                        # waited for the check to read them, 15-20 ms on the 8192 benchmark)
                        send(("done", hand_over(_pickled(result))))
                    except BaseException as exc:        # noqa: BLE001 - handed over
                        status = 1
                        try:
                            send(("error", repr(exc)))
                        except BaseException:           # noqa: BLE001
                            pass
            finally:
                from compose.timeline import note_process

                note_process()
                os._exit(status)
        os.close(w)
        self.pid: int | None = pid
        self._inbox: int | None = r

    def receive(self, timeout: float):
        """The next message, or None when the process sent nothing for ``timeout`` seconds,
        ended, or failed (an ``"error"`` message)."""
        import pickle

        if self._inbox is None:
            return None
        ready, _, _ = select.select([self._inbox], [], [], timeout)
        if not ready:
            return None
        try:
            size = int.from_bytes(self._read(8), "little")
            message = pickle.loads(self._read(size))
        except (EOFError, OSError):
            return None
        return None if message[0] == "error" else message

    def _read(self, n: int) -> bytes:
        from compose.forking import read_exactly

        if self._inbox is None:
            raise EOFError
        return read_exactly(self._inbox, n)

    def claim(self, take: bool = True) -> bool:
        """True for the first of the two processes to ask, in either (the first tile is its to
        draw), False for the other: a byte of the memory file both share, read and set under a
        POSIX record lock (one process at a time). ``take`` False: only whether it is taken."""
        import fcntl

        fd = self._memory
        if fd is None:
            return False
        fcntl.lockf(fd, fcntl.LOCK_EX, 1, 0)
        try:
            if os.pread(fd, 1, 0) not in (b"", b"\0"):
                return not take
            if take:
                os.pwrite(fd, b"\1", 0)
            return take
        finally:
            fcntl.lockf(fd, fcntl.LOCK_UN, 1, 0)

    def taken(self, where: tuple[int, int]) -> bytes:
        """The bytes the process handed over (``hand_over`` returned ``where``: their offset in
        the memory file and their size)."""
        from compose.forking import read_exactly

        if self._memory is None:
            raise EOFError
        at, size = where
        return read_exactly(self._memory, size, at)

    def result(self, message) -> Any:
        """What ``fn`` returned, from its ``"done"`` message."""
        import pickle

        return pickle.loads(self.taken(message[1]))

    def abort(self) -> None:
        """End the process (killed if it still runs) and reap it (a second call does nothing)."""
        for name in ("_inbox", "_memory"):
            fd = getattr(self, name)
            if fd is not None:
                os.close(fd)
                setattr(self, name, None)
        if self.pid is not None:
            from compose.forking import end_child

            end_child(self.pid, kill=True)
            self.pid = None


class MarksAhead:
    """The draft's mark layers (:data:`MARK_KINDS`) being prepared and drawn in a forked process
    (:func:`_draw_all`); :meth:`make_layer` is :func:`compose.engine.prepare`'s hook."""

    def __init__(self, job: _Job, canvas, specs, style=None) -> None:
        self._job = job
        self.canvas = canvas
        self.style = style
        self.names = {spec.name for spec in specs}
        self._order = [spec.name for spec in specs]
        self._margins: dict[str, int] | None = None
        self._here: list | None = None          # the first tile, drawn here
        self._won = False                       # the first tile claimed by this process
        self._got: dict | None = None
        self._done = False
        self._lock = threading.RLock()

    @classmethod
    def start(cls, style, canvas, specs, fork: bool = True) -> MarksAhead | None:
        """Fork the process drawing ``specs`` (enabled layers of :data:`MARK_KINDS`) on the
        draft ``canvas``, or None when there are none, ``fork`` is False or forking is not safe
        here (not Linux, or another thread runs: see :func:`compose.forking.can_fork`). A
        process the command forked already for the same style, canvas and layers
        (:func:`start_early`) is taken instead; one for others is ended."""
        specs = _worth_drawing_ahead(specs)
        early = _EARLY.pop() if _EARLY else None
        if early is not None:
            if (early.style is style and early.canvas == canvas
                    and early._order == [s.name for s in specs]):
                return early
            early.close()
        if not specs or not fork:
            return None
        from compose.forking import can_fork

        if not can_fork():
            return None
        return cls._fork(style, canvas, specs)

    @classmethod
    def _fork(cls, style, canvas, specs) -> MarksAhead:
        free = _asks_gdal_nothing(canvas, specs)
        if not free:
            # the check imports rasterio for its rasters anyway: before the fork, not in both
            # processes (the process's vector sources ask GDAL about their files and CRSs)
            import rasterio.crs  # noqa: F401
        from compose.timeline import note

        note("marks ahead forked", time.time())
        return cls(_Job(functools.partial(_draw_all, style, canvas, specs, free=free)), canvas,
                   specs, style)

    def margin(self, name: str) -> int | None:
        """Layer ``name``'s margin, waiting for the process to build the layers; None when it
        failed (the layer is then built here)."""
        with self._lock:
            if self._margins is None and not self._done:
                message = self._receive("marks ahead: margins received")
                if message is None or message[0] != "margins":
                    self._fail()
                else:
                    self._margins = dict(zip(self._order, message[1]))
        return None if self._margins is None else self._margins.get(name)

    def result(self, name: str) -> tuple[int, list] | None:
        """(margin, paints of the whole canvas) of layer ``name``, waiting for the process;
        None when it failed (the layer is then built here)."""
        self.margin(name)
        with self._lock:
            if not self._done:
                self._done = True
                try:
                    self._got = self._take() if self._margins is not None else None
                except Exception:           # built here instead, which reports any error
                    self._got = None
                if self._got is None:
                    self._fail()
        got = self._got
        return None if got is None else got.get(name)

    def _receive(self, label: str, timeout: float = PATIENCE):
        from compose.timeline import span

        with span(label):
            try:
                return self._job.receive(timeout)
            except Exception:
                return None

    def _fail(self) -> None:
        self._done = True
        self._margins = None
        self._got = None
        self._job.abort()

    def _first_tile(self, timeout: float) -> list | None:
        """This process's part: the first tile claimed and, unless the process claimed it first
        (then nothing: it sends it with the rest), drawn with the process's layers for drawing,
        which it hands over once it sees the claim (waiting at most ``timeout`` seconds for
        them), once; None when they are not there (yet, or the process failed)."""
        from compose.packing import unpack
        from compose.timeline import span

        if self._here is None:
            if not self._won:
                if not self._job.claim():       # the process draws it
                    self._here = []
                    return self._here
                self._won = True
            message = self._receive("marks ahead: layers received", timeout)
            if message is None or message[0] != "layers":
                return None
            layers = unpack(self._job.taken(message[1]))
            mine, _ = _bands(self.canvas)
            with span("marks ahead: first tile drawn here"):
                self._here = _paint(layers, self.canvas, mine)
        return self._here

    def _take(self) -> dict | None:
        """The process's layers for drawing: this process draws the first tile with them while
        the process draws the rest (unless the process, done with the rest while this one was
        still busy with its rasters, claimed it), then the two put together, by layer name."""
        here = self._first_tile(PATIENCE)
        if here is None:
            return None
        message = self._receive("marks ahead: the rest received")
        if message is None or message[0] != "done":
            return None
        assert self._margins is not None
        pieces = here + self._job.result(message)
        return {name: (self._margins[name],
                       _put_together(self.canvas, self._margins[name],
                                     [(w, p[i]) for w, p in pieces]))
                for i, name in enumerate(self._order)}

    def make_layer(self, spec, ctx, build: Callable[[], Any]) -> Any:
        """The layer for ``spec``: drawn ahead when this process draws it on ``ctx``'s canvas,
        else ``build()``."""
        if spec.name not in self.names or ctx.canvas != self.canvas or not ctx.draft:
            return build()
        # (the layer's module is loaded here only if this process draws the first tile, when
        # it unpacks the process's layers: the process mostly draws it itself)
        return _Ahead(self, spec, functools.partial(self._build_here, spec, build))

    def _build_here(self, spec, build: Callable[[], Any]) -> Any:
        read_ahead(spec, self.canvas)       # as the check reads it without a process ahead
        return build()

    def close(self) -> None:
        """End the process (when it has not ended)."""
        self._job.abort()


#: A marks process the command forked before the check began (:func:`start_early`), until
#: :meth:`MarksAhead.start` takes it.
_EARLY: list[MarksAhead] = []


def _asks_gdal_nothing(canvas, specs) -> bool:
    """Whether the marks process can build ``specs`` without rasterio (its import is about
    0.03 s, which the process would otherwise wait for or the command before the fork): every
    source a plain GeoPackage table (read with sqlite3, see :mod:`compose.sources.gpkg`) whose
    CRS is the canvas's own, a string pyproj accepted for the canvas here
    (:func:`compose.sources.crs.same_crs` and ``plainly_usable`` answer it without GDAL)."""
    from pathlib import Path

    from compose.sources.gpkg import only_table, open_table
    from compose.user_cache import accepted

    if not accepted(canvas.crs):
        return False
    for spec in specs:
        path = Path(spec.source)
        name = getattr(spec.options, "table", None)
        name = name if name is not None else only_table(path)
        table = open_table(path, name) if name is not None else None
        if table is None or table.crs != canvas.crs:
            return False
    return True


def _worth_drawing_ahead(specs) -> list:
    """The layers of ``specs`` a process draws ahead: the enabled :data:`MARK_KINDS`, when their
    files hold :data:`MIN_BYTES` or more."""
    specs = [s for s in specs if s.enabled and s.kind in MARK_KINDS]
    return specs if specs and _source_bytes(specs) >= MIN_BYTES else []


def start_early(path, cache, overrides=()) -> Any:
    """``compose check --draft``: the style at ``path`` loaded (its errors raised as the check
    raises them) and, when its marks are drawn ahead (:meth:`MarksAhead.start`), their process
    forked now, before the checker's modules are imported; the check (:func:`compose.api.check`
    given the returned style) takes it. ``cache``: the check's cache option (False: none);
    layers the cache holds are not drawn ahead. ``overrides``: ``--set`` key paths
    (:func:`compose.style.overrides.parse_override`). Call :func:`drop_early` when the check is
    over."""
    if _STARTED:
        key, style = _STARTED.pop()
        if key == _key(path, cache, overrides):     # forked by start_command already
            return style
        drop_early()
    from compose.style import load_style

    style = load_style(path, overrides=overrides or None)
    from compose.forking import can_fork

    if not can_fork():
        return style
    full = style.canvas()
    canvas = full.draft()
    if canvas is full:                      # no smaller draft: checked as the full map
        return style
    specs = _worth_drawing_ahead(style.layers)
    if specs and cache is not False:
        from compose.check_cache import CheckCache, cache_dir

        root = cache_dir(None if cache is None or cache is True else cache)
        if root is not None:
            held = CheckCache(root, style, canvas, None).held(specs)
            specs = _worth_drawing_ahead([s for s in specs if s.name not in held])
    if specs:
        _EARLY.append(MarksAhead._fork(style, canvas, specs))
    return style


def drop_early() -> None:
    """End a process :func:`start_early` forked that no check took."""
    _STARTED.clear()
    while _EARLY:
        _EARLY.pop().close()


#: (:func:`_key`, style) of the draft command's style loaded by :func:`start_command`, until
#: :func:`start_early` takes it.
_STARTED: list[tuple[tuple, Any]] = []

#: ``compose check`` flags :func:`start_command` knows (none takes a value).
_PLAIN_FLAGS = frozenset({"--draft", "--no-cache", "--json", "--strict"})


def _key(path, cache, overrides) -> tuple:
    from pathlib import Path

    return Path(path), cache, tuple(overrides or ())


def start_command(args: list[str]) -> None:
    """``compose check --draft`` (:func:`compose.cli.main.main`, before click and the command's
    module are imported: about 15 ms that the marks process then no longer waits for, its
    parent importing them beside it): the marks process forked as :func:`start_early` forks
    it, with the command's draft settings (no cyclic collector, :func:`compose.heap.
    reuse_freed_memory`) and default limits, when ``args`` (after ``check``) are only a style
    path and the flags of :data:`_PLAIN_FLAGS`, ``--draft`` among them; the command's own
    :func:`start_early` then takes the style loaded here. Anything else -- other options, a
    style that fails to load or warns -- does nothing here, and the command goes on as
    without this (its errors and warnings reported by it)."""
    paths = [a for a in args if not a.startswith("-")]
    flags = [a for a in args if a.startswith("-")]
    if len(paths) != 1 or "--draft" not in flags or any(f not in _PLAIN_FLAGS for f in flags):
        return
    import gc
    import warnings

    from compose.heap import reuse_freed_memory
    from compose.limits import DEFAULT_MAX_PIXELS, use_limits

    gc.disable()            # as the command does for a draft (compose.cli.check)
    reuse_freed_memory()
    cache = False if "--no-cache" in flags else None
    try:
        with warnings.catch_warnings(record=True) as caught, \
                use_limits(max_pixels=DEFAULT_MAX_PIXELS, allow_remote=False):
            warnings.simplefilter("always")
            style = start_early(paths[0], cache)
    except Exception:           # noqa: BLE001 - the command reports it
        drop_early()
        return
    if caught:
        drop_early()
        return
    _STARTED.append((_key(paths[0], cache, ()), style))


class _Ahead:
    """A mark layer whose paints of the whole draft canvas come from :class:`MarksAhead`; any
    other window is painted by the layer itself, built here on first use."""

    #: painted by the walk in its turn, after the rasters (compose.api._Drawn leaves it alone)
    drawn_ahead = True

    def __init__(self, ahead: MarksAhead, spec, build: Callable[[], Any]) -> None:
        self.spec = spec
        self._ahead = ahead
        self._build = build
        self._layer: Any = None
        self._lock = threading.Lock()

    def _here(self) -> Any:
        with self._lock:
            if self._layer is None:
                self._layer = self._build()
            return self._layer

    @property
    def margin(self) -> int:
        got = self._ahead.margin(self.spec.name)
        return got if got is not None else self._here().margin

    def paint(self, window, transform, height: int, width: int) -> list:
        got = self._ahead.result(self.spec.name)
        canvas = self._ahead.canvas
        h, w = canvas.height, canvas.width
        if (got is None or (window.row, window.col, window.height, window.width) != (0, 0, h, w)
                or (window.canvas_height, window.canvas_width) != (h, w)
                or transform != canvas.window_transform(window)
                or (height, width) != (h + 2 * window.margin, w + 2 * window.margin)):
            return self._here().paint(window, transform, height, width)
        m, paints = got
        out = []
        for p in paints:        # the same core; the margins are empty in both
            alpha = np.zeros((height, width), p.alpha.dtype)
            alpha[window.margin:window.margin + h, window.margin:window.margin + w] = \
                p.alpha[m:m + h, m:m + w]
            out.append(dataclasses.replace(p, alpha=alpha))
        return out

    def close(self) -> None:
        if self._layer is not None:
            self._layer.close()
