"""Box-averaged thumbnails of an image that arrives in row bands (previews, proof sheets)."""
from __future__ import annotations

import math

import numpy as np

__all__ = ["BoxThumbnail"]



class BoxThumbnail:
    """Box-average of a (height, width, 3) uint8 image by an integer ``factor``, fed band by band.

    Also a render sink: :meth:`rows` takes finished rows north to south. Only the rows of
    blocks not complete yet are kept as sums (float32); a row of blocks is averaged to 8 bits as
    soon as its last image row arrived, so memory is the 8-bit thumbnail plus the sums of the
    block rows a band cuts (at 16384 px and a factor of 11: 6.7 MB instead of 27 MB of sums).
    Every row must be added exactly once, in any order.
    """

    def __init__(self, width: int, height: int, factor: int):
        self.k = max(1, int(factor))
        self.w, self.h = math.ceil(width / self.k), math.ceil(height / self.k)
        self.width, self.height = width, height
        # sums of whole uint8 values stay exact in float32 below 2**24 (65,793 pixels a block)
        self._dtype = np.float32 if self.k <= 256 else np.float64
        self.cols = np.arange(0, width, self.k)
        self._image: np.ndarray | None = None           # finished block rows, 8-bit
        self._partial: dict[int, np.ndarray] = {}       # block row -> its sums (w, 3) so far
        self._seen = np.zeros(self.h, dtype=np.int64)   # image rows added per block row

    @property
    def count(self) -> np.ndarray:
        """Pixels in each block, (h, w, 1) float64 (blocks at the right and bottom edges may be
        cut)."""
        return (self._block_rows()[:, None] * self._block_cols()[None, :]).astype(np.float64)[..., None]

    def _block_rows(self) -> np.ndarray:
        return np.minimum(self.k, self.height - np.arange(self.h) * self.k)

    def _block_cols(self) -> np.ndarray:
        return np.minimum(self.k, self.width - self.cols)

    def _target(self) -> np.ndarray:
        if self._image is None:
            self._image = np.zeros((self.h, self.w, 3), dtype=np.uint8)
        return self._image

    def add(self, row0: int, rgb8: np.ndarray) -> None:
        """Add rows (n, width, 3) uint8 starting at image row ``row0``."""
        n = rgb8.shape[0]
        if n == 0:
            return
        if self.k == 1:         # each block is one pixel: its average is the pixel itself
            self._target()[row0:row0 + n] = rgb8
            return
        k = self.k
        off = row0 % k
        nr = -(-(off + n) // k)
        br0 = row0 // k
        # the sums so far of the block rows these rows reach into (zeros for new ones)
        sums_rows = np.stack([self._partial.pop(b) if b in self._partial
                              else np.zeros((self.w, 3), dtype=self._dtype)
                              for b in range(br0, br0 + nr)])
        # whole-number sums: each block row's rows summed down the band (numpy's reduction
        # along the first axis, in an integer type that holds k rows of 255), then k strided
        # column views added; the float sums then hold the same whole numbers (exact: see
        # __init__). About 5 x faster than summing zero-padded float32 copies.
        acc = np.uint16 if k <= 16 else np.uint32 if k <= 4096 else np.uint64
        cuts = np.append(np.maximum(np.arange(br0, br0 + nr) * k - row0, 0), n)
        wb = self.width // k                        # whole blocks across
        down = np.empty((nr, self.width, 3), acc)
        for i in range(nr):
            rgb8[cuts[i]:cuts[i + 1]].sum(axis=0, dtype=acc, out=down[i])
        if wb:
            block = down[:, 0:wb * k:k].copy()
            for j in range(1, k):
                block += down[:, j:wb * k:k]
            sums_rows[:, :wb] += block
        if wb < self.w:                             # the cut blocks at the right edge
            sums_rows[:, wb] += down[:, wb * k:].sum(axis=1, dtype=np.uint64)
        # rows of each block row added now; complete block rows become 8-bit averages
        starts = np.arange(br0, br0 + nr) * k
        self._seen[br0:br0 + nr] += (np.minimum(starts + k, row0 + n) - np.maximum(starts, row0))
        full = self._block_rows()
        cols = self._block_cols().astype(np.float64)[:, None]
        image = self._target()
        for i, b in enumerate(range(br0, br0 + nr)):
            if self._seen[b] >= full[b]:
                image[b] = np.clip(np.rint(sums_rows[i].astype(np.float64) / (full[b] * cols)),
                                   0, 255).astype(np.uint8)
            else:
                self._partial[b] = sums_rows[i].copy()

    rows = add

    def image(self) -> np.ndarray:
        """The thumbnail, (h, w, 3) uint8 (blocks no row was added to are 0)."""
        image = self._target()
        if self._partial:       # block rows still missing image rows: averaged over their blocks
            out = image.copy()
            full = self._block_rows()
            cols = self._block_cols().astype(np.float64)[:, None]
            for b, s in self._partial.items():
                out[b] = np.clip(np.rint(s.astype(np.float64) / (full[b] * cols)), 0, 255).astype(np.uint8)
            return out
        return image
