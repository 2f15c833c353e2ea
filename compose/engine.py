"""The render pipeline, in stages: prepare (once) -> for each window a pure task (read, colour,
blend, measure) -> hand finished rows to sinks, add statistics and previews up.

:func:`prepare` decides everything global once (canvas, ramps, quantile breaks from the data,
label placement) and opens the layers' sources. :func:`render_window` is then a function of the
prepared render and one window only: it returns a :class:`WindowResult` (the window's finished
core rows as uint8, the window's own :class:`compose.check.stats.Statistics`, its preview tiles)
and changes nothing shared, so windows can be rendered in any order, by threads or by other
processes (``mapper``), and merged in order: statistics by addition
(:meth:`Statistics.merge`), rows band by band into the sinks, preview tiles by addition
(:class:`compose.previews.LayerPreviews`). Measuring is :mod:`compose.measure`, a sink the task
calls while it composites. Memory scales with the window, not the canvas.
"""
from __future__ import annotations

import contextlib
import time
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass, field
from types import SimpleNamespace
from typing import Any, Protocol

import numpy as np

from compose.canvas import Canvas, Window
from compose.check.stats import Statistics
from compose.composite import composite_over, composite_palette
from compose.kernels import get as compiled
from compose.layers.base import Context
from compose.measure import WindowMeasure, new_statistics
from compose.previews import LayerPreviews, PreviewTiles, block_sums, paint_sums
from compose.sources.blocks import planned
from compose.sources.guard import as_source_error
from compose.style.kinds import layer_class
from compose.timeline import span

__all__ = ["Sink", "Prepared", "WindowResult", "WindowTask", "prepare", "run", "render_window", "ArraySink",
           "preview_canvas", "render_array", "WINDOW"]

WINDOW = 512  # core pixels per window side (1/3 less peak memory than 1024, as fast; bench)


class Sink(Protocol):
    """Receives finished output rows: ``rows(row0, rgb8)`` with rgb8 (n, width, 3) uint8.

    A sink with an integer attribute ``below`` also gets ``below_rows(row0, rgb8)``: the same
    rows composited from the layers under index ``below`` only (a page's raster part). A sink
    whose attribute ``alpha`` is true gets ``rows(row0, rgb8, alpha8)`` with alpha8 (n, width)
    uint8: 255 where some raster layer has data, 0 elsewhere (:func:`render_window`'s
    ``footprint``).
    """

    def rows(self, row0: int, rgb8: np.ndarray) -> None: ...


@dataclass
class Prepared:
    """The prepared render: canvas, built ramps and open layer objects (close when done).

    Everything a window task needs and nothing it changes: global decisions (quantile breaks,
    label placement) are made while the layers are prepared. ``template``: empty statistics of
    the render, which every window's own statistics copy.
    """

    style: Any
    canvas: Canvas
    ramps: dict
    layers: list
    stack: contextlib.ExitStack
    template: Statistics
    seconds: dict[str, float] = field(default_factory=dict)
    draft: bool = False
    #: canvas pixel boxes labels kept clear of (page furniture), as decided in prepare
    blocked: tuple = ()

    @property
    def margin(self) -> int:
        """Pixels of overlap every window needs (the largest of the layers')."""
        return max([getattr(layer, "margin", 0) for layer in self.layers] + [0])

    @property
    def unplaced_labels(self) -> dict[str, list[str]]:
        return {layer.spec.name: layer.unplaced for layer in self.layers if hasattr(layer, "unplaced")
                and layer.unplaced}

    def windows(self, size: int = WINDOW) -> list[Window]:
        """The windows of the canvas, row-major (north to south, west to east)."""
        return list(self.canvas.windows(size, margin=self.margin))

    def close(self) -> None:
        self.stack.close()


#: The former name of :class:`Prepared`.
RenderRun = Prepared


def _scale_to(canvas: Canvas, full: Canvas) -> tuple[float, float] | None:
    """(x, y) factors from ``full``'s pixels to ``canvas``'s when ``canvas`` is ``full`` or a
    coarser grid of it with the same north-west corner and CRS (the draft check's); else None."""
    if canvas == full:
        return 1.0, 1.0
    a, b = canvas.transform, full.transform
    if canvas.crs != full.crs or (a.c, a.f) != (b.c, b.f) or a.b or a.d:
        return None
    return b.a / a.a, b.e / a.e


