"""The output grid (CRS, affine transform, size) and its windows, the unit of work.

A :class:`Canvas` is north-up with square pixels. It is cut into :class:`Window` tiles; each
window knows the *padded* region to read and paint (its core plus a margin of overlap that
hillshade kernels and strokes need) so neighbouring windows join without seams. The padding
reaches past the canvas edges too: a hillshade at the edge sees the terrain beyond it, and a
line just outside the map still draws its part that shows.
"""
from __future__ import annotations

import dataclasses
import math
from collections.abc import Iterator
from dataclasses import dataclass

from affine import Affine

from compose.errors import StyleError
from compose.limits import check_canvas_size

__all__ = ["Canvas", "Window", "core_window", "DRAFT_SIDE"]

#: Pixels of a draft canvas's longer side at most (:meth:`Canvas.draft`; a draft check,
#: :mod:`compose.check.draft`).
DRAFT_SIDE = 384


@dataclass(frozen=True, slots=True)
class Window:
    """A rectangle of the canvas in pixels, with a margin of overlap.

    ``row, col, height, width`` give the core (what this window writes to the output);
    ``margin`` is how many extra pixels on every side are read and painted (also beyond the
    canvas edges, see :attr:`padded`). Rows run north to south.
    """

    row: int
    col: int
    height: int
    width: int
    margin: int
    canvas_height: int
    canvas_width: int

    @property
    def padded(self) -> tuple[int, int, int, int]:
        """(row, col, height, width) of the padded region: the core grown by ``margin`` on every
        side, past the canvas edges too (row and col may be negative), so the canvas edge is
        padded like any seam between windows."""
        m = self.margin
        return self.row - m, self.col - m, self.height + 2 * m, self.width + 2 * m

    @property
    def inner(self) -> tuple[slice, slice]:
        """Slices that cut the core out of an array covering :attr:`padded`."""
        r0, c0, _, _ = self.padded
        dr, dc = self.row - r0, self.col - c0
        return slice(dr, dr + self.height), slice(dc, dc + self.width)

    @property
    def core(self) -> tuple[slice, slice]:
        """Slices of the full canvas array covered by the core."""
        return slice(self.row, self.row + self.height), slice(self.col, self.col + self.width)


def core_window(window: Window) -> Window:
    """``window`` without its margin (its padded region is its core)."""
    return dataclasses.replace(window, margin=0)


@dataclass(frozen=True, slots=True)
class Canvas:
    """The output grid.

    crs: any CRS string pyproj/rasterio understands (e.g. ``"EPSG:32631"``).
    transform: affine pixel -> CRS transform (north-up: ``transform.e < 0``).
    width, height: pixels.
    dpi: dots per inch, turns widths in points into pixels (1 pt = 1/72 inch).
    """

    crs: str
    transform: Affine
    width: int
    height: int
    dpi: float = 300.0

    def __post_init__(self) -> None:
        if self.width < 1 or self.height < 1:
            raise StyleError(f"canvas must be at least 1 x 1 pixels, got {self.width} x {self.height}")
        if self.transform.b != 0 or self.transform.d != 0 or self.transform.e >= 0:
            raise StyleError("canvas transform must be north-up without rotation")

    @classmethod
    def from_extent(cls, crs: str, extent: tuple[float, float, float, float], pixel: float,
                    dpi: float = 300.0) -> Canvas:
        """Build a canvas covering ``extent = (west, south, east, north)`` at ``pixel`` CRS units.

        The size is rounded up to whole pixels; the west and north edges are kept exactly.
        A canvas over :attr:`compose.limits.Limits.max_pixels` is refused before any work.
        """
        west, south, east, north = (float(v) for v in extent)
        if not all(map(math.isfinite, (west, south, east, north))):
            raise StyleError(f"map.extent: need finite numbers, got {list(extent)}")
        if not (east > west and north > south):
            raise StyleError(f"map.extent: need west < east and south < north, got {list(extent)}")
        if not (pixel > 0 and math.isfinite(pixel)):
            raise StyleError(f"map.pixel: must be > 0, got {pixel}")
        if pixel > min(east - west, north - south):
            raise StyleError(f"map.pixel: {pixel:g} is larger than the extent's shorter side "
                             f"({min(east - west, north - south):g}); the canvas would be one pixel")
        width, height = check_canvas_size((east - west) / pixel, (north - south) / pixel)
        transform = Affine(pixel, 0.0, west, 0.0, -pixel, north)
        return cls(crs=crs, transform=transform, width=width, height=height, dpi=dpi)

    @property
    def pixel(self) -> float:
        """Pixel size in CRS units."""
        return float(self.transform.a)

    @property
    def bounds(self) -> tuple[float, float, float, float]:
        """(west, south, east, north) in CRS units."""
        t = self.transform
        return (t.c, t.f + t.e * self.height, t.c + t.a * self.width, t.f)

    def points_to_pixels(self, points: float) -> float:
        """Convert a length in typographic points (1/72 inch) to pixels at this canvas's dpi."""
        return float(points) * self.dpi / 72.0

    def window_transform(self, window: Window) -> Affine:
        """Affine transform of the padded region of ``window``."""
        r0, c0, _, _ = window.padded
        return self.transform @ Affine.translation(c0, r0)

    def windows(self, size: int = 1024, margin: int = 0) -> Iterator[Window]:
        """Cut the canvas into windows of at most ``size`` x ``size`` core pixels, row-major."""
        if size < 1:
            raise ValueError("window size must be >= 1")
        for row in range(0, self.height, size):
            for col in range(0, self.width, size):
                yield Window(row, col, min(size, self.height - row), min(size, self.width - col),
                             int(margin), self.height, self.width)

    def coarser(self, max_side: int = 1200) -> Canvas:
        """The same extent at a coarser pixel so the longer side is at most ``max_side`` pixels;
        the dpi is scaled with it so strokes and labels keep their size relative to the map.
        (Global decisions from the data, e.g. quantile breaks, sample this.)"""
        factor = max(self.width, self.height) / max_side
        if factor <= 1:
            return self
        return Canvas.from_extent(self.crs, self.bounds, self.pixel * factor, dpi=self.dpi / factor)

    def draft(self, side: int = DRAFT_SIDE) -> Canvas:
        """The same extent and dpi at a pixel a whole number of times coarser, so the longer
        side is at most ``side`` pixels (this canvas when it is already that small): a draft
        check's canvas (:mod:`compose.check.draft`)."""
        factor = math.ceil(max(self.width, self.height) / float(side))
        if factor <= 1:
            return self
        return Canvas.from_extent(self.crs, self.bounds, self.pixel * factor, dpi=self.dpi)

    def whole(self, margin: int = 0) -> Window:
        """One window covering the whole canvas."""
        return Window(0, 0, self.height, self.width, int(margin), self.height, self.width)
