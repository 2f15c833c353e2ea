"""CIELAB and LCh(ab) under D65 (CIE 15 / ISO/CIE 11664-4) with the engine's pinned sRGB convention.

Tags as in /work/shared/references.md: SRC, SRC-2, CALC, MEM.
"""
from __future__ import annotations

import colorspacious
import colour
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from compose.color.lab import (
    WHITE_D65,
    lab_to_lch,
    lab_to_srgb,
    lab_to_xyz,
    lch_to_lab,
    lch_to_srgb,
    srgb_to_lab,
    srgb_to_lch,
    xyz_to_lab,
)
from tests.conftest import seam_tolerance

unit = st.floats(0.0, 1.0, allow_nan=False)
rgb_strategy = st.tuples(unit, unit, unit).map(np.array)

# Rows of references.md §1 (CALC, each column reproduced by its script):
# sRGB255, colour-science column, colorspacious column, 7-digit-matrix column.
TABLE = [
    ((255, 0, 0), (53.233, 80.111, 67.224), (53.231, 80.114, 67.220), (53.2408, 80.0925, 67.2032)),
    ((0, 255, 0), (87.737, -86.183, 83.188), (87.736, -86.184, 83.183), (87.7347, -86.1827, 83.1793)),
    ((0, 0, 255), (32.303, 79.198, -107.850), (32.303, 79.192, -107.863), (32.2970, 79.1875, -107.8602)),
    ((255, 255, 255), (100.000, 0.008, 0.004), (99.998, 0.007, -0.012), (100, 0, 0)),
    ((128, 128, 128), (53.585, 0.005, 0.002), (53.584, 0.004, -0.007), (53.585, 0, 0)),
    ((0x77, 0x77, 0x77), (50.034, 0.004, 0.002), (50.033, 0.004, -0.007), (50.034, 0, 0)),
]
IDS = ["red", "green", "blue", "white", "gray128", "gray77"]


def test_white_is_xy_derived_d65():
    # SRC-2 (references.md §1; colour-science dataset): D65 at x, y = 0.3127, 0.3290, i.e.
    # 95.046/100/108.906 on the Y = 100 scale (quoted to 3 decimals -> 5e-6 on Y = 1).
    cs_white = colour.xy_to_XYZ(colour.CCS_ILLUMINANTS["CIE 1931 2 Degree Standard Observer"]["D65"])
    np.testing.assert_allclose(WHITE_D65, cs_white, rtol=0, atol=1e-15)
    np.testing.assert_allclose(WHITE_D65, [0.95046, 1.0, 1.08906], rtol=0, atol=5e-6)


@pytest.mark.parametrize("rgb8, cs_col, csp_col, seven_col", TABLE, ids=IDS)
def test_lab_of_reference_colors_matches_colour_science(rgb8, cs_col, csp_col, seven_col):
    rgb = np.array(rgb8) / 255.0
    lab = srgb_to_lab(rgb)
    # Reference library, computed live: colour.XYZ_to_Lab(colour.sRGB_to_XYZ(rgb)). Our convention
    # equals its default (4-digit IEC matrix, xy-derived D65), so only rounding separates us: 1e-10.
    np.testing.assert_allclose(lab, colour.XYZ_to_Lab(colour.sRGB_to_XYZ(rgb)), rtol=0, atol=1e-10)
    # CALC, references.md §1, colour-science column: quoted to 3 decimals -> 6e-4.
    np.testing.assert_allclose(lab, cs_col, rtol=0, atol=6e-4)


@pytest.mark.parametrize("rgb8, cs_col, csp_col, seven_col", TABLE, ids=IDS)
def test_lab_of_reference_colors_other_conventions(rgb8, cs_col, csp_col, seven_col):
    # CALC, references.md §1, colorspacious and 7-digit-matrix columns: other conventions (other
    # white, other matrix rounding). Tolerances recommended there for cross-convention comparison:
    # 0.02 on L*, 0.05 on a*, b* (observed spread up to 0.016).
    lab = srgb_to_lab(np.array(rgb8) / 255.0)
    for col in (csp_col, seven_col):
        assert abs(lab[0] - col[0]) <= 0.02
        np.testing.assert_allclose(lab[1:], col[1:], rtol=0, atol=0.05)


def test_trade_lightness_of_primaries():
    # Common practice, no source (widely quoted, MEM): sRGB red has L* about 53, green about 88,
    # blue about 32. Rounded to whole units.
    L = srgb_to_lab(np.eye(3))[:, 0]
    assert np.round(L).tolist() == [53.0, 88.0, 32.0]


def test_lab_matches_colorspacious_across_conventions():
    # Reference library colorspacious ("sRGB1" -> "CIELab"), a different white and inverse-matrix
    # rounding (references.md §1): library-to-library tolerance 0.02 on L*, 0.05 on a*, b*.
    rgb = np.random.default_rng(5).random((5000, 3))
    ref = colorspacious.cspace_convert(rgb, "sRGB1", "CIELab")
    d = np.abs(srgb_to_lab(rgb) - ref)
    assert d[:, 0].max() <= 0.02
    assert d[:, 1:].max() <= 0.05


