"""Vector overlays: ``lines``, ``areas`` and ``points`` from anything OGR reads, drawn antialiased
by matplotlib's Agg renderer at exact pixel geometry (see :mod:`compose.layers.draw`)."""
from __future__ import annotations

import copy
import threading

import numpy as np
import shapely
from affine import Affine

from compose.layers.base import Context, Paint
from compose.layers.draw import draw_areas, draw_lines, draw_points, stroke_path
from compose.layers.paths import PixelParts, _concat, dashed, line_parts, to_pixels
from compose.sources.vector import DRAFT_TOLERANCE, Features, Lines, VectorSource, simplified

__all__ = ["LinesLayer", "AreasLayer", "PointsLayer", "DRAFT_TOLERANCE", "TILE"]

#: Vector layers draw on a fixed grid of tiles of this many pixels a side, from the canvas's
#: top-left corner, whenever a window is made of whole tiles (its core starts on the grid and
#: is a multiple of the tile, or ends at the canvas edge): each tile is drawn by Agg on a raster
#: of its own (the tile grown by the layer's margin) from the same input whatever the windows,
#: so the map is byte-identical for every window size that is a multiple of the tile (Agg
#: clips a path to its raster, and a raster edge in a different place moves antialiased
#: coverage by one 8-bit code here and there), and the drawing's cost does not depend on the
#: window count. A window that is not made of whole tiles is drawn as one tile of its own.
TILE = 256


def _window_box(transform, height, width, pad_px):
    """(west, south, east, north) of a padded window grown by ``pad_px`` pixels (CRS units)."""
    px = abs(transform.a)
    west, north = transform.c, transform.f
    east, south = west + px * width, north - abs(transform.e) * height
    pad = pad_px * px
    return (west - pad, south - pad, east + pad, north + pad)


def _simplified(features, tolerance: float):
    """``features`` with lines and polygon rings simplified within ``tolerance`` (CRS units;
    polygons keep valid topology, points stay; see :func:`compose.sources.vector.simplified`)."""
    geoms, keep = simplified(features.geometries, tolerance)
    if keep is None:
        return features
    return type(features).build(geoms[keep], [p for p, k in zip(features.properties, keep) if k])


_RELOAD = threading.RLock()     # a released layer's features read again (rare: see release)
_PIXELS = threading.Lock()      # a lines layer's parts in pixel space, made once per process


