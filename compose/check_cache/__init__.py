"""A disk cache of the check's prepared, geometry-dependent inputs (``compose check``).

A practitioner tunes colours, ramps, opacity, blend and halo colours and re-checks many times
while the sources and the geometry stay the same (``compose fix`` re-checks in a loop too). What
a layer paints splits in two: *where and how much* (each paint's coverage and, for rasters, its
lookup-table index) and *in what colour* (a flat colour or the ramp's palette). The first is
the expensive part (reading and warping rasters, hillshading, drawing lines and labels); it is
cached here per layer, on the canvas's grid, and the second is taken from the style each time.

A layer's entry is keyed by what decides its paints (common practice, as make does: a source is
unchanged while its path, size and modification time in nanoseconds are):

* its kind, its source file (path, size, mtime_ns; also a ``.ovr`` overview file and a
  GeoPackage's ``-wal`` journal beside it, when present) and its options with every colour
  replaced by a placeholder (``stroke``, ``fill``, ``color``, halo colours, ``tint``,
  ``shadow``, a no-data colour; a relief's ``strength``), so a colour is no part of the key
  but whether a part is drawn at all is;
* the canvas (CRS, transform, size, dpi) and the full canvas of a draft;
* for rasters drawn through a ramp: the lookup table's index layout (entry values, edges,
  steps), not its colours;
* for labels: the labels layers placed before it, the layers it keeps off (``avoid``: their
  kind, source stamps and options without colours), and, when page furniture sits inside the
  map frame, the page, the layers and the ramps (the furniture's size depends on the legend);
* the modules that paint (size and mtime of compose's layer and source modules),
  :data:`CACHE_VERSION`, and the versions of the libraries that shape coverage (numpy,
  matplotlib, rasterio's and pyogrio's GDAL, shapely's GEOS, pyproj's PROJ: an upgrade is a new
  cache, so coverage an older library drew is never replayed).

Layer ``opacity``, ``blend`` and ``role`` are applied after the cache and are no part of it.
An entry is one file (8-bit coverage where it is exact, else float32; uint16 indices; deflated),
written to a temporary file and renamed into place; an unreadable or corrupt entry is ignored
and rebuilt. A warm check opens no source, so it imports neither matplotlib nor rasterio, GDAL,
shapely or pyogrio. Where: ``$COMPOSE_CACHE`` (a directory, or ``off``), else
``$XDG_CACHE_HOME/compose``, else ``~/.cache/compose``; entries live in its ``check/`` folder.

The package, by concern: :mod:`compose.check_cache.keys` (what an entry is keyed by: stamps,
library versions, style values without colours), :mod:`compose.check_cache.store` (entry files,
clearing, least-recently-used trimming), :mod:`compose.check_cache.replay` (recording a layer's
paints, replaying them in the current colours); here, :class:`CheckCache`: the cache as one
check uses it.
"""
from __future__ import annotations

import contextlib
import os
from collections.abc import Callable
from pathlib import Path
from types import SimpleNamespace
from typing import Any

from compose.check_cache.keys import (
    COLOR_ONLY,
    canvas_key,
    code_stamp,
    digest,
    library_versions,
    lut_key,
    plain,
    source_stamp,
)
from compose.check_cache.replay import CachedLayer, Recorder, layer_colors, lut_of
from compose.check_cache.store import (
    CACHE_VERSION,
    MAX_BYTES,
    SUBDIR,
    clear_cache,
    load_entry,
    save_entry,
    trim_cache,
)
from compose.user_cache import CACHE_ENV, cache_dir

__all__ = ["CACHE_ENV", "CACHE_VERSION", "MAX_PIXELS", "MAX_BYTES", "cache_dir", "clear_cache",
           "trim_cache", "CheckCache", "CachedLayer", "layer_colors"]

#: Canvases larger than this many pixels are not cached (a full check at 8192 x 8192 would hold
#: and write hundreds of MB; its draft is cached).
MAX_PIXELS = 4096 * 4096


