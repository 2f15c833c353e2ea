"""The window measure's shortcuts give the numbers of the direct computation, bit for bit."""
from __future__ import annotations

import pickle

import numpy as np
import pytest

from compose import measure as M
from compose.check.stats import N_BENEATH, PartStats, lightness_bins_of_luminance


def _luminances(rng) -> np.ndarray:
    """Random float32 luminances over [0, white] and every Y cell's first and last value and
    their float32 neighbours (where a table could go wrong)."""
    first, last, _ = M._cell_bounds()
    white = last[-1]
    y = np.concatenate([rng.random(100_000, dtype=np.float32) * white, first, last,
                        np.nextafter(first, np.float32(-1)), np.nextafter(last, np.float32(2))])
    return np.clip(y, 0, white).astype(np.float32)


@pytest.mark.parametrize("y_part", [0.0, 0.04, 0.18, 0.5, 1.0, "cell-first", "cell-last"])
def test_contrast_bins_by_cell_table_equal_the_formula(y_part):
    # WCAG 2.x contrast ratio (W3C, "contrast ratio": (L1 + 0.05) / (L2 + 0.05), L1 the
    # lighter) binned in steps of 0.01: the table path must give the direct formula's bin.
    rng = np.random.default_rng(5)
    first, last, _ = M._cell_bounds()
    yp = {"cell-first": float(first[20_000]), "cell-last": float(last[41_000])}.get(y_part, y_part)
    y = _luminances(rng)
    cells = M._cells(y)
    np.testing.assert_array_equal(M._contrast_of_cells(float(yp), cells, y),
                                  M._contrast_bins(float(yp), y))
    # the cell bounds hold their own cell, their neighbours outside it
    ok = last >= first
    assert (M._cells(first)[ok] == np.arange(first.size)[ok]).all()
    assert (M._cells(last)[ok] == np.arange(last.size)[ok]).all()
    assert (M._cells(np.nextafter(first[1:], np.float32(-1))) < np.arange(1, first.size)).all()


def test_cell_bounds_are_those_a_bisection_of_the_float32_bit_patterns_finds():
    """Each Y cell's first luminance, found stepping from the cell's edge, is the smallest
    float32 in [0, 2] whose cell is not below it: the one a bisection over the float32 bit
    patterns finds (IEEE 754 binary32: non-negative floats order as their bit patterns)."""
    target = np.arange(M._Y_LEVELS)
    lo = np.full(M._Y_LEVELS, -1, np.int64)
    hi = np.full(M._Y_LEVELS, int(np.float32(2.0).view(np.uint32)), np.int64)
    while (hi - lo > 1).any():
        open_ = hi - lo > 1
        mid = (lo + hi) // 2
        up = M._cells(np.maximum(mid, 0).astype(np.uint32).view(np.float32)) >= target
        hi = np.where(open_ & up, mid, hi)
        lo = np.where(open_ & ~up, mid, lo)
    first, last, _ = M._cell_bounds()
    np.testing.assert_array_equal(first.view(np.uint32), hi.astype(np.uint32))
    assert (last[:-1] == np.nextafter(first[1:], np.float32(-1))).all()


def test_lightness_by_cell_equals_the_lightness_bins():
    rng = np.random.default_rng(6)
    y = _luminances(rng)
    np.testing.assert_array_equal(np.take(M._cell_bounds()[2], M._cells(y)),
                                  lightness_bins_of_luminance(y))


def test_beneath_histogram_pairs_equal_numpy_bincount():
    # numpy's bincount is the reference: the same sums, in the same order, per bin
    rng = np.random.default_rng(7)
    for distinct in (1, 9, 640, 20_000):
        pal = rng.choice(N_BENEATH, distinct, replace=False)
        pal[0] = N_BENEATH - 1                       # the last bin and the first
        pal[-1] = 0
        codes = pal[rng.integers(0, distinct, 50_000)]
        weights = rng.random(codes.size)
        present, sums = M._beneath_hist(codes, weights)
        dense = np.bincount(codes, weights, minlength=N_BENEATH)
        np.testing.assert_array_equal(present, np.flatnonzero(dense))
        np.testing.assert_array_equal(sums, dense[present])
    assert not M._local.seen.any()                   # the marks are cleared for the next call


def test_part_stats_beneath_pairs_merge_like_dense_histograms():
    rng = np.random.default_rng(8)
    windows = []
    for _ in range(4):
        codes = np.unique(rng.integers(0, N_BENEATH, 300))
        windows.append((codes, rng.random(codes.size)))

    def part():
        return PartStats("stroke", np.zeros((1, 3), np.uint8), np.ones(1))

    dense_sum = np.zeros(N_BENEATH)
    sparse_parts = []
    for codes, w in windows:
        dense_sum[codes] += w
        p = part()
        p.add_beneath(codes.copy(), w.copy())
        sparse_parts.append(p)
    acc = sparse_parts[0]                            # the first window's own, as the walk does
    for p in sparse_parts[1:]:
        acc.merge(pickle.loads(pickle.dumps(p)))     # as from a worker process
    np.testing.assert_array_equal(acc.beneath_colors, dense_sum)
    fresh = part()
    fresh.merge(sparse_parts[1])                     # adopting a window's pairs copies them
    sparse_parts[1].add_beneath(np.array([0]), np.array([1.0]))
    np.testing.assert_array_equal(fresh.beneath_colors[windows[1][0]], windows[1][1])
    assert fresh.copy().beneath_colors.sum() == fresh.beneath_colors.sum()
    assert part().beneath_colors is None


