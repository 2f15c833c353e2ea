"""The map's vector overlays re-emitted as vector paths and real text for the PDF and SVG page.

Each writer takes a prepared layer of the render (the same features, placed labels, colours and
widths the raster engine drew) and adds matplotlib artists to an axes whose data coordinates are
canvas pixels (x = column, y = row, rows down). Widths and font sizes are points, so at the page's
physical size they match the raster map, whose dpi the page sets (see :mod:`compose.page.layout`).
Adding a vector kind is one function plus one :data:`VECTOR_WRITERS` entry.
"""
from __future__ import annotations

from collections.abc import Callable

import numpy as np
import shapely

from compose.layers.paths import area_path, flatten, to_pixels

__all__ = ["VECTOR_WRITERS", "emit_layer", "is_vector"]


def _parts(geoms, transform) -> list[np.ndarray]:
    """Every line part (and polygon ring) as an (n, 2) array of canvas pixels (col, row)."""
    g = flatten(geoms)
    if not len(g):
        return []
    polys = shapely.get_type_id(g) == 3
    if polys.any():
        g = np.concatenate([g[~polys], shapely.get_rings(g[polys])])
    xy, idx = shapely.get_coordinates(g, return_index=True)
    px = to_pixels(xy, transform)
    cuts = np.flatnonzero(np.diff(idx)) + 1
    return [p for p in np.split(px, cuts) if len(p) > 1]


def _rgb(c) -> tuple[float, float, float]:
    return tuple(float(np.clip(v, 0, 1)) for v in c)


def _stroke(ax, parts, width, color, alpha, dash=None, zorder=0.0):
    from matplotlib import rc_context
    from matplotlib.collections import LineCollection

    kw = {}
    if dash:
        # dash lengths in points, not scaled by the width (the engine draws them in points too)
        kw["linestyles"] = [(0.0, tuple(float(d) for d in dash))]
    with rc_context({"lines.scale_dashes": False}):
        lc = LineCollection(parts, linewidths=width, colors=[_rgb(color)], alpha=alpha,
                            capstyle="round", joinstyle="round", zorder=zorder, **kw)
    ax.add_collection(lc, autolim=False)      # the frame's limits are fixed: no data limits
    return lc


def _lines(ax, layer, transform, z):
    o = layer.options
    parts = _parts(layer.features.geometries, transform)
    if not parts:
        return []
    a = float(layer.spec.opacity)
    out = []
    if o.halo is not None:
        out.append(_stroke(ax, parts, o.halo.width, o.halo.color, a, zorder=z))
    out.append(_stroke(ax, parts, o.width, o.stroke, a, o.dash, zorder=z + 0.1))
    return out


def _areas(ax, layer, transform, z):
    from matplotlib.patches import PathPatch
    from matplotlib.path import Path

    o = layer.options
    geoms = layer.features.geometries
    out = []
    a = float(layer.spec.opacity)
    canvas = layer.canvas
    if o.fill is not None:
        path = area_path(geoms, transform, canvas.width, canvas.height)
        if path is not None:
            v = np.array(path.vertices, float)
            v[:, 1] = canvas.height - v[:, 1]          # display (y up) -> rows down
            patch = PathPatch(Path(v, path.codes), facecolor=_rgb(o.fill), edgecolor="none",
                              alpha=a, zorder=z)
            ax.add_artist(patch)            # (add_patch would measure its extent)
            out.append(patch)
    if o.width > 0:
        parts = _parts(geoms, transform)
        if parts:
            if o.halo is not None:
                out.append(_stroke(ax, parts, o.halo.width, o.halo.color, a, zorder=z + 0.05))
            out.append(_stroke(ax, parts, o.width, o.stroke, a, zorder=z + 0.1))
    return out