class CheckCache:
    """The cache as one check uses it: :meth:`layer` is :func:`compose.engine.prepare`'s
    ``make_layer`` hook (a :class:`CachedLayer` on a hit, else the real layer recorded);
    :meth:`usable` says whether the hits fit the walk; :meth:`save` stores the misses after it.
    ``read``: use existing entries (False: rebuild and overwrite them)."""

    def __init__(self, root: Path, style, canvas, keep_clear: Callable | None, read: bool = True):
        self.root = root
        self.folder = root / SUBDIR
        self.style = style
        self.canvas = canvas
        self.read = read
        self.enabled = canvas.width * canvas.height <= MAX_PIXELS
        self._base = [code_stamp(), library_versions(), canvas_key(canvas),
                      canvas_key(style.canvas())]
        self._furniture = self._furniture_key(keep_clear)
        self._labels_before: list[str] = []
        self.hits: list[CachedLayer] = []
        self.recorders: list[Recorder] = []
        self.uncached = 0           # layers this cache does not keep (built every time)

    def _furniture_key(self, keep_clear) -> Any:
        """What decides the boxes labels keep clear of (see :func:`compose.page.write.blocked_for`:
        none without a page or with all furniture in the panel or off)."""
        page = getattr(self.style, "page", None)
        if keep_clear is None or page is None:
            return None
        inside = [page.legend, page.north, page.scalebar.place]
        if all(p in ("panel", "off") for p in inside):
            return None
        return digest([plain(page),
                        [[s.name, s.role, s.kind, str(s.source),
                          plain(s.options, skip=COLOR_ONLY.get(s.kind, frozenset()))]
                         for s in self.style.layers],
                        {k: plain(dict(t.table)) for k, t in self.style.ramps.items()}])

    def key(self, spec, ctx) -> tuple[str | None, dict | None]:
        """(key, part colours) of a layer, or (None, None) when it is not cached."""
        colors = layer_colors(spec, ctx.ramps)
        stamp = source_stamp(spec.source) if colors is not None else None
        if colors is None or stamp is None:
            return None, None
        parts: list[Any] = [self._base, spec.kind, stamp,
                            plain(spec.options, skip=COLOR_ONLY.get(spec.kind, frozenset()))]
        if spec.kind in ("field", "classes"):
            parts.append(lut_key(lut_of(spec, ctx.ramps)))
        if spec.kind == "labels":
            parts += [self._furniture, list(self._labels_before)]
            avoided = self._avoided(spec)
            if avoided is None:
                return None, None
            if avoided:
                parts.append(avoided)
        return digest(parts), colors

    def _avoided(self, spec) -> list | None:
        """What decides the features a labels layer keeps off (its ``avoid``): each avoided
        layer's name, kind, source stamp and options without colours (a disabled one is passed
        over); None when a source cannot be stat'ed (the layer reports its own error)."""
        out: list[Any] = []
        for other in self.style.avoided(spec):
            stamp = source_stamp(other.source)
            if stamp is None:
                return None
            out.append([other.name, other.kind, stamp,
                        plain(other.options, skip=COLOR_ONLY.get(other.kind, frozenset()))])
        return out

    def layer(self, spec, ctx, build: Callable[[], Any]) -> Any:
        key, colors = self.key(spec, ctx) if self.enabled else (None, None)
        if key is None or colors is None:
            self.uncached += 1
            return build()
        if spec.kind == "labels":
            self._labels_before.append(key)
        path = self.folder / f"{key}.entry"
        found = load_entry(path) if self.read else None
        if found is not None:
            with contextlib.suppress(OSError):
                os.utime(path)                      # used now (the least recently used go)
            meta, arrays = found
            hit = CachedLayer(spec, meta, arrays, colors, ctx.ramps)
            if spec.kind == "labels":
                ctx.label_boxes.extend(tuple(b) for b in meta.get("label_boxes", []))
            self.hits.append(hit)
            return hit
        before = len(ctx.label_boxes)
        layer = build()
        extra: dict[str, Any] = {"shape": [self.canvas.height, self.canvas.width]}
        if spec.kind == "labels":
            extra["label_boxes"] = [[float(v) for v in b] for b in ctx.label_boxes[before:]]
            extra["unplaced"] = [str(u) for u in getattr(layer, "unplaced", [])]
        rec = Recorder(layer, key, colors, self.canvas, extra)
        self.recorders.append(rec)
        return rec

    def held(self, specs) -> set[str]:
        """Names of the vector layers among ``specs`` (lines, areas, points, labels: enabled,
        in style order) whose entries this cache holds, so a check need not read their
        sources (an entry found unusable later is rebuilt as usual)."""
        found: set[str] = set()
        if not (self.enabled and self.read):
            return found
        ctx = SimpleNamespace(ramps={})         # these kinds' keys need no ramp
        saved, before = self._labels_before, list[str]()
        try:
            # labels are prepared last, each keyed by the labels layers before it
            for spec in sorted(specs, key=lambda s: s.kind == "labels"):
                if spec.kind not in ("lines", "areas", "points", "labels"):
                    continue
                self._labels_before = list(before)
                key, _ = self.key(spec, ctx)
                if key is None:
                    continue
                if spec.kind == "labels":
                    before.append(key)
                if (self.folder / f"{key}.entry").is_file():
                    found.add(spec.name)
        finally:
            self._labels_before = saved
        return found

    @property
    def warm(self) -> bool:
        """Every layer of the check replayed from the cache (nothing read or drawn)."""
        return bool(self.hits) and not self.recorders and not self.uncached

    def usable(self, margin: int, window_size: int) -> bool:
        """Whether every hit was recorded on the same walk (windows and their margin)."""
        return all(h.meta.get("walk") == [int(margin), int(window_size)] for h in self.hits)

    def save(self, margin: int, window_size: int) -> int:
        """Store the recorded layers' entries (errors writing are ignored: a cache is optional);
        returns how many were written."""
        def save(rec) -> int:
            made = rec.entry(margin, window_size)
            if made is None:
                return 0
            try:
                save_entry(self.folder / f"{rec.key}.entry", *made)
                return 1
            except OSError:
                return 0

        if len(self.recorders) > 1:     # deflate releases the GIL: entries on 2 threads
            from concurrent.futures import ThreadPoolExecutor

            with ThreadPoolExecutor(2, thread_name_prefix="check-cache") as pool:
                n = sum(pool.map(save, self.recorders))
        else:
            n = sum(save(rec) for rec in self.recorders)
        if n:
            trim_cache(self.folder)
        return n
