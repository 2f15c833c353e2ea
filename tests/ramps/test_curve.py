"""Curve building blocks: shape-preserving cubic, gamut mapping by chroma, arc length."""
from __future__ import annotations

import colour
import numpy as np
import pytest
from scipy.interpolate import PchipInterpolator

from compose.color.lab import lab_to_lch
from compose.ramps.curve import arc_fraction, dense_curve, from_space, pchip, resample, to_space


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_pchip_matches_scipy(seed):
    # Reference: SciPy's PchipInterpolator (Fritsch & Carlson 1980 slopes, the same end rule).
    rng = np.random.default_rng(seed)
    x = np.cumsum(rng.uniform(0.2, 1.5, 7))
    y = rng.normal(size=(7, 3)) * 10
    xi = np.linspace(x[0], x[-1], 301)
    np.testing.assert_allclose(pchip(x, y, xi), PchipInterpolator(x, y, axis=0)(xi), atol=1e-10)


def test_pchip_keeps_monotone_data_monotone():
    x = np.array([0.0, 0.1, 0.5, 1.0])
    y = np.array([[95.0], [90.0], [40.0], [39.0]])
    out = pchip(x, y, np.linspace(0, 1, 1001))[:, 0]
    assert np.all(np.diff(out) <= 1e-12)
    assert out.min() >= 39 - 1e-9 and out.max() <= 95 + 1e-9


def test_space_round_trip():
    lch = np.array([[30.0, 20.0, 250.0], [80.0, 40.0, 100.0], [55.0, 0.0, 0.0]])
    for space in ("cam02ucs", "cielab"):
        back = lab_to_lch(from_space(to_space(lch, space), space))
        np.testing.assert_allclose(back[:, :2], lch[:, :2], atol=1e-6)
        np.testing.assert_allclose(back[:2, 2], lch[:2, 2], atol=1e-6)


def test_gamut_mapping_lowers_chroma_only():
    stops = np.array([[90.0, 88.0, 100.0], [60.0, 85.0, 135.0], [35.0, 34.0, 160.0]])
    lab, removed = dense_curve(stops, "cam02ucs")
    assert removed.max() > 3
    raw = lab_to_lch(from_space(pchip(*_knots(stops), np.linspace(0, 1, len(lab))), "cam02ucs"))
    got = lab_to_lch(lab)
    cut = removed > 0.01
    np.testing.assert_allclose(got[cut, 0], raw[cut, 0], atol=1e-9)
    np.testing.assert_allclose(got[cut, 2], raw[cut, 2], atol=1e-7)
    np.testing.assert_allclose(got[cut, 1] + removed[cut], raw[cut, 1], atol=1e-9)


def _knots(stops):
    coords = to_space(stops, "cam02ucs")
    chord = np.linalg.norm(np.diff(coords, axis=0), axis=-1)
    knots = np.concatenate([[0.0], np.cumsum(chord)]) / chord.sum()
    return knots, coords


def test_arc_fraction_gives_even_steps_by_colour_science():
    # Reference: colour-science CAM02-UCS (sRGB viewing conditions) on the resampled colours.
    stops = np.array([[95.0, 10.0, 100.0], [60.0, 40.0, 140.0], [25.0, 20.0, 170.0]])
    lab, removed = dense_curve(stops, "cielab")
    (even,) = resample(arc_fraction(lab), (lab,), n=65)
    ucs = colour.XYZ_to_CAM02UCS(colour.Lab_to_XYZ(even))
    step = np.linalg.norm(np.diff(ucs, axis=0), axis=-1)
    assert step.std() / step.mean() < 0.01