def prepare(style, ramps: dict | None = None, canvas: Canvas | None = None,
            keep_clear: Callable[..., Iterable[tuple[float, float, float, float]]] | None = None,
            draft: bool = False, blocked: tuple = (),
            make_layer: Callable[..., Any] | None = None) -> Prepared:
    """Resolve the canvas, build ramps and open every enabled layer's sources.

    ``canvas`` overrides the style's own (e.g. a small preview of the same extent, see
    :func:`compose.canvas.Canvas.coarser`). ``keep_clear(style, ramps, layers)``: canvas pixel
    boxes labels keep clear of (e.g. page furniture inside the map frame,
    :func:`compose.page.write.blocked_for`); called once, with the layers prepared so far and
    stand-ins holding just the ``spec`` of the rest, before the labels layers are prepared.
    ``draft``: a reduced check's render (rasters read by GDAL's decimated reads, see
    :class:`compose.sources.raster.RasterSource`). ``blocked``: boxes already decided by another
    prepare of the same render (a worker process or cluster worker re-preparing it), used
    instead of calling ``keep_clear``. ``make_layer(spec, context, build)``: makes each layer
    instead of ``build()`` (the layer kind's class; e.g. the check's cache of prepared inputs,
    :class:`compose.check_cache.CheckCache`, which calls ``build`` on a miss).
    """
    from compose.ramps import build_ramps

    t0 = time.perf_counter()
    canvas = canvas if canvas is not None else style.canvas()
    if ramps is None:   # only the ramps the enabled layers draw (and their twin groups)
        used = {getattr(spec.options, "ramp", None) for spec in style.layers if spec.enabled}
        with span("prepare ramps"):
            ramps = build_ramps(style.ramps, only={u for u in used if isinstance(u, str)})
    ctx = Context(canvas=canvas, ramps=ramps, style=style, draft=draft, blocked=tuple(blocked))
    stack = contextlib.ExitStack()
    specs = [spec for spec in style.layers if spec.enabled]
    layers: list = [None] * len(specs)
    # labels go last: they keep clear of the page furniture inside the map frame, whose size
    # (the legend's) depends on the other layers
    order = sorted(range(len(specs)), key=lambda i: specs[i].kind == "labels")

    def build(spec) -> Any:
        scale = _scale_to(canvas, style.canvas()) if spec.kind == "labels" else None
        if keep_clear is not None and not ctx.blocked and scale is not None:
            # stand-ins (just the spec) for the layers not prepared yet; boxes of the full
            # canvas, scaled to a coarser one of the same extent (the draft check)
            sx, sy = scale
            ctx.blocked = tuple((c0 * sx, r0 * sy, c1 * sx, r1 * sy)
                                for c0, r0, c1, r1 in keep_clear(style, ramps, [
                                    la if la is not None else SimpleNamespace(spec=sp)
                                    for la, sp in zip(layers, specs)]))
        return layer_class(spec.kind)(spec, ctx)

    try:
        for i in order:
            spec = specs[i]
            with span(f"prepare {spec.kind} {spec.name}"):
                layer = (build(spec) if make_layer is None
                         else make_layer(spec, ctx, lambda spec=spec: build(spec)))
            stack.callback(layer.close)
            layers[i] = layer
    except BaseException:
        stack.close()
        raise
    template = new_statistics(layers, canvas.width, canvas.height, tuple(style.map.background))
    prepared = Prepared(style=style, canvas=canvas, ramps=ramps, layers=layers, stack=stack,
                        template=template, draft=draft, blocked=ctx.blocked)
    prepared.seconds["prepare"] = time.perf_counter() - t0
    return prepared


@dataclass(frozen=True, slots=True)
class WindowResult:
    """What one window task produced.

    window: the :class:`Window`; rgb8: its core, (height, width, 3) uint8; statistics: the
    window's own statistics (None when not measured), to be merged by addition; previews: its
    :class:`compose.previews.PreviewTiles` (None when not asked for); below: the core composited
    from the layers under the ``below`` index only (None when not asked for); alpha8: the
    core's data footprint, (height, width) uint8 255 / 0 (None when not asked for).
    """

    window: Window
    rgb8: np.ndarray
    statistics: Statistics | None = None
    previews: PreviewTiles | None = None
    below: np.ndarray | None = None
    alpha8: np.ndarray | None = None


