"""A draft check's lines, areas and points prepared and drawn in a forked process.

A draft (:mod:`compose.check.draft`) is one window of at most 384 px a side. Its mark layers'
work -- reading the features (SQLite, WKB parsing), simplifying them, cutting them to the canvas
and drawing them with Agg -- is mostly Python or holds Python's lock, so on threads it only
takes turns with the check's own imports and preparing instead of running beside them. Here it
runs in a process forked once the style is loaded (:class:`MarksAhead`), before the engine, the
raster libraries and the rasters' early reads (:mod:`compose.layers.early`) start: the process
builds each layer as the check would (the same early read, :func:`read_ahead`, the same class and
draft context), paints the whole draft canvas and sends the paints back. The check's layer for
it (:meth:`MarksAhead.make_layer`) hands them out for the window that is the whole canvas: the
same coverage, byte for byte, because a vector layer draws a window made of whole tiles tile by
tile whatever its margin, with nothing in the margin (:class:`compose.layers.vector.LinesLayer`).
Anything else -- another window, another transform, a process that failed or could not be forked
-- builds the layer in the check's own process, as without this module (so a bad source is
reported by the same code, with the same message).
"""
from __future__ import annotations

import dataclasses
import functools
import select
import threading
from collections.abc import Callable
from typing import Any

import numpy as np

__all__ = ["MARK_KINDS", "MarksAhead", "read_ahead"]

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


def _draw_all(style, canvas, specs) -> dict[str, tuple[int, list]]:
    """In the forked process: each layer of ``specs`` built on the draft ``canvas`` as the check
    builds it, and its paints of the whole canvas (padded by its own margin): name -> (margin,
    paints). All but the first tile (:func:`_bands`) are drawn by a process forked from this one
    once the layers are built, while this one draws the first: the check's own process only
    waits by then, and Agg holds Python's lock."""
    import gc

    from compose.layers.base import Context
    from compose.style.kinds import layer_class
    from compose.timeline import span

    gc.disable()            # a short-lived process: its memory goes when it ends
    for spec in specs:      # imported first: an import beside the reads only takes turns
        layer_class(spec.kind)
    for spec in specs:
        read_ahead(spec, canvas)
    ctx = Context(canvas=canvas, ramps={}, style=style, draft=True)
    layers: list = []
    try:
        for spec in specs:
            with span(f"marks ahead {spec.kind} {spec.name}"):
                layers.append(layer_class(spec.kind)(spec, ctx))
        mine, rest = _bands(canvas)
        other = _fork(functools.partial(_paint, layers, canvas, rest)) if rest else None
        with span("marks ahead paint"):
            pieces = _paint(layers, canvas, mine)
            got = None
            if other is not None:
                try:
                    got = other.result()
                except Exception:           # drawn here instead
                    got = None
            pieces += got if got is not None else _paint(layers, canvas, rest)
    finally:
        for layer in layers:
            layer.close()
    return {spec.name: (layer.margin,
                        _put_together(canvas, layer.margin, [(w, p[i]) for w, p in pieces]))
            for i, (spec, layer) in enumerate(zip(specs, layers))}


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


def _fork(fn: Callable[[], Any]):
    """``fn`` run in a process forked from this one (:class:`compose.page.process.Forked`), or
    None when forking is not safe (the early reads' threads are joined first: each has handed
    its features over by now)."""
    from compose.page.process import Forked, can_fork

    for thread in threading.enumerate():
        if thread.name == "early-vectors":
            thread.join(1.0)
    return Forked(fn) if can_fork() else None


class MarksAhead:
    """The draft's mark layers (:data:`MARK_KINDS`) being prepared and drawn in a forked process
    (:func:`_draw_all`); :meth:`make_layer` is :func:`compose.engine.prepare`'s hook."""

    def __init__(self, job, canvas, specs) -> None:
        self._job = job
        self.canvas = canvas
        self.names = {spec.name for spec in specs}
        self._got: dict | None = None
        self._done = False
        self._lock = threading.Lock()

    @classmethod
    def start(cls, style, canvas, specs) -> MarksAhead | None:
        """Fork the process drawing ``specs`` (enabled layers of :data:`MARK_KINDS`) on the
        draft ``canvas``, or None when there are none or forking is not safe here (not Linux,
        or another thread runs: see :func:`compose.page.process.can_fork`)."""
        specs = [s for s in specs if s.kind in MARK_KINDS]
        if not specs or _source_bytes(specs) < MIN_BYTES:
            return None
        from compose.page.process import Forked, can_fork

        if not can_fork():
            return None
        # the check imports rasterio for its rasters anyway: before the fork, not in both
        # processes (the process's vector sources ask GDAL about their files and CRSs)
        import rasterio.crs  # noqa: F401

        return cls(Forked(functools.partial(_draw_all, style, canvas, specs)), canvas, specs)

    def result(self, name: str) -> tuple[int, list] | None:
        """(margin, paints of the whole canvas) of layer ``name``, waiting for the process;
        None when it failed (the layer is then built here)."""
        with self._lock:
            if not self._done:
                self._done = True
                try:
                    ready, _, _ = select.select([self._job._inbox], [], [], PATIENCE)
                    self._got = self._job.result() if ready else None
                except Exception:           # built here instead, which reports any error
                    self._got = None
                if self._got is None:
                    self._job.abort()
        got = self._got
        return None if got is None else got.get(name)

    def make_layer(self, spec, ctx, build: Callable[[], Any]) -> Any:
        """The layer for ``spec``: drawn ahead when this process draws it on ``ctx``'s canvas,
        else ``build()``."""
        if spec.name not in self.names or ctx.canvas != self.canvas or not ctx.draft:
            return build()
        return _Ahead(self, spec, functools.partial(self._build_here, spec, build))

    def _build_here(self, spec, build: Callable[[], Any]) -> Any:
        read_ahead(spec, self.canvas)       # as the check reads it without a process ahead
        return build()

    def close(self) -> None:
        """End the process (when it has not ended)."""
        self._job.abort()


class _Ahead:
    """A mark layer whose paints of the whole draft canvas come from :class:`MarksAhead`; any
    other window is painted by the layer itself, built here on first use."""

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
        got = self._ahead.result(self.spec.name)
        return got[0] if got is not None else self._here().margin

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
