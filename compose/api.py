"""The public Python API: load a style, render it, check it. Typed results, no command line.

>>> import compose
>>> style = compose.load_style("styles/coast.toml", overrides={"map.pixel": 60})
>>> result = compose.render(style, "out")           # files written; result.report, .outputs
>>> report = compose.check(style)                   # render in memory, nothing written
>>> report.passed, [r.rule for r in report.failures]

Each function is also importable from here (``from compose.api import render``). Errors are
:class:`compose.errors.ComposeError` subclasses with a one-line message (a bad style is a
:class:`compose.errors.StyleError`, a missing source a :class:`compose.errors.SourceError`).
``compose.check`` is also the checker's package (:mod:`compose.check`): calling it checks a
style, its attributes are the package's.
"""
from __future__ import annotations

import functools
import sys
import types
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from compose.check import Report, check_style
from compose.style import Style
from compose.style import load_style as _load_style

if TYPE_CHECKING:
    from compose.render import RenderResult

__all__ = ["load_style", "render", "check", "Style", "RenderResult", "CheckReport"]


def __getattr__(name: str) -> Any:
    """``RenderResult`` from :mod:`compose.render`, imported on first use: the render's writers
    (PNG, GeoTIFF, page, legend, review page) stay out of ``compose check``'s start-up."""
    if name == "RenderResult":
        from compose.render import RenderResult
        return RenderResult
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")

#: The check's result: rule results, per-layer summaries, ``passed`` (see :class:`Report`).
CheckReport = Report


def load_style(path: str | Path, overrides: Mapping[str, Any] | None = None) -> Style:
    """Load, merge (``extends``) and validate the style file at ``path``.

    ``overrides``: key path -> value applied before validation, e.g. ``{"map.pixel": 60,
    "layer.coast.width": 1.2}`` (see :mod:`compose.style.overrides`).
    """
    return _load_style(path, overrides=overrides)


def _style(style: Style | str | Path) -> Style:
    return style if isinstance(style, Style) else load_style(style)


def render(style: Style | str | Path, out_dir: str | Path, *, overwrite: bool = False,
           proofs: bool = False, html: bool = True, legend: bool = True, check: bool = True,
           progress: Callable[[int, int], None] | None = None,
           mapper: Callable | None = None) -> RenderResult:
    """Render ``style`` (a :class:`Style` or a path) into ``out_dir`` in one pass.

    Writes NAME.png, NAME.tif, and unless switched off NAME.legend.png, NAME.check.json and
    NAME.html; with ``proofs`` also NAME.proof-{gray,deutan,protan,tritan,sheet}.png. Existing
    files are an error unless ``overwrite``. Every file is written to a temporary name and
    renamed into place only when all succeeded. ``progress(done, total)`` is called after each
    window; ``mapper`` runs the window tasks (e.g. an executor's ``map``).
    """
    from compose.render import render_style

    return render_style(_style(style), Path(out_dir), overwrite=overwrite, proofs=proofs,
                        html=html, legend=legend, check=check, progress=progress, mapper=mapper)


def check(style: Style | str | Path, *, progress: Callable[[int, int], None] | None = None,
          mapper: Callable | None = None, draft: bool = False,
          cache: bool | str | Path | None = None, workers: int | None = None) -> CheckReport:
    """Render ``style`` (a :class:`Style` or a path) in memory and check its visual hierarchy;
    nothing is written. ``report.passed`` is False when any failure-severity rule failed.
    ``draft``: check a reduced canvas of the same extent and dpi (:mod:`compose.check.draft`);
    ``report.draft`` then says what size was checked. ``cache``: the cache of prepared inputs
    (:mod:`compose.check_cache`): None or True its default directory, a path another one,
    False none (nor with a ``mapper``). A check that only changed colours reuses the layers'
    coverage and indices; its report is the same as without the cache. ``workers``: processes
    walking the windows of a check that reads its sources (no cache, or a cache that records
    them; not a check replayed wholly from the cache): helpers forked beside this one, see
    :class:`_Helpers`; None: one per core while the cores are free, see :func:`helper_count`;
    the same report and cache entries with any number."""
    style = _style(style)     # a bad style fails before the engine's imports
    from compose.check.draft import draft_canvas

    full = style.canvas()
    canvas = draft_canvas(full) if draft else None
    is_draft = canvas is not None and canvas is not full

    def keep_clear(*args):      # labels as in a render (the page's furniture: matplotlib)
        from compose.page.write import blocked_for
        return blocked_for(*args)

    store = _cache_of(style, canvas if canvas is not None else full, keep_clear, cache, mapper)
    ahead = None
    if mapper is None:
        specs = _to_read(style, store)
        # forked before any thread of this process starts (nor any a library started in C
        # since the API was imported: see _THREADS_AT_IMPORT)
        if is_draft:
            from compose.layers.early_marks import MarksAhead

            ahead = MarksAhead.start(style, canvas, specs,
                                     fork=0 < _os_threads() <= _THREADS_AT_IMPORT)
        early = _read_vectors_early(
            [s for s in specs if ahead is None or s.name not in ahead.names],
            canvas if is_draft else None, style)
    else:
        early = False
    try:
        return _check(style, progress, mapper, full, canvas, is_draft, keep_clear, cache, store,
                      workers, ahead)
    finally:
        if ahead is not None:
            ahead.close()
        if early:
            from compose.sources.vector import forget_early

            forget_early()


