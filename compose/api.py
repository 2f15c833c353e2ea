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

import sys
import types
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import TYPE_CHECKING, Any

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
          cache: bool | str | Path | None = None) -> CheckReport:
    """Render ``style`` (a :class:`Style` or a path) in memory and check its visual hierarchy;
    nothing is written. ``report.passed`` is False when any failure-severity rule failed.
    ``draft``: check a reduced canvas of the same extent and dpi (:mod:`compose.check.draft`);
    ``report.draft`` then says what size was checked. ``cache``: the cache of prepared inputs
    (:mod:`compose.check_cache`): None or True its default directory, a path another one,
    False none (nor with a ``mapper``). A check that only changed colours reuses the layers'
    coverage and indices; its report is the same as without the cache."""
    style = _style(style)     # a bad style fails before the engine's imports
    from compose.check.draft import draft_canvas

    full = style.canvas()
    canvas = draft_canvas(full) if draft else None
    is_draft = canvas is not None and canvas is not full

    def keep_clear(*args):      # labels as in a render (the page's furniture: matplotlib)
        from compose.page.write import blocked_for
        return blocked_for(*args)

    store = _cache_of(style, canvas if canvas is not None else full, keep_clear, cache, mapper)
    early = _read_vectors_early(style, store, canvas if is_draft else None) \
        if mapper is None else False
    try:
        return _check(style, progress, mapper, full, canvas, is_draft, keep_clear, cache, store)
    finally:
        if early:
            from compose.sources.vector import forget_early

            forget_early()


#: Layer kinds that read vector sources.
_VECTOR_KINDS = ("lines", "areas", "points", "labels")


def _read_vectors_early(style: Style, store, draft=None) -> bool:
    """Start reading the features of the enabled vector layers the check will read (not those
    its cache holds) on threads of their own (:func:`compose.sources.vector.read_early`), while
    the engine is imported and the rasters prepared; a ``draft`` canvas's lines, areas and
    points simplified there too, as its layers ask; True when any was started."""
    specs = [s for s in style.layers if s.enabled and s.kind in _VECTOR_KINDS]
    held = store.held(specs) if store is not None else set()
    specs = [s for s in specs if s.name not in held]
    if not specs:
        return False
    from compose.sources.vector import DRAFT_TOLERANCE, read_early

    for spec in specs:
        o = spec.options
        simplify = draft.pixel * DRAFT_TOLERANCE if draft is not None and spec.kind != "labels" \
            else None
        read_early(spec.source, layer=spec.name, table=getattr(o, "table", None),
                   where=getattr(o, "where", None), simplify=simplify,
                   crs=None if draft is None else draft.crs)
    return True


def _check(style: Style, progress, mapper, full, canvas, is_draft: bool, keep_clear, cache,
           store) -> CheckReport:
    from compose.check.draft import describe_draft
    from compose.engine import WINDOW, prepare, run  # looked up per call (tests may replace them)

    prepared = prepare(style, canvas=canvas, keep_clear=keep_clear, draft=is_draft,
                       make_layer=None if store is None else store.layer)
    if store is not None and not store.usable(prepared.margin, WINDOW):
        prepared.close()            # entries of another walk (a layer's margin changed): rebuild
        store = _cache_of(style, prepared.canvas, keep_clear, cache, mapper, read=False)
        prepared = prepare(style, canvas=canvas, keep_clear=keep_clear, draft=is_draft,
                           make_layer=None if store is None else store.layer)
    try:
        stats = run(prepared, [], progress=progress, mapper=mapper, window=WINDOW)
        if store is not None:
            store.save(prepared.margin, WINDOW)
        return check_style(style, stats, prepared.ramps,
                           draft=describe_draft(prepared.canvas, full) if is_draft else None)
    finally:
        prepared.close()


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