def test_xyz_lab_match_colour_science_including_dark_segment():
    # Reference library: colour.XYZ_to_Lab / Lab_to_XYZ (default white = xy D65). XYZ drawn so that
    # many samples fall below (6/29)^3, on the linear segment of CIE 15 (MEM for the formula text).
    # Same formula, same white: 1e-10.
    rng = np.random.default_rng(6)
    xyz = rng.random((3000, 3)) ** 3 * WHITE_D65
    np.testing.assert_allclose(xyz_to_lab(xyz), colour.XYZ_to_Lab(xyz), rtol=0, atol=1e-10)
    lab = colour.XYZ_to_Lab(xyz)
    np.testing.assert_allclose(lab_to_xyz(lab), colour.Lab_to_XYZ(lab), rtol=0, atol=1e-12)


def test_lightness_at_segment_joint():
    # CALC from the CIE 15 definition (MEM): at Y/Yn = (6/29)^3 both branches give
    # L* = 116 * 6/29 - 16 = 8; below it L* = (29/3)^3 Y/Yn. Rounding only: 1e-12.
    y = (6 / 29) ** 3
    assert xyz_to_lab(WHITE_D65 * y)[0] == pytest.approx(8.0, abs=1e-12)
    assert xyz_to_lab(WHITE_D65 * 1e-3)[0] == pytest.approx((29 / 3) ** 3 * 1e-3, abs=1e-12)


def test_grays_are_neutral_and_monotone():
    # CALC: with the xy-derived white, sRGB greys sit within 0.01 of the neutral axis (references.md
    # §1 table: a*, b* <= 0.008 for white) and L* rises with the code.
    g = np.repeat(np.arange(256)[:, None], 3, axis=1) / 255.0
    lab = srgb_to_lab(g)
    assert np.all(np.abs(lab[:, 1:]) < 0.01)
    assert np.all(np.diff(lab[:, 0]) > 0)
    assert lab[0, 0] == 0.0


def test_lch_matches_colour_science():
    # Reference library: colour.Lab_to_LCHab / LCHab_to_Lab (h in degrees, [0, 360)): 1e-10.
    lab = colour.XYZ_to_Lab(colour.sRGB_to_XYZ(np.random.default_rng(7).random((2000, 3))))
    np.testing.assert_allclose(lab_to_lch(lab), colour.Lab_to_LCHab(lab), rtol=0, atol=1e-10)
    lch = colour.Lab_to_LCHab(lab)
    np.testing.assert_allclose(lch_to_lab(lch), colour.LCHab_to_Lab(lch), rtol=0, atol=1e-10)


def test_hue_stays_below_360():
    # Our documented range h in [0, 360): a tiny negative b* used to give exactly 360.0 after % 360.
    lch = lab_to_lch(np.array([[50.0, 1.0, -1e-17], [50.0, 1.0, 0.0], [50.0, -1.0, -1e-17]]))
    assert np.all((lch[:, 2] >= 0) & (lch[:, 2] < 360))
    assert lch[0, 2] == pytest.approx(0.0, abs=1e-12) and lch[2, 2] == pytest.approx(180.0)


@settings(max_examples=200, deadline=None)
@given(rgb_strategy)
def test_srgb_lab_round_trip(rgb):
    # Exact inverses (matrix, cube root, transfer function); 1e-8 in gamut is float rounding,
    # except at the IEC threshold seam (tests/conftest.py seam_tolerance, 5e-8).
    tol = seam_tolerance(rgb)
    np.testing.assert_allclose(lab_to_srgb(srgb_to_lab(rgb)), rgb, rtol=0, atol=tol)
    np.testing.assert_allclose(lch_to_srgb(srgb_to_lch(rgb)), rgb, rtol=0, atol=tol)


@settings(max_examples=200, deadline=None)
@given(rgb_strategy)
def test_lab_lch_round_trip(rgb):
    # Polar <-> Cartesian on in-gamut colours: 1e-8 (float rounding of cos/sin/atan2).
    lab = srgb_to_lab(rgb)
    np.testing.assert_allclose(lch_to_lab(lab_to_lch(lab)), lab, rtol=0, atol=1e-8)
    lch = lab_to_lch(lab)
    assert 0 <= lch[2] < 360 and lch[1] >= 0


def test_broadcasting_shape_2_2_2_2_3():
    # Vectorised over (..., 3): a seeded (2, 2, 2, 2, 3) array equals its rows one at a time.
    rgb = np.random.default_rng(3).random((2, 2, 2, 2, 3))
    lab = srgb_to_lab(rgb)
    for fn, x in ((srgb_to_lab, rgb), (srgb_to_lch, rgb), (lab_to_srgb, lab), (lab_to_lch, lab),
                  (lch_to_lab, lab_to_lch(lab)), (lch_to_srgb, lab_to_lch(lab)), (xyz_to_lab, rgb),
                  (lab_to_xyz, lab)):
        out = fn(x)
        assert out.shape == x.shape
        rows = np.array([fn(r) for r in x.reshape(-1, 3)])
        np.testing.assert_allclose(out.reshape(-1, 3), rows, rtol=0, atol=1e-12)