#: Layer kinds that read vector sources.
_VECTOR_KINDS = ("lines", "areas", "points", "labels")


def _to_read(style: Style, store) -> list:
    """The enabled vector layers (:data:`_VECTOR_KINDS`) whose sources the check will read: those
    its cache does not hold."""
    specs = [s for s in style.layers if s.enabled and s.kind in _VECTOR_KINDS]
    held = store.held(specs) if store is not None else set()
    return [s for s in specs if s.name not in held]


def _read_vectors_early(specs: list, draft=None, style: Style | None = None) -> bool:
    """Start reading the features of the vector layers ``specs`` on threads of their own
    (:func:`compose.sources.vector.read_early`), while the rasters are prepared; a ``draft``
    canvas's lines, areas and points simplified there too, as its layers ask; True when any
    was started. The engine and the modules of ``style``'s layer kinds are imported first:
    SQLite gives up Python's lock for every row it steps, and a thread importing beside it
    takes the lock back each time."""
    if not specs:
        return False
    if style is not None:
        import compose.engine  # noqa: F401
        from compose.style.kinds import layer_class

        for kind in {s.kind for s in style.layers if s.enabled}:
            layer_class(kind)
    from compose.layers.early_marks import read_ahead

    for spec in specs:
        read_ahead(spec, draft)
    # the lines a labels layer keeps off (``avoid``), read whole as it reads them: on a draft
    # a read of their own (their layers read them simplified); on a full canvas the same read
    # as their layers' (started once; whichever layer is prepared first takes it)
    for spec in specs:
        for other in (style.avoided(spec) if style is not None else ()):
            read_ahead(other)
    return True


def _check(style: Style, progress, mapper, full, canvas, is_draft: bool, keep_clear, cache,
           store, workers: int | None = None, ahead=None) -> CheckReport:
    from compose.check.draft import describe_draft
    from compose.engine import WINDOW, prepare, run  # looked up per call (tests may replace them)
    from compose.timeline import span

    prepared = prepare(style, canvas=canvas, keep_clear=keep_clear, draft=is_draft,
                       make_layer=_layer_maker(store, ahead))
    if store is not None and not store.usable(prepared.margin, WINDOW):
        prepared.close()            # entries of another walk (a layer's margin changed): rebuild
        store = _cache_of(style, prepared.canvas, keep_clear, cache, mapper, read=False)
        prepared = prepare(style, canvas=canvas, keep_clear=keep_clear, draft=is_draft,
                           make_layer=_layer_maker(store, ahead))
    helpers = None
    if mapper is None and (store is None or not store.warm):
        helpers = _Helpers.start(prepared, workers)
        if helpers is not None:
            mapper = helpers.mapper
    if is_draft and mapper is None:
        mapper = _marks_first
    try:
        with span("check walk"):
            stats = run(prepared, [], progress=progress, mapper=mapper, window=WINDOW)
        if store is not None:
            store.save(prepared.margin, WINDOW)
        with span("check rules"):
            return check_style(style, stats, prepared.ramps,
                               draft=describe_draft(prepared.canvas, full) if is_draft else None)
    finally:
        if helpers is not None:
            helpers.close()
        prepared.close()


def _layer_maker(store, ahead):
    """:func:`compose.engine.prepare`'s ``make_layer``: the cache's (which builds a layer on a
    miss), over the layers drawn ahead in a forked process for a draft
    (:class:`compose.layers.early_marks.MarksAhead`); None when neither."""
    if ahead is None:
        return None if store is None else store.layer
    if store is None:
        return ahead.make_layer
    return lambda spec, ctx, build: store.layer(
        spec, ctx, lambda: ahead.make_layer(spec, ctx, build))


