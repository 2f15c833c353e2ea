"""Fast whole-image paths for 8-bit sRGB: lookup-table LCh, packing and colour counts.

References: our float64 path (compose.color.lab, itself checked against colour-science in
test_lab.py), colour-science directly, and numpy's own np.unique. Tags: SRC, SRC-2, CALC, MEM.
"""
from __future__ import annotations

import colour
import numpy as np
import pytest

from compose.color.bulk import color_counts, lab_of_packed, lch_of_packed, pack_rgb8, srgb8_to_lch, unpack_rgb8
from compose.color.lab import srgb_to_lch
from tests.conftest import angular_difference


@pytest.fixture(scope="module")
def sample() -> np.ndarray:
    """1e5 seeded random 8-bit colours plus all 256 greys, (100256, 3) uint8."""
    rng = np.random.default_rng(70)
    rand = rng.integers(0, 256, (100_000, 3), dtype=np.uint8)
    grays = np.repeat(np.arange(256, dtype=np.uint8)[:, None], 3, axis=1)
    return np.concatenate([rand, grays])


def test_lut_path_matches_float64_path(sample):
    # float32 arithmetic on exact float64 lookup tables: L* and C*ab to 1e-3 (observed < 1e-4).
    # Hue only where C > 1 (below that it is dominated by rounding and meaningless for greys):
    # as the hue-difference term dH* = 2 sqrt(C1 C2) sin(dh/2), in the same Lab units, 1e-3; and
    # as an angle, 0.01 degree (float32 a*, b* error ~1e-4 over C ~1 -> ~0.006 degree).
    fast = srgb8_to_lch(sample).astype(float)
    ref = srgb_to_lch(sample / 255.0)
    assert np.abs(fast[:, 0] - ref[:, 0]).max() <= 1e-3
    assert np.abs(fast[:, 1] - ref[:, 1]).max() <= 1e-3
    m = ref[:, 1] > 1
    dh = angular_difference(fast[m, 2], ref[m, 2])
    d_hue = 2 * np.sqrt(fast[m, 1] * ref[m, 1]) * np.sin(np.radians(dh) / 2)
    assert d_hue.max() <= 1e-3
    assert dh.max() <= 0.01


def test_lut_path_matches_colour_science(sample):
    # Reference library: colour.Lab_to_LCHab(colour.XYZ_to_Lab(colour.sRGB_to_XYZ(rgb))), our pinned
    # convention; same float32 tolerance as above on L* and C*ab (1e-3).
    fast = srgb8_to_lch(sample).astype(float)
    ref = colour.Lab_to_LCHab(colour.XYZ_to_Lab(colour.sRGB_to_XYZ(sample / 255.0)))
    np.testing.assert_allclose(fast[:, :2], ref[:, :2], rtol=0, atol=1e-3)


def test_lut_path_contract(sample):
    # Documented: float32 out, shape kept, L* in [0, 100], C >= 0, h in [0, 360); chunking does not
    # change any value (exact).
    out = srgb8_to_lch(sample)
    assert out.dtype == np.float32 and out.shape == sample.shape
    assert out[:, 0].min() >= 0 and out[:, 0].max() <= 100.001
    assert out[:, 1].min() >= 0
    assert out[:, 2].min() >= 0 and out[:, 2].max() < 360
    np.testing.assert_array_equal(srgb8_to_lch(sample[:1000], chunk=7), out[:1000])
    img = sample[:16].reshape(2, 2, 2, 2, 3)
    got = srgb8_to_lch(img)
    assert got.shape == (2, 2, 2, 2, 3)
    np.testing.assert_array_equal(got.reshape(-1, 3), out[:16])
    assert srgb8_to_lch(np.zeros((0, 3), np.uint8)).shape == (0, 3)


def test_black_and_white():
    # CALC (references.md §1, colour-science column): white L* 100.000, C* 0.009; black 0.
    out = srgb8_to_lch(np.array([[0, 0, 0], [255, 255, 255]], np.uint8))
    np.testing.assert_allclose(out[:, 0], [0.0, 100.0], rtol=0, atol=1e-3)
    np.testing.assert_allclose(out[:, 1], [0.0, 0.009], rtol=0, atol=1e-3)


