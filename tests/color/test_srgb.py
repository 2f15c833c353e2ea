"""sRGB transfer function and RGB <-> XYZ matrices (IEC 61966-2-1:1999).

Tags as in /work/shared/references.md: SRC (primary source read), SRC-2 (secondary copy citing it),
CALC (computed from a tagged formula), MEM (from memory, not verified).
"""
from __future__ import annotations

import colour
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from compose.color.srgb import (
    M_RGB_TO_XYZ,
    M_XYZ_TO_RGB,
    linear_to_srgb,
    linear_to_xyz,
    srgb_to_linear,
    srgb_to_xyz,
    xyz_to_linear,
    xyz_to_srgb,
)
from tests.conftest import seam_tolerance

unit = st.floats(0.0, 1.0, allow_nan=False)
rgb_strategy = st.tuples(unit, unit, unit).map(np.array)


# --- transfer function ---------------------------------------------------------------------------

# CALC (references.md §1) from the IEC 61966-2-1 EOTF as quoted by WCAG 2.2 (SRC-2).
# Tolerance 5e-7: the values are quoted to 6 decimals (half a unit in the last place).
@pytest.mark.parametrize("code, expected", [
    (0.5, 0.214041),
    (128 / 255, 0.215861),
    (119 / 255, 0.184475),
    (0.04045, 0.0031308),
])
def test_eotf_spot_values(code, expected):
    assert srgb_to_linear(code) == pytest.approx(expected, abs=5e-7)


def test_eotf_end_points():
    # SRC-2 (IEC 61966-2-1 via WCAG 2.2): 0 and 1 are fixed points of the EOTF; exact in floats.
    assert srgb_to_linear(0.0) == 0.0
    assert srgb_to_linear(1.0) == pytest.approx(1.0, abs=1e-15)
    assert linear_to_srgb(1.0) == pytest.approx(1.0, abs=1e-15)


def test_transfer_matches_colour_science_on_8bit_codes():
    # Reference library colour-science (eotf_sRGB / eotf_inverse_sRGB). Its decode branch changes at
    # encode(0.0031308) = 0.0404499 rather than 0.04045; no 8-bit code lies between (references.md
    # §1, CALC), so on the 256 codes the two agree to rounding: 1e-12.
    codes = np.arange(256) / 255.0
    np.testing.assert_allclose(srgb_to_linear(codes), colour.models.eotf_sRGB(codes), rtol=0, atol=1e-12)
    lin = np.linspace(0.0, 1.0, 1001)
    np.testing.assert_allclose(linear_to_srgb(lin), colour.models.eotf_inverse_sRGB(lin), rtol=0, atol=1e-12)


def test_transfer_seams_are_continuous():
    # CALC (references.md §1): the two IEC branches meet within 1e-8 at the decode threshold;
    # the encode seam at 0.0031308 is computed here (CALC) and is below 3e-8.
    lo = 0.04045 / 12.92
    hi = ((0.04045 + 0.055) / 1.055) ** 2.4
    assert abs(hi - lo) < 1e-8
    assert abs((1.055 * 0.0031308 ** (1 / 2.4) - 0.055) - 12.92 * 0.0031308) < 3e-8


def test_transfer_extends_sign_preserving():
    # Our own documented convention (srgb.py docstring): out-of-range values are mirrored, never
    # clipped, so gamut mapping can see how far outside a colour lies. Exact by construction.
    x = np.linspace(0.0, 1.5, 31)
    np.testing.assert_array_equal(srgb_to_linear(-x), -srgb_to_linear(x))
    np.testing.assert_array_equal(linear_to_srgb(-x), -linear_to_srgb(x))
    assert srgb_to_linear(1.2) > 1.0


def test_round_trip_seam_at_decode_threshold():
    # CALC (tests/conftest.py seam_tolerance): the one place where encode(decode(v)) != v
    # beyond rounding.
    assert srgb_to_linear(0.04045) > 0.0031308
    assert abs(linear_to_srgb(srgb_to_linear(0.04045)) - 0.04045) < 5e-8
    assert linear_to_srgb(srgb_to_linear(0.0404)) == pytest.approx(0.0404, abs=1e-15)


@settings(max_examples=200, deadline=None)
@given(st.floats(-2.0, 2.0, allow_nan=False))
def test_transfer_round_trip(v):
    # Inverse functions of each other (IEC 61966-2-1); 1e-12 is float rounding through a power,
    # except at the threshold seam (see seam_tolerance).
    assert linear_to_srgb(srgb_to_linear(v)) == pytest.approx(v, abs=seam_tolerance(v, 1e-12))


# --- matrices ------------------------------------------------------------------------------------

