"""The relief layer: a muted, tinted hillshade (Horn 1981) coloured through a lookup table.

Shade s in [0, 1] (Lambertian, from :mod:`compose.layers.hillshade`) is quantised to
:data:`compose.ramps.relief.LEVELS` entries and drawn through the relief's colour ramp
(:mod:`compose.ramps.relief`: tint, shadow, strength).
"""
from __future__ import annotations

import numpy as np

from compose.layers.base import Context, Paint, Palette
from compose.layers.hillshade import multidirectional, stretch_factor
from compose.layers.raster import open_raster
from compose.ramps.relief import LEVELS, relief_colors
from compose.sources.raster import cell_size_metres

__all__ = ["ReliefLayer", "relief_palette", "LEVELS", "SAMPLE_WINDOWS", "SAMPLE_SIZE"]

SAMPLE_WINDOWS = 9    # windows of the canvas read to measure the terrain for "auto" stretch
SAMPLE_SIZE = 128     # their side in canvas pixels (9 x 128^2 cells: a steady 95th percentile)


def relief_palette(tint, shadow, strength: float, altitude: float) -> Palette:
    """Lookup table of the relief's LEVELS colours for shade 0..1
    (:func:`compose.ramps.relief.relief_colors`), plus a transparent no-data entry at the end."""
    rgb8, s = relief_colors(tint, shadow, strength, altitude)
    rgb8 = np.vstack([rgb8, [[0, 0, 0]]])                                   # no-data entry
    values = np.append(s, np.nan)
    return Palette(rgb8=rgb8, values=values, nodata=LEVELS)


class ReliefLayer:
    """Hillshaded relief from a DEM (metres), tinted and muted."""

    margin = 2

    def __init__(self, spec, context: Context):
        self.spec = spec
        o = spec.options
        self.options = o
        self.canvas = context.canvas
        self.source = open_raster(spec, self.canvas, decimate=context.draft)
        # the style fills ``shadow`` from the tint when it is not given (compose.ramps.relief.default_shadow)
        self.palette = relief_palette(o.tint, o.shadow, o.strength, o.altitude)
        self.stretch = self._stretch() if o.stretch == "auto" else 1.0
        self.exaggeration = o.exaggeration * self.stretch

    def _stretch(self) -> float:
        """The "auto" vertical factor, from up to SAMPLE_WINDOWS windows spread over the canvas
        read at the canvas's own cell size (decided once, before the window walk)."""
        o = self.options
        wins = list(self.canvas.windows(SAMPLE_SIZE, margin=self.margin))
        pick = np.unique(np.linspace(0, len(wins) - 1, min(SAMPLE_WINDOWS, len(wins))).astype(int))
        samples = []
        for i in pick:
            win = wins[int(i)]
            transform = self.canvas.window_transform(win)
            dem = self.source.read_window(self.canvas, win, o.resampling)
            dx, dy = cell_size_metres(self.canvas.crs, transform, dem.shape[0])
            samples.append((dem, dx, dy))
        return stretch_factor(samples, o.azimuth, o.altitude, o.directions)

    def paint(self, window, transform, height, width) -> list[Paint]:
        o = self.options
        dem = self.source.read_window(self.canvas, window, o.resampling)
        dx, dy = cell_size_metres(self.canvas.crs, transform, height)
        shade = multidirectional(dem, dx, dy, azimuth=o.azimuth, altitude=o.altitude,
                                 exaggeration=self.exaggeration, directions=o.directions)
        valid = np.isfinite(shade)
        shade *= np.float32(LEVELS - 1)          # in place: the shade is ours
        np.rint(shade, out=shade)
        shade[~valid] = LEVELS                   # the no-data entry
        index = shade.astype(np.uint16)
        alpha = valid.astype(np.float32)
        return [Paint("shade", alpha, index=index, palette=self.palette)]

    def close(self) -> None:
        self.source.close()