@pytest.mark.parametrize("bad", [np.zeros((4, 3)), np.zeros((4, 3), np.uint16), np.zeros((4, 4), np.uint8)])
def test_lut_path_refuses_other_input(bad):
    with pytest.raises(ValueError):
        srgb8_to_lch(bad)


def test_pack_unpack():
    # 0xRRGGBB packing (the usual 24-bit hex layout): exact round trip on random codes and images.
    assert pack_rgb8(np.array([0x12, 0x34, 0x56], np.uint8)) == 0x123456
    np.testing.assert_array_equal(unpack_rgb8(np.uint32(0xFFAA00)), [0xFF, 0xAA, 0x00])
    rng = np.random.default_rng(71)
    img = rng.integers(0, 256, (2, 2, 2, 2, 3), dtype=np.uint8)
    packed = pack_rgb8(img)
    assert packed.shape == (2, 2, 2, 2) and packed.dtype == np.uint32
    np.testing.assert_array_equal(unpack_rgb8(packed), img)
    codes = rng.integers(0, 1 << 24, 10_000, dtype=np.uint32)
    np.testing.assert_array_equal(pack_rgb8(unpack_rgb8(codes)), codes)


def test_color_counts_small_image():
    # Hand-counted 2 x 3 image: red x3, white x2, black x1.
    R, W, K = (255, 0, 0), (255, 255, 255), (0, 0, 0)
    img = np.array([[R, W, R], [K, R, W]], np.uint8)
    codes, counts = color_counts(img)
    np.testing.assert_array_equal(codes, [0x000000, 0xFF0000, 0xFFFFFF])
    np.testing.assert_array_equal(counts, [1.0, 3.0, 2.0])
    weights = np.array([[1.0, 0.5, 2.0], [4.0, 0.25, 0.5]])
    codes_w, summed = color_counts(img, weights)
    np.testing.assert_array_equal(codes_w, codes)
    np.testing.assert_allclose(summed, [4.0, 1.0 + 2.0 + 0.25, 0.5 + 0.5], rtol=0, atol=1e-15)


def test_color_counts_match_numpy_unique():
    # Reference: numpy's own np.unique over pixel rows. Exact.
    rng = np.random.default_rng(72)
    img = rng.integers(0, 4, (64, 48, 3), dtype=np.uint8) * 85  # 64 possible colours, many repeats
    codes, counts = color_counts(img)
    rows, n = np.unique(img.reshape(-1, 3), axis=0, return_counts=True)
    np.testing.assert_array_equal(unpack_rgb8(codes), rows)  # lexicographic R, G, B = sorted codes
    np.testing.assert_array_equal(counts, n)
    assert counts.sum() == img.shape[0] * img.shape[1]
    assert np.all(np.diff(codes.astype(np.int64)) > 0)
    w = rng.random(img.shape[:2])
    _, summed = color_counts(img, w)
    assert summed.sum() == pytest.approx(w.sum(), rel=1e-12)
    # Windows merge by adding where codes match (documented): two halves equal the whole.
    c1, n1 = color_counts(img[:32])
    c2, n2 = color_counts(img[32:])
    merged = np.zeros(1 << 24)
    np.add.at(merged, c1, n1)
    np.add.at(merged, c2, n2)
    np.testing.assert_array_equal(merged[codes], counts)


def test_lab_and_lch_of_packed_match_colour_science():
    # Reference library colour-science (pinned convention): 1e-10.
    rng = np.random.default_rng(73)
    codes = np.unique(rng.integers(0, 1 << 24, 2000, dtype=np.uint32))
    rgb = unpack_rgb8(codes) / 255.0
    lab = colour.XYZ_to_Lab(colour.sRGB_to_XYZ(rgb))
    np.testing.assert_allclose(lab_of_packed(codes), lab, rtol=0, atol=1e-10)
    np.testing.assert_allclose(lch_of_packed(codes), colour.Lab_to_LCHab(lab), rtol=0, atol=1e-10)