#: Layer kinds whose paints are drawn marks (Agg), not raster reads.
_MARK_KINDS = ("lines", "areas", "points", "labels")


class _Drawn:
    """One window's paints of the mark layers of ``prepared``, drawn now (the engine's
    ``drawn``: :func:`compose.engine.render_window` takes them instead of painting again)."""

    def __init__(self, prepared, window):
        transform = prepared.canvas.window_transform(window)
        _, _, h, w = window.padded
        self._window = window
        # a layer drawn in the marks process (compose.layers.early_marks) is painted in its
        # turn instead, after the rasters: the walk composites them while it draws
        self._paints = {li: layer.paint(window, transform, h, w)
                        for li, layer in enumerate(prepared.layers)
                        if layer.spec.kind in _MARK_KINDS
                        and not getattr(layer, "drawn_ahead", False)}

    def paints(self, window, li: int):
        return self._paints.get(li) if window == self._window else None


def _marks_first(task, windows):
    """A draft's walk (one window, or a few): each window's lines, areas, points and labels
    drawn before its raster layers are painted, so the drawing (which holds the interpreter
    lock) runs while the rasters' early reads (:mod:`compose.layers.early`) still decode on
    their threads instead of after them; the same paints, so the same report."""
    import dataclasses

    for window in windows:
        yield dataclasses.replace(task, drawn=_Drawn(task.prepared, window))(window)


class _Helpers:
    """The check's window walk on several cores: processes forked once the render is prepared
    (so they inherit the prepared layers instead of preparing them again; no source is read and
    no other thread runs then) each walk a later part of the windows; this process walks the
    first part and merges the helpers' statistics window by window, in window order, as a walk
    in one process does (the same additions in the same order: the same report, byte for byte).
    A helper reads its rasters through GDAL handles of its own
    (:meth:`compose.sources.raster.RasterSource.reopen`: inherited handles share their file
    offsets with this process's); fonts are not read in the walk (labels are measured and placed
    while preparing). A helper that fails, or sends nothing for long (:data:`HELPER_PATIENCE`),
    has its windows walked here. Layers the check's cache records
    (:class:`compose.check_cache.replay.Recorder`) are recorded in a helper window by window and
    sent back with the statistics, and recorded here in window order: the same cache entries as
    a walk in one process. Helpers start only where forking is safe
    (:func:`compose.page.process.can_fork`: Linux, no other thread running; nor any thread a
    library started in C since the API was imported, see :data:`_THREADS_AT_IMPORT`)."""

    def __init__(self, jobs: list, recorders: list):
        self._jobs = jobs
        self._recorders = recorders

    @classmethod
    def start(cls, prepared, workers: int | None):
        """Helpers walking later windows of ``prepared`` (a check's prepared render), or None
        when the walk stays in this process."""
        from compose.engine import WINDOW

        n = helper_count(len(prepared.windows(WINDOW)), workers)
        if n == 0:
            return None
        from compose.page.process import Forked, can_fork

        _settle_threads()
        if not can_fork() or not 0 < _os_threads() <= _THREADS_AT_IMPORT:
            return None

        from compose.check_cache.replay import Recorder

        recorders = [layer for layer in prepared.layers if isinstance(layer, Recorder)]

        def walk(part: int) -> list[tuple[bytes, list]]:
            import dataclasses
            import gc

            from compose.engine import run
            from compose.packing import pack
            from compose.timeline import span

            gc.disable()            # a short-lived process: its memory goes when it ends
            for layer in prepared.layers:
                reopen = getattr(getattr(layer, "source", None), "reopen", None)
                if reopen is not None:
                    reopen()
            for rec in recorders:
                rec.forward()
            got: list = []

            def mine(task, windows):
                for w in _share(windows, n + 1, part):
                    res = task(w)
                    # merged and recorded by the parent, not by run
                    got.append((pack(res.statistics), [rec.take(w) for rec in recorders]))
                    yield dataclasses.replace(res, statistics=None)

            with span(f"check helper {part} walks"):
                run(prepared, [], mapper=mine, window=WINDOW)
            return got

        return cls([Forked(functools.partial(walk, part)) for part in range(1, n + 1)],
                   recorders)

    def mapper(self, task, windows):
        """The walk's mapper (:func:`compose.engine.run`): this process's windows, then each
        helper's window results with their statistics (rows are not kept by a check)."""
        import select
        import time

        from compose.engine import WindowResult
        from compose.packing import unpack
        from compose.timeline import span

        windows = list(windows)
        parts = len(self._jobs) + 1
        t0 = time.monotonic()
        yield from map(task, _share(windows, parts, 0))
        # a helper has about as much to do: one that sends nothing for much longer is stuck
        patience = max(HELPER_PATIENCE, 4.0 * (time.monotonic() - t0))
        for part, job in enumerate(self._jobs, 1):
            mine = _share(windows, parts, part)
            try:
                with span(f"check waits for helper {part}"):
                    ready, _, _ = select.select([job._inbox], [], [], patience)
                    got = job.result() if ready else None
            except Exception:       # the helper failed: its windows are walked here
                got = None
            if got is None or len(got) != len(mine):
                job.abort()
                yield from map(task, mine)
                continue
            for w, (packed, taken) in zip(mine, got):
                for rec, t in zip(self._recorders, taken):
                    rec.adopt(w, t)
                yield WindowResult(w, _NO_ROWS, unpack(packed))

    def close(self) -> None:
        for job in self._jobs:
            job.abort()


