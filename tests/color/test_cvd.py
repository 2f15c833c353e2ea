"""Colour-vision-deficiency simulation, Machado, Oliveira & Fernandes (2009).

Source: G. M. Machado, M. M. Oliveira, L. A. F. Fernandes, "A physiologically-based model for
simulation of color vision deficiency", IEEE TVCG 15(6):1291-1298, 2009, doi:10.1109/TVCG.2009.113;
precomputed matrices from the authors' supplementary page (SRC, references.md §4).
Tags: SRC, SRC-2, CALC, MEM.
"""
from __future__ import annotations

import warnings

import colorspacious
import colour
import numpy as np
import pytest
from colour.blindness.datasets.machado2010 import CVD_MATRICES_MACHADO2010

from compose.color.cvd import CVD_KINDS, cvd_matrix, simulate_cvd, simulate_cvd_linear
from compose.color.parse import to_rgb8
from tests.conftest import assert_colors_close

CS_NAMES = {"protan": "Protanomaly", "deutan": "Deuteranomaly", "tritan": "Tritanomaly"}
KINDS = sorted(CVD_KINDS)

# Severity 1.0 matrices, linear RGB column vectors (references.md §4: authors' page SRC; colour-science
# and colorspacious identical to 6 decimals, 2IMPL).
PUBLISHED = {
    "protan": [[0.152286, 1.052583, -0.204868],
               [0.114503, 0.786281, 0.099216],
               [-0.003882, -0.048116, 1.051998]],
    "deutan": [[0.367322, 0.860646, -0.227968],
               [0.280085, 0.672501, 0.047413],
               [-0.011820, 0.042940, 0.968881]],
    "tritan": [[1.255528, -0.076749, -0.178779],
               [-0.078411, 0.930809, 0.147602],
               [0.004733, 0.691367, 0.303900]],
}

# Simulated primaries at severity 1.0, sRGB 0-255 (references.md §4, CALC: decode, multiply, clip,
# encode; identical in colour-science and colorspacious).
PRIMARIES = {
    (255, 0, 0): {"protan": (108.79, 95.03, 0), "deutan": (163.22, 144.28, 0), "tritan": (255, 0, 14.89)},
    (0, 255, 0): {"protan": (255, 229.35, 0), "deutan": (238.69, 214.01, 58.44), "tritan": (0, 247.08, 216.65)},
    (0, 0, 255): {"protan": (0, 88.71, 255), "deutan": (0, 61.50, 251.48), "tritan": (0, 107.20, 149.76)},
    (230, 159, 0): {"protan": (185.05, 162.39, 0), "deutan": (201.76, 179.71, 16.84),
                    "tritan": (251.25, 139.61, 135.30)},
}


def _cs_matrix(kind: str, severity01: float) -> np.ndarray:
    with warnings.catch_warnings():  # colour-science warns on every tritanomaly call
        warnings.simplefilter("ignore")
        return colour.matrix_cvd_Machado2009(CS_NAMES[kind], severity01)


def _cs_table_interp(kind: str, severity01: float) -> np.ndarray:
    """Linear interpolation of colour-science's tabulated matrices within the 0.1 bracket."""
    table = CVD_MATRICES_MACHADO2010[CS_NAMES[kind]]
    keys = np.array(sorted(table))
    stack = np.array([table[k] for k in keys])
    return np.array([[np.interp(severity01, keys, stack[:, i, j]) for j in range(3)] for i in range(3)])


@pytest.mark.parametrize("kind", KINDS)
def test_full_severity_matrices_are_published(kind):
    # SRC (authors' supplementary page) via references.md §4; published to 6 decimals -> 1e-6.
    np.testing.assert_allclose(cvd_matrix(kind, 100.0), PUBLISHED[kind], rtol=0, atol=1e-6)
    np.testing.assert_allclose(cvd_matrix(kind), PUBLISHED[kind], rtol=0, atol=1e-6)  # default 100


@pytest.mark.parametrize("kind", KINDS)
def test_tabulated_matrices_match_colour_science(kind):
    # 2IMPL (references.md §4): colour-science's CVD_MATRICES_MACHADO2010 carries the same
    # supplementary matrices for severities 0.0, 0.1 ... 1.0; 6 decimals -> 1e-6. At the tabulated
    # severities colour.matrix_cvd_Machado2009 returns them unchanged.
    for s in range(0, 101, 10):
        key = round(s / 100, 1)  # the table's keys are the literals 0.0, 0.1, ... 1.0
        ref = CVD_MATRICES_MACHADO2010[CS_NAMES[kind]][key]
        np.testing.assert_allclose(cvd_matrix(kind, s), ref, rtol=0, atol=1e-6)
        np.testing.assert_allclose(cvd_matrix(kind, s), _cs_matrix(kind, key), rtol=0, atol=1e-6)


@pytest.mark.parametrize("kind", KINDS)
def test_interpolation_between_tabulated_severities(kind):
    # Linear interpolation within each 0.1 step, as colorspacious does (references.md §4).
    # Checked against colorspacious's machado_et_al_2009_matrix and against a plain np.interp of
    # colour-science's table (1e-12: the same arithmetic on the same 6-decimal entries).
    # Not against colour.matrix_cvd_Machado2009 off the 0.1 grid: colour-science 0.4.7 extrapolates
    # from the segment *above* the bracket there (e.g. 0.15 uses the 0.2-0.3 line; 0.95 returns the
    # 1.0 matrix), contrary to references.md's "both interpolate linearly" (CALC, checked here).
    from colorspacious.cvd import machado_et_al_2009_matrix

    for s in np.random.default_rng(50).uniform(0, 100, 40):
        m = cvd_matrix(kind, s)
        np.testing.assert_allclose(m, machado_et_al_2009_matrix(CVD_KINDS[kind], s), rtol=0, atol=1e-12)
        np.testing.assert_allclose(m, _cs_table_interp(kind, s / 100), rtol=0, atol=1e-12)


