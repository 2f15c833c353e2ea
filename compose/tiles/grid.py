"""The Web Mercator tile grid (EPSG:3857, 256-pixel tiles, x east from 180 W, y south from the
top at about 85.05 N, ``z/x/y``): tile bounds and the tiles that cover an extent.

The sphere's radius is the WGS 84 semi-major axis, 6 378 137 m, so the square world spans
+-pi * 6 378 137 m = +-20 037 508.342789244 m on both axes.
"""
from __future__ import annotations

import math

from affine import Affine

__all__ = ["TILE", "ORIGIN", "CRS", "tile_bounds", "tile_span", "tile_range", "parse_zooms",
           "zoom_canvas"]

TILE = 256
ORIGIN = math.pi * 6378137.0      # half the world's width in metres
CRS = "EPSG:3857"


def tile_span(z: int) -> float:
    """Width (= height) of one tile at zoom ``z`` in metres of EPSG:3857."""
    return 2.0 * ORIGIN / (1 << z)


def tile_bounds(z: int, x: int, y: int) -> tuple[float, float, float, float]:
    """(west, south, east, north) of tile z/x/y in EPSG:3857 metres."""
    s = tile_span(z)
    west = -ORIGIN + x * s
    north = ORIGIN - y * s
    return west, north - s, west + s, north


def tile_range(z: int, bounds: tuple[float, float, float, float]) -> tuple[int, int, int, int]:
    """(x0, y0, x1, y1), inclusive, of the tiles at zoom ``z`` meeting ``bounds`` (EPSG:3857)."""
    s = tile_span(z)
    n = (1 << z) - 1
    west, south, east, north = bounds
    x0 = min(n, max(0, math.floor((west + ORIGIN) / s)))
    x1 = min(n, max(0, math.ceil((east + ORIGIN) / s) - 1))
    y0 = min(n, max(0, math.floor((ORIGIN - north) / s)))
    y1 = min(n, max(0, math.ceil((ORIGIN - south) / s) - 1))
    return x0, y0, x1, y1


def zoom_canvas(z: int, tiles: tuple[int, int, int, int], dpi: float):
    """The canvas covering the tile block ``tiles`` at zoom ``z``: its windows of :data:`TILE`
    pixels are exactly the tiles."""
    from compose.canvas import Canvas

    x0, y0, x1, y1 = tiles
    west, _, _, north = tile_bounds(z, x0, y0)
    px = tile_span(z) / TILE
    return Canvas(crs=CRS, transform=Affine(px, 0.0, west, 0.0, -px, north),
                  width=(x1 - x0 + 1) * TILE, height=(y1 - y0 + 1) * TILE, dpi=dpi)


def parse_zooms(text: str) -> list[int]:
    """``"4-12"`` or ``"7"`` or ``"4,6,8"`` -> zoom levels (0-22)."""
    out: set[int] = set()
    try:
        for part in str(text).split(","):
            if "-" in part:
                a, b = (int(v) for v in part.split("-", 1))
                out.update(range(min(a, b), max(a, b) + 1))
            else:
                out.add(int(part))
    except ValueError:
        raise ValueError(f"--zoom: expected levels like 4-12 or 7 or 4,6,8, got {text!r}") from None
    if not out or min(out) < 0 or max(out) > 22:
        raise ValueError(f"--zoom: levels must be within 0-22, got {text!r}")
    return sorted(out)
