"""Layer previews at a reduced size, gathered during the one render pass.

For the review page every layer is shown alone over the background and the stack is shown built
up layer by layer, on a coarse grid shared by the whole canvas (blocks of ``k`` x ``k`` pixels,
anchored at the canvas origin). The walk does not composite anything twice for them: while a
window composites each paint of each layer, :func:`paint_sums` box-sums what the paint brings --
its alpha (coverage x opacity) and, for a raster's colours, alpha x colour -- onto the coarse
grid; a flat colour needs its alpha sums only. The sums of all windows add up (window by window,
in any order, blocks cut by a window edge completed by the neighbour), and
:meth:`LayerPreviews.images` composites the paints once, on the coarse grid, with the layers'
own blend modes: each layer over the background alone, and the stack layer by layer. The last
stack is the finished map itself, box-averaged from the same walk (:func:`block_sums` of each
window's final composite).

On the coarse grid each paint is its box average (mean alpha, alpha-weighted mean colour). A
layer alone over the flat background is then the exact box average of the full-size layer for
the blends linear in the source colour (normal, multiply, screen, overlay) when the layer has one
paint; a halo under a line, or a line over the varying stack below it, is composited from the
averages, which differs from averaging the full-size composite only inside blocks where both vary
(a few levels of 255 along the lines). Previews only: the map, its statistics
and the check use the full-size composite.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from compose.kernels import get as compiled

__all__ = ["PREVIEW_SIDE", "preview_factor", "block_sums", "paint_sums", "PaintSums",
           "PreviewTiles", "LayerPreviews"]

PREVIEW_SIDE = 600       # longest side of the per-layer previews, pixels


def preview_factor(width: int, height: int, max_side: int = PREVIEW_SIDE) -> int:
    """The smallest integer box size that brings the longer side to at most ``max_side``."""
    return max(1, math.ceil(max(width, height) / max_side))


def block_sums(planes: np.ndarray, row0: int, col0: int, k: int) -> tuple[int, int, np.ndarray]:
    """Box sums of float planes (c, h, w) whose first pixel is canvas pixel (row0, col0).

    Blocks are the canvas's own ``k`` x ``k`` grid, so blocks cut by the window edge get partial
    sums that the neighbouring window completes. Returns (first block row, first block column,
    sums (nr, nc, c) float32). Float32 planes are summed by the compiled kernel when there is one
    (:mod:`compose.kernels`): every sum with the same additions in the same order, the same bits.
    """
    c, h, w = planes.shape
    ro, co = row0 % k, col0 % k
    nr, nc = -(-(ro + h) // k), -(-(co + w) // k)
    kernel = compiled()
    if kernel is not None and planes.dtype == np.float32:
        s = np.empty((nr, nc, c), np.float32)
        kernel.box_sums(planes, None, None, None, ro, co, k, s)
        return row0 // k, col0 // k, s
    # sums of k strided views, rows then columns, each added into the blocks it falls in (no
    # padded copy of a window cut off the grid: a missing row adds nothing, as its zero did)
    rows = np.zeros((c, nr, w), dtype=np.float32)
    for i in range(k):                  # the pixel rows at place i of their block
        r = (i - ro) % k
        if r < h:
            part = planes[:, r::k]
            b = (r + ro) // k
            rows[:, b:b + part.shape[1]] += part
    s = np.zeros((c, nr, nc), dtype=np.float32)
    for j in range(k):
        q = (j - co) % k
        if q < w:
            part = rows[:, :, q::k]
            b = (q + co) // k
            s[:, :, b:b + part.shape[2]] += part
    return row0 // k, col0 // k, np.ascontiguousarray(s.transpose(1, 2, 0))


@dataclass(frozen=True, slots=True)
class PaintSums:
    """What one paint of one layer adds to the previews in one window, on the coarse grid from
    block (row, col): ``alpha`` (nr, nc) sums of its alpha; ``color``: its flat sRGB colour, or
    None when it has per-pixel colours, whose alpha-weighted sums are ``weighted`` (nr, nc, 3).
    ``part``: the paint's part (see :class:`compose.layers.base.Paint`)."""

    part: str
    row: int
    col: int
    alpha: np.ndarray
    color: tuple[float, float, float] | None = None
    weighted: np.ndarray | None = None


