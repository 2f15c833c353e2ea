"""The ``labels`` layer: point labels from an attribute, with a halo, placed once on the whole
canvas by priority with overlap avoidance (so windows agree), then drawn window by window."""
from __future__ import annotations

import numpy as np
import shapely

from compose.errors import StyleError
from compose.layers.base import Context, Paint
from compose.layers.label_placement import (
    LabelItem,
    LinesToAvoid,
    area_anchor,
    draw_labels,
    place_labels,
)
from compose.limits import MAX_LABEL_CHARS
from compose.sources.vector import VectorSource
from compose.style.kinds import AVOIDABLE

__all__ = ["LabelsLayer", "measures_text", "load_text_modules"]


def measures_text(style) -> bool:
    """Whether preparing ``style`` measures text with matplotlib's package: it has a ``labels``
    layer whose font :mod:`compose.layers.label_text` cannot find without asking matplotlib (its
    memo does not hold it); otherwise labels are measured by FreeType alone."""
    from compose.layers.label_text import remembered

    return any(spec.kind == "labels" and spec.enabled
               and not remembered(spec.options.font, spec.options.weight)
               for spec in style.layers)


def load_text_modules() -> None:
    """Load the modules that measuring label text with matplotlib loads (its font manager and
    text paths, TeX's DVI reader left for its first use). A render that forks its page process
    calls it first when :func:`measures_text`: the page's writers need the same modules, so the
    child inherits them instead of loading them again; the render would load them while
    preparing anyway. Errors are left for the measuring to raise."""
    from compose.timeline import span

    try:
        with span("text modules"):
            from compose.lazy import on_first_use

            on_first_use("matplotlib.dviread")
            import matplotlib.font_manager  # noqa: F401
            import matplotlib.textpath  # noqa: F401
    except Exception:                                  # pragma: no cover - reported on use
        pass


def _short(text: str) -> str:
    """A label is a name, not a paragraph: cut at MAX_LABEL_CHARS with an ellipsis."""
    return text if len(text) <= MAX_LABEL_CHARS else text[:MAX_LABEL_CHARS - 1] + "\u2026"


def _avoided(spec, context: Context) -> LinesToAvoid:
    """The features of the enabled layers a labels layer's ``avoid`` names (lines; areas'
    outlines; a disabled one is passed over), in canvas pixels: each read as its own layer
    reads it (its source, table and ``where``) but not simplified, in the canvas's CRS, cut to
    the canvas -- on a draft's canvas too (whose lines layers read theirs simplified, or in the
    process of :mod:`compose.layers.early_marks`), so a draft keeps off the same features as
    the full check."""
    geoms: list = []
    for other in (context.style.avoided(spec) if context.style is not None else ()):
        if other.kind not in AVOIDABLE:     # (checked when the style loads)
            raise StyleError(f'layer "{spec.name}": avoid: layer "{other.name}" is a '
                             f"{other.kind} layer; avoid needs a lines or areas layer")
        o = other.options
        source = VectorSource(other.source, layer=other.name, table=o.table, where=o.where)
        # cut to the canvas: label boxes lie inside it
        geoms.extend(source.load(context.canvas.crs).in_box(context.canvas.bounds).geometries)
    return LinesToAvoid(geoms, context.canvas.transform)


