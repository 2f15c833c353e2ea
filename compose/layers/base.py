"""What a layer paints into one window, and the registry of layer kinds.

A layer kind is a class with ``__init__(spec, context)`` (open sources, build colour tables, read
vectors -- once per render), ``margin`` (pixels of overlap it needs around a window), and
``paint(window, transform, height, width) -> list[Paint]`` for the window's padded region.
Adding a kind is one module plus one entry in :data:`LAYER_KINDS` (see ``compose.layers``).
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Protocol

import numpy as np
from affine import Affine

from compose.canvas import Canvas, Window

__all__ = ["Palette", "Paint", "Context", "LayerKind", "palette_from_lut"]


@dataclass(frozen=True, slots=True)
class Palette:
    """A colour lookup table: entry i has colour ``rgb8[i]``.

    rgb8: (n, 3) uint8 sRGB. planes: (3, n) float32 in [0, 1], for np.take per channel.
    values: (n,) data value of each entry (NaN where none: outside low / high, no-data, classes' gaps).
    nodata: index of the no-data entry, or -1.
    """

    rgb8: np.ndarray
    values: np.ndarray
    nodata: int = -1
    planes: np.ndarray = field(init=False)

    def __post_init__(self) -> None:
        object.__setattr__(self, "planes",
                           np.ascontiguousarray(self.rgb8.T.astype(np.float32) / np.float32(255)))

    def color_planes(self, index: np.ndarray) -> np.ndarray:
        """(h, w) uint16 indices (each below the table's length) -> (3, h, w) float32 colour
        planes."""
        out = np.empty((3,) + index.shape, dtype=np.float32)
        for c in range(3):
            # unbuffered; "wrap" is the same as "clip" for indices in range and with uint16
            # indices 1.5-3x faster (no conversion of the indices first)
            np.take(self.planes[c], index, out=out[c], mode="wrap")
        return out


def palette_from_lut(lut, nodata_rgb=None) -> Palette:
    """A :class:`Palette` over every entry of a ramp's lookup table (under, over, no-data
    included); ``nodata_rgb`` (sRGB floats 0-1) replaces the table's own no-data colour."""
    rgb8 = np.array(lut.rgb8, dtype=np.uint8, copy=True)
    if nodata_rgb is not None:
        rgb8[lut.nodata_index] = np.clip(np.rint(np.asarray(nodata_rgb) * 255), 0, 255)
    values = np.full(rgb8.shape[0], np.nan)
    n = min(len(lut.values), rgb8.shape[0])
    values[:n] = lut.values[:n]
    values[lut.nodata_index] = np.nan
    return Palette(rgb8=rgb8, values=values, nodata=lut.nodata_index)


@dataclass(frozen=True, slots=True)
class Paint:
    """One part of a layer in one window (padded region).

    part: "shade", "data", "fill", "stroke", "halo", "text", "marker".
    alpha: (h, w) float32 coverage in [0, 1] (layer opacity not yet applied).
    color: a flat sRGB colour (3 floats in [0, 1]) -- or ``index`` + ``palette`` for rasters.
    opaque: True when the layer knows ``alpha`` is 1 everywhere (the engine then need not look;
    False: not known).
    """

    part: str
    alpha: np.ndarray
    color: tuple[float, float, float] | None = None
    index: np.ndarray | None = None
    palette: Palette | None = None
    opaque: bool = False

    def planes(self) -> np.ndarray:
        """Colour as (3, h, w) float32 (broadcast view for flat colours)."""
        if self.palette is not None:
            return self.palette.color_planes(self.index)
        c = np.asarray(self.color, dtype=np.float32).reshape(3, 1, 1)
        return np.broadcast_to(c, (3,) + self.alpha.shape)


@dataclass
class Context:
    """What every layer kind may use while preparing: the canvas, built ramps, the style, and
    the boxes labels keep clear of."""

    canvas: Canvas
    ramps: dict[str, Any]
    style: Any
    #: canvas pixel boxes (col0, row0, col1, row1) labels keep clear of (page furniture)
    blocked: tuple = ()
    #: boxes of the labels placed so far by earlier label layers (each adds its own), so labels
    #: of different layers keep clear of each other too
    label_boxes: list = field(default_factory=list)
    #: a draft (the reduced check, :mod:`compose.check.draft`): rasters may be read with GDAL's
    #: decimated (block-averaged) reads instead of the exact path
    draft: bool = False


class LayerKind(Protocol):
    spec: Any
    margin: int

    def paint(self, window: Window, transform: Affine, height: int, width: int) -> list[Paint]: ...

    def close(self) -> None: ...
