"""Colour differences: CIEDE2000 against Sharma, Wu & Dalal (2005); CIE76; CAM02-UCS distance.

Tags as in /work/shared/references.md: SRC, SRC-2, CALC, MEM.
"""
from __future__ import annotations

import warnings

import colour
import numpy as np
import pytest

from compose.color.difference import delta_e_76, delta_e_2000, delta_e_cam02ucs
from tests.conftest import cam02ucs_reference

# G. Sharma, W. Wu, E. N. Dalal, "The CIEDE2000 color-difference formula: Implementation notes,
# supplementary test data, and mathematical observations", Color Res. Appl. 30(1):21-30, 2005,
# doi:10.1002/col.20070, Table 1: (pair, Lab reference, Lab sample, dE00). SRC-2: copied from
# references.md §2, read there in colour-science's test file; colour-science reproduces all 34 (2IMPL).
SHARMA_2005 = [
    ( 1, (50.0000, 2.6772, -79.7751), (50.0000, 0.0000, -82.7485), 2.0425),
    ( 2, (50.0000, 3.1571, -77.2803), (50.0000, 0.0000, -82.7485), 2.8615),
    ( 3, (50.0000, 2.8361, -74.0200), (50.0000, 0.0000, -82.7485), 3.4412),
    ( 4, (50.0000, -1.3802, -84.2814), (50.0000, 0.0000, -82.7485), 1.0000),
    ( 5, (50.0000, -1.1848, -84.8006), (50.0000, 0.0000, -82.7485), 1.0000),
    ( 6, (50.0000, -0.9009, -85.5211), (50.0000, 0.0000, -82.7485), 1.0000),
    ( 7, (50.0000, 0.0000, 0.0000), (50.0000, -1.0000, 2.0000), 2.3669),
    ( 8, (50.0000, -1.0000, 2.0000), (50.0000, 0.0000, 0.0000), 2.3669),
    ( 9, (50.0000, 2.4900, -0.0010), (50.0000, -2.4900, 0.0009), 7.1792),
    (10, (50.0000, 2.4900, -0.0010), (50.0000, -2.4900, 0.0010), 7.1792),
    (11, (50.0000, 2.4900, -0.0010), (50.0000, -2.4900, 0.0011), 7.2195),
    (12, (50.0000, 2.4900, -0.0010), (50.0000, -2.4900, 0.0012), 7.2195),
    (13, (50.0000, -0.0010, 2.4900), (50.0000, 0.0009, -2.4900), 4.8045),
    (14, (50.0000, -0.0010, 2.4900), (50.0000, 0.0010, -2.4900), 4.8045),
    (15, (50.0000, -0.0010, 2.4900), (50.0000, 0.0011, -2.4900), 4.7461),
    (16, (50.0000, 2.5000, 0.0000), (50.0000, 0.0000, -2.5000), 4.3065),
    (17, (50.0000, 2.5000, 0.0000), (73.0000, 25.0000, -18.0000), 27.1492),
    (18, (50.0000, 2.5000, 0.0000), (61.0000, -5.0000, 29.0000), 22.8977),
    (19, (50.0000, 2.5000, 0.0000), (56.0000, -27.0000, -3.0000), 31.9030),
    (20, (50.0000, 2.5000, 0.0000), (58.0000, 24.0000, 15.0000), 19.4535),
    (21, (50.0000, 2.5000, 0.0000), (50.0000, 3.1736, 0.5854), 1.0000),
    (22, (50.0000, 2.5000, 0.0000), (50.0000, 3.2972, 0.0000), 1.0000),
    (23, (50.0000, 2.5000, 0.0000), (50.0000, 1.8634, 0.5757), 1.0000),
    (24, (50.0000, 2.5000, 0.0000), (50.0000, 3.2592, 0.3350), 1.0000),
    (25, (60.2574, -34.0099, 36.2677), (60.4626, -34.1751, 39.4387), 1.2644),
    (26, (63.0109, -31.0961, -5.8663), (62.8187, -29.7946, -4.0864), 1.2630),
    (27, (61.2901, 3.7196, -5.3901), (61.4292, 2.2480, -4.9620), 1.8731),
    (28, (35.0831, -44.1164, 3.7933), (35.0232, -40.0716, 1.5901), 1.8645),
    (29, (22.7233, 20.0904, -46.6940), (23.0331, 14.9730, -42.5619), 2.0373),
    (30, (36.4612, 47.8580, 18.3852), (36.2715, 50.5065, 21.2231), 1.4146),
    (31, (90.8027, -2.0831, 1.4410), (91.1528, -1.6435, 0.0447), 1.4441),
    (32, (90.9257, -0.5406, -0.9208), (88.6381, -0.8985, -0.7239), 1.5381),
    (33, (6.7747, -0.2908, -2.4247), (5.8714, -0.0985, -2.2286), 0.6377),
    (34, (2.0776, 0.0795, -1.1350), (0.9033, -0.0636, -0.5514), 0.9082),
]