def _sums(paint, weight: np.ndarray, planes: np.ndarray | None, inner, row0: int, col0: int,
          k: int) -> PaintSums:
    r, c, sa = block_sums(weight[None], row0, col0, k)
    if paint.palette is None:
        red, green, blue = (float(v) for v in paint.color)
        return PaintSums(paint.part, r, c, sa[..., 0], (red, green, blue))
    kernel = compiled()
    table = paint.palette.planes
    if planes is None and kernel is not None and weight.dtype == np.float32 \
            and table.dtype == np.float32 and paint.index.dtype.kind in "iu":
        # the colours looked up and weighted as they are summed (no (3, h, w) planes)
        index = paint.index[inner]
        ro, co = row0 % k, col0 % k
        sw = np.empty((-(-(ro + index.shape[0]) // k), -(-(co + index.shape[1]) // k), 3),
                      np.float32)
        kernel.box_sums(None, table, index, weight, ro, co, k, sw)
        return PaintSums(paint.part, r, c, sa[..., 0], None, sw)
    if planes is None:
        planes = paint.planes()
    weighted = planes[(slice(None),) + inner] * weight
    _, _, sw = block_sums(weighted, row0, col0, k)
    return PaintSums(paint.part, r, c, sa[..., 0], None, sw)


def paint_sums(drawn: list, inner: tuple[slice, slice], row0: int, col0: int, k: int,
               blend: str = "normal") -> tuple[PaintSums, ...]:
    """The :class:`PaintSums` of one layer's paints over a window's core ``inner`` (the core's
    first pixel is canvas pixel (row0, col0)). ``drawn``: (paint, alpha (h, w) with the layer's
    opacity, colour planes (3, h, w), or None for a raster's paint whose colours are looked up
    here) per paint in drawing order, over the padded window.

    With the normal blend the paints are summed as the one layer they make: each paint's alpha
    is weighted by what the paints above it let through (a_j x prod(1 - a_m), m > j: a halo
    under a line counts only where the line leaves it visible), so the weights add up to the
    layer's coverage and the colours to its premultiplied colour. Other blends keep each
    paint's own alpha, composited in turn."""
    cores = [np.broadcast_to(alpha, (planes if planes is not None else paint.index).shape[-2:])[inner]
             for paint, alpha, planes in drawn]
    weights = list(cores)
    if blend == "normal" and len(drawn) > 1:
        through = None
        for j in range(len(drawn) - 1, -1, -1):
            if through is not None:
                weights[j] = cores[j] * through
            if j:
                through = (1 - cores[j]) if through is None else through * (1 - cores[j])
    return tuple(_sums(paint, w, planes, inner, row0, col0, k)
                 for (paint, _, planes), w in zip(drawn, weights))


@dataclass(frozen=True, slots=True)
class PreviewTiles:
    """What one window adds to the previews: per drawn layer (drawing order) the
    :class:`PaintSums` of its paints (empty where it painted nothing) and the box sums of the
    stack up to it (as :func:`block_sums` returns them) for raster layers (None for overlays),
    and the box sums of the window's finished composite."""

    layers: tuple[tuple[PaintSums, ...], ...]
    stacks: tuple[tuple[int, int, np.ndarray] | None, ...]
    final: tuple[int, int, np.ndarray]


class _Paint:
    """The canvas-wide sums of one paint of one layer."""

    def __init__(self, h: int, w: int, color):
        self.alpha = np.zeros((h, w), np.float32)
        self.color = color
        self.weighted = None if color is not None else np.zeros((h, w, 3), np.float32)


class LayerPreviews:
    """Sums the :class:`PreviewTiles` of every window into per-layer preview images.

    ``width`` x ``height``: the canvas; ``n_layers``: the drawn layers; ``background``: sRGB
    floats in [0, 1]; ``blends``: each drawn layer's blend mode (default normal); ``factor``:
    box size (default :func:`preview_factor`).
    """

    def __init__(self, width: int, height: int, n_layers: int,
                 background: tuple[float, float, float], factor: int | None = None,
                 blends: tuple[str, ...] | list[str] | None = None):
        self.k = factor or preview_factor(width, height)
        self.width, self.height = width, height
        self.h, self.w = math.ceil(height / self.k), math.ceil(width / self.k)
        self.n = n_layers
        self.blends = tuple(blends) if blends is not None else ("normal",) * n_layers
        #: per layer: (part, n-th of that part) -> its sums, in the order first painted
        self.paints: list[dict[tuple[str, int], _Paint]] = [{} for _ in range(n_layers)]
        self.final = np.zeros((self.h, self.w, 3), np.float32)
        self.stacks: list[np.ndarray | None] = [None] * n_layers
        rows = np.minimum(self.k, height - np.arange(self.h) * self.k)
        cols = np.minimum(self.k, width - np.arange(self.w) * self.k)
        self.count = (rows[:, None] * cols[None, :]).astype(np.float64)[..., None]
        self.background = np.asarray(background, dtype=np.float64)

    def add(self, tiles: PreviewTiles, window=None) -> None:
        """Add one window's tiles (``window``: its :class:`compose.canvas.Window`, unused)."""
        r, c, s = tiles.final
        self.final[r:r + s.shape[0], c:c + s.shape[1]] += s
        for i, stack in enumerate(tiles.stacks):
            if stack is not None:
                summed = self.stacks[i]
                if summed is None:
                    summed = self.stacks[i] = np.zeros((self.h, self.w, 3), np.float32)
                r, c, s = stack
                summed[r:r + s.shape[0], c:c + s.shape[1]] += s
        for i, sums in enumerate(tiles.layers):
            seen: dict[str, int] = {}
            for p in sums:
                n = seen[p.part] = seen.get(p.part, -1) + 1
                acc = self.paints[i].get((p.part, n))
                if acc is None:
                    acc = self.paints[i][(p.part, n)] = _Paint(self.h, self.w, p.color)
                nr, nc = p.alpha.shape
                acc.alpha[p.row:p.row + nr, p.col:p.col + nc] += p.alpha
                if acc.weighted is not None:
                    if p.weighted is None:      # flat here, per-pixel elsewhere: weight it
                        acc.weighted[p.row:p.row + nr, p.col:p.col + nc] += \
                            p.alpha[..., None] * np.asarray(p.color, np.float32)
                    else:
                        acc.weighted[p.row:p.row + nr, p.col:p.col + nc] += p.weighted
                elif p.weighted is not None or p.color != acc.color:
                    # colours that change between windows: keep alpha-weighted sums from now on
                    acc.weighted = self._weighted_so_far(acc)
                    acc.color = None
                    w = (p.weighted if p.weighted is not None
                         else p.alpha[..., None] * np.asarray(p.color, np.float32))
                    acc.weighted[p.row:p.row + nr, p.col:p.col + nc] += w

    def _sources(self, i: int) -> list[tuple[np.ndarray, np.ndarray]]:
        """(alpha sums (h, w), straight colour (3, h, w) or (3, 1, 1), float32) to composite
        for layer ``i``: its paints in turn, or with the normal blend the one source they add
        up to (flat colours weighted channel by channel, no (h, w, 3) temporaries)."""
        paints = list(self.paints[i].values())
        if self.blends[i] == "normal" and len(paints) > 1:
            alpha = np.sum([p.alpha for p in paints], axis=0)
            planes = np.zeros((3, self.h, self.w), np.float32)
            for p in paints:
                if p.weighted is None:
                    for ch in range(3):
                        planes[ch] += p.alpha * np.float32(p.color[ch])
                else:
                    planes += p.weighted.transpose(2, 0, 1)
            planes /= np.maximum(alpha, np.float32(1e-12))
            return [(alpha, planes)]
        out = []
        for p in paints:
            src: np.ndarray
            if p.weighted is None:
                src = np.asarray(p.color, np.float32).reshape(3, 1, 1)
            else:
                src = p.weighted.transpose(2, 0, 1) / np.maximum(p.alpha, np.float32(1e-12))
            out.append((p.alpha, src))
        return out

    @staticmethod
    def _weighted_so_far(acc: _Paint) -> np.ndarray:
        return acc.alpha[..., None] * np.asarray(acc.color, np.float32)

    def images(self) -> list[tuple[np.ndarray, np.ndarray]]:
        """[(alone, stack)] per drawn layer, each (h, w, 3) uint8."""
        from compose.composite import composite_over

        inv = (1.0 / self.count[..., 0]).astype(np.float32)
        bg = self.background.astype(np.float32).reshape(3, 1, 1)
        stack = np.empty((3, self.h, self.w), np.float32)
        stack[...] = bg
        out = []
        for i in range(self.n):
            alone = np.empty_like(stack)
            alone[...] = bg
            summed = self.stacks[i]
            # the stack composited here only where no summed composite replaces it below
            own = summed is None and i < self.n - 1
            for alpha, src in self._sources(i):
                a = alpha * inv
                if own:
                    composite_over(stack, src, a, self.blends[i], out=stack)
                composite_over(alone, src, a, self.blends[i], out=alone)
            if i == self.n - 1:                     # the stack of every layer: the map itself
                final = _to8(self.final / self.count)
                out.append((final if i == 0 else _to8_planar(alone), final))
                continue
            if summed is not None:                  # the stack as composited, box-averaged
                averaged = (summed / self.count).astype(np.float32)
                stack = np.ascontiguousarray(averaged.transpose(2, 0, 1))
                out.append((_to8_planar(alone), _to8(averaged)))
            else:
                out.append((_to8_planar(alone), _to8_planar(stack)))
        return out


def _to8(x: np.ndarray) -> np.ndarray:
    """Floats in [0, 1] (any shape) -> uint8, rounded half to even (in ``x``'s precision)."""
    y = np.multiply(x, 255)
    np.rint(y, out=y)
    np.clip(y, 0, 255, out=y)
    return y.astype(np.uint8)


def _to8_planar(planes: np.ndarray) -> np.ndarray:
    """:func:`_to8` of planar (3, h, w) floats as an (h, w, 3) image (the same numbers: the
    operations are per element, made on the contiguous planes and the bytes moved after, one
    plane at a time: a quarter of the time of a transposed copy)."""
    code = _to8(planes)
    out = np.empty(code.shape[1:] + (code.shape[0],), np.uint8)
    for c in range(code.shape[0]):
        out[..., c] = code[c]
    return out
