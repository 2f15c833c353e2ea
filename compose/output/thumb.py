"""Box-averaged thumbnails of an image that arrives in row bands (previews, proof sheets)."""
from __future__ import annotations

import math

import numpy as np

__all__ = ["BoxThumbnail"]

_CHUNK = 1024    # columns per scratch block of :meth:`BoxThumbnail.add` (rounded to whole blocks)


class BoxThumbnail:
    """Box-average of a (height, width, 3) uint8 image by an integer ``factor``, fed band by band.

    Also a render sink: :meth:`rows` takes finished rows north to south.
    """

    def __init__(self, width: int, height: int, factor: int):
        self.k = max(1, int(factor))
        self.w, self.h = math.ceil(width / self.k), math.ceil(height / self.k)
        self.width, self.height = width, height
        # sums of whole uint8 values stay exact in float32 below 2**24 (65,793 pixels a block)
        self.sum = np.zeros((self.h, self.w, 3), dtype=np.float32 if self.k <= 256 else np.float64)
        self.cols = np.arange(0, width, self.k)

    @property
    def count(self) -> np.ndarray:
        """Pixels in each block, (h, w, 1) float64 (blocks at the right and bottom edges may be
        cut)."""
        rows = np.minimum(self.k, self.height - np.arange(self.h) * self.k)
        cols = np.minimum(self.k, self.width - self.cols)
        return (rows[:, None] * cols[None, :]).astype(np.float64)[..., None]

    def add(self, row0: int, rgb8: np.ndarray) -> None:
        """Add rows (n, width, 3) uint8 starting at image row ``row0``."""
        if self.k == 1:
            self.sum[row0:row0 + rgb8.shape[0]] += rgb8
            return
        k, n = self.k, rgb8.shape[0]
        off = row0 % k
        nr = -(-(off + n) // k)
        # column chunks of whole blocks keep the float32 scratch small at any canvas width
        step = max(1, _CHUNK // k) * k
        for c0 in range(0, rgb8.shape[1], step):
            part = rgb8[:, c0:c0 + step]
            nc = -(-part.shape[1] // k)
            padded = np.zeros((nr * k, nc * k, 3), dtype=np.float32)   # zeros add nothing
            padded[off:off + n, :part.shape[1]] = part
            # sums of k strided views (rows, then columns): ~10x faster than np.add.reduceat here
            rows = padded[0::k].copy()
            for i in range(1, k):
                rows += padded[i::k]
            sums = rows[:, 0::k].copy()
            for i in range(1, k):
                sums += rows[:, i::k]
            self.sum[row0 // k:row0 // k + nr, c0 // k:c0 // k + nc] += sums

    rows = add

    def image(self) -> np.ndarray:
        """The thumbnail, (h, w, 3) uint8."""
        return np.clip(np.rint(self.sum.astype(np.float64) / self.count), 0, 255).astype(np.uint8)