def _color_de2000(lab1, lab2, textiles=False):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return colour.difference.delta_E_CIE2000(lab1, lab2, textiles=textiles)


@pytest.mark.parametrize("pair, lab1, lab2, expected", SHARMA_2005, ids=[f"pair{r[0]}" for r in SHARMA_2005])
def test_ciede2000_sharma_table(pair, lab1, lab2, expected):
    # Published to 4 decimals: tolerance 1e-4 (rounding is at most 5e-5). Both argument orders:
    # the formula is symmetric (Sharma et al. 2005, "mathematical observations"), and pairs 7/8
    # are the same pair swapped.
    assert delta_e_2000(lab1, lab2) == pytest.approx(expected, abs=1e-4)
    assert delta_e_2000(lab2, lab1) == pytest.approx(expected, abs=1e-4)


def test_ciede2000_sharma_table_vectorised():
    # The same 34 rows as one (34, 3) array, to check the branches (hue wrap, 180 degrees, zero
    # chroma) are taken per element. Tolerance 1e-4 as above.
    lab1 = np.array([r[1] for r in SHARMA_2005])
    lab2 = np.array([r[2] for r in SHARMA_2005])
    expected = np.array([r[3] for r in SHARMA_2005])
    np.testing.assert_allclose(delta_e_2000(lab1, lab2), expected, rtol=0, atol=1e-4)
    np.testing.assert_allclose(delta_e_2000(lab2, lab1), expected, rtol=0, atol=1e-4)


def test_ciede2000_pair_14_hue_difference_of_180_degrees():
    # Sharma et al. (2005), Table 1 pair 14 (SRC-2, references.md §2): h'1 and h'2 differ by exactly
    # 180 degrees. Their rule takes the |h'1 - h'2| <= 180 branch: mean hue (h'1 + h'2)/2, dh' = +180
    # -> 4.8045. The other branch gives 4.7461 (what colour-science returns on some platforms,
    # references.md §2). Tolerance 1e-4 (4 decimals published).
    lab1, lab2 = (50.0, -0.0010, 2.4900), (50.0, 0.0010, -2.4900)
    assert delta_e_2000(lab1, lab2) == pytest.approx(4.8045, abs=1e-4)
    assert delta_e_2000(lab2, lab1) == pytest.approx(4.8045, abs=1e-4)
    assert abs(delta_e_2000(lab1, lab2) - 4.7461) > 0.05
    # Pairs 13 and 15 straddle it (dh' just below / just above 180 degrees): 4.8045 and 4.7461.
    assert delta_e_2000(lab1, (50.0, 0.0009, -2.4900)) == pytest.approx(4.8045, abs=1e-4)
    assert delta_e_2000(lab1, (50.0, 0.0011, -2.4900)) == pytest.approx(4.7461, abs=1e-4)


def test_ciede2000_symmetric_and_zero_on_identity():
    # Symmetry in argument order (Sharma et al. 2005) and dE(x, x) = 0 on random Lab pairs; CALC,
    # float rounding only: 1e-12.
    rng = np.random.default_rng(20)
    lab1 = rng.uniform([0, -128, -128], [100, 128, 128], (5000, 3))
    lab2 = rng.uniform([0, -128, -128], [100, 128, 128], (5000, 3))
    np.testing.assert_allclose(delta_e_2000(lab1, lab2), delta_e_2000(lab2, lab1), rtol=0, atol=1e-12)
    np.testing.assert_allclose(delta_e_2000(lab1, lab1), 0.0, rtol=0, atol=1e-12)


def test_ciede2000_matches_colour_science_on_random_pairs():
    # Reference library colour.difference.delta_E_CIE2000 (which reproduces Sharma's table, 2IMPL).
    # Random pairs both far apart and close together (where the G factor and hue terms dominate).
    # Independent implementations of the same formula: 1e-9.
    rng = np.random.default_rng(21)
    lab1 = rng.uniform([0, -128, -128], [100, 128, 128], (5000, 3))
    far = rng.uniform([0, -128, -128], [100, 128, 128], (5000, 3))
    near = lab1 + rng.normal(0, 1.5, (5000, 3))
    for lab2 in (far, near):
        np.testing.assert_allclose(delta_e_2000(lab1, lab2), _color_de2000(lab1, lab2), rtol=0, atol=1e-9)


