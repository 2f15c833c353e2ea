"""Layer previews at a reduced size, gathered during the one render pass.

For the review page every layer is shown alone over the background and the stack is shown built
up layer by layer. The engine composites each layer alone (core pixels only) and, after each
layer, has the stack so far; :func:`block_sums` box-sums both onto a coarse grid shared by the
whole canvas (block ``k`` x ``k`` pixels, anchored at the canvas origin), so each window
contributes partial sums that add up, window by window and in any order, to the box average of
the full-size image. :class:`LayerPreviews` is the sink that adds them up.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["PREVIEW_SIDE", "preview_factor", "block_sums", "PreviewTiles", "LayerPreviews"]

PREVIEW_SIDE = 600       # longest side of the per-layer previews, pixels


def preview_factor(width: int, height: int, max_side: int = PREVIEW_SIDE) -> int:
    """The smallest integer box size that brings the longer side to at most ``max_side``."""
    return max(1, math.ceil(max(width, height) / max_side))


def block_sums(planes: np.ndarray, row0: int, col0: int, k: int) -> tuple[int, int, np.ndarray]:
    """Box sums of float planes (3, h, w) whose first pixel is canvas pixel (row0, col0).

    Blocks are the canvas's own ``k`` x ``k`` grid, so blocks cut by the window edge get partial
    sums that the neighbouring window completes. Returns (first block row, first block column,
    sums (nr, nc, 3) float32).
    """
    c, h, w = planes.shape
    ro, co = row0 % k, col0 % k
    nr, nc = -(-(ro + h) // k), -(-(co + w) // k)
    if ro or co or nr * k != h or nc * k != w:     # pad to whole blocks (zeros add nothing)
        padded = np.zeros((c, nr * k, nc * k), dtype=planes.dtype)
        padded[:, ro:ro + h, co:co + w] = planes
        planes = padded
    # sums of k strided views, rows then columns: ~4x faster than np.add.reduceat here
    rows = planes[:, 0::k].astype(np.float32)
    for i in range(1, k):
        rows += planes[:, i::k]
    s = rows[:, :, 0::k].copy()
    for i in range(1, k):
        s += rows[:, :, i::k]
    return row0 // k, col0 // k, np.ascontiguousarray(s.transpose(1, 2, 0))


@dataclass(frozen=True, slots=True)
class PreviewTiles:
    """What one window adds to the previews: per drawn layer (drawing order) the box sums of the
    layer alone (None where it painted nothing) and of the stack up to it, each as
    :func:`block_sums` returns it. The first layer's ``alone`` is its ``stack``."""

    alone: tuple[tuple[int, int, np.ndarray] | None, ...]
    stack: tuple[tuple[int, int, np.ndarray], ...]


class LayerPreviews:
    """Sums the :class:`PreviewTiles` of every window into per-layer preview images.

    ``width`` x ``height``: the canvas; ``n_layers``: the drawn layers; ``background``: sRGB
    floats in [0, 1] (what a layer that painted nothing in a window shows there);
    ``factor``: box size (default :func:`preview_factor`).
    """

    def __init__(self, width: int, height: int, n_layers: int,
                 background: tuple[float, float, float], factor: int | None = None):
        self.k = factor or preview_factor(width, height)
        self.width, self.height = width, height
        self.h, self.w = math.ceil(height / self.k), math.ceil(width / self.k)
        shape = (n_layers, self.h, self.w, 3)
        # float32 sums (the windows' block sums are float32 already): half the memory of float64
        # for every layer at any canvas size; blocks cut by a window edge round once more
        self.alone = np.zeros(shape, dtype=np.float32)
        self.stack = np.zeros(shape, dtype=np.float32)
        rows = np.minimum(self.k, height - np.arange(self.h) * self.k)
        cols = np.minimum(self.k, width - np.arange(self.w) * self.k)
        self.count = (rows[:, None] * cols[None, :]).astype(np.float64)[..., None]
        self.background = np.asarray(background, dtype=np.float64)

    def add(self, tiles: PreviewTiles, window) -> None:
        """Add one window's tiles (``window``: its :class:`compose.canvas.Window`)."""
        for i, (alone, stack) in enumerate(zip(tiles.alone, tiles.stack)):
            r, c, s = stack
            self.stack[i, r:r + s.shape[0], c:c + s.shape[1]] += s
            if i == 0:
                alone = stack
            if alone is None:           # the layer painted nothing here: the background shows
                r, c, n = _block_counts(window, self.k)
                self.alone[i, r:r + n.shape[0], c:c + n.shape[1]] += (n[..., None] * self.background
                                                                      ).astype(np.float32)
            else:
                r, c, s = alone
                self.alone[i, r:r + s.shape[0], c:c + s.shape[1]] += s

    def images(self) -> list[tuple[np.ndarray, np.ndarray]]:
        """[(alone, stack)] per drawn layer, each (h, w, 3) uint8."""
        return [(_to8(a / self.count), _to8(s / self.count)) for a, s in zip(self.alone, self.stack)]


def _axis_counts(start: int, length: int, k: int) -> np.ndarray:
    blocks = np.arange(start // k, (start + length - 1) // k + 1)
    return np.minimum(start + length, (blocks + 1) * k) - np.maximum(start, blocks * k)


def _block_counts(window, k: int) -> tuple[int, int, np.ndarray]:
    """(first block row, first block column, pixels of the window's core in each block)."""
    rows = _axis_counts(window.row, window.height, k)
    cols = _axis_counts(window.col, window.width, k)
    return window.row // k, window.col // k, np.outer(rows, cols).astype(np.float64)


def _to8(x: np.ndarray) -> np.ndarray:
    return np.clip(np.rint(x * 255), 0, 255).astype(np.uint8)