def test_matrix_is_iec_four_digit_matrix():
    # SRC-2: the 4-digit RGB -> XYZ matrix of IEC 61966-2-1 as quoted by the colour-science docs
    # (references.md §1). Exact: the constants are typed in.
    expected = np.array([[0.4124, 0.3576, 0.1805],
                         [0.2126, 0.7152, 0.0722],
                         [0.0193, 0.1192, 0.9505]])
    np.testing.assert_array_equal(M_RGB_TO_XYZ, expected)
    np.testing.assert_array_equal(M_RGB_TO_XYZ, colour.RGB_COLOURSPACES["sRGB"].matrix_RGB_to_XYZ)


def test_inverse_matrix_matches_published_inverses():
    # SRC-2: colorspacious quotes the 4-digit XYZ -> RGB matrix as "the exact matrix specified in
    # IEC 61966-2-1:1999"; the numerical inverse of the forward matrix rounds to it (4 decimals ->
    # tolerance 5e-5). SRC-2: the ICC sRGB note's 7-digit first row (3.2406255, -1.537208,
    # -0.4986286) -> tolerance 5e-7.
    four = np.array([[3.2406, -1.5372, -0.4986],
                     [-0.9689, 1.8758, 0.0415],
                     [0.0557, -0.2040, 1.0570]])
    np.testing.assert_allclose(M_XYZ_TO_RGB, four, rtol=0, atol=5e-5)
    np.testing.assert_allclose(M_XYZ_TO_RGB[0], [3.2406255, -1.537208, -0.4986286], rtol=0, atol=5e-7)
    np.testing.assert_allclose(M_XYZ_TO_RGB @ M_RGB_TO_XYZ, np.eye(3), rtol=0, atol=1e-14)


def test_xyz_of_primaries_and_white():
    # CALC (references.md §1): XYZ (Y = 100) of the primaries are the matrix columns: red
    # (41.24, 21.26, 1.93), green (35.76, 71.52, 11.92), blue (18.05, 7.22, 95.05); white (95.05,
    # 100, 108.90), quoted to 2 decimals -> tolerance 5e-3 on the Y = 100 scale.
    xyz = srgb_to_xyz(np.eye(3)) * 100
    np.testing.assert_allclose(xyz, [[41.24, 21.26, 1.93], [35.76, 71.52, 11.92], [18.05, 7.22, 95.05]],
                               rtol=0, atol=5e-3)
    np.testing.assert_allclose(srgb_to_xyz([1.0, 1.0, 1.0]) * 100, [95.05, 100.0, 108.90], rtol=0, atol=5e-3)


def test_xyz_matches_colour_science():
    # Reference library: colour.sRGB_to_XYZ with defaults (4-digit IEC matrix, D65); same
    # convention, so only float rounding separates us: 1e-12.
    rgb = np.random.default_rng(11).random((2000, 3))
    np.testing.assert_allclose(srgb_to_xyz(rgb), colour.sRGB_to_XYZ(rgb), rtol=0, atol=1e-12)
    # Our XYZ -> sRGB is the exact inverse, so it undoes colour-science's forward transform.
    xyz = colour.sRGB_to_XYZ(rgb)
    np.testing.assert_allclose(xyz_to_srgb(xyz), rgb, rtol=0, atol=seam_tolerance(rgb, 1e-12))
    # colour.XYZ_to_sRGB uses the published 4-digit inverse (SRC-2, references.md §1) instead of the
    # exact one; that rounding moves encoded values by < 5e-4 (0.13 of an 8-bit code), CALC.
    np.testing.assert_allclose(xyz_to_srgb(xyz), colour.XYZ_to_sRGB(xyz), rtol=0, atol=5e-4)


@settings(max_examples=200, deadline=None)
@given(rgb_strategy)
def test_srgb_xyz_round_trip(rgb):
    # Matrix and its exact inverse plus the transfer function and its inverse; 1e-8 in gamut
    # (float rounding, far below an 8-bit code of 3.9e-3).
    np.testing.assert_allclose(xyz_to_srgb(srgb_to_xyz(rgb)), rgb, rtol=0, atol=seam_tolerance(rgb))
    lin = srgb_to_linear(rgb)
    np.testing.assert_allclose(xyz_to_linear(linear_to_xyz(lin)), lin, rtol=0, atol=1e-12)


def test_broadcasting_shape_2_2_2_2_3():
    # Array contract of the package (vectorised over (..., 3)): a seeded (2, 2, 2, 2, 3) array gives
    # the same numbers as its rows one at a time. Exact: the same operations on the same floats.
    rgb = np.random.default_rng(2).random((2, 2, 2, 2, 3))
    for fn in (srgb_to_linear, linear_to_srgb, linear_to_xyz, xyz_to_linear, srgb_to_xyz, xyz_to_srgb):
        out = fn(rgb)
        assert out.shape == rgb.shape
        rows = np.array([fn(row) for row in rgb.reshape(-1, 3)])
        np.testing.assert_allclose(out.reshape(-1, 3), rows, rtol=0, atol=1e-15)