def _points(ax, layer, transform, z):
    o = layer.options
    g = flatten(layer.features.geometries)
    if not len(g):
        return []
    px = to_pixels(shapely.get_coordinates(shapely.centroid(g)), transform)
    marker = "o" if o.shape == "circle" else "s"
    a = float(layer.spec.opacity)
    out = []
    if o.stroke is not None and o.width:
        d = o.size + 2 * o.width
        out.append(ax.scatter(px[:, 0], px[:, 1], s=d * d, marker=marker, c=[_rgb(o.stroke)],
                              edgecolors="none", linewidths=0, alpha=a, zorder=z))
    out.append(ax.scatter(px[:, 0], px[:, 1], s=o.size * o.size, marker=marker,
                          c=[_rgb(o.fill)], edgecolors="none", linewidths=0, alpha=a, zorder=z + 0.1))
    return out


def _labels(ax, layer, transform, z):
    """Placed labels as real text at the engine's baseline; the halo as a stroked copy beneath."""
    from matplotlib.patheffects import Stroke

    o = layer.options
    pl = layer.placement
    grow = max(pl.halo_px, 0.0) / 2.0
    a = float(layer.spec.opacity)
    out = []
    for lab in pl.placed:
        b = lab.box
        col = b[0] + grow
        base = b[3] - grow - lab.shape.descent
        kw = dict(fontsize=o.size, family=o.font, weight=o.weight, ha="left", va="baseline",
                  alpha=a, rotation=getattr(lab, "angle", 0.0), rotation_mode="anchor")
        if o.halo is not None:
            t = ax.text(col, base, lab.text, color=_rgb(o.halo.color), zorder=z, **kw)
            t.set_path_effects([Stroke(linewidth=o.halo.width, foreground=_rgb(o.halo.color))])
            out.append(t)
        out.append(ax.text(col, base, lab.text, color=_rgb(o.color), zorder=z + 0.1, **kw))
    along = list(getattr(layer, "along", ()))
    if along:
        out += _along(ax, layer, along, z)
    return out


def _along(ax, layer, along, z):
    """Labels along lines: the glyph outlines as filled paths, exactly where the raster engine
    fills them (the halo as the same outlines stroked beneath), plus each name once as real,
    fully transparent, horizontal text at the label's middle, so text extraction and search find
    it. (Glyph-by-glyph text at changing angles is split apart by text extractors.)"""
    from matplotlib.patches import PathPatch
    from matplotlib.path import Path

    from compose.layers.labels_along import along_path

    o = layer.options
    a = float(layer.spec.opacity)
    out = []
    drawn = along_path(along)
    if drawn is None:
        return out
    path = Path(drawn.vertices, drawn.codes, readonly=True)
    if o.halo is not None:
        out.append(PathPatch(path, facecolor=_rgb(o.halo.color), edgecolor=_rgb(o.halo.color),
                             lw=o.halo.width, alpha=a, joinstyle="round", zorder=z))
    out.append(PathPatch(path, facecolor=_rgb(o.color), edgecolor="none", alpha=a, zorder=z + 0.1))
    for patch in out:
        ax.add_artist(patch)
    for lab in along:
        c = np.mean([g.foot for g in lab.glyphs], axis=0)
        out.append(ax.text(float(c[0]), float(c[1]), lab.text, fontsize=o.size, family=o.font,
                           weight=o.weight, ha="center", va="center", alpha=0.0,
                           color=_rgb(o.color), zorder=z + 0.2))
    return out


#: Vector writer of each overlay kind: (axes, prepared layer, canvas transform, zorder) -> artists.
VECTOR_WRITERS: dict[str, Callable] = {"lines": _lines, "areas": _areas, "points": _points,
                                       "labels": _labels}


def is_vector(kind: str) -> bool:
    """Whether a layer kind is re-emitted as vectors on the page."""
    return kind in VECTOR_WRITERS


def emit_layer(ax, layer, transform, zorder: float) -> list:
    """Add one prepared overlay layer's artists to ``ax`` (canvas pixel coordinates)."""
    return VECTOR_WRITERS[layer.spec.kind](ax, layer, transform, zorder)
