"""The ``contours`` layer: isolines of a raster (an elevation model) at a fixed interval, drawn
like lines -- stroke, width, halo -- with every ``index``-th line heavier.

Isolines are traced per window on the window's padded grid (marching squares, contourpy's
``serial`` algorithm, linear interpolation along cell edges), so memory stays bounded and
neighbouring windows agree: a line segment depends only on the four values of its cell. Levels
are ``base + k * interval`` for every whole k; a level is an index line when k is a multiple of
``index``. Pixel centres carry the values, as the raster read onto the canvas gives them.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from compose.layers.base import Context, Paint
from compose.layers.raster import open_raster
from compose.style.kinds import DEFAULT_STROKE, RESAMPLING, Halo
from compose.style.validate import RGB, choice, color, integer, number, option, table_of

__all__ = ["ContourOptions", "ContoursLayer", "contour_levels", "isolines"]

MAX_LEVELS = 2000   # isolines per window at most (a tiny interval over a tall range is an error)


@dataclass(frozen=True, slots=True, kw_only=True)
class ContourOptions:
    """Isolines every ``interval`` data units (metres for an elevation model) from ``base``;
    ``index``: every index-th line (counting from ``base``) is drawn ``index_width`` wide (0 or
    absent: no index lines). ``width``, ``index_width`` and the halo's width in points."""

    band: int = option(integer(ge=1), 1)
    resampling: str = option(choice(RESAMPLING, "resampling method"), "bilinear")
    interval: float = option(number(gt=0))
    base: float = option(number(), 0.0)
    index: int = option(integer(ge=0), 0)
    stroke: RGB = option(color(), DEFAULT_STROKE)
    width: float = option(number(gt=0), 0.35)
    index_width: float = option(number(gt=0), 0.8)
    halo: Halo | None = option(table_of(Halo), None)


def contour_levels(lo: float, hi: float, interval: float, base: float = 0.0
                   ) -> list[tuple[float, int]]:
    """(level, k) for every level ``base + k * interval`` within [lo, hi]."""
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi < lo:
        return []
    k0, k1 = math.ceil((lo - base) / interval), math.floor((hi - base) / interval)
    if k1 - k0 + 1 > MAX_LEVELS:
        raise ValueError(f"{k1 - k0 + 1} contour levels in one window; use a larger interval")
    return [(base + k * interval, k) for k in range(k0, k1 + 1)]


def isolines(values: np.ndarray, level: float) -> list[np.ndarray]:
    """Isolines of ``values`` (h, w) at ``level`` as (n, 2) arrays of (column, row) positions
    in pixel units, (0, 0) at the centre of the first pixel. NaN cells are left out."""
    import contourpy

    gen = contourpy.contour_generator(z=np.ma.masked_invalid(values), name="serial",
                                      line_type=contourpy.LineType.Separate)
    return [np.asarray(line, dtype=float) for line in gen.lines(level) if len(line) >= 2]


class ContoursLayer:
    """Isolines of a raster, drawn as lines (see the module docstring)."""

    def __init__(self, spec, context: Context):
        self.spec = spec
        self.options = o = spec.options
        self.canvas = context.canvas
        self.source = open_raster(spec, self.canvas, decimate=context.draft)
        px = self.canvas.points_to_pixels
        reach = max(px(o.width), px(o.index_width) if o.index else 0.0)
        if o.halo is not None:
            reach = max(reach, px(o.halo.width) + (px(o.index_width) - px(o.width)
                                                   if o.index else 0.0))
        self.margin = int(math.ceil(reach / 2)) + 2

    def _lines(self, values: np.ndarray, transform) -> tuple[list[Any], list[Any]]:
        """(regular, index) isolines of a window as shapely LineStrings in CRS units."""
        import shapely

        o = self.options
        finite = values[np.isfinite(values)]
        if finite.size == 0:
            return [], []
        regular: list[Any] = []
        heavy: list[Any] = []
        for level, k in contour_levels(float(finite.min()), float(finite.max()), o.interval,
                                       o.base):
            for line in isolines(values, level):
                # pixel centre (col + 0.5, row + 0.5) -> CRS through the window's transform
                x = transform.c + (line[:, 0] + 0.5) * transform.a
                y = transform.f + (line[:, 1] + 0.5) * transform.e
                (heavy if o.index and k % o.index == 0 else regular).append(
                    shapely.linestrings(np.column_stack([x, y])))
        return regular, heavy

    def paint(self, window, transform, height, width) -> list[Paint]:
        from compose.layers.draw import draw_lines

        o = self.options
        values = self.source.read_window(self.canvas, window, o.resampling)
        regular, heavy = self._lines(values, transform)
        if not regular and not heavy:
            return []
        px = self.canvas.points_to_pixels

        def cover(extra_px: float) -> np.ndarray:
            cov = np.zeros((height, width), dtype=np.float32)
            for lines, w in ((regular, px(o.width)), (heavy, px(o.index_width))):
                if lines:
                    np.maximum(cov, draw_lines(lines, transform, width, height,
                                               width_px=w + extra_px), out=cov)
            return cov

        paints = []
        if o.halo is not None:
            paints.append(Paint("halo", cover(px(o.halo.width) - px(o.width)), color=o.halo.color))
        paints.append(Paint("stroke", cover(0.0), color=o.stroke))
        return paints

    def close(self) -> None:
        self.source.close()
