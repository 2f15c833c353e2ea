"""The numeric solvers behind the fixes: their answers meet the limits they solve for
(WCAG 2 contrast per W3C definitions, checked with colour-science's Y)."""
from __future__ import annotations

import numpy as np
import pytest

from compose.check.fixes import (
    contrast_share_estimate,
    halo_color,
    lightness_of_y,
    luminance8,
    solve_contrast_lightness,
    solve_nodata,
)
from compose.check.stats import N_LIGHTNESS

colour = pytest.importorskip("colour")


def _ratio(a8, b8):
    ya, yb = (colour.sRGB_to_XYZ(np.asarray(c) / 255.0)[..., 1] for c in (a8, b8))
    return (max(ya, yb) + 0.05) / (min(ya, yb) + 0.05)


def test_wcag_reference_grays():
    # references.md section 5: #767676 is the lightest grey with 4.5:1 on white, #949494 for 3:1
    white = np.array([255, 255, 255])
    assert _ratio([0x76] * 3, white) == pytest.approx(4.5422, abs=1e-3)
    hist = np.zeros(N_LIGHTNESS)
    hist[100] = 1.0                                       # everything beneath is white
    dark, light = solve_contrast_lightness(np.array([0.8, 0.8, 0.8]), hist, 4.5, 0.95)
    assert light is None and _ratio(dark, white) >= 4.5
    assert dark[0] <= 0x76 and dark[0] >= 0x70           # close to the lightest that passes


def test_estimate_never_exceeds_the_exact_share():
    rng = np.random.default_rng(2)
    beneath = rng.integers(0, 256, (3000, 3))
    L = np.rint(colour.XYZ_to_Lab(colour.sRGB_to_XYZ(beneath / 255.0))[:, 0]).astype(int)
    hist = np.bincount(L, minlength=N_LIGHTNESS).astype(float)
    for gray in (20, 90, 160, 230):
        fig = np.array([gray] * 3)
        exact = np.mean([_ratio(fig, b) >= 3.0 for b in beneath])
        est = contrast_share_estimate(luminance8(fig)[None], hist, 3.0)[0]
        assert est <= exact + 1e-12


@pytest.mark.parametrize("gray", [0x20, 0x60, 0xb0, 0xe0])
def test_halo_reaches_the_limit(gray):
    fig = np.array([gray] * 3) / 255.0
    halo = halo_color(fig, 3.0)
    assert halo is not None and _ratio(np.array([gray] * 3), halo) >= 3.0


def test_lightness_of_y_is_cielab():
    y = np.array([0.0, 0.01, 0.18, 1.0])
    want = colour.XYZ_to_Lab(np.stack([y * 0.95047, y, y * 1.08883], -1))[:, 0]
    np.testing.assert_allclose(lightness_of_y(y), want, atol=1e-6)


def test_nodata_solution_is_far_from_the_ramp_and_gray():
    from compose.color.difference import delta_e_2000
    from compose.color.lab import srgb_to_lab, srgb_to_lch
    ramp8 = np.array([[200, 220, 150], [120, 160, 80], [60, 90, 50]], np.uint8)
    new = solve_nodata(np.array([125, 160, 85]), ramp8, (1.0, 1.0, 1.0), 3.0, 10.0)
    lab = srgb_to_lab(new / 255.0)
    assert srgb_to_lch(new / 255.0)[1] <= 3.0
    assert delta_e_2000(lab, srgb_to_lab(ramp8 / 255.0)).min() >= 10