#: Seconds at least that the check waits for a helper's first byte once its own windows are
#: walked (else 4 x its own walk's time) before it ends the helper and walks its windows itself.
HELPER_PATIENCE = 10.0


def _settle_threads(timeout: float = 1.0) -> None:
    """Wait for the early vector reads' threads (:func:`compose.sources.vector.read_early`):
    once the layers are prepared each has handed its features over and is ending."""
    import threading

    for thread in threading.enumerate():
        if thread.name == "early-vectors":
            thread.join(timeout)


def _os_threads() -> int:
    """Threads of this process as the kernel counts them (-1: unknown, not Linux)."""
    import os

    try:
        return len(os.listdir("/proc/self/task"))
    except OSError:
        return -1


#: This process's threads when the API was imported (numpy's BLAS may have started its own,
#: which survive a fork). A helper is forked only while there are no more: a thread started
#: since, even by a library in C (GDAL's worker pool, say, which a render starts and which
#: lives on), may hold a lock the forked helper would wait for forever; Python's own count
#: (compose.page.process.can_fork) does not see those.
_THREADS_AT_IMPORT = _os_threads()


#: A window result's rows when a helper walked it (broadcast into the walk's band, never read).
_NO_ROWS = np.zeros((1, 1, 3), np.uint8)


def helper_count(windows: int, workers: int | None) -> int:
    """Helper processes for a check walk of ``windows`` windows: ``workers - 1``, at most one per
    window beyond the first; ``workers`` None: one process per core, each walking at least two
    windows, at most :data:`compose.parallel.AUTO_WORKERS` -- and none while the load average
    is over twice the cores. A helper no longer prepares the render again (it is forked once
    it is prepared), so it costs about 0.13 CPU-s on the 1500 x 1500 demo against the half of
    the walk it takes off the check: at load 2.4-2.8 on 2 cores the demo's check took 0.84 s
    with a helper against 0.94 s without (medians of 9 alternating); the old limit, a load
    leaving a core free, was set when each helper prepared the render again."""
    import os

    from compose.parallel import AUTO_WORKERS, default_workers

    if workers is None:
        cores = default_workers()
        workers = min(cores, AUTO_WORKERS, max(1, windows // 2))
        try:
            if os.getloadavg()[0] > 2 * cores:
                workers = 1
        except OSError:             # pragma: no cover - no load average here
            pass
    return max(0, min(int(workers), windows) - 1)


def _share(windows: list, parts: int, part: int) -> list:
    """Part ``part`` of ``parts`` contiguous, near-equal parts of ``windows`` (the first part,
    this process's, the smallest: it also merges and judges)."""
    n = len(windows)
    bounds = [n * i // parts for i in range(parts + 1)]
    return windows[bounds[part]:bounds[part + 1]]


def _cache_of(style: Style, canvas, keep_clear, cache, mapper, read: bool = True):
    """The check's :class:`compose.check_cache.CheckCache`, or None (switched off, or windows
    run elsewhere by a ``mapper``)."""
    if cache is False or mapper is not None:
        return None
    from compose.check_cache import CheckCache, cache_dir

    root = cache_dir(None if cache is None or cache is True else cache)
    return None if root is None else CheckCache(root, style, canvas, keep_clear, read=read)


class _CheckPackage(types.ModuleType):
    """The :mod:`compose.check` package, callable as :func:`check`."""

    def __call__(self, style: Style | str | Path, **options: Any) -> CheckReport:
        return check(style, **options)


sys.modules["compose.check"].__class__ = _CheckPackage
