"""Layer previews gathered during the one render pass (compose.previews)."""
from __future__ import annotations

import numpy as np
import pytest

from compose.canvas import Canvas
from compose.engine import ArraySink, prepare, run
from compose.output.thumb import BoxThumbnail
from compose.previews import LayerPreviews, block_sums
from compose.style import load_style


@pytest.mark.parametrize("row0, col0, k", [(0, 0, 3), (5, 7, 3), (1024, 2048, 4), (3, 1, 1),
                                           (0, 0, 7)])
def test_block_sums_match_a_pixel_by_pixel_sum(row0, col0, k):
    # reference: every pixel added to its block of the canvas grid one by one (np.add.at)
    planes = np.random.default_rng(1).random((3, 70, 50)).astype(np.float32)
    r, c, sums = block_sums(planes, row0, col0, k)
    rows, cols = (row0 + np.arange(70)) // k, (col0 + np.arange(50)) // k
    ref = np.zeros((3, rows.max() + 1, cols.max() + 1))
    np.add.at(ref, (slice(None), rows[:, None], cols[None, :]), planes)
    assert (r, c) == (row0 // k, col0 // k)
    np.testing.assert_allclose(sums, ref[:, r:, c:].transpose(1, 2, 0), atol=1e-4)


@pytest.mark.parametrize("row0, col0, k, h, w", [(512, 1024, 3, 512, 512), (0, 0, 3, 70, 50),
                                                 (5, 7, 3, 1, 1), (2, 2, 3, 1, 70), (9, 4, 5, 33, 20)])
def test_block_sums_are_the_padded_sums_bit_for_bit(row0, col0, k, h, w):
    # the former way (the window padded with zeros to whole blocks, then strided sums) gave
    # the review page's previews: the sums without the padded copy are the same floats
    planes = np.random.default_rng(2).random((3, h, w)).astype(np.float32)
    ro, co = row0 % k, col0 % k
    nr, nc = -(-(ro + h) // k), -(-(co + w) // k)
    padded = np.zeros((3, nr * k, nc * k), np.float32)
    padded[:, ro:ro + h, co:co + w] = planes
    rows = padded[:, 0::k].copy()
    for i in range(1, k):
        rows += padded[:, i::k]
    ref = rows[:, :, 0::k].copy()
    for i in range(1, k):
        ref += rows[:, :, i::k]
    assert np.array_equal(block_sums(planes, row0, col0, k)[2], ref.transpose(1, 2, 0))


def test_previews_from_small_windows_equal_the_box_averaged_map(tiny_region):
    """Windows of 37 px (not a multiple of the block size 4) cut blocks; their partial sums
    add up to the box average of the finished map, and the first layer alone is the stack."""
    style = load_style(tiny_region)
    prepared = prepare(style)
    try:
        canvas: Canvas = prepared.canvas
        previews = LayerPreviews(canvas.width, canvas.height, len(prepared.layers),
                                 tuple(style.map.background), factor=4)
        sink = ArraySink(canvas)
        run(prepared, [sink], window=37, previews=previews)
    finally:
        prepared.close()
    thumb = BoxThumbnail(canvas.width, canvas.height, 4)
    thumb.rows(0, sink.image)
    images = previews.images()
    assert len(images) == len(prepared.layers) >= 2
    final = images[-1][1].astype(int)
    assert np.abs(final - thumb.image().astype(int)).max() <= 1      # rounding of 8-bit rows
    np.testing.assert_array_equal(images[0][0], images[0][1])
    # a later layer alone differs from the stack up to it (the layers below are missing)
    assert (images[1][0] != images[1][1]).any()


def _previews_and_layers(style_path, window=37):
    style = load_style(style_path)
    prepared = prepare(style)
    try:
        canvas: Canvas = prepared.canvas
        previews = LayerPreviews(canvas.width, canvas.height, len(prepared.layers),
                                 tuple(style.map.background), factor=4,
                                 blends=[la.spec.blend for la in prepared.layers])
        run(prepared, [], window=window, previews=previews)
        alone_refs, stack_refs = [], []
        for li in range(len(prepared.layers)):
            for only, refs in ((frozenset({li}), alone_refs), (frozenset(range(li + 1)), stack_refs)):
                sink = ArraySink(canvas)
                run(prepared, [sink], only=only, measure=False)
                thumb = BoxThumbnail(canvas.width, canvas.height, 4)
                thumb.rows(0, sink.image)
                refs.append(thumb.image().astype(int))
        return prepared.layers, previews.images(), alone_refs, stack_refs
    finally:
        prepared.close()


def test_each_layer_alone_is_the_box_average_of_that_layer_rendered_alone(tiny_region):
    """Alone over the flat background, a layer's paints summed as one premultiplied layer
    (a halo weighted by what its line leaves visible) give the box average of the full-size
    layer for normal and multiply blends (reference: each layer rendered alone at full size)."""
    layers, images, alone_refs, stack_refs = _previews_and_layers(tiny_region)
    assert any(getattr(la.spec.options, "halo", None) for la in layers)   # paints with a halo
    for (alone, _), ref in zip(images, alone_refs):
        assert np.abs(alone.astype(int) - ref).max() <= 1


def test_stacks_after_rasters_are_exact_and_overlays_close(tiny_region):
    """The stack after a raster layer and after the last layer is the box-summed composite
    itself; an overlay is composited onto the stack on the preview grid, within a few levels
    of the full-size composite except in blocks where the line meets a class edge."""
    layers, images, alone_refs, stack_refs = _previews_and_layers(tiny_region)
    for li, ((_, stack), ref) in enumerate(zip(images, stack_refs)):
        diff = np.abs(stack.astype(int) - ref)
        if getattr(layers[li], "palette", None) is not None or li == len(layers) - 1:
            assert diff.max() <= 1
        else:
            assert np.mean(diff) < 1.0 and np.percentile(diff, 99) <= 12