class LabelsLayer:
    """Text labels; ``unplaced`` lists the labels that found no free position."""

    def __init__(self, spec, context: Context):
        self.spec = spec
        self.options = o = spec.options
        canvas = self.canvas = context.canvas
        self.source = VectorSource(spec.source, layer=spec.name, table=o.table, where=o.where)
        self.source.check_overlap(canvas)
        feats = self.source.load(canvas.crs)
        items = []
        lines = []
        for geom, props in zip(feats.geometries, feats.properties):
            if o.text not in props:
                raise StyleError(f'layer "{spec.name}": text attribute \'{o.text}\' not found; '
                                 f"attributes: {', '.join(sorted(props))}")
            text = props.get(o.text)
            if text is None or str(text).strip() == "":
                continue
            area = None
            if geom.geom_type == "Point":
                pt = geom
            elif geom.geom_type in ("Polygon", "MultiPolygon"):
                # the pole of inaccessibility, to a tenth of a pixel
                pt, area = area_anchor(geom, abs(canvas.transform.a) / 10)
            else:
                pt = shapely.point_on_surface(geom)
            prio = 0.0
            if o.priority:
                v = props.get(o.priority)
                try:
                    prio = float(v) if v is not None else 0.0
                except (TypeError, ValueError):
                    raise StyleError(f'layer "{spec.name}": priority: attribute \'{o.priority}\' '
                                     f"must hold numbers, got {str(v)[:40]!r}") from None
            text = _short(str(text))
            if o.along and geom.geom_type in ("LineString", "MultiLineString"):
                lines.append((geom, text, prio))
                continue
            items.append(LabelItem(pt.x, pt.y, text, -np.inf if np.isnan(prio) else prio, area))
        px = canvas.points_to_pixels
        halo_px = self.halo_px = px(o.halo.width) if o.halo is not None else 0.0
        avoid = _avoided(spec, context) if items and o.avoid else None
        self.placement = place_labels(items, canvas.transform, canvas.width, canvas.height,
                                      size_px=px(o.size), font=o.font, weight=o.weight,
                                      halo_px=halo_px, offset_px=px(o.offset),
                                      blocked=tuple(context.blocked) + tuple(context.label_boxes),
                                      avoid=avoid)
        self.along, self.along_unplaced = [], []
        if lines:
            # one name, one line: the pieces of a named line are joined before placing
            named: dict[str, tuple[list, float]] = {}
            for geom, text, prio in lines:
                geoms, best = named.get(text, ([], -np.inf))
                named[text] = (geoms + [geom], max(best, prio))
            if o.follow:                             # the pieces a selected name may run along
                more = VectorSource(spec.source, layer=spec.name, table=o.table, where=o.follow)
                extra = more.load(canvas.crs)
                for geom, props in zip(extra.geometries, extra.properties):
                    text = props.get(o.text)
                    text = None if text is None else _short(str(text))
                    if text in named and geom.geom_type in ("LineString", "MultiLineString"):
                        named[text][0].append(geom)
            lines = [(shapely.line_merge(shapely.union_all(g)), t, p) for t, (g, p) in named.items()]
            from compose.layers.label_placement import BoxGrid
            from compose.layers.labels_along import place_along

            grid = BoxGrid()
            for box in (list(context.blocked) + list(context.label_boxes)
                        + [lab.box for lab in self.placement.placed]):
                grid.add(tuple(float(v) for v in box))
            self.along, self.along_unplaced = place_along(
                lines, canvas.transform, canvas.width, canvas.height, size_px=px(o.size),
                font=o.font, weight=o.weight, halo_px=halo_px, spacing_px=px(o.spacing), grid=grid)
        context.label_boxes.extend([lab.box for lab in self.placement.placed]
                                   + [box for lab in self.along for box in lab.glyph_boxes])
        self.margin = 0  # labels are placed on the whole canvas and drawn clipped per window

    @property
    def unplaced(self) -> list[str]:
        return ([str(getattr(it, "text", it)) for it in self.placement.unplaced]
                + list(self.along_unplaced))

    def paint(self, window, transform, height, width) -> list[Paint]:
        o = self.options
        text_cov, halo_cov = draw_labels(self.placement, transform, width, height)
        if self.along:
            from compose.layers.labels_along import draw_along
            from compose.layers.paths import to_pixels

            c0, r0 = to_pixels(np.array([[transform.c, transform.f]]), self.canvas.transform)[0]
            t2, h2 = draw_along(self.along, c0, r0, width, height, self.halo_px)
            if t2 is not None:
                # in place: both are this call's own arrays (a fresh 1 MB array per window
                # and plane was a tenth of the layer's painting, its pages faulted in anew)
                np.maximum(text_cov, t2, out=text_cov)
                if halo_cov is not None and h2 is not None:
                    np.maximum(halo_cov, h2, out=halo_cov)
        paints = []
        if o.halo is not None and halo_cov is not None and np.any(halo_cov):
            paints.append(Paint("halo", halo_cov, color=o.halo.color))
        if np.any(text_cov):
            paints.append(Paint("text", text_cov, color=o.color))
        return paints

    def close(self) -> None:
        pass
