"""BoxThumbnail: box averages of an image fed in bands, against integer box sums (exact)."""
from __future__ import annotations

import numpy as np
import pytest

from compose.output.thumb import BoxThumbnail


def _reference(img: np.ndarray, k: int) -> np.ndarray:
    """Box averages by integer sums over whole and cut blocks, rounded half to even."""
    h, w, _ = img.shape
    rows = np.add.reduceat(img.astype(np.int64), np.arange(0, h, k), axis=0)
    sums = np.add.reduceat(rows, np.arange(0, w, k), axis=1)
    nr = np.minimum(k, h - np.arange(0, h, k))
    nc = np.minimum(k, w - np.arange(0, w, k))
    count = (nr[:, None] * nc[None, :]).astype(np.float64)[..., None]
    return np.clip(np.rint(sums / count), 0, 255).astype(np.uint8)


@pytest.mark.parametrize("k", [1, 3, 11, 16, 17, 300])
@pytest.mark.parametrize("band", [1, 7, 64, 200])
def test_bands_in_order_equal_box_averages(k, band):
    rng = np.random.default_rng(k * 1000 + band)
    img = rng.integers(0, 256, (157, 2100, 3), dtype=np.uint8)      # cut blocks on both edges
    thumb = BoxThumbnail(img.shape[1], img.shape[0], k)
    for r in range(0, img.shape[0], band):
        thumb.rows(r, img[r:r + band])
    assert np.array_equal(thumb.image(), _reference(img, k))


def test_bands_in_any_order_and_only_open_block_rows_kept():
    rng = np.random.default_rng(3)
    img = rng.integers(0, 256, (100, 90, 3), dtype=np.uint8)
    thumb = BoxThumbnail(90, 100, 6)
    starts = list(range(0, 100, 16))
    for r in reversed(starts):
        thumb.rows(r, img[r:r + 16])
    assert np.array_equal(thumb.image(), _reference(img, 6))
    assert not thumb._partial           # every block row finished: no sums held


def test_partial_image_averages_what_arrived_so_far():
    img = np.full((20, 10, 3), 200, dtype=np.uint8)
    thumb = BoxThumbnail(10, 20, 4)
    thumb.rows(0, img[:6])
    out = thumb.image()
    assert out.shape == (5, 3, 3)
    assert (out[0] == 200).all()        # complete block row
    assert (out[1] == 100).all()        # 2 of its 4 rows arrived: sums over the whole block
    assert (out[2:] == 0).all()
    assert len(thumb._partial) == 1


@pytest.mark.parametrize("shape, max_width", [((1500, 1500), 800), ((37, 23), 10), ((101, 99), 7),
                                              ((5, 40), 3), ((17, 17), 16), ((40, 700), 20),
                                              ((30, 90), 2), ((36, 60), 20), ((64, 64), 8)])
def test_box_reduce_is_the_block_mean_and_the_preview_sinks_pixels(shape, max_width):
    """compose.output.html_images.box_reduce (integer sums of strided views, one division) gives
    the plain definition -- each block's mean over the pixels it has, rounded half to even
    (numpy's rint) -- and the same pixels as the PreviewSink fed the image band by band."""
    from compose.output.html_images import PreviewSink, box_reduce

    rng = np.random.default_rng(sum(shape))
    img = rng.integers(0, 256, shape + (3,)).astype(np.uint8)
    out = box_reduce(img, max_width)
    k = -(-shape[1] // max_width)
    want = np.array([[np.rint(img[r:r + k, c:c + k].reshape(-1, 3).mean(axis=0))
                      for c in range(0, shape[1], k)] for r in range(0, shape[0], k)], np.uint8)
    if shape[0] <= 200:                         # the plain loop on the small ones
        assert np.array_equal(out, want)
    sink = PreviewSink(shape[1], shape[0], max_width)
    for r0 in range(0, shape[0], 64):
        sink.rows(r0, img[r0:r0 + 64])
    assert np.array_equal(out, sink.image())
