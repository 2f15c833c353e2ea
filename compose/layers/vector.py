"""Vector overlays: ``lines``, ``areas`` and ``points`` from anything OGR reads, drawn antialiased
by matplotlib's Agg renderer at exact pixel geometry (see :mod:`compose.layers.draw`)."""
from __future__ import annotations

import threading

import numpy as np
import shapely

from compose.layers.base import Context, Paint
from compose.layers.draw import draw_areas, draw_lines, draw_points
from compose.sources.vector import DRAFT_TOLERANCE, Features, VectorSource, simplified

__all__ = ["LinesLayer", "AreasLayer", "PointsLayer", "DRAFT_TOLERANCE"]


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


_RELOAD = threading.Lock()      # a released layer's features read again (rare: see release)


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
        self.source.check_overlap(self.canvas)
        self.px = self.canvas.points_to_pixels
        self.margin = int(np.ceil(self._reach_px())) + 2
        self._held: Features | None = self._cut()

    def _cut(self) -> Features:
        """The features cut once to the canvas (grown by the margin; a draft's simplified);
        per window only selected, so dashes keep their phase across windows (Agg restarts a dash
        pattern where a clipped line re-enters)."""
        west, south, east, north = self.canvas.bounds
        pad = (self.margin + 2) * self.canvas.pixel
        features = self.source.load(self.canvas.crs).in_box(
            (west - pad, south - pad, east + pad, north + pad))
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
                    self._held = self._cut()
                features = self._held
        return features

    def release(self) -> None:
        """Drop this process's copy of the features while another process draws them
        (:class:`compose.drawer.DrawAhead`); a later use reads them again."""
        self._held = None

    def __getstate__(self) -> dict:
        state = dict(self.__dict__)
        state["_held"] = self.features      # a pickled layer carries its features
        return state

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

    def paint(self, window, transform, height, width):
        feats = self._features(transform, height, width)
        if len(feats.geometries) == 0:
            return []
        return self._strokes(feats, transform, height, width)


class AreasLayer(_StrokedLayer):
    """Filled polygons with an optional outline and halo."""

    def _outline(self, geoms, transform, width, height, width_px, dash):
        return draw_areas(geoms, transform, width, height, fill=False, stroke_width_px=width_px,
                          dash_px=dash)[1]

    def paint(self, window, transform, height, width):
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

    def paint(self, window, transform, height, width):
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
