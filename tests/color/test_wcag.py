"""WCAG 2 relative luminance and contrast ratio.

Source (SRC): W3C WCAG 2.2 definitions "relative luminance" and "contrast ratio" (w3c/wcag,
guidelines/terms/20/); thresholds SC 1.4.3 (4.5:1, large text 3:1), SC 1.4.11 (3:1), not rounded.
Worked ratios are CALC (references.md §5). Tags: SRC, SRC-2, CALC, MEM.
"""
from __future__ import annotations

import colour
import numpy as np
import pytest

from compose.color.wcag import WCAG_Y, contrast_from_luminance, contrast_ratio, relative_luminance

WHITE = (1.0, 1.0, 1.0)
BLACK = (0.0, 0.0, 0.0)


def gray(code: int) -> tuple[float, float, float]:
    return (code / 255.0,) * 3


def test_weights_are_wcag():
    # SRC: L = 0.2126 R + 0.7152 G + 0.0722 B (WCAG 2.2 relative-luminance definition).
    np.testing.assert_array_equal(WCAG_Y, [0.2126, 0.7152, 0.0722])


# CALC (references.md §5) from the SRC definitions; quoted to 4 decimals -> tolerance 5e-5.
@pytest.mark.parametrize("fg, bg, expected", [
    (BLACK, WHITE, 21.0),
    (gray(0x77), WHITE, 4.4781),
    (gray(0x76), WHITE, 4.5422),
    (gray(0x94), WHITE, 3.0335),
    (gray(0x95), WHITE, 2.9953),
    ((1.0, 0.0, 0.0), WHITE, 3.9985),
    ((0.0, 0.0, 1.0), WHITE, 8.5925),
    ((0.0, 1.0, 0.0), BLACK, 15.3040),
], ids=["black-white", "777777", "767676", "949494", "959595", "red-white", "blue-white", "green-black"])
def test_worked_contrast_ratios(fg, bg, expected):
    assert contrast_ratio(fg, bg) == pytest.approx(expected, abs=5e-5)
    assert contrast_ratio(bg, fg) == pytest.approx(expected, abs=5e-5)  # order does not matter (SRC)


def test_black_white_is_exactly_21():
    # SRC: the ratio ranges from 1 to 21; (1 + 0.05) / (0 + 0.05) = 21. Float rounding only.
    assert contrast_ratio(BLACK, WHITE) == pytest.approx(21.0, abs=1e-12)
    assert contrast_ratio(WHITE, WHITE) == 1.0


def test_threshold_grays_on_white():
    # SRC thresholds (SC 1.4.3 text 4.5:1, SC 1.4.11 / large text 3:1), not rounded ("2.999:1 would
    # not meet the 3:1 threshold", WCAG understanding document, SRC-2). CALC (references.md §5):
    # #767676 is the lightest grey that passes 4.5 on white, #949494 the lightest that passes 3.
    assert contrast_ratio(gray(0x77), WHITE) < 4.5
    assert contrast_ratio(gray(0x76), WHITE) >= 4.5
    assert contrast_ratio(gray(0x94), WHITE) >= 3.0
    assert contrast_ratio(gray(0x95), WHITE) < 3.0
    ratios = contrast_ratio(np.array([gray(c) for c in range(256)]), WHITE)
    assert np.flatnonzero(ratios >= 4.5).max() == 0x76
    assert np.flatnonzero(ratios >= 3.0).max() == 0x94


def test_relative_luminance_equals_colour_science_y():
    # references.md §5 (CALC): WCAG L equals Y of colour.sRGB_to_XYZ (same Y row of the IEC matrix,
    # same transfer function). On 8-bit codes the decode thresholds 0.04045 and 0.0404499 agree
    # (no code between): 1e-12.
    rng = np.random.default_rng(40)
    rgb = rng.integers(0, 256, (5000, 3)) / 255.0
    np.testing.assert_allclose(relative_luminance(rgb), colour.sRGB_to_XYZ(rgb)[..., 1], rtol=0, atol=1e-12)


def test_old_threshold_has_no_effect_on_8bit_codes():
    # SRC (WCAG 2.2 note): before May 2021 the threshold read 0.03928; "it has no practical effect".
    # CALC (references.md §5): for all 256 codes both thresholds give the same luminance.
    c = np.arange(256) / 255.0
    old = np.where(c <= 0.03928, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
    np.testing.assert_allclose(relative_luminance(np.stack([c, c, c], axis=-1)), old, rtol=0, atol=1e-15)


def test_contrast_from_luminance_range_and_symmetry():
    # SRC: (L1 + 0.05) / (L2 + 0.05), L1 the lighter; range 1-21. Random luminances, exact symmetry.
    rng = np.random.default_rng(41)
    y1, y2 = rng.random(1000), rng.random(1000)
    r = contrast_from_luminance(y1, y2)
    np.testing.assert_array_equal(r, contrast_from_luminance(y2, y1))
    assert np.all((r >= 1.0) & (r <= 21.0))
    np.testing.assert_allclose(r, (np.maximum(y1, y2) + 0.05) / (np.minimum(y1, y2) + 0.05), rtol=1e-15)


def test_broadcasting_shape_2_2_2_2_3():
    # Vectorised over (..., 3) with broadcasting against one colour; exact against per-row values.
    rgb = np.random.default_rng(42).random((2, 2, 2, 2, 3))
    y = relative_luminance(rgb)
    assert y.shape == (2, 2, 2, 2)
    r = contrast_ratio(rgb, WHITE)
    assert r.shape == (2, 2, 2, 2)
    np.testing.assert_allclose(r.ravel(), [contrast_ratio(c, WHITE) for c in rgb.reshape(-1, 3)], rtol=0, atol=1e-12)