def _tiles(window, canvas) -> list[tuple[int, int, int, int, tuple | None]]:
    """The tiles whose cores make up ``window``'s core: (row, col, height, width, tile) in
    canvas pixels, ``tile`` = (tile row, tile col, tile rows, tile cols) on the :data:`TILE`
    grid, or one core, the window's own, with ``tile`` None when the window is not made of
    whole tiles."""
    t = TILE
    rows, cols = -(-canvas.height // t), -(-canvas.width // t)
    r1, c1 = window.row + window.height, window.col + window.width
    if (window.row % t or window.col % t or (window.height % t and r1 != canvas.height)
            or (window.width % t and c1 != canvas.width)):
        return [(window.row, window.col, window.height, window.width, None)]
    return [(r, c, min(t, r1 - r), min(t, c1 - c), (r // t, c // t, rows, cols))
            for r in range(window.row, r1, t) for c in range(window.col, c1, t)]


class _VectorLayer:
    def __init__(self, spec, context: Context):
        self.spec = spec
        self.options = o = spec.options
        self.canvas = context.canvas
        self.draft = context.draft
        #: a draft's simplification, in canvas CRS units (see DRAFT_TOLERANCE)
        self.tolerance = self.canvas.pixel * DRAFT_TOLERANCE if self.draft else None
        self.source = VectorSource(spec.source, layer=spec.name, table=o.table, where=o.where,
                                   simplified=self.tolerance)
        lines = self._lines_read()
        if lines is None:
            self.source.check_overlap(self.canvas)
        else:
            self.source.check_lines_overlap(lines, self.canvas)
        self.px = self.canvas.points_to_pixels
        self.margin = int(np.ceil(self._reach_px())) + 2
        #: LinesLayer: its lines cut to the canvas, flat (see _cut_lines), else None
        self._lines: Lines | None = None if lines is None else self._cut_flat(lines)
        self._held: Features | None = self._cut() if self._lines is None else None
        if self._lines is not None:
            self.source.release()
        self._pixels: tuple | None = None       # LinesLayer: its parts in pixel space
        self._drawing_only = False      # a copy for drawing only (LinesLayer.for_drawing)

    def _lines_read(self) -> Lines | None:
        """The layer's features as flat lines in the canvas CRS (a draft's simplified), when
        its source reads them so (:meth:`compose.sources.vector.VectorSource.lines`); None
        for features (areas and points always)."""
        return None

    def _cut_flat(self, lines: Lines) -> Lines | None:
        """:meth:`_cut` for flat ``lines`` (:meth:`_lines_read`): the same parts (None when
        they are cut with shapely instead, see :meth:`compose.sources.vector.Lines.cut`)."""
        done = self.source.lines_simplified     # read simplified already (read_early)
        if self.tolerance is not None and done == self.tolerance:
            return lines.cut(self._cut_box())
        cut = lines.cut(self._cut_box())
        if cut is None or self.tolerance is None:
            return cut
        return cut.simplified(self.tolerance)   # as _cut: each part on its own

    def _cut_box(self) -> tuple[float, float, float, float]:
        """The canvas grown by the margin and 2 pixels (CRS units): where features are cut."""
        west, south, east, north = self.canvas.bounds
        pad = (self.margin + 2) * self.canvas.pixel
        return (west - pad, south - pad, east + pad, north + pad)

    def _cut(self) -> Features:
        """The features cut once to the canvas (grown by the margin; a draft's simplified);
        per window only selected, so dashes keep their phase across windows (Agg restarts a dash
        pattern where a clipped line re-enters)."""
        features = self.source.load(self.canvas.crs).in_box(self._cut_box())
        done = self.source.simplified   # read simplified already (compose.sources.vector.read_early)
        self.source.release()       # the cut is all the windows draw from
        if self.tolerance is not None and done != self.tolerance:
            features = _simplified(features, self.tolerance)
        return features

    @property
    def features(self) -> Features:
        """The features the windows draw from (read and cut again if :meth:`release` dropped
        them: the same features, from the same file)."""
        features = self._held
        if features is None:
            with _RELOAD:
                if self._held is None:
                    lines = self._cut_lines()
                    self._held = self._cut() if lines is None else Features.build(
                        lines.geometries(), [{} for _ in range(len(lines))])
                features = self._held
        return features

    def _cut_lines(self) -> Lines | None:
        """A lines layer's lines cut to the canvas (:meth:`_cut_box`), flat, when its source
        reads them so: each part of a cut line on its own (as drawing splits them); read and
        cut again after :meth:`release`. None for features."""
        lines = self._lines
        if lines is None and not self._drawing_only:
            with _RELOAD:
                if self._lines is None:
                    read = self._lines_read()
                    if read is not None:
                        self._lines = self._cut_flat(read)
                        self.source.release()
                lines = self._lines
        return lines

    def release(self) -> None:
        """Drop this process's copy of the features while another process draws them
        (:class:`compose.drawer.DrawAhead`); a later use reads them again."""
        self._held = None
        self._pixels = None
        self._lines = None

    def __getstate__(self) -> dict:
        state = dict(self.__dict__)
        if state.get("_drawing_only"):     # see for_drawing
            return state
        # a pickled layer carries its features, or its lines cut (features made of them there)
        state["_lines"] = self._cut_lines()
        state["_held"] = self.features if state["_lines"] is None else None
        state["_pixels"] = None             # made again where it is drawn
        return state

    def for_drawing(self):
        """What a process that only draws this layer's windows needs of it, to pickle
        (:class:`compose.drawer.DrawAhead`'s helper): the layer itself, features and all."""
        return self

    def paint(self, window, transform, height, width) -> list[Paint]:
        """The layer's paints of ``window``'s core, drawn tile by tile (see :data:`TILE`) and
        put together; coverage (``height`` x ``width``, the padded region) is 0 in the margin,
        which only ever holds pixels of no output. A grid not the canvas's (another
        ``transform``) is drawn as one raster, margin and all."""
        canvas = self.canvas
        if (window.canvas_height != canvas.height or window.canvas_width != canvas.width
                or transform != canvas.window_transform(window)):
            return self._draw(transform, height, width)
        pr0, pc0, _, _ = window.padded
        m = self.margin
        parts: dict[str, tuple] = {}
        for r, c, h, w, tile in _tiles(window, canvas):
            for p in self._draw_tile(r - m, c - m, h + 2 * m, w + 2 * m, tile):
                slot = parts.get(p.part)
                if slot is None:
                    slot = parts[p.part] = (p.color, np.zeros((height, width), p.alpha.dtype))
                slot[1][r - pr0:r - pr0 + h, c - pc0:c - pc0 + w] = p.alpha[m:m + h, m:m + w]
        return [Paint(part, alpha, color=color) for part, (color, alpha) in parts.items()]

    def _draw_tile(self, row0: int, col0: int, height: int, width: int, tile) -> list[Paint]:
        """Paints of a raster of the canvas with its top-left pixel at (``row0``, ``col0``),
        ``height`` x ``width``; ``tile``: the tile it draws (see :func:`_tiles`), or None."""
        transform = self.canvas.transform @ Affine.translation(col0, row0)
        return self._draw(transform, height, width)

    def _draw(self, transform, height, width) -> list[Paint]:
        raise NotImplementedError

    def _reach_px(self) -> float:
        return 0.0

    def _features(self, transform, height, width):
        box = _window_box(transform, height, width, self.margin)
        if getattr(self.options, "dash", None):
            feats = self.features
            hits = np.sort(feats.tree.query(shapely.box(*box), predicate="intersects"))
            return type(feats).build(feats.geometries[hits], [feats.properties[i] for i in hits])
        return self.features.in_box(box)

    def close(self) -> None:
        pass


class _StrokedLayer(_VectorLayer):
    """Shared by lines and area outlines: a halo (casing) beneath, then the dashed or plain stroke."""

    def _reach_px(self):
        o = self.options
        w = self.px(o.width) if o.stroke is not None else 0.0
        if o.halo is not None:
            w = max(w, self.px(o.halo.width))
        return w / 2

    def _outline(self, geoms, transform, width, height) -> np.ndarray:
        raise NotImplementedError

    def _strokes(self, feats, transform, height, width) -> list[Paint]:
        """[halo, stroke] paints of the features' outlines (halo only when the style has one)."""
        o = self.options
        paints = []
        if o.halo is not None:
            cov = self._outline(feats.geometries, transform, width, height, self.px(o.halo.width), None)
            paints.append(Paint("halo", cov, color=o.halo.color))
        dash = None if not getattr(o, "dash", None) else [self.px(d) for d in o.dash]
        cov = self._outline(feats.geometries, transform, width, height, self.px(o.width), dash)
        paints.append(Paint("stroke", cov, color=o.stroke))
        return paints


class LinesLayer(_StrokedLayer):
    """Strokes with an optional halo (casing) beneath and dashes."""

    def _outline(self, geoms, transform, width, height, width_px, dash):
        return draw_lines(geoms, transform, width, height, width_px=width_px, dash_px=dash)

    def _draw(self, transform, height, width):
        feats = self._features(transform, height, width)
        if len(feats.geometries) == 0:
            return []
        return self._strokes(feats, transform, height, width)

    def _pixel_parts(self) -> tuple[list[PixelParts], list[PixelParts]]:
        """(the parts, the parts the stroke draws: the dashes when dashed) in canvas pixels,
        made once per process from the features (dashes cut along each whole part from its
        first vertex, as :func:`compose.layers.paths.dashed` does)."""
        got = self._pixels
        if got is None:
            with _PIXELS:
                got = self._pixels
                if got is None:
                    got = self._pixels = self._make_pixel_parts()
        return got

    def for_drawing(self) -> LinesLayer:
        """A copy of this layer carrying its parts in pixel space instead of its features: it
        draws every window on the tile grid the same (the parts are all a tile's drawing
        reads) without the features' WKB packed here, parsed there and turned into pixels
        again (on the 8192 benchmark's 1 M vertices 0.036 CPU-s here, 0.08 s in the helper);
        a window off the grid reads the features from the source again."""
        parts = self._pixel_parts()
        other = copy.copy(self)
        other._pixels = parts
        other._held = None
        other._lines = None
        other._drawing_only = True
        return other

    def _lines_read(self) -> Lines | None:
        return self.source.lines(self.canvas.crs)

    def _make_pixel_parts(self) -> tuple[list[PixelParts], list[PixelParts]]:
        lines = self._cut_lines()
        if lines is not None:       # the parts line_parts makes of the features, flat
            plain = [PixelParts(to_pixels(lines.xy, self.canvas.transform), lines.starts,
                                closed=False)] if len(lines) else []
        else:
            plain = [p for p in line_parts(self.features.geometries, self.canvas.transform)
                     if p is not None]
        dash = getattr(self.options, "dash", None)
        if not dash or not plain:
            return plain, plain
        paths = [p.whole_path() for p in plain]
        whole = paths[0] if len(paths) == 1 else _concat(paths)
        cut = dashed(whole, [self.px(d) for d in dash])
        return plain, ([PixelParts.from_path(cut)] if cut is not None else [])

    def _draw_tile(self, row0, col0, height, width, tile):
        o = self.options
        plain, strokes = self._pixel_parts()
        m = self.margin
        dashes = strokes is not plain

        def path(groups, rotate):
            paths = []
            for g in groups:
                if tile is not None:
                    sel = g.in_tile(TILE, m, *tile)
                else:
                    sel = g.select(col0, row0, col0 + width, row0 + height)
                p = g.path(sel, row0, col0, height, width, rotate=rotate)
                if p is not None:
                    paths.append(p)
            if not paths:
                return None
            return paths[0] if len(paths) == 1 else _concat(paths)

        stroke = path(strokes, not dashes)
        halo = (path(plain, True) if dashes else stroke) if o.halo is not None else None
        if stroke is None and halo is None:
            return []
        paints = []
        if o.halo is not None:
            widths = [self.px(o.halo.width)] + ([] if dashes else [self.px(o.width)])
            covs = stroke_path(halo, width, height, widths)
            paints.append(Paint("halo", covs[0], color=o.halo.color))
            if not dashes:
                paints.append(Paint("stroke", covs[1], color=o.stroke))
                return paints
        cov = stroke_path(stroke, width, height, [self.px(o.width)])[0]
        paints.append(Paint("stroke", cov, color=o.stroke))
        return paints


class AreasLayer(_StrokedLayer):
    """Filled polygons with an optional outline and halo."""

    def _outline(self, geoms, transform, width, height, width_px, dash):
        return draw_areas(geoms, transform, width, height, fill=False, stroke_width_px=width_px,
                          dash_px=dash)[1]

    def _draw(self, transform, height, width):
        o = self.options
        feats = self._features(transform, height, width)
        paints = []
        if len(feats.geometries) == 0:
            return paints
        if o.fill is not None:
            fill_cov, _ = draw_areas(feats.geometries, transform, width, height, fill=True,
                                     stroke_width_px=0.0)
            paints.append(Paint("fill", fill_cov, color=o.fill))
        if o.stroke is not None and o.width > 0:
            paints += self._strokes(feats, transform, height, width)
        return paints


class PointsLayer(_VectorLayer):
    """Point markers (circle or square) with an outline ring in the stroke colour."""

    def _reach_px(self):
        o = self.options
        return (self.px(o.size) + 2 * self.px(o.width or 0)) / 2

    def _draw(self, transform, height, width):
        o = self.options
        feats = self._features(transform, height, width)
        if len(feats.geometries) == 0:
            return []
        paints = []
        size = self.px(o.size)
        if o.stroke is not None and o.width:
            ring = draw_points(feats.geometries, transform, width, height,
                               size_px=size + 2 * self.px(o.width), shape=o.shape)
            paints.append(Paint("stroke", ring, color=o.stroke))
        cov = draw_points(feats.geometries, transform, width, height, size_px=size, shape=o.shape)
        paints.append(Paint("marker", cov, color=o.fill))
        return paints