def test_ciede2000_parametric_factors():
    # CIE S 014-6 parametric factors (SRC-2 for the standard number, references.md §2):
    # colour-science's textiles=True sets kL = 2, kC = kH = 1. Same formula: 1e-9.
    rng = np.random.default_rng(22)
    lab1 = rng.uniform([0, -100, -100], [100, 100, 100], (2000, 3))
    lab2 = lab1 + rng.normal(0, 5, (2000, 3))
    np.testing.assert_allclose(delta_e_2000(lab1, lab2, kL=2.0), _color_de2000(lab1, lab2, textiles=True),
                               rtol=0, atol=1e-9)
    # Doubling every weight halves the difference exactly (CALC from the formula's structure).
    np.testing.assert_allclose(delta_e_2000(lab1, lab2, 2.0, 2.0, 2.0), delta_e_2000(lab1, lab2) / 2,
                               rtol=1e-12, atol=0)


def test_ciede2000_zero_chroma_cases():
    # Sharma et al. (2005) eqs. for C'1 C'2 = 0: dh' = 0 and mean hue = h'1 + h'2. Pairs 7 and 8 of
    # Table 1 (2.3669) exercise it; here also both neutral: dE00 reduces to the lightness term
    # (CALC: L-bar = 55 -> S_L = 1 + 0.015*25/sqrt(45) = 1.0559, dE = 10/1.0559 = 9.4705).
    assert delta_e_2000((50, 0, 0), (60, 0, 0)) == pytest.approx(10 / (1 + 0.015 * 25 / np.sqrt(45)), abs=1e-12)
    assert delta_e_2000((50, 0, 0), (50, -1, 2)) == pytest.approx(2.3669, abs=1e-4)


def test_delta_e_76_matches_colour_science():
    # CIE 1976 dE*ab = Euclidean distance (CIE 15, MEM); reference colour.delta_E(method="CIE 1976"):
    # 1e-12.
    rng = np.random.default_rng(23)
    lab1 = rng.uniform([0, -100, -100], [100, 100, 100], (1000, 3))
    lab2 = rng.uniform([0, -100, -100], [100, 100, 100], (1000, 3))
    np.testing.assert_allclose(delta_e_76(lab1, lab2), colour.delta_E(lab1, lab2, method="CIE 1976"),
                               rtol=0, atol=1e-12)
    assert delta_e_76((50, 0, 0), (53, 4, 0)) == pytest.approx(5.0)  # 3-4-5 triangle, exact


def test_delta_e_cam02ucs_matches_colour_science():
    # Luo, Cui & Li (2006) dE' with K_L = 1 for CAM02-UCS is plain Euclidean distance in J'a'b'
    # (references.md §3, 2IMPL coefficients). Reference: colour-science's CIECAM02 + CAM02-UCS under
    # our sRGB viewing conditions, then colour.delta_E(method="CAM02-UCS"). Same maths: 1e-6.
    rng = np.random.default_rng(24)
    rgb1, rgb2 = rng.random((500, 3)), rng.random((500, 3))
    ref = colour.delta_E(cam02ucs_reference(rgb1), cam02ucs_reference(rgb2), method="CAM02-UCS")
    np.testing.assert_allclose(delta_e_cam02ucs(rgb1, rgb2), ref, rtol=0, atol=1e-6)


def test_delta_e_cam02ucs_red_blue_near_colorspacious():
    # CALC (references.md §3): colorspacious deltaE(red, blue) in CAM02-UCS = 84.1212 with its own
    # white (95.047/100/108.883). Ours uses the xy-derived white: library-to-library tolerance 0.02.
    assert delta_e_cam02ucs((1.0, 0.0, 0.0), (0.0, 0.0, 1.0)) == pytest.approx(84.1212, abs=0.02)


def test_broadcasting_shape_2_2_2_2_3():
    # Vectorised over (..., 3) with broadcasting against one colour: result shape (2, 2, 2, 2),
    # equal to the element-by-element values (exact: same operations).
    rng = np.random.default_rng(25)
    lab = rng.uniform([0, -80, -80], [100, 80, 80], (2, 2, 2, 2, 3))
    ref = np.array([50.0, 10.0, -20.0])
    for fn in (delta_e_2000, delta_e_76):
        out = fn(lab, ref)
        assert out.shape == (2, 2, 2, 2)
        np.testing.assert_allclose(out.ravel(), [fn(row, ref) for row in lab.reshape(-1, 3)], rtol=0, atol=1e-12)
    rgb = rng.random((2, 2, 2, 2, 3))
    out = delta_e_cam02ucs(rgb, rgb[::-1])
    assert out.shape == (2, 2, 2, 2)
    np.testing.assert_allclose(out.ravel(), [delta_e_cam02ucs(a, b) for a, b in
                                             zip(rgb.reshape(-1, 3), rgb[::-1].reshape(-1, 3))], rtol=0, atol=1e-9)