def _to_rgb8(core: np.ndarray) -> np.ndarray:
    """Float planes (3, h, w) in [0, 1] (a view; may be clipped and scaled in place) -> (h, w, 3)
    uint8."""
    return _to_8bit(core)[0]


def _to_8bit(core: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """:func:`_to_rgb8`, and the same pixels as planes (3, h, w) uint8 (``core`` float32: in one
    pass by the compiled kernel when there is one, :mod:`compose.kernels`; the same bytes)."""
    kernel = compiled()
    if kernel is not None and core.dtype == np.float32 and core.ndim == 3 and core.shape[0] == 3:
        rgb8 = np.empty(core.shape[1:] + (3,), dtype=np.uint8)
        planes8 = np.empty(core.shape, dtype=np.uint8)
        kernel.to8(core, rgb8, planes8)
        return rgb8, planes8
    np.clip(core, 0, 1, out=core)
    core *= np.float32(255)
    np.rint(core, out=core)
    planes8 = core.astype(np.uint8)
    rgb8 = np.empty(core.shape[1:] + (3,), dtype=np.uint8)
    for c in range(3):
        rgb8[..., c] = planes8[c]
    return rgb8, planes8


def render_window(prepared: Prepared, window: Window, *, measure: bool = True,
                  preview_factor: int | None = None,
                  only: frozenset[int] | None = None, below: int | None = None,
                  footprint: bool = False, drawn: Any = None) -> WindowResult:
    """Render one window: a pure function of the prepared render and the window.

    ``measure``: also return the window's statistics; ``preview_factor``: also return preview
    tiles on the canvas's grid of blocks of that many pixels a side; ``only``: indices of the
    layers to draw (default all); ``below``: also return the core composited from the layers
    under this index only (a page's raster part, :mod:`compose.page`); ``footprint``: also
    return the core's data footprint as alpha (255 where a raster layer's paint covers the pixel
    with a value that is not its no-data entry, 0 elsewhere; 255 everywhere when no layer drawn
    is a raster). ``drawn``: layers' paints drawn elsewhere (``drawn.paints(window, li)`` ->
    the paints, or None to paint here; :class:`compose.drawer.DrawAhead`).
    """
    canvas = prepared.canvas
    _, _, h, w = window.padded
    transform = canvas.window_transform(window)
    inner = window.inner
    bg = np.asarray(prepared.style.map.background, dtype=np.float32).reshape(3, 1, 1)
    out = np.empty((3, h, w), dtype=np.float32)
    out[...] = bg
    meter = WindowMeasure(prepared.template, window) if measure else None
    k = preview_factor
    layer_tiles: list = []      # per drawn layer: its paints' sums on the preview grid
    stack_tiles: list = []      # per drawn layer: the stack's sums after a raster layer, or None
    core_idx = (slice(None),) + inner
    base = None
    covered = None          # the data footprint (core), when asked for
    for li, layer in enumerate(prepared.layers):
        if li == below:
            base = _to_rgb8(np.array(out[core_idx]))
        if only is not None and li not in only:
            continue
        spec = layer.spec
        try:
            paints = drawn.paints(window, li) if drawn is not None else None
            if paints is None:
                paints = layer.paint(window, transform, h, w)
        except Exception as exc:        # a source that changed under us: one line, exit 2
            error = as_source_error(exc, spec)
            if error is exc:
                raise
            raise error from exc
        for_previews: list = []     # (paint, alpha, planes) of this layer, for the previews
        if paints:
            if meter is not None:
                meter.begin_layer(li, layer, len(paints), out)
            for pi, paint in enumerate(paints):
                if footprint and paint.palette is not None:
                    has = paint.alpha[inner] > 0
                    if paint.palette.nodata >= 0:
                        has &= paint.index[inner] != paint.palette.nodata
                    covered = has if covered is None else (covered | has)
                alpha = paint.alpha if spec.opacity >= 1 else paint.alpha * np.float32(spec.opacity)
                # alpha 1 everywhere (rasters without no-data): nothing to weigh by it. Known
                # to the layer, or looked for (not past a first pixel below 1: most coverage)
                opaque = alpha.size > 0 and (
                    (paint.opaque and spec.opacity >= 1)
                    or (bool(alpha.flat[0] >= 1.0) and bool(alpha.min() >= 1.0)))
                if paint.palette is not None:       # colours looked up strip by strip
                    # a raster's entries are counted while they are looked up (a palette's
                    # measure never reads the composite, so it may come after): its weights
                    # where the core is opaque, a theme's range of entries for the grey order
                    counts = (np.zeros(paint.palette.rgb8.shape[0], np.intp)
                              if meter is not None else None)
                    composite_palette(out, paint.palette.planes, paint.index, alpha, spec.blend,
                                      opaque=opaque, counts=counts, region=inner)
                    if meter is not None:
                        meter.paint(li, layer, pi, paint, alpha, out, opaque=opaque,
                                    counts=counts)
                    if k:       # its colours looked up again where the previews sum them
                        for_previews.append((paint, alpha, None))
                else:
                    planes = paint.planes()
                    # an overlay's flat colour is measured as it is composited (one pass over
                    # the rows beneath) where the compiled kernels can; else measured first
                    if meter is None or not meter.paint_over(li, layer, pi, paint, alpha, out,
                                                             planes, spec.blend, opaque):
                        if meter is not None:
                            meter.paint(li, layer, pi, paint, alpha, out, opaque=opaque)
                        composite_over(out, planes, alpha, spec.blend, out=out, opaque=opaque)
                    if k:
                        for_previews.append((paint, alpha, planes))
            if meter is not None:
                meter.end_layer(li, layer)
        if k:
            layer_tiles.append(paint_sums(for_previews, inner, window.row, window.col, k,
                                          spec.blend))
            # after a raster the stack is summed as composited (its colours vary with the
            # data below it); overlays are composited onto it on the preview grid
            stack_tiles.append(block_sums(out[core_idx], window.row, window.col, k)
                               if getattr(layer, "palette", None) is not None else None)
    if below is not None and base is None:
        base = _to_rgb8(np.array(out[core_idx]))
    # the finished composite on the preview grid (blends of values in [0, 1] stay in [0, 1])
    tiles = (PreviewTiles(tuple(layer_tiles), tuple(stack_tiles),
                          block_sums(out[core_idx], window.row, window.col, k)) if k else None)
    rgb8, planes8 = _to_8bit(out[core_idx])
    stats = meter.finish(rgb8, planes8) if meter is not None else None
    alpha8 = None
    if footprint:
        rasters = any(getattr(layer, "palette", None) is not None for li, layer in
                      enumerate(prepared.layers) if only is None or li in only)
        alpha8 = np.full((window.height, window.width), 255, np.uint8)
        if rasters:
            alpha8[...] = 0 if covered is None else covered.astype(np.uint8) * np.uint8(255)
    return WindowResult(window, rgb8, stats, tiles, base, alpha8)


@dataclass(frozen=True)
class WindowTask:
    """The window task of one walk: ``task(window) -> WindowResult``. ``options`` are the
    keyword arguments of :func:`render_window` besides the prepared render, for mappers that run
    the task elsewhere (another process or machine, with a render prepared there); ``drawn``
    (not among them): layers' paints drawn by a helper of this process
    (:class:`compose.drawer.DrawAhead`)."""

    prepared: Prepared
    measure: bool = True
    preview_factor: int | None = None
    only: frozenset[int] | None = None
    below: int | None = None
    footprint: bool = False
    drawn: Any = field(default=None, compare=False)

    @property
    def options(self) -> dict[str, Any]:
        return {"measure": self.measure, "preview_factor": self.preview_factor, "only": self.only,
                "below": self.below, "footprint": self.footprint}

    def __call__(self, window: Window) -> WindowResult:
        return render_window(self.prepared, window, drawn=self.drawn, **self.options)


def run(prepared: Prepared, sinks: list[Sink], *, measure: bool = True, window: int = WINDOW,
        progress: Callable[[int, int], None] | None = None,
        only: frozenset[int] | None = None, previews: LayerPreviews | None = None,
        mapper: Callable[..., Iterable[WindowResult]] | None = None) -> Statistics | None:
    """Render every window, feed sinks band by band, return the merged statistics.

    ``only``: indices into ``prepared.layers`` to draw (default all); ``previews``: a
    :class:`LayerPreviews` to add every window's preview tiles to; ``mapper``: a ``map``-like
    callable (``mapper(task, windows)`` with ``task`` a :class:`WindowTask`, results in order,
    e.g. an executor's ``map``, or :mod:`compose.parallel`'s process and cluster mappers) running
    the window tasks (default: one after another in this thread).
    """
    canvas = prepared.canvas
    windows = prepared.windows(window)
    stats = prepared.template.empty_like() if measure else None
    k = previews.k if previews is not None else None
    t0 = time.perf_counter()
    encode = 0.0
    done = 0
    band_row = 0
    band = under = None
    below = next((b for b in (getattr(s, "below", None) for s in sinks) if b is not None), None)

    footprint = any(getattr(s, "alpha", False) for s in sinks)
    task = WindowTask(prepared, measure=measure, preview_factor=k, only=only, below=below,
                      footprint=footprint)
    alpha_band = None

    def feed(row0, rows, rows_below):
        nonlocal encode
        t = time.perf_counter()
        for sink in sinks:
            if footprint and getattr(sink, "alpha", False):
                sink.rows(row0, rows, alpha_band)
            else:
                sink.rows(row0, rows)
            if rows_below is not None and getattr(sink, "below", None) is not None:
                sink.below_rows(row0, rows_below)
        encode += time.perf_counter() - t

    # each source block decoded once, shared by the window threads (compose.sources.blocks)
    results: Iterator[WindowResult] = planned(prepared.layers, canvas, windows,
                                              (mapper or map)(task, windows))
    # with no sinks (a check's walk, compute alone) nobody reads the rows: no bands are made
    # (each band is fresh memory of canvas width x window rows x 3 bytes, 12.6 MB at 8192)
    rows_wanted = bool(sinks)
    for res in results:
        win = res.window
        if rows_wanted and (band is None or win.row != band_row):
            if band is not None:
                feed(band_row, band, under)
            band_row = win.row
            band = np.empty((win.height, canvas.width, 3), dtype=np.uint8)
            if below is not None:
                under = np.empty_like(band)
            if footprint:
                alpha_band = np.empty((win.height, canvas.width), dtype=np.uint8)
        if band is not None:
            band[:, win.col:win.col + win.width] = res.rgb8
        if alpha_band is not None and res.alpha8 is not None:
            alpha_band[:, win.col:win.col + win.width] = res.alpha8
        if under is not None and res.below is not None:
            under[:, win.col:win.col + win.width] = res.below
        if stats is not None and res.statistics is not None:
            if done == 0:       # the first window's own statistics are the sum so far (the
                stats = res.statistics  # same numbers as adding them to empty ones, no copies)
            else:
                stats.merge(res.statistics)
        if previews is not None and res.previews is not None:
            previews.add(res.previews, win)
        done += 1
        if progress is not None:
            progress(done, len(windows))
    if band is not None:
        feed(band_row, band, under)
    prepared.seconds["encode"] = encode
    prepared.seconds["compute"] = time.perf_counter() - t0 - encode
    return stats


class ArraySink:
    """Collects the whole image in memory (for previews and tests of small canvases)."""

    def __init__(self, canvas: Canvas):
        self.image = np.zeros((canvas.height, canvas.width, 3), dtype=np.uint8)

    def rows(self, row0: int, rgb8: np.ndarray) -> None:
        self.image[row0:row0 + rgb8.shape[0]] = rgb8


def preview_canvas(canvas: Canvas, max_side: int = 1200) -> Canvas:
    """See :meth:`compose.canvas.Canvas.coarser`."""
    return canvas.coarser(max_side)


def render_array(style, *, canvas: Canvas | None = None, only: frozenset[int] | None = None,
                 measure: bool = False, ramps: dict | None = None):
    """Render ``style`` (or some of its layers) into memory: (uint8 (H, W, 3), statistics)."""
    prepared = prepare(style, ramps=ramps, canvas=canvas)
    try:
        sink = ArraySink(prepared.canvas)
        stats = run(prepared, [sink], measure=measure, only=only)
        return sink.image, stats
    finally:
        prepared.close()
