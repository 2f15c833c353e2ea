"""Additions to compose.check.stats used by the checker, against colour-science and numpy."""
from __future__ import annotations

import numpy as np
import pytest

from compose.check.stats import (
    BENEATH_BITS,
    N_BENEATH,
    LayerStats,
    PartStats,
    beneath_color_centres,
    beneath_color_codes,
    histogram_percentiles,
    lightness_bins_of_rgb8,
    luminance_of_rgb8,
)

colour = pytest.importorskip("colour")


def test_luminance_is_cie_y_and_lightness_bins_round_l_star():
    # references.md section 5: the WCAG luminance equals colour-science's Y of sRGB -> XYZ
    rng = np.random.default_rng(7)
    rgb8 = rng.integers(0, 256, (5000, 3), dtype=np.uint8)
    xyz = colour.sRGB_to_XYZ(rgb8 / 255.0)
    np.testing.assert_allclose(luminance_of_rgb8(rgb8), xyz[:, 1], atol=1e-6)
    L = colour.XYZ_to_Lab(xyz)[:, 0]
    bins = lightness_bins_of_rgb8(rgb8).astype(float)
    assert np.all(np.abs(bins - L) <= 0.5 + 0.02)           # rint(L*) up to the 65536-step table
    assert np.mean(bins == np.rint(L)) > 0.99


def test_beneath_codes_and_centres_round_trip():
    rgb8 = np.array([[0, 0, 0], [255, 255, 255], [17, 130, 250]], dtype=np.uint8)
    codes = beneath_color_codes(rgb8)
    assert codes.max() < N_BENEATH
    step = 2 ** (8 - BENEATH_BITS)
    centres = beneath_color_centres()[codes] * 255
    assert np.all(np.abs(centres - rgb8) <= step / 2)
    # the centres of some bins only: the same floats as the whole table's rows
    assert beneath_color_centres(codes).tobytes() == beneath_color_centres()[codes].tobytes()


def test_histogram_percentiles_and_data_only():
    hist = np.zeros(101)
    hist[[10, 50, 90]] = [1, 8, 1]
    assert histogram_percentiles(hist) == [10.0, 50.0, 90.0]
    s = LayerStats("t", "theme", "field", nodata_index=2)
    colors = np.array([[200, 0, 0], [0, 200, 0], [128, 128, 128]], dtype=np.uint8)
    s.parts["data"] = PartStats("data", colors, np.array([1.0, 1.0, 100.0]))
    (_, _, _), (c5, _, _) = s.lightness_chroma()
    (_, _, _), (d5, _, _) = s.lightness_chroma(data_only=True)
    assert c5 < 1 and d5 > 50          # the grey no-data entry dominates only when counted
