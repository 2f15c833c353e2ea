"""Box-averaged thumbnails of an image that arrives in row bands (previews, proof sheets)."""
from __future__ import annotations

import math

import numpy as np

__all__ = ["BoxThumbnail"]


class BoxThumbnail:
    """Box-average of a (height, width, 3) uint8 image by an integer ``factor``, fed band by band.

    Also a render sink: :meth:`rows` takes finished rows north to south.
    """

    def __init__(self, width: int, height: int, factor: int):
        self.k = max(1, int(factor))
        self.w, self.h = math.ceil(width / self.k), math.ceil(height / self.k)
        self.sum = np.zeros((self.h, self.w, 3), dtype=np.float64)
        self.cols = np.arange(0, width, self.k)
        rows = np.minimum(self.k, height - np.arange(self.h) * self.k)
        cols = np.minimum(self.k, width - self.cols)
        self.count = (rows[:, None] * cols[None, :]).astype(np.float64)[..., None]

    def add(self, row0: int, rgb8: np.ndarray) -> None:
        """Add rows (n, width, 3) uint8 starting at image row ``row0``."""
        if self.k == 1:
            self.sum[row0:row0 + rgb8.shape[0]] += rgb8
            return
        rows = (row0 + np.arange(rgb8.shape[0])) // self.k
        starts = np.concatenate([[0], np.nonzero(np.diff(rows))[0] + 1])
        # rows first, then columns with the column axis moved to the front: every reduction
        # runs over whole contiguous rows (reduceat along the last axes is ~10x slower)
        rs = np.add.reduceat(rgb8, starts, axis=0, dtype=np.float32)          # (nr, w, 3)
        cs = np.add.reduceat(np.ascontiguousarray(rs.transpose(1, 0, 2)), self.cols, axis=0)
        self.sum[rows[starts]] += cs.transpose(1, 0, 2)

    rows = add

    def image(self) -> np.ndarray:
        """The thumbnail, (h, w, 3) uint8."""
        return np.clip(np.rint(self.sum / self.count), 0, 255).astype(np.uint8)