@pytest.mark.parametrize("kind", KINDS)
def test_rows_sum_to_one_and_grays_are_kept(kind):
    # CALC (references.md §4): every row of every tabulated matrix sums to 1 within 1e-6 (observed
    # exactly 1e-6 on some rows: three entries rounded to 6 decimals -> tolerance 1.5e-6), so
    # neutrals are preserved: every 8-bit grey stays itself after rounding to 8 bits.
    for s in list(range(0, 101, 10)) + [5.0, 37.5, 99.0]:
        np.testing.assert_allclose(cvd_matrix(kind, s).sum(axis=1), 1.0, rtol=0, atol=1.5e-6)
    grays = np.repeat(np.arange(256)[:, None], 3, axis=1)
    np.testing.assert_array_equal(to_rgb8(simulate_cvd(grays / 255.0, kind)), grays)
    np.testing.assert_array_equal(cvd_matrix(kind, 0.0), np.eye(3))  # severity 0: identity (SRC table)


@pytest.mark.parametrize("kind", KINDS)
def test_simulation_matches_colour_science(kind):
    # Reference library colour-science: decode with colour.models.eotf_sRGB, apply
    # colour.matrix_cvd_Machado2009 to linear RGB column vectors, clip to [0, 1], encode
    # (references.md §4, CALC). At tabulated severities: same matrices, same maths -> 1e-10 (the
    # decode thresholds 0.04045 / 0.0404499 differ by < 3e-8 only between them, no sample there).
    rng = np.random.default_rng(51)
    rgb = rng.random((2000, 3))
    for s01 in (0.3, 0.6, 1.0):
        lin = colour.models.eotf_sRGB(rgb)
        ref = colour.models.eotf_inverse_sRGB(np.clip(lin @ _cs_matrix(kind, s01).T, 0, 1))
        np.testing.assert_allclose(simulate_cvd(rgb, kind, s01 * 100), ref, rtol=0, atol=1e-10)


@pytest.mark.parametrize("kind", KINDS)
def test_simulation_matches_colorspacious_at_random_severities(kind):
    # Reference library colorspacious "sRGB1+CVD" -> "sRGB1" (applies the matrix in linear RGB,
    # references.md §4), clipped to [0, 1] (clipping encoded or linear values is the same: the
    # transfer function is monotone and fixes 0 and 1). Random colours and severities: 1e-10, and
    # in perceptual units dE00 < 1e-6.
    rng = np.random.default_rng(52)
    rgb = rng.random((500, 3))
    for s in rng.uniform(0, 100, 5):
        space = {"name": "sRGB1+CVD", "cvd_type": CVD_KINDS[kind], "severity": s}
        ref = np.clip(colorspacious.cspace_convert(rgb, space, "sRGB1"), 0, 1)
        got = simulate_cvd(rgb, kind, s)
        np.testing.assert_allclose(got, ref, rtol=0, atol=1e-10)
        assert_colors_close(got, ref, max_delta_e=1e-6)


@pytest.mark.parametrize("rgb8", sorted(PRIMARIES), ids=["blue", "green", "orange", "red"])
def test_simulated_primaries_table(rgb8):
    # CALC (references.md §4), quoted to 2 decimals on the 0-255 scale -> 5e-3 (+ rounding slack).
    rgb = np.array(rgb8) / 255.0
    for kind, expected in PRIMARIES[rgb8].items():
        np.testing.assert_allclose(simulate_cvd(rgb, kind) * 255, expected, rtol=0, atol=6e-3)


def test_output_is_displayable_and_linear_variant_agrees():
    # Our documented contract: results clipped to [0, 1]; simulate_cvd = encode(simulate_cvd_linear(
    # decode(rgb))). Exact by construction.
    from compose.color.srgb import linear_to_srgb, srgb_to_linear

    rgb = np.random.default_rng(53).random((1000, 3))
    for kind in KINDS:
        out = simulate_cvd(rgb, kind, 100.0)
        assert out.min() >= 0.0 and out.max() <= 1.0
        np.testing.assert_array_equal(out, linear_to_srgb(simulate_cvd_linear(srgb_to_linear(rgb), kind, 100.0)))


@pytest.mark.parametrize("kind, severity", [("achromat", 100.0), ("protan", -1.0), ("protan", 100.5),
                                            ("deutan", float("nan"))])
def test_bad_kind_or_severity_raises(kind, severity):
    # Our contract: a kind outside {protan, deutan, tritan} or a severity outside [0, 100] is refused.
    with pytest.raises(ValueError):
        cvd_matrix(kind, severity)


def test_broadcasting_shape_2_2_2_2_3():
    # Vectorised over (..., 3): a seeded (2, 2, 2, 2, 3) array equals its rows one at a time.
    rgb = np.random.default_rng(54).random((2, 2, 2, 2, 3))
    out = simulate_cvd(rgb, "deutan", 70.0)
    assert out.shape == rgb.shape
    rows = np.array([simulate_cvd(r, "deutan", 70.0) for r in rgb.reshape(-1, 3)])
    np.testing.assert_allclose(out.reshape(-1, 3), rows, rtol=0, atol=1e-15)