def _pixel_by_pixel(y_part, below8, weights):
    """The overlay's beneath histograms pixel by pixel, in pixel order (numpy's bincount over
    the WCAG 2 contrast bins, the L* bins and the beneath-colour codes of every pixel)."""
    from compose.check.stats import N_CONTRAST, N_LIGHTNESS, beneath_color_codes, contrast_bins, luminance_of_rgb8
    rgb8 = np.ascontiguousarray(below8.T)
    y = luminance_of_rgb8(rgb8).astype(np.float32)
    ratio = (np.maximum(y.astype(np.float64), y_part) + 0.05) / (
        np.minimum(y.astype(np.float64), y_part) + 0.05)
    return (np.bincount(contrast_bins(ratio), weights, minlength=N_CONTRAST),
            np.bincount(lightness_bins_of_luminance(y), weights, minlength=N_LIGHTNESS),
            np.bincount(beneath_color_codes(rgb8), weights, minlength=N_BENEATH))


@pytest.mark.parametrize("opacity", [1.0, 0.5, 0.003])
def test_overlay_histograms_by_color_equal_pixel_by_pixel_bit_for_bit(opacity):
    # Antialiased coverage in 8-bit steps (as Agg draws it) times the layer's opacity, over a
    # few thousand beneath dense_colors: grouping by colour first must give the same float64 bits.
    rng = np.random.default_rng(9)
    n = 120_000
    palette = rng.integers(0, 256, (3, 3000)).astype(np.uint8)
    below8 = np.ascontiguousarray(palette[:, rng.integers(0, 3000, n)])
    cover = rng.integers(1, 256, n).astype(np.float32) / np.float32(255)
    weights = (cover * np.float32(opacity)).astype(np.float64)
    y_part = 0.05
    assert M._sums_exact(weights)        # n x max / spacing of the smallest < 2**53
    contrast, lightness, dense_colors = _pixel_by_pixel(y_part, below8, weights)
    part = PartStats("stroke", np.zeros((1, 3), np.uint8), np.ones(1))
    M._overlay_by_color(part, y_part, below8, weights)
    np.testing.assert_array_equal(part.contrast, contrast)
    np.testing.assert_array_equal(part.beneath_lightness, lightness)
    np.testing.assert_array_equal(part.beneath_colors, dense_colors)


def test_sums_exact_refuses_weights_whose_sums_round():
    assert M._sums_exact(np.array([1.0, 2.0 ** -20] * 10))
    assert not M._sums_exact(np.array([1.0, 2.0 ** -40]))      # 1 + 2**-40 needs 64 bits
    # 1/255 coverage beside full coverage, as on a map, but a faint layer's 1e-6 among them
    assert M._sums_exact(np.array([1.0, np.float32(1 / 255)] * 1000))
    assert not M._sums_exact(np.array([1.0, np.float32(1e-6)] * 100_000))


def test_take8_rounds_like_rint_then_clip():
    # IEC 61966-2-1 8-bit encoding of [0, 1] values: round(255 v), half to even (numpy's
    # rint), clipped to 0..255; every half step and values outside [0, 1] included
    rng = np.random.default_rng(10)
    half = (np.arange(256, dtype=np.float32) + np.float32(0.5)) / np.float32(255)
    values = np.concatenate([half, rng.random(3000).astype(np.float32) * 1.4 - 0.2,
                             np.array([0.0, -0.0, 1.0, -1e-8, 1 + 1e-7], np.float32)])
    planes = np.stack([values, values[::-1], np.roll(values, 7)]).reshape(3, 1, -1)
    idx = np.arange(values.size)
    want = np.clip(np.rint(planes.reshape(3, -1) * np.float32(255)), 0, 255).astype(np.uint8)
    np.testing.assert_array_equal(M._take8(planes, idx), want)
    np.testing.assert_array_equal(M._take8(want.reshape(3, 1, -1), idx[::-1]), want[:, ::-1])


def test_no_8bit_color_passes_the_last_y_cell():
    # the grey order skips _cells' cap when _top_cell_holds_white says it changes nothing:
    # checked here on every one of the 2**24 8-bit sRGB colours by brute force (the WCAG
    # relative luminance as _luminance8 sums it, then the uncapped cell)
    assert M._top_cell_holds_white()
    gb = np.indices((256, 256)).reshape(2, -1).astype(np.uint8)
    top = 0
    for r in range(256):
        planes = np.concatenate([np.full((1, gb.shape[1]), r, np.uint8), gb])
        t = M._luminance8(planes) * np.float32(M._Y_LEVELS - 1) + np.float32(0.5)
        top = max(top, int(t.astype(np.int64).max()))
    assert top <= M._Y_LEVELS - 1
